"""Quantities with units at the edges: ``"19.05 mm"`` -> 0.01905 (SI float).

Bare numbers are taken as SI. Physics modules never see a unit string.

pint reads the units. Building its registry costs about half a second per
process (a third of it pint's optional dask support), so the common
``"number unit"`` forms (:data:`COMMON_UNITS`) are read without it, with the
factor pint itself uses: the result is the same float pint gives (checked for
every entry in ``tests/test_units.py``). Anything else goes to pint.
"""

from __future__ import annotations

import functools
import math
import re
import sys
import threading

from .errors import InputError

#: Dimension names accepted by :func:`to_si`, with the SI unit they return.
DIMENSIONS = {
    "length": "m",
    "area": "m**2",
    "pressure": "Pa",
    "density": "kg/m**3",
    "time": "s",
    "frequency": "Hz",
    "velocity": "m/s",
    "voltage": "V",
    "resistance": "ohm",
    "temperature": "K",
    "strain_rate": "1/s",
    "specific_heat": "J/(kg*K)",
    "dimensionless": "",
    "mass": "kg",
}


#: Unit spellings read without pint: spelling -> {dimension: SI factor}, the factor being the one pint
#: converts with (``float(Quantity(1, unit).to(si_unit).magnitude)``), so that ``value * factor`` is
#: the float pint gives. Spellings as :func:`to_si` sees them: ``µ`` already ``u``, ``^`` already ``**``.
COMMON_UNITS = {
    "m": {"length": 1.0}, "cm": {"length": 0.01}, "mm": {"length": 0.001}, "um": {"length": 1e-06},
    "nm": {"length": 1e-09}, "km": {"length": 1000.0}, "in": {"length": 0.0254}, "inch": {"length": 0.0254},
    "ft": {"length": 0.30479999999999996},
    "m**2": {"area": 1.0}, "cm**2": {"area": 0.0001}, "mm**2": {"area": 1e-06}, "in**2": {"area": 0.00064516},
    "Pa": {"pressure": 1.0}, "kPa": {"pressure": 1000.0}, "MPa": {"pressure": 1000000.0},
    "GPa": {"pressure": 1000000000.0}, "bar": {"pressure": 100000.0}, "psi": {"pressure": 6894.7572931683635},
    "ksi": {"pressure": 6894757.293168363}, "Msi": {"pressure": 6894757293.168363},
    "kg/m**3": {"density": 1.0}, "g/cm**3": {"density": 999.9999999999999},
    "kg/cm**3": {"density": 999999.9999999999}, "g/mm**3": {"density": 999999.9999999999},
    "lb/in**3": {"density": 27679.90471020313},
    "s": {"time": 1.0}, "ms": {"time": 0.001}, "us": {"time": 1e-06}, "ns": {"time": 1e-09}, "ps": {"time": 1e-12},
    "Hz": {"frequency": 1.0, "strain_rate": 1.0}, "kHz": {"frequency": 1000.0}, "MHz": {"frequency": 1000000.0},
    "GHz": {"frequency": 1000000000.0}, "1/s": {"frequency": 1.0, "strain_rate": 1.0},
    "/s": {"strain_rate": 1.0}, "1/ms": {"strain_rate": 1000.0}, "1/us": {"strain_rate": 1000000.0},
    "m/s": {"velocity": 1.0}, "mm/s": {"velocity": 0.001}, "km/s": {"velocity": 1000.0},
    "mm/us": {"velocity": 1000.0}, "mm/ms": {"velocity": 1.0}, "m/ms": {"velocity": 1000.0},
    "ft/s": {"velocity": 0.30479999999999996}, "in/s": {"velocity": 0.0254},
    "V": {"voltage": 1.0}, "mV": {"voltage": 0.001}, "uV": {"voltage": 1e-06}, "kV": {"voltage": 1000.0},
    "ohm": {"resistance": 1.0}, "kohm": {"resistance": 1000.0}, "Mohm": {"resistance": 1000000.0},
    "mohm": {"resistance": 0.001}, "Ω": {"resistance": 1.0}, "kΩ": {"resistance": 1000.0},
    "MΩ": {"resistance": 1000000.0},
    "K": {"temperature": 1.0},
    "J/(kg*K)": {"specific_heat": 1.0}, "J/kg/K": {"specific_heat": 1.0}, "J/(g*K)": {"specific_heat": 1000.0},
    "kJ/(kg*K)": {"specific_heat": 1000.0},
    "ue": {"dimensionless": 1e-06}, "microstrain": {"dimensionless": 1e-06}, "%": {"dimensionless": 0.01},
    "percent": {"dimensionless": 0.01}, "strain": {"dimensionless": 1.0},
    "kg": {"mass": 1.0}, "g": {"mass": 0.001}, "mg": {"mass": 1e-06}, "lb": {"mass": 0.4535923700000001},
}
#: Offset units read without pint: spelling -> (dimension, offset): SI value = value + offset, as pint
#: converts them (its offset converter: value × 1 + offset).
COMMON_OFFSET_UNITS = {"degC": ("temperature", 273.15)}

# A decimal number as pint reads it (Python's number tokens; no leading zero before a digit, which pint
# does not read as one number), then an optional unit without spaces. A unit glued to the number and
# starting with j or J is left to pint, whose tokenizer reads "5J" as an imaginary number.
_NUMBER_UNIT = re.compile(r"([+-]?)((?:0|[1-9]\d*)(\.\d*)?|(\.\d+))([eE][+-]?\d+)?(\s*)(\S*)")


def _read_common(s: str, dimension: str):
    """``s`` in SI when it is a plain number or ``"number unit"`` of a common unit; else None (ask pint)."""
    m = _NUMBER_UNIT.fullmatch(s)
    if m is None:
        return None
    _, _, fraction, bare_fraction, exponent, space, unit = m.groups()
    if not space and unit[:1] in ("j", "J"):
        return None
    text = s[:m.end(5) if exponent else m.end(2)]
    # pint reads an integer token as an int, anything else as a float (-0 is then 0, not -0.0)
    value = int(text) if fraction is None and bare_fraction is None and exponent is None else float(text)
    if unit == "":
        return float(value)
    factor = COMMON_UNITS.get(unit, {}).get(dimension)
    if factor is not None:
        return float(value * factor)
    dim_offset = COMMON_OFFSET_UNITS.get(unit)
    if dim_offset is not None and dim_offset[0] == dimension:
        return float(value + dim_offset[1])
    return None


_IMPORT_LOCK = threading.Lock()


def _import_pint():
    """pint, imported without its optional dask support when dask is not loaded yet.

    pint looks dask up when imported and, if it is installed, imports it
    (about 0.15 s). shpb hands pint plain floats only, so while pint is
    imported dask is marked absent (``sys.modules["dask"] = None``, which
    makes the look-up answer "not installed"); the mark is removed at once,
    and dask imports as usual afterwards. pint's own dask-array support is
    then off in this process.
    """
    if "pint" in sys.modules or "dask" in sys.modules:
        import pint

        return pint
    with _IMPORT_LOCK:
        sys.modules["dask"] = None
        try:
            import pint
        finally:
            if sys.modules.get("dask", False) is None:
                del sys.modules["dask"]
    return pint


@functools.lru_cache(maxsize=1)
def _registry():
    pint = _import_pint()

    ureg = pint.UnitRegistry(autoconvert_offset_to_baseunit=True)
    # Strain units common on bar rigs.
    ureg.define("microstrain = 1e-6 = ue = µε = microepsilon")
    ureg.define("strain = 1")
    # Handbook moduli are often quoted in Msi (10^6 psi).
    ureg.define("Msi = 1e6 * psi")
    return ureg


def to_si(value, dimension: str, where: str = "") -> float:
    """Convert a number or a ``"value unit"`` string to an SI float.

    Parameters
    ----------
    value : float, int or str
        A bare number (taken as SI) or a string such as ``"19.05 mm"``,
        ``"200 GPa"``, ``"7.85 g/cm^3"``, ``"20 degC"``.
    dimension : str
        One of :data:`DIMENSIONS` (e.g. ``"length"``).
    where : str
        Where the value came from (``"bars.toml: incident.diameter"``); named
        in the error message.

    Returns
    -------
    float
        The value in the SI unit of ``dimension``.

    Raises
    ------
    InputError
        The string does not parse, has the wrong dimension, or is not finite.
    """
    if dimension not in DIMENSIONS:
        raise ValueError(f"unknown dimension {dimension!r}")
    si_unit = DIMENSIONS[dimension]
    if isinstance(value, bool):
        raise InputError(f"expected a {dimension} (number or 'value unit' string), got {value!r}", where)
    if isinstance(value, (int, float)):
        out = float(value)
    elif isinstance(value, str):
        out = _parse(value, dimension, si_unit, where)
    else:
        raise InputError(f"expected a {dimension} (number or 'value unit' string), got {value!r}", where)
    if not math.isfinite(out):
        raise InputError(f"expected a finite {dimension}, got {value!r}", where)
    return out


def _parse(text: str, dimension: str, si_unit: str, where: str) -> float:
    s = text.strip().replace("µ", "u").replace("^", "**")
    if not s:
        raise InputError(f"expected a {dimension}, got an empty string", where)
    common = _read_common(s, dimension)
    if common is not None:
        return common
    ureg = _registry()
    try:
        q = ureg.Quantity(s)
    except Exception:
        raise InputError(f"cannot read {text!r} as a {dimension} (e.g. '19.05 mm', '200 GPa')", where) from None
    if not isinstance(q, ureg.Quantity):  # plain number in a string
        return float(q)
    if str(q.units) == "dimensionless":  # "1e-3" with no unit: SI, like a bare number
        return float(q.magnitude)
    try:
        if si_unit == "":
            return float(q.to("dimensionless").magnitude)
        return float(q.to(si_unit).magnitude)
    except Exception:
        raise InputError(
            f"{text!r} is not a {dimension} (expected units convertible to {si_unit or 'a pure number'})", where
        ) from None
