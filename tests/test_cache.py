"""The disk cache of solved tables (shpb.cache) and the numpy-only path of a cached dispersion table.

The tables read back must be the very floats the solver gives (bit for bit,
so every result downstream is unchanged); the interpolant and FFT length that
replace scipy's on that path are checked against scipy itself (the reference
library: ``scipy.interpolate.CubicHermiteSpline``, ``scipy.fft.next_fast_len``; SciPy 1.0, Virtanen et al.
2020, Nature Methods 17:261-272). The cache's own behaviour (relocation, damaged files, concurrent writers) is
checked as behaviour: common practice, no published source.
"""

from __future__ import annotations

import subprocess
import sys
import threading
from pathlib import Path

import numpy as np
import pytest

from shpb import cache
from shpb import dispersion as D

ROOT = Path(__file__).resolve().parents[1]


@pytest.fixture
def cache_dir(tmp_path, monkeypatch):
    """A cache of this test's own, the process caches of the tables emptied before and after."""
    monkeypatch.setenv(cache.ENV, str(tmp_path / "cache"))
    D._curve_cached.cache_clear()
    D._second_mode_onset_cached.cache_clear()
    yield tmp_path / "cache"
    D._curve_cached.cache_clear()
    D._second_mode_onset_cached.cache_clear()


def _files(folder):
    return sorted(p.name for p in folder.rglob("*.npz")) if folder.exists() else []


def test_table_read_back_is_the_solved_table_bit_for_bit(cache_dir, monkeypatch):
    solved = D._solve_curve(0.31, 300, 2.0)
    onset = D._solve_second_mode_onset(0.31)
    first = D.normalized_curve(0.31, n=300)  # solved and stored
    assert len(_files(cache_dir)) == 1
    D.second_mode_onset(0.01, 5000.0, 0.31)
    assert len(_files(cache_dir)) == 2
    D._curve_cached.cache_clear()
    D._second_mode_onset_cached.cache_clear()

    def no_solving(*args):
        raise AssertionError("solved again although the table is on disk")

    monkeypatch.setattr(D, "_solve_curve", no_solving)
    monkeypatch.setattr(D, "_solve_second_mode_onset", no_solving)
    again = D.normalized_curve(0.31, n=300)  # read from disk
    assert again is not first
    for name in ("a_over_lambda", "phase_ratio", "group_ratio", "frequency", "mean_to_surface"):
        assert np.array_equal(getattr(again, name), solved[name]), name
        assert not getattr(again, name).flags.writeable
    assert again.rayleigh_ratio == float(solved["rayleigh_ratio"])
    phi = np.linspace(0.0, again.max_frequency, 997)
    assert np.array_equal(again.phase_ratio_at(phi), first.phase_ratio_at(phi))
    assert D.second_mode_onset(0.01, 5000.0, 0.31) == onset * 5000.0 / 0.01


def test_cache_off_writes_nothing_and_relocation_is_obeyed(tmp_path, monkeypatch):
    monkeypatch.setenv(cache.ENV, "off")
    assert cache.folder() is None
    assert cache.arrays("test-table-1", {"x": 1}, lambda: {"y": np.arange(3.0)})["y"].tolist() == [0, 1, 2]
    monkeypatch.setenv(cache.ENV, str(tmp_path / "elsewhere"))
    cache.arrays("test-table-1", {"x": 1}, lambda: {"y": np.arange(3.0)})
    assert [p.relative_to(tmp_path).parts[:2] for p in tmp_path.rglob("*.npz")] == [("elsewhere", cache.LAYOUT)]
    monkeypatch.delenv(cache.ENV)
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "xdg"))
    if sys.platform != "win32":  # the freedesktop.org base-directory convention
        assert cache.folder() == tmp_path / "xdg" / "shpb"


def test_damaged_or_foreign_files_are_computed_again(cache_dir):
    calls = []

    def compute():
        calls.append(1)
        return {"y": np.array([1.5, 2.5])}

    path = cache.path_of("test-table-1", {"x": 2})
    path.parent.mkdir(parents=True)
    path.write_bytes(b"PK\x03\x04 not an archive")  # e.g. left by a crashed foreign tool
    assert cache.arrays("test-table-1", {"x": 2}, compute)["y"].tolist() == [1.5, 2.5]
    assert cache.arrays("test-table-1", {"x": 2}, compute)["y"].tolist() == [1.5, 2.5]
    assert len(calls) == 1  # the damaged file was replaced by a good one
    # a file under the right name that holds another key is not taken
    other = cache.path_of("test-table-1", {"x": 3})
    other.write_bytes(path.read_bytes())
    assert cache.arrays("test-table-1", {"x": 3}, lambda: {"y": np.array([9.0])})["y"].tolist() == [9.0]


def test_unwritable_cache_is_skipped(tmp_path, monkeypatch):
    blocker = tmp_path / "file"
    blocker.write_text("a file where the cache folder would be")
    monkeypatch.setenv(cache.ENV, str(blocker / "cache"))
    assert cache.arrays("test-table-1", {"x": 4}, lambda: {"y": np.ones(2)})["y"].tolist() == [1.0, 1.0]


def test_concurrent_writers_and_readers_never_see_a_part(cache_dir):
    # several writers replace the same table while readers read it: a reader finds none or the whole table
    key, big = {"x": 5}, {"y": np.linspace(0.0, 1.0, 200_000)}
    path = cache.path_of("test-table-1", key)
    seen, stop = [], threading.Event()

    def writer():
        for _ in range(15):
            cache._write(path, cache._key_text(key), big)

    def reader():
        while not stop.is_set():
            got = cache._read(path, cache._key_text(key))
            seen.append(None if got is None else np.array_equal(got["y"], big["y"]))

    threads = [threading.Thread(target=writer) for _ in range(3)] + [threading.Thread(target=reader) for _ in range(2)]
    for t in threads:
        t.start()
    for t in threads[:3]:
        t.join()
    stop.set()
    for t in threads[3:]:
        t.join()
    assert seen and all(s in (None, True) for s in seen)
    assert True in seen
    assert _files(cache_dir) == [path.name]  # no temporary file left behind


def test_hermite_table_is_scipys_cubic_hermite_spline():
    from scipy.interpolate import CubicHermiteSpline

    t = D._solve_curve(0.29, 400, 2.0)
    ours = D._HermiteTable(t["frequency"], t["phase_ratio"], t["phase_slope"])
    ref = CubicHermiteSpline(t["frequency"], t["phase_ratio"], t["phase_slope"], extrapolate=False)
    x = np.r_[np.random.default_rng(3).uniform(-0.05, 1.05 * t["frequency"][-1], 20_000), t["frequency"], np.nan]
    assert np.array_equal(ours(x), ref(x), equal_nan=True)
    assert np.ndim(ours(0.3)) == np.ndim(ref(0.3)) == 0


def test_fft_length_is_the_smallest_even_fast_length():
    from scipy.fft import next_fast_len

    for n in list(range(2, 3000)) + [999_983, 1_000_001, 1_234_567]:
        m = D._fast_length(n)
        # the smallest even 2-3-5 length: scipy's 2-3-5 length when even, else the next even one
        ref = next_fast_len(n, real=True)
        while ref % 2:
            ref = next_fast_len(ref + 1, real=True)
        assert m == ref, n


def test_start_up_with_a_warm_cache_needs_neither_pint_nor_scipy(cache_dir):
    # the example's tables solved here; a fresh process then loads the example shot without pint (its units
    # are common forms) and reduces it with numpy only; an uncommon unit then loads pint, without dask
    from shpb.setup import load_shot

    bars = load_shot(ROOT / "configs" / "example_shot.toml").barset
    for bar in (bars.incident, bars.transmitted):
        D.dispersion_info(bar.radius, bar.wave_speed, bar.poisson_ratio)
    code = ("import sys\nfrom shpb.setup import load_shot\nfrom shpb.reduce import reduce_shot\n"
            "def loaded(*names):\n    return sorted(m for m in sys.modules if m.split('.')[0] in names)\n"
            "shot = load_shot('configs/example_shot.toml')\nprint(loaded('pint'))\n"
            "reduce_shot(shot)\nprint(loaded('scipy', 'pint'))\n"
            "from shpb.units import to_si\nprint(to_si('1 yard', 'length'))\n"
            "print('pint' in sys.modules, 'dask' in sys.modules)")
    p = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=ROOT)
    assert p.returncode == 0, p.stderr
    lines = p.stdout.splitlines()
    assert lines[:2] == ["[]", "[]"]
    assert float(lines[2]) == pytest.approx(0.9144, rel=1e-12)  # 1 yd = 0.9144 m exactly (NIST SP 811, App. B)
    assert lines[3] == "True False"
