"""Benchmark: what the uncertainty stage costs, and whether its 95 % intervals cover the truth.

Cost. Each round runs, one after the other (interleaved, so that a busy spell
of this shared machine hits all alike), whole ``shpb reduce`` processes on the
example shot (``configs/example_shot.toml``, SYNTHETIC):

* ``shpb reduce SHOT --no-uncertainty`` and ``shpb reduce SHOT --uncertainty``
  (with the figure sheet, as a user runs it);
* the same with ``--no-figure``.

It prints each process's wall-clock time and the ratio "with uncertainty /
without" of the same round (min/median/max over the rounds). The issue's rule
(issue 13): the uncertainty is on by default if a reduction with it costs at
most 2x one without, otherwise one option away. Then the in-process breakdown
(one warm process, min/median/max over the repeats): the reduction's stages
1-5, the GUM part, the Monte Carlo part, the whole propagation, and its ratio
to the reduction.

Coverage (``--coverage N``): N virtual shots simulated one by one
(``tests/coverage.full_trial``: the *true* bars, gauges and specimen differ
from the stated ones by draws of their stated uncertainties, the simulator's
recorder adds its own noise), each reduced with the stated inputs and the
default Monte Carlo draws; it prints how many of the 95 % intervals
y +- U95 of the flow stress at strain 0.05 cover the simulator's truth
(target 92-98 %, JCGM 101:2008 §8), the binomial 95 % range of that count for
a true 95 % coverage, and the rms of z = (y - truth) / u (1 for honest
uncertainties). The base setups cycle through :data:`SHOTS` (Harrow Ridge
examples, SYNTHETIC).

    python benchmarks/bench_uncertainty.py [--rounds 5] [--repeats 5] [--coverage 100] [--no-cost]
    python benchmarks/bench_uncertainty.py --quick    # one round, one repeat, 2 coverage trials: it runs (CI)
"""

from __future__ import annotations

import argparse
import math
import statistics
import sys
import tempfile
import time
from pathlib import Path

from timing import cache_bytecode, mmm, run_process, shpb_command  # noqa: E402  (benchmarks/timing.py)

ROOT = Path(__file__).resolve().parents[1]
EXAMPLE = ROOT / "configs" / "example_shot.toml"
#: The issue's rule: on by default if the whole process costs at most this much more with the uncertainty.
DEFAULT_ON_RATIO = 2.0
#: Coverage target of the 95 % intervals [fraction] (issue 13).
COVERAGE_TARGET = (0.92, 0.98)
#: Base setups of the coverage trials (example_data/setups, SYNTHETIC), taken in turn.
SHOTS = ("HR-A61-1000-a", "HR-A61-2500-a", "HR-A61-5000-a", "HR-C10-2500-a")


def cost(rounds: int) -> None:
    cmd, label = shpb_command()
    runs = {"--no-uncertainty": [], "--uncertainty": [], "--no-uncertainty --no-figure": [],
            "--uncertainty --no-figure": []}
    with tempfile.TemporaryDirectory() as tmp:
        for r in range(rounds):
            for k, opts in enumerate(runs):
                argv = cmd + ["reduce", str(EXAMPLE), "--out", str(Path(tmp) / f"o{k}"), "--quiet", *opts.split()]
                runs[opts].append(run_process(argv)[0])
    print(f"whole processes ({label} reduce {EXAMPLE.relative_to(ROOT)}), {rounds} rounds, wall [s] min/median/max:")
    for opts, t in runs.items():
        print(f"  {opts:30s} {mmm(t, '.2f')}")
    for fig in ("", " --no-figure"):
        ratio = [a / b for a, b in zip(runs[f"--uncertainty{fig}"], runs[f"--no-uncertainty{fig}"])]
        verdict = "on by default" if statistics.median(ratio) <= DEFAULT_ON_RATIO else "one option away"
        print(f"  ratio with / without uncertainty{fig or ' (with the figure)':17s} {mmm(ratio, '.2f')}   "
              f"(rule: <= {DEFAULT_ON_RATIO:g} -> on by default; median says: {verdict})")


def breakdown(repeats: int) -> None:
    from shpb import uncertainty as U
    from shpb.reduce import reduce_shot
    from shpb.setup import load_shot, with_analysis

    shot = with_analysis(load_shot(EXAMPLE), uncertainty=False)
    stages = reduce_shot(shot).stages  # warm: imports, dispersion tables
    times = {"reduction (stages 1-5)": [], "inputs": [], "GUM part": [], "Monte Carlo part": [],
             "propagation (all)": []}
    for _ in range(repeats):
        t = time.perf_counter()
        stages = reduce_shot(shot).stages
        times["reduction (stages 1-5)"].append(time.perf_counter() - t)
        t = time.perf_counter()
        inputs = U.shot_inputs(shot, stages.strains)
        times["inputs"].append(time.perf_counter() - t)
        t = time.perf_counter()
        U.gum_part(shot, stages, inputs)
        times["GUM part"].append(time.perf_counter() - t)
        t = time.perf_counter()
        U.monte_carlo_part(shot, stages, inputs, U.DEFAULT_DRAWS)
        times["Monte Carlo part"].append(time.perf_counter() - t)
        t = time.perf_counter()
        U.propagate(shot, stages)
        times["propagation (all)"].append(time.perf_counter() - t)
    n_gum = sum(i.method == "GUM" for i in inputs)
    print(f"in process (warm), {repeats} repeats, wall [ms] min/median/max "
          f"({n_gum} GUM inputs, {U.DEFAULT_DRAWS} Monte Carlo draws):")
    for k, t in times.items():
        print(f"  {k:26s} {mmm([1e3 * x for x in t], '.1f')}")
    ratio = [(a + b) / a for a, b in zip(times["reduction (stages 1-5)"], times["propagation (all)"])]
    print(f"  ratio (reduction + propagation) / reduction: {mmm(ratio, '.1f')}")


def coverage(n: int, draws=None) -> None:
    sys.path.insert(0, str(ROOT / "tests"))
    import numpy as np

    import coverage as cov

    t0 = time.perf_counter()
    trials = []
    for k in range(n):
        trials.append(cov.full_trial(SHOTS[k % len(SHOTS)], seed=1000 + k, draws=draws))
    done = [t for t in trials if math.isfinite(t["value_MPa"])]
    covered = sum(bool(t["covered"]) for t in done)
    z = np.array([t["z"] for t in done])
    m = len(done)
    # the count a true 95 % coverage gives in 95 % of such runs (binomial, normal approximation)
    half = 1.96 * math.sqrt(m * 0.95 * 0.05)
    print(f"coverage of the 95 % interval (U95 = 2u) of the flow stress at strain {cov.STRAIN}: {n} virtual shots "
          f"simulated one by one ({', '.join(SHOTS)} in turn), {time.perf_counter() - t0:.0f} s")
    print(f"  covered {covered}/{m} = {covered / max(m, 1):.1%} (target {COVERAGE_TARGET[0]:.0%}-"
          f"{COVERAGE_TARGET[1]:.0%}; a true 95 % gives {0.95 * m - half:.0f}-{min(0.95 * m + half, m):.0f} of {m}); "
          f"{n - m} without a flow stress at that strain")
    print(f"  z = (y - truth)/u: rms {float(np.sqrt(np.mean(z**2))):.2f}, mean {float(np.mean(z)):+.2f}, "
          f"largest |z| {float(np.max(np.abs(z))):.2f}")
    for name in SHOTS:
        ts = [t for t in done if t["shot"] == name]
        if ts:
            u = statistics.median(t["u_MPa"] for t in ts)
            print(f"  {name}: {sum(bool(t['covered']) for t in ts)}/{len(ts)} covered, median u {u:.1f} MPa, "
                  f"median |error| {statistics.median(abs(t['error_MPa']) for t in ts):.1f} MPa")
    missed = [f"{t['shot']} seed {t['seed']}: z = {t['z']:+.2f}" for t in done if not t["covered"]]
    if missed:
        print("  not covered: " + "; ".join(missed))


def main(argv=None) -> int:
    p = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    p.add_argument("--rounds", type=int, default=5, help="rounds of whole processes (default 5)")
    p.add_argument("--repeats", type=int, default=5, help="repeats of the in-process breakdown (default 5)")
    p.add_argument("--coverage", type=int, default=0, metavar="N", help="N simulated coverage trials (>= 100 "
                   "for the issue's check; default none)")
    p.add_argument("--no-cost", action="store_true", help="skip the cost measurements")
    p.add_argument("--quick", action="store_true", help="one round, one repeat, two coverage trials of 10 draws")
    a = p.parse_args(argv)
    if a.quick:
        a.rounds, a.repeats, a.coverage = 1, 1, 2
    if not a.no_cost:
        print(cache_bytecode())
        cost(a.rounds)
        breakdown(a.repeats)
    if a.coverage:
        coverage(a.coverage, draws=10 if a.quick else None)
    return 0


if __name__ == "__main__":
    sys.exit(main())
