"""Timing helpers shared by the benchmark scripts (run them as ``python benchmarks/bench_*.py``)."""

import os
import statistics
import subprocess
import sys
import time
from pathlib import Path


def run_times(fn, repeats):
    """Wall-clock times [s] of ``repeats`` calls of ``fn()``."""
    times = []
    for _ in range(repeats):
        t = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t)
    return times


def median_time(fn, repeats):
    """Median wall-clock time [s] of ``repeats`` calls: robust to a noisy machine."""
    return statistics.median(run_times(fn, repeats))


def best_time(fn, repeats):
    """Shortest wall-clock time [s] of ``repeats`` calls."""
    return min(run_times(fn, repeats))


# --------------------------------------------------------------------------- whole processes
def cache_bytecode(*trees) -> str:
    """Compile the ``shpb`` package of each source tree (default: this one) to cached bytecode; a line saying so.

    On a user's machine a process imports shpb's modules from cached
    bytecode: pip compiles a regular install, and an editable one writes
    ``__pycache__`` on the first import. Where ``PYTHONDONTWRITEBYTECODE``
    is set (the development machine sets it), imports write nothing, and
    every process would compile each module from its source again (about
    45 ms of a ``shpb reduce``): the whole-process benchmarks would time
    that, not what a user runs. Compiled once here, as the installer does,
    every process reads the bytecode (the variable stops the writing only).
    """
    import compileall

    roots = [Path(t) / "shpb" for t in trees] or [Path(__file__).resolve().parents[1] / "shpb"]
    for root in roots:
        if not compileall.compile_dir(str(root), quiet=1):
            raise SystemExit(f"could not compile {root} to bytecode")
    flag = os.environ.get("PYTHONDONTWRITEBYTECODE")
    return (f"bytecode of {', '.join(map(str, roots))} compiled first, as an installed package has it"
            + (f" (PYTHONDONTWRITEBYTECODE={flag} here: imports would not write it)" if flag else ""))


def shpb_command() -> tuple:
    """The ``shpb`` console script beside this interpreter, else ``python -m shpb.cli``; and a label."""
    script = Path(sys.executable).with_name("shpb")
    if script.is_file():
        return [str(script)], "shpb"
    return [sys.executable, "-m", "shpb.cli"], "python -m shpb.cli"


def run_process(argv, ok=(0,), env=None) -> tuple:
    """Run one process to its end: (wall-clock time [s], peak resident memory [bytes]).

    The peak is the child's own maximum resident set size (``wait4``'s
    ``ru_maxrss``, kibibytes on Linux). Fails loudly when the exit status is
    not in ``ok``.
    """
    t = time.perf_counter()
    p = subprocess.Popen(argv, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, env=env)
    err = p.stderr.read()
    _, status, usage = os.wait4(p.pid, 0)
    wall = time.perf_counter() - t
    p.returncode = os.waitstatus_to_exitcode(status)  # reaped here: Popen must not wait again
    p.stderr.close()
    if p.returncode not in ok:
        raise SystemExit(f"{' '.join(map(str, argv))} exited {p.returncode}: {err.decode(errors='replace').strip()}")
    return wall, usage.ru_maxrss * 1024


def mmm(values, fmt) -> str:
    """min / median / max, each formatted with ``fmt``."""
    return " ".join(format(v, fmt) for v in (min(values), statistics.median(values), max(values)))
