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


def find_foot(signal: ArrayLike, n_baseline: Optional[int] = None, *, k_sigma: float = 8.0, min_fraction: float = 0.05,
              foot_fraction: float = 0.01) -> Optional[float]:
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
    if n_baseline is None:
        _, sigma = robust_noise(s)
        n_baseline = 0
    else:
        _, sigma = noise_floor(s, n_baseline)
    peak = float(np.max(s[n_baseline:])) if s.size > n_baseline else 0.0
    if peak <= 0 or peak < k_sigma * sigma:
        return None
    level = max(k_sigma * sigma, min_fraction * peak)
    above = s[n_baseline:] > level
    if not above.any():
        return None
    i1 = int(np.argmax(above)) + n_baseline
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

    The search starts at the pulse's peak (the largest value before the
    signal first changes sign after ``i_start``).

    Returns
    -------
    int or None
        None when the pulse does not come down before the end of the record.
    """
    s = np.asarray(signal, dtype=float)
    i0 = int(np.floor(i_start))
    seg = s[i0:]
    neg = np.flatnonzero(seg < 0)
    stop = int(neg[0]) if neg.size else seg.size
    if stop == 0:
        return None
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


def taper_window(n: int, start: float, stop: float, ramp: int) -> np.ndarray:
    """A 0–1 mask of length ``n``: 1 on ``[start, stop)``, raised-cosine ramps of ``ramp`` samples just inside.

    Tapering the window's edges keeps a cut-out pulse free of steps, so a
    frequency-domain shift does not ring.
    """
    w = np.zeros(int(n))
    start, stop = max(int(start), 0), min(int(stop), int(n))
    if stop <= start:
        return w
    w[start:stop] = 1.0
    ramp = int(min(ramp, (stop - start) // 2))
    if ramp > 0:
        r = 0.5 - 0.5 * np.cos(np.pi * (np.arange(ramp) + 0.5) / ramp)
        w[start : start + ramp] = r
        w[stop - ramp : stop] = r[::-1]
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
class GaugeStrains:
    """Stage 1 of a reduction: both channels as bar strains at their gauges.

    Attributes
    ----------
    time : ndarray
        Record time [s] (uniform).
    dt : float
        Sample interval [s].
    incident, transmitted : ndarray
        Bar strain at the incident and transmitted gauges [1], compression
        positive, baseline removed, channel scale applied.
    volts_incident, volts_transmitted : ndarray
        The recorded voltages [V], as read.
    baseline_incident, baseline_transmitted : float
        Baseline levels removed from the volts [V].
    baseline_samples : int
        Leading samples the baselines and noise come from.
    noise_incident, noise_transmitted : float
        Standard deviation of each bar strain over the baseline [1].
    foot : float
        Fractional sample index of the incident wave's foot at its gauge.
    foot_source : str
        ``found`` or ``given`` (the analysis option ``incident_start``).
    """

    time: np.ndarray
    dt: float
    incident: np.ndarray
    transmitted: np.ndarray
    volts_incident: np.ndarray
    volts_transmitted: np.ndarray
    baseline_incident: float
    baseline_transmitted: float
    baseline_samples: int
    noise_incident: float
    noise_transmitted: float
    foot: float
    foot_source: str

    @property
    def provenance(self) -> dict:
        return {"step": "bridge", "parameters": {"baseline_samples": self.baseline_samples,
                                                 "incident_foot": self.foot_source}}


def condition_record(record: "Record", barset: "BarSet", analysis: "AnalysisOptions") -> GaugeStrains:
    """Stage 1: find the incident foot and the baselines, and convert both channels to bar strain.

    The baseline level is the mean of the quiet record start: the
    ``pre_trigger`` span when given, otherwise 90 % of the samples before the
    incident foot (found on a record-wide robust level and noise,
    :func:`robust_noise`, then :func:`find_foot`). Volts become strain through
    the exact bridge equations of :func:`shpb.bridge.bar_strain`.

    Parameters
    ----------
    record : shpb.io.Record
    barset : shpb.setup.BarSet
    analysis : shpb.setup.AnalysisOptions
        ``pre_trigger`` and ``incident_start`` are used.

    Returns
    -------
    GaugeStrains

    Raises
    ------
    InputError
        ``incident_start`` outside the record.
    AnalysisError
        No incident pulse, or too few samples before it.
    """
    from .errors import AnalysisError, InputError

    dt, n, t0 = record.dt, record.time.size, float(record.time[0])
    raw_i, raw_t = record.incident, record.transmitted
    polarity = barset.incident_gauge.polarity
    if analysis.pre_trigger:
        n_pre = min(int(analysis.pre_trigger / dt), n // 2)
        level = noise_floor(raw_i, n_pre)[0]
    else:  # first pass: level and noise from the whole record
        n_pre = None
        level = robust_noise(raw_i)[0]
    if analysis.incident_start is not None:
        foot, source = (analysis.incident_start - t0) / dt, "given"
        if not 0 <= foot < n:
            raise InputError(f"{analysis.incident_start * 1e6:g} us is outside the record "
                             f"({t0 * 1e6:g} to {record.time[-1] * 1e6:g} us)", "analysis.incident_start")
    else:
        # the bridge is monotonic: the foot can be found on the sign-corrected volts
        found, source = find_foot(polarity * (raw_i - level), n_pre), "found"
        if found is None:
            raise AnalysisError("no incident pulse found on the incident channel (nothing rises above 8x its "
                                "noise)")
        foot = found
    if foot < MIN_BASELINE_SAMPLES:
        raise AnalysisError(f"the incident pulse starts {foot:.0f} samples into the record: no "
                            f"pre-trigger baseline (record at least {MIN_BASELINE_SAMPLES} samples before the pulse)")
    # second pass: the baseline is the whole quiet part before the foot, less a margin
    n_base = max(MIN_BASELINE_SAMPLES, int(0.9 * foot)) if n_pre is None else n_pre
    base_i, base_t = noise_floor(raw_i, n_base)[0], noise_floor(raw_t, n_base)[0]
    si = _bar_strain(raw_i - base_i, barset.incident_gauge, barset.incident)
    st = _bar_strain(raw_t - base_t, barset.transmitted_gauge, barset.transmitted)
    return GaugeStrains(time=record.time, dt=dt, incident=si, transmitted=st, volts_incident=raw_i,
                        volts_transmitted=raw_t, baseline_incident=base_i, baseline_transmitted=base_t,
                        baseline_samples=n_base, noise_incident=noise_floor(si, n_base)[1],
                        noise_transmitted=noise_floor(st, n_base)[1], foot=float(foot), foot_source=source)


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
    front face and runs as long as the bars and the record allow, up to
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
        A given window length [s] (used as is).
    free_time : float, optional
        How long after the incident foot reaches the specimen the waves stay
        free of overlaps and unresolved echoes [s], when something else than
        the bars' round trips above decides it (two-point separation,
        :mod:`shpb.separation`).

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
    t_foot = t_start + foot * dt
    t_face0 = t_foot + di / ci
    if window_length:
        source = "given"
    else:
        window_length, source = max(min(3 * duration, 0.97 * w_free - lead), duration), "automatic"
        w_rec = t_end - t_face0 - max(di / ci, dtr / ct) - 2 * ramp_time(duration, dt)
        if w_rec < window_length:
            window_length, source = max(w_rec, 0.5 * duration), "automatic, cut by the record's end"
    k0 = int(np.ceil((t_face0 - lead - t_start) / dt))
    k1 = int(np.floor((t_face0 + window_length - t_start) / dt)) + 1
    ramp = max(2, int(ramp_time(duration, dt) / dt))
    return WindowPlan(t_foot, t_face0, lead, window_length, source, (k0, k1), ramp, duration)


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
    volts = barset.incident_gauge.polarity * (strains.volts_incident - strains.baseline_incident)
    end = None if duration else pulse_end(volts, foot, fraction=0.05)  # on the volts: the bridge is monotonic
    if duration:
        duration, source = duration
    elif end is not None:
        duration, source = (end - foot) * dt, "measured (incident pulse down to 5 % of its peak)"
    elif barset.striker is not None:
        duration, source = barset.striker.pulse_duration, "striker 2L/c0"
    else:
        raise AnalysisError("the incident pulse does not end before the record does")
    bi, bt = barset.incident, barset.transmitted
    plan = plan_window(foot, duration, dt, float(strains.time[0]), float(strains.time[-1]),
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
        spans[name] = (plan.k0 - shift, plan.k1 - shift)
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
    """

    time: np.ndarray
    dt: float
    incident: np.ndarray
    reflected: np.ndarray
    transmitted: np.ndarray
    plain: dict
    dispersion: dict

    def wave(self, name) -> np.ndarray:
        """One wave by name (``incident``, ``reflected``, ``transmitted``)."""
        return getattr(self, name)

    @property
    def provenance(self) -> dict:
        return {"step": "shift", "parameters": {"dispersion": self.dispersion}}

    def results(self) -> dict:
        return {"peak_incident_strain": float(np.max(self.incident)), "sample_interval_us": self.dt * 1e6}


def waves_at_faces(strains: GaugeStrains, plan: WindowPlan, barset: "BarSet", analysis: "AnalysisOptions") -> FaceWaves:
    """Stage 3: cut each wave out at its gauge and carry it to its specimen face.

    Each wave is moved over its gauge distance with the bar's
    Pochhammer-Chree dispersion (:func:`shpb.dispersion.propagate`) when the
    analysis option ``dispersion`` is on, else by a pure sub-sample delay;
    a hand adjustment moves it further by a pure delay.

    Returns
    -------
    FaceWaves
    """
    dt, (k0, k1) = strains.dt, plan.span
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
        if k1 > face.size:  # the window runs past the record's end: zeros there (flagged by the verdict)
            face, plain = np.pad(face, (0, k1 - face.size)), np.pad(plain, (0, k1 - plain.size))
        faces[name], plains[name] = face[k0:k1], plain[k0:k1]
    time = float(strains.time[0]) + np.arange(k0, k1) * dt - plan.t_face0
    return FaceWaves(time=time, dt=dt, **faces, plain=plains,
                     dispersion=_dispersion_record(use_disp, barset, analysis, dt, plan, faces, plains))


def _dispersion_mover(dt, distance, bar, amplitude_factors):
    from .dispersion import propagate

    def mover(segment):
        return propagate(segment, dt, distance, bar.radius, bar.wave_speed, bar.poisson_ratio,
                         amplitude_factors=amplitude_factors)

    return mover


def _dispersion_record(applied, barset, analysis, dt, plan, faces, plains) -> dict:
    """The provenance of the dispersion correction (what, with which bar data, how much it changed)."""
    info = {"applied": applied}
    if not applied:
        return info
    from .dispersion import dispersion_info

    bi, bt = barset.incident, barset.transmitted
    info.update(dispersion_info(bi.radius, bi.wave_speed, bi.poisson_ratio, dt=dt,
                                amplitude_factors=analysis.amplitude_factors))
    info["distances_m"] = dict(plan.distances)
    if (bt.radius, bt.wave_speed, bt.poisson_ratio) != (bi.radius, bi.wave_speed, bi.poisson_ratio):
        info["transmitted_bar"] = dispersion_info(bt.radius, bt.wave_speed, bt.poisson_ratio, dt=dt,
                                                  amplitude_factors=analysis.amplitude_factors)
    peak = max(float(np.max(np.abs(faces["incident"]))), 1e-30)
    for k in faces:
        info[f"max_change_{k}_percent_of_incident_peak"] = float(100 * np.max(np.abs(faces[k] - plains[k])) / peak)
    return info
