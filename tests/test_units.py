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
