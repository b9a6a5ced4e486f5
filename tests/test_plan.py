"""Checks of the planning physics (shpb.plan) against outside results.

Each check names its source: the Davies & Hunter (1963) length, the striker
relations (Kolsky 1953; Graff 1975), the equilibrium Kolsky relations
(Kolsky 1949), closed-form solutions of the pulse-shaper model's equation
(Frew, Forrestal & Chen 2002, the model as recalled: from memory), the
independent wave model of shpb.simulate (a consistency check of the
shaper model's assumptions), and the reduction's own window rules.

Frew, Forrestal & Chen (2002) could not be read in this session: their
worked examples are not reproduced number for number. The shaper model is
checked against exact solutions of its equation, against the trends the
paper reports (from memory), and against a wave model that keeps what the
paper's model leaves out (the disc's inertia and elasticity).
"""

import dataclasses
import math

import numpy as np
import pytest

from shpb.calibrate import striker_incident_strain
from shpb.errors import InputError
from shpb.plan import (Constraints, FlowTable, MaterialEstimate, Rig, ShaperStock, Target, adjust_design,
                       davies_hunter_ratio,
                       design_shot, diameter_after, dispersion_severity, flow_table, incident_strain_for_rate,
                       inertia_stress, pulse_timing, record_needs, sample_rate_needed, shaper_pulse,
                       specimen_response, window_check)
from shpb.pulses import plan_window
from shpb.simulate import FlowStressLaw, JohnsonCookLaw, PerfectlyPlastic, RodSpec, TrueStressLaw, VirtualShotSpec, \
    incident_pulse

# Maraging-type steel bars, round values (common practice): E = 190 GPa, rho = 8000 kg/m^3,
# c0 = sqrt(E/rho) = 4873.4 m/s (Kolsky 1949), 19.05 mm diameter.
E_BAR, RHO_BAR, D_BAR = 190e9, 8000.0, 0.01905
C0 = math.sqrt(E_BAR / RHO_BAR)
BAR = RodSpec(1.0, D_BAR, E_BAR, RHO_BAR)
Z_BAR = RHO_BAR * C0 * math.pi * D_BAR**2 / 4  # rho c0 A = 11,110 kg/s


def rig(incident=1.0, transmitted=0.8, gauges=(0.5, 0.3), yield_strength=1900e6):
    return Rig(RodSpec(incident, D_BAR, E_BAR, RHO_BAR), RodSpec(transmitted, D_BAR, E_BAR, RHO_BAR), gauges[0],
               gauges[1], 0.30, yield_strength, RodSpec(0.2, D_BAR, E_BAR, RHO_BAR))


def table_of(function, **kw):
    """A rate-free flow table of ``function(plastic_strain) -> Pa``."""
    return flow_table(FlowStressLaw(lambda e, r: function(np.asarray(e))), **kw)


# --------------------------------------------------------------------------- specimen geometry
@pytest.mark.parametrize("nu, expected", [(0.25, 0.433013), (0.30, 0.474342), (0.33, 0.497494), (0.5, 0.612372)])
def test_davies_hunter_ratio(nu, expected):
    # Davies & Hunter (1963), J. Mech. Phys. Solids 11:155: least inertia error at L/D = sqrt(3 nu)/2;
    # computed by hand: sqrt(0.75)/2, sqrt(0.9)/2, sqrt(0.99)/2, sqrt(1.5)/2.
    assert davies_hunter_ratio(nu) == pytest.approx(expected, abs=1e-6)


def test_davies_hunter_ratio_refuses_an_impossible_poisson_ratio():
    with pytest.raises(InputError, match="Poisson"):
        davies_hunter_ratio(0.6)


def test_inertia_stress_vanishes_at_the_davies_hunter_ratio():
    # Davies & Hunter (1963) (from memory): inertia term rho (L^2/6 - nu D^2/8) d2e/dt2. Computed by hand for
    # rho = 2800 kg/m^3, L = 5 mm, D = 10 mm, nu = 0.3, d2e/dt2 = 1e9 1/s^2:
    # 2800 x (25e-6/6 - 0.3 x 100e-6/8) x 1e9 = 2800 x 4.1667e-7 x 1e9 = 1.1667 MPa.
    assert inertia_stress(2800.0, 5e-3, 10e-3, 0.3, 1e9) == pytest.approx(1.16667e6, rel=1e-4)
    d = 10e-3
    assert abs(inertia_stress(2800.0, davies_hunter_ratio(0.3) * d, d, 0.3, 1e9)) < 1e-6
    # a squat specimen: the radial term wins and the sign turns
    assert inertia_stress(2800.0, 2e-3, 10e-3, 0.3, 1e9) < 0


def test_diameter_after_compression_at_constant_volume():
    # volume constancy (common practice): D L = const per area -> D1 = D0 / sqrt(1 - e); 10 mm at e = 0.19 ->
    # 10 / 0.9 = 11.111 mm (computed by hand)
    assert diameter_after(10e-3, 0.19) == pytest.approx(11.1111e-3, rel=1e-5)


# --------------------------------------------------------------------------- Kolsky relations
def test_incident_strain_for_rate_is_reflected_plus_transmitted_part():
    # Kolsky (1949) in equilibrium, identical bars: de/dt = -2 c0 eps_r / L_s, eps_t = F / (E A), and
    # eps_i + eps_r = eps_t, so eps_i = de/dt L_s / (2 c0) + F / (E A). Computed by hand: 2000 1/s, L_s = 5 mm,
    # F = 300 MPa x pi (4 mm)^2 = 15,080 N: 2000 x 0.005 / (2 x 4873.4) = 1.0260e-3 and
    # 15,080 / (190e9 x 2.8502e-4) = 2.7846e-4, sum 1.3045e-3.
    force = 300e6 * math.pi * 0.004**2
    assert incident_strain_for_rate(2000.0, 0.005, force, BAR) == pytest.approx(1.3045e-3, rel=2e-4)


def test_matched_striker_gives_v_over_2c0_for_2L_over_c0():
    # Kolsky (1953), Stress Waves in Solids, ch. 3; Graff (1975), ch. 2: a striker of the bar's material and
    # diameter at v sends eps = v / (2 c0) for 2 L / c0, then nothing. v = 10 m/s, L = 0.2 m:
    # 10 / 9746.8 = 1.0260e-3 for 82.07 us (computed by hand).
    striker = RodSpec(0.2, D_BAR, E_BAR, RHO_BAR)
    pulse = shaper_pulse(10.0, striker, BAR, dt=0.05e-6)
    eps = pulse.force / (E_BAR * BAR.area)
    t = pulse.time
    assert np.allclose(eps[t < 81.5e-6], 1.0260e-3, rtol=1e-4)
    assert np.all(eps[t > 82.5e-6] == 0.0)
    assert eps[0] == pytest.approx(striker_incident_strain(10.0, C0), rel=1e-12)


def test_heavier_striker_steps_down_by_the_impedance_ratio():
    # Graff (1975), ch. 2 (impact of rods): a striker of impedance Zs = 2 Zb first sends (v/c) Zs/(Zs+Zb)
    # = (2/3) v/c, then steps of ratio (Zs - Zb)/(Zs + Zb) = 1/3 every 2 L/c0 (computed by hand).
    striker = RodSpec(0.2, D_BAR * math.sqrt(2.0), E_BAR, RHO_BAR)
    pulse = shaper_pulse(10.0, striker, BAR, dt=0.05e-6)
    eps = pulse.force / (E_BAR * BAR.area)
    period = 2 * 0.2 / C0
    first = 10.0 / C0 * 2.0 / 3.0
    for k in range(3):
        inside = (pulse.time > k * period + 1e-6) & (pulse.time < (k + 1) * period - 1e-6)
        assert np.allclose(eps[inside], first / 3.0**k, rtol=1e-6)
    assert first == pytest.approx(striker_incident_strain(10.0, C0, striker.impedance, BAR.impedance), rel=1e-12)


def test_lighter_striker_rebounds_after_one_pulse():
    # Graff (1975), ch. 2: Zs = Zb / 2 sends (v/c)(1/3) for 2 L / c0 and then separates (the step ratio
    # (Zs - Zb)/(Zs + Zb) = -1/3 would be tension, which a contact cannot carry).
    striker = RodSpec(0.2, D_BAR / math.sqrt(2.0), E_BAR, RHO_BAR)
    pulse = shaper_pulse(10.0, striker, BAR, dt=0.05e-6)
    eps = pulse.force / (E_BAR * BAR.area)
    assert np.allclose(eps[pulse.time < 81.5e-6], 10.0 / C0 / 3.0, rtol=1e-6)
    assert pulse.time[-1] < 83e-6 and eps[-1] == 0.0


# --------------------------------------------------------------------------- the pulse-shaper model
def test_linear_hardening_shaper_rises_exponentially():
    # The shaper model's equation (Frew, Forrestal & Chen 2002, as recalled): h de/dt = V0 - F (1/Zs + 1/Zb),
    # F = A sigma(e). For sigma = K e it is linear: F(t) = (V0 / C)(1 - exp(-t / tau)), tau = h / (C A K),
    # C = 2 / Z for a matched striker (exact solution of the first-order ODE), until the striker's echo at
    # 2 L / c0. h = 1 mm, A = pi (6 mm)^2 / 4, K = 3 GPa -> tau = 1e-3 / (1.8002e-4 x 2.8274e-5 x 3e9) = 65.5 us.
    K, d, h = 3e9, 0.006, 1e-3
    striker = RodSpec(0.4, D_BAR, E_BAR, RHO_BAR)
    shaper = RodSpec(h, d, 120e9, 8900.0)
    pulse = shaper_pulse(10.0, striker, BAR, shaper, table_of(lambda e: K * e), dt=0.02e-6)
    C = 2.0 / Z_BAR
    tau = h / (C * shaper.area * K)
    assert tau == pytest.approx(65.5e-6, rel=2e-3)
    early = pulse.time < 2 * 0.4 / C0 - 1e-6
    expected = 10.0 / C * (1.0 - np.exp(-pulse.time[early] / tau))
    assert np.allclose(pulse.force[early], expected, rtol=0, atol=1e-3 * expected.max())


def test_perfectly_plastic_shaper_caps_the_force():
    # Same equation with a constant flow stress (no area growth): F = A sigma_y while the disc flows, and its
    # strain grows linearly, e(t) = (V0 - C A sigma_y) t / h (exact). A = pi (6 mm)^2 / 4, sigma_y = 300 MPa:
    # F = 8482 N (eps = F / (E A_b) = 1.566e-4, below the direct-impact 1.026e-3 of 10 m/s).
    h = 1e-3
    striker = RodSpec(0.2, D_BAR, E_BAR, RHO_BAR)
    shaper = RodSpec(h, 0.006, 120e9, 8900.0)
    # followed over the striker's first period only (the disc keeps flowing after it and would be crushed)
    pulse = shaper_pulse(10.0, striker, BAR, shaper, table_of(lambda e: np.full(e.shape, 300e6)), dt=0.05e-6,
                         max_time=80e-6)
    first = pulse.time < 2 * 0.2 / C0 - 1e-6
    assert np.allclose(pulse.force[first], 300e6 * shaper.area, rtol=1e-12)
    slope = (10.0 - 2.0 / Z_BAR * 300e6 * shaper.area) / h
    assert np.allclose(pulse.plastic_strain[first], slope * pulse.time[first], rtol=1e-9, atol=1e-12)


def test_shaper_trends_reported_by_frew_et_al():
    # Frew, Forrestal & Chen (2002) (from memory): a thicker disc ramps the pulse more slowly and stretches
    # it; a wider disc rises more steeply and higher; the pulse never exceeds the direct impact's v / (2 c0).
    law = TrueStressLaw(JohnsonCookLaw(60e6, 350e6, 0.35, 0.0, 1.0), 120e9)
    table = flow_table(law, max_strain=0.99)
    striker = RodSpec(0.2, D_BAR, E_BAR, RHO_BAR)

    def timing(d, h, v=10.0):
        p = shaper_pulse(v, striker, BAR, RodSpec(h, d, 120e9, 8900.0), table)
        out = pulse_timing(p.time, p.force / (E_BAR * BAR.area))
        out["at_10us"] = float(np.interp(10e-6, p.time, p.force / (E_BAR * BAR.area)))
        return out

    thin, thick = timing(0.009, 0.4e-3), timing(0.009, 1.2e-3)
    assert thick["rise_time_s"] > 1.2 * thin["rise_time_s"] and thick["duration_s"] > thin["duration_s"]
    narrow, wide = timing(0.006, 0.8e-3), timing(0.012, 0.8e-3)
    assert wide["at_10us"] > narrow["at_10us"] and wide["peak"] > narrow["peak"]
    assert wide["rise_time_s"] < narrow["rise_time_s"]
    for t in (thin, thick, narrow, wide):
        assert t["peak"] <= 10.0 / (2 * C0) * (1 + 1e-9)


def test_shaper_model_against_the_wave_model():
    # What the shaper model leaves out (Frew, Forrestal & Chen 2002: no inertia, no elasticity of the disc) is
    # kept by the one-dimensional wave model of shpb.simulate (an independent computation: a staggered-grid
    # elastic-plastic disc between Courant-1 rods). A 12 mm x 1.5 mm copper-like disc, 0.2 m striker at
    # 20 m/s: the two pulses agree within 3 % rms of the peak, and in impulse within 2 %.
    law = TrueStressLaw(JohnsonCookLaw(60e6, 350e6, 0.35, 0.0, 1.0), 120e9)
    striker = RodSpec(0.2, D_BAR, E_BAR, RHO_BAR)
    shaper = RodSpec(1.5e-3, 0.012, 120e9, 8900.0, law)
    bar = RodSpec(1.0, D_BAR, E_BAR, RHO_BAR)
    spec = VirtualShotSpec(striker=striker, incident=bar, transmitted=None, specimen=None, striker_speed=20.0,
                           incident_gauge_distance=0.5, transmitted_gauge_distance=0.0, duration=1e-3,
                           sample_rate=10e6, shaper=shaper, shaper_elements=4)
    wave = incident_pulse(spec)
    t = np.arange(wave.strain.size) * wave.dt - wave.impact_time
    model = shaper_pulse(20.0, striker, bar, shaper, flow_table(law, max_strain=0.99))
    eps = np.interp(t, model.time, model.force / (E_BAR * bar.area), left=0.0, right=0.0)
    peak = wave.strain.max()
    assert np.sqrt(np.mean((eps - wave.strain) ** 2)) < 0.03 * peak
    after = t >= 0
    assert np.trapezoid(eps[after], t[after]) == pytest.approx(np.trapezoid(wave.strain[after], t[after]), rel=0.02)


# --------------------------------------------------------------------------- the specimen in equilibrium
def test_perfectly_plastic_specimen_under_a_flat_pulse_deforms_at_the_kolsky_rate():
    # Kolsky (1949), classic form: de/dt = -2 c0 eps_r / L_s, eps_r = eps_t - eps_i, eps_t = sigma A_s / (E A_b).
    # eps_i = 1.5e-3, sigma_y = 300 MPa, 8 mm x 4 mm: eps_t = 300e6 x 5.0265e-5 / (190e9 x 2.8502e-4) = 2.7846e-4,
    # de/dt = 2 x 4873.4 x (1.5e-3 - 2.7846e-4) / 0.004 = 2976.3 1/s (computed by hand). No acceleration on
    # the plateau: R = 0 there.
    dt = 0.1e-6
    t = np.arange(2000) * dt
    eps_i = np.where(t < 150e-6, 1.5e-3, 0.0)
    spec = RodSpec(0.004, 0.008, 70e9, 2800.0)
    out = specimen_response(t, eps_i, spec, table_of(lambda e: np.full(e.shape, 300e6)), BAR)
    plateau = (t > 5e-6) & (t < 145e-6)
    assert np.allclose(out["strain_rate"][plateau], 2976.3, rtol=2e-4)
    assert np.allclose(out["strain_transmitted"][plateau], 2.7846e-4, rtol=2e-4)
    assert np.all(np.abs(out["equilibrium_ratio"][plateau]) < 1e-9)


def test_a_rising_rate_unbalances_the_faces_by_the_specimen_inertia():
    # Momentum balance of a uniformly deforming specimen (the axial inertia of Davies & Hunter 1963): with the
    # force constant (perfectly plastic) F1 - F2 = rho A L (L d2e/dt2 / 2), so R = rho L^2 d2e/dt2 / (2 sigma).
    # eps_i rising at s = 20 1/s gives d2e/dt2 = 2 c0 s / L; then R = rho L c0 s / sigma. 8900 kg/m^3, L = 5 mm,
    # sigma = 200 MPa: R = 8900 x 0.005 x 4873.4 x 20 / 200e6 = 0.02169 (computed by hand).
    dt = 0.1e-6
    t = np.arange(1000) * dt
    eps_i = 1.0e-3 + 20.0 * t
    spec = RodSpec(0.005, 0.008, 120e9, 8900.0)
    out = specimen_response(t, eps_i, spec, table_of(lambda e: np.full(e.shape, 200e6)), BAR)
    middle = (t > 10e-6) & (t < 90e-6)
    assert np.allclose(out["equilibrium_ratio"][middle], 0.02169, rtol=2e-3)


# --------------------------------------------------------------------------- record, window, dispersion
def test_window_check_follows_the_reductions_rules():
    # The reduction's rules (common practice): incident and reflected waves must not overlap at the incident
    # gauge (a pulse shorter than 2 d_i / c0 = 2 x 0.5 / 4873.4 = 205.2 us), the far-end echo of the
    # transmitted bar must not reach its gauge during the pulse (2 (0.8 - 0.3) / c0 = 205.2 us), and the
    # automatic window (0.97 x 205.2 us less the lead) must hold the pulse and its taper.
    r = rig()
    ok = window_check(100e-6, r, 1e-7)
    assert ok["fits"] and ok["overlap_limit_s"] == pytest.approx(205.2e-6, rel=1e-3)
    assert ok["echo_limit_s"] == pytest.approx(205.2e-6, rel=1e-3)
    long = window_check(195e-6, r, 1e-7)  # no overlap, but longer than the window
    assert long["overlap_free"] and not long["window_holds_pulse"] and not long["fits"]
    assert not window_check(210e-6, r, 1e-7)["overlap_free"]


def test_record_needs_hold_the_reductions_whole_window():
    # Consistency with the reduction's window rule (shpb.pulses.plan_window): a record of the planned length,
    # triggered on the incident gauge, does not cut the automatic window; one 10 % shorter does.
    r = rig()
    dt, duration = 1e-7, 100e-6
    need = record_needs(duration, r, dt)
    common = dict(incident_gauge_distance=0.5, incident_wave_speed=C0, incident_length=1.0,
                  transmitted_gauge_distance=0.3, transmitted_wave_speed=C0, transmitted_length=0.8)
    pre = need["pre_trigger_s"]
    full = plan_window(pre / dt, duration, dt, 0.0, need["record_length_s"], **common)
    short = plan_window(pre / dt, duration, dt, 0.0, pre + 0.9 * (need["record_length_s"] - pre), **common)
    assert full.source == "automatic" and "cut" in short.source


@pytest.mark.parametrize("rise, duration, transit, expected", [
    (10e-6, 100e-6, 1e-6, 5e6),    # 5 per transit -> 5 MHz; 25 per rise -> 2.5; 500 per pulse -> 5
    (10e-6, 100e-6, 0.4e-6, 20e6),  # 5 / 0.4 us = 12.5 MHz -> the next standard rate, 20 MHz
    (2e-6, 300e-6, 1e-6, 20e6),    # 25 / 2 us = 12.5 MHz -> 20 MHz
])
def test_sample_rate_rules(rise, duration, transit, expected):
    # common practice, worked by hand: the strictest of the three rules, rounded up to a standard rate
    assert sample_rate_needed(rise, duration, transit)["sample_rate_Hz"] == expected


def test_dispersion_severity_grows_as_the_rise_shortens():
    # Pochhammer-Chree (Bancroft 1941): the shorter the rise, the higher its frequencies and the more they lag
    # over the gauge distance; a step is the worst case.
    a, d = D_BAR / 2, 0.9
    slow, fast = (dispersion_severity(r, a, C0, 0.3, d) for r in (50e-6, 2e-6))
    assert slow["severity"] == "low" and fast["delay_over_rise"] > slow["delay_over_rise"]
    assert fast["phase_velocity_ratio"] < slow["phase_velocity_ratio"] < 1.0
    assert dispersion_severity(0.0, a, C0, 0.3, d)["severity"] == "high"


# --------------------------------------------------------------------------- the design
def constraints(**kw):
    base = dict(strikers=(0.1, 0.15, 0.2, 0.25, 0.3), speed_range=(3.0, 40.0), specimen_diameters=(6e-3, 8e-3, 10e-3))
    base.update(kw)
    return Constraints(**base)


def test_unshaped_design_follows_the_kolsky_relations():
    # Kolsky (1949) with a matched striker (Kolsky 1953): under an incident plateau eps_i = v / (2 c0), a
    # perfectly plastic specimen deforms at de/dt = (2 c0 eps_i - F (1/Z_i + 1/Z_t)) / L_s, F = sigma A_s; so the
    # classic speed for a rate r is v = 2 c0 (r L_s / (2 c0) + sigma A_s / (E A_b)). E.g. a 10 mm specimen,
    # L = 10 x sqrt(0.99)/2 = 4.97 mm (Davies & Hunter 1963), 400 MPa, 2500 1/s: v = 18.08 m/s (by hand).
    # The design's forecast rides on the dispersed plateau's ripples (averaged over the middle of the pulse:
    # 3 %) and its mean over the valid part includes the rounded rise, so the design's speed is at least the
    # classic one (and within 20 % of it).
    mat = MaterialEstimate("alloy", 70e9, 2800.0, 0.33, PerfectlyPlastic(400e6))
    design = design_shot(Target("alloy", 2500.0, 0.2), mat, rig(), constraints())
    s, p = design.spec, design.prediction
    assert s.shaper is None
    assert s.specimen.length / s.specimen.diameter == pytest.approx(math.sqrt(0.99) / 2, abs=2e-3)
    force = 400e6 * s.specimen.area
    kolsky = (s.striker_speed - force * 2 / Z_BAR) / s.specimen.length
    middle = (p.time > 0.2 * p.timing["duration_s"]) & (p.time < 0.8 * p.timing["duration_s"])
    assert np.mean(p.strain_rate[middle]) == pytest.approx(kolsky, rel=0.03)
    classic = 2 * C0 * (2500.0 * s.specimen.length / (2 * C0) + force / (E_BAR * BAR.area))
    assert classic * 0.999 <= s.striker_speed <= 1.2 * classic
    assert p.mean_rate == pytest.approx(2500.0, rel=0.02)
    # safety numbers: elastic impact stress rho c0 v / 2 and striker energy rho A L v^2 / 2 (Kolsky 1953)
    sf = design.safety
    assert sf["incident_bar_stress_MPa"] == pytest.approx(RHO_BAR * C0 * s.striker_speed / 2e6, rel=1e-9)
    mass = RHO_BAR * BAR.area * s.striker.length
    assert sf["striker_kinetic_energy_J"] == pytest.approx(0.5 * mass * s.striker_speed**2, rel=1e-9)


CU = ShaperStock("cu", 120e9, 8900.0, TrueStressLaw(JohnsonCookLaw(60e6, 350e6, 0.35, 0.0, 1.0), 120e9),
                 diameters=(0.009, 0.012), thickness_range=(0.4e-3, 1.5e-3))


@pytest.fixture(scope="module")
def shaped_design():
    law = TrueStressLaw(JohnsonCookLaw(90e6, 290e6, 0.31, 0.025, 1e-3), 120e9)
    mat = MaterialEstimate("alloy", 120e9, 8900.0, 0.34, law, uncertainty=0.15)
    return design_shot(Target("alloy", 2500.0, 0.2), mat, rig(), constraints(shapers=(CU,)))


def test_shaped_design_meets_its_targets_within_every_limit(shaped_design):
    # the forecast of the chosen design (equilibrium Kolsky relations; the reduction's own judging rules)
    d = shaped_design
    p, s, c = d.prediction, d.spec, constraints()
    assert p.mean_rate == pytest.approx(2500.0, rel=0.02)
    assert p.final_strain == pytest.approx(0.2, rel=0.1)
    assert p.in_equilibrium and d.feasible and not d.notes
    assert s.shaper is not None and 0.4e-3 <= s.shaper.length <= 1.5e-3
    assert s.striker.length in c.strikers and c.speed_range[0] <= s.striker_speed <= c.speed_range[1]
    assert s.specimen.length / s.specimen.diameter == pytest.approx(davies_hunter_ratio(0.34), abs=2e-3)
    assert diameter_after(s.specimen.diameter, 0.2) <= D_BAR
    assert d.record["window"]["fits"] and d.safety["peak_fraction_of_yield"] < 0.8
    lo, hi = d.band["rate_range"]
    assert lo < p.mean_rate * 1.0001 and hi > p.mean_rate * 0.9999 and hi > lo


def test_design_notes_a_target_the_gun_cannot_reach():
    mat = MaterialEstimate("alloy", 70e9, 2800.0, 0.33, PerfectlyPlastic(400e6))
    design = design_shot(Target("alloy", 2500.0, 0.2), mat, rig(), constraints(speed_range=(3.0, 8.0)))
    assert not design.feasible and any("speed" in n or "stock" in n for n in design.notes)


def test_flow_table_reads_the_law():
    # the table interpolates the law it was built from (bilinear in strain and log rate)
    law = JohnsonCookLaw(300e6, 400e6, 0.4, 0.01, 1e-3)
    table = flow_table(law)
    e, r = np.array([0.013, 0.2, 0.5]), np.array([3e2, 2.5e3, 7e4])
    assert np.allclose(table(e, r), law.flow_stress(e, r), rtol=2e-3)
    assert isinstance(table.scaled(1.1), FlowTable)
    assert np.allclose(table.scaled(1.1)(e, r), 1.1 * table(e, r))
    assert dataclasses.is_dataclass(table)


def test_adjustment_steps_the_speed_by_the_models_slope(shaped_design):
    # A Newton step (the preview's value, the models' slope): a preview that reached 90 % of the target rate
    # (and 92 % of the strain, which the faster shot brings back) means the models overestimate the rate by
    # 1/0.9; the step aims their rate at target / 0.9, at a higher speed, keeping striker, specimen and shaper
    # disc. (Had the strain been on target, the step would balance the two misses instead.)
    d = shaped_design
    target = d.target
    new = adjust_design(d, 0.9 * target.strain_rate, 0.92 * target.strain, rig(), constraints(shapers=(CU,)))
    assert new.spec.striker_speed > d.spec.striker_speed
    assert new.prediction.mean_rate == pytest.approx(target.strain_rate / 0.9, rel=0.03)
    assert (new.spec.striker.length, new.spec.specimen, new.spec.shaper.diameter) == \
        (d.spec.striker.length, d.spec.specimen, d.spec.shaper.diameter)
    # a preview on target: nothing to change
    same = adjust_design(d, d.prediction.mean_rate, d.prediction.final_strain, rig(), constraints(shapers=(CU,)))
    assert same.spec.striker_speed == pytest.approx(d.spec.striker_speed, rel=0.005)
