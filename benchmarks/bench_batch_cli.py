"""Benchmark: ``shpb batch`` as whole processes on the example campaign (figures on).

Prints ratios measured in this run, min/median/max over interleaved rounds:

* **rerun with nothing to do** / ``shpb --help``: a second ``shpb batch`` on an up-to-date output folder
  against the cheapest command there is, both whole processes (target: at most 1.5). The rerun must also
  leave every output file alone: the script checks that no file's modification time changed.
* **--jobs 2 / --jobs 1** (full runs with figures, ``--force``): the speed-up on two cores (target: close to
  2 on two free cores; the per-shot figure sheets are drawn in the workers).

The example campaign is synthetic (the fictional Harrow Ridge lab, ``example_data/``).

    python benchmarks/bench_batch_cli.py [--rounds 5] [--quick]

``--quick``: 3 rounds of the rerun ratio and one full run of each job count.
"""

from __future__ import annotations

import argparse
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from timing import cache_bytecode  # (benchmarks/timing.py)

ROOT = Path(__file__).resolve().parents[1]
SHPB = [sys.executable, "-m", "shpb.cli"]


def run(args, expect=(0,)) -> float:
    t = time.perf_counter()
    proc = subprocess.run(SHPB + args, capture_output=True, text=True)
    dt = time.perf_counter() - t
    if proc.returncode not in expect:
        raise SystemExit(f"shpb {' '.join(args)} exited {proc.returncode}:\n{proc.stderr}")
    return dt


def stats(values):
    return f"min {min(values):.2f}  median {statistics.median(values):.2f}  max {max(values):.2f}"


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--rounds", type=int, default=5)
    ap.add_argument("--quick", action="store_true")
    args = ap.parse_args(argv)
    print(cache_bytecode())
    rounds = 3 if args.quick else args.rounds
    full_rounds = 1 if args.quick else max(2, rounds // 2)
    with tempfile.TemporaryDirectory(prefix="shpb-bench-batch-") as tmp:
        work = Path(tmp)
        shutil.copytree(ROOT / "example_data", work / "example_data")
        shutil.copytree(ROOT / "configs", work / "configs")
        camp = str(work / "example_data" / "campaign" / "campaign.toml")
        out = str(work / "out")
        batch = ["batch", camp, "--out", out]

        # --jobs 2 over --jobs 1, full runs with figures, interleaved
        t1, t2 = [], []
        for _ in range(full_rounds):
            t1.append(run(batch + ["--jobs", "1", "--force", "--quiet"]))
            t2.append(run(batch + ["--jobs", "2", "--force", "--quiet"]))
        speedups = [a / b for a, b in zip(t1, t2)]

        # a rerun with nothing to do against shpb --help, interleaved
        run(batch + ["--jobs", "2", "--quiet"])  # the folder is up to date from here
        stamp = {p: p.stat().st_mtime_ns for p in Path(out).rglob("*") if p.is_file()}
        rerun, helps = [], []
        for _ in range(rounds):
            helps.append(run(["--help"]))
            rerun.append(run(batch + ["--jobs", "2", "--quiet"]))
        touched = [p for p, m in stamp.items() if not p.exists() or p.stat().st_mtime_ns != m]
        ratios = [a / b for a, b in zip(rerun, helps)]

    print("shpb batch on the example campaign (12 shots, figures on), whole processes; ratios min/median/max")
    print(f"  --jobs 1 full run [s]        {stats(t1)}")
    print(f"  --jobs 2 full run [s]        {stats(t2)}")
    print(f"  speed-up jobs 2 / jobs 1     {stats(speedups)}   (target: close to 2 on two free cores)")
    print(f"  shpb --help [s]              {stats(helps)}")
    print(f"  rerun, nothing to do [s]     {stats(rerun)}")
    print(f"  rerun / --help               {stats(ratios)}   (target <= 1.5)")
    print(f"  files the reruns touched     {len(touched)}" + (f": {touched[:3]}" if touched else " (target 0)"))
    return 0


if __name__ == "__main__":
    sys.exit(main())
