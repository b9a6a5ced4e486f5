"""Specimen inertia and friction (shpb.specimen): published forms against hand-worked values and the wave model.

Outside references: Davies & Hunter (1963, J. Mech. Phys. Solids 11:155, from memory) for the inertia terms,
worked by hand below; the wave model's specimen (its mean element stress, an independent computation of the
one-dimensional momentum balance) for the correction on a virtual shot; Siebel (1923) and Dieter (1986,
Mechanical Metallurgy, ch. 19, from memory) for the friction factor and the slab analysis it comes from.
"""

import dataclasses
import math

import numpy as np
import pytest

from shpb import specimen
from shpb.reduce import reduce_shot
from shpb.setup import AnalysisOptions, Shot, Specimen, with_analysis
from shpb.simulate import IncidentPulse, JohnsonCookLaw, RodSpec

from two_station_rig import BARSET, RECORDER, record_of, virtual_shot


def test_davies_hunter_terms_by_hand():
    # Davies & Hunter (1963): sigma_s = sigma_2 + rho (L^2/6 - nu^2 D^2/8) d2e/dt2. By hand, for a 10 mm x 10 mm
    # specimen of 1200 kg/m^3 whose strain rate rises by 1e7 1/s^2 (1000 1/s in 100 us), nu = 0.5:
    #   axial  =  1200 * 0.010^2 * 1e7 / 6         = 1200 * 1e-4 * 1e7 / 6 = 2.0e5 Pa (0.2 MPa)
    #   radial = -1200 * 0.5^2 * 0.010^2 * 1e7 / 8 = -1200 * 0.25e-4 * 1e7 / 8 = -3.75e4 Pa
    axial, radial = specimen.davies_hunter_terms(1e7, 0.010, 0.010, 1200.0, 0.5)
    assert float(axial) == pytest.approx(2.0e5, rel=1e-12)
    assert float(radial) == pytest.approx(-3.75e4, rel=1e-12)
    # the two cancel at L/D = sqrt(3) nu / 2 (Davies & Hunter's optimum; 0.433 for nu = 0.5)
    a, r = specimen.davies_hunter_terms(1e7, math.sqrt(3) * 0.5 / 2 * 0.010, 0.010, 1200.0, 0.5)
    assert float(a + r) == pytest.approx(0.0, abs=1e-9)


def test_fuller_form_reduces_to_davies_hunter():
    # Gorham (1989) keeps what Davies & Hunter dropped. With the back face at rest and no strain yet it is D&H
    # exactly; at a constant engineering rate the true rate lambda = e-dot / (1 - e) still grows
    # (lambda-dot = e-dot^2 at e = 0), so the radial term (lambda-dot + nu lambda^2) leaves
    # -rho nu^2 (1 + nu) D^2 e-dot^2 / 8; by hand at 1000 1/s: -1200 * 0.25 * 1.5 * 1e-4 * 1e6 / 8 = -5625 Pa
    g = specimen.gorham_correction(0.0, 0.0, 1e7, 0.0, 0.010, 0.010, 1200.0, 0.5)
    assert float(g) == pytest.approx(2.0e5 - 3.75e4, rel=1e-12)
    g = specimen.gorham_correction(0.0, 1000.0, 0.0, 0.0, 0.010, 0.010, 1200.0, 0.5)
    assert float(g) == pytest.approx(-5625.0, rel=1e-12)
    # the front face's and the mean's forms differ from the back face's by the one-dimensional momentum balance
    # F1 - F2 = m a_mean (Newton): with a_2 = 0, a_1 = L e-ddot, the three give the same specimen stress
    L, rho, rdot = 0.010, 1200.0, 1e7
    back = specimen.gorham_correction(0.0, 0.0, rdot, 0.0, L, L, rho, 0.0, "1-wave")
    front = specimen.gorham_correction(0.0, 0.0, rdot, L * rdot, L, L, rho, 0.0, "2-wave")
    mean = specimen.gorham_correction(0.0, 0.0, rdot, 0.0, L, L, rho, 0.0, "3-wave")
    sigma_2 = 1e6
    sigma_1 = sigma_2 + rho * L * (L * rdot / 2)  # (F1 - F2) / A = rho L a_mean, a_mean = L e-ddot / 2
    assert sigma_2 + back == pytest.approx(sigma_1 + front, rel=1e-12)
    assert sigma_2 + back == pytest.approx(0.5 * (sigma_1 + sigma_2) + mean, rel=1e-12)


def test_friction_factor_against_the_slab_analysis():
    # Siebel (1923) / Dieter (1986, ch. 19): mean pressure over flow stress 1 + mu D / (3 L), the first-order form
    # of the slab analysis with sliding friction, p_av / sigma_0 = 2 (e^x - 1 - x) / x^2, x = mu D / L (Dieter).
    # Dieter's figure of the friction hill could not be consulted; these are the closed forms, read from memory.
    # For the usual Hopkinson specimen, L/D = 0.5:
    #   mu = 0.1: 1 + 0.2/3 = 1.0667 (exact slab form 1.0701);  mu = 0.3: 1 + 0.6/3 = 1.2000 (exact 1.2340)
    for mu, linear, exact in ((0.1, 1.0667, 1.0701), (0.3, 1.2000, 1.2340)):
        f = float(specimen.friction_factor(mu, 0.005, 0.010))
        assert f == pytest.approx(linear, abs=5e-5)
        x = mu * 0.010 / 0.005
        assert 2 * (math.exp(x) - 1 - x) / x ** 2 == pytest.approx(exact, abs=5e-5)
        assert abs(f - exact) / exact < 0.03  # the first-order form within 3 % of the slab analysis here
    # the specimen flattens: at 20 % strain (constant volume) D/L grows by 0.8^-1.5 = 1.3975
    f = float(specimen.friction_factor(0.1, 0.005, 0.010, 0.2))
    assert f == pytest.approx(1 + 0.2 / 3 * 0.8 ** -1.5, rel=1e-12)


@pytest.fixture(scope="module")
def soft_shot():
    """A soft, large specimen (12 mm x 12 mm, 1200 kg/m^3, flow stress 0.5 + 3 e_p^0.5 MPa, E 100 MPa: a wave
    transit of 42 us) loaded at a strain rate rising steadily from 0 to 1500 1/s over 300 us: the incident bar
    is driven by a linear ramp of strain, recorded at 5 MHz without noise."""
    law = JohnsonCookLaw(A=0.5e6, B=3e6, n=0.5, C=0.0)
    rod = RodSpec(0.012, 0.012, 100e6, 1200.0, law)
    dt, ramp, top = 2e-7, 300e-6, 1.85e-3  # 2 c0 eps_i / L = 1500 1/s at the top (Kolsky 1949)
    t = np.arange(round((ramp + 40e-6) / dt)) * dt
    strain = top * np.clip(t / ramp, 0, 1) * np.clip((ramp + 20e-6 - t) / 20e-6, 0, 1)
    pulse = IncidentPulse(dt, np.concatenate([np.zeros(100), strain]), impact_time=20e-6)
    recorder = dataclasses.replace(RECORDER, sample_rate=5e6, duration=0.8e-3)
    shot = virtual_shot(None, specimen=rod, pulse=pulse, recorder=recorder)
    record, _ = record_of(shot, recorder)
    return shot[0], record


def test_inertia_correction_on_a_soft_large_specimen(soft_shot):
    result, record = soft_shot
    # the wave model is one-dimensional: no radial flow, so the specimen's Poisson ratio is 0 in the correction
    shot = Shot("soft", BARSET, Specimen(0.012, 0.012, "soft", modulus=100e6, density=1200.0, poisson_ratio=0.0),
                None, AnalysisOptions(dispersion=False))
    reduced = reduce_shot(shot, record)
    c = reduced.curves
    truth = result.truth
    loading = truth.iloc[: int(truth.strain.to_numpy().argmax()) + 1]
    # compare while the rate rises, from three specimen transits (the strain is uniform) to one smoothing window
    # before the rate's peak
    window = reduced.summary["results"]["inertia_smoothing_us"]
    peak = c.time_us[int(np.argmax(c.strain_rate_per_s.to_numpy()))]
    part = (c.time_us > 3 * 0.012 / math.sqrt(100e6 / 1200.0) * 1e6) & (c.time_us < peak - window)
    expected = np.interp(c.strain[part], loading.strain, loading.stress_MPa)

    def rms(column):
        return np.sqrt(np.mean((c[column][part] - expected) ** 2)) / np.mean(expected)

    plain, dh, gorham = rms("stress_MPa"), rms("stress_inertia_dh_MPa"), rms("stress_inertia_gorham_MPa")
    assert plain > 0.05  # measured 10 %: the back face lags the specimen's mean stress by rho L^2 e-ddot / 6
    assert dh < 0.3 * plain and gorham < 0.3 * plain  # measured 2 %
    assert "inertia_large" in {f.code for f in reduced.flags}
    assert reduced.summary["results"]["inertia_gorham_max_fraction"] > specimen.INERTIA_LIMIT
    # the reported stress itself is untouched
    assert np.array_equal(c.stress_MPa, c.stress_1wave_MPa)


def test_friction_band_is_reported_not_applied(soft_shot):
    _, record = soft_shot
    shot = Shot("soft", BARSET, Specimen(0.012, 0.012, "soft"), None,
                AnalysisOptions(dispersion=False, friction_coefficient=0.1))
    reduced = reduce_shot(shot, record)
    c = reduced.curves
    # Siebel (1923): the stress without friction is the reported one over 1 + mu D / (3 L) at the current shape
    factor = 1 + 0.1 * 0.012 / (3 * 0.012) * (1 - np.clip(c.strain, 0, 0.99)) ** -1.5
    assert np.allclose(c.stress_friction_MPa, c.stress_MPa / factor, rtol=1e-12)
    low, high = reduced.summary["results"]["flow_stress_friction_band_MPa"]
    assert low < high
    assert "friction_band" in {f.code for f in reduced.flags}
    # without a density nothing is said about inertia, without mu nothing about friction
    assert c.stress_inertia_dh_MPa.isna().all()
    plain = reduce_shot(with_analysis(shot, friction_coefficient=None), record)
    assert plain.curves.stress_friction_MPa.isna().all() and "friction_coefficient" not in plain.summary["results"]


def test_smoothed_derivative_is_exact_on_a_quadratic():
    # a least-squares (Savitzky & Golay 1964) slope reproduces the derivative of a polynomial of degree <= 2
    # at the window's centre: d/dt (3 t^2 - 2 t) = 6 t - 2
    dt = 1e-7
    t = np.arange(2000) * dt
    d = specimen.rate_derivative(3 * t ** 2 - 2 * t, dt, 5e-6)
    inner = slice(25, -25)
    assert np.allclose(d[inner], (6 * t - 2)[inner], rtol=0, atol=1e-9)
