"""Benchmark: a campaign of many small synthetic shots; speed-up of 2 jobs over 1, overhead per shot.

Prints, all measured in this run (best of ``--repeats``):

* the batch time with ``jobs=1`` and ``jobs=2`` and their ratio (target:
  at least 1.7 on two free cores);
* the single-shot reduction time (``reduce_shot`` called directly, record
  reading included) and the batch overhead per shot: batch time per shot
  with ``jobs=1`` minus that reduction time. The overhead holds writing
  ``curves.csv``/``summary.json`` (also paid by ``shpb reduce``), hashing
  the inputs, moving the results between processes and the campaign table;
  the time ``ShotResult.write`` alone takes is printed beside it.

The shots are synthetic (tests/synth.py: an ideal record of a fictional
alloy); per-shot and campaign figures are off unless ``--figures``.

    python benchmarks/bench_campaign.py [--shots 100] [--repeats 2] [--figures]
"""

from __future__ import annotations

import argparse
import os
import resource
import sys
import tempfile
import time

from timing import best_time  # noqa: E402  (benchmarks/timing.py)
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))

from synth import elastic_perfectly_plastic, make_shot  # noqa: E402

from shpb.campaign import load_campaign, run_campaign  # noqa: E402
from shpb.reduce import reduce_shot  # noqa: E402


def build(folder: Path, n: int) -> Path:
    """``n`` small shots (0.6 ms records, 6000 samples) at three rates, and their campaign files."""
    law = elastic_perfectly_plastic(70e9, 300e6)
    rows = []
    for i in range(n):
        sid = f"B-{i:03d}"
        make_shot(folder, law=law, name=sid, amplitude=(7e-4, 9e-4, 1.1e-3)[i % 3], seed=i, t_record=0.6e-3)
        rows.append(f"{sid},{sid}.csv,5.0,10.0,AL-X1 (fictional),293")
    (folder / "shots.csv").write_text("id,record,specimen_length [mm],specimen_diameter [mm],material,"
                                      "temperature [K]\n" + "\n".join(rows) + "\n")
    path = folder / "bench.toml"
    path.write_text('name = "bench (fictional)"\nshots = "shots.csv"\nbarset = "bars.toml"\n'
                    '[record]\nincident = "CH1"\ntransmitted = "CH2"\ntime = "TIME"\n'
                    '[analysis]\ndispersion = false\n[output]\nflow_strains = [0.03, 0.05]\n')
    return path


def _cpu():
    """CPU seconds of this process and of its finished children (pool workers are reaped per run)."""
    s, c = resource.getrusage(resource.RUSAGE_SELF), resource.getrusage(resource.RUSAGE_CHILDREN)
    return s.ru_utime + s.ru_stime, c.ru_utime + c.ru_stime


def timed_run(camp, out, jobs, figures, repeats):
    """Best wall time of ``repeats`` forced runs, and the CPU seconds (coordinator, workers) of the last."""
    best, cpu = float("inf"), None
    for _ in range(repeats):
        (s0, c0), t = _cpu(), time.perf_counter()
        run_campaign(camp, out, jobs=jobs, force=True, figures=figures)
        wall = time.perf_counter() - t
        s1, c1 = _cpu()
        best, cpu = min(best, wall), (s1 - s0, c1 - c0)
    return best, cpu


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--shots", type=int, default=100)
    ap.add_argument("--repeats", type=int, default=2)
    ap.add_argument("--figures", action="store_true")
    a = ap.parse_args(argv)
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        t = time.perf_counter()
        camp = load_campaign(build(folder, a.shots))
        t_build = time.perf_counter() - t
        shots = [r.shot for r in camp.rows]
        out = folder / "out"
        run_campaign(camp, out, jobs=1, figures=a.figures)          # warm-up (imports, caches)
        t_direct = best_time(lambda: [reduce_shot(s) for s in shots], a.repeats) / a.shots
        results = [reduce_shot(s) for s in shots[:20]]
        t_write = best_time(lambda: [r.write(folder / "w" / r.name, figure=False) for r in results],
                          a.repeats) / len(results)
        load0 = os.getloadavg()[0]
        t1, cpu1 = timed_run(camp, out, 1, a.figures, a.repeats)
        t2, cpu2 = timed_run(camp, out, 2, a.figures, a.repeats)
        load1 = os.getloadavg()[0]
        t_skip = best_time(lambda: run_campaign(camp, out, jobs=2, figures=a.figures), 1)
    print(f"campaign: {a.shots} synthetic shots, 6000-sample records, figures {'on' if a.figures else 'off'}; "
          f"CPUs seen: {os.cpu_count()}; built in {t_build:.1f} s")
    print(f"reduce_shot alone (read + reduce):       {1e3 * t_direct:7.1f} ms per shot")
    print(f"ShotResult.write alone (no figure):      {1e3 * t_write:7.1f} ms per shot")
    print(f"batch jobs=1:  {t1:6.2f} s  = {1e3 * t1 / a.shots:7.1f} ms per shot; overhead beyond reduce_shot "
          f"{1e3 * (t1 / a.shots - t_direct):6.1f} ms per shot")
    print(f"batch jobs=2:  {t2:6.2f} s  = {1e3 * t2 / a.shots:7.1f} ms per shot")
    for jobs, (own, kids) in ((1, cpu1), (2, cpu2)):
        print(f"CPU per shot, jobs={jobs}: coordinator {1e3 * own / a.shots:5.1f} ms + workers "
              f"{1e3 * kids / a.shots:5.1f} ms")
    print(f"speed-up jobs=2 over jobs=1: {t1 / t2:.2f} (target >= 1.7 on two free cores)")
    print(f"1-min load average before/after the timed runs: {load0:.2f} / {load1:.2f} "
          f"(other work on the same cores lowers the speed-up)")
    print(f"rerun with nothing to do (all skipped): {t_skip:.2f} s")


if __name__ == "__main__":
    main()
