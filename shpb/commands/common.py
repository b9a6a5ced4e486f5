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
