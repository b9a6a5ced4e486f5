"""Baselines, pulse feet, windows and sub-sample time shifts of bar signals.

Pure functions on numpy arrays. Signals are bar strains with the package's
sign convention (compression positive) unless said otherwise.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from typing import TYPE_CHECKING, Callable, Optional

import numpy as np
from numpy.typing import ArrayLike

if TYPE_CHECKING:  # pragma: no cover
    from .io import Record
    from .setup import AnalysisOptions, BarSet


def noise_floor(signal: ArrayLike, n_baseline: int) -> tuple[float, float]:
    """Mean and standard deviation of the first ``n_baseline`` samples (the pre-trigger part).

    Parameters
    ----------
    signal : array_like
        Any record channel.
    n_baseline : int
        Number of leading samples that hold no pulse.

    Returns
    -------
    mean, std : float
        In the signal's unit.
    """
    s = np.asarray(signal, dtype=float)[: max(int(n_baseline), 2)]
    return float(np.mean(s)), float(np.std(s))


def robust_noise(signal: ArrayLike) -> tuple[float, float]:
    """Baseline level and noise of a record without knowing where its pulses are.

    The level is the median of the record (pulses fill less than half a bar
    record); the noise standard deviation comes from the median absolute
    successive difference, which smooth pulses barely touch:
    sigma = 1.4826 * median|x[i+1] - x[i]| / sqrt(2) (Rousseeuw & Croux 1993,
    J. Am. Stat. Assoc. 88:1273, MAD consistency factor 1.4826).

    Returns
    -------
    level, sigma : float
    """
    s = np.asarray(signal, dtype=float)
    # a strided subsample is enough for two medians and keeps long records cheap
    step = max(1, s.size // 100_000)
    level = float(np.median(s[::step]))
    if step == 1:
        d = np.diff(s)
    else:  # differences of neighbouring samples, one pair per block of `step`
        blocks = s[: (s.size // step) * step].reshape(-1, step)
        d = blocks[:, 1] - blocks[:, 0]
    sigma = 1.4826 * float(np.median(np.abs(d)))
    return level, sigma / np.sqrt(2.0)


def rest_level(signal: ArrayLike) -> tuple[float, float]:
    """Level a channel rests at before its first wave, and its noise: :func:`robust_noise`, checked against the
    record's start.

    The median of the record is the baseline when pulses fill less than half
    of it. A record of long or overlapping pulses (two-point separation,
    ``shpb.separation``) can sit on a pulse most of the time; then the median
    of its first hundredth (at least :data:`MIN_BASELINE_SAMPLES` samples),
    which lies in the pre-trigger, is taken instead, when the two differ by
    more than 8 noise units and 5 % of the channel's swing and the record
    stays longer near it from its first sample on.

    Returns
    -------
    level, sigma : float
        In the signal's unit.
    """
    s = np.asarray(signal, dtype=float)
    level, sigma = robust_noise(s)
    start = float(np.median(s[: max(MIN_BASELINE_SAMPLES, s.size // 100)]))
    tol = max(8.0 * sigma, 0.05 * float(np.ptp(s)))
    if abs(start - level) <= tol:
        return level, sigma

    def initial_run(at):  # samples from the record's start before it leaves the level
        away = np.flatnonzero(np.abs(s - at) > tol)
        return int(away[0]) if away.size else s.size

    return (start, sigma) if initial_run(start) > initial_run(level) else (level, sigma)


def find_foot(signal: ArrayLike, n_baseline: Optional[int] = None, *, k_sigma: float = 8.0, min_fraction: float = 0.05,
              foot_fraction: float = 0.01, sigma: Optional[float] = None, persist: int = 1) -> Optional[float]:
    """Sub-sample index of the foot of the first positive pulse.

    The pulse is first detected where it exceeds a threshold relative to the
    noise floor (``k_sigma`` standard deviations of the pre-trigger part, and
    at least ``min_fraction`` of the peak); the foot is then found by walking
    back to where the rise leaves the baseline, i.e. the last sample before
    the detection at or below ``max(3 sigma, foot_fraction * peak)``, refined
    by linear interpolation.

    Parameters
    ----------
    signal : array_like
        Baseline-free signal, pulse positive.
    n_baseline : int or None
        Leading samples that are pulse-free (noise estimate); None: estimate
        the noise from the whole record with :func:`robust_noise`.
    sigma : float, optional
        The signal's noise standard deviation, when known (e.g. measured over
        the quiet spans of a filtered signal, whose successive differences
        understate it); ``n_baseline`` then only says where the search starts.
    persist : int
        The pulse is detected where the signal stays above the detection level
        for this many samples: a spike or a short burst of pickup is not a pulse.
    k_sigma : float
        Detection threshold in noise standard deviations.
    min_fraction, foot_fraction : float
        Detection and foot levels as fractions of the peak.

    Returns
    -------
    float or None
        Fractional sample index of the foot; None when no pulse stands out of
        the noise (peak below ``k_sigma`` sigma).
    """
    s = np.asarray(signal, dtype=float)
    if sigma is not None:
        n_baseline = n_baseline or 0
    elif n_baseline is None:
        _, sigma = robust_noise(s)
        n_baseline = 0
    else:
        _, sigma = noise_floor(s, n_baseline)
    peak = float(np.max(s[n_baseline:])) if s.size > n_baseline else 0.0
    if peak <= 0 or peak < k_sigma * sigma:
        return None
    level = max(k_sigma * sigma, min_fraction * peak)
    from .conditioning import first_run

    start = first_run(s[n_baseline:] > level, persist)  # where the signal stays above the level `persist` samples
    if start is None:
        return None
    i1 = start + n_baseline
    foot_level = max(3.0 * sigma, foot_fraction * peak)
    below = np.flatnonzero(s[:i1] <= foot_level)
    if below.size == 0:
        return float(i1)
    i0 = int(below[-1])
    # linear interpolation of the foot-level crossing between i0 and i0 + 1
    a, b = s[i0], s[i0 + 1]
    frac = (foot_level - a) / (b - a) if b != a else 0.0
    return i0 + float(np.clip(frac, 0.0, 1.0))


def pulse_end(signal: ArrayLike, i_start: float, *, fraction: float = 0.1) -> Optional[int]:
    """Index where a positive pulse starting at ``i_start`` has fallen back below ``fraction`` of its peak.

    The pulse is detected where it first rises through half of the largest
    value after ``i_start``; its peak is the largest value before the signal
    first turns negative after that detection (so noise around a foot placed
    a little early, by hand or by a fast rise, does not end the search before
    it starts), and the search for the end starts at the peak.

    Returns
    -------
    int or None
        None when the pulse does not come down before the end of the record.
    """
    s = np.asarray(signal, dtype=float)
    i0 = max(int(np.floor(i_start)), 0)
    seg = s[i0:]
    if seg.size == 0 or not np.max(seg) > 0:
        return None
    det = int(np.argmax(seg >= 0.5 * np.max(seg)))
    neg = np.flatnonzero(seg[det:] < 0)
    stop = det + (int(neg[0]) if neg.size else seg.size - det)
    ipk = int(np.argmax(seg[:stop]))
    pk = seg[ipk]
    after = np.flatnonzero(seg[ipk:] < fraction * pk)
    if after.size == 0:
        return None
    return i0 + ipk + int(after[0])


def delay(signal: ArrayLike, dt: float, shift_time: float) -> np.ndarray:
    """Delay a signal by ``shift_time`` with sub-sample (linear) interpolation.

    ``out(t) = signal(t - shift_time)`` on the same time grid; samples that
    would come from outside the record are zero.

    Parameters
    ----------
    signal : array_like
    dt : float
        Sample interval [s].
    shift_time : float
        Delay [s]; negative advances the signal.

    Returns
    -------
    ndarray
    """
    s = np.asarray(signal, dtype=float)
    k = np.arange(s.size, dtype=float)
    return np.interp(k - shift_time / dt, k, s, left=0.0, right=0.0)


def taper_window(n: int, start: float, stop: float, ramp: float) -> np.ndarray:
    """A 0–1 mask of length ``n``: 1 on ``[start, stop)``, raised-cosine ramps of ``ramp`` samples just inside.

    Tapering the window's edges keeps a cut-out pulse free of steps, so a
    frequency-domain shift does not ring. ``start`` and ``stop`` are
    fractional sample positions and the mask is the continuous taper sampled
    at the integers, w(k) = r((k - start + 1/2) / ramp) r((stop - k - 1/2) / ramp)
    with r the raised cosine from 0 to 1, so a window moved by a fraction of a
    sample gives the same taper moved by that fraction: waves cut at their
    gauges and carried to the faces keep identical tapers there.
    """
    k = np.arange(int(n), dtype=float)
    if not stop > start:
        return np.zeros(k.size)
    ramp = float(min(ramp, 0.5 * (stop - start)))
    if ramp <= 0:
        return ((k >= start) & (k < stop)).astype(float)
    u_up, u_down = (k - start + 0.5) / ramp, (stop - k - 0.5) / ramp
    w = ((u_up > 0) & (u_down > 0)).astype(float)
    for u in (u_up, u_down):  # the cosine only on the ramps (the rest is 0 or 1): cheap on a long window
        on = (u > 0) & (u < 1)
        w[on] *= 0.5 - 0.5 * np.cos(np.pi * u[on])
    return w


def carry_wave(channel: ArrayLike, dt: float, start: float, stop: float, travel_time: float, ramp: int,
               mover: Optional[Callable[[np.ndarray], np.ndarray]] = None) -> tuple[np.ndarray, np.ndarray]:
    """Cut a wave out of a channel and carry it along its bar by ``travel_time``.

    Parameters
    ----------
    channel : array_like
        Bar strain at the gauge [1].
    dt : float
        Sample interval [s].
    start, stop : float
        The wave's window at the gauge, fractional sample indices.
    travel_time : float
        Signed travel time to the face [s] (distance / c0; negative for a
        wave carried back against its travel).
    ramp : int
        Raised-cosine taper at the window's ends [samples].
    mover : callable, optional
        ``mover(segment) -> segment`` carrying the cut-out segment (e.g. a
        dispersion correction); a pure sub-sample delay when None.

    Returns
    -------
    moved, delayed : ndarray
        The carried wave and its pure-delay version on the channel's sample
        grid, zero outside the carried window and beyond the record.
    """
    x = np.asarray(channel, dtype=float)
    n = x.size
    shift = travel_time / dt  # samples
    margin = int(0.1 * (stop - start)) + 8
    a = int(np.floor(min(start, start + shift))) - margin
    b = int(np.ceil(max(stop, stop + shift))) + margin
    seg = np.zeros(b - a)
    lo, hi = max(a, 0), min(b, n)
    if hi > lo:
        seg[lo - a : hi - a] = x[lo:hi]
    seg *= taper_window(seg.size, start - a, stop - a, ramp)
    plain = delay(seg, dt, travel_time)
    moved = plain if mover is None else mover(seg)
    full, full_plain = np.zeros(n), np.zeros(n)
    if hi > lo:  # a window wholly outside the record carries nothing (the verdict flags it)
        full[lo:hi] = moved[lo - a : hi - a]
        full_plain[lo:hi] = plain[lo - a : hi - a]
    return full, full_plain


def flat_top_run(volts: ArrayLike) -> tuple[int, float]:
    """Longest run of consecutive samples at the record's extreme value (max or min) and its level.

    A recorder driven past its range writes its rail value sample after
    sample; a long run at the extreme is the mark of a clipped channel.

    Returns
    -------
    run : int
        Longest run length [samples] at either extreme.
    level : float
        The extreme value of that run [V].
    """
    v = np.asarray(volts, dtype=float)
    best, level = 0, float("nan")
    for ext in (v.max(), v.min()):
        at = np.concatenate(([0], (v == ext).astype(np.int8), [0]))
        edges = np.flatnonzero(np.diff(at))
        if edges.size:
            run = int(np.max(edges[1::2] - edges[0::2]))
            if run > best:
                best, level = run, float(ext)
    return best, level


def ramp_time(duration: float, dt: float) -> float:
    """Length of the raised-cosine taper at each end of a wave's window [s]: 2 % of the pulse."""
    return max(2 * dt, 0.02 * duration)


# --------------------------------------------------------------------------- stage 1: conditioned gauge strains
#: Fewest pre-trigger samples a record must have before the incident foot.
MIN_BASELINE_SAMPLES = 16


@dataclass(frozen=True)
class StationStrain:
    """A further gauge station's channel, conditioned in stage 1 exactly as the main channels.

    Attributes
    ----------
    bar : str
        ``incident`` or ``transmitted``.
    gauge : shpb.setup.Gauge
        The station (its distance from the specimen face [m], bridge, polarity).
    strain : ndarray
        Bar strain at the station [1], compression positive: glitches
        repaired, baseline removed, low-passed with the main channels' filter.
    volts, baseline : ndarray
        The channel as recorded and the baseline removed from it [V].
    quiet : ndarray of bool
        The samples the baseline was fitted on.
    noise : float
        Standard deviation of ``strain`` over its quiet samples [1].
    """

    bar: str
    gauge: object
    strain: np.ndarray
    volts: np.ndarray
    baseline: np.ndarray
    quiet: np.ndarray
    noise: float


@dataclass(frozen=True)
class GaugeStrains:
    """Stage 1 of a reduction: both channels conditioned and converted to bar strains at their gauges.

    Attributes
    ----------
    time : ndarray
        Record time [s] (uniform).
    dt : float
        Sample interval [s].
    incident, transmitted : ndarray
        Bar strain at the incident and transmitted gauges [1], compression
        positive: glitches repaired, baseline removed, low-passed (when on),
        channel scale applied.
    volts_incident, volts_transmitted : ndarray
        The recorded voltages [V], as read.
    baseline_incident, baseline_transmitted : ndarray
        The baselines removed from the volts [V], one value per sample.
    baseline_samples : int
        Leading samples known to be pulse-free (the ``pre_trigger`` span, or
        90 % of the record before the incident foot), where the baseline
        search starts.
    noise_incident, noise_transmitted : float
        Standard deviation of each conditioned bar strain over its quiet
        samples [1]: the noise the equilibrium test propagates.
    foot : float
        Fractional sample index of the incident wave's foot at its gauge.
    foot_source : str
        ``found`` or ``given`` (the analysis option ``incident_start``).
    quiet_incident, quiet_transmitted : ndarray of bool or None
        Quiet samples of each channel: those the baseline was fitted on, where
        the channel's noise is measured.
    pulses : dict
        Channel name -> ``(time [s], sign)`` of the first pulse on the channel,
        the sign relative to the gauge's polarity (+1: compressive, as it must
        be); None when no pulse stands out of the noise.
    conditioning : dict
        What the conditioning did, per channel (glitches, baseline order and
        quiet share, noise) and for all (low-pass cutoff and its reason,
        hum frequency): the ``condition`` step of the provenance.
    stations : dict
        Further gauge stations (name as :func:`shpb.io.station_name` ->
        :class:`StationStrain`), conditioned as the main channels, for
        two-point separation (:mod:`shpb.separation`); empty with
        ``separation = "off"`` or without further stations in the record.
    unusable_stations : dict
        Station name -> why its channel cannot be used (no pulse on it, no
        baseline before its first wave).
    """

    time: np.ndarray
    dt: float
    incident: np.ndarray
    transmitted: np.ndarray
    volts_incident: np.ndarray
    volts_transmitted: np.ndarray
    baseline_incident: np.ndarray
    baseline_transmitted: np.ndarray
    baseline_samples: int
    noise_incident: float
    noise_transmitted: float
    foot: float
    foot_source: str
    quiet_incident: Optional[np.ndarray] = None
    quiet_transmitted: Optional[np.ndarray] = None
    pulses: dict = field(default_factory=dict)
    conditioning: dict = field(default_factory=dict)
    stations: dict = field(default_factory=dict)
    unusable_stations: dict = field(default_factory=dict)

    @property
    def provenance(self) -> dict:
        return {"step": "bridge", "parameters": {"baseline_samples": self.baseline_samples,
                                                 "incident_foot": self.foot_source}}

    @property
    def condition_provenance(self) -> dict:
        """The ``condition`` step of the provenance: glitches, baselines, hum, low-pass."""
        return {"step": "condition", "parameters": self.conditioning}

    def channel(self, name: str) -> tuple:
        """(bar strain [1], quiet samples, noise standard deviation [1]) of a channel by name: ``incident``,
        ``transmitted`` or a further station's (:attr:`stations`)."""
        if name in ("incident", "transmitted"):
            return getattr(self, name), getattr(self, f"quiet_{name}"), getattr(self, f"noise_{name}")
        st = self.stations[name]
        return st.strain, st.quiet, st.noise

    @property
    def lowpass_cutoff(self) -> Optional[float]:
        """Cutoff of the low-pass applied to both channels [Hz]; None when off."""
        return self.conditioning.get("lowpass", {}).get("cutoff_Hz")


def condition_record(record: "Record", barset: "BarSet", analysis: "AnalysisOptions") -> GaugeStrains:
    """Stage 1: condition every channel, find the incident foot and convert the volts to bar strain.

    On each channel, in volts (:mod:`shpb.conditioning`), the further gauge
    stations' too (for two-point separation, unless ``separation = "off"``):

    1. isolated glitches are found against their neighbours and repaired;
    2. the channels are checked: the incident channel's first pulse must be
       compressive (after its gauge's polarity) and come before the
       transmitted channel's (an error naming the polarity or the channel
       order otherwise);
    3. the baseline is fitted over every quiet span of the record, starting
       from the ``pre_trigger`` span when given (then only it), otherwise from
       90 % of the record before the incident foot (a further station's
       span ends earlier by the wave's transit from it to the main incident
       gauge, and before its own first wave); its order (0 to 3) is the
       lowest the data justify, with mains hum when ``hum_frequency`` is given;
    4. every channel goes through the same zero-phase Butterworth low-pass
       (``lowpass``; cutoff ``lowpass_cutoff`` or automatic: the bars'
       second-mode onset, :func:`shpb.conditioning.lowpass_cutoff`);
    5. the incident foot is found on the conditioned incident channel
       (:func:`find_foot`) unless ``incident_start`` gives it;
    6. the volts become strain through the exact bridge equations of
       :func:`shpb.bridge.bar_strain`.

    Parameters
    ----------
    record : shpb.io.Record
    barset : shpb.setup.BarSet
    analysis : shpb.setup.AnalysisOptions
        ``pre_trigger``, ``incident_start``, ``lowpass``, ``lowpass_cutoff``,
        ``hum_frequency`` and ``separation`` are used.

    Returns
    -------
    GaugeStrains
        A further station whose channel cannot be used (no pulse on it, no
        baseline before it) is named in ``unusable_stations`` with the reason;
        the separation stage decides what that means.

    Raises
    ------
    InputError
        ``incident_start`` outside the record.
    AnalysisError
        No incident pulse, too few samples before it, an incident pulse of the
        wrong sign or channels in the wrong order.
    """
    from .errors import AnalysisError, InputError

    dt, n, t0 = record.dt, record.time.size, float(record.time[0])
    n_pre: Optional[int] = None  # samples before the trigger, when the analysis gives pre_trigger
    gauges = {"incident": barset.incident_gauge, "transmitted": barset.transmitted_gauge}
    info: dict = {"incident": {}, "transmitted": {}}
    raw = {"incident": record.incident, "transmitted": record.transmitted}
    noise = {k: rest_level(v) for k, v in raw.items()}  # (level, sigma), record-wide
    persist = max(3, int(round(1e-6 / dt)))  # a pulse lasts; a glitch or a burst of pickup does not
    pulses = _first_pulses(raw, noise, gauges, dt, t0, persist)
    _check_channels(pulses, barset)

    if analysis.pre_trigger:
        n_pre = min(int(analysis.pre_trigger / dt), n // 2)
    if analysis.incident_start is not None:
        foot0, source = (analysis.incident_start - t0) / dt, "given"
        if not 0 <= foot0 < n:
            raise InputError(f"{analysis.incident_start * 1e6:g} us is outside the record "
                             f"({t0 * 1e6:g} to {record.time[-1] * 1e6:g} us)", "analysis.incident_start")
    else:  # first pass: on the sign-corrected volts (the bridge is monotonic), level and noise record-wide
        x = gauges["incident"].polarity * raw["incident"]
        level = noise_floor(x, n_pre)[0] if n_pre is not None else gauges["incident"].polarity * noise["incident"][0]
        found, source = find_foot(x - level, n_pre, persist=persist), "found"
        if found is None:
            raise AnalysisError("no incident pulse found on the incident channel (nothing rises above 8x its "
                                "noise)")
        foot0 = found
    if foot0 < MIN_BASELINE_SAMPLES:
        raise AnalysisError(f"the incident pulse starts {foot0:.0f} samples into the record: no "
                            f"pre-trigger baseline (record at least {MIN_BASELINE_SAMPLES} samples before the pulse)")
    # the rest of the work only on the part of the record the analysis can read (a long record is baseline after)
    n = min(n, int(math.ceil(foot0 + _analysis_reach(barset, analysis) / dt)))
    time = record.time[:n]
    info["samples_used"] = n
    n_base = n_pre if n_pre is not None else max(MIN_BASELINE_SAMPLES, int(0.9 * foot0))
    volts, bases, quiet = {}, {}, {}
    for name in ("incident", "transmitted"):
        clean, info[name] = _repaired(raw[name][:n], *noise[name], t0, dt)
        volts[name], bases[name], quiet[name] = _debased(clean, noise[name][1], dt, n_base, analysis, info[name])
    # the further stations alike (their baselines end before their own first wave), for two-point separation
    stations, unusable = _station_channels(record, barset, analysis, n, n_base, persist) \
        if analysis.separation != "off" else ({}, {})
    for name, (bar_name, gauge, level, sigma, n_quiet) in stations.items():
        clean, info[name] = _repaired(record.stations[name][:n], level, sigma, t0, dt)
        info[name]["distance_mm"] = gauge.distance * 1e3
        volts[name], bases[name], quiet[name] = _debased(clean, sigma, dt, n_quiet, analysis, info[name])
    info["baseline"] = ("fitted over every quiet span (Schwarz criterion for the order)" if not analysis.pre_trigger
                        else f"fitted over the pre_trigger span ({n_base} samples)")
    info["hum_frequency_Hz"] = analysis.hum_frequency
    # one filter for every channel: the waves keep their timing, and the stations' the main channels'
    volts, info["lowpass"] = _lowpass_all(volts, dt, foot0, gauges["incident"].polarity, barset, analysis)

    x = gauges["incident"].polarity * volts["incident"]
    if source == "found":
        sig_x = float(np.std(x[quiet["incident"]])) if quiet["incident"].any() else None
        found = find_foot(x, int(0.5 * foot0), sigma=sig_x, persist=persist)
        foot = float(found) if found is not None else float(foot0)
    else:
        foot = float(foot0)
    strain = {k: _bar_strain(volts[k], g, getattr(barset, k)) for k, g in gauges.items()}
    strain.update({k: _bar_strain(volts[k], g, getattr(barset, b)) for k, (b, g, *_) in stations.items()})
    sigma = {k: float(np.std(v[quiet[k]])) if quiet[k].any() else 0.0 for k, v in strain.items()}  # [1]
    for k in sigma:
        info[k]["noise_strain"] = sigma[k]
    extra = {k: StationStrain(b, g, strain[k], record.stations[k][:n], bases[k], quiet[k], sigma[k])
             for k, (b, g, *_) in stations.items()}
    return GaugeStrains(time=time, dt=dt, incident=strain["incident"], transmitted=strain["transmitted"],
                        volts_incident=raw["incident"][:n], volts_transmitted=raw["transmitted"][:n],
                        baseline_incident=bases["incident"], baseline_transmitted=bases["transmitted"],
                        baseline_samples=int(n_base), noise_incident=sigma["incident"],
                        noise_transmitted=sigma["transmitted"], foot=foot, foot_source=source,
                        quiet_incident=quiet["incident"], quiet_transmitted=quiet["transmitted"], pulses=pulses,
                        conditioning=info, stations=extra, unusable_stations=unusable)


def _repaired(v, level, sigma, t0, dt):
    """A channel with its isolated glitches repaired, and what was done."""
    from . import conditioning as cond

    hits = cond.find_glitches(v, sigma, floor=0.005 * float(np.max(np.abs(v - level))))
    info = {"glitches": int(hits.size)}
    if hits.size:
        info["glitch_times_us"] = [float((t0 + i * dt) * 1e6) for i in hits[:20]]
    return cond.repair_glitches(v, hits), info


def _debased(clean, sigma, dt, n_quiet, analysis, info):
    """(volts less baseline, baseline, quiet samples) of a channel whose first ``n_quiet`` samples are quiet."""
    from . import conditioning as cond

    base, quiet, binfo = cond.quiet_baseline(clean, sigma, dt, np.arange(clean.size) < n_quiet,
                                             hum_frequency=analysis.hum_frequency, search=not analysis.pre_trigger)
    info.update({"baseline_order": binfo["order"], "baseline_quiet_fraction": binfo["quiet_fraction"],
                 "noise_V": float(sigma)})
    if "hum_amplitude_V" in binfo:
        info["hum_amplitude_V"] = binfo["hum_amplitude_V"]
    return clean - base, base, quiet


def _station_channels(record, barset, analysis, n, n_base, persist) -> tuple[dict, dict]:
    """The further stations of a record that can be conditioned: name -> (bar, gauge, level, noise, quiet start
    [samples]); and name -> why not, for the others.

    A station's quiet start is the main channels' (``n_base`` samples), moved earlier by the incident wave's
    transit from a station farther from the specimen than the main incident gauge (it sees the wave first), and
    at most 90 % of the samples before the station's own first pulse (a soft precursor below the foot-detection
    level stays out).
    """
    from .io import station_name

    usable, unusable = {}, {}
    gi = barset.incident_gauge
    for bar_name in ("incident", "transmitted"):
        for k, gauge in enumerate(getattr(barset, f"{bar_name}_stations"), start=2):
            name = station_name(bar_name, k)
            if name not in record.stations:
                continue
            level, sigma = rest_level(record.stations[name])
            foot = find_foot(gauge.polarity * (record.stations[name][:n] - level), None, persist=persist)
            if foot is None:
                unusable[name] = f"no pulse found on the {name} channel (station at {gauge.distance * 1e3:g} mm)"
                continue
            early = (gauge.distance - gi.distance) / barset.incident.wave_speed / record.dt \
                if bar_name == "incident" else 0.0
            n_quiet = min(int(n_base - max(early, 0.0)), int(0.9 * foot))
            if n_quiet < MIN_BASELINE_SAMPLES:
                unusable[name] = (f"the pulse reaches the station at {gauge.distance * 1e3:g} mm ({name}) "
                                  f"{foot:.0f} samples into the record: no baseline before it (record a longer "
                                  f"pre-trigger)")
                continue
            usable[name] = (bar_name, gauge, level, sigma, n_quiet)
    return usable, unusable


def _analysis_reach(barset: "BarSet", analysis: "AnalysisOptions") -> float:
    """How long after the incident foot at its gauge the analysis may read the record [s], generously.

    The reflected wave's window at the incident gauge ends 2 d_i / c_i after the foot plus the window, the
    transmitted one (d_i / c_i + d_t / c_t) plus the window; an automatic window is shorter than twice the
    longer bar's transit, a given one is what it is. Half as much again, for leads, tapers and tails.
    """
    bi, bt = barset.incident, barset.transmitted
    ti, tt = barset.incident_gauge.distance / bi.wave_speed, barset.transmitted_gauge.distance / bt.wave_speed
    window = max(analysis.window_length or 0.0, 2 * max(bi.length / bi.wave_speed, bt.length / bt.wave_speed))
    return 1.5 * (max(2 * ti, ti + tt) + window)


def _first_pulses(raw, noise, gauges, dt, t0, persist) -> dict:
    """Channel -> (time [s], sign relative to the gauge's polarity) of its first pulse, or None."""
    from .conditioning import first_excursion

    out = {}
    for name, x in raw.items():
        level, sigma = noise[name]
        hit = first_excursion(x - level, sigma, persist=persist)
        out[name] = None if hit is None else (t0 + hit[0] * dt, hit[1] * gauges[name].polarity)
    return out


def _check_channels(pulses, barset) -> None:
    """Refuse a record whose channels are swapped or whose incident pulse is tensile, naming the likely cause."""
    from .errors import AnalysisError

    inc, tra = pulses["incident"], pulses["transmitted"]
    # the transmitted gauge sees its first wave (d_i + d_t) / c after the incident gauge does
    lag = (barset.incident_gauge.distance / barset.incident.wave_speed
           + barset.transmitted_gauge.distance / barset.transmitted.wave_speed)
    if inc is not None and tra is not None and tra[0] < inc[0] - 0.5 * lag:
        raise AnalysisError(f"the transmitted channel's first pulse ({tra[0] * 1e6:.1f} us) comes "
                            f"{(inc[0] - tra[0]) * 1e6:.0f} us before the incident channel's ({inc[0] * 1e6:.1f} us); "
                            f"the transmitted gauge sees it {lag * 1e6:.0f} us after: the channels look swapped "
                            f"(check [record] incident and transmitted)")
    if inc is not None and inc[1] < 0:
        p = barset.incident_gauge.polarity
        sign = "negative" if p > 0 else "positive"
        raise AnalysisError(f"the first pulse on the incident channel is tensile (a {sign} voltage with the "
                            f"incident gauge's polarity {p:+d}): check the polarity of the incident gauge (or the "
                            f"channel order)")


def _lowpass_all(volts, dt, foot, polarity, barset, analysis):
    """Every channel through the same zero-phase low-pass; what was done, for the provenance."""
    from .conditioning import lowpass, lowpass_cutoff, rise_time
    from .dispersion import second_mode_onset

    if not analysis.lowpass:
        return volts, {"applied": False}
    onset = min(second_mode_onset(b.radius, b.wave_speed, b.poisson_ratio)
                for b in (barset.incident, barset.transmitted))
    nyquist = 0.5 / dt
    if analysis.lowpass_cutoff:
        cutoff = min(analysis.lowpass_cutoff, 0.95 * nyquist)
        reason = f"{cutoff / 1e3:.0f} kHz: given (lowpass_cutoff)"
        out = {k: lowpass(v, dt, cutoff) for k, v in volts.items()}
    else:  # the cutoff is the bars' (the rise, read once the channel holds only what they carry, is reported)
        cutoff = lowpass_cutoff(None, onset, nyquist)[0]
        out = {k: lowpass(v, dt, cutoff) for k, v in volts.items()}
        reason = lowpass_cutoff(rise_time(polarity * out["incident"], foot, dt), onset, nyquist)[1]
    from .conditioning import LOWPASS_ORDER

    return out, {"applied": True, "cutoff_Hz": float(cutoff), "reason": reason,
                 "filter": f"Butterworth order {LOWPASS_ORDER}, forwards and backwards (zero phase)",
                 "second_mode_onset_Hz": float(onset)}


def _bar_strain(volts, gauge, bar):
    from .bridge import bar_strain

    return bar_strain(volts, bridge=gauge.bridge, gauge_factor=gauge.gauge_factor, excitation=gauge.excitation,
                      gain=gauge.gain, polarity=gauge.polarity, scale=gauge.scale, poisson_ratio=bar.poisson_ratio)


# --------------------------------------------------------------------------- stage 2: the window plan
#: The three waves: (name, bar, sign of the travel from the gauge to the face).
WAVES = (("incident", "incident", +1), ("reflected", "incident", -1), ("transmitted", "transmitted", -1))


@dataclass(frozen=True)
class WindowPlan:
    """The analysis window of a shot, on the record's sample grid.

    Attributes
    ----------
    t_foot, t_face0 : float
        Record time of the incident foot at its gauge and at the specimen's
        front face [s].
    lead, length : float
        Lead before ``t_face0`` and window length after it [s].
    source : str
        How the window length was chosen.
    span : (int, int)
        Half-open sample range of the window at the faces (record samples).
    carry_span : (int, int)
        Half-open sample range over which the waves are cut and carried
        (record samples at the faces): the span, or longer when a given
        window is shorter than the automatic one.
    ramp : int
        Raised-cosine taper at each end of a wave's window [samples].
    duration : float
        Incident pulse duration [s].
    duration_source : str
        How the duration was found.
    gauge_spans : dict
        Wave name -> (start, stop): fractional record-sample range of the
        wave's window at its gauge (the face window moved back by the travel
        time and any hand adjustment).
    distances : dict
        Wave name -> signed distance the wave is carried from its gauge to
        its face [m] (positive along its travel).
    travel_times : dict
        Wave name -> signed travel time from the gauge to the face [s].
    adjusts : dict
        Wave name -> hand alignment adjustment [s].
    """

    t_foot: float
    t_face0: float
    lead: float
    length: float
    source: str
    span: tuple
    ramp: int
    duration: float = float("nan")
    duration_source: str = ""
    gauge_spans: dict = field(default_factory=dict)
    distances: dict = field(default_factory=dict)
    travel_times: dict = field(default_factory=dict)
    adjusts: dict = field(default_factory=dict)
    carry_span: tuple = ()

    @property
    def k0(self) -> int:
        """First sample of the window."""
        return self.span[0]

    @property
    def k1(self) -> int:
        """One past the last sample of the window."""
        return self.span[1]

    def gauge_window_times(self, t_start, dt) -> dict:
        """Wave name -> (start, stop) record times of its window at its gauge [s]."""
        return {k: (t_start + a * dt, t_start + b * dt) for k, (a, b) in self.gauge_spans.items()}

    def last_sample(self, n_samples) -> int:
        """One past the last record sample any wave's window (with its margins) reaches."""
        reach = max(b for _, b in self.gauge_spans.values()) if self.gauge_spans else self.k1
        return min(int(n_samples), int(math.ceil(reach)) + int(0.1 * (self.k1 - self.k0)) + 2 * self.ramp + 16)

    def results(self) -> dict:
        """Scalars of the plan for the summary (units in the keys)."""
        return {"incident_foot_time_us": self.t_foot * 1e6, "pulse_duration_us": self.duration * 1e6,
                "pulse_duration_source": self.duration_source, "window_length_us": self.length * 1e6,
                "window_source": self.source}


def plan_window(foot: float, duration: float, dt: float, t_start: float, t_end: float, *,
                incident_gauge_distance: float, incident_wave_speed: float, incident_length: float,
                transmitted_gauge_distance: float, transmitted_wave_speed: float, transmitted_length: float,
                window_length: Optional[float] = None, free_time: Optional[float] = None) -> WindowPlan:
    """Choose the analysis window of a shot.

    The window starts 10 % of the pulse before the incident foot reaches the
    front face (less when the incident pulse ends less than that before the
    reflected wave returns to the incident gauge, so that the reflected
    window's lead holds none of it) and runs as long as the bars and the record allow, up to
    three pulse lengths: it ends before the reflected wave reaches the
    incident gauge (2 d_i / c_i after the foot), before echoes from the bars'
    far ends return (2 (L - d) / c), and before the record ends (the
    reflected and transmitted waves pass their gauges last). A window cut
    through a pulse's tail would ring through a dispersion correction and
    hide the specimen's unloading, so a long window is the safe default.

    Parameters
    ----------
    foot : float
        Fractional sample index of the incident foot at its gauge.
    duration : float
        Incident pulse duration [s].
    dt : float
        Sample interval [s].
    t_start, t_end : float
        Record times of the first and last samples [s].
    incident_gauge_distance, transmitted_gauge_distance : float
        Gauge distances from the specimen faces [m].
    incident_wave_speed, transmitted_wave_speed : float
        Bar wave speeds [m/s].
    incident_length, transmitted_length : float
        Bar lengths [m].
    window_length : float, optional
        A given window length [s]: the curves end there. The waves are still
        cut at their gauges over the automatic window when that is longer, so
        no window edge falls inside a pulse (a wave cut mid-pulse rings through
        the dispersion correction and breaks the force balance).
    free_time : float, optional
        How long after the incident foot reaches the specimen the waves stay
        free of overlaps and unresolved echoes [s], when something else than
        the bars' round trips above decides it (two-point separation,
        :mod:`shpb.separation`: the waves are then not cut at the incident
        gauge, so the reflected window's lead is not shortened either).

    Returns
    -------
    WindowPlan
        Without the per-wave gauge spans (see :func:`plan_analysis`).
    """
    di, ci = incident_gauge_distance, incident_wave_speed
    dtr, ct = transmitted_gauge_distance, transmitted_wave_speed
    w_free = min(2 * di / ci, 2 * (incident_length - di) / ci, 2 * (transmitted_length - dtr) / ct) \
        if free_time is None else free_time
    lead = min(0.1 * duration, 0.1 * w_free)
    # the reflected window opens `lead` before the reflected wave reaches the incident gauge (2 d_i / c_i after the
    # foot): it must open after the incident pulse has passed, or the incident tail becomes a reflected wave
    gap = 2 * di / ci - duration
    if gap < lead and free_time is None:  # separated waves are not cut at the gauge: no incident tail to keep out
        lead = max(gap, ramp_time(duration, dt) + 2 * dt)
    t_foot = t_start + foot * dt
    t_face0 = t_foot + di / ci
    auto, source = max(min(3 * duration, 0.97 * w_free - lead), duration), "automatic"
    w_rec = t_end - t_face0 - max(di / ci, dtr / ct) - 2 * ramp_time(duration, dt)
    if w_rec < auto:
        auto, source = max(w_rec, 0.5 * duration), "automatic, cut by the record's end"
    if window_length:  # a given window crops the curves; the waves are still cut whole (no edge to ring)
        source, carry = "given", max(window_length, auto)
    else:
        window_length = carry = auto
    k0 = int(np.ceil((t_face0 - lead - t_start) / dt))
    k1 = int(np.floor((t_face0 + window_length - t_start) / dt)) + 1
    kc = int(np.floor((t_face0 + carry - t_start) / dt)) + 1
    ramp = max(2, int(ramp_time(duration, dt) / dt))
    return WindowPlan(t_foot, t_face0, lead, window_length, source, (k0, k1), ramp, duration, carry_span=(k0, kc))


def plan_analysis(strains: GaugeStrains, barset: "BarSet", analysis: "AnalysisOptions", *,
                  duration: Optional[tuple] = None, free_time: Optional[float] = None) -> WindowPlan:
    """Stage 2: the incident pulse's duration, the analysis window and each wave's window at its gauge.

    The duration is measured on the incident channel (down to 5 % of its
    peak, :func:`pulse_end`), or taken as the striker's 2 L / c0 when the
    pulse does not end inside the record. Two-point separation
    (:func:`shpb.separation.separate_waves`) passes its own ``duration``
    (seconds, how it was found) and ``free_time`` (see :func:`plan_window`).

    Returns
    -------
    WindowPlan

    Raises
    ------
    AnalysisError
        The pulse does not end inside the record and there is no striker.
    """
    from .errors import AnalysisError

    dt, foot = strains.dt, strains.foot
    end = None if duration else pulse_end(strains.incident, foot, fraction=0.05)
    if duration:
        pulse, source = duration
    elif end is not None:
        pulse, source = (end - foot) * dt, "measured (incident pulse down to 5 % of its peak)"
    elif barset.striker is not None:
        pulse, source = barset.striker.pulse_duration, "striker 2L/c0"
    else:
        raise AnalysisError("the incident pulse does not end before the record does")
    bi, bt = barset.incident, barset.transmitted
    plan = plan_window(foot, pulse, dt, float(strains.time[0]), float(strains.time[-1]),
                       incident_gauge_distance=barset.incident_gauge.distance, incident_wave_speed=bi.wave_speed,
                       incident_length=bi.length, transmitted_gauge_distance=barset.transmitted_gauge.distance,
                       transmitted_wave_speed=bt.wave_speed, transmitted_length=bt.length,
                       window_length=analysis.window_length, free_time=free_time)
    adjusts = {"incident": 0.0, "reflected": analysis.reflected_adjust or 0.0,
               "transmitted": analysis.transmitted_adjust or 0.0}
    distances, travel, spans = {}, {}, {}
    for name, bar_name, sign in WAVES:
        gauge = barset.incident_gauge if bar_name == "incident" else barset.transmitted_gauge
        distances[name] = sign * gauge.distance
        travel[name] = distances[name] / getattr(barset, bar_name).wave_speed
        # a hand adjustment of the alignment: the wave is taken `adjust` seconds later at its gauge
        shift = travel[name] / dt - adjusts[name] / dt
        spans[name] = (plan.carry_span[0] - shift, plan.carry_span[1] - shift)
    return replace(plan, duration_source=source, gauge_spans=spans, distances=distances, travel_times=travel,
                   adjusts=adjusts)


# --------------------------------------------------------------------------- stage 3: waves at the faces
@dataclass(frozen=True)
class FaceWaves:
    """Stage 3: the incident, reflected and transmitted bar strains at the specimen faces.

    Attributes
    ----------
    time : ndarray
        Time at the faces [s]; 0 where the incident foot reaches the front face.
    dt : float
        Sample interval [s].
    incident, reflected, transmitted : ndarray
        Bar strains at the faces [1], compression positive (the reflected wave
        of a compression test is negative), as used by the analysis: with the
        dispersion correction when it is on.
    plain : dict
        Wave name -> the same wave moved by a pure delay (no dispersion
        correction), for comparison.
    dispersion : dict
        What the dispersion correction did (``applied`` and, when applied, its
        parameters and the largest change it made to each wave).
    weight : ndarray
        The window's taper at the faces [1], the same for the three waves
        (each cut at its gauge with the taper on the fractional sample grid
        and carried by its exact travel time): 1 where the waves are whole.
    noise_gains : dict
        Face force (``front``, ``back``) -> {channel name: gain over the
        window [1]} when its waves were not each cut from one channel: the
        force's noise is E A sqrt(sum (gain sigma_channel)^2) (two-point
        separation, :func:`shpb.separation.noise_gains`). Empty for the
        classic waves: u(F1) = E A sqrt(2) sigma_incident (two waves of one
        channel), u(F2) = E A sigma_transmitted.
    """

    time: np.ndarray
    dt: float
    incident: np.ndarray
    reflected: np.ndarray
    transmitted: np.ndarray
    plain: dict
    dispersion: dict
    weight: Optional[np.ndarray] = None
    noise_gains: dict = field(default_factory=dict)

    def wave(self, name) -> np.ndarray:
        """One wave by name (``incident``, ``reflected``, ``transmitted``)."""
        return getattr(self, name)

    @property
    def separated_bars(self) -> tuple:
        """The bars whose waves come from two-point separation (none: each wave cut at its gauge)."""
        return ()

    @property
    def provenance(self) -> dict:
        return {"step": "shift", "parameters": {"dispersion": self.dispersion}}

    def results(self) -> dict:
        return {"peak_incident_strain": float(np.max(self.incident)), "sample_interval_us": self.dt * 1e6}


def waves_at_faces(strains: GaugeStrains, plan: WindowPlan, barset: "BarSet", analysis: "AnalysisOptions") -> FaceWaves:
    """Stage 3: cut each wave out at its gauge and carry it to its specimen face.

    Each wave is moved over its gauge distance with the bar's
    Pochhammer-Chree dispersion (:func:`shpb.dispersion.propagate`, the
    fundamental mode's phase velocity up to the bar's second-mode onset and
    held there above) when the analysis option ``dispersion`` is on, else by a
    pure sub-sample delay; a hand adjustment moves it further by a pure delay.

    Returns
    -------
    FaceWaves
    """
    dt, (k0, k1), kc = strains.dt, plan.span, plan.carry_span[1]
    use_disp = bool(analysis.dispersion)
    faces, plains = {}, {}
    for name, bar_name, _ in WAVES:
        bar = getattr(barset, bar_name)
        chan = strains.incident if bar_name == "incident" else strains.transmitted
        g0, g1 = plan.gauge_spans[name]
        mover = None
        if use_disp:
            mover = _dispersion_mover(dt, plan.distances[name], bar, analysis.amplitude_factors)
        face, plain = carry_wave(chan, dt, g0, g1, plan.travel_times[name], plan.ramp, mover)
        adjust = plan.adjusts[name]
        if adjust:
            face, plain = delay(face, dt, -adjust), delay(plain, dt, -adjust)
        if max(k1, kc) > face.size:  # the window runs past the record's end: zeros there (flagged by the verdict)
            face = np.pad(face, (0, max(k1, kc) - face.size))
            plain = np.pad(plain, (0, max(k1, kc) - plain.size))
        faces[name], plains[name] = face[k0:k1], plain[k0:k1]
    time = float(strains.time[0]) + np.arange(k0, k1) * dt - plan.t_face0
    return FaceWaves(time=time, dt=dt, incident=faces["incident"], reflected=faces["reflected"],
                     transmitted=faces["transmitted"], plain=plains,
                     dispersion=_dispersion_record(use_disp, barset, analysis, dt, plan, faces, plains),
                     weight=taper_window(kc - k0, 0.0, float(kc - k0), plan.ramp)[: k1 - k0])


def _dispersion_mover(dt, distance, bar, amplitude_factors):
    from .dispersion import propagate, second_mode_onset

    # above the second mode's onset a fundamental-mode phase shift is not the whole story: those components
    # are moved rigidly (the phase velocity held at the onset's), not "corrected" as fundamental mode
    onset = second_mode_onset(bar.radius, bar.wave_speed, bar.poisson_ratio)

    def mover(segment):
        return propagate(segment, dt, distance, bar.radius, bar.wave_speed, bar.poisson_ratio,
                         amplitude_factors=amplitude_factors, max_frequency=onset)

    return mover


def _dispersion_record(applied, barset, analysis, dt, plan, faces, plains) -> dict:
    """The provenance of the dispersion correction (what, with which bar data, how much it changed)."""
    info = {"applied": applied}
    if not applied:
        return info
    from .dispersion import dispersion_info, second_mode_onset

    bi, bt = barset.incident, barset.transmitted
    info.update(dispersion_info(bi.radius, bi.wave_speed, bi.poisson_ratio, dt=dt,
                                amplitude_factors=analysis.amplitude_factors,
                                max_frequency=second_mode_onset(bi.radius, bi.wave_speed, bi.poisson_ratio)))
    info["distances_m"] = dict(plan.distances)
    if (bt.radius, bt.wave_speed, bt.poisson_ratio) != (bi.radius, bi.wave_speed, bi.poisson_ratio):
        info["transmitted_bar"] = dispersion_info(
            bt.radius, bt.wave_speed, bt.poisson_ratio, dt=dt, amplitude_factors=analysis.amplitude_factors,
            max_frequency=second_mode_onset(bt.radius, bt.wave_speed, bt.poisson_ratio))
    peak = max(float(np.max(np.abs(faces["incident"]))), 1e-30)
    for k in faces:
        info[f"max_change_{k}_percent_of_incident_peak"] = float(100 * np.max(np.abs(faces[k] - plains[k])) / peak)
    return info
