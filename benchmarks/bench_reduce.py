"""Benchmark: reduce a 3-column, 1,000,000-sample text record; compare with pandas.read_csv alone.

Prints the ratio (whole reduction) / (pandas.read_csv of the same file), both
measured in this run (median of repeats). Target: at most 1.5. The figure sheet
is timed apart (plotting is not part of the numeric reduction).

    python benchmarks/bench_reduce.py [--samples 1000000] [--repeats 3]
"""

from __future__ import annotations

import argparse
import sys
import tempfile

from pathlib import Path

import pandas as pd

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))

from timing import median_time  # noqa: E402  (benchmarks/timing.py)

from synth import elastic_perfectly_plastic, make_shot  # noqa: E402

from shpb.reduce import reduce_shot  # noqa: E402
from shpb.io import atomic_savefig  # noqa: E402
from shpb.report import plot_shot  # noqa: E402
from shpb.setup import load_shot, with_analysis  # noqa: E402


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--samples", type=int, default=1_000_000)
    ap.add_argument("--repeats", type=int, default=3)
    a = ap.parse_args(argv)
    with tempfile.TemporaryDirectory() as tmp:
        dt = 1e-7
        shot_path, _ = make_shot(tmp, law=elastic_perfectly_plastic(70e9, 300e6), dt=dt,
                                 t_record=a.samples * dt, name="bench")
        csv = Path(tmp) / "bench.csv"
        size_mb = csv.stat().st_size / 1e6
        t_pandas = median_time(lambda: pd.read_csv(csv, skiprows=3), a.repeats)
        shot = load_shot(shot_path)
        rows = {}
        # one-off costs (imports, the cached dispersion curve) are paid once per process, not per shot
        shot = with_analysis(shot, lowpass=True)  # the default conditioning (synth.py turns it off for its tests)
        t_first = median_time(lambda: reduce_shot(with_analysis(shot, dispersion=True)), 1)
        for disp in (False, True):
            s = with_analysis(shot, dispersion=disp)
            rows[disp] = median_time(lambda: reduce_shot(s), a.repeats)
        res = reduce_shot(shot)
        t_fig = median_time(lambda: atomic_savefig(plot_shot(res), Path(tmp) / "fig.png", dpi=110), 1)
    print(f"record: {a.samples} samples x 3 columns, {size_mb:.0f} MB of text")
    print(f"pandas.read_csv alone:             {t_pandas:.3f} s")
    for disp, t in rows.items():
        label = "with dispersion correction" if disp else "without dispersion       "
        print(f"whole reduction {label}: {t:.3f} s  ratio to read_csv {t / t_pandas:.2f} (target <= 1.5)")
    print(f"first reduction in a fresh process (imports, dispersion curve; once per process): {t_first:.3f} s")
    print(f"figure sheet (extra, not in the ratio): {t_fig:.3f} s")


if __name__ == "__main__":
    main()
