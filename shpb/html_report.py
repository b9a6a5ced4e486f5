"""One self-contained HTML file for a campaign output folder or a single shot: a report a colleague opens without
Python.

Everything is inside the file: figures as PNG data (``data:`` URIs), the
style sheet and a few lines of JavaScript (sorting and filtering the shot
table). Nothing is fetched from a network: no fonts, scripts or images from
elsewhere. A print style sheet makes the browser's print-to-PDF a clean
document (one shot per page, no controls). :func:`write_pdf` writes a PDF
directly through matplotlib, for a lab that wants files only.

What the report holds (:func:`build_report`):

* a sortable, filterable shot table: verdict, flags, mean strain rate, flow
  stress at the campaign's strains (with its uncertainty where the table has
  a ``<flow column>_uncertainty`` column, same unit), peak stress, the
  calibration used;
* the campaign's overlay figures (stress–strain by material coloured by
  rate, rate sensitivity, repeatability) and, per fit folder given, the fit
  (parameters with standard errors, statistics, notes, the fit sheet and the
  model curves);
* per shot: the verdict, each flag in plain words with what to check and
  its own message (:mod:`shpb.plain_words`), the main results, the inputs
  (specimen, analysis options, calibration) with each record's SHA-256, and
  the figure sheet;
* provenance (package version, the SHA-256 of every input of the last
  complete run) and the design and safety caution.

It reads only the files the reduction wrote (:class:`shpb.reduce.ShotResult`
folders, ``campaign_summary.csv``, the campaign figures, ``.shpb-run.json``,
a fit folder's ``fit_parameters.json`` and ``fit_sheet.png``); it reduces
nothing. The HTML is built with the standard library's escaping, no template
engine.
"""

from __future__ import annotations

import base64
import datetime
import html
import json
import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import Optional

from .errors import InputError

#: The report's default file name, in the results folder.
REPORT_FILE = "report.html"

_SAFETY = ("Hopkinson bars involve gas guns, fast strikers and bars that can yield or break: a bar flagged as "
           "yielded must be inspected before the next shot.")


def _facts(entry) -> dict:
    """The plain-words facts of a shot, with the rate range read from its curves when it has a folder."""
    from .plain_words import shot_facts

    curves = None
    if entry.folder is not None:
        import pandas as pd

        try:
            curves = pd.read_csv(entry.folder / "curves.csv", usecols=["strain_rate_per_s", "valid"])
        except (OSError, ValueError):
            curves = None
    return shot_facts(entry.summary or {}, curves)


@dataclass
class ShotEntry:
    """What the report shows of one shot (read from its result folder, or the table row of a failed shot)."""

    id: str
    status: str  # "ok" | "invalid" | "failed" | "stale"
    row: dict = field(default_factory=dict)
    summary: Optional[dict] = None
    folder: Optional[Path] = None
    figure: Optional[bytes] = None
    reason: str = ""
    facts: dict = field(default_factory=dict)


@dataclass
class ReportData:
    """Everything a report shows, read from the results folder (see :func:`read_results`)."""

    title: str
    kind: str  # "campaign" | "shot"
    folder: Path
    shots: list
    flow_columns: list
    figures: dict = field(default_factory=dict)  # name -> PNG bytes
    inputs: dict = field(default_factory=dict)  # path -> SHA-256 (the last complete run)
    fits: list = field(default_factory=list)  # (folder, parameters dict, {name: PNG bytes})


# --------------------------------------------------------------------------- reading the results
def _read_png(path: Path) -> Optional[bytes]:
    try:
        return path.read_bytes() if path.is_file() else None
    except OSError:
        return None


def _shot_entry(folder: Path, row: Optional[dict] = None) -> ShotEntry:
    from .reduce import ShotResult

    summary = ShotResult.read_summary(folder)
    status = (row or {}).get("status") or ("ok" if summary.get("valid") else "invalid")
    if (row or {}).get("stale") in (True, "True", "true"):
        status = "stale"
    entry = ShotEntry(id=str(summary.get("shot", folder.name)) if row is None else str(row["id"]), status=status,
                      row=dict(row or {}), summary=summary, folder=folder,
                      figure=_read_png(folder / ShotResult.FIGURE_FILE), reason=str((row or {}).get("reason") or ""))
    entry.facts = _facts(entry)
    return entry


def read_results(results, fit_dirs=()) -> ReportData:
    """Read a campaign output folder (``shpb batch``, ``shpb watch``) or one shot's result folder.

    Raises
    ------
    InputError
        Neither a campaign output folder nor a shot result folder.
    """
    from .campaign import CAMPAIGN_FIGURES, FIGURES_DIR, SHOTS_DIR, SUMMARY_TABLE
    from .reduce import ShotResult
    from .runstate import MARKER_FILE, read_state

    folder = Path(results)
    if not folder.is_dir():
        raise InputError("not found (expected a campaign output folder or a shot result folder)", str(folder))
    if ShotResult.is_result_folder(folder):
        entry = _shot_entry(folder)
        data = ReportData(title=f"shot {entry.id}", kind="shot", folder=folder, shots=[entry], flow_columns=[])
    elif (folder / SUMMARY_TABLE).is_file() or (folder / MARKER_FILE).is_file():
        rows = _read_table(folder / SUMMARY_TABLE)
        shots, seen = [], set()
        for row in rows:
            sub = folder / SHOTS_DIR / str(row["id"])
            if row.get("status") != "failed" and ShotResult.is_result_folder(sub):
                shots.append(_shot_entry(sub, row))
            else:
                shots.append(ShotEntry(id=str(row["id"]), status=str(row.get("status") or "failed"), row=row,
                                       reason=str(row.get("reason") or "")))
            seen.add(str(row["id"]))
        for sub in sorted((folder / SHOTS_DIR).glob("*")) if (folder / SHOTS_DIR).is_dir() else []:
            if sub.name not in seen and ShotResult.is_result_folder(sub):  # a table not yet written (a run stopped)
                shots.append(_shot_entry(sub))
        flow = [c for c in (rows[0] if rows else {}) if c.startswith("flow_stress_MPa_at_")]
        figures = {n: b for n in CAMPAIGN_FIGURES if (b := _read_png(folder / FIGURES_DIR / n)) is not None}
        state = read_state(folder) or {}
        data = ReportData(title=_campaign_title(folder, shots), kind="campaign", folder=folder, shots=shots,
                          flow_columns=flow, figures=figures, inputs=dict(state.get("inputs") or {}))
    else:
        raise InputError(f"neither a campaign output folder (no {SUMMARY_TABLE}) nor a shot result folder (no "
                         f"{ShotResult.SUMMARY_FILE})", str(folder))
    for fit_dir in fit_dirs:
        data.fits.append(_read_fit(Path(fit_dir)))
    return data


def _read_table(path: Path) -> list:
    """The campaign table as a list of row dicts (strings and floats; NaN for empty numbers)."""
    if not path.is_file():
        return []
    import pandas as pd

    table = pd.read_csv(path, dtype={"id": str})
    return [{k: (None if isinstance(v, float) and math.isnan(v) else v) for k, v in rec.items()}
            for rec in table.to_dict(orient="records")]


def _campaign_title(folder: Path, shots) -> str:
    """The campaign's name, from the record of its last complete run; else the folder's name."""
    from .runstate import read_state

    lines = (read_state(folder) or {}).get("lines") or []
    if lines and lines[0].startswith("campaign ") and ":" in lines[0]:
        return lines[0][len("campaign "):lines[0].rindex(":")]
    return folder.name


def _read_fit(folder: Path):
    path = folder / "fit_parameters.json"
    if not path.is_file():
        raise InputError("not a fit folder (no fit_parameters.json; see shpb fit --out)", str(folder))
    try:
        params = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError) as exc:
        raise InputError(f"cannot read ({exc})", str(path)) from None
    images = {}
    if (png := _read_png(folder / "fit_sheet.png")) is not None:
        images["fit_sheet.png"] = png
    curves = folder / "model_curves.csv"
    if curves.is_file():
        images["model curves"] = _model_curves_png(curves, params)
    return folder, params, images


def _model_curves_png(path: Path, params: dict) -> bytes:
    """The model's tabulated curves (``model_curves.csv``): true stress against plastic strain, coloured by rate."""
    import pandas as pd
    from matplotlib import cm, colors
    from matplotlib.figure import Figure

    from .io import figure_bytes
    from .report import plain_log_axis
    from .style import rate_cmap

    table = pd.read_csv(path)
    fig = Figure(figsize=(7.0, 4.2), layout="constrained")
    ax = fig.subplots()
    rates = table["strain_rate_per_s"].to_numpy(float)
    norm = colors.LogNorm(vmin=max(rates.min(), 1e-9), vmax=max(rates.max(), rates.min() * 1.01, 1e-8))
    cmap = rate_cmap()
    temps = sorted(table["temperature_K"].unique()) if "temperature_K" in table else [None]
    for (rate, temp), g in table.groupby(["strain_rate_per_s", "temperature_K"], sort=True):
        ls = ("-", "--", ":", "-.")[temps.index(temp) % 4] if temp in temps else "-"
        ax.plot(g["plastic_strain"], g["true_stress_MPa"], ls, color=cmap(norm(rate)), lw=1.2)
    ax.set(xlabel="true plastic strain [1]", ylabel="true stress [MPa]")
    ax.set_title(f"{params.get('model', 'model')}: tabulated curves (line style: temperature "
                 f"{', '.join(f'{t:.0f}' for t in temps if t is not None)} K)", fontsize=9)
    bar = fig.colorbar(cm.ScalarMappable(norm=norm, cmap=cmap), ax=ax, label="strain rate [1/s]")
    plain_log_axis(bar.ax.yaxis)
    return figure_bytes(fig, "png", dpi=100)


# --------------------------------------------------------------------------- HTML pieces
def _e(value) -> str:
    return html.escape("" if value is None else str(value), quote=True)


def _num(value, fmt: str) -> str:
    if value is None or isinstance(value, bool):
        return ""
    try:
        v = float(value)
    except (TypeError, ValueError):
        return ""
    return format(v, fmt) if math.isfinite(v) else ""


def _img(png: Optional[bytes], alt: str, cls: str = "figure") -> str:
    if not png:
        return f'<p class="missing">{_e(alt)}: not drawn (the results were written without figures)</p>'
    data = base64.b64encode(png).decode("ascii")
    return f'<img class="{cls}" alt="{_e(alt)}" src="data:image/png;base64,{data}">'


_VERDICT = {"ok": "valid", "invalid": "not valid", "failed": "failed", "stale": "stale"}


def _calibration_text(row: dict, summary: Optional[dict]) -> str:
    cal = None
    if summary is not None:
        cal = ((summary.get("inputs") or {}).get("barset") or {}).get("calibration")
    if not cal and row.get("calibration"):
        try:
            cal = json.loads(row["calibration"])
        except (TypeError, ValueError):
            cal = None
    if not cal or not cal.get("file"):
        return "bar set values"
    applied = cal.get("applied") or {}
    dates = sorted({str(v.get("date")) for v in applied.values() if isinstance(v, dict) and v.get("date")})
    return f"{Path(cal['file']).name}" + (f" ({dates[-1]})" if dates else "")


def _has_u(data: ReportData) -> bool:
    """Whether any shot of the report carries the uncertainty stage's results."""
    return any((s.summary or {}).get("uncertainty") for s in data.shots)


def _shot_rows(data: ReportData) -> str:
    from .plain_words import explain, with_u

    out = []
    for i, s in enumerate(data.shots):
        row, summary = s.row, s.summary or {}
        res = summary.get("results") or {}
        rate = row.get("mean_strain_rate_per_s", res.get("mean_strain_rate_per_s"))
        peak = row.get("peak_stress_MPa", res.get("peak_stress_MPa"))
        facts = s.facts
        flags = summary.get("flags") or [{"code": c, "severity": "", "message": ""}
                                         for c in str(row.get("flags") or "").split(";") if c]
        codes = " ".join(f'<span class="flag {_e(f.get("severity"))}" title="'
                         f'{_e(explain(f.get("code", ""), f.get("message", ""), facts).says)}">{_e(f.get("code"))}'
                         f'</span>' for f in flags)
        verdict = _VERDICT.get(s.status, s.status)
        cells = [(f'<a href="#shot-{i}">{_e(s.id)}</a>', s.id.lower()),
                 (f'<span class="verdict {s.status}">{verdict}</span>', verdict),
                 (codes, " ".join(f.get("code", "") for f in flags)),
                 (_e(row.get("material") or ((summary.get("inputs") or {}).get("specimen") or {}).get("material")),
                  None),
                 (_num(rate, ".0f"), _num(rate, ".6g"))]
        for col in data.flow_columns:  # ± U from the campaign table's U95_ column (the uncertainty stage)
            v = row.get(col)
            cells.append((with_u(row, col, ".1f") or "", _num(v, ".6g")))
        cells += [(_num(peak, ".1f"), _num(peak, ".6g")), (_e(_calibration_text(row, s.summary)), None)]
        numeric = ' class="n"'
        tds = "".join(f'<td{numeric if 4 <= k < len(cells) - 1 else ""} '
                      f'data-v="{_e(v if v is not None else _strip_tags(c).lower())}">{c}</td>'
                      for k, (c, v) in enumerate(cells))
        out.append(f'<tr data-verdict="{verdict}">{tds}</tr>')
    return "\n".join(out)


def _strip_tags(text: str) -> str:
    import re

    return html.unescape(re.sub(r"<[^>]+>", "", text))


def _shot_table(data: ReportData) -> str:
    heads = ["shot", "verdict", "flags", "material", "mean strain rate [1/s]"]
    pm = " ± U (k = 2)" if _has_u(data) else ""
    heads += [f"flow stress at {c[len('flow_stress_MPa_at_'):]}{pm} [MPa]" for c in data.flow_columns]
    heads += ["peak stress [MPa]", "calibration"]
    ths = "".join(f'<th scope="col" aria-sort="none"><button type="button">{_e(h)}</button></th>' for h in heads)
    n = len(data.shots)
    return f"""
<div class="controls">
  <label>Filter <input id="filter" type="search" placeholder="shot, flag, material..."></label>
  <label>Verdict <select id="verdict">
    <option value="">all</option><option>valid</option><option>not valid</option><option>failed</option>
    <option>stale</option></select></label>
  <span id="shown">{n} of {n} shots shown</span>
</div>
<table id="shots"><thead><tr>{ths}</tr></thead>
<tbody>
{_shot_rows(data)}
</tbody></table>"""


def _flag_items(summary: dict, facts: dict) -> str:
    from .plain_words import explain
    order = {"error": 0, "warning": 1, "info": 2}
    items = []
    for f in sorted(summary.get("flags") or [], key=lambda f: order.get(f.get("severity"), 3)):
        plain = explain(f.get("code", ""), f.get("message", ""), facts)
        check = f'<br><span class="check">check: {_e(plain.check)}</span>' if plain.check else ""
        items.append(f'<li class="{_e(f.get("severity"))}"><b>{_e(f.get("severity"))}</b>: {_e(plain.says)}{check}'
                     f'<br><small><code>{_e(f.get("code"))}</code>: {_e(f.get("message"))}</small></li>')
    return f"<ul class=\"flags\">{''.join(items)}</ul>" if items else "<p>No flags.</p>"


_RESULT_ROWS = (("mean strain rate", "mean_strain_rate_per_s", ".0f", "1/s"),
                ("strain-rate spread (std/mean)", "strain_rate_cv", ".1%", ""),
                ("peak stress", "peak_stress_MPa", ".1f", "MPa"),
                ("yield stress (offset)", "yield_stress_MPa", ".1f", "MPa"),
                ("yield strain", "yield_strain", ".4f", ""),
                ("mean flow stress over the valid part", "flow_stress_mean_MPa", ".1f", "MPa"),
                ("valid part, strain", "valid_strain_from", ".4f", ""),
                ("equilibrium from", "equilibrium_from_time_us", ".1f", "µs"),
                ("maximum strain", "max_strain", ".4f", ""),
                ("peak bar stress, incident", "peak_bar_stress_incident_MPa", ".0f", "MPa"),
                ("peak bar stress, transmitted", "peak_bar_stress_transmitted_MPa", ".0f", "MPa"))


def _shot_section(i: int, s: ShotEntry) -> str:
    from .plain_words import verdict_line, with_u
    from .reduce import ShotResult

    head = f'<section class="shot" id="shot-{i}"><h3>Shot {_e(s.id)} <span class="verdict {s.status}">' \
           f'{_VERDICT.get(s.status, s.status)}</span></h3>'
    if s.summary is None:
        return head + f'<p class="reason">No result: {_e(s.reason or "the shot failed")}.</p></section>'
    summary = s.summary
    res = summary.get("results") or {}
    facts = s.facts
    rows = "".join(f"<tr><th>{_e(label)}</th><td>{with_u(res, k, fmt) or ''} {_e(unit)}"
                   f"</td></tr>" for label, k, fmt, unit in _RESULT_ROWS if _num(res.get(k), fmt))
    if summary.get("uncertainty"):
        rows += ("<tr><th>uncertainty</th><td>± U: expanded uncertainty, k = 2 (about 95 %); budget in "
                 f"<code>{ShotResult.BUDGET_FILE}</code></td></tr>")
    if _num(res.get("valid_strain_to"), ".4f"):
        rows = rows.replace(f"{_num(res.get('valid_strain_from'), '.4f')} </td>",
                            f"{_num(res.get('valid_strain_from'), '.4f')} to {_num(res['valid_strain_to'], '.4f')}"
                            f"</td>")
    inputs = summary.get("inputs") or {}
    sp = inputs.get("specimen") or {}
    spec = [f"length {_num((sp.get('length_m') or 0) * 1e3, '.3f')} mm",
            f"diameter {_num((sp.get('diameter_m') or 0) * 1e3, '.3f')} mm"]
    if sp.get("material"):
        spec.append(_e(sp["material"]))
    if sp.get("temperature_K") is not None:
        spec.append(f"{_num(sp['temperature_K'], '.2f')} K")
    analysis = inputs.get("analysis") or {}
    options = ", ".join(f"{_e(k)} = {_e(v)}" for k, v in analysis.items() if v is not None)
    barset = inputs.get("barset") or {}
    records = "".join(f"<tr><td><code>{_e(p)}</code></td><td><code>{_e(h)}</code></td></tr>"
                      for p, h in (summary.get("records") or {}).items())
    note = f'<p class="reason">{_e(s.reason)}</p>' if s.status == "stale" and s.reason else ""
    return head + f"""
<p class="line">{_e(verdict_line(s.id, summary, facts))}</p>{note}
<div class="cols"><div><h4>Flags</h4>{_flag_items(summary, facts)}</div>
<div><h4>Results</h4><table class="kv">{rows}</table></div></div>
<h4>Figure sheet</h4>
{_img(s.figure, f"figure sheet of shot {s.id}")}
<h4>Inputs</h4>
<table class="kv">
<tr><th>specimen</th><td>{", ".join(spec)}</td></tr>
<tr><th>bar set</th><td>{_e(barset.get("name"))} <code>{_e(barset.get("source"))}</code></td></tr>
<tr><th>calibration</th><td>{_e(_calibration_text(s.row, summary))}</td></tr>
<tr><th>analysis</th><td>{options}</td></tr>
<tr><th>setup</th><td><code>{_e(inputs.get("source"))}</code></td></tr>
<tr><th>package version</th><td>{_e(summary.get("package_version"))}</td></tr>
</table>
<table class="records"><thead><tr><th>record file</th><th>SHA-256</th></tr></thead><tbody>{records}</tbody></table>
</section>"""


def _fit_section(folder: Path, params: dict, images: dict) -> str:
    rows = []
    for name, p in (params.get("parameters") or {}).items():
        value, err, ci = p.get("value"), p.get("u"), p.get("interval_95") or (None, None)
        text = _num(value, ".6g") + (f", u {_num(err, '.2g')}" if _num(err, ".2g") else "") + \
            (f", 95 % [{_num(ci[0], '.5g')}, {_num(ci[1], '.5g')}]" if _num(ci[0], ".5g") else "") + \
            ("" if p.get("varied", True) else f" (fixed{': ' + _e(p['note']) if p.get('note') else ''})")
        rows.append(f"<tr><th>{_e(name)}</th><td>{text}</td></tr>")
    st = params.get("statistics") or {}
    notes = "".join(f"<li>{_e(n)}</li>" for n in params.get("notes") or [])
    figs = "".join(f"<figure>{_img(png, name)}<figcaption>{_e(name)}</figcaption></figure>"
                   for name, png in images.items())
    return f"""<section class="fit"><h3>Fit: {_e(params.get("model"))} <small>({_e(folder.name)})</small></h3>
<p><code>{_e(params.get("equation"))}</code><br><small>{_e(params.get("reference"))}</small></p>
<div class="cols"><div><table class="kv">{"".join(rows)}</table></div>
<div><table class="kv"><tr><th>RMS residual</th><td>{_num(st.get("rms_MPa"), ".3g")} MPa</td></tr>
<tr><th>R²</th><td>{_num(st.get("r_squared"), ".4f")}</td></tr>
<tr><th>curves, points</th><td>{_e(st.get("n_curves"))}, {_e(st.get("n_points"))}</td></tr></table>
<ul>{notes}</ul></div></div>
{figs}</section>"""


def _provenance(data: ReportData) -> str:
    from . import __version__

    versions = sorted({str(s.summary.get("package_version")) for s in data.shots if s.summary})
    hashes = dict(data.inputs)
    for s in data.shots:
        for p, h in ((s.summary or {}).get("records") or {}).items():
            hashes.setdefault(p, h)
    rows = "".join(f"<tr><td><code>{_e(p)}</code></td><td><code>{_e(h or 'unreadable at the run')}</code></td></tr>"
                   for p, h in sorted(hashes.items()))
    return f"""<section id="provenance"><h2>Provenance</h2>
<p>Report made by shpb {_e(__version__)} on {_e(datetime.datetime.now().isoformat(timespec="seconds"))} from
<code>{_e(data.folder.resolve())}</code>; shots reduced by shpb {_e(", ".join(versions) or "-")}.</p>
<table class="records"><thead><tr><th>input file</th><th>SHA-256</th></tr></thead><tbody>{rows}</tbody></table>
</section>"""


_CSS = """
body{font-family:system-ui,-apple-system,"Segoe UI",Roboto,sans-serif;margin:1.5em auto;max-width:72em;
 padding:0 1em;color:#111;line-height:1.4}
h1{font-size:1.5em}h2{border-bottom:1px solid #ccc;padding-bottom:.2em;margin-top:2em}
table{border-collapse:collapse;margin:.5em 0}th,td{padding:.25em .6em;text-align:left;vertical-align:top}
#shots{width:100%;font-size:.92em}#shots thead th{border-bottom:2px solid #333;position:sticky;top:0;background:#fff}
#shots th button{font:inherit;font-weight:bold;border:0;background:none;cursor:pointer;padding:0;text-align:left}
#shots th[aria-sort=ascending] button::after{content:" \\25B2"}#shots th[aria-sort=descending] button::after{content:" \\25BC"}
#shots tbody tr:nth-child(even){background:#f4f6f8}#shots td.n{white-space:nowrap;text-align:right}
.verdict{font-weight:bold;padding:0 .3em;border-radius:3px}.verdict.ok{color:#00623f}
.verdict.invalid,.verdict.failed{color:#fff;background:#b3261e}.verdict.stale{background:#e69f00}
.flag{display:inline-block;font-size:.8em;border:1px solid #999;border-radius:3px;padding:0 .25em;margin:1px}
.flag.error{border-color:#b3261e;color:#b3261e}.flag.warning{border-color:#a15c00;color:#a15c00}
.controls{display:flex;gap:1.5em;align-items:center;margin:.5em 0;flex-wrap:wrap}
.caution{border-left:4px solid #d55e00;background:#fff4ec;padding:.6em 1em}
img.figure{max-width:100%;height:auto;border:1px solid #ddd}figure{margin:1em 0}
.cols{display:flex;gap:2em;flex-wrap:wrap}.cols>div{flex:1 1 22em}
ul.flags li{margin-bottom:.4em}ul.flags li.error{color:#8b1a12}.check{color:#333}
.kv th{font-weight:normal;color:#444}.records{font-size:.8em}.records code{word-break:break-all}
.line{font-family:ui-monospace,Menlo,Consolas,monospace;background:#f4f6f8;padding:.4em}
section.shot{border-top:1px solid #ccc;margin-top:2em}
@media print{
 .controls,#shots th button::after{display:none}body{max-width:none;margin:0;font-size:10pt}
 #shots tbody tr[hidden]{display:table-row}#shots thead th{position:static}
 section.shot,section.fit,#figures figure{break-inside:avoid-page}section.shot{break-before:page}
 a{color:inherit;text-decoration:none}img.figure{max-height:24cm}
}
"""

_JS = """
(function(){
var table=document.getElementById('shots');if(!table)return;
var body=table.tBodies[0],heads=table.tHead.rows[0].cells;
var filter=document.getElementById('filter'),verdict=document.getElementById('verdict'),
    shown=document.getElementById('shown');
function key(row,i){return row.cells[i].getAttribute('data-v')||'';}
Array.prototype.forEach.call(heads,function(th,i){
  th.querySelector('button').addEventListener('click',function(){
    var up=th.getAttribute('aria-sort')!=='ascending';
    Array.prototype.forEach.call(heads,function(h){h.setAttribute('aria-sort','none');});
    th.setAttribute('aria-sort',up?'ascending':'descending');
    var rows=Array.prototype.slice.call(body.rows);
    rows.sort(function(a,b){var x=key(a,i),y=key(b,i),nx=parseFloat(x),ny=parseFloat(y),r;
      if(x===''||y===''){r=(x==='')-(y==='');return r;}
      r=(!isNaN(nx)&&!isNaN(ny))?nx-ny:x.localeCompare(y);return up?r:-r;});
    rows.forEach(function(r){body.appendChild(r);});});});
function apply(){var q=filter.value.toLowerCase(),v=verdict.value,n=0;
  Array.prototype.forEach.call(body.rows,function(r){
    var ok=(!v||r.getAttribute('data-verdict')===v)&&(!q||r.textContent.toLowerCase().indexOf(q)>=0);
    r.hidden=!ok;if(ok)n++;});
  shown.textContent=n+' of '+body.rows.length+' shots shown';}
filter.addEventListener('input',apply);verdict.addEventListener('change',apply);
})();
"""


def build_report(data: ReportData) -> str:
    """The report as one HTML document (a string): everything inline, nothing fetched."""
    from .reduce import DESIGN_CAUTION

    counts = {k: sum(1 for s in data.shots if s.status == k) for k in ("ok", "invalid", "failed", "stale")}
    summary = ", ".join(f"{n} {_VERDICT[k]}" for k, n in counts.items() if n) or "no shots"
    figures = "".join(f"<figure>{_img(png, name)}<figcaption>{_e(name)}</figcaption></figure>"
                      for name, png in data.figures.items())
    fits = "".join(_fit_section(*f) for f in data.fits)
    shots = "".join(_shot_section(i, s) for i, s in enumerate(data.shots))
    kind = "Campaign" if data.kind == "campaign" else "Shot"
    sections = []
    if figures:
        sections.append(f'<section id="figures"><h2>Campaign figures</h2>{figures}</section>')
    if fits:
        sections.append(f'<section id="fits"><h2>Model fits</h2>{fits}</section>')
    return f"""<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<meta http-equiv="Content-Security-Policy" content="default-src 'none'; img-src data:; style-src 'unsafe-inline'; script-src 'unsafe-inline'">
<title>{_e(data.title)} — shpb report</title>
<style>{_CSS}</style></head>
<body>
<header><h1>{kind} report: {_e(data.title)}</h1>
<p>{len(data.shots)} shot{"s" if len(data.shots) != 1 else ""}: {_e(summary)}.</p>
<p class="caution"><b>Caution.</b> {_e(_SAFETY)} {_e(DESIGN_CAUTION)}</p></header>
<section id="table"><h2>Shots</h2>{_shot_table(data)}</section>
{"".join(sections)}
<section id="shot-details"><h2>Shot by shot</h2>{shots}</section>
{_provenance(data)}
<script>{_JS}</script>
</body></html>
"""


def write_report(results, out=None, fit_dirs=(), pdf=None) -> Path:
    """Read a results folder and write its HTML report (atomically); optionally a PDF beside it.

    Parameters
    ----------
    results : str or Path
        A campaign output folder or a shot result folder.
    out : str or Path, optional
        The HTML file [default: ``report.html`` in ``results``].
    fit_dirs : sequence of paths
        Fit folders (``shpb fit --out``) to show.
    pdf : str or Path, optional
        Also write this PDF (:func:`write_pdf`).

    Returns
    -------
    Path
        The HTML file.
    """
    from .io import atomic_write_text

    data = read_results(results, fit_dirs)
    path = Path(out) if out is not None else Path(results) / REPORT_FILE
    atomic_write_text(path, build_report(data))
    if pdf is not None:
        write_pdf(data, pdf)
    return path


def write_pdf(data: ReportData, path) -> Path:
    """A PDF of the report through matplotlib (no browser): a cover page with the shot table and the caution,
    then the campaign figures, the fits and each shot's figure sheet, one per A4 landscape page."""
    import io as _io

    from matplotlib.figure import Figure
    from matplotlib.image import imread

    from .io import atomic_write_pdf
    from .plain_words import verdict_line

    pages = []
    cover = Figure(figsize=(11.7, 8.3))
    lines = [f"{'Campaign' if data.kind == 'campaign' else 'Shot'} report: {data.title}", ""]
    for s in data.shots:
        lines.append(verdict_line(s.id, s.summary) if s.summary else f"shot {s.id}: {_VERDICT.get(s.status)}: "
                                                                        f"{s.reason}")
    import textwrap

    from .reduce import DESIGN_CAUTION

    body = []
    for line in lines[:48]:
        body += textwrap.wrap(line, 130, subsequent_indent="    ") or [""]
    body += [""] + textwrap.wrap(f"Caution. {_SAFETY} {DESIGN_CAUTION}", 130)
    cover.text(0.05, 0.95, "\n".join(body), va="top", family="monospace", fontsize=8)
    pages.append(cover)
    images = list(data.figures.items()) + [(n, p) for _, _, imgs in data.fits for n, p in imgs.items()] + \
        [(f"shot {s.id}", s.figure) for s in data.shots if s.figure]
    for name, png in images:
        page = Figure(figsize=(11.7, 8.3))
        ax = page.add_axes((0.02, 0.02, 0.96, 0.96))
        ax.imshow(imread(_io.BytesIO(png), format="png"))
        ax.set_axis_off()
        pages.append(page)
    atomic_write_pdf(pages, path)
    return Path(path)
