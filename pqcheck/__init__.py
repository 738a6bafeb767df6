"""pqcheck: standards-grade harmonic analysis and compliance checks for grid-connected power
electronics (EV chargers and other converter front ends).

The public API follows the data flow: :func:`load_capture` reads a file into a
:class:`Capture`; :func:`analyze` runs the IEC 61000-4-7 analysis and returns an
:class:`AnalysisResult`.
"""

__version__ = "0.1.0"
