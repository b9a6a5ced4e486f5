"""Benchmark: Pochhammer–Chree table solve and dispersion propagation.

Prints, measured in this run:

(a) the time to solve a 2000-point normalised curve (the disk cache off, the
    process cache cleared before each solve; the first solve, which imports
    scipy, is shown apart), and its ratio to the 50 ms target; then the time to read it
    back from the disk cache (shpb.cache) instead;
(b) the ratio of ``propagate()`` on a 1,000,000-sample wave (1 m in a 20 mm
    steel bar, 10 MHz sampling) to one ``numpy.fft.rfft`` of the same length
    (median of repeats, table already cached). Target: at most 10.

    python benchmarks/bench_dispersion.py [--samples 1000000] [--repeats 7]
"""

from __future__ import annotations

import argparse
import os
import tempfile
import time

from timing import median_time  # noqa: E402  (benchmarks/timing.py)

import numpy as np


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--samples", type=int, default=1_000_000)
    ap.add_argument("--repeats", type=int, default=7)
    args = ap.parse_args(argv)

    t = time.perf_counter()
    from shpb import dispersion as D

    t_import = time.perf_counter() - t

    # (a) table solve, then the same table read from the disk cache
    def solve():
        D.normalized_curve.cache_clear()
        D.normalized_curve(0.29, n=2000)

    os.environ["SHPB_CACHE_DIR"] = "off"
    t = time.perf_counter()
    solve()
    t_first = time.perf_counter() - t
    t_solve = median_time(solve, args.repeats)
    with tempfile.TemporaryDirectory() as tmp:
        os.environ["SHPB_CACHE_DIR"] = tmp
        solve()  # solved and stored
        t_read = median_time(solve, args.repeats)
    print(f"import shpb.dispersion: {t_import * 1e3:.0f} ms")
    print(f"(a) 2000-point normalised curve (nu = 0.29): first solve {t_first * 1e3:.1f} ms, "
          f"median {t_solve * 1e3:.1f} ms of {args.repeats}; ratio to 50 ms target: {t_solve / 0.050:.2f} "
          f"(first solve: {t_first / 0.050:.2f}); read from the disk cache: {t_read * 1e3:.1f} ms")

    # (b) propagation vs one real FFT of the same length
    rng = np.random.default_rng(1)
    dt, c0, radius = 0.1e-6, 5047.54, 0.010
    t_axis = np.arange(args.samples) * dt
    x = np.exp(-0.5 * ((t_axis - 0.2 * t_axis[-1]) / 5e-6) ** 2) + 1e-4 * rng.standard_normal(args.samples)
    D.propagate(x, dt, 1.0, radius, c0, 0.29)  # warm: table cached, FFT plans made
    np.fft.rfft(x)
    t_prop = median_time(lambda: D.propagate(x, dt, 1.0, radius, c0, 0.29), args.repeats)
    t_fft = median_time(lambda: np.fft.rfft(x), args.repeats)
    print(f"(b) propagate() on {args.samples} samples: {t_prop * 1e3:.1f} ms; numpy.fft.rfft: "
          f"{t_fft * 1e3:.1f} ms; ratio {t_prop / t_fft:.2f} (target <= 10)")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
