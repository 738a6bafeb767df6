"""Shared pieces of the command line: the click group, error handling and exit codes."""

from __future__ import annotations

import functools
import sys
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

#: Exit code of each verdict. "not applicable" (the case is outside the scope of every table
#: applied, or nothing could be assessed) is never 0: a script must not read it as a pass.
VERDICT_EXIT = {"pass": EXIT_OK, "fail": EXIT_FAIL, "inconclusive": EXIT_INCONCLUSIVE,
                "not applicable": EXIT_NOT_APPLICABLE}


@click.group(context_settings={"help_option_names": ["-h", "--help"], "max_content_width": 100})
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


def handle_errors(func):
    """Turn pqcheck's documented errors into one stderr line and exit code 2."""

    @functools.wraps(func)
    def wrapper(*args, **kwargs):
        try:
            # numpy's RuntimeWarnings (a mean of an empty window, 0/0 in a silent channel)
            # are handled as NaN results and findings; their text never reaches stderr
            with warnings.catch_warnings(), np.errstate(all="ignore"):
                warnings.simplefilter("ignore", RuntimeWarning)
                return func(*args, **kwargs)
        except (InputError, ReportError, PqcheckError) as exc:
            fail_usage(cli_message(exc))
        except MemoryError:
            fail_usage("out of memory; try a shorter capture or a machine with more memory")
        except KeyboardInterrupt:
            click.echo("pqcheck: interrupted", err=True)
            sys.exit(130)

    return wrapper
