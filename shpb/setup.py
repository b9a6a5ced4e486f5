"""The setup of a shot as plain dataclasses, and loading them from TOML.

All fields are SI (m, s, Pa, kg/m^3, V). Quantities in the files may carry a
unit as a string (``"19.05 mm"``); see ``docs/setup-files.md``. Every error
names the file, the key and what was expected.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, field, replace
from pathlib import Path
from typing import Any, Optional, Union

from .errors import InputError
from .units import to_si

try:  # Python >= 3.11
    import tomllib
except ModuleNotFoundError:  # pragma: no cover
    import tomli as tomllib

#: Bridge arrangements understood by :mod:`shpb.bridge`.
from .bridge import BRIDGES  # noqa: E402
from . import schema  # noqa: E402


# --------------------------------------------------------------------------- dataclasses
@dataclass(frozen=True)
class Material:
    """An isotropic elastic material.

    Attributes
    ----------
    name : str
    modulus : float
        Young's modulus E [Pa].
    density : float
        Density rho [kg/m^3].
    poisson_ratio : float
        Poisson ratio nu [1].
    yield_strength : float or None
        Yield strength [Pa]; the bar-stress check needs it.
    """

    name: str
    modulus: float
    density: float
    poisson_ratio: float
    yield_strength: Optional[float] = None

    @property
    def bar_wave_speed(self) -> float:
        """Extensional (thin-bar) wave speed c0 = sqrt(E/rho) [m/s]."""
        return math.sqrt(self.modulus / self.density)


@dataclass(frozen=True)
class Gauge:
    """A strain-gauge station and its signal chain.

    Attributes
    ----------
    distance : float
        Distance from the gauge station to the specimen face of its bar [m].
    bridge : str
        One of :data:`BRIDGES`.
    gauge_factor : float
        Gauge factor GF [1].
    excitation : float
        Bridge excitation voltage [V].
    gain : float
        Amplifier gain [V/V].
    polarity : int
        +1 if a compressive pulse shows as a positive voltage on the record,
        -1 if negative.
    scale : float
        Calibration multiplier applied to the strain [1] (from a calibration).
    full_scale : float or None
        Recorder input range (+/- this many volts at the record) [V]; used to
        detect clipping. None: detect flat tops from the data alone.
    """

    distance: float
    bridge: str = "half-bending"
    gauge_factor: float = 2.0
    excitation: float = 10.0
    gain: float = 1.0
    polarity: int = 1
    scale: float = 1.0
    full_scale: Optional[float] = None


@dataclass(frozen=True)
class Bar:
    """An elastic pressure bar.

    Attributes
    ----------
    material : Material
    diameter : float
        Bar diameter [m].
    length : float
        Bar length [m].
    measured_wave_speed : float or None
        Measured extensional wave speed [m/s]; overrides sqrt(E/rho) for all
        time shifts and velocities when given.
    """

    material: Material
    diameter: float
    length: float
    measured_wave_speed: Optional[float] = None

    @property
    def radius(self) -> float:
        """Bar radius [m]."""
        return 0.5 * self.diameter

    @property
    def area(self) -> float:
        """Cross-section area [m^2]."""
        return math.pi * self.diameter**2 / 4.0

    @property
    def modulus(self) -> float:
        """Young's modulus [Pa]."""
        return self.material.modulus

    @property
    def poisson_ratio(self) -> float:
        """Poisson ratio [1]."""
        return self.material.poisson_ratio

    @property
    def wave_speed(self) -> float:
        """Bar wave speed used in the reduction [m/s]: measured if given, else sqrt(E/rho)."""
        return self.measured_wave_speed or self.material.bar_wave_speed

    @property
    def impedance(self) -> float:
        """Mechanical impedance rho c0 A [kg/s]."""
        return self.material.density * self.wave_speed * self.area


@dataclass(frozen=True)
class Striker:
    """The striker bar: length [m], diameter [m], material, optional speed [m/s]."""

    length: float
    diameter: float
    material: Material
    speed: Optional[float] = None

    @property
    def area(self) -> float:
        """Cross-section area [m^2]."""
        return math.pi * self.diameter**2 / 4.0

    @property
    def pulse_duration(self) -> float:
        """Loading-pulse duration 2 L / c0 of the striker [s] (Kolsky 1949)."""
        return 2.0 * self.length / self.material.bar_wave_speed


@dataclass(frozen=True)
class BarSet:
    """The rig: incident and transmitted bars with their gauges, optional striker.

    ``incident_gauge`` and ``transmitted_gauge`` are each bar's main station
    (the record's ``incident`` and ``transmitted`` channels);
    ``incident_stations`` and ``transmitted_stations`` hold further stations
    (:class:`Gauge`), for two-point wave separation (:mod:`shpb.separation`).
    """

    name: str
    incident: Bar
    transmitted: Bar
    incident_gauge: Gauge
    transmitted_gauge: Gauge
    striker: Optional[Striker] = None
    source: Optional[str] = None
    calibration: dict = field(default_factory=dict, compare=False)
    #: Stated standard uncertainties of the rig's inputs (the ``[uncertainty]`` table, parsed by
    #: :func:`shpb.uncertainty.parse_barset_uncertainty`; defaults there).
    uncertainty: dict = field(default_factory=dict, compare=False)
    incident_stations: tuple = ()
    transmitted_stations: tuple = ()

    def stations(self, bar: str) -> tuple:
        """Every gauge station of a bar (``incident`` or ``transmitted``), the main one first."""
        return (getattr(self, f"{bar}_gauge"),) + tuple(getattr(self, f"{bar}_stations"))


@dataclass(frozen=True)
class Specimen:
    """The specimen as measured before the shot.

    Attributes
    ----------
    length : float
        Initial length along the bar axis [m].
    diameter : float
        Initial diameter [m].
    material : str
        Free text.
    temperature : float or None
        Test temperature [K].
    modulus : float or None
        Elastic modulus for the yield offset line [Pa]; fitted when None.
    density : float or None
        Density [kg/m^3]; with the modulus, gives the specimen wave transit
        time; with it the inertia corrections are estimated.
    length_uncertainty, diameter_uncertainty : float or None
        Standard uncertainties of the length and diameter [m] (the measuring
        instrument's); the default of :mod:`shpb.uncertainty` when None.
    poisson_ratio : float or None
        Poisson ratio in the radial inertia terms [1]; 0.5 (plastic flow) if None.
    """

    length: float
    diameter: float
    material: str = ""
    temperature: Optional[float] = None
    modulus: Optional[float] = None
    density: Optional[float] = None
    length_uncertainty: Optional[float] = None
    diameter_uncertainty: Optional[float] = None
    poisson_ratio: Optional[float] = None

    @property
    def area(self) -> float:
        """Initial cross-section area [m^2]."""
        return math.pi * self.diameter**2 / 4.0

    @property
    def wave_speed(self) -> Optional[float]:
        """Elastic bar wave speed sqrt(E/rho) of the specimen [m/s]; None without modulus and density."""
        if self.modulus and self.density:
            return math.sqrt(self.modulus / self.density)
        return None

    @property
    def transit_time(self) -> Optional[float]:
        """One elastic wave transit of the specimen, L / sqrt(E/rho) [s]; None without modulus and density."""
        c = self.wave_speed
        return self.length / c if c else None


@dataclass(frozen=True)
class Channel:
    """Where a channel's samples are: a file and a column (name or 0-based index, or npz key)."""

    file: Path
    column: Union[str, int]


@dataclass(frozen=True)
class RecordSpec:
    """How to read a shot's record.

    Attributes
    ----------
    incident, transmitted : Channel
    time : str, int or None
        Time column (or npz key) in the incident channel's file; None if
        ``sample_interval`` is given.
    time_unit : float
        Seconds per unit of the time column [s].
    sample_interval : float or None
        Sample interval [s] when there is no time column.
    max_samples : int or None
        Ceiling on samples per channel [default: ``shpb.io.MAX_SAMPLES``];
        a longer record is refused before it is read.
    incident_stations, transmitted_stations : tuple of Channel
        The channels of each bar's further gauge stations, in the bar set's
        order (``BarSet.incident_stations``, ...); may be fewer than the bar
        set has.
    """

    incident: Channel
    transmitted: Channel
    time: Union[str, int, None] = None
    time_unit: float = 1.0
    sample_interval: Optional[float] = None
    max_samples: Optional[int] = None
    incident_stations: tuple = ()
    transmitted_stations: tuple = ()


@dataclass(frozen=True)
class AnalysisOptions:
    """Analysis choices for a shot (all have defaults; keys and meanings in :data:`shpb.schema.ANALYSIS_KEYS`).

    Attributes
    ----------
    dispersion : bool
        Pochhammer–Chree correction of each wave to its face (default on).
    amplitude_factors : bool
        Radial amplitude factors in the dispersion correction (default off).
    stress : str
        Stress reported as ``stress_MPa``: ``1-wave`` (back face, default),
        ``2-wave`` (front face) or ``3-wave`` (mean).
    equilibrium_threshold : float
        Largest |R| counted as force equilibrium [1] (default 0.05).
    yield_offset : float
        Strain offset of the yield line [1] (default 0.002).
    incident_start : float or None
        Record time of the incident foot [s]; found automatically if None.
    window_length : float or None
        Length of the analysis window after the incident foot reaches the
        front face [s]; chosen from the bars, the pulse and the record if None.
    pre_trigger : float or None
        Length of the quiet record start used as baseline [s]; default: the
        part before the incident foot, less a margin.
    reflected_adjust, transmitted_adjust : float
        Hand adjustment of the alignment [s]: the wave is taken this much
        later at its gauge than the geometry and wave speed say (default 0).
    separation : str
        Two-point wave separation (:mod:`shpb.separation`): ``auto`` (default;
        when the waves overlap at the incident gauge and the incident bar has
        a second station), ``on`` (whenever a bar has two stations) or ``off``.
    separation_cutoff : float or None
        Upper end of the separation's frequency band [Hz]; the bar's
        second-mode onset if None.
    friction_coefficient : float or None
        Interface friction coefficient mu [1] for the friction band of the
        stress (:func:`shpb.specimen.friction_factor`); none if None.
    lowpass : bool
        Zero-phase low-pass of every channel, the further stations' too
        (default on).
    lowpass_cutoff : float or None
        Its cutoff [Hz]; automatic (from the incident rise and the bars'
        second-mode onset) if None.
    hum_frequency : float or None
        Mains frequency [Hz] fitted with the baselines (none if None).
    uncertainty : bool or None
        Propagate the inputs' uncertainties to every curve row and scalar
        (:mod:`shpb.uncertainty`). None (not stated): the command decides,
        on in ``shpb reduce``, off in :func:`shpb.reduce.reduce_shot` and so
        in campaigns, ``shpb watch`` and previews (docs/uncertainty.md, Cost).
    uncertainty_draws : int
        Monte Carlo draws of that propagation (default 100).
    """

    dispersion: bool = True
    amplitude_factors: bool = False
    stress: str = "1-wave"
    equilibrium_threshold: float = 0.05
    yield_offset: float = 0.002
    incident_start: Optional[float] = None
    window_length: Optional[float] = None
    pre_trigger: Optional[float] = None
    reflected_adjust: float = 0.0
    transmitted_adjust: float = 0.0
    separation: str = "auto"
    separation_cutoff: Optional[float] = None
    friction_coefficient: Optional[float] = None
    lowpass: bool = True
    lowpass_cutoff: Optional[float] = None
    hum_frequency: Optional[float] = None
    uncertainty: Optional[bool] = None
    uncertainty_draws: int = 100


@dataclass(frozen=True)
class Shot:
    """Everything needed to reduce one shot.

    ``record`` says where the record files are; it may be None for a shot
    whose record is passed to :func:`shpb.reduce.reduce_shot` in memory
    (:meth:`shpb.io.Record.from_arrays`). ``striker_speed`` [m/s] is the
    shot's measured impact speed (the shot file's ``[striker] speed``): it
    changes from shot to shot, while the striker's length, diameter and
    material stay in the bar set.
    """

    name: str
    barset: BarSet
    specimen: Specimen
    record: Optional[RecordSpec] = None
    analysis: AnalysisOptions = AnalysisOptions()
    source: Optional[str] = None
    striker_speed: Optional[float] = None


# --------------------------------------------------------------------------- TOML reading
class _Table:
    """A TOML table that knows where it came from, for error messages."""

    def __init__(self, data: dict, where: str):
        self.data = data
        self.where = where

    def _key(self, key):
        return f"{self.where}.{key}" if not self.where.endswith(":") else f"{self.where} {key}"

    def check_keys(self, allowed):
        for key in self.data:
            if key not in allowed:
                raise InputError(f"unknown key {key!r} (expected one of: {', '.join(sorted(allowed))})", self.where)

    def has(self, key):
        return key in self.data

    def table(self, key, required=True) -> Optional["_Table"]:
        if key not in self.data:
            if required:
                raise InputError(f"missing table [{key}]", self.where)
            return None
        val = self.data[key]
        if not isinstance(val, dict):
            raise InputError("expected a table", self._key(key))
        return _Table(val, self._key(key))

    def quantity(self, key, dimension, default=None, required=True, positive=True):
        if key not in self.data:
            if required and default is None:
                raise InputError(f"missing key {key!r} (a {dimension}, e.g. with its unit)", self.where)
            return default
        val = to_si(self.data[key], dimension, self._key(key))
        if positive and not val > 0:
            raise InputError(f"expected a positive {dimension}, got {self.data[key]!r}", self._key(key))
        return val

    def string(self, key, default=None, choices=None):
        if key not in self.data:
            if default is None:
                raise InputError(f"missing key {key!r}", self.where)
            return default
        val = self.data[key]
        if not isinstance(val, str):
            raise InputError(f"expected text, got {val!r}", self._key(key))
        if choices and val not in choices:
            raise InputError(f"expected one of {', '.join(choices)}; got {val!r}", self._key(key))
        return val

    def boolean(self, key, default):
        val = self.data.get(key, default)
        if not isinstance(val, bool):
            raise InputError(f"expected true or false, got {val!r}", self._key(key))
        return val


def read_toml(path) -> dict:
    """Read a TOML file; a missing or malformed file is an :class:`InputError`."""
    path = Path(path)
    if path.is_dir():
        raise InputError("is a folder; expected a TOML file", str(path))
    if not path.is_file():
        raise InputError("file not found", str(path))
    try:
        with open(path, "rb") as fh:
            return tomllib.load(fh)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"not valid TOML ({exc})", str(path)) from None
    except UnicodeDecodeError as exc:
        raise InputError(f"not UTF-8 text ({exc.reason} at byte {exc.start})", str(path)) from None


_MATERIAL_KEYS = {"name", "modulus", "density", "poisson_ratio", "yield_strength"}


def _material(t: _Table, default: Optional[Material]) -> Material:
    """A material from a table; keys not given fall back on ``default``."""
    d = default
    name = str(t.data.get("name", d.name if d else "unnamed"))
    modulus = t.quantity("modulus", "pressure", default=d.modulus if d else None)
    density = t.quantity("density", "density", default=d.density if d else None)
    if t.has("poisson_ratio"):
        nu = to_si(t.data["poisson_ratio"], "dimensionless", t._key("poisson_ratio"))
    elif d:
        nu = d.poisson_ratio
    else:
        raise InputError("missing key 'poisson_ratio' (a number between 0 and 0.5)", t.where)
    if not 0.0 < nu < 0.5:
        raise InputError(f"expected a Poisson ratio between 0 and 0.5, got {nu}", t._key("poisson_ratio"))
    ys = t.quantity("yield_strength", "pressure", required=False, default=d.yield_strength if d else None)
    return Material(name=name, modulus=modulus, density=density, poisson_ratio=nu, yield_strength=ys)


def _bar(t: _Table, default_material: Optional[Material]) -> Bar:
    t.check_keys(_MATERIAL_KEYS | {"diameter", "length", "wave_speed", "gauge"})
    sub = _Table({k: v for k, v in t.data.items() if k in _MATERIAL_KEYS}, t.where)
    mat = _material(sub, default_material)
    return Bar(
        material=mat,
        diameter=t.quantity("diameter", "length"),
        length=t.quantity("length", "length"),
        measured_wave_speed=t.quantity("wave_speed", "velocity", required=False),
    )


def _gauge(t: _Table, bar: Bar) -> Gauge:
    t.check_keys({"distance", "bridge", "gauge_factor", "excitation", "gain", "polarity", "scale", "full_scale"})
    distance = t.quantity("distance", "length")
    if distance >= bar.length:
        raise InputError(f"gauge distance {distance} m is not inside the bar (length {bar.length} m)", t._key("distance"))
    polarity = t.data.get("polarity", 1)
    if polarity not in (1, -1):
        raise InputError(f"expected 1 or -1, got {polarity!r}", t._key("polarity"))
    return Gauge(
        distance=distance,
        bridge=t.string("bridge", default="half-bending", choices=BRIDGES),
        gauge_factor=t.quantity("gauge_factor", "dimensionless", default=2.0),
        excitation=t.quantity("excitation", "voltage", default=None),
        gain=t.quantity("gain", "dimensionless", default=1.0),
        polarity=int(polarity),
        scale=t.quantity("scale", "dimensionless", default=1.0),
        full_scale=t.quantity("full_scale", "voltage", required=False),
    )


def _gauges(bt: _Table, bar: Bar) -> tuple:
    """A bar's gauge stations: ``gauge`` a table (one station) or an array of tables (``[[incident.gauge]]``,
    the first the main station), at distinct distances."""
    raw = bt.data.get("gauge")
    if isinstance(raw, list):
        if not raw:
            raise InputError("expected at least one gauge station", bt._key("gauge"))
        tables = []
        for i, item in enumerate(raw):
            if not isinstance(item, dict):
                raise InputError(f"expected a table of gauge keys, got {item!r}", f"{bt._key('gauge')}[{i + 1}]")
            tables.append(_Table(item, f"{bt._key('gauge')}[{i + 1}]"))
    else:
        tables = [bt.table("gauge")]
    gauges = tuple(_gauge(t, bar) for t in tables)
    for i, g in enumerate(gauges):
        if any(abs(g.distance - h.distance) < 1e-6 for h in gauges[:i]):
            raise InputError(f"two stations at {g.distance * 1e3:g} mm: each station needs its own distance",
                             tables[i]._key("distance"))
    return gauges


def _main_gauge_table(bar_data) -> dict:
    """The main station's table of a bar's raw TOML data (the first of an array of stations)."""
    raw = bar_data.get("gauge", {}) if isinstance(bar_data, dict) else {}
    if isinstance(raw, list):
        raw = raw[0] if raw and isinstance(raw[0], dict) else {}
    return raw


def barset_from_dict(data: dict, source: str, base_dir=None, apply_calibration: bool = True) -> BarSet:
    """Build a :class:`BarSet` from a parsed TOML mapping; ``source`` names the file in errors.

    With a ``calibration_file`` key (a path relative to ``base_dir``, by
    default the folder of ``source``) and ``apply_calibration``, the latest
    calibration in that file is applied (see :func:`apply_calibration_file`).
    """
    top = _Table(data, f"{source}:")
    top.check_keys({"name", "bar_material", "incident", "transmitted", "striker", "calibration", "calibration_file",
                    "uncertainty"})
    mt = top.table("bar_material", required=False)
    default_mat = _material(mt, None) if mt else None
    if mt:
        mt.check_keys(_MATERIAL_KEYS)
    bars, gauges, stations = {}, {}, {}
    for which in ("incident", "transmitted"):
        bt = top.table(which)
        bars[which] = _bar(bt, default_mat)
        gauges[which], *rest = _gauges(bt, bars[which])
        stations[which] = tuple(rest)
    striker = None
    st = top.table("striker", required=False)
    if st:
        st.check_keys(_MATERIAL_KEYS | {"length", "diameter", "speed"})
        sub = _Table({k: v for k, v in st.data.items() if k in _MATERIAL_KEYS}, st.where)
        smat = _material(sub, default_mat or bars["incident"].material)
        striker = Striker(
            length=st.quantity("length", "length"),
            diameter=st.quantity("diameter", "length", default=bars["incident"].diameter),
            material=smat,
            speed=st.quantity("speed", "velocity", required=False),
        )
    cal = top.table("calibration", required=False)
    unc = top.table("uncertainty", required=False)
    if unc:
        from .uncertainty import parse_barset_uncertainty
    barset = BarSet(
        name=str(data.get("name", Path(source).stem)),
        incident=bars["incident"],
        transmitted=bars["transmitted"],
        incident_gauge=gauges["incident"],
        transmitted_gauge=gauges["transmitted"],
        striker=striker,
        source=source,
        calibration=dict(cal.data) if cal else {},
        uncertainty=parse_barset_uncertainty(unc.data, unc.where) if unc else {},
        incident_stations=stations["incident"],
        transmitted_stations=stations["transmitted"],
    )
    if "calibration_file" in data:
        cal_path = Path(base_dir if base_dir is not None else Path(source).parent) / top.string("calibration_file")
        if apply_calibration:
            explicit = {(b, k): k2 in data[b] if k == "wave_speed_m_per_s" else k2 in _main_gauge_table(data[b])
                        for b in ("incident", "transmitted")
                        for k, k2 in (("wave_speed_m_per_s", "wave_speed"), ("scale", "scale"))}
            barset = apply_calibration_file(barset, cal_path, explicit)
        else:
            barset = replace(barset, calibration={**barset.calibration, "file": str(cal_path), "applied": {}})
    return barset


def apply_calibration_file(barset: BarSet, path, explicit: Optional[dict] = None) -> BarSet:
    """Apply the latest calibration of a calibration file to a bar set.

    :func:`shpb.calibration_files.latest_values` reads the file (written by
    ``shpb calibrate``, format in ``docs/calibration.md``) and gives, for
    each quantity — each bar's wave speed and each gauge's scale — the value
    of the latest entry giving it. A transmitted scale given relative to the
    incident one (bars-together shot) is multiplied by the incident scale in
    effect. A value written in the bar set itself (``wave_speed`` of a bar,
    ``scale`` of a gauge; flagged in ``explicit`` as
    ``{(bar, "wave_speed_m_per_s" | "scale"): bool}``) wins over the
    calibration, which is then noted as overridden.

    Returns
    -------
    BarSet
        With ``measured_wave_speed`` and gauge ``scale`` set, and
        ``calibration`` recording the file, its SHA-256 and, per applied
        quantity, the value with the entry's date, kind and input hashes.
    """
    from .calibration_files import latest_values
    from .io import sha256_file

    path = Path(path)
    latest = latest_values(path)
    explicit = explicit or {}
    applied, overridden = {}, {}
    bars = {"incident": barset.incident, "transmitted": barset.transmitted}
    gauges = {"incident": barset.incident_gauge, "transmitted": barset.transmitted_gauge}
    for bar_name in ("incident", "transmitted"):  # incident first: a relative transmitted scale needs it
        for quantity in ("wave_speed_m_per_s", "scale"):
            if (bar_name, quantity) not in latest:
                continue
            record = dict(latest[(bar_name, quantity)])
            if "relative_to_incident" in record:
                record["value"] = record["relative_to_incident"] * gauges["incident"].scale
                if record.get("uncertainty") is not None:
                    record["uncertainty"] *= gauges["incident"].scale
            name = f"{bar_name}.{quantity}"
            if explicit.get((bar_name, quantity)):
                used = bars[bar_name].measured_wave_speed if quantity != "scale" else gauges[bar_name].scale
                overridden[name] = {**record, "used": used, "reason": "the bar set gives this value explicitly"}
                continue
            if quantity == "scale":
                gauges[bar_name] = replace(gauges[bar_name], scale=record["value"])
            else:
                bars[bar_name] = replace(bars[bar_name], measured_wave_speed=record["value"])
            applied[name] = record
    info = {**barset.calibration, "file": str(path), "file_sha256": sha256_file(path), "applied": applied}
    if overridden:
        info["overridden"] = overridden
    return replace(barset, incident=bars["incident"], transmitted=bars["transmitted"],
                   incident_gauge=gauges["incident"], transmitted_gauge=gauges["transmitted"], calibration=info)


def load_barset(path, apply_calibration: bool = True) -> BarSet:
    """Load a bar set TOML file (see ``docs/setup-files.md``), with its calibration file applied if it names one."""
    path = Path(path)
    return barset_from_dict(read_toml(path), str(path), path.parent, apply_calibration)


def analysis_from_dict(data: dict, where: str, base: AnalysisOptions = AnalysisOptions()) -> AnalysisOptions:
    """Analysis options from a mapping (keys of :data:`shpb.schema.ANALYSIS_KEYS`), on top of ``base``."""
    values = schema.parse_table(data, schema.ANALYSIS_KEYS, where, base=asdict(base))
    return AnalysisOptions(**values)


def _channel(value, common_file, base_dir: Path, where: str) -> Channel:
    if isinstance(value, dict):
        t = _Table(value, where)
        t.check_keys({"file", "column"})
        file = t.string("file")
        if "column" not in value:
            raise InputError("missing key 'column' (a column name or 0-based index)", where)
        return Channel(file=(base_dir / file), column=value["column"])
    if isinstance(value, (str, int)) and not isinstance(value, bool):
        if common_file is None:
            raise InputError("a column is named but there is no [record] file (give file = ... or {file, column})", where)
        return Channel(file=(base_dir / common_file), column=value)
    raise InputError(f"expected a column name, an index or {{file, column}}, got {value!r}", where)


def record_from_dict(data: dict, base_dir: Path, where: str) -> RecordSpec:
    """A :class:`RecordSpec` from the ``[record]`` mapping; paths relative to ``base_dir``."""
    t = _Table(data, where)
    t.check_keys({"file", "incident", "transmitted", "time", "time_unit", "sample_interval", "max_samples",
                  "incident_stations", "transmitted_stations"})
    common = data.get("file")
    for key in ("incident", "transmitted"):
        if key not in data:
            raise InputError(f"missing key {key!r} (the {key} channel's column)", where)
    time = data.get("time")
    dt = t.quantity("sample_interval", "time", required=False)
    if time is None and dt is None:
        raise InputError("give either 'time' (a time column) or 'sample_interval'", where)
    unit = data.get("time_unit", "s")
    time_unit = to_si(f"1 {unit}" if isinstance(unit, str) else unit, "time", f"{where}.time_unit")
    if not 0 < time_unit < math.inf:
        raise InputError(f"expected a positive time unit (s, ms, us, ns), got {unit!r}", f"{where}.time_unit")
    if dt is not None and not 0 < dt < math.inf:
        raise InputError(f"expected a positive sample interval, got {data.get('sample_interval')!r}",
                         f"{where}.sample_interval")
    max_samples = data.get("max_samples")
    if max_samples is not None and (isinstance(max_samples, bool) or not isinstance(max_samples, int)
                                    or max_samples < 16):
        raise InputError(f"expected a whole number of samples (at least 16), got {max_samples!r}",
                         f"{where}.max_samples")
    stations = {}
    for key in ("incident_stations", "transmitted_stations"):
        value = data.get(key, [])
        if not isinstance(value, list):
            raise InputError(f"expected a list of channels (one per further station of the bar set), got {value!r}",
                             f"{where}.{key}")
        stations[key] = tuple(_channel(v, common, base_dir, f"{where}.{key}[{i + 1}]") for i, v in enumerate(value))
    return RecordSpec(
        incident=_channel(data["incident"], common, base_dir, f"{where}.incident"),
        transmitted=_channel(data["transmitted"], common, base_dir, f"{where}.transmitted"),
        time=time,
        time_unit=time_unit,
        sample_interval=dt,
        max_samples=max_samples,
        **stations,
    )


def specimen_from_dict(data: dict, where: str) -> Specimen:
    """A :class:`Specimen` from the ``[specimen]`` mapping (keys of :data:`shpb.schema.SPECIMEN_KEYS`)."""
    values = schema.parse_table(data, schema.SPECIMEN_KEYS, where)
    for name in ("length", "diameter"):
        if values[name] is None:
            raise InputError(f"missing key {name!r} (a length, e.g. with its unit)", where)
    length, diameter = values["length"], values["diameter"]
    if values["poisson_ratio"] is not None and values["poisson_ratio"] > 0.5:
        raise InputError(f"expected a Poisson ratio of at most 0.5, got {values['poisson_ratio']:g}",
                         f"{where}.poisson_ratio")
    if length > 0.2 or diameter > 0.2:
        raise InputError(f"specimen of {length*1e3:g} mm x {diameter*1e3:g} mm is implausible (units?)", where)
    values["material"] = str(values["material"])
    return Specimen(**values)


def shot_from_dict(data: dict, base_dir: Path, source: str, barset: Optional[BarSet] = None,
                   analysis_base: AnalysisOptions = AnalysisOptions()) -> Shot:
    """Build a :class:`Shot` from a parsed mapping.

    Parameters
    ----------
    data : dict
        Keys ``name``, ``barset`` (path), ``[specimen]``, ``[striker]``, ``[record]``, ``[analysis]``.
    base_dir : Path
        Folder that relative paths are taken from.
    source : str
        Name of the file (or row) in error messages.
    barset : BarSet, optional
        Used when ``data`` names no bar set.
    """
    top = _Table(data, f"{source}:")
    top.check_keys({"name", "barset", "specimen", "striker", "record", "analysis"})
    if "barset" in data:
        name = top.string("barset")
        if not name.strip():
            raise InputError("expected the path of a bar set file, got an empty string", f"{source}: barset")
        barset = load_barset(base_dir / name)
    elif barset is None:
        raise InputError("missing key 'barset' (path of the bar set file)", source)
    specimen = specimen_from_dict(top.table("specimen").data, f"{source}: specimen")
    record = record_from_dict(top.table("record").data, base_dir, f"{source}: record")
    at = top.table("analysis", required=False)
    analysis = analysis_from_dict(at.data, f"{source}: analysis", analysis_base) if at else analysis_base
    st = top.table("striker", required=False)
    speed = schema.parse_table(st.data, schema.STRIKER_KEYS, f"{source}: striker")["speed"] if st else None
    if specimen.diameter > barset.incident.diameter:
        raise InputError(
            f"specimen diameter {specimen.diameter*1e3:g} mm exceeds the bar diameter "
            f"{barset.incident.diameter*1e3:g} mm", f"{source}: specimen.diameter")
    for bar in ("incident", "transmitted"):
        mapped, present = len(getattr(record, f"{bar}_stations")), len(getattr(barset, f"{bar}_stations"))
        if mapped > present:
            raise InputError(f"{mapped} further {bar} channels, but the bar set has {present} further station(s) "
                             f"on the {bar} bar", f"{source}: record.{bar}_stations")
    return Shot(name=str(data.get("name", Path(source).stem)), barset=barset, specimen=specimen,
                record=record, analysis=analysis, source=source, striker_speed=speed)


def load_shot(path) -> Shot:
    """Load a shot TOML file (see ``docs/setup-files.md``)."""
    path = Path(path)
    return shot_from_dict(read_toml(path), path.parent, str(path))


def with_analysis(shot: Shot, **changes: Any) -> Shot:
    """A copy of ``shot`` with some analysis options changed."""
    return replace(shot, analysis=replace(shot.analysis, **changes))
