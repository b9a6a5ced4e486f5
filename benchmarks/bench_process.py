"""Benchmark: ``shpb reduce`` as whole processes, beside its yardsticks, and where the time goes.

What a user waits for is a whole process: the interpreter, the imports, the
set-up files, the record, the reduction, the files and the figure. Each round
runs these processes one after the other (interleaved, so that a busy spell
of this shared machine hits all alike):

* ``python -c pass`` (the interpreter alone);
* the pandas yardstick: a process that imports pandas and reads the same
  record with ``pandas.read_csv`` (the three columns, after the header lines);
* the fastest-parser yardstick: the same with ``pyarrow.csv.read_csv``, when
  pyarrow is installed (in the ``test`` extra);
* ``shpb reduce SHOT --no-figure`` and ``shpb reduce SHOT`` (with the figure
  sheet), each writing to a temporary folder; both with ``--no-uncertainty``:
  the reduction itself (``benchmarks/bench_uncertainty.py`` measures what the
  uncertainty stage, on by default in ``shpb reduce``, adds);
* ``shpb reduce SHOT`` with its defaults, the uncertainty stage included
  (what a user runs; its verdict is printed before that stage starts).

for the example shot (``configs/example_shot.toml``) and, with ``--long``, a
synthetic record of 5,000,000 samples (made once by ``tests/synth.py``: an
ideal shot of a fictional alloy at the start of a 0.5 s record at 10 MHz).
For each process it prints the wall-clock time and the peak resident memory
(min/median/max over the rounds), and the ratio of the shpb processes to the
pandas yardstick and to the fastest parser of the same round
(min/median/max). The peak memory is the child's maximum resident set size
(``wait4``); this script imports nothing large, so that it does not count.
Targets (issue 17): on the example, with the figure at most
2x the pandas yardstick, without at most 1.5x; the long record with the figure
at most 1.5x, its peak memory at most 2x the record's file size.

Then the time from the start of ``shpb reduce SHOT`` (defaults) to its verdict
line on stdout, beside the pandas yardstick: what a lab waits for at the gun.

Last, the in-process breakdown: a fresh process runs the steps of
``shpb reduce`` one by one and prints the time of each (imports, set-up files,
record, dispersion tables, reduction, files, figure); three such processes,
min/median/max per step.

``--before DIR`` adds, to the same rounds, the two ``shpb reduce`` processes
and the breakdown of another source tree put first on ``PYTHONPATH`` (e.g. an
older commit: ``git archive BASE | tar -x -C DIR``): before and after,
measured side by side.

    python benchmarks/bench_process.py [--rounds 5] [--long] [--long-samples 5000000] [--data DIR] [--before DIR]
    python benchmarks/bench_process.py --quick     # one round of the example, a breakdown without the figure: it runs (CI)
"""

from __future__ import annotations

import argparse
import importlib.util
import json
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from timing import cache_bytecode, mmm, run_process, shpb_command  # noqa: E402  (benchmarks/timing.py)

ROOT = Path(__file__).resolve().parents[1]
EXAMPLE = ROOT / "configs" / "example_shot.toml"
#: Targets: ratio of the median time to the pandas yardstick's.
TARGETS = {("example", "shpb reduce --no-figure"): 1.5, ("example", "shpb reduce"): 2.0,
           ("long", "shpb reduce"): 1.5}
#: Target: peak resident memory over the record's file size, long record with the figure.
MEMORY_TARGET = 2.0


# --------------------------------------------------------------------------- the records
def record_layout(shot_path: Path):
    """(record file, number of lines before its header row) of a shot file's record."""
    import tomllib

    shot = tomllib.loads(shot_path.read_text())
    path = (shot_path.parent / shot["record"]["file"]).resolve()
    with open(path) as fh:
        for i, line in enumerate(fh):
            cells = line.split(",")
            try:
                [float(c) for c in cells]
            except ValueError:
                continue
            return path, i - 1  # the header row is the line before the first numeric one
    raise SystemExit(f"{path}: no numeric rows")


def long_record(folder: Path, samples: int) -> Path:
    """The shot file of a synthetic ``samples``-long record in ``folder`` (made once, reused).

    Made in a child process: this process stays small, so that it does not
    raise the peak memory its children report (a child's peak counts the
    memory of the process it was forked from).
    """
    shot = folder / f"long{samples}.toml"
    if shot.is_file():
        return shot
    t = time.perf_counter()
    code = ("import sys; sys.path.insert(0, sys.argv[1])\n"
            "from synth import elastic_perfectly_plastic, make_shot\n"
            "make_shot(sys.argv[2], law=elastic_perfectly_plastic(70e9, 300e6), dt=1e-7, "
            "t_record=int(sys.argv[3]) * 1e-7, name='long' + sys.argv[3])")
    subprocess.run([sys.executable, "-c", code, str(ROOT / "tests"), str(folder), str(samples)], check=True)
    print(f"(made a {samples}-sample record in {time.perf_counter() - t:.0f} s: {shot.with_suffix('.csv')})")
    return shot


# --------------------------------------------------------------------------- the processes
def before_env(before):
    """The environment of a process that runs the source tree ``before`` (None: this one)."""
    if before is None:
        return None
    return {**os.environ, "PYTHONPATH": os.pathsep.join([str(before), os.environ.get("PYTHONPATH", "")])}


def pandas_yardstick(record: Path, header: int) -> list:
    """The yardstick process: import pandas and read the record's columns after its header lines."""
    return [sys.executable, "-c", f"import pandas; pandas.read_csv({str(record)!r}, skiprows={header})"]


def cases(shot: Path, out: Path, before=None) -> dict:
    """Name -> (argv, environment) of each timed process of a round (the interpreter alone first)."""
    record, header = record_layout(shot)
    shpb, _ = shpb_command()
    py = sys.executable
    out_cases = {
        "python -c pass": [py, "-c", "pass"],
        "pandas yardstick": pandas_yardstick(record, header),
    }
    if importlib.util.find_spec("pyarrow") is not None:  # not imported here: this process stays small
        out_cases["pyarrow yardstick"] = [
            py, "-c", f"import pyarrow.csv as c; c.read_csv({str(record)!r}, "
                      f"read_options=c.ReadOptions(skip_rows={header}))"]
    out_cases = {name: (argv, None) for name, argv in out_cases.items()}
    for label, env in [("", None)] + ([("before: ", before_env(before))] if before else []):
        # the reduction without the uncertainty stage, which shpb reduce runs by default since issue 13
        # (benchmarks/bench_uncertainty.py measures what it adds); a tree from before it has no such option
        plain = [] if label else ["--no-uncertainty"]
        out_cases[f"{label}shpb reduce --no-figure"] = (
            shpb + ["reduce", str(shot), "--out", str(out / f"{label[:6]}a"), "--no-figure", *plain], env)
        out_cases[f"{label}shpb reduce"] = (shpb + ["reduce", str(shot), "--out", str(out / f"{label[:6]}b"),
                                                    *plain], env)
    # what a user runs: the defaults, the uncertainty stage included (its verdict is printed before that stage)
    out_cases["shpb reduce (defaults)"] = (shpb + ["reduce", str(shot), "--out", str(out / "c")], None)
    return out_cases


def measure(commands: dict, rounds: int, warm_up: bool) -> dict:
    """Name -> list of (wall [s], peak memory [bytes]), one per round, the processes of a round interleaved."""
    ok = (0, 1)  # shpb reduce exits 1 for a shot judged not valid: a finished run all the same
    if warm_up:  # not counted: compiled bytecode, the file cache and the dispersion cache are in place
        for argv, env in commands.values():
            run_process(argv, ok, env)
    runs = {name: [] for name in commands}
    for _ in range(rounds):
        for name, (argv, env) in commands.items():
            runs[name].append(run_process(argv, ok, env))
    return runs


def report(label: str, runs: dict, file_size: int) -> list:
    """Lines of one record's table."""
    base = [w for w, _ in runs["pandas yardstick"]]
    parsers = [n for n in ("pandas yardstick", "pyarrow yardstick") if n in runs]
    fastest = [min(runs[n][i][0] for n in parsers) for i in range(len(base))]
    lines = [f"{label}: record {file_size / 1e6:.1f} MB; {len(base)} round(s), interleaved; min / median / max",
             f"{'process':<31} | {'wall [s]':^17} | {'peak memory [MB]':^17} | {'/ pandas yardstick':^17} | "
             f"{'/ fastest parser':^17}"]
    for name, r in runs.items():
        wall, mem = [w for w, _ in r], [m / 1e6 for _, m in r]
        lines.append(f"{name:<31} | {mmm(wall, '5.2f'):>17} | {mmm(mem, '5.0f'):>17} | "
                     f"{mmm([a / b for a, b in zip(wall, base)], '5.2f'):>17} | "
                     f"{mmm([a / b for a, b in zip(wall, fastest)], '5.2f'):>17}")
    return lines


def verdicts(results: dict) -> list:
    """The target lines: each measured median ratio beside its target."""
    lines = []
    for (label, name), target in TARGETS.items():  # this tree's processes (not those of --before)
        if label not in results:
            continue
        runs, size = results[label]
        ratio = statistics.median(a[0] / b[0] for a, b in zip(runs[name], runs["pandas yardstick"]))
        lines.append(f"target: {label} {name} <= {target} x pandas yardstick: median {ratio:.2f} "
                     f"{'met' if ratio <= target else 'NOT met'}")
    if "long" in results:
        runs, size = results["long"]
        peak = statistics.median(m for _, m in runs["shpb reduce"]) / size
        lines.append(f"target: long shpb reduce peak memory <= {MEMORY_TARGET} x file size: median {peak:.2f} "
                     f"{'met' if peak <= MEMORY_TARGET else 'NOT met'}")
    return lines


# --------------------------------------------------------------------------- the breakdown
def breakdown(shot: Path, before=None, repeats=3, figure=True) -> list:
    """Run the steps of ``shpb reduce`` in ``repeats`` fresh processes (of the tree ``before`` if given).

    Lines of (step, min / median / max time over the processes).
    """
    runs = []
    for _ in range(repeats):
        with tempfile.TemporaryDirectory() as tmp:
            child = ["--breakdown-child", str(shot), tmp] + ([] if figure else ["--no-figure"])
            p = subprocess.run([sys.executable, __file__, *child],
                               capture_output=True, text=True, env=before_env(before))
        if p.returncode != 0:
            raise SystemExit(f"breakdown failed: {p.stderr.strip()}")
        runs.append(json.loads(p.stdout.strip().splitlines()[-1]))
    whose = f" of {before}" if before else ""
    lines = [f"in-process breakdown{whose} of shpb reduce {shot.name} ({repeats} fresh process(es), steps in "
             f"order; min / median / max [ms]):"]
    for i, (name, _) in enumerate(runs[0]):
        lines.append(f"  {name:<52} {mmm([1e3 * r[i][1] for r in runs], '6.0f')}")
    lines.append(f"  {'total':<52} {mmm([1e3 * sum(t for _, t in r) for r in runs], '6.0f')}")
    return lines


def _breakdown_child(shot_path: str, out: str, figure: bool = True) -> None:
    """The steps of ``shpb reduce``, each timed; prints a JSON list of [step, seconds]."""
    steps = []
    clock = [time.perf_counter()]

    def step(name):
        now = time.perf_counter()
        steps.append([name, now - clock[0]])
        clock[0] = now

    import shpb.cli  # noqa: F401
    step("import the command line (typer, shpb.cli)")
    import numpy  # noqa: F401
    step("import numpy")
    import pandas  # noqa: F401
    step("import pandas")
    from shpb import io, reduce, setup
    step("import shpb.reduce, setup, io")
    shot = setup.load_shot(shot_path)
    step("load the shot and bar set files (units)")
    record = io.read_record(shot.record)
    step("read the record (parse, check, hash)")
    from shpb import dispersion
    step("import shpb.dispersion")
    for bar in (shot.barset.incident, shot.barset.transmitted):
        dispersion.normalized_curve(bar.poisson_ratio)
        dispersion.second_mode_onset(bar.diameter / 2, bar.wave_speed, bar.poisson_ratio)
    step("dispersion tables and second-mode onset")
    result = reduce.reduce_shot(shot, record)
    step("reduce_shot (the five stages)")
    folder = Path(out)
    io.atomic_write_csv(folder / result.CURVES_FILE, result.curves)
    step("write curves.csv")
    if not figure:
        print(json.dumps(steps))
        return
    from shpb import report
    step("import shpb.report (matplotlib)")
    fig = report.plot_shot(result)
    step("build the figure (plot_shot)")
    io.atomic_savefig(fig, folder / result.FIGURE_FILE, dpi=110)
    step("draw and write shot.png")
    io.atomic_write_json(folder / result.SUMMARY_FILE, result.summary)
    step("write summary.json")
    print(json.dumps(steps))


def verdict_latency(shot: Path, out: Path, rounds: int) -> list:
    """Time from the start of ``shpb reduce SHOT`` (its defaults) to its verdict line on stdout, beside the pandas
    yardstick of the same round: lines ``name | min median max [s] | ratio min median max``."""
    shpb, _ = shpb_command()
    record, header = record_layout(shot)
    yard = pandas_yardstick(record, header)
    verdict, ratio = [], []
    for k in range(rounds):
        t0 = time.perf_counter()
        subprocess.run(yard, check=True, capture_output=True)
        base = time.perf_counter() - t0
        t0 = time.perf_counter()
        with subprocess.Popen(shpb + ["reduce", str(shot), "--out", str(out / f"v{k}")], stdout=subprocess.PIPE,
                              stderr=subprocess.DEVNULL, text=True) as p:
            first = p.stdout.readline()  # the verdict line, printed before the uncertainty stage and the files
            verdict.append(time.perf_counter() - t0)
            p.stdout.read()
        if "VALID" not in first:
            raise SystemExit(f"no verdict line from shpb reduce: {first!r}")
        ratio.append(verdict[-1] / base)

    def three(xs):
        return " ".join(f"{x:5.2f}" for x in (min(xs), statistics.median(xs), max(xs)))

    return [f"time to the verdict line of shpb reduce (defaults), {rounds} round(s): {three(verdict)} s; "
            f"/ pandas yardstick {three(ratio)}"]


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--rounds", type=int, default=5, help="rounds of the processes [default: 5]")
    ap.add_argument("--long", action="store_true", help="also the long synthetic record")
    ap.add_argument("--long-samples", type=int, default=5_000_000, help="its length [default: 5000000]")
    ap.add_argument("--data", type=Path, help="folder to keep the long record in and reuse [default: temporary]")
    ap.add_argument("--before", type=Path, help="also the shpb reduce processes of this source tree")
    ap.add_argument("--quick", action="store_true", help="one round of the example, no warm-up: shows it runs")
    ap.add_argument("--breakdown-child", nargs=2, help=argparse.SUPPRESS)
    ap.add_argument("--no-figure", action="store_true", help=argparse.SUPPRESS)  # of the breakdown child
    args = ap.parse_args(argv)
    if args.breakdown_child:
        _breakdown_child(*args.breakdown_child, figure=not args.no_figure)
        return 0
    rounds = 1 if args.quick else max(1, args.rounds)
    _, label = shpb_command()
    print(f"shpb = {label}; python {sys.version.split()[0]}; {os.cpu_count()} CPUs")
    print(cache_bytecode(ROOT, *([args.before] if args.before else [])))
    results = {}
    with tempfile.TemporaryDirectory() as tmp:
        records = {"example": EXAMPLE}
        if args.long and not args.quick:
            data = args.data or Path(tmp)
            data.mkdir(parents=True, exist_ok=True)
            records["long"] = long_record(data, args.long_samples)
        for name, shot in records.items():
            runs = measure(cases(shot, Path(tmp) / name, args.before), rounds, warm_up=not args.quick)
            size = record_layout(shot)[0].stat().st_size
            results[name] = (runs, size)
            print("\n".join(report(f"{name} ({shot.name})", runs, size)))
    print("\n".join(verdicts(results)))
    with tempfile.TemporaryDirectory() as tmp:
        print("\n".join(verdict_latency(EXAMPLE, Path(tmp), rounds)))
    repeats = 1 if args.quick else 3  # quick: one breakdown, without the figure steps (timed above already)
    if args.before:
        print("\n".join(breakdown(EXAMPLE, args.before, repeats, figure=not args.quick)))
    print("\n".join(breakdown(EXAMPLE, None, repeats, figure=not args.quick)))
    return 0


if __name__ == "__main__":
    sys.exit(main())
