"""Shared pieces of the command line: the click group, error handling and exit codes."""

from __future__ import annotations

import functools
import os
import signal
import sys
import threading
import warnings

import click
import numpy as np

from .. import __version__
from ..errors import InputError, PqcheckError, ReportError
from ._fields import cli_message

EXIT_OK = 0
EXIT_FAIL = 1
EXIT_USAGE = 2
EXIT_INCONCLUSIVE = 3
EXIT_NOT_APPLICABLE = 4
EXIT_INTERNAL = 5
EXIT_SIGINT = 130
EXIT_SIGTERM = 143

EXIT_CODES = (
    (EXIT_OK, "pass: every assessed limit is met (or no limit table was asked for)"),
    (EXIT_FAIL, "fail: a limit is exceeded"),
    (EXIT_USAGE, "bad input or usage; nothing was written"),
    (EXIT_INCONCLUSIVE, "inconclusive: data quality, duration or a deviation forbid a verdict"),
    (EXIT_NOT_APPLICABLE, "not applicable: outside the scope of the tables applied (never 0)"),
    (EXIT_INTERNAL, "internal error (a defect of pqcheck: please report it); nothing written"),
    (EXIT_SIGINT, "interrupted by SIGINT (Ctrl-C); no output, a batch keeps finished rows"),
    (EXIT_SIGTERM, "terminated by SIGTERM; as for SIGINT"),
)
"""The exit codes of every command: the one table that ``pqcheck --help`` prints and the
README repeats (a test compares the two)."""


def _exit_code_epilog() -> str:
    lines = ["\b", "Exit codes (every command):"]
    lines += [f"  {code:<5}{text}" for code, text in EXIT_CODES]
    return "\n".join(lines)

#: Exit code of each verdict. "not applicable" (the case is outside the scope of every table
#: applied, or nothing could be assessed) is never 0: a script must not read it as a pass.
VERDICT_EXIT = {"pass": EXIT_OK, "fail": EXIT_FAIL, "inconclusive": EXIT_INCONCLUSIVE,
                "not applicable": EXIT_NOT_APPLICABLE}


class Terminated(BaseException):
    """SIGTERM arrived (``timeout``, a scheduler, a cancelled CI job): unwinds like Ctrl-C, so
    temporaries are removed and a batch saves its finished rows, then exits with 143."""


def _on_sigterm(signum, frame):
    raise Terminated()


class _Group(click.Group):
    """The top-level group: SIGTERM becomes :class:`Terminated` while a command runs, and
    whatever a command lets escape gets its documented exit code, never a traceback."""

    def invoke(self, ctx):
        old = None
        if threading.current_thread() is threading.main_thread():
            old = signal.signal(signal.SIGTERM, _on_sigterm)
        try:
            return _guarded(super().invoke, ctx)
        finally:
            if old is not None:
                signal.signal(signal.SIGTERM, old)


@click.group(cls=_Group, epilog=_exit_code_epilog(),
             context_settings={"help_option_names": ["-h", "--help"], "max_content_width": 100})
@click.version_option(__version__, prog_name="pqcheck")
def main():
    """pqcheck: harmonic analysis and compliance checks of power-electronics captures.

    Load a capture, analyse it by the IEC 61000-4-7 method, check it against editable limit
    tables and write a report. A pqcheck verdict is an engineering aid, not a certification.
    """


def fail_usage(message: str) -> click.exceptions.Exit:
    """Print an error to stderr and exit with code 2."""
    click.echo(f"pqcheck: error: {message}", err=True)
    raise click.exceptions.Exit(EXIT_USAGE)


def _guarded(func, *args, **kwargs):
    """Run ``func``; map every exception to its exit code (see :data:`EXIT_CODES`)."""
    try:
        return func(*args, **kwargs)
    except (click.exceptions.Exit, click.ClickException, click.Abort):
        raise
    except (InputError, ReportError, PqcheckError) as exc:
        fail_usage(cli_message(exc))
    except MemoryError:
        fail_usage("out of memory; try a shorter capture or a machine with more memory")
    except KeyboardInterrupt:
        click.echo("pqcheck: interrupted (SIGINT)", err=True)
        sys.exit(EXIT_SIGINT)
    except Terminated:
        click.echo("pqcheck: terminated (SIGTERM)", err=True)
        sys.exit(EXIT_SIGTERM)
    except Exception as exc:  # noqa: BLE001 - the last guard: a defect, reported as one
        if os.environ.get("PQCHECK_TRACEBACK"):
            raise
        text = " ".join(str(exc).split())
        text = text if len(text) <= 300 else text[:297] + "..."
        click.echo(f"pqcheck: internal error: {type(exc).__name__}: {text}", err=True)
        click.echo("pqcheck: this is a defect of pqcheck; please report it with the command "
                   "line (set PQCHECK_TRACEBACK=1 to see where it happened); nothing was "
                   "written", err=True)
        sys.exit(EXIT_INTERNAL)


def handle_errors(func):
    """Turn pqcheck's documented errors into one stderr line and exit code 2 (see
    :data:`EXIT_CODES` for the others)."""

    @functools.wraps(func)
    def wrapper(*args, **kwargs):
        # numpy's RuntimeWarnings (a mean of an empty window, 0/0 in a silent channel)
        # are handled as NaN results and findings; their text never reaches stderr
        with warnings.catch_warnings(), np.errstate(all="ignore"):
            warnings.simplefilter("ignore", RuntimeWarning)
            return _guarded(func, *args, **kwargs)

    return wrapper


def refuse_non_capture(path) -> None:
    """Exit 2 with the right command when ``path`` is a test plan, a limit table or a report
    rather than a capture (instead of a reader error about its first line)."""
    low = str(path).lower()
    if low.endswith(".toml"):
        fail_usage(f"{path}: a TOML file is not a capture: for a test plan use `pqcheck report "
                   f"{path} -o report.pdf`; a limit table goes to --limits")
    if low.endswith(".pdf"):
        fail_usage(f"{path}: this is a PDF (a report?), not a capture: check a report with "
                   f"`pqcheck verify {path}`")


# --- options every command spells the same way ---------------------------------------------

FORMATS = ("table", "json")
"""``--format`` choices every command with machine-readable output offers: ``table`` (the
default, for reading) and ``json`` (for scripts)."""

FORMAT_EXTRAS = {
    "analyze": ("csv",),           # the per-order harmonic table, one row per channel and order
    "check": ("markdown",),        # the summary as Markdown, to paste into a ticket or a wiki
    "limits show": ("toml",),      # the table file itself, a starting point for your own
}
"""Further ``--format`` choices of single commands (the README lists them), beyond
:data:`FORMATS`."""


def format_option(command: str, help: str = "Output on stdout."):
    """The ``--format`` option of ``command``: :data:`FORMATS` plus its
    :data:`FORMAT_EXTRAS`, default ``table``."""
    choices = FORMATS + FORMAT_EXTRAS.get(command, ())
    return click.option("--format", "fmt", type=click.Choice(choices), default="table",
                        show_default=True, help=help)


class AliasOption(click.Option):
    """An option with old spellings that still work but are left out of ``--help``
    (``hidden_aliases``), so scripts written for an earlier version keep running."""

    def __init__(self, *args, hidden_aliases=(), **kwargs):
        super().__init__(*args, **kwargs)
        self.hidden_aliases = tuple(hidden_aliases)
        for alias in self.hidden_aliases:
            self.opts.append(alias)

    def get_help_record(self, ctx):
        opts = self.opts
        self.opts = [o for o in opts if o not in self.hidden_aliases]
        try:
            return super().get_help_record(ctx)
        finally:
            self.opts = opts


def output_option(metavar: str, help: str, *, required: bool = False, aliases=(),
                  dest: str = "output"):
    """``-o/--output FILE``: the file a command writes, spelled alike by every command (older
    spellings in ``aliases`` keep working, hidden from ``--help``)."""
    return click.option("-o", "--output", dest, cls=AliasOption, hidden_aliases=aliases,
                        required=required, type=click.Path(dir_okay=False), metavar=metavar,
                        help=help)


def template_target(path, output):
    """Where a ``new`` command writes its template: the PATH argument or ``-o/--output``
    (exit 2 when neither, or two different files, are given)."""
    if path and output and os.path.abspath(path) != os.path.abspath(output):
        fail_usage(f"PATH {path} and -o {output} name two files; give one")
    target = path or output
    if not target:
        fail_usage("give the file to write: PATH or -o/--output PATH")
    return target
