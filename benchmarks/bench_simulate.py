"""Speed of the virtual shot model (shpb.simulate) on a typical rig.

Run: ``python benchmarks/bench_simulate.py``. Prints the grid size, the wall
time, the time per simulated microsecond and per node-step, and the ratio of
the wall time to the target (a typical shot "in seconds": target 10 s), all
measured in this one run. The rig is fictional: 0.3 m striker at 15 m/s,
1.5 m steel bars of 20 mm, a 5 mm x 8 mm copper-like specimen (20 elements,
Johnson-Cook law), 1 ms of record at 10 MHz; then the same with other
specimen laws and a stiffer specimen. Last, the whole virtual record with
Pochhammer–Chree dispersion (the striker's pulse, the dispersed drive, the
run and the recorder) against the plain run, as a ratio.
"""

from __future__ import annotations

import time

import dataclasses

from shpb.setup import Gauge
from shpb.simulate import (JohnsonCookLaw, PerfectlyPlastic, RecorderSpec, RodSpec, VirtualShotSpec, dispersed_drive,
                           simulate_shot, virtual_record)

TARGET_SECONDS = 10.0


def typical_spec(law, specimen_modulus=117e9, specimen_density=8960.0):
    steel = dict(diameter=0.02, modulus=200e9, density=7850.0)
    return VirtualShotSpec(
        striker=RodSpec(length=0.3, **steel),
        incident=RodSpec(length=1.5, **steel),
        transmitted=RodSpec(length=1.5, **steel),
        specimen=RodSpec(length=0.005, diameter=0.008, modulus=specimen_modulus, density=specimen_density, law=law),
        striker_speed=15.0,
        gauge_incident_distance=0.75,
        gauge_transmitted_distance=0.25,
        duration=1e-3,
        sample_rate=10e6,
    )


def run(label, spec):
    start = time.perf_counter()
    result = simulate_shot(spec)
    wall = time.perf_counter() - start
    grid = result.grid
    simulated_us = spec.duration * 1e6
    node_steps = grid["nodes"] * grid["steps"]
    print(f"{label}")
    counts = ", ".join(f"{name} {rod['elements']}" for name, rod in grid["rods"].items())
    print(f"  grid: {grid['nodes']} nodes, {grid['steps']} steps of {grid['dt_s'] * 1e9:.2f} ns (elements: {counts})")
    print(f"  wall time {wall:.2f} s for {simulated_us:.0f} us simulated: {wall / simulated_us * 1e3:.2f} ms per us, "
          f"{wall / node_steps * 1e9:.1f} ns per node-step")
    print(f"  ratio wall / target ({TARGET_SECONDS:.0f} s): {wall / TARGET_SECONDS:.2f}")
    return wall


def main():
    jc = JohnsonCookLaw(A=90e6, B=292e6, n=0.31, C=0.025)
    run("typical shot (Johnson-Cook specimen)", typical_spec(jc))
    run("same, elastic-perfectly-plastic specimen", typical_spec(PerfectlyPlastic(300e6)))
    run("same, elastic specimen", typical_spec(None))
    # a faster specimen (steel-like, c0 ~ 5050 m/s) asks for a smaller step, hence finer bars
    run("steel-like Johnson-Cook specimen (finest grid of the set)",
        typical_spec(JohnsonCookLaw(A=792e6, B=510e6, n=0.26, C=0.014), 200e9, 7850.0))
    dispersed_record(typical_spec(jc))


def dispersed_record(spec):
    """Plain run + record against dispersed drive + run + dispersed record, same shot."""
    gauge = Gauge(0.75, "half-bending", 2.1, 10.0, 100.0)
    recorder = RecorderSpec(duration=0.8e-3, pre_trigger=0.0, trigger="impact", noise_volts=(2e-3, 2e-3), seed=1)
    start = time.perf_counter()
    plain = simulate_shot(spec)
    virtual_record(plain, recorder, gauge, gauge, incident_poisson=0.29, transmitted_poisson=0.29)
    t_plain = time.perf_counter() - start
    start = time.perf_counter()
    run_spec = dispersed_drive(spec, 0.29)
    lead = run_spec.incident_pulse.impact_time
    result = simulate_shot(dataclasses.replace(run_spec, duration=spec.duration + lead))
    virtual_record(result, recorder, gauge, gauge, incident_poisson=0.29, transmitted_poisson=0.29,
                   dispersion="specimen", trigger=lead)
    t_disp = time.perf_counter() - start
    print("virtual record of the typical shot, 0.8 ms at 10 MHz")
    print(f"  plain run + record {t_plain:.2f} s; with dispersion (pulse run, dispersed drive, run, dispersed "
          f"record) {t_disp:.2f} s")
    print(f"  ratio dispersed / plain: {t_disp / t_plain:.2f}; ratio to the target ({TARGET_SECONDS:.0f} s): "
          f"{t_disp / TARGET_SECONDS:.2f}")


if __name__ == "__main__":
    main()
