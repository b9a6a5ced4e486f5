"""``shpb calibrate ...``: bar wave speed and channel scales from calibration shots.

Each subcommand reads a record, calls one function of :mod:`shpb.calibrate`,
prints the result and appends an entry (with a figure) to the bar set's
calibration file (:mod:`shpb.calibration_files`), from which ``load_barset``
applies the latest values.
"""

from __future__ import annotations

import enum
from pathlib import Path
from typing import Optional

import typer

from .common import COLUMN, FILE, INTEGER, NAME, QUANTITY, BarName, Command, bar_option, bar_value, \
    barset_argument, figure_switch, new_app

cal_app = new_app("Calibrate a bar set: wave speeds and channel scales.\n\nWave speed from a free-end shot or "
                  "times of flight; channel scales from bars together, the striker or a shunt. Each result is "
                  "appended to the bar set's calibration file.")


class FreeEnd(str, enum.Enum):
    """Which end of the bar is free in a free-end shot (the value of ``--free-end``)."""

    specimen_face = "specimen-face"
    far_end = "far-end"


# --------------------------------------------------------------------------- helpers (parse only)
def _column(text):
    """'CH1' -> 'CH1'; '2' -> 2 (0-based index)."""
    if text is None:
        return None
    return int(text) if text.strip().lstrip("-").isdigit() else text


def _q(text, dimension, option):
    from ..units import to_si

    return None if text is None else to_si(text, dimension, option)


def _load_barset(path: Path):
    """The bar set with its calibration applied when the calibration file exists yet."""
    from ..setup import load_barset, read_toml

    data = read_toml(path)
    exists = "calibration_file" in data and (path.parent / str(data["calibration_file"])).is_file()
    return load_barset(path, apply_calibration=exists)


def _read(record: Path, columns, time_column, time_unit, sample_interval):
    """Read channels of a record: (time [s], dt [s], list of arrays)."""
    from ..errors import InputError
    from ..io import read_record, read_table
    from ..setup import Channel, RecordSpec
    from ..units import to_si

    if record.suffix.lower() != ".npz" and (time_column is None or any(c is None for c in columns)):
        names, _ = read_table(record)
        if time_column is None and sample_interval is None:
            found = [n for n in names if n.strip().lower() in ("time", "t", "time_s", "time [s]")]
            if not found:
                raise InputError("no time column found: give --time-column or --sample-interval", str(record))
            time_column = found[0]
        tcol = time_column
        if isinstance(_column(tcol), int) and 0 <= _column(tcol) < len(names):
            tcol = names[_column(tcol)]
        rest = [n for n in names if n != tcol]
        missing = [i for i, c in enumerate(columns) if c is None]
        if missing and len(rest) != len(columns):
            raise InputError(f"the record has channels {', '.join(rest)}: name the one(s) to use with the column "
                             f"option(s)", str(record))
        # a channel left unnamed takes a column not named for the other one (never the same column twice)
        given = {names[_column(c)] if isinstance(_column(c), int) and 0 <= _column(c) < len(names) else c
                 for c in columns if c is not None}
        free = iter([n for n in rest if n not in given])
        columns = [c if c is not None else next(free) for c in columns]
    if time_column is None and sample_interval is None:
        raise InputError("give --time-column or --sample-interval", str(record))
    if any(c is None for c in columns):
        raise InputError("name the channel(s) with the column option(s) (an .npz record has no order)", str(record))
    chans = [Channel(file=record, column=_column(c) if isinstance(c, str) else c) for c in columns]
    spec = RecordSpec(incident=chans[0], transmitted=chans[-1], time=_column(time_column),
                      time_unit=to_si(f"1 {time_unit}", "time", "--time-unit"),
                      sample_interval=_q(sample_interval, "time", "--sample-interval"))
    rec = read_record(spec)
    arrays = [rec.incident] if len(columns) == 1 else [rec.incident, rec.transmitted]
    return rec.time, rec.dt, arrays


def _strain(volts, barset, bar):
    """Raw bar strain (scale 1), compression positive, through the bar set's bridge."""
    import numpy as np

    from .. import bridge, pulses

    g = barset.incident_gauge if bar == "incident" else barset.transmitted_gauge
    b = barset.incident if bar == "incident" else barset.transmitted
    v = np.asarray(volts, float) - pulses.robust_noise(volts)[0]
    return bridge.bar_strain(v, bridge=g.bridge, gauge_factor=g.gauge_factor, excitation=g.excitation, gain=g.gain,
                             polarity=g.polarity, scale=1.0, poisson_ratio=b.poisson_ratio)


def _save(cal_file: Path, kind, bar, results, apply, inputs, settings, fig, figure: bool):
    """Write the figure and append the entry; return the figure path (or None)."""
    from .. import calibration_files as CF
    from ..io import atomic_savefig

    entry = CF.calibration_entry(kind, results, inputs=inputs, base_dir=cal_file.parent, bar=bar, apply=apply,
                                 settings=settings)
    fig_path = None
    if figure and fig is not None:
        fig_path = cal_file.parent / CF.figure_name(cal_file, kind, bar, entry["date"])
        k = 2
        while fig_path.exists():  # two calibrations within one second
            fig_path = fig_path.with_name(CF.figure_name(cal_file, kind, bar, entry["date"])[:-4] + f"-{k}.png")
            k += 1
        atomic_savefig(fig, fig_path, dpi=110)
        entry["figure"] = fig_path.name
    CF.append_calibration(cal_file, entry)
    return fig_path


def _where(barset_path: Path, calibration_file: Optional[Path]):
    from .. import calibration_files as CF

    return calibration_file or CF.calibration_path(barset_path)


def _report(lines, cal_file, fig_path, apply, barset_path=None):
    from ..setup import read_toml

    if apply:
        lines.append("  applies: " + ", ".join(f"{b}.{k} = {v:.6g}" for b, t in apply.items() for k, v in t.items()))
    else:
        lines.append("  recorded as a check (nothing applied)")
    lines.append(f"  written to {cal_file}" + (f" (figure {fig_path.name})" if fig_path else ""))
    if barset_path is not None and "calibration_file" not in read_toml(barset_path):
        lines.append(f"  note: add  calibration_file = \"{cal_file.name}\"  to {barset_path.name} so reductions "
                     f"use it")
    typer.echo("\n".join(lines))


# options the record-reading subcommands share
_RECORD_HELP = "Record (delimited text or .npz)"
_TIME_HELP = "Time column (name or 0-based index) [default: a column named 'time'/'TIME']."
_TIME_UNIT_HELP = "Unit of the time column."
_DT_HELP = "Sample interval when there is no time column, e.g. '0.1 us'."
_CAL_HELP = "Calibration file to append to [default: the bar set's calibration_file, or <bar set>.calibration.toml]."


# --------------------------------------------------------------------------- subcommands
@cal_app.command("free-end", cls=Command)
def free_end_cmd(
    barset: Path = barset_argument(),
    record: Path = typer.Argument(..., metavar="RECORD", help=f"{_RECORD_HELP} of the free-end shot."),
    bar: BarName = bar_option(BarName.incident, "The bar struck."),
    column: Optional[str] = typer.Option(None, metavar=COLUMN, help="The gauge's channel (name or 0-based index)."),
    time_column: Optional[str] = typer.Option(None, metavar=COLUMN, help=_TIME_HELP),
    time_unit: str = typer.Option("s", metavar="UNIT", help=_TIME_UNIT_HELP),
    sample_interval: Optional[str] = typer.Option(None, metavar=QUANTITY, help=_DT_HELP),
    free_end: FreeEnd = typer.Option(FreeEnd.specimen_face, metavar="|".join(e.value for e in FreeEnd),
                                     help="Which end is free: specimen-face (the gauge distance in the bar set) "
                                          "or far-end."),
    impact_end_free: bool = typer.Option(True, "--impact-end-free/--impact-end-held",
                                         help="Use passes reflected at the struck end too."),
    max_echoes: int = typer.Option(6, min=1, metavar=INTEGER, help="Most passes used after the pulse."),
    max_frequency: Optional[str] = typer.Option(None, metavar=QUANTITY,
                                                help="Top of the phase-slope band, e.g. '15 kHz' "
                                                     "[default: a/wavelength = 0.025]."),
    gauge_position_uncertainty: str = typer.Option("0.5 mm", metavar=QUANTITY,
                                                   help="Standard uncertainty of the gauge position."),
    bar_length_uncertainty: str = typer.Option("1 mm", metavar=QUANTITY,
                                               help="Standard uncertainty of the bar length."),
    calibration_file: Optional[Path] = typer.Option(None, metavar=FILE, help=_CAL_HELP),
    apply: bool = typer.Option(True, "--apply/--check-only", help="Apply the wave speed, or only record the check."),
    figure: bool = figure_switch(),
):
    """Bar wave speed from a free-end shot.

    c0 (and E = rho c0^2) from the pulse and its echoes at one gauge."""
    from .. import calibrate as C
    from .. import calibration_files as CF

    bar, free_end = bar_value(bar), FreeEnd(free_end).value
    bs = _load_barset(barset)
    b = bs.incident if bar == "incident" else bs.transmitted
    g = bs.incident_gauge if bar == "incident" else bs.transmitted_gauge
    d = g.distance if free_end == "specimen-face" else b.length - g.distance
    time, dt, (volts,) = _read(record, [column], time_column, time_unit, sample_interval)
    strain = _strain(volts, bs, bar)
    res = C.free_end_wave_speed(
        strain, dt, d, b.length, b.wave_speed, b.radius, density=b.material.density, poisson_ratio=b.poisson_ratio,
        impact_end_free=impact_end_free, max_echoes=max_echoes,
        max_frequency=_q(max_frequency, "frequency", "--max-frequency"),
        gauge_position_uncertainty=_q(gauge_position_uncertainty, "length", "--gauge-position-uncertainty"),
        bar_length_uncertainty=_q(bar_length_uncertainty, "length", "--bar-length-uncertainty"))
    cal_file = _where(barset, calibration_file)
    handbook = b.material.bar_wave_speed
    results = {
        "wave_speed_m_per_s": res["wave_speed_m_per_s"],
        "wave_speed_uncertainty_m_per_s": res["wave_speed_uncertainty_m_per_s"],
        "uncertainty_components_m_per_s": res["uncertainty_components_m_per_s"],
        "modulus_GPa": res["modulus_Pa"] / 1e9, "modulus_uncertainty_GPa": res["modulus_uncertainty_Pa"] / 1e9,
        "density_kg_per_m3": b.material.density,
        "handbook_wave_speed_m_per_s": handbook,
        "difference_from_handbook_percent": 100 * (res["wave_speed_m_per_s"] / handbook - 1),
        "echoes": [{"pass": e["pass"], "path_m": e["path_m"], "delay_us": e["delay_s"] * 1e6,
                    "wave_speed_m_per_s": e["wave_speed_m_per_s"], "correlation": e["correlation"],
                    "amplitude_ratio": e["amplitude_ratio"]} for e in res["echoes"]],
        "pulse_duration_us": res["pulse_duration_s"] * 1e6, "first_pulse_sign": res["first_pulse_sign"],
        "notes": res["notes"],
    }
    settings = {"free_end": free_end, "gauge_to_free_end_m": d, "bar_length_m": b.length,
                "impact_end_free": impact_end_free, "max_echoes": max_echoes,
                "max_frequency_Hz": res["max_frequency_Hz"], "sample_interval_s": dt,
                "method": "cross-correlation, low-band phase slope; c0 = sum P^2 / sum P D"}
    apply_t = {bar: {"wave_speed_m_per_s": res["wave_speed_m_per_s"]}} if apply else {}
    fig = CF.plot_free_end(time, strain, res) if figure else None
    fig_path = _save(cal_file, "free-end", bar, results, apply_t, [record, barset], settings, fig, figure)
    lines = [f"free-end shot, {bar} bar: c0 = {res['wave_speed_m_per_s']:.1f} +/- "
             f"{res['wave_speed_uncertainty_m_per_s']:.1f} m/s ({len(res['echoes'])} echo(es)); "
             f"E = rho c0^2 = {res['modulus_Pa'] / 1e9:.2f} +/- {res['modulus_uncertainty_Pa'] / 1e9:.2f} GPa",
             f"  handbook sqrt(E/rho) = {handbook:.1f} m/s ({results['difference_from_handbook_percent']:+.2f} %)"]
    lines += [f"  note: {n}" for n in res["notes"]]
    _report(lines, cal_file, fig_path, apply_t, barset)


@cal_app.command("flight", cls=Command)
def flight_cmd(
    barset: Path = barset_argument("Bar set (TOML) whose calibration file receives the result."),
    data: Path = typer.Argument(..., metavar="DATA", help="CSV of path lengths and delays (header units: "
                                                          "'length [mm]', 'delay [us]'; none: SI)."),
    length_column: Optional[str] = typer.Option(None, metavar=NAME, help="Path-length column [default: the column "
                                                                         "whose name starts with 'length' or "
                                                                         "'path']."),
    delay_column: Optional[str] = typer.Option(None, metavar=NAME, help="Delay column [default: the column whose "
                                                                        "name starts with 'delay' or 'time']."),
    bar: Optional[BarName] = bar_option(None, "Apply the speed to this bar [default: none, only record the "
                                              "check]."),
    calibration_file: Optional[Path] = typer.Option(None, metavar=FILE, help=_CAL_HELP),
    figure: bool = figure_switch(),
):
    """Wave speed from times of flight over several paths.

    Regression t = L/c + t0: the wave speed, and a check that no fixed delay hides in the data."""
    from .. import calibrate as C
    from .. import calibration_files as CF

    bar = bar_value(bar)
    lengths, delays = _flight_table(data, length_column, delay_column)
    res = C.time_of_flight_fit(lengths, delays)
    cal_file = _where(barset, calibration_file)
    results = {"wave_speed_m_per_s": res["wave_speed_m_per_s"], "wave_speed_uncertainty_m_per_s": res["wave_speed_uncertainty_m_per_s"],
               "intercept_us": res["intercept_s"] * 1e6, "intercept_se_us": res["intercept_se_s"] * 1e6,
               "intercept_significant": res["intercept_significant"], "n_points": res["n_points"],
               "path_lengths_m": list(lengths), "delays_us": [d * 1e6 for d in delays],
               "residuals_us": [r * 1e6 for r in res["residuals_s"]], "notes": res["notes"]}
    apply_t = {bar: {"wave_speed_m_per_s": res["wave_speed_m_per_s"]}} if bar else {}
    fig = CF.plot_flight(lengths, delays, res) if figure else None
    inputs = [data, barset]
    fig_path = _save(cal_file, "flight", bar, results, apply_t, inputs,
                     {"method": "ordinary least squares t = L/c + t0"}, fig, figure)
    lines = [f"time of flight ({res['n_points']} points): c = {res['wave_speed_m_per_s']:.1f} +/- "
             f"{res['wave_speed_uncertainty_m_per_s']:.1f} m/s, t0 = {res['intercept_s'] * 1e6:.3f} +/- "
             f"{res['intercept_se_s'] * 1e6:.3f} us"]
    lines += [f"  note: {n}" for n in res["notes"]]
    _report(lines, cal_file, fig_path, apply_t, barset)


def _flight_table(path: Path, length_column, delay_column):
    """Lengths [m] and delays [s] from a CSV; units from the header ('length [mm]', 'delay_us')."""
    import re

    from ..errors import InputError
    from ..io import read_table
    from ..units import to_si

    names, table = read_table(path)

    def pick(given, starts, dimension):
        if given is not None:
            if given not in names:
                raise InputError(f"no column {given!r} (columns: {', '.join(names)})", str(path))
            name = given
        else:
            found = [n for n in names if n.strip().lower().startswith(starts)]
            if not found:
                raise InputError(f"no column starting with {' or '.join(starts)} (columns: {', '.join(names)})",
                                 str(path))
            name = found[0]
        m = re.search(r"\[(.+)\]\s*$", name) or re.search(r"_(m|mm|cm|in|s|ms|us|ns)$", name.strip())
        factor = to_si(f"1 {m.group(1)}", dimension, f"{path}: column {name!r}") if m else 1.0
        return table[:, names.index(name)] * factor

    return list(pick(length_column, ("length", "path"), "length")), list(pick(delay_column, ("delay", "time"), "time"))


@cal_app.command("bars-together", cls=Command)
def bars_together_cmd(
    barset: Path = barset_argument(),
    record: Path = typer.Argument(..., metavar="RECORD", help=f"{_RECORD_HELP} of the bars-together shot."),
    incident_column: Optional[str] = typer.Option(None, metavar=COLUMN,
                                                  help="Incident-gauge channel [default: the first]."),
    transmitted_column: Optional[str] = typer.Option(None, metavar=COLUMN,
                                                     help="Transmitted-gauge channel [default: the second]."),
    time_column: Optional[str] = typer.Option(None, metavar=COLUMN, help=_TIME_HELP),
    time_unit: str = typer.Option("s", metavar="UNIT", help=_TIME_UNIT_HELP),
    sample_interval: Optional[str] = typer.Option(None, metavar=QUANTITY, help=_DT_HELP),
    max_frequency: Optional[str] = typer.Option(None, metavar=QUANTITY,
                                                help="Top of the phase-slope band, e.g. '15 kHz'."),
    calibration_file: Optional[Path] = typer.Option(None, metavar=FILE, help=_CAL_HELP),
    apply: bool = typer.Option(True, "--apply/--check-only", help="Apply the transmitted channel's relative scale, "
                                                                  "or only record the check."),
    figure: bool = figure_switch(),
):
    """Bars together: relative channel scale and contact check.

    A shot with no specimen: transmitted/incident ratio, residual reflected wave, gauge-to-gauge speed."""
    from .. import calibrate as C
    from .. import calibration_files as CF

    bs = _load_barset(barset)
    cal_file = _where(barset, calibration_file)
    time, dt, (vi, vt) = _read(record, [incident_column, transmitted_column], time_column, time_unit, sample_interval)
    si, st = _strain(vi, bs, "incident"), _strain(vt, bs, "transmitted")
    bi, bt = bs.incident, bs.transmitted
    expected, expected_r = C.junction_ratios(bi.impedance, bt.impedance, bi.modulus * bi.area, bt.modulus * bt.area)
    res = C.bars_together(si, st, dt, bs.incident_gauge.distance, bs.transmitted_gauge.distance,
                          expected_ratio=expected, expected_reflected_ratio=expected_r,
                          incident_wave_speed=bi.wave_speed, transmitted_wave_speed=bt.wave_speed,
                          bar_radius=bi.radius, transmitted_bar_length=bt.length,
                          max_frequency=_q(max_frequency, "frequency", "--max-frequency"))
    results = {k: res[k] for k in ("transmitted_to_incident_ratio", "expected_ratio",
                                   "transmitted_scale_relative_to_incident", "reflected_to_incident_ratio",
                                   "reflected_peak_fraction", "expected_reflected_ratio", "path_m",
                                   "wave_speed_m_per_s", "wave_speed_uncertainty_m_per_s", "correlation", "notes")}
    results["transit_us"] = res["transit_time_s"] * 1e6
    apply_t = ({"transmitted": {"scale_relative_to_incident": res["transmitted_scale_relative_to_incident"]}}
               if apply else {})
    fig = CF.plot_bars_together(time, si, st, res) if figure else None
    fig_path = _save(cal_file, "bars-together", None, results, apply_t, [record, barset],
                     {"max_frequency_Hz": res["max_frequency_Hz"], "sample_interval_s": dt,
                      "ratio": "time integrals of the pulses (zero-frequency amplitudes), raw strain (scale 1)"},
                     fig, figure)
    lines = [f"bars together: transmitted/incident = {res['transmitted_to_incident_ratio']:.4f} (expected "
             f"{res['expected_ratio']:.4f}) -> transmitted scale relative to incident "
             f"{res['transmitted_scale_relative_to_incident']:.4f}",
             f"  residual reflected wave {100 * res['reflected_peak_fraction']:.2f} % of the incident peak",
             f"  gauge to gauge: {res['path_m']:.4f} m in {res['transit_time_s'] * 1e6:.3f} us -> c = "
             f"{res['wave_speed_m_per_s']:.1f} +/- {res['wave_speed_uncertainty_m_per_s']:.1f} m/s"]
    lines += [f"  note: {n}" for n in res["notes"]]
    _report(lines, cal_file, fig_path, apply_t, barset)


@cal_app.command("striker", cls=Command)
def striker_cmd(
    barset: Path = barset_argument("Bar set (TOML) with a [striker] table."),
    record: Path = typer.Argument(..., metavar="RECORD",
                                  help=f"{_RECORD_HELP} with the incident pulse (any shot with a clean plateau)."),
    speed: str = typer.Option(..., metavar=QUANTITY, help="Measured striker speed, e.g. '12.3 m/s'."),
    speed_uncertainty: Optional[str] = typer.Option(None, metavar=QUANTITY,
                                                    help="Standard uncertainty of the speed, e.g. '0.1 m/s'."),
    column: Optional[str] = typer.Option(None, metavar=COLUMN, help="Incident-gauge channel."),
    time_column: Optional[str] = typer.Option(None, metavar=COLUMN, help=_TIME_HELP),
    time_unit: str = typer.Option("s", metavar="UNIT", help=_TIME_UNIT_HELP),
    sample_interval: Optional[str] = typer.Option(None, metavar=QUANTITY, help=_DT_HELP),
    calibration_file: Optional[Path] = typer.Option(None, metavar=FILE, help=_CAL_HELP),
    apply: bool = typer.Option(False, "--apply/--check-only", help="Apply the incident scale, or only record the "
                                                                   "check."),
    figure: bool = figure_switch(),
):
    """Striker check of the incident channel's scale.

    The measured incident plateau against (v / c_b) Z_s / (Z_s + Z_b)."""
    from .. import calibrate as C
    from .. import calibration_files as CF
    from ..errors import InputError

    bs = _load_barset(barset)
    if bs.striker is None:
        raise InputError("the bar set has no [striker] table (length, diameter, material)", str(barset))
    v = _q(speed, "velocity", "--speed")
    time, dt, (volts,) = _read(record, [column], time_column, time_unit, sample_interval)
    strain = _strain(volts, bs, "incident")
    s, b = bs.striker, bs.incident
    zs = s.material.density * s.material.bar_wave_speed * s.area
    res = C.striker_check(strain, dt, v, bar_wave_speed=b.wave_speed, bar_modulus=b.modulus,
                          striker_impedance=zs, bar_impedance=b.impedance,
                          bar_yield_strength=b.material.yield_strength, striker_length=s.length,
                          striker_wave_speed=s.material.bar_wave_speed,
                          speed_uncertainty=_q(speed_uncertainty, "velocity", "--speed-uncertainty"))
    results = {"striker_speed_m_per_s": v, "expected_strain": res["expected_strain"],
               "measured_strain": res["measured_strain"], "plateau_std": res["plateau_std"],
               "scale": res["scale"], "scale_uncertainty": res.get("scale_uncertainty"),
               "discrepancy_percent": 100 * res["discrepancy"],
               "expected_bar_stress_MPa": res["expected_bar_stress_Pa"] / 1e6,
               "measured_bar_stress_MPa": res["measured_bar_stress_Pa"] / 1e6,
               "expected_duration_us": res["expected_duration_s"] * 1e6,
               "measured_duration_us": res["measured_duration_s"] * 1e6, "cautions": res["cautions"]}
    apply_t = {"incident": {"scale": res["scale"]}} if apply else {}
    fig = CF.plot_striker(time, strain, res) if figure else None
    cal_file = _where(barset, calibration_file)
    fig_path = _save(cal_file, "striker", "incident", results, apply_t, [record, barset],
                     {"bar_wave_speed_m_per_s": b.wave_speed, "striker_impedance_kg_per_s": zs,
                      "bar_impedance_kg_per_s": b.impedance, "plateau": "central half of the span above half peak"},
                     fig, figure)
    lines = [f"striker check at {v:.2f} m/s: expected {res['expected_strain'] * 1e6:.1f} ue, measured "
             f"{res['measured_strain'] * 1e6:.1f} ue ({100 * res['discrepancy']:+.2f} %) -> incident scale "
             f"{res['scale']:.4f}",
             f"  pulse {res['measured_duration_s'] * 1e6:.1f} us (striker 2L/c: {res['expected_duration_s'] * 1e6:.1f} us)"]
    lines += [f"  caution: {c}" for c in res["cautions"]]
    _report(lines, cal_file, fig_path, apply_t, barset)


@cal_app.command("shunt", cls=Command)
def shunt_cmd(
    barset: Path = barset_argument(),
    record: Path = typer.Argument(..., metavar="RECORD",
                                  help=f"{_RECORD_HELP} of the channel with the shunt switched once."),
    bar: BarName = bar_option(BarName.incident, "Whose gauge channel."),
    shunt: str = typer.Option(..., metavar=QUANTITY, help="Shunt resistance, e.g. '174.65 kohm'."),
    gauge_resistance: str = typer.Option("350 ohm", metavar=QUANTITY, help="Gauge (arm) resistance."),
    column: Optional[str] = typer.Option(None, metavar=COLUMN, help="The channel."),
    time_column: Optional[str] = typer.Option(None, metavar=COLUMN, help=_TIME_HELP),
    time_unit: str = typer.Option("s", metavar="UNIT", help=_TIME_UNIT_HELP),
    sample_interval: Optional[str] = typer.Option(None, metavar=QUANTITY, help=_DT_HELP),
    calibration_file: Optional[Path] = typer.Option(None, metavar=FILE, help=_CAL_HELP),
    apply: bool = typer.Option(True, "--apply/--check-only", help="Apply the channel scale, or only record it."),
    figure: bool = figure_switch(),
):
    """Channel scale from a shunt step.

    The recorded step against the strain the shunt simulates, -Rg / (GF (Rg + Rs))."""
    from .. import calibrate as C
    from .. import calibration_files as CF

    bar = bar_value(bar)
    bs = _load_barset(barset)
    g = bs.incident_gauge if bar == "incident" else bs.transmitted_gauge
    rs, rg = _q(shunt, "resistance", "--shunt"), _q(gauge_resistance, "resistance", "--gauge-resistance")
    time, dt, (volts,) = _read(record, [column], time_column, time_unit, sample_interval)
    step = C.shunt_step(volts)
    res = {**step, **C.shunt_channel_scale(step["height_V"], rg, rs, g.gauge_factor, g.excitation, g.gain)}
    results = {"step_V": step["height_V"], "noise_V": step["noise_V"], "expected_strain": res["expected_strain"],
               "measured_strain": res["measured_strain"], "scale": res["scale"],
               "shunt_resistance_ohm": rs, "gauge_resistance_ohm": rg}
    apply_t = {bar: {"scale": res["scale"]}} if apply else {}
    fig = CF.plot_shunt(time, volts, res) if figure else None
    cal_file = _where(barset, calibration_file)
    fig_path = _save(cal_file, "shunt", bar, results, apply_t, [record, barset],
                     {"gauge_factor": g.gauge_factor, "excitation_V": g.excitation, "gain": g.gain,
                      "relation": "single arm (quarter bridge), exact"}, fig, figure)
    lines = [f"shunt {rs / 1e3:.5g} kohm on {rg:.5g} ohm, {bar} channel: step {step['height_V'] * 1e3:.4g} mV reads "
             f"{res['measured_strain'] * 1e6:.1f} ue, shunt simulates {res['expected_strain'] * 1e6:.1f} ue -> scale "
             f"{res['scale']:.4f}"]
    _report(lines, cal_file, fig_path, apply_t, barset)


@cal_app.command("show", cls=Command)
def show_cmd(barset: Path = barset_argument()):
    """The calibration a reduction would use with this bar set."""
    from ..setup import load_barset

    bs = load_barset(barset)
    cal = bs.calibration
    if "file" not in cal:
        typer.echo(f"{barset}: no calibration_file: handbook wave speeds and the gauge scales written in the bar set")
        return
    lines = [f"{barset}: calibration file {cal['file']}"]
    for name, a in cal.get("applied", {}).items():
        lines.append(f"  {name} = {a['value']:.6g}  ({a['kind']}, {a['date']})")
    for name, o in cal.get("overridden", {}).items():
        lines.append(f"  {name}: calibration {o['value']:.6g} overridden by the bar set's {o['used']:.6g}")
    for label, b in (("incident", bs.incident), ("transmitted", bs.transmitted)):
        lines.append(f"  {label} bar wave speed in use {b.wave_speed:.1f} m/s")
    typer.echo("\n".join(lines))


def register(app: typer.Typer) -> None:
    """Add the ``calibrate`` sub-app to the ``shpb`` command."""
    app.add_typer(cal_app, name="calibrate")
