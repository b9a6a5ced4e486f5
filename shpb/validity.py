"""Is the shot valid? Equilibrium, strain-rate plateau, yield point and bar/record checks.

Each check is a small function on arrays; those that judge return
:class:`Flag` objects (``code``, ``severity``, ``message``) or None. Severity
``error`` means the curve must not be used; ``warning`` means use it with care;
``info`` is for the record.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, field
from typing import TYPE_CHECKING, Optional

import numpy as np
from numpy.typing import ArrayLike

if TYPE_CHECKING:  # pragma: no cover
    from .kolsky import KolskyCurves
    from .pulses import FaceWaves, GaugeStrains, WindowPlan
    from .setup import AnalysisOptions, BarSet, Specimen

#: Largest |R| counted as force equilibrium (Ravichandran & Subhash 1994).
EQUILIBRIUM_THRESHOLD = 0.05
#: Coefficient of variation of the strain rate above which it is not near-constant (common practice).
RATE_CV_LIMIT = 0.10
#: Peak bar stress, as a fraction of the bar's yield strength, that earns a warning (common practice).
BAR_STRESS_WARNING = 0.90
#: Time over which R(t) is averaged before the equilibrium test [s]: single-sample recorder noise must not
#: break equilibrium, while the ring-up of a specimen transit (a microsecond and more) is not smoothed away.
EQUILIBRIUM_AVERAGING = 0.25e-6
#: Chance that noise alone carries R(t) outside its band somewhere in a sound shot's loading (the band's
#: coverage, shared over the loading's independent noise samples: Sidak 1967).
EQUILIBRIUM_FALSE_ALARM = 0.01
#: Smallest share of the loading that must be in equilibrium for a shot to be valid: below it the valid part
#: is the end of the loading, after the yield point and most of the test (Davies & Hunter 1963, from memory:
#: equilibrium after a few transits, early in the test).
MIN_VALID_FRACTION = 0.5
#: Fewest specimen wave transits before equilibrium that physics allows (a force must cross the specimen
#: before the back face feels it; a few transits are usual: Davies & Hunter 1963; Ravichandran & Subhash 1994).
MIN_EQUILIBRIUM_TRANSITS = 1.0
#: Apparent (fitted) specimen modulus above this multiple of the given one: the strain is too small
#: (a Hopkinson-bar modulus is lower than the true one, never much higher: common practice).
MODULUS_EXCESS = 1.5
#: Front/back force lag over the rise beyond [0, transit] [s]: warning above the first, error above the second
#: (a 10 mm error in a gauge distance on steel bars is 2 us).
ALIGNMENT_WARNING, ALIGNMENT_ERROR = 0.6e-6, 1.5e-6
#: Largest lead of the reflected wave's rise over the incident wave's at the front face [s] (a reflection
#: starts with its incident wave; the margin covers the two waves' different shapes: common practice).
REFLECTED_LEAD = 2.0e-6
#: Steady back/front force ratio over the loading beyond which a scale is wrong (common practice).
FORCE_RATIO_LIMIT = 1.2
#: Measured incident peak over the striker's prediction: outside the first pair a warning, outside the second
#: an error (a plastic pulse shaper lowers the peak; nothing raises it).
STRIKER_WARNING, STRIKER_ERROR = (0.85, 1.10), (0.55, 1.10)
#: Relative difference between a bar's modulus and rho c0^2 of its measured wave speed that earns a flag
#: (warning; error above the second).
MODULUS_SPEED_WARNING, MODULUS_SPEED_ERROR = 0.02, 0.05
#: A pulse's top held within noise of one level over this share of the pulse, and this share of its top 10 %,
#: is a flat top (an amplifier saturating below the recorder's range).
FLAT_TOP_SHARE, FLAT_TOP_CORE = 0.15, 0.7


@dataclass(frozen=True)
class Flag:
    """A finding about a shot: ``code`` (stable identifier), ``severity`` and a one-line ``message``."""

    code: str
    severity: str  # "info" | "warning" | "error"
    message: str

    def as_dict(self):
        return asdict(self)


def loading_region(strain_rate: ArrayLike, force_mean: ArrayLike, *, force_fraction: float = 0.1,
                   rate_fraction: float = 0.5) -> Optional[tuple[int, int]]:
    """Index range of the loading part of a shot.

    From where the mean face force first exceeds ``force_fraction`` of its
    peak, to the last sample where the strain rate is at least
    ``rate_fraction`` of its plateau (the median of the rates above half the
    maximum rate) — after that the specimen is unloading.

    Returns
    -------
    (start, stop) : tuple of int, or None
        Half-open index range; None if there is no loading.
    """
    rate = np.asarray(strain_rate, dtype=float)
    f = np.asarray(force_mean, dtype=float)
    if not np.any(f > 0) or not np.any(rate > 0):
        return None
    start = int(np.argmax(f > force_fraction * np.nanmax(f)))
    high = rate[rate >= 0.5 * np.nanmax(rate)]
    plateau = float(np.median(high))
    on = np.flatnonzero((rate >= rate_fraction * plateau) & (np.arange(rate.size) >= start))
    if on.size == 0:
        return None
    return start, int(on[-1]) + 1


def usable_loading_region(strain_rate: ArrayLike, force_mean: ArrayLike,
                          usable: Optional[ArrayLike] = None) -> Optional[tuple[int, int]]:
    """The loading part (:func:`loading_region`) kept inside the samples where every wave has its full weight.

    Parameters
    ----------
    usable : array_like of bool, optional
        Samples outside the window's closing taper; None: all.

    Returns
    -------
    (start, stop) : tuple of int, or None
        Half-open index range; None when no loading is left.
    """
    region = loading_region(strain_rate, force_mean)
    if region is not None and usable is not None:  # the valid part stays where every wave has its full weight
        full = np.flatnonzero(np.asarray(usable, dtype=bool))
        a, b = (max(region[0], int(full[0])), min(region[1], int(full[-1]) + 1)) if full.size else (0, 0)
        region = (a, b) if b - a > 1 else None
    return region


def averaging_samples(dt: float, averaging: float = EQUILIBRIUM_AVERAGING) -> int:
    """Samples of the moving average over ``averaging`` [s] at time step ``dt`` [s] (at least one)."""
    return max(1, round(averaging / dt))


def moving_average(values: ArrayLike, n: int) -> np.ndarray:
    """Centred moving average over ``n`` samples, NaN-aware (NaN where the window holds no number)."""
    x = np.asarray(values, dtype=float)
    n = int(n)
    if n <= 1:
        return x.copy()
    ok = np.isfinite(x)
    kernel = np.ones(n)
    num = np.convolve(np.where(ok, x, 0.0), kernel, mode="same")
    cnt = np.convolve(ok.astype(float), kernel, mode="same")
    with np.errstate(invalid="ignore", divide="ignore"):
        out = num / cnt
    out[cnt == 0] = np.nan
    return out


def equilibrium_onset(ratio: ArrayLike, region: tuple[int, int],
                      threshold: "float | ArrayLike" = EQUILIBRIUM_THRESHOLD) -> Optional[int]:
    """First index of ``region`` from which |R| stays at or below ``threshold`` to the region's end.

    Parameters
    ----------
    ratio : array_like
        Equilibrium factor R(t) [1] (NaN where the forces are too small).
    region : (int, int)
        Half-open index range (the loading part).
    threshold : float or array_like
        Largest |R| counted as equilibrium; 0.05 after Ravichandran &
        Subhash (1994), J. Am. Ceram. Soc. 77:263–267; or one limit per
        sample (the threshold widened by the noise, :func:`equilibrium_limit`).

    Returns
    -------
    int or None
        None if the shot is not in equilibrium at the end of the region.
    """
    a, b = region
    r = np.asarray(ratio, dtype=float)[a:b]
    limit = np.asarray(threshold, dtype=float)
    if limit.ndim:
        limit = limit[a:b]
    bad = ~(np.abs(r) <= limit)  # NaN counts as not in equilibrium
    if bad.size == 0 or bad[-1]:
        return None
    idx = np.flatnonzero(bad)
    return a + (int(idx[-1]) + 1 if idx.size else 0)


def equilibrium_ratio_uncertainty(force_front: ArrayLike, force_back: ArrayLike, u_front: float,
                                  u_back: float) -> np.ndarray:
    """Standard uncertainty of R = 2 (F1 - F2) / (F1 + F2) from independent noise on the face forces.

    The GUM's law of propagation for uncorrelated inputs, first order
    (JCGM 100:2008, eq. 10): u(R)^2 = (dR/dF1)^2 u(F1)^2 + (dR/dF2)^2 u(F2)^2
    with dR/dF1 = 4 F2 / (F1 + F2)^2 and dR/dF2 = -4 F1 / (F1 + F2)^2.

    Parameters
    ----------
    force_front, force_back : array_like
        Face forces F1, F2 [N].
    u_front, u_back : float or array_like
        Standard uncertainties of F1 and F2 from noise [N] (one value, or one
        per sample).

    Returns
    -------
    ndarray
        u(R) [1] (inf where F1 + F2 = 0).

    References
    ----------
    .. [1] JCGM 100:2008, *Evaluation of measurement data — Guide to the
       expression of uncertainty in measurement* (GUM), sec. 5.1.2, eq. (10).
    """
    f1 = np.asarray(force_front, dtype=float)
    f2 = np.asarray(force_back, dtype=float)
    s = f1 + f2
    with np.errstate(invalid="ignore", divide="ignore"):
        u = 4.0 * np.sqrt((f2 * u_front) ** 2 + (f1 * u_back) ** 2) / (s * s)
    return np.where(s != 0, u, np.inf)


def coverage_factor(n_independent: float, false_alarm: float = EQUILIBRIUM_FALSE_ALARM) -> float:
    """Coverage factor k so that n independent Gaussian samples all stay within +-k sigma with probability
    1 - ``false_alarm``: k = Phi^-1(1 - (1 - (1 - alpha)^(1/n)) / 2) (Sidak 1967).

    References
    ----------
    .. [1] Z. Sidak, "Rectangular confidence regions for the means of
       multivariate normal distributions", J. Am. Stat. Assoc. 62, 626-633
       (1967), doi:10.1080/01621459.1967.10482935.
    """
    from statistics import NormalDist  # Wichura's AS 241: full double precision in the tails, no scipy import

    n = max(float(n_independent), 1.0)
    per_sample = -math.expm1(math.log1p(-false_alarm) / n)  # 1 - (1 - alpha)^(1/n), exact for small alpha
    return float(-NormalDist().inv_cdf(0.5 * per_sample))


def equilibrium_limit(u_ratio: ArrayLike, threshold: float, k: float) -> np.ndarray:
    """The limit |R| is tested against at each sample: the threshold widened by k standard uncertainties."""
    return threshold + k * np.asarray(u_ratio, dtype=float)


def alignment_lag(force_front: ArrayLike, force_back: ArrayLike, dt: float) -> float:
    """Lag of the back-face force behind the front-face force over a rise [s].

    Least squares of F1 - F2 = lag * dF/dt (F the mean force): to first
    order in the lag, F2(t) = F1(t - lag). In a sound shot the back face
    lags by less than a specimen transit; a wave carried by a wrong distance
    or speed shifts it by the error (a gauge 10 mm off on steel bars: 2 us).

    Parameters
    ----------
    force_front, force_back : array_like
        F1, F2 over the rise [N].
    dt : float
        Sample interval [s].

    Returns
    -------
    float
        [s]; NaN for fewer than 3 samples or a flat force.
    """
    f1 = np.asarray(force_front, dtype=float)
    f2 = np.asarray(force_back, dtype=float)
    if f1.size < 3:
        return math.nan
    d = np.gradient(0.5 * (f1 + f2), dt)
    den = float(np.dot(d, d))
    return float(np.dot(f1 - f2, d) / den) if den > 0 else math.nan


def rate_plateau(strain_rate: ArrayLike, mask: ArrayLike) -> dict:
    """Mean, standard deviation and coefficient of variation of the strain rate over ``mask``.

    Returns
    -------
    dict
        ``mean_per_s``, ``std_per_s``, ``cv`` (NaN when the mask is empty).
    """
    r = np.asarray(strain_rate, dtype=float)[np.asarray(mask, dtype=bool)]
    if r.size == 0:
        return {"mean_per_s": float("nan"), "std_per_s": float("nan"), "cv": float("nan")}
    m, s = float(np.mean(r)), float(np.std(r))
    return {"mean_per_s": m, "std_per_s": s, "cv": s / m if m else float("nan")}


def elastic_window(strain: ArrayLike, stress: ArrayLike, window_fraction: float = 0.25, low: float = 0.05,
                   high: float = 0.5) -> Optional[tuple[int, int]]:
    """Index range of the steepest part of the loading rise: the elastic part of the curve.

    Over the rise from ``low`` to ``high`` of the peak stress, a window of
    ``window_fraction`` of the rise's samples (at least 5) slides along; the
    window whose least-squares slope is largest is taken as elastic. Chosen
    by slope, not by stress level: a strongly hardening metal passes half its
    peak stress long after it yielded, and a few noisy samples around a stress
    level do not break the window.

    Returns
    -------
    (start, stop) : tuple of int, or None
        Half-open index range; None when the rise has fewer than 5 samples.
    """
    e = np.asarray(strain, dtype=float)
    s = np.asarray(stress, dtype=float)
    ipk = int(np.argmax(s))
    pk = s[ipk]
    if pk <= 0:
        return None
    i_lo = int(np.argmax(s[: ipk + 1] >= low * pk))
    i_hi = int(np.argmax(s[: ipk + 1] >= high * pk))
    n_rise = i_hi - i_lo + 1
    w = max(5, int(window_fraction * n_rise))
    if n_rise < 5 or i_lo + w > s.size:
        return None
    starts = np.arange(i_lo, max(i_lo, i_hi - w + 1) + 1)
    # least-squares slope of every window at once (sums over sliding windows)
    ce, cs = np.concatenate(([0.0], np.cumsum(e))), np.concatenate(([0.0], np.cumsum(s)))
    cee, ces = np.concatenate(([0.0], np.cumsum(e * e))), np.concatenate(([0.0], np.cumsum(e * s)))
    se, ss = ce[starts + w] - ce[starts], cs[starts + w] - cs[starts]
    see, ses = cee[starts + w] - cee[starts], ces[starts + w] - ces[starts]
    var = see - se * se / w
    with np.errstate(invalid="ignore", divide="ignore"):
        slope = np.where(var > 0, (ses - se * ss / w) / var, -np.inf)
    k = int(starts[int(np.argmax(slope))])
    return k, k + w


def offset_yield(strain: ArrayLike, stress: ArrayLike, offset: float = 0.002, modulus: Optional[float] = None,
                 window_fraction: float = 0.25) -> Optional[dict]:
    """Yield point by the offset method.

    The elastic line σ = E (ε − ε0) is fitted by least squares on the
    steepest part of the loading rise (:func:`elastic_window`), or, when
    ``modulus`` is given, only its toe ε0 is fitted there. The yield point is
    where the curve, after that part, first falls below the line
    σ = E (ε − ε0 − offset), interpolated between samples.

    Parameters
    ----------
    strain : array_like
        Engineering strain [1] (compression positive), loading part.
    stress : array_like
        Engineering stress [Pa].
    offset : float
        Strain offset [1] (0.002 is the usual 0.2 % offset; common practice,
        as in ASTM E9 for quasi-static compression).
    modulus : float, optional
        Elastic modulus [Pa]; fitted when None. A Hopkinson-bar modulus is
        unreliable (no equilibrium during the first transits, bar-end
        indentation, seating and the bars' own compliance) — give the
        handbook or ultrasonic value when it matters.
    window_fraction : float
        Length of the elastic window as a fraction of the rise to half the
        peak stress.

    Returns
    -------
    dict or None
        ``yield_strain``, ``yield_stress`` [Pa], ``modulus`` [Pa],
        ``modulus_source`` ("fitted" or "given"), ``toe_strain`` ε0; None when
        the curve has no elastic part or never crosses the offset line.
    """
    e = np.asarray(strain, dtype=float)
    s = np.asarray(stress, dtype=float)
    win = elastic_window(e, s, window_fraction)
    if win is None:
        return None
    a, b = win
    if modulus is None:
        E, c = np.polyfit(e[a:b], s[a:b], 1)
        if E <= 0:
            return None
        e0, source = -c / E, "fitted"
    else:
        E, source = float(modulus), "given"
        e0 = float(np.median(e[a:b] - s[a:b] / E))
    d = s - E * (e - e0 - offset)
    after = np.flatnonzero(d[b - 1:] <= 0)
    if after.size == 0:
        return None
    j = b - 1 + int(after[0])
    if j == 0:
        return None
    # interpolate the crossing between j-1 and j
    f = d[j - 1] / (d[j - 1] - d[j]) if d[j - 1] != d[j] else 0.0
    ey = e[j - 1] + f * (e[j] - e[j - 1])
    sy = s[j - 1] + f * (s[j] - s[j - 1])
    return {"yield_strain": float(ey), "yield_stress": float(sy), "modulus": float(E),
            "modulus_source": source, "toe_strain": float(e0)}


def bar_stress_flag(peak_strain: float, modulus: float, yield_strength: Optional[float], bar_name: str) -> Optional[Flag]:
    """Peak bar stress E·|ε|max against the bar's yield strength.

    Returns
    -------
    Flag or None
        ``error`` at or above yield (the data are invalid and the bar may be
        damaged), ``warning`` above :data:`BAR_STRESS_WARNING` of yield, an
        ``info`` if the yield strength is unknown.
    """
    stress = modulus * abs(peak_strain)
    if yield_strength is None:
        return Flag("bar_yield_unknown", "info",
                    f"{bar_name} bar: no yield strength given, peak bar stress {stress / 1e6:.0f} MPa not checked")
    ratio = stress / yield_strength
    if ratio >= 1.0:
        return Flag("bar_yielded", "error",
                    f"{bar_name} bar peak stress {stress / 1e6:.0f} MPa reaches its yield strength "
                    f"{yield_strength / 1e6:.0f} MPa: the data are invalid and the bar may be damaged; inspect it")
    if ratio >= BAR_STRESS_WARNING:
        return Flag("bar_stress_high", "warning",
                    f"{bar_name} bar peak stress {stress / 1e6:.0f} MPa is {100 * ratio:.0f}% of its yield strength")
    return None


def clipping_flag(volts: ArrayLike, channel: str, full_scale: Optional[float] = None,
                  pulse_samples: Optional[float] = None) -> Optional[Flag]:
    """Flag a channel that sat at its recorder's rail.

    With the recorder's range known (``full_scale`` [V]), any sample within
    0.5 % of it is clipping (error). Without it, a run of identical samples at
    the record's extreme longer than 10 samples and 2 % of the pulse is a flat
    top, very likely clipping (warning).
    """
    from .pulses import flat_top_run

    v = np.asarray(volts, dtype=float)
    if full_scale is not None:
        peak = float(np.max(np.abs(v)))
        if peak >= 0.995 * full_scale:
            return Flag("clipped", "error",
                        f"{channel} channel reaches {peak:.4g} V of its {full_scale:.4g} V range: clipped")
        return None
    run, level = flat_top_run(v)
    limit = max(10, int(0.02 * (pulse_samples or 0)))
    if run > limit:
        return Flag("clipped", "warning",
                    f"{channel} channel holds its extreme value {level:.4g} V for {run} samples: "
                    f"probably clipped (give the recorder's full_scale to check)")
    return None


def overlap_flag(pulse_duration: float, gauge_distance: float, wave_speed: float, bar_name: str) -> Optional[Flag]:
    """Incident and reflected waves overlap at the gauge if the pulse lasts longer than 2 d / c0."""
    transit = 2.0 * gauge_distance / wave_speed
    if pulse_duration > transit:
        return Flag("waves_overlap", "error",
                    f"the {pulse_duration * 1e6:.0f} us pulse is longer than the {transit * 1e6:.0f} us the wave "
                    f"needs from the {bar_name} gauge to the specimen and back: the waves overlap at the gauge")
    return None


@dataclass
class Assessment:
    """What :func:`assess_curve` finds: the valid mask, the R(t) that decided, scalar results, flags.

    Attributes
    ----------
    valid : ndarray of bool
        Samples in the loading part after force equilibrium.
    equilibrium_ratio : ndarray
        R(t) averaged as the equilibrium test reads it [1] (NaN where the
        forces are too small to give a meaningful ratio).
    results : dict
        Scalars, units in the keys.
    flags : list of Flag
    limit : ndarray
        The limit |R| was tested against at each sample [1]: the threshold
        widened by k u(R).
    """

    valid: np.ndarray
    equilibrium_ratio: Optional[np.ndarray] = None
    results: dict = field(default_factory=dict)
    flags: list = field(default_factory=list)
    limit: Optional[np.ndarray] = None


def assess_curve(time: ArrayLike, strain_rate: ArrayLike, force_front: ArrayLike, force_back: ArrayLike,
                 strain: ArrayLike, stress: ArrayLike, *, dt: float,
                 threshold=EQUILIBRIUM_THRESHOLD, yield_offset=0.002, specimen_modulus=None,
                 specimen_transit=None, averaging=EQUILIBRIUM_AVERAGING, force_noise=(0.0, 0.0),
                 correlation_time=None, usable=None):
    """Judge a reduced curve: loading part, equilibrium against the noise, strain-rate plateau and yield point.

    Parameters
    ----------
    time : array_like
        Time at the specimen faces [s] (0 at the incident foot).
    strain_rate, strain : array_like
        Engineering strain rate [1/s] and strain [1].
    force_front, force_back : array_like
        Face forces F1, F2 [N].
    stress : array_like
        The reported engineering stress [Pa].
    dt : float
        Sample interval [s].
    threshold : float
        Largest |R| counted as equilibrium (Ravichandran & Subhash 1994).
    yield_offset : float
        Offset strain of the yield line [1].
    specimen_modulus : float, optional
        Elastic modulus for the offset line [Pa]; fitted when None.
    specimen_transit : float, optional
        One wave transit of the specimen, L_s / c_s [s]; gives the number of
        transits before equilibrium.
    averaging : float
        R(t) is averaged over this time [s] before the equilibrium test, so
        single-sample recorder noise does not break equilibrium while the
        ring-up of a specimen transit (a microsecond and more) is not
        smoothed away.
    force_noise : (float or array_like, float or array_like)
        Standard uncertainties of F1 and F2 from the records' noise [N], one
        value or one per sample (:func:`force_noise`); R is
        tested against the threshold widened by k u(R)
        (:func:`equilibrium_ratio_uncertainty`, :func:`coverage_factor`), so
        noise alone does not break equilibrium.
    correlation_time : float, optional
        Time over which the forces' noise is correlated [s] (about half the
        low-pass's period); with the averaging it sets how many independent
        noise samples the loading holds (``dt`` when None).
    usable : array_like of bool, optional
        Samples where every wave has its full weight (outside the window's
        closing taper); the valid part stays inside them.

    Returns
    -------
    Assessment
    """
    tau = np.asarray(time, dtype=float)
    rate = np.asarray(strain_rate, dtype=float)
    f1, f2 = np.asarray(force_front, dtype=float), np.asarray(force_back, dtype=float)
    strain, stress = np.asarray(strain, dtype=float), np.asarray(stress, dtype=float)
    from .kolsky import equilibrium_ratio  # the ratio is a Kolsky quantity

    fmean = 0.5 * (f1 + f2)
    ratio = equilibrium_ratio(f1, f2, floor=0.05 * max(float(np.max(fmean)), 1e-30) if fmean.size else 0.0)
    n_avg = averaging_samples(dt, averaging)
    ratio_avg = moving_average(ratio, n_avg)
    u_ratio = equilibrium_ratio_uncertainty(moving_average(f1, n_avg), moving_average(f2, n_avg), *force_noise)
    out = Assessment(valid=np.zeros(tau.size, dtype=bool), equilibrium_ratio=ratio_avg)
    res, flags = out.results, out.flags
    region = usable_loading_region(rate, fmean, usable)
    onset = None
    k = 0.0
    out.limit = np.full(tau.size, float(threshold))
    if region is None:
        flags.append(Flag("no_loading", "error", "no loading found (no positive strain rate and force)"))
    else:
        span = (region[1] - region[0]) * dt
        if any(np.any(np.asarray(u) > 0) for u in force_noise):
            k = coverage_factor(span / max(correlation_time or dt, averaging, dt))
        out.limit = equilibrium_limit(u_ratio, threshold, k)
        res["equilibrium_coverage_factor"] = k
        # where the forces are still small the band is too wide to show anything: the valid part cannot start
        # where the band is wider than the threshold and than twice its median over the loading
        band = k * u_ratio
        wide = max(threshold, 2.0 * float(np.nanmedian(band[region[0]:region[1]])))
        tested = np.where(band <= wide, out.limit, -1.0)  # a limit below zero: not in equilibrium there
        onset = equilibrium_onset(ratio_avg, region, tested)
        if onset is None:
            last = region[1] - 1
            flags.append(Flag("no_equilibrium", "error",
                              f"the face forces never settle within {100 * threshold:.0f}% of each other (widened "
                              f"by the noise) during loading (|R| at the end of loading {abs(ratio_avg[last]):.2f}, "
                              f"limit there {out.limit[last]:.2f}): the specimen is not in equilibrium"))
        else:
            out.valid[onset:region[1]] = True
            res["equilibrium_from_time_us"] = float(tau[onset] * 1e6)
            res["equilibrium_from_strain"] = float(strain[onset])
            res["equilibrium_R_noise"] = float(np.median(u_ratio[onset:region[1]]))
            if specimen_transit:
                res["specimen_transit_time_us"] = specimen_transit * 1e6
                res["equilibrium_transits"] = float(tau[onset] / specimen_transit)
                tight = out.limit[onset] <= 2 * threshold  # the band is narrow enough to date the onset
                if tight and res["equilibrium_transits"] < MIN_EQUILIBRIUM_TRANSITS:
                    flags.append(Flag("equilibrium_too_soon", "warning",
                                      f"equilibrium after {res['equilibrium_transits']:.2f} specimen transits "
                                      f"({specimen_transit * 1e6:.2f} us each): a force cannot cross the specimen "
                                      f"that fast; check the specimen length, modulus and density"))
            loading_span = tau[region[1] - 1] - tau[region[0]]
            res["valid_fraction_of_loading"] = float((region[1] - onset) / max(region[1] - region[0], 1))
            if res["valid_fraction_of_loading"] < MIN_VALID_FRACTION:
                flags.append(Flag("short_equilibrium", "error",
                                  f"equilibrium holds over only {100 * res['valid_fraction_of_loading']:.0f}% "
                                  f"of the {loading_span * 1e6:.0f} us loading (at least "
                                  f"{100 * MIN_VALID_FRACTION:.0f}% needed): the valid part is the end of the loading, "
                                  f"not the test"))
            spread = float(np.median(band[onset:region[1]]))
            if spread > threshold:
                flags.append(Flag("equilibrium_noisy", "warning",
                                  f"the records' noise spreads R(t) by +-{spread:.2f} (k = {k:.1f}), more than the "
                                  f"{threshold:.2f} threshold: equilibrium is not shown, only not disproved "
                                  f"(lower the noise or filter)"))
        res["loading_from_time_us"] = float(tau[region[0]] * 1e6)
        res["loading_to_time_us"] = float(tau[region[1] - 1] * 1e6)
    valid = out.valid
    if valid.any():
        plat = rate_plateau(rate, valid)
        res["mean_strain_rate_per_s"] = plat["mean_per_s"]
        res["strain_rate_std_per_s"] = plat["std_per_s"]
        res["strain_rate_cv"] = plat["cv"]
        if plat["cv"] > RATE_CV_LIMIT:
            flags.append(Flag("rate_not_constant", "warning",
                              f"the strain rate varies by {100 * plat['cv']:.0f}% (std/mean) over the valid part "
                              f"(limit {100 * RATE_CV_LIMIT:.0f}%): not a constant-rate test"))
        res["valid_strain_from"] = float(strain[valid][0])
        res["valid_strain_to"] = float(strain[valid][-1])
        res["flow_stress_mean_MPa"] = float(np.mean(stress[valid]) / 1e6)
    else:
        res["mean_strain_rate_per_s"] = float(np.max(rate)) if rate.size else math.nan
    res["peak_stress_MPa"] = float(np.max(stress) / 1e6)
    res["max_strain"] = float(np.max(strain))
    res["peak_strain_rate_per_s"] = float(np.max(rate))
    if region is not None:
        _yield_and_modulus(out, strain, stress, region, onset, yield_offset, specimen_modulus)
    return out


def _yield_and_modulus(out, strain, stress, region, onset, yield_offset, specimen_modulus) -> None:
    """The offset yield point, and the curve's elastic slope against the specimen's modulus."""
    res, flags = out.results, out.flags
    a, b = region
    y = offset_yield(strain[a:b], stress[a:b], yield_offset, specimen_modulus)
    if y is None:
        flags.append(Flag("no_yield_point", "info", "no yield point found by the offset method"))
    else:
        res["yield_strain"] = y["yield_strain"]
        res["yield_stress_MPa"] = y["yield_stress"] / 1e6
        res["elastic_modulus_GPa"] = y["modulus"] / 1e9
        res["elastic_modulus_source"] = y["modulus_source"]
        res["yield_offset"] = yield_offset
        # the yield point's time: the first sample of the loading part at or past its strain
        j = a + int(np.argmax(strain[a:b] >= y["yield_strain"]))
        if onset is None or j < onset:
            flags.append(Flag("yield_before_equilibrium", "warning",
                              "the yield point lies before force equilibrium: yield stress and modulus are "
                              "unreliable"))
    win = elastic_window(strain[a:b], stress[a:b])
    if win is None or onset is None or onset > a + win[1]:  # out of equilibrium there, the slope means nothing
        return
    slope = float(np.polyfit(strain[a:b][win[0]:win[1]], stress[a:b][win[0]:win[1]], 1)[0])
    res["apparent_modulus_GPa"] = slope / 1e9
    if specimen_modulus and slope > MODULUS_EXCESS * specimen_modulus:
        flags.append(Flag("modulus_too_high", "error",
                          f"the curve's elastic slope is {slope / 1e9:.0f} GPa, {slope / specimen_modulus:.1f} x the "
                          f"specimen's modulus ({specimen_modulus / 1e9:.0f} GPa): the strain is too small; check the "
                          f"specimen length (or the gauge distances and wave speeds)"))


# --------------------------------------------------------------------------- consistency checks
def striker_flag(peak_strain: float, striker_speed: float, bar_wave_speed: float, bar_impedance: float,
                 striker_impedance: float) -> tuple[Optional[Flag], float]:
    """The incident pulse's peak against what the striker can give.

    A striker of impedance Z_s hitting a bar of impedance Z_b at speed v
    sends the strain v / c_b * Z_s / (Z_s + Z_b), v / (2 c_b) for a striker
    of the bar's material and diameter (Kolsky 1953; Graff 1975, sec. 2.2).
    A pulse shaper that deforms plastically lowers the peak; nothing raises it.

    Parameters
    ----------
    peak_strain : float
        Plateau of the incident pulse [1] (the median of its top fifth).
    striker_speed : float
        Impact speed [m/s].
    bar_wave_speed : float
        Incident bar wave speed c_b [m/s].
    bar_impedance, striker_impedance : float
        rho c A of the bar and of the striker [kg/s].

    Returns
    -------
    flag : Flag or None
    ratio : float
        Measured over predicted peak [1].

    References
    ----------
    .. [1] H. Kolsky, *Stress Waves in Solids*, Clarendon Press, Oxford (1953).
    .. [2] K. F. Graff, *Wave Motion in Elastic Solids*, Ohio State Univ.
       Press (1975), sec. 2.2 (impact of rods).
    """
    expected = striker_speed / bar_wave_speed * striker_impedance / (striker_impedance + bar_impedance)
    ratio = peak_strain / expected
    text = (f"the incident pulse peaks at {peak_strain * 1e6:.0f} microstrain, {ratio:.2f} x the "
            f"{expected * 1e6:.0f} microstrain a {striker_speed:.2f} m/s striker gives")
    if ratio > STRIKER_ERROR[1]:
        return Flag("striker_mismatch", "error", text + ": more than the impact can produce; check the incident "
                    "gauge's gain, bridge, gauge factor and excitation (and the striker speed)"), ratio
    if ratio < STRIKER_ERROR[0]:
        return Flag("striker_mismatch", "error", text + ": far less than the impact gives; check the incident "
                    "gauge's gain, bridge, gauge factor and excitation (and the striker speed)"), ratio
    if ratio < STRIKER_WARNING[0]:
        return Flag("striker_mismatch", "warning", text + ": a plastically deforming pulse shaper, a poor contact, "
                    "or a gain or bridge setting"), ratio
    return None, ratio


def modulus_speed_flag(modulus: float, density: float, wave_speed: float, bar_name: str) -> Optional[Flag]:
    """A bar's modulus against rho c0^2 of its measured wave speed (c0 = sqrt(E/rho), Kolsky 1949).

    The reduction takes the forces from E and the time shifts from c0; the
    two must belong to one bar.
    """
    implied = density * wave_speed**2
    rel = modulus / implied - 1.0
    if abs(rel) <= MODULUS_SPEED_WARNING:
        return None
    return Flag("modulus_speed_mismatch", "error" if abs(rel) > MODULUS_SPEED_ERROR else "warning",
                f"{bar_name} bar: E = {modulus / 1e9:.1f} GPa but rho c0^2 = {implied / 1e9:.1f} GPa from the "
                f"measured {wave_speed:.0f} m/s and {density:.0f} kg/m^3 ({100 * rel:+.1f}%): the wave speed, "
                f"the modulus or the density is wrong")


def flat_top_flag(signal: ArrayLike, sigma: float, dt: float, channel: str) -> Optional[Flag]:
    """A pulse whose top is held at one level, within the noise, for a long time: saturation below full scale.

    The pulse (baseline-free, compression positive, the window of the pulse)
    is smoothed over 1 us; its top level is the median of the smoothed
    samples within 6 noise units of the maximum. A top is flat when the
    longest run within 3 noise units of that level lasts :data:`FLAT_TOP_SHARE`
    of the pulse or more, and :data:`FLAT_TOP_CORE` of the longest run above
    90 % of it: a rounded top only touches its level, a saturated one sits on
    it between two corners.

    Parameters
    ----------
    signal : array_like
        The pulse [V].
    sigma : float
        The channel's noise standard deviation [V].
    dt : float
        Sample interval [s].
    channel : str
        For the message.
    """
    from .conditioning import running_mean

    x = np.asarray(signal, dtype=float)
    if x.size < 20 or not np.max(x) > 0:
        return None
    n_s = max(4, int(round(1e-6 / dt)))
    sm = running_mean(x, n_s)
    s_s = max(sigma, 1e-12 * float(np.max(x))) / math.sqrt(n_s)
    level = float(np.median(sm[sm >= np.max(sm) - 6 * s_s]))
    core, wide = _longest_run(sm >= level - 3 * s_s), _longest_run(sm >= 0.9 * level)
    if core >= FLAT_TOP_SHARE * x.size and core >= FLAT_TOP_CORE * max(wide, 1):
        return Flag("flat_top", "warning",
                    f"the {channel} pulse sits flat at {level:.3g} V for {core * dt * 1e6:.0f} us, within the noise: "
                    f"an amplifier or bridge saturating below the recorder's range? (check the gain and the "
                    f"conditioner's range)")
    return None


def _longest_run(mask: np.ndarray) -> int:
    edges = np.flatnonzero(np.diff(np.concatenate(([0], mask.astype(np.int8), [0]))))
    return int(np.max(edges[1::2] - edges[0::2])) if edges.size else 0


def alignment_flags(curves: "KolskyCurves", dt: float, specimen_transit: Optional[float], bar_wave_speed: float,
                    waves: Optional["FaceWaves"] = None) -> tuple[list, dict]:
    """The waves at the faces: do they arrive in the order and at the times physics allows?

    The back-face force lags the front-face force by less than a specimen
    transit (:func:`alignment_lag`, over the rise from t = 0 to 60 % of the
    peak force); and the reflected wave cannot rise before the incident wave
    it reflects (each read where it first reaches a tenth of its peak, so the
    same low-pass's ringing shifts both alike): one that does was carried too
    far back, the incident gauge distance being too long.

    Returns
    -------
    flags : list of Flag
    results : dict
        ``force_lag_us`` and ``reflected_lead_us``.
    """
    flags: list = []
    results: dict = {}
    t, f1, f2 = curves.time, curves.force_front, curves.force_back
    fm = 0.5 * (f1 + f2)
    i0 = int(np.searchsorted(t, 0.0))
    if not fm.size or not np.max(fm) > 0:
        return flags, results
    i1 = i0 + int(np.argmax(fm[i0:] >= 0.6 * np.max(fm)))
    if i1 - i0 < 5:
        return flags, results
    lag = alignment_lag(f1[i0:i1], f2[i0:i1], dt)
    results["force_lag_us"] = lag * 1e6
    top = specimen_transit if specimen_transit else 2e-6
    excess = -lag if lag < 0 else lag - top
    if excess > ALIGNMENT_WARNING + 2 * dt:
        where = (f"leads the front-face force by {-lag * 1e6:.1f} us" if lag < 0 else
                 f"lags the front-face force by {lag * 1e6:.1f} us, more than "
                 + (f"a specimen transit ({top * 1e6:.1f} us)" if specimen_transit else "2 us"))
        flags.append(Flag("waves_misaligned", "error" if excess > ALIGNMENT_ERROR else "warning",
                          f"over the rise the back-face force {where}: the waves are misaligned; check the gauge "
                          f"distances and the bars' wave speeds (a 10 mm error in a gauge distance is "
                          f"{0.01 / bar_wave_speed * 1e6:.1f} us here)"))
    if waves is not None:
        ti = _first_crossing(waves.incident, 0.1, dt)
        tr = _first_crossing(-waves.reflected, 0.1, dt)  # the same running mean delays both alike
        if ti is not None and tr is not None:
            results["reflected_lead_us"] = (ti - tr) * 1e6
            if ti - tr > REFLECTED_LEAD + 2 * dt:
                flags.append(Flag("reflected_early", "error",
                                  f"the reflected wave reaches a tenth of its peak {(ti - tr) * 1e6:.1f} us before "
                                  f"the incident wave reaches a tenth of its own: a reflection cannot come before the "
                                  f"wave it reflects; check the incident gauge distance (too long?) and the incident "
                                  f"bar's wave speed"))
    return flags, results


def _first_crossing(signal: np.ndarray, fraction: float, dt: float) -> Optional[float]:
    """Time [s, from the window's start] where a signal, averaged over 1 us (so noise does not cross for it),
    first rises through ``fraction`` of its peak."""
    from .conditioning import running_mean

    x = running_mean(np.asarray(signal, dtype=float), max(1, round(1e-6 / dt)))
    if not x.size or not np.max(x) > 0:
        return None
    level = fraction * float(np.max(x))
    j = int(np.argmax(x >= level))
    if j == 0:
        return 0.0
    return (j - 1 + (level - x[j - 1]) / (x[j] - x[j - 1])) * dt


def force_ratio_flag(curves: "KolskyCurves", region: Optional[tuple]) -> tuple[Optional[Flag], Optional[float]]:
    """A steady ratio of back- to front-face force over the loading's second half: a scale error.

    In a sound shot the forces agree once the specimen has rung up; a wrong
    gain, bridge, gauge factor, excitation, bar modulus or diameter on one
    side scales one force throughout.
    """
    if region is None:
        return None, None
    a, b = region
    a = a + (b - a) // 2
    if b - a < 5:
        return None, None
    f1, f2 = curves.force_front[a:b], curves.force_back[a:b]
    if not (np.median(f1) > 0 and np.median(f2) > 0):
        return None, None
    q = float(np.median(f2) / np.median(f1))
    with np.errstate(invalid="ignore", divide="ignore"):
        lo, hi = np.nanpercentile(f2 / f1, [25, 75])
    steady = (hi - lo) < 0.1 * q  # a scale error is a steady ratio; a specimen out of equilibrium is not
    if steady and max(q, 1 / q) > FORCE_RATIO_LIMIT:
        return Flag("force_mismatch", "error",
                    f"the back-face force is {q:.2f} x the front-face force over the second half of the loading: a "
                    f"scale error; check each gauge's gain, bridge, gauge factor and excitation, and the bars' "
                    f"moduli and diameters"), q
    return None, q


# --------------------------------------------------------------------------- stage 5: the verdict
@dataclass(frozen=True)
class Verdict:
    """Stage 5 of a reduction: every finding about a shot.

    Attributes
    ----------
    valid : ndarray of bool
        Samples of the curves that may be used (loading part after force
        equilibrium).
    equilibrium_ratio : ndarray
        The R(t) that decided equilibrium (averaged as the test reads it) [1].
    results : dict
        Scalar results, units in the keys.
    flags : tuple of Flag
        In the order found.
    equilibrium_limit : ndarray or None
        The limit |R| was tested against at each sample [1]: the threshold
        widened by k standard uncertainties of R propagated from the records'
        noise.
    """

    valid: np.ndarray
    equilibrium_ratio: np.ndarray
    results: dict
    flags: tuple
    equilibrium_limit: Optional[np.ndarray] = None

    @property
    def is_valid(self) -> bool:
        """True when no flag is an error."""
        return not any(f.severity == "error" for f in self.flags)


def record_flags(strains: "GaugeStrains", plan: "WindowPlan", waves: "FaceWaves", barset: "BarSet") -> list:
    """Flags about the record: waves overlapping, a truncated record or window, the transmitted pulse, glitches.

    Parameters
    ----------
    strains : shpb.pulses.GaugeStrains
    plan : shpb.pulses.WindowPlan
    waves : shpb.pulses.FaceWaves
    barset : shpb.setup.BarSet

    Returns
    -------
    list of Flag
    """
    flags = []
    dt, n, t0 = strains.dt, strains.time.size, float(strains.time[0])
    bi = barset.incident
    duration = plan.duration
    flags.append(overlap_flag(duration, barset.incident_gauge.distance, bi.wave_speed, "incident"))
    if flags[-1] is None:
        flags.append(window_overlap_flag(strains.foot, duration, plan, barset.incident_gauge.distance / bi.wave_speed,
                                         dt))
    t_end = float(strains.time[-1])
    if plan.k1 > n:
        flags.append(Flag("record_truncated", "error",
                          f"the record ends at {t_end * 1e6:.1f} us, before the analysis window does "
                          f"({(t0 + (plan.k1 - 1) * dt) * 1e6:.1f} us)"))
    times = plan.gauge_window_times(t0, dt)
    passed = max(times["transmitted"][1], times["reflected"][1])
    cut = plan.length < duration and plan.source != "given"  # an automatic window shortened by the record's end
    if (passed > t_end or cut) and plan.k1 <= n:
        flags.append(Flag("record_truncated", "error",
                          f"the record ends at {t_end * 1e6:.1f} us, before the transmitted (or reflected) pulse "
                          f"has passed its gauge (the {duration * 1e6:.0f} us pulse needs the record to "
                          f"{(passed + max(duration - plan.length, 0)) * 1e6:.1f} us)"))
    flags.append(foot_gap_flag(strains.incident, strains.foot, strains.noise_incident, dt, strains.foot_source))
    if plan.source == "given" and plan.length < duration:
        flags.append(Flag("window_short", "warning",
                          f"the given window_length ({plan.length * 1e6:.0f} us) is shorter than the "
                          f"{duration * 1e6:.0f} us pulse: the curve stops before the unloading"))
    tra = strains.pulses.get("transmitted")
    if tra is not None and tra[1] < 0:
        p = barset.transmitted_gauge.polarity
        flags.append(Flag("transmitted_polarity", "error",
                          f"the transmitted pulse is tensile (a {'negative' if p > 0 else 'positive'} voltage with the "
                          f"transmitted gauge's polarity {p:+d}): check the polarity of the transmitted gauge"))
    else:
        et_peak = float(np.max(waves.transmitted)) if waves.transmitted.size else 0.0
        if et_peak < max(8 * strains.noise_transmitted, 0.01 * float(np.max(waves.incident))):
            flags.append(Flag("no_transmitted_pulse", "error",
                              f"no transmitted pulse found (peak {et_peak:.3g} against noise "
                              f"{strains.noise_transmitted:.3g}): check the transmitted channel and the specimen "
                              f"contact"))
    for name in ("incident", "transmitted", *strains.stations):
        count = strains.conditioning.get(name, {}).get("glitches", 0)
        if count:
            first = strains.conditioning[name]["glitch_times_us"][0]
            flags.append(Flag("glitches_repaired", "info" if count <= 10 else "warning",
                              f"{count} single-sample glitch{'es' if count > 1 else ''} on the {name} channel "
                              f"repaired (first at {first:.1f} us)" + ("; check the cable and its shield"
                                                                         if count > 10 else "")))
    return [f for f in flags if f is not None]


def foot_gap_flag(incident: ArrayLike, foot: float, sigma: float, dt: float, source: str) -> Optional[Flag]:
    """The incident pulse must rise from its foot: a long return to the baseline between the foot and the
    pulse's half height means the foot belongs to something else (pickup, a given ``incident_start`` too early).
    """
    x = np.asarray(incident, dtype=float)
    f0 = max(int(math.floor(foot)), 0)
    seg = x[f0:]
    if seg.size < 3 or not np.max(seg) > 0:
        return None
    half = int(np.argmax(seg >= 0.5 * np.max(seg)))
    low = max(3.0 * sigma, 0.01 * float(np.max(seg)))
    gap = _longest_run(seg[:half] <= low) * dt
    if gap > max(2e-6, 20 * dt):
        where = "the given incident_start" if source == "given" else "the incident foot found"
        return Flag("foot_gap", "warning",
                    f"{where} is followed by {gap * 1e6:.1f} us at the baseline before the pulse rises: pickup or "
                    f"a spike taken for the foot? The time origin is then wrong (set incident_start)")
    return None


def window_overlap_flag(foot: float, duration: float, plan: "WindowPlan", gauge_travel: float,
                        dt: float) -> Optional[Flag]:
    """The incident pulse, and the incident window with its lead and taper, must end before the reflected window begins.

    At the incident gauge the reflected window opens (its lead and taper
    first) before the reflected wave arrives, 2 d / c0 after the incident
    foot; an incident pulse still running then is cut into the reflected
    wave as a spurious wave before t = 0. And an incident window running past
    that arrival holds the reflected wave.
    """
    r0 = plan.gauge_spans["reflected"][0]
    inc_end = foot + duration / dt
    if inc_end > r0:
        return Flag("waves_overlap", "error",
                    f"the incident pulse ends {(inc_end - r0) * dt * 1e6:.1f} us after the reflected wave's window "
                    f"opens at the incident gauge (its lead and taper): the incident tail would enter the reflected "
                    f"wave")
    arrival = foot + 2 * gauge_travel / dt
    if plan.gauge_spans["incident"][1] > arrival:
        return Flag("waves_overlap", "error",
                    f"the incident window runs {(plan.gauge_spans['incident'][1] - arrival) * dt * 1e6:.1f} us past "
                    f"the reflected wave's arrival at the incident gauge: shorten window_length")
    return None


def bar_flags(strains: "GaugeStrains", plan: "WindowPlan", barset: "BarSet") -> tuple[list, dict]:
    """Flags about the bars and the channels: bar stress against yield, clipping and flat tops, modulus against
    wave speed, far-end echo of the transmitted bar.

    Returns
    -------
    flags : list of Flag
    results : dict
        ``peak_bar_stress_incident_MPa`` and ``peak_bar_stress_transmitted_MPa``.
    """
    flags, results = [], {}
    dt, n, t0 = strains.dt, strains.time.size, float(strains.time[0])
    bi, bt = barset.incident, barset.transmitted
    gi, gt = barset.incident_gauge, barset.transmitted_gauge
    duration, times = plan.duration, plan.gauge_window_times(t0, dt)
    # the bars' own stress, over the part of the record the analysis reads
    last, n_base = plan.last_sample(n), strains.baseline_samples
    for name, chan, bar in (("incident", strains.incident, bi), ("transmitted", strains.transmitted, bt)):
        pk = float(np.max(np.abs(chan[n_base:last]))) if last > n_base else 0.0
        results[f"peak_bar_stress_{name}_MPa"] = bar.modulus * pk / 1e6
        flags.append(bar_stress_flag(pk, bar.modulus, bar.material.yield_strength, name))
        if bar.measured_wave_speed:
            flags.append(modulus_speed_flag(bar.modulus, bar.material.density, bar.wave_speed, name))
    # a channel can only hit its rail while a pulse passes: check the pulse windows
    w0 = max(int(times["incident"][0] / dt - t0 / dt), 0)
    w1 = min(int(max(w[1] for w in times.values()) / dt - t0 / dt) + 1, n)
    n_pulse = max(int(duration / dt), 1)
    for name, volts, base, gauge, start in (
            ("incident", strains.volts_incident, strains.baseline_incident, gi, strains.foot),
            ("transmitted", strains.volts_transmitted, strains.baseline_transmitted, gt,
             plan.gauge_spans["transmitted"][0])):
        clip = clipping_flag(volts[w0:w1], name, gauge.full_scale, duration / dt)
        flags.append(clip)
        if clip is None:  # a flat top below the recorder's range: saturation before the recorder
            s0 = max(int(start), 0)
            pulse = gauge.polarity * (volts - base)[s0:s0 + n_pulse + int(plan.lead / dt)]
            flags.append(flat_top_flag(pulse, strains.conditioning.get(name, {}).get("noise_V", 0.0), dt, name))
    echo = 2 * (bt.length - gt.distance) / bt.wave_speed
    if duration > echo:
        flags.append(Flag("transmitted_overlap", "warning",
                          f"the {duration * 1e6:.0f} us pulse is longer than the {echo * 1e6:.0f} us echo time from "
                          f"the transmitted bar's far end to its gauge"))
    return [f for f in flags if f is not None], results


def station_flags(strains: "GaugeStrains", plan: "WindowPlan", waves: "FaceWaves") -> list:
    """Clipping on the further stations that built separated waves (:func:`clipping_flag`, over the part of
    the record the analysis reads): a station at its recorder's rail spoils the separation as a main gauge
    would spoil the classic analysis."""
    last = plan.last_sample(strains.time.size)
    flags = [clipping_flag(st.volts[:last], f"{name} (station at {st.gauge.distance * 1e3:g} mm)",
                           st.gauge.full_scale, plan.duration / strains.dt)
             for name, st in strains.stations.items() if st.bar in waves.separated_bars]
    return [f for f in flags if f is not None]


def consistency_flags(strains: "GaugeStrains", plan: "WindowPlan", waves: "FaceWaves", curves: "KolskyCurves",
                      barset: "BarSet", specimen: "Specimen", region: Optional[tuple],
                      striker_speed: Optional[float]) -> tuple[list, dict]:
    """Checks that catch a wrong setup: front and back forces (timing and scale), the striker's pulse.

    Returns
    -------
    flags : list of Flag
    results : dict
    """
    flags, results = alignment_flags(curves, strains.dt, specimen.transit_time, barset.incident.wave_speed, waves)
    flag, q = force_ratio_flag(curves, region)
    flags.append(flag)
    if q is not None:
        results["force_ratio_back_to_front"] = q
    striker = barset.striker
    speed = striker_speed if striker_speed is not None else (striker.speed if striker else None)
    if speed:
        bi = barset.incident
        z_striker = (striker.material.density * striker.material.bar_wave_speed * striker.area if striker
                     else bi.impedance)
        f0 = max(int(strains.foot), 0)
        # the incident pulse alone: at its gauge, or, when it overlaps the reflected wave there, separated
        pulse = waves.incident if "incident" in waves.separated_bars else \
            strains.incident[f0:f0 + max(int(plan.duration / strains.dt), 1)]
        top = pulse[pulse >= 0.8 * np.max(pulse)]  # its plateau: a filter's or the bar's overshoot is no part
        flag, ratio = striker_flag(float(np.median(top)), speed, bi.wave_speed, bi.impedance, z_striker)
        flags.append(flag)
        results["striker_speed_m_per_s"] = speed
        results["incident_peak_over_striker"] = ratio
    return [f for f in flags if f is not None], results


def judge(strains: "GaugeStrains", plan: "WindowPlan", waves: "FaceWaves", curves: "KolskyCurves", barset: "BarSet",
          specimen: "Specimen", analysis: "AnalysisOptions", striker_speed: Optional[float] = None) -> Verdict:
    """Stage 5: judge a reduced shot: the record (:func:`record_flags`), the curve (:func:`assess_curve`), the
    bars (:func:`bar_flags`) and the setup's consistency (:func:`consistency_flags`).

    The equilibrium test widens the threshold by the noise: each channel's
    noise (measured over its quiet spans, after the running mean R(t) is
    read with: :func:`averaged_noise`) gives the face forces' standard
    uncertainties (:func:`force_noise`), propagated to R(t)
    (:func:`equilibrium_ratio_uncertainty`).

    Parameters
    ----------
    strains, plan, waves : stages 1-3 (:mod:`shpb.pulses`)
    curves : shpb.kolsky.KolskyCurves
    barset : shpb.setup.BarSet
    specimen : shpb.setup.Specimen
        Its modulus (offset line) and transit time (transits to equilibrium).
    analysis : shpb.setup.AnalysisOptions
        ``equilibrium_threshold`` and ``yield_offset``.
    striker_speed : float, optional
        The shot's striker speed [m/s] (else the bar set's, if any): checks
        the incident pulse (:func:`striker_flag`).

    Returns
    -------
    Verdict
    """
    n_avg = averaging_samples(waves.dt)
    u1, u2 = force_noise(strains, waves, barset, n_avg)
    cutoff = strains.lowpass_cutoff
    usable = waves.weight >= 1.0 - 1e-9 if waves.weight is not None else None
    judged = assess_curve(curves.time, curves.strain_rate, curves.force_front, curves.force_back, curves.strain,
                          curves.stress, dt=waves.dt, threshold=analysis.equilibrium_threshold,
                          yield_offset=analysis.yield_offset, specimen_modulus=specimen.modulus,
                          specimen_transit=specimen.transit_time, averaging=EQUILIBRIUM_AVERAGING,
                          force_noise=(u1, u2), correlation_time=0.5 / cutoff if cutoff else None, usable=usable)
    bflags, bresults = bar_flags(strains, plan, barset)
    bflags += station_flags(strains, plan, waves)
    # a flat top is a cut pulse only if the forces disagree; a plateau they agree with is the pulse's own
    failed = any(f.code in ("no_equilibrium", "short_equilibrium") for f in judged.flags)
    bflags = [_confirm_flat_top(f, failed) if f.code == "flat_top" else f for f in bflags]
    if failed and not analysis.dispersion:
        bflags.append(Flag("dispersion_off", "info",
                           "the dispersion correction is off: the front-face force (incident plus reflected wave, "
                           "each carried by a gauge distance) keeps the bars' Pochhammer-Chree ringing, which R(t) "
                           "reads as disequilibrium; reduce with the correction on (the default)"))
    region = _region_of(judged, curves.time)
    cflags, cresults = consistency_flags(strains, plan, waves, curves, barset, specimen, region, striker_speed)
    return Verdict(valid=judged.valid, equilibrium_ratio=judged.equilibrium_ratio,
                   results={**judged.results, **bresults, **cresults},
                   flags=tuple(separated_flags(record_flags(strains, plan, waves, barset) + cflags + judged.flags
                                               + bflags, waves)),
                   equilibrium_limit=judged.limit)


def force_noise(strains: "GaugeStrains", waves: "FaceWaves", barset: "BarSet", n_avg: int) -> tuple:
    """Standard uncertainties of the face forces from the records' noise [N] (floats, or arrays over the window).

    Classic waves: u(F1) = E_i A_i sqrt(2) sigma_i (the incident and the
    reflected waves, read at different times of one channel) and
    u(F2) = E_t A_t sigma_t. A force built from separated waves
    (``waves.noise_gains``) carries each of its stations' noise through the
    separation: u(F) = E A sqrt(sum (gain sigma_channel)^2), sample by sample
    (:func:`shpb.separation.noise_gains`).
    """
    def sigma(channel):
        signal, quiet, default = strains.channel(channel)
        return averaged_noise(signal, quiet, n_avg, default)

    out = []
    for face, bar, name, classic in (("front", barset.incident, "incident", math.sqrt(2.0)),
                                     ("back", barset.transmitted, "transmitted", 1.0)):
        gains = waves.noise_gains.get(face)
        if gains:
            out.append(bar.modulus * bar.area * np.sqrt(sum((g * sigma(ch)) ** 2 for ch, g in gains.items())))
        else:
            out.append(bar.modulus * bar.area * classic * sigma(name))
    return tuple(out)


def averaged_noise(signal: ArrayLike, quiet: Optional[ArrayLike], n: int, default: float) -> float:
    """Standard deviation of a channel's noise as R(t) reads it: over its quiet samples, after the same
    ``n``-sample running mean (white noise shrinks by sqrt(n), low-passed noise hardly at all); ``default``
    without quiet samples."""
    if quiet is None or not np.any(quiet):
        return default
    from .conditioning import running_mean  # O(N): the whole record's channel

    return float(np.std(running_mean(np.asarray(signal, dtype=float), n)[np.asarray(quiet, dtype=bool)]))


def _confirm_flat_top(flag: Flag, forces_disagree: bool) -> Flag:
    if forces_disagree:
        return Flag(flag.code, "error", flag.message + "; the face forces disagree: the pulse was cut")
    return Flag(flag.code, "info", flag.message.split(":")[0] + ", but the face forces agree: taken as the pulse's "
                                                             "own plateau")


def _region_of(judged: Assessment, time: np.ndarray) -> Optional[tuple]:
    """The loading part's index range, from the times an assessment reported."""
    res = judged.results
    if "loading_from_time_us" not in res:
        return None
    a = int(np.searchsorted(time, res["loading_from_time_us"] * 1e-6 - 1e-12))
    b = int(np.searchsorted(time, res["loading_to_time_us"] * 1e-6 + 1e-12))
    return a, b


def separated_flags(flags: list, waves: "FaceWaves") -> list:
    """The overlaps two-point separation has dealt with become one ``waves_separated`` info flag.

    ``waves_overlap`` goes when the incident bar's waves were separated,
    ``transmitted_overlap`` when the transmitted bar's were
    (:class:`shpb.separation.SeparatedWaves`).
    """
    bars = list(waves.separated_bars)
    if not bars:
        return flags
    gone = {"waves_overlap"} if "incident" in bars else set()
    gone |= {"transmitted_overlap"} if "transmitted" in bars else set()
    kept = [f for f in flags if f.code not in gone]
    note = Flag("waves_separated", "info", f"the face waves of the {' and '.join(bars)} bar come from two-point "
                                           f"separation ({getattr(waves, 'separation', {}).get('reason', '')})")
    return [note] + kept
