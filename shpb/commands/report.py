"""``shpb report RESULTS``: one self-contained HTML file of a campaign or a shot, for colleagues without Python."""

from __future__ import annotations

from pathlib import Path
from typing import List, Optional

import typer

from .common import FILE, Command, check_out_file


def register(app: typer.Typer) -> None:
    @app.command("report", cls=Command)
    def report_cmd(
        results: Path = typer.Argument(..., metavar="RESULTS",
                                       help="A campaign output folder (shpb batch, shpb watch) or a shot result "
                                            "folder (shpb reduce)."),
        fit: List[Path] = typer.Option([], "--fit", metavar="DIR",
                                       help="A fit folder (shpb fit --out) to show: parameters, statistics, fit "
                                            "sheet and model curves; repeatable."),
        out: Optional[Path] = typer.Option(None, "--html", metavar=FILE, show_default=False,
                                           help="The HTML file [default: report.html in RESULTS]."),
        pdf: Optional[Path] = typer.Option(None, "--pdf", metavar=FILE, show_default=False,
                                           help="Also write a PDF (drawn by matplotlib; no browser needed)."),
    ):
        """Write one HTML file that a colleague opens in any browser, offline.

        Everything is inside the file: a sortable, filterable shot table (verdict, flags, rate, flow stress,
        calibration), the overlay figures, each shot's figure sheet, flags in plain words and inputs with their
        SHA-256, fits, provenance and the design caution. The browser's print-to-PDF gives a clean document."""
        from ..html_report import REPORT_FILE, write_report

        html_path = out or results / REPORT_FILE
        check_out_file(html_path, "--html")
        if pdf is not None:
            check_out_file(pdf, "--pdf")
        path = write_report(results, html_path, fit_dirs=fit, pdf=pdf)
        size = path.stat().st_size
        typer.echo(f"report written to {path} ({size / 1e6:.1f} MB)" + (f"; PDF {pdf}" if pdf else ""))
