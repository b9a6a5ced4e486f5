"""``shpb plan BARSET PLAN.toml``: choose striker, specimen and pulse shaper for target rates and strains, and preview them."""

from __future__ import annotations

from pathlib import Path
from typing import List, Optional

import typer

from .common import INTEGER, NAME, NUMBER, QUANTITY, Command, barset_argument, figure_switch, out_option


def register(app: typer.Typer) -> None:
    @app.command("plan", cls=Command)
    def plan_cmd(
        barset: Path = barset_argument("Bar set (TOML): the bars, gauges and striker material."),
        plan_file: Path = typer.Argument(..., metavar="PLAN",
                                         help="Plan file (TOML): material estimates, targets, constraints "
                                              "(docs/planning.md)."),
        out: Optional[Path] = out_option("<plan file name> beside the plan file"),
        rates: Optional[List[str]] = typer.Option(None, "--rate", metavar=QUANTITY,
                                                  help="Target strain rate, e.g. '2500 1/s' (repeat the option "
                                                       "for several); replaces the plan file's strain_rates."),
        strain: Optional[float] = typer.Option(None, "--strain", metavar=NUMBER,
                                               help="Target engineering strain for every rate; replaces the "
                                                    "plan file's."),
        materials: Optional[List[str]] = typer.Option(None, "--material", metavar=NAME,
                                                      help="Plan only this material of the plan file (repeatable)."),
        repeats: Optional[int] = typer.Option(None, "--repeats", metavar=INTEGER,
                                              help="Shots per target in the shots.csv skeleton."),
        preview: bool = typer.Option(True, "--preview/--no-preview",
                                     help="Simulate each design and reduce it as a real shot (a few seconds per "
                                          "target); adjust it if it misses."),
        jobs: int = typer.Option(1, "--jobs", "-j", metavar=INTEGER, help="Targets planned in parallel processes."),
        allow_bar_yield: bool = typer.Option(False, "--allow-bar-yield",
                                             help="Plan even if a striker's impact would reach the bar's yield "
                                                  "strength."),
        figure: bool = figure_switch("Write the planning sheet plan.png."),
    ):
        """Plan a test campaign before firing it.

        For each material and target strain rate and strain: striker length and speed, specimen diameter and
        length, pulse shaper, record length and sample rate, bar stress against yield and striker energy, each
        with its reason; then a virtual shot of the design reduced as a real one (preview), adjusted if it
        misses. Writes plan.json, a shots.csv and campaign.toml skeleton ready for shpb batch, the previews and
        plan.png. Exit status 0 when every target is met and every preview valid, 1 otherwise."""
        from ..errors import InputError
        from ..planning import SAFETY, load_plan, plan_campaign, report_lines, with_targets, write_plan
        from ..setup import load_barset
        from ..units import to_si

        if jobs < 1:
            raise InputError(f"expected at least 1, got {jobs}", "--jobs")
        bs = load_barset(barset)
        plan = load_plan(plan_file)
        plan = with_targets(plan, rates=[to_si(r, "strain_rate", "--rate") for r in rates] if rates else None,
                            strain=strain, materials=materials or None, repeats=repeats)
        out_dir = out or plan_file.parent / plan_file.stem
        typer.echo(f"planning {len(plan.targets)} target(s) of {plan.name} on {bs.name}"
                   + (" with previews" if preview else " (no previews)"))

        def progress(done, total, planned):
            typer.echo("\n".join(report_lines(planned)))

        campaign = plan_campaign(plan, bs, preview=preview, allow_bar_yield=allow_bar_yield, jobs=jobs,
                                 out_dir=out_dir, progress=progress)
        written = write_plan(campaign, out_dir, figure=figure)
        for kind, path in written.items():
            typer.echo(f"  {kind:9s} {path}")
        typer.echo("caution: " + SAFETY)
        missed = [p.name for p in campaign.shots if p.design.notes or (p.preview is not None and not p.met)]
        if missed:
            typer.echo(f"not met: {', '.join(missed)} (see the notes and previews above)")
        raise typer.Exit(1 if missed else 0)
