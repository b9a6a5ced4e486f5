"""Bar calibration: wave speed, channel scales and rig checks from calibration shots.

Every shot is shifted with the bar wave speed and every stress is scaled by the
gauge channels' calibration, so a lab checks both before a campaign. This
module holds

- **delays** between a pulse and a later copy of it (echo, transmitted pulse):
  cross-correlation for the whole-sample lag, refined by a phase-slope fit over
  the low-frequency band where the bar is practically dispersion-free
  (:func:`pulse_delay`);
- **wave speed from a free-end shot** (the struck bar alone, its far end free):
  the pulse and its echoes at one gauge (:func:`free_end_wave_speed`);
- **time-of-flight regression** of delays on path lengths, t = L/c + t0
  (:func:`time_of_flight_fit`);
- **bars-together shot**: transmitted/incident ratio, residual reflected wave,
  gauge-to-gauge transit (:func:`bars_together`);
- **striker check**: the incident strain a striker of known speed must give
  (:func:`striker_incident_strain`, :func:`striker_check`);
- **shunt calibration**: a recorded shunt step against the strain the shunt
  simulates (:func:`shunt_step`, :func:`shunt_channel_scale`).

The calibration file in which these results are kept (and from which
:func:`shpb.setup.load_barset` applies them) and the calibration figures
belong to the file and figure edge, :mod:`shpb.calibration_files`.

Signs: bar strains compression positive (the package convention). A
compressive pulse returns from a free end tensile.

References
----------
.. [1] H. Kolsky, *Stress Waves in Solids*, Clarendon Press, Oxford, 1953
   (Dover reprint 1963), ch. 3 (longitudinal waves in bars; reflection at a
   free end; dispersion).
.. [2] K. F. Graff, *Wave Motion in Elastic Solids*, Oxford Univ. Press, 1975,
   ch. 2 (waves in rods: reflection and transmission at a junction and at free
   and fixed ends, impact of rods) and §8.2 (Pochhammer–Chree frequency
   equation).
.. [3] D. Bancroft, "The velocity of longitudinal waves in cylindrical bars",
   Phys. Rev. 59 (1941) 588–593, doi:10.1103/PhysRev.59.588.
.. [4] J. W. Dally and W. F. Riley, *Experimental Stress Analysis*, 3rd ed.,
   McGraw-Hill, 1991, ch. 7 (Wheatstone bridge; shunt calibration).
"""

from __future__ import annotations

import math

import numpy as np

from . import bridge, pulses
from .errors import AnalysisError, InputError

#: Largest bar radius over wavelength (a/Λ) used for delays by default. The
#: fundamental-mode phase velocity there is within about 0.05 % of c0
#: (Rayleigh–Love: 1 − ν²π²(a/Λ)² = 0.9995 for ν = 0.29; Bancroft 1941 gives
#: 0.99789 already at a/Λ = 0.05), so a delay measured below this frequency is
#: a delay at the bar speed c0.
LOW_BAND_RADIUS_OVER_WAVELENGTH = 0.025
#: How far (fraction) the measured speed may lie from the nominal one; sets the
#: lag ranges searched for echoes and transmitted pulses.
SPEED_TOLERANCE = 0.15
#: Smallest normalised correlation accepted as "this is a copy of the pulse".
MIN_CORRELATION = 0.6


# =========================================================================== speeds
def bar_and_bulk_wave_speeds(modulus, density, poisson_ratio):
    """Extensional (thin-bar) and longitudinal (bulk, dilatational) wave speeds.

    Parameters
    ----------
    modulus : float
        Young's modulus E [Pa].
    density : float
        Density ρ [kg/m^3].
    poisson_ratio : float
        Poisson ratio ν [1].

    Returns
    -------
    (float, float)
        c0 = sqrt(E/ρ) and c_L = sqrt(E (1 − ν) / ((1 + ν)(1 − 2ν) ρ)) [m/s].
        A thin bar carries c0 (the pulse wavelength is long against the
        radius); c_L, the speed of an ultrasonic pulse through a thick block,
        is about 15–20 % higher for metals and is not the speed to shift
        bar waves with.

    References
    ----------
    .. [1] H. Kolsky, *Stress Waves in Solids*, 1953, ch. 1 and 3.
    .. [2] K. F. Graff, *Wave Motion in Elastic Solids*, 1975, ch. 2 and 5.
    """
    E, rho, nu = float(modulus), float(density), float(poisson_ratio)
    return math.sqrt(E / rho), math.sqrt(E * (1 - nu) / ((1 + nu) * (1 - 2 * nu) * rho))


# =========================================================================== delays
def low_band_limit(bar_radius, bar_wave_speed, radius_over_wavelength=LOW_BAND_RADIUS_OVER_WAVELENGTH):
    """Highest frequency [Hz] at which a bar is practically dispersion-free.

    Parameters
    ----------
    bar_radius : float
        Bar radius a [m].
    bar_wave_speed : float
        Bar wave speed c0 [m/s].
    radius_over_wavelength : float
        Largest a/Λ [1] (default :data:`LOW_BAND_RADIUS_OVER_WAVELENGTH`).

    Returns
    -------
    float
        f = (a/Λ) c0 / a [Hz].

    References
    ----------
    .. [1] D. Bancroft, Phys. Rev. 59 (1941) 588, doi:10.1103/PhysRev.59.588.
    """
    return float(radius_over_wavelength) * float(bar_wave_speed) / float(bar_radius)


def first_pulse(strain, *, k_sigma=8.0, detect_fraction=0.1, end_fraction=0.02):
    """Find the first pulse of a record and make it positive.

    Parameters
    ----------
    strain : array_like
        A bar-gauge channel (strain [1] or volts; only its shape is used).
    k_sigma : float
        The pulse must stand this many noise standard deviations out.
    detect_fraction : float
        Detection level, fraction of the record's largest excursion [1].
    end_fraction : float
        The pulse ends where it falls below this fraction of its peak [1].

    Returns
    -------
    dict
        ``signal`` (baseline-free, first pulse positive), ``sign`` (+1 or −1:
        the factor applied), ``foot`` (fractional sample index), ``end``
        (sample index), ``noise`` (standard deviation, the input's unit).

    Raises
    ------
    AnalysisError
        No pulse, no pre-trigger baseline, or a pulse that does not end.
    """
    s = np.asarray(strain, dtype=float)
    level, sigma = pulses.robust_noise(s)
    x = s - level
    amp = float(np.max(np.abs(x))) if x.size else 0.0
    if amp <= k_sigma * sigma or amp == 0.0:
        raise AnalysisError(f"no pulse found: nothing stands out of the noise by {k_sigma:g} standard deviations")
    i_det = int(np.argmax(np.abs(x) > max(k_sigma * sigma, detect_fraction * amp)))
    sign = 1.0 if x[i_det] > 0 else -1.0
    y = sign * x
    foot = pulses.find_foot(y, k_sigma=k_sigma)
    if foot is None or foot > i_det:
        foot = float(i_det)
    if foot < 16:
        raise AnalysisError(f"the first pulse starts {foot:.0f} samples into the record: no pre-trigger baseline "
                            f"(record at least 16 samples before the pulse)")
    # the baseline is the quiet part before the foot (the median above saw the pulses too)
    y = y - float(np.mean(y[: max(16, int(0.9 * foot))]))
    # the end: first fall below end_fraction of the running peak (the rise never does)
    tail = y[i_det:]
    below = np.flatnonzero(tail < end_fraction * np.maximum.accumulate(tail))
    if below.size == 0:
        raise AnalysisError("the first pulse does not end before the record does")
    return {"signal": y, "sign": sign, "foot": float(foot), "end": i_det + int(below[0]), "noise": sigma}


def pulse_window(foot, end, n_samples, *, margin_fraction=0.1, min_margin=10):
    """Sample window [start, stop) around a pulse, with quiet margins for a taper.

    Returns
    -------
    (int, int, int)
        start, stop and the margin [samples].
    """
    margin = max(int(min_margin), int(math.ceil(margin_fraction * (end - foot))))
    start = int(math.floor(foot)) - margin
    stop = min(int(end) + margin, int(n_samples))
    if start < 0:
        raise AnalysisError(f"the first pulse starts {foot:.0f} samples into the record: too little pre-trigger "
                            f"for its window ({margin} samples needed)")
    return start, stop, margin


def pulse_delay(reference, target, dt, window, lag_range, *, sign=1.0, max_frequency=None, ramp=None, tail=0):
    """Delay of a later copy of a pulse, to a fraction of a sample.

    The pulse is cut from ``reference`` over ``window`` (raised-cosine edges)
    and cross-correlated with ``sign * target`` over the lags in
    ``lag_range``; the best whole-sample lag K is then refined by a
    least-squares fit of the cross-spectrum phase, φ(ω) = −ω δ, through the
    origin and over 0 < f ≤ ``max_frequency`` (weights |X(ω)|). The delay is
    K dt + δ. Restricting the fit to low frequencies measures the delay at the
    bar speed c0 even when the copy is dispersed: the Pochhammer–Chree phase
    velocity tends to c0 as f → 0 (Bancroft 1941).

    Parameters
    ----------
    reference : array_like
        Signal holding the pulse, baseline-free [any unit].
    target : array_like
        Signal holding the copy (may be ``reference`` itself).
    dt : float
        Sample interval [s].
    window : (int, int)
        Pulse window [start, stop) in samples of ``reference``.
    lag_range : (float, float)
        Smallest and largest delay searched [s].
    sign : float
        −1 to look for an inverted copy (a free-end echo).
    max_frequency : float or None
        Upper end of the phase-slope band [Hz]; None: the correlation peak,
        refined by a parabola, is the answer.
    ramp : int or None
        Taper ramp [samples] (default 1/20 of the window).
    tail : int
        Extra samples kept after the copy's window for the phase fit: a
        dispersed copy trails oscillations (high frequencies travel slower)
        that a window of the pulse's length would cut off.

    Returns
    -------
    dict
        ``delay_s``; ``delay_se_s`` (standard error of the phase-slope fit,
        NaN without one); ``correlation`` (normalised peak, 1 for a perfect
        copy); ``at_edge`` (True when the peak is on the edge of the lag range:
        no genuine maximum); ``amplitude_ratio`` (ratio of the zero-frequency
        components, copy/pulse, i.e. of the windowed time integrals: unaffected
        by dispersion); ``lag_samples`` (K).

    Raises
    ------
    AnalysisError
        The target is too short for the lag range.

    References
    ----------
    .. [1] D. Bancroft, Phys. Rev. 59 (1941) 588, doi:10.1103/PhysRev.59.588.
    """
    from scipy import fft as sfft
    from scipy.signal import correlate

    ref_all = np.asarray(reference, dtype=float)
    tgt = float(sign) * np.asarray(target, dtype=float)
    a, b = int(window[0]), int(window[1])
    n = b - a
    taper = pulses.taper_window(n, 0, n, ramp if ramp is not None else max(2, n // 20))
    ref = ref_all[a:b] * taper
    klo = int(math.ceil(lag_range[0] / dt))
    khi = max(int(math.floor(lag_range[1] / dt)), klo + 2)
    if a + klo - 1 < 0 or b + khi + 1 > tgt.size:
        raise AnalysisError(f"the record ends at sample {tgt.size}, before a copy of the pulse delayed by up to "
                            f"{lag_range[1] * 1e6:.1f} us could have passed (needs {b + khi + 1} samples)")
    seg = tgt[a + klo - 1 : b + khi + 1]
    corr = correlate(seg, ref, mode="valid", method="fft")  # lags klo-1 ... khi+1
    csum = np.concatenate(([0.0], np.cumsum(seg * seg)))
    energy = csum[n:] - csum[:-n]
    denom = np.sqrt(np.maximum(energy, 1e-300) * float(np.sum(ref * ref)))
    norm = corr / denom
    i = int(np.argmax(norm[1:-1])) + 1
    at_edge = i in (1, norm.size - 2)
    y0, y1, y2 = corr[i - 1], corr[i], corr[i + 1]
    curv = y0 - 2.0 * y1 + y2
    frac = 0.5 * (y0 - y2) / curv if curv < 0 else 0.0
    k = klo - 1 + i
    out = {"delay_s": (k + frac) * dt, "delay_se_s": float("nan"), "correlation": float(norm[i]),
           "at_edge": bool(at_edge), "lag_samples": int(k)}
    # phase slope over the low band, on the copy cut at the whole-sample lag
    tail = max(0, min(int(tail), tgt.size - (b + k)))
    copy = tgt[a + k : b + k + tail] * pulses.taper_window(n + tail, 0, n + tail, ramp if ramp is not None
                                                           else max(2, n // 20))
    f_top = 0.5 / dt if max_frequency is None else min(float(max_frequency), 0.5 / dt)
    nfft = sfft.next_fast_len(max(8 * (n + tail), int(math.ceil(24.0 / (f_top * dt)))))
    R, C = sfft.rfft(ref, nfft), sfft.rfft(copy, nfft)
    out["amplitude_ratio"] = float(C[0].real / R[0].real) if R[0].real != 0 else float("nan")
    if max_frequency is None:
        return out
    f = sfft.rfftfreq(nfft, dt)
    band = (f > 0) & (f <= f_top)
    X = C[band] * np.conj(R[band])
    if band.sum() < 3 or not np.any(np.abs(X) > 0):
        return out
    om, w = 2 * np.pi * f[band], np.abs(X)
    phi = np.unwrap(np.angle(X))
    delta = -float(np.sum(w * om * phi) / np.sum(w * om * om))
    resid = phi + om * delta
    # zero padding makes neighbouring bins dependent: nfft/n bins per independent one
    var = float(np.sum(w * resid**2) / max(band.sum() - 1, 1)) * nfft / (n + tail)
    out["delay_s"] = k * dt + delta
    out["delay_se_s"] = math.sqrt(var / float(np.sum(w * om * om)))
    return out


def _through_origin_speed(paths, delays):
    """c from delays = paths / c by least squares through the origin."""
    p, d = np.asarray(paths, float), np.asarray(delays, float)
    return float(np.sum(p * p) / np.sum(p * d))


# =========================================================================== free-end shot
def free_end_passes(gauge_to_free_end, bar_length, count, *, impact_end_free=True):
    """Extra path lengths and signs of the passes of a pulse at one gauge of a bar with a free far end.

    Pass 0 is the pulse itself, running toward the free end. It returns from
    the free end inverted (pass 1, extra path 2 d); when the struck end is free
    too (the striker has come to rest against it and cannot pull), it returns
    from there upright (pass 2, 2 L), and so on: pass j has extra path
    ⌊j/2⌋·2L + (j mod 2)·2d and sign (−1)^j.

    Parameters
    ----------
    gauge_to_free_end : float
        Distance d from the gauge to the free end [m].
    bar_length : float
        Bar length L [m].
    count : int
        Number of passes after the pulse.
    impact_end_free : bool
        False: only the first echo (pass 1) exists.

    Returns
    -------
    paths : ndarray
        Extra path of passes 1..count [m].
    signs : ndarray
        +1 or −1.

    References
    ----------
    .. [1] K. F. Graff, *Wave Motion in Elastic Solids*, 1975, ch. 2 (reflection at a free end).
    """
    count = int(count) if impact_end_free else min(int(count), 1)
    j = np.arange(1, count + 1)
    paths = (j // 2) * 2.0 * float(bar_length) + (j % 2) * 2.0 * float(gauge_to_free_end)
    return paths, np.where(j % 2 == 1, -1.0, 1.0)


def free_end_wave_speed(strain, dt, gauge_to_free_end, bar_length, nominal_wave_speed, bar_radius, *,
                        density=None, poisson_ratio=None, impact_end_free=True, max_echoes=6, max_frequency=None,
                        speed_tolerance=SPEED_TOLERANCE, min_correlation=MIN_CORRELATION, amplitude_tolerance=0.2,
                        gauge_position_uncertainty=0.5e-3, bar_length_uncertainty=1.0e-3):
    """Bar wave speed c0 from a free-end shot: the pulse and its echoes at one gauge.

    The pulse is compared with each later pass (an echo from the free end is
    inverted, one from the struck end upright) by :func:`pulse_delay`, whose
    low-band phase slope gives the delay at c0 despite dispersion. The speed is
    the least-squares fit through the origin of delays on extra paths,
    c0 = Σ P² / Σ P·D.

    Parameters
    ----------
    strain : array_like
        The gauge's channel (strain [1]; volts will do, only timing is used).
    dt : float
        Sample interval [s].
    gauge_to_free_end : float
        Gauge to free end [m].
    bar_length : float
        Bar length [m].
    nominal_wave_speed : float
        Expected speed [m/s] (handbook sqrt(E/rho)); only centres the search.
    bar_radius : float
        Bar radius [m]; sets the dispersion-free band (:func:`low_band_limit`).
    density : float or None
        Bar density [kg/m^3]; with it, E = ρ c0² is reported.
    poisson_ratio : float or None
        Bar Poisson ratio [1]; with it, a speed nearer the bulk speed than the
        bar speed is noted (see :func:`bar_and_bulk_wave_speeds`).
    impact_end_free : bool
        Use echoes from the struck end too (see :func:`free_end_passes`).
    max_echoes : int
        Most passes used after the pulse.
    max_frequency : float or None
        Phase-slope band [Hz]; default :func:`low_band_limit`.
    speed_tolerance : float
        The speed is searched within this fraction of the nominal one [1].
    min_correlation : float
        Smallest normalised correlation accepted as an echo [1].
    amplitude_tolerance : float
        Largest departure of an echo's amplitude ratio from 1 [1]. The ratio
        is that of the time integrals (the momentum each pass carries), which
        a free end returns whole and dispersion does not change; a specimen or
        another bar touching the far end returns less. Raise it for lossy
        (polymer) bars.
    gauge_position_uncertainty, bar_length_uncertainty : float
        Standard uncertainties of the measured gauge position and bar length [m].

    Returns
    -------
    dict
        ``wave_speed_m_per_s``; ``wave_speed_uncertainty_m_per_s`` (combined
        standard uncertainty: the statistical part — the larger of the spread
        of the echoes about the fit and the phase-slope timing error — and the
        length parts in quadrature); ``uncertainty_components_m_per_s``;
        ``modulus_Pa`` and ``modulus_uncertainty_Pa`` (with ``density``);
        ``echoes`` (per pass: ``pass``, ``path_m``, ``delay_s``, ``sign``,
        ``wave_speed_m_per_s``, ``correlation``, ``amplitude_ratio``);
        ``first_pulse_sign``; ``pulse_duration_s``; ``window`` (samples);
        ``max_frequency_Hz``; ``notes`` (list of str).

    Raises
    ------
    AnalysisError
        No pulse; the echo overlaps the pulse at the gauge; the record ends
        before the first echo; no echo found; an echo too weak or strong for
        a free end.

    References
    ----------
    .. [1] H. Kolsky, *Stress Waves in Solids*, 1953, ch. 3.
    .. [2] K. F. Graff, *Wave Motion in Elastic Solids*, 1975, ch. 2.
    """
    if int(max_echoes) < 1:
        raise InputError(f"max_echoes must be at least 1, got {max_echoes}", "max_echoes")
    p = first_pulse(strain)
    y, n = p["signal"], p["signal"].size
    a, b, margin = pulse_window(p["foot"], p["end"], n)
    width = (b - a) * dt
    fmax = low_band_limit(bar_radius, nominal_wave_speed) if max_frequency is None else float(max_frequency)
    # one pass more than used: the next pass must not run into the last window either
    paths, signs = free_end_passes(gauge_to_free_end, bar_length, max_echoes + 1, impact_end_free=impact_end_free)
    lags = np.concatenate(([0.0], paths / nominal_wave_speed))
    notes, echoes = [], []
    for j in range(1, min(int(max_echoes), paths.size) + 1):
        path, sgn = paths[j - 1], signs[j - 1]
        # earliest separations from the neighbouring passes (at the fastest speed searched)
        prev_gap = (lags[j] - lags[j - 1]) / (1 + speed_tolerance)
        next_gap = (lags[j + 1] - lags[j]) / (1 + speed_tolerance) if j + 1 < lags.size else math.inf
        if j == 1 and prev_gap <= width:
            raise AnalysisError(
                f"the echo from the free end overlaps the pulse at the gauge: the pulse window is {width * 1e6:.0f} us "
                f"but the echo comes {lags[1] * 1e6:.0f} us after the pulse (2 x {gauge_to_free_end:g} m at "
                f"{nominal_wave_speed:.0f} m/s); use a shorter striker or a gauge farther from the free end")
        if j == 1 and next_gap <= width:
            raise AnalysisError(
                f"the first echo overlaps the pass returning from the struck end ({(lags[2] - lags[1]) * 1e6:.0f} us "
                f"later): the pulse window is {width * 1e6:.0f} us; use a shorter striker or a gauge nearer the "
                f"middle of the bar")
        if min(prev_gap, next_gap) <= width:
            notes.append(f"pass {j} and later not used: the pulse window ({width * 1e6:.0f} us) is longer than the "
                         f"gap to a neighbouring pass ({min(prev_gap, next_gap) * 1e6:.0f} us)")
            break
        # search between the neighbouring passes only
        lo = max(path / (nominal_wave_speed * (1 + speed_tolerance)), 0.5 * (lags[j - 1] + lags[j]))
        hi = path / (nominal_wave_speed * (1 - speed_tolerance))
        if j + 1 < lags.size:
            hi = min(hi, 0.5 * (lags[j] + lags[j + 1]))
        if b + hi / dt + 2 > n:
            if j == 1:
                raise AnalysisError(
                    f"the record ends {n * dt * 1e6:.0f} us after its start, before the first echo from the free end "
                    f"has passed the gauge (about {(p['foot'] * dt + lags[1] + width) * 1e6:.0f} us): record longer")
            break
        # the copy's window may reach half-way to the next pass (its dispersion tail)
        tail = int(max(0.0, 0.5 * (next_gap - width)) / dt) if math.isfinite(next_gap) else (b - a) // 2
        r = pulse_delay(y, y, dt, (a, b), (lo, hi), sign=sgn, max_frequency=fmax, ramp=max(2, margin // 2),
                        tail=min(tail, b - a))
        if r["correlation"] < min_correlation or r["at_edge"]:
            if j == 1:
                raise AnalysisError(
                    f"no echo from the free end found {lo * 1e6:.0f}-{hi * 1e6:.0f} us after the pulse (best match "
                    f"has correlation {r['correlation']:.2f} < {min_correlation:g}): is the far end free, and is "
                    f"the record long enough?")
            notes.append(f"pass {j} and later not used: no clear copy of the pulse (correlation "
                         f"{r['correlation']:.2f})")
            break
        if abs(r["amplitude_ratio"] - 1) > amplitude_tolerance:
            if j == 1:
                raise AnalysisError(
                    f"the first echo carries {100 * r['amplitude_ratio']:.0f} % of the pulse's impulse, but a free "
                    f"end returns all of it: is the far end free (no specimen or bar touching it)?")
            notes.append(f"pass {j} and later not used: it carries {100 * r['amplitude_ratio']:.0f} % of the "
                         f"pulse's impulse")
            break
        echoes.append({"pass": j, "path_m": float(path), "delay_s": r["delay_s"], "delay_se_s": r["delay_se_s"],
                       "sign": int(sgn), "wave_speed_m_per_s": path / r["delay_s"],
                       "correlation": r["correlation"], "amplitude_ratio": r["amplitude_ratio"]})
    P = np.array([e["path_m"] for e in echoes])
    D = np.array([e["delay_s"] for e in echoes])
    c0 = _through_origin_speed(P, D)
    comp = _free_end_uncertainty(P, D, c0, echoes, gauge_to_free_end, bar_length,
                                 gauge_position_uncertainty, bar_length_uncertainty, impact_end_free)
    u = math.sqrt(max(comp["echo_spread"], comp["timing"]) ** 2 + comp["gauge_position"] ** 2
                  + comp["bar_length"] ** 2)
    if p["sign"] < 0:
        notes.append("the first pulse is negative on this channel: if it is the compressive pulse from the "
                     "striker, the gauge polarity in the bar set is inverted")
    if poisson_ratio is not None:
        ratio = bar_and_bulk_wave_speeds(1.0, 1.0, poisson_ratio)[1]  # c_L / c0
        if abs(c0 - ratio * nominal_wave_speed) < abs(c0 - nominal_wave_speed):
            notes.append(f"the speed is nearer the bulk (longitudinal) speed {ratio * nominal_wave_speed:.0f} m/s than "
                         f"the bar speed {nominal_wave_speed:.0f} m/s: check the gauge position and bar length")
    dev = c0 / nominal_wave_speed - 1
    out = {
        "wave_speed_m_per_s": c0,
        "wave_speed_uncertainty_m_per_s": u,
        "uncertainty_components_m_per_s": comp,
        "nominal_wave_speed_m_per_s": float(nominal_wave_speed),
        "difference_from_nominal": dev,
        "echoes": echoes,
        "first_pulse_sign": int(p["sign"]),
        "pulse_duration_s": (p["end"] - p["foot"]) * dt,
        "pulse_foot_s": p["foot"] * dt,
        "window": (a, b),
        "max_frequency_Hz": fmax,
        "notes": notes,
    }
    if density is not None:
        out["modulus_Pa"] = density * c0**2
        out["modulus_uncertainty_Pa"] = 2 * density * c0 * u
    return out


def _free_end_uncertainty(P, D, c0, echoes, d, L, u_d, u_L, impact_end_free):
    """Standard-uncertainty parts of c0 [m/s]: echo spread, timing, gauge position, bar length."""
    n = P.size
    # spread of the passes about the through-origin fit (slope s = 1/c)
    if n >= 2:
        resid = D - P / c0
        se_slope = math.sqrt(float(np.sum(resid**2)) / (n - 1) / float(np.sum(P * P)))
        spread = c0**2 * se_slope
    else:
        spread = 0.0
    se = np.array([e["delay_se_s"] for e in echoes], dtype=float)
    se = np.where(np.isfinite(se), se, 0.0)
    timing = c0**2 * math.sqrt(float(np.sum((P * se) ** 2))) / float(np.sum(P * P))
    # lengths: how c0 moves when the gauge position or the bar length moves by one standard uncertainty
    passes = np.array([e["pass"] for e in echoes])

    def c_with(dd, LL):
        paths, _ = free_end_passes(dd, LL, int(passes.max()), impact_end_free=impact_end_free)
        return _through_origin_speed(paths[passes - 1], D)

    return {"echo_spread": spread, "timing": timing, "gauge_position": abs(c_with(d + u_d, L) - c0),
            "bar_length": abs(c_with(d, L + u_L) - c0)}


# =========================================================================== time of flight
def time_of_flight_fit(path_lengths, delays, *, k_sigma=3.0, intercept_floor=0.1e-6):
    """Wave speed and fixed delay from a time-of-flight regression, t = L/c + t0.

    Parameters
    ----------
    path_lengths : array_like
        Path lengths L [m] (e.g. bars of different lengths, or gauge pairs).
    delays : array_like
        Measured delays t [s], one per length.
    k_sigma : float
        The intercept is flagged when |t0| exceeds this many standard errors ...
    intercept_floor : float
        ... and this absolute floor [s] (a fraction of a sample is not a finding).

    Returns
    -------
    dict
        ``wave_speed_m_per_s``, ``wave_speed_uncertainty_m_per_s``, ``intercept_s``,
        ``intercept_se_s`` (NaN with only two points), ``intercept_significant``
        (bool), ``residuals_s``, ``n_points``, ``notes``.

    Raises
    ------
    InputError
        Unequal lengths, non-finite values, fewer than two different lengths.
    AnalysisError
        Delays that do not grow with length.

    Notes
    -----
    Ordinary least squares on (L, 1); standard errors from the residual
    variance with n − 2 degrees of freedom; se(c) = c² se(1/c). A significant
    intercept means a delay that is not wave travel: trigger or cable delays,
    channels with different filters, a gap at a contact.
    """
    L = np.asarray(path_lengths, dtype=float).ravel()
    t = np.asarray(delays, dtype=float).ravel()
    if L.size != t.size:
        raise InputError(f"{L.size} path lengths but {t.size} delays: one delay per length expected")
    if not (np.all(np.isfinite(L)) and np.all(np.isfinite(t))):
        raise InputError("path lengths and delays must be finite numbers")
    distinct = np.unique(L)
    if distinct.size < 2:
        got = f"one ({distinct[0]:g} m)" if distinct.size else "none"
        raise InputError(f"a time-of-flight regression needs at least two different path lengths; got {got}")
    X = np.column_stack([L, np.ones_like(L)])
    beta, *_ = np.linalg.lstsq(X, t, rcond=None)
    slope, t0 = float(beta[0]), float(beta[1])
    if not slope > 0:
        raise AnalysisError(f"the delays do not grow with the path length (slope {slope:.3g} s/m): check the data")
    resid = t - X @ beta
    dof = L.size - 2
    notes = []
    if dof > 0:
        s2 = float(np.sum(resid**2)) / dof
        cov = s2 * np.linalg.inv(X.T @ X)
        se_slope, se_t0 = math.sqrt(cov[0, 0]), math.sqrt(cov[1, 1])
    else:
        se_slope = se_t0 = float("nan")
        notes.append("two points: the line passes through both; measure three or more lengths for standard errors")
    c = 1.0 / slope
    significant = bool(dof > 0 and abs(t0) > k_sigma * se_t0 and abs(t0) > intercept_floor)
    if significant:
        notes.append(f"intercept t0 = {t0 * 1e6:.3f} us is {abs(t0) / se_t0:.1f} standard errors from zero: a "
                     f"delay that is not wave travel (trigger or cable delay, unequal channel filters, a gap at a "
                     f"contact)")
    return {"wave_speed_m_per_s": c, "wave_speed_uncertainty_m_per_s": c * c * se_slope, "intercept_s": t0,
            "intercept_se_s": se_t0, "intercept_significant": significant, "residuals_s": resid,
            "n_points": int(L.size), "notes": notes}


# =========================================================================== bars together
def junction_ratios(incident_impedance, transmitted_impedance, incident_stiffness, transmitted_stiffness):
    """Strain ratios at a junction of two bars: transmitted/incident and reflected/incident.

    Parameters
    ----------
    incident_impedance, transmitted_impedance : float
        Z = ρ c A of each bar [kg/s] (c the bar's wave speed, measured if known).
    incident_stiffness, transmitted_stiffness : float
        E A of each bar [N]: the factor the reduction turns strain into force with.

    Returns
    -------
    (float, float)
        ε_T/ε_I = [2 Z_t / (Z_i + Z_t)] (E_i A_i)/(E_t A_t) and
        ε_R/ε_I = (Z_t − Z_i)/(Z_t + Z_i) (compression positive; 1 and 0 for
        matched bars).

    Notes
    -----
    Force transmission and reflection coefficients 2 Z_t/(Z_i + Z_t) and
    (Z_t − Z_i)/(Z_i + Z_t) at a junction of rods (Graff 1975, ch. 2); strains
    from forces with ε = F/(E A), as the reduction does.

    References
    ----------
    .. [1] K. F. Graff, *Wave Motion in Elastic Solids*, 1975, ch. 2.
    """
    zi, zt = float(incident_impedance), float(transmitted_impedance)
    return (2 * zt / (zi + zt) * float(incident_stiffness) / float(transmitted_stiffness), (zt - zi) / (zt + zi))


def bars_together(strain_incident, strain_transmitted, dt, incident_gauge_distance, transmitted_gauge_distance,
                  *, incident_wave_speed, transmitted_wave_speed, bar_radius, expected_ratio=1.0,
                  expected_reflected_ratio=0.0, transmitted_bar_length=None, max_frequency=None, speed_tolerance=SPEED_TOLERANCE,
                  min_correlation=MIN_CORRELATION, gauge_position_uncertainty=0.5e-3, reflected_limit=0.05,
                  ratio_limit=0.05):
    """Bars-together shot: channel ratio, residual reflected wave and gauge-to-gauge transit.

    Parameters
    ----------
    strain_incident, strain_transmitted : array_like
        Bar strains at the two gauges [1], compression positive, converted with
        a scale of 1 (raw bridge strain).
    dt : float
        Sample interval [s].
    incident_gauge_distance, transmitted_gauge_distance : float
        Gauge to the contact face of each bar [m].
    incident_wave_speed, transmitted_wave_speed : float
        Nominal bar speeds [m/s]: they centre the searches.
    bar_radius : float
        Incident bar radius [m] (dispersion-free band).
    expected_ratio, expected_reflected_ratio : float
        What the bars alone give (:func:`junction_ratios`; 1 and 0 for matched bars).
    transmitted_bar_length : float or None
        Transmitted bar length [m]: the transmitted pulse's window (with its
        dispersion tail, up to half the pulse window more) stops before the
        echo from that bar's far end. None: the tail is half the window.
    max_frequency : float or None
        Phase-slope band [Hz]; default :func:`low_band_limit`.
    speed_tolerance, min_correlation
        As in :func:`free_end_wave_speed`.
    gauge_position_uncertainty : float
        Standard uncertainty of each gauge position [m].
    reflected_limit : float
        Residual reflected wave (fraction of the incident peak, beyond what the
        impedances explain) above which the contact is flagged [1].
    ratio_limit : float
        Departure of the channel ratio from the expected one that is flagged [1].

    Returns
    -------
    dict
        ``transmitted_to_incident_ratio`` (ratio of the time integrals of the
        transmitted and incident pulses: their zero-frequency amplitudes,
        which dispersion does not change), ``expected_ratio``,
        ``transmitted_scale_relative_to_incident`` (expected/measured: the
        transmitted channel's scale over the incident one's),
        ``reflected_to_incident_ratio`` (integrals), ``reflected_peak_fraction``
        (largest |strain| in the reflected window over the incident peak),
        ``expected_reflected_ratio``, ``transit_time_s``, ``transit_se_s``,
        ``wave_speed_m_per_s`` (gauge-to-gauge path over transit: one speed for
        both bars), ``wave_speed_uncertainty_m_per_s``, ``correlation``,
        ``notes``.

    Raises
    ------
    AnalysisError
        No incident pulse; the incident pulse overlaps its reflection at the
        gauge; no transmitted pulse; the record is too short.

    References
    ----------
    .. [1] K. F. Graff, *Wave Motion in Elastic Solids*, 1975, ch. 2.
    """
    p = first_pulse(strain_incident)
    yi, n = p["signal"], p["signal"].size
    if p["sign"] < 0:
        raise AnalysisError("the incident pulse is tensile (negative) on the incident channel: check the gauge "
                            "polarity in the bar set")
    st = np.asarray(strain_transmitted, dtype=float)
    yt = st - float(np.mean(st[: max(16, int(0.9 * p["foot"]))]))
    a, b, margin = pulse_window(p["foot"], p["end"], n)
    width = (b - a) * dt
    di, dtr = float(incident_gauge_distance), float(transmitted_gauge_distance)
    ci, ct = float(incident_wave_speed), float(transmitted_wave_speed)
    fmax = low_band_limit(bar_radius, ci) if max_frequency is None else float(max_frequency)
    if 2 * di / (ci * (1 + speed_tolerance)) <= width:
        raise AnalysisError(
            f"the incident pulse overlaps its reflection at the incident gauge: the pulse window is "
            f"{width * 1e6:.0f} us but the reflection comes {2 * di / ci * 1e6:.0f} us later (2 x {di:g} m): use a "
            f"shorter striker")
    lag = di / ci + dtr / ct
    tail = (b - a) // 2
    if transmitted_bar_length is not None:
        room = 2 * (transmitted_bar_length - dtr) / (ct * (1 + speed_tolerance)) - width
        tail = max(0, min(tail, int(room / dt)))
    r = pulse_delay(yi, yt, dt, (a, b), (lag / (1 + speed_tolerance), lag / (1 - speed_tolerance)),
                    max_frequency=fmax, ramp=max(2, margin // 2), tail=tail)
    if r["correlation"] < min_correlation or r["at_edge"]:
        raise AnalysisError(f"no transmitted pulse found near {lag * 1e6:.0f} us after the incident one (best match "
                            f"has correlation {r['correlation']:.2f}): are the bars in contact, the channel live?")
    path = di + dtr
    c = path / r["delay_s"]
    se = r["delay_se_s"] if math.isfinite(r["delay_se_s"]) else 0.0
    u_c = c * math.hypot(se / r["delay_s"], math.sqrt(2) * gauge_position_uncertainty / path)
    expected, expected_r = float(expected_ratio), float(expected_reflected_ratio)
    ratio = r["amplitude_ratio"]
    # the reflected window: where the incident pulse returns to its gauge. The measured gauge-to-gauge
    # speed is the incident bar's only when both bars are of one speed; otherwise the nominal one
    k_r = int(round(2 * di / c / dt)) if ci == ct else int(round(2 * di / ci / dt))
    if b + k_r > n:
        raise AnalysisError("the record ends before the reflected wave has passed the incident gauge")
    taper = pulses.taper_window(b - a, 0, b - a, max(2, margin // 2))
    inc = yi[a:b] * taper
    refl = yi[a + k_r : b + k_r] * taper
    refl_ratio = float(np.sum(refl) / np.sum(inc))
    refl_peak = float(np.max(np.abs(refl)) / np.max(inc))
    notes = []
    if abs(refl_peak - abs(expected_r)) > reflected_limit:
        notes.append(f"residual reflected wave {100 * refl_peak:.1f} % of the incident peak (bars alone explain "
                     f"{100 * abs(expected_r):.1f} %): check the bar alignment, that the faces are flat, square and "
                     f"clean, and the contact")
    if abs(ratio / expected - 1) > ratio_limit:
        notes.append(f"transmitted/incident ratio {ratio:.3f} departs from the expected {expected:.3f} by more than "
                     f"{100 * ratio_limit:.0f} %: check gauge factors, gains, excitations and the gauge bonding")
    return {"transmitted_to_incident_ratio": ratio, "expected_ratio": expected,
            "transmitted_scale_relative_to_incident": expected / ratio,
            "reflected_to_incident_ratio": refl_ratio, "reflected_peak_fraction": refl_peak,
            "expected_reflected_ratio": expected_r, "transit_time_s": r["delay_s"], "transit_se_s": r["delay_se_s"],
            "path_m": path, "wave_speed_m_per_s": c, "wave_speed_uncertainty_m_per_s": u_c,
            "correlation": r["correlation"], "pulse_foot_s": p["foot"] * dt, "window": (a, b),
            "reflected_lag_samples": k_r, "transmitted_lag_samples": r["lag_samples"], "max_frequency_Hz": fmax,
            "notes": notes}


# =========================================================================== striker
def striker_incident_strain(striker_speed, bar_wave_speed, striker_impedance=None, bar_impedance=None):
    """Incident strain from a striker of known impact speed.

    Parameters
    ----------
    striker_speed : float
        Impact speed v [m/s].
    bar_wave_speed : float
        Incident-bar wave speed c_b [m/s].
    striker_impedance, bar_impedance : float or None
        Z = ρ c A of striker and bar [kg/s]; both None: a matched striker (same
        material and area as the bar).

    Returns
    -------
    float
        ε_i = (v / c_b) Z_s / (Z_s + Z_b) [1], compression positive; v/(2 c_b) matched.

    References
    ----------
    .. [1] H. Kolsky, *Stress Waves in Solids*, 1953, ch. 3 (impact of bars).
    .. [2] K. F. Graff, *Wave Motion in Elastic Solids*, 1975, ch. 2 (impact of rods).
    """
    v, c = float(striker_speed), float(bar_wave_speed)
    if striker_impedance is None and bar_impedance is None:
        return v / (2.0 * c)
    if striker_impedance is None or bar_impedance is None:
        raise InputError("give both the striker and the bar impedance, or neither (a matched striker)",
                         "striker_impedance/bar_impedance")
    zs, zb = float(striker_impedance), float(bar_impedance)
    return v / c * zs / (zs + zb)


def pulse_plateau(strain, foot, end, *, core=0.5):
    """Mean and standard deviation of a pulse's plateau [1].

    The plateau is the central ``core`` fraction of the span where the pulse
    is above half its peak (rise, fall and most of the dispersion ringing at
    the ends left out).
    """
    y = np.asarray(strain, dtype=float)
    seg = y[int(foot) : int(end) + 1]
    above = np.flatnonzero(seg >= 0.5 * np.max(seg))
    i0, i1 = above[0], above[-1]
    half = 0.5 * core * (i1 - i0)
    mid = 0.5 * (i0 + i1)
    part = seg[int(mid - half) : int(mid + half) + 1]
    return float(np.mean(part)), float(np.std(part))


def striker_check(strain, dt, striker_speed, *, bar_wave_speed, bar_modulus, striker_impedance=None,
                  bar_impedance=None, bar_yield_strength=None, striker_length=None, striker_wave_speed=None,
                  speed_uncertainty=None):
    """Measured incident plateau against the strain the striker speed predicts.

    Parameters
    ----------
    strain : array_like
        Incident-bar strain [1], compression positive, converted with a scale
        of 1 (raw bridge strain).
    dt : float
        Sample interval [s].
    striker_speed : float
        Measured impact speed [m/s] (light gates).
    bar_wave_speed, bar_modulus : float
        Incident bar c_b [m/s] (measured if available) and E [Pa].
    striker_impedance, bar_impedance : float or None
        See :func:`striker_incident_strain`.
    bar_yield_strength : float or None
        Bar yield strength [Pa], for the bar-stress caution.
    striker_length, striker_wave_speed : float or None
        For the expected pulse duration 2 L_s / c_s [s].
    speed_uncertainty : float or None
        Standard uncertainty of the speed [m/s]; gives that of the scale.

    Returns
    -------
    dict
        ``expected_strain``, ``measured_strain`` (plateau mean), ``plateau_std``,
        ``scale`` (expected/measured: multiplier on the channel's raw strain),
        ``discrepancy`` (measured/expected − 1), ``scale_uncertainty`` (from the
        speed), ``expected_bar_stress_Pa`` (E ε), ``measured_bar_stress_Pa``,
        ``expected_duration_s``, ``measured_duration_s``, ``cautions``.

    References
    ----------
    .. [1] H. Kolsky, *Stress Waves in Solids*, 1953, ch. 3.
    """
    from .validity import bar_stress_flag

    p = first_pulse(strain)
    if p["sign"] < 0:
        raise AnalysisError("the incident pulse is negative on this channel: check the gauge polarity in the bar set")
    y = p["signal"]
    measured, spread = pulse_plateau(y, p["foot"], p["end"])
    expected = striker_incident_strain(striker_speed, bar_wave_speed, striker_impedance, bar_impedance)
    scale = expected / measured
    cautions = []
    if striker_speed > 50.0:
        cautions.append(f"striker speed {striker_speed:.1f} m/s is high for a bar rig: check its unit and the "
                        f"light-gate spacing")
    for label, eps in (("expected", expected), ("measured", measured)):
        flag = bar_stress_flag(eps, bar_modulus, bar_yield_strength, f"incident ({label})")
        if flag is not None:
            cautions.append(flag.message)
    if abs(scale - 1) > 0.05:
        cautions.append(f"the channel reads {100 * (measured / expected - 1):+.1f} % against the striker: check "
                        f"gauge factor, gain, excitation and the speed measurement before applying this scale")
    out = {"expected_strain": expected, "measured_strain": measured, "plateau_std": spread, "scale": scale,
           "discrepancy": measured / expected - 1, "expected_bar_stress_Pa": bar_modulus * expected,
           "measured_bar_stress_Pa": bar_modulus * measured,
           "measured_duration_s": (p["end"] - p["foot"]) * dt, "pulse_foot_s": p["foot"] * dt,
           "pulse_end_s": p["end"] * dt, "cautions": cautions}
    if speed_uncertainty is not None:
        out["scale_uncertainty"] = scale * float(speed_uncertainty) / float(striker_speed)
    if striker_length is not None and striker_wave_speed is not None:
        out["expected_duration_s"] = 2.0 * striker_length / striker_wave_speed
    return out


# =========================================================================== shunt calibration
def shunt_step(volts, *, k_sigma=10.0):
    """Height of a shunt step in a recorded channel.

    The step is located where splitting the record in two gives the most
    significant change of mean (the two-sample t statistic over every split,
    a cumulative-sum change-point search); the levels before and after are
    medians that leave a short transition out.

    Parameters
    ----------
    volts : array_like
        The channel with the shunt switched once during the record [V].
    k_sigma : float
        The step must exceed this many noise standard deviations.

    Returns
    -------
    dict
        ``height_V`` (after − before), ``before_V``, ``after_V``, ``noise_V``,
        ``index`` (sample of the change).

    Raises
    ------
    AnalysisError
        No step standing out of the noise.
    """
    v = np.asarray(volts, dtype=float)
    n = v.size
    if n < 32:
        raise AnalysisError(f"only {n} samples: too short for a shunt step")
    k = np.arange(1, n)
    cs = np.cumsum(v)[:-1]
    m1 = cs / k
    m2 = (v.sum() - cs) / (n - k)
    t = np.abs(m1 - m2) * np.sqrt(k * (n - k) / n)
    lo = max(8, n // 50)
    i = int(np.argmax(t[lo : n - lo])) + lo + 1
    gap = max(2, n // 200)
    before = float(np.median(v[: max(i - gap, 1)]))
    after = float(np.median(v[min(i + gap, n - 1) :]))
    _, noise = pulses.robust_noise(v)
    height = after - before
    if abs(height) <= k_sigma * max(noise, 1e-300):
        raise AnalysisError(f"no shunt step found: the largest change of level ({height:.3g} V) is within "
                            f"{k_sigma:g} noise standard deviations ({noise:.3g} V)")
    return {"height_V": height, "before_V": before, "after_V": after, "noise_V": noise, "index": i}


def shunt_channel_scale(step_volts, gauge_resistance, shunt_resistance, gauge_factor, excitation, gain=1.0):
    """Channel scale from a shunt step: the strain the shunt simulates over the strain the step reads.

    A shunt across one active arm changes that arm alone, so the step is read
    with the single-arm (quarter-bridge) relation whatever the bridge's
    arrangement; the simulated strain is compressive (the arm's resistance
    falls). Signs of the recorded step vary with wiring; magnitudes are used.

    Parameters
    ----------
    step_volts : float
        Recorded step height after the amplifier [V].
    gauge_resistance, shunt_resistance : float
        Rg and Rs [ohm].
    gauge_factor : float
        GF [1].
    excitation : float
        Bridge excitation [V].
    gain : float
        Amplifier gain [V/V].

    Returns
    -------
    dict
        ``expected_strain`` (−Rg/(GF (Rg + Rs)), Dally & Riley 1991),
        ``measured_strain`` (from the step), ``scale`` (expected/measured:
        multiplier on the channel's strain; checks excitation, gain and
        recorder, not the gauge factor).

    References
    ----------
    .. [1] J. W. Dally and W. F. Riley, *Experimental Stress Analysis*, 3rd ed., 1991, ch. 7.
    """
    expected = bridge.shunt_strain(gauge_resistance, shunt_resistance, gauge_factor)
    ratio = -abs(float(step_volts)) / (float(gain) * float(excitation))
    measured = float(bridge.strain_from_ratio(ratio, "quarter", gauge_factor))
    return {"expected_strain": expected, "measured_strain": measured, "scale": expected / measured}
