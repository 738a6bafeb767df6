"""Waveform recordings to interval values: IEC 61000-4-30 Class A aggregation over files.

:func:`aggregate_recording` analyses each file of a recorder's sequence by the IEC 61000-4-7
method (one file at a time per worker, so memory is bounded by one file's analysis), flags the
windows that hold a voltage dip, swell or interruption, aggregates them into 150/180-cycle
(about 3 s), clock-aligned 10 min and 2 h values (:func:`pqcheck.survey.file_levels`) and
joins the files into one recording checked for continuity (:func:`pqcheck.survey.join_files`).

Absolute time
    Clock alignment needs the absolute time of each file's first sample. It is taken from the
    file (COMTRADE start time; a CSV metadata line such as ``# start = 2026-03-02T10:03:17``)
    or, with ``start_time``, given for the first file, the others then following one another
    without gaps (their own start times are not used). A file with neither is refused.
    Times without an offset are in ``timezone`` (IANA name) or, without one, taken as written.

Event flags
    U_rms(1/2) (one-cycle RMS refreshed every half cycle) of each voltage channel, from the
    samples (read again block by block for a long file), against the declared input voltage
    ``declared_voltage_v`` (line-to-neutral), or, when not given, the median window RMS of the
    channel in the file (pqcheck's choice). Phase voltages derived from line-to-line inputs
    are flagged from their 10/12-cycle RMS values, which misses events shorter than a few
    cycles; a finding says so.
"""

from __future__ import annotations

import math
import re
from datetime import datetime
from datetime import timezone as _tz

import numpy as np

from ..errors import InputError
from ..findings import Finding

__all__ = ["aggregate_recording", "parse_start_time", "capture_start_time"]

_START_KEYS = ("start", "start time", "start_time", "starttime", "recording start",
               "record start", "start date", "trigger time", "datetime", "date time",
               "timestamp")


def parse_start_time(text, timezone: str | None = None, *, field: str = "start_time",
                     path=None) -> float:
    """POSIX time of an ISO 8601 date and time (``2026-03-02T10:03:17``, with or without an
    offset; without one, in ``timezone`` or taken as UTC). [s]

    Examples
    --------
    >>> parse_start_time("2026-03-02T10:03:17+01:00") - parse_start_time("2026-03-02T09:03:17")
    0.0
    """
    s = str(text).strip().replace(" ", "T", 1) if "T" not in str(text) else str(text).strip()
    if s.endswith("Z"):
        s = s[:-1] + "+00:00"
    try:
        d = datetime.fromisoformat(s)
    except ValueError:
        raise InputError(f"{text!r} is not an ISO 8601 date and time (2026-03-02T10:03:17, "
                         "optionally with an offset such as +01:00)", field=field,
                         path=path) from None
    if d.tzinfo is None:
        if timezone:
            from zoneinfo import ZoneInfo, ZoneInfoNotFoundError

            try:
                d = d.replace(tzinfo=ZoneInfo(timezone))
            except (ZoneInfoNotFoundError, ValueError):
                raise InputError(f"unknown time zone {timezone!r}; give an IANA name such as "
                                 "Europe/Berlin", field="timezone") from None
        else:
            d = d.replace(tzinfo=_tz.utc)
    return d.timestamp()


def capture_start_time(capture, timezone: str | None = None):
    """Absolute start of a capture from its reader's metadata, or None. [s]"""
    s = capture.provenance.settings or {}
    cands = []
    if isinstance(s.get("start"), str):
        cands.append(s["start"])
    meta = s.get("metadata") or {}
    for key, value in meta.items():
        key, value = str(key), str(value)
        if "=" in key:  # "start = 2026-03-02T10:03:17" split at the first ":" by the reader
            key, _, head = key.partition("=")
            value = f"{head.strip()}:{value}"
        k = re.sub(r"[_\-]+", " ", key.lower()).strip()
        if k in _START_KEYS or k.replace(" ", "_") in _START_KEYS:
            cands.append(str(value))
    for c in cands:
        try:
            return parse_start_time(c, timezone, path=capture.provenance.source)
        except InputError:
            continue
    return None


def _aggregate_file(job: dict):
    """Worker: one file -> FileLevels (top level, so process pools can pickle it)."""
    from .. import aggregate
    from ..analysis import analyze
    from ..capture import Capture
    from ..readers import open_capture
    from ..survey import file_levels

    path = job["path"]
    reader = job.get("reader") or {}
    cap = open_capture(path, **reader)
    start = job.get("start_s")
    if start is None:
        start = capture_start_time(cap, job.get("timezone"))
    if start is None:
        raise InputError("the absolute start time of the recording is needed to align the 10 "
                         "min intervals to the clock, and the file does not state it; give "
                         "start_time (ISO 8601) for the first file", path=path,
                         field="start_time")
    result = analyze(cap, **(job.get("analysis") or {}))
    w = result.windows
    extra = []
    volts = [k for k, c in enumerate(result.channels) if c.quantity == "voltage"
             and c.phase != "n"]
    udin = np.full(len(volts), np.nan)
    names = [c.name for c in cap.channels]
    rows = [names.index(result.channels[k].name) for k in volts
            if result.channels[k].name in names]
    for j, k in enumerate(volts):
        wr = np.where(w.valid, w.rms[:, k], np.nan)
        udin[j] = job.get("declared_voltage_v") or float(np.nanmedian(wr))
    if volts and len(rows) == len(volts):
        first = (np.asarray(w.t_start_s) - cap.t0_s) * cap.fs_hz
        src = (cap.samples[rows] if isinstance(cap, Capture)
               else (b[rows] for b in cap.blocks()))
        lo, hi = aggregate.half_cycle_rms_extremes(
            src, cap.fs_hz, first, np.asarray(w.duration_s) * cap.fs_hz,
            result.settings.cycles_per_window)
    else:  # voltages derived by the analysis (line-to-line inputs): window RMS values
        lo = hi = np.stack([np.where(w.valid, w.rms[:, k], np.nan) for k in volts], axis=1) \
            if volts else np.zeros((w.n_windows, 0))
        if volts:
            extra.append(Finding(
                "event-detection-coarse", "info",
                "the phase voltages are derived from line-to-line inputs: dips, swells and "
                "interruptions are detected from their 10/12-cycle RMS values, so events "
                "shorter than a few cycles may be missed"))
    flags = aggregate.event_flags(lo, hi, udin[None, :]) if volts else None
    t_abs = start + (np.asarray(w.t_start_s) - cap.t0_s)
    events = []
    if flags is not None:
        for i in np.flatnonzero(flags["any"]):
            kind = ("interruption" if flags["interruption"][i] else
                    "dip" if flags["dip"][i] else "swell")
            events.append((float(t_abs[i]), kind))
    part = file_levels(result, start, t0_s=cap.t0_s,
                       flags=None if flags is None else flags["any"], events=events,
                       il_a=job.get("il_a"), measure=job.get("measure", "subgroup"),
                       source=str(path), sha256=cap.provenance.sha256 or "")
    from dataclasses import replace

    return replace(part, findings=part.findings + tuple(extra),
                   settings={"source": str(path), "start": start,
                             "start_from": "given" if job.get("start_s") is not None
                             else "file", "fs_hz": cap.fs_hz,
                             "nominal_hz": result.settings.nominal_hz,
                             "udin_v": [None if not math.isfinite(u) else float(u)
                                        for u in udin]})


def aggregate_recording(paths, *, start_time=None, timezone: str | None = None,
                        declared_voltage_v: float | None = None, il_a: float | None = None,
                        measure: str = "subgroup", reader: dict | None = None,
                        analysis: dict | None = None, executor=None,
                        levels=("3s", "10min", "2h")):
    """Aggregate a waveform recording (one or more files) into interval values.

    Parameters
    ----------
    paths : sequence of str or Path
        The recording's files (any order; they are ordered by start time).
    start_time : str or float, optional
        Absolute start of the first file (ISO 8601 text or POSIX seconds); the other files
        then follow one another without gaps. Default: each file's own start time. [s]
    timezone : str, optional
        IANA time zone of times written without an offset.
    declared_voltage_v : float, optional
        Declared input voltage Udin (line-to-neutral) for dip / swell / interruption flags.
        [V]
    il_a : float, optional
        IL, for TDD values. [A]
    measure : str
        ``subgroup`` (IEC 61000-4-30 Class A harmonics), ``group`` or ``component``.
    reader, analysis : dict, optional
        Keyword arguments of :func:`pqcheck.readers.open_capture` and
        :func:`pqcheck.analyze`.
    executor : optional
        An executor of :mod:`pqcheck.run.batch` (process pool or Dask) to analyse the files
        in parallel; None runs them here, one after another.
    levels : tuple of str
        Levels kept.

    Returns
    -------
    pqcheck.survey.Survey

    Raises
    ------
    InputError
        No start time, overlapping files, files with different channels, bad input files.
    """
    from ..survey import join_files

    paths = [str(p) for p in paths]
    if not paths:
        raise InputError("no recording file given", field="paths")
    if measure not in ("subgroup", "group", "component"):
        raise InputError(f"measure must be subgroup, group or component, got {measure!r}",
                         field="measure")
    if declared_voltage_v is not None and not declared_voltage_v > 0:
        raise InputError(f"must be positive, got {declared_voltage_v!r}",
                         field="declared_voltage_v")
    base = {"timezone": timezone, "declared_voltage_v": declared_voltage_v, "il_a": il_a,
            "measure": measure, "reader": dict(reader or {}), "analysis": dict(analysis or {})}
    if start_time is not None:
        t = (float(start_time) if isinstance(start_time, (int, float))
             else parse_start_time(start_time, timezone))
        parts = []
        for p in paths:  # consecutive: each file starts where the one before ended
            part = _aggregate_file({**base, "path": p, "start_s": t})
            parts.append(part)
            t = part.end_s
    else:
        jobs = [{**base, "path": p} for p in paths]
        if executor is None or len(jobs) == 1:
            parts = [_aggregate_file(j) for j in jobs]
        else:
            parts = [None] * len(jobs)
            with executor as ex:
                for i, part in ex.imap_unordered(_aggregate_file, jobs):
                    parts[i] = part
    tzname = timezone or ""
    survey = join_files(parts, timezone_name=tzname, levels=levels)
    if start_time is not None and len(paths) > 1:
        survey = _with_finding(survey, Finding(
            "start-times-assumed", "info",
            "start_time was given for the first file; the other files are taken as following "
            "one another without gaps (their own start times are not used)"))
    return survey


def _with_finding(survey, f):
    from dataclasses import replace

    return replace(survey, findings=survey.findings + (f,))
