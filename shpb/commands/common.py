"""What the ``shpb`` commands share: how their arguments look in help, and the options that mean one thing.

One definition each, so that every command spells them alike:

* the bar set is the first positional argument ``BARSET`` of any command
  that takes one (:func:`barset_argument`);
* ``--figure/--no-figure`` switches a command's PNG figure
  (:func:`figure_switch`); a command that writes a figure only on request
  takes its path as ``--figure FILE`` (:func:`figure_file_option`);
* ``--out DIR``/``-o DIR`` is an output folder (:func:`out_option`);
* ``--bar incident|transmitted`` names a bar of the set (:class:`BarName`).

Value placeholders are words a user knows (:data:`FILE`, :data:`DIR`,
:data:`QUANTITY`, ...), and :class:`Command` prints arguments as
``SHOT``, ``[BARSET]``, ``RESULTS...``.

This module is imported whenever the parser is built (``shpb --help``), so it
imports nothing but the parser library: no numpy, pandas, scipy, pint or
matplotlib here or at the top of any command module.
"""

from __future__ import annotations

import enum
from typing import Optional

import typer
from typer.core import TyperCommand, TyperGroup

# --------------------------------------------------------------------------- value placeholders in help
FILE = "FILE"
DIR = "DIR"
#: A number with an optional unit, e.g. '0.1 us' or '20 mm'; a bare number is SI.
QUANTITY = "QUANTITY"
NUMBER = "NUMBER"
INTEGER = "INTEGER"
TEXT = "TEXT"
NAME = "NAME"
#: A record's channel: a column name or a 0-based index.
COLUMN = "COLUMN"


class BarName(str, enum.Enum):
    """A bar of the bar set (the value of ``--bar``)."""

    incident = "incident"
    transmitted = "transmitted"


#: ``incident|transmitted``: the placeholder of ``--bar``.
BAR_CHOICES = "|".join(b.value for b in BarName)


# --------------------------------------------------------------------------- the command groups
def new_app(help: str) -> typer.Typer:
    """A command group (``shpb`` itself, ``shpb calibrate``), all alike.

    Help is plain text (``rich_markup_mode=None``): square brackets in help
    texts, such as ``[striker]`` or ``[default: ...]``, are shown as written,
    not read as markup.
    """
    return typer.Typer(cls=Group, help=help, rich_markup_mode=None, add_completion=False, no_args_is_help=True,
                       pretty_exceptions_enable=False)


class Group(TyperGroup):
    """A command group whose own ``--help`` flag, when not given, costs nothing to parse.

    Some versions of the parser library convert an absent flag's value
    (None) through a validation library that takes ~0.1 s to import, on the
    way to every subcommand (``shpb reduce --help`` passes ``shpb``'s own
    options first). An absent help flag read as False needs no conversion.
    """

    def get_help_option(self, ctx):
        option = super().get_help_option(ctx)
        if option is not None and option.default is None:
            option.default = False
        return option


# --------------------------------------------------------------------------- shared arguments and options
def barset_argument(help: str = "Bar set (TOML).", *, optional: bool = False):
    """The bar set: always the first positional argument ``BARSET`` of a command that takes one."""
    return typer.Argument(None if optional else ..., metavar="BARSET", help=help, show_default=False)


def figure_switch(help: str = "Write the PNG figure."):
    """``--figure/--no-figure``: whether a command writes its figure (on by default)."""
    return typer.Option(True, "--figure/--no-figure", help=help)


def figure_file_option(help: str = "Write a figure to this PNG file."):
    """``--figure FILE``: the figure of a command that writes one only when asked."""
    return typer.Option(None, "--figure", metavar=FILE, help=help, show_default=False)


def out_option(default: str):
    """``--out DIR``/``-o DIR``: the output folder; ``default`` says where it goes without the option."""
    return typer.Option(None, "--out", "-o", metavar=DIR, help=f"Output folder [default: {default}].",
                        show_default=False)


def bar_option(default: Optional[BarName], help: str):
    """``--bar incident|transmitted``."""
    return typer.Option(default, "--bar", metavar=BAR_CHOICES, help=help, show_default=default is not None)


def bar_value(bar: Optional[BarName]) -> Optional[str]:
    """``BarName.incident`` -> ``"incident"`` (None stays None): plain strings go on to the library."""
    return None if bar is None else BarName(bar).value


# --------------------------------------------------------------------------- how a command prints its arguments
def _argument_name(param) -> str:
    """``SHOT``, ``[BARSET]`` (optional), ``RESULTS...`` (several)."""
    name = param.metavar or param.name.upper()
    if param.nargs != 1:
        name += "..."
    return name if param.required else f"[{name}]"


class Command(TyperCommand):
    """A subcommand whose usage line and help name its arguments plainly (``SHOT``, ``[BARSET]``).

    The parser library's own rendering of positional arguments changes
    between its versions (braces, ``<path>`` type tags); arguments are few
    and simple, so they are written here: the metavar (or the upper-case
    name), ``...`` when repeatable, brackets when optional, and the help
    text with ``[required]``. Options keep the library's rendering, with the
    placeholders above as metavars.
    """

    def parse_args(self, ctx, args):
        _plain_coercion(self.get_params(ctx))
        return super().parse_args(ctx, args)

    def collect_usage_pieces(self, ctx):
        pieces = [self.options_metavar] if self.options_metavar else []
        pieces += [_argument_name(p) for p in self.get_params(ctx) if p.param_type_name == "argument"]
        return pieces

    def format_options(self, ctx, formatter):
        args, opts = [], []
        for p in self.get_params(ctx):
            if p.param_type_name == "argument":
                text = getattr(p, "help", None) or ""
                args.append((_argument_name(p), f"{text}  [required]" if p.required else text))
            elif p.param_type_name == "option":
                record = p.get_help_record(ctx)
                if record is not None:
                    opts.append(record)
        for title, rows in (("Arguments", args), ("Options", opts)):
            if rows:
                with formatter.section(title):
                    formatter.write_dl(rows)

    def format_epilog(self, ctx, formatter):
        super().format_epilog(ctx, formatter)
        formatter.write_paragraph()
        formatter.write_text(EXIT_STATUS_HELP)


# --------------------------------------------------------------------------- exit statuses, in every --help
#: The exit statuses of every command (decided in one place, :func:`shpb.cli.main`).
EXIT_STATUS_HELP = ("Exit status: 0 done (every shot valid); 1 done, a shot not valid; 2 bad input or unusable "
                    "output location (checked before computing); 3 internal error (one line, the traceback in a "
                    "log file); 130 interrupted (a rerun completes it).")


def quiet_option():
    """``--quiet``/``-q``: no progress bar or progress lines (results and errors are still printed)."""
    return typer.Option(False, "--quiet", "-q", help="No progress (a live bar on a terminal, a line every few "
                                                      "seconds in a log).")


# --------------------------------------------------------------------------- output locations, checked first
def _nearest_existing(path):
    from pathlib import Path

    p = Path(path).absolute()
    while not p.exists() and p != p.parent:
        p = p.parent
    return p


def _probe_writable(folder, where: str) -> None:
    """Create and remove a temporary entry in ``folder``: the only test that holds for root and read-only mounts."""
    import tempfile

    from ..errors import InputError

    try:
        os_dir = tempfile.mkdtemp(prefix=".shpb-probe-", dir=folder)
    except OSError as exc:
        raise InputError(f"cannot write in {folder} ({exc.strerror or exc})", where) from None
    import os

    os.rmdir(os_dir)


def check_out_dir(path, option: str = "--out") -> None:
    """Refuse an output folder that cannot be written, before any computing (exit status 2).

    The folder itself is not created: its nearest existing parent must be a
    folder in which this process can create entries.
    """
    from ..errors import InputError

    where = f"{option} {path}"
    if path is None:
        return
    from pathlib import Path

    p = Path(path)
    if p.exists() and not p.is_dir():
        raise InputError("is a file, not a folder", where)
    base = _nearest_existing(p)
    if not base.is_dir():
        raise InputError(f"{base} is a file, so no folder can be made under it", where)
    _probe_writable(base, where)


def check_out_file(path, option: str) -> None:
    """Refuse an output file that cannot be written (a folder, or a folder that cannot be written), before computing."""
    from ..errors import InputError

    if path is None:
        return
    from pathlib import Path

    p = Path(path)
    where = f"{option} {path}"
    if p.is_dir():
        raise InputError("is a folder; expected a file name", where)
    base = _nearest_existing(p.parent)
    if not base.is_dir():
        raise InputError(f"{base} is a file, so no folder can be made under it", where)
    _probe_writable(base, where)


# --------------------------------------------------------------------------- progress
class Progress:
    """Progress on stderr: a live bar on a terminal, a line every few seconds in a log, nothing when quiet.

    ``update(done, total)`` counts items (shots); ``note(text)`` prints a line
    above the bar; ``with progress.running(): ...`` keeps a single long task
    alive on screen (elapsed time) from a background thread. The interval of
    log lines is ``interval`` seconds (environment ``SHPB_PROGRESS_INTERVAL``
    overrides it).
    """

    def __init__(self, label: str, unit: str = "", quiet: bool = False, stream=None, interval: float = 5.0):
        import os
        import sys
        import threading
        import time

        self.stream = stream or sys.stderr
        self.label, self.unit, self.quiet = label, unit, quiet
        self.tty = not quiet and hasattr(self.stream, "isatty") and self.stream.isatty()
        self.interval = float(os.environ.get("SHPB_PROGRESS_INTERVAL", interval))
        self._clock = time.monotonic
        self.t0 = self._clock()
        self._last = self.t0
        self.done, self.total = 0, None
        self.width = 0
        self._lock = threading.Lock()
        self._stop = None

    # ---- items
    def _status(self) -> str:
        elapsed = self._clock() - self.t0
        if self.total is None:
            return f"{self.label}: {elapsed:.0f} s"
        text = f"{self.label}: {self.done}/{self.total}{' ' + self.unit if self.unit else ''}"
        if self.done and elapsed > 0:
            rate = self.done / elapsed
            left = (self.total - self.done) / rate
            text += f", {rate * 60:.1f}/min, about {left:.0f} s left" if self.done < self.total else \
                f" in {elapsed:.0f} s"
        return text

    def _bar(self) -> str:
        if self.total:
            n = 24
            k = int(round(n * self.done / self.total))
            return f"[{'#' * k}{'.' * (n - k)}] " + self._status()
        spin = "|/-\\"[int(self._clock() * 4) % 4]
        return f"{spin} " + self._status()

    def _clear(self):
        if self.tty and self.width:
            self.stream.write("\r" + " " * self.width + "\r")
            self.width = 0

    def _draw(self, force_line: bool = False):
        if self.quiet:
            return
        if self.tty:
            text = self._bar()
            pad = max(0, self.width - len(text))
            self.stream.write("\r" + text + " " * pad)
            self.width = len(text)
        elif force_line or self._clock() - self._last >= self.interval:
            self.stream.write(self._status() + "\n")
            self._last = self._clock()
        self.stream.flush()

    def update(self, done: int, total: int) -> None:
        with self._lock:
            self.done, self.total = done, total
            self._draw(force_line=False)

    def note(self, text: str, stream=None) -> None:
        """A line of its own (a shot that is not valid), kept above the bar; printed even when quiet. On
        ``stream`` if given (standard output: a verdict), else on the bar's own stream."""
        out = stream or self.stream
        with self._lock:
            self._clear()
            self.stream.flush()  # (the bar cleared before the text, whichever stream it goes to)
            out.write(text + "\n")
            out.flush()
            self._draw()
            self.stream.flush()

    def echo(self, text: str) -> None:
        """Text on standard output now (a verdict), with the bar cleared first and drawn again after it."""
        import sys

        self.note(text, sys.stdout)

    def close(self) -> None:
        with self._lock:
            if self.tty and self.width:
                self.stream.write("\n")
                self.width = 0
                self.stream.flush()

    # ---- one long task
    def running(self):
        """Context manager: elapsed time on screen while a single long task runs."""
        import contextlib
        import threading

        @contextlib.contextmanager
        def _ctx():
            if self.quiet:
                yield self
                return
            stop = threading.Event()

            def beat():
                step = 0.25 if self.tty else min(self.interval, 1.0)
                while not stop.wait(step):
                    with self._lock:
                        self._draw()

            t = threading.Thread(target=beat, name="shpb-progress", daemon=True)
            t.start()
            try:
                yield self
            finally:
                stop.set()
                t.join()
                with self._lock:
                    self._clear()
                    self.stream.flush()

        return _ctx()


# --------------------------------------------------------------------------- option values without a validation library
def _plain_type(annotation):
    """``str``, ``int``, ``float``, ``bool``, ``Path`` or an enum behind ``Optional[...]``/``List[...]``; else None."""
    import enum
    import pathlib
    import typing

    many = False
    for _ in range(2):
        origin = typing.get_origin(annotation)
        args = [a for a in typing.get_args(annotation) if a is not type(None)]
        if origin is typing.Union and len(args) == 1:
            annotation = args[0]
        elif origin is list and len(args) == 1 and not many:
            annotation, many = args[0], True
    if annotation in (str, int, float, bool, pathlib.Path) or (isinstance(annotation, type)
                                                         and issubclass(annotation, enum.Enum)):
        return annotation, many
    return None


def _plain_coercion(params) -> None:
    """Convert this command's option values with plain Python, not through the parser library's validator.

    Recent versions of the parser library pass every given value (a path, a
    number) through a validation library that takes ~0.1 s to import: as long
    as ``shpb --help`` itself. The values here are simple (text, paths,
    numbers with bounds, a choice of words), so each is converted in a line;
    any other annotation keeps the library's own conversion. Reaches into the
    library's parameter objects through two attributes; where they are not
    there (another version), nothing changes.
    """
    try:
        from typer._coercion import RuntimeParam
        from typer.core import _TyperParameter
    except ImportError:
        return

    class _Plain(RuntimeParam):
        def _coerce_value(self, value, param, ctx):
            import enum

            from typer._click.exceptions import BadParameter

            kind, many = _plain_type(self.annotation)

            def one(v):
                if isinstance(v, kind):
                    return v
                try:
                    if isinstance(kind, type) and issubclass(kind, enum.Enum):
                        return kind(v)
                    out = kind(v)
                except (TypeError, ValueError):
                    if isinstance(kind, type) and issubclass(kind, enum.Enum):
                        raise BadParameter(f"{v!r} is not one of {', '.join(repr(m.value) for m in kind)}.",
                                           ctx=ctx, param=param) from None
                    raise BadParameter(f"{v!r} is not a valid {kind.__name__}.", ctx=ctx, param=param) from None
                info = self.parameter_info
                lo, hi = getattr(info, "min", None), getattr(info, "max", None)
                if kind in (int, float) and ((lo is not None and out < lo) or (hi is not None and out > hi)):
                    raise BadParameter(f"{v} is not in the range {lo if lo is not None else ''}"
                                       f"..{hi if hi is not None else ''}.", ctx=ctx, param=param)
                return out

            if many:
                return [one(v) for v in (value if isinstance(value, (list, tuple)) else [value])]
            return one(value)

    for p in params:
        desc = getattr(p, "type_descriptor", None)
        if not isinstance(p, _TyperParameter) or desc is None or getattr(p, "_runtime_param", 1) is not None:
            continue
        if desc.file_annotation is None and _plain_type(desc.annotation) is not None:
            p._runtime_param = _Plain(parameter_info=desc.parameter_info, annotation=desc.annotation)
