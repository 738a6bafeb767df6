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

if "numpy" not in _sys.modules:
    # The analysis asks BLAS only for tiny products (fits of a few points, 6 x 6 channel
    # maps); OpenBLAS' own threads then spin after each call and take the cores the
    # analysis threads need (measured: 2 % of the CPU of a long capture). A setting the user
    # made wins.
    import os as _os

    _os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

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

__all__ = ["main", "run"]


def run() -> None:
    """The ``pqcheck`` console command: :data:`main`, then a quick exit.

    Tearing the interpreter down after a command (freeing every module of numba, LLVM,
    pandas and scipy one by one) takes about 0.4 s, longer than many commands. Once the
    command has finished, everything Python's own exit does that matters is done here, in
    its order: wait for running threads, run the exit handlers (temporary files removed,
    worker processes joined), flush stdout and stderr; then the process ends with the
    command's exit code, without the teardown. Nothing is written after this point, and
    every output file was already closed (and renamed into place) by the command."""
    import os
    import threading

    from .._process import keep_freed_memory

    keep_freed_memory()
    try:
        main()
        code = 0
    except SystemExit as exc:
        code = exc.code
    if code is None:
        code = 0
    elif not isinstance(code, int):
        _sys.stderr.write(f"{code}\n")
        code = 1
    shutdown = getattr(threading, "_shutdown", None)
    if shutdown is not None:  # joins non-daemon threads, as at a normal exit
        shutdown()
    import atexit

    atexit._run_exitfuncs()
    for stream in (_sys.stdout, _sys.stderr):
        try:
            stream.flush()
        except (OSError, ValueError):  # a closed pipe: as Python does, the exit says so
            code = code or 120
    os._exit(code)
