"""The ``shpb`` command as a whole: light start-up, readable help, one spelling per option.

These are behavioural checks of the command line (what a user types and
reads), not of a computation; start-up *times* live in
``benchmarks/bench_startup.py``, never in a test.
"""

from __future__ import annotations

import re
import subprocess
import sys
from pathlib import Path

import pytest
import typer.main

from shpb.cli import app, main

ROOT = Path(__file__).resolve().parents[1]

#: Modules that take a large part of a second to import: none may be loaded to build the parser.
HEAVY = ("numpy", "pandas", "scipy", "matplotlib", "pint", "lmfit", "dask", "pyarrow")

#: Placeholders a user reads for an option's value (shpb.commands.common, plus the few named in place).
KNOWN_METAVARS = {"FILE", "DIR", "QUANTITY", "QUANTITIES", "NUMBER", "INTEGER", "TEXT", "NAME", "COLUMN", "UNIT",
                  "FORM", "ADDRESS", "NAME=VALUE", "KEY=VALUE"}


def _tree():
    """(argv prefix, click command) for ``shpb`` and every command and subcommand under it."""
    out = []

    def walk(prefix, cmd):
        out.append((prefix, cmd))
        for name, sub in getattr(cmd, "commands", {}).items():
            walk(prefix + [name], sub)

    walk([], typer.main.get_command(app))
    return out


TREE = _tree()
COMMANDS = [(p, c) for p, c in TREE if not hasattr(c, "commands")]


def _cases(pairs):
    return [pytest.param(argv, cmd, id=" ".join(["shpb", *argv])) for argv, cmd in pairs]


def _help(argv, capsys):
    assert main([*argv, "--help"]) == 0
    return capsys.readouterr().out


def _squeeze(text):
    """Text without whitespace: line wrapping of the help cannot hide or split a phrase."""
    return re.sub(r"\s+", "", text)


# --------------------------------------------------------------------------- start-up
@pytest.mark.parametrize("code", [
    "import shpb",
    "import shpb.cli",
    # build the parser and use it the ways that only need the parser
    "from shpb.cli import main\nfor argv in (['--help'], ['--version'], ['reduce', '--help'], "
    "['calibrate', 'free-end', '--help'], ['dispersion', '--help'], ['fit', '--help']):\n    main(argv)",
])
def test_parser_imports_nothing_heavy(code):
    # a fresh interpreter, so that nothing imported by this test process counts
    probe = f"{code}\nimport sys\nprint(sorted(m for m in sys.modules if m.split('.')[0] in {HEAVY!r}))"
    p = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, cwd=ROOT)
    assert p.returncode == 0, p.stderr
    assert p.stdout.strip().splitlines()[-1] == "[]"


def test_startup_benchmark_runs():
    # the benchmark's one-round mode, as CI may run it: every process runs, the table is printed
    p = subprocess.run([sys.executable, str(ROOT / "benchmarks" / "bench_startup.py"), "--quick"],
                       capture_output=True, text=True, cwd=ROOT)
    assert p.returncode == 0, p.stderr
    for name in ("python -c pass", "shpb --version", "shpb --help", "shpb reduce --help", "target:"):
        assert name in p.stdout


# --------------------------------------------------------------------------- help text
@pytest.mark.parametrize("argv", [p for p, _ in TREE], ids=lambda p: " ".join(["shpb", *p]))
def test_help_of_every_command_is_plain_text(argv, capsys):
    out = _help(argv, capsys)
    assert out.startswith("Usage: ")
    # no type tags of the parser library (<bool>, <path>, <int>, <a|b>) and no braces around arguments
    assert not re.search(r"<(bool|int|float|str|path|text|file|list\[.*?\]|[\w-]+(\|[\w-]+)+)>", out), out
    assert "{" not in out and "}" not in out, out


@pytest.mark.parametrize("argv, cmd", _cases(TREE))
def test_square_brackets_in_help_are_shown(argv, cmd, capsys):
    # every '[...]' written in a help text (e.g. '[default: ...]', '[striker]', 'length [mm]') reaches the user
    out = _squeeze(_help(argv, capsys))
    texts = [cmd.help or ""] + [getattr(p, "help", None) or "" for p in cmd.params]
    for bracketed in re.findall(r"\[[^\[\]]+\]", " ".join(texts)):
        assert _squeeze(bracketed) in out, bracketed


def test_bracketed_words_survive_in_known_places(capsys):
    # the words that used to vanish when the help renderer read them as markup
    assert "[striker]" in _squeeze(_help(["calibrate", "striker"], capsys))
    assert "[default:<setupname>besidethesetupfile]" in _squeeze(_help(["simulate"], capsys))
    assert "'length[mm]'" in _squeeze(_help(["calibrate", "flight"], capsys))


@pytest.mark.parametrize("argv, cmd", _cases(COMMANDS))
def test_every_value_has_a_readable_placeholder(argv, cmd):
    for p in cmd.params:
        if p.param_type_name == "argument":
            assert p.metavar and p.metavar.isupper(), (argv, p.name)
        elif not getattr(p, "is_flag", False) and p.name != "help":
            known = p.metavar in KNOWN_METAVARS or re.fullmatch(r"[a-z-]+(\|[a-z-]+)+", p.metavar or "")
            assert known, (argv, p.name, p.metavar)


def test_help_lists_the_library_choices(capsys):
    # the choices printed in help are the ones the library accepts (they are owned there)
    from shpb.models import MODELS
    from shpb.schema import STRESS_CHOICES

    fit_help = _squeeze(_help(["fit"], capsys))
    for name in MODELS:
        assert _squeeze(name) in fit_help, name
    reduce_help = _help(["reduce"], capsys)
    for form in STRESS_CHOICES:
        assert form in reduce_help, form


# --------------------------------------------------------------------------- one spelling per option
def test_options_are_spelled_alike_in_every_command():
    for argv, cmd in COMMANDS:
        names = {o for p in cmd.params for o in (*p.opts, *getattr(p, "secondary_opts", ()))}
        # a figure is switched with --figure/--no-figure, or written to --figure FILE; never --plot
        assert not names & {"--plot", "--no-figures", "--figures", "--barset"}, (argv, names)
        for p in cmd.params:
            if "--figure" in p.opts:
                assert (p.is_flag and p.secondary_opts == ["--no-figure"]) or p.metavar == "FILE", argv
            if "--out" in p.opts:
                assert "-o" in p.opts and p.metavar == "DIR", argv
        # the bar set is the first positional argument, BARSET
        arguments = [p for p in cmd.params if p.param_type_name == "argument"]
        barsets = [p for p in arguments if p.name == "barset"]
        assert not barsets or (arguments[0] is barsets[0] and barsets[0].metavar == "BARSET"), argv


@pytest.mark.parametrize("argv, fragment", [
    (["batch", "c.toml", "--no-figures"], "No such option"),     # renamed: --no-figure
    (["dispersion", "--barset", "rig.toml"], "No such option"),  # now the positional BARSET
    (["dispersion", "--bar", "middle"], "--bar"),
    (["calibrate", "free-end", "rig.toml", "r.csv", "--free-end", "middle"], "--free-end"),
])
def test_usage_errors_exit_2_with_one_message(argv, fragment):
    # common practice: a usage error exits with status 2 and the parser's message, never a traceback
    p = subprocess.run([sys.executable, "-m", "shpb.cli", *argv], capture_output=True, text=True, cwd=ROOT)
    assert p.returncode == 2
    assert "Traceback" not in p.stderr and fragment in p.stderr
    assert p.stderr.strip().splitlines()[-1].startswith("Error:")


def test_a_reader_that_leaves_early_does_not_change_the_exit_status(tmp_path):
    # `shpb reduce SHOT | head -1`: the reader closes the pipe, the next write fails with EPIPE (POSIX write(2):
    # the pipe has no reader). The exit status must still say VALID (0, common practice: a status means one
    # thing), and every file must be written; the parser library alone would turn the broken pipe into 1.
    proc = subprocess.Popen([sys.executable, "-m", "shpb.cli", "reduce", "configs/example_shot.toml", "--no-figure",
                             "--no-uncertainty", "--out", str(tmp_path / "r")], cwd=ROOT, stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE)
    proc.stdout.close()  # gone before the first line
    err = proc.stderr.read().decode()
    assert proc.wait(timeout=120) == 0, err
    assert (tmp_path / "r" / "curves.csv").is_file() and (tmp_path / "r" / "summary.json").is_file()
    assert "Traceback" not in err
