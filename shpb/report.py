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

_SEVERITY_MARK = {"error": "ERROR", "warning": "warning", "info": "note"}

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


def plot_shot(result) -> Figure:
    """The figure sheet of one shot (A4 landscape; :meth:`shpb.reduce.ShotResult.write` saves it at 110 dpi).

    Panels: raw bar strains at the gauges with the pulse windows; the waves
    moved to the specimen faces; face forces with the equilibrium factor
    R(t); strain rate against strain; stress–strain with the yield point and
    the valid part marked. Flags are listed at the foot of the sheet.

    The panels sit on a fixed grid (no layout engine, so saving draws the
    sheet once) and lines longer than :data:`MAX_LINE_POINTS` are drawn
    through their min/max :func:`envelope`, so the time to draw does not
    grow with the record's length.
    """
    tr, c = result.traces, result.curves
    width, height = 11.7, 8.3
    fig = Figure(figsize=(width, height))
    g = _SHEET_GRID
    panel_w = (width - g["left"] - g["right"] - g["column_gap"]) / 2
    panel_h = (height - g["bottom"] - g["top"] - 2 * g["row_gap"]) / 3
    gs = fig.add_gridspec(3, 2, left=g["left"] / width, right=1 - g["right"] / width, bottom=g["bottom"] / height,
                          top=1 - g["top"] / height, wspace=g["column_gap"] / panel_w, hspace=g["row_gap"] / panel_h)
    t_us = tr["time"] * 1e6

    ax = fig.add_subplot(gs[0, 0])
    _line(ax, t_us, tr["strain_incident_gauge"] * 1e6, lw=0.8, label="incident-bar gauge")
    _line(ax, t_us, tr["strain_transmitted_gauge"] * 1e6, lw=0.8, label="transmitted-bar gauge")
    for (name, (a, b)), col in zip(tr["gauge_windows"].items(), ("C2", "C3", "C4")):
        ax.axvspan(a * 1e6, b * 1e6, color=col, alpha=0.12, label=f"{name} window")
    ax.set(xlabel="record time [µs]", ylabel="bar strain [µε] (compression +)", title="Records at the gauges")
    ax.legend(fontsize=7, loc="best")

    ax = fig.add_subplot(gs[0, 1])
    tau = c["time_us"]
    _line(ax, tau, c["strain_incident"] * 1e6, label="incident ε_i")
    _line(ax, tau, c["strain_reflected"] * 1e6, label="reflected ε_r")
    _line(ax, tau, c["strain_transmitted"] * 1e6, label="transmitted ε_t")
    _line(ax, tau, (c["strain_incident"] + c["strain_reflected"]) * 1e6, "k:", lw=0.8, label="ε_i + ε_r")
    ax.set(xlabel="time at the specimen faces [µs]", ylabel="bar strain [µε]", title="Waves at the specimen faces")
    ax.legend(fontsize=7)

    ax = fig.add_subplot(gs[1, 0])
    _line(ax, tau, c["force_front_kN"], label="front face F1 (incident bar)")
    _line(ax, tau, c["force_back_kN"], label="back face F2 (transmitted bar)")
    ax.set(xlabel="time [µs]", ylabel="force [kN]", title="Face forces and equilibrium")
    ax2 = ax.twinx()
    _line(ax2, tau, c["equilibrium_R"], color="0.4", lw=0.8, label="R(t)")
    if "equilibrium_R_limit" in c:  # the limit R was tested against: the threshold widened by the noise
        _line(ax2, tau, c["equilibrium_R_limit"], color="0.4", ls=":", lw=0.6)
        _line(ax2, tau, -c["equilibrium_R_limit"], color="0.4", ls=":", lw=0.6)
    ax2.set_ylim(-0.5, 0.5)
    ax2.set_ylabel("R = 2(F1−F2)/(F1+F2)")
    valid = c["valid"].to_numpy().astype(bool)
    if valid.any():
        ax.axvspan(tau[valid].iloc[0], tau[valid].iloc[-1], color="g", alpha=0.08, label="valid")
    ax.legend(fontsize=7, loc="upper left")

    ax = fig.add_subplot(gs[1, 1])
    _line(ax, c["strain"], c["strain_rate_per_s"], color="0.6", lw=0.8, label="three-wave")
    _line(ax, c["strain"], c["strain_rate_reflected_per_s"], color="C1", lw=0.6, alpha=0.7, label="reflected wave only")
    _line(ax, c["strain"][valid], c["strain_rate_per_s"][valid], "k", lw=1.5, label="valid part")
    ax.set(xlabel="engineering strain [1]", ylabel="strain rate [1/s]", title="Strain rate")
    ax.set_ylim(bottom=min(0.0, float(np.nanmin(c["strain_rate_per_s"][valid]))) if valid.any() else None)
    ax.legend(fontsize=7)

    ax = fig.add_subplot(gs[2, 0])
    _line(ax, c["strain"], c["stress_1wave_MPa"], lw=0.8, label="1-wave (back face)")
    _line(ax, c["strain"], c["stress_2wave_MPa"], lw=0.8, label="2-wave (front face)")
    _line(ax, c["strain"][valid], c["stress_MPa"][valid], "k", lw=2, label="reported, valid part")
    ys, ysig = tr.get("yield", (None, None))
    if ys is not None:
        ax.plot([ys], [ysig], "rv", ms=8, label=f"yield {ysig:.0f} MPa at {ys:.4f}")
    ax.set(xlabel="engineering strain [1]", ylabel="engineering stress [MPa]", title="Stress–strain")
    ax.legend(fontsize=7, loc="lower right")

    ax = fig.add_subplot(gs[2, 1])
    ax.axis("off")
    res = result.summary.get("results", {})
    import textwrap

    def num(key, fmt):
        v = res.get(key)
        return format(v, fmt) if isinstance(v, (int, float)) else "n/a"

    lines = [f"shot {result.name}: {'VALID' if result.valid else 'NOT VALID'}",
             f"mean strain rate {num('mean_strain_rate_per_s', '.0f')} 1/s",
             f"peak stress {num('peak_stress_MPa', '.0f')} MPa",
             f"yield {num('yield_stress_MPa', '.0f')} MPa at strain {num('yield_strain', '.4f')}",
             f"equilibrium from {num('equilibrium_from_time_us', '.1f')} us", ""]
    for f in result.flags[:6]:
        lines += textwrap.wrap(f"{_SEVERITY_MARK.get(f.severity, f.severity)}: {f.message}", 70)
    ax.text(0, 1, "\n".join(lines), va="top", family="monospace", fontsize=8)
    fig.suptitle(f"shpb — shot {result.name} (curves for design need independent validation)", fontsize=10,
                 y=1 - 0.04 / height)  # at the top edge, above the panel titles
    return fig


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
    fig = Figure(figsize=(6.4, 4.2), layout="constrained")
    ax = fig.add_subplot()
    f_kHz = table["frequency_Hz"] / 1e3
    ax.plot(f_kHz, table["phase_velocity_m_per_s"], label="phase velocity")
    ax.plot(f_kHz, table["group_velocity_m_per_s"], label="group velocity")
    if onset_Hz <= table["frequency_Hz"][-1]:
        ax.axvline(onset_Hz / 1e3, color="0.5", ls=":", label="second mode onset")
    ax.set_xlabel("frequency [kHz]")
    ax.set_ylabel("velocity [m/s]")
    ax.set_title(title, fontsize="medium")
    ax.legend()
    return fig
