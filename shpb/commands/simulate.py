"""``shpb simulate SETUP.toml``: a virtual shot (record, shot file, truth table, figure) from a setup file."""

from __future__ import annotations

from pathlib import Path
from typing import Optional

import typer

from .common import Command, Progress, check_out_dir, figure_switch, out_option, quiet_option

SAFETY = ("caution: this tool does not replace the laboratory's safety rules, its gas-gun procedures or its "
          "own limits for bars, strikers and specimens; a virtual shot is not a clearance to fire.")


def register(app: typer.Typer) -> None:
    @app.command("simulate", cls=Command)
    def simulate_cmd(
        setup: Path = typer.Argument(..., metavar="SETUP",
                                     help="Simulation setup file (TOML, see docs/simulation.md)."),
        out: Optional[Path] = out_option("<setup name> beside the setup file"),
        allow_bar_yield: bool = typer.Option(False, "--allow-bar-yield",
                                             help="Simulate even if the planned bar stress reaches the bar's "
                                                  "yield strength."),
        figure: bool = figure_switch(),
        quiet: bool = quiet_option(),
    ):
        """Simulate a shot and record it as a scope would.

        The 1-D wave model of striker, bars and specimen; writes <name>.csv (record),
        for a specimen shot <name>.toml (ready-to-reduce shot file) and <name>_truth.csv (specimen truth),
        and <name>.png."""
        from ..simulate import plan_shot
        from ..virtual import DISPERSION_LABELS, load_simulation, simulate_setup, write_virtual_shot

        sim = load_simulation(setup)
        out_dir = out or setup.parent / sim.name
        check_out_dir(out_dir)
        plan = plan_shot(sim.spec, sim.yield_strength)
        typer.echo("\n".join(format_plan(sim.name, plan)))
        with Progress(f"simulating {sim.name}", quiet=quiet).running():
            shot = simulate_setup(sim, allow_bar_yield=allow_bar_yield)  # refuses a yielding bar before simulating
            written = write_virtual_shot(shot, out_dir, figure=figure)
        grid = shot.result.grid
        typer.echo(f"simulated {grid['steps']} steps of {grid['dt_s'] * 1e9:.1f} ns on {grid['nodes']} nodes; "
                   f"dispersion in the record: {DISPERSION_LABELS[shot.record.info['dispersion']]}")
        clipped = {k: v for k, v in shot.record.info["clipped_samples"].items() if v}
        if clipped:
            typer.echo(f"  warning: samples at the recorder's rails: {clipped}")
        for kind, path in written.items():
            typer.echo(f"  {kind:7s} {path}")
        raise typer.Exit(0)


def format_plan(name, plan) -> list:
    """The planning cautions printed before a virtual shot."""
    lines = [f"planning virtual shot {name}:",
             f"  striker {plan['striker_length_m']:.3g} m at {plan['striker_speed_m_per_s']:.3g} m/s "
             f"(kinetic energy {plan['striker_kinetic_energy_J']:.3g} J, pulse ~{plan['pulse_duration_us']:.0f} us)",
             f"  peak incident bar stress expected {plan['incident_bar_stress_MPa']:.0f} MPa "
             f"(rho c0 v Zs/(Zs+Zb); matched striker rho c0 v/2 = {plan['matched_striker_stress_MPa']:.0f} MPa)"]
    if plan["yield_strength_MPa"] is None:
        lines.append("  caution: no yield strength in the bar set: the bar stress cannot be checked")
    else:
        verdict = "AT OR ABOVE YIELD" if plan["yields"] else (
            "above 90 % of yield" if plan["fraction_of_yield"] > 0.9 else "below yield")
        lines.append(f"  = {100 * plan['fraction_of_yield']:.0f} % of the yield strength "
                     f"{plan['yield_strength_MPa']:.0f} MPa: {verdict}")
    lines.append("  " + SAFETY)
    return lines
