"""Fuzzing with a small budget: the readers of user files raise only one-line InputErrors naming the file.

The same targets as ``benchmarks/fuzz_inputs.py`` (which runs 10,000 inputs): the unit parser, the record
readers, the TOML setup files and the campaign's shots table. A reader that lets any other exception out,
or an error that names neither the file nor the key, fails (the package's own rule, DEVELOPERS.md
"Errors": `common practice`, no outside source).
"""

import importlib.util
from pathlib import Path

import pytest

_spec = importlib.util.spec_from_file_location(
    "fuzz_inputs", Path(__file__).resolve().parents[1] / "benchmarks" / "fuzz_inputs.py")
fuzz_inputs = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(fuzz_inputs)

BUDGET = {"units": 150, "record": 40, "toml": 40, "csv": 40}


@pytest.mark.parametrize("target", list(BUDGET))
def test_no_uncaught_exception(target, tmp_path):
    assert fuzz_inputs.fuzz(target, BUDGET[target], seed=12, work=tmp_path) == BUDGET[target]


def test_the_fuzzer_catches_a_reader_that_lets_a_traceback_out(tmp_path, monkeypatch):
    # the check can fail: a reader raising a bare ValueError is reported as a failure
    import shpb.units

    def broken(value, dimension, where=""):
        raise ValueError("not an InputError")

    monkeypatch.setattr(shpb.units, "to_si", broken)
    with pytest.raises(fuzz_inputs.Failure, match="ValueError: not an InputError"):
        fuzz_inputs.fuzz("units", 5, seed=1, work=tmp_path)
