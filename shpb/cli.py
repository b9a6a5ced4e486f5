"""The ``shpb`` command. Thin: parse, call the library, report.

Each subcommand lives in ``shpb/commands/<name>.py`` and exposes
``register(app)``; this file only assembles them and turns known errors into
one-line messages with the exit statuses of :func:`main` (never a traceback).

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
COMMANDS = ["reduce", "simulate", "plan", "dispersion", "calibrate", "batch", "watch", "report", "fit"]

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
    """Run the CLI and return its exit status; the one place exit statuses are decided.

    ====  =====================================================================
    0     done; every shot reduced is valid
    1     done, but a shot is not valid (reduced with error flags, or failed)
    2     bad input or an unusable output location, found before computing;
          one line ``error: FILE: KEY: what was expected``
    3     internal error (a bug): one line, and the traceback in a log file
          whose path the line gives
    130   interrupted (SIGINT or SIGTERM): one line saying what was finished;
          a rerun of the same command completes it
    ====  =====================================================================

    Usage errors are reported by the command-line parser itself (usage line,
    one message, status 2).
    """
    import signal
    import threading

    from .errors import EXIT_INPUT, EXIT_INTERRUPTED

    old_term = None
    if threading.current_thread() is threading.main_thread():
        # SIGTERM (a scheduler's stop, kill) ends a command as Ctrl-C does: cleanly, with a message
        old_term = signal.signal(signal.SIGTERM, _terminated)
    stdout = sys.stdout
    sys.stdout = _ReaderMayLeave(stdout)  # `shpb reduce ... | head -1`: the exit status still tells the verdict
    try:
        app(args=argv, standalone_mode=True)
    except SystemExit as exc:  # normal end, typer.Exit and usage errors
        code = exc.code
        interrupt = _interrupt_behind(exc)
        if interrupt is not None:  # the parser library turns Ctrl-C into a bare status 130: say what happened
            _say_interrupted(interrupt)
            return EXIT_INTERRUPTED
        return code if isinstance(code, int) else (0 if code is None else 1)
    except ShpbError as exc:
        typer.echo(f"error: {exc}", err=True)
        return EXIT_INPUT
    except KeyboardInterrupt as exc:
        _say_interrupted(exc)
        return EXIT_INTERRUPTED
    except OSError as exc:  # the machine's word (disk full, permission), not a bug: one line
        name = exc.filename if exc.filename is not None else ""
        typer.echo(f"error: {name}{': ' if name else ''}{exc.strerror or exc}", err=True)
        return EXIT_INPUT
    except Exception as exc:  # noqa: BLE001 - a bug: one line here, the traceback in a log file
        return _internal_error(exc, argv)
    finally:
        sys.stdout = stdout
        if old_term is not None:
            signal.signal(signal.SIGTERM, old_term)
    return 0


class _ReaderMayLeave:
    """Standard output that stops writing once its reader has gone (a pipe closed early, ``| head -1``).

    Without it the parser library turns the broken pipe into exit status 1,
    which means "not valid", for a shot that was reduced valid and whose files
    were all written. Output after the reader left is dropped; the work and
    the exit status are as they would have been.
    """

    def __init__(self, stream):
        self._stream = stream
        self.gone = False

    def write(self, text):
        if not self.gone:
            try:
                return self._stream.write(text)
            except BrokenPipeError:
                self._left()
        return len(text)

    def flush(self):
        if not self.gone:
            try:
                self._stream.flush()
            except BrokenPipeError:
                self._left()

    def _left(self):
        self.gone = True
        try:  # the interpreter flushes what is still buffered when it exits: let that go nowhere, quietly
            import os

            devnull = os.open(os.devnull, os.O_WRONLY)
            os.dup2(devnull, self._stream.fileno())
            os.close(devnull)
        except (OSError, ValueError, AttributeError):  # no descriptor (a captured stream): nothing is flushed later
            pass

    def __getattr__(self, name):
        return getattr(self._stream, name)


def _interrupt_behind(exc: BaseException):
    """The KeyboardInterrupt an exit status was made from, if any (followed through causes and contexts)."""
    seen = set()
    while exc is not None and id(exc) not in seen:
        seen.add(id(exc))
        if isinstance(exc, KeyboardInterrupt):
            return exc
        exc = exc.__cause__ or exc.__context__
    return None


def _say_interrupted(exc: BaseException) -> None:
    what = str(exc).strip() or ("interrupted; outputs are written whole (temporary file, then rename), so "
                                "nothing half-written is left; rerun the same command to complete it")
    typer.echo(what if what.startswith("interrupted") else f"interrupted: {what}", err=True)


def _terminated(signum, frame):
    from .errors import Interrupted

    raise Interrupted("")


def _internal_error(exc: BaseException, argv) -> int:
    """Write the traceback to a log file and say so in one line; status 3."""
    import datetime
    import os
    import tempfile
    import traceback

    from . import __version__
    from .errors import EXIT_INTERNAL

    text = (f"shpb {__version__} internal error at {datetime.datetime.now().isoformat(timespec='seconds')}\n"
            f"command: shpb {' '.join(map(str, sys.argv[1:] if argv is None else argv))}\n"
            f"python {sys.version.split()[0]} on {sys.platform}\n\n"
            + "".join(traceback.format_exception(type(exc), exc, exc.__traceback__)))
    folder = os.environ.get("SHPB_LOG_DIR") or tempfile.gettempdir()
    try:
        fd, log = tempfile.mkstemp(prefix="shpb-error-", suffix=".log", dir=folder)
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            fh.write(text)
    except OSError:
        log = None
    first = (str(exc).strip().splitlines() or [""])[0]
    where = f"the traceback is in {log}" if log else "the traceback could not be written to a log file"
    typer.echo(f"internal error (a bug in shpb, please report it): {type(exc).__name__}: {first}; {where}",
               err=True)
    return EXIT_INTERNAL


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
