"""The ``shpb`` command. Thin: parse, call the library, report.

Each subcommand lives in ``shpb/commands/<name>.py`` and exposes
``register(app)``; this file only assembles them and turns known errors into
one-line messages with a non-zero exit status (never a traceback for bad
input).

Start-up stays light: building the parser (``shpb --help``, ``--version``,
``shpb COMMAND --help``) imports the parser library and the command modules
only; each command imports the library modules it calls (and so numpy,
pandas, scipy, pint, matplotlib) inside its body, when it runs.
``benchmarks/bench_startup.py`` measures the cost; ``tests/test_cli.py``
checks that no heavy module is imported.
"""

from __future__ import annotations

import importlib
import sys

import typer

from .commands.common import new_app
from .errors import ShpbError

app = new_app("Split-Hopkinson (Kolsky) bar data reduction. SI inside; quantities may carry units ('19.05 mm').")

#: Subcommand modules, in the order they appear in --help.
COMMANDS = ["reduce", "simulate", "plan", "dispersion", "calibrate", "batch", "fit"]

for _name in COMMANDS:
    try:
        _mod = importlib.import_module(f"shpb.commands.{_name}")
    except ModuleNotFoundError as exc:  # a command still being built
        if exc.name != f"shpb.commands.{_name}":
            raise
        continue
    _mod.register(app)


def _print_version(value: bool):
    if value:
        from . import __version__

        typer.echo(__version__)
        raise typer.Exit(0)


@app.callback()
def _root(version: bool = typer.Option(False, "--version", is_eager=True, callback=_print_version,
                                       help="Print the package version and exit.")):
    """Split-Hopkinson (Kolsky) bar data reduction."""


def main(argv=None) -> int:
    """Run the CLI and return its exit status.

    Usage errors are reported by the command-line parser itself (usage line,
    one message, status 2); known input and analysis errors become one line
    ``error: ...`` and status 2 — never a traceback for bad input.
    """
    try:
        app(args=argv, standalone_mode=True)
    except SystemExit as exc:  # normal end, typer.Exit and usage errors
        code = exc.code
        return code if isinstance(code, int) else (0 if code is None else 1)
    except ShpbError as exc:
        typer.echo(f"error: {exc}", err=True)
        return 2
    except FileNotFoundError as exc:
        typer.echo(f"error: {exc.filename}: file not found", err=True)
        return 2
    except KeyboardInterrupt:
        typer.echo("aborted", err=True)
        return 130
    return 0


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
