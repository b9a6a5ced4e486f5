"""The ``shpb`` command. Thin: parse, call the library, report.

Each subcommand lives in ``shpb/commands/<name>.py`` and exposes
``register(app)``; this file only assembles them and turns known errors into
one-line messages with a non-zero exit status (never a traceback for bad
input).
"""

from __future__ import annotations

import importlib
import sys

import typer

from .errors import ShpbError

app = typer.Typer(
    add_completion=False,
    no_args_is_help=True,
    help="Split-Hopkinson (Kolsky) bar data reduction. SI inside; quantities may carry units ('19.05 mm').",
    pretty_exceptions_enable=False,
)

#: Subcommand modules, in the order they appear in --help.
COMMANDS = ["reduce", "simulate", "dispersion", "calibrate", "batch", "fit"]

for _name in COMMANDS:
    try:
        _mod = importlib.import_module(f"shpb.commands.{_name}")
    except ModuleNotFoundError as exc:  # a command still being built
        if exc.name != f"shpb.commands.{_name}":
            raise
        continue
    _mod.register(app)


@app.callback()
def _root(version: bool = typer.Option(False, "--version", help="Print the package version and exit.")):
    if version:
        from . import __version__

        typer.echo(__version__)
        raise typer.Exit(0)


def main(argv=None) -> int:
    """Run the CLI; known input/analysis errors become ``error: ...`` and exit 2."""
    try:
        rv = app(args=argv, standalone_mode=False)
        if isinstance(rv, int):  # click returns typer.Exit's code when not standalone
            return rv
    except ShpbError as exc:
        typer.echo(f"error: {exc}", err=True)
        return 2
    except FileNotFoundError as exc:
        typer.echo(f"error: {exc.filename}: file not found", err=True)
        return 2
    except typer.Exit as exc:
        return exc.exit_code
    except (typer.Abort, KeyboardInterrupt):
        typer.echo("aborted", err=True)
        return 130
    except Exception as exc:  # click usage errors
        import click

        if isinstance(exc, click.exceptions.ClickException):
            exc.show()
            return exc.exit_code
        raise
    return 0


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
