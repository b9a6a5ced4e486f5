"""Unit parsing at the edges.

Source: NIST Special Publication 811 (2008), Guide for the Use of the SI,
Appendix B (exact inch, psi); the degree Celsius offset 273.15 K (SI Brochure,
BIPM 2019).
"""

import pytest

from shpb.errors import InputError
from shpb.units import to_si


@pytest.mark.parametrize("text, dim, expected", [
    ("19.05 mm", "length", 0.01905),          # 3/4 in bar: 0.75 * 25.4 mm (exact inch, NIST SP 811)
    ("0.75 in", "length", 0.01905),
    ("200 GPa", "pressure", 200e9),
    ("29.0 Msi", "pressure", 29.0e6 * 6894.757293168),   # psi in Pa, NIST SP 811 Appendix B
    ("7.85 g/cm^3", "density", 7850.0),
    ("0.1 us", "time", 1e-7),
    ("10 MHz", "frequency", 1e7),
    ("20 degC", "temperature", 293.15),
    ("1000 microstrain", "dimensionless", 1e-3),
    ("5 %", "dimensionless", 0.05),
])
def test_quantities_with_units(text, dim, expected):
    assert to_si(text, dim) == pytest.approx(expected, rel=1e-12)


def test_bare_number_is_si():
    assert to_si(0.005, "length") == 0.005


@pytest.mark.parametrize("text, dim, fragment", [
    ("19.05 GPa", "length", "is not a length"),
    ("nineteen mm", "length", "cannot read"),
    ("", "length", "empty"),
    (float("nan"), "length", "finite"),
    (True, "length", "expected a length"),
])
def test_bad_quantities_name_the_place(text, dim, fragment):
    with pytest.raises(InputError) as exc:
        to_si(text, dim, where="bars.toml: incident.diameter")
    assert "bars.toml: incident.diameter" in str(exc.value)
    assert fragment in str(exc.value)


# --------------------------------------------------------------------------- the common forms, read without pint
# Reference: pint itself (the library shpb used for every string before; its registry as shpb configures
# it). The common "number unit" forms are read from a table of pint's own factors: the result must be the
# very float pint gives, sign of zero included.
import math  # noqa: E402

from hypothesis import given, settings, strategies as st  # noqa: E402

from shpb import units  # noqa: E402

MAGNITUDES = ["0", "-0", "-0.0", "5", "+5", "-19.05", ".5", "5.", "1E-7", "2.5e+2", "1.0000000000000002",
              "3.3333333333333335", "6.02214076e23"]
UNIT_CASES = [(u, d) for u, dims in units.COMMON_UNITS.items() for d in dims]
UNIT_CASES += [(u, d) for u, (d, _) in units.COMMON_OFFSET_UNITS.items()]


def pint_reads(text, dimension):
    """What pint gives for ``text`` (the reference): the SI float."""
    ureg = units._registry()
    q = ureg.Quantity(text.strip().replace("µ", "u").replace("^", "**"))
    if not isinstance(q, ureg.Quantity):
        return float(q)
    if str(q.units) == "dimensionless":
        return float(q.magnitude)
    si = units.DIMENSIONS[dimension]
    return float(q.to(si or "dimensionless").magnitude)


def same_float(a, b):
    return a == b and math.copysign(1.0, a) == math.copysign(1.0, b)


def assert_as_pint(text, dimension):
    """to_si gives pint's float, sign of zero included, or an InputError where pint gives no finite number."""
    try:
        ref = pint_reads(text, dimension)
    except Exception:  # pint cannot read it
        ref = None
    if ref is None or not math.isfinite(ref):
        with pytest.raises(InputError):
            to_si(text, dimension)
    else:
        got = to_si(text, dimension)
        assert same_float(got, ref), (text, got, ref)


@pytest.mark.parametrize("unit, dimension", UNIT_CASES, ids=[f"{u}-{d}" for u, d in UNIT_CASES])
def test_common_units_give_what_pint_gives(unit, dimension):
    for mag in MAGNITUDES:
        glued = [] if unit[0] in "0123456789jJ" else [f"{mag}{unit}"]  # "5mm"; not "51/s" or "5J" (imaginary)
        for text in [f"{mag} {unit}", f"  {mag}   {unit} ", *glued]:
            assert units._read_common(text.strip(), dimension) is not None, text  # the fast path is taken
            assert_as_pint(text, dimension)


@pytest.mark.parametrize("text, dimension", [
    ("7.85 g/cm^3", "density"), ("5 µm", "length"), ("0.1 µs", "time"), ("2800 kg/m^3", "density"),
    ("12.5", "length"), ("-0", "length"), ("1e-3", "dimensionless"),
    # not common: pint reads these (and they must come out the same as before)
    ("05 mm", "length"), ("3 furlong", "length"), ("20 degF", "temperature"), ("1 kg / m**3", "density"),
    ("2 * 3 mm", "length"), ("1_000 mm", "length"), ("68 degF", "temperature"), ("1.5 mm/us", "velocity"),
    ("5J/(kg*K)", "specific_heat"), ("2e3 J/kg/K", "specific_heat"), ("0x10 mm", "length"), ("inf mm", "length"),
])
def test_other_spellings_give_what_pint_gives(text, dimension):
    assert_as_pint(text, dimension)


@settings(max_examples=150, deadline=None)
@given(x=st.floats(allow_nan=False, allow_infinity=False, min_value=-1e300, max_value=1e300),
       case=st.sampled_from(UNIT_CASES))
def test_any_float_in_a_common_unit_gives_what_pint_gives(x, case):
    unit, dimension = case
    assert_as_pint(f"{x!r} {unit}", dimension)  # 1e300 Msi overflows: an error both ways


def test_wrong_dimension_in_a_common_unit_is_still_an_error():
    with pytest.raises(InputError, match="is not a length"):
        to_si("5 MPa", "length", where="bars.toml: incident.diameter")
