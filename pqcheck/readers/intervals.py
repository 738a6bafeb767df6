"""Interval logs: one row per aggregation interval, harmonic values per phase.

A recorder's interval log (or the log ``pqcheck aggregate`` writes) is delimited text: optional
``# key = value`` lines, a header, then one row per interval. This module reads it into a
:class:`~pqcheck.survey.Survey` and writes the canonical layout.

Timestamp
    One column, ISO 8601 with or without a UTC offset (``2026-03-02T10:00:00+01:00``,
    ``2026-03-02 10:00:00``), or a date column and a time column (ISO dates, or
    ``dd.mm.yyyy``). Column names: ``timestamp``, ``time``, ``datetime``, ``date`` + ``time``,
    ``start``, ``interval start``, ``end``, ``interval end`` (an ``end`` column, or a
    ``# timestamp = end`` line, says the stamps mark the end of each interval). Times with an
    offset are converted to UTC; times without one are in the ``timezone`` given (an IANA name
    such as ``Europe/Berlin``), or kept as written when none is given.

Canonical value columns (what ``pqcheck aggregate`` writes)
    ``I<h>_<phase> [A]``, ``V<h>_<phase> [V]`` (order h = 1 .. 50, phase ``a``, ``b``, ``c`` or
    ``n``), ``THD_I_<phase> [%]``, ``THD_V_<phase> [%]``, ``TDD_<phase> [%]``,
    ``P_<phase> [W]``, optional ``flag`` (0/1: IEC 61000-4-30 flag) and ``interval_s`` (rows of
    several aggregation levels may share one file), or a ``# interval_s = 600`` line.

Variations read
    ``U`` for voltage; phases ``L1 L2 L3 N`` or ``A B C``; the order as ``H5``, ``h05`` or
    after the letter (``I5``); separators ``_``, space, ``-`` or ``.``; ``Ia H5``,
    ``I L1 h05 [A]``, ``U_L1_H3``, ``THDi L1``, ``THD U L2``; units in ``[ ]`` or ``( )`` with
    k/m prefixes (kV, kA, mA, kW); harmonic columns in ``%`` (of the fundamental), converted with
    the fundamental's column of the same quantity and phase (voltage harmonics without one are
    kept relative, fundamental = 100). Columns of a minimum or maximum (``max``, ``min``) and
    anything else not recognised are not used; :func:`column_map` tells how each column was
    read, and a mapping file (TOML) maps any other name.

Mapping file
    ::

        [columns]
        "Strom L1 Oberschw. 5" = "I5_a [A]"   # a canonical name (with its unit)
        "Zeitstempel" = "timestamp"
        "Kommentar" = ""                     # not used

        [log]
        interval_s = 600
        timestamp = "start"                  # or "end"
        timezone = "Europe/Berlin"

Interval length
    From an ``interval_s`` column, the ``# interval_s`` line, the mapping file or the
    ``interval_s`` argument, else the median step of the timestamps. The steps are checked:
    a step longer than 1.5 intervals is a gap (a finding naming it and the intervals missing),
    a step that is not a whole number of intervals is an irregularity.
"""

from __future__ import annotations

import io
import math
import re
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..errors import CaptureFormatError
from ..findings import Finding
from ..survey import IntervalSeries, Survey, SurveyChannel, format_time, level_name

__all__ = ["ColumnMeaning", "parse_column", "column_map", "looks_like_interval_log",
           "read_interval_log", "read_interval_logs", "canonical_name", "interval_frame",
           "INTERVAL_SUFFIXES"]

INTERVAL_SUFFIXES = (".csv", ".txt", ".tsv", ".log")
_HEAD_LINES = 60
_PHASES = {"a": "a", "b": "b", "c": "c", "n": "n", "l1": "a", "l2": "b", "l3": "c",
           "ph1": "a", "ph2": "b", "ph3": "c", "r": "a", "s": "b", "t": "c"}
_QTY = {"i": "current", "u": "voltage", "v": "voltage"}
_SCALE = {"a": 1.0, "ka": 1e3, "ma": 1e-3, "v": 1.0, "kv": 1e3, "mv": 1e-3, "w": 1.0,
          "kw": 1e3, "mw": 1e6, "": 1.0, "%": 1.0}
_NEUTRAL_TOKENS = {"rms", "avg", "mean", "val", "value", "harm", "harmonic", "harmonics",
                   "order", "phase", "ph", "h"}
_TIME_NAMES = {"timestamp", "time", "datetime", "date time", "date_time", "time stamp",
               "start", "interval start", "start time", "end", "interval end", "end time",
               "utc", "local time", "zeit"}


@dataclass(frozen=True)
class ColumnMeaning:
    """What a log column holds.

    Attributes
    ----------
    kind : str
        ``harmonic``, ``thd``, ``tdd``, ``power``, ``flag``, ``interval``, ``timestamp``,
        ``date``, ``time`` or ``unused``.
    quantity : str
        ``current``, ``voltage`` or "".
    phase : str
        ``a``, ``b``, ``c``, ``n`` or "" (single-phase).
    order : int or None
    percent : bool
        Harmonic value in % of the fundamental.
    scale : float
        Factor to SI (kV -> 1000). [unitless]
    why : str
        For ``unused``: why.
    """

    kind: str
    quantity: str = ""
    phase: str = ""
    order: int | None = None
    percent: bool = False
    scale: float = 1.0
    why: str = ""

    def describe(self) -> str:
        ph = f" phase {self.phase}" if self.phase else ""
        if self.kind == "harmonic":
            what = "fundamental" if self.order == 1 else f"harmonic {self.order}"
            unit = "% of the fundamental" if self.percent else ("A" if self.quantity ==
                                                                "current" else "V")
            return f"{self.quantity} {what}{ph} [{unit}]" + (
                f" x {self.scale:g}" if self.scale != 1 else "")
        if self.kind in ("thd", "tdd"):
            return f"{self.kind.upper()} {self.quantity}{ph} [%]".replace("  ", " ")
        if self.kind == "power":
            return f"active power{ph} [W]" + (f" x {self.scale:g}" if self.scale != 1 else "")
        if self.kind == "unused":
            return f"not used ({self.why})"
        return self.kind


_UNIT_RE = re.compile(r"\s*[\[(]\s*([^\])]*)\s*[\])]\s*$")


def parse_column(name: str) -> ColumnMeaning:
    """How a column name is read (see the module docstring).

    Examples
    --------
    >>> parse_column("I5_a [A]").describe()
    'current harmonic 5 phase a [A]'
    >>> parse_column("U_L1_H3").describe()
    'voltage harmonic 3 phase a [V]'
    >>> parse_column("Ia H5").order, parse_column("I L1 h05 [A]").phase
    (5, 'a')
    """
    raw = str(name).strip()
    unit = ""
    m = _UNIT_RE.search(raw)
    if m:
        unit = m.group(1).strip().lower()
        raw = raw[: m.start()]
    low = raw.lower().strip()
    if "%" in low:
        unit, low = "%", low.replace("%", " ")
    if low in _TIME_NAMES:
        kind = "timestamp"
        if low == "date":
            kind = "date"
        return ColumnMeaning(kind, why=low)
    if low == "date":
        return ColumnMeaning("date")
    if low in ("flag", "flagged", "flags"):
        return ColumnMeaning("flag")
    if low in ("complete", "valid"):
        return ColumnMeaning("complete")
    if low in ("interval_s", "interval s", "interval", "interval length", "duration",
               "duration_s"):
        return ColumnMeaning("interval")
    tokens = re.findall(r"[a-z]+\d*|\d+", low)
    kind = quantity = phase = ""
    order = None
    for tok in tokens:
        if tok in _NEUTRAL_TOKENS:
            continue
        if tok in ("max", "min", "maximum", "minimum"):
            return ColumnMeaning("unused", why=f"a {tok} value, not the interval's value")
        mt = re.fullmatch(r"(thd|tdd)(i|u|v)?", tok)
        if mt:
            kind = mt.group(1)
            if mt.group(2):
                quantity = _QTY[mt.group(2)]
            continue
        mh = re.fullmatch(r"h(\d{1,3})", tok)
        if mh:
            order = int(mh.group(1))
            continue
        mq = re.fullmatch(r"(i|u|v)(\d{1,3})?(l[123]|[abcn])?", tok)
        if mq:
            quantity = _QTY[mq.group(1)]
            if mq.group(2):
                order = int(mq.group(2))
            if mq.group(3):
                phase = _PHASES[mq.group(3)]
            continue
        mp = re.fullmatch(r"p(l[123]|[abcn])?", tok)
        if mp and not kind:
            kind = "power"
            if mp.group(1):
                phase = _PHASES[mp.group(1)]
            continue
        if tok in _PHASES:
            phase = _PHASES[tok]
            continue
        if re.fullmatch(r"\d{1,3}", tok) and order is None and quantity:
            order = int(tok)
            continue
        return ColumnMeaning("unused", why=f"{tok!r} not recognised")
    scale = _SCALE.get(unit)
    if scale is None:
        return ColumnMeaning("unused", why=f"unit {unit!r} not recognised")
    if kind in ("thd", "tdd"):
        if kind == "tdd" and not quantity:
            quantity = "current"
        if not quantity:
            return ColumnMeaning("unused", why="THD of current or voltage? (name I or U/V)")
        return ColumnMeaning(kind, quantity, phase)
    if kind == "power":
        return ColumnMeaning("power", "", phase, scale=scale)
    if quantity and order is not None:
        if order < 1:
            return ColumnMeaning("unused", why="order 0 (dc) is not assessed")
        if unit == "%" and order == 1:
            return ColumnMeaning("unused", why="fundamental in %")
        if unit not in ("%", "") and unit[-1:] != ("a" if quantity == "current" else "v"):
            return ColumnMeaning("unused", why=f"unit {unit!r} does not fit a {quantity}")
        return ColumnMeaning("harmonic", quantity, phase, order, percent=unit == "%",
                             scale=1.0 if unit == "%" else scale)
    return ColumnMeaning("unused", why="no harmonic order or THD/TDD/P in the name")


def canonical_name(meaning: ColumnMeaning) -> str:
    """Canonical column name for a meaning (what ``pqcheck aggregate`` writes)."""
    ph = meaning.phase
    sfx = f"_{ph}" if ph else ""
    if meaning.kind == "harmonic":
        q = "I" if meaning.quantity == "current" else "V"
        return f"{q}{meaning.order}{sfx} [{'A' if q == 'I' else 'V'}]"
    if meaning.kind == "thd":
        return f"THD_{'I' if meaning.quantity == 'current' else 'V'}{sfx} [%]"
    if meaning.kind == "tdd":
        return f"TDD{sfx} [%]"
    if meaning.kind == "power":
        return f"P{sfx} [W]"
    return meaning.kind


# --- reading the text ---------------------------------------------------------------------


@dataclass
class _Text:
    path: str
    meta: dict
    header_line: int  # 1-based
    delimiter: str
    decimal: str
    names: list
    body: str


def _read_text(path) -> _Text:
    p = Path(path)
    try:
        if p.suffix.lower() == ".gz":
            import gzip

            raw = gzip.open(p, "rb").read()
        else:
            raw = p.read_bytes()
    except FileNotFoundError:
        raise CaptureFormatError("file not found; check the path", path=str(p)) from None
    except IsADirectoryError:
        raise CaptureFormatError("is a folder, not an interval log", path=str(p)) from None
    except OSError as exc:
        raise CaptureFormatError(f"cannot read the file: {exc}", path=str(p)) from None
    for enc in ("utf-8-sig", "cp1252"):
        try:
            text = raw.decode(enc)
            break
        except UnicodeDecodeError:
            continue
    lines = text.splitlines()
    meta = {}
    k = 0
    while k < len(lines) and (not lines[k].strip() or lines[k].lstrip().startswith("#")):
        body = lines[k].strip().lstrip("#").strip()
        for sep in ("=", ":"):
            if sep in body:
                key, _, val = body.partition(sep)
                meta[key.strip().lower()] = val.strip().strip('"')
                break
        k += 1
    if k >= len(lines):
        raise CaptureFormatError("no header line: an interval log needs a header with a "
                                 "timestamp column and value columns", path=str(p))
    header = lines[k]
    delim = max((",", ";", "\t"), key=header.count)
    if header.count(delim) == 0:
        raise CaptureFormatError("the header has a single column; an interval log needs a "
                                 "timestamp column and value columns", path=str(p), line=k + 1)
    decimal = "."
    if delim != ",":
        for line in lines[k + 1: k + 6]:
            if re.search(r"\d,\d", line):
                decimal = ","
                break
    import csv

    names = next(csv.reader([header], delimiter=delim))
    names = [n.strip() for n in names]
    return _Text(str(p), meta, k + 1, delim, decimal, names, "\n".join(lines[k + 1:]))


def looks_like_interval_log(path) -> bool:
    """True when a delimited text file's header holds harmonic, THD or TDD columns of
    interval values (waveform captures have sample columns only)."""
    p = Path(path)
    name = p.name.lower()
    if not (name.endswith(INTERVAL_SUFFIXES) or name.endswith(tuple(s + ".gz" for s in
                                                                   INTERVAL_SUFFIXES))):
        return False
    import gzip

    try:
        with (gzip.open(p, "rt", errors="replace") if name.endswith(".gz")
              else open(p, encoding="utf-8", errors="replace")) as fh:
            head = [fh.readline() for _ in range(_HEAD_LINES)]
    except OSError:
        return False
    for line in head:
        s = line.strip()
        if not s:
            continue
        if s.startswith("#"):
            if re.match(r"#\s*interval_s\s*[=:]", s):
                return True
            continue
        delim = max((",", ";", "\t"), key=s.count)
        cols = [c.strip().strip('"') for c in s.split(delim)]
        return any(parse_column(c).kind in ("harmonic", "thd", "tdd") and
                   (parse_column(c).kind != "harmonic" or parse_column(c).order >= 2)
                   for c in cols)
    return False


def _load_mapping(mapping) -> tuple:
    if mapping is None:
        return {}, {}
    if isinstance(mapping, dict):
        return dict(mapping.get("columns", {})), dict(mapping.get("log", {}))
    import tomllib

    p = Path(mapping)
    try:
        data = tomllib.loads(p.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise CaptureFormatError("mapping file not found; check the path", path=str(p)) from None
    except (OSError, UnicodeDecodeError) as exc:
        raise CaptureFormatError(f"cannot read the mapping file: {exc}", path=str(p)) from None
    except tomllib.TOMLDecodeError as exc:
        raise CaptureFormatError(f"not valid TOML: {exc}", path=str(p)) from None
    cols = data.get("columns", {})
    log = data.get("log", {})
    if not isinstance(cols, dict) or not all(isinstance(v, str) for v in cols.values()):
        raise CaptureFormatError("[columns] must map column names to canonical names "
                                 "(strings, \"\" for a column not to use)", path=str(p),
                                 field="columns")
    extra = set(data) - {"columns", "log"}
    if extra:
        raise CaptureFormatError(f"unknown section(s) {sorted(extra)}; use [columns] and [log]",
                                 path=str(p))
    return cols, log


def column_map(names, mapping=None) -> list:
    """(column, :class:`ColumnMeaning`) for each header name, the mapping file first."""
    cols, _ = _load_mapping(mapping)
    out = []
    for n in names:
        if n in cols:
            target = cols[n]
            if target == "":
                out.append((n, ColumnMeaning("unused", why="mapping file")))
                continue
            m = parse_column(target)
            if m.kind == "unused":
                raise CaptureFormatError(f"the mapping of column {n!r} to {target!r} is not a "
                                         f"canonical name ({m.why}); use e.g. 'I5_a [A]'",
                                         path=None if isinstance(mapping, dict) else mapping,
                                         field=f"columns.{n}")
            out.append((n, m))
        else:
            out.append((n, parse_column(n)))
    return out


def _parse_times(text_values, path, line0, tz):
    """POSIX seconds of each stamp, and the zone found ("UTC", "+01:00" or tz or "")."""
    import pandas as pd

    vals = pd.Series(text_values, dtype="string").str.strip()
    try:
        t = pd.to_datetime(vals, format="ISO8601")
    except (ValueError, TypeError):
        try:
            t = pd.to_datetime(vals, format="%d.%m.%Y %H:%M:%S")
        except (ValueError, TypeError):
            bad = _first_bad_time(vals)
            raise CaptureFormatError(
                f"timestamp {vals.iloc[bad]!r} is not ISO 8601 (2026-03-02T10:00:00, with or "
                "without an offset) or dd.mm.yyyy hh:mm:ss", path=path, line=line0 + bad,
                field="timestamp") from None
    except Exception as exc:  # mixed offsets and naive stamps
        raise CaptureFormatError(f"timestamps cannot be read: {exc}", path=path,
                                 field="timestamp") from None
    if t.isna().any():
        bad = int(np.flatnonzero(t.isna().to_numpy())[0])
        raise CaptureFormatError("empty timestamp", path=path, line=line0 + bad,
                                 field="timestamp")
    zone = ""
    if getattr(t.dt, "tz", None) is not None:
        offs = {str(x.utcoffset()) for x in t.iloc[:: max(1, len(t) // 50)]}
        zone = "UTC"
        if len(offs) == 1:
            off = t.iloc[0].utcoffset()
            mins = int(off.total_seconds() // 60)
            if mins:
                zone = f"{'+' if mins >= 0 else '-'}{abs(mins) // 60:02d}:{abs(mins) % 60:02d}"
        t = t.dt.tz_convert("UTC")
    elif tz:
        try:
            t = t.dt.tz_localize(tz, ambiguous="raise", nonexistent="raise").dt.tz_convert("UTC")
        except Exception as exc:
            raise CaptureFormatError(f"timestamps cannot be placed in time zone {tz!r}: {exc}",
                                     path=path, field="timezone") from None
        zone = tz
    else:
        t = t.dt.tz_localize("UTC")
    sec = (t - pd.Timestamp("1970-01-01", tz="UTC")).dt.total_seconds().to_numpy()
    return np.asarray(sec, np.float64), zone


def _first_bad_time(vals) -> int:
    import pandas as pd

    for i, v in enumerate(vals):
        try:
            pd.to_datetime(v, format="ISO8601")
        except (ValueError, TypeError):
            return i
    return 0


def _number(x):
    s = str(x).strip()
    if s == "":
        return None
    m = re.fullmatch(r"([0-9.eE+-]+)\s*([a-zA-Z]*)", s)
    if not m:
        return None
    try:
        v = float(m.group(1))
    except ValueError:
        return None
    u = m.group(2).lower()
    return v * {"": 1, "s": 1, "sec": 1, "min": 60, "h": 3600, "ms": 1e-3}.get(u, math.nan)


def read_interval_log(path, *, timezone: str | None = None, mapping=None,
                      interval_s: float | None = None) -> Survey:
    """Read one interval log.

    Parameters
    ----------
    path : str or Path
    timezone : str or None
        IANA time zone of timestamps written without an offset (``Europe/Berlin``); None keeps
        them as written (taken as UTC inside).
    mapping : str, Path, dict or None
        Mapping file (see the module docstring).
    interval_s : float or None
        Interval length when neither the log nor the mapping gives it. [s]

    Returns
    -------
    Survey

    Raises
    ------
    CaptureFormatError
        No timestamp or value column, a bad timestamp or number (naming the line), two
        columns read as the same quantity, timestamps not increasing.
    """
    import pandas as pd

    txt = _read_text(path)
    cols, log_opts = _load_mapping(mapping)
    meanings = column_map(txt.names, mapping)
    seen = {}
    for name, m in meanings:
        if m.kind in ("harmonic", "thd", "tdd", "power", "flag", "interval", "complete"):
            key = (m.kind, m.quantity, m.phase, m.order)
            if key in seen:
                raise CaptureFormatError(
                    f"columns {seen[key]!r} and {name!r} are both read as {m.describe()}; map "
                    "one of them to \"\" in a mapping file", path=txt.path,
                    line=txt.header_line, field=name)
            seen[key] = name
    tz = timezone or log_opts.get("timezone") or txt.meta.get("timezone") or None
    stamp_at = str(log_opts.get("timestamp") or txt.meta.get("timestamp") or "start").lower()
    try:
        df = pd.read_csv(io.StringIO(txt.body), sep=txt.delimiter, decimal=txt.decimal,
                         header=None, names=txt.names, dtype=str, keep_default_na=False,
                         skip_blank_lines=True, comment=None, engine="c")
    except Exception as exc:  # pandas' parser errors
        raise CaptureFormatError(f"cannot parse the rows: {exc}", path=txt.path) from None
    if df.empty:
        raise CaptureFormatError("no data rows below the header", path=txt.path,
                                 line=txt.header_line)
    line0 = txt.header_line + 1
    # timestamp
    ts_cols = [n for n, m in meanings if m.kind == "timestamp"]
    date_cols = [n for n, m in meanings if m.kind == "date"]
    if ts_cols and ts_cols[0].strip().lower() in ("end", "interval end", "end time"):
        stamp_at = "end"
    if date_cols and ts_cols:
        stamps = df[date_cols[0]].astype(str) + " " + df[ts_cols[0]].astype(str)
    elif ts_cols:
        stamps = df[ts_cols[0]]
    else:
        first = txt.names[0]
        try:
            pd.to_datetime(pd.Series(df[first].iloc[:3]), format="ISO8601")
        except (ValueError, TypeError):
            raise CaptureFormatError(
                "no timestamp column: name it 'timestamp' (ISO 8601), or give 'date' and "
                "'time' columns, or map it in a mapping file", path=txt.path,
                line=txt.header_line) from None
        stamps = df[first]
        meanings[0] = (first, ColumnMeaning("timestamp"))
    t, zone = _parse_times(stamps.to_numpy(), txt.path, line0, tz)
    # values
    def column(name):
        import pandas as pd

        raw = df[name].astype(str).str.strip()
        empty = raw.str.lower().isin(("", "nan", "na", "-", "n/a", "null"))
        if txt.decimal == ",":
            raw = raw.str.replace(".", "", regex=False).str.replace(",", ".", regex=False)
        num = pd.to_numeric(raw.where(~empty, "nan"), errors="coerce")
        bad = num.isna() & ~empty
        if bad.any():
            i = int(np.flatnonzero(bad.to_numpy())[0])
            raise CaptureFormatError(f"{df[name].iloc[i]!r} is not a number", path=txt.path,
                                     line=line0 + i, field=name)
        return num.to_numpy(dtype=np.float64)

    values = {name: column(name) for name, m in meanings
              if m.kind in ("harmonic", "thd", "tdd", "power", "interval")}
    if not any(m.kind in ("harmonic", "thd", "tdd") for _, m in meanings):
        raise CaptureFormatError(
            "no harmonic, THD or TDD column recognised; name them like I5_a [A], V3_b [V], "
            "THD_V_a [%], TDD_a [%] or map them in a mapping file", path=txt.path,
            line=txt.header_line)
    flag = np.zeros(len(df), bool)
    incomplete = np.zeros(len(df), bool)
    for name, m in meanings:
        if m.kind == "complete":
            v = column(name)
            incomplete |= np.isfinite(v) & (v == 0)
        if m.kind == "flag":
            for i, v in enumerate(df[name].to_numpy()):
                s = str(v).strip().lower()
                if s in ("", "0", "false", "no", "n", "0.0"):
                    continue
                if s in ("1", "true", "yes", "y", "1.0", "flagged"):
                    flag[i] = True
                    continue
                raise CaptureFormatError(f"flag {s!r} must be 0 or 1", path=txt.path,
                                         line=line0 + i, field=name)
    # interval lengths
    per_row = None
    for name, m in meanings:
        if m.kind == "interval":
            per_row = values.pop(name)
    declared = interval_s or _number(log_opts.get("interval_s", "")) or _number(
        txt.meta.get("interval_s", "") or txt.meta.get("interval", ""))
    findings = []
    if per_row is not None and np.isfinite(per_row).any():
        if not np.isfinite(per_row).all():
            i = int(np.flatnonzero(~np.isfinite(per_row))[0])
            raise CaptureFormatError("empty interval_s", path=txt.path, line=line0 + i,
                                     field="interval_s")
        groups = sorted(set(np.round(per_row, 3)))
    else:
        if declared is None or not math.isfinite(declared):
            declared = _infer_interval(t, txt.path)
            findings.append(Finding("interval-inferred", "info",
                                    f"{txt.path}: interval length {declared:g} s inferred from "
                                    "the timestamps (the log does not state it)",
                                    value=declared, unit="s"))
        if not declared > 0:
            raise CaptureFormatError(f"interval length must be positive, got {declared!r}",
                                     path=txt.path, field="interval_s")
        per_row = np.full(len(df), float(declared))
        groups = [float(declared)]
    if stamp_at == "end":
        t = t - per_row
    elif stamp_at != "start":
        raise CaptureFormatError(f"timestamp must be 'start' or 'end', got {stamp_at!r}",
                                 path=txt.path, field="timestamp")
    # channels
    chan_keys = []
    for _, m in meanings:
        if m.kind in ("harmonic", "thd", "tdd") and (m.quantity, m.phase) not in chan_keys:
            chan_keys.append((m.quantity, m.phase))
    chan_keys.sort(key=lambda k: (k[0] != "current", "abcn".find(k[1]) if k[1] else -1))
    H = max([m.order for _, m in meanings if m.kind == "harmonic"] + [1])
    n = len(df)
    C = len(chan_keys)
    harm = np.full((n, C, H + 1), np.nan)
    thd = np.full((n, C), np.nan)
    tdd = np.full((n, C), np.nan)
    pw = np.full((n, C), np.nan)
    percent = {}
    for name, m in meanings:
        if m.kind == "harmonic":
            k = chan_keys.index((m.quantity, m.phase))
            if m.percent:
                percent[(k, m.order)] = values[name]
            else:
                harm[:, k, m.order] = values[name] * m.scale
        elif m.kind in ("thd", "tdd"):
            k = chan_keys.index((m.quantity, m.phase))
            (thd if m.kind == "thd" else tdd)[:, k] = values[name]
    units = ["A" if q == "current" else "V" for q, _ in chan_keys]
    for (k, h), v in percent.items():
        f1 = harm[:, k, 1]
        if np.isfinite(f1).any():
            harm[:, k, h] = v / 100.0 * f1
        elif chan_keys[k][0] == "voltage":
            units[k] = "%"
            harm[:, k, 1] = np.where(np.isfinite(harm[:, k, 1]), harm[:, k, 1], 100.0)
            harm[:, k, h] = v
        else:
            units[k] = "%"
            harm[:, k, 1] = 100.0
            harm[:, k, h] = v
    used = []
    for i, (name, m) in enumerate(meanings):
        if m.kind == "power":
            k = next((j for j, (q, ph) in enumerate(chan_keys) if q == "current"
                      and ph == m.phase), None)
            if k is None:
                meanings[i] = (name, ColumnMeaning("unused", why="no current of that phase"))
                continue
            pw[:, k] = values[name] * m.scale
        used.append(name)
    if any(u == "%" for u in units):
        findings.append(Finding(
            "relative-harmonics", "info",
            f"{txt.path}: harmonics of {', '.join(_chan_name(*chan_keys[k]) for k, u in enumerate(units) if u == '%')} "
            "are in % of the fundamental and the log has no fundamental column; they are kept "
            "relative (limits in % of IL cannot be assessed from them)"))
    channels = tuple(SurveyChannel(_chan_name(q, ph), q, ph, units[k])
                     for k, (q, ph) in enumerate(chan_keys))
    all_nan = ~(np.isfinite(harm).any(axis=(1, 2)) | np.isfinite(thd).any(axis=1)
                | np.isfinite(tdd).any(axis=1))
    levels = []
    for g in groups:
        rows = np.flatnonzero(np.isclose(per_row, g, rtol=0, atol=1e-3)) if len(groups) > 1 \
            else np.arange(n)
        tt = t[rows]
        if np.any(np.diff(tt) <= 0):
            j = int(np.flatnonzero(np.diff(tt) <= 0)[0])
            raise CaptureFormatError(
                f"timestamps must increase: {format_time(tt[j + 1], zone)} does not follow "
                f"{format_time(tt[j], zone)}", path=txt.path, line=line0 + int(rows[j + 1]),
                field="timestamp")
        s = IntervalSeries(level=level_name(g), interval_s=float(g), start_s=tt,
                           channels=channels, harmonics=harm[rows], thd_percent=thd[rows],
                           tdd_percent=tdd[rows], power_w=pw[rows], flagged=flag[rows],
                           complete=~(all_nan | incomplete)[rows])
        levels.append(s)
    levels.sort(key=lambda s: s.interval_s)
    from . import file_sha256

    mapping_rows = tuple((name, m.describe()) for name, m in meanings)
    return Survey(levels=tuple(levels), sources=(txt.path,), sha256=(file_sha256(txt.path),),
                  findings=tuple(findings), timezone=zone, origin="interval log",
                  mapping=mapping_rows,
                  settings={"delimiter": txt.delimiter, "decimal": txt.decimal,
                            "header_line": txt.header_line, "timestamp": stamp_at,
                            "metadata": dict(txt.meta), "columns_used": used})


def _chan_name(quantity: str, phase: str) -> str:
    q = "I" if quantity == "current" else "V"
    return f"{q}_{phase}" if phase else q


def _infer_interval(t, path) -> float:
    d = np.diff(np.unique(t))
    if d.size == 0:
        raise CaptureFormatError("a single row: give the interval length (interval_s column, "
                                 "'# interval_s = 600' line, or interval_s)", path=path,
                                 field="interval_s")
    return float(np.round(np.median(d), 3))


def continuity_findings(series: IntervalSeries, tz: str = "") -> list:
    """Gaps and irregular steps between the intervals of one level."""
    out = []
    t = series.start_s
    if t.size < 2:
        return out
    d = np.diff(t)
    L = series.interval_s
    tol = 0.5 * L if series.level == "3s" else max(0.01 * L, 0.5)
    gaps = np.flatnonzero(d > L + tol if series.level == "3s" else d > 1.5 * L)
    for j in gaps[:50]:
        missing = int(round(d[j] / L)) - 1
        out.append(Finding(
            "gap", "warning",
            f"{series.level} values: gap from {format_time(t[j] + L, tz)} to "
            f"{format_time(t[j + 1], tz)} ({d[j] - L:.6g} s, about {missing} interval(s) "
            "missing); the periods holding it count them as missing, not as zero",
            value=float(d[j] - L), unit="s",
            detail={"start": format_time(t[j] + L, tz), "end": format_time(t[j + 1], tz),
                    "missing": missing, "level": series.level}))
    if gaps.size > 50:
        out.append(Finding("gap", "warning", f"{series.level} values: {gaps.size - 50} more "
                           "gap(s) not listed", value=float(gaps.size - 50)))
    if series.level != "3s":
        off = np.abs(d - np.round(d / L) * L) > tol
        n_off = int(np.sum(off))
        if n_off:
            j = int(np.flatnonzero(off)[0])
            out.append(Finding(
                "irregular-intervals", "warning",
                f"{series.level} values: {n_off} step(s) between timestamps are not a whole "
                f"number of {L:g} s intervals (first after {format_time(t[j], tz)}: "
                f"{d[j]:g} s); check the interval length", value=float(n_off)))
    return out


def read_interval_logs(paths, *, timezone: str | None = None, mapping=None,
                       interval_s: float | None = None) -> Survey:
    """Read one or more interval logs into one survey (files of the same level are joined in
    time order and checked for continuity; overlapping files are refused).

    Parameters and Raises as :func:`read_interval_log`; two files whose intervals of the same
    level overlap in time also raise :class:`~pqcheck.errors.CaptureFormatError`.
    """
    surveys = [read_interval_log(p, timezone=timezone, mapping=mapping, interval_s=interval_s)
               for p in paths]
    if not surveys:
        raise CaptureFormatError("no interval log given")
    zones = {s.timezone for s in surveys}
    by_level = {}
    for s in surveys:
        for lv in s.levels:
            by_level.setdefault(lv.level, []).append((lv, s.sources[0]))
    levels = []
    for name, parts in by_level.items():
        parts.sort(key=lambda x: x[0].start_s[0])
        for (a, pa), (b, pb) in zip(parts, parts[1:]):
            if b.start_s[0] < a.start_s[-1] + a.interval_s - 1e-6:
                raise CaptureFormatError(
                    f"its {name} values from {format_time(b.start_s[0])} overlap those of "
                    f"{pa} (to {format_time(a.start_s[-1] + a.interval_s)}); give each "
                    "interval once", path=pb)
        levels.append(_concat([p[0] for p in parts]))
    levels.sort(key=lambda s: s.interval_s)
    tz = zones.pop() if len(zones) == 1 else "UTC"
    findings = [f for s in surveys for f in s.findings]
    for lv in levels:
        findings += continuity_findings(lv, tz)
    from ..survey import survey_findings

    for lv in levels:
        findings += survey_findings(lv)
    mapping_rows = []
    for s in surveys:
        for row in s.mapping:
            if row not in mapping_rows:
                mapping_rows.append(row)
    return Survey(levels=tuple(levels), sources=tuple(x for s in surveys for x in s.sources),
                  sha256=tuple(x for s in surveys for x in s.sha256), findings=tuple(findings),
                  timezone=tz, origin="interval log", mapping=tuple(mapping_rows),
                  settings=surveys[0].settings if len(surveys) == 1 else
                  {"files": [s.settings for s in surveys]})


def _concat(series: list) -> IntervalSeries:
    if len(series) == 1:
        return series[0]
    keys = []
    for s in series:
        for c in s.channels:
            if (c.quantity, c.phase) not in [(k.quantity, k.phase) for k in keys]:
                keys.append(c)
    H = max(s.max_order for s in series)
    C = len(keys)

    def widen(s, arr, shape_tail):
        out = np.full((s.n, C) + shape_tail, np.nan)
        for j, c in enumerate(s.channels):
            k = next(i for i, kc in enumerate(keys) if (kc.quantity, kc.phase) ==
                     (c.quantity, c.phase))
            if shape_tail:
                out[:, k, : arr.shape[2]] = arr[:, j]
            else:
                out[:, k] = arr[:, j]
        return out

    return IntervalSeries(
        level=series[0].level, interval_s=series[0].interval_s,
        start_s=np.concatenate([s.start_s for s in series]), channels=tuple(keys),
        harmonics=np.concatenate([widen(s, s.harmonics, (H + 1,)) for s in series]),
        thd_percent=np.concatenate([widen(s, s.thd_percent, ()) for s in series]),
        tdd_percent=np.concatenate([widen(s, s.tdd_percent, ()) for s in series]),
        power_w=np.concatenate([widen(s, s.power_w, ()) for s in series]),
        flagged=np.concatenate([s.flagged for s in series]),
        complete=np.concatenate([s.complete for s in series]))


# --- writing ------------------------------------------------------------------------------


def interval_frame(series: IntervalSeries, tz: str = "", il_a: float | None = None):
    """The canonical table of one level (pandas DataFrame): ``timestamp`` (interval start,
    ISO 8601), ``interval_s``, ``flag``, then per channel the harmonic orders, THD and (with
    ``il_a``) TDD, and P where known."""
    import pandas as pd

    cols = {"timestamp": [format_time(float(t), tz) for t in series.start_s],
            "interval_s": np.full(series.n, series.interval_s),
            "flag": series.flagged.astype(int)}
    for k, c in enumerate(series.channels):
        q = "I" if c.quantity == "current" else "V"
        sfx = f"_{c.phase}" if c.phase else ""
        unit = c.unit
        for h in range(1, series.max_order + 1):
            v = series.harmonics[:, k, h]
            if np.isfinite(v).any():
                cols[f"{q}{h}{sfx} [{unit}]"] = v
        thd = series.thd_percent[:, k]
        if np.isfinite(thd).any():
            cols[f"THD_{q}{sfx} [%]"] = thd
        if c.quantity == "current":
            tdd = series.tdd_percent[:, k]
            if np.isfinite(tdd).any():
                cols[f"TDD{sfx} [%]"] = tdd
            pw = series.power_w[:, k]
            if np.isfinite(pw).any():
                cols[f"P{sfx} [W]"] = pw
    cols["complete"] = series.complete.astype(int)
    return pd.DataFrame(cols)
