"""Measurement uncertainty of a reduced shot: the GUM law for the linear inputs, Monte Carlo for the rest.

Every curve row and every summary scalar of a reduction gets a standard
uncertainty u and an expanded uncertainty U = k u (k = 2, about 95 %
coverage for a near-normal output). The inputs and their standard
uncertainties come from the files that own them (``docs/uncertainty.md``):

* the bar set's ``[uncertainty]`` table (read by :mod:`shpb.setup`, keys and
  defaults here, :data:`BARSET_INPUTS`): bar modulus, bar diameters, gauge
  distances, gauge factor, amplifier gain, bridge excitation, channel scale
  and (measured) wave speed;
* the calibration file (:mod:`shpb.calibration_files`): the uncertainty of a
  calibrated wave speed or channel scale, as its entry gives it;
* the shot's ``[specimen]`` table (:mod:`shpb.schema`): ``length_uncertainty``
  and ``diameter_uncertainty`` (the measuring instrument's);
* the record: each channel's noise, measured by stage 1
  (:func:`shpb.pulses.condition_record`).

Propagation, one output y at a time (a curve row or a scalar):

* inputs that enter the reduction linearly — the gauge chain (gauge factor,
  gain, excitation, scale: each a factor on a channel's strain), the areas
  (bar and specimen diameters), the specimen length, and the bar modulus when
  the wave speed is measured — by the GUM law of propagation (JCGM 100:2008
  eq. 10), u_GUM²(y) = sum_i (c_i u(x_i))², the sensitivity coefficients
  c_i from the stages' own equations by central differences (rerunning
  stage 4, :func:`shpb.kolsky.kolsky_curves`, with x_i +- u(x_i); the face
  waves are linear in a channel's scale, so they are scaled, not recomputed);
* the rest — wave speeds (and the modulus when the wave speed is
  sqrt(E/rho)), gauge distances (time shifts and the dispersion correction)
  and the records' noise — by Monte Carlo (JCGM 101:2008): M draws, each
  rerunning the stages from the first one whose inputs it changes (stage 2,
  :func:`shpb.pulses.plan_analysis`, on the conditioned record of stage 1
  plus a fresh draw of filtered noise; stage 3 with its cached dispersion
  tables; stage 4), u_MC(y) the standard deviation of the M values;
* the specimen's remaining non-equilibrium, from the curves: the reported
  stress's distance from the mean of the two face stresses (the 3-wave
  stress, the mean stress of a specimen whose stress is linear along it),
  u_eq (:func:`equilibrium_row`);
* combined u² = u_GUM² + u_MC² + u_eq² (independent inputs).

The budget names each input's contribution c_i u(x_i) to each scalar: exact
for the GUM inputs, and for the Monte Carlo inputs the least-squares
sensitivity of the M draws (their regression on the drawn inputs), the record
noise being what that regression leaves. Not modelled (systematic effects
of the test itself, see ``docs/uncertainty.md``): friction at the specimen
faces, radial and axial inertia of the specimen, non-equilibrium beyond the
valid part, bar-end indentation and misalignment, gauge transverse
sensitivity and temperature effects.

References
----------
.. [1] JCGM 100:2008, *Evaluation of measurement data — Guide to the expression
   of uncertainty in measurement* (GUM 1995 with minor corrections), BIPM.
.. [2] JCGM 101:2008, *Evaluation of measurement data — Supplement 1 to the
   "Guide to the expression of uncertainty in measurement" — Propagation of
   distributions using a Monte Carlo method*, BIPM.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import TYPE_CHECKING, Callable, Mapping, Optional

import numpy as np

from .errors import InputError
from .schema import find_key
from .units import DIMENSIONS

if TYPE_CHECKING:  # pragma: no cover
    from .reduce import Stages
    from .setup import BarSet, Shot, Specimen

#: Coverage factor of the expanded uncertainty U = k u (JCGM 100 §6.2; about 95 % for a near-normal output).
COVERAGE_FACTOR = 2.0
#: Monte Carlo draws per shot by default, and the fewest accepted: the analysis key ``uncertainty_draws``
#: (:mod:`shpb.schema` owns both numbers). With 100 draws the Monte Carlo part of u is known to about
#: 1/sqrt(2 M) = 7 % of itself (JCGM 101 §7.2 asks M large enough for the digits reported).
DEFAULT_DRAWS = find_key("analysis", "uncertainty_draws").default
MIN_DRAWS = find_key("analysis", "uncertainty_draws").minimum
#: Seed of the draws (fixed: a rerun gives the same numbers).
SEED = 101
#: Strain step of the table of flow stress with its uncertainty in the summary [1].
FLOW_STRAIN_STEP = 0.01
#: Systematic effects of the test that no input here carries (docs/uncertainty.md).
NOT_MODELLED = ("friction at the specimen faces", "radial and axial inertia of the specimen",
                "non-equilibrium outside the valid part", "bar-end indentation and misalignment",
                "gauge transverse sensitivity and temperature drift", "the constitutive behaviour's own scatter")
BARS = ("incident", "transmitted")


# =========================================================================== generic propagation
@dataclass(frozen=True)
class Normal:
    """A normal (Gaussian) distribution N(mean, std²) (JCGM 101 §6.4.7)."""

    mean: float
    std: float

    @property
    def u(self) -> float:
        """Standard uncertainty: the standard deviation."""
        return float(self.std)

    def draw(self, n: int, rng: np.random.Generator) -> np.ndarray:
        return self.mean + self.std * rng.standard_normal(n)


@dataclass(frozen=True)
class Rectangular:
    """A rectangular (uniform) distribution on [low, high] (JCGM 101 §6.4.2; JCGM 100 §4.3.7)."""

    low: float
    high: float

    @property
    def mean(self) -> float:
        return 0.5 * (self.low + self.high)

    @property
    def u(self) -> float:
        """Standard uncertainty (high - low) / sqrt(12)."""
        return (self.high - self.low) / math.sqrt(12.0)

    def draw(self, n: int, rng: np.random.Generator) -> np.ndarray:
        return rng.uniform(self.low, self.high, n)


def combined_uncertainty(contributions) -> np.ndarray:
    """Combined standard uncertainty of uncorrelated inputs from their contributions c_i u(x_i).

    u_c² = sum_i (c_i u(x_i))² (JCGM 100 eq. 10).

    Parameters
    ----------
    contributions : array_like
        c_i u(x_i), inputs along axis 0 (any further axes: one output each),
        in the output's unit.

    Returns
    -------
    ndarray
        u_c, in the output's unit.
    """
    c = np.asarray(contributions, dtype=float)
    return np.sqrt(np.sum(c * c, axis=0))


def gum_contributions(model: Callable, x, u) -> np.ndarray:
    """Contributions c_i u(x_i) of each input by central differences with step u(x_i).

    c_i u(x_i) = [f(x + u_i e_i) - f(x - u_i e_i)] / 2: the first-order
    term of the GUM law (JCGM 100 §5.1.3, sensitivities "calculated
    numerically" by finite differences, note 2 of §5.1.3), exact for a model
    linear in x_i.

    Parameters
    ----------
    model : callable
        ``model(x) -> y`` (a float or an array).
    x, u : array_like
        Input estimates and their standard uncertainties.

    Returns
    -------
    ndarray
        Shape ``(len(x),) + shape(y)``.
    """
    x = np.asarray(x, dtype=float)
    u = np.asarray(u, dtype=float)
    out = []
    for i in range(x.size):
        up, down = x.copy(), x.copy()
        up[i] += u[i]
        down[i] -= u[i]
        out.append(0.5 * (np.asarray(model(up), dtype=float) - np.asarray(model(down), dtype=float)))
    return np.array(out)


def propagate_distributions(model: Callable, inputs: Mapping, draws: int, seed=None) -> np.ndarray:
    """Propagation of distributions by the Monte Carlo method (JCGM 101 §7).

    Parameters
    ----------
    model : callable
        ``model(**{name: ndarray of draws}) -> ndarray of output values``,
        vectorised over the draws.
    inputs : mapping
        Input name -> distribution (:class:`Normal`, :class:`Rectangular`),
        independent.
    draws : int
        Number M of Monte Carlo trials.
    seed : int or numpy.random.Generator, optional

    Returns
    -------
    ndarray
        The M output values.
    """
    rng = np.random.default_rng(seed)
    return np.asarray(model(**{k: d.draw(int(draws), rng) for k, d in inputs.items()}), dtype=float)


def coverage_interval(samples, p: float = 0.95, shortest: bool = False) -> tuple[float, float]:
    """Coverage interval of a Monte Carlo sample (JCGM 101 §7.7).

    The probabilistically symmetric interval [y_(r), y_(r+q)] of the sorted
    sample, q = pM (rounded: q = floor(pM + 1/2)) and r = (M - q)/2 (r =
    (M - q + 1)/2 when M - q is odd) (§7.7.1); or the shortest interval
    [y_(r*), y_(r*+q)], r* the r of smallest width (§7.7.2).

    Returns
    -------
    (low, high) : float
    """
    y = np.sort(np.asarray(samples, dtype=float))
    y = y[np.isfinite(y)]
    m = y.size
    if m < 2:
        return float("nan"), float("nan")
    q = int(p * m) if float(p * m).is_integer() else int(math.floor(p * m + 0.5))
    q = min(max(q, 1), m - 1)
    if shortest:
        widths = y[q:] - y[: m - q]
        r = int(np.argmin(widths))  # 0-based index of y_(r*)
    else:
        r = (m - q) // 2 if (m - q) % 2 == 0 else (m - q + 1) // 2
        r -= 1  # 1-based order statistic -> 0-based index
        r = max(r, 0)
    return float(y[r]), float(y[min(r + q, m - 1)])


# =========================================================================== the inputs and their defaults
@dataclass(frozen=True)
class InputSpec:
    """One kind of input whose standard uncertainty a file may state.

    Attributes
    ----------
    key : str
        Its key in a bar set's ``[uncertainty]`` table (or the specimen's ``<key>_uncertainty``).
    dimension : str
        Dimension of an absolute value (:mod:`shpb.units`).
    label : str
        What it is, for budgets.
    relative : float or None
        Default relative standard uncertainty [1].
    absolute : float or None
        Default absolute standard uncertainty [SI].
    source : str
        Where the default comes from.
    """

    key: str
    dimension: str
    label: str
    relative: Optional[float]
    absolute: Optional[float]
    source: str


_RECT = 1.0 / math.sqrt(3.0)  # a rectangular distribution of half-width a has u = a / sqrt(3) (JCGM 100 §4.3.7)

#: Inputs a bar set's ``[uncertainty]`` table may give (for both bars, or per bar in ``[uncertainty.incident]``
#: and ``[uncertainty.transmitted]``); a value is a standard uncertainty, either relative (``"1 %"``) or with
#: its unit (``"2 GPa"``, ``"0.01 mm"``; a bare number is SI).
BARSET_INPUTS = (
    InputSpec("modulus", "pressure", "bar Young's modulus", 0.01, None,
              "default 1 % (common practice: handbook moduli of one bar steel or alloy differ by 1-2 %; "
              "E = rho c0^2 from a free-end calibration and a weighed density is better)"),
    InputSpec("diameter", "length", "bar diameter", None, 0.01e-3,
              "default 0.01 mm (common practice: one reading of a micrometer graduated in 0.01 mm)"),
    InputSpec("wave_speed", "velocity", "bar wave speed (measured)", 0.003, None,
              "default 0.3 % for a measured speed whose uncertainty is not given (common practice: free-end "
              "echoes or time of flight); an uncalibrated speed sqrt(E/rho) follows the modulus instead"),
    InputSpec("gauge_distance", "length", "gauge distance to the specimen face", None, 0.5e-3,
              "default 0.5 mm (common practice: the gauge centre measured with a rule; the default of "
              "`shpb calibrate`)"),
    InputSpec("gauge_factor", "dimensionless", "gauge factor", 0.01 * _RECT, None,
              "default +-1 % tolerance of the gauge data sheet (common practice), rectangular: u = 1 %/sqrt(3)"),
    InputSpec("gain", "dimensionless", "amplifier gain", 0.005 * _RECT, None,
              "default +-0.5 % gain accuracy of a bridge amplifier (common practice), rectangular: "
              "u = 0.5 %/sqrt(3)"),
    InputSpec("excitation", "voltage", "bridge excitation", 0.001 * _RECT, None,
              "default +-0.1 % of a regulated bridge supply (common practice), rectangular: u = 0.1 %/sqrt(3)"),
    InputSpec("scale", "dimensionless", "channel scale (calibrated)", 0.005, None,
              "the calibration entry's uncertainty; default 0.5 % for a calibrated scale whose entry gives none "
              "(common practice); an uncalibrated scale of 1 is exact (the gauge chain carries the uncertainty)"),
)
#: The specimen's inputs (``[specimen]`` keys ``length_uncertainty``, ``diameter_uncertainty``).
SPECIMEN_INPUTS = (
    InputSpec("length", "length", "specimen length", None, 0.01e-3,
              "default 0.01 mm (common practice: one reading of a micrometer graduated in 0.01 mm)"),
    InputSpec("diameter", "length", "specimen diameter", None, 0.01e-3,
              "default 0.01 mm (common practice: one reading of a micrometer graduated in 0.01 mm)"),
)
_BARSET_SPECS = {s.key: s for s in BARSET_INPUTS}


def parse_barset_uncertainty(data: dict, where: str) -> dict:
    """A bar set's ``[uncertainty]`` table -> ``{"both"|"incident"|"transmitted": {key: ("relative"|"absolute", value)}}``.

    Values are standard uncertainties: ``"1 %"`` (relative), a quantity with
    its unit, or a bare number (SI). Unknown keys and negative values are an
    :class:`~shpb.errors.InputError` naming the file and key.
    """
    out: dict = {"both": {}}
    for key, value in data.items():
        if key in BARS:
            if not isinstance(value, dict):
                raise InputError("expected a table of standard uncertainties", f"{where}.{key}")
            out[key] = {k: _stated_value(k, v, f"{where}.{key}.{k}") for k, v in value.items()}
        else:
            out["both"][key] = _stated_value(key, value, f"{where}.{key}")
    return out


def _stated_value(key, value, where):
    from .units import to_si

    spec = _BARSET_SPECS.get(key)
    if spec is None:
        raise InputError(f"unknown key {key!r} (expected one of: "
                         f"{', '.join(sorted(list(_BARSET_SPECS) + list(BARS)))})", where.rsplit(".", 1)[0])
    if isinstance(value, str) and value.strip().endswith("%"):
        kind, v = "relative", to_si(value, "dimensionless", where)
    else:
        kind, v = "absolute", to_si(value, spec.dimension, where)
    if not (v >= 0 and math.isfinite(v)):
        raise InputError(f"expected a standard uncertainty >= 0, got {value!r}", where)
    return kind, float(v)


@dataclass(frozen=True)
class Input:
    """One input of a shot's reduction with its standard uncertainty.

    Attributes
    ----------
    key : str
        ``bars.modulus`` (both bars), ``incident.gauge_factor``, ``specimen.length``, ``record.noise``, ...
    label : str
        What it is, for budgets.
    value : float
        Its estimate [SI unit ``unit``].
    u : float
        Standard uncertainty [same unit].
    unit : str
    group : str
        ``bar set``, ``specimen`` or ``record``: the file that states it.
    source : str
        Where the value of ``u`` comes from.
    method : str
        ``GUM`` (linear: the law of propagation) or ``Monte Carlo``.
    """

    key: str
    label: str
    value: float
    u: float
    unit: str
    group: str
    source: str
    method: str

    @property
    def relative(self) -> float:
        """u / |value| [1] (NaN for a zero value)."""
        return self.u / abs(self.value) if self.value else float("nan")


_GAUGE_KEYS = ("gauge_factor", "gain", "excitation", "scale")


def _stated(barset: "BarSet", bar: str, key: str):
    """(kind, value, source) of a bar's input: the bar set's own statement, else the calibration's, else None."""
    table = getattr(barset, "uncertainty", None) or {}
    for scope, label in ((bar, f"bar set [uncertainty.{bar}]"), ("both", "bar set [uncertainty]")):
        if key in table.get(scope, {}):
            kind, v = table[scope][key]
            return kind, v, label
    if key in ("wave_speed", "scale"):
        quantity = "wave_speed_m_per_s" if key == "wave_speed" else "scale"
        rec = (barset.calibration or {}).get("applied", {}).get(f"{bar}.{quantity}")
        if rec and rec.get("uncertainty") is not None and math.isfinite(rec["uncertainty"]):
            return "absolute", float(rec["uncertainty"]), (f"calibration file, entry {rec.get('entry')} "
                                                           f"({rec.get('kind')}, {rec.get('date')})")
    return None


def _resolve(barset, bar, spec: InputSpec, value):
    """The standard uncertainty [SI] of ``value`` and its source."""
    got = _stated(barset, bar, spec.key)
    if got is None:
        kind, v, source = ("relative", spec.relative, spec.source) if spec.relative is not None else \
            ("absolute", spec.absolute, spec.source)
    else:
        kind, v, source = got
    return (v * abs(value) if kind == "relative" else v), source


def shot_inputs(shot: "Shot", strains=None) -> tuple:
    """Every input of a shot's reduction with its standard uncertainty, resolved from its files and defaults.

    Parameters
    ----------
    shot : shpb.setup.Shot
    strains : shpb.pulses.GaugeStrains, optional
        Stage 1 of the reduction: gives each channel's measured noise (the
        ``record.noise_*`` inputs).

    Returns
    -------
    tuple of Input
        Inputs with a zero uncertainty are left out.
    """
    bs = shot.barset
    bars = {b: getattr(bs, b) for b in BARS}
    gauges = {"incident": bs.incident_gauge, "transmitted": bs.transmitted_gauge}
    derived = {b: bars[b].measured_wave_speed is None for b in BARS}
    out = []
    spec = _BARSET_SPECS["modulus"]
    shared = bars["incident"].material == bars["transmitted"].material and \
        _stated(bs, "incident", "modulus") == _stated(bs, "transmitted", "modulus")
    for scope in (("bars",) if shared else BARS):
        owners = BARS if scope == "bars" else (scope,)
        value = bars[owners[0]].modulus
        u, source = _resolve(bs, owners[0], spec, value)
        # a wave speed sqrt(E/rho) moves with the modulus: the modulus then enters the time shifts (Monte Carlo)
        method = "Monte Carlo" if any(derived[b] for b in owners) else "GUM"
        name = "bar Young's modulus" + ("" if scope == "bars" else f", {scope} bar")
        if any(derived[b] for b in owners):
            name += " (and the wave speed sqrt(E/rho))"
        out.append(Input(f"{scope}.modulus", name, value, u, DIMENSIONS[spec.dimension], "bar set", source, method))
    for b in BARS:
        bar, gauge = bars[b], gauges[b]
        items = [("diameter", bar.diameter, "GUM"), ("gauge_distance", gauge.distance, "Monte Carlo")]
        if not derived[b]:
            items.append(("wave_speed", bar.wave_speed, "Monte Carlo"))
        items += [("gauge_factor", gauge.gauge_factor, "GUM"), ("gain", gauge.gain, "GUM"),
                  ("excitation", gauge.excitation, "GUM")]
        calibrated = f"{b}.scale" in (bs.calibration or {}).get("applied", {}) or gauge.scale != 1.0
        if calibrated or _stated(bs, b, "scale") is not None:
            items.append(("scale", gauge.scale, "GUM"))
        for key, value, method in items:
            spec = _BARSET_SPECS[key]
            u, source = _resolve(bs, b, spec, value)
            label = f"{spec.label}, {b} {'bar' if key in ('diameter', 'wave_speed') else 'gauge'}"
            unit = DIMENSIONS[spec.dimension] or "1"  # dimensionless: "1"
            out.append(Input(f"{b}.{key}", label, value, u, unit, "bar set", source, method))
    sp = shot.specimen
    for spec in SPECIMEN_INPUTS:
        value = getattr(sp, spec.key)
        given = getattr(sp, f"{spec.key}_uncertainty", None)
        u, source = (given, "shot file [specimen]") if given is not None else (spec.absolute, spec.source)
        out.append(Input(f"specimen.{spec.key}", spec.label, value, u, DIMENSIONS[spec.dimension], "specimen", source,
                         "GUM"))
    if strains is not None:
        for b in BARS:
            sigma = float(getattr(strains, f"noise_{b}"))
            out.append(Input(f"record.noise_{b}", f"record noise, {b} channel", sigma, sigma, "1", "record",
                             "measured over the quiet spans of the conditioned channel (stage 1)", "Monte Carlo"))
    return tuple(i for i in out if i.u > 0)


# =========================================================================== applying a change of inputs
def _with_inputs(barset: "BarSet", specimen: "Specimen", values: Mapping) -> tuple:
    """(bar set, specimen) with some inputs (``key -> value``, SI) changed; gauge-chain keys are left to
    :func:`_channel_factor`."""
    bars = {b: getattr(barset, b) for b in BARS}
    gauges = {"incident": barset.incident_gauge, "transmitted": barset.transmitted_gauge}
    sp_changes = {}
    for key, v in values.items():
        scope, name = key.split(".", 1)
        if scope == "specimen":
            sp_changes[name] = v
            continue
        if scope == "record" or name in _GAUGE_KEYS:
            continue
        for b in (BARS if scope == "bars" else (scope,)):
            if name == "modulus":
                bars[b] = replace(bars[b], material=replace(bars[b].material, modulus=v))
            elif name == "diameter":
                bars[b] = replace(bars[b], diameter=v)
            elif name == "wave_speed":
                bars[b] = replace(bars[b], measured_wave_speed=v)
            elif name == "gauge_distance":
                gauges[b] = replace(gauges[b], distance=v)
    barset = replace(barset, incident=bars["incident"], transmitted=bars["transmitted"],
                     incident_gauge=gauges["incident"], transmitted_gauge=gauges["transmitted"])
    return barset, (replace(specimen, **sp_changes) if sp_changes else specimen)


def _channel_factor(barset: "BarSet", bar: str, values: Mapping, peak: float) -> float:
    """The factor a change of a channel's gauge chain makes on its strain, by the bridge's exact equations.

    The recorded volts of a bar strain ``peak`` under the stated chain give,
    read through the changed chain, ``factor * peak`` (Dally & Riley 1991,
    ch. 7, through :mod:`shpb.bridge`): -1 power of the gauge factor, gain and
    excitation, +1 of the scale, to first order in the bridge ratio.
    """
    from .bridge import bar_strain, bar_volts

    gauge = barset.incident_gauge if bar == "incident" else barset.transmitted_gauge
    changes = {k.split(".", 1)[1]: v for k, v in values.items() if k.startswith(f"{bar}.")
               and k.split(".", 1)[1] in _GAUGE_KEYS}
    if not changes:
        return 1.0
    nu = getattr(barset, bar).poisson_ratio
    peak = peak if peak else 1e-3

    def kw(g):
        return dict(bridge=g.bridge, gauge_factor=g.gauge_factor, excitation=g.excitation, gain=g.gain,
                    polarity=g.polarity, scale=g.scale, poisson_ratio=nu)

    volts = bar_volts(peak, **kw(gauge))
    return float(bar_strain(volts, **kw(replace(gauge, **changes))) / peak)


# =========================================================================== one shot
#: Summary scalars that get an uncertainty (units in the names, as in summary.json).
SCALARS = ("flow_stress_mean_MPa", "yield_stress_MPa", "yield_strain", "mean_strain_rate_per_s",
           "peak_stress_MPa", "max_strain")
#: Curve rows that get an uncertainty: internal name -> (curves.csv column, scale from SI to the column's unit).
ROWS = {"stress": ("stress_MPa", 1e-6), "strain": ("strain", 1.0), "strain_rate": ("strain_rate_per_s", 1.0),
        "true_stress": ("true_stress_MPa", 1e-6), "stress_1wave": ("stress_1wave_MPa", 1e-6)}
#: The rows written into curves.csv with u and U (``u_<column>``, ``U95_<column>``); true stress with u only.
ROW_COLUMNS = ("stress", "strain", "strain_rate")


def standard_name(name: str) -> str:
    """The name of a row's or result's standard uncertainty: ``u_<name>`` (curves.csv, summary, budget)."""
    return f"u_{name}"


def expanded_name(name: str) -> str:
    """The name of a row's or result's expanded uncertainty (k = 2): ``U95_<name>`` (curves.csv, summary,
    campaign table)."""
    return f"U95_{name}"


def flow_column(strain: float) -> str:
    """The name of the flow stress at a strain, as the campaign table names its column."""
    from .campaign import _flow_column

    return _flow_column(strain)


class _Evaluator:
    """The parts of a nominal reduction the propagation reads again and again, and the scalars of a stage 4.

    Each evaluation finds its own loading part (:func:`shpb.validity.usable_loading_region`, as the verdict
    does) and takes its valid part from there, starting as many samples later as the nominal verdict's
    equilibrium onset did: a window tied to the data, not to a time that the inputs move.
    """

    def __init__(self, shot: "Shot", stages: "Stages"):
        self.shot, self.st = shot, stages
        c, v = stages.curves, stages.verdict
        self.time = c.time
        self.dt = stages.waves.dt
        self.plan = stages.plan
        valid = np.asarray(v.valid, dtype=bool)
        region = self.region = self._region(c, stages.waves)
        self.onset = int(np.argmax(valid)) - region[0] if (valid.any() and region is not None) else None
        self.flow_strains = np.array([])
        if valid.any():
            e0, e1 = float(c.strain[valid].min()), float(c.strain[valid].max())
            k = np.arange(math.ceil(e0 / FLOW_STRAIN_STEP - 1e-9), math.floor(e1 / FLOW_STRAIN_STEP + 1e-9) + 1)
            self.flow_strains = np.round(k[k > 0] * FLOW_STRAIN_STEP, 10)
        self.flow_keys = [flow_column(e) for e in self.flow_strains]
        self.peaks = {b: float(np.max(np.abs(getattr(stages.strains, b)))) for b in BARS}  # stage 1's peak strains

    @staticmethod
    def _region(curves, waves):
        from .validity import usable_loading_region

        usable = waves.weight >= 1.0 - 1e-9 if waves.weight is not None else None
        return usable_loading_region(curves.strain_rate, 0.5 * (curves.force_front + curves.force_back), usable)

    def changed(self, values: Mapping) -> tuple["BarSet", "Specimen", tuple]:
        """(bar set, specimen, channel factors) with some inputs changed (:func:`_with_inputs`,
        :func:`_channel_factor`)."""
        barset, specimen = _with_inputs(self.shot.barset, self.shot.specimen, values)
        return barset, specimen, tuple(_channel_factor(self.shot.barset, b, values, self.peaks[b]) for b in BARS)

    def _valid(self, size: int, region) -> np.ndarray:
        """The valid part of an evaluation: from the nominal onset (samples into its loading part) to its end."""
        valid = np.zeros(size, dtype=bool)
        if region is not None and self.onset is not None and region[0] + self.onset < region[1]:
            valid[region[0] + self.onset:region[1]] = True
        return valid

    def evaluate(self, curves, waves, scalars: bool = True) -> tuple:
        """(rows, scalars or None) of a (re)computed stage 4, its loading part found once for both."""
        region = self._region(curves, waves)
        return self.rows(curves, region), (self.scalars(curves, region) if scalars else None)

    def rows(self, curves, region) -> dict:
        """The rows of a (re)computed stage 4 on the nominal rows.

        The strain at the row's time (t from the incident foot at the front face, as the reduction places
        it); the stress and the strain rate at the row's strain on the loading part (the abscissa of the
        stress-strain and rate-strain curves: a draw that moves the waves in time moves a curve along
        itself, which says nothing about the specimen), at the row's time elsewhere.
        """
        t0, strain0 = self.time, self.st.curves.strain
        series = {"strain": curves.strain, "stress": curves.stress, "strain_rate": curves.strain_rate,
                  "true_stress": curves.true_stress, "stress_1wave": curves.stress_by_form["1-wave"]}
        same = curves.time.size == t0.size and np.allclose(curves.time, t0, rtol=0, atol=1e-3 * self.dt)
        out = dict(series) if same else \
            {k: np.interp(t0, curves.time, y, left=np.nan, right=np.nan) for k, y in series.items()}
        if region is None or self.region is None:
            return out
        b = int(np.argmax(curves.strain)) + 1  # to the largest strain: past the loading's end the strain still rises
        x = np.maximum.accumulate(curves.strain[:b])  # strain rises while loading (a flat wobble stays put)
        a0, b0 = self.region
        for k in ("stress", "strain_rate", "true_stress"):  # the 1-wave stress stays at the row's time
            row = np.array(out[k], dtype=float)
            at_strain = np.interp(strain0[a0:b0], x, series[k][:b], left=np.nan, right=np.nan)
            row[a0:b0] = np.where(np.isfinite(at_strain), at_strain, row[a0:b0])  # beyond its strains: its time
            out[k] = row
        return out

    def scalars(self, curves, region) -> dict:
        """The summary scalars of a (re)computed stage 4 (as :func:`shpb.validity.assess_curve` defines them)."""
        from .campaign import flow_stress_at
        from .validity import offset_yield

        strain, stress, rate = curves.strain, curves.stress, curves.strain_rate
        out = {k: float("nan") for k in SCALARS}
        out["peak_stress_MPa"] = float(np.max(stress) / 1e6)
        out["max_strain"] = float(np.max(strain))
        valid = self._valid(strain.size, region)
        if region is not None:
            a, b = region
            y = offset_yield(strain[a:b], stress[a:b], self.shot.analysis.yield_offset, self.shot.specimen.modulus)
            if y is not None:
                out["yield_stress_MPa"], out["yield_strain"] = y["yield_stress"] / 1e6, y["yield_strain"]
        if valid.any():
            out["flow_stress_mean_MPa"] = float(np.mean(stress[valid]) / 1e6)
            out["mean_strain_rate_per_s"] = float(np.mean(rate[valid]))
        if self.flow_strains.size:
            flow = np.atleast_1d(flow_stress_at(strain, stress, valid, self.flow_strains)) / 1e6
            out.update({k: float(v) for k, v in zip(self.flow_keys, flow)})
        return out

    def along(self, row, yield_strain: float) -> dict:
        """A stress-like row [Pa] on the nominal curves read as each stress scalar reads the stress [MPa]: its
        mean over the valid part, its value at the (nominal) yield strain, at the peak stress and at each strain
        of the flow table."""
        from .campaign import flow_stress_at

        curves, region = self.st.curves, self.region
        strain = curves.strain
        out = {"peak_stress_MPa": float(row[int(np.argmax(curves.stress))] / 1e6)}
        valid = self._valid(strain.size, region)
        if valid.any():
            out["flow_stress_mean_MPa"] = float(np.mean(row[valid]) / 1e6)
        if region is not None and math.isfinite(yield_strain):
            a, b = region
            x = np.maximum.accumulate(strain[a:b])
            out["yield_stress_MPa"] = float(np.interp(yield_strain, x, row[a:b]) / 1e6)
        if self.flow_strains.size:
            flow = np.atleast_1d(flow_stress_at(strain, row, valid, self.flow_strains)) / 1e6
            out.update({k: float(v) for k, v in zip(self.flow_keys, flow)})
        return out


#: The stress's model input: how far the reported stress may lie from the specimen's mean stress.
EQUILIBRIUM_INPUT = Input(
    "specimen.equilibrium", "non-equilibrium: reported stress against the mean of the two face stresses",
    float("nan"), float("nan"), "", "specimen",
    "|3-wave - reported stress| averaged as the verdict averages R(t): the mean stress of a specimen whose "
    "stress varies linearly along it is the mean of its face stresses (the 3-wave stress; Gray 2000, from memory); "
    "a standard uncertainty, not a correction", "model (from the curves)")


def equilibrium_row(curves, dt: float) -> np.ndarray:
    """The standard uncertainty of the reported stress from the specimen's remaining non-equilibrium [Pa].

    |sigma_3w - sigma| averaged over :data:`shpb.validity.EQUILIBRIUM_AVERAGING` (as the verdict averages
    R(t)): the specimen's mean stress, the mean of its two face stresses for a stress linear along it, lies
    that far from the reported stress (|R| sigma / 2 for the 1-wave or 2-wave stress; zero for the 3-wave
    stress, whose own error of that kind the face forces' noise carries). Zero in equilibrium.
    """
    from .validity import averaging_samples, moving_average

    diff = curves.stress_by_form["3-wave"] - curves.stress
    return np.nan_to_num(np.abs(moving_average(diff, averaging_samples(dt))))


def _kolsky(waves, barset, specimen, stress_form, factors):
    """Stage 4 on the face waves with each channel's strain scaled by its factor (the waves are linear in it)."""
    from .kolsky import kolsky_curves

    fi, ft = factors
    if fi != 1.0 or ft != 1.0:
        waves = replace(waves, incident=waves.incident * fi, reflected=waves.reflected * fi,
                        transmitted=waves.transmitted * ft)
    return kolsky_curves(waves, barset, specimen, stress_form)


def gum_part(shot: "Shot", stages: "Stages", inputs, ev: Optional[_Evaluator] = None) -> dict:
    """Contributions c_i u(x_i) of the GUM inputs to every row and scalar (``ev``: the caller's evaluator, if any).

    Returns
    -------
    dict
        ``{"rows": {row: ndarray (inputs x samples)}, "scalars": {name: ndarray (inputs,)}, "keys": [...]}``
        in SI (stress in Pa, strain rate in 1/s) for the rows, the summary's units for the scalars.
    """
    ev = ev if ev is not None else _Evaluator(shot, stages)
    gum = [i for i in inputs if i.method == "GUM"]
    waves, form = stages.waves, shot.analysis.stress
    rows, scal = {k: [] for k in ROWS}, {}
    for inp in gum:
        got = []
        for sign in (+1.0, -1.0):
            b2, s2, factors = ev.changed({inp.key: inp.value + sign * inp.u})
            got.append(ev.evaluate(_kolsky(waves, b2, s2, form, factors), waves))
        for k in ROWS:
            rows[k].append(0.5 * (got[0][0][k] - got[1][0][k]))
        for k, v in got[0][1].items():
            scal.setdefault(k, []).append(0.5 * (v - got[1][1].get(k, float("nan"))))
    n = ev.time.size
    return {"keys": [i.key for i in gum],
            "rows": {k: np.array(v) if v else np.zeros((0, n)) for k, v in rows.items()},
            "scalars": {k: np.array(v) for k, v in scal.items()}}


def _with_noise(strains, rng):
    """Stage 1's strains with a fresh draw of each channel's noise added: both main channels and every further
    gauge station (``GaugeStrains.stations``, each at its own measured noise)."""
    incident = strains.incident + _noise_draw(strains, strains.noise_incident, rng)
    transmitted = strains.transmitted + _noise_draw(strains, strains.noise_transmitted, rng)
    stations = {name: replace(s, strain=s.strain + _noise_draw(strains, s.noise, rng))
                for name, s in strains.stations.items()}
    return replace(strains, incident=incident, transmitted=transmitted, stations=stations)


def _noise_draw(strains, sigma: float, rng) -> np.ndarray:
    """One draw of a channel's noise as the conditioned strain carries it [1].

    White Gaussian noise through the record's own zero-phase low-pass (stage 1,
    :func:`shpb.conditioning.lowpass`), scaled to ``sigma``, the channel's noise
    measured over its quiet spans after conditioning (``GaugeStrains.noise_*``,
    ``StationStrain.noise``: the noise the equilibrium test propagates too):
    the spectrum of the filter, the level of the record.
    """
    from .conditioning import lowpass

    n = strains.time.size
    if not sigma > 0:
        return np.zeros(n)
    v = rng.standard_normal(n)
    cutoff = strains.lowpass_cutoff
    if cutoff:
        v = lowpass(v, strains.dt, cutoff)
    return v * (sigma / float(np.std(v)))


@dataclass(frozen=True)
class MonteCarloDraws:
    """The draws of :func:`monte_carlo_part`: each kept draw's rows (on the nominal time grid) and scalars.

    Attributes
    ----------
    keys : list of str
        The scalar inputs drawn (noise is drawn but not listed).
    x : ndarray
        Their drawn values, draws x inputs [SI].
    rows : dict
        Row name -> draws x samples [SI].
    scalars : dict
        Scalar name -> draws.
    failed : int
        Draws the reduction refused (AnalysisError), left out.
    """

    keys: list
    x: np.ndarray
    rows: dict
    scalars: dict
    failed: int = 0

    @property
    def kept(self) -> int:
        return int(self.x.shape[0])


def monte_carlo_part(shot: "Shot", stages: "Stages", inputs, draws: int = DEFAULT_DRAWS, seed=SEED,
                     methods=("Monte Carlo",), scalars: bool = True,
                     ev: Optional[_Evaluator] = None) -> MonteCarloDraws:
    """Draws of the inputs whose ``method`` is in ``methods``, each rerun through the stages it changes.

    A draw that changes a wave speed, a gauge distance or the noise reruns
    stage 2 (:func:`shpb.pulses.plan_analysis`) and stage 3
    (:func:`shpb.pulses.waves_at_faces`) on the conditioned record of stage 1
    plus the draw's noise; one that changes only linear inputs reuses stage 3's
    face waves, scaled (they are linear in a channel's strain). Stage 4 is
    rerun for every draw. Rows are interpolated onto the nominal time grid
    (time from the incident foot at the front face, as each draw places it).

    Parameters
    ----------
    methods : tuple of str
        ``("Monte Carlo",)`` for the nonlinear inputs (the default);
        ``("GUM",)`` draws only the linear inputs (the check of the GUM
        law against Monte Carlo); both for everything.
    scalars : bool
        Also evaluate the summary scalars of every draw (off: rows only).
    ev : _Evaluator, optional
        The caller's evaluator of this shot and stages.
    """
    from .errors import AnalysisError
    from .reduce import face_stages

    rng = np.random.default_rng(seed)
    ev = ev if ev is not None else _Evaluator(shot, stages)
    drawn = [i for i in inputs if i.method in methods and not i.key.startswith("record.")]
    noise = any(i.key.startswith("record.") and i.method in methods for i in inputs)
    opt, st = shot.analysis, stages.strains
    restage = noise or any(k.split(".", 1)[1] in ("wave_speed", "gauge_distance") or
                           (k.endswith("modulus") and i.method == "Monte Carlo")
                           for i in drawn for k in [i.key])
    xs, rows, scal, failed = [], {k: [] for k in ROWS}, {}, 0
    for _ in range(int(draws)):
        x = np.array([i.value + i.u * rng.standard_normal() for i in drawn])
        b2, s2, factors = ev.changed(dict(zip((i.key for i in drawn), x)))
        try:
            if restage:
                strains = _with_noise(st, rng) if noise else st
                waves = face_stages(strains, b2, opt)[2]  # the separation too, when the shot's waves were separated
            else:
                waves = stages.waves
            curves = _kolsky(waves, b2, s2, opt.stress, factors)
        except AnalysisError:
            failed += 1
            continue
        xs.append(x)
        got_rows, got_scalars = ev.evaluate(curves, waves, scalars)
        for k, y in got_rows.items():
            rows[k].append(y)
        for k, v in (got_scalars.items() if scalars else ()):
            scal.setdefault(k, []).append(v)
    n = len(xs)
    return MonteCarloDraws(keys=[i.key for i in drawn], x=np.array(xs).reshape(n, len(drawn)),
                           rows={k: np.array(v).reshape(n, ev.time.size) for k, v in rows.items()},
                           scalars={k: np.array(v, dtype=float) for k, v in scal.items()}, failed=failed)


def _std(a, axis=0):
    """Sample standard deviation (ddof 1) over the finite values along ``axis`` (NaN with fewer than 2)."""
    a = np.asarray(a, dtype=float)
    if a.shape[axis] < 2:
        return np.full(np.delete(a.shape, axis), np.nan) if a.ndim > 1 else float("nan")
    finite = np.isfinite(a)
    if finite.all():
        return np.std(a, axis=axis, ddof=1)
    import warnings

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        out = np.nanstd(a, axis=axis, ddof=1)
    return np.where(np.sum(finite, axis=axis) >= 2, out, np.nan)


def _regression_contributions(x: np.ndarray, y: np.ndarray, u: np.ndarray) -> tuple[np.ndarray, float]:
    """Least-squares sensitivities of Monte Carlo draws: contributions |b_i| u_i and what the inputs leave (noise)."""
    ok = np.isfinite(y)
    if ok.sum() < x.shape[1] + 3:
        return np.full(x.shape[1], np.nan), float("nan")
    xc = x[ok] - x[ok].mean(axis=0)
    yc = y[ok] - y[ok].mean()
    b, *_ = np.linalg.lstsq(xc, yc, rcond=None) if x.shape[1] else (np.zeros(0),)
    rest = yc - xc @ b
    return np.abs(b) * u, float(np.sqrt(np.sum(rest * rest) / max(ok.sum() - x.shape[1] - 1, 1)))


@dataclass(frozen=True)
class ShotUncertainty:
    """Stage 7 of a reduction: the standard uncertainty of every curve row and summary scalar, and the budget.

    Attributes
    ----------
    inputs : tuple of Input
    rows : dict
        Row name (:data:`ROWS`) -> combined standard uncertainty per sample [SI].
    rows_mc : dict
        The Monte Carlo part of ``rows``.
    scalars : dict
        Scalar name (:data:`SCALARS`, then :func:`flow_column` of each strain of the flow table) ->
        ``{"value", "u", "u_gum", "u_mc"}`` (summary units).
    contributions : dict
        Scalar name -> input key -> contribution c_i u(x_i) (summary units); ``record.noise`` for what the
        Monte Carlo draws leave to the noise.
    flow_strains : ndarray
        Strains of the flow-stress table [1].
    draws, failed : int
        Monte Carlo draws made and refused.
    seed : int
    coverage_factor : float
    notes : tuple of str
        What the propagation does not cover for this shot (said in the summary and on the console).
    """

    inputs: tuple
    rows: dict
    rows_mc: dict
    scalars: dict
    contributions: dict
    flow_strains: np.ndarray
    draws: int
    failed: int
    seed: int
    coverage_factor: float = COVERAGE_FACTOR
    notes: tuple = ()

    @property
    def provenance(self) -> dict:
        return {"step": "uncertainty", "parameters": {
            "method": "GUM law of propagation (JCGM 100:2008 eq. 10) for the linear inputs, Monte Carlo "
                      "(JCGM 101:2008) through stages 2a-4 for wave speeds, gauge distances and record noise, and the "
                      "specimen's remaining non-equilibrium from the curves",
            "draws": self.draws, "failed_draws": self.failed, "seed": self.seed,
            "coverage_factor": self.coverage_factor}}

    def columns(self) -> dict:
        """Columns for curves.csv: ``u_<column>`` and ``U95_<column>`` (k = 2) in the column's unit."""
        out = {}
        for name in ROW_COLUMNS:
            col, scale = ROWS[name]
            out[standard_name(col)] = self.rows[name] * scale
            out[expanded_name(col)] = self.coverage_factor * self.rows[name] * scale
        col, scale = ROWS["true_stress"]
        out[standard_name(col)] = self.rows["true_stress"] * scale
        return out

    def results(self) -> dict:
        """Flat summary results: ``u_<scalar>`` and ``U95_<scalar>`` for every scalar with a value."""
        out = {}
        for name, s in self.scalars.items():
            if name not in SCALARS or not math.isfinite(s["value"]):  # the flow table's: flow_table()
                continue
            out[standard_name(name)] = s["u"]
            out[expanded_name(name)] = self.coverage_factor * s["u"]
        return out

    def flow_table(self) -> dict:
        """The flow stress at every step of :data:`FLOW_STRAIN_STEP` on the valid part, with u and U."""
        keys = [flow_column(e) for e in self.flow_strains]
        val = [self.scalars[k]["value"] for k in keys]
        u = [self.scalars[k]["u"] for k in keys]
        return {"strain": list(self.flow_strains), "stress_MPa": val, "u_MPa": u,
                "U95_MPa": [self.coverage_factor * x for x in u]}

    def dominant(self, name: str, n: int = 3) -> list:
        """The inputs that contribute most to a scalar, largest first (labels)."""
        c = {k: v for k, v in self.contributions.get(name, {}).items() if np.isfinite(v)}
        labels = {i.key: i.label for i in self.inputs}
        labels["record.noise"] = "record noise (both channels)"
        return [labels.get(k, k) for k, _ in sorted(c.items(), key=lambda kv: -kv[1])[:n]]

    def relative_by_group(self, name: str) -> dict:
        """u of a scalar from each group of inputs (``bar set``, ``specimen``, ``record``), relative to its value."""
        s = self.scalars.get(name)
        if s is None or not s["value"]:
            return {}
        groups = {i.key: i.group for i in self.inputs}
        groups["record.noise"] = "record"
        sums: dict = {}
        for k, c in self.contributions.get(name, {}).items():
            if np.isfinite(c):
                g = groups.get(k, "record")
                sums[g] = sums.get(g, 0.0) + c * c
        return {g: math.sqrt(v) / abs(s["value"]) for g, v in sums.items()}

    def summary(self) -> dict:
        """The ``uncertainty`` section of summary.json."""
        budget_of = ("flow_stress_mean_MPa", "yield_stress_MPa", "mean_strain_rate_per_s", "max_strain")
        return {
            "method": self.provenance["parameters"]["method"],
            "coverage_factor": self.coverage_factor,
            "expanded": "U95 = k u with k = 2 (about 95 % coverage for a near-normal output)",
            "draws": self.draws, "failed_draws": self.failed, "seed": self.seed,
            "inputs": [{"key": i.key, "label": i.label, "value": i.value, "unit": i.unit,
                        "standard_uncertainty": i.u, "relative_standard_uncertainty": i.relative,
                        "group": i.group, "method": i.method, "source": i.source} for i in self.inputs],
            "results": {k: {"value": s["value"], "u": s["u"], "U95": self.coverage_factor * s["u"],
                            "u_gum": s["u_gum"], "u_monte_carlo": s["u_mc"]}
                        for k, s in self.scalars.items() if k in SCALARS},
            "flow_stress": self.flow_table(),
            "dominant_inputs": {k: self.dominant(k) for k in budget_of if k in self.scalars},
            "relative_by_group": {"stress": self.relative_by_group("flow_stress_mean_MPa"),
                                  "strain": self.relative_by_group("max_strain")},
            "not_modelled": list(NOT_MODELLED),
            "notes": list(self.notes),
        }

    def budget_table(self):
        """The uncertainty budget: one row per input (and the noise, and the combined u), one column per scalar.

        Columns: ``input``, ``key``, ``group``, ``method``, ``value``,
        ``unit``, ``standard_uncertainty``, ``relative_standard_uncertainty_percent``,
        ``source``, then ``u_<scalar>`` (the input's contribution c_i u(x_i)
        in the scalar's unit; the last row, ``combined``, u of the scalar).
        """
        import pandas as pd

        names = [k for k in SCALARS if k in self.scalars and math.isfinite(self.scalars[k]["value"])]
        rows = []
        entries = list(self.inputs) + [Input("record.noise", "record noise (both channels), and what the Monte "
                                             "Carlo regression leaves", float("nan"), float("nan"), "", "record",
                                             "Monte Carlo residual", "Monte Carlo")]
        for i in entries:
            if i.key.startswith("record.noise_"):
                continue  # the channels' noise appears in the combined noise row
            row = {"input": i.label, "key": i.key, "group": i.group, "method": i.method, "value": i.value,
                   "unit": i.unit, "standard_uncertainty": i.u,
                   "relative_standard_uncertainty_percent": 100 * i.relative if i.unit else float("nan"),
                   "source": i.source}
            for k in names:
                row[standard_name(k)] = self.contributions.get(k, {}).get(i.key, float("nan"))
            rows.append(row)
        comb = {"input": "combined standard uncertainty", "key": "combined", "group": "", "method": "",
                "value": float("nan"), "unit": "", "standard_uncertainty": float("nan"),
                "relative_standard_uncertainty_percent": float("nan"), "source": ""}
        for k in names:
            comb[standard_name(k)] = self.scalars[k]["u"]
        rows.append(comb)
        return pd.DataFrame(rows)


def propagate(shot: "Shot", stages: "Stages", draws: Optional[int] = None, seed=SEED) -> ShotUncertainty:
    """Stage 7: the uncertainty of a reduced shot's curves and scalars (GUM + Monte Carlo, see the module).

    Parameters
    ----------
    shot : shpb.setup.Shot
    stages : shpb.reduce.Stages
        Stages 1-5 of the nominal reduction.
    draws : int, optional
        Monte Carlo draws (default the analysis key ``uncertainty_draws``).
    seed : int

    Returns
    -------
    ShotUncertainty
    """
    draws = int(draws if draws is not None else shot.analysis.uncertainty_draws)
    if draws < MIN_DRAWS:
        raise InputError(f"expected at least {MIN_DRAWS} draws, got {draws}", "analysis.uncertainty_draws")
    inputs = shot_inputs(shot, stages.strains)
    ev = _Evaluator(shot, stages)
    nominal = ev.scalars(stages.curves, ev.region)
    eq_row = equilibrium_row(stages.curves, stages.waves.dt)
    eq_scalars = ev.along(eq_row, nominal["yield_strain"])
    gum = gum_part(shot, stages, inputs, ev)
    mc = monte_carlo_part(shot, stages, inputs, draws, seed, ev=ev)
    rows_gum = {k: combined_uncertainty(gum["rows"][k]) if gum["rows"][k].size else np.zeros(ev.time.size)
                for k in ROWS}
    rows_mc = {k: _std(mc.rows[k]) if mc.kept >= 2 else np.zeros(ev.time.size) for k in ROWS}
    eq_rows = {"stress": eq_row, "true_stress": eq_row * (1.0 - stages.curves.strain)}
    rows = {k: np.sqrt(rows_gum[k] ** 2 + np.nan_to_num(rows_mc[k]) ** 2 + eq_rows.get(k, 0.0) ** 2) for k in ROWS}
    mc_inputs = [i for i in inputs if i.key in mc.keys]
    u_mc_in = np.array([i.u for i in mc_inputs])
    scalars, contributions = {}, {}
    for name, value in nominal.items():
        g = gum["scalars"].get(name, np.zeros(0))
        u_gum = float(combined_uncertainty(g)) if g.size else 0.0
        y = mc.scalars.get(name, np.array([]))
        u_mc = float(_std(y)) if y.size >= 2 else 0.0
        u_mc = u_mc if math.isfinite(u_mc) else 0.0
        u_eq = eq_scalars.get(name, 0.0)
        u_eq = u_eq if math.isfinite(u_eq) else 0.0
        u = math.sqrt(u_gum ** 2 + u_mc ** 2 + u_eq ** 2) if math.isfinite(u_gum) else float("nan")
        if not math.isfinite(value):
            u = float("nan")
        scalars[name] = {"value": value, "u": u, "u_gum": u_gum, "u_mc": u_mc}
        c = {k: abs(float(v)) for k, v in zip(gum["keys"], g)}
        if name in eq_scalars:
            c[EQUILIBRIUM_INPUT.key] = u_eq
        if y.size >= 2 and mc_inputs:
            b, rest = _regression_contributions(mc.x, y, u_mc_in)
            c.update({i.key: float(v) for i, v in zip(mc_inputs, b)})
            c["record.noise"] = rest
        elif y.size >= 2:
            c["record.noise"] = u_mc
        contributions[name] = c
    return ShotUncertainty(inputs=inputs + (EQUILIBRIUM_INPUT,), rows=rows, rows_mc=rows_mc, scalars=scalars,
                           contributions=contributions, flow_strains=ev.flow_strains, draws=draws, failed=mc.failed,
                           seed=int(seed), notes=separation_notes(stages.waves))


def separation_notes(waves) -> tuple:
    """What the propagation leaves out when a bar's waves were separated from two gauge stations.

    The Monte Carlo draws rerun the separation (:func:`shpb.reduce.face_stages`) with the drawn wave speeds
    and main-station distances and fresh noise on every station; the further stations' own distances and
    gauge chains are not inputs, and a main station's gauge-chain change scales that bar's separated waves as
    a whole (exact only if both stations share the error).
    """
    bars = waves.separated_bars
    if not bars:
        return ()
    whose = "bars'" if len(bars) > 1 else "bar's"
    return (f"the {' and '.join(bars)} {whose} waves were separated from two gauge stations: the Monte Carlo "
            f"reruns the separation with the drawn wave speeds, main-station distances and every station's noise, "
            f"but the further stations' distances and gauge chains are taken as exact and a gauge-chain error is "
            f"applied to both stations alike, so u may be understated for this shot (docs/uncertainty.md)",)
