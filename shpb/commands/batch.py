"""``shpb batch CAMPAIGN.toml``: reduce every shot of a campaign, in parallel and resumable."""

from __future__ import annotations

import sys
from pathlib import Path
from typing import Optional

import typer

from .common import INTEGER, Command, figure_switch, out_option


class _Progress:
    """``12/40 shots`` on stderr, updated in place on a terminal; one line per shot that is not valid."""

    def __init__(self, stream=None):
        self.stream = stream or sys.stderr
        self.tty = hasattr(self.stream, "isatty") and self.stream.isatty()
        self.width = 0

    def _clear(self):
        if self.tty and self.width:
            self.stream.write("\r" + " " * self.width + "\r")

    def __call__(self, done, total, outcome):
        if outcome.status != "ok":
            self._clear()
            what = "not valid" if outcome.status == "invalid" else f"failed ({outcome.stage})"
            self.stream.write(f"shot {outcome.id}: {what}: {outcome.reason}\n")
        if self.tty:
            text = f"{done}/{total} shots"
            self.stream.write("\r" + text)
            self.width = len(text)
            if done == total:
                self.stream.write("\n")
                self.width = 0
        self.stream.flush()


def register(app: typer.Typer) -> None:
    @app.command("batch", cls=Command)
    def batch_cmd(
        campaign: Path = typer.Argument(..., metavar="CAMPAIGN",
                                        help="Campaign file (TOML) naming the shots table (CSV)."),
        jobs: Optional[int] = typer.Option(None, "--jobs", "-j", min=1, metavar=INTEGER, show_default=False,
                                           help="Local worker processes [default: the number of CPUs]."),
        out: Optional[Path] = out_option("results/<campaign name> beside the campaign file"),
        force: bool = typer.Option(False, "--force", help="Redo every shot, even those that are up to date."),
        scheduler: Optional[str] = typer.Option(None, "--scheduler", metavar="ADDRESS",
                                                help="Address of a running Dask scheduler (e.g. "
                                                     "tcp://10.0.0.5:8786): run the shots there."),
        figure: bool = figure_switch("Write the figures: each shot's sheet and the campaign's overlays "
                                     "(--no-figure is much faster)."),
    ):
        """Reduce every shot of a campaign. Writes shots/<id>/ (curves, summary, figure), campaign_summary.csv,
        failures.csv, repeatability.csv and overlay figures. Exit status: 0 all shots valid, 1 some not valid
        or failed, 2 campaign-level input error, 130 interrupted (a rerun completes what is missing)."""
        from ..campaign import load_campaign, run_campaign

        camp = load_campaign(campaign)
        report = run_campaign(camp, out_dir=out, jobs=jobs, force=force, scheduler=scheduler,
                              figures=figure, progress=_Progress())
        n = len(report.outcomes)
        typer.echo(f"campaign {camp.name}: {len(report.ok)}/{n} shots valid, {len(report.invalid)} not valid, "
                   f"{len(report.failed)} failed ({len(report.skipped)} up to date, kept)")
        typer.echo(f"written to {report.out_dir}")
        from ..reduce import DESIGN_CAUTION

        typer.echo(f"note: {DESIGN_CAUTION}")
        raise typer.Exit(report.exit_code)
