"""Print the robustness suite's confusion table and the accuracy figures (docs/verdicts.md) as Markdown.

Run from the repository root::

    python scripts/robustness_report.py              # both tables
    python scripts/robustness_report.py --trials     # the confusion table only

The trials are tests/robustness.py's (each is also a test in tests/test_robustness.py); the accuracy figures
are the reported stress against the virtual shots' truth at equal strain over the plastic part of the valid
curve (strain above 0.02), RMS, with the low-pass on (the default) and off, at each noise level.
"""

from __future__ import annotations

import argparse
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "tests"))

from robustness import (BASES, OWN_SHOTS, TRIALS, add_drift, add_noise, example_base, judge_trial,  # noqa: E402
                        own_base, plastic_stress_error)

from shpb.reduce import reduce_shot  # noqa: E402
from shpb.setup import with_analysis  # noqa: E402


def confusion(bases) -> list:
    lines = ["| trial | fault | expected | got | |", "|---|---|---|---|---|"]
    wrong = 0
    for t in TRIALS:
        o = judge_trial(t, bases[t.base])
        ok = o.meets(t)
        wrong += not ok
        expect = {"valid": "VALID", "warning": "a warning or error", "error": "NOT VALID"}[t.expect]
        if t.codes and t.expect != "valid":
            expect += f" ({' / '.join(t.codes)})"
        label = o.label.replace("|", "/")
        if o.verdict == "refused":
            label = "REFUSED: " + label.split(": ", 2)[-1]
        lines.append(f"| `{t.id}` | {t.what} | {expect} | {label} | {'ok' if ok else '**wrong**'} |")
    lines.append("")
    lines.append(f"{len(TRIALS)} trials, {wrong} wrong: "
                 f"{sum(t.expect == 'valid' for t in TRIALS)} sound shots, "
                 f"{sum(t.expect != 'valid' for t in TRIALS)} wrong setups or spoilt records.")
    return lines


def accuracy(bases) -> list:
    lines = ["| shot | record | valid (on) | stress RMS error, low-pass on | valid (off) | low-pass off |",
             "|---|---|---|---|---|---|"]
    for sid in BASES:
        base = bases[sid]
        records = [("as shipped", base.record)]
        records += [(f"{p} % noise", add_noise(base, p / 100)) for p in (0.5, 1, 2, 3)]
        records += [("3 % drift", add_drift(base, 0.03))]
        for what, rec in records:
            on = reduce_shot(base.shot, rec)
            off = reduce_shot(with_analysis(base.shot, lowpass=False), rec)
            lines.append(f"| {sid} | {what} | {'yes' if on.valid else 'NO'} | "
                         f"{100 * plastic_stress_error(on, base.truth):.2f} % | {'yes' if off.valid else 'NO'} | "
                         f"{100 * plastic_stress_error(off, base.truth):.2f} % |")
    return lines


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--trials", action="store_true", help="the confusion table only")
    args = parser.parse_args(argv)
    bases = {sid: example_base(sid) for sid in BASES}
    with tempfile.TemporaryDirectory() as tmp:
        for name in OWN_SHOTS:
            bases[name] = own_base(name, Path(tmp) / name)
        print("\n".join(confusion(bases)))
        if not args.trials:
            print()
            print("\n".join(accuracy(bases)))
    return 0


if __name__ == "__main__":
    sys.exit(main())
