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


def equilibrium_onset(ratio: ArrayLike, region: tuple[int, int], threshold: float = EQUILIBRIUM_THRESHOLD) -> Optional[int]:
    """First index of ``region`` from which |R| stays at or below ``threshold`` to the region's end.

    Parameters
    ----------
    ratio : array_like
        Equilibrium factor R(t) [1] (NaN where the forces are too small).
    region : (int, int)
        Half-open index range (the loading part).
    threshold : float
        Largest |R| counted as equilibrium; 0.05 after Ravichandran &
        Subhash (1994), J. Am. Ceram. Soc. 77:263–267.

    Returns
    -------
    int or None
        None if the shot is not in equilibrium at the end of the region.
    """
    a, b = region
    r = np.asarray(ratio, dtype=float)[a:b]
    bad = ~(np.abs(r) <= threshold)  # NaN counts as not in equilibrium
    if bad.size == 0 or bad[-1]:
        return None
    idx = np.flatnonzero(bad)
    return a + (int(idx[-1]) + 1 if idx.size else 0)


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
    """

    valid: np.ndarray
    equilibrium_ratio: Optional[np.ndarray] = None
    results: dict = field(default_factory=dict)
    flags: list = field(default_factory=list)


def assess_curve(time: ArrayLike, strain_rate: ArrayLike, force_front: ArrayLike, force_back: ArrayLike,
                 strain: ArrayLike, stress: ArrayLike, *, dt: float,
                 threshold=EQUILIBRIUM_THRESHOLD, yield_offset=0.002, specimen_modulus=None,
                 specimen_transit=None, averaging=EQUILIBRIUM_AVERAGING):
    """Judge a reduced curve: loading part, equilibrium, strain-rate plateau and yield point.

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
    ratio_avg = moving_average(ratio, max(1, round(averaging / dt)))
    out = Assessment(valid=np.zeros(tau.size, dtype=bool), equilibrium_ratio=ratio_avg)
    res, flags = out.results, out.flags
    region = loading_region(rate, fmean)
    onset = None
    if region is None:
        flags.append(Flag("no_loading", "error", "no loading found (no positive strain rate and force)"))
    else:
        onset = equilibrium_onset(ratio_avg, region, threshold)
        if onset is None:
            flags.append(Flag("no_equilibrium", "error",
                              f"the face forces never settle within {100 * threshold:.0f}% of each "
                              f"other during loading (|R| at the end of loading "
                              f"{abs(ratio_avg[region[1] - 1]):.2f}): the specimen is not in equilibrium"))
        else:
            out.valid[onset:region[1]] = True
            res["equilibrium_from_time_us"] = float(tau[onset] * 1e6)
            res["equilibrium_from_strain"] = float(strain[onset])
            if specimen_transit:
                res["specimen_transit_time_us"] = specimen_transit * 1e6
                res["equilibrium_transits"] = float(tau[onset] / specimen_transit)
            loading_span = tau[region[1] - 1] - tau[region[0]]
            res["valid_fraction_of_loading"] = float((region[1] - onset) / max(region[1] - region[0], 1))
            if res["valid_fraction_of_loading"] < 0.5:
                flags.append(Flag("short_equilibrium", "warning",
                                  f"equilibrium holds over only {100 * res['valid_fraction_of_loading']:.0f}% "
                                  f"of the {loading_span * 1e6:.0f} us loading"))
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
    return out


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
    """

    valid: np.ndarray
    equilibrium_ratio: np.ndarray
    results: dict
    flags: tuple

    @property
    def is_valid(self) -> bool:
        """True when no flag is an error."""
        return not any(f.severity == "error" for f in self.flags)


def record_flags(strains: "GaugeStrains", plan: "WindowPlan", waves: "FaceWaves", barset: "BarSet") -> list:
    """Flags about the record: waves overlapping at the gauge, a truncated record, no transmitted pulse.

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
    t_end = float(strains.time[-1])
    if plan.k1 > n:
        flags.append(Flag("record_truncated", "error",
                          f"the record ends at {t_end * 1e6:.1f} us, before the analysis window does "
                          f"({(t0 + (plan.k1 - 1) * dt) * 1e6:.1f} us)"))
    times = plan.gauge_window_times(t0, dt)
    passed = max(times["transmitted"][1], times["reflected"][1])
    if (passed > t_end or plan.length < duration) and plan.k1 <= n:
        flags.append(Flag("record_truncated", "error",
                          f"the record ends at {t_end * 1e6:.1f} us, before the transmitted (or reflected) pulse "
                          f"has passed its gauge (the {duration * 1e6:.0f} us pulse needs the record to "
                          f"{(passed + max(duration - plan.length, 0)) * 1e6:.1f} us)"))
    et_peak = float(np.max(waves.transmitted)) if waves.transmitted.size else 0.0
    if et_peak < max(8 * strains.noise_transmitted, 0.01 * float(np.max(waves.incident))):
        flags.append(Flag("no_transmitted_pulse", "error",
                          f"no transmitted pulse found (peak {et_peak:.3g} against noise "
                          f"{strains.noise_transmitted:.3g}): check the transmitted channel and the specimen contact"))
    return [f for f in flags if f is not None]


def bar_flags(strains: "GaugeStrains", plan: "WindowPlan", barset: "BarSet") -> tuple[list, dict]:
    """Flags about the bars and the channels: bar stress against yield, clipping, far-end echo of the transmitted bar.

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
    # a channel can only hit its rail while a pulse passes: check the pulse windows
    w0 = max(int(times["incident"][0] / dt - t0 / dt), 0)
    w1 = min(int(max(w[1] for w in times.values()) / dt - t0 / dt) + 1, n)
    for name, volts, gauge in (("incident", strains.volts_incident, gi), ("transmitted", strains.volts_transmitted, gt)):
        flags.append(clipping_flag(volts[w0:w1], name, gauge.full_scale, duration / dt))
    echo = 2 * (bt.length - gt.distance) / bt.wave_speed
    if duration > echo:
        flags.append(Flag("transmitted_overlap", "warning",
                          f"the {duration * 1e6:.0f} us pulse is longer than the {echo * 1e6:.0f} us echo time from "
                          f"the transmitted bar's far end to its gauge"))
    return [f for f in flags if f is not None], results


def judge(strains: "GaugeStrains", plan: "WindowPlan", waves: "FaceWaves", curves: "KolskyCurves", barset: "BarSet",
          specimen: "Specimen", analysis: "AnalysisOptions") -> Verdict:
    """Stage 5: judge a reduced shot: the record (:func:`record_flags`), the curve (:func:`assess_curve`), the bars.

    Parameters
    ----------
    strains, plan, waves : stages 1-3 (:mod:`shpb.pulses`)
    curves : shpb.kolsky.KolskyCurves
    barset : shpb.setup.BarSet
    specimen : shpb.setup.Specimen
        Its modulus (offset line) and transit time (transits to equilibrium).
    analysis : shpb.setup.AnalysisOptions
        ``equilibrium_threshold`` and ``yield_offset``.

    Returns
    -------
    Verdict
    """
    judged = assess_curve(curves.time, curves.strain_rate, curves.force_front, curves.force_back, curves.strain,
                          curves.stress, dt=waves.dt, threshold=analysis.equilibrium_threshold,
                          yield_offset=analysis.yield_offset, specimen_modulus=specimen.modulus,
                          specimen_transit=specimen.transit_time, averaging=EQUILIBRIUM_AVERAGING)
    bflags, bresults = bar_flags(strains, plan, barset)
    flags = separated_flags(record_flags(strains, plan, waves, barset) + judged.flags + bflags, waves)
    return Verdict(valid=judged.valid, equilibrium_ratio=judged.equilibrium_ratio,
                   results={**judged.results, **bresults}, flags=tuple(flags))


def separated_flags(flags: list, waves: "FaceWaves") -> list:
    """The overlaps two-point separation has dealt with become one ``waves_separated`` info flag.

    ``waves_overlap`` goes when the incident bar's waves were separated,
    ``transmitted_overlap`` when the transmitted bar's were
    (:class:`shpb.separation.SeparatedWaves`).
    """
    bars = list(getattr(waves, "separation", {}).get("bars", ()))
    if not bars:
        return flags
    gone = {"waves_overlap"} if "incident" in bars else set()
    gone |= {"transmitted_overlap"} if "transmitted" in bars else set()
    kept = [f for f in flags if f.code not in gone]
    note = Flag("waves_separated", "info", f"the face waves of the {' and '.join(bars)} bar come from two-point "
                                           f"separation ({waves.separation.get('reason', '')})")
    return [note] + kept
