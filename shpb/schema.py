"""The one description of a shot's keys: specimen, record and analysis.

Each key is declared once, here, with its kind (a physical dimension of
:mod:`shpb.units`, a switch, a choice or free text), its default and a one-line
meaning. From this table

* :mod:`shpb.setup` reads the ``[specimen]``, ``[record]`` and ``[analysis]``
  tables of a shot file;
* :mod:`shpb.campaign` knows which columns of a shots table are setup keys (any
  other column is a free tag);
* the command line turns ``--set key=value`` overrides into analysis options;
* a test checks that ``docs/setup-files.md`` lists every key.

A new analysis option is one :class:`Key` line here plus the field of
:class:`shpb.setup.AnalysisOptions` that it fills.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Optional

from .errors import InputError
from .units import to_si

#: Stress definitions that may be reported as ``stress_MPa``.
STRESS_CHOICES = ("1-wave", "2-wave", "3-wave")
#: When two-point wave separation builds the face waves (``shpb.separation``).
SEPARATION_CHOICES = ("auto", "on", "off")

_TRUE = {"true", "yes", "on", "1"}
_FALSE = {"false", "no", "off", "0"}


@dataclass(frozen=True)
class Key:
    """One key of a shot's setup.

    Attributes
    ----------
    section : str
        ``specimen``, ``striker``, ``record`` or ``analysis``: the TOML table it lives in.
    name : str
        The key in that table (and the dataclass field it fills).
    kind : str
        A dimension of :data:`shpb.units.DIMENSIONS` (``length``, ``time``,
        ...), or ``switch`` (true/false), ``count`` (a whole number >=
        ``minimum``), ``choice`` or ``text``.
    default : Any
        SI value when the key is absent (None: no value).
    meaning : str
        One line for documents and error messages, with the unit.
    column : str
        Its column name in a campaign's shots table.
    choices : tuple of str
        Allowed values of a ``choice``.
    signed : bool
        A quantity that may be zero or negative (time offsets).
    fraction : bool
        A quantity that must lie strictly between 0 and 1.
    minimum : int
        The smallest value of a ``count``.
    """

    section: str
    name: str
    kind: str
    default: Any
    meaning: str
    column: str = ""
    choices: tuple = ()
    signed: bool = False
    fraction: bool = False
    minimum: int = 1

    @property
    def column_name(self) -> str:
        """Campaign column of this key."""
        return self.column or self.name

    def parse(self, value, where: str):
        """A file or table value -> the SI value of this key (InputError naming ``where``)."""
        if self.kind == "switch":
            if isinstance(value, str) and value.strip().lower() in _TRUE | _FALSE:
                return value.strip().lower() in _TRUE
            if not isinstance(value, bool):
                raise InputError(f"expected true or false, got {value!r}", where)
            return value
        if self.kind == "count":
            text = value.strip() if isinstance(value, str) else value
            if isinstance(text, str) and text.isdigit():
                text = int(text)
            if isinstance(text, bool) or not isinstance(text, int) or text < self.minimum:
                raise InputError(f"expected a whole number >= {self.minimum}, got {value!r}", where)
            return text
        if self.kind in ("choice", "text"):
            if not isinstance(value, str):
                raise InputError(f"expected text, got {value!r}", where)
            if self.choices and value not in self.choices:
                raise InputError(f"expected one of {', '.join(self.choices)}; got {value!r}", where)
            return value
        out = to_si(value, self.kind, where)
        if self.fraction and not 0 < out < 1:
            raise InputError(f"expected a fraction between 0 and 1, got {value!r}", where)
        if not self.signed and not self.fraction and not out > 0:
            raise InputError(f"expected a positive {self.kind}, got {value!r}", where)
        return out


def _k(section, name, kind, default, meaning, **kw) -> Key:
    return Key(section, name, kind, default, meaning, **kw)


#: Keys of a shot file's ``[specimen]`` table.
SPECIMEN_KEYS = (
    _k("specimen", "length", "length", None, "initial length along the bar axis [m]", column="specimen_length"),
    _k("specimen", "diameter", "length", None, "initial diameter [m]", column="specimen_diameter"),
    _k("specimen", "material", "text", "", "free text naming the material"),
    _k("specimen", "temperature", "temperature", None, "test temperature [K]"),
    _k("specimen", "modulus", "pressure", None, "elastic modulus for the yield offset line [Pa]",
       column="specimen_modulus"),
    _k("specimen", "density", "density", None, "density [kg/m^3]; with the modulus, the wave transit time",
       column="specimen_density"),
    _k("specimen", "length_uncertainty", "length", None,
       "standard uncertainty of the length [m] (the instrument's; default 0.01 mm)",
       column="specimen_length_uncertainty"),
    _k("specimen", "diameter_uncertainty", "length", None,
       "standard uncertainty of the diameter [m] (the instrument's; default 0.01 mm)",
       column="specimen_diameter_uncertainty"),
    _k("specimen", "poisson_ratio", "dimensionless", None,
       "Poisson ratio in the radial inertia terms [1] (default 0.5: plastic flow)", column="specimen_poisson_ratio",
       fraction=True),
)

#: Keys of ``[analysis]`` (per shot, campaign default, campaign column, command-line override).
ANALYSIS_KEYS = (
    _k("analysis", "dispersion", "switch", True, "Pochhammer-Chree correction of each wave to its face"),
    _k("analysis", "amplitude_factors", "switch", False, "radial amplitude factors in the dispersion correction"),
    _k("analysis", "stress", "choice", "1-wave", "stress reported as stress_MPa", choices=STRESS_CHOICES),
    _k("analysis", "equilibrium_threshold", "dimensionless", 0.05,
       "largest |R| counted as force equilibrium [1]", fraction=True),
    _k("analysis", "yield_offset", "dimensionless", 0.002, "strain offset of the yield line [1]"),
    _k("analysis", "incident_start", "time", None, "record time of the incident foot [s] (found when absent)",
       signed=True),
    _k("analysis", "window_length", "time", None,
       "length of the analysis window after the foot reaches the front face [s] (automatic when absent)"),
    _k("analysis", "pre_trigger", "time", None,
       "quiet record start used as baseline [s] (default: the part before the incident foot)"),
    _k("analysis", "reflected_adjust", "time", 0.0,
       "hand alignment: the reflected wave is taken this much later at its gauge [s]", signed=True),
    _k("analysis", "transmitted_adjust", "time", 0.0,
       "hand alignment: the transmitted wave is taken this much later at its gauge [s]", signed=True),
    _k("analysis", "separation", "choice", "auto", "two-point wave separation: auto (when the waves overlap at "
       "the incident gauge and the bar has a second station), on, off", choices=SEPARATION_CHOICES),
    _k("analysis", "separation_cutoff", "frequency", None,
       "upper end of the separation's frequency band [Hz] (default: the bar's second-mode onset)"),
    _k("analysis", "friction_coefficient", "dimensionless", None,
       "interface friction coefficient mu for the friction band of the stress [1] (none when absent)",
       fraction=True),
    _k("analysis", "lowpass", "switch", True,
       "zero-phase low-pass of every channel (off: the records as read, baselines and glitches only)"),
    _k("analysis", "lowpass_cutoff", "frequency", None,
       "cutoff of the low-pass [Hz] (automatic when absent: above the incident rise, below the second-mode onset)"),
    _k("analysis", "hum_frequency", "frequency", None,
       "mains frequency [Hz] fitted with the baselines, with its first harmonics (none when absent)"),
    _k("analysis", "uncertainty", "switch", None,
       "propagate the inputs' uncertainties to every curve row and scalar (GUM and Monte Carlo); when absent, on in "
       "shpb reduce (about 1.5x the process), off in shpb batch, shpb watch and reduce_shot (a warm process pays "
       "about 25x per shot)"),
    _k("analysis", "uncertainty_draws", "count", 100, "Monte Carlo draws of the uncertainty propagation (>= 10)",
       minimum=10),
)

#: Keys of a shot file's ``[striker]`` table: what changes from shot to shot (the striker's length, diameter
#: and material stay in the bar set's ``[striker]``).
STRIKER_KEYS = (
    _k("striker", "speed", "velocity", None,
       "impact speed of the striker [m/s]; the incident pulse is checked against it", column="striker_speed"),
)

#: Record keys that a campaign row may set (the channel mapping comes from the campaign's ``[record]``).
RECORD_COLUMN_KEYS = (
    _k("record", "sample_interval", "time", None, "sample interval of a record without a time column [s]"),
)

#: Keys of earlier versions -> their present name (a file using the old name gets an error saying so).
RENAMED = {"window": "window_length"}

#: Every key a campaign column may set, by column name.
COLUMNS = {k.column_name: k for k in SPECIMEN_KEYS + STRIKER_KEYS + ANALYSIS_KEYS + RECORD_COLUMN_KEYS}


def section_keys(section: str) -> tuple:
    """The keys of one section."""
    return {"specimen": SPECIMEN_KEYS, "striker": STRIKER_KEYS, "analysis": ANALYSIS_KEYS,
            "record": RECORD_COLUMN_KEYS}[section]


def find_key(section: str, name: str) -> Optional[Key]:
    """The key ``name`` of ``section``, or None."""
    return next((k for k in section_keys(section) if k.name == name), None)


def check_names(data: dict, keys, where: str, extra=()) -> None:
    """Refuse a key that is neither in ``keys`` nor in ``extra``, naming the allowed ones."""
    allowed = {k.name for k in keys} | set(extra)
    for name in data:
        if name in RENAMED and RENAMED[name] in allowed:
            raise InputError(f"the key {name!r} is now called {RENAMED[name]!r}", where)
        if name not in allowed:
            raise InputError(f"unknown key {name!r} (expected one of: {', '.join(sorted(allowed))})", where)


def parse_table(data: dict, keys, where: str, base: Optional[dict] = None) -> dict:
    """Parse a TOML table against ``keys``: ``{name: SI value}`` for every key, defaults filled.

    Parameters
    ----------
    data : dict
        The table as read (values may carry units as strings).
    keys : sequence of Key
    where : str
        File and table for messages (``"shot.toml: analysis"``).
    base : dict, optional
        Values to use for absent keys instead of the keys' defaults.
    """
    check_names(data, keys, where)
    out = {}
    for k in keys:
        if k.name in data:
            out[k.name] = k.parse(data[k.name], f"{where}.{k.name}")
        else:
            out[k.name] = (base or {}).get(k.name, k.default)
    return out


def parse_assignment(text: str, where: str = "--set"):
    """``"name=value"`` of a command-line override -> (Key, SI value); the key must be an analysis key."""
    if "=" not in text:
        raise InputError(f"expected KEY=VALUE, got {text!r}", where)
    name, value = (s.strip() for s in text.split("=", 1))
    key = find_key("analysis", name)
    if key is None:
        raise InputError(f"unknown analysis key {name!r} (expected one of: "
                         f"{', '.join(k.name for k in ANALYSIS_KEYS)})", where)
    return key, key.parse(value, f"{where} {name}")
