"""Property-based checks (hypothesis) of identities that hold for every input.

Sources: the Wheatstone-bridge algebra of Dally & Riley (1991), Experimental
Stress Analysis, ch. 7; the Kolsky relations of Gray (2000), ASM Handbook
Vol. 8, whose reduced (two-wave) form follows from the three-wave one when the
specimen is in equilibrium (eps_i + eps_r = eps_t).
"""

import math

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from shpb import bridge, kolsky
from shpb.units import to_si

strain = st.floats(-0.02, 0.02, allow_nan=False)
gauge_factor = st.floats(1.5, 4.0)
poisson = st.floats(0.1, 0.45)


@settings(max_examples=200, deadline=None)
@given(strain, gauge_factor, poisson, st.sampled_from(bridge.BRIDGES))
def test_bridge_inverse_identity(eps, gf, nu, kind):
    vr = bridge.ratio_from_strain(eps, kind, gf, nu)
    assert math.isclose(float(bridge.strain_from_ratio(vr, kind, gf, nu)), eps, rel_tol=1e-10, abs_tol=1e-15)


@settings(max_examples=200, deadline=None)
@given(strain.filter(lambda x: abs(x) > 1e-12), gauge_factor, poisson, st.sampled_from(bridge.BRIDGES))
def test_bridge_sign_follows_strain(eps, gf, nu, kind):
    # tension on gauge 1 gives a positive bridge ratio in every arrangement (Dally & Riley 1991)
    vr = float(bridge.ratio_from_strain(eps, kind, gf, nu))
    assert np.sign(vr) == np.sign(eps)


@settings(max_examples=200, deadline=None)
@given(st.floats(1e-5, 3e-3), st.floats(0.0, 1.0), st.floats(0.005, 0.05), st.floats(0.002, 0.02))
def test_equilibrium_makes_all_stresses_and_rates_agree(eps_i, frac, bar_d, spec_l):
    # In equilibrium eps_t = eps_i + eps_r: the one-, two- and three-wave stresses coincide and the
    # three-wave strain rate c0 (eps_i - eps_r - eps_t)/Ls equals the classic -2 c0 eps_r / Ls.
    E, c0 = 200e9, 5000.0
    eps_t = frac * eps_i
    eps_r = eps_t - eps_i
    area = math.pi * bar_d**2 / 4
    f1, f2 = kolsky.face_forces(eps_i, eps_r, eps_t, E, area, E, area)
    s = kolsky.stresses(f1, f2, area / 4)
    assert math.isclose(s["1-wave"], s["2-wave"], rel_tol=1e-9, abs_tol=1e-3)
    assert math.isclose(s["3-wave"], s["1-wave"], rel_tol=1e-9, abs_tol=1e-3)
    v1, v2 = kolsky.face_velocities(eps_i, eps_r, eps_t, c0, c0)
    assert math.isclose(kolsky.strain_rate(v1, v2, spec_l), kolsky.strain_rate_reflected(eps_r, c0, spec_l),
                        rel_tol=1e-9, abs_tol=1e-9)


@settings(max_examples=100, deadline=None)
@given(st.floats(1e-3, 1e3))
def test_millimetres(x):
    # 1 mm = 1e-3 m (SI definition)
    assert math.isclose(to_si(f"{x!r} mm", "length"), x * 1e-3, rel_tol=1e-12)
