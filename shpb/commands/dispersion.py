"""``shpb dispersion [BARSET]``: phase and group velocity of a bar against frequency.

Thin: parse the bar (from a bar-set file or explicit options), call
:func:`shpb.dispersion.dispersion_table`, print a table, optionally write a
CSV and a PNG figure (:func:`shpb.report.plot_dispersion`; both written atomically). numpy, pandas and
the library modules are imported when the command runs, not when the parser is built.
"""

from __future__ import annotations

from pathlib import Path
from typing import Optional

import typer

from .common import FILE, INTEGER, NUMBER, QUANTITY, BarName, Command, bar_option, bar_value, barset_argument, \
    check_out_file, figure_file_option

#: Rows of the CSV file and points of the figure.
FILE_ROWS = 501


def _bar_from_options(barset, bar, diameter, poisson, wave_speed):
    """Radius [m], Poisson ratio [1], wave speed [m/s]; explicit options win over the bar set."""
    from ..errors import InputError
    from ..units import to_si

    radius = nu = c0 = None
    if barset is not None:
        from ..setup import load_barset

        rig = load_barset(barset)
        b = getattr(rig, bar)
        radius, nu, c0 = 0.5 * b.diameter, b.poisson_ratio, b.wave_speed
    if diameter is not None:
        radius = 0.5 * to_si(diameter, "length", "--diameter")
    if poisson is not None:
        nu = to_si(poisson, "dimensionless", "--poisson")
    if wave_speed is not None:
        c0 = to_si(wave_speed, "velocity", "--wave-speed")
    missing = [name for name, v in (("--diameter", radius), ("--poisson", nu), ("--wave-speed", c0)) if v is None]
    if missing:
        raise InputError(f"missing {', '.join(missing)} (or give a bar set: shpb dispersion BARSET)", "dispersion")
    checks = (("diameter", 2.0 * radius, diameter, "--diameter", "m"),
              ("wave_speed", c0, wave_speed, "--wave-speed", "m/s"))
    for key, value, option_value, option, unit in checks:
        if not value > 0.0:
            where = option if option_value is not None else f"{barset}: {bar}.{key}"
            raise InputError(f"expected a positive value, got {value:g} {unit}", where)
    source = "--poisson" if poisson is not None else f"{barset}: {bar}.poisson_ratio"
    if not 0.0 < nu < 0.5:
        raise InputError(f"expected a Poisson ratio in (0, 0.5), got {nu:g}", source)
    return radius, nu, c0


def _columns(table):
    return {
        "frequency_kHz": table["frequency_Hz"] / 1e3,
        "a_over_wavelength": table["a_over_wavelength"],
        "phase_velocity_m_per_s": table["phase_velocity_m_per_s"],
        "group_velocity_m_per_s": table["group_velocity_m_per_s"],
    }


def _write_csv(path, table):
    import pandas as pd

    from ..io import atomic_write_csv

    atomic_write_csv(path, pd.DataFrame(_columns(table)), float_format="%.10g")


def register(app: typer.Typer) -> None:
    """Add the ``dispersion`` command to ``app``."""

    @app.command("dispersion", cls=Command)
    def dispersion_command(
        barset: Optional[Path] = barset_argument("Bar set (TOML) to take the bar from; or give the bar with "
                                                 "--diameter, --poisson and --wave-speed.", optional=True),
        bar: BarName = bar_option(BarName.incident, "Which bar of the bar set."),
        diameter: Optional[str] = typer.Option(None, "--diameter", metavar=QUANTITY,
                                               help="Bar diameter, e.g. '20 mm'."),
        poisson: Optional[str] = typer.Option(None, "--poisson", metavar=NUMBER,
                                              help="Poisson ratio of the bar, e.g. 0.29."),
        wave_speed: Optional[str] = typer.Option(None, "--wave-speed", metavar=QUANTITY,
                                                 help="Bar wave speed c0, e.g. '5000 m/s' (measured if known)."),
        max_frequency: Optional[str] = typer.Option(
            None, "--max-frequency", metavar=QUANTITY,
            help="Highest frequency, e.g. '300 kHz' [default: where a/wavelength = 1]."),
        rows: int = typer.Option(21, "--rows", metavar=INTEGER, help="Rows of the printed table."),
        csv: Optional[Path] = typer.Option(None, "--csv", metavar=FILE,
                                           help=f"Write a {FILE_ROWS}-row table to this CSV file."),
        figure: Optional[Path] = figure_file_option(),
    ):
        """Phase and group velocity of a bar against frequency.

        Pochhammer-Chree, fundamental longitudinal mode: a printed table, and on request a CSV table and a
        figure."""
        import numpy as np

        from .. import dispersion as _disp
        from ..errors import InputError
        from ..units import to_si

        check_out_file(csv, "--csv")
        check_out_file(figure, "--figure")
        radius, nu, c0 = _bar_from_options(barset, bar_value(bar), diameter, poisson, wave_speed)
        curve = _disp.normalized_curve(nu)
        if max_frequency is None:
            fmax = float(np.interp(1.0, curve.a_over_lambda, curve.frequency)) * c0 / radius
        else:
            fmax = to_si(max_frequency, "frequency", "--max-frequency")
            if not fmax > 0.0:
                raise InputError(f"expected a positive frequency, got {max_frequency!r}", "--max-frequency")
        ftop = curve.max_frequency * c0 / radius
        if fmax > ftop:
            raise InputError(f"{fmax / 1e3:g} kHz is above the tabulated range for this bar "
                             f"({ftop / 1e3:.1f} kHz, a/wavelength = {curve.a_over_lambda[-1]:g})",
                             "--max-frequency")
        if rows < 2:
            raise InputError(f"expected at least 2 rows, got {rows}", "--rows")
        table = _disp.dispersion_table(radius, c0, nu, fmax, n=rows)
        onset = _disp.second_mode_onset(radius, c0, nu)
        typer.echo(f"# bar diameter {2e3 * radius:.3f} mm, wave speed {c0:.1f} m/s, Poisson ratio {nu:g}")
        typer.echo(f"# fundamental longitudinal mode (Pochhammer-Chree); Rayleigh-speed limit "
                   f"{curve.rayleigh_ratio * c0:.1f} m/s; second mode propagates from {onset / 1e3:.1f} kHz")
        cols = _columns(table)
        typer.echo("  ".join(f"{name:>22}" for name in cols))
        for i in range(rows):
            typer.echo("  ".join(f"{cols[name][i]:>22.6g}" for name in cols))
        if csv is not None or figure is not None:
            full = _disp.dispersion_table(radius, c0, nu, fmax, n=FILE_ROWS)
            if csv is not None:
                _write_csv(csv, full)
                typer.echo(f"wrote {csv}")
            if figure is not None:
                title = f"bar d = {2e3 * radius:.2f} mm, c0 = {c0:.0f} m/s, ν = {nu:g}"
                from ..io import atomic_savefig
                from ..report import plot_dispersion

                atomic_savefig(plot_dispersion(full, title, onset), figure, dpi=120)
                typer.echo(f"wrote {figure}")
