"""Speed of the virtual shot model (shpb.simulate) on a typical rig.

Run: ``python benchmarks/bench_simulate.py``. Prints the grid size, the wall
time, the time per simulated microsecond and per node-step, and the ratio of
the wall time to the target (a typical shot "in seconds": target 10 s), all
measured in this one run. The rig is fictional: 0.3 m striker at 15 m/s,
1.5 m steel bars of 20 mm, a 5 mm x 8 mm copper-like specimen (20 elements,
Johnson-Cook law), 1 ms of record at 10 MHz; then the same with other
specimen laws and a stiffer specimen.
"""

from __future__ import annotations

import time

from shpb.simulate import JohnsonCookLaw, PerfectlyPlastic, RodSpec, VirtualShotSpec, simulate_shot

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


if __name__ == "__main__":
    main()
