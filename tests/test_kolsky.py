"""The Kolsky equations on a hand-worked example.

Sources: H. Kolsky (1949), Proc. Phys. Soc. B 62:676; G. T. Gray III (2000),
"Classic split-Hopkinson pressure bar testing", ASM Handbook Vol. 8; W. Chen
and B. Song (2011), Split Hopkinson (Kolsky) Bar, ch. 1. The inputs are round
numbers (a generic steel bar, E 200 GPa, rho 7850 kg/m^3, 20 mm; a 10 mm x 5 mm
specimen; strains 7e-4, -5e-4, 2e-4); each expected value is computed by hand
below from those equations.
"""

import math

import numpy as np
import pytest

from shpb import kolsky

E, RHO = 200e9, 7850.0
BAR_D, SPEC_D, SPEC_L = 0.020, 0.010, 0.005
EI, ER, ET = 7e-4, -5e-4, 2e-4
AB, AS = math.pi * BAR_D**2 / 4, math.pi * SPEC_D**2 / 4


@pytest.fixture
def c0():
    # c0 = sqrt(E/rho) = sqrt(200e9/7850) = 5047.54 m/s (Kolsky 1949; Graff 1975 eq. 2.1.5)
    return math.sqrt(E / RHO)


def test_bar_wave_speed(c0):
    assert c0 == pytest.approx(5047.54, abs=0.01)


def test_face_forces(c0):
    f1, f2 = kolsky.face_forces(EI, ER, ET, E, AB, E, AB)
    # F1 = E A (eps_i + eps_r) = 200e9 * 3.14159e-4 * 2e-4 = 12.566 kN; F2 = E A eps_t = same
    assert f1 / 1e3 == pytest.approx(12.566, abs=1e-3)
    assert f2 / 1e3 == pytest.approx(12.566, abs=1e-3)
    assert kolsky.equilibrium_ratio(np.array([f1]), np.array([f2]))[0] == pytest.approx(0.0, abs=1e-12)


def test_face_velocities_and_strain_rates(c0):
    v1, v2 = kolsky.face_velocities(EI, ER, ET, c0, c0)
    assert v1 == pytest.approx(6.0571, abs=1e-4)   # c0 (eps_i - eps_r) = 5047.54 * 1.2e-3
    assert v2 == pytest.approx(1.0095, abs=1e-4)   # c0 eps_t
    three = kolsky.strain_rate(v1, v2, SPEC_L)
    classic = kolsky.strain_rate_reflected(ER, c0, SPEC_L)
    assert three == pytest.approx(1009.51, abs=0.01)    # c0 (eps_i - eps_r - eps_t) / Ls
    assert classic == pytest.approx(1009.51, abs=0.01)  # -2 c0 eps_r / Ls


def test_one_two_three_wave_stress():
    f1, f2 = kolsky.face_forces(EI, ER, ET, E, AB, E, AB)
    s = kolsky.stresses(np.array([f1]), np.array([f2]), AS)
    for key in ("1-wave", "2-wave", "3-wave"):   # all 160.000 MPa in equilibrium
        assert s[key][0] / 1e6 == pytest.approx(160.000, abs=1e-3)


def test_unequal_faces_give_distinct_stresses():
    # Out of equilibrium the front (2-wave) and back (1-wave) stresses differ and the
    # three-wave stress is their mean (Gray 2000, eqs. for F1, F2 and their average).
    f1, f2 = kolsky.face_forces(8e-4, -5e-4, 2e-4, E, AB, E, AB)
    s = kolsky.stresses(f1, f2, AS)
    assert s["2-wave"] / 1e6 == pytest.approx(240.0, abs=1e-6)   # E Ab (3e-4) / As
    assert s["1-wave"] / 1e6 == pytest.approx(160.0, abs=1e-6)
    assert s["3-wave"] / 1e6 == pytest.approx(200.0, abs=1e-6)
    r = kolsky.equilibrium_ratio(np.array([f1]), np.array([f2]))[0]
    assert r == pytest.approx(2 * (3 - 2) / (3 + 2))


def test_true_values_after_100_us(c0):
    # constant rate 1009.51 /s for 100 us: e = 0.100951; eps_T = -ln(1-e) = 0.106418;
    # sigma_T = 160 MPa (1 - e) = 143.848 MPa (Chen & Song 2011, ch. 1, volume constancy)
    dt = 1e-8
    rate = np.full(10001, kolsky.strain_rate_reflected(ER, c0, SPEC_L))
    e = kolsky.integrate(rate, dt)
    assert e[-1] == pytest.approx(0.100951, abs=2e-6)
    et, st = kolsky.true_stress_strain(e[-1], 160e6)
    assert et == pytest.approx(0.106418, abs=2e-6)
    assert st / 1e6 == pytest.approx(143.848, abs=2e-3)


def test_integrate_is_trapezoidal():
    # integral of t from 0 to 1 is 1/2 exactly for the trapezoid rule on a linear function
    t = np.linspace(0, 1, 11)
    assert kolsky.integrate(t, 0.1)[-1] == pytest.approx(0.5, abs=1e-15)
