"""Option names mean one thing across the whole command tree.

The tests walk click's command tree of ``pqcheck`` (the group and every subcommand) and check
the conventions the README states: an option name has one meaning, type and value name
everywhere; every command that writes a file names it with ``-o/--output``; every command
with machine-readable output offers the same ``--format`` choices (plus the documented extras
of single commands). Old spellings kept for earlier scripts are hidden from ``--help`` and
left out of the comparison.
"""

from __future__ import annotations

import click
import pytest
from click.testing import CliRunner

from pqcheck.cli import main
from pqcheck.cli._common import FORMAT_EXTRAS, FORMATS, AliasOption

# value names that stand for the same kind of value (a file to read or write)
_FAMILIES = {"FILE": "file", "PATH": "file", "PDF": "file", "LOG": "file", "DIR": "folder"}

# commands without --format, and why (their output is a file, or a message for a person)
_NO_FORMAT = {
    "aggregate": "writes an interval log (-o); prints one line",
    "inspect": "evidence for a person deciding the options to give",
    "limits validate": "problems as file:line: field: problem, and the exit code",
    "plan new": "writes a template (-o)",
    "report": "writes the PDF (-o), --json and --csv; prints one line",
    "site new": "writes a template (-o)",
}


def _commands(cmd=main, path=()):
    if isinstance(cmd, click.Group):
        for name, sub in sorted(cmd.commands.items()):
            yield from _commands(sub, path + (name,))
    else:
        yield " ".join(path), cmd


def _visible(opt: click.Option) -> list:
    """The option's names as ``--help`` shows them (hidden aliases left out)."""
    hidden = getattr(opt, "hidden_aliases", ()) if isinstance(opt, AliasOption) else ()
    return [o for o in opt.opts + opt.secondary_opts if o not in hidden]


def _options(cmd):
    return [p for p in cmd.params if isinstance(p, click.Option) and not p.hidden
            and not p.is_eager]


def _shape(opt: click.Option) -> tuple:
    """What an option name must mean the same everywhere: destination, type (with its
    choices and whether a file or a folder), flag or value, repeatable, value-name family."""
    t = opt.type
    kind = type(t).__name__
    extra: tuple = ()
    if isinstance(t, click.Choice):
        # --format: the common set (its documented extras are checked below)
        extra = tuple(t.choices)[:len(FORMATS)] if opt.name == "fmt" else tuple(t.choices)
    elif isinstance(t, click.Path):
        extra = (t.file_okay, t.dir_okay)
    family = _FAMILIES.get(opt.metavar or "", opt.metavar)
    return (opt.name, kind, extra, bool(opt.is_flag), bool(opt.multiple), family)


COMMANDS = dict(_commands())


def test_the_tree_is_walked():
    # every command the README's "Everyday use" runs is in the tree (the walk can fail)
    for name in ("analyze", "inspect", "check", "report", "batch", "verify", "aggregate",
                 "limits list", "limits show", "limits validate", "plan new", "site run",
                 "site new"):
        assert name in COMMANDS, name


def test_same_option_name_same_meaning():
    seen: dict = {}
    clashes = []
    for cname, cmd in COMMANDS.items():
        for opt in _options(cmd):
            for name in _visible(opt):
                shape = _shape(opt)
                first = seen.setdefault(name, (cname, shape))
                if first[1] != shape:
                    clashes.append(f"{name}: {first[0]} {first[1]} vs {cname} {shape}")
    assert not clashes, "\n".join(clashes)


def test_short_options_stand_for_one_long_option():
    longs: dict = {}
    for cname, cmd in COMMANDS.items():
        for opt in _options(cmd):
            names = _visible(opt)
            for short in (n for n in names if not n.startswith("--")):
                long_ = tuple(n for n in names if n.startswith("--"))
                assert longs.setdefault(short, long_) == long_, (cname, short, long_)


def test_every_command_that_writes_a_file_takes_o_output():
    writers = []
    for cname, cmd in COMMANDS.items():
        names = {n for opt in _options(cmd) for n in _visible(opt)}
        assert "--out" not in names, f"{cname}: --out is spelt -o/--output"
        if "--force" in names:  # --force replaces what the command writes
            writers.append(cname)
            opt = next(o for o in _options(cmd) if "--output" in _visible(o))
            assert _visible(opt)[:2] == ["-o", "--output"], cname
    assert {"report", "batch", "aggregate", "site run", "plan new", "site new"} <= set(writers)


def test_format_choices_are_one_set():
    for cname, cmd in COMMANDS.items():
        fmt = [o for o in _options(cmd) if "--format" in _visible(o)]
        if not fmt:
            assert cname in _NO_FORMAT, f"{cname} prints results but has no --format"
            continue
        assert cname not in _NO_FORMAT, cname
        (opt,) = fmt
        assert tuple(opt.type.choices) == FORMATS + FORMAT_EXTRAS.get(cname, ()), cname
        assert opt.default == "table", cname
    assert set(FORMAT_EXTRAS) <= set(COMMANDS)


def test_readme_documents_the_extra_formats():
    from pathlib import Path

    readme = (Path(__file__).resolve().parents[1] / "README.md").read_text(encoding="utf-8")
    for cname, extras in FORMAT_EXTRAS.items():
        for x in extras:
            assert f"`{cname}` also `{x}`" in readme, (cname, x)


def test_old_spellings_still_work_hidden(tmp_path):
    # -o/--output replaced --out; the old spelling still parses, and --help does not show it
    r = CliRunner().invoke(main, ["aggregate", "--help"])
    assert r.exit_code == 0 and "--output" in r.output and "--out " not in r.output
    r = CliRunner().invoke(main, ["batch", "--help"])
    assert "--output" in r.output and "--out " not in r.output and "--csv" not in r.output
    ctx = COMMANDS["batch"].make_context("batch", ["x", "--limits", "ieee519-2022", "--out",
                                                   str(tmp_path / "r.parquet")])
    assert ctx.params["output"] == str(tmp_path / "r.parquet")


@pytest.mark.parametrize("args", [["plan", "new"], ["site", "new"]])
def test_template_commands_take_o_or_path(tmp_path, args):
    a, b = tmp_path / "a.toml", tmp_path / "b.toml"
    r = CliRunner().invoke(main, args + ["-o", str(a)])
    assert r.exit_code == 0, r.output
    assert a.is_file()
    r = CliRunner().invoke(main, args + [str(b)])
    assert r.exit_code == 0 and b.is_file()
    r = CliRunner().invoke(main, args + [str(tmp_path / "c.toml"), "-o", str(a), "--force"])
    assert r.exit_code == 2 and "name two files" in r.output
    r = CliRunner().invoke(main, args)
    assert r.exit_code == 2 and "give the file to write" in r.output
