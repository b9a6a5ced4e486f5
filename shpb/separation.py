"""Two-point wave separation: the waves travelling each way along a bar, from two gauge stations.

A gauge records the sum of the wave travelling towards the specimen and the
wave travelling away from it. When the loading pulse lasts longer than the
round trip 2 d / c0 from the gauge to the specimen, the incident and reflected
waves overlap at the gauge and the classic analysis cannot tell them apart.
Two stations at different distances from the specimen see the same two waves
with different delays, which is enough to separate them (Lundberg & Henchoz
1977): with ``H`` the propagation over the spacing Δ between the stations
(a delay Δ/c0 and, with dispersion, the Pochhammer–Chree phase of each
harmonic), ``P`` the wave travelling towards the specimen at the far station
and ``Q`` the wave travelling away at the near station,

    ε_far  = P + H Q,        ε_near = H P + Q,

so that

    P = (ε_far − H ε_near) / (1 − H²),    Q = (ε_near − H ε_far) / (1 − H²).

Ill-conditioning
----------------
``1 − H²`` vanishes wherever the spacing is a whole number of half
wavelengths, f_n = n c(f_n) / (2 Δ), n = 0, 1, 2, ... (and at zero frequency):
at those frequencies the two stations see the same thing and the split is
undetermined. The bars start at rest, so the waves are causal, and the
division is done as the causal series 1 / (1 − H²) = Σ H^{2m}, m = 0 .. M,
which is exact over a record of length T once 2 M Δ / c0 > T: it is the
time-domain recursion of Lundberg & Henchoz, P(t) = ε_far(t) − ε_near(t − Δ/c0)
+ P(t − 2Δ/c0), written in the frequency domain so that dispersion can be
included (the frequency-domain form of Zhao & Gary 1997 and Bussac, Collet,
Gary & Othman 2002, from memory). What it cannot restore is information the
records do not hold: at f_n every error of the records (noise, a gauge
factor off by a per cent, a wave speed off by a little) is not damped but
summed once per round trip 2Δ/c0, so it grows with time like a random walk
over the record (as sqrt(t c0 / (2 Δ)) for noise). Two things bound it:

* a **bounded frequency band**: both records are low-passed (zero phase,
  raised-cosine taper over the top 20 % of the band) below ``cutoff``,
  by default the onset of the bar's second longitudinal mode (above it the
  fundamental-mode model of the bar no longer holds, and a bar record holds
  mostly noise), which removes the recorder's broadband noise from every
  f_n above the band;
* a **wide spacing**: fewer round trips over the record, fewer sums.

The error left is noise and record mismatch inside the band; it is stated in
``docs/separation.md`` with the measured figures.

References
----------
.. [1] B. Lundberg and A. Henchoz, "Analysis of elastic waves from two-point
   strain measurement", Exp. Mech. 17 (1977) 213-218 (from memory).
.. [2] H. Zhao and G. Gary, "A new method for the separation of waves.
   Application to the SHPB technique for an unlimited duration of
   measurement", J. Mech. Phys. Solids 45 (1997) 1185-1202 (from memory).
.. [3] M.-N. Bussac, P. Collet, G. Gary and R. Othman, "An optimisation method
   for separating and rebuilding one-dimensional dispersive waves from
   multi-point measurements. Application to elastic or viscoelastic bars",
   J. Mech. Phys. Solids 50 (2002) 321-349 (from memory).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Optional

import numpy as np
from numpy.typing import ArrayLike

from .conditioning import lowpass_gain
from .errors import InputError
from .pulses import FaceWaves

__all__ = ["wavenumber", "separate_two_point", "noise_gains", "band_taper", "singular_frequencies", "BarSplit", "Separation",
           "SeparatedWaves", "default_cutoff", "split_bar", "separate_waves", "waves_at_faces"]

#: Fraction of the band over which the low-pass tapers to zero (raised cosine).
BAND_TAPER = 0.2


def wavenumber(frequency: ArrayLike, bar_radius: float, bar_wave_speed: float, poisson_ratio: float, *,
               dispersion: bool = True) -> np.ndarray:
    """Angular wavenumber κ = 2π f / c(f) of the bar's fundamental longitudinal mode [rad/m].

    Parameters
    ----------
    frequency : array_like
        Frequencies f >= 0 [Hz].
    bar_radius : float
        Bar radius a [m].
    bar_wave_speed : float
        Bar wave speed c0 [m/s].
    poisson_ratio : float
        Poisson ratio of the bar [1].
    dispersion : bool
        With the Pochhammer–Chree phase velocity c(f)
        (:func:`shpb.dispersion.normalized_curve`, held at its value at the
        end of the table above it, as :func:`shpb.dispersion.propagate`
        does); without, c = c0.

    Returns
    -------
    ndarray
        κ [rad/m].
    """
    f = np.asarray(frequency, dtype=float)
    if not dispersion:
        return 2.0 * np.pi * f / bar_wave_speed
    from .dispersion import normalized_curve

    curve = normalized_curve(poisson_ratio)
    phi = np.minimum(f * bar_radius / bar_wave_speed, curve.max_frequency)
    return 2.0 * np.pi * f / (bar_wave_speed * curve.phase_ratio_at(phi))


def band_taper(frequency: ArrayLike, cutoff: Optional[float], taper: float = BAND_TAPER) -> np.ndarray:
    """The bounded band: 1 below ``(1 - taper) cutoff``, raised cosine to 0 at ``cutoff`` [Hz], 0 above.

    None: the whole band (ones).
    """
    f = np.asarray(frequency, dtype=float)
    if cutoff is None:
        return np.ones_like(f)
    lo = (1.0 - taper) * cutoff
    u = np.clip((f - lo) / (cutoff - lo), 0.0, 1.0)
    return 0.5 * (1.0 + np.cos(np.pi * u))


def singular_frequencies(spacing: float, bar_wave_speed: float, upto: float) -> np.ndarray:
    """Frequencies f_n = n c0 / (2 Δ) up to ``upto`` [Hz] at which two stations Δ apart cannot separate.

    Without dispersion; with it they move slightly lower (c(f) < c0).
    """
    step = bar_wave_speed / (2.0 * abs(spacing))
    return step * np.arange(int(math.floor(upto / step)) + 1)


def separate_two_point(strain_a: ArrayLike, strain_b: ArrayLike, dt: float, distance_a: float, distance_b: float, *,
                       bar_radius: float, bar_wave_speed: float, poisson_ratio: float, dispersion: bool = True,
                       cutoff: Optional[float] = None) -> tuple[np.ndarray, np.ndarray]:
    """The waves travelling towards and away from the specimen face, at the face, from two gauge stations.

    Parameters
    ----------
    strain_a, strain_b : array_like
        Bar strain at two stations of one bar [1], on the same time axis,
        compression positive, starting at rest (zero before any wave).
    dt : float
        Sample interval [s].
    distance_a, distance_b : float
        The stations' distances from the bar's specimen face [m] (different).
    bar_radius : float
        Bar radius a [m].
    bar_wave_speed : float
        Bar wave speed c0 [m/s].
    poisson_ratio : float
        Poisson ratio of the bar [1].
    dispersion : bool
        Pochhammer–Chree dispersion in the propagation (:func:`wavenumber`).
    cutoff : float or None
        Upper end of the band [Hz] (:func:`band_taper`); None: the whole band
        to the Nyquist frequency.

    Returns
    -------
    toward, away : ndarray
        The wave travelling towards the specimen face and the one travelling
        away from it, both at the face (distance 0) [1], on the records' time
        axis. On the incident bar these are the incident and reflected waves;
        on the transmitted bar the echo from its far end and the transmitted
        wave. The last ``min(distance) / c0`` of ``away`` is carried back from
        beyond the record's end and is not valid.

    Notes
    -----
    With far station at d_f, near one at d_n, spacing Δ = d_f − d_n, the
    propagation factor over Δ is ``H = exp(−i κ Δ)`` (:func:`wavenumber`),
    and (module notes)

        toward(face) = exp(−i κ d_f) (ε_f − H ε_n) Σ_{m=0..M} H^{2m}
        away(face)   = exp(+i κ d_n) (ε_n − H ε_f) Σ_{m=0..M} H^{2m}

    with M the first whole number for which 2 M Δ / c0 exceeds the record
    and d_n / c0 beyond it. The records are zero-padded far enough that no
    term of the series wraps round the FFT, so the result is the causal
    recursion of Lundberg & Henchoz (1977), exactly, with dispersion.

    References
    ----------
    .. [1] B. Lundberg and A. Henchoz, Exp. Mech. 17 (1977) 213-218 (from memory).
    .. [2] M.-N. Bussac, P. Collet, G. Gary and R. Othman, J. Mech. Phys. Solids
       50 (2002) 321-349 (from memory).
    """
    ea, eb = np.asarray(strain_a, dtype=float), np.asarray(strain_b, dtype=float)
    if ea.ndim != 1 or ea.shape != eb.shape or ea.size < 2:
        raise InputError(f"expected two 1-D records of one length, got shapes {ea.shape} and {eb.shape}", "strain")
    if not (np.all(np.isfinite(ea)) and np.all(np.isfinite(eb))):
        raise InputError("a station's record holds a non-finite value", "strain")
    n = ea.size
    length, _, ops = _operator(n, dt, distance_a, distance_b, bar_radius, bar_wave_speed, poisson_ratio, dispersion,
                               cutoff)
    xa, xb = np.fft.rfft(ea, length), np.fft.rfft(eb, length)
    out = []
    for wave in ("toward", "away"):
        ka, kb = ops[wave]
        spectrum = ka * xa + kb * xb
        if length % 2 == 0:  # a real signal's Nyquist bin is real
            spectrum[-1] = spectrum[-1].real
        out.append(np.fft.irfft(spectrum, length)[:n])
    return out[0], out[1]


def _operator(n, dt, distance_a, distance_b, bar_radius, bar_wave_speed, poisson_ratio, dispersion, cutoff):
    """The separation as transfer functions: (FFT length, frequencies [Hz], {"toward": (K_a, K_b), "away": (K_a,
    K_b)}) with each wave at the face = K_a X_a + K_b X_b for the spectra X of the two stations' records of ``n``
    samples (zero-padded to the length)."""
    from .dispersion import _fast_length

    if distance_a == distance_b:
        raise InputError(f"the two stations are at the same distance ({distance_a} m): nothing to separate",
                         "distance")
    d_far, d_near = max(distance_a, distance_b), min(distance_a, distance_b)
    c0 = float(bar_wave_speed)
    spacing = d_far - d_near
    record = n * dt + d_near / c0  # the span the series must cover
    terms = int(math.ceil(record / (2.0 * spacing / c0))) + 1
    slowest = _slowest_speed(dt, bar_radius, c0, poisson_ratio, dispersion, cutoff)
    reach = ((2 * terms + 1) * spacing + d_far) / slowest  # the longest delay of a kept term [s]
    length = _fast_length(n + int(math.ceil(reach / dt)) + 64)
    f = np.fft.rfftfreq(length, dt)
    kappa = wavenumber(f, bar_radius, c0, poisson_ratio, dispersion=dispersion)
    h = np.exp(-1j * kappa * spacing)
    h2 = h * h
    series, term = np.ones_like(h), np.ones_like(h)
    for _ in range(terms):
        term *= h2
        series += term
    series *= band_taper(f, cutoff)
    toward = np.exp(-1j * kappa * d_far) * series  # (eps_far - H eps_near) carried from the far station
    away = np.exp(1j * kappa * d_near) * series    # (eps_near - H eps_far) carried back from the near one
    ops = {"toward": (toward, -h * toward), "away": (-h * away, away)}  # (far, near)
    if distance_a < distance_b:
        ops = {k: v[::-1] for k, v in ops.items()}
    return length, f, ops


def noise_gains(n: int, dt: float, distance_a: float, distance_b: float, *, bar_radius: float,
                bar_wave_speed: float, poisson_ratio: float, dispersion: bool = True, cutoff: Optional[float] = None,
                prefilter=None) -> dict:
    """How the stations' noise reaches the separated waves, sample by sample.

    Each station's record carries white noise from its first sample on,
    through a filter of magnitude response ``prefilter(f)`` applied to both
    records before the separation (stage 1's low-pass). Through the
    separation, an output sample t holds the noise w of a station as
    sum_j k(t - j) w(j), j = 0 .. n-1, with k the impulse response of the
    prefilter and the separation together, so its variance is
    sigma_w^2 sum_j k(t - j)^2; the station's own (prefiltered) noise has
    variance sigma_w^2 sum_j g(j)^2, g the prefilter's impulse response. The
    gain is the ratio of the two standard deviations. It grows over the
    record for each wave alone (the series sums the noise at the singular
    frequencies once per round trip 2 D / c0, like a random walk) and stays
    near 1 for the sum of the two waves, the bar strain at the face.

    Parameters
    ----------
    n : int
        Record length [samples].
    dt, distance_a, distance_b, bar_radius, bar_wave_speed, poisson_ratio, dispersion, cutoff
        As :func:`separate_two_point`.
    prefilter : callable, optional
        ``prefilter(frequency) -> gain`` [1] of the filter both records went through; none when None.

    Returns
    -------
    dict
        ``"toward"``, ``"away"`` and ``"sum"`` (toward + away) -> (gain of station a's noise, gain of station
        b's noise), arrays of n samples [1]: an output's noise standard deviation at each sample is
        sqrt((gain_a sigma_a)^2 + (gain_b sigma_b)^2) with sigma the stations' noise standard deviations.
    """
    length, f, ops = _operator(n, dt, distance_a, distance_b, bar_radius, bar_wave_speed, poisson_ratio, dispersion,
                               cutoff)
    g = np.ones_like(f) if prefilter is None else np.asarray(prefilter(f), dtype=float)
    reference = float(np.sum(np.fft.irfft(g, length) ** 2))
    t = np.arange(n)
    out = {}
    for wave, pair in (*ops.items(), ("sum", tuple(a + b for a, b in zip(ops["toward"], ops["away"])))):
        gains = []
        for k in pair:
            k2 = np.fft.irfft(k * g, length) ** 2
            # circular lags: index i of the doubled array is the lag i - length; sum over lags t - n + 1 .. t
            cum = np.concatenate(([0.0], np.cumsum(np.concatenate((k2, k2)))))
            gains.append(np.sqrt((cum[t + length + 1] - cum[t - n + 1 + length]) / reference))
        out[wave] = tuple(gains)
    return out


def _slowest_speed(dt, bar_radius, c0, poisson_ratio, dispersion, cutoff):
    """Slowest group velocity over the band used [m/s] (c0 without dispersion): it sets the padding."""
    if not dispersion:
        return c0
    from .dispersion import normalized_curve

    curve = normalized_curve(poisson_ratio)
    top = min(0.5 / dt if cutoff is None else cutoff, 0.5 / dt) * bar_radius / c0
    sel = curve.frequency <= min(top, curve.max_frequency)
    ratio = float(np.min(curve.group_ratio[sel])) if sel.any() else 1.0
    if top > curve.max_frequency:  # held phase velocity above the table: cg = c there
        ratio = min(ratio, float(curve.phase_ratio[-1]))
    return ratio * c0


# --------------------------------------------------------------------------- the stage
#: How the face waves were built, as the summary says it (``face_waves_method``).
METHOD_CLASSIC = "one station per bar: each wave cut at its gauge and carried to its face"
METHOD_SEPARATED = "two-point separation (Lundberg & Henchoz 1977) on the {bars} bar"


@dataclass(frozen=True)
class BarSplit:
    """The two travelling waves of one bar, separated from two of its stations.

    Attributes
    ----------
    bar : str
        ``incident`` or ``transmitted``.
    toward, away : ndarray
        The waves travelling towards and away from the specimen, at its face
        [1], on the record's time axis (compression positive).
    toward_plain, away_plain : ndarray
        The same without dispersion in the propagation (for comparison; the
        same arrays when dispersion is off).
    info : dict
        Stations used, spacing, band, singular frequencies (JSON-ready, units
        in the keys).
    noise : dict
        ``"toward"``, ``"away"``, ``"sum"`` -> {channel name: gain} (arrays on
        the record's time axis, :func:`noise_gains`): how each station's noise
        (channel ``incident``/``transmitted`` for the main station, else the
        station's name) reaches each wave and the bar strain at the face.
    """

    bar: str
    toward: np.ndarray
    away: np.ndarray
    toward_plain: np.ndarray
    away_plain: np.ndarray
    info: dict
    noise: dict = field(default_factory=dict)


@dataclass(frozen=True)
class Separation:
    """Stage 2a of a reduction: two-point wave separation, when it is used.

    Attributes
    ----------
    used : bool
        Whether the face waves are built from separated waves.
    reason : str
        Why (or why not).
    bars : dict
        Bar name -> :class:`BarSplit`, for each bar separated (empty when not used).
    duration : tuple or None
        (incident pulse duration [s], how it was found), measured on the
        separated incident wave; passed to :func:`shpb.pulses.plan_analysis`.
    free_time : float or None
        How long the analysis may run after the incident foot reaches the
        specimen [s]: until the first echo from a bar's far end reaches the
        specimen (2 L / c0 of a separated bar) or, on a bar with one station,
        its gauge (2 (L - d) / c0); passed to the plan.
    """

    used: bool
    reason: str
    bars: dict = field(default_factory=dict)
    duration: Optional[tuple] = None
    free_time: Optional[float] = None

    def plan_options(self) -> dict:
        """Keyword arguments of :func:`shpb.pulses.plan_analysis` (none when separation is not used)."""
        return {"duration": self.duration, "free_time": self.free_time} if self.used else {}

    @property
    def provenance(self) -> dict:
        return {"step": "separation", "parameters": {
            "used": self.used, "reason": self.reason, **{bar: split.info for bar, split in self.bars.items()}}}


@dataclass(frozen=True)
class SeparatedWaves(FaceWaves):
    """Stage 3 built by two-point separation: :class:`shpb.pulses.FaceWaves` with what the separation did.

    Attributes
    ----------
    separation : dict
        ``bars`` (those separated) and, per bar, the stations, spacing and
        band used (:attr:`BarSplit.info`).
    """

    separation: dict = field(default_factory=dict)

    @property
    def separated_bars(self) -> tuple:
        return tuple(self.separation.get("bars", ()))

    @property
    def provenance(self) -> dict:
        p = super().provenance
        p["parameters"]["separation"] = self.separation
        return p

    def results(self) -> dict:
        bars = " and ".join(self.separation.get("bars", ()))
        return {**super().results(), "face_waves_method": METHOD_SEPARATED.format(bars=bars)}


def default_cutoff(bar, dt: float) -> float:
    """Upper end of the separation band [Hz]: the bar's second-mode onset, at most 0.8 x the Nyquist frequency.

    Above the second longitudinal mode's onset (:func:`shpb.dispersion.second_mode_onset`;
    Mindlin & McNiven 1960) a bar carries more than the fundamental mode the
    separation models, and a bar record there is mostly noise.
    """
    from .dispersion import second_mode_onset

    return min(second_mode_onset(bar.radius, bar.wave_speed, bar.poisson_ratio), 0.4 / dt)


def split_bar(bar_name: str, barset, strains, analysis) -> Optional[BarSplit]:
    """Separate one bar's waves from its main station and the further station farthest from it.

    Both stations' strains are those of stage 1 (:func:`shpb.pulses.condition_record`: the same baseline
    handling, glitch repair and zero-phase low-pass). Returns None when the bar has no usable further station.
    """
    main = barset.stations(bar_name)[0]
    others = [(name, st.gauge, st.strain) for name, st in strains.stations.items() if st.bar == bar_name]
    if not others:
        return None
    name, gauge, other = max(others, key=lambda x: abs(x[1].distance - main.distance))  # the widest spacing
    bar = getattr(barset, bar_name)
    dt = strains.dt
    cutoff = analysis.separation_cutoff or default_cutoff(bar, dt)
    kw = dict(bar_radius=bar.radius, bar_wave_speed=bar.wave_speed, poisson_ratio=bar.poisson_ratio, cutoff=cutoff)
    ours = getattr(strains, bar_name)
    toward, away = separate_two_point(ours, other, dt, main.distance, gauge.distance,
                                      dispersion=bool(analysis.dispersion), **kw)
    plain = separate_two_point(ours, other, dt, main.distance, gauge.distance, dispersion=False, **kw) \
        if analysis.dispersion else (toward, away)
    spacing = abs(gauge.distance - main.distance)
    first = bar.wave_speed / (2 * spacing)
    info = {"stations_m": [main.distance, gauge.distance], "spacing_m": spacing,
            "round_trip_us": 2 * spacing / bar.wave_speed * 1e6, "cutoff_Hz": cutoff,
            "cutoff_source": "given" if analysis.separation_cutoff else "second-mode onset of the bar",
            "first_singular_frequency_Hz": first, "singular_frequencies_in_band": int(cutoff // first),
            "dispersion": bool(analysis.dispersion)}
    lp = strains.lowpass_cutoff
    gains = noise_gains(ours.size, dt, main.distance, gauge.distance, dispersion=bool(analysis.dispersion),
                        prefilter=(lambda f: lowpass_gain(f, dt, lp)) if lp else None, **kw)
    noise = {wave: {bar_name: a, name: b} for wave, (a, b) in gains.items()}
    return BarSplit(bar_name, toward, away, plain[0], plain[1], info, noise)


def separate_waves(strains, barset, analysis) -> Separation:
    """Stage 2a: separate the waves of each bar with two stations, when the analysis calls for it.

    With ``separation = "auto"`` (default) the incident bar's waves are
    separated when it has a second station in the record; the separation is
    used when the incident pulse, measured on the separated incident wave at
    the face (down to 5 % of its peak), lasts longer than 2 d / c0 at the
    main incident gauge (the waves overlap there). ``"on"`` uses it whenever
    the incident bar has two stations, ``"off"`` never. The transmitted bar's
    waves are separated too when it has a second station. The analysis
    window may then run until the first echo from a bar's far end reaches
    the specimen (the reflected wave, back from the incident bar's impact
    end, 2 L_i / c0 after the foot; the transmitted wave back from the
    transmitted bar's far end, 2 L_t / c0), or, on a transmitted bar with one
    station, reaches its gauge, 2 (L_t - d_t) / c0: within it the three waves
    of the Kolsky analysis are the whole story (a reloaded specimen is
    another test).

    The stations' strains are stage 1's (``strains.stations``: conditioned
    exactly as the main channels, through the same zero-phase low-pass, so
    the waves keep their timing); a station whose channel cannot be used is
    in ``strains.unusable_stations``.

    Returns
    -------
    Separation

    Raises
    ------
    InputError
        ``separation = "on"`` without a second station on the incident bar.
    AnalysisError
        The separated incident pulse does not end in the record and there is
        no striker; with ``"on"``, a further station's channel without a
        pulse or a baseline (with ``"auto"`` the classic analysis goes on, or
        a transmitted bar keeps its one station, and the reason is in the
        provenance).
    """
    from .errors import AnalysisError, InputError
    from .pulses import pulse_end

    mode = analysis.separation
    if mode == "off":
        return Separation(False, "separation = off")
    unusable = strains.unusable_stations
    if mode == "on" and unusable:
        raise AnalysisError("; ".join(unusable.values()))
    if not strains.stations and not unusable:
        if mode == "on":
            raise InputError("separation = on needs a second gauge station on the incident bar (bar set "
                             "[[incident.gauge]], record incident_stations)", "analysis.separation")
        return Separation(False, "one gauge station per bar")
    incident = split_bar("incident", barset, strains, analysis)
    if incident is None:
        if mode == "on":
            raise InputError("separation = on needs a second gauge station on the incident bar", "analysis.separation")
        why = "; ".join(v for k, v in unusable.items() if k.startswith("incident"))
        return Separation(False, f"not separated: {why}" if why else "one gauge station on the incident bar")
    bi, gi, dt = barset.incident, barset.incident_gauge, strains.dt
    foot = strains.foot + gi.distance / bi.wave_speed / dt  # the incident foot at the face, record samples
    end = pulse_end(incident.toward, foot + max(2.0, 1e-6 / dt), fraction=0.05)
    if end is not None:
        duration = ((end - foot) * dt, "measured on the separated incident wave (down to 5 % of its peak)")
    elif barset.striker is not None:
        duration = (barset.striker.pulse_duration, "striker 2L/c0")
    else:
        raise AnalysisError("the separated incident pulse does not end before the record does")
    round_trip = 2 * gi.distance / bi.wave_speed
    overlap = duration[0] > round_trip
    if mode == "auto" and not overlap:
        return Separation(False, f"the {duration[0] * 1e6:.0f} us pulse is shorter than the {round_trip * 1e6:.0f} "
                                 f"us round trip from the incident gauge: the waves do not overlap")
    bars = {"incident": incident}
    transmitted = split_bar("transmitted", barset, strains, analysis)
    if transmitted is not None:
        bars["transmitted"] = transmitted
    bt, gt = barset.transmitted, barset.transmitted_gauge
    # the window ends before a far end's echo reaches the specimen (a separated bar) or the gauge (a bar with one
    # station): the three waves of the Kolsky analysis are then the whole story
    echo = bt.length if transmitted is not None else bt.length - gt.distance
    free = min(2 * bi.length / bi.wave_speed, 2 * echo / bt.wave_speed)
    reason = (f"the {duration[0] * 1e6:.0f} us pulse is longer than the {round_trip * 1e6:.0f} us round trip from "
              f"the incident gauge: the waves overlap there" if overlap else "separation = on")
    left = [v for k, v in unusable.items() if k.startswith("transmitted")]
    if left:
        reason += f"; the transmitted bar keeps its main station ({'; '.join(left)})"
    return Separation(True, reason, bars, duration, free)


def waves_at_faces(separation: Separation, strains, plan, barset, analysis) -> FaceWaves:
    """Stage 3 with or without separation: the classic :func:`shpb.pulses.waves_at_faces` when the
    separation is not used; otherwise the separated bars' waves and the classic transmitted wave when that bar
    is not separated.

    A separated wave is already at its face; it is cut as a classic one is carried there: over the plan's
    ``carry_span`` (longer than the window when a given ``window_length`` crops the curves), with the same
    raised-cosine taper at its ends, then cropped to the window, so the three waves carry one weight
    (``FaceWaves.weight``) whichever way each was built. A hand ``reflected_adjust`` / ``transmitted_adjust``
    still moves it by a pure delay.
    """
    from .pulses import delay, taper_window
    from .pulses import waves_at_faces as classic_waves

    classic = classic_waves(strains, plan, barset, analysis)
    if not separation.used:
        return classic
    dt, (k0, k1), kc = strains.dt, plan.span, plan.carry_span[1]
    taper = taper_window(kc - k0, 0.0, float(kc - k0), plan.ramp)  # the classic waves' weight at the faces
    faces, plains = {}, dict(classic.plain)
    wanted = {"incident": ("incident", "toward"), "reflected": ("incident", "away"),
              "transmitted": ("transmitted", "away")}
    for name, (bar, which) in wanted.items():
        split = separation.bars.get(bar)
        if split is None:
            faces[name] = classic.wave(name)
            continue
        for out, wave in ((faces, getattr(split, which)), (plains, getattr(split, f"{which}_plain"))):
            if plan.adjusts.get(name):
                wave = delay(wave, dt, -plan.adjusts[name])
            out[name] = (np.pad(wave, (0, max(kc - wave.size, 0)))[k0:kc] * taper)[: k1 - k0]
    # the face forces' noise: F1 from the bar strain at the face (incident + reflected), F2 from the transmitted wave
    gains = {face: {ch: (np.pad(g, (0, max(kc - g.size, 0)))[k0:kc] * taper)[: k1 - k0]
                    for ch, g in separation.bars[bar].noise[which].items()}
             for face, bar, which in (("front", "incident", "sum"), ("back", "transmitted", "away"))
             if bar in separation.bars}
    info = dict(classic.dispersion)
    peak = max(float(np.max(np.abs(faces["incident"]))), 1e-30)
    if info.get("applied"):
        for k in faces:
            info[f"max_change_{k}_percent_of_incident_peak"] = float(100 * np.max(np.abs(faces[k] - plains[k])) / peak)
    return SeparatedWaves(time=classic.time, dt=dt, incident=faces["incident"], reflected=faces["reflected"],
                          transmitted=faces["transmitted"], plain=plains, dispersion=info, weight=classic.weight,
                          noise_gains=gains,
                          separation={"bars": list(separation.bars), "reason": separation.reason,
                                      **{bar: split.info for bar, split in separation.bars.items()}})
