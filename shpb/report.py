"""Figures: the one-page sheet of a reduced shot, the dispersion curves of a bar.

Plotting lives at the edge. The figure convention of the whole package: a
``plot_*`` function takes a result (or data) and returns a
``matplotlib.figure.Figure``; it writes no file and touches no pyplot state
or backend. The figures are built on ``matplotlib.figure.Figure`` directly
(not pyplot), so they need no screen, are safe in threaded workers and leave
a notebook's backend alone. The caller writes a figure with
:func:`shpb.io.atomic_savefig`.
"""

from __future__ import annotations

import numpy as np
from matplotlib.figure import Figure  # no pyplot: no global state, thread-safe, no screen needed

#: The shot sheet's panel grid: margins and gaps between the panels [inch], fixed rather than found by a
#: layout engine, which would draw the whole sheet once more to measure it (doubling the time of savefig).
#: About the positions the constrained layout gives the example shot, with room on the left of each panel
#: for six-character tick labels ("−10000", "100000") and the axis label, and between the columns for
#: the R(t) axis.
_SHEET_GRID = dict(left=0.95, right=0.18, bottom=0.47, top=0.47, column_gap=1.68, row_gap=0.72)
#: A line of more points than this is drawn through its min/max envelope (see :func:`envelope`).
MAX_LINE_POINTS = 4000


def envelope(x, y, max_points=MAX_LINE_POINTS):
    """A long line thinned to its min/max envelope, so that drawing it costs the same whatever its length.

    The samples are cut into ``max_points // 2`` runs of consecutive
    samples; of each run the lowest and the highest point are kept, in their
    order. Drawn as a line at the sheet's resolution (a run is a fraction of
    a pixel wide), it covers the same pixels as the full line: every peak and
    trough is kept (min/max decimation, common practice in oscilloscope
    displays). A line of at most ``max_points`` points is returned as given.

    Parameters
    ----------
    x, y : array_like
        The line's points (same length), in drawing order.
    max_points : int
        Most points returned.

    Returns
    -------
    x, y : ndarray
        The kept points; NaN gaps that fill a whole run stay NaN.
    """
    x, y = np.asarray(x), np.asarray(y)
    n = y.size
    if n <= max_points:
        return x, y
    k = -(-n // (max_points // 2))  # samples per run
    runs = -(-n // k)  # at most max_points // 2; the last run may be shorter
    padded = np.full(runs * k, np.nan)
    padded[:n] = y
    padded = padded.reshape(runs, k)
    nan = np.isnan(padded)
    lo = np.where(nan, np.inf, padded).argmin(axis=1)
    hi = np.where(nan, -np.inf, padded).argmax(axis=1)
    idx = np.stack([np.minimum(lo, hi), np.maximum(lo, hi)], axis=1) + (np.arange(runs) * k)[:, None]
    return x[idx.ravel()], y[idx.ravel()]


def _line(ax, x, y, *args, **kwargs):
    """``ax.plot`` of a line through its envelope (series become arrays)."""
    return ax.plot(*envelope(np.asarray(x, dtype=float), np.asarray(y, dtype=float)), *args, **kwargs)


#: Height of one legend row [inch] at the sheet's legend font size (7 pt, 1.5 line spacing, with the border).
_LEGEND_ROW = 7 * 1.55 / 72
_LEGEND_PAD = 0.1


def headroom(ax, top_inches: float, data_axes=None) -> None:
    """Widen the y-range of ``ax`` (and of its twins in ``data_axes``) so that the data leave ``top_inches``
    free at the top of the panel, where the legend goes: legends never sit on the data.

    The axes' own data limits (after autoscaling) are kept at the bottom; the
    top is raised by the fraction of the panel height the legend needs.
    """
    fig = ax.figure
    height = ax.get_position().height * fig.get_figheight()
    frac = min(0.6, (top_inches + 0.04) / max(height, 1e-6))
    for a in data_axes or [ax]:
        lo, hi = a.get_ylim()
        a.set_ylim(lo, lo + (hi - lo) / (1.0 - frac))


def legend_on_top(ax, handles=None, ncol=2, extra_inches=0.0, data_axes=None, **kwargs):
    """A legend at the top of a panel, in room made for it above the data (:func:`headroom`)."""
    if handles is None:
        handles, labels = ax.get_legend_handles_labels()
    else:
        labels = [h.get_label() for h in handles]
    rows = -(-len(handles) // ncol)
    headroom(ax, rows * _LEGEND_ROW + _LEGEND_PAD + extra_inches, data_axes)
    return ax.legend(handles, labels, loc="upper left", ncol=ncol, fontsize=7, borderaxespad=0.3,
                     handlelength=1.6, columnspacing=1.0, framealpha=0.9, **kwargs)


#: Width of an average character of sans-serif text [em], for layouts decided before anything is drawn.
_CHAR_EM = 0.55


def legend_outside(ax, handles=None, **kwargs):
    """A legend to the right of a panel, outside it: for figures laid out by matplotlib's constrained layout,
    which makes room for it, or on a fixed layout that keeps :func:`outside_legend_width` free on the right.
    It never sits on the data."""
    if handles is None:
        handles, labels = ax.get_legend_handles_labels()
    else:
        labels = [h.get_label() for h in handles]
    kwargs.setdefault("fontsize", 7)
    return ax.legend(handles, labels, loc="upper left", bbox_to_anchor=(1.02, 1.0), borderaxespad=0.0, **kwargs)


def outside_legend_width(axes) -> float:
    """Room [inch] the widest :func:`legend_outside` legend of ``axes`` needs right of its panel: its longest
    line at 7 pt (about 0.55 em a character), the handle, the frame and the gap."""
    lines = [line for ax in axes if ax.get_legend() for t in ax.get_legend().get_texts()
             for line in t.get_text().split("\n")]
    return max((len(line) for line in lines), default=0) * 7 * _CHAR_EM / 72 + 0.55


def plain_log_axis(axis) -> None:
    """Tick labels of a log axis as plain numbers (``2000``, not ``2×10³``); the minor ticks labelled too while
    the axis spans less than two decades, at leading digits spaced so that their labels never crowd (2, 3, 5;
    and 4, 6, 8 under 0.7 decade)."""
    from matplotlib import ticker

    def fmt(value, _pos=None):
        return f"{value:g}" if 1e-3 <= value < 1e6 else f"{value:.0e}"

    def minor(value, _pos=None):
        lo, hi = sorted(axis.get_view_interval())  # read when drawn, after autoscaling
        if value <= 0 or not (lo > 0 and np.log10(hi / lo) < 2):
            return ""
        lead = round(value / 10 ** np.floor(np.log10(value) + 1e-9), 6)
        shown = (2.0, 3.0, 5.0) if np.log10(hi / lo) >= 0.7 else (2.0, 3.0, 4.0, 5.0, 6.0, 8.0)
        return fmt(value) if lead in shown else ""

    axis.set_major_formatter(ticker.FuncFormatter(fmt))
    axis.set_minor_formatter(ticker.FuncFormatter(minor))


def wrapped_title(fig_or_ax, text: str, fontsize: float = 10.0, width_inches=None, **kwargs):
    """A title wrapped to the width of its figure (``fig.suptitle``) or axes (``ax.set_title``), so that a long
    campaign name is never cut at the sides."""
    import textwrap

    from matplotlib.figure import Figure as _Figure

    if width_inches is None:
        fig = fig_or_ax if isinstance(fig_or_ax, _Figure) else fig_or_ax.figure
        width_inches = fig.get_figwidth() * (1.0 if isinstance(fig_or_ax, _Figure) else 0.8)
    chars = max(20, int(width_inches * 72 / (_CHAR_EM * fontsize)))
    text = "\n".join(textwrap.wrap(text, chars)) or text
    if isinstance(fig_or_ax, _Figure):
        return fig_or_ax.suptitle(text, fontsize=fontsize, **kwargs)
    return fig_or_ax.set_title(text, fontsize=fontsize, **kwargs)


def _r_masked(c, summary, limit):
    """R(t) where it decides something: inside the loading part, where defined, and on the axis (|R| <= limit).

    Outside that the ratio of two small or unequal forces jumps between large
    values; drawn, it would fill the panel with vertical lines. Returns the
    masked R and the fraction of the loading part where |R| is off the axis.
    """
    tau = c["time_us"].to_numpy(dtype=float)
    r = c["equilibrium_R"].to_numpy(dtype=float).copy()
    res = summary.get("results", {})
    t0, t1 = res.get("loading_from_time_us"), res.get("loading_to_time_us")
    loading = np.ones(tau.size, bool) if t0 is None or t1 is None else (tau >= t0) & (tau <= t1)
    off = loading & np.isfinite(r) & (np.abs(r) > limit)
    off_fraction = float(off.sum() / max(loading.sum(), 1))
    r[~loading | off] = np.nan
    return r, off_fraction


def plot_shot(result) -> Figure:
    """The figure sheet of one shot (A4 landscape; :meth:`shpb.reduce.ShotResult.write` saves it at 110 dpi).

    Panels: raw bar strains at the gauges with each wave's window marked in a
    strip above them; the waves moved to the specimen faces; face forces with
    the equilibrium factor R(t) (drawn over the loading part only, within
    ±0.5) and its threshold; strain rate against strain; stress–strain in
    every stress form with the reported stress over the valid part and the
    yield point; the verdict and each flag in plain words
    (:mod:`shpb.plain_words`). Legends sit in room kept free above the data.

    The panels sit on a fixed grid (no layout engine, so saving draws the
    sheet once) and lines longer than :data:`MAX_LINE_POINTS` are drawn
    through their min/max :func:`envelope`, so the time to draw does not
    grow with the record's length.
    """
    from . import style
    from .uncertainty import expanded_name

    tr, c, summary = result.traces, result.curves, result.summary
    analysis = (summary.get("inputs") or {}).get("analysis") or {}
    width, height = 11.7, 8.3
    fig = Figure(figsize=(width, height))
    g = _SHEET_GRID
    panel_w = (width - g["left"] - g["right"] - g["column_gap"]) / 2
    panel_h = (height - g["bottom"] - g["top"] - 2 * g["row_gap"]) / 3
    gs = fig.add_gridspec(3, 2, left=g["left"] / width, right=1 - g["right"] / width, bottom=g["bottom"] / height,
                          top=1 - g["top"] / height, wspace=g["column_gap"] / panel_w, hspace=g["row_gap"] / panel_h)
    t_us = tr["time"] * 1e6

    # --- records at the gauges, each wave's window in a strip above the traces
    ax = fig.add_subplot(gs[0, 0])
    _line(ax, t_us, tr["strain_incident_gauge"] * 1e6, lw=0.8, color=style.INCIDENT, label="incident-bar gauge")
    _line(ax, t_us, tr["strain_transmitted_gauge"] * 1e6, lw=0.8, color=style.TRANSMITTED,
          label="transmitted-bar gauge")
    for name, strain in tr.get("stations", {}).items():  # further stations whose waves were separated: dashed
        _line(ax, t_us, strain * 1e6, lw=0.6, ls="--", label=name,
              color=style.INCIDENT if name.startswith("incident") else style.TRANSMITTED)
    ax.set(xlabel="record time [µs]", ylabel="bar strain [µε] (compression +)", title="Records at the gauges")
    strip = 0.11  # [inch] per strip row: the incident gauge's windows, then the transmitted gauge's
    leg = legend_on_top(ax, ncol=2, extra_inches=2 * strip + 0.04)
    frac = strip / (panel_h)
    top = 1.0 - (-(-len(leg.get_texts()) // 2) * _LEGEND_ROW + _LEGEND_PAD + 0.04) / panel_h
    rows = {"incident": 0, "reflected": 0, "transmitted": 1}
    colours = {"incident": style.INCIDENT, "reflected": style.REFLECTED, "transmitted": style.TRANSMITTED}
    for name, (a, b) in tr["gauge_windows"].items():
        wave = name.split()[0]  # "incident + reflected (separated)": the incident gauge's row
        y1 = top - rows.get(wave, 1) * frac
        ax.axvspan(a * 1e6, b * 1e6, ymin=y1 - 0.85 * frac, ymax=y1, color=colours.get(wave, style.NEUTRAL),
                   alpha=0.25, lw=0)
        ax.text(0.5 * (a + b) * 1e6, y1 - 0.42 * frac, f"{name} window", transform=ax.get_xaxis_transform(),
                ha="center", va="center", fontsize=6, clip_on=True)
    leg.set_zorder(5)

    # --- waves at the specimen faces
    ax = fig.add_subplot(gs[0, 1])
    tau = c["time_us"]
    _line(ax, tau, c["strain_incident"] * 1e6, color=style.INCIDENT, label="incident ε_i")
    _line(ax, tau, c["strain_reflected"] * 1e6, color=style.REFLECTED, label="reflected ε_r")
    _line(ax, tau, c["strain_transmitted"] * 1e6, color=style.TRANSMITTED, label="transmitted ε_t")
    _line(ax, tau, (c["strain_incident"] + c["strain_reflected"]) * 1e6, "k:", lw=0.8, label="ε_i + ε_r")
    ax.set(xlabel="time at the specimen faces [µs]", ylabel="bar strain [µε]", title="Waves at the specimen faces")
    legend_on_top(ax, ncol=4)

    # --- face forces and R(t)
    ax = fig.add_subplot(gs[1, 0])
    valid = c["valid"].to_numpy().astype(bool)
    h1 = _line(ax, tau, c["force_front_kN"], color=style.INCIDENT, label="front face F1 (incident bar)")
    h2 = _line(ax, tau, c["force_back_kN"], color=style.TRANSMITTED, label="back face F2 (transmitted bar)")
    ax.set(xlabel="time at the specimen faces [µs]", ylabel="force [kN]", title="Face forces and equilibrium")
    ax2 = ax.twinx()
    r_max = 0.5
    r, off = _r_masked(c, summary, r_max)
    r_label = "R(t) over the loading" + (f" ({100 * off:.0f} % off scale)" if off >= 0.005 else "")
    h3 = _line(ax2, tau, r, color=style.NEUTRAL, lw=0.8, label=r_label)
    handles = h1 + h2 + h3
    if "equilibrium_R_limit" in c:  # the limit R was tested against (the threshold widened by the noise)
        lim = c["equilibrium_R_limit"].to_numpy(dtype=float).copy()
        res = summary.get("results", {})
        t0, t1 = res.get("loading_from_time_us"), res.get("loading_to_time_us")
        if t0 is not None and t1 is not None:  # as R: over the loading part only, and on the axis
            lim[(tau < t0) | (tau > t1)] = np.nan
        lim[~(lim <= r_max)] = np.nan
        _line(ax2, tau, lim, color=style.NEUTRAL, ls=":", lw=0.6)
        handles += _line(ax2, tau, -lim, color=style.NEUTRAL, ls=":", lw=0.6, label="R limit")
    elif isinstance(analysis.get("equilibrium_threshold"), (int, float)):
        thr = float(analysis["equilibrium_threshold"])
        ax2.axhline(thr, color=style.NEUTRAL, ls=":", lw=0.6)
        handles.append(ax2.axhline(-thr, color=style.NEUTRAL, ls=":", lw=0.6, label=f"equilibrium: |R| ≤ {thr:g}"))
    ax2.set_ylim(-r_max, r_max)
    ax2.set_ylabel("R = 2(F1−F2)/(F1+F2) [1]")
    if valid.any():
        handles.append(ax.axvspan(tau[valid].iloc[0], tau[valid].iloc[-1], color=style.VALID_SHADE, alpha=0.1,
                                  lw=0, label="valid part"))
    legend_on_top(ax2, handles=handles, ncol=2, data_axes=[ax, ax2])

    # --- strain rate
    ax = fig.add_subplot(gs[1, 1])
    _band(ax, c, "strain_rate_per_s", valid)
    _line(ax, c["strain"], c["strain_rate_per_s"], color=style.NEUTRAL, lw=0.8, label="three-wave")
    _line(ax, c["strain"], c["strain_rate_reflected_per_s"], color=style.REFLECTED, lw=0.6, alpha=0.8,
          label="reflected wave only")
    _line(ax, c["strain"][valid], c["strain_rate_per_s"][valid], "k", lw=1.2 if expanded_name("strain_rate_per_s") in c else 1.5,
          label="valid part")
    ax.set(xlabel="engineering strain [1]", ylabel="strain rate [1/s]", title="Strain rate")
    if valid.any():
        ax.set_ylim(bottom=min(0.0, float(np.nanmin(c["strain_rate_per_s"][valid]))))
    legend_on_top(ax, ncol=3)

    # --- stress-strain, every form
    ax = fig.add_subplot(gs[2, 0])
    form = analysis.get("stress") or "1-wave"
    for name, col, colour in (("1-wave (back face)", "stress_1wave_MPa", style.TRANSMITTED),
                              ("2-wave (front face)", "stress_2wave_MPa", style.INCIDENT),
                              ("3-wave (mean)", "stress_3wave_MPa", style.THREE_WAVE)):
        if col in c:
            _line(ax, c["strain"], c[col], lw=0.8, color=colour, label=name)
    _band(ax, c, "stress_MPa", valid)
    _line(ax, c["strain"][valid], c["stress_MPa"][valid], "k", lw=1.2 if expanded_name("stress_MPa") in c else 2,
          label=f"reported ({form}), valid part")
    ys, ysig = tr.get("yield", (None, None))
    if ys is not None and ysig is not None:
        ax.plot([ys], [ysig], "v", color=style.REFLECTED, ms=8, label=f"yield {ysig:.0f} MPa at {ys:.4f}")
    ax.set(xlabel="engineering strain [1]", ylabel="engineering stress [MPa]", title="Stress–strain")
    legend_on_top(ax, ncol=2)

    # --- verdict and flags in plain words
    ax = fig.add_subplot(gs[2, 1])
    ax.axis("off")
    ax.text(0, 1, "\n".join(_sheet_lines(result)), va="top", family="monospace", fontsize=7.5)
    fig.suptitle(f"shpb — shot {result.name} (curves for design need independent validation)", fontsize=10,
                 y=1 - 0.04 / height)  # at the top edge, above the panel titles
    return fig


def _band(ax, c, column, valid):
    """The expanded-uncertainty band (value +- U95, k = 2) of a column over the valid part, against strain."""
    from . import style
    from .uncertainty import expanded_name

    key = expanded_name(column)
    if key not in c or not valid.any():
        return
    x = c["strain"].to_numpy()[valid]
    y, big_u = c[column].to_numpy()[valid], c[key].to_numpy()[valid]
    ok = np.isfinite(big_u)
    ax.fill_between(x[ok], (y - big_u)[ok], (y + big_u)[ok], color=style.UNCERTAINTY, alpha=0.35, lw=0.6,
                    edgecolor=style.UNCERTAINTY,
                    label="± U (k = 2), valid part", zorder=1)


#: Most lines of text in the sheet's verdict panel (it has room for about this many at 7.5 pt).
_SHEET_TEXT_LINES = 16
_SHEET_TEXT_WIDTH = 70


def _sheet_lines(result) -> list:
    """The verdict panel: the verdict, the main numbers, each flag in plain words; cut to fit its room."""
    import textwrap

    from .plain_words import flag_lines, shot_facts, verdict_line, with_u
    from .uncertainty import expanded_name

    facts = shot_facts(result.summary, result.curves)

    def num(key, fmt):
        v = facts.get(key)
        return format(v, fmt) if isinstance(v, (int, float)) and not isinstance(v, bool) else "n/a"

    def pm(key, fmt):  # with ± U (k = 2) when the uncertainty stage ran
        return with_u(facts, key, fmt) or "n/a"

    numbers = []
    if num("mean_strain_rate_per_s", ".0f") != "n/a":
        numbers.append(f"mean strain rate {pm('mean_strain_rate_per_s', '.0f')} 1/s")
    if num("peak_stress_MPa", ".0f") != "n/a":
        numbers.append(f"peak stress {pm('peak_stress_MPa', '.0f')} MPa")
    if num("yield_stress_MPa", ".0f") != "n/a":
        numbers.append(f"yield {pm('yield_stress_MPa', '.0f')} MPa at strain {pm('yield_strain', '.4f')}")
    if expanded_name("mean_strain_rate_per_s") in facts:
        numbers.append("± U: expanded uncertainty, k = 2 (about 95 %)")
    numbers.append(f"equilibrium from {num('equilibrium_from_time_us', '.1f')} µs"
                   if num("equilibrium_from_time_us", ".1f") != "n/a" else "no force equilibrium")
    said = 1 if any(f.get("severity") == "error" for f in result.summary.get("flags") or []) else 0
    wrapped = textwrap.wrap(verdict_line(result.name, {**result.summary, "valid": result.valid}, facts),
                            _SHEET_TEXT_WIDTH, subsequent_indent="  ")
    flags = flag_lines(result.summary, facts, indent="", said=said)
    while said and flags and flags[0].lstrip().startswith(("detail:", "check:")):  # the verdict's reason
        wrapped += textwrap.wrap(flags.pop(0), _SHEET_TEXT_WIDTH, subsequent_indent="    ")
    wrapped += textwrap.wrap("; ".join(numbers), _SHEET_TEXT_WIDTH) + [""]
    for line in flags:
        indent = " " * (len(line) - len(line.lstrip()) + 2)
        wrapped += textwrap.wrap(line, _SHEET_TEXT_WIDTH, subsequent_indent=indent)
    if len(wrapped) > _SHEET_TEXT_LINES:
        wrapped = wrapped[:_SHEET_TEXT_LINES - 1] + ["... (every flag in summary.json)"]
    return wrapped


def plot_dispersion(table, title, onset_Hz) -> Figure:
    """Phase and group velocity of a bar's fundamental mode against frequency.

    Parameters
    ----------
    table : mapping
        :func:`shpb.dispersion.dispersion_table` output: ``frequency_Hz``,
        ``phase_velocity_m_per_s``, ``group_velocity_m_per_s`` arrays.
    title : str
        Figure title (the bar).
    onset_Hz : float
        Frequency from which the second mode propagates [Hz]; marked when
        inside the table's range.
    """
    fig = Figure(figsize=(7.2, 4.2), layout="constrained")
    ax = fig.add_subplot()
    f_kHz = table["frequency_Hz"] / 1e3
    from . import style

    ax.plot(f_kHz, table["phase_velocity_m_per_s"], color=style.SHOT_COLOURS[0], label="phase velocity")
    ax.plot(f_kHz, table["group_velocity_m_per_s"], color=style.SHOT_COLOURS[1], ls="--", label="group velocity")
    if onset_Hz <= table["frequency_Hz"][-1]:
        ax.axvline(onset_Hz / 1e3, color="0.5", ls=":", label="second mode onset")
    ax.set_xlabel("frequency [kHz]")
    ax.set_ylabel("velocity [m/s]")
    wrapped_title(ax, title, fontsize=10, width_inches=4.6)
    legend_outside(ax)
    return fig
