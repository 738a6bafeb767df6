"""Command line of pqcheck: a thin layer that parses options, calls the API, prints and exits.

Exit codes: one convention for every command, the table ``_common.EXIT_CODES`` (printed by
``pqcheck --help`` and repeated in the README).

Each command lives in its own module of this package and registers itself on :data:`main`.
"""

from __future__ import annotations

# Command modules register themselves on `main` when imported.
from . import analyze as _analyze  # noqa: F401,E402
from . import batch_cmd as _batch_cmd  # noqa: F401
from . import check as _check  # noqa: F401
from . import limits_cmd as _limits_cmd  # noqa: F401
from . import plan_cmd as _plan_cmd  # noqa: F401
from . import report_cmd as _report_cmd  # noqa: F401
from . import site_cmd as _site_cmd  # noqa: F401
from . import survey_cmd as _survey_cmd  # noqa: F401
from . import verify_cmd as _verify_cmd  # noqa: F401
from ._common import main

__all__ = ["main"]
