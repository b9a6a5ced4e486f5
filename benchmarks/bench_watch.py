"""Benchmark: a verdict at the gun, the time from a record's last byte to its verdict in ``shpb watch``.

One ``shpb watch`` process (a whole process, as at the lab) watches a fresh
folder with a campaign of the example bar set and default specimen. Each
round, a "recorder" writes one example record (synthetic, 8,000 samples, of
the fictional Harrow Ridge lab) into the folder in four chunks 50 ms apart,
as a scope saving over a network share does, and the clock starts at its last
byte. The watcher's lines are read as they come:

* **verdict**: the one-line verdict (VALID / NOT VALID) — target: median
  under 2 s on two cores. It includes the settling time (``--settle``,
  0.5 s by default) that proves the file complete;
* **figure sheet**: the shot's sheet written;
* **table + report**: the campaign table, its figures and ``report.html``
  brought up to date.

Beside it, the yardstick of each round: a cold ``shpb reduce --no-figure``
process on the same record (what a user waits for without the watcher, before
any settling), and the ratio verdict / yardstick. Printed as min / median /
max over the rounds, measured in one run.

    python benchmarks/bench_watch.py [--rounds 6] [--settle 0.5]
    python benchmarks/bench_watch.py --quick      # two rounds, no yardstick: shows it runs
"""

from __future__ import annotations

import argparse
import queue
import signal
import statistics
import subprocess
import tempfile
import threading
import time
from pathlib import Path

from timing import cache_bytecode, mmm, run_process, shpb_command  # noqa: E402  (benchmarks/timing.py)

ROOT = Path(__file__).resolve().parents[1]
RECORDS = sorted((ROOT / "example_data" / "shots").glob("HR-A61-*.csv"))
#: Target: median time from a record's last byte to its verdict [s].
TARGET_S = 2.0


def _campaign(root: Path) -> Path:
    (root / "inbox").mkdir()
    (root / "shots.csv").write_text("id,record\n")
    path = root / "campaign.toml"
    path.write_text(f'name = "bench watch (SYNTHETIC)"\nshots = "shots.csv"\n'
                    f'barset = "{ROOT / "configs" / "example_bars.toml"}"\n'
                    f'[record]\nincident = "CH1"\ntransmitted = "CH2"\ntime = "TIME"\n'
                    f'[specimen]\nlength = "5.02 mm"\ndiameter = "8 mm"\nmaterial = "HR-A61 (fictional)"\n'
                    f'modulus = "70 GPa"\ndensity = "2800 kg/m^3"\n')
    return path


def _write_like_a_scope(src: Path, dst: Path, chunks: int = 4, pause: float = 0.05) -> float:
    """Write ``src`` to ``dst`` in chunks; return the time [perf_counter s] just after its last byte."""
    data = src.read_bytes()
    step = -(-len(data) // chunks)
    with open(dst, "wb") as fh:
        for k in range(chunks):
            fh.write(data[k * step:(k + 1) * step])
            fh.flush()
            if k < chunks - 1:
                time.sleep(pause)
    return time.perf_counter()


class _Lines:
    """The watcher's stdout, each line stamped with the time it was read."""

    def __init__(self, stream):
        self.q = queue.Queue()
        threading.Thread(target=self._pump, args=(stream,), daemon=True).start()

    def _pump(self, stream):
        for line in stream:
            self.q.put((time.perf_counter(), line.rstrip("\n")))
        self.q.put((time.perf_counter(), None))

    def until(self, pred, timeout=60.0):
        deadline = time.monotonic() + timeout
        while True:
            t, line = self.q.get(timeout=max(deadline - time.monotonic(), 0.01))
            if line is None:
                raise SystemExit("the watcher ended early")
            if pred(line):
                return t, line


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--rounds", type=int, default=6)
    ap.add_argument("--settle", type=float, default=0.5)
    ap.add_argument("--quick", action="store_true", help="two rounds, no yardstick")
    args = ap.parse_args()
    rounds = 2 if args.quick else args.rounds
    print(cache_bytecode())
    shpb, label = shpb_command()
    with tempfile.TemporaryDirectory(prefix="shpb-bench-watch-") as tmp:
        root = Path(tmp)
        camp = _campaign(root)
        t0 = time.perf_counter()
        proc = subprocess.Popen(shpb + ["watch", str(root / "inbox"), "--campaign", str(camp), "--out",
                                        str(root / "res"), "--settle", str(args.settle)],
                                stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, bufsize=1)
        lines = _Lines(proc.stdout)
        t_ready, _ = lines.until(lambda s: " watching " in s)
        start_up = t_ready - t0
        verdict, sheet, update, yard = [], [], [], []
        try:
            for k in range(rounds):
                src = RECORDS[k % len(RECORDS)]
                name = f"shot-{k:02d}"
                t_last = _write_like_a_scope(src, root / "inbox" / f"{name}.csv")
                t_v, _ = lines.until(lambda s: f"shot {name}: " in s and "VALID" in s)
                t_f, _ = lines.until(lambda s: "figure sheet:" in s and name in s)
                t_u, _ = lines.until(lambda s: "campaign table updated" in s)
                verdict.append(t_v - t_last)
                sheet.append(t_f - t_last)
                update.append(t_u - t_last)
                if not args.quick:  # the yardstick: a cold reduction of the same record, without its figure
                    shot = root / f"{name}.toml"
                    shot.write_text(f'name = "{name}"\nbarset = "{ROOT / "configs" / "example_bars.toml"}"\n'
                                    f'[specimen]\nlength = "5.02 mm"\ndiameter = "8 mm"\n'
                                    f'[record]\nfile = "{root / "inbox" / (name + ".csv")}"\nincident = "CH1"\n'
                                    f'transmitted = "CH2"\ntime = "TIME"\n')
                    yard.append(run_process(shpb + ["reduce", str(shot), "--out", str(root / "cold" / name),
                                                    "--no-figure", "--no-uncertainty", "--quiet"],  # as watch
                                            ok=(0, 1))[0])
                time.sleep(0.3)
        finally:
            proc.send_signal(signal.SIGINT)
            try:
                proc.wait(30)
            except subprocess.TimeoutExpired:
                proc.kill()
    print(f"shpb watch ({label}), {rounds} rounds, --settle {args.settle:g} s; the example records (8,000 samples), "
          f"written in 4 chunks 50 ms apart")
    print(f"watcher start-up (process start to watching): {start_up:.2f} s")
    print(f"{'from the record last byte to':32s} | min / median / max [s]")
    for name, values in (("its verdict", verdict), ("its figure sheet", sheet), ("campaign table + report", update)):
        print(f"{name:32s} | {mmm(values, '.2f')}")
    if yard:
        print(f"{'yardstick: cold shpb reduce':32s} | {mmm(yard, '.2f')}   (no figure, no settling)")
        ratio = [v / y for v, y in zip(verdict, yard)]
        print(f"{'ratio verdict / yardstick':32s} | {mmm(ratio, '.2f')}")
    med = statistics.median(verdict)
    print(f"target: verdict median < {TARGET_S:g} s: {med:.2f} s {'met' if med < TARGET_S else 'NOT met'}; "
          f"watcher exit status after Ctrl-C: {proc.returncode}")


if __name__ == "__main__":
    main()
