"""Wheatstone-bridge conversion against the textbook bridge equations.

Source: J. W. Dally and W. F. Riley, Experimental Stress Analysis, 3rd ed.
(1991), ch. 7 (Wheatstone bridge, exact output of equal-arm bridges; shunt
calibration). The inputs (GF = 2, Vr = 1 mV/V, nu = 0.3) are round numbers; each
expected strain is computed from the bridge's equation written beside it.
"""

import numpy as np
import pytest

from shpb import bridge

GF, VR, NU = 2.0, 1e-3, 0.3


def _quarter_bridge_ratio(strain, gf):
    # Independent derivation: arms R1 = R(1 + GF eps) (active), R2 = R3 = R4 = R.
    # Vout/Vexc = R1/(R1 + R2) - R4/(R3 + R4)   (Dally & Riley 1991, ch. 7)
    r1 = 1 + gf * strain
    return r1 / (r1 + 1) - 0.5


@pytest.mark.parametrize("kind, expected_microstrain", [
    ("quarter", 2004.008),        # 4Vr/[GF(1-2Vr)]
    ("half-poisson", 1540.120),   # 4Vr/{GF[(1+nu)-2Vr(1-nu)]}
    ("half-bending", 1001.001),   # 2Vr/[GF(1-Vr)]
    ("full-poisson", 769.645),    # 2Vr/{GF[(1+nu)-Vr(1-nu)]}
])
def test_strain_from_ratio_textbook_values(kind, expected_microstrain):
    eps = bridge.strain_from_ratio(VR, kind, GF, NU)
    assert eps * 1e6 == pytest.approx(expected_microstrain, abs=5e-4)


def test_quarter_bridge_matches_resistor_algebra():
    strains = np.array([-3e-3, -1e-3, 5e-4, 2e-3])
    ratios = np.array([_quarter_bridge_ratio(e, 2.1) for e in strains])
    np.testing.assert_allclose(bridge.strain_from_ratio(ratios, "quarter", 2.1), strains, rtol=1e-12)


def test_half_bending_cancels_bending_and_doubles_axial():
    # Two axial gauges on opposite faces in opposite arms 1 and 3: bending
    # strain +b on one and -b on the other cancels (Dally & Riley 1991, ch. 7).
    axial, bend, gf = 8e-4, 3e-4, 2.1
    r1, r3 = 1 + gf * (axial + bend), 1 + gf * (axial - bend)
    vr = r1 / (r1 + 1) - 1 / (r3 + 1)   # arms 1 (active), 2 (R), 3 (active), 4 (R)
    with_bending = bridge.strain_from_ratio(vr, "half-bending", gf)
    # the exact formula assumes no bending; with bending the error is second order
    assert with_bending == pytest.approx(axial, rel=5e-4)


@pytest.mark.parametrize("kind", bridge.BRIDGES)
def test_inverse_is_exact(kind):
    eps = np.linspace(-4e-3, 4e-3, 17)
    back = bridge.strain_from_ratio(bridge.ratio_from_strain(eps, kind, 2.1, 0.29), kind, 2.1, 0.29)
    np.testing.assert_allclose(back, eps, rtol=1e-12, atol=1e-18)


def test_bar_strain_sign_gain_and_polarity():
    # common practice: compression is positive in the package; an inverting
    # channel (polarity -1) shows a compressive pulse as a negative voltage.
    volts = -np.array([0.0, 0.5, 1.0])
    kw = dict(bridge="half-bending", gauge_factor=2.0, excitation=10.0, gain=100.0)
    eps = bridge.bar_strain(volts, polarity=-1, **kw)
    # Vr = 1 V / (100 * 10 V) = 1 mV/V -> 1001.001 microstrain, compressive
    assert eps[2] * 1e6 == pytest.approx(2e-3 / (2.0 * (1 + 1e-3)) * 1e6, rel=1e-9)
    assert np.all(eps >= 0)


@pytest.mark.parametrize("rg, rs", [(350.0, 174650.0), (120.0, 59880.0)])
def test_shunt_calibration_equivalent_strain(rg, rs):
    # eps = -Rg / [GF (Rg + Rs)]; 350 ohm with 174.65 kohm, 120 ohm with 59.88 kohm give
    # -1000 microstrain at GF 2 (Dally & Riley 1991, ch. 7; values from memory: high)
    assert bridge.shunt_strain(rg, rs, 2.0) * 1e6 == pytest.approx(-1000.0, rel=2e-3)


def test_unknown_bridge():
    with pytest.raises(ValueError, match="unknown bridge"):
        bridge.strain_from_ratio(1e-3, "third", 2.0)
