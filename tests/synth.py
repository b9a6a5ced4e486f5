"""Ideal Kolsky-bar records with a known specimen response, for end-to-end tests.

The specimen is taken as in equilibrium at every instant and the bars as
dispersion-free, which is the classic one-dimensional analysis of Kolsky
(1949), Gray (2000, ASM Handbook Vol. 8) and Chen & Song (2011, ch. 1): with
an incident bar of modulus E_i, area A_i and wave speed c_i, a transmitted bar
of E_t, A_t, c_t, and a specimen of area A_s and length L_s, the face forces
F1 = E_i A_i (eps_i + eps_r) and F2 = E_t A_t eps_t both equal A_s sigma(e), and
the face velocities are v1 = c_i (eps_i - eps_r), v2 = c_t eps_t, so

    eps_t = A_s sigma / (E_t A_t),   eps_r = A_s sigma / (E_i A_i) - eps_i,
    de/dt = (v1 - v2) / L_s = [2 c_i eps_i - (c_i A_s/(E_i A_i) + c_t A_s/(E_t A_t)) sigma] / L_s.

With identical bars (E, A_b, c0) this is eps_r = eps_t - eps_i and
de/dt = (2 c0 / L_s) (eps_i - eps_t).

The shot files turn the dispersion correction and the low-pass off: these bars
carry every frequency without dispersion, so the yield knee of an elastic-
perfectly-plastic law stays a corner that a real bar, whose second mode starts
at a few hundred kilohertz, could not deliver (the low-pass stands for that
limit, docs/reduction.md).

The ODE is integrated with Heun's method (the explicit trapezoidal rule, a
second-order predictor-corrector) on steps of a tenth of the sample interval,
the law updated by radial return at each stage; the waves are then laid at the
gauges (incident and reflected on the incident-bar gauge, transmitted on the
transmitted-bar gauge) and turned into bridge volts with the bridge's exact
algebra. Nothing here uses the reduction code except the bridge's forward
equation (``bridge.bar_volts``), whose own check is in test_bridge.py.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np

from shpb import bridge

STEEL = dict(modulus=200e9, density=7850.0, poisson_ratio=0.29, yield_strength=1500e6)


def incident_pulse(tau, amplitude, duration, rise):
    """A trapezoid with raised-cosine rise and fall of ``rise`` seconds, starting at tau = 0."""
    tau = np.asarray(tau, dtype=float)
    out = np.zeros_like(tau)
    up = (tau >= 0) & (tau < rise)
    out[up] = 0.5 - 0.5 * np.cos(np.pi * tau[up] / rise)
    out[(tau >= rise) & (tau < duration - rise)] = 1.0
    dn = (tau >= duration - rise) & (tau < duration)
    out[dn] = 0.5 + 0.5 * np.cos(np.pi * (tau[dn] - (duration - rise)) / rise)
    return amplitude * out


class Plastic:
    """Rate-independent 1-D plasticity with linear hardening (tangent modulus ``tangent`` after yield).

    ``tangent = 0`` is elastic–perfectly-plastic. Unloading is elastic.
    """

    def __init__(self, modulus, yield_stress, tangent=0.0):
        self.E, self.sy, self.Et = modulus, yield_stress, tangent
        self.H = modulus * tangent / (modulus - tangent)  # plastic hardening modulus

    def loading_curve(self, e):
        """Monotonic-loading stress [Pa] at engineering strain ``e`` (the known answer)."""
        e = np.asarray(e, dtype=float)
        ey = self.sy / self.E
        return np.where(e <= ey, self.E * e, self.sy + self.Et * (e - ey))

    def step(self, e, ep):
        """Stress and plastic strain at total strain ``e`` from plastic strain ``ep`` (radial return)."""
        trial = self.E * (e - ep)
        ys = self.sy + self.H * ep
        if abs(trial) <= ys:
            return trial, ep
        dep = (abs(trial) - ys) / (self.E + self.H)
        ep = ep + np.sign(trial) * dep
        return self.E * (e - ep), ep


def elastic_perfectly_plastic(modulus, yield_stress):
    return Plastic(modulus, yield_stress, 0.0)


def linear_hardening(modulus, yield_stress, tangent):
    return Plastic(modulus, yield_stress, tangent)


def specimen_response(law, eps_i_fn, c0, bar_area, bar_modulus, spec_area, spec_length, t_end, h, transmitted=None):
    """Integrate the specimen strain e(t) of the ideal analysis with Heun's method; return tau, e, eps_t.

    de/dt = 2 c0/Ls (eps_i - As sigma/(E Ab)) for identical bars; with ``transmitted`` =
    (c_t, A_t, E_t) of another transmitted bar, de/dt = [2 c0 eps_i - (c0 As/(E Ab) +
    c_t As/(E_t A_t)) sigma] / Ls (module docstring), and eps_t = As sigma/(E_t A_t).

    Heun's method (Heun 1900; the explicit trapezoidal rule, a second-order
    Runge-Kutta method: Hairer, Norsett & Wanner 1993, Solving Ordinary
    Differential Equations I, section II.1; from memory): an Euler predictor,
    then the mean of the slopes at both ends of the step. The stress at each stage comes from the
    law's radial return. ``eps_i_fn`` takes an array of times [s] and returns the
    incident strain at each (vectorised: it is called once).
    """
    k = spec_area / (bar_modulus * bar_area)
    g = 2 * c0 / spec_length
    k_t = k
    if transmitted is not None:
        c_t, area_t, modulus_t = transmitted
        k_t = spec_area / (modulus_t * area_t)
        k = (c0 * k + c_t * k_t) / (2 * c0)   # de/dt = g (eps_i - k sigma) with this k
    n = int(round(t_end / h)) + 1
    tau = np.arange(n) * h
    ei = np.asarray(eps_i_fn(tau), dtype=float)
    e = np.zeros(n)
    sig = np.zeros(n)
    ep = 0.0
    for j in range(n - 1):
        r1 = g * (ei[j] - k * sig[j])                 # slope at the start of the step
        s_pred, _ = law.step(e[j] + h * r1, ep)       # Euler predictor
        r2 = g * (ei[j + 1] - k * s_pred)             # slope at the predicted end
        e[j + 1] = e[j] + 0.5 * h * (r1 + r2)         # trapezoidal corrector
        sig[j + 1], ep = law.step(e[j + 1], ep)
    return tau, e, k_t * sig


def make_shot(folder, *, law, name="synthetic", amplitude=8e-4, duration=100e-6, rise=8e-6,
              bar_d=0.02, bar_len=1.5, d_inc=0.75, d_tra=0.5, spec_d=0.01, spec_l=0.005,
              dt=0.1e-6, t_record=1.0e-3, t_trigger=100e-6, noise=2e-6, offset=0.0023,
              bridge_type="half-bending", gf=2.1, exc=10.0, gain=100.0, polarity=-1, seed=1,
              fmt="csv", analysis="", extra_bar="", bar_yield=1500e6, kill_transmitted=False, clip_volts=None,
              transmitted_bar=None, pickup_incident=None, pickup_transmitted=None):
    """Write an ideal shot (record + bar set + shot file) and return (shot path, truth dict).

    ``transmitted_bar``: a transmitted bar unlike the incident one, a dict with any of
    ``modulus`` [Pa], ``density`` [kg/m^3], ``poisson_ratio``, ``yield_strength`` [Pa] and
    ``diameter`` [m] (the rest as the incident bar); written into the bar set's
    ``[transmitted]`` table. ``pickup_incident`` / ``pickup_transmitted``: functions of the
    record time [s] giving volts added to that channel (electrical pickup on the record).
    """
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    E, rho = STEEL["modulus"], STEEL["density"]
    c0 = math.sqrt(E / rho)
    Ab, As = math.pi * bar_d**2 / 4, math.pi * spec_d**2 / 4
    tb = dict(STEEL, diameter=bar_d, yield_strength=bar_yield)
    tb.update(transmitted_bar or {})
    E_t, c_t, A_t = tb["modulus"], math.sqrt(tb["modulus"] / tb["density"]), math.pi * tb["diameter"]**2 / 4

    def eps_i_fn(t):
        return incident_pulse(t, amplitude, duration, rise)

    h = dt / 10
    t_end = duration * 1.6
    if transmitted_bar is None:
        tau, e, eps_t = specimen_response(law, eps_i_fn, c0, Ab, E, As, spec_l, t_end, h)
        eps_i = incident_pulse(tau, amplitude, duration, rise)
        eps_r = eps_t - eps_i
    else:
        tau, e, eps_t = specimen_response(law, eps_i_fn, c0, Ab, E, As, spec_l, t_end, h,
                                          transmitted=(c_t, A_t, E_t))
        eps_i = incident_pulse(tau, amplitude, duration, rise)
        eps_r = eps_t * (E_t * A_t) / (E * Ab) - eps_i        # F1 = F2: E Ab (eps_i + eps_r) = E_t A_t eps_t
    time = np.arange(int(round(t_record / dt))) * dt
    t_face0 = t_trigger + d_inc / c0
    # face time of each sample, for each wave at its gauge
    inc = np.interp(time - t_face0 + d_inc / c0, tau, eps_i, left=0, right=0)
    refl = np.interp(time - t_face0 - d_inc / c0, tau, eps_r, left=0, right=0)
    tra = np.interp(time - t_face0 - d_tra / c_t, tau, eps_t, left=0, right=0)
    rng = np.random.default_rng(seed)
    kw = dict(bridge=bridge_type, gauge_factor=gf, excitation=exc, gain=gain, polarity=polarity,
              poisson_ratio=STEEL["poisson_ratio"])
    v_inc = bridge.bar_volts(inc + refl, **kw) + offset + noise * gain * exc * rng.standard_normal(time.size) / 4
    v_tra = bridge.bar_volts(tra, **dict(kw, poisson_ratio=tb["poisson_ratio"])) - offset \
        + noise * gain * exc * rng.standard_normal(time.size) / 4
    if kill_transmitted:
        v_tra = noise * gain * exc * rng.standard_normal(time.size) / 4
    if clip_volts is not None:
        v_inc = np.clip(v_inc, -clip_volts, clip_volts)
    if pickup_incident is not None:
        v_inc = v_inc + pickup_incident(time)
    if pickup_transmitted is not None:
        v_tra = v_tra + pickup_transmitted(time)
    if fmt == "csv":
        rec = folder / f"{name}.csv"
        with open(rec, "w") as fh:
            fh.write("Instrument,Fictional Scope Co. DSO-9\nSample interval,1.0E-07\n\n")
            fh.write("TIME,CH1,CH2\n")
            np.savetxt(fh, np.column_stack([time, v_inc, v_tra]), delimiter=",", fmt="%.7e")
        record = f'file = "{rec.name}"\nincident = "CH1"\ntransmitted = "CH2"\ntime = "TIME"\n'
    else:
        rec = folder / f"{name}.npz"
        np.savez(rec, ch1=v_inc, ch2=v_tra)
        record = f'file = "{rec.name}"\nincident = "ch1"\ntransmitted = "ch2"\nsample_interval = "{dt * 1e6} us"\n'
    gauge = (f'bridge = "{bridge_type}"\ngauge_factor = {gf}\nexcitation = "{exc} V"\ngain = {gain}\n'
             f'polarity = {polarity}\n')
    own_material = "" if transmitted_bar is None else (
        f'modulus = "{E_t / 1e9} GPa"\ndensity = "{tb["density"]} kg/m^3"\npoisson_ratio = {tb["poisson_ratio"]}\n'
        f'yield_strength = "{tb["yield_strength"] / 1e6} MPa"\n')
    (folder / "bars.toml").write_text(
        f'name = "synthetic test rig"\n[bar_material]\nname = "steel"\nmodulus = "{E / 1e9} GPa"\n'
        f'density = "{rho} kg/m^3"\npoisson_ratio = {STEEL["poisson_ratio"]}\n'
        f'yield_strength = "{bar_yield / 1e6} MPa"\n'
        f'[incident]\ndiameter = "{bar_d * 1e3} mm"\nlength = "{bar_len} m"\n{extra_bar}'
        f'[incident.gauge]\ndistance = "{d_inc * 1e3} mm"\n{gauge}'
        f'[transmitted]\ndiameter = "{tb["diameter"] * 1e3} mm"\nlength = "{bar_len} m"\n{own_material}'
        f'[transmitted.gauge]\ndistance = "{d_tra * 1e3} mm"\n{gauge}')
    shot = folder / f"{name}.toml"
    shot.write_text(
        f'name = "{name}"\nbarset = "bars.toml"\n[specimen]\nlength = "{spec_l * 1e3} mm"\n'
        f'diameter = "{spec_d * 1e3} mm"\nmaterial = "test alloy (fictional)"\n'
        f'[record]\n{record}[analysis]\ndispersion = false\nlowpass = false\n{analysis}')
    truth = {"tau": tau, "strain": e, "stress": eps_t * E_t * A_t / As, "eps_i": eps_i, "eps_r": eps_r,
             "eps_t": eps_t, "c0": c0, "c_t": c_t, "t_face0": t_face0}
    return shot, truth
