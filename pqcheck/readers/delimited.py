"""Delimited-text captures (CSV, semicolon, tab) as oscilloscopes, power analysers and circuit
simulators export them.

What is detected, and recorded in ``Capture.provenance.settings``:

- text encoding (UTF-8 with or without byte-order mark, UTF-16 with BOM, Latin-1 fallback);
- delimiter: comma, semicolon or tab (or a single column);
- decimal comma (``0,25``) when the delimiter is not a comma;
- metadata lines above the header (``key;value``, ``key: value``, ``key = value``), among them
  a declared sample interval (``Sample interval: 50 us``) or rate (``Sample rate: 20 kHz``);
- the header line, units in column names (``ia [A]``, ``t (ms)``, ``V_a/kV``) and SI scaling;
- a time column (by name or unit) in s, ms, us or ns; without one, ``sample_rate_hz`` or a
  declared interval is needed.

Time steps that vary by more than 1 % are treated as a non-uniform (variable-step simulator)
time base and resampled onto a uniform grid with a cubic spline (accurate to well below 0.1 %
at order 50 when the source has 20 or more points per period of that order), which is recorded
as a finding. Isolated long steps in an otherwise uniform record are gaps: the missing span is
filled with NaN (never invented) and the windows it touches are left out.
"""

from __future__ import annotations

import gzip
import re
import zlib

import numpy as np

from ..capture import Capture, Channel, Provenance, guess_role_evidence
from ..errors import CaptureFormatError
from ..findings import Finding
from .layouts import (
    TIME_NAMES,
    Dialect,
    _damaged_gzip,
    declared_interval,
    declared_rate,
    declared_start,
    sniff,
    split_unit,
)

__all__ = ["read_delimited", "sniff", "Dialect"]

_MAX_GAP_S = 600.0  # longest time gap filled with NaN (as the streaming reader)
_TIME_NAMES = TIME_NAMES
_split_unit = split_unit
_declared_rate = declared_rate


def _locate_cell(path, dialect, kind: str = "bad"):
    """Find the first cell of a kind; return (line, column name, text) or None.

    ``kind``: ``"bad"`` a cell that is not a number, ``"infinite"`` a number too large for
    float64 (``1e400``, ``Infinity``, a 400-digit integer), ``"filled"`` a value in a column
    that must be empty. Reads the file as text with every line counted, so the line is exact.
    """
    import pandas as pd

    names = dialect.pandas_names
    reader = pd.read_csv(
        path,
        sep=dialect.delimiter or "\x1f",  # one column: a separator no text file holds
        header=None,
        names=names,
        skiprows=dialect.data_line - 1,
        dtype=str,
        encoding=_pd_encoding(dialect),
        compression=dialect.compression,
        chunksize=200_000,
        keep_default_na=False,
        skip_blank_lines=False,
        engine="c",
    )
    cols = [names[j] for j in (dialect.empty if kind == "filled" else
                               (dialect.keep or range(len(names))))]
    row0 = 0
    for chunk in reader:
        for col in cols:
            raw = chunk[col]
            s = raw.str.strip(" \t\n\v\f\r")  # the white space pandas' parser skips
            if kind == "filled":
                bad = s.notna() & (s != "")
            else:
                if dialect.decimal == ",":
                    s = s.str.replace(",", ".", regex=False)
                num = pd.to_numeric(s, errors="coerce")
                if kind == "infinite":
                    bad = np.isinf(num.to_numpy(dtype=np.float64, na_value=np.nan))
                    bad = pd.Series(bad, index=chunk.index)
                else:
                    # only a truly empty cell is missing data; a blank one (" ") fails the
                    # float parse, so it is reported here with its line rather than without one
                    empty = raw.isna() | (raw == "") | s.str.lower().isin(
                        ["nan", "inf", "-inf", "+inf", "infinity", "-infinity", "+infinity"])
                    bad = num.isna() & ~empty
            if bad.any():
                i = int(np.flatnonzero(bad.to_numpy())[0])
                return dialect.data_line + row0 + i, col, chunk[col].iloc[i]
        row0 += len(chunk)
    return None


def _locate_bad_cell(path, dialect, names=None):
    """Find the first non-numeric cell; return (line, column, text) or None."""
    return _locate_cell(path, dialect, "bad")


def _pd_encoding(dialect):
    return {"utf-8-sig": "utf-8-sig", "utf-16": "utf-16",
            "latin-1": "latin-1"}.get(dialect.encoding, dialect.encoding or "utf-8")


def parse_error(path, dialect: Dialect, exc, *, line_offset: int = 0) -> CaptureFormatError:
    """The error to raise for a pandas parser failure: names the line (and the column of a
    cell that is not a number) and says what to do. ``line_offset``: lines of the file before
    the text pandas was given (0 when it read the whole file)."""
    import pandas as pd

    msg = str(exc)
    m = re.search(r"Expected (\d+) fields in line (\d+), saw (\d+)", msg)
    if m:
        # pandas counts lines of the text it was given, skipped rows included
        line = int(m.group(2)) + line_offset
        return CaptureFormatError(
            f"row has {m.group(3)} fields but the header has {m.group(1)}; fix or delete "
            "that row (mixed delimiters?)", path=path, line=line)
    m = re.search(r"EOF inside string starting at row (\d+)", msg)
    if m:  # a stray quote at the start of a cell; pandas counts rows of the file from 0
        return CaptureFormatError(
            'a quote (") opens a text field that never closes; remove it from that row',
            path=path, line=int(m.group(1)) + 1 + line_offset)
    try:
        bad = _locate_cell(path, dialect, "bad")
    except (pd.errors.ParserError, ValueError):  # reported below with pandas' own words
        bad = None
    if bad is not None:
        line, col, text = bad
        shown = text if len(text) <= 40 else text[:37] + "..."
        return CaptureFormatError(
            f"cell {shown!r} is not a number; fix or delete that row, or export the "
            "capture again", path=path, line=line, field=col)
    return CaptureFormatError(f"could not parse the data rows: {msg}", path=path)


def pandas_options(dialect: Dialect) -> dict:
    """Keyword arguments of ``pandas.read_csv`` for the data rows of a sniffed file (without
    ``skiprows``), shared by the whole-file and the streaming parsers."""
    out = dict(
        sep=dialect.delimiter if dialect.delimiter else ",",
        decimal=dialect.decimal,
        header=None,
        names=dialect.pandas_names,
        dtype=np.float64,
        encoding=_pd_encoding(dialect),
        engine="c",
        skip_blank_lines=True,
        na_values=["", "nan", "NaN", "NAN", "-nan"],
    )
    if dialect.skips:
        out["usecols"] = dialect.parse_cols
    return out


def checked_columns(table, dialect: Dialect, path, *, by_column: bool = False,
                    finite: bool = False):
    """The kept columns of a parsed table, after checking that the phantom columns are empty
    and that no cell overflowed float64 (``1e400``, ``Infinity``), which must never become a
    gap. ``table``: every parsed column, shape (rows, width), or (width, rows) with
    ``by_column`` (the kept columns are then rows of the result). ``finite``: the parser
    cannot have produced an infinity (the compiled parser refuses such cells), so the
    overflow check is skipped."""
    cols = dialect.parse_cols

    def pick(idx):
        return table[idx] if by_column else table[:, idx]

    if dialect.empty and not np.isnan(pick([cols.index(j) for j in dialect.empty])).all():
        found = _locate_cell(path, dialect, "filled")
        line, col, text = found if found else (None, None, "?")
        raise CaptureFormatError(
            f"a value ({text!r}) in a column that is empty in the first rows (no name, a "
            "delimiter at the end of the rows); give that column a name in the header line "
            "or remove the value", path=path, line=line)
    out = pick([cols.index(j) for j in dialect.keep]) if dialect.selects else table
    if finite:
        return out
    # a sum is finite when every cell is (and cheaper than a cell-by-cell test); only when it
    # is not (NaN gaps, or an overflow) are the cells looked at one by one
    with np.errstate(all="ignore"):
        total = float(np.sum(out))
    if not np.isfinite(total) and np.isinf(out).any():
        found = _locate_cell(path, dialect, "infinite")
        line, col, text = found if found else (None, None, "inf")
        shown = text if len(text) <= 40 else text[:37] + "..."
        raise CaptureFormatError(
            f"cell {shown!r} is not a finite number (too large for any current or voltage); "
            "fix that cell, or check the units and scaling of the export",
            path=path, line=line, field=col)
    return out


def read_table(path, dialect: Dialect):
    """Parse the numeric block of a sniffed file into a float64 array (rows, kept columns)."""
    import pandas as pd

    path = str(path)
    kwargs = dict(pandas_options(dialect), skiprows=dialect.data_line - 1,
                  compression=dialect.compression)
    try:
        df = pd.read_csv(path, **kwargs)
    except UnicodeDecodeError as exc:  # a ValueError: must come before the branch below
        raise CaptureFormatError(f"text encoding problem ({exc.reason}); save the file as "
                                 "UTF-8 or give its encoding (`encoding`)", path=path,
                                 field="encoding") from None
    except (ValueError, pd.errors.ParserError) as exc:
        raise parse_error(path, dialect, exc) from None
    except (EOFError, zlib.error, gzip.BadGzipFile) as exc:
        raise _damaged_gzip(path, exc) from None
    return checked_columns(df.to_numpy(dtype=np.float64, copy=False), dialect, path)


def read_delimited(
    path,
    *,
    sample_rate_hz: float | None = None,
    time_column: str | None = None,
    sha256: str = "",
    encoding: str | None = None,
) -> Capture:
    """Read a delimited-text capture.

    Parameters
    ----------
    path : str or Path
        The file.
    sample_rate_hz : float or None
        Sample rate when the file has no time column and declares no interval. [Hz]
    time_column : str or None
        Name of the time column, when its name is not recognisable (``t``, ``time``, ...) and it
        carries no time unit.
    sha256 : str
        SHA-256 of the file, recorded in the provenance.
    encoding : str or None
        Text encoding; None detects it.

    Returns
    -------
    Capture
        Channels other than the time column; roles guessed from names and units.

    Raises
    ------
    CaptureFormatError
        With the file, line and column of the problem.
    """
    path = str(path)
    d = sniff(path, encoding=encoding)
    table = read_table(path, d)
    if table.shape[0] == 0:
        raise CaptureFormatError("the file has a header but no data rows", path=path,
                                 line=d.header_line)
    findings = []
    names = list(d.names)
    t_idx = find_time_column(d, time_column, path)
    declared = declared_interval(d.metadata)
    settings = base_settings(d)
    # a truncated last line shows as NaN in trailing columns of the final row
    last = table[-1]
    if table.shape[0] > 1 and np.isnan(last).any() and not np.isnan(last).all() and np.isfinite(
            table[-2]).all():
        table = table[:-1]
        findings.append(Finding(
            "truncated-row", "warning",
            "the last row is incomplete (file cut short?) and was dropped."))
    t0 = 0.0
    units, scales = list(d.units), list(d.scales)
    if t_idx is None:
        table, names, units, scales = _drop_counter(table, names, units, scales, d, path,
                                                    sample_rate_hz, declared, settings)
    if t_idx is not None:
        t = table[:, t_idx] * d.scales[t_idx]
        settings.update(time_settings(names[t_idx], d.scales[t_idx]))
        data = np.delete(table, t_idx, axis=1)
        ch_names = names[:t_idx] + names[t_idx + 1:]
        units = units[:t_idx] + units[t_idx + 1:]
        scales = scales[:t_idx] + scales[t_idx + 1:]
        if not np.all(np.isfinite(t)):
            bad = int(np.flatnonzero(~np.isfinite(t))[0])
            raise CaptureFormatError(
                "time value is missing or not a number; fix that row", path=path,
                line=d.data_line + bad, field=names[t_idx])
        if t.size < 2:
            raise CaptureFormatError("only one sample; a capture needs many cycles of data",
                                     path=path, line=d.data_line)
        fs, data, t0, tf, how = _time_base(t, data, path, d, names[t_idx], sample_rate_hz,
                                           declared)
        findings += tf
        settings["time_base"] = how
    else:
        data = table
        ch_names = names
        if sample_rate_hz is not None:
            fs = float(sample_rate_hz)
            settings["time_base"] = "sample_rate_hz"
        elif declared is not None:
            fs = 1.0 / declared[0]
            settings["time_base"] = "declared in metadata"
            settings["declared_by"] = declared[1]
        else:
            raise no_time_base(path, d)
        t0 = declared_start(d.metadata)
    if not ch_names:
        raise CaptureFormatError("the file has a time column but no signal columns", path=path,
                                 line=d.header_line)
    if data.shape[0] < 2:
        raise CaptureFormatError("only one sample; a capture needs many cycles of data",
                                 path=path, line=d.data_line)
    if not (np.isfinite(fs) and fs > 0):
        raise CaptureFormatError(f"sample rate {fs!r} is not a positive number", path=path,
                                 field="sample_rate_hz")
    settings["sample_rate_hz"] = fs
    chans = []
    rows = []
    for j, name in enumerate(ch_names):
        chans.append(channel_for(name, units[j]))
        col = data[:, j]
        rows.append(col * scales[j] if scales[j] != 1.0 else col)
    samples = np.vstack(rows) if rows else np.empty((0, 0))
    if not np.isfinite(samples).any():
        raise CaptureFormatError("no numeric samples in any column", path=path,
                                 line=d.data_line)
    huge = np.abs(samples[np.isfinite(samples)]).max()
    if huge > 1e100:  # squares overflow float64: no number computed from them would be finite
        col = int(np.argmax(np.nanmax(np.where(np.isfinite(samples), np.abs(samples), 0.0),
                                      axis=1)))
        raise CaptureFormatError(
            f"values as large as {huge:.3g} cannot be currents or voltages; check the units and "
            "probe scaling of the export", path=path, field=ch_names[col])
    if huge > 1e12:
        findings.append(Finding(
            "implausible-values", "warning",
            f"samples as large as {huge:.3g} are not plausible currents or voltages; check "
            "units and probe scaling."))
    prov = Provenance(source=path, sha256=sha256, reader="delimited", settings=settings)
    return Capture(samples, fs, tuple(chans), t0, prov, tuple(findings))


def channel_for(name: str, unit: str) -> Channel:
    """A channel with its role guessed from name and unit (the evidence kept)."""
    quantity, phase, evidence = guess_role_evidence(name, unit)
    unit = unit or {"current": "A", "voltage": "V"}.get(quantity, "")
    return Channel(name, quantity, phase, unit, "guess", evidence=evidence)


class TimeBaseNotFound(CaptureFormatError):
    """No time column, declared interval or given rate; carries the sniffed layout so that
    ``inspect`` can still show the columns and metadata.

    Attributes
    ----------
    dialect : Dialect
    """

    def __init__(self, problem, *, dialect=None, **kw):
        self.dialect = dialect
        super().__init__(problem, **kw)


def no_time_base(path, d: Dialect) -> TimeBaseNotFound:
    """The error for a file without a time base: says what was tried and what to give."""
    cols = ", ".join(repr(n) for n in d.names)
    return TimeBaseNotFound(
        f"no time base found: no column is named like time (t, time, time_s, Second, X, ...) "
        f"or has a time unit, and no sample interval or rate in the metadata lines; columns "
        f"are {cols}; give the sample rate (sample_rate_hz) or name the time column "
        f"(time_column)", path=path, field="sample_rate_hz", dialect=d)


def _counter_kind(x):
    """``"index"`` for 0, 1, 2, ... (or from 1), ``"uniform"`` for another uniformly increasing
    column, else None."""
    if x.size < 3 or not np.all(np.isfinite(x)):
        return None
    dx = np.diff(x)
    if not np.all(dx > 0):
        return None
    if np.all(dx == 1.0) and x[0] in (0.0, 1.0):
        return "index"
    med = float(np.median(dx))
    if np.all(np.abs(dx - med) <= 0.01 * med):
        return "uniform"
    return None


def _drop_counter(table, names, units, scales, d, path, sample_rate_hz, declared, settings):
    """Without a time column, a first column counting 0, 1, 2, ... is a sample index, not a
    signal: it is dropped (and said). A first column increasing in uniform steps is an
    unrecognised time column: refused, naming it, unless a rate is given or declared."""
    if table.shape[1] < 2 or units[0]:
        return table, names, units, scales
    kind = _counter_kind(table[:, 0])
    if kind == "index":
        settings["dropped_columns"] = {names[0]: "sample index (0, 1, 2, ...)"}
        return table[:, 1:], names[1:], units[1:], scales[1:]
    rate = sample_rate_hz or (1.0 / declared[0] if declared is not None else None)
    if kind == "uniform" and rate is not None:
        x = table[:, 0]
        step = (x[-1] - x[0]) / (x.size - 1)
        if abs(step * rate - 1.0) <= 0.01:  # time in seconds at the rate: not a signal
            settings["dropped_columns"] = {
                names[0]: f"time in seconds (uniform steps of {step:.6g} s match the "
                          f"{rate:.6g} Hz sample rate)"}
            return table[:, 1:], names[1:], units[1:], scales[1:]
    if kind == "uniform" and sample_rate_hz is None and declared is None:
        raise TimeBaseNotFound(
            f"column {names[0]!r} increases in uniform steps like a time column, but its name "
            f"is not one pqcheck knows as time; if it is time in seconds, name it as the time "
            f"column (time_column), or give the sample rate (sample_rate_hz)",
            path=path, field="time_column", dialect=d)
    return table, names, units, scales


def _rounded_uniform(t, dt, med):
    """True when every time lies within half a print step of one uniform grid: a uniform
    record whose times were printed coarsely (a 32.506 us step printed to 0.01 ms reads as
    steps of 30 and 40 us). Returns ``(True, print step [s], fitted step [s])`` or
    ``(False, ...)``."""
    q_lo, q_hi = float(dt.min()), float(dt.max())
    spread = q_hi - q_lo
    n = t.size
    i = np.arange(n, dtype=np.float64)
    step = (t[-1] - t[0]) / (n - 1)
    resid = t - (t[0] + step * i)
    # the steps take at most a few values one print step apart, and the times stay within
    # one print step of the end-to-end grid (rounding moves each by at most half of it)
    # printed times differ by whole print steps: the steps fall into a few exact values
    # (to float precision), where random jitter spreads them over a continuum
    tol = 1e-9 * float(np.abs(t).max()) + 1e-15
    srt = np.sort(dt)
    levels = 1 + int(np.count_nonzero(np.diff(srt) > tol))
    ok = (spread > 0 and spread <= 1.0 * med + 1e-15 and levels <= 3
          and float(np.max(np.abs(resid))) <= spread * (1 + 1e-6) + 1e-12 * np.abs(t).max())
    return ok, spread, step


def _time_base(t, data, path, d, tname, sample_rate_hz, declared=None):
    """Sample rate from a time column; resample a non-uniform base; fill gaps with NaN.

    Returns ``(fs [Hz], data, t0 [s], findings, how)``."""
    findings = []
    dt = np.diff(t)
    if np.any(dt <= 0):
        i = int(np.flatnonzero(dt <= 0)[0])
        what = "repeats" if dt[i] == 0 else "goes backwards"
        raise CaptureFormatError(
            f"time {what} ({t[i]:.9g} then {t[i + 1]:.9g} s); times must increase. Sort the "
            "rows, remove duplicates, or drop the time column and give the sample rate "
            "(sample_rate_hz)", path=path, line=d.data_line + i + 1, field=tname)
    med = float(np.median(dt))
    dev = np.abs(dt - med) / med
    if sample_rate_hz is not None:
        fs_col = (t.size - 1) / (t[-1] - t[0])
        if abs(fs_col - sample_rate_hz) > 0.01 * sample_rate_hz:
            findings.append(Finding(
                "sample-rate-mismatch", "warning",
                f"the given sample rate {sample_rate_hz:g} Hz differs from the time column "
                f"({fs_col:.6g} Hz); the given rate is used."))
        return float(sample_rate_hz), data, float(t[0]), findings, "sample_rate_hz"
    jump = int(np.argmax(dt))
    if dt[jump] > _MAX_GAP_S:  # filling or resampling it could take more memory than exists
        raise CaptureFormatError(
            f"the time column jumps by {dt[jump]:.6g} s (from {t[jump]:.9g} to "
            f"{t[jump + 1]:.9g} s); split the capture at the gap", path=path,
            line=d.data_line + jump + 1, field=tname)
    if np.all(dev <= 0.01):
        # uniform up to print rounding: least-squares rate over the whole record
        n = t.size
        fs = (n - 1) / (t[-1] - t[0])
        return float(fs), data, float(t[0]), findings, "column"
    rounded, q, step = _rounded_uniform(t, dt, med)
    if rounded:
        how = "column (uniform, printed coarsely)"
        src = f"the end-to-end step of the time column ({step:.6g} s)"
        fs = 1.0 / step
        if declared is not None:
            # the declared interval is exact; accept it when the times agree with it to
            # within the print rounding at both ends
            span_err = abs((t[-1] - t[0]) - declared[0] * (t.size - 1))
            if span_err <= q * 1.01:
                fs = 1.0 / declared[0]
                src = f"the declared interval {declared[1]!r} ({declared[0]:.9g} s)"
                how = f"declared in metadata ({declared[1]!r}), checked against the column"
            else:
                findings.append(Finding(
                    "declared-interval-mismatch", "warning",
                    f"the declared interval {declared[1]!r} ({declared[0]:.9g} s) does not fit "
                    f"the time column ({step:.9g} s per sample); the column is used."))
        findings.append(Finding(
            "time-rounded", "info",
            f"the time column is printed to about {q:.3g} s, coarser than its step, so the "
            f"steps read {dt.min():.3g} to {dt.max():.3g} s; every time lies within the print "
            f"rounding of a uniform grid, so the samples are taken as uniform (not "
            f"resampled) at {fs:.9g} Hz from {src}.", value=float(fs), unit="Hz"))
        return float(fs), data, float(t[0]), findings, how
    gaps = dev > 0.5
    if (dev[~gaps] <= 0.01).all() and gaps.sum() <= max(3, 0.001 * dt.size) and np.all(
            dt[gaps] > med):
        # uniform record with a few holes: place samples on the grid, leave NaN in the holes
        fs = 1.0 / med
        idx = np.rint((t - t[0]) * fs).astype(np.int64)
        out = np.full((idx[-1] + 1, data.shape[1]), np.nan)
        out[idx] = data
        missing = int(idx[-1] + 1 - t.size)
        first = int(np.flatnonzero(gaps)[0])
        findings.append(Finding(
            "time-gap", "warning",
            f"the time column jumps {int(gaps.sum())} time(s) (first after {t[first]:.6g} s, "
            f"line {d.data_line + first}); {missing} missing samples are left empty and the "
            "windows they touch are not analysed.",
            value=float(missing), unit="samples"))
        return float(fs), out, float(t[0]), findings, "column"
    fs, out, tf = resample_variable_step(t, data)
    return fs, out, float(t[0]), findings + tf, "column (variable step, resampled)"


def resample_variable_step(t, data):
    """Put a truly variable-step record (circuit simulator) on a uniform grid with a cubic
    spline. ``data``: (rows, channels). Returns ``(fs [Hz], out (rows, channels), findings)``."""
    from scipy.interpolate import CubicSpline

    dt = np.diff(t)
    n = t.size
    span = t[-1] - t[0]
    fs = max((n - 1) / span, 51_200.0)
    fs = min(fs, 2_000_000.0)
    m = int(np.floor(span * fs)) + 1
    grid = t[0] + np.arange(m) / fs
    finite = np.isfinite(data).all(axis=1)
    out = np.empty((m, data.shape[1]))
    for j in range(data.shape[1]):
        out[:, j] = CubicSpline(t[finite], data[finite, j])(grid)
    finding = Finding(
        "resampled", "info",
        f"the time steps vary (from {dt.min():.3g} to {dt.max():.3g} s), more than print "
        f"rounding explains: a variable-step record; {n} samples were resampled to a uniform "
        f"{fs:.6g} Hz with a cubic spline.", value=float(fs), unit="Hz")
    return float(fs), out, [finding]


def find_time_column(d: Dialect, time_column, path):
    """Index of the time column (by name given, by the layout, unit ``s`` or a time-like
    name), or None."""
    names = list(d.names)
    if time_column is not None:
        if time_column not in names:
            raise CaptureFormatError(
                f"no column named {time_column!r}; columns are: {', '.join(names)}",
                path=path, field="time_column")
        return names.index(time_column)
    if d.time_index is not None:
        return d.time_index
    for i, (name, unit) in enumerate(zip(names, d.units)):
        if unit == "s" or TIME_NAMES.match(name):
            return i
    return None


def base_settings(d: Dialect) -> dict:
    """Reader settings recorded in the provenance of a delimited capture."""
    out = {
        "encoding": d.encoding,
        "delimiter": {",": "comma", ";": "semicolon", "\t": "tab", None: "none"}[d.delimiter],
        "decimal": d.decimal,
        "header_line": d.header_line,
        "data_line": d.data_line,
        "metadata": dict(d.metadata),
        "layout": d.layout,
    }
    if d.compression:
        out["compression"] = d.compression
    if d.notes:
        out["layout_notes"] = list(d.notes)
    return out


def time_settings(name: str, scale: float) -> dict:
    """Settings describing the time column."""
    unit = "s" if scale == 1.0 else {1e-3: "ms", 1e-6: "us", 1e-9: "ns"}.get(scale, str(scale))
    return {"time_column": name, "time_unit": unit}
