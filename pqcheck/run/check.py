"""One capture checked against limit tables: the one orchestrator every entry point calls.

:func:`check_capture` runs a :class:`~pqcheck.record.RunSpec`: it resolves the limit tables,
opens the capture (block by block when it is long, with the cache), analyses it up to the
highest order the tables assess (unless the spec sets ``max_order``) and assesses it against
each table. ``pqcheck analyze``, ``check``, ``report`` (of a capture or of a plan),
``batch``, ``verify`` and the capture units of a site study all come here, so they read,
analyse and assess a capture the same way.

:func:`analyze_file` is the read-and-analyse step alone, with the cache; it adds only file
handling and caching to :func:`pqcheck.analyze`, never a different computation.
"""

from __future__ import annotations

import dataclasses
import functools
import os

from ..analysis import analyze
from ..errors import InputError
from ..readers import open_capture
from ..record import RunSpec

__all__ = ["check_capture", "analyze_file", "resolve_selection", "resolve_limits",
           "refuse_unused_selectors", "analysis_order", "flicker_settings",
           "DEFAULT_MAX_ORDER"]

DEFAULT_MAX_ORDER = 50
"""Highest order analysed when neither the spec nor a limit table sets one. [unitless]"""


def _stamp(source: str):
    """Size and modification time of a table file (None for a bundled id), so an edited file
    is read again."""
    try:
        st = os.stat(source)
    except OSError:
        return None
    return (st.st_size, st.st_mtime_ns)


@functools.lru_cache(maxsize=32)
def _resolved(selection, stamp):
    from ..limits import load_table, resolve

    return resolve(load_table(selection.table), **selection.resolve_kwargs())


def resolve_selection(selection):
    """The resolved limits of one :class:`~pqcheck.record.LimitSelection`.

    Resolved tables are kept per process, keyed by the selection and the file's size and
    modification time (a batch worker resolves once, not once per capture).

    Raises
    ------
    InputError
        The table cannot be read, or a selector it needs is missing or out of range (the
        field named is the selection's).
    """
    return _resolved(selection, _stamp(selection.table))


def _tag(exc: InputError, part: str) -> InputError:
    """Record which part of the spec an error concerns (``exc.part``), for the boundaries
    that name it in their own terms (a plan's line, a CLI option)."""
    if getattr(exc, "part", None) is None:
        exc.part = part
    return exc


def resolve_limits(spec: RunSpec) -> tuple:
    """The resolved limits of every selection of ``spec``, in order.

    Raises
    ------
    InputError
        As :func:`resolve_selection`; ``exc.part`` is ``"limits[k]"``.
    """
    out = []
    for k, sel in enumerate(spec.limits):
        try:
            out.append(resolve_selection(sel))
        except InputError as exc:
            _tag(exc, f"limits[{k}]")
            raise
    return tuple(out)


def refuse_unused_selectors(spec: RunSpec) -> None:
    """Refuse a row selector that was given but that no applied table uses (a value given
    once for every table, as on the command line, that selects nothing is a mistake).

    Raises
    ------
    InputError
        Naming the selector's field.
    """
    from ..limits import _INPUTS

    resolved = resolve_limits(spec)
    if not resolved:
        return
    unused = set.intersection(*(set(r.ignored) for r in resolved))
    unused.discard("il")  # IL also sets TDD in the analysis
    for name in ("equipment_class", "equipment", "rsce", "ssc", "rated_power",
                 "voltage_level", "isc", "generation"):
        if name in unused:
            ids = ", ".join(r.table_id for r in resolved)
            raise InputError(f"was given, but no limit table applied uses it ({ids}); leave it "
                             "out or choose a table that has it", field=_INPUTS[name])


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
        ``reference``, ``voltage_connection``).

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
    if cache is not None:
        # a result is looked up by a digest known now (recorded for this file state, as for
        # a CSV): a binary capture's hash, running beside the reading, is not waited for
        sha = capture.sha256_known
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
            hashed_here = sha != result.sha256 or getattr(capture, "hashed_in_this_run", False)
            if hashed_here and not isinstance(path, (list, tuple)):
                # hashed during this run (a binary capture): recorded for the file's state,
                # so that the next run finds its result without hashing (also where that
                # hash had finished before the lookup, as for a small file)
                cache.remember_sha256(path, {"sample_rate_hz": sample_rate_hz,
                                             "time_column": time_column,
                                             **({"encoding": encoding} if encoding else {})},
                                      result.sha256)
    return capture, result, save


def analysis_order(spec: RunSpec, resolved) -> int:
    """The order to analyse up to: the spec's ``max_order``, else the highest order any
    applied table assesses (flicker tables assess none), else :data:`DEFAULT_MAX_ORDER`.
    [unitless]"""
    if spec.analysis.max_order is not None:
        return spec.analysis.max_order
    return max((r.max_order for r in resolved if r.max_order), default=DEFAULT_MAX_ORDER)


def flicker_settings(spec: RunSpec, resolved=()):
    """The :class:`pqcheck.flicker.FlickerSettings` of ``spec`` (None: no flicker), asked for
    by the spec or implied by a flicker limit table."""
    a = spec.analysis
    if not (a.wants_flicker or any(r.measure == "flicker" for r in resolved)):
        return None
    from ..flicker import FlickerSettings, SupplyImpedance

    z = a.system_impedance_ohm
    path = a.flicker_path
    if z is not None:
        z = SupplyImpedance.from_loop(*z) if len(z) == 2 else SupplyImpedance(*z)
        if path == "auto":
            path = "system-impedance"
    return FlickerSettings(path=path, lamp=a.lamp, nominal_v=a.nominal_voltage_v,
                           system_impedance=z)


def check_capture(spec: RunSpec, *, cache=None, progress=None, id: str | None = None,
                  load_point: str = "", load_percent: float | None = None, notes: str = ""):
    """Read, analyse and assess the capture of ``spec``.

    Parameters
    ----------
    spec : RunSpec
        What to read, how to analyse it and which limits to apply
        (``spec.reader.path`` must name the capture).
    cache : pqcheck.run.cache.Cache or None
        Cache of parsed captures and results; None reads and analyses afresh.
    progress : callable or None
        ``progress(done_samples, total_samples_or_None)``.
    id, load_point, load_percent, notes
        Labels of the run in a report (id default: the file name without extension).
        [%] for ``load_percent``.

    Returns
    -------
    CaptureRun
        The capture, its analysis and one assessment per limit selection (in order), with
        ``spec`` attached.

    Raises
    ------
    InputError
        Bad input; ``exc.part`` says which part of the spec it concerns (``"limits[k]"``,
        ``"reader"`` for reading and analysing, ``"assess[k]"`` for the reference values
        of selection k).
    """
    from ..assess import assess
    from ..report.job import CaptureRun

    if not spec.reader.path:
        raise InputError("no capture file given", field="path")
    resolved = resolve_limits(spec)
    order = analysis_order(spec, resolved)
    try:
        capture, result = analyze_file(
            spec.reader.paths, sample_rate_hz=spec.reader.sample_rate_hz,
            encoding=spec.reader.encoding,
            current=None if spec.channels.current is None else list(spec.channels.current),
            voltage=None if spec.channels.voltage is None else list(spec.channels.voltage),
            time_column=spec.reader.time_column, cache=cache, progress=progress,
            **spec.analysis.analyze_kwargs(order))
        fl = flicker_settings(spec, resolved)
        if fl is not None:  # evaluated on the capture's samples, never cached
            from ..flicker import analyze_flicker

            result = dataclasses.replace(result, flicker=analyze_flicker(
                capture, nominal_hz=int(result.settings.nominal_hz), settings=fl))
    except InputError as exc:
        _tag(exc, "reader")
        raise
    assessments = []
    for k, (sel, lim) in enumerate(zip(spec.limits, resolved)):
        try:
            assessments.append(assess(result, lim, declared=spec.declared,
                                      **sel.assess_kwargs()))
        except InputError as exc:
            _tag(exc, f"assess[{k}]")
            raise
    run_id = id or os.path.splitext(os.path.basename(spec.reader.path))[0] or "capture"
    return CaptureRun(id=run_id, capture=capture, result=result,
                      assessments=tuple(assessments), load_point=load_point,
                      load_percent=load_percent, notes=notes, spec=spec)
