"""Benchmark: start-up of the ``shpb`` command, whole processes, beside ``python -c pass``.

What a user waits for when asking the command for help is a whole process:
the interpreter, the imports and the parser. Each round runs, one after the
other (interleaved, so a busy spell of the machine hits all alike):

* ``python -c pass`` (the yardstick: the interpreter alone),
* ``shpb --version``,
* ``shpb --help``,
* ``shpb reduce --help``,

and prints for each the min/median/max wall-clock time [ms] over the rounds,
and its difference from and ratio to the yardstick of the same round
(min/median/max over the rounds). Target: the median difference at most
300 ms for each (nothing heavy, such as numpy, pandas, scipy or pint, is
imported to build the parser).

``shpb`` is the console script installed beside this interpreter; without
one, ``python -m shpb.cli`` stands in (said in the output).

    python benchmarks/bench_startup.py [--rounds 10]
    python benchmarks/bench_startup.py --quick     # one round: shows it runs (CI)
"""

from __future__ import annotations

import argparse
import statistics
import sys

from timing import cache_bytecode, mmm, run_process, shpb_command  # noqa: E402  (benchmarks/timing.py)

#: The target: at most this much more than the yardstick (median over the rounds) [s].
TARGET_DIFFERENCE_S = 0.3


def cases() -> tuple[dict, str]:
    """Name -> argv of each timed process (the yardstick first); the label of the shpb command."""
    shpb, label = shpb_command()
    return {
        "python -c pass": [sys.executable, "-c", "pass"],
        "shpb --version": shpb + ["--version"],
        "shpb --help": shpb + ["--help"],
        "shpb reduce --help": shpb + ["reduce", "--help"],
    }, label


def measure(commands: dict, rounds: int, warm_up: bool = True) -> dict:
    """Name -> wall-clock times [s], one per round, the processes of a round run one after the other."""
    if warm_up:  # not counted: compiled bytecode and the file cache are in place for every round
        for argv in commands.values():
            run_process(argv)
    times = {name: [] for name in commands}
    for _ in range(rounds):
        for name, argv in commands.items():
            times[name].append(run_process(argv)[0])
    return times


def report(times: dict, label: str) -> list:
    """Lines of the table: times, and differences from and ratios to the yardstick of the same round."""
    names = list(times)
    base = times[names[0]]
    lines = [f"start-up, {len(base)} round(s), interleaved; shpb = {label}; each column min / median / max",
             f"{'process':<20} | {'time [ms]':^20} | {'minus yardstick [ms]':^20} | {'ratio to yardstick':^20}"]
    for name in names:
        t = times[name]
        diff = [1e3 * (a - b) for a, b in zip(t, base)]
        ratio = [a / b for a, b in zip(t, base)]
        lines.append(f"{name:<20} | {mmm([1e3 * v for v in t], '6.0f'):>20} | {mmm(diff, '6.0f'):>20} | "
                     f"{mmm(ratio, '6.1f'):>20}")
    worst = max(statistics.median([a - b for a, b in zip(times[n], base)]) for n in names[1:])
    verdict = "met" if worst <= TARGET_DIFFERENCE_S else "NOT met"
    lines.append(f"target: at most +{1e3 * TARGET_DIFFERENCE_S:.0f} ms over the yardstick (median): {verdict} "
                 f"(worst +{1e3 * worst:.0f} ms)")
    return lines


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--rounds", type=int, default=10, help="rounds of the four processes [default: 10]")
    ap.add_argument("--quick", action="store_true", help="one round, no warm-up: shows the script works")
    args = ap.parse_args(argv)
    print(cache_bytecode())
    commands, label = cases()
    times = measure(commands, 1 if args.quick else max(1, args.rounds), warm_up=not args.quick)
    print("\n".join(report(times, label)))
    return 0


if __name__ == "__main__":
    sys.exit(main())
