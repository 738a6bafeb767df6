"""pqcheck: standards-grade harmonic analysis and compliance checks for grid-connected power
electronics (EV chargers and other converter front ends).

The public API follows the data flow: :func:`load_capture` reads a file into a
:class:`Capture`; :func:`analyze` runs the IEC 61000-4-7 analysis and returns an
:class:`AnalysisResult`; :func:`load_table` and :func:`resolve` pick the limits that apply;
:func:`assess` compares the result with them and returns an :class:`Assessment`.
"""

__version__ = "0.1.0"

import importlib as _importlib
import sys as _sys
import types as _types

from .errors import (  # noqa: E402
    AnalysisError,
    CaptureFormatError,
    InputError,
    LimitTableError,
    PlanError,
    PqcheckError,
    PqcheckWarning,
    ReportError,
)

# The computing API is imported on first use (numpy, scipy, pandas take a good part of a
# second), so `import pqcheck` is quick and the command line can take over Ctrl-C before the
# heavy imports run.
_LAZY = {
    "AnalysisResult": "analysis", "analyze": "analysis",
    "Assessment": "assess", "assess": "assess",
    "Capture": "capture", "Channel": "capture", "Provenance": "capture",
    "assign_roles": "capture",
    "Finding": "findings",
    "load_table": "limits", "resolve": "limits",
    "load_capture": "readers",
}


class _Package(_types.ModuleType):
    """The package module: its API names load on first access; a submodule import never
    replaces an API function of the same name (``pqcheck.assess`` is the function)."""

    def __getattr__(self, name):
        where = _LAZY.get(name)
        if where is None:
            raise AttributeError(f"module 'pqcheck' has no attribute {name!r}")
        value = getattr(_importlib.import_module(f".{where}", __name__), name)
        self.__dict__[name] = value
        return value

    def __setattr__(self, name, value):
        if name in _LAZY and isinstance(value, _types.ModuleType):
            return  # the submodule stays in sys.modules; the name keeps the API object
        super().__setattr__(name, value)

    def __dir__(self):
        return sorted(set(super().__dir__()) | set(_LAZY))


_sys.modules[__name__].__class__ = _Package

__all__ = [
    "__version__",
    "AnalysisError",
    "CaptureFormatError",
    "InputError",
    "LimitTableError",
    "PlanError",
    "PqcheckError",
    "PqcheckWarning",
    "ReportError",
    "Finding",
    "Capture",
    "Channel",
    "Provenance",
    "assign_roles",
    "load_capture",
    "analyze",
    "AnalysisResult",
    "load_table",
    "resolve",
    "assess",
    "Assessment",
]
