"""The robustness trials: virtual shots with the faults a lab's records and setups really have.

Each trial is a virtual shot made by ``shpb simulate`` (``shpb.virtual``) with
one fault put in, and the verdict an honest reducer must give:

* ``valid``: a sound shot (noise, drift, hum, spikes, a short hand window, ...):
  the reduction must call it valid (warnings allowed);
* ``warning``: a wrong setup whose error is small: at least a warning naming the
  likely cause;
* ``error``: a wrong setup or spoilt data: not valid (an error flag, or the
  reduction refuses the record), naming the likely cause.

The base shots cost nothing: the twelve example shots (``example_data/``) are
virtual shots of the fictional Harrow Ridge laboratory made by ``shpb
simulate``, with their truth tables. Most faults are put into their records
(noise, drift, hum, spikes, flat tops) or their setups (gains, bridges,
polarities, channels, distances, lengths, wave speeds). Three trials need a
rig of their own, simulated here once on a small fictional rig: a near-
overlapping pulse (its reflected wave returns 7 us after the incident one
ends), the same shot's sharp rise with noise, and a soft specimen that never
reaches equilibrium.

Sources: as tests/test_robustness.py (the wave model after Graff 1975, ch. 2, and Bancroft 1941; the
Kolsky relations, Kolsky 1949); the faults and the verdicts they deserve are common practice.

Used by tests/test_robustness.py (one test per trial) and by
scripts/robustness_report.py (the confusion table and the accuracy figures in
docs/verdicts.md).
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable, Optional

import numpy as np
import pandas as pd

from shpb.errors import AnalysisError
from shpb.io import Record, read_record
from shpb.reduce import reduce_shot
from shpb.setup import load_shot, with_analysis

ROOT = Path(__file__).resolve().parents[1]
EXAMPLE = ROOT / "example_data"
#: The base shots: an aluminium-like alloy at 2500 1/s (the README's example) and the copper-like alloy at
#: 5000 1/s (the shot whose equilibrium 1 % noise used to break).
BASES = ("HR-A61-2500-a", "HR-C10-5000-a")

# ---------------------------------------------------------------------------------------------- own rigs
def small_rig(incident_gauge_mm: float) -> str:
    """A small fictional rig for the trials that need a shot of their own: the example bar set
    (configs/example_bars.toml) with short bars (0.8 m / 0.6 m, gauges at ``incident_gauge_mm`` and 200 mm) and a
    0.24 m striker, so a simulation is cheap."""
    text = (ROOT / "configs" / "example_bars.toml").read_text()
    for old, new in (('length = "1.8 m"', 'length = "0.8 m"'), ('length = "1.2 m"', 'length = "0.6 m"'),
                     ('distance = "900 mm"', f'distance = "{incident_gauge_mm:g} mm"'),
                     ('distance = "400 mm"', 'distance = "200 mm"'), ('length = "0.3 m"', 'length = "0.24 m"')):
        assert old in text, old
        text = text.replace(old, new)
    return text


#: The recorder of the shots simulated here.
RECORDER = """[recorder]
sample_rate = "10 MHz"
duration = "0.45 ms"
pre_trigger = "50 us"
bits = 12
range = "5 V"
noise = "2 mV"
"""

#: name -> (incident gauge distance [mm], simulation setup) of the shots simulated here.
OWN_SHOTS = {
    # A 98.5 us striker pulse (0.24 m) with the incident gauge 260 mm from the specimen: the reflected wave
    # reaches the gauge 2 d / c0 = 106.7 us after the incident foot, 8 us after the pulse ends. Records of
    # non-dispersive bars (a sharp rise, a clean end; with the bars' dispersion the pulse's tail would reach the
    # reflected wave: a true overlap).
    "near-overlap": (260, """name = "near-overlap"
barset = "rig.toml"
dispersion = false
[striker]
speed = "20 m/s"
[specimen]
length = "5 mm"
diameter = "8 mm"
modulus = "70 GPa"
density = "2800 kg/m^3"
law = "perfectly-plastic"
yield_stress = "350 MPa"
""" + RECORDER + "seed = 11\n"),
    # A 20 mm polymer-like specimen (c0 = 1581 m/s: a 12.6 us transit) under the bare striker's 41 us pulse
    # (0.1 m): a few transits at most, never equilibrium (Davies & Hunter 1963; Ravichandran & Subhash 1994).
    "soft": (400, """name = "soft"
barset = "rig.toml"
dispersion = false
[striker]
speed = "10 m/s"
length = "0.1 m"
[specimen]
length = "20 mm"
diameter = "10 mm"
modulus = "3 GPa"
density = "1200 kg/m^3"
law = "perfectly-plastic"
yield_stress = "60 MPa"
""" + RECORDER + "seed = 12\n"),
}


@dataclass
class Base:
    """A base shot: the shot, its record, its truth (None for the own shots) and the true striker speed."""

    shot: object
    record: Record
    truth: Optional[pd.DataFrame] = None


def example_base(sid: str) -> Base:
    """An example shot as shipped (its shot file gives the striker speed)."""
    shot = load_shot(EXAMPLE / "shots" / f"{sid}.toml")
    return Base(shot, read_record(shot.record), pd.read_csv(EXAMPLE / "truth" / f"{sid}_truth.csv"))


def own_base(name: str, folder: Path) -> Base:
    """Simulate one of :data:`OWN_SHOTS` on the small rig (``shpb simulate``'s machinery) in ``folder``."""
    from shpb.virtual import load_simulation, shot_toml_text, simulate_setup, truth_table

    gauge, setup = OWN_SHOTS[name]
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    (folder / "rig.toml").write_text(small_rig(gauge))
    (folder / f"{name}.toml").write_text(setup)
    virtual = simulate_setup(load_simulation(folder / f"{name}.toml"))
    (folder / f"{name}_shot.toml").write_text(shot_toml_text(virtual, f"{name}.csv", "rig.toml"))
    shot = load_shot(folder / f"{name}_shot.toml")
    if not virtual.setup.dispersion:
        # records of non-dispersive bars, reduced without the correction and without the low-pass (which stands
        # for a real bar's second-mode limit: these bars deliver every frequency, the yield knee sharp)
        shot = with_analysis(shot, dispersion=False, lowpass=False)
    rec = virtual.record
    record = Record.from_arrays(rec.volts_incident, rec.volts_transmitted, time=rec.time)
    return Base(dataclasses.replace(shot, record=None), record, truth_table(virtual.result, rec))


# ---------------------------------------------------------------------------------------------- faults
def _level(v):
    """The channel's baseline (median of the first 500 samples, all pre-trigger) [V]."""
    return float(np.median(v[:500]))


def _peak(v):
    return float(np.max(np.abs(v - _level(v))))


def with_record(base: Base, incident=None, transmitted=None) -> Record:
    r = base.record
    return Record(time=r.time, dt=r.dt, incident=r.incident if incident is None else incident,
                  transmitted=r.transmitted if transmitted is None else transmitted)


def add_noise(base: Base, fraction: float, seed: int = 1) -> Record:
    """Gaussian noise of ``fraction`` of each channel's peak, on both channels (common practice: long gauge
    cables)."""
    rng = np.random.default_rng(seed)
    return with_record(base, *(v + rng.normal(0.0, fraction * _peak(v), v.size)
                               for v in (base.record.incident, base.record.transmitted)))


def add_drift(base: Base, fraction: float) -> Record:
    """A linear baseline drift of ``fraction`` of each channel's peak over the record."""
    ramp = np.linspace(0.0, 1.0, base.record.time.size)
    return with_record(base, *(v + fraction * _peak(v) * ramp for v in (base.record.incident, base.record.transmitted)))


def add_hum(base: Base, fraction: float, frequency: float = 50.0) -> Record:
    """Mains hum of ``fraction`` of each channel's peak (and a third harmonic of a third of it)."""
    t = base.record.time
    hum = np.sin(2 * np.pi * frequency * t + 0.7) + np.sin(2 * np.pi * 3 * frequency * t + 2.1) / 3
    return with_record(base, *(v + fraction * _peak(v) * hum for v in (base.record.incident, base.record.transmitted)))


def add_spikes(base: Base) -> Record:
    """Single-sample spikes: one before the incident pulse, of twice the pulse's height in its sign; others
    in the pulses and between them."""
    inc, tra = base.record.incident.copy(), base.record.transmitted.copy()
    n = inc.size
    pk_i, pk_t = _peak(inc), _peak(tra)
    inc[n // 20] += 2 * pk_i
    inc[int(0.2 * n)] -= 0.8 * pk_i
    inc[int(0.55 * n)] += 0.5 * pk_i
    tra[int(0.45 * n)] -= 0.6 * pk_t
    tra[n // 30] += 1.5 * pk_t
    return with_record(base, inc, tra)


def flat_top(base: Base, fraction: float) -> Record:
    """The incident channel saturating at ``fraction`` of its peak (an amplifier below the recorder's range)."""
    v = base.record.incident
    lvl = _level(v)
    sign = base.shot.barset.incident_gauge.polarity
    y = np.minimum(sign * (v - lvl), fraction * _peak(v))
    return with_record(base, incident=lvl + sign * y)


def gauge(shot, which: str, **changes):
    """The shot with one gauge's settings changed."""
    bs = shot.barset
    name = f"{which}_gauge"
    return dataclasses.replace(shot, barset=dataclasses.replace(bs, **{name: dataclasses.replace(getattr(bs, name),
                                                                                                 **changes)}))


def bars(shot, **changes):
    """The shot with both bars' measured wave speed (or other Bar fields) changed."""
    bs = shot.barset
    return dataclasses.replace(shot, barset=dataclasses.replace(
        bs, incident=dataclasses.replace(bs.incident, **changes), transmitted=dataclasses.replace(bs.transmitted,
                                                                                                    **changes)))


# ---------------------------------------------------------------------------------------------- trials
@dataclass(frozen=True)
class Trial:
    """One virtual shot and the verdict an honest reducer gives.

    Attributes
    ----------
    id : str
    what : str
        The fault, in a few words.
    base : str
        The base shot's name.
    expect : str
        ``valid``, ``warning`` or ``error`` (see the module docstring).
    codes : tuple of str
        For ``warning``/``error``: flag codes (any one) that name the cause, or
        for a refusal a fragment of its message.
    build : callable
        ``build(base) -> (shot, record)``.
    """

    id: str
    what: str
    base: str
    expect: str
    build: Callable
    codes: tuple = ()


A61, C10 = BASES


def _same(b):
    return b.shot, b.record


def _t(id, what, base, expect, build, *codes):
    return Trial(id, what, base, expect, build, tuple(codes))


TRIALS = (
    _t("clean-A61", "the example shot as shipped", A61, "valid", _same),
    _t("clean-C10", "copper-like at 5000 1/s as shipped", C10, "valid", _same),
    *(_t(f"noise-{p}-{b[3:6]}", f"{p} % Gaussian noise on both channels", b, "valid",
         lambda base, p=p: (base.shot, add_noise(base, p / 100)))
      for b in BASES for p in (0.5, 1, 2, 3)),
    _t("drift-A61", "linear drift, 3 % of each peak over the record", A61, "valid",
       lambda b: (b.shot, add_drift(b, 0.03))),
    _t("drift-noise-C10", "3 % drift and 1 % noise", C10, "valid",
       lambda b: (b.shot, add_noise(dataclasses.replace(b, record=add_drift(b, 0.03)), 0.01))),
    _t("hum-A61", "50 Hz hum, 2 % of each peak", A61, "valid", lambda b: (b.shot, add_hum(b, 0.02))),
    _t("hum-given-C10", "60 Hz hum, 3 % of each peak, hum_frequency given", C10, "valid",
       lambda b: (with_analysis(b.shot, hum_frequency=60.0), add_hum(b, 0.03, 60.0))),
    _t("spikes-A61", "single-sample spikes, one of twice the pulse before it", A61, "valid",
       lambda b: (b.shot, add_spikes(b))),
    _t("short-window-A61", "a hand window of 120 us on the 163 us pulse", A61, "valid",
       lambda b: (with_analysis(b.shot, window_length=120e-6), b.record)),
    _t("near-overlap", "a 98.5 us pulse, the reflected wave back 8 us after it ends", "near-overlap", "valid",
       _same),
    *(_t(f"fast-rise-noise-{s}", "a sharp rise with 1 % noise (seed {s})".format(s=s), "near-overlap", "valid",
         lambda base, s=s: (base.shot, add_noise(base, 0.01, seed=s))) for s in (1, 2, 3)),
    _t("window-past-reflected", "a hand window of 150 us where the reflected wave returns after 107 us",
       "near-overlap", "error", lambda b: (with_analysis(b.shot, window_length=150e-6), b.record), "waves_overlap"),
    _t("soft-specimen", "a 20 mm polymer-like specimen under a 41 us pulse", "soft", "error", _same,
       "no_equilibrium", "short_equilibrium"),
    *(_t(f"flat-top-{p}", f"incident channel flat at {p} % of its peak", A61, "error",
         lambda base, p=p: (base.shot, flat_top(base, p / 100)), "flat_top")
      for p in (70, 80, 90, 95)),
    *(_t(f"transmitted-gauge{d:+d}mm", f"transmitted gauge distance {d:+d} mm", A61,
         "warning" if abs(d) == 10 else "error",
         lambda base, d=d: (gauge(base.shot, "transmitted",
                                  distance=base.shot.barset.transmitted_gauge.distance + d / 1000), base.record),
         "waves_misaligned")
      for d in (10, -10, 20, -20)),
    *(_t(f"incident-gauge{d:+d}mm", f"incident gauge distance {d:+d} mm", A61, "error",
         lambda base, d=d: (gauge(base.shot, "incident", distance=base.shot.barset.incident_gauge.distance + d / 1000),
                            base.record), "waves_misaligned", "reflected_early")
      for d in (10, -10)),
    _t("gain-x10", "incident gain typed 1000 instead of 100 (striker speed given)", A61, "error",
       lambda b: (gauge(b.shot, "incident", gain=1000.0), b.record), "striker_mismatch"),
    _t("quarter-bridges", "both gauges 'quarter' instead of 'half-bending' (striker speed given)", A61, "error",
       lambda b: (gauge(gauge(b.shot, "incident", bridge="quarter"), "transmitted", bridge="quarter"), b.record),
       "striker_mismatch"),
    _t("transmitted-bridge", "transmitted gauge 'quarter' instead of 'half-bending'", C10, "error",
       lambda b: (gauge(b.shot, "transmitted", bridge="quarter"), b.record), "force_mismatch"),
    _t("transmitted-polarity", "transmitted gauge polarity flipped", A61, "error",
       lambda b: (gauge(b.shot, "transmitted", polarity=-b.shot.barset.transmitted_gauge.polarity), b.record),
       "transmitted_polarity"),
    _t("incident-polarity", "incident gauge polarity flipped", A61, "error",
       lambda b: (gauge(b.shot, "incident", polarity=-b.shot.barset.incident_gauge.polarity), b.record),
       "polarity of the incident gauge"),
    _t("channels-swapped", "incident and transmitted columns swapped", C10, "error",
       lambda b: (b.shot, with_record(b, b.record.transmitted, b.record.incident)), "channels look swapped"),
    _t("specimen-length-x10", "specimen length typed 10x too long", A61, "error",
       lambda b: (dataclasses.replace(b.shot, specimen=dataclasses.replace(b.shot.specimen,
                                                                           length=10 * b.shot.specimen.length)),
                  b.record), "modulus_too_high", "equilibrium_too_soon"),
    _t("wave-speed+3%", "measured wave speed 3 % high in the bar set", C10, "error",
       lambda b: (bars(b.shot, measured_wave_speed=1.03 * b.shot.barset.incident.wave_speed), b.record),
       "modulus_speed_mismatch", "waves_misaligned"),
    _t("readme-no-dispersion", "README's second command: --no-dispersion --stress 3-wave", A61, "error",
       lambda b: (with_analysis(b.shot, dispersion=False, stress="3-wave"), b.record), "short_equilibrium",
       "no_equilibrium"),
)


# ---------------------------------------------------------------------------------------------- verdicts
@dataclass
class Outcome:
    """What the reduction said about a trial."""

    verdict: str  # "valid" | "warning" | "error" | "refused"
    codes: tuple = ()
    message: str = ""
    result: object = field(default=None, repr=False)

    @property
    def label(self) -> str:
        if self.verdict == "refused":
            return f"REFUSED: {self.message}"
        word = {"valid": "VALID", "warning": "VALID, warned", "error": "NOT VALID"}[self.verdict]
        return f"{word} ({', '.join(self.codes)})" if self.codes else word

    def meets(self, trial: Trial) -> bool:
        """Does this outcome give the trial's honest verdict?"""
        if trial.expect == "valid":
            return self.verdict in ("valid", "warning")
        if self.verdict == "refused":
            return any(c in self.message for c in trial.codes)
        severe = ("error",) if trial.expect == "error" else ("warning", "error")
        named = {f.code for f in self.result.flags if f.severity in severe}
        return self.verdict in severe and bool(named & set(trial.codes))


def judge_trial(trial: Trial, base: Base) -> Outcome:
    """Reduce a trial's shot and sum up the verdict."""
    shot, record = trial.build(base)
    try:
        res = reduce_shot(shot, record)
    except AnalysisError as exc:
        return Outcome("refused", message=str(exc))
    codes = tuple(f.code for f in res.flags if f.severity in ("warning", "error"))
    verdict = "error" if not res.valid else "warning" if codes else "valid"
    return Outcome(verdict, codes, result=res)


# ---------------------------------------------------------------------------------------------- accuracy
def plastic_stress_error(result, truth: pd.DataFrame, strain_from: float = 0.02) -> float:
    """RMS relative error of the reported stress against the truth at equal strain, over the valid plastic part."""
    c = result.curves
    valid = c.valid.to_numpy() == 1
    peak = int(truth.strain.to_numpy().argmax())
    lt = truth.iloc[: peak + 1]
    lt = lt[lt.time_us > 0]
    strain = c.strain.to_numpy()[valid]
    keep = strain > strain_from
    expected = np.interp(strain[keep], lt.strain, lt.stress_MPa)
    rel = (c.stress_MPa.to_numpy()[valid][keep] - expected) / expected
    return float(np.sqrt(np.mean(rel**2))) if rel.size else math.nan
