"""Command line of pqcheck: a thin layer that parses options, calls the API, prints and exits.

Exit codes: one convention for every command, the table ``_common.EXIT_CODES`` (printed by
``pqcheck --help`` and repeated in the README).

Each command lives in its own module of this package and registers itself on :data:`main`.
"""

from __future__ import annotations

import sys as _sys


def _interrupted_hook(exc_type, exc, tb, _previous=_sys.excepthook):
    """Ctrl-C while the command line is still starting (importing numpy, ...): one line, no
    traceback; Python then exits as interrupted (the shell shows 130)."""
    if issubclass(exc_type, KeyboardInterrupt):
        _sys.stderr.write("pqcheck: interrupted (SIGINT)\n")
        return
    _previous(exc_type, exc, tb)


if _sys.excepthook is _sys.__excepthook__:
    _sys.excepthook = _interrupted_hook

# Command modules register themselves on `main` when imported.
from . import analyze as _analyze  # noqa: F401,E402
from . import batch_cmd as _batch_cmd  # noqa: F401,E402
from . import check as _check  # noqa: F401,E402
from . import limits_cmd as _limits_cmd  # noqa: F401,E402
from . import plan_cmd as _plan_cmd  # noqa: F401,E402
from . import report_cmd as _report_cmd  # noqa: F401,E402
from . import site_cmd as _site_cmd  # noqa: F401,E402
from . import survey_cmd as _survey_cmd  # noqa: F401,E402
from . import verify_cmd as _verify_cmd  # noqa: F401,E402
from ._common import main  # noqa: E402

__all__ = ["main"]
