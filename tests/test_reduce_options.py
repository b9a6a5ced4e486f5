"""Documented shot options and unlike bars, reduced end to end against the law put in.

Each option is one of docs/setup-files.md ("Shot", ``[record]`` and ``[analysis]``);
docs/reduction.md says what it does. The records are tests/synth.py's: the
ideal one-dimensional Kolsky analysis (Kolsky 1949; Gray 2000, ASM Handbook
Vol. 8; Chen & Song 2011, ch. 1) of a specimen with a known elastic-perfectly-
plastic law (E 70 GPa, yield 300 MPa), as a lab's scope export. The outside
truth is that law and the ideal solution's own strains and times; a check
that the default goes wrong where the option puts it right shows that the
test can fail.
"""

import math

import numpy as np
import pytest

from shpb.errors import InputError
from shpb.reduce import reduce_file

from synth import elastic_perfectly_plastic, linear_hardening, make_shot

E_SPEC, SY = 70e9, 300e6
LAW = elastic_perfectly_plastic(E_SPEC, SY)
E_BAR, RHO_BAR = 200e9, 7850.0          # synth.STEEL: a generic steel bar, round values
C_BAR = math.sqrt(E_BAR / RHO_BAR)      # c0 = sqrt(E/rho) (Kolsky 1949): 5047.54 m/s
# The foot found automatically is where the 8 us raised-cosine rise reaches 1 % of its height:
# acos(1 - 2 * 0.01) / pi * 8 us = 0.51 us after the pulse starts (docs/reduction.md, section 2).
FOOT_LAG = 0.51e-6

# The analysis option of the window length, and the summary key that reports it (one place, so a
# rename touches one line).
WINDOW_KEY = "window_length"
WINDOW_RESULT = "window_length_us"


def law_error(result, law=LAW, yield_stress=SY):
    """Largest stress error over the valid part, relative to the local stress (to the yield stress on
    the elastic rise, where recorder noise is a large fraction), as in test_reduce.py."""
    c = result.curves
    v = c["valid"].to_numpy(bool)
    assert v.sum() > 300, "too little of the curve is valid to judge"
    truth = law.loading_curve(c["strain"].to_numpy()[v])
    return float(np.max(np.abs(c["stress_MPa"].to_numpy()[v] * 1e6 - truth) / np.maximum(truth, yield_stress)))


# --------------------------------------------------------------------------- bars that differ
# An aluminium-alloy transmitted bar (round values E 70 GPa, rho 2700 kg/m^3, nu 0.33: common practice for
# aluminium alloys), 16 mm across, behind the 20 mm steel incident bar. A soft transmitted bar needs a
# stronger pulse to drive the specimen past yield: 1.5e-3 gives about 900 1/s.
AL_BAR = dict(modulus=70e9, density=2700.0, poisson_ratio=0.33, diameter=0.016, yield_strength=500e6)


def test_unlike_bars_follow_the_kolsky_relations_with_their_own_e_a_c(tmp_path):
    shot, truth = make_shot(tmp_path, law=LAW, amplitude=1.5e-3, transmitted_bar=AL_BAR)
    res = reduce_file(shot)
    assert res.valid, [f.message for f in res.flags]
    e_i, a_i, c_i = E_BAR, math.pi * 0.020**2 / 4, C_BAR
    e_t, a_t = AL_BAR["modulus"], math.pi * AL_BAR["diameter"] ** 2 / 4
    c_t = math.sqrt(AL_BAR["modulus"] / AL_BAR["density"])   # 5091.75 m/s, c0 = sqrt(E/rho) (Kolsky 1949)
    a_s, l_s = math.pi * 0.010**2 / 4, 0.005
    r = res.summary["results"]
    assert r["incident_wave_speed_m_per_s"] == pytest.approx(c_i, rel=1e-12)
    assert r["transmitted_wave_speed_m_per_s"] == pytest.approx(c_t, rel=1e-12)
    # the law put in, on the valid part (the 2 %), by every stress form (in equilibrium
    # F1 = F2 = A_s sigma: Gray 2000)
    assert law_error(res) < 0.02
    c = res.curves
    v = c["valid"].to_numpy(bool)
    for col in ("stress_1wave_MPa", "stress_2wave_MPa", "stress_3wave_MPa"):
        sig = c[col].to_numpy()[v] * 1e6
        assert np.max(np.abs(sig - LAW.loading_curve(c["strain"].to_numpy()[v])) / SY) < 0.02, col
    # Face forces and velocities against the textbook relations, each bar with its own E, A and c
    # (Kolsky 1949; Gray 2000; Chen & Song 2011, ch. 1), on the ideal solution's face strains at the
    # same face time:
    #   F1 = E_i A_i (eps_i + eps_r), F2 = E_t A_t eps_t, v1 = c_i (eps_i - eps_r), v2 = c_t eps_t.
    # Tolerance: 2 % of the plateau value (2 microstrain recorder noise on each channel; the automatic
    # foot's +-0.2 us on the first, fast-rising valid samples).
    t = c["time_us"].to_numpy()[v] * 1e-6 + FOOT_LAG
    ei, er, et = (np.interp(t, truth["tau"], truth[k]) for k in ("eps_i", "eps_r", "eps_t"))
    f1, f2 = e_i * a_i * (ei + er), e_t * a_t * et
    force = a_s * SY                                          # the plateau force, 23.56 kN
    assert c["force_back_kN"].to_numpy()[v] * 1e3 == pytest.approx(f2, rel=0, abs=0.02 * force)
    assert c["force_front_kN"].to_numpy()[v] * 1e3 == pytest.approx(f1, rel=0, abs=0.02 * force)
    v1, v2 = c_i * (ei - er), c_t * et
    assert c["velocity_front_m_per_s"].to_numpy()[v] == pytest.approx(v1, rel=0, abs=0.02 * np.median(v1))
    assert c["velocity_back_m_per_s"].to_numpy()[v] == pytest.approx(v2, rel=0, abs=0.02 * np.median(v2))
    # F2 takes the transmitted bar's E_t A_t, not the incident bar's: F2 / (E_i A_i eps_t) = E_t A_t / (E_i A_i)
    # = 70 GPa x 16^2 / (200 GPa x 20^2) = 0.224
    assert np.median(c["force_back_kN"].to_numpy()[v] * 1e3 / (e_i * a_i * et)) == pytest.approx(0.224, rel=0.01)
    # three-wave strain rate (v1 - v2)/L_s against the ideal solution's de/dt
    ideal_rate = np.interp(t, truth["tau"], np.gradient(truth["strain"], truth["tau"]))
    rate = c["strain_rate_per_s"].to_numpy()[v]
    assert np.median(np.abs(rate - ideal_rate)) < 0.02 * np.median(ideal_rate)
    # The classic form -2 c_i eps_r / L_s assumes identical bars (docs/reduction.md). With unlike bars
    # in equilibrium it exceeds the specimen's rate by (c_t A_s/(E_t A_t) - c_i A_s/(E_i A_i)) sigma / L_s
    # (the relations above with F1 = F2 = A_s sigma): 1.32e3 1/s at sigma = 300 MPa, more than the
    # rate itself.
    sigma = LAW.loading_curve(c["strain"].to_numpy()[v])
    excess = (c_t * a_s / (e_t * a_t) - c_i * a_s / (e_i * a_i)) * sigma / l_s
    classic = c["strain_rate_reflected_per_s"].to_numpy()[v]
    assert np.median(classic - rate) == pytest.approx(np.median(excess), rel=0.03)
    # peak bar stress of each bar with its own modulus: E |eps|max (common practice)
    assert r["peak_bar_stress_transmitted_MPa"] == pytest.approx(e_t * truth["eps_t"].max() / 1e6, rel=0.01)
    assert r["peak_bar_stress_incident_MPa"] == pytest.approx(e_i * 1.5e-3 / 1e6, rel=0.01)


# --------------------------------------------------------------------------- pre_trigger
def _pickup_before_the_pulse(t):
    # common practice: firing the launcher can put electrical pickup on the record before the pulse
    # arrives. +40 mV (against the compressive pulse's sign on these inverting channels) from 60 to 90 us;
    # the pulse reaches the incident gauge at 100 us.
    return np.where((t > 60e-6) & (t < 90e-6), 0.040, 0.0)


def test_pre_trigger_sets_the_baseline_span(tmp_path):
    shot, _ = make_shot(tmp_path, law=LAW, pickup_incident=_pickup_before_the_pulse,
                        pickup_transmitted=_pickup_before_the_pulse)
    # Default: the baseline is fitted over every quiet span of the record (docs/reduction.md section 1); the
    # 30 us of pickup stand out of the noise and are left out, so the law comes back.
    assert law_error(reduce_file(shot)) < 0.02
    # pre_trigger = 95 us: the baseline is that span, as given, pickup included: a third of it is pickup,
    # the levels are ~13 mV off, i.e. 13 mV / (gain V_exc GF / 2 = 1050 V per unit strain, half bridge: Dally &
    # Riley 1991, ch. 7) = 13 microstrain on a 375 microstrain transmitted strain: several per cent of stress.
    text = shot.read_text()
    shot.write_text(text + 'pre_trigger = "95 us"\n')
    assert law_error(reduce_file(shot)) > 0.03
    # pre_trigger = 50 us: the baseline is the quiet first 50 us = 500 samples at 0.1 us
    shot.write_text(text + 'pre_trigger = "50 us"\n')
    res = reduce_file(shot)
    assert law_error(res) < 0.02
    assert res.summary["results"]["yield_stress_MPa"] == pytest.approx(300.0, rel=0.01)
    bridge_step = next(p for p in res.summary["provenance"] if p["step"] == "bridge")
    assert bridge_step["parameters"]["baseline_samples"] == 500


# --------------------------------------------------------------------------- incident_start
def _pickup_burst_on_the_incident_channel(t):
    # a 3 us, -0.3 V burst of pickup at 40 us (common practice: firing the launcher can put pickup on the
    # record): the compressive sign on this inverting channel, a third of the pulse's height and longer than
    # the microsecond a pulse must last to be one, so it looks like a foot to an automatic search
    return np.where((t >= 40e-6) & (t < 43e-6), -0.3, 0.0)


def test_incident_start_sets_the_foot_and_the_time_origin(tmp_path):
    shot, truth = make_shot(tmp_path, law=LAW, pickup_incident=_pickup_burst_on_the_incident_channel)
    fooled = reduce_file(shot)
    assert fooled.summary["results"]["incident_foot_time_us"] == pytest.approx(40.0, abs=0.5)
    # the 57 us of baseline between that foot and the pulse are named
    assert any(f.code == "foot_gap" for f in fooled.flags)
    # The foot read by hand half a microsecond into the rise (the pulse starts at 100.0 us at the gauge)
    start = 100.5e-6
    shot.write_text(shot.read_text() + f'incident_start = "{start * 1e6} us"\n')
    res = reduce_file(shot)
    assert res.valid, [f.message for f in res.flags]
    assert res.summary["results"]["incident_foot_time_us"] == pytest.approx(100.5, abs=1e-9)
    assert law_error(res) < 0.02
    # Time zero is the given foot's arrival at the front face (docs/reduction.md, section 3): the stress
    # history is the ideal one at tau = t + 0.5 us. On the 8 us rise, where the stress climbs ~100 MPa
    # per microsecond, a 0.5 us error in the origin would show as ~20 % of the yield stress.
    c = res.curves
    early = c["time_us"].to_numpy() < 20
    for lag, within in ((start - 100e-6, True), (0.0, False)):
        ideal = np.interp(c["time_us"].to_numpy() * 1e-6 + lag, truth["tau"], truth["stress"])
        err = np.max(np.abs(c["stress_1wave_MPa"].to_numpy() * 1e6 - ideal)[early]) / SY
        assert bool(err < 0.02) == within, (lag, err)


def test_incident_start_just_before_the_rise(tmp_path):
    # a lab reading the foot by eye puts it at, or a little before, the start of the rise (the pulse starts
    # at 100.0 us). The pulse end is searched from where the pulse stands clear of the noise, not from the
    # given start: this test was a strict xfail while a noise sample just after the start ended the search.
    shot, _ = make_shot(tmp_path, law=LAW)
    text = shot.read_text()
    for start in (99.0, 99.5, 99.9):
        shot.write_text(text + f'incident_start = "{start} us"\n')
        res = reduce_file(shot)
        assert res.valid and law_error(res) < 0.02, start
        assert not any(f.code == "foot_gap" for f in res.flags)


def test_incident_start_outside_the_record_is_an_input_error(tmp_path):
    shot, _ = make_shot(tmp_path, law=LAW, analysis='incident_start = "2 ms"\n')   # the record is 1 ms long
    with pytest.raises(InputError, match="incident_start: 2000 us is outside the record"):
        reduce_file(shot)


# --------------------------------------------------------------------------- window
def test_window_sets_the_length_of_the_analysis(tmp_path):
    shot, truth = make_shot(tmp_path, law=LAW)
    auto = reduce_file(shot)
    shot.write_text(shot.read_text() + f'{WINDOW_KEY} = "150 us"\n')
    res = reduce_file(shot)
    r = res.summary["results"]
    # the window is the length of every pulse window from the front-face time zero (docs/setup-files.md):
    # the curves end 150 us after time zero, one 0.1 us sample at most short of it
    assert r[WINDOW_RESULT] == pytest.approx(150.0) and auto.summary["results"][WINDOW_RESULT] > 200
    end = res.curves["time_us"].iloc[-1]
    assert 149.9 - 1e-9 <= end <= 150.0 + 1e-9
    assert auto.curves["time_us"].iloc[-1] > 200
    # the 100 us pulse lies inside it: the law is recovered, and the strain history is the ideal one
    assert law_error(res) < 0.02
    c = res.curves
    late = c["time_us"].to_numpy() > 100
    ideal = np.interp(c["time_us"].to_numpy()[late] * 1e-6 + FOOT_LAG, truth["tau"], truth["strain"])
    assert c["strain"].to_numpy()[late] == pytest.approx(ideal, rel=0.01)


# --------------------------------------------------------------------------- yield_offset
def test_yield_offset_moves_the_offset_line(tmp_path):
    # Offset method (ASTM E9; common practice): the line sigma = E (e - offset) meets linear hardening
    # sigma = sy + Et (e - sy/E) at sigma = sy + Et offset E / (E - Et): 310.29 MPa for a 0.5 % offset,
    # 304.12 MPa for the default 0.2 % (test_reduce.py).
    et = 2e9
    law = linear_hardening(E_SPEC, SY, et)
    shot, _ = make_shot(tmp_path, law=law, analysis="yield_offset = 0.005\n")
    r = reduce_file(shot).summary["results"]
    expected = SY + et * 0.005 * E_SPEC / (E_SPEC - et)
    assert r["yield_stress_MPa"] * 1e6 == pytest.approx(expected, rel=0.01)
    assert r["yield_strain"] == pytest.approx(expected / E_SPEC + 0.005, rel=0.03)


# --------------------------------------------------------------------------- [record] options
def _record_columns(csv_path):
    """The numbers of synth.py's scope export (four lines above them: two metadata, a blank, the header)."""
    return np.loadtxt(csv_path, delimiter=",", skiprows=4)


def test_time_unit_of_the_time_column(tmp_path):
    # a scope that writes its time column in microseconds: time_unit = "us" (docs/setup-files.md)
    shot, _ = make_shot(tmp_path, law=LAW)
    data = _record_columns(tmp_path / "synthetic.csv")
    data[:, 0] *= 1e6
    with open(tmp_path / "synthetic.csv", "w") as fh:
        fh.write("TIME [us],CH1,CH2\n")
        np.savetxt(fh, data, delimiter=",", fmt="%.9e")
    shot.write_text(shot.read_text().replace('time = "TIME"', 'time = "TIME [us]"\ntime_unit = "us"'))
    res = reduce_file(shot)
    r = res.summary["results"]
    assert r["sample_interval_us"] == pytest.approx(0.1, rel=1e-6)
    assert r["incident_foot_time_us"] == pytest.approx(100.0 + FOOT_LAG * 1e6, abs=0.2)
    assert law_error(res) < 0.02


def test_one_file_per_channel(tmp_path):
    # [record] incident = { file = ..., column = ... } (docs/setup-files.md): the channels in two files,
    # a column named in one and numbered (0-based) in the other
    shot, _ = make_shot(tmp_path, law=LAW)
    data = _record_columns(tmp_path / "synthetic.csv")
    for name, col in (("inc.csv", 1), ("tra.csv", 2)):
        with open(tmp_path / name, "w") as fh:
            fh.write("TIME,V\n")
            np.savetxt(fh, data[:, [0, col]], delimiter=",", fmt="%.9e")
    (tmp_path / "synthetic.csv").unlink()
    text = shot.read_text()
    record = text[text.index("[record]"):text.index("[analysis]")]
    shot.write_text(text.replace(record, '[record]\nincident = { file = "inc.csv", column = "V" }\n'
                                         'transmitted = { file = "tra.csv", column = 1 }\ntime = "TIME"\n'))
    res = reduce_file(shot)
    assert law_error(res) < 0.02
    assert sorted(res.summary["records"]) == sorted(str(tmp_path / f) for f in ("inc.csv", "tra.csv"))
