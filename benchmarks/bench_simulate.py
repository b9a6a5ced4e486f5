"""Speed of the virtual shot (shpb.simulate): the delay-line solver against the old whole-rig march, and whole
``shpb simulate`` processes beside their yardsticks.

Run: ``python benchmarks/bench_simulate.py [--quick] [--rounds N]``. Everything is measured in this one run,
in rounds that interleave the things compared (the machine is shared and noisy), and printed as
min / median / max over the rounds.

1. **In process**: ``simulate_shot`` against the old time stepping kept in ``tests/reference_leapfrog.py``
   (the explicit leapfrog over every node of the rig, as before the delay lines), on fictional rigs:
   0.3 m striker at 15 m/s, 1.5 m steel bars of 20 mm, a 5 mm x 8 mm copper-like specimen (20 elements;
   Johnson-Cook, perfectly plastic, elastic), a bars-together shot, 1 ms at 10 MHz; and the whole
   virtual shot of an example setup (striker pulse run, dispersed drive, run, dispersed record) with either
   solver. The rigs' shots ask for the energy balance, which the old march always computes and the new solver
   on first use; the whole virtual shot, like ``shpb simulate``, does not need it. Printed: the speed-up
   old / new per round (target: at least 10, for the whole virtual shot).
2. **Whole process**: ``shpb simulate example_data/setups/HR-C10-1000-a.toml --out TMP`` (with and without
   the figure) beside ``python -c pass`` and a process that only imports ``shpb.simulate``; times and
   ratios (target: the whole command at most 1 s).

``--quick`` runs shorter shots (0.3 ms) and two rounds.
"""

from __future__ import annotations

import argparse
import dataclasses
import os
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "tests"))

from reference_leapfrog import simulate_shot_reference  # noqa: E402  (the old solver, tests/ only)

from timing import cache_bytecode  # noqa: E402  (benchmarks/timing.py)

import shpb.simulate as simulate  # noqa: E402
import shpb.virtual as virtual  # noqa: E402
from shpb.simulate import JohnsonCookLaw, PerfectlyPlastic, RodSpec, VirtualShotSpec  # noqa: E402

SETUP = ROOT / "example_data" / "setups" / "HR-C10-1000-a.toml"
TARGET_SPEED_UP = 10.0
TARGET_PROCESS_S = 1.0


def typical_spec(law, duration, specimen=True, specimen_modulus=117e9, specimen_density=8960.0):
    steel = dict(diameter=0.02, modulus=200e9, density=7850.0)
    return VirtualShotSpec(
        striker=RodSpec(length=0.3, **steel),
        incident=RodSpec(length=1.5, **steel),
        transmitted=RodSpec(length=1.5, **steel),
        specimen=RodSpec(length=0.005, diameter=0.008, modulus=specimen_modulus, density=specimen_density,
                         law=law) if specimen else None,
        striker_speed=15.0,
        incident_gauge_distance=0.75,
        transmitted_gauge_distance=0.25,
        duration=duration,
        sample_rate=10e6,
    )


def spread(values, fmt="{:.3f}"):
    """'min / median / max' of a list."""
    return " / ".join(fmt.format(v) for v in (min(values), statistics.median(values), max(values)))


def timed(fn):
    start = time.perf_counter()
    fn()
    return time.perf_counter() - start


def virtual_shot(setup, solver=None):
    """The whole virtual shot of a setup (pulse run, dispersed drive, run, record) with the given solver (None:
    the package's own; the old march runs the striker's pulse run in full, as the package did before it learnt
    to stop that run early)."""
    if solver is None:
        virtual.simulate_setup(setup)
        return
    saved = simulate.simulate_shot, virtual.simulate_shot, simulate._shot
    simulate.simulate_shot = virtual.simulate_shot = solver
    simulate._shot = lambda spec, incident_wave_only=False: solver(spec)
    try:
        virtual.simulate_setup(setup)
    finally:
        simulate.simulate_shot, virtual.simulate_shot, simulate._shot = saved


def in_process(rounds, duration):
    jc = JohnsonCookLaw(A=90e6, B=292e6, n=0.31, C=0.025)
    cases = {
        "Johnson-Cook specimen": typical_spec(jc, duration),
        "perfectly plastic specimen": typical_spec(PerfectlyPlastic(300e6), duration),
        "elastic specimen": typical_spec(None, duration),
        "bars together (no specimen)": typical_spec(None, duration, specimen=False),
    }
    setup = virtual.load_simulation(SETUP)
    if duration < setup.recorder.duration:  # a shorter record, and the model run it needs
        recorder = dataclasses.replace(setup.recorder, duration=duration)
        run = simulate.model_duration(simulate.trigger_time(setup.spec, recorder), recorder)
        setup = dataclasses.replace(setup, recorder=recorder, spec=dataclasses.replace(setup.spec, duration=run))
    # like for like: the old march computes the energy balance in every shot, the new solver on first use of
    # it (a virtual record does not need it), so the rigs' shots ask for it; the whole virtual shot does not
    jobs = {name: (lambda s=spec: simulate_shot_reference(s), lambda s=spec: simulate.simulate_shot(s).energy_columns)
            for name, spec in cases.items()}
    jobs[f"whole virtual shot of {SETUP.name}"] = (lambda: virtual_shot(setup, simulate_shot_reference),
                                                   lambda: virtual_shot(setup))
    for _, new in jobs.values():  # warm up: imports, the cached dispersion curve
        new()
    times = {name: ([], []) for name in jobs}
    for _ in range(rounds):
        for name, (old, new) in jobs.items():
            times[name][0].append(timed(old))
            times[name][1].append(timed(new))
    print(f"1. in process, {duration * 1e3:g} ms shots at 10 MHz; {rounds} rounds, min / median / max")
    for name, (old, new) in times.items():
        ratios = [o / n for o, n in zip(old, new)]
        print(f"  {name}")
        print(f"    old march {spread(old)} s, delay lines {spread(new)} s; speed-up {spread(ratios, '{:.1f}')} "
              f"(target >= {TARGET_SPEED_UP:g})")
    grid = simulate.simulate_shot(cases["Johnson-Cook specimen"]).grid
    print(f"  (Johnson-Cook shot: {grid['nodes']} nodes, {grid['steps']} steps of {grid['dt_s'] * 1e9:.2f} ns; "
          f"the old march updates every node each step, the new one the specimen and the bar ends)")


def whole_process(rounds):
    bin_dir = Path(sys.executable).parent
    cli = [str(bin_dir / "shpb")] if (bin_dir / "shpb").exists() else [sys.executable, "-m", "shpb.cli"]
    out = Path(tempfile.mkdtemp(prefix="bench_simulate_"))
    commands = {
        "python -c pass": [sys.executable, "-c", "pass"],
        "python -c 'import shpb.simulate'": [sys.executable, "-c", "import shpb.simulate"],
        "shpb simulate (with figure)": cli + ["simulate", str(SETUP), "--out", str(out)],
        "shpb simulate --no-figure": cli + ["simulate", str(SETUP), "--out", str(out), "--no-figure"],
    }
    env = dict(os.environ, MPLBACKEND="Agg")
    times = {name: [] for name in commands}
    try:
        for _ in range(rounds):
            for name, cmd in commands.items():
                start = time.perf_counter()
                subprocess.run(cmd, check=True, stdout=subprocess.DEVNULL, env=env, cwd=ROOT)
                times[name].append(time.perf_counter() - start)
    finally:
        shutil.rmtree(out, ignore_errors=True)
    base, imports = times["python -c pass"], times["python -c 'import shpb.simulate'"]
    print(f"2. whole processes ({SETUP.name}); {rounds} rounds, min / median / max")
    for name, t in times.items():
        to_base = spread([a / b for a, b in zip(t, base)], "{:.1f}")
        to_imports = spread([a / b for a, b in zip(t, imports)], "{:.2f}")
        print(f"  {name:36s} {spread(t)} s; ratio to python -c pass {to_base}, to the import alone {to_imports}")
    whole = times["shpb simulate (with figure)"]
    print(f"  target: shpb simulate <= {TARGET_PROCESS_S:g} s; median {statistics.median(whole):.2f} s")


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="0.3 ms shots, two rounds")
    ap.add_argument("--rounds", type=int, default=None, help="rounds of each comparison (default 5, quick 2)")
    a = ap.parse_args(argv)
    rounds = a.rounds or (2 if a.quick else 5)
    print(cache_bytecode())
    in_process(rounds, 0.3e-3 if a.quick else 1e-3)
    whole_process(rounds)


if __name__ == "__main__":
    main()
