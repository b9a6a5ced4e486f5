"""Signal conditioning of bar records: glitches, baselines over quiet spans, mains hum, zero-phase low-pass.

Pure functions on numpy arrays, used by the reduction's first stage
(:func:`shpb.pulses.condition_record`). A record channel is a sum of

* a baseline: the amplifier's offset, a slow drift and, on some rigs, mains
  hum; it is seen alone wherever no pulse passes the gauge, i.e. before the
  incident pulse and in the gaps between the passes of the waves, so it is
  fitted over every such quiet span (:func:`fit_baseline`, :func:`quiet_baseline`)
  with the lowest order the data justify (Schwarz's information criterion);
* isolated glitches (single-sample spikes from the digitiser or the cable),
  found against their neighbours and repaired (:func:`find_glitches`);
* broadband noise, cut by a zero-phase Butterworth low-pass
  (:func:`lowpass`) whose cutoff comes from the physics
  (:func:`lowpass_cutoff`): the bar's second-mode onset, above which the bar
  carries nothing a one-mode analysis can use, and which lies above the
  incident pulse's rise content (that is checked and reported).

Units: volts or strain in, the same out; times in seconds, frequencies in hertz.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Optional

import numpy as np
from numpy.typing import ArrayLike

#: Order of the Butterworth low-pass (applied forwards and backwards: twice this order in magnitude, no phase).
LOWPASS_ORDER = 4
#: Highest polynomial order of a baseline.
MAX_BASELINE_ORDER = 3
#: With a hum frequency given, the first pass takes samples within this share of the channel's swing as quiet.
HUM_COARSE = 0.05
#: Harmonics of the mains frequency fitted when a hum frequency is given.
HUM_HARMONICS = 3
#: Time over which the residual is averaged to tell a pulse from noise [s].
QUIET_SMOOTHING = 2e-6
#: A glitch stands out of its neighbours by this many noise standard deviations.
GLITCH_SIGMA = 8.0


def running_mean(values: ArrayLike, n: int) -> np.ndarray:
    """Centred running mean over ``n`` samples (shorter at the ends), O(N) by cumulative sums."""
    x = np.asarray(values, dtype=float)
    n = max(int(n), 1)
    if n == 1 or x.size == 0:
        return x.copy()
    c = np.concatenate(([0.0], np.cumsum(x)))
    i = np.arange(x.size)
    lo = np.clip(i - n // 2, 0, x.size)
    hi = np.clip(i - n // 2 + n, 0, x.size)
    return (c[hi] - c[lo]) / (hi - lo)


def _dilate(mask: np.ndarray, n: int) -> np.ndarray:
    """Grow the True runs of a boolean mask by ``n`` samples on each side."""
    if n <= 0 or not mask.any():
        return mask.copy()
    c = np.concatenate(([0], np.cumsum(mask.astype(np.int64))))
    i = np.arange(mask.size)
    lo = np.clip(i - n, 0, mask.size)
    hi = np.clip(i + n + 1, 0, mask.size)
    return (c[hi] - c[lo]) > 0


# --------------------------------------------------------------------------- glitches
def find_glitches(signal: ArrayLike, sigma: float, *, k_sigma: float = GLITCH_SIGMA, floor: float = 0.0) -> np.ndarray:
    """Indices of isolated single-sample spikes.

    A sample is a glitch when it departs from the median of its four
    neighbours (two each side) by more than ``k_sigma`` noise standard
    deviations (and ``floor``), and by more than three times the spread of
    those neighbours: a pulse's rise, however fast, moves its neighbours
    with it; a spike does not.

    Parameters
    ----------
    signal : array_like
        A record channel [V].
    sigma : float
        Its noise standard deviation [V] (e.g. :func:`shpb.pulses.robust_noise`).
    k_sigma : float
        Threshold in noise standard deviations.
    floor : float
        Smallest departure counted [V].

    Returns
    -------
    ndarray of int
    """
    x = np.asarray(signal, dtype=float)
    if x.size < 5:
        return np.zeros(0, dtype=int)
    a, b, c, d = x[:-4], x[1:-3], x[3:-1], x[4:]
    hi = np.maximum(np.maximum(a, b), np.maximum(c, d))
    lo = np.minimum(np.minimum(a, b), np.minimum(c, d))
    med = 0.5 * (a + b + c + d - hi - lo)  # the median of four: the mean of the middle two
    spread = hi - lo
    dev = np.abs(x[2:-2] - med)
    hit = (dev > max(k_sigma * sigma, floor)) & (dev > 3.0 * spread)
    return np.flatnonzero(hit) + 2


def repair_glitches(signal: ArrayLike, indices: ArrayLike) -> np.ndarray:
    """A copy of ``signal`` with each glitch replaced by the mean of its two neighbours."""
    x = np.array(signal, dtype=float)
    idx = np.asarray(indices, dtype=int)
    if idx.size:
        x[idx] = 0.5 * (x[idx - 1] + x[idx + 1])
    return x


# --------------------------------------------------------------------------- baselines
def baseline_basis(positions: ArrayLike, n: int, order: int, dt: float = 1.0, hum_frequency: Optional[float] = None,
                   harmonics: int = HUM_HARMONICS) -> np.ndarray:
    """Columns of a baseline model at sample ``positions`` of an ``n``-sample record: Legendre polynomials to
    ``order`` in the record's time mapped onto [-1, 1], then cos/sin of the hum frequency and its harmonics.

    Returns
    -------
    ndarray, shape (len(positions), order + 1 [+ 2 harmonics])
    """
    k = np.asarray(positions, dtype=float)
    u = 2.0 * k / (n - 1) - 1.0 if n > 1 else np.zeros(k.size)
    cols = [np.polynomial.legendre.legvander(u, order)]
    if hum_frequency:
        w = 2.0 * np.pi * hum_frequency * k * dt
        cols += [f(h * w)[:, None] for h in range(1, harmonics + 1) for f in (np.cos, np.sin)]
    return np.hstack(cols)


def _fit(k, y, n, dt, hum_frequency, max_order, fixed_order):
    """Choose and fit the baseline model on samples ``y`` at positions ``k``: (order, coefficients, hum, rss)."""
    # a polynomial is trusted only where quiet samples pin it down: fitted on the record's start alone, it
    # would be extrapolated over the rest, so the order is capped by the share of the record they span
    extent = (k[-1] - k[0]) / max(n - 1, 1)
    max_order = min(max_order, 0 if extent < 0.05 else 1 if extent < 0.5 else max_order)
    if extent < 0.5:  # a hum's phase is pinned down only by quiet samples on both sides of the pulses
        hum_frequency = None
    grid = np.linspace(0.0, n - 1.0, 512)
    best = None
    for order in ([fixed_order] if fixed_order is not None else range(max_order + 1)):
        a = baseline_basis(k, n, order, dt, hum_frequency)
        if a.shape[1] >= k.size:
            break
        coef, *_ = np.linalg.lstsq(a, y, rcond=None)
        if np.ptp(baseline_basis(grid, n, order, dt, hum_frequency) @ coef) > 10.0 * np.ptp(y):
            continue  # swings far beyond its samples: extrapolating wildly
        rss = float(np.sum((y - a @ coef) ** 2))
        bic = k.size * math.log(max(rss, 1e-300) / k.size) + a.shape[1] * math.log(k.size)
        if best is None or bic < best[0]:
            best = (bic, order, coef, hum_frequency, rss)
    return None if best is None else best[1:]


def _baseline_from(k, y, n, dt, hum_frequency, max_order=MAX_BASELINE_ORDER, fixed_order=None):
    """(baseline at every sample, info) from samples ``y`` at positions ``k``."""
    model = _fit(k, y, n, dt, hum_frequency, max_order, fixed_order)
    if model is None:  # too few quiet samples for any model: their mean
        return np.full(n, float(np.mean(y))), {"order": 0, "rms_V": 0.0}
    order, coef, hum, rss = model
    info = {"order": int(order), "rms_V": math.sqrt(rss / k.size)}
    if hum:
        amp = coef[order + 1:]
        info["hum_amplitude_V"] = [float(math.hypot(amp[2 * h], amp[2 * h + 1])) for h in range(amp.size // 2)]
    return baseline_basis(np.arange(n), n, order, dt, hum) @ coef, info


def fit_baseline(signal: ArrayLike, quiet: ArrayLike, *, dt: float = 1.0, hum_frequency: Optional[float] = None,
                 max_order: int = MAX_BASELINE_ORDER, fixed_order: Optional[int] = None) -> tuple[np.ndarray, dict]:
    """Least-squares baseline over the quiet samples, of the lowest order the data justify.

    Polynomials of order 0 to ``max_order`` (plus the hum terms, when a hum
    frequency is given) are fitted to the samples where ``quiet`` is True;
    the order with the smallest Schwarz (Bayesian) information criterion
    BIC = n ln(RSS/n) + p ln n is kept (Schwarz 1978), so a higher order is
    taken only when it lowers the residual by more than chance would. The
    highest order tried is capped by how much of the record the quiet samples
    span (order 0 below a twentieth, 1 below a half), since the baseline is
    extrapolated beyond them; a model that swings ten times further than its
    samples between them is not taken.

    Parameters
    ----------
    signal : array_like
        A record channel [V].
    quiet : array_like of bool
        Samples that hold no pulse.
    dt : float
        Sample interval [s] (for the hum terms).
    hum_frequency : float, optional
        Mains frequency [Hz]; its first :data:`HUM_HARMONICS` harmonics are fitted too.
    max_order : int
        Highest polynomial order tried.
    fixed_order : int, optional
        Use this order instead of choosing one.

    Returns
    -------
    baseline : ndarray
        The fitted baseline at every sample [V].
    info : dict
        ``order``, ``quiet_samples``, ``rms_V`` (residual standard deviation
        over the quiet samples) and ``hum_amplitude_V`` (with a hum frequency).

    References
    ----------
    .. [1] G. Schwarz, "Estimating the dimension of a model", Ann. Statist. 6,
       461-464 (1978), doi:10.1214/aos/1176344136.
    """
    x = np.asarray(signal, dtype=float)
    q = np.asarray(quiet, dtype=bool)
    idx = np.flatnonzero(q)
    if idx.size < 2:
        idx = np.arange(min(x.size, 2))
    idx = idx[:: max(1, idx.size // 20_000)]  # a strided subset keeps very long records cheap
    base, info = _baseline_from(idx.astype(float), x[idx], x.size, dt, hum_frequency, max_order, fixed_order)
    info["quiet_samples"] = int(q.sum())
    return base, info


def quiet_baseline(signal: ArrayLike, sigma: float, dt: float, initial: ArrayLike, *,
                   hum_frequency: Optional[float] = None, iterations: int = 5,
                   search: bool = True) -> tuple[np.ndarray, np.ndarray, dict]:
    """Baseline of a channel fitted over all its quiet spans, found by iteration.

    Starting from a fit of the ``initial`` span (the record before the
    incident foot), the quiet samples of the whole record are found against
    the current baseline (the means of blocks of 2 us within 4 of their noise
    units, sigma / sqrt(block), of it, two blocks round each pulse left out)
    and the baseline is refitted on them (:func:`fit_baseline`), until the
    quiet samples stop changing. A drift
    that the first span only hints at is thus confirmed by the gaps between
    the passes of the waves, and fitted over all of them. The search also
    starts from the span's median (pickup inside the span then stands out of
    it), and the start that finds more quiet samples wins.

    Parameters
    ----------
    signal : array_like
        A record channel [V], glitches repaired.
    sigma : float
        Its noise standard deviation [V].
    dt : float
        Sample interval [s].
    initial : array_like of bool
        Samples known to be pulse-free.
    hum_frequency : float, optional
        Mains frequency [Hz] to fit with the baseline. A hum bends the
        baseline by many times the noise, so the search then starts from a
        coarse pass (every sample within :data:`HUM_COARSE` of the channel's
        swing from the first fit) before the noise-tight one.
    iterations : int
        Largest number of refits.
    search : bool
        False: fit over the ``initial`` samples only, all of them (a span the
        user gives as quiet).

    Returns
    -------
    baseline : ndarray
        [V] at every sample.
    quiet : ndarray of bool
        The samples it was fitted on.
    info : dict
        As :func:`fit_baseline`, with ``quiet_fraction`` and ``iterations``.
    """
    x = np.asarray(signal, dtype=float)
    init = np.asarray(initial, dtype=bool)
    if not search:  # the span is quiet on the user's word
        base, info = fit_baseline(x, init, dt=dt, hum_frequency=hum_frequency)
        info.update(iterations=1, quiet_fraction=float(init.mean()) if init.size else 0.0)
        return base, init.copy(), info
    if not init.any():
        init = np.ones(x.size, dtype=bool)
    # block means: the running mean the quiet test reads, at one value per block (cheap on long records)
    m = max(8, int(round(QUIET_SMOOTHING / dt)))
    starts = np.arange(0, x.size, m)
    count = np.diff(np.append(starts, x.size))
    blocks = _Blocks(np.add.reduceat(x, starts) / count, starts + 0.5 * (count - 1), x.size, dt,
                     sigma / np.sqrt(count), np.add.reduceat(init.astype(np.int64), starts) == count)
    if not blocks.init.any():
        blocks.init[0] = True
    k0 = blocks.k[blocks.init]
    first = [_model_at(blocks, k0, blocks.y[blocks.init], None), np.full(blocks.y.size, float(np.median(x[init])))]
    found = [_grow(blocks, b, hum_frequency, iterations) for b in first]
    quiet_b, _ = max(found, key=lambda f: int(f[0].sum()))
    k, y = blocks.k[quiet_b], blocks.y[quiet_b]
    base, info = _baseline_from(k, y, x.size, dt, hum_frequency)
    quiet = np.repeat(quiet_b, count)
    info.update(quiet_samples=int(quiet.sum()), quiet_fraction=float(quiet.mean()), iterations=found[0][1])
    return base, quiet, info


@dataclass
class _Blocks:
    y: np.ndarray      # block means [V]
    k: np.ndarray      # block centres [samples]
    n: int             # samples in the record
    dt: float
    sigma: np.ndarray  # noise of each block mean [V]
    init: np.ndarray   # blocks wholly inside the known-quiet span


def _model_at(blocks, k, y, hum_frequency):
    """The baseline fitted on (k, y), at every block."""
    model = _fit(k, y, blocks.n, blocks.dt, hum_frequency, MAX_BASELINE_ORDER, None)
    if model is None:
        return np.full(blocks.y.size, float(np.mean(y)))
    order, coef, hum, _ = model
    return baseline_basis(blocks.k, blocks.n, order, blocks.dt, hum) @ coef


def _quiet_blocks(blocks, base):
    """Blocks whose mean stands within 4 noise units of the baseline, less two blocks round each active one.

    Quiet blocks cut off from the others by more than half the record (the tail of a long pulse's record, say)
    must also stand within 4 noise units of the baseline as a whole (their mean residual against
    sigma / sqrt(samples)): no quiet span nearby shows a trend they could belong to, and a stretch a few per
    cent off the baseline that noise lets through block by block would bend the baseline towards it (and, once
    bent, let more of itself through).
    """
    active = np.abs(blocks.y - base) > 4.0 * blocks.sigma
    quiet = ~_dilate(active, 2)
    idx = np.flatnonzero(quiet)
    if idx.size < 2:
        return quiet
    groups = np.split(idx, np.flatnonzero(np.diff(blocks.k[idx]) > 0.5 * blocks.n) + 1)
    if len(groups) > 1:
        for g in groups:
            u = math.sqrt(float(np.sum(blocks.sigma[g] ** 2))) / g.size
            if abs(float(np.mean(blocks.y[g] - base[g]))) > 4.0 * u:
                quiet[g] = False
    return quiet


def _grow(blocks, base, hum_frequency, iterations):
    """From a first baseline, alternate finding the quiet blocks and refitting on them until they settle."""
    quiet = _quiet_blocks(blocks, base) & blocks.init
    if quiet.sum() < 2:
        quiet = blocks.init.copy()
    base = _model_at(blocks, blocks.k[quiet], blocks.y[quiet], None)
    if hum_frequency:  # a hum bends the baseline more than a noise-tight test lets through: first a coarse pass,
        # every block within a twentieth of the channel's swing taken (the pulses stand far out), then the tight one
        coarse = (np.abs(blocks.y - base) < HUM_COARSE * float(np.ptp(blocks.y))) | quiet
        base = _model_at(blocks, blocks.k[coarse], blocks.y[coarse], hum_frequency)
    done = 0
    for done in range(1, iterations + 1):
        new = _quiet_blocks(blocks, base)
        if not new[blocks.init].any():  # keep at least the known-quiet span
            new = blocks.init.copy()
        if np.array_equal(new, quiet) and done > 1:
            break
        quiet = new
        base = _model_at(blocks, blocks.k[quiet], blocks.y[quiet], hum_frequency)
    return quiet, done


# --------------------------------------------------------------------------- channel diagnosis
def first_excursion(signal: ArrayLike, sigma: float, *, k_sigma: float = 8.0, min_fraction: float = 0.2,
                    persist: int = 1) -> Optional[tuple[int, int]]:
    """Index and sign of the first pulse on a baseline-free channel, whatever its sign.

    The first sample from which the magnitude stays above ``k_sigma`` noise
    standard deviations and ``min_fraction`` of the channel's largest
    magnitude held over three samples (not a glitch's height) for ``persist``
    samples with one sign: a spike or a short burst is not a pulse.

    Returns
    -------
    (index, sign) or None
        None when nothing stands out of the noise.
    """
    x = np.asarray(signal, dtype=float)
    if x.size <= persist:
        return None
    mag = np.abs(x)
    # the largest magnitude held for three samples in a row (a single spike does not set the level)
    held = float(np.minimum(np.minimum(mag[:-2], mag[1:-1]), mag[2:]).max()) if x.size > 2 else float(mag.max())
    level = max(k_sigma * sigma, min_fraction * held)
    if not held > level:
        return None
    i_up, i_down = first_run(x > level, persist), first_run(x < -level, persist)
    if i_up is None and i_down is None:
        return None
    if i_down is None or (i_up is not None and i_up < i_down):
        return i_up, 1
    return i_down, -1


def first_run(mask: ArrayLike, length: int) -> Optional[int]:
    """First index from which ``mask`` holds for ``length`` samples in a row (None if nowhere)."""
    idx = np.flatnonzero(np.asarray(mask, dtype=bool))
    length = max(int(length), 1)
    if idx.size < length:
        return None
    if length == 1:
        return int(idx[0])
    # runs of consecutive indices: where one breaks, the next starts
    starts = np.concatenate(([0], np.flatnonzero(np.diff(idx) != 1) + 1))
    ends = np.append(starts[1:], idx.size)
    long_enough = np.flatnonzero(ends - starts >= length)
    return int(idx[starts[long_enough[0]]]) if long_enough.size else None


# --------------------------------------------------------------------------- the low-pass
def rise_time(signal: ArrayLike, start: float, dt: float, *, low: float = 0.1, high: float = 0.9) -> Optional[float]:
    """10-90 % rise time of the first positive pulse after ``start`` [s].

    The pulse's height is its largest value before the signal first turns
    negative after rising through half of the record's maximum after ``start``.

    Returns
    -------
    float or None
        None when the pulse cannot be found.
    """
    s = np.asarray(signal, dtype=float)
    i0 = max(int(math.floor(start)), 0)
    seg = s[i0:]
    if seg.size < 3 or not np.max(seg) > 0:
        return None
    det = int(np.argmax(seg > 0.5 * np.max(seg)))
    neg = np.flatnonzero(seg[det:] < 0)
    stop = det + (int(neg[0]) if neg.size else seg.size - det)
    height = float(np.max(seg[:stop]))
    i_lo = int(np.argmax(seg[:stop] >= low * height))
    i_hi = int(np.argmax(seg[:stop] >= high * height))
    return max(i_hi - i_lo, 1) * dt


def lowpass_cutoff(rise: Optional[float], second_mode: float, nyquist: float) -> tuple[float, str]:
    """The automatic cutoff of the low-pass [Hz] and why it was chosen.

    The bar's second-mode onset: above it a bar carries energy in more than
    one mode, which neither a delay nor a one-mode dispersion correction moves
    to the faces, so nothing there is signal to a Kolsky analysis; below it
    lies the content of every wave a bar delivers whole, including what is
    faster than the incident rise (the specimen's yield knee and ring-up in the
    reflected and transmitted waves: a cutoff at a few times the incident
    rise's bandwidth rounds the yield knee off). At most 0.8 of the Nyquist
    frequency. The incident rise's bandwidth 0.35 / t_rise (common practice
    for the 10-90 % rise of a band-limited step) is reported beside it; a
    rise faster than the cutoff is one the bar itself has already blunted.

    Parameters
    ----------
    rise : float or None
        10-90 % rise time of the incident pulse [s].
    second_mode : float
        The bar's second-mode onset [Hz] (:func:`shpb.dispersion.second_mode_onset`).
    nyquist : float
        Half the sample rate [Hz].

    Returns
    -------
    cutoff : float
        [Hz].
    reason : str
        One line for the summary.
    """
    top, why = ((second_mode, "the bars' second-mode onset") if second_mode <= 0.8 * nyquist
                else (0.8 * nyquist, "0.8 of the Nyquist frequency (below the bars' second-mode onset)"))
    if rise is None:
        return top, f"{top / 1e3:.0f} kHz: {why}; no incident rise measured"
    band = 0.35 / rise
    where = "below it" if band < top else "above it: the bar has blunted the rise"
    return top, (f"{top / 1e3:.0f} kHz: {why}; the incident rise ({rise * 1e6:.2f} us, 10-90 %) has its "
                 f"bandwidth 0.35/t_rise = {band / 1e3:.0f} kHz {where}")


def lowpass(signal: ArrayLike, dt: float, cutoff: float, order: int = LOWPASS_ORDER) -> np.ndarray:
    """Zero-phase Butterworth low-pass: the response of the filter applied forwards and backwards.

    Forward-backward filtering with a digital Butterworth filter of order N
    has zero phase and the magnitude response of one pass squared,
    |H(f)|^2 = 1 / (1 + (tan(pi f dt) / tan(pi f_c dt))^(2 N)) (the bilinear
    transform's frequency warping). That response is applied here in the
    frequency domain, to the signal extended at both ends by its odd
    reflection (as forward-backward filtering pads, Gustafsson 1996) over
    eight periods of the cutoff, so the filter's own response has died out
    before the extension's ends. Every channel filtered alike keeps its timing.

    Parameters
    ----------
    signal : array_like
        Samples (baseline removed).
    dt : float
        Sample interval [s].
    cutoff : float
        Cutoff frequency f_c [Hz] (the single pass's -3 dB point; -6 dB after both).
    order : int
        Butterworth order N of one pass.

    Returns
    -------
    ndarray
        The filtered samples.

    References
    ----------
    .. [1] S. Butterworth, "On the theory of filter amplifiers", Wireless
       Engineer 7, 536-541 (1930).
    .. [2] A. V. Oppenheim and R. W. Schafer, *Discrete-Time Signal
       Processing*, 3rd ed., Pearson (2010), sec. 7.2 (bilinear transformation).
    .. [3] F. Gustafsson, "Determining the initial states in forward-backward
       filtering", IEEE Trans. Signal Process. 44, 988-992 (1996).
    """
    from .dispersion import _fast_length

    x = np.asarray(signal, dtype=float)
    n = x.size
    if n < 3:
        return x.copy()
    pad = int(min(n - 1, max(3 * int(order), math.ceil(8.0 / (cutoff * dt)))))
    ext = np.concatenate((2.0 * x[0] - x[pad:0:-1], x, 2.0 * x[-1] - x[-2:-pad - 2:-1]))
    m = _fast_length(ext.size + pad)
    gain = lowpass_gain(np.fft.rfftfreq(m, dt), dt, cutoff, order)
    return np.fft.irfft(np.fft.rfft(ext, m) * gain, m)[pad:pad + n]


def lowpass_gain(frequency: ArrayLike, dt: float, cutoff: float, order: int = LOWPASS_ORDER) -> np.ndarray:
    """Magnitude response of :func:`lowpass` (both passes) at ``frequency`` [Hz]:
    1 / (1 + (tan(pi f dt) / tan(pi f_c dt))^(2 N)), zero at and above the Nyquist frequency's warped infinity."""
    f = np.asarray(frequency, dtype=float)
    with np.errstate(over="ignore", divide="ignore"):
        ratio = np.tan(np.pi * np.minimum(f * dt, 0.5)) / math.tan(math.pi * cutoff * dt)
        gain = 1.0 / (1.0 + ratio ** (2 * int(order)))
    gain[~np.isfinite(ratio)] = 0.0
    return gain
