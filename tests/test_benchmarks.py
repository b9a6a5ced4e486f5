"""The whole-process benchmark runs (CI's quick mode); it asserts nothing about time.

Speed targets live in ``benchmarks/bench_process.py`` as printed ratios, never in a test. No published source
applies: a behavioural check that the script runs and prints its table (common practice: benchmarks are run in
CI so that they do not rot).
"""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]


@pytest.mark.slow
def test_process_benchmark_quick_mode_runs():
    # one round of every process on the example shot, the ratio table, the targets and the breakdown (in quick
    # mode without its figure steps: the processes with the figure run above it)
    p = subprocess.run([sys.executable, str(ROOT / "benchmarks" / "bench_process.py"), "--quick"],
                       capture_output=True, text=True, cwd=ROOT)
    assert p.returncode == 0, p.stderr
    out = p.stdout
    for name in ("python -c pass", "pandas yardstick", "shpb reduce --no-figure", "shpb reduce ",
                 "target: example shpb reduce <= 2.0", "in-process breakdown",
                 "time to the verdict line", "write curves.csv"):
        assert name in out, (name, out)
    # every row of the table has its three ratios (min, median, max) of a positive number
    row = next(line for line in out.splitlines() if line.startswith("shpb reduce --no-figure"))
    ratios = [float(x) for x in row.split("|")[3].split()]
    assert len(ratios) == 3 and all(r > 0 for r in ratios)
