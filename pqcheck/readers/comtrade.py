"""COMTRADE reader: a ``.cfg`` configuration file and its ``.dat`` data file.

COMTRADE is the open interchange format of fault and power-quality recorders (IEEE Std C37.111,
revisions 1999 and 2013 = IEC 60255-24:2013; files marked 1991 or 2001 are read with the same
rules). A record is a text ``.cfg`` that describes the channels, scaling and sample rates, and a
``.dat`` with one record per sample in one of four encodings: ``ASCII``, ``BINARY`` (int16),
``BINARY32`` (int32) or ``FLOAT32``.

Only analogue channels become :class:`pqcheck.capture.Channel` rows; status (digital) channels are
read past and counted in the provenance settings.

References
----------
IEEE Std C37.111-1999, IEEE Standard Common Format for Transient Data Exchange (COMTRADE) for
Power Systems, clauses on the configuration file and the data file.
IEEE Std C37.111-2013 / IEC 60255-24:2013, same title, adds BINARY32, FLOAT32, the time code,
local code, time-quality and leap-second lines.
"""

from __future__ import annotations

import hashlib
import re
from dataclasses import dataclass, field, replace
from datetime import datetime
from fractions import Fraction
from pathlib import Path

import numpy as np

from ..capture import Capture, Channel, Provenance, phase_evidence
from ..errors import CaptureFormatError
from ..files.inputs import require_regular_file
from ..findings import Finding

__all__ = ["read_comtrade"]

FILE_TYPES = ("ASCII", "BINARY", "BINARY32", "FLOAT32")

_NUMBER = re.compile(r"^[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?$")
_INTEGER = re.compile(r"^[+-]?\d+$")
_DATE = re.compile(r"^(\d{1,2})/(\d{1,2})/(\d{2,4})$")
_TIME = re.compile(r"^(\d{1,2}):(\d{1,2}):(\d{1,2})(?:\.(\d*))?$")
_UNIT = re.compile(r"^([kKmMuµ]?)([AaVv])$")
_UNIT_PREFIX = {"": 1.0, "k": 1e3, "K": 1e3, "m": 1e-3, "M": 1e6, "u": 1e-6, "µ": 1e-6}
_PHASE_FIELD = {
    "a": "a", "b": "b", "c": "c", "n": "n",
    "r": "a", "s": "b", "t": "c",
    "1": "a", "2": "b", "3": "c",
    "l1": "a", "l2": "b", "l3": "c",
    "ab": "a", "bc": "b", "ca": "c",
}  # fmt: skip
_MAX_COUNT = 999_999  # largest channel count and index the standard allows
_MAX_NRATES = 999
# Missing-value codes of the data file (C37.111-1999 and -2013): 0x8000 for int16 and
# 0x80000000 for int32 analogue values, 0xFFFFFFFF for a timestamp, 99999 in ASCII (-1999; blank
# fields are taken as missing in every revision).
_MISSING_INT16 = -32768
_MISSING_INT32 = -(2**31)
_MISSING_STAMP = 0xFFFFFFFF
_MISSING_ASCII = 99999.0
# Band-limited interpolation between sample-rate segments: windowed-sinc FIR with this many
# input samples on each side of the output point (Kaiser window, beta below).
_FIR_HALF_INPUT = 32
_FIR_BETA = 10.0
_NAN_REACH = 16  # input periods around a missing sample that become NaN after the sinc filter
_MAX_ORDER = 50
_MAX_RATE_RATIO = 1000  # larger ratios between segment rates are taken as a damaged .cfg
_MAX_GROWTH = 10  # a timestamp grid may hold at most this many times the recorded samples


@dataclass(frozen=True)
class _Analog:
    """One analogue channel line of the .cfg (fields as the standard names them)."""

    line: int
    index: int
    ch_id: str
    ph: str
    ccbm: str
    uu: str
    a: float
    b: float
    skew_s: float
    vmin: float | None
    vmax: float | None
    primary: float | None
    secondary: float | None
    ps: str | None  # "P", "S" or None when the file does not say (1991 layout)


@dataclass(frozen=True)
class _Config:
    """Parsed .cfg."""

    station: str
    device: str
    revision: str
    analog: tuple
    n_digital: int
    digital_names: tuple
    line_hz: float | None
    rates: tuple  # ((samp [Hz], endsamp), ...); empty when timestamps carry the time base
    rates_line: int
    n_declared: int | None  # number of samples the .cfg declares (None: count the .dat)
    start: str
    trigger: str
    time_base_s: float
    file_type: str
    timemult: float
    path: str
    extras: dict = field(default_factory=dict)


def read_comtrade(path, *, use_primary: bool = True, encoding: str | None = None) -> Capture:
    """Read a COMTRADE record (IEEE C37.111-1999 or -2013) into a :class:`Capture`.

    Parameters
    ----------
    path : str or path-like
        The ``.cfg`` or the ``.dat`` of the record; the other file is found next to it by base
        name, ignoring the case of the extension.
    use_primary : bool, default True
        Return primary-side values (the power-system quantity). When a channel is recorded on the
        other side (its PS flag), values are converted with the channel's ``primary/secondary``
        ratio. With False, secondary-side values are returned. [unitless]
    encoding : str or None
        Text encoding of the ``.cfg`` (``"cp1251"``, ``"gbk"``, ...). None: UTF-8 when the
        bytes are valid UTF-8, else the legacy 8-bit encoding detected from the bytes
        (charset-normalizer), recorded in the provenance settings.

    Returns
    -------
    Capture
        One row per analogue channel, float64 in SI units for channels whose unit is A, kA, mA,
        V, kV or mV ([A] or [V]); channels in any other unit have quantity ``"other"`` and keep
        the file's unit (value ``a*x + b`` times the ratio, if converted). Sample rate is the
        record's rate, or its highest rate when it has several sample-rate segments. [Hz]

    Raises
    ------
    CaptureFormatError
        The .cfg is malformed (naming its line and field), the .dat is missing, truncated or does
        not match the .cfg, or a primary/secondary conversion is asked for but the ratio is
        unusable.

    Notes
    -----
    Scaling: value = ``a * x + b`` with ``x`` the stored number, in the channel's unit ``uu``;
    then times ``primary/secondary`` (secondary to primary) or ``secondary/primary`` (primary to
    secondary) when the PS flag differs from what ``use_primary`` asks.

    Time base: with ``nrates >= 1`` and every ``samp > 0`` the time of sample ``n`` follows from
    the rates; each sample lies ``1/samp`` after the previous one, ``samp`` being the rate of the
    segment the sample belongs to (the convention taken here for the first sample of a segment;
    common practice), and the .dat timestamps are not used. With ``nrates = 0`` (or
    ``samp = 0``) the .dat timestamps times ``timemult`` are the time base, in microseconds, or in
    nanoseconds when the .cfg start or trigger time has more than six decimals (2013).

    Several rates: the record is put on one uniform grid at the highest rate. Samples already on
    that grid are kept unchanged; the others are filled by band-limited interpolation of their
    segment (``scipy.signal.resample_poly`` with a Kaiser-windowed sinc of +-32 input samples)
    when the rates are integer-related, by a cubic spline otherwise. A ``"resampled"`` finding
    (info) records it, and a ``"low-rate-segment"`` finding (error) names the harmonic orders (up
    to 50) that the slowest segment cannot carry. Irregular timestamps are put on a uniform grid
    at ``1/median(dt)`` with a cubic spline (``"resampled"``); stretches longer than 1.5 median
    steps without a sample become NaN (``"time-gap"``, warning).

    Missing values (0x8000 in BINARY, 0x80000000 in BINARY32, non-finite in FLOAT32, blank or
    99999 (revisions before 2013) in ASCII) become NaN with a ``"missing-values"`` finding. When
    the record is resampled, grid points whose interpolation leans on a missing sample are NaN
    too: within 16 input periods where the windowed sinc interpolates, 2 where a spline does.
    Sample rates more than 1000 times apart, or timestamps whose uniform grid would hold more than
    ten times the recorded samples, are taken as a damaged file (CaptureFormatError).

    Provenance: ``source`` is the .cfg path; ``sha256`` is the SHA-256 of the .cfg bytes followed
    by the .dat bytes (one hash over the two files concatenated, in that order); ``settings``
    holds the revision, file type, rates, ``timemult``, the primary/secondary choice, the .dat
    path and each analogue channel's .cfg fields.

    Channel names are the ``ch_id`` fields (``A<n>`` when blank; a duplicate gets `` [A<n>]``
    appended). The phase comes from the ``ph`` field (A/B/C/N, R/S/T, 1/2/3, L1/L2/L3, AB/BC/CA)
    or else from the name.

    References
    ----------
    IEEE Std C37.111-1999 and IEEE Std C37.111-2013 (IEC 60255-24:2013), configuration file and
    data file clauses.

    Examples
    --------
    >>> cap = read_comtrade("feeder_fault.cfg")  # doctest: +SKIP
    >>> cap.fs_hz, cap.names  # doctest: +SKIP
    (4800.0, ('IA', 'IB', 'IC', 'VA', 'VB', 'VC'))
    """
    if Path(path).suffix.lower() == ".cff":
        return read_cff(path, use_primary=use_primary, encoding=encoding)
    cfg_path, dat_path = _pair(Path(path))
    cfg_bytes = _read_bytes(cfg_path, "configuration")
    cfg = _parse_cfg(cfg_bytes, str(cfg_path), encoding)
    dat_bytes = _read_bytes(dat_path, "data")
    return _record(cfg, cfg_bytes, dat_bytes, cfg_path, dat_path, use_primary)


_CFF_SECTION = re.compile(
    rb"^-{3}\s*file\s+type:\s*([A-Za-z]+)(?:\s+([A-Za-z0-9]+))?\s*(?::\s*(\d+))?\s*-{3}[ \t]*\r?\n",
    re.IGNORECASE | re.MULTILINE)


def read_cff(path, *, use_primary: bool = True, encoding: str | None = None) -> Capture:
    """Read a COMTRADE 2013 single-file record (``.cff``): the CFG, INF, HDR and DAT parts in
    one file, each after a line ``--- file type: CFG ---`` (``DAT ASCII``, or
    ``DAT BINARY: <bytes>`` for binary data). Same result as :func:`read_comtrade` on the
    equivalent ``.cfg``/``.dat`` pair; the SHA-256 is that of the ``.cff`` bytes.

    Raises
    ------
    CaptureFormatError
        No CFG or DAT part, or a binary DAT part shorter than its declared size.
    """
    p = Path(path)
    data = _read_bytes(p, "single-file (.cff)")
    marks = list(_CFF_SECTION.finditer(data))
    parts = {}
    for k, m in enumerate(marks):
        kind = m.group(1).decode("ascii").upper()
        end = marks[k + 1].start() if k + 1 < len(marks) else len(data)
        body = data[m.end():end]
        if kind == "DAT" and m.group(3) is not None:
            n = int(m.group(3))
            body = data[m.end():m.end() + n]
            if len(body) < n:
                raise CaptureFormatError(
                    f"the DAT part declares {n} bytes but the file holds {len(body)} after it; "
                    "the file is cut short", path=str(p), field="DAT")
        parts.setdefault(kind, (body, data[: m.end()].count(b"\n") + 1))
    for need in ("CFG", "DAT"):
        if need not in parts:
            raise CaptureFormatError(
                f"no '--- file type: {need} ---' part; a .cff holds the CFG and DAT parts of a "
                "COMTRADE 2013 record, each after such a line", path=str(p), field=need)
    cfg_bytes, first_line = parts["CFG"]
    try:
        cfg = _parse_cfg(cfg_bytes, str(p), encoding)
    except CaptureFormatError as exc:  # line numbers of the .cff, not of the CFG part
        raise CaptureFormatError(exc.problem, path=str(p),
                                 line=None if exc.line is None else exc.line + first_line - 1,
                                 field=exc.field) from None
    cap = _record(cfg, cfg_bytes, parts["DAT"][0], p, p, use_primary)
    settings = dict(cap.provenance.settings, single_file=True)
    digest = hashlib.sha256(data).hexdigest()
    return replace(cap, provenance=Provenance(str(p), digest, "comtrade", settings))


def _record(cfg, cfg_bytes, dat_bytes, cfg_path, dat_path, use_primary) -> Capture:
    """The capture of a parsed .cfg and the bytes of its data."""
    raw, stamps, missing, findings = _read_dat(dat_bytes, cfg, str(dat_path))
    values, channels, ch_settings, more = _scale(raw, cfg, use_primary)
    findings += more
    findings += _missing_finding(missing, channels)
    samples, fs_hz, t0_s, more = _time_axis(values, stamps, cfg, str(dat_path))
    findings += more

    digest = hashlib.sha256()
    digest.update(cfg_bytes)
    digest.update(dat_bytes)
    settings = {
        "revision": cfg.revision,
        "file_type": cfg.file_type,
        "station": cfg.station,
        "device": cfg.device,
        "line_frequency_hz": cfg.line_hz,
        "rates": [[samp, end] for samp, end in cfg.rates],
        "timemult": cfg.timemult,
        "time_base_s": cfg.time_base_s,
        "start": cfg.start,
        "trigger": cfg.trigger,
        "values": "primary" if use_primary else "secondary",
        "dat_path": str(dat_path),
        "n_digital": cfg.n_digital,
        "digital_channels": list(cfg.digital_names),
        "analog_channels": ch_settings,
        **cfg.extras,
    }
    return Capture(
        samples,
        fs_hz,
        tuple(channels),
        t0_s,
        Provenance(str(cfg_path), digest.hexdigest(), "comtrade", settings),
        tuple(findings),
    )


# --------------------------------------------------------------------------- files


def _pair(path: Path) -> tuple:
    """Return ``(cfg_path, dat_path)`` from either of the two."""
    ext = path.suffix.lower()
    if ext == ".cff":
        return path, path
    if ext not in (".cfg", ".dat"):
        raise CaptureFormatError(
            f"a COMTRADE record is read from its .cfg or .dat file, got extension {path.suffix!r}",
            path=path,
        )
    if not path.is_file():
        raise CaptureFormatError("file not found; check the path", path=path)
    if ext == ".cfg":
        dat = _sibling(path, "dat")
        if dat is None:
            raise CaptureFormatError(
                f"the data file {path.stem}.dat is missing next to the .cfg; copy the .dat "
                "with the same base name into the same folder",
                path=path,
            )
        return path, dat
    cfg = _sibling(path, "cfg")
    if cfg is None:
        raise CaptureFormatError(
            f"the configuration file {path.stem}.cfg is missing next to the .dat; copy the .cfg "
            "with the same base name into the same folder",
            path=path,
        )
    return cfg, path


def _sibling(path: Path, ext: str) -> Path | None:
    """File next to ``path`` with the same stem and extension ``ext`` in any case."""
    same_case = ext.upper() if path.suffix[1:].isupper() else ext
    exact = path.with_name(f"{path.stem}.{same_case}")
    if exact.is_file():
        return exact
    want = f"{path.stem}.{ext}".lower()
    try:
        found = sorted(p for p in path.parent.iterdir() if p.name.lower() == want and p.is_file())
    except OSError:
        return None
    return found[0] if found else None


def _read_bytes(path: Path, what: str) -> bytes:
    require_regular_file(path, what=f"COMTRADE {what} file", error=CaptureFormatError)
    try:
        return path.read_bytes()
    except OSError as exc:
        raise CaptureFormatError(
            f"cannot read the {what} file ({exc.strerror or exc}); check the path and permissions",
            path=path,
        ) from None


# --------------------------------------------------------------------------- .cfg


class _Lines:
    """Cursor over the .cfg lines that knows line numbers for error messages."""

    def __init__(self, text: str, path: str):
        lines = re.split(r"\r\n|\r|\n", text)
        while lines and not lines[-1].strip():
            lines.pop()
        self.lines = lines
        self.path = path
        self.i = 0

    def error(self, problem: str, line: int | None, field: str | None = None):
        return CaptureFormatError(problem, path=self.path, line=line, field=field)

    def take(self, what: str) -> tuple:
        """Return ``(line_number, fields)`` of the next line."""
        if self.i >= len(self.lines):
            raise self.error(
                f"the file ends where the {what} line was expected; the .cfg is incomplete, "
                "export it again",
                self.i + 1,
                what,
            )
        self.i += 1
        return self.i, [f.strip() for f in self.lines[self.i - 1].split(",")]

    def peek(self) -> str | None:
        return self.lines[self.i] if self.i < len(self.lines) else None


def _num(lines: _Lines, text: str, line: int, name: str, *, blank=None, what="a number"):
    """Parse a decimal number field (``blank`` is returned for an empty field if not None)."""
    if text == "" and blank is not None:
        return blank
    if not _NUMBER.match(text):
        raise lines.error(f"{name} must be {what}, got {text!r}; correct this field", line, name)
    value = float(text)
    if not np.isfinite(value):
        raise lines.error(f"{name} must be a finite number, got {text!r}", line, name)
    return value


def _int(lines: _Lines, text: str, line: int, name: str, *, lo: int, hi: int) -> int:
    if not _INTEGER.match(text):
        raise lines.error(
            f"{name} must be a whole number, got {text!r}; correct this field", line, name
        )
    value = int(text)
    if not lo <= value <= hi:
        raise lines.error(f"{name} must be between {lo} and {hi}, got {value}", line, name)
    return value


def decode_cfg(data: bytes, path: str, encoding: str | None = None) -> tuple:
    """``(text, encoding)`` of a .cfg: the given encoding, else UTF-8 (with or without a
    byte-order mark), else the legacy encoding that charset-normalizer finds most likely
    (Cyrillic and Chinese recorders write cp1251, koi8-r, gbk, big5, ...), else Latin-1."""
    if encoding is not None:
        try:
            return data.decode(encoding), encoding
        except LookupError:
            raise CaptureFormatError(f"unknown text encoding {encoding!r}; give a name such as "
                                     "utf-8, cp1251, gbk or latin-1", path=path,
                                     field="encoding") from None
        except UnicodeDecodeError as exc:
            raise CaptureFormatError(
                f"the .cfg is not valid {encoding} (byte {exc.start}); give its real encoding",
                path=path, field="encoding") from None
    if data.startswith(b"\xff\xfe") or data.startswith(b"\xfe\xff"):
        return data.decode("utf-16"), "utf-16"
    try:
        return data.decode("utf-8-sig"), "utf-8"
    except UnicodeDecodeError:
        pass
    try:
        from charset_normalizer import from_bytes

        best = from_bytes(data).best()
    except Exception:  # pragma: no cover - detection is a help, Latin-1 the fallback
        best = None
    if best is not None and best.encoding:
        return str(best), best.encoding
    return data.decode("latin-1"), "latin-1"


def _parse_cfg(data: bytes, path: str, encoding: str | None = None) -> _Config:
    text, used = decode_cfg(data, path, encoding)
    lines = _Lines(text.replace("\x1a", ""), path)

    # station_name,rec_dev_id,rev_year
    ln, f = lines.take("station")
    station = f[0]
    device = f[1] if len(f) > 1 else ""
    if len(f) < 3 or f[-1] == "":
        revision = "1991"  # no rev_year: the 1991 layout
    elif re.fullmatch(r"\d{4}", f[-1]):
        revision = f[-1]
    else:
        raise lines.error(
            f"rev_year must be 1991, 1999 or 2013, got {f[-1]!r}; the first line is "
            "'station_name,rec_dev_id,rev_year'",
            ln,
            "rev_year",
        )
    layout_1991 = revision == "1991"

    # TT,##A,##D
    ln, f = lines.take("channel counts")
    counts = None
    if len(f) == 3:
        ma = re.fullmatch(r"(\d+)\s*[Aa]", f[1])
        md = re.fullmatch(r"(\d+)\s*[Dd]", f[2])
        if _INTEGER.match(f[0]) and ma and md:
            counts = int(f[0]), int(ma.group(1)), int(md.group(1))
    if counts is None:
        raise lines.error(
            f"channel counts must read 'TT,##A,##D' (for example '4,3A,1D'), got {','.join(f)!r}",
            ln,
            "TT,##A,##D",
        )
    total, n_a, n_d = counts
    if total != n_a + n_d:
        raise lines.error(
            f"bad channel count: TT = {total} but {n_a} analogue + {n_d} digital = {n_a + n_d}; "
            "correct the counts to match the channel lines",
            ln,
            "TT",
        )
    if n_a == 0:
        raise lines.error(
            "the record has no analogue channels; pqcheck analyses analogue waveforms only",
            ln,
            "##A",
        )
    if n_a > _MAX_COUNT or n_d > _MAX_COUNT:
        raise lines.error(f"at most {_MAX_COUNT} channels of each kind are allowed", ln, "TT")

    analog = tuple(_parse_analog(lines, k + 1, layout_1991) for k in range(n_a))
    digital_names = []
    for k in range(n_d):
        ln, f = lines.take(f"digital channel {k + 1}")
        _int(lines, f[0], ln, "Dn", lo=1, hi=_MAX_COUNT)
        digital_names.append(f[1] if len(f) > 1 else "")

    ln, f = lines.take("line frequency")
    line_hz = _num(lines, f[0], ln, "lf", blank=-1.0, what="the line frequency in Hz")
    line_hz = None if line_hz <= 0 else line_hz

    ln, f = lines.take("nrates")
    nrates = _int(lines, f[0], ln, "nrates", lo=0, hi=_MAX_NRATES)
    rates_line = ln
    rates = []
    n_declared = None
    rate_lines = nrates
    if nrates == 0:
        # Timestamps only; a line "0,endsamp" may give the sample count (dates contain '/').
        nxt = lines.peek()
        if nxt is not None and "/" not in nxt and nxt.count(",") == 1:
            rate_lines = 1
    last_end = 0
    for k in range(rate_lines):
        ln, f = lines.take(f"sample rate {k + 1} ('samp,endsamp')")
        if len(f) != 2:
            raise lines.error(
                f"a sample-rate line must read 'samp,endsamp', got {','.join(f)!r}", ln, "samp"
            )
        samp = _num(lines, f[0], ln, "samp", what="the sample rate in Hz")
        if samp < 0:
            raise lines.error(f"samp must not be negative, got {f[0]!r}", ln, "samp")
        end = _int(lines, f[1], ln, "endsamp", lo=1, hi=9_999_999_999)
        if end <= last_end:
            raise lines.error(
                f"endsamp must increase from one segment to the next, got {end} after {last_end}",
                ln,
                "endsamp",
            )
        last_end = end
        rates.append((samp, end))
        rates_line = ln
    if rates:
        n_declared = rates[-1][1]
    zero = [s == 0 for s, _ in rates]
    if any(zero) and not all(zero):
        raise lines.error(
            "samp is 0 (timestamps only) on some sample-rate lines but not on others; give every "
            "segment its rate",
            rates_line,
            "samp",
        )
    if all(zero):
        rates = []

    _, f1 = lines.take("start time ('dd/mm/yyyy,hh:mm:ss.ssssss')")
    _, f2 = lines.take("trigger time ('dd/mm/yyyy,hh:mm:ss.ssssss')")
    start, ns1 = _timestamp(f1, layout_1991)
    trigger, ns2 = _timestamp(f2, layout_1991)
    time_base_s = 1e-9 if (ns1 or ns2) else 1e-6

    ln, f = lines.take("file type")
    ft = ",".join(f).upper()
    if ft not in FILE_TYPES:
        raise lines.error(
            f"unknown file type {','.join(f)!r}; expected ASCII, BINARY, BINARY32 or FLOAT32",
            ln,
            "ft",
        )

    timemult = 1.0
    extras = {"cfg_encoding": used}
    if lines.peek() is not None:
        ln, f = lines.take("timemult")
        timemult = _num(lines, f[0], ln, "timemult", blank=1.0, what="the time multiplier")
        if timemult <= 0:
            raise lines.error(f"timemult must be positive, got {f[0]!r}", ln, "timemult")
    # C37.111-2013 optional lines: time_code,local_code and tmq_code,leapsec (kept as text).
    for key in (("time_code", "local_code"), ("tmq_code", "leapsec")):
        if lines.peek() is None:
            break
        _, f = lines.take(",".join(key))
        for name, value in zip(key, f):
            extras[name] = value

    return _Config(
        station=station,
        device=device,
        revision=revision,
        analog=analog,
        n_digital=n_d,
        digital_names=tuple(digital_names),
        line_hz=line_hz,
        rates=tuple(rates),
        rates_line=rates_line,
        n_declared=n_declared,
        start=start,
        trigger=trigger,
        time_base_s=time_base_s,
        file_type=ft,
        timemult=timemult,
        path=path,
        extras=extras,
    )


def _parse_analog(lines: _Lines, k: int, layout_1991: bool) -> _Analog:
    ln, f = lines.take(f"analogue channel {k}")
    need = 10 if layout_1991 else 13
    extra = f[need:]
    if len(f) < need or any(extra):
        layout = (
            "An,ch_id,ph,ccbm,uu,a,b,skew,min,max"
            if layout_1991
            else "An,ch_id,ph,ccbm,uu,a,b,skew,min,max,primary,secondary,PS"
        )
        raise lines.error(
            f"analogue channel line has {len(f)} fields, expected {need} ({layout}); check the "
            "channel counts on line 2 and this line",
            ln,
            "An",
        )
    index = _int(lines, f[0], ln, "An", lo=1, hi=_MAX_COUNT)
    a = _num(lines, f[5], ln, "a", what="a number (the channel multiplier)")
    b = _num(lines, f[6], ln, "b", blank=0.0, what="a number (the channel offset)")
    skew_us = _num(lines, f[7], ln, "skew", blank=0.0, what="a number (skew in microseconds)")
    vmin = _num(lines, f[8], ln, "min", blank=np.nan)
    vmax = _num(lines, f[9], ln, "max", blank=np.nan)
    primary = secondary = ps = None
    if not layout_1991:
        primary = _num(lines, f[10], ln, "primary", blank=np.nan)
        secondary = _num(lines, f[11], ln, "secondary", blank=np.nan)
        flag = f[12].upper()
        if flag not in ("P", "S", ""):
            raise lines.error(
                f"PS must be 'P' (primary values) or 'S' (secondary values), got {f[12]!r}",
                ln,
                "PS",
            )
        ps = flag or None
    return _Analog(
        line=ln,
        index=index,
        ch_id=f[1],
        ph=f[2],
        ccbm=f[3],
        uu=f[4],
        a=a,
        b=b,
        skew_s=skew_us * 1e-6,
        vmin=None if vmin is None or np.isnan(vmin) else vmin,
        vmax=None if vmax is None or np.isnan(vmax) else vmax,
        primary=None if primary is None or np.isnan(primary) else primary,
        secondary=None if secondary is None or np.isnan(secondary) else secondary,
        ps=ps,
    )


def _timestamp(fields: list, layout_1991: bool) -> tuple:
    """Return ``(ISO text or raw text, has_nanoseconds)``; unreadable dates are kept as text."""
    raw = ",".join(fields)
    if len(fields) != 2:
        return raw, False
    md, mt = _DATE.match(fields[0]), _TIME.match(fields[1])
    if not mt:
        return raw, False
    frac = mt.group(4) or ""
    nanoseconds = len(frac) > 6
    if not md:
        return raw, nanoseconds
    d1, d2, year = (int(g) for g in md.groups())
    day, month = (d2, d1) if layout_1991 else (d1, d2)  # 1991: mm/dd/yy
    if year < 100:
        year += 1900 if year >= 70 else 2000
    try:
        stamp = datetime(
            year,
            month,
            day,
            int(mt.group(1)),
            int(mt.group(2)),
            int(mt.group(3)),
            int((frac + "000000")[:6]),
        )
    except ValueError:
        return raw, nanoseconds
    iso = stamp.isoformat()
    if nanoseconds:
        iso = iso.split(".")[0] + "." + (frac + "000000000")[:9]
    return iso, nanoseconds


# --------------------------------------------------------------------------- .dat


def _read_dat(data: bytes, cfg: _Config, path: str) -> tuple:
    """Return ``(raw (n_analog, n) float64 with NaN, timestamps (n,) float64 with NaN,
    missing counts per channel, findings)``."""
    if cfg.file_type == "ASCII":
        raw, stamps, n_records = _read_ascii(data, cfg, path)
    else:
        raw, stamps, n_records = _read_binary(data, cfg, path)
    findings = []
    n = raw.shape[1]
    if n == 0:
        raise CaptureFormatError(
            "the data file holds no records; export the record again", path=path
        )
    if cfg.n_declared is not None and n_records > n:
        findings.append(
            Finding(
                "extra-records",
                "warning",
                f"the .dat holds {n_records} records but the .cfg declares {n} (last endsamp); "
                "the extra records were ignored",
                value=float(n_records - n),
                unit="records",
            )
        )
    missing = ~np.isfinite(raw)
    raw[missing] = np.nan
    return raw, stamps, missing.sum(axis=1), findings


def _short_error(path: str, cfg: _Config, n_records: int) -> CaptureFormatError:
    return CaptureFormatError(
        f"the data file holds {n_records} records but the .cfg declares {cfg.n_declared} "
        f"samples (endsamp on line {cfg.rates_line}); the .dat is truncated or belongs to "
        "another record: copy the complete file, or correct endsamp",
        path=path,
    )


def _read_binary(data: bytes, cfg: _Config, path: str) -> tuple:
    code, width, missing_code = {
        "BINARY": ("<i2", 2, _MISSING_INT16),
        "BINARY32": ("<i4", 4, _MISSING_INT32),
        "FLOAT32": ("<f4", 4, None),
    }[cfg.file_type]
    n_a = len(cfg.analog)
    n_words = (cfg.n_digital + 15) // 16
    fields = [("n", "<u4"), ("t", "<u4"), ("a", code, (n_a,))]
    if n_words:
        fields.append(("d", "<u2", (n_words,)))
    rec = np.dtype(fields)  # itemsize = 8 + n_a * width + 2 * n_words
    whole, rest = divmod(len(data), rec.itemsize)
    want = cfg.n_declared
    if rest and (want is None or whole < want):
        raise CaptureFormatError(
            f"record {whole + 1} (sample {whole + 1}) is truncated: {rest} of {rec.itemsize} "
            f"bytes ({cfg.file_type}: 4-byte sample number, 4-byte timestamp, {n_a} analogue "
            f"values of {width} bytes, {n_words} status words of 2 bytes); the .dat is "
            "incomplete or does not belong to this .cfg: copy the complete file",
            path=path,
        )
    if want is not None and whole < want:
        raise _short_error(path, cfg, whole)
    n = whole if want is None else want
    table = np.frombuffer(data, dtype=rec, count=n)
    values = table["a"].T
    raw = values.astype(np.float64)
    if missing_code is not None:
        raw[values == missing_code] = np.nan
    stamps = table["t"].astype(np.float64)
    stamps[table["t"] == _MISSING_STAMP] = np.nan
    return raw, stamps, whole


def _read_ascii(data: bytes, cfg: _Config, path: str) -> tuple:
    text = data.decode("latin-1").replace("\x1a", "")
    all_lines = re.split(r"\r\n|\r|\n", text)
    numbered = [(i + 1, ln) for i, ln in enumerate(all_lines) if ln.strip()]
    n_a = len(cfg.analog)
    expect = 2 + n_a + cfg.n_digital
    n_records = len(numbered)
    want = cfg.n_declared
    use = numbered if want is None else numbered[:want]
    for lineno, ln in use:
        n_fields = ln.count(",") + 1
        if n_fields != expect:
            parts = ln.split(",")
            if n_fields > expect and not any(p.strip() for p in parts[expect:]):
                continue  # trailing separators
            raise CaptureFormatError(
                f"the record has {n_fields} fields, expected {expect} (sample number, timestamp, "
                f"{n_a} analogue, {cfg.n_digital} status values); the .dat is truncated or does "
                "not belong to this .cfg",
                path=path,
                line=lineno,
            )
    if want is not None and n_records < want:
        raise _short_error(path, cfg, n_records)
    texts = [ln for _, ln in use]
    cols = list(range(1, 2 + n_a))
    try:
        table = np.loadtxt(
            texts, delimiter=",", usecols=cols, dtype=np.float64, comments=None, ndmin=2
        )
    except ValueError:
        table = _ascii_slow(use, cols, cfg, path)
    stamps = table[:, 0].copy()
    raw = table[:, 1:].T.copy()
    if int(cfg.revision) < 2013:
        raw[raw == _MISSING_ASCII] = np.nan
    return raw, stamps, n_records


def _ascii_slow(numbered: list, cols: list, cfg: _Config, path: str) -> np.ndarray:
    """Field-by-field parse: blank fields are missing; anything else non-numeric is an error."""
    out = np.empty((len(numbered), len(cols)))
    for r, (lineno, ln) in enumerate(numbered):
        parts = ln.split(",")
        for c, col in enumerate(cols):
            token = parts[col].strip()
            if token == "":
                out[r, c] = np.nan
            elif _NUMBER.match(token):
                out[r, c] = float(token)
            else:
                what = (
                    "timestamp" if col == 1 else f"analogue channel {cfg.analog[col - 2].ch_id!r}"
                )
                raise CaptureFormatError(
                    f"the {what} value {token!r} is not a number; the .dat is damaged or does "
                    "not belong to this .cfg",
                    path=path,
                    line=lineno,
                    field=f"column {col + 1}",
                )
    return out


# --------------------------------------------------------------------------- scaling, roles


def _unit(uu: str) -> tuple:
    """Return ``(quantity, SI unit, factor to SI)`` for a COMTRADE unit field."""
    m = _UNIT.match(uu.strip())
    if not m:
        return "other", "", 1.0
    letter = m.group(2).upper()
    quantity = "current" if letter == "A" else "voltage"
    return quantity, letter, _UNIT_PREFIX[m.group(1)]


def _ph_field_trusted(analog) -> bool:
    """The ``ph`` fields name phases, not a vendor code: not the same value on every one of
    three or more channels (a recorder writing one code everywhere would make every channel
    phase a)."""
    codes = [ch.ph.strip().lower() for ch in analog]
    return not (len(codes) >= 3 and len(set(codes)) == 1)


def _phase_of(ch, name: str, trust_ph: bool) -> tuple:
    """``(phase, evidence)`` of a channel from its ``ph`` field, else from its name."""
    code = ch.ph.strip()
    if trust_ph and code.lower() in _PHASE_FIELD:
        return _PHASE_FIELD[code.lower()], f"phase field ph = {code!r}"
    phase, why = phase_evidence(name)
    if phase and code and not trust_ph:
        why += f" (the phase field {code!r} is the same on every channel, so not used)"
    return phase or "", why


def _scale(raw: np.ndarray, cfg: _Config, use_primary: bool) -> tuple:
    values = np.empty_like(raw)
    channels, settings, unknown_side, skewed = [], [], [], []
    seen = set()
    trust_ph = _ph_field_trusted(cfg.analog)
    for row, ch in enumerate(cfg.analog):
        quantity, unit, to_si = _unit(ch.uu)
        ratio = 1.0
        if ch.ps is None:
            unknown_side.append(ch)
        elif (ch.ps == "S") == use_primary:
            p, s = ch.primary, ch.secondary
            if p is None or s is None or p <= 0 or s <= 0:
                to, frm = ("primary", "secondary") if use_primary else ("secondary", "primary")
                raise CaptureFormatError(
                    f"channel {ch.ch_id!r} holds {frm} values but {to} values were asked for, "
                    f"and its ratio primary = {p}, secondary = {s} is unusable (both must be "
                    f"positive); correct the ratio in the .cfg or read {frm} values "
                    f"(use_primary={not use_primary})",
                    path=cfg.path,
                    line=ch.line,
                    field="primary" if p is None or p <= 0 else "secondary",
                )
            ratio = p / s if use_primary else s / p
        values[row] = (ch.a * raw[row] + ch.b) * (ratio * to_si)

        name = ch.ch_id or f"A{ch.index}"
        if name in seen:
            name = f"{name} [A{ch.index}]"
        seen.add(name)
        phase, evidence = _phase_of(ch, name, trust_ph)
        why = [f"unit {ch.uu!r}"] if quantity != "other" else []
        channels.append(Channel(name, quantity, phase, unit, "guess",
                                evidence="; ".join(why + ([evidence] if evidence else []))))
        if ch.skew_s:
            skewed.append(name)
        settings.append(
            {
                "name": name,
                "An": ch.index,
                "ch_id": ch.ch_id,
                "ph": ch.ph,
                "ccbm": ch.ccbm,
                "uu": ch.uu,
                "a": ch.a,
                "b": ch.b,
                "skew_s": ch.skew_s,
                "min": ch.vmin,
                "max": ch.vmax,
                "primary": ch.primary,
                "secondary": ch.secondary,
                "PS": ch.ps,
                "ratio_applied": ratio,
                "to_si": to_si,
            }
        )
    findings = []
    if unknown_side:
        names = tuple(channels[cfg.analog.index(c)].name for c in unknown_side)
        findings.append(
            Finding(
                "primary-secondary-unknown",
                "info",
                "the .cfg does not say whether these channels hold primary or secondary values "
                f"(revision {cfg.revision} layout or blank PS); values are taken as recorded",
                channels=names,
            )
        )
    if skewed:
        worst = max(abs(c.skew_s) for c in cfg.analog)
        findings.append(
            Finding(
                "channel-skew",
                "info",
                "the .cfg gives a sampling skew for these channels (largest "
                f"{worst * 1e6:g} us); samples are not shifted, so phase angles between channels "
                "carry that time offset",
                channels=tuple(skewed),
                value=worst,
                unit="s",
            )
        )
    return values, channels, settings, findings


def _missing_finding(missing: np.ndarray, channels: list) -> list:
    total = int(missing.sum())
    if not total:
        return []
    names = tuple(c.name for c, m in zip(channels, missing) if m)
    return [
        Finding(
            "missing-values",
            "warning",
            f"{total} sample value(s) carry the COMTRADE missing-value code (or are not finite) "
            "and were set to NaN",
            channels=names,
            value=float(total),
            unit="samples",
            detail={c.name: int(m) for c, m in zip(channels, missing) if m},
        )
    ]


# --------------------------------------------------------------------------- time axis


def _time_axis(values, stamps, cfg: _Config, dat_path: str) -> tuple:
    """Return ``(samples, fs_hz, t0_s, findings)`` on one uniform grid."""
    if cfg.rates:
        rates = np.array([s for s, _ in cfg.rates], dtype=np.float64)
        if np.all(rates == rates[0]):
            return values, float(rates[0]), 0.0, []
        return _from_segments(values, cfg)
    return _from_timestamps(values, stamps, cfg, dat_path)


def _segment_times(cfg: _Config) -> tuple:
    """Sample times [s] and per-sample segment index from the sample-rate segments."""
    n = cfg.rates[-1][1]
    t = np.empty(n)
    seg = np.empty(n, dtype=np.int64)
    start, t_last = 0, None
    for s, (samp, end) in enumerate(cfg.rates):
        k = np.arange(end - start)
        if t_last is None:
            t[start:end] = k / samp
        else:
            t[start:end] = t_last + (k + 1) / samp
        seg[start:end] = s
        t_last = t[end - 1]
        start = end
    return t, seg


def _from_segments(values: np.ndarray, cfg: _Config) -> tuple:
    from scipy.interpolate import CubicSpline

    rates = [s for s, _ in cfg.rates]
    fs = max(rates)
    if fs / min(rates) > _MAX_RATE_RATIO:
        raise CaptureFormatError(
            f"the sample rates differ by more than a factor of {_MAX_RATE_RATIO} ({min(rates):g} "
            f"and {fs:g} Hz); check the samp fields",
            path=cfg.path,
            line=cfg.rates_line,
            field="samp",
        )
    t, seg = _segment_times(cfg)
    ups = [Fraction(fs / r).limit_denominator(1000) for r in rates]
    integer = all(
        u.denominator == 1 and abs(float(u) - fs / r) < 1e-9 * fs / r for u, r in zip(ups, rates)
    )
    k_samp = np.rint(t * fs).astype(np.int64)
    integer = integer and bool(np.all(np.abs(t * fs - k_samp) < 1e-6))
    filled, bad = _fill_nan(values, t)

    if integer:
        method = "band-limited interpolation (scipy.signal.resample_poly, Kaiser-windowed sinc)"
        n_out = int(k_samp[-1]) + 1
        out = np.empty((values.shape[0], n_out))
        starts = [0] + [end for _, end in cfg.rates[:-1]]
        for s, (r, up) in enumerate(zip(rates, ups)):
            i0, i1 = starts[s], cfg.rates[s][1]
            k_lo = int(k_samp[i0 - 1]) + 1 if i0 else 0  # points after the previous sample
            k_hi = int(k_samp[i1 - 1])
            if int(up) == 1:
                out[:, k_lo : k_hi + 1] = filled[:, i0:i1]
                continue
            out[:, k_lo : k_hi + 1] = _upsample_segment(
                filled, t, i0, i1, r, int(up), fs, k_lo, k_hi
            )
            out[:, k_samp[i0:i1]] = filled[:, i0:i1]  # recorded samples are kept as recorded
    else:
        method = "cubic spline (scipy.interpolate.CubicSpline; rates not integer-related)"
        n_out = int(np.floor(t[-1] * fs + 1e-6)) + 1
        grid = np.arange(n_out) / fs
        out = CubicSpline(t, filled, axis=1)(grid)
    # reach of a missing sample: _NAN_REACH input periods of its segment where the windowed
    # sinc interpolates (kernel tails beyond that weigh a few per cent), 2 where a spline does,
    # none where samples are copied (then only the missing sample itself)
    periods = np.array([1.0 / r for r in rates])[seg]
    if integer:
        up_of = np.array([float(u) for u in ups])[seg]
        reach = np.where(up_of > 1, _NAN_REACH * periods, 0.0)
    else:
        reach = 2 * periods
    out = _restore_nan(out, bad, t, fs, reach)

    desc = ", ".join(f"{r:g} Hz up to sample {e}" for r, e in cfg.rates)
    findings = [
        Finding(
            "resampled",
            "info",
            f"the record has {len(rates)} sample-rate segments ({desc}); put on one uniform grid "
            f"at the highest rate, {fs:g} Hz, by {method}",
            value=float(fs),
            unit="Hz",
            detail={"rates": [[r, e] for r, e in cfg.rates], "method": method},
        )
    ]
    slow = min(rates)
    if cfg.line_hz:
        orders = tuple(h for h in range(1, _MAX_ORDER + 1) if h * cfg.line_hz >= slow / 2)
        if orders:
            findings.append(
                Finding(
                    "low-rate-segment",
                    "error",
                    f"part of the record was sampled at only {slow:g} Hz, which carries no "
                    f"content at or above {slow / 2:g} Hz (order {orders[0]} of "
                    f"{cfg.line_hz:g} Hz and up); those orders cannot be assessed over the whole "
                    "record",
                    orders=orders,
                    value=float(slow),
                    unit="Hz",
                )
            )
    else:
        findings.append(
            Finding(
                "low-rate-segment",
                "warning",
                f"part of the record was sampled at only {slow:g} Hz and carries no content at "
                f"or above {slow / 2:g} Hz; the .cfg gives no line frequency to name the orders",
                value=float(slow),
                unit="Hz",
            )
        )
    return out, float(fs), 0.0, findings


def _upsample_segment(x, t, i0, i1, r, up, fs, k_lo, k_hi) -> np.ndarray:
    """Band-limited values of segment ``[i0, i1)`` at grid points ``k_lo..k_hi`` (rate ``fs``).

    The segment is extended on both sides with context samples at its own rate, taken from the
    neighbouring data by a local cubic spline, so the filter sees continuous data across segment
    boundaries; at the ends of the record the segment is extended by odd reflection.
    """
    from scipy.interpolate import CubicSpline
    from scipy.signal import firwin, resample_poly

    ctx = _FIR_HALF_INPUT + 2
    t_first, t_last = t[i0], t[i1 - 1]
    before = t_first - np.arange(ctx, 0, -1) / r
    after = t_last + np.arange(1, ctx + 1) / r
    before = before[before >= t[0] - 1e-12]
    after = after[after <= t[-1] + 1e-12]
    parts = []
    for times in (before, after):
        if times.size:
            j0 = max(int(np.searchsorted(t, times[0])) - 4, 0)
            j1 = min(int(np.searchsorted(t, times[-1])) + 5, t.size)
            if j1 - j0 >= 2:
                parts.append(CubicSpline(t[j0:j1], x[:, j0:j1], axis=1)(times))
                continue
        parts.append(np.empty((x.shape[0], 0)))
    ext = np.concatenate([parts[0], x[:, i0:i1], parts[1]], axis=1)
    # At the ends of the record: odd reflection about the end sample (keeps value and slope
    # continuous, far smaller edge error than zero or line padding).
    pad = (ctx - parts[0].shape[1], ctx - parts[1].shape[1])
    if pad != (0, 0):
        ext = np.pad(ext, ((0, 0), pad), mode="reflect", reflect_type="odd")
    h = firwin(2 * _FIR_HALF_INPUT * up + 1, 1.0 / up, window=("kaiser", _FIR_BETA))
    y = resample_poly(ext, up, 1, axis=1, window=h, padtype="line")
    k_ext0 = int(np.rint(t_first * fs)) - ctx * up
    return y[:, k_lo - k_ext0 : k_hi - k_ext0 + 1]


def _fill_nan(values: np.ndarray, t: np.ndarray) -> tuple:
    """Fill NaN (cubic spline over the good samples) so the interpolation filter can run;
    return the filled copy and the NaN mask. Filled points are set back to NaN afterwards."""
    from scipy.interpolate import CubicSpline

    bad = np.isnan(values)
    if not bad.any():
        return values, bad
    filled = values.copy()
    for row in np.flatnonzero(bad.any(axis=1)):
        good = ~bad[row]
        if good.sum() >= 4:
            filled[row, bad[row]] = CubicSpline(t[good], values[row, good])(t[bad[row]])
        elif good.any():
            filled[row, bad[row]] = np.interp(t[bad[row]], t[good], values[row, good])
        else:
            filled[row] = 0.0
    return filled, bad


def _restore_nan(out, bad, t, fs: float, reach_s) -> np.ndarray:
    """Set grid points whose value leans on a missing (filled) sample back to NaN.

    A grid point is NaN when it lies strictly between the neighbours of a missing sample ``j``
    or within ``reach_s[j]`` of it (the part of the interpolation kernel that matters). [s]
    """
    if not bad.any():
        return out
    grid = np.arange(out.shape[1]) / fs
    eps = 1e-6 / fs
    gap_before = np.diff(t, prepend=t[0])
    gap_after = np.diff(t, append=t[-1])
    half = np.maximum(np.maximum(gap_before, gap_after), np.broadcast_to(reach_s, t.shape))
    for row in np.flatnonzero(bad.any(axis=1)):
        j = np.flatnonzero(bad[row])
        lo = np.searchsorted(grid, t[j] - half[j] + eps, side="left")
        hi = np.searchsorted(grid, t[j] + half[j] - eps, side="right")
        mark = np.zeros(grid.size + 1, dtype=np.int64)
        np.add.at(mark, lo, 1)
        np.add.at(mark, hi, -1)
        out[row, np.cumsum(mark[:-1]) > 0] = np.nan
    return out


def _from_timestamps(values, stamps, cfg: _Config, dat_path: str) -> tuple:
    from scipy.interpolate import CubicSpline

    n = stamps.size
    lack = np.flatnonzero(np.isnan(stamps))
    if lack.size:
        raise CaptureFormatError(
            f"sample {lack[0] + 1} has no timestamp, but the .cfg gives no sample rate "
            "(nrates = 0 or samp = 0), so every sample needs one; give the sample rate in the .cfg "
            "or re-export with timestamps",
            path=dat_path,
        )
    if n < 2:
        raise CaptureFormatError(
            "a record timed by timestamps needs at least two samples", path=dat_path
        )
    res = cfg.time_base_s * cfg.timemult
    t = stamps * res
    dt = np.diff(t)
    back = np.flatnonzero(dt <= 0)
    if back.size:
        j = back[0]
        raise CaptureFormatError(
            f"timestamps must increase: sample {j + 2} ({stamps[j + 1]:.0f}) is not after "
            f"sample {j + 1} ({stamps[j]:.0f}); the .dat is damaged",
            path=dat_path,
        )
    k = np.arange(n, dtype=np.float64)
    slope, intercept = np.polyfit(k, t, 1)
    resid = t - (intercept + slope * k)
    if np.max(np.abs(resid)) <= res * (1 + 1e-9):
        return values, float(1.0 / slope), float(intercept), []

    step = float(np.median(dt))
    fs = 1.0 / step
    n_out = int(np.floor((t[-1] - t[0]) / step + 1e-6)) + 1
    if n_out > _MAX_GROWTH * n + 1000:
        raise CaptureFormatError(
            f"the timestamps span {t[-1] - t[0]:g} s but the median step is {step * 1e6:g} us: "
            f"a uniform grid would need {n_out} samples for {n} recorded; check the timestamps "
            "and timemult",
            path=dat_path,
        )
    grid = t[0] + np.arange(n_out) * step
    filled, bad = _fill_nan(values, t)
    out = CubicSpline(t, filled, axis=1)(grid)
    out = _restore_nan(out, bad, t - t[0], fs, 2 * step)
    method = "cubic spline (scipy.interpolate.CubicSpline)"
    findings = [
        Finding(
            "resampled",
            "info",
            f"the .dat timestamps are not evenly spaced (steps from {dt.min() * 1e6:g} to "
            f"{dt.max() * 1e6:g} us); put on a uniform grid at {fs:g} Hz (median step) by {method}",
            value=fs,
            unit="Hz",
            detail={"method": method},
        )
    ]
    gaps = np.flatnonzero(dt > 1.5 * step)
    if gaps.size:
        for j in gaps:
            out[:, (grid > t[j] + step / 2) & (grid < t[j + 1] - step / 2)] = np.nan
        findings.append(
            Finding(
                "time-gap",
                "warning",
                f"{gaps.size} gap(s) longer than 1.5 sample steps in the timestamps (longest "
                f"{dt.max() * 1e3:g} ms); samples inside the gaps are NaN",
                value=float(dt.max()),
                unit="s",
            )
        )
    return out, float(fs), float(t[0]), findings
