"""Baselines, pulse feet, windows and sub-sample time shifts of bar signals.

Pure functions on numpy arrays. Signals are bar strains with the package's
sign convention (compression positive) unless said otherwise.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


def noise_floor(signal, n_baseline):
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


def robust_noise(signal):
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


def find_foot(signal, n_baseline=None, *, k_sigma=8.0, min_fraction=0.05, foot_fraction=0.01):
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


def pulse_end(signal, i_start, *, fraction=0.1):
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


def delay(signal, dt, shift_time):
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


def taper_window(n, start, stop, ramp):
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


def carry_wave(channel, dt, start, stop, travel_time, ramp, mover=None):
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
    full[lo:hi] = moved[lo - a : hi - a]
    full_plain[lo:hi] = plain[lo - a : hi - a]
    return full, full_plain


def flat_top_run(volts):
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


def ramp_time(duration, dt):
    """Length of the raised-cosine taper at each end of a wave's window [s]: 2 % of the pulse."""
    return max(2 * dt, 0.02 * duration)


@dataclass(frozen=True)
class WindowPlan:
    """The analysis window of a shot, on the record's sample grid.

    Attributes
    ----------
    t_foot, t_face0 : float
        Record time of the incident foot at its gauge and at the specimen's
        front face [s].
    pre, window : float
        Lead before t_face0 and length after it [s].
    source : str
        How the window length was chosen.
    k0, k1 : int
        Half-open sample range of the window at the faces.
    ramp : int
        Taper length [samples].
    """

    t_foot: float
    t_face0: float
    pre: float
    window: float
    source: str
    k0: int
    k1: int
    ramp: int


def plan_window(foot, duration, dt, t_start, t_end, *, incident_distance, incident_speed, incident_length,
                transmitted_distance, transmitted_speed, transmitted_length, window=None):
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
    incident_distance, transmitted_distance : float
        Gauge distances from the specimen faces [m].
    incident_speed, transmitted_speed : float
        Bar wave speeds [m/s].
    incident_length, transmitted_length : float
        Bar lengths [m].
    window : float, optional
        A given window length [s] (used as is).

    Returns
    -------
    WindowPlan
    """
    di, ci, dtr, ct = incident_distance, incident_speed, transmitted_distance, transmitted_speed
    w_free = min(2 * di / ci, 2 * (incident_length - di) / ci, 2 * (transmitted_length - dtr) / ct)
    pre = min(0.1 * duration, 0.1 * w_free)
    t_foot = t_start + foot * dt
    t_face0 = t_foot + di / ci
    if window:
        source = "given"
    else:
        window, source = max(min(3 * duration, 0.97 * w_free - pre), duration), "automatic"
        w_rec = t_end - t_face0 - max(di / ci, dtr / ct) - 2 * ramp_time(duration, dt)
        if w_rec < window:
            window, source = max(w_rec, 0.5 * duration), "automatic, cut by the record's end"
    k0 = int(np.ceil((t_face0 - pre - t_start) / dt))
    k1 = int(np.floor((t_face0 + window - t_start) / dt)) + 1
    ramp = max(2, int(ramp_time(duration, dt) / dt))
    return WindowPlan(t_foot, t_face0, pre, window, source, k0, k1, ramp)
