"""pqcheck: standards-grade harmonic analysis and compliance checks for grid-connected power
electronics (EV chargers and other converter front ends).

The public API follows the data flow: :func:`load_capture` reads a file into a
:class:`Capture`; :func:`analyze` runs the IEC 61000-4-7 analysis and returns an
:class:`AnalysisResult`; :func:`load_table` and :func:`resolve` pick the limits that apply;
:func:`assess` compares the result with them and returns an :class:`Assessment`.
"""

__version__ = "0.1.0"

from .analysis import AnalysisResult, analyze  # noqa: E402
from .assess import Assessment, assess  # noqa: E402
from .capture import Capture, Channel, Provenance, assign_roles  # noqa: E402
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
from .findings import Finding  # noqa: E402
from .limits import load_table, resolve  # noqa: E402
from .readers import load_capture  # noqa: E402

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
