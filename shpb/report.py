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


def plot_shot(result) -> Figure:
    """The figure sheet of one shot (A4 landscape; :meth:`shpb.reduce.ShotResult.write` saves it at 110 dpi).

    Panels: raw bar strains at the gauges with the pulse windows; the waves
    moved to the specimen faces; face forces with the equilibrium factor
    R(t); strain rate against strain; stress–strain with the yield point and
    the valid part marked. Flags are listed at the foot of the sheet.
    """
    tr, c = result.traces, result.curves
    fig = Figure(figsize=(11.7, 8.3), layout="constrained")
    gs = fig.add_gridspec(3, 2)
    t_us = tr["time"] * 1e6

    ax = fig.add_subplot(gs[0, 0])
    ax.plot(t_us, tr["strain_incident_gauge"] * 1e6, lw=0.8, label="incident-bar gauge")
    ax.plot(t_us, tr["strain_transmitted_gauge"] * 1e6, lw=0.8, label="transmitted-bar gauge")
    for (name, (a, b)), col in zip(tr["gauge_windows"].items(), ("C2", "C3", "C4")):
        ax.axvspan(a * 1e6, b * 1e6, color=col, alpha=0.12, label=f"{name} window")
    ax.set(xlabel="record time [µs]", ylabel="bar strain [µε] (compression +)", title="Records at the gauges")
    ax.legend(fontsize=7, loc="best")

    ax = fig.add_subplot(gs[0, 1])
    tau = c["time_us"]
    ax.plot(tau, c["strain_incident"] * 1e6, label="incident ε_i")
    ax.plot(tau, c["strain_reflected"] * 1e6, label="reflected ε_r")
    ax.plot(tau, c["strain_transmitted"] * 1e6, label="transmitted ε_t")
    ax.plot(tau, (c["strain_incident"] + c["strain_reflected"]) * 1e6, "k:", lw=0.8, label="ε_i + ε_r")
    ax.set(xlabel="time at the specimen faces [µs]", ylabel="bar strain [µε]", title="Waves at the specimen faces")
    ax.legend(fontsize=7)

    ax = fig.add_subplot(gs[1, 0])
    ax.plot(tau, c["force_front_kN"], label="front face F1 (incident bar)")
    ax.plot(tau, c["force_back_kN"], label="back face F2 (transmitted bar)")
    ax.set(xlabel="time [µs]", ylabel="force [kN]", title="Face forces and equilibrium")
    ax2 = ax.twinx()
    ax2.plot(tau, c["equilibrium_R"], color="0.4", lw=0.8, label="R(t)")
    if "equilibrium_R_limit" in c:  # the limit R was tested against: the threshold widened by the noise
        ax2.plot(tau, c["equilibrium_R_limit"], color="0.4", ls=":", lw=0.6)
        ax2.plot(tau, -c["equilibrium_R_limit"], color="0.4", ls=":", lw=0.6)
    ax2.set_ylim(-0.5, 0.5)
    ax2.set_ylabel("R = 2(F1−F2)/(F1+F2)")
    valid = c["valid"].to_numpy().astype(bool)
    if valid.any():
        ax.axvspan(tau[valid].iloc[0], tau[valid].iloc[-1], color="g", alpha=0.08, label="valid")
    ax.legend(fontsize=7, loc="upper left")

    ax = fig.add_subplot(gs[1, 1])
    ax.plot(c["strain"], c["strain_rate_per_s"], color="0.6", lw=0.8, label="three-wave")
    ax.plot(c["strain"], c["strain_rate_reflected_per_s"], color="C1", lw=0.6, alpha=0.7, label="reflected wave only")
    ax.plot(c["strain"][valid], c["strain_rate_per_s"][valid], "k", lw=1.5, label="valid part")
    ax.set(xlabel="engineering strain [1]", ylabel="strain rate [1/s]", title="Strain rate")
    ax.set_ylim(bottom=min(0.0, float(np.nanmin(c["strain_rate_per_s"][valid]))) if valid.any() else None)
    ax.legend(fontsize=7)

    ax = fig.add_subplot(gs[2, 0])
    ax.plot(c["strain"], c["stress_1wave_MPa"], lw=0.8, label="1-wave (back face)")
    ax.plot(c["strain"], c["stress_2wave_MPa"], lw=0.8, label="2-wave (front face)")
    ax.plot(c["strain"][valid], c["stress_MPa"][valid], "k", lw=2, label="reported, valid part")
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
    fig.suptitle(f"shpb — shot {result.name} (curves for design need independent validation)", fontsize=10)
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
