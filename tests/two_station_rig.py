"""A two-station pressure-bar rig in the wave model, for the separation and specimen tests.

Source: the wave model's bars are delay lines of their two travelling waves
(d'Alembert; Graff 1975, Wave Motion in Elastic Solids, ch. 2), so a station anywhere on a
bar is read for free: besides the gauges, each bar has a station 1 us from the
specimen face, whose waves, moved those 1 us, are the truth at the face.

Rig: 19.05 mm steel bars (E 190 GPa, rho 8000 kg/m^3, nu 0.30), both 2.0 m
long with gauges 0.3 m (main) and 0.6 m from the specimen (2 d / c0 = 123 us at
the main incident gauge), a soft polymer pulse shaper, an elastic polymer
specimen (5 mm x 10 mm, 3 GPa: most of the pulse is reflected); records of
1.2 ms at 10 MHz with 100 us before the trigger.
"""

import dataclasses
import math

import numpy as np

from shpb import pulses, separation
from shpb.io import Record
from shpb.setup import AnalysisOptions, Bar, BarSet, Gauge, Material
from shpb.simulate import (RecorderSpec, RodSpec, VirtualShotSpec, dispersed_drive, model_duration, simulate_shot,
                           trigger_time, virtual_record)

E_BAR, RHO_BAR, NU_BAR, D_BAR = 190e9, 8000.0, 0.30, 0.01905
C0 = math.sqrt(E_BAR / RHO_BAR)
LENGTH, NEAR_GAUGE, FAR_GAUGE = 2.0, 0.3, 0.6
TRUTH_STATION = C0 * 1e-6  # 1 us (ten samples at 10 MHz) from each face: the truth there
FS = 10e6
MATERIAL = Material("steel (test)", E_BAR, RHO_BAR, NU_BAR, 1900e6)
GAUGES = {name: Gauge(d, "half-bending", 2.1, 10.0, 100.0, pol, full_scale=5.0)
          for name, d, pol in (("incident", NEAR_GAUGE, 1), ("incident_2", FAR_GAUGE, 1),
                               ("transmitted", NEAR_GAUGE, -1), ("transmitted_2", FAR_GAUGE, -1))}
BARSET = BarSet("two-station rig", Bar(MATERIAL, D_BAR, LENGTH), Bar(MATERIAL, D_BAR, LENGTH), GAUGES["incident"],
                GAUGES["transmitted"], incident_stations=(GAUGES["incident_2"],),
                transmitted_stations=(GAUGES["transmitted_2"],))
SPECIMEN = RodSpec(0.005, 0.010, 3e9, 1200.0)  # elastic polymer: low impedance, a large reflected wave
SHAPER = RodSpec(0.001, 0.012, 3e9, 1200.0)
RECORDER = RecorderSpec(duration=1.2e-3, pre_trigger=100e-6, bits=None, full_scale=(None, None))


def bar(length):
    return RodSpec(length, D_BAR, E_BAR, RHO_BAR)


def barset_toml() -> str:
    """The rig's bar set as a bar set file (docs/setup-files.md: ``[[incident.gauge]]``, main station first)."""
    def stations(bar):
        return "".join(f'[[{bar}.gauge]]\ndistance = "{g.distance * 1e3:g} mm"\ngauge_factor = {g.gauge_factor}\n'
                       f'excitation = "{g.excitation:g} V"\ngain = {g.gain:g}\npolarity = {g.polarity}\n'
                       for g in BARSET.stations(bar))

    return (f'name = "{BARSET.name}"\n[bar_material]\nmodulus = "{E_BAR / 1e9:g} GPa"\n'
            f'density = "{RHO_BAR:g} kg/m^3"\npoisson_ratio = {NU_BAR}\nyield_strength = "1900 MPa"\n'
            + "".join(f'[{b}]\ndiameter = "{D_BAR * 1e3:g} mm"\nlength = "{LENGTH} m"\n{stations(b)}'
                      for b in ("incident", "transmitted")))


def virtual_shot(striker, *, dispersion=False, specimen=SPECIMEN, pulse=None, recorder=RECORDER):
    """A model run with the main gauges, the second stations and the truth stations near the faces.

    ``striker`` [m] with the shaper, or ``pulse`` (an IncidentPulse driving the incident bar, striker None).
    """
    fs = recorder.sample_rate
    spec = VirtualShotSpec(striker=None if pulse else bar(striker), incident=bar(LENGTH), transmitted=bar(LENGTH),
                           specimen=specimen, striker_speed=6.0, incident_gauge_distance=NEAR_GAUGE,
                           transmitted_gauge_distance=NEAR_GAUGE, duration=1.0, sample_rate=fs,
                           shaper=None if pulse else SHAPER, shaper_elements=4, max_time_step=1 / fs,
                           incident_stations=(FAR_GAUGE, TRUTH_STATION), transmitted_stations=(FAR_GAUGE, TRUTH_STATION),
                           incident_pulse=pulse)
    spec = dataclasses.replace(spec, duration=model_duration(trigger_time(spec, recorder), recorder))
    trigger = trigger_time(spec, recorder)
    if dispersion:  # the pulse dispersed over the incident bar drives the model; each record disperses from the faces
        run = dispersed_drive(spec, NU_BAR)
        trigger += run.incident_pulse.impact_time
        spec = dataclasses.replace(run, duration=spec.duration + run.incident_pulse.impact_time)
    return simulate_shot(spec), trigger, dispersion


def record_of(shot, recorder=RECORDER):
    """The digitised record (four channels) and the truth face waves on its sample grid."""
    result, trigger, dispersion = shot
    rec = virtual_record(result, recorder, GAUGES["incident"], GAUGES["transmitted"],
                         incident_poisson_ratio=NU_BAR, transmitted_poisson_ratio=NU_BAR,
                         dispersion="specimen" if dispersion else None, trigger=trigger,
                         station_gauges={k: GAUGES[k] for k in ("incident_2", "transmitted_2")})
    # record sample i is model sample k (the recorder keeps the model's clock)
    fs = recorder.sample_rate
    k = np.arange(rec.time.size) - round(recorder.pre_trigger * fs) + round(trigger * fs)
    grid, lag = np.arange(result.time.size), round(1e-6 * fs)
    inc, tra = result.stations["incident_3"], result.stations["transmitted_3"]
    # d'Alembert: a wave 1 us before the face (toward it) reaches the face 1 us later, a wave going away from the
    # face was there 1 us earlier
    truth = {"incident": np.interp(k - lag, grid, inc["toward_specimen"], left=0.0),
             "reflected": np.interp(k + lag, grid, inc["away_from_specimen"], left=0.0),
             "transmitted": np.interp(k + lag, grid, tra["away_from_specimen"], left=0.0)}
    record = Record.from_arrays(rec.volts_incident, rec.volts_transmitted, time=rec.time, stations=rec.volts_stations)
    return record, truth


def separation_errors(record, truth, **options):
    """RMS error of each separated face wave over the analysis window [% of the incident peak]."""
    opt = AnalysisOptions(**options)
    strains = pulses.condition_record(record, BARSET, opt)
    split = separation.separate_waves(strains, BARSET, opt)
    plan = pulses.plan_analysis(strains, BARSET, opt, **split.plan_options())
    k0, k1 = plan.span
    peak = np.max(truth["incident"])
    waves = {"incident": split.bars["incident"].toward, "reflected": split.bars["incident"].away,
             "transmitted": split.bars["transmitted"].away}
    return {k: 100 * np.sqrt(np.mean((w[k0:k1] - truth[k][k0:k1]) ** 2)) / peak for k, w in waves.items()}, split, plan
