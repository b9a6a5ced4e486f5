"""Speed of test planning with its virtual-shot preview (shpb.planning, ``shpb plan``), and what the previews reach.

Run: ``python benchmarks/bench_plan.py [--quick] [--jobs N]``. Measured in this one run and printed:

1. **Per target, in process**: ``plan_target`` (design, virtual shot of the design reduced as a real shot,
   adjustments) for every target of ``configs/example_plan.toml`` on ``configs/example_bars.toml``, one after
   the other; the time per target (min / median / max) and the table of targets against what the previews
   reached (mean rate, final strain, verdict, previews used).
2. **Whole process**: ``shpb plan configs/example_bars.toml configs/example_plan.toml --jobs N --out TMP``
   (figure included) beside ``python -c pass``; wall time per target.

Target: the plan with its preview at most 10 s per target on two cores (the whole process with ``--jobs 2``,
wall time over the number of targets). The machine is shared: beside the wall time the script prints the CPU
time of the process and its workers, and that CPU time spread over two free cores. ``--quick`` plans one
target (HR-A61 at 2500 1/s) in both parts.
"""

from __future__ import annotations

import argparse
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from timing import cache_bytecode  # noqa: E402  (benchmarks/timing.py)

from shpb.planning import flow_tables, load_plan, plan_target, with_targets  # noqa: E402
from shpb.setup import load_barset  # noqa: E402

BARS = ROOT / "configs" / "example_bars.toml"
PLAN = ROOT / "configs" / "example_plan.toml"
TARGET_S_PER_TARGET = 10.0
QUICK = dict(rates=[2500.0], materials=["HR-A61"])


def spread(values, fmt="{:.2f}"):
    return " / ".join(fmt.format(v) for v in (min(values), statistics.median(values), max(values)))


def in_process(quick: bool) -> list:
    bs = load_barset(BARS)
    plan = load_plan(PLAN)
    if quick:
        plan = with_targets(plan, **QUICK)
    tables = flow_tables(plan)
    rows = []
    for target in plan.targets:
        start, cpu = time.perf_counter(), time.process_time()
        planned = plan_target(target, plan, bs, tables=tables)
        rows.append((planned, time.perf_counter() - start, time.process_time() - cpu))
    return rows


def process(argv, cwd):
    """(wall [s], CPU [s] of the process and the workers it waited for)."""
    import resource

    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    start = time.perf_counter()
    p = subprocess.run(argv, cwd=cwd, capture_output=True, text=True)
    elapsed = time.perf_counter() - start
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    if p.returncode not in (0, 1):
        raise SystemExit(f"{' '.join(map(str, argv))} failed ({p.returncode}):\n{p.stderr}")
    return elapsed, (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="one target instead of the example plan's six")
    ap.add_argument("--jobs", type=int, default=2, help="processes of the whole-process run [default: 2]")
    args = ap.parse_args(argv)

    print(f"machine: {os.cpu_count()} CPUs; plan {PLAN.relative_to(ROOT)} on {BARS.relative_to(ROOT)}")
    print(cache_bytecode())
    rows = in_process(args.quick)
    print("\n1. in process, one target after the other (design + previews + adjustments)")
    print("| target | rate target / reached [1/s] | strain target / reached | verdict | previews | wall / CPU [s] |")
    print("|---|---|---|---|---|---|")
    for planned, seconds, cpu in rows:
        t, pv = planned.design.target, planned.preview
        print(f"| {planned.name} | {t.strain_rate:g} / {pv.mean_rate:.0f} ({100 * (pv.mean_rate / t.strain_rate - 1):+.1f} %) "
              f"| {t.strain:g} / {pv.final_strain:.3f} ({100 * (pv.final_strain / t.strain - 1):+.1f} %) "
              f"| {'valid' if pv.valid else 'NOT valid'} | {len(planned.history)} | {seconds:.1f} / {cpu:.1f} |")
    print(f"time per target [s], min / median / max: wall {spread([r[1] for r in rows])}, "
          f"CPU {spread([r[2] for r in rows])} (wall above CPU: other work shares the machine)")

    with tempfile.TemporaryDirectory() as tmp:
        extra = ["--material", "HR-A61", "--rate", "2500 1/s"] if args.quick else []
        command = [sys.executable, "-m", "shpb.cli", "plan", str(BARS), str(PLAN), "--jobs", str(args.jobs),
                   "--out", str(Path(tmp) / "plan"), *extra]
        base, _ = process([sys.executable, "-c", "pass"], ROOT)
        load = os.getloadavg()[0]
        whole, cpu = process(command, ROOT)
        load = max(load, os.getloadavg()[0])
    n = len(rows)
    per_target = whole / n
    idle = max(cpu / 2.0, cpu / n if n == 1 else 0.0) / n  # two free cores share the CPU time (one target: one core)
    print(f"\n2. whole process, --jobs {args.jobs}: python -c pass {base:.2f} s; shpb plan {whole:.1f} s wall, "
          f"{cpu:.1f} s CPU for {n} target(s); load average up to {load:.1f} on {os.cpu_count()} CPUs")
    print(f"   per target: {per_target:.2f} s wall; {cpu / n:.2f} s CPU; {idle:.2f} s on two free cores (CPU / 2)")
    print(f"target: at most {TARGET_S_PER_TARGET:g} s per target on two cores -> ratio {per_target / TARGET_S_PER_TARGET:.2f} "
          f"wall as measured, {idle / TARGET_S_PER_TARGET:.2f} on two free cores")


if __name__ == "__main__":
    main()
