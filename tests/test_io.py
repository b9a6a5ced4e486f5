"""Record readers: oscilloscope/DAQ text exports and .npz; bad records give one-line errors.

Source: numpy.loadtxt (reference library, an independent parser) on the same
data block for the numbers read; POSIX rename semantics (os.replace, IEEE Std
1003.1-2017) for atomic writes; the rest are the error messages (common practice).
"""


import numpy as np
import pytest

from shpb.errors import InputError
from shpb.io import atomic_write_text, read_record, read_table, sha256_file
from shpb.setup import Channel, RecordSpec

DATA = np.column_stack([np.arange(50) * 1e-7, np.sin(np.arange(50) / 7.0), np.cos(np.arange(50) / 5.0)])


def _write(path, header_lines, delim, names=None, data=DATA):
    with open(path, "w") as fh:
        for ln in header_lines:
            fh.write(ln + "\n")
        if names:
            fh.write(delim.join(names) + "\n")
        for row in data:
            fh.write(delim.join(f"{v:.9e}" for v in row) + "\n")
    return path


@pytest.mark.parametrize("delim", [",", "\t", ";", "  "])
def test_delimiters_headers_and_metadata(tmp_path, delim):
    meta = ["Model,Fictional DSO", "Record Length,50", "", "Sample Interval,1e-07"]
    p = _write(tmp_path / "r.csv", meta, delim, ["TIME", "CH1", "CH2"])
    names, data = read_table(p)
    assert names == ["TIME", "CH1", "CH2"]
    block = np.loadtxt(p, delimiter=None if delim.strip() == "" else delim, skiprows=5)
    np.testing.assert_array_equal(data, block)


def test_no_header_columns_by_index(tmp_path):
    p = _write(tmp_path / "r.txt", [], " ")
    names, data = read_table(p)
    assert names == ["0", "1", "2"]
    np.testing.assert_allclose(data, DATA, rtol=1e-9)


def _spec(p, **kw):
    return RecordSpec(incident=Channel(p, kw.get("inc", "CH1")), transmitted=Channel(p, kw.get("tra", "CH2")),
                      time=kw.get("time", "TIME"), sample_interval=kw.get("dt"))


def test_read_record_time_column(tmp_path):
    p = _write(tmp_path / "r.csv", [], ",", ["TIME", "CH1", "CH2"])
    rec = read_record(_spec(p))
    assert rec.dt == pytest.approx(1e-7)
    np.testing.assert_allclose(rec.incident, DATA[:, 1], rtol=1e-9)
    assert rec.files[str(p)] == sha256_file(p)


def test_npz_and_sample_interval(tmp_path):
    p = tmp_path / "r.npz"
    np.savez(p, a=DATA[:, 1], b=DATA[:, 2])
    rec = read_record(RecordSpec(Channel(p, "a"), Channel(p, "b"), time=None, sample_interval=2e-7))
    assert rec.time[-1] == pytest.approx(49 * 2e-7)


def test_per_channel_files_of_unequal_length(tmp_path):
    a = _write(tmp_path / "a.csv", [], ",", ["t", "v"], DATA[:, :2])
    b = _write(tmp_path / "b.csv", [], ",", ["t", "v"], DATA[:40, :2])
    with pytest.raises(InputError, match="has 40"):
        read_record(RecordSpec(Channel(a, "v"), Channel(b, "v"), time="t"))


def test_further_stations_are_read_by_name(tmp_path):
    # a four-channel scope file: CH3 and CH4 the bar set's further stations ([record] incident_stations,
    # transmitted_stations; docs/setup-files.md), named incident_2 and transmitted_2 in the record
    data = np.column_stack([DATA, DATA[:, 1] * 2, DATA[:, 2] * 3])
    p = _write(tmp_path / "r.csv", [], ",", ["TIME", "CH1", "CH2", "CH3", "CH4"], data)
    spec = RecordSpec(Channel(p, "CH1"), Channel(p, "CH2"), time="TIME", incident_stations=(Channel(p, "CH3"),),
                      transmitted_stations=(Channel(p, "CH4"),))
    rec = read_record(spec)
    assert sorted(rec.stations) == ["incident_2", "transmitted_2"]
    np.testing.assert_allclose(rec.stations["incident_2"], 2 * DATA[:, 1], rtol=1e-9)
    np.testing.assert_allclose(rec.stations["transmitted_2"], 3 * DATA[:, 2], rtol=1e-9)
    short = _write(tmp_path / "s.csv", [], ",", ["t", "v"], DATA[:40, :2])
    with pytest.raises(InputError, match="incident_2 channel"):
        read_record(RecordSpec(Channel(p, "CH1"), Channel(p, "CH2"), time="TIME",
                               incident_stations=(Channel(short, "v"),)))


@pytest.mark.parametrize("mutate, fragment", [
    (lambda lines: lines[:10] + ["1e-6,abc,0.2"] + lines[11:], "'abc' is not a number"),
    (lambda lines: lines[:10] + ["1e-6,nan,0.2"] + lines[11:], "non-finite"),
    (lambda lines: lines[:10] + ["1e-6,0.1"] + lines[11:], "missing or non-finite value at data row 10 (line 11)"),
])
def test_bad_cells(tmp_path, mutate, fragment):
    p = _write(tmp_path / "r.csv", [], ",", ["TIME", "CH1", "CH2"])
    lines = p.read_text().splitlines()
    p.write_text("\n".join(mutate(lines)) + "\n")
    with pytest.raises(InputError) as exc:
        read_record(_spec(p))
    assert str(p) in str(exc.value) and fragment in str(exc.value)


def test_non_monotonic_time(tmp_path):
    d = DATA.copy()
    d[20, 0] = d[18, 0]
    p = _write(tmp_path / "r.csv", [], ",", ["TIME", "CH1", "CH2"], d)
    with pytest.raises(InputError, match="not increasing at data row"):
        read_record(_spec(p))


def test_missing_samples_detected(tmp_path):
    d = np.delete(DATA, 25, axis=0)
    p = _write(tmp_path / "r.csv", [], ",", ["TIME", "CH1", "CH2"], d)
    with pytest.raises(InputError, match="not uniformly sampled"):
        read_record(_spec(p))


def test_wrong_column_lists_the_columns(tmp_path):
    p = _write(tmp_path / "r.csv", [], ",", ["TIME", "CH1", "CH2"])
    with pytest.raises(InputError, match=r"no column 'CH3' \(columns: TIME, CH1, CH2\)"):
        read_record(_spec(p, tra="CH3"))


def test_missing_file(tmp_path):
    with pytest.raises(InputError, match="file not found"):
        read_record(_spec(tmp_path / "nope.csv"))


def test_text_without_numbers(tmp_path):
    p = tmp_path / "r.csv"
    p.write_text("just,a,header\nand,more,words\n")
    with pytest.raises(InputError, match="no block of numeric rows"):
        read_table(p)


def test_atomic_write_leaves_no_temporary(tmp_path):
    target = tmp_path / "out" / "x.txt"
    atomic_write_text(target, "hello")
    assert target.read_text() == "hello"
    assert [f.name for f in target.parent.iterdir()] == ["x.txt"]


def _run_python(code):
    import subprocess
    import sys

    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120)
    assert done.returncode == 0, done.stderr
    return done.stdout


@pytest.mark.parametrize("umask", [0o022, 0o027, 0o077])
def test_atomic_write_gives_the_mode_of_a_new_file(tmp_path, umask):
    # POSIX open(): a new file's mode is the requested mode less the process umask (IEEE Std 1003.1-2017,
    # open() and umask()); an ordinary open(path, "w") asks for 0o666, so the atomic output must match it.
    out = _run_python(f"""
import os, stat
os.umask({umask:#o})
from shpb.io import atomic_write_text
atomic_write_text({str(tmp_path / 'atomic.txt')!r}, "x")
with open({str(tmp_path / 'plain.txt')!r}, "w") as fh:
    fh.write("x")
print(oct(stat.S_IMODE(os.stat({str(tmp_path / 'atomic.txt')!r}).st_mode)),
      oct(stat.S_IMODE(os.stat({str(tmp_path / 'plain.txt')!r}).st_mode)))
""")
    atomic, plain = out.split()
    assert atomic == plain == oct(0o666 & ~umask)


def test_importing_the_package_leaves_the_umask_alone():
    # A library must not change process-wide state on import (common practice): the umask is shared by every
    # thread, so even a brief umask(0) lets files another thread creates meanwhile come out world-writable.
    out = _run_python("""
import os
calls = []
real = os.umask
os.umask = lambda mask: calls.append(mask) or real(mask)
real(0o027)
import shpb, shpb.io, shpb.setup, shpb.reduce, shpb.report, shpb.virtual, shpb.campaign, shpb.fit
import shpb.calibration_files
os.umask = real
now = real(0o022)
print(len(calls), oct(now))
""")
    assert out.split() == ["0", oct(0o027)]


def test_to_plain_for_json_and_toml(tmp_path):
    # JSON has no NaN or infinity (RFC 8259, sec. 6) and TOML no null but nan and inf floats (TOML 1.0.0,
    # "Float"); the standard library's json and tomllib, and tomli_w, are the reference readers and writer.
    import dataclasses
    import json
    from pathlib import Path

    import tomli_w

    try:
        import tomllib
    except ModuleNotFoundError:  # Python 3.10
        import tomli as tomllib

    from shpb.io import to_plain

    @dataclasses.dataclass(frozen=True)
    class Part:
        name: str
        where: Path
        source: str = "ignored"

    value = {"a": np.float32(1.5), "n": np.int64(3), "flag": np.bool_(True), "bad": float("nan"),
             "big": np.inf, "none": None, "arr": np.array([1.0, np.nan]), "pair": (1, 2), 7: "int key",
             "part": Part("x", Path("d") / "f.csv")}
    as_json = json.loads(json.dumps(to_plain(value), allow_nan=False))
    assert as_json == {"a": 1.5, "n": 3, "flag": True, "bad": None, "big": None, "none": None, "arr": [1.0, None],
                       "pair": [1, 2], "7": "int key", "part": {"name": "x", "where": str(Path("d/f.csv")),
                                                               "source": "ignored"}}
    kept = tomllib.loads(tomli_w.dumps(to_plain(value, nonfinite="keep", none="omit", skip_fields={"source"},
                                                path=lambda p: p.as_posix())))
    assert np.isnan(kept.pop("bad")) and kept.pop("big") == float("inf") and np.isnan(kept["arr"].pop())
    assert kept == {"a": 1.5, "n": 3, "flag": True, "arr": [1.0], "pair": [1, 2], "7": "int key",
                    "part": {"name": "x", "where": "d/f.csv"}}
    left_out = tomllib.loads(tomli_w.dumps(to_plain(value, nonfinite="omit", none="omit")))
    assert "bad" not in left_out and "big" not in left_out and "none" not in left_out and left_out["arr"] == [1.0]


# --------------------------------------------------------------------------- more bad records
# Each message names the file and says what was expected (docs/setup-files.md: "Errors name the file, the
# key and what was expected"; common practice). Line numbers are counted by hand: the header is line 1,
# data row k is line k + 1.
def _rows():
    return [",".join(f"{v:.9e}" for v in row) for row in DATA]


@pytest.mark.parametrize("change, fragment", [
    (lambda r: r[:20] + [r[20].replace(",", ";")] + r[21:], "line 22 has 1 fields, expected 3"),   # wrong delimiter
    (lambda r: r[:20] + [r[20] + ",0.5"] + r[21:], "line 22 has 4 fields, expected 3"),            # a field too many
    (lambda r: r[:20] + [r[20].rsplit(",", 1)[0]] + r[21:],                                        # a field short
     "column 'CH2' has a missing or non-finite value at data row 21 (line 22)"),
])
def test_rows_of_the_wrong_shape(tmp_path, change, fragment):
    p = tmp_path / "r.csv"
    p.write_text("\n".join(["TIME,CH1,CH2"] + change(_rows())) + "\n")
    with pytest.raises(InputError) as exc:
        read_record(_spec(p))
    assert str(exc.value) == f"{p}: {fragment}"


def test_empty_file(tmp_path):
    p = tmp_path / "r.csv"
    p.write_text("")
    with pytest.raises(InputError, match="the file is empty"):
        read_record(_spec(p))


def test_unknown_suffix(tmp_path):
    p = _write(tmp_path / "r.xlsx", [], ",", ["TIME", "CH1", "CH2"])
    with pytest.raises(InputError, match=r"unknown record format '\.xlsx' \(expected \.npz or delimited text"):
        read_record(_spec(p))


def test_column_index_out_of_range(tmp_path):
    # columns may be given by 0-based index (docs/setup-files.md); this file has three
    p = _write(tmp_path / "r.csv", [], ",", ["TIME", "CH1", "CH2"])
    with pytest.raises(InputError, match=r"column index 3 out of range \(the file has 3 columns, 0-based\)"):
        read_record(_spec(p, tra=3))
    rec = read_record(_spec(p, inc=1, tra=2))     # the same columns by index read as by name
    np.testing.assert_allclose(rec.transmitted, DATA[:, 2], rtol=1e-9)


def test_too_few_samples(tmp_path):
    p = _write(tmp_path / "r.csv", [], ",", ["TIME", "CH1", "CH2"], DATA[:10])
    with pytest.raises(InputError, match="only 10 samples: too short to be a bar record"):
        read_record(_spec(p))


def test_a_dead_unused_channel_does_not_matter(tmp_path):
    # only the channels named are checked: a NaN in a fourth scope channel is not an error
    d = np.column_stack([DATA, np.ones(len(DATA))])
    d[5, 3] = np.nan
    p = _write(tmp_path / "r.csv", [], ",", ["TIME", "CH1", "CH2", "CH3"], d)
    rec = read_record(_spec(p))
    np.testing.assert_allclose(rec.incident, DATA[:, 1], rtol=1e-9)
    with pytest.raises(InputError, match="column 'CH3' has a missing or non-finite value at data row 6"):
        read_record(_spec(p, tra="CH3"))


def test_npz_errors(tmp_path):
    good = tmp_path / "r.npz"
    np.savez(good, a=DATA[:, 1], b=DATA[:, 2])
    bad = DATA[:, 2].copy()
    bad[7] = np.inf
    np.savez(tmp_path / "inf.npz", a=DATA[:, 1], b=bad)
    (tmp_path / "text.npz").write_text("not a zip archive")

    def spec(name, tra="b"):
        p = tmp_path / name
        return RecordSpec(Channel(p, "a"), Channel(p, tra), time=None, sample_interval=1e-7)

    for s, fragment in ((spec("r.npz", tra="c"), r"no array 'c' \(arrays: a, b\)"),
                        (spec("inf.npz"), "array 'b' has a non-finite value at sample 7"),
                        (spec("text.npz"), r"not a readable \.npz archive"),
                        (spec("missing.npz"), "file not found")):
        with pytest.raises(InputError, match=fragment) as exc:
            read_record(s)
        assert str(s.incident.file) in str(exc.value)


def test_time_column_unit(tmp_path):
    # a time column in microseconds with time_unit = 1e-6 s (docs/setup-files.md, [record] time_unit)
    d = DATA.copy()
    d[:, 0] *= 1e6
    p = _write(tmp_path / "r.csv", [], ",", ["TIME", "CH1", "CH2"], d)
    rec = read_record(RecordSpec(Channel(p, "CH1"), Channel(p, "CH2"), time="TIME", time_unit=1e-6))
    assert rec.dt == pytest.approx(1e-7, rel=1e-9)
    assert rec.time[-1] == pytest.approx(49e-7, rel=1e-9)


# --------------------------------------------------------------------------- long records, checked in blocks
# The time column of a long record is checked block by block (small temporaries whatever its length); with
# blocks of 16 samples these 50-sample records span several. Reference: the time axis t0 + k dt with
# dt = (t_last - t_first) / (n - 1) (the uniform sampling the readers assume; common practice), in numpy.
@pytest.mark.parametrize("unit", [1.0, 1e-6])
def test_time_checked_in_blocks_gives_the_uniform_axis(tmp_path, monkeypatch, unit):
    import shpb.io

    monkeypatch.setattr(shpb.io, "_BLOCK", 16)
    d = DATA.copy()
    d[:, 0] = (d[:, 0] + 3e-6) / unit
    p = _write(tmp_path / "r.csv", [], ",", ["TIME", "CH1", "CH2"], d)
    rec = read_record(RecordSpec(Channel(p, "CH1"), Channel(p, "CH2"), time="TIME", time_unit=unit))
    t = np.loadtxt(p, delimiter=",", skiprows=1)[:, 0] * unit
    dt = (t[-1] - t[0]) / (t.size - 1)
    assert rec.dt == dt
    np.testing.assert_array_equal(rec.time, t[0] + dt * np.arange(t.size))


@pytest.mark.parametrize("row", [15, 16, 17, 33])  # at, before and after the edge of a 16-sample block
def test_a_missing_sample_at_a_block_edge_is_found(tmp_path, monkeypatch, row):
    import shpb.io

    monkeypatch.setattr(shpb.io, "_BLOCK", 16)
    p = _write(tmp_path / "r.csv", [], ",", ["TIME", "CH1", "CH2"], np.delete(DATA, row, axis=0))
    with pytest.raises(InputError, match=f"not uniformly sampled .* at row {row + 1}"):
        read_record(_spec(p))
