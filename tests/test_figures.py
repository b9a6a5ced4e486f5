"""Every figure kind, drawn for a valid and an invalid case, is readable: nothing clipped or overlapping.

No published source: these are layout checks of figures (common practice for
technical figures: every label inside the page, tick labels apart, legends
off the data, every axis with its unit, one spelling of microstrain). The
measure is matplotlib's own: the window extents of the drawn artists after a
layout pass (``Figure.draw_without_rendering``), in display pixels.
"""

from __future__ import annotations

import math
import re
from pathlib import Path
from types import SimpleNamespace

import numpy as np
import pandas as pd
import pytest
from matplotlib.legend import Legend
from matplotlib.lines import Line2D
from matplotlib.text import Text

from synth import elastic_perfectly_plastic, make_shot

ROOT = Path(__file__).resolve().parents[1]

#: Slack of the containment checks [pixels]: anti-aliasing and rounding of text extents.
TOL = 1.5


# --------------------------------------------------------------------------- the checks
def _inside(inner, outer, tol=TOL) -> bool:
    return (inner.x0 >= outer.x0 - tol and inner.y0 >= outer.y0 - tol and inner.x1 <= outer.x1 + tol
            and inner.y1 <= outer.y1 + tol)


def _overlap(a, b, tol=TOL) -> bool:
    return a.x0 < b.x1 - tol and b.x0 < a.x1 - tol and a.y0 < b.y1 - tol and b.y0 < a.y1 - tol


def _drawn_ticklabels(axis, renderer):
    """The tick labels the axis draws (ticks inside the view, visible, with text)."""
    if not axis.axes.axison or not axis.get_visible():
        return []
    labels = []
    for tick in axis._update_ticks():  # the ticks drawn now (matplotlib's own selection)
        for lab in (tick.label1, tick.label2):
            if lab.get_visible() and lab.get_text().strip():
                labels.append(lab)
    return labels


def layout_problems(fig) -> list:
    """What is clipped or overlapping in a figure, as readable lines (empty when the figure is clean)."""
    fig.draw_without_rendering()
    renderer = fig._get_renderer()
    page = fig.bbox
    problems = []
    every_tick = {id(lab) for ax in fig.axes for axis in (ax.xaxis, ax.yaxis)
                  for tick in axis.get_major_ticks() + axis.get_minor_ticks() for lab in (tick.label1, tick.label2)}
    drawn_ticks = {id(lab) for ax in fig.axes for axis in (ax.xaxis, ax.yaxis)
                   for lab in _drawn_ticklabels(axis, renderer)}
    # 1. every text drawn lies inside the page
    for t in fig.findobj(Text):
        if not t.get_visible() or not t.get_text().strip():
            continue
        if id(t) in every_tick and id(t) not in drawn_ticks:
            continue  # a tick outside the view: not drawn
        if t.axes is not None and not t.axes.get_visible():
            continue
        if t.axes is not None and id(t) not in every_tick and t in (t.axes.xaxis.label, t.axes.yaxis.label) \
                and not t.axes.axison:
            continue  # the label of an axis switched off
        box = t.get_window_extent(renderer)
        clip = t.clipbox if t.get_clip_on() else None
        if clip is not None and id(t) not in every_tick and not _overlap(box, clip, 0):
            continue  # clipped away (by its axes): not drawn
        if not _inside(box, page):
            problems.append(f"text {t.get_text()[:40]!r} is cut by the page edge ({box} vs {page})")
    # 2. tick labels of one axis do not overlap
    for ax in fig.axes:
        for axis in (ax.xaxis, ax.yaxis):
            if not axis.get_visible():
                continue
            labels = _drawn_ticklabels(axis, renderer)
            boxes = [lab.get_window_extent(renderer) for lab in labels]
            for i in range(len(boxes)):
                for j in range(i + 1, len(boxes)):
                    if _overlap(boxes[i], boxes[j]):
                        problems.append(f"tick labels {labels[i].get_text()!r} and {labels[j].get_text()!r} of "
                                        f"{ax.get_title() or ax.get_label()!r} overlap")
    # 3. a legend inside an axes leaves the data lines (of that axes and its twins) alone
    for ax in fig.axes:
        leg = ax.get_legend()
        if leg is None:
            continue
        lbox = leg.get_window_extent(renderer)
        if not _overlap(lbox, ax.bbox, tol=0):
            continue
        twins = [a for a in fig.axes if a.bbox.bounds == ax.bbox.bounds]
        for a in twins:
            for line in a.get_lines():
                if not line.get_visible():
                    continue
                xy = np.column_stack([np.asarray(line.get_xdata(), float), np.asarray(line.get_ydata(), float)])
                xy = xy[np.all(np.isfinite(xy), axis=1)]
                if not xy.size:
                    continue
                pts = line.get_transform().transform(xy)
                shown = ((pts[:, 0] >= a.bbox.x0) & (pts[:, 0] <= a.bbox.x1) & (pts[:, 1] >= a.bbox.y0)
                         & (pts[:, 1] <= a.bbox.y1))
                hit = shown & (pts[:, 0] > lbox.x0 + TOL) & (pts[:, 0] < lbox.x1 - TOL) \
                    & (pts[:, 1] > lbox.y0 + TOL) & (pts[:, 1] < lbox.y1 - TOL)
                if hit.any():
                    problems.append(f"the legend of {ax.get_title()!r} sits on the line {line.get_label()!r} "
                                    f"({int(hit.sum())} points)")
    # 4. every axis that shows numbers names its unit, and microstrain is written one way
    for ax in fig.axes:
        if not ax.get_visible() or not ax.axison:
            continue
        for axis, label in ((ax.xaxis, ax.get_xlabel()), (ax.yaxis, ax.get_ylabel())):
            numbers = [lab for lab in _drawn_ticklabels(axis, renderer) if _numeric(lab.get_text())]
            if numbers and "[" not in label:
                problems.append(f"axis {label!r} of {ax.get_title()!r} names no unit")
    for t in fig.findobj(Text):
        if re.search(r"\bue\b|\[us\]|\bus\)", t.get_text()):
            problems.append(f"{t.get_text()[:40]!r}: write µε and µs")
    return problems


def _numeric(text: str) -> bool:
    """A tick label that shows a number (plain, with a unicode minus, or matplotlib's math text)."""
    text = text.replace("\N{MINUS SIGN}", "-").replace("$", "").replace("\\mathdefault", "")
    return bool(re.fullmatch(r"[{}\s]*-?[\d.]+([eE][+-]?\d+|\\times10\^\{?-?\d+\}?)?[{}\s]*", text))


# --------------------------------------------------------------------------- the checks can fail
def test_the_checks_see_a_clipped_title_overlapping_ticks_and_a_legend_on_the_data():
    # the defects the first figures had, made on purpose: the checks must report each one
    from matplotlib.figure import Figure

    fig = Figure(figsize=(4, 3), layout="constrained")
    ax = fig.subplots()
    x = np.linspace(0, 1, 50)
    ax.plot(x, np.full(x.size, 0.9), label="a line under the legend")
    ax.set_ylim(0, 1)
    ax.legend(loc="upper left")
    ax.set_xticks([0.0, 0.02, 0.04])
    ax.set_xticklabels(["a long tick label", "another long one", "and a third"])
    ax.set(xlabel="strain [1]", ylabel="strain [ue]")
    ax.set_title("a title far too long for a figure of this width, so it is cut at both sides")
    found = "\n".join(layout_problems(fig))
    assert "cut by the page edge" in found
    assert "overlap" in found
    assert "sits on the line" in found
    assert "write µε" in found


# --------------------------------------------------------------------------- the figures
@pytest.fixture(scope="module")
def shots(tmp_path_factory):
    """Reduced shots: the example (valid), its 3-wave variant, two invalid synthetic shots and the long-pulse
    example (waves separated from two stations per bar)."""
    from shpb.reduce import reduce_file, reduce_shot
    from shpb.setup import load_shot

    work = tmp_path_factory.mktemp("figures")
    out = {"valid": reduce_file(ROOT / "configs" / "example_shot.toml"),
           "valid 3-wave": reduce_file(ROOT / "configs" / "example_shot.toml", stress="3-wave"),
           "separated": reduce_file(ROOT / "example_data" / "long_pulse" / "HR-P20-400.toml")}
    law = elastic_perfectly_plastic(70e9, 300e6)
    for name, kw in (("no transmitted pulse", dict(kill_transmitted=True)), ("clipped", dict(clip_volts=0.5))):
        path, _ = make_shot(work / name.replace(" ", "-"), law=law, name=name.replace(" ", "-"), **kw)
        out[name] = reduce_shot(load_shot(path))
    assert out["valid"].valid and not out["no transmitted pulse"].valid and not out["clipped"].valid
    return out


@pytest.mark.parametrize("case", ["valid", "valid 3-wave", "no transmitted pulse", "clipped", "separated"])
def test_shot_sheet_is_clean(shots, case):
    r = shots[case]
    fig = r.plot()
    assert layout_problems(fig) == []
    labels = [t.get_text() for ax in fig.axes if ax.get_legend() for t in ax.get_legend().get_texts()]
    if case == "separated":  # the further stations drawn, one window strip per separated bar
        texts = [t.get_text() for t in fig.axes[0].texts]
        assert "incident-bar station at 1000 mm" in labels and "transmitted-bar station at 1000 mm" in labels
        assert "incident + reflected (separated) window" in texts and "reflected window" not in texts
    if case == "valid 3-wave":  # the reported form is named, and every form is drawn
        assert any("reported (3-wave)" in s for s in labels) and any(s.startswith("3-wave") for s in labels)
    if not r.valid:  # R(t) of a bad shot: drawn only where it is on its axis, so no lines leave the panel
        ax_r = next(ax for ax in fig.axes if ax.get_ylabel().startswith("R ="))
        lo, hi = ax_r.get_ylim()
        r_line = next(line for line in ax_r.get_lines() if line.get_label().startswith("R(t)"))
        y = np.asarray(r_line.get_ydata(), float)
        assert np.all((y[np.isfinite(y)] >= -0.5) & (y[np.isfinite(y)] <= 0.5))


def _campaign_table(shots):
    """A campaign table with long material names and an invalid and a failed shot."""
    from shpb.campaign import _ROW_COLUMNS, INVALID, OK, shot_row

    rows, curves = [], {}
    material = "HR-A61 (fictional aluminium-like alloy with a long name)"
    for k, (sid, key, scale) in enumerate((("A-1000-a", "valid", 0.43), ("A-1000-b", "valid", 0.44),
                                            ("A-2500-a", "valid", 1.0), ("A-2500-b", "valid 3-wave", 1.01),
                                            ("B-bad", "no transmitted pulse", 1.0))):
        r = shots[key]
        row = shot_row(r.summary, r.curves[list(_ROW_COLUMNS)], (0.05,))
        row.update(id=sid, status=OK if r.valid else INVALID,
                   mean_strain_rate_per_s=row["mean_strain_rate_per_s"] * scale,
                   material=material if r.valid else "HR-C10 (fictional copper-like alloy)")
        rows.append(row)
        v = r.curves["valid"].to_numpy(bool)
        curves[sid] = (r.curves["strain"].to_numpy()[v], r.curves["stress_MPa"].to_numpy()[v] * (1 + 0.01 * k))
    rows.append({"id": "C-failed", "status": "failed", "material": "HR-C10 (fictional copper-like alloy)",
                 "mean_strain_rate_per_s": float("nan"), "flow_stress_MPa_at_0.05": float("nan")})
    table = pd.DataFrame(rows)
    from shpb.campaign import rate_groups

    table["rate_group"] = rate_groups(table["mean_strain_rate_per_s"].where(table["status"] == OK))
    return table, curves


@pytest.mark.parametrize("kind", ["stress_strain", "rate_sensitivity", "repeatability"])
def test_campaign_figures_are_clean(shots, kind):
    from shpb import campaign

    table, curves = _campaign_table(shots)
    camp = SimpleNamespace(name="Harrow Ridge HR-A61 and HR-C10 rate series (SYNTHETIC), a campaign with a long "
                                "name", rate_plot_strain=0.05)
    draw = {"stress_strain": lambda: campaign.plot_stress_strain(camp, table, curves),
            "rate_sensitivity": lambda: campaign.plot_rate_sensitivity(camp, table),
            "repeatability": lambda: campaign.plot_repeatability(camp, table)}[kind]
    assert layout_problems(draw()) == []


def test_fit_sheet_is_clean_and_tells_its_curves_apart():
    from matplotlib.colors import to_rgb

    from shpb import fit

    # Johnson & Cook (1983) form, written out: (A + B ep^n)(1 + C ln(rate/1 1/s)), room temperature; an
    # aluminium-like fictional alloy; seven curves at rates from 1e-3 to 5e3 1/s (the fit sheet's old defect:
    # the six dynamic ones drawn in nearly one colour)
    ep = np.linspace(0.01, 0.3, 25)
    rates = [1e-3, 1000.0, 1100.0, 2400.0, 2500.0, 4500.0, 4600.0]
    curves = [fit.Curve(name=f"S{k}", plastic_strain=ep, stress=(300e6 + 400e6 * ep**0.4) * (1 + 0.01 * math.log(r)),
                        strain_rate=r, temperature=293.15) for k, r in enumerate(rates)]
    res = fit.fit_curves(curves, "johnson-cook", fixed={"m": 1.0})
    fig = fit.plot_fit(res)
    assert layout_problems(fig) == []
    legend_lines = [h for ax in fig.axes for leg in ax.findobj(Legend) for h in leg.legend_handles
                    if isinstance(h, Line2D) and h.get_label().startswith("S")]
    colours = {to_rgb(h.get_color()) for h in legend_lines}
    assert len(legend_lines) == 7 and len(colours) == 7


def _calibration_cases():
    """(name, figure factory) of every calibration figure, with a good and a poor calibration."""
    from shpb import calibration_files as CF

    dt = 0.1e-6
    t = np.arange(24000) * dt - 100e-6
    pulse = lambda t0: 5e-4 * np.clip(np.minimum((t - t0) / 20e-6, (t0 + 250e-6 - t) / 20e-6), 0, 1)  # noqa: E731
    rng = np.random.default_rng(1)
    cases = []
    for quality, noise in (("good", 2e-6), ("poor", 6e-5)):
        record = pulse(0.0) - pulse(369e-6) + pulse(738e-6) + noise * rng.standard_normal(t.size)
        a, b = 900, 900 + 2600
        fe = {"first_pulse_sign": 1.0, "window": (a, b), "wave_speed_m_per_s": 4873.0,
              "wave_speed_uncertainty_m_per_s": 2.0 if quality == "good" else 80.0,
              "echoes": [{"delay_s": 369e-6, "sign": -1.0, "pass": 1, "path_m": 1.8},
                         {"delay_s": 738e-6, "sign": 1.0, "pass": 2, "path_m": 3.6}]}
        cases.append((f"free-end {quality}", lambda r=record, fe=fe: CF.plot_free_end(t, r, fe)))
        resid = [0.0, 0.1e-6, -0.1e-6] if quality == "good" else [0.0, 3e-6, -4e-6]
        fl = {"wave_speed_m_per_s": 4873.0, "intercept_s": 0.2e-6, "residuals_s": resid}
        cases.append((f"flight {quality}", lambda fl=fl: CF.plot_flight([0.5, 1.0, 1.5], [1.03e-4, 2.05e-4, 3.08e-4],
                                                                        fl)))
        inc, tra = pulse(0.0) + noise * rng.standard_normal(t.size), 0.98 * pulse(185e-6)
        bt = {"transmitted_to_incident_ratio": 0.98, "reflected_peak_fraction": 0.016 if quality == "good" else 0.2,
              "wave_speed_m_per_s": 4872.0, "window": (a, b), "transmitted_lag_samples": 1850,
              "reflected_lag_samples": 3690}
        cases.append((f"bars-together {quality}", lambda i=inc, tr=tra, bt=bt: CF.plot_bars_together(t, i, tr, bt)))
        st = {"expected_strain": 5.0e-4, "measured_strain": 5.0e-4 if quality == "good" else 3.5e-4,
              "pulse_foot_s": 0.0, "pulse_end_s": 250e-6, "scale": 1.0 if quality == "good" else 1.43}
        cases.append((f"striker {quality}", lambda r=record, st=st: CF.plot_striker(t, r, st)))
        volts = np.where(t > 0, 0.05, 0.0) + (1e-4 if quality == "good" else 1e-2) * rng.standard_normal(t.size)
        sh = {"before_V": 0.0, "after_V": 0.05, "height_V": 0.05, "scale": 1.0 if quality == "good" else 0.7}
        cases.append((f"shunt {quality}", lambda v=volts, sh=sh: CF.plot_shunt(t, v, sh)))
    return cases


@pytest.mark.parametrize("name, make", _calibration_cases(), ids=lambda c: c if isinstance(c, str) else "")
def test_calibration_figures_are_clean(name, make):
    assert layout_problems(make()) == []


def test_dispersion_figure_is_clean():
    from shpb import dispersion, report

    table = dispersion.dispersion_table(0.01905 / 2, 4873.0, 0.30, 3e5, n=60)
    fig = report.plot_dispersion(table, "HRB-350 incident bar, 19.05 mm, a title long enough to need wrapping "
                                        "on this figure", 2.5e5)
    assert layout_problems(fig) == []


@pytest.mark.parametrize("setup", ["HR-C10-1000-a", "HR-P20-400", "bars_together"])
def test_virtual_shot_figure_is_clean(setup):
    # The sheet of shpb simulate on its fixed layout (one draw, no constrained layout): a specimen shot, one with
    # further gauge stations (the widest legend) and a bars-together shot (one panel)
    from shpb.virtual import load_simulation, plot_virtual_shot, simulate_setup

    fig = plot_virtual_shot(simulate_setup(load_simulation(ROOT / "example_data" / "setups" / f"{setup}.toml")))
    assert not fig.get_constrained_layout()
    assert layout_problems(fig) == []
