"""Layouts of delimited-text captures: how the lines of a file map to columns and a time base.

:func:`sniff` decodes the head of a file and hands its lines to the recognisers in
:data:`LAYOUTS`, in order; the first that recognises the file returns a :class:`Plan` (where
the header, the units, the metadata and the data rows are, which columns to keep). The
refiners in :data:`REFINERS` then adjust any plan (a units row under the header, an empty
phantom column from a trailing delimiter) before :func:`finish` turns it into the
:class:`Dialect` the parsers consume (:mod:`pqcheck.readers.delimited` for files read whole,
:mod:`pqcheck.readers.stream` for long files).

A new layout is one recogniser function ``f(lines, path) -> Plan | None`` added to
:data:`LAYOUTS` with a test that writes a file in that layout.

Recognised (each seen in exports of real instruments and tools):

``header``
    optional metadata lines (``key;value``, ``key: value``, ``key = value``), a header line,
    data rows (the generic layout, tried last);
``names-values``
    a names line holding ``Start`` and ``Increment`` cells, a line of units and their values
    under it, then rows numbered by a sample index;
``metadata-beside-data``
    ``key,value`` pairs in the first columns and the samples in the later columns of the same
    lines, no header.
"""

from __future__ import annotations

import gzip
import re
import zlib
from dataclasses import dataclass, field

from ..errors import CaptureFormatError

__all__ = ["Dialect", "Plan", "sniff", "LAYOUTS", "REFINERS", "declared_rate", "declared_start"]

_SNIFF_LINES = 400
_SNIFF_BYTES = 256 * 1024

_NUM = r"[+-]?(?:\d+(?:[.]\d*)?|[.]\d+)(?:[eE][+-]?\d+)?"
_NUM_COMMA = r"[+-]?(?:\d+(?:,\d*)?|,\d+)(?:[eE][+-]?\d+)?"
_WORDS = r"nan|NaN|NAN|-?inf|-?Inf|[+-]?Infinity|[+-]?infinity"
# a cell may be quoted ("12.5"), as RFC 4180 allows and some loggers write every field
_NUM_RE = re.compile(rf'^\s*(?:{_NUM}|{_WORDS}|"(?:{_NUM}|{_WORDS})"|)\s*$')
_NUM_COMMA_RE = re.compile(rf'^\s*(?:{_NUM_COMMA}|{_WORDS}|"(?:{_NUM_COMMA}|{_WORDS})"|)\s*$')

UNIT_SCALE = {
    "s": ("s", 1.0), "sec": ("s", 1.0), "ms": ("s", 1e-3), "us": ("s", 1e-6), "µs": ("s", 1e-6),
    "μs": ("s", 1e-6), "ns": ("s", 1e-9),
    "a": ("A", 1.0), "ma": ("A", 1e-3), "ka": ("A", 1e3),
    "v": ("V", 1.0), "mv": ("V", 1e-3), "kv": ("V", 1e3),
}
# unit words written in a units row or line (``second,Volt,Volt``)
UNIT_WORDS = {
    **UNIT_SCALE,
    "second": ("s", 1.0), "seconds": ("s", 1.0), "secs": ("s", 1.0),
    "volt": ("V", 1.0), "volts": ("V", 1.0), "ampere": ("A", 1.0), "amperes": ("A", 1.0),
    "amp": ("A", 1.0), "amps": ("A", 1.0),
}
INDEX_WORDS = ("sequence", "index", "sample", "samples", "no.", "no", "#", "point", "points")
TIME_NAMES = re.compile(
    r"^(t|time|times|seconds?|secs?|timestamp|zeit|temps|x|x-axis|x axis|xaxis|time_?s)$",
    re.IGNORECASE)
_TIME_UNDERSCORE = re.compile(r"^(t|time)_(s|ms|us|µs|μs|ns)$", re.IGNORECASE)
DELIM_NAMES = {",": "commas", ";": "semicolons", "\t": "tabs"}


@dataclass(frozen=True)
class Dialect:
    """What :func:`sniff` found out about a delimited file.

    Attributes
    ----------
    encoding : str
        Text encoding (of the decompressed text for a gzip file).
    delimiter : str or None
        None for a single column.
    decimal : str
        ``"."`` or ``","``.
    header_line : int or None
        1-based line number of the header (None when there is none).
    data_line : int
        1-based line number of the first data row.
    n_columns : int
        Columns kept (time and signals).
    names : tuple of str
        Names of the kept columns, without units.
    units : tuple of str
        SI unit per kept column (``"s"``, ``"A"``, ``"V"`` or ``""``).
    scales : tuple of float
        Factor from file values to SI, per kept column.
    metadata : dict
        Key/value pairs found in the metadata lines.
    compression : str or None
        ``"gzip"`` or None.
    layout : str
        Name of the recognised layout (see module docstring).
    width : int
        Fields per data row in the file (kept and dropped columns).
    keep : tuple of int
        File column of each kept column.
    file_names : tuple of str
        A name for every file column (for the parser and error messages).
    empty : tuple of int
        File columns that must stay empty (phantom columns of a trailing delimiter).
    time_index : int or None
        Index (into ``names``) of the time column when the layout itself says which it is.
    metadata_lines : tuple of int
        1-based numbers of the lines read as metadata.
    notes : tuple of str
        What the layout detection did (dropped columns, units row, ...), for ``inspect``.
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
    compression: str | None = None
    layout: str = "header"
    width: int = 0
    keep: tuple = ()
    file_names: tuple = ()
    empty: tuple = ()
    time_index: int | None = None
    metadata_lines: tuple = ()
    notes: tuple = ()

    @property
    def pandas_names(self) -> list:
        """Names for every field of a data row, as pandas' parser is given them."""
        return list(self.file_names or self.names)

    @property
    def parse_cols(self) -> list:
        """File columns the parser reads: the kept ones and those that must be empty."""
        if not self.keep:
            return list(range(self.n_columns))
        return sorted(set(self.keep) | set(self.empty))

    @property
    def selects(self) -> bool:
        """True when the parser reads columns that are not kept (phantom columns)."""
        return bool(self.empty)

    @property
    def skips(self) -> bool:
        """True when the parser skips file columns (metadata beside the data, an index)."""
        return bool(self.keep) and self.parse_cols != list(range(self.width))


@dataclass
class Plan:
    """A recogniser's answer: where the parts of the file are (0-based columns, 1-based lines).

    Attributes
    ----------
    layout : str
    delimiter, decimal
        As in :class:`Dialect`.
    header_line : int or None
    data_line : int
    width : int
        Fields per data row.
    raw_names : list of str
        Header text of every file column ("" where there is none).
    unit_words : list of str or None
        A unit per file column given apart from the names (a units row or line).
    metadata : dict
    metadata_lines : list of int
    drop : dict
        File column -> reason it is not a signal (sample index, empty).
    empty : list of int
        Dropped file columns that must be empty in every row.
    time_column : int or None
        File column of the time base when the layout says so.
    notes : list of str
    """

    layout: str
    delimiter: str | None
    decimal: str
    header_line: int | None
    data_line: int
    width: int
    raw_names: list
    unit_words: list | None = None
    metadata: dict = field(default_factory=dict)
    metadata_lines: list = field(default_factory=list)
    drop: dict = field(default_factory=dict)
    empty: list = field(default_factory=list)
    time_column: int | None = None
    notes: list = field(default_factory=list)


# --------------------------------------------------------------------------- decoding

def _decode_head(raw: bytes, path: str, encoding: str | None = None):
    """Text of the first bytes and the encoding read. ``(None, 'gzip')`` for gzip data."""
    if raw[:2] == b"\x1f\x8b":
        return None, "gzip"
    if raw[:4] == b"PK\x03\x04":
        raise CaptureFormatError(
            "this is a ZIP archive, not a text capture; unpack it and pass the CSV inside",
            path=path)
    if encoding is not None:
        try:
            return raw.decode(encoding, errors="replace"), encoding
        except LookupError:
            raise CaptureFormatError(f"unknown text encoding {encoding!r}; give a name such as "
                                     "utf-8, utf-16, cp1252 or latin-1", path=path,
                                     field="encoding") from None
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
                "read reliably; save it as UTF-8 (or UTF-16 with a byte-order mark), or give "
                "its encoding (`encoding`, e.g. utf-16-le)", path=path)
        raise CaptureFormatError(
            "the file holds binary data (NUL bytes), not delimited text; export the capture "
            "as CSV, or give a .cfg/.dat COMTRADE pair, .npy or .parquet", path=path)
    try:
        return raw.decode("utf-8"), "utf-8"
    except UnicodeDecodeError as exc:
        if exc.start >= len(raw) - 4:  # a multi-byte character cut by the sniff window
            return raw[: exc.start].decode("utf-8"), "utf-8"
        return raw.decode("latin-1"), "latin-1"


def _damaged_gzip(path, exc) -> CaptureFormatError:
    # without this, EOFError from a cut-short archive reaches the command line as a bare
    # "Aborted!" (click treats EOFError as an interrupt)
    return CaptureFormatError(
        f"the file is gzip-compressed but damaged or cut short ({exc}); compress it again or "
        "pass the uncompressed CSV", path=path)


def read_head(path: str, encoding: str | None = None):
    """``(lines, encoding, compression)`` of the first bytes of a text capture."""
    with open(path, "rb") as fh:
        raw = fh.read(_SNIFF_BYTES)
    if not raw.strip():
        raise CaptureFormatError("the file is empty; export the capture again", path=path)
    text, enc = _decode_head(raw, path, encoding)
    compression = None
    if enc == "gzip":
        compression = "gzip"
        try:
            with gzip.open(path, "rb") as fh:
                raw = fh.read(_SNIFF_BYTES)
        except (OSError, EOFError, zlib.error) as exc:
            raise _damaged_gzip(path, exc) from None
        if raw[:2] == b"\x1f\x8b":
            raise CaptureFormatError(
                "the file is gzip-compressed twice (a gzip file inside a gzip file); "
                "decompress it once (gunzip) and pass the result", path=path)
        if not raw.strip():
            raise CaptureFormatError("the compressed file is empty; export the capture again",
                                     path=path)
        text, enc = _decode_head(raw, path, encoding)
    # Split only where pandas does (\n, \r\n, \r): str.splitlines also breaks at \x0b, \x0c,
    # \x1c-\x1e and \x85 (an ellipsis in a cp1252 file read as Latin-1), which would shift
    # every line number after it.
    lines = re.split(r"\r\n|\r|\n", text)
    if len(raw) >= _SNIFF_BYTES and len(lines) > 1:
        lines = lines[:-1]  # the last line may be cut by the sniff window
    return lines[:_SNIFF_LINES], enc, compression


# --------------------------------------------------------------------------- cells

def numeric_fields(fields, decimal) -> bool:
    """Every field a number or empty, and at least one not empty."""
    rx = _NUM_COMMA_RE if decimal == "," else _NUM_RE
    return all(rx.match(f) for f in fields) and any(f.strip() for f in fields)


def _is_number(text: str, decimal: str = ".") -> bool:
    rx = _NUM_COMMA_RE if decimal == "," else _NUM_RE
    return bool(text.strip()) and bool(rx.match(text))


def split_unit(raw_name: str):
    """``'ia [A]'`` -> ``('ia', 'A', 1.0)``; unknown units are kept in the name."""
    name = raw_name.strip().strip('"').strip("'").strip()
    m = re.match(r"^(.*?)\s*[\[(]\s*([^\])]+?)\s*[\])]\s*$", name)
    if m and m.group(2).lower() in UNIT_SCALE:
        unit, scale = UNIT_SCALE[m.group(2).lower()]
        return m.group(1).strip() or name, unit, scale
    m = re.match(r"^(.*?)\s*/\s*([A-Za-zµμ]+)$", name)
    if m and m.group(2).lower() in UNIT_SCALE:
        unit, scale = UNIT_SCALE[m.group(2).lower()]
        return m.group(1).strip(), unit, scale
    m = _TIME_UNDERSCORE.match(name)  # time_s, t_ms: only for time, ia_a is phase a
    if m:
        unit, scale = UNIT_SCALE[m.group(2).lower()]
        return name, unit, scale
    if TIME_NAMES.match(name) and name.lower().startswith("second"):
        return name, "s", 1.0
    return name, "", 1.0


def unit_word(text: str):
    """``'Volt'`` -> ``('V', 1.0)``; None when ``text`` is not a unit word."""
    w = text.strip().strip('"').strip("[]()").strip().lower()
    return UNIT_WORDS.get(w)


def _is_index_word(text: str) -> bool:
    return text.strip().strip('"').lower() in INDEX_WORDS


_PREFIX = re.compile(r"^\s*[A-Za-z][\w .-]{0,20}:\s*(?=[-+.\d])")


def parse_value_with_unit(text: str):
    """``'50 us'`` -> (5e-05, 's'); ``'20 kHz'`` -> (20000.0, 'hz'); ``'CH1:2.0E-06'`` ->
    (2e-06, ''); None if not a number."""
    text = _PREFIX.sub("", text.strip().strip('"'))  # a channel prefix (CH1:, Analog:)
    m = re.match(rf"^\s*({_NUM}|{_NUM_COMMA})\s*([A-Za-zµμ/]*)\s*$", text.strip())
    if not m:
        return None
    value = float(m.group(1).replace(",", "."))
    unit = m.group(2).lower()
    if unit in ("s", "sec", "ms", "us", "µs", "μs", "ns"):
        return value * UNIT_SCALE[unit][1], "s"
    if unit in ("hz", "sa/s", "s/s", "sps"):
        return value, "hz"
    if unit in ("khz", "ksa/s", "ks/s", "ksps"):
        return value * 1e3, "hz"
    if unit in ("mhz", "msa/s", "ms/s", "msps"):
        return value * 1e6, "hz"
    if unit == "":
        return value, ""
    return None


_KEY_TIME_UNIT = (("nanosecond", 1e-9), ("microsecond", 1e-6), ("millisecond", 1e-3),
                  ("second", 1.0), ("(ns)", 1e-9), ("(us)", 1e-6), ("(µs)", 1e-6),
                  ("(ms)", 1e-3), ("(s)", 1.0), ("[ns]", 1e-9), ("[us]", 1e-6),
                  ("[µs]", 1e-6), ("[ms]", 1e-3), ("[s]", 1.0))


def declared_interval(meta: dict):
    """``(interval [s], key)`` declared in metadata, or None."""
    for key, value in meta.items():
        k = key.lower().replace("_", " ").replace("-", " ")
        parsed = parse_value_with_unit(str(value))
        if parsed is None:
            continue
        number, unit = parsed
        if not number > 0:
            continue
        key_scale = next((s for w, s in _KEY_TIME_UNIT if w in k), None)
        if any(w in k for w in ("sample interval", "sampling interval", "time step", "increment",
                                "sample period", "sampling period", "per sample",
                                "time per point", "horizontal interval", "x increment",
                                "hresolution", "horizontal resolution",
                                "xincrement", "delta t", "deltat")) or k in ("dt", "ts"):
            if unit == "s":
                return number, key
            if unit == "":
                return number * (key_scale or 1.0), key
            if unit == "hz":
                return 1.0 / number, key
        if any(w in k for w in ("sample rate", "sampling rate", "samplerate", "samples per second",
                                "sampling frequency", "sample frequency")) or k == "fs":
            if unit in ("hz", ""):
                return 1.0 / number, key
            if unit == "s":
                return number, key
        # a key about sampling whose value carries its unit ("Sampling,10us", "Sampling,
        # 100 kS/s"): the unit says whether it is an interval or a rate
        if k.startswith("sampl") or k in ("interval", "sampling time"):
            if unit == "s":
                return number, key
            if unit == "hz":
                return 1.0 / number, key
    return None


def declared_rate(meta: dict):
    """Sample rate declared in metadata, or None. [Hz]"""
    found = declared_interval(meta)
    return None if found is None else 1.0 / found[0]


def declared_start(meta: dict) -> float:
    """Time of the first sample declared in metadata (``Start``, ``t0``), else 0. [s]"""
    for key, value in meta.items():
        k = key.lower().replace("_", " ").strip()
        if k in ("start", "start time", "t0", "x start", "xstart", "time offset"):
            parsed = parse_value_with_unit(str(value))
            if parsed is not None and parsed[1] in ("s", ""):
                return parsed[0]
    return 0.0


def metadata_of(lines, delimiter):
    """Key/value pairs of metadata lines (``key;value``, ``key: value``, ``key = value``)."""
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


# --------------------------------------------------------------------------- layouts

def _step_over_bad_rows(lines, counts, startl, k, delim, decimal):
    """Extend a data block that starts at ``startl`` upward over malformed data rows.

    Without this a bad row among the sniffed lines (a cell that is not a number, a missing or
    extra field) ends the block and is taken for the header: the real header and the rows
    above are lost and the error no longer names the bad line. A row is stepped over when it
    lies between numeric rows of ``k`` fields and holds at least one number (metadata never
    sits between data rows; in a two-column file a bad row is half text), or when it is
    mostly numeric under a text header of ``k`` fields; the parser then refuses it with its
    line number.
    """
    rx = _NUM_COMMA_RE if decimal == "," else _NUM_RE
    while startl >= 2:
        fields = [f for f in lines[startl - 1].split(delim) if f.strip()]
        good = sum(1 for f in fields if rx.match(f))
        above = lines[startl - 2].split(delim)
        if good and len(above) == k and numeric_fields(above, decimal):
            startl -= 1
            while startl > 0 and counts[startl - 1] == k and numeric_fields(
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


def _refuse_mixed_delimiters(line, delim, k, startl, path):
    """Refuse a file whose rows switch delimiter: without this the rows above the switch are
    taken for metadata and silently dropped. ``line`` is the line just above the data block
    that starts at 0-based line ``startl``."""
    for other in DELIM_NAMES:
        fields = line.split(other)
        if other == delim or len(fields) != k:
            continue
        if numeric_fields(fields, ".") or numeric_fields(fields, ","):
            raise CaptureFormatError(
                f"the values are separated by {DELIM_NAMES[other]} up to line {startl} and "
                f"by {DELIM_NAMES[delim]} from line {startl + 1} (mixed delimiters); "
                "use one delimiter throughout, e.g. export the capture again",
                path=path, line=startl + 1)


def _last_nonblank(lines) -> int:
    end = len(lines)
    while end > 0 and not lines[end - 1].strip():
        end -= 1
    return end


def _data_block(lines):
    """The longest trailing run of numeric rows over the delimiters and decimal marks:
    ``(delimiter, decimal, first row 0-based, fields)`` or None."""
    best = None
    end0 = _last_nonblank(lines)
    if end0 == 0:
        return None
    for delim in (",", ";", "\t"):
        counts = [len(line.split(delim)) if line.strip() else 0 for line in lines]
        for decimal in ((".",) if delim == "," else (".", ",")):
            end = end0
            k = counts[end - 1]
            if k < 2:
                continue
            startl = end
            while startl > 0 and counts[startl - 1] == k and numeric_fields(
                lines[startl - 1].split(delim), decimal
            ):
                startl -= 1
            # a truncated final line: allow the last line to be short
            if startl == end and end >= 2:
                k = counts[end - 2]
                startl = end - 1
                while startl > 0 and counts[startl - 1] == k and k >= 2 and numeric_fields(
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
    return None if best is None else best[1:]


def _single_column(lines, path) -> Plan:
    end = _last_nonblank(lines)
    startl = end
    while startl > 0 and (_NUM_RE.match(lines[startl - 1]) or _NUM_COMMA_RE.match(
            lines[startl - 1])) and lines[startl - 1].strip():
        startl -= 1
    if startl == end:
        last = lines[end - 1].strip() if end else ""
        shown = last if len(last) <= 60 else last[:57] + "..."
        words = last.split()
        spaced = len(words) >= 2 and all(_NUM_RE.match(w) for w in words)
        raise CaptureFormatError(
            "no rows of numbers found in the first lines"
            + (f" (this one reads {shown!r})" if shown else "")
            + "; a capture needs a header line and data rows of plain numbers (12.5, "
            "-3e-4, or 0,25 with ; or tab between values) separated by commas, semicolons "
            "or tabs: dates, clock times, thousands separators and spaces between values "
            "are not read"
            + ("; these rows are numbers separated by spaces (numpy.savetxt's default "
               "delimiter): write the file with delimiter=',' or a tab" if spaced else ""),
            path=path, line=max(end, 1))
    decimal = "," if any("," in line for line in lines[startl:end]) else "."
    header = startl - 1 if startl > 0 else None
    return Plan("header", None, decimal, None if header is None else header + 1, startl + 1, 1,
                [lines[header] if header is not None else ""],
                metadata=metadata_of(lines[: header if header is not None else startl], None),
                metadata_lines=[i + 1 for i in range(header if header is not None else startl)
                                if lines[i].strip()])


def header_layout(lines, path) -> Plan:
    """The generic layout: metadata lines, a header line, data rows (always recognises)."""
    block = _data_block(lines)
    if block is None:
        return _single_column(lines, path)
    delim, decimal, startl, k = block
    header_idx = None
    if startl > 0:
        cand = lines[startl - 1]
        fields = cand.split(delim)
        if len(fields) == k and not numeric_fields(fields, decimal):
            header_idx = startl - 1
        elif cand.strip():
            _refuse_mixed_delimiters(cand, delim, k, startl, path)
        else:
            # blank lines between the header (or a units row) and the data: the header is the
            # line above them when it has as many fields and three or more of them, or is a
            # row of units (a two-field "key,value" line above a gap stays metadata)
            h = startl - 1
            while h > 0 and not lines[h - 1].strip():
                h -= 1
            if h > 0:
                above = lines[h - 1].split(delim)
                if len(above) == k and not numeric_fields(above, decimal) and (
                        k >= 3 or all(unit_word(c) for c in above)):
                    header_idx = h - 1
    raw = lines[header_idx].split(delim) if header_idx is not None else [""] * k
    top = header_idx if header_idx is not None else startl
    return Plan("header", delim, decimal, None if header_idx is None else header_idx + 1,
                startl + 1, k, raw, metadata=metadata_of(lines[:top], delim),
                metadata_lines=[i + 1 for i in range(top) if lines[i].strip()])


def names_values_layout(lines, path) -> Plan | None:
    """A names line with ``Start`` and ``Increment`` cells, a units-and-values line under it,
    then rows numbered by a sample index (``X,CH1,CH2,Start,Increment,`` /
    ``Sequence,Volt,Volt,-0.01,2e-06`` / ``0,0.12,0.3,``)."""
    for i in range(min(len(lines) - 2, 20)):
        for delim in (",", ";", "\t"):
            names = [f.strip().strip('"') for f in lines[i].split(delim)]
            low = [n.lower() for n in names]
            if "start" not in low or "increment" not in low:
                continue
            values = [f.strip().strip('"') for f in lines[i + 1].split(delim)]
            js, ji = low.index("start"), low.index("increment")
            if max(js, ji) >= len(values) or not (_is_number(values[js])
                                                   and _is_number(values[ji])):
                continue
            block = _data_block(lines[i + 2:])
            if block is None or block[0] != delim or block[2] != 0:
                continue
            k = block[3]
            ncol = min(js, ji)  # the signal names come before Start and Increment
            plan = Plan("names-values", delim, block[1], i + 1, i + 3, k,
                        (names[:ncol] + [""] * k)[:k],
                        unit_words=(values[:ncol] + [""] * k)[:k],
                        metadata={names[js]: values[js], names[ji]: values[ji]},
                        metadata_lines=[i + 1, i + 2] + [j + 1 for j in range(i) if
                                                         lines[j].strip()])
            plan.metadata.update(metadata_of(lines[:i], delim))
            for j in range(k):
                if j < ncol and _is_index_word(plan.unit_words[j]):
                    plan.drop[j] = "sample index"
                elif j >= ncol:
                    plan.drop[j] = "empty (trailing delimiter)"
                    plan.empty.append(j)
            if ncol and not _is_index_word(plan.unit_words[0]) and (
                    unit_word(plan.unit_words[0]) or ("", 0))[0] == "s":
                plan.time_column = 0
            plan.notes.append(f"sample interval from 'Increment' ({values[ji]}) and first "
                              f"sample time from 'Start' ({values[js]}) on line {i + 2}")
            return plan
    return None


def beside_layout(lines, path) -> Plan | None:
    """``key,value`` pairs in the first columns and samples in later columns of the same
    lines, from line 1, with no header (``Sample Interval,4e-06,,0.000004,0.02``)."""
    end = _last_nonblank(lines)
    body = [ln for ln in lines[:end]]
    if len(body) < 4:
        return None
    for delim in (",", ";", "\t"):
        rows = [ln.split(delim) for ln in body]
        k = len(rows[0])
        if k < 3 or any(len(r) != k for r in rows if "".join(r).strip()):
            continue
        filled = [r for r in rows if "".join(r).strip()]
        kk = k  # columns after the last one with a value in some row are phantom columns
        while kk > 0 and all(not r[kk - 1].strip() for r in filled):
            kk -= 1
        for decimal in ((".",) if delim == "," else (".", ",")):
            for j in range(1, kk):
                tail_ok = all(all(_is_number(c, decimal) for c in r[j:kk]) for r in filled)
                if not tail_ok:
                    continue
                texty = [n for n, r in enumerate(rows) if r[0].strip()
                         and not _is_number(r[0], decimal)]
                if len(texty) < 2:
                    break  # plain numeric rows: the generic layout reads them
                # the metadata fill the first lines only; below them the first columns are
                # empty (text in column 1 of every row is a text column, not metadata)
                top = texty[-1] + 1
                if texty != list(range(len(texty))) or top > len(rows) // 2 or any(
                        any(c.strip() for c in r[:j]) for r in rows[top:]):
                    break
                meta, meta_lines = {}, []
                for n, r in enumerate(rows):
                    if r[0].strip() and not _is_number(r[0], decimal):
                        meta[r[0].strip().strip('"')] = next(
                            (c.strip().strip('"') for c in r[1:j] if c.strip()), "")
                        meta_lines.append(n + 1)
                m = kk - j
                src = next((v for key, v in meta.items() if key.lower() in
                            ("source", "channel", "trace")), "")
                names = [""] * j
                names.append("time" if m >= 2 else (src or "CH1"))
                for n in range(1, m):
                    names.append(src if (m == 2 and src) else f"CH{n}")
                names += [""] * (k - kk)
                units = [""] * k
                hu = next((v for key, v in meta.items() if "horizontal unit" in key.lower()),
                          "s")
                vu = next((v for key, v in meta.items() if "vertical unit" in key.lower()), "")
                if m >= 2:
                    units[j] = hu
                for n in range(j + (1 if m >= 2 else 0), kk):
                    units[n] = vu
                plan = Plan("metadata-beside-data", delim, decimal, None, 1, k, names,
                            unit_words=units, metadata=meta, metadata_lines=meta_lines)
                for n in range(j):
                    plan.drop[n] = "metadata beside the data"
                tcol = [float(r[j]) for r in filled]
                if m >= 2 and all(b > a for a, b in zip(tcol, tcol[1:])):
                    plan.time_column = j
                elif m >= 2:  # not increasing: not a time column, every column a signal
                    names[j:kk] = [f"CH{n + 1}" for n in range(m)]
                    units[j] = vu
                plan.notes.append(f"metadata in columns 1-{j}, samples in columns {j + 1}-{kk} "
                                  "of the same lines")
                return plan
    return None


LAYOUTS = [
    ("names-values", names_values_layout),
    ("metadata-beside-data", beside_layout),
    ("header", header_layout),
]
"""Recognisers tried in order: ``(name, f(lines, path) -> Plan | None)``; the generic
``header`` layout last (it always answers)."""


# --------------------------------------------------------------------------- refiners

_COMMENT_MARK = re.compile(r"^\s*#\s*(?=\S)")


def comment_marked_header(plan: Plan, lines, path) -> None:
    """A header line that starts with ``#`` and a name (``# time_s,ia,va``, as
    ``numpy.savetxt`` writes its ``header`` by default): the ``#`` is a comment mark, not
    part of the first name. A ``#`` alone (a sample-number column) stays a name."""
    if plan.header_line is None or not plan.raw_names:
        return
    first = plan.raw_names[0]
    m = _COMMENT_MARK.match(first)
    if m is None:
        return
    plan.raw_names = [first[m.end():], *plan.raw_names[1:]]
    plan.notes.append(f"header line {plan.header_line} starts with '#', read as a comment "
                      "mark before the names (numpy.savetxt writes its header so)")


def units_row(plan: Plan, lines, path) -> None:
    """A units row under the header (``x-axis,1,2`` then ``second,Volt,Volt``): the header
    is the line above it, the units come from it."""
    if plan.header_line is None or plan.unit_words is not None or plan.header_line < 2:
        return
    cells = plan.raw_names
    if not all(unit_word(c) or not c.strip() for c in cells) or not any(c.strip()
                                                                          for c in cells):
        return
    # a unit written out (second, Volt, Amp): a header of bare symbols (V, A) stays a header
    if not any(len(c.strip().strip('"')) >= 3 for c in cells if c.strip()):
        return
    above = lines[plan.header_line - 2].split(plan.delimiter) if plan.delimiter else []
    if len(above) != plan.width or not any(c.strip() and not _is_number(c, plan.decimal)
                                           for c in above):
        return
    plan.unit_words = list(cells)
    plan.raw_names = above
    plan.notes.append(f"units row on line {plan.header_line} under the names on line "
                      f"{plan.header_line - 1}")
    plan.header_line -= 1
    plan.metadata_lines = [n for n in plan.metadata_lines if n < plan.header_line]
    plan.metadata = metadata_of(lines[: plan.header_line - 1], plan.delimiter)


def phantom_columns(plan: Plan, lines, path) -> None:
    """Columns with no name whose cells are empty in every sniffed row (a delimiter at the
    end of every row): dropped, and checked empty in every row when parsed."""
    if plan.delimiter is None:
        return
    rows = [ln.split(plan.delimiter) for ln in lines[plan.data_line - 1:] if ln.strip()]
    for j in range(plan.width):
        if j in plan.drop or (j < len(plan.raw_names) and plan.raw_names[j].strip()):
            continue
        if all(len(r) > j and not r[j].strip() for r in rows):
            plan.drop[j] = "empty (trailing delimiter)"
            plan.empty.append(j)


REFINERS = [comment_marked_header, units_row, phantom_columns]
"""Adjustments applied to every plan, in order: ``f(plan, lines, path)``."""


# --------------------------------------------------------------------------- finish

def finish(plan: Plan, encoding: str, compression, path) -> Dialect:
    """The :class:`Dialect` of a plan: names and units split, duplicate names refused."""
    keep = [j for j in range(plan.width) if j not in plan.drop]
    names, units, scales = [], [], []
    file_names = []
    for j in range(plan.width):
        raw = plan.raw_names[j] if j < len(plan.raw_names) else ""
        name, unit, scale = split_unit(raw)
        if plan.unit_words is not None and j < len(plan.unit_words):
            uw = unit_word(plan.unit_words[j])
            if uw is not None and not unit:
                unit, scale = uw
        name = name or f"col{j + 1}"
        file_names.append(name if j not in plan.drop else f"(column {j + 1})")
        if j in plan.drop:
            continue
        if name in names:
            first = keep[names.index(name)] + 1
            raise CaptureFormatError(
                f"column name {name!r} appears twice (columns {first} and {j + 1}); pqcheck "
                "does not guess which is which: rename one in the header line",
                path=path, line=plan.header_line, field=name)
        names.append(name)
        units.append(unit)
        scales.append(scale)
    if not keep:
        raise CaptureFormatError("no data columns found", path=path, line=plan.data_line)
    time_index = keep.index(plan.time_column) if plan.time_column in keep else None
    notes = list(plan.notes)
    for j, why in sorted(plan.drop.items()):
        if why != "metadata beside the data":
            raw = plan.raw_names[j].strip() if j < len(plan.raw_names) else ""
            notes.append(f"column {j + 1}{f' ({raw})' if raw else ''} not read: {why}")
    return Dialect(
        encoding=encoding, delimiter=plan.delimiter, decimal=plan.decimal,
        header_line=plan.header_line, data_line=plan.data_line, n_columns=len(keep),
        names=tuple(names), units=tuple(units), scales=tuple(scales),
        metadata=dict(plan.metadata), compression=compression, layout=plan.layout,
        width=plan.width, keep=tuple(keep), file_names=tuple(file_names),
        empty=tuple(sorted(plan.empty)), time_index=time_index,
        metadata_lines=tuple(plan.metadata_lines), notes=tuple(notes))


def sniff(path, *, encoding: str | None = None) -> Dialect:
    """Work out the layout of a delimited capture file from its first lines.

    Parameters
    ----------
    path : str or Path
    encoding : str or None
        Text encoding; None detects it (byte-order marks, UTF-8, else Latin-1).

    Raises
    ------
    CaptureFormatError
        Empty, binary or doubly compressed file; no numeric data rows found; a column name
        repeated.
    """
    path = str(path)
    lines, enc, compression = read_head(path, encoding)
    plan = None
    for _name, recognise in LAYOUTS:
        plan = recognise(lines, path)
        if plan is not None:
            break
    for refine in REFINERS:
        refine(plan, lines, path)
    return finish(plan, enc, compression, path)
