"""Coverage trials of the uncertainty propagation: virtual shots whose true inputs differ from the stated ones.

A lab states its inputs (bar modulus, diameters, gauge distances, gauge
factors, gains, excitations, specimen length and diameter) with standard
uncertainties (``shpb.uncertainty.shot_inputs``: the bar set's, the shot's and
the documented defaults). In a trial the world differs from that statement
by a draw of each stated uncertainty: the virtual shot is simulated with the
*true* inputs (``shpb simulate``'s model: the true bars, gauges and specimen;
its recorder adds its own noise) and reduced with the *stated* ones. The 95 %
interval of the flow stress at a fixed strain, y +- U95, covers the
simulator's truth (the mean stress of the specimen's elements at that mean
strain, ``VirtualShotResult.truth``) in about 95 % of the trials when the
uncertainties are honest. Source: JCGM 101:2008, Evaluation of measurement
data - Propagation of distributions using a Monte Carlo method, §8
(validation by coverage); the simulator's truth is the wave model of
tests/test_simulate.py (d'Alembert bars, Graff 1975, ch. 2).

Two ways to run a trial:

* :func:`full_trial` simulates every trial (the benchmark,
  ``benchmarks/bench_uncertainty.py --coverage``);
* :func:`fast_trial` keeps one simulated truth and moves the *stated* inputs
  by the draws instead (stated = true - error: the same error, seen from the
  other side), with a fresh record noise each time (the CI test,
  tests/test_uncertainty.py).

Every base shot here is SYNTHETIC: the Harrow Ridge example setups (a
fictional lab and alloys, example_data/README.md).
"""

from __future__ import annotations

import dataclasses
import math
from pathlib import Path

import numpy as np

from shpb.io import Record
from shpb.reduce import reduce_shot
from shpb.setup import load_shot, with_analysis
from shpb.simulate import RodSpec, bar_rod, digitise, model_duration, trigger_time
from shpb.uncertainty import _with_inputs, flow_column, shot_inputs
from shpb.virtual import load_simulation, simulate_setup

ROOT = Path(__file__).resolve().parents[1]
EXAMPLE = ROOT / "example_data"
#: The strain at which the flow stress is checked [1] (every base shot's valid part covers it).
STRAIN = 0.05


#: A calibrated wave speed's standard uncertainty in the trials [m/s]: what the example free-end calibration
#: gives (example_data/calibration/README.md: c0 = 4872.8 +- 2.3 m/s), rounded up.
CALIBRATED_SPEED_U = 2.5


def stated_shot(name: str, calibrated: bool = True):
    """The example shot as its lab states it (example_data/shots/<name>.toml), record left to the caller.

    ``calibrated``: the bars' wave speed is a measured one (the bar set's sqrt(E/rho), stated with
    :data:`CALIBRATED_SPEED_U`), as after ``shpb calibrate free-end``; otherwise sqrt(E/rho) of the
    stated modulus, whose 1 % uncertainty then moves the waves in time.
    """
    shot = with_analysis(dataclasses.replace(load_shot(EXAMPLE / "shots" / f"{name}.toml"), record=None),
                         uncertainty=True)
    if calibrated:
        bs = shot.barset
        bars = {b: dataclasses.replace(getattr(bs, b), measured_wave_speed=getattr(bs, b).wave_speed)
                for b in ("incident", "transmitted")}
        table = {**bs.uncertainty, "both": {**bs.uncertainty.get("both", {}),
                                            "wave_speed": ("absolute", CALIBRATED_SPEED_U)}}
        shot = dataclasses.replace(shot, barset=dataclasses.replace(bs, **bars, uncertainty=table))
    return shot


def setup(name: str):
    """The simulation setup of an example shot (example_data/setups/<name>.toml)."""
    return load_simulation(EXAMPLE / "setups" / f"{name}.toml")


def draw_errors(shot, rng) -> dict:
    """One draw of every stated input's error: ``key -> true - stated`` [SI] (normal, of the stated u)."""
    return {i.key: i.u * rng.standard_normal() for i in shot_inputs(shot) if not i.key.startswith("record.")}


def _values(shot, errors, sign):
    inputs = {i.key: i for i in shot_inputs(shot)}
    return {k: inputs[k].value + sign * e for k, e in errors.items()}


def true_setup(sim, shot, errors, seed):
    """The simulation setup of the true world: the stated bar set and specimen moved by ``errors``."""
    values = _values(shot, errors, +1)
    barset, specimen = _with_inputs(shot.barset, shot.specimen, values)
    g = {b: dataclasses.replace(getattr(barset, f"{b}_gauge"), **{k: values[f"{b}.{k}"] for k in
                                                                   ("gauge_factor", "gain", "excitation")})
         for b in ("incident", "transmitted")}
    barset = dataclasses.replace(barset, incident_gauge=g["incident"], transmitted_gauge=g["transmitted"])
    sp = sim.spec.specimen
    spec = dataclasses.replace(sim.spec, incident=bar_rod(barset.incident), transmitted=bar_rod(barset.transmitted),
                               incident_gauge_distance=barset.incident_gauge.distance,
                               transmitted_gauge_distance=barset.transmitted_gauge.distance,
                               specimen=RodSpec(specimen.length, specimen.diameter, sp.modulus, sp.density, sp.law))
    recorder = dataclasses.replace(sim.recorder, seed=int(seed))
    spec = dataclasses.replace(spec, duration=model_duration(trigger_time(spec, recorder), recorder))
    return dataclasses.replace(sim, spec=spec, barset=barset, recorder=recorder)


def truth_flow_stress(result, strain=STRAIN) -> float:
    """The simulator's flow stress at a mean engineering strain [MPa], on its loading (strain rising)."""
    t = result.truth
    e, s = t["strain"].to_numpy(), t["stress_MPa"].to_numpy()
    ok = np.isfinite(e) & np.isfinite(s)
    e, s = e[ok], s[ok]
    top = int(np.argmax(e))
    return float(np.interp(strain, np.maximum.accumulate(e[: top + 1]), s[: top + 1]))


def reduced_flow_stress(result, strain=STRAIN):
    """(value, u, U95) of the flow stress at ``strain`` from a reduction's uncertainty stage [MPa]."""
    unc = result.stages.uncertainty
    s = unc.scalars.get(flow_column(strain))
    if s is None or not math.isfinite(s["value"]):
        return float("nan"), float("nan"), float("nan")
    return s["value"], s["u"], unc.coverage_factor * s["u"]


def _outcome(result, truth, strain):
    y, u, big_u = reduced_flow_stress(result, strain)
    unc = result.stages.uncertainty
    u_noise = unc.scalars[flow_column(strain)]["u_mc"] if math.isfinite(y) else float("nan")
    return {"value_MPa": y, "u_MPa": u, "U95_MPa": big_u, "truth_MPa": truth, "error_MPa": y - truth,
            "z": (y - truth) / u if u else float("nan"), "covered": abs(y - truth) <= big_u,
            "u_monte_carlo_MPa": u_noise, "valid": result.valid}


def full_trial(name: str, seed: int, draws=None, strain=STRAIN, calibrated=True) -> dict:
    """Simulate the true world of one draw and reduce it with the stated inputs."""
    rng = np.random.default_rng(seed)
    shot = stated_shot(name, calibrated)
    errors = draw_errors(shot, rng)
    virtual = simulate_setup(true_setup(setup(name), shot, errors, seed=seed + 7919))
    rec = virtual.record
    record = Record.from_arrays(rec.volts_incident, rec.volts_transmitted, time=rec.time)
    if draws is not None:
        shot = with_analysis(shot, uncertainty_draws=int(draws))
    result = reduce_shot(shot, record)
    return {"shot": name, "seed": seed, **_outcome(result, truth_flow_stress(virtual.result, strain), strain)}


class FastTrials:
    """One simulated truth of an example shot, reduced many times with stated inputs moved by draws.

    The record's clean strains at the gauges are kept; each trial makes the
    channels' volts again through the true gauges (the bridge, as the
    simulator's recorder does), adds fresh white noise of the recorder's level
    and quantises it (``shpb.simulate.digitise``).
    """

    def __init__(self, name: str, calibrated: bool = True):
        self.name = name
        self.sim = setup(name)
        self.shot = stated_shot(name, calibrated)
        self.virtual = simulate_setup(self.sim)
        self.truth = truth_flow_stress(self.virtual.result)

    def record(self, rng) -> Record:
        from shpb.bridge import bar_volts

        rec, r, bs = self.virtual.record, self.sim.recorder, self.sim.barset
        chans = []
        for i, (strain, g, bar) in enumerate(((rec.strain_incident, bs.incident_gauge, bs.incident),
                                              (rec.strain_transmitted, bs.transmitted_gauge, bs.transmitted))):
            v = bar_volts(strain, bridge=g.bridge, gauge_factor=g.gauge_factor, excitation=g.excitation,
                          gain=g.gain, polarity=g.polarity, scale=g.scale, poisson_ratio=bar.poisson_ratio)
            v = v + r.offset[i] + r.noise_volts[i] * rng.standard_normal(v.size)
            chans.append(digitise(v, r.bits, r.full_scale[i]))
        return Record.from_arrays(chans[0], chans[1], time=rec.time)

    def trial(self, seed: int, draws=None, strain=STRAIN, inflate=1.0) -> dict:
        """Reduce the truth with stated inputs = true - error (``inflate`` scales the errors: a test that the
        check fails when the stated uncertainties understate the real ones)."""
        rng = np.random.default_rng(seed)
        errors = {k: inflate * v for k, v in draw_errors(self.shot, rng).items()}
        barset, specimen = _with_inputs(self.shot.barset, self.shot.specimen, _values(self.shot, errors, -1))
        values = _values(self.shot, errors, -1)
        g = {b: dataclasses.replace(getattr(barset, f"{b}_gauge"), **{k: values[f"{b}.{k}"] for k in
                                                                       ("gauge_factor", "gain", "excitation")})
             for b in ("incident", "transmitted")}
        barset = dataclasses.replace(barset, incident_gauge=g["incident"], transmitted_gauge=g["transmitted"])
        shot = dataclasses.replace(self.shot, barset=barset, specimen=specimen)
        if draws is not None:
            shot = with_analysis(shot, uncertainty_draws=int(draws))
        result = reduce_shot(shot, self.record(rng))
        return {"shot": self.name, "seed": seed, **_outcome(result, self.truth, strain)}
