"""``shpb batch CAMPAIGN.toml``: reduce every shot of a campaign, in parallel and resumable."""

from __future__ import annotations

from pathlib import Path
from typing import Optional

import typer

from .common import INTEGER, Command, Progress, check_out_dir, figure_switch, out_option, quiet_option


class _ShotProgress:
    """``progress(done, total, outcome)`` for :func:`shpb.campaign.run_campaign`: the count, and one line per shot
    that is not valid or failed."""

    def __init__(self, progress: Progress):
        self.progress = progress

    def __call__(self, done, total, outcome):
        if outcome.stale:
            self.progress.note(f"shot {outcome.id}: stale: {outcome.reason}")
        elif outcome.status != "ok":
            what = "not valid" if outcome.status == "invalid" else f"failed ({outcome.stage})"
            self.progress.note(f"shot {outcome.id}: {what}: {outcome.reason}")
        self.progress.update(done, total)


def _nothing_to_do(campaign: Path, out: Optional[Path], figure: bool):
    """The record of the last complete run into the output folder, when it still holds (standard library only).

    Returns ``(out, state)`` or None. No numpy, pandas or pint is imported
    on this path: a rerun with nothing to do costs about what ``shpb --help``
    costs.
    """
    try:
        import tomllib
    except ImportError:  # Python 3.10
        import tomli as tomllib

    from .. import __version__
    from ..runstate import FolderLock, slug, unchanged

    path = campaign.absolute()
    if out is None:
        try:
            with open(path, "rb") as fh:
                name = tomllib.load(fh).get("name", path.stem)
        except (OSError, tomllib.TOMLDecodeError):
            return None  # the full path says what is wrong
        out = path.parent / "results" / slug(str(name))
    state = unchanged(out, version=__version__, figures=figure, extra_inputs=[path])
    if state is None:
        return None
    if FolderLock(out).holder() is not None:
        return None  # another run is writing the folder: the full path refuses with the holder's name
    return out, state


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
        quiet: bool = quiet_option(),
    ):
        """Reduce every shot of a campaign. Writes shots/<id>/ (curves, summary, figure), campaign_summary.csv,
        failures.csv, repeatability.csv and overlay figures; one run at a time per output folder (a lock); a
        rerun redoes only what changed, moves aside the folders of rows no longer in the table, and keeps the
        last good result of a shot whose record cannot be read (marked stale). Exit status 1: some shot not
        valid, failed or stale."""
        if not force:
            hit = _nothing_to_do(campaign, out, figure)
            if hit is not None:
                for line in hit[1]["lines"]:
                    typer.echo(line)
                raise typer.Exit(int(hit[1]["exit_code"]))
        check_out_dir(out)
        from ..campaign import load_campaign, run_campaign

        camp = load_campaign(campaign)
        check_out_dir(out or camp.default_out)
        progress = Progress("batch", "shots", quiet=quiet)
        try:
            report = run_campaign(camp, out_dir=out, jobs=jobs, force=force, scheduler=scheduler,
                                  figures=figure, progress=_ShotProgress(progress))
        finally:
            progress.close()
        for line in report.lines():
            typer.echo(line)
        raise typer.Exit(report.exit_code)
