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
from dataclasses import dataclass

import numpy as np
import pandas as pd

from ..capture import Capture, Channel, Provenance, guess_role
from ..errors import CaptureFormatError
from ..findings import Finding

__all__ = ["read_delimited", "sniff", "Dialect"]

_SNIFF_LINES = 400
_MAX_GAP_S = 600.0  # longest time gap filled with NaN (as the streaming reader)
_SNIFF_BYTES = 256 * 1024

_NUM = r"[+-]?(?:\d+(?:[.]\d*)?|[.]\d+)(?:[eE][+-]?\d+)?"
_NUM_COMMA = r"[+-]?(?:\d+(?:,\d*)?|,\d+)(?:[eE][+-]?\d+)?"
_WORDS = r"nan|NaN|NAN|-?inf|-?Inf"
# a cell may be quoted ("12.5"), as RFC 4180 allows and some loggers write every field
_NUM_RE = re.compile(rf'^\s*(?:{_NUM}|{_WORDS}|"(?:{_NUM}|{_WORDS})"|)\s*$')
_NUM_COMMA_RE = re.compile(rf'^\s*(?:{_NUM_COMMA}|{_WORDS}|"(?:{_NUM_COMMA}|{_WORDS})"|)\s*$')

_UNIT_SCALE = {
    "s": ("s", 1.0), "sec": ("s", 1.0), "ms": ("s", 1e-3), "us": ("s", 1e-6), "µs": ("s", 1e-6),
    "μs": ("s", 1e-6), "ns": ("s", 1e-9),
    "a": ("A", 1.0), "ma": ("A", 1e-3), "ka": ("A", 1e3),
    "v": ("V", 1.0), "mv": ("V", 1e-3), "kv": ("V", 1e3),
}
_TIME_NAMES = re.compile(r"^(t|time|times|seconds|sec|timestamp|zeit|temps)$", re.IGNORECASE)


@dataclass(frozen=True)
class Dialect:
    """What :func:`sniff` found out about a delimited file.

    Attributes
    ----------
    encoding : str
    delimiter : str or None
        None for a single column.
    decimal : str
        ``"."`` or ``","``.
    header_line : int or None
        1-based line number of the header (None when there is none).
    data_line : int
        1-based line number of the first data row.
    n_columns : int
    names : tuple of str
        Column names without units.
    units : tuple of str
        SI unit per column (``"s"``, ``"A"``, ``"V"`` or ``""``).
    scales : tuple of float
        Factor from file values to SI.
    metadata : dict
        Key/value pairs found above the header.
    """

    encoding: str
    delimiter: str | None
    decimal: str
    header_line: int | None
    data_line: int
    n_columns: int
    names: tuple
    units: tuple
    scales: tuple
    metadata: dict


def _decode_head(raw: bytes, path: str):
    if raw[:2] == b"\x1f\x8b":
        return None, "gzip"
    if raw[:4] == b"PK\x03\x04":
        raise CaptureFormatError(
            "this is a ZIP archive, not a text capture; unpack it and pass the CSV inside",
            path=path)
    if raw.startswith(b"\xef\xbb\xbf"):
        return raw[3:].decode("utf-8", errors="replace"), "utf-8-sig"
    if raw.startswith(b"\xff\xfe") or raw.startswith(b"\xfe\xff"):
        return raw.decode("utf-16", errors="replace"), "utf-16"
    if b"\x00" in raw[:4096]:
        head = raw[:4096]
        if max(head[0::2].count(0), head[1::2].count(0)) > 0.4 * len(head):
            # NUL in every other byte: ASCII text stored as UTF-16 without a byte-order mark
            raise CaptureFormatError(
                "the file looks like UTF-16 text without a byte-order mark, which cannot be "
                "read reliably; save it as UTF-8 (or UTF-16 with a byte-order mark)", path=path)
        raise CaptureFormatError(
            "the file holds binary data (NUL bytes), not delimited text; export the capture "
            "as CSV, or give a .cfg/.dat COMTRADE pair, .npy or .parquet", path=path)
    try:
        return raw.decode("utf-8"), "utf-8"
    except UnicodeDecodeError as exc:
        if exc.start >= len(raw) - 4:  # a multi-byte character cut by the sniff window
            return raw[: exc.start].decode("utf-8"), "utf-8"
        return raw.decode("latin-1"), "latin-1"


def _split_unit(raw_name: str):
    """``'ia [A]'`` -> ``('ia', 'A', 1.0)``; unknown units are kept in the name."""
    name = raw_name.strip().strip('"').strip("'").strip()
    m = re.match(r"^(.*?)\s*[\[(]\s*([^\])]+?)\s*[\])]\s*$", name)
    if m and m.group(2).lower() in _UNIT_SCALE:
        unit, scale = _UNIT_SCALE[m.group(2).lower()]
        return m.group(1).strip() or name, unit, scale
    m = re.match(r"^(.*?)\s*/\s*([A-Za-zµμ]+)$", name)
    if m and m.group(2).lower() in _UNIT_SCALE:
        unit, scale = _UNIT_SCALE[m.group(2).lower()]
        return m.group(1).strip(), unit, scale
    return name, "", 1.0


def _numeric_fields(fields, decimal):
    rx = _NUM_COMMA_RE if decimal == "," else _NUM_RE
    return all(rx.match(f) for f in fields) and any(f.strip() for f in fields)


def _step_over_bad_rows(lines, counts, startl, k, delim, decimal):
    """Extend a data block that starts at ``startl`` upward over malformed data rows.

    Without this a bad row among the sniffed lines (a cell that is not a number, a missing or
    extra field) ends the block and is taken for the header: the real header and the rows
    above are lost and the error no longer names the bad line. A row is stepped over when it
    lies between numeric rows of ``k`` fields and holds at least one number (metadata never
    sits between data rows; in a two-column file a bad row is half text), or when it is
    mostly numeric under a text header of ``k`` fields; :func:`read_table` then refuses it
    with its line number.
    """
    rx = _NUM_COMMA_RE if decimal == "," else _NUM_RE
    while startl >= 2:
        fields = [f for f in lines[startl - 1].split(delim) if f.strip()]
        good = sum(1 for f in fields if rx.match(f))
        above = lines[startl - 2].split(delim)
        if good and len(above) == k and _numeric_fields(above, decimal):
            startl -= 1
            while startl > 0 and counts[startl - 1] == k and _numeric_fields(
                lines[startl - 1].split(delim), decimal
            ):
                startl -= 1
        elif good > len(fields) - good and len(above) == k and not any(
            rx.match(f) for f in above if f.strip()
        ):
            return startl - 1  # the first data row is the bad one; the header is above it
        else:
            break
    return startl


def _parse_value_with_unit(text: str):
    """``'50 us'`` -> (5e-05, 's'); ``'20 kHz'`` -> (20000.0, 'hz'); None if not a number."""
    m = re.match(rf"^\s*({_NUM}|{_NUM_COMMA})\s*([A-Za-zµμ/]*)\s*$", text.strip())
    if not m:
        return None
    value = float(m.group(1).replace(",", "."))
    unit = m.group(2).lower()
    if unit in ("s", "sec", "ms", "us", "µs", "μs", "ns"):
        return value * _UNIT_SCALE[unit][1], "s"
    if unit in ("hz", "sa/s", "s/s", "sps"):
        return value, "hz"
    if unit in ("khz", "ksa/s", "ks/s", "ksps"):
        return value * 1e3, "hz"
    if unit in ("mhz", "msa/s", "ms/s", "msps"):
        return value * 1e6, "hz"
    if unit == "":
        return value, ""
    return None


def _metadata(lines, delimiter):
    meta = {}
    for line in lines:
        text = line.strip().lstrip("#").strip()
        if not text:
            continue
        for sep in ([delimiter] if delimiter else []) + [":", "="]:
            if sep and sep in text:
                key, _, value = text.partition(sep)
                key = key.strip().strip('"')
                value = value.strip().strip(sep).strip().strip('"')
                if key:
                    meta[key] = value
                break
    return meta


def _declared_rate(meta: dict):
    """Sample rate declared in metadata, or None. [Hz]"""
    for key, value in meta.items():
        k = key.lower().replace("_", " ").replace("-", " ")
        parsed = _parse_value_with_unit(value)
        if parsed is None:
            continue
        number, unit = parsed
        if number <= 0:
            continue
        if any(w in k for w in ("sample interval", "sampling interval", "time step", "increment",
                                "sample period", "sampling period")) or k in ("dt", "ts"):
            return 1.0 / number if unit in ("s", "") else None
        if any(w in k for w in ("sample rate", "sampling rate", "samplerate",
                                "sampling frequency", "sample frequency")) or k == "fs":
            return number if unit in ("hz", "") else 1.0 / number
    return None


def _damaged_gzip(path, exc) -> CaptureFormatError:
    # without this, EOFError from a cut-short archive reaches the command line as a bare
    # "Aborted!" (click treats EOFError as an interrupt)
    return CaptureFormatError(
        f"the file is gzip-compressed but damaged or cut short ({exc}); compress it again or "
        "pass the uncompressed CSV", path=path)


def sniff(path) -> Dialect:
    """Work out the layout of a delimited capture file from its first lines.

    Raises
    ------
    CaptureFormatError
        Empty, binary or compressed file; no numeric data rows found.
    """
    path = str(path)
    with open(path, "rb") as fh:
        raw = fh.read(_SNIFF_BYTES)
    if not raw.strip():
        raise CaptureFormatError("the file is empty; export the capture again", path=path)
    text, encoding = _decode_head(raw, path)
    if encoding == "gzip":
        try:
            with gzip.open(path, "rb") as fh:
                raw = fh.read(_SNIFF_BYTES)
        except (OSError, EOFError, zlib.error) as exc:
            raise _damaged_gzip(path, exc) from None
        text, _ = _decode_head(raw, path)
        encoding = "gzip"
    # Split only where pandas does (\n, \r\n, \r): str.splitlines also breaks at \x0b, \x0c,
    # \x1c-\x1e and \x85 (an ellipsis in a cp1252 file read as Latin-1), which would shift
    # every line number after it.
    lines = re.split(r"\r\n|\r|\n", text)
    if len(raw) >= _SNIFF_BYTES and len(lines) > 1:
        lines = lines[:-1]  # the last line may be cut by the sniff window
    lines = lines[:_SNIFF_LINES]
    best = None
    for delim in (",", ";", "\t"):
        for decimal in ((".",) if delim == "," else (".", ",")):
            counts = [len(line.split(delim)) if line.strip() else 0 for line in lines]
            # the data block: trailing run of numeric lines with one field count >= 2
            end = len(lines)
            while end > 0 and not lines[end - 1].strip():
                end -= 1
            if end == 0:
                continue
            k = counts[end - 1]
            if k < 2:
                continue
            startl = end
            while startl > 0 and counts[startl - 1] == k and _numeric_fields(
                lines[startl - 1].split(delim), decimal
            ):
                startl -= 1
            # a truncated final line: allow the last line to be short
            if startl == end and end >= 2:
                k = counts[end - 2]
                startl = end - 1
                while startl > 0 and counts[startl - 1] == k and k >= 2 and _numeric_fields(
                    lines[startl - 1].split(delim), decimal
                ):
                    startl -= 1
                if startl == end - 1:
                    continue
                end -= 1
            startl = _step_over_bad_rows(lines, counts, startl, k, delim, decimal)
            n_rows = end - startl
            score = (n_rows, k, decimal == "." if delim != "," else True)
            if best is None or score > best[0]:
                best = (score, delim, decimal, startl, k)
    if best is None:
        # single column?
        end = len(lines)
        while end > 0 and not lines[end - 1].strip():
            end -= 1
        startl = end
        while startl > 0 and (_NUM_RE.match(lines[startl - 1]) or _NUM_COMMA_RE.match(
                lines[startl - 1])) and lines[startl - 1].strip():
            startl -= 1
        if startl == end:
            shown = lines[end - 1].strip() if end else ""
            shown = shown if len(shown) <= 60 else shown[:57] + "..."
            raise CaptureFormatError(
                "no rows of numbers found in the first lines"
                + (f" (this one reads {shown!r})" if shown else "")
                + "; a capture needs a header line and data rows of plain numbers (12.5, "
                "-3e-4, or 0,25 with ; or tab between values) separated by commas, semicolons "
                "or tabs: dates, clock times, thousands separators and spaces between values "
                "are not read", path=path, line=max(end, 1))
        decimal = "," if any("," in line for line in lines[startl:end]) else "."
        best = ((end - startl, 1, True), None, decimal, startl, 1)
    _, delim, decimal, startl, k = best
    header_idx = None
    if startl > 0:
        cand = lines[startl - 1]
        fields = cand.split(delim) if delim else [cand]
        if len(fields) == k and not _numeric_fields(fields, decimal):
            header_idx = startl - 1
        elif delim is not None:
            _refuse_mixed_delimiters(cand, delim, k, startl, path)
    if header_idx is not None:
        raw_names = lines[header_idx].split(delim) if delim else [lines[header_idx]]
        parsed = [_split_unit(f) for f in raw_names]
    else:
        parsed = [(f"col{i + 1}", "", 1.0) for i in range(k)]
    names = []
    for i, (name, _, _) in enumerate(parsed):
        name = name or f"col{i + 1}"
        while name in names:
            name = f"{name}_{i + 1}"
        names.append(name)
    meta = _metadata(lines[: header_idx if header_idx is not None else startl], delim)
    return Dialect(
        encoding=encoding,
        delimiter=delim,
        decimal=decimal,
        header_line=None if header_idx is None else header_idx + 1,
        data_line=startl + 1,
        n_columns=k,
        names=tuple(names),
        units=tuple(p[1] for p in parsed),
        scales=tuple(p[2] for p in parsed),
        metadata=meta,
    )


_DELIM_NAMES = {",": "commas", ";": "semicolons", "\t": "tabs"}


def _refuse_mixed_delimiters(line, delim, k, startl, path):
    """Refuse a file whose rows switch delimiter: without this the rows above the switch are
    taken for metadata and silently dropped. ``line`` is the line just above the data block
    that starts at 0-based line ``startl``."""
    for other in _DELIM_NAMES:
        fields = line.split(other)
        if other == delim or len(fields) != k:
            continue
        if _numeric_fields(fields, ".") or _numeric_fields(fields, ","):
            raise CaptureFormatError(
                f"the values are separated by {_DELIM_NAMES[other]} up to line {startl} and "
                f"by {_DELIM_NAMES[delim]} from line {startl + 1} (mixed delimiters); "
                "use one delimiter throughout, e.g. export the capture again",
                path=path, line=startl + 1)


def _locate_bad_cell(path, dialect, names):
    """Find the first non-numeric cell; return (line, column, text) or None."""
    reader = pd.read_csv(
        path,
        sep=dialect.delimiter or "\n",
        header=None,
        names=list(names),
        skiprows=dialect.data_line - 1,
        dtype=str,
        encoding=_pd_encoding(dialect),
        compression="gzip" if dialect.encoding == "gzip" else None,
        chunksize=200_000,
        keep_default_na=False,
        skip_blank_lines=False,
        engine="c",
    )
    row0 = 0
    for chunk in reader:
        for col in chunk.columns:
            s = chunk[col].str.strip(" \t\n\v\f\r")  # the white space pandas' parser skips
            if dialect.decimal == ",":
                s = s.str.replace(",", ".", regex=False)
            num = pd.to_numeric(s, errors="coerce")
            # only a truly empty cell is missing data; a blank one (" ") fails the float parse,
            # so it is reported here with its line rather than without one
            raw = chunk[col]
            empty = raw.isna() | (raw == "") | s.str.lower().isin(["nan", "inf", "-inf", "+inf"])
            bad = num.isna() & ~empty
            if bad.any():
                i = int(np.flatnonzero(bad.to_numpy())[0])
                return dialect.data_line + row0 + i, col, chunk[col].iloc[i]
        row0 += len(chunk)
    return None


def _pd_encoding(dialect):
    return {"gzip": "utf-8", "utf-8-sig": "utf-8-sig", "utf-16": "utf-16",
            "latin-1": "latin-1"}.get(dialect.encoding, "utf-8")


def parse_error(path, dialect: Dialect, exc, *, line_offset: int = 0) -> CaptureFormatError:
    """The error to raise for a pandas parser failure: names the line (and the column of a
    cell that is not a number) and says what to do. ``line_offset``: lines of the file before
    the text pandas was given (0 when it read the whole file)."""
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
        bad = _locate_bad_cell(path, dialect, dialect.names)
    except (pd.errors.ParserError, ValueError):  # reported below with pandas' own words
        bad = None
    if bad is not None:
        line, col, text = bad
        shown = text if len(text) <= 40 else text[:37] + "..."
        return CaptureFormatError(
            f"cell {shown!r} is not a number; fix or delete that row, or export the "
            "capture again", path=path, line=line, field=col)
    return CaptureFormatError(f"could not parse the data rows: {msg}", path=path)


def read_table(path, dialect: Dialect):
    """Parse the numeric block of a sniffed file into a float64 array (rows, columns)."""
    path = str(path)
    kwargs = dict(
        sep=dialect.delimiter if dialect.delimiter else ",",
        decimal=dialect.decimal,
        header=None,
        names=list(dialect.names),
        skiprows=dialect.data_line - 1,
        dtype=np.float64,
        encoding=_pd_encoding(dialect),
        compression="gzip" if dialect.encoding == "gzip" else None,
        engine="c",
        skip_blank_lines=True,
        na_values=["", "nan", "NaN", "NAN", "-nan"],
    )
    try:
        df = pd.read_csv(path, **kwargs)
    except UnicodeDecodeError as exc:  # a ValueError: must come before the branch below
        raise CaptureFormatError(f"text encoding problem ({exc.reason}); save the file as "
                                 "UTF-8", path=path) from None
    except (ValueError, pd.errors.ParserError) as exc:
        raise parse_error(path, dialect, exc) from None
    except (EOFError, zlib.error, gzip.BadGzipFile) as exc:
        raise _damaged_gzip(path, exc) from None
    return df.to_numpy(dtype=np.float64, copy=False)


def read_delimited(
    path,
    *,
    sample_rate_hz: float | None = None,
    time_column: str | None = None,
    sha256: str = "",
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
    d = sniff(path)
    table = read_table(path, d)
    if table.shape[0] == 0:
        raise CaptureFormatError("the file has a header but no data rows", path=path,
                                 line=d.header_line)
    findings = []
    names = list(d.names)
    t_idx = find_time_column(d, time_column, path)
    declared = _declared_rate(d.metadata)
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
    if t_idx is not None:
        t = table[:, t_idx] * d.scales[t_idx]
        settings.update(time_settings(names[t_idx], d.scales[t_idx]))
        data = np.delete(table, t_idx, axis=1)
        ch_names = names[:t_idx] + names[t_idx + 1:]
        units = list(d.units[:t_idx] + d.units[t_idx + 1:])
        scales = list(d.scales[:t_idx] + d.scales[t_idx + 1:])
        if not np.all(np.isfinite(t)):
            bad = int(np.flatnonzero(~np.isfinite(t))[0])
            raise CaptureFormatError(
                "time value is missing or not a number; fix that row", path=path,
                line=d.data_line + bad, field=names[t_idx])
        if t.size < 2:
            raise CaptureFormatError("only one sample; a capture needs many cycles of data",
                                     path=path, line=d.data_line)
        fs, data, t0, tf = _time_base(t, data, path, d, names[t_idx], sample_rate_hz)
        findings += tf
        settings["time_base"] = "column"
    else:
        data = table
        ch_names, units, scales = names, list(d.units), list(d.scales)
        if sample_rate_hz is not None:
            fs = float(sample_rate_hz)
            settings["time_base"] = "sample_rate_hz"
        elif declared is not None:
            fs = declared
            settings["time_base"] = "declared in metadata"
        else:
            raise CaptureFormatError(
                "no time column and no sample interval in the file's header lines; give the "
                "sample rate with `sample_rate_hz` (or name the time column with `time_column`)",
                path=path, field="sample rate")
    if not ch_names:
        raise CaptureFormatError("the file has a time column but no signal columns", path=path,
                                 line=d.header_line)
    if data.shape[0] < 2:
        raise CaptureFormatError("only one sample; a capture needs many cycles of data",
                                 path=path, line=d.data_line)
    if not (np.isfinite(fs) and fs > 0):
        raise CaptureFormatError(f"sample rate {fs!r} is not a positive number", path=path,
                                 field="sample rate")
    settings["sample_rate_hz"] = fs
    chans = []
    rows = []
    for j, name in enumerate(ch_names):
        quantity, phase = guess_role(name, units[j])
        unit = units[j] or {"current": "A", "voltage": "V"}.get(quantity, "")
        chans.append(Channel(name, quantity, phase, unit, "guess"))
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


def _time_base(t, data, path, d, tname, sample_rate_hz):
    """Sample rate from a time column; resample a non-uniform base; fill gaps with NaN."""
    findings = []
    dt = np.diff(t)
    if np.any(dt <= 0):
        i = int(np.flatnonzero(dt <= 0)[0])
        what = "repeats" if dt[i] == 0 else "goes backwards"
        raise CaptureFormatError(
            f"time {what} ({t[i]:.9g} then {t[i + 1]:.9g} s); times must increase. Sort the "
            "rows, remove duplicates, or drop the time column and give `sample_rate_hz`",
            path=path, line=d.data_line + i + 1, field=tname)
    med = float(np.median(dt))
    dev = np.abs(dt - med) / med
    if sample_rate_hz is not None:
        fs_col = 1.0 / med
        if abs(fs_col - sample_rate_hz) > 0.01 * sample_rate_hz:
            findings.append(Finding(
                "sample-rate-mismatch", "warning",
                f"`sample_rate_hz` {sample_rate_hz:g} Hz differs from the time column "
                f"({fs_col:.6g} Hz); the given rate is used."))
        return float(sample_rate_hz), data, float(t[0]), findings
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
        return float(fs), data, float(t[0]), findings
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
        return float(fs), out, float(t[0]), findings
    # non-uniform time base (variable-step simulator): resample with a cubic spline
    from scipy.interpolate import CubicSpline

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
    findings.append(Finding(
        "resampled", "info",
        f"the time column is not uniform (steps from {dt.min():.3g} to {dt.max():.3g} s); "
        f"{n} samples were resampled to a uniform {fs:.6g} Hz with a cubic spline.",
        value=float(fs), unit="Hz"))
    return float(fs), out, float(t[0]), findings



def find_time_column(d: Dialect, time_column, path):
    """Index of the time column (by name given, unit ``s`` or a time-like name), or None."""
    names = list(d.names)
    if time_column is not None:
        if time_column not in names:
            raise CaptureFormatError(
                f"no column named {time_column!r}; columns are: {', '.join(names)}",
                path=path, field="time_column")
        return names.index(time_column)
    for i, (name, unit) in enumerate(zip(names, d.units)):
        if unit == "s" or _TIME_NAMES.match(name):
            return i
    return None


def base_settings(d: Dialect) -> dict:
    """Reader settings recorded in the provenance of a delimited capture."""
    return {
        "encoding": d.encoding,
        "delimiter": {",": "comma", ";": "semicolon", "\t": "tab", None: "none"}[d.delimiter],
        "decimal": d.decimal,
        "header_line": d.header_line,
        "data_line": d.data_line,
        "metadata": dict(d.metadata),
    }


def time_settings(name: str, scale: float) -> dict:
    """Settings describing the time column."""
    unit = "s" if scale == 1.0 else {1e-3: "ms", 1e-6: "us", 1e-9: "ns"}.get(scale, str(scale))
    return {"time_column": name, "time_unit": unit}
