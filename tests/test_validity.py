"""Validity checks: offset yield, equilibrium onset, rate plateau, bar and record flags."""

import math

import numpy as np
import pytest

from shpb import validity


def test_offset_yield_elastic_perfectly_plastic():
    # sigma = min(E e, sy): the 0.2 % offset line meets the plateau at sy, at strain
    # sy/E + 0.002 (ASTM E9 offset method; common practice).
    E, sy = 70e9, 300e6
    e = np.linspace(0, 0.05, 5001)
    s = np.minimum(E * e, sy)
    y = validity.offset_yield(e, s, 0.002)
    assert y["yield_stress"] == pytest.approx(sy, rel=1e-9)
    assert y["yield_strain"] == pytest.approx(sy / E + 0.002, abs=1e-8)
    assert y["modulus"] == pytest.approx(E, rel=1e-9)


def test_offset_yield_with_toe_and_given_modulus():
    # a seating toe shifts the elastic line by e0; the offset is measured from it
    E, sy, e0, H = 100e9, 500e6, 0.003, 1e9
    e = np.linspace(0, 0.1, 20001)
    s = np.clip(E * (e - e0), 0, None)
    s = np.where(s > sy, sy + H * (e - e0 - sy / E), s)
    y = validity.offset_yield(e, s, 0.002, modulus=E)
    # crossing: sy + H x = E (x - 0.002) with x = e - e0 - sy/E  ->  x = 0.002 E / (E - H)
    x = 0.002 * E / (E - H)
    assert y["yield_stress"] == pytest.approx(sy + H * x, rel=1e-6)
    assert y["toe_strain"] == pytest.approx(e0, abs=1e-6)
    assert y["modulus_source"] == "given"


def test_equilibrium_onset():
    r = np.array([0.9, 0.5, 0.2, 0.04, 0.06, 0.03, 0.01, 0.02, -0.04, 0.3])
    # within region [0, 9): last excursion above 0.05 at index 4 -> onset 5
    assert validity.equilibrium_onset(r, (0, 9), 0.05) == 5
    # a region ending in disequilibrium has no onset
    assert validity.equilibrium_onset(r, (0, 10), 0.05) is None


def test_rate_plateau():
    rate = np.array([0, 900, 1000, 1100, 1000, 0.0])
    p = validity.rate_plateau(rate, rate > 500)
    assert p["mean_per_s"] == pytest.approx(1000.0)
    assert p["cv"] == pytest.approx(np.std([900, 1000, 1100, 1000]) / 1000)


def test_loading_region():
    rate = np.concatenate([np.zeros(10), np.full(50, 1000.0), np.linspace(1000, 0, 20), np.zeros(10)])
    force = np.concatenate([np.zeros(10), np.linspace(0, 1, 10), np.ones(70)])
    a, b = validity.loading_region(rate, force)
    assert a == 11 and b == 70   # force 1/9 > 10 % at index 11; rate 1000(1 - 9/19) >= 500 at index 69


def test_bar_stress_flags():
    # common practice: bars must stay elastic; AISI 4340 Q&T yield 834 MPa (ASM data sheet)
    assert validity.bar_stress_flag(4.5e-3, 205e9, 834e6, "incident").code == "bar_yielded"
    assert validity.bar_stress_flag(3.8e-3, 205e9, 834e6, "incident").code == "bar_stress_high"
    assert validity.bar_stress_flag(2e-3, 205e9, 834e6, "incident") is None
    assert validity.bar_stress_flag(2e-3, 205e9, None, "incident").severity == "info"


def test_overlap_flag():
    # a 1 m gauge distance in steel (c0 5000 m/s) leaves 400 us before the reflected wave
    # returns to the gauge (2 d / c0; common practice)
    assert validity.overlap_flag(300e-6, 1.0, 5000.0, "incident") is None
    assert validity.overlap_flag(450e-6, 1.0, 5000.0, "incident").severity == "error"


def test_clipping_flags():
    v = np.concatenate([np.zeros(100), np.linspace(0, 2.0, 30), np.full(60, 2.0), np.zeros(100)])
    assert validity.clipping_flag(v, "incident", full_scale=2.0).severity == "error"
    assert validity.clipping_flag(v, "incident", full_scale=5.0) is None
    assert validity.clipping_flag(v, "incident", pulse_samples=500).severity == "warning"


def test_moving_average_skips_nan():
    # centred 3-sample means worked by hand; the NaN is left out of each mean
    out = validity.moving_average([1.0, 2.0, 3.0, np.nan, 5.0], 3)
    np.testing.assert_allclose(out, [1.5, 2.0, 2.5, 4.0, 5.0])


def test_offset_yield_of_a_strongly_hardening_metal():
    # Power-law hardening sigma = s0 + K p^n (Ludwik form, p the plastic strain), total strain
    # e = sigma/E + p. The 0.2 % offset line sigma = E (e - 0.002) is met exactly where p = 0.002
    # (ASTM E9 offset definition), so the yield stress is s0 + K 0.002^n. Half the peak stress lies
    # far into the plastic part here: the elastic part must be found by its slope, not its level.
    E, s0, K, n = 120e9, 120e6, 390e6, 0.31
    p = np.concatenate([np.zeros(1), np.geomspace(1e-7, 0.3, 4000)])
    sig_p = s0 + K * p**n
    e_el = np.linspace(0, s0 / E, 200)[:-1]
    e = np.concatenate([e_el, sig_p / E + p])
    s = np.concatenate([E * e_el, sig_p])
    rng = np.random.default_rng(7)
    s_noisy = s + rng.normal(0, 0.5e6, s.size)   # 0.5 MPa recorder noise
    expected = s0 + K * 0.002**n
    for given in (None, E):
        y = validity.offset_yield(e, s_noisy, 0.002, modulus=given)
        assert y["yield_stress"] == pytest.approx(expected, rel=0.01)


# --------------------------------------------------------------------------- noise-aware equilibrium
def test_noise_on_R_follows_the_gum_law_of_propagation():
    # JCGM 100:2008 (GUM) eq. (10), uncorrelated inputs, first order: u(R)^2 = (dR/dF1)^2 u1^2 + (dR/dF2)^2 u2^2
    # with dR/dF1 = 4 F2/(F1 + F2)^2, dR/dF2 = -4 F1/(F1 + F2)^2. At F1 = F2 = F: u(R) = sqrt(u1^2 + u2^2) / F
    # = sqrt(100^2 + 50^2) / 10000 = 0.01118. Checked against a Monte Carlo propagation of distributions
    # (JCGM 101:2008) of 200 000 draws, whose standard deviation is known to 0.2 % (1/sqrt(2 n)).
    f1, f2, u1, u2 = np.array([10e3, 12e3]), np.array([10e3, 9e3]), 100.0, 50.0
    u = validity.equilibrium_ratio_uncertainty(f1, f2, u1, u2)
    assert u[0] == pytest.approx(math.hypot(100, 50) / 10e3, rel=1e-12)
    rng = np.random.default_rng(11)
    for i in range(2):
        a = f1[i] + rng.normal(0, u1, 200_000)
        b = f2[i] + rng.normal(0, u2, 200_000)
        mc = np.std(2 * (a - b) / (a + b))
        assert u[i] == pytest.approx(mc, rel=0.01)   # 0.2 % sampling, the rest the linearisation


def test_coverage_factor_keeps_noise_inside_the_band():
    # one sample: the two-sided 95 % point of the normal distribution, 1.959964 (standard normal tables)
    assert validity.coverage_factor(1, 0.05) == pytest.approx(1.959964, abs=1e-6)
    # Sidak (1967): n independent samples all within +-k with probability 1 - alpha; checked by simulation:
    # 4000 sets of 200 standard normals, the share with a sample beyond k is alpha = 0.05 (binomial sd 0.0034)
    k = validity.coverage_factor(200, 0.05)
    z = np.random.default_rng(12).standard_normal((4000, 200))
    assert np.mean(np.max(np.abs(z), axis=1) > k) == pytest.approx(0.05, abs=0.012)


def test_equilibrium_onset_with_a_limit_per_sample():
    r = np.array([0.9, 0.5, 0.2, 0.07, 0.06, 0.03, 0.01, 0.02, -0.04])
    # a limit of 0.05 breaks at index 4; widened to 0.08 there, the noise allows it: onset at 3
    assert validity.equilibrium_onset(r, (0, 9), 0.05) == 5
    limit = np.full(9, 0.05)
    limit[3:5] = 0.08
    assert validity.equilibrium_onset(r, (0, 9), limit) == 3


# --------------------------------------------------------------------------- consistency checks
def test_striker_relation():
    # Kolsky (1953); Graff (1975) sec. 2.2: a rod of impedance Z_s striking a rod of impedance Z_b at v sends
    # the strain v/c_b * Z_s/(Z_s + Z_b); v/(2 c_b) for identical rods: 20 m/s on a 4873.4 m/s bar, 2052 ue.
    c, z = 4873.4, 11111.0
    assert validity.striker_flag(20 / (2 * c), 20.0, c, z, z) == (None, pytest.approx(1.0))
    # a striker twice the bar's impedance gives 2/3 v/c: 2736 ue
    assert validity.striker_flag(2 / 3 * 20 / c, 20.0, c, z, 2 * z)[1] == pytest.approx(1.0)
    # a gauge read twice too high (a quarter bridge for a half bridge) is an error, a shaper's loss a warning
    assert validity.striker_flag(20 / c, 20.0, c, z, z)[0].severity == "error"
    assert validity.striker_flag(0.8 * 20 / (2 * c), 20.0, c, z, z)[0].severity == "warning"


def test_modulus_against_the_measured_wave_speed():
    # c0 = sqrt(E/rho) (Kolsky 1949): 190 GPa and 8000 kg/m^3 give 4873.4 m/s
    assert validity.modulus_speed_flag(190e9, 8000.0, 4873.4, "incident") is None
    assert validity.modulus_speed_flag(190e9, 8000.0, 4873.4 * 1.015, "incident").severity == "warning"  # 3 %
    assert validity.modulus_speed_flag(190e9, 8000.0, 5000.0, "incident").severity == "error"          # 5.3 %


def test_alignment_lag_of_a_delayed_force():
    # F2(t) = F1(t - 2 us) on a smooth rise: the least-squares lag is 2 us to first order (Taylor: F1 - F2 =
    # lag dF/dt); a raised-cosine rise of 40 us, 0.1 us samples
    dt = 1e-7
    t = np.arange(600) * dt
    rise = lambda s: 0.5 - 0.5 * np.cos(np.pi * np.clip(s / 40e-6, 0, 1))   # noqa: E731
    assert validity.alignment_lag(rise(t), rise(t - 2e-6), dt) == pytest.approx(2e-6, rel=0.02)


def test_flat_top_of_a_saturated_pulse():
    # a half-sine pulse (rounded top) is not flat; cut at 80 % of its height it sits flat within its noise for
    # 41 % of the pulse (2 acos(0.8)/pi); common practice: an amplifier saturating below the recorder's range
    rng = np.random.default_rng(13)
    dt = 1e-7
    t = np.arange(1500) * dt
    pulse = np.sin(np.pi * t / t[-1])
    noise = rng.normal(0, 2e-3, t.size)
    assert validity.flat_top_flag(pulse + noise, 2e-3, dt, "incident") is None
    flag = validity.flat_top_flag(np.minimum(pulse, 0.8) + noise, 2e-3, dt, "incident")
    assert flag is not None and flag.code == "flat_top"
