"""From a capture file to an analysis result, with the cache: what the commands call.

:func:`analyze_file` opens a capture (block by block when it is long), reuses a cached
analysis when the same file was analysed with the same settings and channel map before, and
otherwise analyses it and stores the result. Notebook users can call :func:`pqcheck.analyze`
directly; this function adds only file handling and caching, never a different computation.
"""

from __future__ import annotations

import dataclasses

from ..analysis import analyze
from ..readers import open_capture

__all__ = ["analyze_file"]


def analyze_file(
    path,
    *,
    sample_rate_hz=None,
    current=None,
    voltage=None,
    time_column=None,
    cache=None,
    progress=None,
    **analysis_kwargs,
):
    """Open and analyse one capture file.

    Parameters
    ----------
    path : str or Path
        Capture file (see :func:`pqcheck.readers.load_capture` for formats).
    sample_rate_hz, current, voltage, time_column
        Reader options. [Hz] for the rate.
    cache : pqcheck.run.cache.Cache or None
        Cache of parsed samples and results; None disables caching.
    progress : callable or None
        ``progress(done_samples, total_samples_or_None)``.
    **analysis_kwargs
        Passed to :func:`pqcheck.analyze` (``nominal_hz``, ``max_order``, ``il_a``, ``wiring``,
        ``reference``).

    Returns
    -------
    (capture, result)
        The opened :class:`~pqcheck.capture.Capture` or
        :class:`~pqcheck.capture.CaptureStream` and the
        :class:`~pqcheck.analysis.AnalysisResult`.
    """
    capture = open_capture(path, sample_rate_hz=sample_rate_hz, current=current,
                           voltage=voltage, time_column=time_column, cache=cache)
    key = None
    sha = capture.provenance.sha256
    if cache is not None:
        key = {
            "analysis": {k: analysis_kwargs.get(k) for k in sorted(analysis_kwargs)},
            "channels": [(c.name, c.quantity, c.phase) for c in capture.channels],
            "reader": {"sample_rate_hz": sample_rate_hz, "time_column": time_column},
        }
        if sha:
            hit = cache.load_result(sha, key)
            if hit is not None:
                return capture, dataclasses.replace(hit, source=str(path))
    result = analyze(capture, progress=progress, **analysis_kwargs)
    if cache is not None and result.sha256:
        cache.save_result(result.sha256, key, result)
    return capture, result
