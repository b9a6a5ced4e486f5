"""Checks of the simulator's time stepping: elastic rods as delay lines (shpb.simulate._DelayLine).

Outside references: the d'Alembert solution of the rod equation with free ends and the equal split of a
travelling wave's energy into kinetic and strain energy (Graff 1975, Wave Motion in Elastic Solids, ch. 2),
the force reflection and transmission coefficients at an impedance change and their geometric series in a
short specimen between two bars (Graff 1975 ch. 2; Kolsky 1953, Stress Waves in Solids, ch. 4).

Regression: the old whole-rig leapfrog march, kept verbatim in ``tests/reference_leapfrog.py`` (a copy of the
package's time stepping before the delay lines, never imported by the package), must agree with the new solver
to round-off on elastic rigs (1e-9 of each record's scale) and to the return mapping's tolerance on plastic
ones. This comparison is a regression check of the rewrite, not a check of the physics; the physics is checked
above and in ``tests/test_simulate.py``.
"""

import math

import numpy as np
import pytest

from reference_leapfrog import simulate_shot_reference
from shpb.simulate import (FlowStressLaw, IncidentPulse, JohnsonCookLaw, PerfectlyPlastic, RodSpec,
                           TrueStressLaw, VirtualShotSpec, simulate_shot)

E_STEEL, RHO_STEEL = 200e9, 7850.0
C0 = math.sqrt(E_STEEL / RHO_STEEL)


def steel(length, diameter=0.02):
    return RodSpec(length, diameter, E_STEEL, RHO_STEEL)


def rig(**changes):
    fields = dict(striker=steel(0.1), incident=steel(0.6), transmitted=steel(0.4), specimen=None,
                  striker_speed=10.0, incident_gauge_distance=0.3, transmitted_gauge_distance=0.15,
                  duration=0.25e-3, sample_rate=10e6)
    fields.update(changes)
    return VirtualShotSpec(**fields)


def plateau(signal, time, start, stop):
    window = (time > start) & (time < stop)
    assert window.sum() > 5
    return signal[window]


# --------------------------------------------------------------------------- outside references
def test_free_end_bar_follows_dalembert():
    # d'Alembert (Graff 1975 ch. 2): a matched striker sends eps = v / (2 c0) for 2 Ls / c0 (Kolsky 1949); a
    # free end reflects it with the opposite sign. At a gauge d from the far (free) end of a bar of length L
    # the compression passes at (L - d) / c0 after impact and returns as tension at (L + d) / c0; the impact
    # end, left free when the striker has stopped (equal impedances: it stops dead), sends it back as
    # compression at (3 L - d) / c0.
    res = simulate_shot(rig(transmitted=None, incident=steel(1.0), incident_gauge_distance=0.3,
                            duration=0.7e-3))
    length = res.grid["rods"]["incident"]["length_m"]
    amplitude = 10.0 / (2 * C0)
    pulse = 2 * res.grid["rods"]["striker"]["length_m"] / C0
    t, eps = res.time, res.strain_incident_gauge
    for arrival, sign in (((length - 0.3) / C0, 1), ((length + 0.3) / C0, -1), ((3 * length - 0.3) / C0, 1)):
        assert np.allclose(plateau(eps, t, arrival + 0.5e-6, arrival + pulse - 0.5e-6), sign * amplitude,
                           rtol=1e-12, atol=0)
        # and nothing between the passes (the fronts within a sample of the predicted times; round-off of the
        # striker's parting is left behind in the bar's odd-even mode)
        assert np.all(np.abs(plateau(eps, t, arrival + pulse + 0.2e-6, arrival + pulse + 5e-6)) < 1e-12 * amplitude)
        assert np.all(np.abs(plateau(eps, t, arrival - 5e-6, arrival - 0.2e-6)) < 1e-12 * amplitude)


def test_travelling_wave_energy_is_half_kinetic_half_strain():
    # Graff (1975) ch. 2: in a wave travelling one way in a rod, kinetic and strain energy are equal (v = -c0
    # eps, so rho v**2 / 2 = E eps**2 / 2) and carry all of it. After a matched striker has stopped, the pulse
    # (2 Ls / c0 long, M = 2 Ls / dx elements) travels alone in the bar; the grid's leapfrog kinetic energy
    # pairs neighbouring elements, so the two differ by one element of M.
    res = simulate_shot(rig(transmitted=None, incident=steel(1.0), duration=0.15e-3))
    e = res.energies
    alone = e[(e.time_us > -170) & (e.time_us < -5)]  # pulse wholly in the bar, before the far end
    elements = 2 * res.grid["rods"]["striker"]["elements"]
    assert len(alone) > 100
    assert np.allclose(alone.kinetic_J / alone.strain_J, 1.0, atol=1.5 / elements, rtol=0)
    assert np.allclose(alone.total_J, alone.total_J.iloc[0], rtol=1e-12, atol=0)


def test_elastic_specimen_rings_up_geometrically():
    # Graff (1975) ch. 2; Kolsky (1953) ch. 4: a step of force F0 meeting a short elastic specimen (impedance
    # Zs) between two bars (Zb) is transmitted as T1 T2 F0 after one transit and rises by a factor R**2 of
    # the last rise at each further round trip, R = (Zb - Zs)/(Zb + Zs) being the reflection at either face
    # seen from inside: F_t = F0 (1 - R**(2k)) after the k-th arrival (T1 T2 = 1 - R**2). The model resolves
    # the specimen with 20 elements and its faces on whole bar elements: each plateau within 1e-3 F0.
    specimen = RodSpec(0.005, 0.01, 70e9, 2700.0)
    dt = 0.005 / 20 / specimen.wave_speed
    res = simulate_shot(rig(striker=steel(0.3), incident=steel(0.5), transmitted=steel(0.5), specimen=specimen,
                            incident_gauge_distance=0.25, transmitted_gauge_distance=0.25, duration=175e-6,
                            sample_rate=1 / dt))
    zb, zs = steel(0.5).impedance, specimen.impedance
    reflection = (zb - zs) / (zb + zs)
    force_step = E_STEEL * steel(0.5).area * 10.0 / (2 * C0)
    force_t = E_STEEL * steel(0.5).area * res.strain_transmitted_gauge
    transit = 0.005 / specimen.wave_speed
    first = res.foot_arrival_time + 0.25 / C0 + transit
    for k in range(1, 6):
        arrival = first + 2 * (k - 1) * transit
        values = plateau(force_t, res.time, arrival + 0.2 * transit, arrival + 1.8 * transit) / force_step
        assert np.allclose(values, 1 - reflection ** (2 * k), atol=1e-3, rtol=0), k


# --------------------------------------------------------------------------- regression against the old march
def relative_differences(new, old):
    """Largest difference of each record of two results over its scale: the largest bar strain at either
    gauge for the gauge strains and waves (a wave that should be absent is round-off in both), the
    column's own largest magnitude for the truth and the energies."""
    out = {}
    strain_scale = np.nanmax(np.abs(np.concatenate([old.strain_incident_gauge, old.strain_transmitted_gauge])))
    series = {"strain_incident_gauge": (new.strain_incident_gauge, old.strain_incident_gauge, strain_scale),
              "strain_transmitted_gauge": (new.strain_transmitted_gauge, old.strain_transmitted_gauge,
                                           strain_scale)}
    series.update({f"wave {k}": (new.gauge_waves[k], old.gauge_waves[k], strain_scale) for k in old.gauge_waves})
    for column in old.truth.columns:
        b = old.truth[column].to_numpy()
        series[f"truth.{column}"] = (new.truth[column].to_numpy(), b, np.nanmax(np.abs(b)) if
                                     not np.all(np.isnan(b)) else 1.0)
    for column in old.energies.columns:
        b = old.energies[column].to_numpy()
        series[f"energies.{column}"] = (new.energies[column].to_numpy(), b, np.nanmax(np.abs(b)))
    for name, (a, b, scale) in series.items():
        assert np.array_equal(np.isnan(a), np.isnan(b)), name
        if np.all(np.isnan(b)):
            continue
        out[name] = 0.0 if scale == 0 else float(np.nanmax(np.abs(a - b)) / scale)
    return out


def assert_same_grid(new, old, rtol=1e-12):
    assert new.time.shape == old.time.shape and np.array_equal(new.time, old.time)
    assert new.foot_arrival_time == pytest.approx(old.foot_arrival_time, rel=1e-15)
    for name, rod in old.grid["rods"].items():
        for key, value in rod.items():
            assert new.grid["rods"][name][key] == pytest.approx(value, rel=rtol), (name, key)
    for key in ("dt_s", "steps", "nodes", "initial_kinetic_J"):
        assert new.grid[key] == pytest.approx(old.grid[key], rel=1e-13), key


ELASTIC_RIGS = {
    "bars together": rig(),
    "striker, elastic shaper, elastic specimen, bars": rig(
        shaper=RodSpec(0.001, 0.012, 3e9, 1200.0), shaper_elements=4,
        specimen=RodSpec(0.005, 0.008, 70e9, 2800.0), duration=0.3e-3),
    "free end, thinner aluminium striker": rig(striker=RodSpec(0.1, 0.015, 70e9, 2700.0), transmitted=None),
    "bars of different impedance": rig(transmitted=RodSpec(0.4, 0.025, 70e9, 2700.0)),
}


@pytest.mark.parametrize("name", list(ELASTIC_RIGS))
def test_elastic_rig_matches_the_old_march(name):
    # Regression (see the module docstring): same grid, same records to round-off.
    spec = ELASTIC_RIGS[name]
    new, old = simulate_shot(spec), simulate_shot_reference(spec)
    assert_same_grid(new, old)
    worst = relative_differences(new, old)
    assert max(worst.values()) < 1e-9, worst


def test_prescribed_pulse_matches_the_old_march():
    # Regression: the incident bar driven by a prescribed force (IncidentPulse) instead of a striker.
    t = np.arange(400) * 5e-8
    strain = 5e-4 * np.clip(t / 5e-6, 0, 1) * np.clip((20e-6 - t) / 5e-6, 0, 1)
    spec = rig(striker=None, specimen=RodSpec(0.005, 0.008, 70e9, 2800.0),
               incident_pulse=IncidentPulse(5e-8, strain, 0.0))
    new, old = simulate_shot(spec), simulate_shot_reference(spec)
    assert_same_grid(new, old)
    worst = relative_differences(new, old)
    assert max(worst.values()) < 1e-9, worst


# (rig, tolerance): the return mapping stops at |residual| <= 1e-10 of the trial stress, or after a Newton step
# of at most 1e-5 of the increment (shpb.simulate._solve_increment), the old one only at the first; both lie
# within that tolerance of the same root, so hardening laws agree to about 1e-10 (measured 2e-11 to 2e-10).
# Perfect plasticity has no unique plastic strain field in 1-D (module notes of shpb.simulate): differences at
# the tolerance's level move plastic strain between the specimen's end elements, which shows in the face
# velocities and contact forces at 1e-6 (measured 1e-6; the stress and strain averages at 2e-8 and 2e-9),
# still far below the model's discretisation error (the staircase above: 1e-3).
PLASTIC_RIGS = {
    "Johnson-Cook specimen (true stress)": (rig(specimen=RodSpec(
        0.005, 0.008, 70e9, 2800.0, TrueStressLaw(JohnsonCookLaw(300e6, 400e6, 0.4, 0.01, 1e-3), 70e9)),
        striker_speed=20.0, shaper=RodSpec(0.001, 0.012, 3e9, 1200.0), shaper_elements=4), 1e-8),
    "perfectly plastic specimen": (rig(specimen=RodSpec(0.005, 0.01, 70e9, 2700.0, PerfectlyPlastic(300e6))),
                                   1e-5),
    "plastic striker (marched on the grid)": (rig(striker=RodSpec(0.1, 0.02, E_STEEL, RHO_STEEL,
                                                                  PerfectlyPlastic(150e6)), striker_speed=12.0),
                                              1e-8),
    # bars with a hardening law are marched on the grid too, gauges and waves read from the grid's states
    "hardening bars (marched on the grid)": (rig(
        incident=RodSpec(0.6, 0.02, E_STEEL, RHO_STEEL, FlowStressLaw(lambda p, rate: 180e6 + 20e9 * p)),
        transmitted=RodSpec(0.4, 0.02, E_STEEL, RHO_STEEL, FlowStressLaw(lambda p, rate: 180e6 + 20e9 * p)),
        striker_speed=12.0, duration=0.2e-3), 1e-8),
}


@pytest.mark.parametrize("name", list(PLASTIC_RIGS))
def test_plastic_rig_matches_the_old_march(name):
    # Regression (see the module docstring and the tolerances above).
    spec, tolerance = PLASTIC_RIGS[name]
    new, old = simulate_shot(spec), simulate_shot_reference(spec)
    assert_same_grid(new, old, rtol=tolerance)
    worst = relative_differences(new, old)
    assert max(worst.values()) < tolerance, worst
    assert new.energies.plastic_J.iloc[-1] > 1e-3 * new.grid["initial_kinetic_J"]  # it did flow


def test_specimen_crushed_in_either_solver_is_an_analysis_error():
    # The crush check reads the same peak strains from the new solver's records (regression of the behaviour).
    from shpb.errors import AnalysisError

    shaper = RodSpec(0.001, 0.005, 117e9, 8960.0, PerfectlyPlastic(200e6))
    spec = rig(striker=steel(0.3), incident=steel(0.3), transmitted=steel(0.3), shaper=shaper,
               incident_gauge_distance=0.15, transmitted_gauge_distance=0.15, duration=150e-6)
    for solver in (simulate_shot, simulate_shot_reference):
        with pytest.raises(AnalysisError, match="shaper was crushed"):
            solver(spec)



def test_pulse_run_stopped_early_reads_what_the_whole_run_records():
    # Regression of the short run behind incident_pulse. d'Alembert (Graff 1975 ch. 2): the wave travelling
    # away from the impact reaches a station a transit after it leaves the face, unchanged, so a run that only
    # reads that wave at a station may stop a transit early. Its reading must be the whole run's to the last
    # sample, here taken while the pulse (2 x 0.1 m / c0 = 40 us long) is still passing the station.
    from shpb.simulate import _shot

    spec = rig(transmitted=None, incident_gauge_distance=0.01, duration=(0.6 - 0.01) / C0 + 20e-6)
    whole, short = simulate_shot(spec), _shot(spec, incident_wave_only=True)
    wave, read = whole.gauge_waves["incident_toward_specimen"], short.gauge_waves["incident_toward_specimen"]
    assert wave[-1] > 0.5 * 10.0 / (2 * C0)  # mid-pulse at the last sample (matched striker: v / (2 c0))
    assert np.array_equal(short.time, whole.time)
    assert np.allclose(read, wave, rtol=0, atol=1e-12 * wave.max())
