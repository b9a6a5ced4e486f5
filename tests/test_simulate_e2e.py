"""End to end: virtual shots (shpb.simulate) recorded, reduced (shpb.reduce) and compared with what was put in.

The outside references are the constitutive law put into the specimen
(Johnson & Cook 1983), the Kolsky relations (Kolsky 1949; Gray 2000, ASM
Handbook Vol. 8), published equilibrium criteria (Ravichandran & Subhash 1994;
Davies & Hunter 1963), Pochhammer–Chree phase velocities (the frequency
equation as in Graff 1975, section 8.2; roots as Bancroft 1941 tabulated
them), the striker relations (Kolsky 1963) and the bridge equations (Dally &
Riley 1991). The model's specimen truth is an independent computation (the wave
model) from the reduction's (the Kolsky analysis of recorded volts).

Rig, small so the file runs in well under a minute: 19.05 mm maraging-type
steel bars (E 190 GPa, rho 8000 kg/m^3, nu 0.30), incident 0.8 m with its
gauge 0.4 m from the specimen, transmitted 0.6 m with its gauge at 0.2 m,
0.15 m striker (62 us pulse, shorter than 2 d / c0 = 164 us), a soft
polymer pulse shaper, 0.45 ms records at 10 MHz.
"""

import dataclasses
import math
from pathlib import Path

import numpy as np
import pytest

from shpb.cli import main
from shpb.errors import InputError
from shpb.io import Record
from shpb.reduce import reduce_shot
from shpb.setup import (AnalysisOptions, Bar, BarSet, Channel, Gauge, Material, RecordSpec, Shot, Specimen,
                        Striker, load_shot, with_analysis)
from shpb.simulate import (IncidentPulse, JohnsonCookLaw, PerfectlyPlastic, RecorderSpec, RodSpec, TrueStressLaw,
                           VirtualShotSpec, digitise, dispersed_drive, excess_dispersion, incident_pulse,
                           model_duration, plan_shot, simulate_shot, trigger_time, virtual_record)
from shpb.simulate import _fourier_delay
from shpb.virtual import load_simulation

REPO = Path(__file__).resolve().parents[1]
E_BAR, RHO_BAR, NU_BAR, YIELD_BAR, D_BAR = 190e9, 8000.0, 0.30, 1900e6, 0.01905
C0 = math.sqrt(E_BAR / RHO_BAR)
L_INC, L_TRA, D_INC, D_TRA = 0.8, 0.6, 0.4, 0.2
# HR-A61-like specimen law (the example data's): Johnson-Cook in true stress, reference rate 1e-3 1/s
E_SPEC, RHO_SPEC = 70e9, 2800.0
JC = dict(A=300e6, B=400e6, n=0.40, C=0.010, reference_rate=1e-3)
SPEC_L, SPEC_D = 0.005, 0.008
MATERIAL = Material("maraging-type steel (test)", E_BAR, RHO_BAR, NU_BAR, YIELD_BAR)
GAUGE_I = Gauge(D_INC, "half-bending", 2.1, 10.0, 100.0, 1, full_scale=5.0)
GAUGE_T = Gauge(D_TRA, "half-bending", 2.1, 10.0, 100.0, -1, full_scale=5.0)
RECORDER = RecorderSpec(duration=0.45e-3, pre_trigger=50e-6, noise_volts=(2e-3, 2e-3), offset=(0.01, -0.006), seed=7)
SHAPER = RodSpec(0.001, 0.012, 3e9, 1200.0)  # soft elastic polymer disc: ~10 us rise


def bar(length, diameter=D_BAR):
    return RodSpec(length, diameter, E_BAR, RHO_BAR)


def jc_true(eps_p, rate):
    """Johnson & Cook (1983) flow stress, isothermal, true stress [Pa]."""
    return (JC["A"] + JC["B"] * np.maximum(eps_p, 0.0) ** JC["n"]) * (1 + JC["C"] * np.log(rate / JC["reference_rate"]))


def make_spec(specimen, striker=0.15, speed=20.0, shaper=SHAPER):
    spec = VirtualShotSpec(striker=bar(striker), incident=bar(L_INC), transmitted=bar(L_TRA), specimen=specimen,
                           striker_speed=speed, incident_gauge_distance=D_INC, transmitted_gauge_distance=D_TRA,
                           duration=1.0, sample_rate=10e6, shaper=shaper, shaper_elements=4)
    return dataclasses.replace(spec, duration=model_duration(trigger_time(spec, RECORDER), RECORDER))


def jc_specimen():
    law = TrueStressLaw(JohnsonCookLaw(**JC), E_SPEC)
    return RodSpec(SPEC_L, SPEC_D, E_SPEC, RHO_SPEC, law)


def reduce_virtual(result, spec, *, dispersion_in_record=None, trigger=None, striker=0.15, **analysis):
    """Record a model result and reduce it; the bar set is the rig's (Kolsky analysis of the volts)."""
    rec = virtual_record(result, RECORDER, GAUGE_I, GAUGE_T, incident_poisson_ratio=NU_BAR, transmitted_poisson_ratio=NU_BAR,
                         dispersion=dispersion_in_record, trigger=trigger)
    bs = BarSet("test rig", Bar(MATERIAL, D_BAR, L_INC), Bar(MATERIAL, D_BAR, L_TRA), GAUGE_I, GAUGE_T,
                Striker(striker, D_BAR, MATERIAL))
    options = dict(dispersion=False)  # the reduction's own window holds the whole shaped pulse
    if dispersion_in_record is None:
        # bars without dispersion carry every frequency, so the yield knee stays sharper than a real bar's
        # second mode (which the low-pass stands for, docs/reduction.md) would let through
        options["lowpass"] = False
    options.update(analysis)
    shot = Shot("virtual", bs, Specimen(spec.specimen.length, spec.specimen.diameter, "test alloy",
                                        modulus=spec.specimen.modulus),
                RecordSpec(Channel(Path("virtual.csv"), "CH1"), Channel(Path("virtual.csv"), "CH2"),
                           sample_interval=1e-7),
                AnalysisOptions(**options))
    record = Record(time=rec.time, dt=1e-7, incident=rec.volts_incident, transmitted=rec.volts_transmitted)
    return shot, record, reduce_shot(shot, record)


def loading_truth(truth):
    """The truth up to its peak strain (monotonic strain: stress and rate can be read at a strain)."""
    peak = int(truth.strain.to_numpy().argmax())
    part = truth.iloc[: peak + 1]
    return part[part.time_us > 0]


def stress_errors(result, truth, column="stress_MPa", mask=None):
    """Relative errors of a reduced stress column against the truth at the same engineering strain."""
    c = result.curves
    valid = (c.valid.to_numpy() == 1) if mask is None else mask
    strain = c.strain.to_numpy()[valid]
    lt = loading_truth(truth)
    expected = np.interp(strain, lt.strain, lt.stress_MPa)
    return (c[column].to_numpy()[valid] - expected) / expected


@pytest.fixture(scope="module")
def plain_shot():
    """HR-A61-like specimen at ~3000 1/s, records without dispersion."""
    spec = make_spec(jc_specimen())
    result = simulate_shot(spec)
    shot, record, reduced = reduce_virtual(result, spec)
    return spec, result, reduced


@pytest.fixture(scope="module")
def dispersed_shot():
    """The same shot with Pochhammer–Chree dispersion: the drive dispersed over the incident bar, every
    recorded wave over its path from the specimen faces."""
    spec = make_spec(jc_specimen())
    run = dispersed_drive(spec, NU_BAR)
    lead = run.incident_pulse.impact_time
    result = simulate_shot(dataclasses.replace(run, duration=spec.duration + lead))
    trigger = trigger_time(spec, RECORDER) + lead
    shot, record, _ = reduce_virtual(result, spec, dispersion_in_record="specimen", trigger=trigger)
    on = reduce_shot(with_analysis(shot, dispersion=True), record)
    off = reduce_shot(with_analysis(shot, dispersion=False), record)
    return spec, result, on, off, (shot, record)


# --------------------------------------------------------------------------- the model's wave split
def test_gauge_waves_split_into_travelling_waves():
    # d'Alembert (Graff 1975, Wave Motion in Elastic Solids, ch. 2): the bar strain is the sum of a wave
    # travelling each way; a matched striker sends eps = v / (2 c0) for 2 L / c0 (Kolsky 1949; Kolsky 1963). Bars together (identical bars, R = 0, T = 1): nothing travels back towards the striker.
    spec = VirtualShotSpec(striker=bar(0.15), incident=bar(L_INC), transmitted=bar(L_TRA), specimen=None,
                           striker_speed=10.0, incident_gauge_distance=D_INC, transmitted_gauge_distance=D_TRA,
                           duration=0.3e-3, sample_rate=10e6)
    res = simulate_shot(spec)
    t, w = res.time, res.gauge_waves
    toward, away = w["incident_toward_specimen"], w["incident_away_from_specimen"]
    foot = res.foot_arrival_time - D_INC / C0
    plateau = (t > foot + 1e-6) & (t < foot + 2 * 0.15 / C0 - 1e-6)
    assert np.allclose(toward[plateau], 10.0 / (2 * C0), rtol=1e-9, atol=0)
    assert np.all(np.abs(away) < 1e-12 * toward.max())
    assert np.allclose(w["transmitted_away_from_specimen"][plateau & (t > foot + (D_INC + D_TRA) / C0 + 1e-6)],
                       10.0 / (2 * C0), rtol=1e-9, atol=0)
    # the two waves add up to the gauge strain (the split is exact at nodes; the gauge interpolates between
    # element centres, so only the one-element-wide front differs)
    smooth = np.abs(np.gradient(res.strain_incident_gauge)) < 1e-3 * toward.max()
    assert np.allclose((toward + away)[smooth], res.strain_incident_gauge[smooth], rtol=0, atol=1e-9 * toward.max())


@pytest.mark.slow
def test_prescribed_pulse_reproduces_the_striker_shot(plain_shot):
    # Until the far end's echo returns (2 L / c0), the impact face does not feel what lies beyond it
    # (finite wave speed; Graff 1975 ch. 2), so the striker's pulse read in a striker-and-bar run and sent in
    # as a prescribed force gives the same shot (superposition in the elastic bar).
    spec, result, _ = plain_shot
    pulse = incident_pulse(spec)
    assert isinstance(pulse, IncidentPulse) and pulse.impact_time > 0  # a lead of zeros before the impact
    driven = simulate_shot(dataclasses.replace(spec, striker=None, shaper=None, incident_pulse=pulse,
                                               duration=spec.duration + pulse.impact_time))
    shift = int(round(pulse.impact_time * spec.sample_rate))
    n = result.time.size
    # the prescribed force acts at the step, the striker's through a contact impulse: the two runs may differ
    # by up to half a model step (25 ns) in time, which shows only on the few sharp fronts
    for name in ("strain_incident_gauge", "strain_transmitted_gauge"):
        a, b = getattr(result, name), getattr(driven, name)[shift:shift + n]
        assert np.max(np.abs(a - b)) < 0.01 * np.max(np.abs(a))
        assert np.sqrt(np.mean((a - b) ** 2)) < 1e-3 * np.max(np.abs(a))
    assert np.max(np.abs(result.truth.stress_MPa.to_numpy() - driven.truth.stress_MPa.to_numpy()[shift:shift + n])) \
        < 1e-3 * result.truth.stress_MPa.max()


@pytest.mark.slow
def test_true_stress_law_follows_the_law_at_constant_volume(plain_shot):
    # Volume constancy (Chen & Song 2011 ch. 1): true stress = engineering stress
    # x (1 - e), true strain = -ln(1 - e). The law was put in as a true-stress Johnson-Cook law (Johnson &
    # Cook 1983), so once the specimen is in equilibrium its true stress equals the law at its true plastic
    # strain and true rate.
    _, result, _ = plain_shot
    truth = loading_truth(result.truth)
    flow = truth[(truth.time_us > 15) & (truth.strain > 0.02)
                 & (truth.strain_rate_per_s > 0.5 * truth.strain_rate_per_s.max())]  # plastic flow, not unloading
    e = flow.strain.to_numpy()
    true_stress = flow.stress_MPa.to_numpy() * 1e6 * (1 - e)
    eps_p = -np.log1p(-e) - true_stress / E_SPEC
    expected = jc_true(eps_p, flow.strain_rate_per_s.to_numpy() / (1 - e))
    # tolerance: the law sees -ln(1 - e_p) instead of -ln(1 - e) - sigma/E (~2 e sigma/E, ~0.2 % of stress
    # here) and the total rather than the plastic rate; the rest is the specimen's ring-up
    assert np.allclose(true_stress, expected, rtol=0.01)
    assert e.max() > 0.1  # a large-strain check: engineering and true stress differ by > 10 % here


# --------------------------------------------------------------------------- end to end
@pytest.mark.slow
def test_reduction_recovers_the_law_put_in(plain_shot):
    # Kolsky (1949); Gray (2000) ASM Handbook Vol. 8: once in equilibrium the reduced stress is the
    # specimen's. References: the model's truth (stress at the same strain) and the Johnson-Cook law.
    spec, result, reduced = plain_shot
    assert reduced.valid, [f.message for f in reduced.flags]
    c = reduced.curves
    valid = c.valid.to_numpy() == 1
    assert valid.sum() > 300
    err = stress_errors(reduced, result.truth)
    plastic = c.strain.to_numpy()[valid] > 0.01
    # Tolerance: 2 % pointwise / 0.5 % mean in plastic flow (strain > 0.01, 2.5 yield strains). The
    # transmitted strain is ~6e-4 and the recorder adds 2 mV (1.9 microstrain) noise and 2.4 mV quantisation
    # steps: 0.3-0.5 % per sample on the 1-wave stress; the strain axis adds the noise of the three-wave rate
    # integral. At the yield knee the stress rises at ~E with strain, so a strain offset of 1e-4 moves it by
    # 2 %; and the valid part starts where R(t) is within the threshold widened by the noise propagated to it
    # (docs/verdicts.md: there +-0.04, the ring-up's last swings included): there 5 %. Measured: 1.6 % / 0.27 %
    # (plastic), 4.7 % at the knee.
    assert np.max(np.abs(err[plastic])) < 0.02
    assert np.max(np.abs(err)) < 0.05
    assert np.mean(np.abs(err)) < 0.005
    # the law itself: reduced true stress against Johnson-Cook at the reduced true plastic strain and the
    # truth's true rate at that strain (3 %: the 2 % above plus the ~1 % of the true-stress check)
    lt = loading_truth(result.truth)
    flow = valid & (c.strain.to_numpy() > 0.01)
    strain = c.strain.to_numpy()[flow]
    true_stress = c.true_stress_MPa.to_numpy()[flow] * 1e6
    eps_p = c.true_strain.to_numpy()[flow] - true_stress / E_SPEC
    rate = np.interp(strain, lt.strain, lt.strain_rate_per_s) / (1 - strain)
    assert np.allclose(true_stress, jc_true(eps_p, rate), rtol=0.03)
    strain = c.strain.to_numpy()[valid]
    # strain rate: the reduced mean against the truth at the same strains (2 %: noise averages out)
    truth_rate = np.interp(strain, lt.strain, lt.strain_rate_per_s)
    assert reduced.summary["results"]["mean_strain_rate_per_s"] == pytest.approx(np.mean(truth_rate), rel=0.02)
    assert 2000 < np.mean(truth_rate) < 4000


@pytest.mark.slow
def test_one_and_two_wave_stresses_converge(plain_shot):
    # Equilibrium: front- and back-face forces become equal after a few specimen wave transits
    # (Davies & Hunter 1963, J. Mech. Phys. Solids 11:155, ~pi transits; Ravichandran & Subhash 1994,
    # |R| <= 5 %). Transit here 5 mm / 5000 m/s = 1 us.
    _, _, reduced = plain_shot
    c = reduced.curves
    s1, s2 = c.stress_1wave_MPa.to_numpy(), c.stress_2wave_MPa.to_numpy()
    start = reduced.summary["results"]["loading_from_time_us"]
    t = c.time_us.to_numpy()
    early = (t >= start) & (t < start + 4)
    valid = c.valid.to_numpy() == 1
    late = valid & (t > t[valid][len(t[valid]) // 2])
    gap_early = np.mean(np.abs(s2[early] - s1[early]) / (0.5 * (s1[early] + s2[early])))
    gap_late = np.mean(np.abs(s2[late] - s1[late]) / (0.5 * (s1[late] + s2[late])))
    assert gap_late < 0.02
    assert gap_early > 4 * gap_late


@pytest.mark.slow
def test_long_specimen_is_flagged_out_of_equilibrium():
    # A 20 mm polymer-like specimen (c0 = 1581 m/s: a transit of 12.6 us) under a sharp 41 us pulse never
    # gets the few transits equilibrium needs (Davies & Hunter 1963; Ravichandran & Subhash 1994): the
    # reduction must say so (error flag no_equilibrium), and the truth agrees (|R| > 5 % at the end).
    specimen = RodSpec(0.020, 0.010, 3e9, 1200.0, PerfectlyPlastic(60e6))
    spec = make_spec(specimen, striker=0.10, speed=10.0, shaper=None)
    result = simulate_shot(spec)
    _, _, reduced = reduce_virtual(result, spec, window_length=None, striker=0.10)
    codes = [f.code for f in reduced.flags]
    assert {"no_equilibrium", "short_equilibrium"} & set(codes) and not reduced.valid
    truth = result.truth
    loaded = truth[(truth.time_us > 2) & (truth.time_us < 40)]
    ratio = 2 * (loaded.force_front_kN - loaded.force_back_kN) / (loaded.force_front_kN + loaded.force_back_kN)
    assert np.mean(np.abs(ratio) > 0.05) > 0.5  # the model's own face forces differ by > 5 % most of the time


@pytest.mark.slow
def test_dispersion_correction_brings_the_reduction_closer_to_the_truth(dispersed_shot):
    # Follansbee & Frantz (1983), J. Eng. Mater. Technol. 105:61: a wave recorded at a gauge carries the
    # Pochhammer-Chree dispersion of its path; correcting each wave to its face removes it. Errors against
    # the truth at equal strain, over the loaded part from 20 us (after the rise) to the end of the valid part
    # of the corrected reduction.
    spec, result, on, off, _ = dispersed_shot
    assert on.valid, [f.message for f in on.flags]
    valid_on = on.curves.valid.to_numpy() == 1
    s_from, s_to = on.curves.strain.to_numpy()[valid_on][[0, -1]]
    errors = {}
    for name, red in (("on", on), ("off", off)):
        c = red.curves
        strain = c.strain.to_numpy()
        loading = (c.time_us.to_numpy() > 20) & (strain >= max(s_from, 0.03)) & (strain <= s_to)
        loading &= np.arange(strain.size) <= int(strain.argmax())
        errors[name] = {col: np.sqrt(np.mean(stress_errors(red, result.truth, col, loading) ** 2))
                        for col in ("stress_1wave_MPa", "stress_2wave_MPa")}
    # measured (this rig, seed 7), rms: 1-wave 0.38 % corrected vs 0.78 % not (the transmitted wave
    # travels only 0.2 m); 2-wave (front face: incident + reflected, 0.4 m each way) 0.51 % vs 3.5 %
    assert errors["on"]["stress_1wave_MPa"] < errors["off"]["stress_1wave_MPa"], errors
    assert errors["on"]["stress_2wave_MPa"] < 0.3 * errors["off"]["stress_2wave_MPa"], errors
    assert errors["on"]["stress_1wave_MPa"] < 0.01 and errors["on"]["stress_2wave_MPa"] < 0.01
    # with the correction the valid part is a stress-strain curve as good as the dispersion-free one
    err = stress_errors(on, result.truth)
    assert np.max(np.abs(err)) < 0.04 and np.mean(np.abs(err)) < 0.008


def test_excess_dispersion_shifts_each_harmonic_by_the_pochhammer_chree_delay():
    # Pochhammer-Chree phase velocity (Bancroft 1941): at a/Lambda = 0.1, nu = 0.30, c/c0 = 0.99054
    # (computed from the frequency equation, Graff 1975 section 8.2; the table of test_dispersion.py). A tone burst at that frequency carried 1 m without the bulk delay d/c0 lags by the
    # phase 2 pi f d (1/c - 1/c0).
    a = D_BAR / 2
    c = 0.99054 * C0
    f = c / (a / 0.1)
    dt, d = 1e-7, 1.0
    t = np.arange(20000) * dt
    envelope = np.exp(-0.5 * ((t - 1e-3) / 250e-6) ** 2)
    burst = envelope * np.sin(2 * np.pi * f * t)
    out = excess_dispersion(burst, dt, d, a, C0, NU_BAR)
    core = np.abs(t - 1e-3) < 100e-6  # where the envelope hardly moves (group delay ~ 4 us)
    phase = lambda x: np.angle(np.sum(x[core] * np.exp(-2j * np.pi * f * t[core])))  # noqa: E731
    lag = (phase(burst) - phase(out)) % (2 * np.pi)
    # tolerance 3 mrad (0.5 %): the table's five digits give ~0.7 mrad; the rest is the measurement
    assert lag == pytest.approx(2 * np.pi * f * d * (1 / c - 1 / C0), abs=3e-3)
    # and the sub-sample Fourier shift behind it moves a signal by whole samples exactly (shift theorem)
    x = np.sin(2 * np.pi * 3 * np.arange(512) / 512) * np.hanning(512)
    assert np.allclose(_fourier_delay(x, dt, 5 * dt)[5:], x[:-5], atol=1e-12)


@pytest.mark.slow
def test_amplitude_factors_keep_the_reduction_on_the_truth(dispersed_shot):
    # amplitude_factors = true (docs/setup-files.md) adds the radial amplitude factors of Tyas & Watson
    # (2001, Int. J. Impact Eng. 25:87) to the Pochhammer-Chree correction: mean over surface strain
    # times (c/c0)^2, 1 at zero frequency and 1.0322 x 0.99113^2 = 1.014 at a/Lambda = 0.1 (the values of
    # test_dispersion.py, computed from the Pochhammer-Chree mode shape, Graff 1975 section 8.2). This
    # shaped pulse lies almost wholly below a/Lambda = 0.1 (50 kHz in these 19 mm bars), so the factors
    # may move the stress by a little over 1 % at most, and the reduction must stay on the model's truth.
    _, result, on, _, (shot, record) = dispersed_shot
    with_factors = reduce_shot(with_analysis(shot, dispersion=True, amplitude_factors=True), record)
    assert with_factors.valid, [f.message for f in with_factors.flags]
    shift = next(p for p in with_factors.summary["provenance"] if p["step"] == "shift")
    assert shift["parameters"]["dispersion"]["amplitude_factors"] is True
    # Against the truth at equal strain over the valid part: the bounds of the plain correction
    # (test_dispersion_correction_brings_the_reduction_closer_to_the_truth: 4 % max, 0.8 % mean) widened by
    # the factors' 1.4 %. Measured: 4.1 % max, 0.44 % mean.
    err = stress_errors(with_factors, result.truth)
    assert np.max(np.abs(err)) < 0.055 and np.mean(np.abs(err)) < 0.008 + 0.014
    # and the mean valid stress moves by less than the factors' 1.4 % (measured +0.9 %)
    mean_with = np.mean(with_factors.curves.stress_MPa[with_factors.curves.valid == 1])
    mean_without = np.mean(on.curves.stress_MPa[on.curves.valid == 1])
    assert mean_with == pytest.approx(mean_without, rel=0.014)


# --------------------------------------------------------------------------- recorder
def test_digitiser_codes_and_rails():
    # A b-bit converter over +/-FS has 2**b codes of 2 FS / 2**b from -2**(b-1) to 2**(b-1) - 1 (common
    # practice for two's-complement converters): 12 bits over +/-5 V -> 2.44140625 mV.
    step = 10.0 / 4096
    v = np.array([0.0, 1.3 * step, -0.4 * step, 2047.4 * step, 6.0, -6.0])
    assert np.allclose(digitise(v, 12, 5.0), [0.0, step, 0.0, 2047 * step, 2047 * step, -5.0], atol=1e-15)
    assert np.array_equal(digitise(v, None, 5.0), np.clip(v, -5, 5))


@pytest.mark.slow
def test_noise_in_microstrain_goes_through_the_bridge(plain_shot):
    # Half-bending bridge (Dally & Riley 1991 ch. 7): Vr = GF eps / (2 + GF eps),
    # so near zero dV/deps = gain V_exc GF / 2 = 1050 V per unit strain: 3 microstrain -> 3.15 mV rms.
    _, result, _ = plain_shot
    rec = RecorderSpec(duration=0.45e-3, pre_trigger=50e-6, bits=None, full_scale=(None, None),
                       noise_strain=(3e-6, 3e-6), seed=3)
    vr = virtual_record(result, rec, GAUGE_I, GAUGE_T, incident_poisson_ratio=NU_BAR, transmitted_poisson_ratio=NU_BAR)
    quiet = vr.time < 0  # before the trigger: no pulse at either gauge
    for channel in (vr.volts_incident, vr.volts_transmitted):
        assert np.std(channel[quiet]) == pytest.approx(3e-6 * 100 * 10 * 2.1 / 2, rel=0.1)
    assert vr.info["noise_std_V"]["incident"] == pytest.approx(3.15e-3, rel=1e-3)


# --------------------------------------------------------------------------- planning, setup file, CLI
def test_planned_bar_stress_matches_the_striker_relations():
    # Computed from sigma = rho c0 v / 2 (Kolsky 1963, from memory): a matched steel striker (E 200 GPa,
    # rho 7850) at 10 m/s gives 7850 x 5047.54 x 10 / 2 = 198.12 MPa for 2 L / c0 = 118.87 us; the
    # impedance form (v / c) Z_s / (Z_s + Z_b) (Kolsky 1963) for another striker.
    steel = RodSpec(0.3, 0.02, 200e9, 7850.0)
    spec = VirtualShotSpec(striker=steel, incident=RodSpec(1.0, 0.02, 200e9, 7850.0),
                           transmitted=RodSpec(1.0, 0.02, 200e9, 7850.0), specimen=None, striker_speed=10.0,
                           incident_gauge_distance=0.5, transmitted_gauge_distance=0.25, duration=1e-4,
                           sample_rate=10e6)
    plan = plan_shot(spec, 1500e6)
    assert plan["incident_bar_stress_MPa"] == pytest.approx(198.12, abs=0.01)
    assert plan["pulse_duration_us"] == pytest.approx(118.87, abs=0.01)
    assert not plan["yields"]
    thin = dataclasses.replace(spec, striker=RodSpec(0.3, 0.01, 200e9, 7850.0))
    zs, zb = thin.striker.impedance, spec.incident.impedance
    assert plan_shot(thin)["incident_bar_stress_MPa"] == pytest.approx(2 * 198.12 * zs / (zs + zb), rel=1e-4)


def write_setup(folder, speed="20 m/s", extra=""):
    """A bar set and a simulation setup file in ``folder`` (the test rig); returns the setup path."""
    (folder / "bars.toml").write_text(f'''name = "test rig"
[bar_material]
modulus = "190 GPa"
density = "8000 kg/m^3"
poisson_ratio = 0.30
yield_strength = "1900 MPa"
[incident]
diameter = "19.05 mm"
length = "{L_INC} m"
[incident.gauge]
distance = "{D_INC * 1e3:g} mm"
gauge_factor = 2.1
excitation = "10 V"
gain = 100
full_scale = "5 V"
[transmitted]
diameter = "19.05 mm"
length = "{L_TRA} m"
[transmitted.gauge]
distance = "{D_TRA * 1e3:g} mm"
gauge_factor = 2.1
excitation = "10 V"
gain = 100
polarity = -1
full_scale = "5 V"
[striker]
length = "0.15 m"
''')
    path = folder / "sim.toml"
    path.write_text(f'''name = "T-1"
barset = "bars.toml"
[striker]
speed = "{speed}"
[specimen]
material = "test alloy (fictional)"
length = "5 mm"
diameter = "8 mm"
modulus = "70 GPa"
density = "2800 kg/m^3"
law = "johnson-cook"
A = "300 MPa"
B = "400 MPa"
n = 0.4
C = 0.01
reference_rate = "0.001 1/s"
[shaper]
thickness = "1 mm"
diameter = "12 mm"
modulus = "3 GPa"
density = "1200 kg/m^3"
elements = 4
[recorder]
duration = "0.45 ms"
pre_trigger = "50 us"
noise = "2 mV"
offset = ["10 mV", "-6 mV"]
seed = 11
{extra}''')
    return path


@pytest.mark.slow
def test_cli_writes_the_four_outputs_and_the_shot_reduces(tmp_path, capsys):
    setup = write_setup(tmp_path)
    out = tmp_path / "out"
    assert main(["simulate", str(setup), "--out", str(out)]) == 0
    printed = capsys.readouterr().out
    assert "peak incident bar stress" in printed and "does not replace the laboratory's safety rules" in printed
    for name in ("T-1.csv", "T-1.toml", "T-1_truth.csv", "T-1.png"):
        assert (out / name).is_file(), name
    header = (out / "T-1_truth.csv").read_text().splitlines()[0]
    assert header == "time_us,stress_MPa,strain,strain_rate_per_s,force_front_kN,force_back_kN"
    shot = load_shot(out / "T-1.toml")
    assert shot.analysis.dispersion and shot.barset.name == "test rig"
    reduced = reduce_shot(shot)
    assert reduced.valid, [f.message for f in reduced.flags]
    assert main(["reduce", str(out / "T-1.toml"), "--out", str(tmp_path / "reduced"), "--no-figure"]) == 0


def test_planning_refuses_a_striker_speed_that_yields_the_bar(tmp_path, capsys):
    # sigma = rho c0 v / 2 (Kolsky 1963, from memory) reaches the 1900 MPa yield at v = 2 sigma_y / (rho c0)
    # = 97.5 m/s for these bars.
    v_yield = 2 * YIELD_BAR / (RHO_BAR * C0)
    assert v_yield == pytest.approx(97.47, abs=0.01)
    setup = write_setup(tmp_path, speed=f"{v_yield * 1.01:.2f} m/s")
    out = tmp_path / "out"
    assert main(["simulate", str(setup), "--out", str(out)]) == 2
    err = capsys.readouterr().err
    assert "sim.toml: striker.speed" in err and "yield strength" in err and "--allow-bar-yield" in err
    assert not out.exists()
    just_below = load_simulation(write_setup(tmp_path, speed=f"{v_yield * 0.99:.2f} m/s"))
    assert not plan_shot(just_below.spec, just_below.yield_strength)["yields"]


@pytest.mark.parametrize("extra, key", [
    ('[model]\nx = 1\n', "unknown key 'model'"),
    ('', None),
])
def test_setup_errors_name_the_file_and_key(tmp_path, extra, key):
    setup = write_setup(tmp_path, extra=extra)
    if key is None:  # the base file loads; break it key by key
        text = setup.read_text()
        cases = [
            (text.replace('law = "johnson-cook"', 'law = "plastic"'), "specimen.law"),
            (text.replace('speed = "20 m/s"', 'speed = "20 m"'), "striker.speed"),
            (text.replace('noise = "2 mV"', 'noise = 0.002'), "recorder.noise"),
            (text.replace('n = 0.4\n', ''), "missing key 'n'"),
            (text.replace('seed = 11', 'seed = -1'), "recorder.seed"),
            (text.replace('seed = 11', 'seed = 11\nsample_rate = "1 kHz"'), "recorder.duration"),
            (text.replace('name = "T-1"', 'name = 5'), "sim.toml: name"),
        ]
        for broken, where in cases:
            setup.write_text(broken)
            with pytest.raises(InputError, match=where) as info:
                load_simulation(setup)
            assert "sim.toml" in str(info.value)
    else:
        with pytest.raises(InputError, match=key):
            load_simulation(setup)


@pytest.mark.slow
def test_example_shot_reduces_valid_with_dispersion_correction():
    # The README's first command reduces configs/example_shot.toml (synthetic example data, regenerated by
    # scripts/make_example_data.py); it must reduce VALID with the dispersion correction on.
    shot = load_shot(REPO / "configs" / "example_shot.toml")
    assert shot.analysis.dispersion
    reduced = reduce_shot(shot)
    assert reduced.valid, [f.message for f in reduced.flags]


def test_truth_table_ends_after_the_loading_not_at_a_late_contact_blip():
    # The truth table covers the specimen's loading (common practice: a reduction is compared with the first
    # loading only). After unloading, the model's specimen rattles between the bar faces in contact blips, now and
    # then above 1 % of the peak force, whose timing changes with round-off; the table must end 20 us after the
    # forces first fall back to 1 % of their peak, whatever blips follow.
    from types import SimpleNamespace

    from shpb.virtual import TRUTH_COLUMNS, TRUTH_MARGIN, _truth_rows

    t = np.arange(-50.0, 600.0, 0.1)  # us
    force = np.where((t > 0) & (t < 200), 30.0 * np.sin(np.pi * np.clip(t, 0, 200) / 200) ** 2, 0.0)  # kN
    last_above = t[(force > 0.3) & (t > 100)].max()  # the last sample above 1 % of the 30 kN peak
    for blip_at in (None, 350.0, 480.0):
        f = force.copy()
        if blip_at is not None:
            f[np.abs(t - blip_at) < 0.5] = 1.2  # 4 % of the peak, after the specimen has unloaded
        columns = {name: np.zeros_like(t) for name in TRUTH_COLUMNS}
        columns.update(time_us=t, force_front_kN=f, force_back_kN=f)
        rows = _truth_rows(SimpleNamespace(truth_columns=columns), None, TRUTH_MARGIN, TRUTH_MARGIN)
        assert rows[0, 0] == pytest.approx(-TRUTH_MARGIN * 1e6, abs=0.1)
        assert rows[-1, 0] == pytest.approx(last_above + TRUTH_MARGIN * 1e6, abs=0.1), blip_at
