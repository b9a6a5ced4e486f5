"""shpb watch: each record reduced exactly once, only once it is complete, and the campaign files kept up to date.

No published source: these are behavioural checks of a file watcher (common practice for acquisition
folders: a file still being written is not read; a restart does not redo finished work). The records are
the shipped example records (synthetic, of the fictional Harrow Ridge lab), written into the folder slowly,
in chunks that end in the middle of a line, with pauses longer than the watcher's settling time, so that
only the content check keeps a half-written file from being read.
"""

from __future__ import annotations

import threading
import time
from pathlib import Path

import pandas as pd

from shpb.campaign import KEY_FILE, current_key, load_campaign
from shpb.watch import Watcher, content_complete

ROOT = Path(__file__).resolve().parents[1]
SHOTS = ROOT / "example_data" / "shots"
SETTLE = 0.25


def _campaign(root: Path, rows: str, defaults: bool = True) -> Path:
    (root / "inbox").mkdir(parents=True, exist_ok=True)
    specimen = ('[specimen]\nlength = "5.02 mm"\ndiameter = "8 mm"\nmaterial = "HR-A61 (fictional)"\n'
                if defaults else "")
    (root / "campaign.toml").write_text(
        f'name = "watch test (SYNTHETIC)"\nshots = "shots.csv"\nbarset = "{ROOT / "configs" / "example_bars.toml"}"\n'
        f'[record]\nincident = "CH1"\ntransmitted = "CH2"\ntime = "TIME"\n{specimen}'
        f'[output]\nflow_strains = [0.05]\n')
    (root / "shots.csv").write_text("id,record,specimen_length [mm],specimen_diameter [mm]\n" + rows)
    return root / "campaign.toml"


def _write_slowly(src: Path, dst: Path, pieces: int, pause: float, log: list) -> None:
    """Write ``src`` into ``dst`` in pieces that each end in the middle of a line, pausing between them."""
    data = src.read_bytes()
    cuts = []
    for k in range(1, pieces):
        at = data.index(b"\n", k * len(data) // pieces)
        cuts.append(at - 3)  # three bytes short of a line end: the file is not whole here
    with open(dst, "wb") as fh:
        last = 0
        for cut in cuts + [len(data)]:
            fh.write(data[last:cut])
            fh.flush()
            last = cut
            if cut != len(data):
                time.sleep(pause)
    log.append((dst.name, time.time()))


def test_content_check_sees_a_cut_line(tmp_path):
    whole = tmp_path / "a.csv"
    whole.write_bytes(b"TIME,CH1\n0,1\n")
    cut = tmp_path / "b.csv"
    cut.write_bytes(b"TIME,CH1\n0,")
    empty = tmp_path / "c.csv"
    empty.write_bytes(b"")
    assert content_complete(whole) and not content_complete(cut) and not content_complete(empty)
    assert not content_complete(tmp_path / "half.npz") and not content_complete(tmp_path / "missing.csv")


def test_records_written_slowly_are_each_reduced_once_when_complete(tmp_path):
    camp = _campaign(tmp_path, "A-1,inbox/HR-A61-1000-a.csv,5.02,8.0\n")
    lines, written = [], []
    w = Watcher(tmp_path / "inbox", camp, out=tmp_path / "res", settle=SETTLE, poll=0.05, figures=False,
                echo=lines.append)
    # one record named by the table, one taking the campaign's defaults; pauses twice the settling time
    names = ["HR-A61-1000-a.csv", "HR-A61-5000-a.csv"]
    writer = threading.Thread(target=lambda: [_write_slowly(SHOTS / n, tmp_path / "inbox" / n, 4, 2 * SETTLE,
                                                            written) for n in names])
    writer.start()
    done = lambda: not writer.is_alive() and sum("VALID" in ln for ln in lines) >= 2  # noqa: E731
    deadline = time.time() + 60
    w.run(should_stop=lambda: done() or time.time() > deadline)
    writer.join()
    verdicts = [ln for ln in lines if ": VALID" in ln or "NOT VALID" in ln]
    assert len(verdicts) == 2, lines
    assert sum("shot A-1:" in v for v in verdicts) == 1 and sum("shot HR-A61-5000-a:" in v for v in verdicts) == 1
    # each was read whole: its stored key is the key of the complete file
    full = load_campaign(camp, extra_records=[tmp_path / "inbox" / "HR-A61-5000-a.csv"])
    for row in full.rows:
        assert (tmp_path / "res" / "shots" / row.id / KEY_FILE).read_text().strip() == \
            current_key(row.shot, full.base_dir.resolve())
    # and after its last byte: the verdict says how long after
    assert all(float(v.rsplit("[", 1)[1].split(" s ")[0]) >= SETTLE - 0.05 for v in verdicts)
    # the campaign table and the report list both shots
    table = pd.read_csv(tmp_path / "res" / "campaign_summary.csv")
    assert sorted(table["id"]) == ["A-1", "HR-A61-5000-a"] and list(table["status"]) == ["ok", "ok"]
    report = (tmp_path / "res" / "report.html").read_text()
    assert "A-1" in report and "HR-A61-5000-a" in report

    # a restart reduces nothing again; a changed record is reduced again
    again = []
    Watcher(tmp_path / "inbox", camp, out=tmp_path / "res", settle=SETTLE, poll=0.05, figures=False,
            echo=again.append).run(once=True)
    assert not any("VALID" in ln for ln in again) and sum("up to date" in ln for ln in again) == 2


def test_a_record_without_row_or_defaults_waits_for_its_row(tmp_path):
    camp = _campaign(tmp_path, "", defaults=False)
    lines = []
    w = Watcher(tmp_path / "inbox", camp, out=tmp_path / "res", settle=0.0, poll=0.05, figures=False, report=False,
                echo=lines.append)
    (tmp_path / "inbox" / "HR-A61-2500-a.csv").write_bytes((SHOTS / "HR-A61-2500-a.csv").read_bytes())
    w.step()
    assert any("NOT REDUCED" in ln and "add its row" in ln for ln in lines), lines
    w.step()  # said once, not again at every look
    assert sum("NOT REDUCED" in ln for ln in lines) == 1
    time.sleep(0.01)
    with open(tmp_path / "shots.csv", "a") as fh:
        fh.write("A-2,inbox/HR-A61-2500-a.csv,5.02,8.0\n")
    w.step()  # the table changed: reread, and the record now has its row
    assert any(ln.split(" ", 1)[1].startswith("shot A-2: VALID") for ln in lines if " shot " in ln), lines
