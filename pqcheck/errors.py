"""Exception family of pqcheck.

Every error pqcheck raises on purpose derives from :class:`PqcheckError`. Errors about input
(a capture file, a limit table, a plan, a command-line value) also derive from ``ValueError``
and carry the path, line and field they concern, so the command line can print
``file:line: field: problem`` and exit with code 2.

Data-quality problems (clipping, gaps, off-nominal frequency, ...) are *not* exceptions: they are
:class:`pqcheck.findings.Finding` records carried in the results.
"""

from __future__ import annotations

__all__ = [
    "PqcheckError",
    "InputError",
    "CaptureFormatError",
    "LimitTableError",
    "PlanError",
    "AnalysisError",
    "ReportError",
    "PqcheckWarning",
]


class PqcheckError(Exception):
    """Base class of all errors raised by pqcheck."""


class InputError(PqcheckError, ValueError):
    """Bad input that the user can fix.

    Parameters
    ----------
    problem : str
        What is wrong and what to do about it.
    path : str or None
        File the problem was found in.
    line : int or None
        1-based line number in that file.
    field : str or None
        Column, table key or option name concerned.
    """

    def __init__(self, problem: str, *, path=None, line=None, field=None):
        self.problem = problem
        self.path = None if path is None else str(path)
        self.line = line
        self.field = field
        super().__init__(self.location_message())

    def location_message(self) -> str:
        """Return ``file:line: field: problem`` with the parts that are known."""
        parts = []
        if self.path is not None:
            loc = self.path
            if self.line is not None:
                loc += f":{self.line}"
            parts.append(loc)
        elif self.line is not None:
            parts.append(f"line {self.line}")
        if self.field:
            parts.append(str(self.field))
        parts.append(self.problem)
        return ": ".join(parts)


class CaptureFormatError(InputError):
    """A capture file cannot be read or does not hold what pqcheck needs."""


class LimitTableError(InputError):
    """A limit table is malformed or inconsistent."""


class PlanError(InputError):
    """A test plan or site description is malformed or points at missing files."""


class AnalysisError(InputError):
    """The capture is readable but no honest result can be computed from it
    (for example it is shorter than one measurement window)."""


class ReportError(PqcheckError, OSError):
    """A report or export could not be written (for example it exists and ``force`` was not given)."""


class PqcheckWarning(UserWarning):
    """Warning category of pqcheck (the test suite turns it into an error)."""
