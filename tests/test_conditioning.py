"""Signal conditioning against analytic signals: the low-pass, glitches, baselines and hum."""

import math

import numpy as np
import pytest

from shpb import conditioning as C


def test_lowpass_magnitude_is_the_squared_butterworth_response():
    # Butterworth (1930); bilinear transform (Oppenheim & Schafer 2010, Discrete-Time Signal Processing, 3rd ed.,
    # sec. 7.2, from memory): one pass of an order-N digital Butterworth low-pass has
    # |H(f)|^2 = 1 / (1 + (tan(pi f dt) / tan(pi fc dt))^(2N)); forwards and backwards the magnitude is that
    # squared-magnitude and the phase zero. Read from the filtered unit impulse's spectrum: 0.5 (-6 dB) at the
    # cutoff, 1 / (1 + 2^8) at twice the tangent's ratio in the stopband.
    dt, fc, n = 1e-7, 180e3, 1 << 16
    x = np.zeros(n)
    x[n // 2] = 1.0
    y = C.lowpass(x, dt, fc)
    f = np.fft.rfftfreq(n, dt)
    mag = np.abs(np.fft.rfft(y))
    analytic = 1.0 / (1.0 + (np.tan(np.pi * f * dt) / np.tan(np.pi * fc * dt)) ** (2 * C.LOWPASS_ORDER))
    at = lambda freq: float(np.interp(freq, f, mag))  # noqa: E731
    assert at(fc) == pytest.approx(0.5, abs=2e-3)
    f2 = math.atan(2 * math.tan(math.pi * fc * dt)) / (math.pi * dt)  # where the tangent ratio is 2
    assert at(f2) == pytest.approx(1 / (1 + 2**8), rel=0.02)
    band = (f > 0) & (f < 3 * fc)
    assert np.max(np.abs(mag[band] - analytic[band])) < 2e-3
    # zero phase: the impulse response is symmetric about the impulse
    assert np.allclose(y[n // 2 - 500:n // 2], y[n // 2 + 500:n // 2:-1], atol=1e-12)


def test_lowpass_agrees_with_scipy_forward_backward_filtering():
    # reference library: scipy.signal.butter + sosfiltfilt (second-order sections forwards and backwards,
    # Gustafsson 1996 initial states) on a pulse-like record; the frequency-domain form must give the same
    # samples away from the record's ends, where the two pad differently
    from scipy.signal import butter, sosfiltfilt

    dt, fc = 1e-7, 180e3
    t = np.arange(20000) * dt
    rng = np.random.default_rng(3)
    x = np.where((t > 300e-6) & (t < 400e-6), 1e-3, 0.0) + rng.normal(0, 2e-5, t.size)
    ours = C.lowpass(x, dt, fc)
    ref = sosfiltfilt(butter(C.LOWPASS_ORDER, fc, output="sos", fs=1 / dt), x)
    inner = slice(2000, -2000)
    assert np.max(np.abs(ours[inner] - ref[inner])) < 1e-4 * np.max(np.abs(x))


def test_glitches_found_and_repaired_a_fast_step_left_alone():
    # common practice: a single-sample spike departs from all its neighbours; a step, however fast, moves them
    rng = np.random.default_rng(1)
    x = rng.normal(0, 1e-3, 4000)
    x[2000:] += 1.0                         # a one-sample step
    x[1995:2000] += np.linspace(0, 1, 5)    # ... and a 5-sample rise before another part
    x[500] += 0.05                          # 50 sigma
    x[3000] -= 0.02                         # 20 sigma
    hits = C.find_glitches(x, 1e-3)
    assert list(hits) == [500, 3000]
    y = C.repair_glitches(x, hits)
    assert abs(y[500]) < 5e-3 and abs(y[3000] - 1.0) < 5e-3
    assert np.array_equal(np.delete(y, hits), np.delete(x, hits))


def test_baseline_order_is_the_one_the_data_justify():
    # Schwarz (1978): BIC = n ln(RSS/n) + p ln n. White noise on a constant: order 0; a linear drift of 2 sigma
    # over the record: order 1; a parabola: order 2 (quiet samples at both ends and in the middle).
    rng = np.random.default_rng(3)
    n = 6000
    u = np.linspace(-1, 1, n)
    noise = rng.normal(0, 1e-3, n)
    quiet = (np.abs(u) > 0.8) | (np.abs(u) < 0.1)
    for true, order in ((0.01 + 0 * u, 0), (0.01 + 2e-3 * u, 1), (0.01 + 5e-3 * (u**2 - 1 / 3), 2)):
        base, info = C.fit_baseline(true + noise, quiet)
        assert info["order"] == order
        assert np.max(np.abs(base - true)) < 3e-4   # between the quiet spans too
    # quiet samples at the start only: no curvature is extrapolated over the rest
    _, info = C.fit_baseline(0.01 + 5e-3 * u**2 + noise, np.abs(u + 0.95) < 0.04)
    assert info["order"] == 0


def test_quiet_baseline_follows_a_drift_under_pulses():
    # a drift of 3 % of a pulse's height under two pulses: the quiet samples are found around them, the drift
    # fitted across them (the pulses put in are the outside truth)
    rng = np.random.default_rng(4)
    dt, n = 1e-7, 8000
    t = np.arange(n) * dt
    pulses = np.where((t > 100e-6) & (t < 250e-6), 1.0, 0.0) + np.where((t > 450e-6) & (t < 600e-6), -0.8, 0.0)
    drift = 0.03 * t / t[-1]
    x = pulses + drift + rng.normal(0, 2e-3, n)
    base, quiet, info = C.quiet_baseline(x, 2e-3, dt, t < 90e-6)
    assert info["order"] == 1
    assert not quiet[(t > 100e-6) & (t < 250e-6)].any() and quiet[(t > 300e-6) & (t < 400e-6)].all()
    assert np.max(np.abs(base - drift)) < 1e-3


def test_quiet_baseline_keeps_a_long_pulse_tail_out():
    # a record that a long pulse fills (10 % to 80 % of it), its tail settling 2 % of the pulse's height off the
    # baseline, with noise of 2 % of the height per sample: block by block (2 us means, within 4 of their noise
    # units) the tail passes for quiet, but as a whole it stands far off the baseline and no quiet span near it
    # shows a drift; taken in, a polynomial pinned only at the record's two ends bends the baseline under the
    # whole pulse by about the tail's level (the level put in, zero, is the outside truth)
    rng = np.random.default_rng(0)
    dt, n = 2e-7, 7000
    t = np.arange(n) * dt
    x = np.where((t > 140e-6) & (t < 1120e-6), 1.0, 0.0) + np.where(t >= 1120e-6, 0.02, 0.0)
    base, quiet, info = C.quiet_baseline(x + rng.normal(0, 0.02, n), 0.02, dt, t < 126e-6)
    assert not quiet[t > 1130e-6].any()
    assert np.max(np.abs(base)) < 0.005  # measured 0.0004; the tail taken in: 0.023


def test_hum_fitted_with_its_frequency():
    # mains hum of 5 mV at 50 Hz and 2 mV at 150 Hz over a 40 ms record with a pulse in the middle: with the
    # hum frequency given, the fitted harmonics are the ones put in
    rng = np.random.default_rng(5)
    dt, n = 1e-5, 4000
    t = np.arange(n) * dt
    hum = 5e-3 * np.sin(2 * np.pi * 50 * t + 0.3) + 2e-3 * np.cos(2 * np.pi * 150 * t)
    x = hum + np.where((t > 15e-3) & (t < 20e-3), 1.0, 0.0) + rng.normal(0, 1e-4, n)
    base, _, info = C.quiet_baseline(x, 1e-4, dt, t < 10e-3, hum_frequency=50.0)
    assert info["hum_amplitude_V"][0] == pytest.approx(5e-3, rel=0.02)
    assert info["hum_amplitude_V"][2] == pytest.approx(2e-3, rel=0.05)
    assert np.max(np.abs(base - hum)) < 3e-4
    plain, _, _ = C.quiet_baseline(x, 1e-4, dt, t < 10e-3)
    assert np.max(np.abs(plain - hum)) > 1e-3           # a cubic cannot follow two hum periods


def test_cutoff_is_the_second_mode_onset_and_the_rise_is_reported():
    cut, why = C.lowpass_cutoff(30e-6, 180e3, 5e6)
    assert cut == 180e3 and "second-mode onset" in why and "12 kHz below" in why   # 0.35 / 30 us = 11.7 kHz
    cut, why = C.lowpass_cutoff(0.3e-6, 180e3, 5e6)
    assert cut == 180e3 and "blunted" in why
    cut, _ = C.lowpass_cutoff(None, 3e6, 2.5e6)
    assert cut == pytest.approx(2e6)                    # 0.8 of the Nyquist frequency
