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
    encoding=None,
    **analysis_kwargs,
):
    """Open and analyse one capture file.

    Parameters
    ----------
    path : str or Path
        Capture file (see :func:`pqcheck.readers.load_capture` for formats).
    sample_rate_hz, current, voltage, time_column, encoding
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
    before = _file_states(path)
    capture, result, save = _open_and_analyze(path, sample_rate_hz, current, voltage,
                                              time_column, cache, progress, encoding,
                                              analysis_kwargs)
    if _file_states(path) != before:
        from ..errors import CaptureFormatError

        raise CaptureFormatError(
            "the file changed while it was being read (its size or times differ before and "
            "after); the recorded SHA-256 would not cover what was analysed: wait until the "
            "recording is complete (or copy it), then run again", path=str(path))
    if save is not None:  # only what was read from an unchanged file is cached
        save()
    return capture, result


def _file_states(path) -> tuple:
    """Size, times and identity of each file of the capture (the .cfg and .dat of a COMTRADE
    record, a .npy and its side-car), to tell whether it changed while it was read."""
    import os

    from ..readers import capture_files

    files = []
    for one in (path if isinstance(path, (list, tuple)) else [path]):  # several files
        try:
            files += capture_files(one)
        except Exception:  # noqa: BLE001 - a missing part is reported by the reader
            files.append(one)
    out = []
    for f in files:
        try:
            st = os.stat(f)
        except OSError:
            out.append(None)
            continue
        out.append((st.st_dev, st.st_ino, st.st_size, st.st_mtime_ns, st.st_ctime_ns))
    return tuple(out)


def _open_and_analyze(path, sample_rate_hz, current, voltage, time_column, cache, progress,
                      encoding, analysis_kwargs):
    capture = open_capture(path, sample_rate_hz=sample_rate_hz, current=current,
                           voltage=voltage, time_column=time_column, cache=cache,
                           encoding=encoding)
    key = None
    sha = capture.provenance.sha256
    if cache is not None:
        key = {
            "analysis": {k: analysis_kwargs.get(k) for k in sorted(analysis_kwargs)},
            "channels": [(c.name, c.quantity, c.phase) for c in capture.channels],
            "reader": {"sample_rate_hz": sample_rate_hz, "time_column": time_column,
                       **({"encoding": encoding} if encoding else {})},
        }
        if sha:
            hit = cache.load_result(sha, key)
            if hit is not None:
                return capture, dataclasses.replace(hit, source=str(path)), None
    result = analyze(capture, progress=progress, **analysis_kwargs)
    save = None
    if cache is not None and result.sha256:
        def save():
            cache.save_result(result.sha256, key, result)
    return capture, result, save
