"""Pulse feet, sub-sample delays and windows, against analytic signals."""

import numpy as np

from shpb import pulses


def test_foot_of_a_linear_ramp_with_noise():
    # A ramp starting at sample 300.4 rising 1/100 per sample: the foot is where it leaves
    # the baseline; the detection must land within a few samples of it (common practice:
    # feet are picked to about the rise-time resolution).
    rng = np.random.default_rng(3)
    n = np.arange(2000, dtype=float)
    s = np.clip((n - 300.4) / 100.0, 0, 1) + 1e-3 * rng.standard_normal(n.size)
    foot = pulses.find_foot(s, 200)
    assert 300.4 <= foot <= 300.4 + 3.0


def test_no_pulse_in_noise():
    rng = np.random.default_rng(4)
    assert pulses.find_foot(rng.standard_normal(5000) * 1e-3, 500) is None


def test_delay_matches_analytic_shift():
    # a Gaussian g(t - t0) delayed by 3.37 samples equals g(t - t0 - 3.37 dt) to the
    # linear-interpolation error ~ (dt/width)^2 / 8 (Press et al. 2007, Numerical Recipes §3.1)
    dt, width = 1e-7, 4e-6
    t = np.arange(4000) * dt
    g = np.exp(-0.5 * ((t - 100e-6) / width) ** 2)
    out = pulses.delay(g, dt, 3.37 * dt)
    exact = np.exp(-0.5 * ((t - 100e-6 - 3.37 * dt) / width) ** 2)
    assert np.max(np.abs(out - exact)) < (dt / width) ** 2 / 8 * 1.1


def test_pulse_end():
    s = np.zeros(1000)
    s[100:400] = 1.0
    assert pulses.pulse_end(s, 100) == 400


def test_taper_window():
    w = pulses.taper_window(100, 10, 60, 5)
    assert w[:10].sum() == 0 and w[60:].sum() == 0
    assert np.all(w[15:55] == 1)
    assert 0 < w[10] < w[11] < 1


def test_flat_top_run():
    v = np.concatenate([np.zeros(10), np.linspace(0, 4.99, 20), np.full(37, 5.0), np.zeros(5)])
    run, level = pulses.flat_top_run(v)
    assert run == 37 and level == 5.0
