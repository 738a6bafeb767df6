"""The native loops of ``pqcheck/_cext.c``, called through ctypes.

The extension is built at install time when a C compiler is present (``setup.py``; it is
optional). Loaded here with :mod:`ctypes`, which releases the GIL for the length of every
call, so that chunks run on several threads. It starts in about a millisecond, where numba
takes a third of a second to import and load its cached machine code; and it is the same
machine code on every run.

``PQCHECK_NO_NATIVE=1`` disables it (the numba forms are used, or NumPy with
``PQCHECK_NO_JIT=1``). ``PQCHECK_REQUIRE_NATIVE=1`` makes a missing or broken extension an
error (CI sets it, so that the suite cannot pass on the fallback by accident).
"""

from __future__ import annotations

import ctypes
import importlib.machinery
import os
import threading
from pathlib import Path

import numpy as np

__all__ = ["kernels", "resample_into", "phase_sums_into", "parse", "count", "has_avx2",
           "all_finite", "window_stats", "cycle_sums", "kaiser_sinc"]

_LIB: dict = {}
_LOCK = threading.Lock()

_D = ctypes.POINTER(ctypes.c_double)
_I64 = ctypes.c_int64


def _path() -> Path | None:
    here = Path(__file__).parent
    for suffix in importlib.machinery.EXTENSION_SUFFIXES:
        p = here / f"_cext{suffix}"
        if p.is_file():
            return p
    return None


def _load():
    if os.environ.get("PQCHECK_NO_NATIVE", "").strip() not in ("", "0"):
        return None
    p = _path()
    if p is None:
        if os.environ.get("PQCHECK_REQUIRE_NATIVE", "").strip() not in ("", "0"):
            raise RuntimeError(f"PQCHECK_REQUIRE_NATIVE is set but no native extension "
                               f"was built in {Path(__file__).parent}; reinstall with a C "
                               f"compiler present (pip install -e .)")
        return None
    lib = ctypes.CDLL(str(p))
    lib.pq_resample.restype = ctypes.c_int
    lib.pq_resample.argtypes = [_D, _I64, _I64, _D, _D, _D, _I64, _D, _I64, _I64, _I64, _D,
                                _I64, ctypes.c_int]
    lib.pq_phase_sums.restype = None
    lib.pq_phase_sums.argtypes = [_D, _I64, _D, _D, _I64, ctypes.c_double, _I64, _I64, _D]
    lib.pq_count_lines.restype = _I64
    lib.pq_count_lines.argtypes = [ctypes.c_void_p, _I64]
    lib.pq_parse.restype = _I64
    lib.pq_parse.argtypes = [ctypes.c_void_p, _I64, ctypes.c_int, ctypes.c_int,
                             ctypes.POINTER(_I64), _I64, _D, _I64, _I64, _I64, _D,
                             ctypes.c_void_p]
    lib.pq_all_finite.restype = ctypes.c_int
    lib.pq_all_finite.argtypes = [_D, _I64]
    _P64 = ctypes.POINTER(_I64)
    lib.pq_window_stats.restype = None
    lib.pq_window_stats.argtypes = [_D, _I64, _I64, _P64, _P64, _I64, _P64, _P64, _I64, _D,
                                    _D, _D, _D]
    lib.pq_kaiser_sinc.restype = None
    lib.pq_kaiser_sinc.argtypes = [_D, _I64, ctypes.c_double, ctypes.c_double,
                                   ctypes.c_double, _D]
    lib.pq_cycle_sums.restype = ctypes.c_int
    lib.pq_cycle_sums.argtypes = [_D, _I64, _D, _I64, _D, _D, _I64, _D]
    lib.pq_has_avx2.restype = ctypes.c_int
    lib.pq_has_avx2.argtypes = []
    return lib


def kernels():
    """The loaded library, or None (not built, or disabled by ``PQCHECK_NO_NATIVE``)."""
    if "lib" not in _LIB:
        with _LOCK:
            if "lib" not in _LIB:
                _LIB["lib"] = _load()
    return _LIB["lib"]


def has_avx2() -> bool:
    lib = kernels()
    return bool(lib is not None and lib.pq_has_avx2())


def _dp(a):
    return a.ctypes.data_as(_D)


def _f64(a):
    return np.ascontiguousarray(a, dtype=np.float64)


def resample_into(x, starts, lengths, warp, table, half: int, phases: int, out, *,
                  portable: bool = False) -> None:
    """:func:`pqcheck.dsp._compiled.resample_into` in C; ``portable`` skips the AVX2 loop
    (the same operations in the same order: the same bits)."""
    x, starts, lengths, warp, table = map(_f64, (x, starts, lengths, warp, table))
    if not (out.flags.c_contiguous and out.dtype == np.float64 and out.ndim == 3):
        raise ValueError("resample_into: out must be a C-contiguous float64 (C, W, M) array")
    c_n, n_win, m_pts = out.shape
    if x.shape[0] != c_n or starts.size != n_win or lengths.size != n_win \
            or warp.size != n_win:
        raise ValueError("resample_into: shapes of x, windows and out disagree")
    rc = kernels().pq_resample(_dp(x), c_n, x.shape[1], _dp(starts), _dp(lengths), _dp(warp),
                               n_win, _dp(table), table.shape[1], int(half), int(phases),
                               _dp(out), m_pts, int(bool(portable)))
    if rc:
        raise MemoryError("resample_into: out of memory")


def phase_sums_into(x, mid, count, phi0: float, k_first: int, nz: int, out) -> None:
    """:func:`pqcheck.dsp._compiled._phase_sums_py` in C; ``out`` float64 ``(3, nz)``,
    C-contiguous, added to."""
    x, mid, count = map(_f64, (x, mid, count))
    if not (out.flags.c_contiguous and out.dtype == np.float64 and out.shape == (3, nz)):
        raise ValueError("phase_sums_into: out must be a C-contiguous float64 (3, nz) array")
    kernels().pq_phase_sums(_dp(x), x.size, _dp(mid), _dp(count), mid.size, float(phi0),
                            int(k_first), int(nz), _dp(out))


def all_finite(x) -> bool:
    """``numpy.isfinite(x).all()`` for a C-contiguous float64 array, in one pass and no
    temporary."""
    if not (x.flags.c_contiguous and x.dtype == np.float64):
        raise ValueError("all_finite: x must be a C-contiguous float64 array")
    return bool(kernels().pq_all_finite(_dp(x), x.size))


def window_stats(x, lo, hi, pa, pb):
    """Per window ``w`` (samples ``lo[w]:hi[w]`` of each row of ``x``, shape ``(C, n)``,
    C-contiguous float64): the sums, sums of squares and largest magnitudes of the channels
    (each ``(W, C)``) and the sums of products of rows ``pa[j]`` and ``pb[j]`` (``(W, P)``).
    Windows with ``hi <= lo`` give NaN. The four are returned as a tuple."""
    if not (x.flags.c_contiguous and x.dtype == np.float64 and x.ndim == 2):
        raise ValueError("window_stats: x must be a C-contiguous float64 (C, n) array")
    c_n, n = x.shape
    lo, hi, pa, pb = (np.ascontiguousarray(v, dtype=np.int64) for v in (lo, hi, pa, pb))
    n_win, n_p = lo.size, pa.size
    if hi.size != n_win or pb.size != n_p:
        raise ValueError("window_stats: lo/hi or pa/pb differ in length")
    used = hi > lo
    if np.any(used & ((lo < 0) | (hi > n))):
        raise IndexError("window_stats: a window reaches past the samples")
    if n_p and (min(pa.min(), pb.min()) < 0 or max(pa.max(), pb.max()) >= c_n):
        raise IndexError("window_stats: a product names a row outside x")
    sm, sq, pk = (np.full((n_win, c_n), np.nan) for _ in range(3))
    pr = np.full((n_win, n_p), np.nan)
    p64 = ctypes.POINTER(_I64)
    kernels().pq_window_stats(_dp(x), c_n, n, lo.ctypes.data_as(p64), hi.ctypes.data_as(p64),
                              n_win, pa.ctypes.data_as(p64), pb.ctypes.data_as(p64), n_p,
                              _dp(sm), _dp(sq), _dp(pk), _dp(pr))
    return sm, sq, pk, pr


def kaiser_sinc(u, cutoff: float, beta: float, half: float):
    """:func:`pqcheck.dsp.spectrum._kaiser_sinc_numpy` in C (sinc by ``sin``, the Bessel
    function I0 by its power series, to a few ulp): NumPy's ``i0`` and ``sinc`` cost 0.1 us
    per value, and a 216-tap kernel table needs 3.5 million of them."""
    u = _f64(u)
    out = np.empty_like(u)
    kernels().pq_kaiser_sinc(_dp(u), u.size, float(cutoff), float(beta), float(half), _dp(out))
    return out


def cycle_sums(x, fine, coarse, edges):
    """:func:`pqcheck.dsp.tracking._cycle_sums_numpy` of ``x * phasor`` in C: the complex
    sums of ``x`` (float64, ``(n,)``) times the phasor ``coarse[k // p] * fine[k % p]``
    (complex128 tables, ``p = fine.size``, covering ``n``) between successive positions
    ``edges`` (non-decreasing); shape ``(edges.size - 1,)``."""
    x, edges = _f64(x), _f64(edges)
    fine = np.ascontiguousarray(fine, dtype=np.complex128)
    coarse = np.ascontiguousarray(coarse, dtype=np.complex128)
    if x.ndim != 1 or fine.size == 0 or coarse.size * fine.size < x.size:
        raise ValueError("cycle_sums: the phasor tables do not cover x")
    out = np.empty(max(edges.size - 1, 0), dtype=np.complex128)
    if edges.size == 0:
        return out
    rc = kernels().pq_cycle_sums(_dp(x), x.size, _dp(fine.view(np.float64)), fine.size,
                                 _dp(coarse.view(np.float64)), _dp(edges), edges.size,
                                 _dp(out.view(np.float64)))
    if rc:
        raise ValueError("cycle_sums: the edges decrease")
    return out


def count(buf, n: int) -> int:
    """Number of ``\\n`` in ``buf[:n]`` (a uint8 array)."""
    if n > buf.size:
        raise ValueError("count: n beyond the buffer")
    return int(kernels().pq_count_lines(buf.ctypes.data, int(n)))


def _powers_of_ten_128() -> np.ndarray:
    """128-bit mantissas of 10^e, e = -348 .. 347, truncated (rounded down), as pairs (low
    64 bits, high 64 bits) in a uint64 array: ``10^e ~ M 2^(floor(e log2 10) - 127)`` with
    ``2^127 <= M < 2^128`` (the table of the Eisel-Lemire conversion in ``_cext.c``; exact
    integer arithmetic here)."""
    if "pow10_128" not in _LIB:
        rows = []
        for e in range(-348, 348):
            if e >= 0:
                p = 10**e
                bl = p.bit_length()
                m = p >> (bl - 128) if bl > 128 else p << (128 - bl)
            else:
                p = 10**-e
                m = (1 << (p.bit_length() + 127)) // p
            rows.append((m & 0xFFFFFFFFFFFFFFFF, m >> 64))
        _LIB["pow10_128"] = np.array(rows, dtype=np.uint64).ravel()
    return _LIB["pow10_128"]


def parse(buf, n: int, sep: int, dec: int, colmap, out, pow10) -> int:
    """:func:`pqcheck.readers._numcsv._parse_py` in C: rows parsed into the float64 array
    ``out`` (rows, columns; any strides that are whole elements), or -1.

    One addition to the Python form: a number outside Clinger's fast path (a mantissa of
    2^53 or more, as in a full-precision export's 17 significant digits, or a power of ten
    beyond 10^22) is converted by the Eisel-Lemire method, correctly rounded (what Python's
    ``float()`` gives), where the Python form refuses the lines. Where that method cannot
    decide, an exact value or tie is converted exactly (whole below 2^64, or ``q 2^e`` with
    ``q`` whole: numpy.savetxt's ``3.125000000000000000e-02``); more than 19 significant
    digits are decided only where both ends of their interval round alike; the rest (a
    subnormal, an overflow, 10^23) the C refuses too."""
    if n > buf.size:
        raise ValueError("parse: n beyond the buffer")
    colmap = np.ascontiguousarray(colmap, dtype=np.int64)
    pow10 = _f64(pow10)
    if out.dtype != np.float64 or out.ndim != 2 or any(s % 8 for s in out.strides):
        raise ValueError("parse: out must be a 2-d float64 array")
    if colmap.size == 0 or int(colmap.max()) >= out.shape[1]:
        raise ValueError("parse: colmap names a column outside out")
    rs, cs = (s // 8 for s in out.strides)
    return int(kernels().pq_parse(buf.ctypes.data, int(n), int(sep), int(dec),
                                  colmap.ctypes.data_as(ctypes.POINTER(_I64)), colmap.size,
                                  _dp(out), out.shape[0], rs, cs, _dp(pow10),
                                  _powers_of_ten_128().ctypes.data))
