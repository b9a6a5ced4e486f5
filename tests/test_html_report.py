"""shpb report: one self-contained HTML file, checked as text and in a real browser (headless Chromium).

No published source: these are behavioural checks of a document (common practice for reports sent outside
the lab: it opens offline, shows every shot, its table sorts and filters, its figures show). The campaign
is the shipped example campaign (synthetic data of the fictional Harrow Ridge lab), reduced without shot
sheets but two (a sheet costs about half a second) and with the campaign figures.

The browser is Debian's ``chromium`` (``.ci/run`` installs it); where it cannot be had, the browser checks
are skipped with that reason. It is driven over the DevTools protocol through a pipe (``tests/browser.py``),
with the page's network off, and every request the page makes is recorded.
"""

from __future__ import annotations

import io
import re
from pathlib import Path

import numpy as np
import pytest

from shpb.cli import main

ROOT = Path(__file__).resolve().parents[1]
CAMPAIGN = ROOT / "example_data" / "campaign" / "campaign.toml"
SHEETS = ("HR-A61-2500-a", "HR-C10-5000-b")


@pytest.fixture(scope="module")
def campaign_out(tmp_path_factory):
    """The example campaign reduced (shot sheets for two shots only), its figures drawn, and a fit folder; its
    uncertainty stage (on in the example) with 10 Monte Carlo draws instead of 100, to keep this cheap."""
    import dataclasses

    from shpb import campaign as C
    from shpb.reduce import reduce_shot
    from shpb.setup import with_analysis

    out = tmp_path_factory.mktemp("report") / "campaign"
    camp = C.load_campaign(CAMPAIGN)
    camp = dataclasses.replace(camp, rows=tuple(dataclasses.replace(r, shot=with_analysis(r.shot, uncertainty_draws=10))
                                                for r in camp.rows))
    report = C.run_campaign(camp, out, jobs=1, figures=False)
    for row in camp.rows:
        if row.id in SHEETS:  # the figure sheet of two shots, as a run with figures writes it
            reduce_shot(row.shot).write(out / C.SHOTS_DIR / row.id, figure=True)
    curves = {f.name: C._read_back(f, camp.flow_strains)[2] for f in C.shot_folders(out)}
    C.campaign_figures(camp, report.table, curves, out / C.FIGURES_DIR)
    return out, camp


@pytest.fixture(scope="module")
def report_file(campaign_out):
    out, _ = campaign_out
    assert main(["report", str(out)]) == 0
    return out / "report.html"


def test_report_is_self_contained_and_lists_every_shot(report_file, campaign_out):
    _, camp = campaign_out
    text = report_file.read_text(encoding="utf-8")
    # nothing to fetch: every src and href is inline data or a link inside the page
    refs = re.findall(r'(?:src|href)="([^"]*)"', text)
    assert refs and all(r.startswith(("data:image/png;base64,", "#")) for r in refs)
    assert "http://" not in text.replace("http-equiv", "") and "https://" not in text
    assert "<link" not in text and "@import" not in text
    # every shot in the table (and a section for each), the figures, the caution, provenance with hashes
    rows = re.findall(r'<tr data-verdict="([^"]+)">(.*?)</tr>', text, re.S)
    assert len(rows) == len(camp.rows) == 12
    for row in camp.rows:
        assert f">{row.id}</a>" in text and f"Shot {row.id} " in text
    assert text.count("data:image/png;base64,") == 3 + len(SHEETS)  # the campaign figures and two sheets
    assert "independent validation" in text and "SHA-256" in text
    digest = next(iter(re.findall(r"<code>([0-9a-f]{64})</code>", text)))
    assert len(digest) == 64


def test_report_shows_the_flow_stress_with_its_uncertainty(report_file, campaign_out):
    """The example campaign runs the uncertainty stage: each valid shot's flow stress in the shot table reads
    "value ± U" with U the campaign table's expanded uncertainty (k = 2, JCGM 100:2008 §6.2), and each shot's
    section gives its mean flow stress with ± U."""
    import pandas as pd

    from shpb.campaign import SUMMARY_TABLE

    out, camp = campaign_out
    text = report_file.read_text(encoding="utf-8")
    table = pd.read_csv(out / SUMMARY_TABLE)
    assert "flow stress at 0.05 ± U (k = 2) [MPa]" in text
    rows = dict(re.findall(r'<a href="#shot-\d+">([^<]+)</a>(.*?)</tr>', text, re.S))
    shown = 0
    for _, r in table.iterrows():
        v, big_u = r["flow_stress_MPa_at_0.05"], r["U95_flow_stress_MPa_at_0.05"]
        if np.isfinite(v):
            assert 0 < big_u < 0.1 * v  # a few per cent of the stress, as the budget's inputs give
            assert f"{v:.1f} ± {big_u:.1f}" in rows[r["id"]]
            shown += 1
    assert shown >= 6
    assert re.search(r"mean flow stress over the valid part</th><td>[0-9.]+ ± [0-9.]+ MPa", text)


def test_report_says_flags_in_plain_words_and_escapes_text(tmp_path):
    from shpb.html_report import build_report, read_results
    from shpb.reduce import reduce_file

    shot = reduce_file(ROOT / "configs" / "example_shot.toml", out_dir=tmp_path / "one", figure=False)
    summary = (tmp_path / "one" / "summary.json").read_text()
    (tmp_path / "one" / "summary.json").write_text(summary.replace(shot.name, "<b>&shot</b>"))
    text = build_report(read_results(tmp_path / "one"))
    assert "&lt;b&gt;&amp;shot&lt;/b&gt;" in text and "<b>&shot</b>" not in text
    assert "report the rate as a range" in text  # rate_not_constant in plain words
    assert "not drawn" in text  # reduced without its sheet: said, not hidden


def test_report_refuses_a_folder_that_holds_no_results(tmp_path, capsys):
    assert main(["report", str(tmp_path)]) == 2
    assert "neither a campaign output folder" in capsys.readouterr().err


def test_report_with_a_fit_and_a_pdf(campaign_out, tmp_path):
    out, _ = campaign_out
    # a fit folder as shpb fit writes it (parameters and model curves; the sheet left out to keep this cheap)
    fit = tmp_path / "fit"
    fit.mkdir()
    (fit / "fit_parameters.json").write_text(
        '{"model": "johnson-cook", "equation": "sigma = (A + B*eps_p^n) (1 + C ln(rate/reference_rate))", '
        '"reference": "Johnson & Cook 1983", "parameters": {"A_MPa": {"value": 292.0, "u": 1.2, '
        '"interval_95": [289.7, 294.5], "ls_stderr": 0.74, "varied": true}, "m": {"value": 1.0, "ls_stderr": null, '
        '"varied": false, "note": "fixed by the user"}}, '
        '"statistics": {"rms_MPa": 1.29, "r_squared": 0.9997, "n_points": 411, "n_curves": 7}, "notes": []}')
    (fit / "model_curves.csv").write_text("plastic_strain,true_stress_MPa,strain_rate_per_s,temperature_K\n"
                                          + "".join(f"{e},{300 + 400 * e ** 0.4:.3f},{r},293.15\n"
                                                    for r in (1e-3, 1e3) for e in np.linspace(0, 0.3, 7)))
    pdf = tmp_path / "report.pdf"
    assert main(["report", str(out), "--fit", str(fit), "--html", str(tmp_path / "r.html"), "--pdf", str(pdf)]) == 0
    text = (tmp_path / "r.html").read_text()
    assert "Fit: johnson-cook" in text and "292, u 1.2, 95 % [289.7, 294.5]" in text and "fixed: fixed by the user" in text
    head = pdf.read_bytes()[:5]
    assert head == b"%PDF-"


# --------------------------------------------------------------------------- in a real browser
@pytest.fixture(scope="module")
def page(report_file):
    from browser import Browser, find_chromium

    if find_chromium() is None:
        pytest.skip("no chromium here (Debian's 'chromium' package; .ci/run installs it where apt-get can)")
    with Browser() as b:
        yield b.open(report_file.as_uri())


def test_browser_loads_the_report_offline_without_console_errors(page):
    assert page.console_errors() == []
    # the page's own file and its inline images only: no request leaves the machine
    assert all(u.startswith(("file://", "data:")) for u in page.requests()), page.requests()
    assert page.js("document.querySelectorAll('#shots tbody tr').length") == 12


def _column(page, n):
    return page.js(f"Array.from(document.querySelectorAll('#shots tbody tr')).filter(r => !r.hidden)"
                   f".map(r => r.cells[{n}].getAttribute('data-v'))")


def test_browser_sorts_and_filters_the_shot_table(page):
    # sort by mean strain rate (column 4), then the other way
    page.js("document.querySelectorAll('#shots thead th')[4].querySelector('button').click()")
    up = [float(v) for v in _column(page, 4)]
    assert up == sorted(up) and len(up) == 12
    assert page.js("document.querySelectorAll('#shots thead th')[4].getAttribute('aria-sort')") == "ascending"
    page.js("document.querySelectorAll('#shots thead th')[4].querySelector('button').click()")
    assert [float(v) for v in _column(page, 4)] == sorted(up, reverse=True)
    # text filter, then the verdict filter
    page.js("var f = document.getElementById('filter'); f.value = 'HR-C10'; "
            "f.dispatchEvent(new Event('input'))")
    assert sorted(_column(page, 0)) == sorted(s.lower() for s in (
        "HR-C10-1000-a", "HR-C10-1000-b", "HR-C10-2500-a", "HR-C10-2500-b", "HR-C10-5000-a", "HR-C10-5000-b"))
    assert page.js("document.getElementById('shown').textContent") == "6 of 12 shots shown"
    page.js("var v = document.getElementById('verdict'); v.value = 'not valid'; v.dispatchEvent(new Event('change'))")
    assert _column(page, 0) == []  # every example shot is valid
    page.js("document.getElementById('filter').value = ''; var v = document.getElementById('verdict'); "
            "v.value = ''; v.dispatchEvent(new Event('change'))")
    assert len(_column(page, 0)) == 12


def test_browser_screenshot_shows_the_table_and_the_figures(page):
    from matplotlib.image import imread

    def region(png, box):
        img = imread(io.BytesIO(png), format="png")[..., :3]
        x0, y0, w, h = (int(round(v)) for v in box)
        return img[max(y0, 0):y0 + h, max(x0, 0):x0 + w]

    page.js("window.scrollTo(0, 0)")
    box = page.js("(r => [r.x, r.y, r.width, Math.min(r.height, innerHeight - r.y)])"
                  "(document.getElementById('shots').getBoundingClientRect())")
    shot = page.screenshot()
    table = region(shot, box)
    assert table.size and box[2] > 600  # the table is laid out across the page
    dark = (table.mean(axis=2) < 0.5).mean()
    assert 0.01 < dark < 0.5  # text drawn in it: neither blank nor a solid block
    # each figure has loaded (decoded pixels) and shows a drawing, not a blank image
    assert page.js("Array.from(document.images).every(i => i.complete && i.naturalWidth > 300)")
    page.js("document.querySelector('#figures img').scrollIntoView()")
    box = page.js("(r => [r.x, r.y, r.width, Math.min(r.height, innerHeight - r.y)])"
                  "(document.querySelector('#figures img').getBoundingClientRect())")
    fig = region(page.screenshot(), box)
    assert fig.shape[0] > 200 and fig.shape[1] > 500
    assert fig.std() > 0.05 and (fig.mean(axis=2) < 0.6).mean() > 0.005  # lines and labels, not blank pixels
    colours = np.unique((fig.reshape(-1, 3) * 8).astype(int), axis=0)
    assert len(colours) > 20  # the rate colour map, not one flat colour
