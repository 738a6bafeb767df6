"""SPICE "raw" waveform files (the Berkeley SPICE3 format circuit simulators write).

A raw file is a text header (``Title:``, ``Plotname:``, ``Flags:``, ``No. Variables:``,
``No. Points:``, ``Variables:`` with one ``index name type`` line per variable) followed by
``Values:`` (ASCII: per point its index, then one value per variable) or ``Binary:`` (per
point one little-endian number per variable, point after point). Two binary variants exist:
every number a float64, or (simulators that write the header in UTF-16 LE) the time a float64
and the other variables float32 unless the flags say ``double``; the size of the data tells
them apart. Such simulators may also store the time with its sign bit set as a marker, so the
absolute value is used.

Only a transient analysis (``Plotname: Transient Analysis``, real values) is a waveform;
variable time steps are resampled onto a uniform grid with a cubic spline, as for delimited
files, and that is recorded as a ``"resampled"`` finding.
"""

from __future__ import annotations

import re

import numpy as np

from ..capture import Capture, Channel, Provenance, guess_role_evidence
from ..errors import CaptureFormatError

__all__ = ["read_spice_raw", "looks_like_spice_raw"]

_HEAD_BYTES = 1 << 16


def _header_text(raw: bytes):
    """``(text, encoding, bytes per character)`` of the start of a raw file, or None."""
    if raw.startswith(b"\xff\xfe") and raw[2:14] == "Title:".encode("utf-16-le"):
        return raw[2:].decode("utf-16-le", errors="replace"), "utf-16-le", 2, 2
    if raw[:12] == "Title:".encode("utf-16-le"):
        return raw.decode("utf-16-le", errors="replace"), "utf-16-le", 2, 0
    if raw.startswith(b"Title:"):
        return raw.decode("latin-1"), "latin-1", 1, 0
    return None


def looks_like_spice_raw(path) -> bool:
    """True when the file starts like a SPICE raw file (``Title:``, ASCII or UTF-16)."""
    try:
        with open(path, "rb") as fh:
            return _header_text(fh.read(64)) is not None
    except OSError:
        return False


def _err(problem, path, line=None, field=None):
    return CaptureFormatError(problem, path=path, line=line, field=field)


def read_spice_raw(path, *, sha256: str = "") -> Capture:
    """Read a transient-analysis SPICE raw file into a :class:`Capture`.

    Parameters
    ----------
    path : str or Path
    sha256 : str
        SHA-256 of the file, recorded in the provenance.

    Returns
    -------
    Capture
        One channel per variable other than time; voltages [V] and currents [A] by the
        variable's type.

    Raises
    ------
    CaptureFormatError
        Not a transient analysis, complex values, a header field missing or the data shorter
        than the header says (naming the header line or field).
    """
    path = str(path)
    with open(path, "rb") as fh:
        data = fh.read()
    found = _header_text(data[:_HEAD_BYTES])
    if found is None:
        raise _err("not a SPICE raw file (it does not start with 'Title:')", path)
    _, enc, width, bom = found
    # the header ends at the line "Values:" (ASCII data) or "Binary:" (binary data)
    text = data[bom:].decode(enc, errors="replace") if enc == "latin-1" else None
    if text is None:
        marker = None
        for word in ("Binary:", "Values:"):
            pos = data.find(("\n" + word).encode(enc), bom)
            if pos >= 0 and (marker is None or pos < marker[0]):
                marker = (pos, word)
        if marker is None:
            raise _err("the header has no 'Values:' or 'Binary:' line; the file is cut short "
                       "or not a raw file", path)
        head = data[bom:marker[0]].decode(enc, errors="replace")
        kind = marker[1]
        body_start = marker[0] + len(("\n" + kind + "\n").encode(enc))
    else:
        m = re.search(r"^(Binary|Values):[ \t]*\r?\n", text, flags=re.MULTILINE)
        if m is None:
            raise _err("the header has no 'Values:' or 'Binary:' line; the file is cut short "
                       "or not a raw file", path)
        head = text[: m.start()]
        kind = m.group(1) + ":"
        body_start = bom + m.end()
    lines = re.split(r"\r\n|\n", head)
    fields = {}
    var_lines = []
    in_vars = False
    for n, line in enumerate(lines, start=1):
        if in_vars and (line.startswith(("\t", " ")) or not line.strip()):
            if line.strip():
                var_lines.append((n, line.split()))
            continue
        key, sep, value = line.partition(":")
        if not sep:
            continue
        in_vars = key.strip().lower() == "variables"
        fields[key.strip().lower()] = (n, value.strip())
        if in_vars and value.strip():
            var_lines.append((n, value.split()))
    plot = fields.get("plotname", (None, ""))[1]
    if "transient" not in plot.lower():
        raise _err(f"the analysis is {plot or 'not named'!r}, not a transient analysis; export "
                   "a transient (.tran) run, whose values are waveforms over time", path,
                   fields.get("plotname", (None,))[0], "Plotname")
    flags = fields.get("flags", (None, ""))[1].lower()
    if "complex" in flags:
        raise _err("complex values (an AC analysis) are not a waveform; export a transient "
                   "run", path, fields["flags"][0], "Flags")
    nv = _count(fields, "no. variables", path)
    npts = _count(fields, "no. points", path)
    if len(var_lines) != nv:
        raise _err(f"'No. Variables' is {nv} but {len(var_lines)} variables are listed", path,
                   fields["no. variables"][0], "Variables")
    names = [v[1][1] if len(v[1]) > 1 else f"var{k}" for k, v in enumerate(var_lines)]
    types = [v[1][2].lower() if len(v[1]) > 2 else "" for v in var_lines]
    if types[0] != "time" and names[0].lower() != "time":
        raise _err(f"the first variable is {names[0]!r}, not time; only transient runs with "
                   "time as the first variable are read", path, var_lines[0][0], "Variables")
    if kind == "Binary:":
        body = data[body_start:]
        values = _binary(body, nv, npts, enc != "latin-1" and "double" not in flags, path)
    else:
        body = data[body_start:].decode(enc, errors="replace")
        values = _ascii(body, nv, npts, path, len(lines) + 1)
    t = np.abs(values[:, 0])
    sig = values[:, 1:]
    findings = []
    dt = np.diff(t)
    if t.size < 2 or np.any(dt <= 0):
        i = int(np.flatnonzero(dt <= 0)[0]) if t.size >= 2 else 0
        raise _err(f"time does not increase at point {i + 1} ({t[i]:.9g} then "
                   f"{t[min(i + 1, t.size - 1)]:.9g} s); the record is damaged", path,
                   field="time")
    med = float(np.median(dt))
    if np.all(np.abs(dt - med) <= 0.01 * med):
        fs = (t.size - 1) / (t[-1] - t[0])
        out = sig
        how = "time variable (uniform)"
    else:
        from .delimited import resample_variable_step

        fs, out, findings = resample_variable_step(t, sig)
        how = "time variable (variable step, resampled)"
    chans = []
    for name, typ in zip(names[1:], types[1:]):
        unit = "V" if typ == "voltage" else "A" if "current" in typ else ""
        quantity, phase, why = guess_role_evidence(name, unit)
        chans.append(Channel(name, quantity, phase, unit, "guess",
                             evidence=f"SPICE variable type {typ!r}" + (f"; {why}" if why
                                                                        else "")))
    if not chans:
        raise _err("the file holds only the time variable", path, field="Variables")
    settings = {"format": "spice-raw", "encoding": enc, "data": kind.rstrip(":").lower(),
                "plotname": plot, "flags": flags, "n_points": npts, "time_base": how,
                "sample_rate_hz": float(fs), "title": fields.get("title", (0, ""))[1]}
    prov = Provenance(path, sha256, "spice-raw", settings)
    return Capture(np.ascontiguousarray(out.T), float(fs), tuple(chans), float(t[0]), prov,
                   tuple(findings))


def _count(fields, key, path) -> int:
    if key not in fields or not re.fullmatch(r"\d+", fields[key][1]):
        raise _err(f"the header needs '{key.title()}: <number>'", path,
                   fields.get(key, (None,))[0], key.title())
    return int(fields[key][1])


def _binary(body: bytes, nv: int, npts: int, narrow: bool, path) -> np.ndarray:
    """Points of a binary section: all float64, or float64 time and float32 values."""
    wide = npts * nv * 8
    mixed = npts * (8 + 4 * (nv - 1))
    order = [("mixed", mixed), ("wide", wide)] if narrow else [("wide", wide), ("mixed", mixed)]
    pick = next((k for k, size in order if size == len(body)), None)
    if pick is None and len(body) > max(wide, mixed):  # more after the data (another plot)
        pick = order[0][0]
    if pick is None:
        raise _err(f"the binary data hold {len(body)} bytes, fewer than the {npts} points of "
                   f"{nv} variables the header announces ({wide} bytes as float64, {mixed} as "
                   "float64 time and float32 values); the file is cut short", path,
                   field="No. Points")
    if pick == "wide":
        return np.frombuffer(body[:wide], dtype="<f8").reshape(npts, nv).astype(np.float64)
    rec = np.dtype([("t", "<f8"), ("v", "<f4", (nv - 1,))])
    arr = np.frombuffer(body[:mixed], dtype=rec)
    out = np.empty((npts, nv))
    out[:, 0] = arr["t"]
    out[:, 1:] = arr["v"].reshape(npts, nv - 1)
    return out


def _ascii(body: str, nv: int, npts: int, path, first_line: int) -> np.ndarray:
    tokens = body.split()
    need = npts * (nv + 1)
    if len(tokens) < need:
        raise _err(f"the values section holds {len(tokens)} numbers, fewer than the {npts} "
                   f"points of {nv} variables (each with its index) the header announces; the "
                   "file is cut short", path, field="No. Points")
    try:
        arr = np.array(tokens[:need], dtype=np.float64).reshape(npts, nv + 1)
    except ValueError:
        bad = next(tok for tok in tokens[:need] if not _is_float(tok))
        raise _err(f"value {bad[:40]!r} is not a number (complex 're,im' pairs are not "
                   "read)", path, field="Values") from None
    if not np.array_equal(arr[:, 0], np.arange(npts)):
        k = int(np.flatnonzero(arr[:, 0] != np.arange(npts))[0])
        raise _err(f"point {k} is numbered {arr[k, 0]:g}; the values section is out of step "
                   "with the header's variables", path, field="Values")
    return arr[:, 1:]


def _is_float(tok: str) -> bool:
    try:
        float(tok)
        return True
    except ValueError:
        return False
