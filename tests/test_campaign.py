"""Campaigns: many synthetic shots reduced in one call, faults, interruption, resume, Dask.

The shots come from tests/synth.py: ideal records of a specimen with a known
constitutive law, built from the classic one-dimensional Kolsky analysis
(Source: Kolsky (1949); Gray (2000), ASM Handbook Vol. 8: the specimen in equilibrium,
dispersion-free bars). The known law is the outside reference for the
numbers a campaign adds (flow stress at a strain); the single-shot
reduction (``reduce_shot``, itself checked against the same laws in
test_reduce.py) is the reference for everything a campaign only gathers.
"""

import dataclasses
import json
import os
import shutil
import signal
import subprocess
import sys
import time

import numpy as np
import pandas as pd
import pytest

import shpb
from shpb.campaign import (KEY_FILE, flow_stress_at, load_campaign, rate_groups, repeatability_table,
                           run_campaign)
from shpb.cli import main
from shpb.errors import InputError
from shpb.reduce import reduce_shot
from shpb.setup import load_shot

from synth import elastic_perfectly_plastic, linear_hardening, make_shot

E_SPEC, SY, ET = 70e9, 300e6, 2e9
EPP = elastic_perfectly_plastic(E_SPEC, SY)
HARD = linear_hardening(E_SPEC, SY, ET)
T_RECORD = 0.6e-3  # short records: 6000 samples, still the whole reflected and transmitted pulses

# id, law, incident amplitude, noise seed, material
SHOTS = [
    ("A-1", EPP, 7e-4, 1, "AL-X1 (fictional)"),
    ("A-2", EPP, 7e-4, 2, "AL-X1 (fictional)"),
    ("A-3", EPP, 9e-4, 3, "AL-X1 (fictional)"),
    ("A-4", EPP, 9e-4, 4, "AL-X1 (fictional)"),
    ("A-5", EPP, 1.1e-3, 5, "AL-X1 (fictional)"),
    ("B-1", HARD, 8e-4, 6, "AL-X2 (fictional)"),
    ("B-2", HARD, 1.0e-3, 7, "AL-X2 (fictional)"),
]
LAWS = {s[0]: s[1] for s in SHOTS}
HEADER = "id,record,specimen_length [mm],specimen_diameter [mm],material,temperature [K],series"


@pytest.fixture(scope="module")
def shots_dir(tmp_path_factory):
    folder = tmp_path_factory.mktemp("campaign")
    for sid, law, amp, seed, _ in SHOTS:
        make_shot(folder, law=law, name=sid, amplitude=amp, seed=seed, t_record=T_RECORD)
    make_shot(folder, law=EPP, name="K-1", seed=8, t_record=T_RECORD, kill_transmitted=True)
    return folder


def _row(sid, record=None, length="5.0", material=None, series="S1"):
    mat = material or next((s[4] for s in SHOTS if s[0] == sid), "AL-X1 (fictional)")
    return f"{sid},{record or sid + '.csv'},{length},10.0,{mat},293,{series}"


def write_campaign(folder, name, rows, flow_strains=(0.03, 0.05), extra="", output=""):
    """A campaign file and its table in ``folder``; returns the campaign path."""
    (folder / f"{name}.csv").write_text(HEADER + "\n" + "\n".join(rows) + "\n")
    toml = folder / f"{name}.toml"
    toml.write_text(
        f'name = "{name} (fictional)"\nshots = "{name}.csv"\nbarset = "bars.toml"\n{extra}'
        '[record]\nincident = "CH1"\ntransmitted = "CH2"\ntime = "TIME"\n'
        '[analysis]\ndispersion = false\nlowpass = false\n'
        f'[output]\nflow_strains = [{", ".join(str(e) for e in flow_strains)}]\n{output}')
    return toml


@pytest.fixture(scope="module")
def clean_run(shots_dir):
    """All seven good shots, two jobs, no figures: the reference run of the module.

    Figures cost about a second a shot; they are checked on a smaller run of their own
    (``figure_run``), so this one, which most tests read, stays fast.
    """
    path = write_campaign(shots_dir, "clean", [_row(s[0]) for s in SHOTS])
    camp = load_campaign(path)
    report = run_campaign(camp, shots_dir / "out-clean", jobs=2, figures=False)
    return camp, report


#: Shots of the figure run: both materials, and two rate groups of AL-X1 (amplitudes 7e-4 and 9e-4).
FIGURE_SHOTS = ["A-1", "A-3", "B-1"]


@pytest.fixture(scope="module")
def figure_run(shots_dir):
    """Three shots, two jobs, figures on: the per-shot sheets and the campaign figures."""
    path = write_campaign(shots_dir, "figures", [_row(s) for s in FIGURE_SHOTS])
    return run_campaign(load_campaign(path), shots_dir / "out-figures", jobs=2, figures=True)


# --------------------------------------------------------------------------- the campaign as one call
def test_rows_are_shot_files(shots_dir, clean_run):
    # a row means what a shot file means: the campaign row and synth's shot TOML build the same Shot
    camp, _ = clean_run
    for row in camp.rows:
        own = load_shot(shots_dir / f"{row.id}.toml")
        a = dataclasses.replace(row.shot, source=None, barset=dataclasses.replace(row.shot.barset, source=None),
                                specimen=dataclasses.replace(row.shot.specimen, material="", temperature=None))
        b = dataclasses.replace(own, source=None, barset=dataclasses.replace(own.barset, source=None),
                                specimen=dataclasses.replace(own.specimen, material=""))
        assert a == b
        assert row.shot.specimen.temperature == 293.0      # from the 'temperature [K]' column
        assert row.tags == {"series": "S1"}


def test_summary_matches_single_shots_and_known_law(clean_run):
    camp, report = clean_run
    t = report.table.set_index("id")
    assert report.exit_code == 0 and report.ok == [s[0] for s in SHOTS]
    assert list(t.columns[:3]) == ["status", "material", "temperature_K"]
    for row in camp.rows:
        direct = reduce_shot(row.shot)          # the single-shot result of the same shot
        r, c = direct.summary["results"], direct.curves
        got = t.loc[row.id]
        # scalars pass through summary.json unchanged (JSON keeps every digit of a float)
        for key in ("mean_strain_rate_per_s", "peak_stress_MPa", "yield_strain", "yield_stress_MPa",
                    "valid_fraction_of_loading", "equilibrium_from_strain"):
            assert got[key] == pytest.approx(r[key], rel=1e-12), key
        assert bool(got["valid"]) is True and got["status"] == "ok"
        assert got["flags"] == ";".join(f.code for f in direct.flags)        # warnings pass through
        v = c["valid"].to_numpy(bool)
        law = LAWS[row.id]
        for e in camp.flow_strains:
            col = f"flow_stress_MPa_at_{e:g}"
            # the same interpolation on the unrounded curve: equal to the 6 digits curves.csv keeps
            ref = np.interp(e, c["strain"].to_numpy()[v], c["stress_MPa"].to_numpy()[v])
            assert got[col] == pytest.approx(ref, rel=2e-5)
            # against the known response put into the record (Kolsky 1949; Gray 2000 ideal analysis):
            # 300 MPa plateau, or 300 MPa + 2 GPa (e - sy/E) with hardening; 1 % as in test_reduce
            assert got[col] == pytest.approx(float(law.loading_curve(e)) / 1e6, rel=0.01)
    # the written table says the same as the returned one
    back = pd.read_csv(report.files["summary_csv"])
    assert list(back["id"]) == [s[0] for s in SHOTS]
    assert back["flow_stress_MPa_at_0.05"].to_numpy() == pytest.approx(t["flow_stress_MPa_at_0.05"].to_numpy(),
                                                                       rel=1e-5)
    if "summary_parquet" in report.files:
        pq = pd.read_parquet(report.files["summary_parquet"])
        assert list(pq["id"]) == list(back["id"])


def test_outputs_layout(clean_run):
    # the layout of docs/campaigns.md ("Outputs"); --no-figure: no sheets and no campaign figures
    _, report = clean_run
    out = report.out_dir
    for sid, *_ in SHOTS:
        for f in ("curves.csv", "summary.json", KEY_FILE):
            assert (out / "shots" / sid / f).is_file()
        assert not (out / "shots" / sid / "shot.png").exists()
    assert not (out / "figures").exists()
    assert pd.read_csv(out / "failures.csv").empty
    assert not list(out.rglob("*.tmp"))


@pytest.mark.slow
def test_outputs_with_figures(figure_run):
    # figures on (docs/campaigns.md, "Outputs"): a sheet per shot and the three campaign figures, all PNG
    out = figure_run.out_dir
    assert figure_run.ok == FIGURE_SHOTS
    for sid in FIGURE_SHOTS:
        for f in ("curves.csv", "summary.json", "shot.png", KEY_FILE):
            assert (out / "shots" / sid / f).is_file()
        assert (out / "shots" / sid / "shot.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    for f in ("stress_strain.png", "rate_sensitivity.png", "repeatability.png"):
        assert (out / "figures" / f).read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert pd.read_csv(out / "failures.csv").empty
    assert not list(out.rglob("*.tmp"))


def test_repeatability_groups(clean_run):
    _, report = clean_run
    rep = pd.read_csv(report.out_dir / "repeatability.csv")
    a = rep[rep["material"] == "AL-X1 (fictional)"]
    # amplitudes 7e-4 (x2), 9e-4 (x2), 1.1e-3 give three rate groups of 2, 2 and 1 repeats
    assert list(a["n"]) == [2, 2, 1]
    # flow stress of the perfectly plastic law is the same 300 MPa in every repeat (synth.py): the
    # spread among repeats is the noise only, well under 1 %
    assert (a["flow_stress_cv"].dropna() < 0.01).all()
    assert a["flow_stress_MPa_mean"].to_numpy() == pytest.approx(300.0, rel=0.01)


def _repeat_groups(rates, tolerance):
    """The documented rule (docs/campaigns.md, rate_group_tolerance), written out here: from the slowest
    shot not yet grouped, every shot within +tolerance of its rate is a repeat of it."""
    left, groups = sorted(rates, key=rates.get), []
    while left:
        slowest = rates[left[0]]
        groups.append([i for i in left if rates[i] <= slowest * (1 + tolerance)])
        left = [i for i in left if i not in groups[-1]]
    return groups


def test_output_options_regroup_without_redoing_shots(shots_dir, clean_run):
    # [output] rate_plot_strain and rate_group_tolerance (docs/campaigns.md) change only the campaign
    # tables, rebuilt from the shot folders: a rerun with other output options redoes no shot
    # (docs/campaigns.md, "Resume rules").
    out = shots_dir / "out-regroup"
    shutil.copytree(clean_run[1].out_dir, out)
    path = write_campaign(shots_dir, "regroup", [_row(s[0]) for s in SHOTS],
                          output="rate_plot_strain = 0.05\nrate_group_tolerance = 0.7\n")
    report = run_campaign(load_campaign(path), out, jobs=1, figures=False)
    assert report.skipped == [s[0] for s in SHOTS] and report.redone == []
    rep = pd.read_csv(out / "repeatability.csv")
    t = report.table.set_index("id")
    for material, part in rep.groupby("material", sort=False):
        rates = t[t["material"] == material]["mean_strain_rate_per_s"].to_dict()
        assert [ids.split(";") for ids in part["ids"]] == _repeat_groups(rates, 0.7)
    assert list(rep["n"]) == [4, 1, 2]       # AL-X1: 655-1044 1/s within +70 %, then 1434; AL-X2: 701 and 1016
    # the flow stress at 0.05: 300 MPa for the plateau law, 300 + 2000 (0.05 - 300/70000) = 391.43 MPa with
    # hardening (the laws put in, synth.py), 1 % as in test_reduce.py
    assert list(rep["strain"]) == [0.05] * 3
    law_at = [300.0, 300.0, float(HARD.loading_curve(0.05)) / 1e6]
    assert rep["flow_stress_MPa_mean"].to_numpy() == pytest.approx(law_at, rel=0.01)


def test_flow_stress_interpolation_and_rate_groups():
    # linear interpolation of a straight line is exact: sigma = 100 + 2000 e -> 200 at e = 0.05 (analytic)
    e = np.linspace(0.0, 0.1, 11)
    s = 100 + 2000 * e
    valid = (e >= 0.02) & (e <= 0.08)
    assert flow_stress_at(e, s, valid, 0.05) == pytest.approx(200.0, rel=1e-12)
    assert flow_stress_at(e, s, valid, 0.045) == pytest.approx(190.0, rel=1e-12)
    # outside the valid part: no extrapolation
    assert np.isnan(flow_stress_at(e, s, valid, 0.01)) and np.isnan(flow_stress_at(e, s, valid, 0.09))
    assert np.isnan(flow_stress_at(e, s, np.zeros_like(valid), 0.05))
    # rates within 15 % of a group's slowest member are repeats (hand-worked: 1200 > 1.15 x 1000)
    assert list(rate_groups([1000, 100, 105, np.nan, 1100, 1200], 0.15)) == [1, 0, 0, -1, 1, 2]


def test_repeatability_table_statistics():
    # sample standard deviation (ddof = 1) of 99, 100, 101 is 1 (hand-worked)
    t = pd.DataFrame({"id": ["a", "b", "c", "d"], "status": ["ok", "ok", "ok", "invalid"],
                      "material": ["m"] * 4, "mean_strain_rate_per_s": [1000.0, 1010.0, 990.0, 1000.0],
                      "flow_stress_MPa_at_0.05": [99.0, 100.0, 101.0, 500.0], "rate_group": [0, 0, 0, -1]})
    rep = repeatability_table(t, 0.05)
    assert len(rep) == 1 and rep["n"][0] == 3
    assert rep["flow_stress_MPa_std"][0] == pytest.approx(1.0, rel=1e-12)
    assert rep["flow_stress_cv"][0] == pytest.approx(0.01, rel=1e-12)


# --------------------------------------------------------------------------- nothing lost
def test_faults_are_recorded_and_the_rest_complete(shots_dir, clean_run, capsys):
    (shots_dir / "corrupt.csv").write_text("Instrument,Fictional Scope Co. DSO-9\nthis is not,a record\n")
    good = ["A-1", "B-2"]
    rows = [_row("A-1"), _row("M-1", record="no-such-file.csv"), _row("C-1", record="corrupt.csv"),
            _row("K-1"), _row("B-2")]
    path = write_campaign(shots_dir, "faults", rows)
    out = shots_dir / "out-faults"
    rc = main(["batch", str(path), "--jobs", "2", "--no-figure", "--out", str(out)])
    assert rc == 1                                  # some shots failed or are not valid
    err = capsys.readouterr().err
    assert "shot M-1: failed (read)" in err and "shot K-1: not valid" in err
    fails = pd.read_csv(out / "failures.csv").set_index("id")
    assert sorted(fails.index) == ["C-1", "K-1", "M-1"]
    assert fails.loc["M-1", "stage"] == "read" and "not found" in fails.loc["M-1", "reason"]
    assert fails.loc["C-1", "stage"] == "read" and "corrupt.csv" in fails.loc["C-1", "reason"]
    assert fails.loc["K-1", "status"] == "invalid" and "no_transmitted_pulse" in fails.loc["K-1", "reason"]
    assert fails.loc["M-1", "line"] == 3             # the row's line in faults.csv
    # the invalid shot is kept (reduced, with its flags); the failed ones leave no folder
    assert (out / "shots" / "K-1" / "summary.json").is_file()
    assert not (out / "shots" / "M-1").exists() and not (out / "shots" / "C-1").exists()
    # the good shots are complete and byte-identical to the clean run
    for sid in good:
        assert (out / "shots" / sid / "curves.csv").read_bytes() == \
            (clean_run[1].out_dir / "shots" / sid / "curves.csv").read_bytes()
        mine, ref = (json.loads((o / "shots" / sid / "summary.json").read_text())
                     for o in (out, clean_run[1].out_dir))
        assert mine["inputs"].pop("source") != ref["inputs"].pop("source")   # the row names its table
        assert mine == ref
    table = pd.read_csv(out / "campaign_summary.csv").set_index("id")
    assert list(table["status"]) == ["ok", "failed", "failed", "invalid", "ok"]
    assert "no_transmitted_pulse" in table.loc["K-1", "flags"]


def test_row_errors_name_row_and_column(shots_dir, capsys):
    rows = [_row("A-1"), _row("A-2", length="abc"), _row("A-3", length="5 kg"),
            _row("A-4").replace(",10.0,", ",25.0,")]        # wider than the 20 mm bars
    path = write_campaign(shots_dir, "badrows", rows)
    camp = load_campaign(path)
    errors = {r.id: r.error for r in camp.rows if r.error}
    assert set(errors) == {"A-2", "A-3", "A-4"}
    assert "line 5 (shot A-4), column 'specimen_diameter [mm]'" in errors["A-4"]
    assert "badrows.csv line 3 (shot A-2)" in errors["A-2"] and "'specimen_length [mm]'" in errors["A-2"]
    assert "line 4 (shot A-3)" in errors["A-3"]
    with pytest.raises(InputError, match=r"line 3 \(shot A-2\), column 'specimen_length \[mm\]'"):
        load_campaign(path, strict=True)
    # campaign-level errors: a repeated id, a missing column, an unknown column when tags are declared
    write_campaign(shots_dir, "dup", [_row("A-1"), _row("a-1", record="A-1.csv")])
    with pytest.raises(InputError, match="repeats line 2"):
        load_campaign(shots_dir / "dup.toml")
    (shots_dir / "nocol.csv").write_text("id,record,specimen_length [mm]\nA-1,A-1.csv,5\n")
    (shots_dir / "nocol.toml").write_text('shots = "nocol.csv"\nbarset = "bars.toml"\n[record]\n'
                                          'incident = "CH1"\ntransmitted = "CH2"\ntime = "TIME"\n')
    with pytest.raises(InputError, match="missing column 'specimen_diameter'"):
        load_campaign(shots_dir / "nocol.toml")
    write_campaign(shots_dir, "tagged", [_row("A-1")], extra='tags = ["batch"]\n')
    with pytest.raises(InputError, match="unknown column 'series'"):
        load_campaign(shots_dir / "tagged.toml")
    # through the command: a campaign-level error is exit status 2 and one line
    assert main(["batch", str(shots_dir / "dup.toml"), "--jobs", "1"]) == 2
    assert capsys.readouterr().err.strip().count("\n") == 0


def test_row_overrides(shots_dir):
    (shots_dir / "over.csv").write_text(
        "id,record_incident,record_transmitted,specimen_length,specimen_diameter [mm],dispersion,window_length [us],"
        "barset,operator\n"
        "A-1,A-1.csv,A-1.csv,5 mm,10,true,140,bars.toml,J. Doe (fictional)\n"
        "A-2,A-2.csv,A-2.csv,0.005,10,,,,\n")
    (shots_dir / "over.toml").write_text(
        'name = "overrides"\nshots = "over.csv"\nbarset = "bars.toml"\n'
        '[record]\nincident = "CH1"\ntransmitted = "CH2"\ntime = "TIME"\n[analysis]\ndispersion = false\n'
        '[specimen]\nmodulus = "70 GPa"\n')
    camp = load_campaign(shots_dir / "over.toml")
    a, b = (r.shot for r in camp.rows)
    assert a.analysis.dispersion is True and a.analysis.window_length == pytest.approx(140e-6)
    assert b.analysis.dispersion is False and b.analysis.window_length is None      # empty cell: the default
    assert a.specimen.length == b.specimen.length == pytest.approx(0.005)    # '5 mm' cell and bare SI
    assert a.specimen.modulus == pytest.approx(70e9)                          # campaign [specimen] default
    assert a.record.incident.file == shots_dir / "A-1.csv" and a.record.transmitted.column == "CH2"
    assert camp.rows[0].tags == {"operator": "J. Doe (fictional)"}


def test_table_conventions(shots_dir):
    # docs/campaigns.md, "The shots table": lines that are empty or start with '#' are skipped; a header unit
    # in brackets applies to the whole column (20 degC = 293.15 K: SI Brochure, BIPM 2019); true/false also as
    # yes/no and 1/0; per-row analysis overrides with units; declared tags only.
    (shots_dir / "conv.csv").write_text(
        "id,record,specimen_length [mm],specimen_diameter [mm],temperature [degC],specimen_density,"
        "dispersion,amplitude_factors,stress,pre_trigger,incident_start,operator\n"
        "# a comment line\n"
        "A-1,A-1.csv,5.0,10.0,20,2700 kg/m^3,yes,1,3-wave,50 us,100 us,A. Tester (fictional)\n"
        "\n"
        "A-2,A-2.csv,5.0,10.0,-40,,no,0,,,,B. Tester (fictional)\n")
    (shots_dir / "conv.toml").write_text(
        'name = "conventions"\nshots = "conv.csv"\nbarset = "bars.toml"\ntags = ["operator"]\n'
        '[record]\nincident = "CH1"\ntransmitted = "CH2"\ntime = "TIME"\n[analysis]\ndispersion = false\n')
    camp = load_campaign(shots_dir / "conv.toml")
    assert [r.id for r in camp.rows] == ["A-1", "A-2"] and not any(r.error for r in camp.rows)
    assert [r.line for r in camp.rows] == [3, 5]
    a, b = (r.shot for r in camp.rows)
    assert a.specimen.temperature == pytest.approx(293.15) and b.specimen.temperature == pytest.approx(233.15)
    assert a.specimen.density == pytest.approx(2700.0) and b.specimen.density is None
    assert (a.analysis.dispersion, a.analysis.amplitude_factors) == (True, True)
    assert (b.analysis.dispersion, b.analysis.amplitude_factors) == (False, False)
    assert a.analysis.stress == "3-wave" and b.analysis.stress == "1-wave"        # empty cell: the default
    assert a.analysis.pre_trigger == pytest.approx(50e-6) and a.analysis.incident_start == pytest.approx(100e-6)
    assert b.analysis.pre_trigger is None and b.analysis.incident_start is None
    assert camp.rows[1].tags == {"operator": "B. Tester (fictional)"}


def test_default_output_folder(shots_dir, capsys):
    # docs/campaigns.md, --out: default results/<campaign name> beside the campaign file, spaces and characters
    # other than letters, digits and '._-' turned into '-' (a run of them into one '-', none left at the ends)
    path = write_campaign(shots_dir, "named", [_row("A-1")])
    path.write_text(path.read_text().replace('name = "named (fictional)"', 'name = "AL X1/rate v1.2 (fictional)"'))
    assert main(["batch", str(path), "-j", "1", "--no-figure"]) == 0
    out = shots_dir / "results" / "AL-X1-rate-v1.2-fictional"
    assert (out / "shots" / "A-1" / KEY_FILE).is_file() and (out / "campaign_summary.csv").is_file()


# --------------------------------------------------------------------------- resume
def test_rerun_skips_unchanged_and_redoes_changed(shots_dir, monkeypatch):
    ids = ["A-1", "A-3", "B-1"]
    path = write_campaign(shots_dir, "rerun", [_row(s) for s in ids])
    out = shots_dir / "out-rerun"
    first = run_campaign(load_campaign(path), out, jobs=1, figures=False)
    assert first.redone == ids and first.skipped == []
    again = run_campaign(load_campaign(path), out, jobs=1, figures=False)
    assert again.skipped == ids and again.redone == []
    pd.testing.assert_frame_equal(again.table, first.table)
    # a changed specimen length: that shot only
    write_campaign(shots_dir, "rerun", [_row("A-1"), _row("A-3", length="5.5"), _row("B-1")])
    changed = run_campaign(load_campaign(path), out, jobs=1, figures=False)
    assert changed.redone == ["A-3"] and changed.skipped == ["A-1", "B-1"]
    s = json.loads((out / "shots" / "A-3" / "summary.json").read_text())
    assert s["inputs"]["specimen"]["length_m"] == pytest.approx(0.0055)
    # a changed record byte: that shot only
    rec = shots_dir / "B-1.csv"
    original = rec.read_bytes()
    try:
        rec.write_bytes(original.replace(b"DSO-9", b"DSO-8", 1))
        assert run_campaign(load_campaign(path), out, jobs=1, figures=False).redone == ["B-1"]
    finally:
        rec.write_bytes(original)
    # another package version: all; --force: all
    monkeypatch.setattr(shpb, "__version__", "0.0.0-test")
    assert run_campaign(load_campaign(path), out, jobs=1, figures=False).redone == ids
    assert run_campaign(load_campaign(path), out, jobs=1, figures=False, force=True).redone == ids


@pytest.mark.slow
def test_interrupted_run_leaves_whole_files_and_resumes(shots_dir):
    ids = [s[0] for s in SHOTS]
    path = write_campaign(shots_dir, "interrupt", [_row(s) for s in ids])
    out = shots_dir / "out-interrupt"
    # a stale temporary file as a SIGKILLed run would leave it: the next run removes it
    (out / "shots" / "A-1").mkdir(parents=True)
    (out / "shots" / "A-1" / ".curves.csv.x1y2.tmp").write_text("half")
    # figures on: each shot takes a few tenths of a second, so the run can be stopped part-way
    proc = subprocess.Popen([sys.executable, "-m", "shpb.cli", "batch", str(path), "--jobs", "2",
                             "--out", str(out)], stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    t0 = time.monotonic()
    while not list((out / "shots").glob(f"*/{KEY_FILE}")):
        assert proc.poll() is None, proc.stderr.read().decode()
        assert time.monotonic() - t0 < 60
        time.sleep(0.01)
    proc.send_signal(signal.SIGTERM)
    _, err = proc.communicate(timeout=60)
    assert proc.returncode == 130, err.decode()
    # no temporary files; every folder with a key is complete; no campaign table from a broken run
    assert not list(out.rglob("*.tmp"))
    complete = sorted(p.parent.name for p in (out / "shots").glob(f"*/{KEY_FILE}"))
    for sid in complete:
        for f in ("curves.csv", "summary.json", "shot.png"):
            assert (out / "shots" / sid / f).is_file()
    assert not (out / "campaign_summary.csv").exists()
    assert 1 <= len(complete) < len(ids)            # it was stopped part-way
    # the rerun keeps what was complete and does only the rest
    report = run_campaign(load_campaign(path), out, jobs=2, figures=False)
    assert sorted(report.skipped) == complete
    assert sorted(report.redone) == sorted(set(ids) - set(complete))
    assert report.exit_code == 0 and (out / "campaign_summary.csv").is_file()


# --------------------------------------------------------------------------- beyond one machine
@pytest.mark.slow
def test_dask_cluster_gives_the_same_outputs(shots_dir, clean_run):
    distributed = pytest.importorskip("dask.distributed")
    ids = ["A-1", "A-3", "B-2"]
    path = write_campaign(shots_dir, "dask", [_row(s) for s in ids])
    local = run_campaign(load_campaign(path), shots_dir / "out-dask-local", jobs=2, figures=False)
    with distributed.LocalCluster(n_workers=1, threads_per_worker=1, processes=False, protocol="tcp://",
                                  host="127.0.0.1",
                                  dashboard_address=None) as cluster:
        remote = run_campaign(load_campaign(path), shots_dir / "out-dask", scheduler=cluster.scheduler_address,
                              figures=False)
    pd.testing.assert_frame_equal(remote.table, local.table)
    for sid in ids:
        for f in ("curves.csv", "summary.json"):
            assert (shots_dir / "out-dask" / "shots" / sid / f).read_bytes() == \
                (shots_dir / "out-dask-local" / "shots" / sid / f).read_bytes()
    assert (shots_dir / "out-dask" / "campaign_summary.csv").read_bytes() == \
        (shots_dir / "out-dask-local" / "campaign_summary.csv").read_bytes()


def test_missing_dask_is_a_clear_error(shots_dir, monkeypatch):
    path = write_campaign(shots_dir, "nodask", [_row("A-1")])
    monkeypatch.setitem(sys.modules, "dask.distributed", None)   # import fails as if not installed
    with pytest.raises(InputError, match="needs Dask"):
        run_campaign(load_campaign(path), shots_dir / "out-nodask", scheduler="tcp://127.0.0.1:1", figures=False)
    assert not os.path.exists(shots_dir / "out-nodask" / "shots" / "A-1" / KEY_FILE)
