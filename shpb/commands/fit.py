"""``shpb fit RESULTS...``: fit a constitutive model to reduced shots."""

from __future__ import annotations

from pathlib import Path
from typing import List, Optional

import typer

from .common import FILE, NAME, NUMBER, QUANTITY, Command, check_out_dir, figure_switch, out_option


def _list(text: Optional[str]):
    """``"1e-3, 1 1/s, 1000"`` -> ["1e-3", "1 1/s", "1000"] (None stays None)."""
    if text is None:
        return None
    items = [t.strip() for t in text.split(",") if t.strip()]
    return items or None


def register(app: typer.Typer) -> None:
    @app.command("fit", cls=Command)
    def fit_cmd(
        results: List[Path] = typer.Argument(
            ..., metavar="RESULTS",
            help="Campaign output folders (shots/<id>/), shot result folders or curves.csv files."),
        model: str = typer.Option("johnson-cook", "--model", "-m", metavar=NAME,
                                  help="johnson-cook, cowper-symonds, zerilli-armstrong-fcc, "
                                       "zerilli-armstrong-bcc or power-law."),
        reference_rate: str = typer.Option("1 1/s", "--reference-rate", metavar=QUANTITY,
                                           help="Reference strain rate of the log-rate term."),
        quasi_static: List[Path] = typer.Option(
            [], "--quasi-static", metavar=FILE, show_default=False,
            help="Reference curve CSV (header '# strain_rate = 0.001 1/s'); repeatable."),
        quasi_static_rate: Optional[str] = typer.Option(None, "--quasi-static-rate", metavar=QUANTITY,
                                                        help="Rate for --quasi-static files without one."),
        quasi_static_temperature: Optional[str] = typer.Option(
            None, "--quasi-static-temperature", metavar=QUANTITY,
            help="Temperature for --quasi-static files without one [default: room temperature]."),
        melt_temperature: Optional[str] = typer.Option(None, "--melt-temperature", metavar=QUANTITY,
                                                       help="Melting temperature, e.g. '1356 K'."),
        room_temperature: str = typer.Option("293.15 K", "--room-temperature", metavar=QUANTITY,
                                             help="Room temperature (Johnson-Cook T_r and the default for "
                                                  "shots without a temperature)."),
        modulus: Optional[str] = typer.Option(None, "--modulus", metavar=QUANTITY,
                                              help="Specimen modulus for shots whose summary has none "
                                                   "[default: fitted from each curve's elastic part]."),
        fix: List[str] = typer.Option([], "--fix", metavar="NAME=VALUE", show_default=False,
                                      help="Hold a parameter, e.g. 'C=0.014' or 'A=90 MPa'; repeatable."),
        vary: List[str] = typer.Option([], "--vary", metavar=NAME, show_default=False,
                                       help="Parameter that must be fitted (fail rather than fix it when the data "
                                            "cannot identify it); repeatable."),
        staged: bool = typer.Option(False, "--staged", help="Johnson-Cook: also the staged route, for comparison."),
        weighting: str = typer.Option("points", "--weighting", metavar=NAME,
                                      help="'points' (equal per grid point), 'curves' (equal per curve) or "
                                           "'uncertainty' (1/u^2 from the curves' u_true_stress_MPa column)."),
        draws: Optional[int] = typer.Option(None, "--draws", metavar=NUMBER,
                                            help="Bootstrap draws for the parameters' uncertainties and correlations "
                                                 "(0: none, then only least-squares standard errors) "
                                                 "[default: 1000]."),
        seed: Optional[int] = typer.Option(None, "--seed", metavar=NUMBER, help="Random seed of the bootstrap."),
        shared_errors: bool = typer.Option(True, "--shared-errors/--no-shared-errors",
                                           help="Draw each bar set's calibration errors, shared by its shots (from "
                                                "their uncertainty budgets), with every bootstrap draw."),
        grid_step: float = typer.Option(0.005, "--grid-step", metavar=NUMBER, help="Plastic-strain grid step."),
        adiabatic: bool = typer.Option(False, "--adiabatic", help="Add the adiabatic temperature rise to shots."),
        density: Optional[str] = typer.Option(None, "--density", metavar=QUANTITY,
                                              help="Specimen density for --adiabatic [default: summary]."),
        specific_heat: Optional[str] = typer.Option(None, "--specific-heat", metavar=QUANTITY,
                                                    help="Specific heat for --adiabatic, e.g. '385 J/(kg*K)'."),
        taylor_quinney: float = typer.Option(0.9, "--taylor-quinney", metavar=NUMBER,
                                             help="Taylor-Quinney coefficient for --adiabatic."),
        rates: Optional[str] = typer.Option(None, "--rates", metavar="QUANTITIES",
                                            help="Tabulate at these rates, comma-separated "
                                                 "[default: the tested ones]."),
        temperatures: Optional[str] = typer.Option(None, "--temperatures", metavar="QUANTITIES",
                                                   help="Tabulate at these temperatures, comma-separated."),
        max_plastic_strain: Optional[float] = typer.Option(None, "--max-plastic-strain", metavar=NUMBER,
                                                           help="Tabulate up to this plastic strain."),
        flow_strain: Optional[float] = typer.Option(None, "--flow-strain", metavar=NUMBER,
                                                    help="Plastic strain of the rate-sensitivity plot."),
        include_invalid: bool = typer.Option(False, "--include-invalid",
                                             help="Also use shots whose summary says not valid."),
        mixed_materials: bool = typer.Option(False, "--mixed-materials", help="Allow curves of different materials."),
        include_incomplete: bool = typer.Option(False, "--include-incomplete",
                                                help="Also use shot folders that are not complete results: a "
                                                     "campaign shot folder without its key file "
                                                     "(inputs.sha256), or one its campaign summary does not list."),
        out: Optional[Path] = out_option("fit-<model>"),
        figure: bool = figure_switch("Write the PNG figure sheet."),
    ):
        """Fit a constitutive model to reduced curves.

        One fit to the valid part of all curves at once; writes the parameters, model curves and a figure."""
        check_out_dir(out or Path(f"fit-{model}"))
        import numpy as np

        from .. import fit as F
        from ..errors import InputError

        curves = F.load_curves(
            results, quasi_static=quasi_static, modulus=modulus, room_temperature=room_temperature,
            quasi_static_rate=quasi_static_rate, quasi_static_temperature=quasi_static_temperature,
            grid_step=grid_step, include_invalid_shots=include_invalid,
            allow_mixed_materials=mixed_materials, include_incomplete=include_incomplete,
        )
        if adiabatic:
            if specific_heat is None:
                raise InputError("--adiabatic needs --specific-heat", "--specific-heat")
            curves = F.with_adiabatic_heating(curves, specific_heat, density=density, beta=taylor_quinney)
        result = F.fit_curves(
            curves, model, reference_rate=reference_rate, room_temperature=room_temperature,
            melt_temperature=melt_temperature, fixed=F.parse_fixed(model, fix), vary=vary,
            weighting=weighting, staged=staged, shared_errors=shared_errors,
            **{k: v for k, v in (("draws", draws), ("seed", seed)) if v is not None},
        )
        eps = None
        if max_plastic_strain is not None:
            eps = np.round(np.arange(0.0, max_plastic_strain + 1e-9, grid_step), 9)
        out_dir = out or Path(f"fit-{result.model}")
        paths = F.write_fit(result, out_dir, strain_rates=_list(rates), temperatures=_list(temperatures),
                            plastic_strain=eps, flow_strain=flow_strain, figure=figure)
        typer.echo(F.fit_report(result))
        typer.echo(f"written to {out_dir}: {', '.join(p.name for p in paths.values())}")
