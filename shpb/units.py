"""Quantities with units at the edges: ``"19.05 mm"`` -> 0.01905 (SI float).

Bare numbers are taken as SI. Physics modules never see a unit string.
"""

from __future__ import annotations

import functools
import math

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


@functools.lru_cache(maxsize=1)
def _registry():
    import pint

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
    ureg = _registry()
    s = text.strip().replace("µ", "u").replace("^", "**")
    if not s:
        raise InputError(f"expected a {dimension}, got an empty string", where)
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
