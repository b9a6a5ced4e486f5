"""``shpb reduce SHOT.toml``: one shot to curves, summary and figure sheet."""

from __future__ import annotations

from pathlib import Path
from typing import Optional

import typer

from .common import Command, Progress, check_out_dir, figure_switch, out_option, quiet_option


def register(app: typer.Typer) -> None:
    @app.command("reduce", cls=Command)
    def reduce_cmd(
        shot: Path = typer.Argument(..., metavar="SHOT", help="Shot setup file (TOML)."),
        out: Optional[Path] = out_option("results/<shot name> beside the shot file"),
        dispersion: Optional[bool] = typer.Option(None, "--dispersion/--no-dispersion",
                                                  help="Pochhammer-Chree correction [default: as the shot file "
                                                       "says; on]."),
        stress: Optional[str] = typer.Option(None, "--stress", metavar="FORM",
                                             help="Reported stress: 1-wave, 2-wave or 3-wave [default: as the "
                                                  "shot file says]."),
        settings: list[str] = typer.Option([], "--set", metavar="KEY=VALUE",
                                           help="Override any [analysis] key of the shot file, e.g. --set "
                                                "window_length='120 us' or --set equilibrium_threshold=0.03; "
                                                "repeatable (keys: docs/setup-files.md)."),
        uncertainty: Optional[bool] = typer.Option(None, "--uncertainty/--no-uncertainty",
                                                   help="Standard and expanded uncertainty of every curve row "
                                                        "and result, and the budget [default: as the shot file "
                                                        "says; on]."),
        figure: bool = figure_switch("Write the PNG figure sheet."),
        quiet: bool = quiet_option(),
    ):
        """Reduce one shot to stress-strain curves and validity checks.

        Bridge volts -> strains at the specimen faces -> stress, strain, strain rate, equilibrium and yield
        checks. Writes curves.csv, summary.json and shot.png."""
        from ..reduce import reduce_file
        from ..schema import find_key, parse_assignment
        from ..setup import load_shot

        changes = {}
        for text in settings:
            key, value = parse_assignment(text)
            changes[key.name] = value
        if dispersion is not None:
            changes["dispersion"] = dispersion
        if stress is not None:
            changes["stress"] = find_key("analysis", "stress").parse(stress, "--stress")
        if uncertainty is not None:
            changes["uncertainty"] = uncertainty

        loaded = load_shot(shot)
        name = loaded.name
        if changes.get("uncertainty") is None and loaded.analysis.uncertainty is None:
            changes["uncertainty"] = True  # on by default here: it costs about 1.5x the process (docs/uncertainty.md)
        out_dir = out or shot.parent / "results" / name
        check_out_dir(out_dir)
        progress = Progress(f"reducing shot {name}", quiet=quiet)

        def announce(first):  # the verdict as soon as it is known; the uncertainty and the files follow
            progress.echo(verdict_text(first))

        with progress.running():
            result = reduce_file(loaded, out_dir, figure=figure, announce=announce, **changes)
        typer.echo(closing_text(result, out_dir))
        raise typer.Exit(0 if result.valid else 1)


def verdict_text(result) -> str:
    """What a lab engineer reads first after a shot: the verdict with what matters, each flag in plain words."""
    from ..plain_words import shot_lines

    return "\n".join(shot_lines(result.name, result.summary, result.curves))


def closing_text(result, out_dir) -> str:
    """What follows the verdict: the uncertainty (when it ran), where the files are, the design caution."""
    from ..plain_words import uncertainty_lines
    from ..reduce import DESIGN_CAUTION

    lines = uncertainty_lines(result.summary)
    lines.append(f"  written to {out_dir}")
    lines.append(f"  note: {DESIGN_CAUTION}")
    return "\n".join(lines)
