"""Benchmark: coverage of the fit's 95 % bootstrap intervals on virtual campaigns, and grid-step invariance.

Each virtual campaign (tests/fit_campaigns.py: the fictional HR-A61 rate
series, synthetic, with a known Johnson–Cook truth A 300 MPa, B 400 MPa,
n 0.40, C 0.010, reference rate 1e-3 1/s, and per-shot stress and strain
scale errors, rate scatter, ringing, drift and sample noise) is fitted with
Johnson–Cook (m fixed: one temperature) on the default grid (0.005) and
refitted on a grid 10x finer (0.0005) and, as a second pair, 0.001 against
0.01 (0.05, 10x the default, leaves the shortest curves 2 nodes: no curve).
Prints, measured in this run:

- per parameter, how often the 95 % bootstrap interval covers the truth
  (target >= 85 %), beside the least-squares ±1.96 standard errors;
- the median of |error| / u (about 0.67 for honest Gaussian uncertainties);
- per grid pair, the change of each interval's width and the shift of its
  ends relative to its width (target: no change above 10 %), min/median/max;
- the cost of the bootstrap: fit with it over the fit without (min/median/max).

    python benchmarks/bench_fit_coverage.py [--campaigns 60] [--draws 1000] [--quick]
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))
from fit_campaigns import REFERENCE_RATE, TRUTH, campaign  # noqa: E402

PAIRS = ((0.005, 0.0005), (0.01, 0.001))


def _fit(F, curves, step, draws):
    return F.fit_curves(F.resample_curves(curves, step), "johnson-cook", reference_rate=REFERENCE_RATE, draws=draws)


def _spread(a):
    a = np.asarray(a)
    return f"{a.min():.3f} / {np.median(a):.3f} / {a.max():.3f}"


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--campaigns", type=int, default=60)
    ap.add_argument("--draws", type=int, default=1000)
    ap.add_argument("--quick", action="store_true", help="5 campaigns, 300 draws")
    args = ap.parse_args(argv)
    if args.quick:
        args.campaigns, args.draws = 5, 300
    from shpb import fit as F

    names = list(TRUTH)
    cover = {k: 0 for k in names}
    cover_ls = {k: 0 for k in names}
    z = {k: [] for k in names}
    width = {pair: {k: [] for k in names} for pair in PAIRS}
    shift = {pair: {k: [] for k in names} for pair in PAIRS}
    cost = []
    t0 = time.perf_counter()
    for seed in range(args.campaigns):
        curves = campaign(seed)
        fits = {}
        for step in sorted({s for pair in PAIRS for s in pair}):
            fits[step] = _fit(F, curves, step, args.draws)
        res = fits[0.005]
        for k, v in TRUTH.items():
            p = res.parameters[k]
            cover[k] += p.low <= v <= p.high
            cover_ls[k] += abs(p.value - v) <= 1.96 * p.stderr
            z[k].append(abs(p.value - v) / p.u)
        for pair in PAIRS:
            a, b = fits[pair[0]].parameters, fits[pair[1]].parameters
            for k in names:
                wa, wb = a[k].high - a[k].low, b[k].high - b[k].low
                width[pair][k].append(wb / wa - 1.0)
                shift[pair][k].append(max(abs(b[k].low - a[k].low), abs(b[k].high - a[k].high)) / wa)
        t = time.perf_counter()
        _fit(F, curves, 0.005, 0)
        t_plain = time.perf_counter() - t
        t = time.perf_counter()
        _fit(F, curves, 0.005, args.draws)
        cost.append(((time.perf_counter() - t) / t_plain, t_plain, time.perf_counter() - t))
    n = args.campaigns
    print(f"{n} virtual campaigns (7 curves each), {args.draws} bootstrap draws, {time.perf_counter() - t0:.0f} s")
    print("truth: " + ", ".join(f"{k} {v / 1e6:g} MPa" if k in "AB" else f"{k} {v:g}" for k, v in TRUTH.items()))
    print(f"{'':4}{'bootstrap 95 % covers':>24}{'LS ±1.96 se covers':>22}{'median |err|/u':>17}")
    for k in names:
        print(f"{k:4}{100 * cover[k] / n:>22.0f} %{100 * cover_ls[k] / n:>20.0f} %{np.median(z[k]):>17.2f}")
    worst = min(cover.values()) / n
    print(f"lowest bootstrap coverage {100 * worst:.0f} % (target >= 85 %): {'met' if worst >= 0.85 else 'NOT met'}")
    for pair in PAIRS:
        print(f"grid {pair[0]:g} -> {pair[1]:g}: interval width change, end shift / width (min / median / max)")
        for k in names:
            print(f"  {k:3} width {_spread(width[pair][k])}   ends {_spread(shift[pair][k])}")
        big = max(max(abs(x) for x in width[pair][k]) for k in names)
        over = sum(abs(x) > 0.10 for k in names for x in width[pair][k])
        print(f"  largest width change {100 * big:.1f} % (target <= 10 %); {over} of {len(names) * n} intervals "
              "changed by more than 10 %")
    ratio, plain, boot = zip(*cost)
    print(f"fit with bootstrap / fit without (grid 0.005): {_spread(ratio)}; seconds without {_spread(plain)}, "
          f"with {_spread(boot)}")


if __name__ == "__main__":
    main()
