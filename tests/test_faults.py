"""Fault injection: every fault ends in a known exit status and one clear line, and loses no good result.

Hostile inputs and faults a lab meets overnight: a worker killed (as the
out-of-memory killer does), the coordinator killed, SIGTERM/SIGINT, two runs
on one folder, a row removed, a record missing on a rerun, an unwritable
output, unit typos, swapped channels, a cut record, a bug. Each test asserts
the outcome and the message (these are the package's own promises,
README "Exit status" and docs/campaigns.md: `common practice` for batch
tools, no outside source).

Kept small: three shots of 0.6 ms synthetic records (tests/synth.py: the
classic one-dimensional Kolsky analysis, Kolsky 1949), no figures; the tests
that need a real process (signals, SIGKILL) run one short ``python -c``
each. Worker processes are forked from the test process, so a shot can be
made to misbehave by patching ``shpb.campaign.reduce_task`` before the run.
"""

import json
import os
import random
import signal
import subprocess
import sys
import textwrap
import time
import tracemalloc
from pathlib import Path

import pandas as pd
import pytest

import shpb.campaign as C
from shpb.campaign import KEY_FILE, load_campaign, run_campaign
from shpb.cli import main
from shpb.errors import InputError
from shpb.reduce import reduce_shot
from shpb.runstate import LOCK_FILE, FolderLock
from shpb.setup import load_shot

from synth import elastic_perfectly_plastic, make_shot

EPP = elastic_perfectly_plastic(70e9, 300e6)
IDS = ["F-1", "F-2", "F-3"]
FILES = ("curves.csv", "summary.json")


@pytest.fixture(scope="module")
def shots(tmp_path_factory):
    folder = tmp_path_factory.mktemp("faults")
    for k, sid in enumerate(IDS):
        make_shot(folder, law=EPP, name=sid, amplitude=7e-4 + 1e-4 * k, seed=k + 1, t_record=0.6e-3)
    return folder


def campaign(folder, name, ids, extra_record=""):
    (folder / f"{name}.csv").write_text("id,record,specimen_length [mm],specimen_diameter [mm],material\n" + "".join(
        f"{i},{i}.csv,5.0,10.0,AL-X1 (fictional)\n" for i in ids))
    path = folder / f"{name}.toml"
    path.write_text(f'name = "{name}"\nshots = "{name}.csv"\nbarset = "bars.toml"\n[record]\nincident = "CH1"\n'
                    f'transmitted = "CH2"\ntime = "TIME"\n{extra_record}[analysis]\ndispersion = false\n')
    return path


@pytest.fixture(scope="module")
def clean(shots):
    """The reference: all three shots, two workers, no faults."""
    out = shots / "out-clean"
    report = run_campaign(load_campaign(campaign(shots, "clean", IDS)), out, jobs=2, figures=False)
    assert report.exit_code == 0
    return out


def same_as_clean(out, clean, ids):
    """The shot files of ``out`` are those of the clean run (same campaign file, so the same row names)."""
    for sid in ids:
        for f in FILES:
            assert (out / "shots" / sid / f).read_bytes() == (clean / "shots" / sid / f).read_bytes(), (sid, f)


def _children(pid):
    try:
        return [int(x) for x in Path(f"/proc/{pid}/task/{pid}/children").read_text().split()]
    except OSError:
        return []


def _gone(pids, timeout=10.0):
    t0 = time.monotonic()
    while time.monotonic() - t0 < timeout:
        alive = [p for p in pids if Path(f"/proc/{p}").exists() and "Z" not in
                 Path(f"/proc/{p}/stat").read_text().rsplit(")", 1)[-1].split()[:1]]
        if not alive:
            return True
        time.sleep(0.05)
    return False


# --------------------------------------------------------------------------- a worker dies
def _killing_task(victim, marker):
    real = C.reduce_task

    def task(shot, *args):
        if shot.name == victim and (marker is None or not marker.exists()):
            if marker is not None:
                marker.write_text("killed once")
            os.kill(os.getpid(), signal.SIGKILL)  # as the kernel's out-of-memory killer does
        return real(shot, *args)

    return task


def test_worker_killed_once_is_retried(shots, clean, monkeypatch):
    monkeypatch.setattr(C, "reduce_task", _killing_task("F-2", shots / "killed-once"))
    out = shots / "out-kill-once"
    report = run_campaign(load_campaign(campaign(shots, "clean", IDS)), out, jobs=2, figures=False)
    assert report.exit_code == 0 and report.ok == IDS and (shots / "killed-once").exists()
    same_as_clean(out, clean, IDS)
    assert (out / "campaign_summary.csv").is_file()


def test_shot_that_kills_two_workers_fails_with_the_cause(shots, clean, monkeypatch):
    monkeypatch.setattr(C, "reduce_task", _killing_task("F-2", None))
    out = shots / "out-kill-twice"
    report = run_campaign(load_campaign(campaign(shots, "clean", IDS)), out, jobs=2, figures=False)
    assert report.failed == ["F-2"] and report.ok == ["F-1", "F-3"] and report.exit_code == 1
    o = next(o for o in report.outcomes if o.id == "F-2")
    assert o.stage == "worker" and "killed by SIGKILL" in o.reason and "twice" in o.reason
    same_as_clean(out, clean, ["F-1", "F-3"])              # the good shots: byte for byte the clean run's
    table = pd.read_csv(out / "campaign_summary.csv").set_index("id")
    assert table.loc["F-2", "status"] == "failed" and not (out / "shots" / "F-2").exists()
    assert "killed by SIGKILL" in pd.read_csv(out / "failures.csv").set_index("id").loc["F-2", "reason"]


# --------------------------------------------------------------------------- the coordinator dies or is stopped
DRIVER = textwrap.dedent("""
    import sys, time
    import shpb.campaign as C
    from shpb.cli import main
    real = C.reduce_task
    def slow(shot, *args):
        time.sleep(float(sys.argv[3]))   # a long shot, so that signals find workers busy
        return real(shot, *args)
    C.reduce_task = slow
    sys.exit(main(["batch", sys.argv[1], "--out", sys.argv[2], "--jobs", "2", "--no-figure"]))
""")


def _start(path, out, delay):
    return subprocess.Popen([sys.executable, "-c", DRIVER, str(path), str(out), str(delay)],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)


def _workers_of(proc, n=2, timeout=30.0):
    t0 = time.monotonic()
    while len(_children(proc.pid)) < n:
        assert proc.poll() is None, proc.communicate()
        assert time.monotonic() - t0 < timeout
        time.sleep(0.02)
    return _children(proc.pid)


@pytest.mark.slow
def test_sigkill_of_the_coordinator_leaves_no_worker(shots):
    path, out = campaign(shots, "killcoord", IDS), shots / "out-killcoord"
    proc = _start(path, out, 30.0)
    workers = _workers_of(proc)
    proc.kill()
    proc.wait()
    assert _gone(workers, 5.0), "workers outlived their coordinator"
    assert (out / LOCK_FILE).exists()                        # left behind by the killed run: stale
    report = run_campaign(load_campaign(path), out, jobs=1, figures=False)   # a stale lock is taken over
    assert report.exit_code == 0 and not (out / LOCK_FILE).exists()


@pytest.mark.slow
@pytest.mark.parametrize("sig", [signal.SIGTERM, signal.SIGINT])
def test_signal_at_a_random_point_exits_130_and_resumes(shots, clean, sig):
    path, out = campaign(shots, "clean", IDS), shots / f"out-sig{int(sig)}"
    proc = _start(path, out, 0.4)
    workers = _workers_of(proc)
    time.sleep(random.uniform(0.0, 0.8))
    proc.send_signal(sig)
    _, err = proc.communicate(timeout=30)
    assert proc.returncode == 130, err
    assert err.strip().splitlines()[-1].startswith("interrupted: ") and "rerun the same command" in err
    assert "Traceback" not in err and _gone(workers, 5.0)
    assert not list(out.rglob("*.tmp")) and not (out / "campaign_summary.csv").exists()
    done = sorted(p.parent.name for p in out.glob(f"shots/*/{KEY_FILE}"))
    report = run_campaign(load_campaign(path), out, jobs=2, figures=False)
    assert sorted(report.skipped) == done and report.exit_code == 0
    same_as_clean(out, clean, IDS)


# --------------------------------------------------------------------------- one writer, reconciled folders
def test_second_run_on_a_locked_folder_is_refused(shots, capsys):
    path, out = campaign(shots, "locked", IDS[:1]), shots / "out-locked"
    with FolderLock(out, "shpb batch other.toml"):
        assert main(["batch", str(path), "--out", str(out), "-j", "1", "--no-figure"]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1
    assert f"another run is writing this folder: shpb batch other.toml (pid {os.getpid()}" in err
    (out / LOCK_FILE).write_text(json.dumps({"pid": 2**22 + 17, "host": os.uname().nodename, "time": 0}))
    assert main(["batch", str(path), "--out", str(out), "-j", "1", "--no-figure"]) == 0   # dead holder: stale


def test_row_removed_is_moved_aside_and_fit_refuses_it(shots, clean):
    out = shots / "out-removed"
    run_campaign(load_campaign(campaign(shots, "removed", IDS)), out, jobs=1, figures=False)
    report = run_campaign(load_campaign(campaign(shots, "removed", IDS[:2])), out, jobs=1, figures=False)
    assert [p.name for p in report.set_aside] == ["F-3"] and report.skipped == IDS[:2]
    assert not (out / "shots" / "F-3").exists() and (report.set_aside[0] / "summary.json").is_file()
    assert list(pd.read_csv(out / "campaign_summary.csv")["id"]) == IDS[:2]   # exactly the folders beside it
    # a folder the campaign summary does not list, or without its key, is no complete result for fit
    from shpb.fit import load_curves

    stray = out / "shots" / "F-9"
    stray.mkdir()
    for f in FILES:
        (stray / f).write_bytes((clean / "shots" / "F-3" / f).read_bytes())
    with pytest.raises(InputError, match=f"F-9: not a complete result: no {KEY_FILE}"):
        load_curves([out])
    (stray / KEY_FILE).write_text("x\n")
    with pytest.raises(InputError, match="F-9: not a complete result: not in .*campaign_summary.csv"):
        load_curves([out])
    stray.rename(out / "stray")
    (out / "shots" / "F-1" / KEY_FILE).unlink()
    with pytest.raises(InputError, match=f"F-1: not a complete result: no {KEY_FILE}"):
        load_curves([out / "shots" / "F-1"])
    assert len(load_curves([out / "shots" / "F-1"], include_incomplete=True)) == 1


def test_record_missing_on_rerun_keeps_the_last_good_result(shots, clean):
    out = shots / "out-missing"
    path = campaign(shots, "missing", IDS)
    run_campaign(load_campaign(path), out, jobs=1, figures=False)
    before = {f: (out / "shots" / "F-2" / f).read_bytes() for f in FILES}
    rec = shots / "F-2.csv"
    rec.rename(shots / "F-2.away")
    try:
        report = run_campaign(load_campaign(path), out, jobs=1, figures=False)
    finally:
        (shots / "F-2.away").rename(rec)
    assert report.stale == ["F-2"] and report.exit_code == 1
    o = next(o for o in report.outcomes if o.id == "F-2")
    assert o.status == "ok" and "No such file" in o.reason and "last good result is kept" in o.reason
    assert {f: (out / "shots" / "F-2" / f).read_bytes() for f in FILES} == before
    row = pd.read_csv(out / "campaign_summary.csv").set_index("id").loc["F-2"]
    assert bool(row["stale"]) and row["record_file"] == str(rec.resolve()) and row["record_file_relative"] == \
        "F-2.csv"


def test_rerun_with_nothing_to_do_leaves_every_file_alone(shots, capsys):
    path, out = campaign(shots, "again", IDS[:2]), shots / "out-again"
    assert main(["batch", str(path), "--out", str(out), "-j", "1", "--no-figure", "-q"]) == 0
    stamp = {p: p.stat().st_mtime_ns for p in out.rglob("*") if p.is_file()}
    capsys.readouterr()
    assert main(["batch", str(path), "--out", str(out), "-j", "1", "--no-figure", "-q"]) == 0
    assert "nothing to do" in capsys.readouterr().out
    assert {p: p.stat().st_mtime_ns for p in out.rglob("*") if p.is_file()} == stamp


# --------------------------------------------------------------------------- output locations, checked first
def test_unwritable_output_in_every_command(shots, clean, tmp_path, capsys):
    a_file = tmp_path / "a-file"
    a_file.write_text("x")
    shot = shots / "F-1.toml"
    setup = Path(__file__).parents[1] / "example_data" / "setups" / "HR-A61-1000-a.toml"
    commands = {
        "reduce": ["reduce", str(shot), "--out", str(a_file)],
        "batch": ["batch", str(campaign(shots, "unwritable", IDS[:1])), "--out", str(a_file / "sub")],
        "fit": ["fit", str(clean), "--out", str(a_file)],
        "simulate": ["simulate", str(setup), "--out", str(a_file)],
        "dispersion": ["dispersion", str(shots / "bars.toml"), "--figure", str(tmp_path)],
        "reduce /proc": ["reduce", str(shot), "--out", "/proc/shpb-cannot-be-here"],
    }
    for name, argv in commands.items():
        t0 = time.monotonic()
        assert main(argv) == 2, name
        err = capsys.readouterr().err.strip()
        assert len(err.splitlines()) == 1 and err.startswith("error: --"), (name, err)
        assert any(w in err for w in ("is a file", "is a folder", "cannot write")), (name, err)
        assert time.monotonic() - t0 < 2.0, f"{name}: refused only after computing"


# --------------------------------------------------------------------------- hostile records
@pytest.mark.parametrize("record, key, words", [
    ('time = "TIME"\ntime_unit = "us"', "record.time_unit", "over the ceiling"),     # seconds read as us
    ('time = "TIME"\ntime_unit = "ms"', "record.time_unit", "far shorter than"),     # seconds read as ms
    ('sample_interval = "0.1 ns"', "record.sample_interval", "far shorter than"),
    ('sample_interval = "1 ms"', "record.sample_interval", "samples over"),
])
def test_unit_typos_are_one_line_and_allocate_little(shots, tmp_path, record, key, words):
    text = (shots / "F-1.toml").read_text().replace('time = "TIME"', record)
    (shots / "typo.toml").write_text(text)
    shot = load_shot(shots / "typo.toml")
    tracemalloc.start()
    try:
        with pytest.raises(InputError) as err:
            reduce_shot(shot)
        peak = tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()
    assert key in str(err.value) and words in str(err.value) and f"is {key} right?" in str(err.value)
    assert peak < 1 << 30, f"peak {peak / 2**20:.0f} MiB"


def test_sample_ceiling_is_checked_before_reading_and_can_be_raised(shots):
    text = (shots / "F-1.toml").read_text().replace('time = "TIME"', 'time = "TIME"\nmax_samples = 1000')
    (shots / "ceiling.toml").write_text(text)
    with pytest.raises(InputError, match="over the ceiling of 1,000 .*record.max_samples"):
        reduce_shot(load_shot(shots / "ceiling.toml"))
    (shots / "ceiling.toml").write_text(text.replace("max_samples = 1000", "max_samples = 100000"))
    assert reduce_shot(load_shot(shots / "ceiling.toml")).valid


@pytest.mark.parametrize("fault", ["swapped", "truncated"])
def test_swapped_channels_and_cut_records_are_named(shots, tmp_path, capsys, fault):
    text = (shots / "F-1.toml").read_text()
    if fault == "swapped":
        text = text.replace('incident = "CH1"', 'incident = "CHX"').replace('transmitted = "CH2"',
                                                                            'transmitted = "CH1"')
        text = text.replace('"CHX"', '"CH2"')
    else:  # cut 100 us after the trigger (the record starts 100 us before it)
        lines = (shots / "F-1.csv").read_text().splitlines()
        head = [ln for ln in lines if not ln[:1].isdigit() and not ln.startswith("-")]
        data = [ln for ln in lines if ln[:1].isdigit() or ln.startswith("-")][:2000]
        (shots / "cut.csv").write_text("\n".join(head + data) + "\n")
        text = text.replace("F-1.csv", "cut.csv")
    (shots / f"{fault}.toml").write_text(text)
    status = main(["reduce", str(shots / f"{fault}.toml"), "--out", str(tmp_path / fault), "--no-figure"])
    out = capsys.readouterr()
    assert "Traceback" not in out.err
    if fault == "swapped":  # a setup mistake, named before anything is reduced: bad input
        assert status == 2 and "the channels look swapped" in out.err and len(out.err.splitlines()) == 1
    else:  # the record is read and reduced, and the verdict says why it cannot be used
        assert status == 1 and "NOT VALID" in out.out and "detail: the record ends at" in out.out


# --------------------------------------------------------------------------- a bug
def test_internal_error_is_one_line_and_a_log(shots, tmp_path, monkeypatch, capsys):
    import shpb.reduce

    def broken(*a, **k):
        raise RuntimeError("simulated bug\nsecond line")

    monkeypatch.setattr(shpb.reduce, "reduce_shot", broken)
    monkeypatch.setenv("SHPB_LOG_DIR", str(tmp_path))
    assert main(["reduce", str(shots / "F-1.toml"), "--out", str(tmp_path / "r")]) == 3
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and err.startswith("internal error") and "RuntimeError: simulated bug" in err
    log = Path(err.rsplit("the traceback is in ", 1)[1])
    assert log.parent == tmp_path and "Traceback" in log.read_text() and "in broken" in log.read_text()


# --------------------------------------------------------------------------- progress off a terminal
def test_progress_lines_in_a_log_and_quiet(shots, monkeypatch, capsys):
    path, out = campaign(shots, "progress", IDS[:2]), shots / "out-progress"
    monkeypatch.setenv("SHPB_PROGRESS_INTERVAL", "0")
    assert main(["batch", str(path), "--out", str(out), "-j", "1", "--no-figure", "--force"]) == 0
    err = capsys.readouterr().err
    assert "batch: 1/2 shots, " in err and "left" in err and "batch: 2/2 shots in " in err
    assert main(["batch", str(path), "--out", str(out), "-j", "1", "--no-figure", "--force", "--quiet"]) == 0
    assert capsys.readouterr().err == ""
