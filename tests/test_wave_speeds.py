"""Extensional (bar) versus longitudinal (bulk) wave speed, and bar transit times.

Formulas: c0 = sqrt(E/rho); cL = sqrt(E (1-nu) / ((1+nu)(1-2nu) rho))
(Kolsky 1953, Stress Waves in Solids, ch. 1 and 3; Graff 1975, Wave Motion in
Elastic Solids, eqs. 2.1.5 and 5.1.12).
"""

import math

import pytest

from shpb.setup import Bar, Material

# AISI 4340, quenched and tempered: E 205 GPa, rho 7850 kg/m^3, nu 0.29, yield 834 MPa (ASM data sheet for AISI 4340)
STEEL_4340 = Material("AISI 4340", 205e9, 7850.0, 0.29, 834e6)


def longitudinal_speed(m):
    return math.sqrt(m.modulus * (1 - m.poisson_ratio) / ((1 + m.poisson_ratio) * (1 - 2 * m.poisson_ratio)
                                                          * m.density))


def test_extensional_speed_of_steel_is_5000_to_5200():
    # common practice: steel bars carry extensional waves at about 5,000-5,200 m/s
    assert 5000 <= STEEL_4340.bar_wave_speed <= 5200
    # computed from c0 = sqrt(E/rho) (Kolsky 1953, ch. 1): sqrt(205e9 / 7850) = 5110.3 m/s
    assert STEEL_4340.bar_wave_speed == pytest.approx(5110, abs=1)


def test_longitudinal_speed_is_about_20_percent_higher():
    cl = longitudinal_speed(STEEL_4340)
    # common practice: bulk longitudinal speed of steel ~5,900-6,000 m/s
    assert 5800 <= cl <= 6000
    # cL/c0 = sqrt((1-nu)/((1+nu)(1-2nu))) = 1.14475 at nu = 0.29 (computed from the formulas above)
    assert cl / STEEL_4340.bar_wave_speed == pytest.approx(1.14475, abs=1e-5)


def test_transit_time_of_a_0_91_m_bar():
    # common practice: a 0.91 m (3 ft) steel bar has a one-way transit time of about 180 us
    bar = Bar(STEEL_4340, diameter=0.01905, length=0.91)
    assert bar.length / bar.wave_speed * 1e6 == pytest.approx(180, abs=3)


def test_measured_speed_overrides():
    bar = Bar(STEEL_4340, diameter=0.01905, length=1.0, measured_wave_speed=5050.0)
    assert bar.wave_speed == 5050.0
