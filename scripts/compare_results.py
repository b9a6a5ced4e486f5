"""Check that a change leaves the reduction's results as they were: reduce the example shots, compare two runs.

    python scripts/compare_results.py reduce DIR     # every example shot, dispersion on and off, into DIR
    python scripts/compare_results.py compare OLD NEW [--rtol 1e-9]

``reduce`` writes, per shot and dispersion setting, the curves at full
precision (``curves.npz``: ``curves.csv`` holds 6 digits) and the summary
(``summary.json``). Run it once with the code before the change (e.g. a
``git archive`` of the old commit on ``PYTHONPATH``) and once after.
``compare`` then checks every curve column and every number of the summaries
to ``rtol`` relative (to the column's largest magnitude for values near zero)
and everything else exactly; it prints the largest difference per shot and
exits 1 on any disagreement.
"""

from __future__ import annotations

import argparse
import json
import math
import sys
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
SHOTS = [ROOT / "configs" / "example_shot.toml", *sorted((ROOT / "example_data" / "shots").glob("*.toml"))]


def reduce_all(out: Path) -> None:
    import shpb
    from shpb.reduce import reduce_shot
    from shpb.setup import load_shot, with_analysis

    print(f"shpb from {Path(shpb.__file__).parent}")
    for path in SHOTS:
        shot = load_shot(path)
        for disp in (True, False):
            res = reduce_shot(with_analysis(shot, dispersion=disp))
            folder = out / f"{path.stem}-dispersion-{'on' if disp else 'off'}"
            folder.mkdir(parents=True, exist_ok=True)
            np.savez(folder / "curves.npz", columns=np.array(list(res.curves.columns)),
                     values=res.curves.to_numpy(dtype=float))
            (folder / "summary.json").write_text(json.dumps(shpb.io.to_plain(res.summary), indent=1))


def _walk(a, b, where, rtol, worst):
    """Differences between two summaries (list of messages); ``worst`` keeps the largest relative one."""
    if isinstance(a, dict) and isinstance(b, dict):
        if a.keys() != b.keys():
            return [f"{where}: keys {sorted(set(a) ^ set(b))} differ"]
        return [m for k in a for m in _walk(a[k], b[k], f"{where}.{k}", rtol, worst)]
    if isinstance(a, list) and isinstance(b, list):
        if len(a) != len(b):
            return [f"{where}: {len(a)} vs {len(b)} items"]
        return [m for i, (x, y) in enumerate(zip(a, b)) for m in _walk(x, y, f"{where}[{i}]", rtol, worst)]
    if isinstance(a, float) and isinstance(b, (int, float)) and not isinstance(b, bool):
        d = abs(a - b) / max(abs(a), abs(b), 1e-300) if a != b else 0.0
        worst[0] = max(worst[0], d)
        return [] if d <= rtol or (math.isnan(a) and math.isnan(b)) else [f"{where}: {a!r} vs {b!r}"]
    return [] if a == b else [f"{where}: {a!r} vs {b!r}"]


def compare(old: Path, new: Path, rtol: float) -> int:
    bad = 0
    for folder in sorted(p for p in old.iterdir() if p.is_dir()):
        other = new / folder.name
        with np.load(folder / "curves.npz") as a, np.load(other / "curves.npz") as b:
            msgs = [] if list(a["columns"]) == list(b["columns"]) else ["columns differ"]
            va, vb = a["values"], b["values"]
            worst = 0.0
            if va.shape != vb.shape:
                msgs.append(f"curves {va.shape} vs {vb.shape}")
            else:
                scale = np.maximum(np.nanmax(np.abs(va), axis=0), 1e-300)
                rel = np.abs(va - vb) / np.maximum(np.maximum(np.abs(va), np.abs(vb)), 1e-6 * scale)
                rel = np.where(np.isnan(va) & np.isnan(vb), 0.0, rel)
                worst = float(np.max(rel)) if rel.size else 0.0
                if not worst <= rtol:
                    msgs.append(f"curves differ by {worst:.3g} relative")
        worst_summary = [0.0]
        msgs += _walk(json.loads((folder / "summary.json").read_text()),
                      json.loads((other / "summary.json").read_text()), "summary", rtol, worst_summary)
        bad += bool(msgs)
        print(f"{folder.name:<36} curves {worst:.2e}  summary {worst_summary[0]:.2e}  "
              f"{'OK' if not msgs else 'DIFFERENT: ' + '; '.join(msgs[:5])}")
    print("all equal" if not bad else f"{bad} case(s) differ", f"(rtol {rtol:g})")
    return 1 if bad else 0


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    sub = ap.add_subparsers(dest="what", required=True)
    r = sub.add_parser("reduce")
    r.add_argument("out", type=Path)
    c = sub.add_parser("compare")
    c.add_argument("old", type=Path)
    c.add_argument("new", type=Path)
    c.add_argument("--rtol", type=float, default=1e-9)
    args = ap.parse_args(argv)
    if args.what == "reduce":
        reduce_all(args.out)
        return 0
    return compare(args.old, args.new, args.rtol)


if __name__ == "__main__":
    sys.exit(main())
