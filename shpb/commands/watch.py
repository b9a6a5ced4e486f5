"""``shpb watch FOLDER --campaign CAMPAIGN.toml``: a verdict at the gun, seconds after each record lands."""

from __future__ import annotations

from pathlib import Path
from typing import Optional

import typer

from .common import FILE, NUMBER, TEXT, Command, check_out_dir, figure_switch, out_option


def register(app: typer.Typer) -> None:
    @app.command("watch", cls=Command)
    def watch_cmd(
        folder: Path = typer.Argument(..., metavar="FOLDER", help="The folder the recorder writes records into."),
        campaign: Path = typer.Option(..., "--campaign", metavar=FILE,
                                      help="Campaign file (TOML): shots table, default bar set and defaults. A "
                                           "record is the shot whose row names it, else a shot of its own (named "
                                           "after the file) with the campaign's defaults."),
        out: Optional[Path] = out_option("results/<campaign name> beside the campaign file, as shpb batch"),
        pattern: str = typer.Option("*", "--pattern", metavar=TEXT, show_default=False,
                                    help="Names of the files to watch, e.g. 'shot-*.csv' [default: every record "
                                         "file: delimited text or .npz]."),
        settle: float = typer.Option(0.5, "--settle", metavar=NUMBER, min=0.0,
                                     help="Seconds a record must stay unchanged (and end whole) before it is "
                                          "reduced."),
        once: bool = typer.Option(False, "--once", help="Reduce what is in the folder now, then stop."),
        report: bool = typer.Option(True, "--report/--no-report", help="Write report.html after each update."),
        figure: bool = figure_switch("Draw each shot's figure sheet and the campaign figures."),
    ):
        """Reduce each record as it is written into FOLDER, with the campaign's settings.

        A record is reduced once it is complete (unchanged for --settle seconds and ending whole; never half
        written): its verdict is printed at once, loudly with the reason and what to check on the rig when the
        shot is not valid, then its figure sheet is written, and the campaign table and the HTML report are
        brought up to date. Stop with Ctrl-C; a restart reduces only records that are new or changed (the
        output folder's lock keeps shpb batch out meanwhile). Exit status with --once: 1 when a shot reduced
        is not valid."""
        from ..watch import Watcher

        check_out_dir(out)
        watcher = Watcher(folder, campaign, out=out, pattern=pattern, settle=settle, report=report, figures=figure)
        check_out_dir(watcher.out)
        watcher.run(once=once)
        raise typer.Exit(0 if all(watcher.verdicts.values()) else 1)
