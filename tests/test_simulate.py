"""Checks of the virtual shot model (shpb.simulate) against outside results.

Each check names its source. Rigs are short (0.1-0.3 m strikers, 0.5-1 m
bars) so the whole file runs in a few seconds; the physics does not depend
on the bar length.
"""

import math

import numpy as np
import pytest
from scipy.integrate import trapezoid

from shpb.errors import AnalysisError, InputError
from shpb.simulate import (
    FlowStressLaw,
    JohnsonCookLaw,
    PerfectlyPlastic,
    RodSpec,
    VirtualShotSpec,
    radial_return,
    simulate_shot,
)


# A generic steel bar, round values (common practice): E = 200 GPa, rho = 7850 kg/m^3, so
# c0 = sqrt(E/rho) = 5047.54 m/s (computed from Kolsky 1949).
E_STEEL, RHO_STEEL = 200e9, 7850.0
C0 = math.sqrt(E_STEEL / RHO_STEEL)


def steel(length, diameter=0.02):
    return RodSpec(length, diameter, E_STEEL, RHO_STEEL)


def shot(**changes):
    """A bars-together shot on a short steel rig; keyword arguments override fields."""
    fields = dict(striker=steel(0.3), incident=steel(1.0), transmitted=steel(1.0), specimen=None,
                  striker_speed=10.0, incident_gauge_distance=0.5, transmitted_gauge_distance=0.25,
                  duration=0.30e-3, sample_rate=10e6)
    fields.update(changes)
    return VirtualShotSpec(**fields)


def plateau(signal, time, start, stop):
    window = (time > start) & (time < stop)
    assert window.sum() > 10
    return signal[window]


# --------------------------------------------------------------------------- striker and incident pulse
def test_matched_striker_gives_v_over_2c0_for_2L_over_c0():
    # Kolsky (1949); Graff (1975), Wave Motion in Elastic Solids, ch. 2: a striker of the bar's own
    # material and diameter gives eps_i = v / (2 c0) lasting 2 L / c0.
    # Computed from those relations: v = 10 m/s -> 10 / (2 x 5047.54) = 9.9058e-4; a 0.3 m striker ->
    # 2 x 0.3 / 5047.54 = 118.87 us.
    res = simulate_shot(shot())
    t, eps = res.time, res.strain_incident_gauge
    assert np.allclose(plateau(eps, t, 110e-6, 210e-6), 9.9058e-4, rtol=1e-4, atol=0)
    assert np.allclose(plateau(eps, t, 110e-6, 210e-6), 10.0 / (2 * C0), rtol=1e-12, atol=0)
    # duration between half-amplitude crossings; the modelled striker is a whole number of
    # elements (c0 dt), so its length, hence the duration, may differ by up to half an element
    half = 0.5 * eps.max()
    above = np.flatnonzero(eps > half)
    i, j = above[0], above[-1]
    rise = t[i - 1] + (half - eps[i - 1]) / (eps[i] - eps[i - 1]) * (t[i] - t[i - 1])
    fall = t[j] + (eps[j] - half) / (eps[j] - eps[j + 1]) * (t[j + 1] - t[j])
    duration = fall - rise
    rounding = 0.5 * res.grid["rods"]["striker"]["element_length_m"] * 2 / C0
    assert abs(duration - 118.87e-6) <= rounding + 0.01e-6
    modelled = 2 * res.grid["rods"]["striker"]["length_m"] / C0
    assert duration == pytest.approx(modelled, abs=1e-12)


@pytest.mark.parametrize("striker", [
    RodSpec(0.3, 0.015, E_STEEL, RHO_STEEL),  # thinner steel striker
    RodSpec(0.3, 0.025, E_STEEL, RHO_STEEL),  # thicker steel striker
    RodSpec(0.3, 0.02, 70e9, 2700.0),  # aluminium striker, same diameter
])
def test_striker_of_other_impedance(striker):
    # Kolsky (1963), Stress Waves in Solids (from memory):
    # eps_i = (v / c_b) Z_s / (Z_s + Z_b), Z = rho c0 A; this is the first step of the pulse,
    # lasting 2 L_s / c_s.
    res = simulate_shot(shot(striker=striker, duration=0.2e-3))
    bar = steel(1.0)
    expected = 10.0 / C0 * striker.impedance / (striker.impedance + bar.impedance)
    foot_at_gauge = res.foot_arrival_time - 0.5 / C0
    first_step = plateau(res.strain_incident_gauge, res.time, foot_at_gauge + 1e-6,
                         foot_at_gauge + 2 * 0.3 / striker.wave_speed - 1e-6)
    assert np.allclose(first_step, expected, rtol=1e-10, atol=0)


# --------------------------------------------------------------------------- interfaces
@pytest.mark.parametrize("transmitted", [
    RodSpec(1.0, 0.02, 70e9, 2700.0),  # aluminium, same diameter: Z2 < Z1
    RodSpec(1.0, 0.03, E_STEEL, RHO_STEEL),  # larger steel bar: Z2 > Z1
    RodSpec(1.0, 0.01, E_STEEL, RHO_STEEL),  # smaller steel bar: Z2 < Z1
])
def test_interface_reflection_and_transmission_of_force(transmitted):
    # Graff (1975) ch. 2; Kolsky (1953) Stress Waves in Solids: at a junction of rods of impedance
    # Z = rho c0 A, the reflected and transmitted FORCE amplitudes are F_r = R F_i and F_t = T F_i
    # with R = (Z2 - Z1)/(Z1 + Z2) and T = 2 Z2/(Z1 + Z2) (for equal areas the same holds for stress
    # with Z = rho c0). Here R <= 0 or > 0 both keep the contact in compression (F_i (1 + R) > 0).
    res = simulate_shot(shot(transmitted=transmitted, duration=0.6e-3))
    incident = steel(1.0)
    z1, z2 = incident.impedance, transmitted.impedance
    r_coef, t_coef = (z2 - z1) / (z1 + z2), 2 * z2 / (z1 + z2)
    force_incident = E_STEEL * incident.area * 10.0 / (2 * C0)
    t = res.time
    # the reflected pulse at the incident gauge (0.5 m back from the interface)
    t_ref = res.foot_arrival_time + 0.5 / C0
    force_r = E_STEEL * incident.area * plateau(res.strain_incident_gauge, t, t_ref + 5e-6, t_ref + 100e-6)
    assert np.allclose(force_r / force_incident, r_coef, rtol=1e-9, atol=1e-12)
    # the transmitted pulse at 0.25 m into the second rod
    t_tra = res.foot_arrival_time + 0.25 / transmitted.wave_speed
    force_t = transmitted.modulus * transmitted.area * plateau(res.strain_transmitted_gauge, t,
                                                               t_tra + 5e-6, t_tra + 100e-6)
    assert np.allclose(force_t / force_incident, t_coef, rtol=1e-9, atol=0)


def test_bars_together_transmit_the_whole_pulse():
    # Bars-together shot (common practice for checking a bar pair; Gray 2000, ASM Handbook Vol. 8):
    # identical bars in contact transmit the pulse unchanged and reflect nothing (R = 0, T = 1 in
    # Graff 1975 ch. 2).
    res = simulate_shot(shot(duration=0.8e-3))
    t, eps_i, eps_t = res.time, res.strain_incident_gauge, res.strain_transmitted_gauge
    amplitude = 10.0 / (2 * C0)
    t_ref = res.foot_arrival_time + 0.5 / C0
    t_tra = res.foot_arrival_time + 0.25 / C0
    assert np.allclose(plateau(eps_t, t, t_tra + 1e-6, t_tra + 115e-6), amplitude, rtol=1e-12, atol=0)
    incident_window = t < t_ref - 1e-6
    transmitted_window = (t > t_tra - 1e-6) & (t < t_tra + 125e-6)
    assert trapezoid(eps_t[transmitted_window], t[transmitted_window]) == pytest.approx(
        trapezoid(eps_i[incident_window], t[incident_window]), rel=1e-10)
    # Nothing comes back into the incident bar: no reflection at the joint, and when the transmitted
    # pulse returns from the far free end as tension (foot + 2 * 1 m / c0 at the joint), the
    # compression-only contact opens instead of passing it on (an interface that only pushes cannot
    # carry tension; the principle of the momentum trap, common practice).
    assert t[-1] > t_ref + 2 * 1.0 / C0 + 50e-6
    assert np.all(np.abs(eps_i[t > t_ref + 1e-6]) < 1e-12 * amplitude)
    # at the transmitted gauge: the tensile free-end reflection (Graff ch. 2), then, once it has met the
    # opened joint (now a free end) and come back as compression, the two cancel
    t_back = t_tra + 2 * 0.75 / C0
    assert np.allclose(plateau(eps_t, t, t_back + 1e-6, t_back + 95e-6), -amplitude, rtol=1e-9, atol=0)
    assert np.all(np.abs(plateau(eps_t, t, t_back + 2 * 0.25 / C0 + 1e-6, t_back + 115e-6)) < 1e-12 * amplitude)


# --------------------------------------------------------------------------- time base and grid
def test_time_origin_and_recorder_clock():
    # With no shaper the foot enters the incident bar at impact and crosses it at c0 = sqrt(E/rho)
    # (Graff 1975 ch. 2), so it reaches the specimen face at L / c0; the gauge at distance d from the
    # face sees the foot d / c0 earlier. Samples are on the recorder clock, 1/fs apart.
    res = simulate_shot(shot(duration=0.25e-3))
    length = res.grid["rods"]["incident"]["length_m"]
    assert abs(length - 1.0) <= 0.5 * res.grid["rods"]["incident"]["element_length_m"]
    assert res.foot_arrival_time == pytest.approx(length / C0, abs=1e-15)
    assert np.allclose(np.diff(res.time), 1e-7, rtol=1e-9, atol=0)
    foot_at_gauge = res.time[np.argmax(res.strain_incident_gauge > 1e-3 * res.strain_incident_gauge.max())]
    assert abs(foot_at_gauge - (res.foot_arrival_time - 0.5 / C0)) <= 1e-7
    truth = res.truth
    assert (truth.force_front_kN[truth.time_us < -0.1] == 0).all()
    assert (truth.force_front_kN[truth.time_us > 0.1].iloc[:100] > 0).all()


# --------------------------------------------------------------------------- energy
def test_energy_is_conserved_in_an_elastic_run():
    # Energy conservation of an undamped elastic system (Graff 1975 ch. 2: the energy of a rod,
    # kinetic + strain, travels with the wave). Leapfrog conserves the discrete energy
    # sum m v(n-1/2) v(n+1/2)/2 + sum F^2 dx/(2 EA) to round-off; the only loss is the impact itself,
    # a perfectly inelastic collision of the two end nodes: mu v^2 / 2 with mu = m_a m_b/(m_a + m_b)
    # (momentum conservation, elementary mechanics).
    specimen = RodSpec(0.005, 0.01, 70e9, 2700.0)
    res = simulate_shot(shot(striker=steel(0.1), incident=steel(0.5), transmitted=steel(0.5), specimen=specimen,
                             incident_gauge_distance=0.25, duration=0.2e-3))
    energy = res.energies
    e0 = res.grid["initial_kinetic_J"]
    # both striker and incident end nodes carry half an element of the same steel bar
    dx = res.grid["rods"]["striker"]["element_length_m"]
    half_node = 0.5 * RHO_STEEL * steel(0.1).area * dx
    loss = 0.5 * (half_node / 2) * 10.0**2
    loading = energy.total_J[(energy.time_us > -99) & (energy.time_us < 30)]
    assert np.allclose(loading, e0 - loss, rtol=1e-11, atol=0)
    # over the whole record (rebounds and re-closing contacts lose a little more)
    assert np.all(np.abs(energy.total_J.iloc[1:] - (e0 - loss)) < 1e-5 * e0)
    assert loss / e0 == pytest.approx(dx / (4 * 0.1), rel=0.01)  # the documented ~dx/(4 L) fraction


def test_result_pickled_before_its_energies_still_conserves_energy():
    # The energy balance is computed on first use; a result sent through a process pool (pickled) before that
    # must carry it. Checked against the same conservation law as above (Graff 1975 ch. 2; the inelastic loss
    # of the two impacting end nodes, elementary mechanics), on the copy.
    import pickle

    res = simulate_shot(shot(striker=steel(0.1), incident=steel(0.5), transmitted=steel(0.5),
                             specimen=RodSpec(0.005, 0.01, 70e9, 2700.0), incident_gauge_distance=0.25,
                             duration=0.2e-3))
    copy = pickle.loads(pickle.dumps(res))
    energy, e0 = copy.energies, copy.grid["initial_kinetic_J"]
    half_node = 0.5 * RHO_STEEL * steel(0.1).area * copy.grid["rods"]["striker"]["element_length_m"]
    loading = energy.total_J[(energy.time_us > -99) & (energy.time_us < 30)]
    assert np.allclose(loading, e0 - 0.5 * (half_node / 2) * 10.0**2, rtol=1e-11, atol=0)


# --------------------------------------------------------------------------- specimen behaviour
@pytest.fixture(scope="module")
def perfectly_plastic_shot():
    # aluminium-like specimen, 5 mm x 10 mm, yield 300 MPa, between 20 mm steel bars
    specimen = RodSpec(0.005, 0.01, 70e9, 2700.0, PerfectlyPlastic(300e6))
    return simulate_shot(shot(striker=steel(0.15), incident=steel(0.5), transmitted=steel(0.5),
                              specimen=specimen, incident_gauge_distance=0.25, duration=0.17e-3))


def test_perfectly_plastic_specimen_flows_at_its_yield_stress(perfectly_plastic_shot):
    # Elastic-perfectly-plastic specimen in equilibrium: stress = yield stress (definition of the law;
    # Kolsky 1949 for the measurement principle). The striker pulse lasts 2 * 0.15 / c0 = 59.4 us.
    truth = perfectly_plastic_shot.truth
    flow = truth[(truth.time_us > 6) & (truth.time_us < 55)]
    assert np.allclose(flow.stress_MPa, 300.0, rtol=1e-3, atol=0)
    # equilibrium: front and back face forces equal sigma_y A_s
    force = 300e6 * math.pi * 0.01**2 / 4 / 1e3
    assert np.allclose(flow.force_front_kN, force, rtol=1e-3, atol=0)
    assert np.allclose(flow.force_back_kN, force, rtol=1e-3, atol=0)
    # what the transmitted-bar gauge sees (Kolsky 1949: F2 = E_b A_b eps_t): a flat plateau at
    # sigma_y A_s / (E_b A_b), with no grid ringing from the bar end that the specimen drives
    res = perfectly_plastic_shot
    t_tra = res.foot_arrival_time + 0.25 / C0
    eps_t = plateau(res.strain_transmitted_gauge, res.time, t_tra + 6e-6, t_tra + 55e-6)
    assert np.allclose(eps_t, force * 1e3 / (E_STEEL * steel(0.5).area), rtol=1e-6, atol=0)


def test_equilibrium_after_a_few_transits(perfectly_plastic_shot):
    # Davies & Hunter (1963), J. Mech. Phys. Solids 11:155: equilibrium after about pi transits
    # L_s / c_s (from memory); Ravichandran & Subhash (1994), J. Am. Ceram. Soc. 77:263:
    # R = 2 (F1 - F2)/(F1 + F2) <= 0.05, reached after about 4 transits (from memory)
    # Causality: the back face cannot feel the load before one elastic
    # transit (c_s = sqrt(E/rho), Graff 1975 ch. 2).
    truth = perfectly_plastic_shot.truth
    transit_us = 0.005 / math.sqrt(70e9 / 2700.0) * 1e6
    dt_us = perfectly_plastic_shot.grid["dt_s"] * 1e6
    before = truth[truth.time_us < transit_us - 2 * dt_us]
    assert (before.force_back_kN == 0).all()
    loading = truth[(truth.time_us > 0.05) & (truth.time_us < 55)]
    ratio = 2 * (loading.force_front_kN - loading.force_back_kN) / (loading.force_front_kN + loading.force_back_kN)
    outside = np.flatnonzero(np.abs(ratio.to_numpy()) > 0.05)
    t_equilibrium = loading.time_us.iloc[outside[-1] + 1]
    assert 1.0 < t_equilibrium / transit_us <= 4.5


def test_johnson_cook_values():
    # Computed from the Johnson & Cook (1983) flow-stress equation with their published constants
    # (4340: Johnson & Cook 1985, Eng. Fract. Mech. 21:31; copper and Armco iron: Johnson & Cook 1983;
    # constants as quoted secondarily, not read in the printed tables), T* = 0, 1000 1/s:
    # AISI 4340 (792, 510 MPa, 0.26, 0.014): eps_p = 0.1 -> 1175.96 MPa;
    # OFHC Cu (90, 292 MPa, 0.31, 0.025): 0.2 -> 313.46 MPa; Armco iron (175, 380, 0.32, 0.060): 0.1 -> 504.79.
    cases = [((792e6, 510e6, 0.26, 0.014), 0.1, 1175.96e6),
             ((90e6, 292e6, 0.31, 0.025), 0.2, 313.46e6),
             ((175e6, 380e6, 0.32, 0.060), 0.1, 504.79e6)]
    for (a, b, n, c), strain, expected in cases:
        assert JohnsonCookLaw(a, b, n, c).flow_stress(np.array([strain]), np.array([1000.0]))[0] == \
            pytest.approx(expected, abs=0.006e6)
    # below the reference rate, down to zero rate, the simulator's law has no rate effect: the quasi-static
    # A + B eps^n (common practice in finite-element codes, from memory; see shpb.models.johnson_cook)
    law = JohnsonCookLaw(792e6, 510e6, 0.26, 0.014)
    np.testing.assert_allclose(law.flow_stress(np.full(3, 0.1), np.array([0.0, 0.5, 1.0])),
                               792e6 + 510e6 * 0.1**0.26, rtol=1e-12)


def test_radial_return_linear_hardening():
    # Simo & Hughes (1998), Computational Inelasticity, ch. 1: 1-D plasticity with linear isotropic
    # hardening sigma_y = s0 + H eps_p under monotonic loading follows the elastoplastic tangent
    # E H / (E + H): sigma = s0 + E H/(E + H) (eps - s0/E); unloading is elastic with modulus E.
    E, s0, H = 70e9, 300e6, 2e9
    law = FlowStressLaw(lambda p, rate: s0 + H * p)
    strain = np.linspace(0, -0.05, 501)  # compression, tension-positive signs
    eps_p, p, stresses = 0.0, 0.0, []
    for eps in strain[1:]:
        stress, inc = radial_return(np.array([E * (eps - eps_p)]), np.array([p]), E, law.flow_stress, 1e-8)
        eps_p += np.sign(E * (eps - eps_p)) * inc[0]
        p += inc[0]
        stresses.append(stress[0])
    stresses = np.array(stresses)
    plastic = strain[1:] < -s0 / E
    expected = -(s0 + E * H / (E + H) * (-strain[1:][plastic] - s0 / E))
    assert np.allclose(stresses[plastic], expected, rtol=1e-9)
    assert np.allclose(stresses[~plastic], E * strain[1:][~plastic], rtol=1e-12)
    # elastic unloading by 1e-3
    stress, inc = radial_return(np.array([E * (strain[-1] + 1e-3 - eps_p)]), np.array([p]), E, law.flow_stress, 1e-8)
    assert inc[0] == 0 and stress[0] - stresses[-1] == pytest.approx(E * 1e-3, rel=1e-9)


def test_rate_dependent_specimen_follows_johnson_cook():
    # Johnson & Cook (1983) flow stress of OFHC copper (their constants, as quoted secondarily: A = 90 MPa, B = 292 MPa,
    # n = 0.31, C = 0.025): once in equilibrium, the specimen's mean stress equals the law at its plastic
    # strain (strain - stress/E) and strain rate (total rate; the elastic part is small in steady flow).
    # Equilibrium per Ravichandran & Subhash (1994): R <= 0.05.
    specimen = RodSpec(0.005, 0.01, 117e9, 8960.0, JohnsonCookLaw(90e6, 292e6, 0.31, 0.025))
    res = simulate_shot(shot(striker=steel(0.2), incident=steel(0.5), transmitted=steel(0.5),
                             specimen=specimen, incident_gauge_distance=0.25, duration=0.2e-3))
    truth = res.truth
    flow = truth[(truth.time_us > 10) & (truth.time_us < 75)]
    stress = flow.stress_MPa.to_numpy() * 1e6
    plastic_strain = flow.strain.to_numpy() - stress / 117e9
    # Johnson & Cook (1983) equation at T* = 0, reference rate 1 1/s, written out independently of the code
    expected = (90e6 + 292e6 * np.clip(plastic_strain, 0.0, None)**0.31) * \
        (1 + 0.025 * np.log(flow.strain_rate_per_s.to_numpy()))
    assert np.allclose(stress, expected, rtol=5e-3)
    assert flow.strain_rate_per_s.min() > 1000  # a Kolsky-bar rate, so the rate term matters (~17 %)
    ratio = 2 * (flow.force_front_kN - flow.force_back_kN) / (flow.force_front_kN + flow.force_back_kN)
    assert np.abs(ratio).max() < 0.05  # and no spurious (rate-term) oscillation


def test_pulse_shaper_caps_the_incident_force():
    # Force continuity across an interface (Graff 1975 ch. 2): the force entering the incident bar is the
    # force in the shaper, which a perfectly plastic shaper limits to sigma_y A_shaper (common practice:
    # pulse shaping, Frew, Forrestal & Chen 2002, Exp. Mech. 42:93). The foot is delayed by the shaper's
    # elastic transit L / sqrt(E/rho).
    shaper = RodSpec(0.001, 0.005, 117e9, 8960.0, PerfectlyPlastic(200e6))
    res = simulate_shot(shot(striker=steel(0.3), incident=steel(0.5), transmitted=steel(0.5), shaper=shaper,
                             incident_gauge_distance=0.45, transmitted_gauge_distance=0.25, duration=40e-6))
    cap = 200e6 * shaper.area / (E_STEEL * steel(0.5).area)
    rods = res.grid["rods"]
    foot_at_gauge = res.foot_arrival_time - 0.45 / C0
    assert np.allclose(plateau(res.strain_incident_gauge, res.time, foot_at_gauge + 2e-6, 40e-6), cap,
                       rtol=1e-9, atol=0)
    delay = res.foot_arrival_time - rods["incident"]["length_m"] / C0
    assert delay == pytest.approx(0.001 / shaper.wave_speed, abs=res.grid["dt_s"])
    assert rods["shaper"]["courant"] <= 1 + 1e-12 and rods["shaper"]["elements"] >= 10


# --------------------------------------------------------------------------- grid and the time-step choice
def test_bars_run_at_courant_one_even_when_the_specimen_sets_the_step(perfectly_plastic_shot):
    # The design choice (module docstring): the specimen sets dt, the bars keep Courant exactly 1 by
    # using dx = c0 dt. Consequence to check: the bar stays exact for 1-D waves (Courant-1 leapfrog is
    # exact for the wave equation; e.g. Strikwerda 2004, Finite Difference Schemes, ch. 1
    # (from memory)) - the incident plateau shows no trailing oscillation; the specimen has
    # >= 20 elements at Courant <= 1; modelled bar lengths are within half an element of the request.
    res = perfectly_plastic_shot
    rods = res.grid["rods"]
    for name in ("striker", "incident", "transmitted"):
        assert rods[name]["courant"] == pytest.approx(1.0, abs=1e-12)
        assert abs(rods[name]["length_m"] - getattr(res.spec, name).length) <= 0.5 * rods[name]["element_length_m"]
    assert rods["specimen"]["elements"] >= 20 and rods["specimen"]["courant"] <= 1 + 1e-12
    assert res.grid["dt_s"] < 1e-7  # finer than the sample interval: the recorder clock is interpolated
    foot_at_gauge = res.foot_arrival_time - 0.25 / C0
    incident = plateau(res.strain_incident_gauge, res.time, foot_at_gauge + 0.2e-6, foot_at_gauge + 58e-6)
    assert np.allclose(incident, 10.0 / (2 * C0), rtol=1e-12, atol=0)


def test_no_grid_ringing_where_the_specimen_drives_a_bar():
    # Consequence of Courant 1 in the bars: the grid's odd-even (Nyquist) mode also travels undamped,
    # so a bar end driven by a force step must not excite it (module docstring, "bar ends at a resolved
    # rod"). Physical expectation: once the perfectly plastic specimen yields at its back face the
    # force it passes on is sigma_y A_s (force continuity, Graff 1975 ch. 2), so the transmitted strain
    # steps to sigma_y A_s / (E_b A_b) (Kolsky 1949) and stays there. Sampled at the model rate.
    specimen = RodSpec(0.005, 0.01, 70e9, 2700.0, PerfectlyPlastic(300e6))
    dt = 0.005 / 20 / specimen.wave_speed
    res = simulate_shot(shot(striker=steel(0.15), incident=steel(0.5), transmitted=steel(0.5), specimen=specimen,
                             incident_gauge_distance=0.25, duration=160e-6, sample_rate=1 / dt))
    assert res.grid["dt_s"] == pytest.approx(dt, rel=1e-12)
    final = 300e6 * specimen.area / (E_STEEL * steel(0.5).area)
    eps_t = res.strain_transmitted_gauge
    step = np.argmax(eps_t > 0.9 * final)
    assert step > 0
    assert np.allclose(eps_t[step + 3:step + 25], final, rtol=2e-3, atol=0)


# --------------------------------------------------------------------------- bad input
@pytest.mark.parametrize("changes, field", [
    (dict(specimen=RodSpec(0.005, 0.01, 70e9, 2700.0), specimen_elements=10), "specimen_elements"),
    (dict(incident_gauge_distance=1.5), "incident_gauge_distance"),
    (dict(striker_speed=0.0), "striker_speed"),
    (dict(incident=RodSpec(1.0, -0.02, E_STEEL, RHO_STEEL)), "incident.diameter"),
    (dict(specimen=RodSpec(0.005, 0.01, 70e9, 2700.0, law="soft")), "specimen.law"),
])
def test_bad_input_names_the_field(changes, field):
    with pytest.raises(InputError, match=field):
        simulate_shot(shot(**changes))


def test_crushed_shaper_is_an_analysis_error():
    # A perfectly plastic shaper under a long striker is squeezed without limit in the small-strain model.
    shaper = RodSpec(0.001, 0.005, 117e9, 8960.0, PerfectlyPlastic(200e6))
    with pytest.raises(AnalysisError, match="shaper was crushed"):
        simulate_shot(shot(striker=steel(0.3), incident=steel(0.3), transmitted=steel(0.3), shaper=shaper,
                           incident_gauge_distance=0.15, transmitted_gauge_distance=0.15, duration=150e-6))
