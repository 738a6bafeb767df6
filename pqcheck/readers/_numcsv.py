"""Compiled parser of numeric delimited text (C or numba), for the data rows of long captures.

:func:`parse_chunk` turns a buffer of whole data lines into the float64 table that
``pandas.read_csv(..., **pandas_options(dialect))`` gives for the same lines, or answers
"cannot" (None). It understands only the plain case: numbers (optional sign, digits, the
dialect's decimal separator, optional exponent), empty cells and the NA spellings of
:func:`pqcheck.readers.delimited.pandas_options` (``nan``, ``NaN``, ``NAN``, ``-nan``; and
``-NaN``, one of pandas' default spellings), spaces and tabs around a number (pandas' float
conversion skips them), rows with fewer fields than the header (pandas fills them with NaN),
``\\n`` and ``\\r\\n`` line ends. Anything else (a quote, a bare ``\\r``, a blank line, a byte
outside ASCII, a row with too many fields, a cell that is not a number, ``inf``, more than 18
significant digits, a mantissa of 2^53 or more, a power of ten beyond 10^22) is refused, and
the caller parses those lines with pandas, so every message and edge case stays pandas'.

Numbers are converted on Clinger's fast path: an integer mantissa below 2^53 is exact in
float64, and so is every power of ten up to 10^22, so one IEEE multiplication (or division)
of the two rounds the decimal value correctly (Clinger 1990, "How to read floating point
numbers accurately", PLDI). The result is the correctly rounded float64, bit for bit what
Python's ``float()`` gives; pandas' own converter is within one unit in the last place of it.

The loop runs in C (:mod:`pqcheck._native`, a direct port of :func:`_parse_py`) where the
extension was built, else compiled by numba. The C form also converts the numbers outside
the fast path that full-precision exports write (17 significant digits: a mantissa above
2^53) by the Eisel-Lemire method (Lemire 2021), again correctly rounded, and refuses only
what that method cannot decide; the Python and numba forms refuse them all. Either form
releases the GIL, so chunks are parsed on threads beside the analysis.
``PQCHECK_NO_JIT=1`` (or numba missing) makes :func:`available` False, and the streaming
reader uses pandas throughout. The plain-Python definitions stay beside the compiled ones
(the tests run both).
"""

from __future__ import annotations

import os
import threading

import numpy as np

__all__ = ["available", "parse_chunk", "count_lines"]

_POW10 = np.array([10.0 ** k for k in range(23)])
"""10^0 .. 10^22: every one exactly representable in float64 (5^22 < 2^53)."""

_TWO53 = 9007199254740992
_KERNELS: dict = {}
_LOCK = threading.Lock()


def available() -> bool:
    """True when the compiled parser is used: numba importable and ``PQCHECK_NO_JIT`` unset.
    numba is imported (and the cached machine code loaded) on the first call only."""
    if "ok" in _KERNELS:
        return _KERNELS["ok"]
    with _LOCK:
        if "ok" in _KERNELS:
            return _KERNELS["ok"]
        if os.environ.get("PQCHECK_NO_JIT", "").strip() in ("", "0"):
            from ..dsp._compiled import _signals_held

            with _signals_held():
                _KERNELS.update(_build())
        _KERNELS["ok"] = "parse" in _KERNELS
    return _KERNELS["ok"]


def _build() -> dict:
    """The compiled kernels: the native ones of :mod:`pqcheck._native` where the extension
    was built, else numba's (empty when numba cannot be imported either). No fastmath: the
    conversion relies on exact IEEE multiplication and division."""
    from .. import _native

    if _native.kernels() is not None:
        return {"parse": _native.parse, "count": _native.count, "backend": "native"}
    try:
        import numba
    except ImportError:  # pragma: no cover - numba is a dependency
        return {}
    try:
        jit = numba.njit(nogil=True, cache=True)
        return {"parse": jit(_parse_py), "count": jit(_count_py), "backend": "numba"}
    except RuntimeError:  # pragma: no cover - nowhere to cache the machine code
        jit = numba.njit(nogil=True)
        return {"parse": jit(_parse_py), "count": jit(_count_py), "backend": "numba"}


def _count_py(buf, n):
    """Number of ``\\n`` bytes in ``buf[:n]``."""
    k = 0
    for i in range(n):
        if buf[i] == 10:
            k += 1
    return k


def _parse_py(buf, n, sep, dec, colmap, out, pow10):  # noqa: C901 - one state machine
    """Parse the lines of ``buf[:n]`` into ``out`` (rows, parsed columns).

    ``colmap[f]`` is the column of ``out`` that field ``f`` of a row goes to, or -1 for a
    field that is skipped (pandas' ``usecols``); ``colmap.size`` is the number of fields of
    a row. Returns the number of rows, or -1 when the text is not one this parser may read
    (the caller then asks pandas). Plain-Python form of the compiled loop.
    """
    nf = colmap.size
    max_rows = out.shape[0]
    row = 0
    i = 0
    nan = np.nan
    while i < n:
        c = int(buf[i])
        if c == 10 or c == 13:
            return -1  # a blank line: pandas skips it, and the row count would differ
        if row >= max_rows:
            return -1
        f = 0
        while True:
            col = colmap[f]
            if col < 0:
                # a skipped field: anything but a quote or a byte outside ASCII
                while i < n:
                    c = int(buf[i])
                    if c == sep or c == 10 or c == 13:
                        break
                    if c == 34 or c >= 128:
                        return -1
                    i += 1
            else:
                start = i
                val = nan
                c = int(buf[i]) if i < n else 10
                # pandas' NA spellings match the whole cell, without spaces
                j = i + 1 if c == 45 else i
                is_na = False
                if j + 3 <= n:
                    a = int(buf[j])
                    b = int(buf[j + 1])
                    e = int(buf[j + 2])
                    if a == 110 and b == 97 and e == 110:  # nan, -nan
                        is_na = True
                    elif a == 78 and b == 97 and e == 78:  # NaN, -NaN
                        is_na = True
                    elif a == 78 and b == 65 and e == 78 and j == i:  # NAN
                        is_na = True
                    if is_na and j + 3 < n:
                        t = int(buf[j + 3])
                        if not (t == sep or t == 10 or t == 13):
                            is_na = False
                if is_na:
                    i = j + 3
                else:
                    while i < n:
                        c = int(buf[i])
                        if c == 32 or (c == 9 and sep != 9):
                            i += 1
                        else:
                            break
                    c = int(buf[i]) if i < n else 10
                    if c == sep or c == 10 or c == 13:
                        if i > start:
                            return -1  # a blank cell: pandas refuses it
                    else:
                        neg = False
                        if c == 45:
                            neg = True
                            i += 1
                        elif c == 43:
                            i += 1
                        mant = 0
                        nsig = 0
                        ndig = 0
                        e10 = 0
                        while i < n:
                            d = int(buf[i]) - 48
                            if d < 0 or d > 9:
                                break
                            ndig += 1
                            if mant != 0 or d != 0:
                                nsig += 1
                                if nsig <= 18:
                                    mant = mant * 10 + d
                            i += 1
                        if i < n and int(buf[i]) == dec:
                            i += 1
                            while i < n:
                                d = int(buf[i]) - 48
                                if d < 0 or d > 9:
                                    break
                                ndig += 1
                                if mant != 0 or d != 0:
                                    nsig += 1
                                    if nsig <= 18:
                                        mant = mant * 10 + d
                                e10 -= 1
                                i += 1
                        if ndig == 0 or nsig > 18:
                            return -1
                        if i < n and (int(buf[i]) | 32) == 101:  # e or E
                            i += 1
                            eneg = False
                            if i < n and int(buf[i]) == 45:
                                eneg = True
                                i += 1
                            elif i < n and int(buf[i]) == 43:
                                i += 1
                            ex = 0
                            nex = 0
                            while i < n:
                                d = int(buf[i]) - 48
                                if d < 0 or d > 9:
                                    break
                                if ex < 100000:
                                    ex = ex * 10 + d
                                nex += 1
                                i += 1
                            if nex == 0:
                                return -1
                            e10 += -ex if eneg else ex
                        while i < n:
                            c = int(buf[i])
                            if c == 32 or (c == 9 and sep != 9):
                                i += 1
                            else:
                                break
                        c = int(buf[i]) if i < n else 10
                        if not (c == sep or c == 10 or c == 13):
                            return -1
                        if e10 > 22 or e10 < -22 or mant > 9007199254740992:
                            return -1  # outside the fast path: pandas decides
                        if mant == 0:
                            val = 0.0
                        elif e10 >= 0:
                            val = float(mant) * pow10[e10]
                        else:
                            val = float(mant) / pow10[-e10]
                        if neg:
                            val = -val
                out[row, col] = val
            c = int(buf[i]) if i < n else 10
            if c == sep:
                f += 1
                i += 1
                if f >= nf:
                    return -1  # more fields than the header: pandas' error names the line
                continue
            if c == 13:
                if i + 1 < n and int(buf[i + 1]) == 10:
                    i += 2
                else:
                    return -1  # a bare carriage return
            else:
                i += 1
            f += 1
            while f < nf:  # a short row: pandas fills the missing fields with NaN
                if colmap[f] >= 0:
                    out[row, colmap[f]] = nan
                f += 1
            row += 1
            break
    return row


def count_lines(buf, n: int) -> int:
    """Number of ``\\n`` in the first ``n`` bytes of the uint8 array ``buf`` (compiled)."""
    return int(_KERNELS["count"](buf, n))


def parse_chunk(buf, n: int, sep: str, decimal: str, colmap, *, lines: int | None = None,
                compiled: bool = True, by_column: bool = False):
    """Table of the data lines in ``buf[:n]``, or None when pandas must read them.

    Parameters
    ----------
    buf : numpy.ndarray of uint8
        Whole data lines (the last may lack its line end).
    n : int
        Bytes of ``buf`` to read.
    sep, decimal : str
        Field delimiter and decimal separator, as given to pandas.
    colmap : numpy.ndarray of int64
        Per field of a row, its column in the table, or -1 for a skipped field.
    lines : int or None
        The number of ``\\n`` in ``buf[:n]`` when the caller knows it.
    compiled : bool
        False runs the plain-Python definition (slow; for the tests).
    by_column : bool
        Return the table column by column, shape (columns, rows): each column's values
        contiguous (the parser writes them so directly).

    Returns
    -------
    numpy.ndarray or None
        float64, shape (rows, ``colmap.max() + 1``), or its transpose with ``by_column``.
    """
    colmap = np.ascontiguousarray(colmap, dtype=np.int64)
    parse = _KERNELS["parse"] if compiled else _parse_py
    if lines is None:
        lines = (count_lines(buf, n) if compiled else
                 int(np.count_nonzero(np.asarray(buf[:n]) == 10)))
    width = int(colmap.max()) + 1
    cols = np.empty((width, lines + 1)) if by_column else None
    out = cols.T if by_column else np.empty((lines + 1, width))
    rows = parse(buf, n, ord(sep), ord(decimal), colmap, out, _POW10)
    if rows < 0:
        return None
    return cols[:, :rows] if by_column else out[:rows]
