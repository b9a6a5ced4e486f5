"""Pulse feet, sub-sample delays and windows, against analytic signals."""

import numpy as np
import pytest

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


def test_carry_wave_is_a_delay_of_the_cut_out_wave():
    # a Gaussian inside its window carried 3.37 samples later equals the analytic g(t - 3.37 dt) to the
    # linear-interpolation error (Press et al. 2007, Numerical Recipes §3.1); outside the window: zero
    dt, width = 1e-7, 4e-6
    t = np.arange(4000) * dt
    g = np.exp(-0.5 * ((t - 150e-6) / width) ** 2)
    other = np.exp(-0.5 * ((t - 320e-6) / width) ** 2)   # another wave later on the same channel
    moved, plain = pulses.carry_wave(g + other, dt, 1000, 2000, 3.37 * dt, ramp=20)
    exact = np.exp(-0.5 * ((t - 150e-6 - 3.37 * dt) / width) ** 2)
    assert np.max(np.abs(moved - exact)) < (dt / width) ** 2 / 8 * 1.1
    assert np.max(np.abs(moved[2500:])) == 0.0           # the later wave was cut away
    np.testing.assert_array_equal(moved, plain)


def test_plan_window_from_the_bar_geometry():
    # common practice: the reflected wave returns to the incident gauge 2 d_i/c0 after the incident foot,
    # and far-end echoes return after 2 (L - d)/c0. Here: 2*0.9/4873.4 = 369.4 us, 2*(1.2-0.4)/4873.4 =
    # 328.3 us (the shortest), so a 100 us pulse gets 10 us of lead and min(3 * 100, 0.97 * 328.3 - 10)
    # = 300 us of window.
    c = 4873.4
    plan = pulses.plan_window(1000.0, 100e-6, 1e-7, 0.0, 2e-3, incident_gauge_distance=0.9, incident_wave_speed=c,
                              incident_length=1.8, transmitted_gauge_distance=0.4, transmitted_wave_speed=c,
                              transmitted_length=1.2)
    assert plan.lead == pytest.approx(10e-6)
    assert plan.length == pytest.approx(300e-6)
    assert plan.t_face0 == pytest.approx(100e-6 + 0.9 / c)
    assert plan.k0 == int(np.ceil((plan.t_face0 - 10e-6) / 1e-7))
    # a record ending early cuts the window: it must end 0.9/c (the later wave's travel) before the end,
    # less two tapers of 2 us
    short = pulses.plan_window(1000.0, 100e-6, 1e-7, 0.0, 600e-6, incident_gauge_distance=0.9, incident_wave_speed=c,
                               incident_length=1.8, transmitted_gauge_distance=0.4, transmitted_wave_speed=c,
                               transmitted_length=1.2)
    assert short.length == pytest.approx(600e-6 - (100e-6 + 0.9 / c) - 0.9 / c - 4e-6)
    assert "cut by the record" in short.source


def test_pulse_end_searched_from_where_the_pulse_stands_clear_of_the_noise():
    # a fast (2-sample) rise with 1 % noise, the search started on a noise sample just before it: the end is
    # where the 300-sample pulse comes down (common practice: a pulse's end at a fraction of its peak)
    rng = np.random.default_rng(5)
    s = np.zeros(2000)
    s[500:800] = 1.0
    s[499] = 0.5
    s += rng.normal(0, 0.01, s.size)
    for start in (495.0, 497.3, 499.0):
        assert pulses.pulse_end(s, start, fraction=0.05) == 800


def test_taper_window_moves_with_its_window():
    # the raised cosine r(u) = (1 - cos(pi u)) / 2 over `ramp` samples, sampled at (k - start + 1/2) / ramp:
    # a window moved by 0.37 sample gives the same taper moved by 0.37 sample (so waves cut at their gauges
    # and carried by fractional delays keep identical tapers at the faces)
    k = np.arange(200, dtype=float)
    for start in (20.0, 20.37):
        w = pulses.taper_window(200, start, 150.3, 10)
        u = np.clip((k - start + 0.5) / 10, 0, 1)
        v = np.clip((150.3 - k - 0.5) / 10, 0, 1)
        assert np.allclose(w, (0.5 - 0.5 * np.cos(np.pi * u)) * (0.5 - 0.5 * np.cos(np.pi * v)), atol=1e-15)


def test_a_burst_is_not_a_foot():
    # a 3-sample burst at a third of the pulse's height before a pulse that lasts: with persist = 10 samples
    # (1 us at 10 MHz) the foot is the pulse's, found where its ramp leaves the baseline (cf. the ramp above)
    rng = np.random.default_rng(6)
    n = np.arange(3000, dtype=float)
    s = np.clip((n - 1200.4) / 100.0, 0, 1) + 1e-3 * rng.standard_normal(n.size)
    s[400:403] += 0.33
    assert pulses.find_foot(s, 200) < 403                        # fooled without persistence
    assert 1200.4 <= pulses.find_foot(s, 200, persist=10) <= 1203.4


def test_rest_level_of_a_record_a_long_pulse_fills():
    # a channel at 0.01 V before its first wave, then sitting on pulses over 80 % of the record (a long pulse
    # overlapping its reflection): the record's median lies on the pulse, the level put in is the start's; a
    # record with a short pulse keeps the median (the level put in, with noise of 1 mV)
    rng = np.random.default_rng(5)
    n = 10_000
    x = np.full(n, 0.01) + rng.normal(0, 1e-3, n)
    long = x.copy()
    long[2000:] += np.where(np.arange(n - 2000) < 1000, 0.6, 0.2)
    level, sigma = pulses.rest_level(long)
    assert pulses.robust_noise(long)[0] == pytest.approx(0.21, abs=0.01)  # the median: on the pulse
    assert level == pytest.approx(0.01, abs=5e-4) and sigma == pytest.approx(1e-3, rel=0.1)
    short = x.copy()
    short[2000:3000] += 0.6
    assert pulses.rest_level(short) == pulses.robust_noise(short)
