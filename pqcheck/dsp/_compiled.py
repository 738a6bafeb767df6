"""Compiled inner loops of the analysis (C or numba), with the NumPy definitions they replace.

The synchronised analysis spends its time in two per-sample loops: the band-limited
resampling of every window (:func:`pqcheck.dsp.spectrum.resample_windows`) and the phase
refinement of the tracker (:func:`pqcheck.dsp.tracking._second_pass`). Written with NumPy,
each materialises large temporaries (a gathered ``channels x points x taps`` array, or a
dozen full-length arrays per pass) and runs at memory speed, far below the FFT that follows.
Here the same arithmetic runs as plain loops in registers, with the GIL released so that
chunks run on several threads: the C loops of :mod:`pqcheck._native` where the extension
was built at install (they start in a millisecond), else the same loops compiled by numba.

Each function computes exactly what its NumPy counterpart computes (the same formula, the
same table, only the order of additions differs); ``tests/test_compiled.py`` checks them
against each other to 1e-12. ``PQCHECK_NO_JIT=1`` (or numba missing) selects the NumPy
definitions everywhere; so does ``compiled=False`` in the callers.

numba's machine code is cached next to this file (``cache=True``), so only the first run
after installation pays the compilation (a few seconds); importing numba and loading it
still costs about a third of a second per process, which the C extension avoids.
"""

from __future__ import annotations

import os
import threading

import numpy as np

__all__ = ["available", "backend", "resample_into", "phase_sums", "window_stats"]


_FAST = {"reassoc", "contract"}
"""The only liberties the compiler may take: reorder sums (so that they vectorise) and fuse
multiply-adds. No assumption about NaN or infinities (the callers pass finite samples)."""

_KERNELS: dict = {}
_LOCK = threading.Lock()


def available() -> bool:
    """True when the compiled loops are used: numba importable and ``PQCHECK_NO_JIT`` unset.
    numba is imported (and the cached machine code loaded) on the first call only, so that
    commands which analyse nothing do not pay for it."""
    if "ok" in _KERNELS:
        return _KERNELS["ok"]
    with _LOCK:
        if "ok" in _KERNELS:
            return _KERNELS["ok"]
        if os.environ.get("PQCHECK_NO_JIT", "").strip() in ("", "0"):
            with _signals_held():
                _KERNELS.update(_build())
        _KERNELS["ok"] = "resample" in _KERNELS
    return _KERNELS["ok"]


def backend() -> str:
    """Which loops run: ``"native"`` (the C extension), ``"numba"`` or ``"numpy"``."""
    return _KERNELS.get("backend", "numba") if available() else "numpy"


class _signals_held:
    """Hold SIGINT and SIGTERM back while numba is imported: a signal handled in the middle
    of an extension module's initialisation turns into "ImportError: initialization failed"
    and loses the signal (the command would end as an internal error instead of 130/143).
    Held, the signal arrives right after the import, as anywhere else."""

    def __enter__(self):
        import signal
        import threading

        self._old = None
        if (hasattr(signal, "pthread_sigmask")
                and threading.current_thread() is threading.main_thread()):
            self._old = signal.pthread_sigmask(signal.SIG_BLOCK,
                                               {signal.SIGINT, signal.SIGTERM})
        return self

    def __exit__(self, *exc):
        if self._old is not None:
            import signal

            signal.pthread_sigmask(signal.SIG_SETMASK, self._old)
        return False


def _build() -> dict:
    """The compiled kernels: the native ones of :mod:`pqcheck._native` where the extension
    was built, else numba's (empty when numba cannot be imported either). numba's machine
    code is cached beside this file (or in the user's cache); where numba finds nowhere to
    keep it, every process compiles."""
    from .. import _native

    if _native.kernels() is not None:
        return {"resample": _native.resample_into, "phase_sums": _native.phase_sums_into,
                "all_finite": _native.all_finite, "window_stats": _native.window_stats,
                "cycle_sums": _native.cycle_sums,
                "backend": "native"}
    try:
        import numba
    except ImportError:  # pragma: no cover - numba is a dependency
        return {}
    try:
        jit = numba.njit(nogil=True, cache=True, fastmath=_FAST)
        return {"resample": jit(_resample_py), "phase_sums": jit(_phase_sums_py),
                "backend": "numba"}
    except RuntimeError:
        jit = numba.njit(nogil=True, fastmath=_FAST)
        return {"resample": jit(_resample_py), "phase_sums": jit(_phase_sums_py),
                "backend": "numba"}


def _resample_py(x, starts, lengths, warp, table, half, phases, out):  # pragma: no cover
    """Point ``m`` of window ``w``: the kernel weights at its fractional position (linear
    between the two table rows either side of it) applied to the ``taps`` samples around it
    (``out[c, w, m]``); plain-Python form of the compiled loop. The weights of a window are
    computed once and applied to every channel in turn."""
    c_n, n_win, m_pts = out.shape
    taps = table.shape[1]
    wts = np.empty((m_pts, taps))
    bases = np.empty(m_pts, dtype=np.int64)
    for w in range(n_win):
        s, ln, kap = starts[w], lengths[w], warp[w]
        for m in range(m_pts):
            u = m / m_pts
            pos = s + ln * u
            if kap != 0.0:
                pos += ln * kap * (u * (1.0 - u))
            i0 = np.floor(pos)
            v = (pos - i0) * phases
            fp = np.floor(v)
            a = v - fp
            p = int(fp)
            bases[m] = int(i0) - (half - 1)
            for t in range(taps):
                wts[m, t] = table[p, t] + a * (table[p + 1, t] - table[p, t])
        # the kernels of :func:`pqcheck.dsp.spectrum.kernel_for` have a multiple of 8 taps:
        # with the count a constant the compiler unrolls the dot product into vector
        # multiply-adds (measured 1.6 x faster than the loop over a run-time count)
        for c in range(c_n):
            if taps == 16:
                for m in range(m_pts):
                    b = bases[m]
                    acc = 0.0
                    for t in range(16):
                        acc += x[c, b + t] * wts[m, t]
                    out[c, w, m] = acc
            elif taps == 8:
                for m in range(m_pts):
                    b = bases[m]
                    acc = 0.0
                    for t in range(8):
                        acc += x[c, b + t] * wts[m, t]
                    out[c, w, m] = acc
            elif taps == 24:
                for m in range(m_pts):
                    b = bases[m]
                    acc = 0.0
                    for t in range(24):
                        acc += x[c, b + t] * wts[m, t]
                    out[c, w, m] = acc
            else:
                for m in range(m_pts):
                    b = bases[m]
                    acc = 0.0
                    for t in range(taps):
                        acc += x[c, b + t] * wts[m, t]
                    out[c, w, m] = acc


def _phase_sums_py(x, mid, count, phi0, k_first, nz, out):  # pragma: no cover
    """Hann-weighted sums of ``x exp(-j 2 pi phi(n))`` over the two-cycle windows of
    :func:`pqcheck.dsp.tracking._second_pass`; plain-Python form of the compiled loop.

    ``phi`` is the piecewise linear model through ``(mid, count)``, extended at the first and
    last slopes. Sample ``n`` with ``g = phi(n) - phi0 + 1/2`` lies in window
    ``lead = floor(g) - 1 - k_first`` at weight ``w = cos^2(pi frac(g) / 2)`` and in window
    ``lead + 1`` at ``1 - w``. Within each model segment ``phi`` is linear in ``n``, so
    ``exp(-j 2 pi phi)`` and ``exp(j pi g)`` advance by one complex rotation per sample,
    re-seeded exactly at every segment; ``out`` (shape ``(3, nz)``) receives the real and
    imaginary sums and the sums of weights."""
    n = x.size
    n_mid = mid.size
    tau = 2.0 * np.pi
    # segment s covers samples [edge[s], edge[s + 1]): before mid[1], between mids, after
    # mid[-2] (the two end segments extend the first and last slopes)
    for s in range(n_mid - 1):
        slope = (count[s + 1] - count[s]) / (mid[s + 1] - mid[s])
        lo = 0 if s == 0 else int(np.ceil(mid[s]))
        hi = n if s == n_mid - 2 else int(np.ceil(mid[s + 1]))
        lo = max(lo, 0)
        hi = min(hi, n)
        if hi <= lo:
            continue
        phi_s = count[s] + (lo - mid[s]) * slope
        a = tau * (phi_s - np.floor(phi_s))
        er, ei = np.cos(a), -np.sin(a)  # exp(-j 2 pi phi)
        rr, ri = np.cos(tau * slope), -np.sin(tau * slope)
        g_s = phi_s - phi0 + 0.5
        b = np.pi * (g_s - 2.0 * np.floor(0.5 * g_s))
        qr, qi = np.cos(b), np.sin(b)  # exp(j pi g)
        pr, pi_ = np.cos(np.pi * slope), np.sin(np.pi * slope)
        # the window index changes where g crosses a whole number: each run of equal index
        # is summed in scalars (its end found from the slope, then confirmed with the same
        # floor test a sample-by-sample loop would make) and added to its two windows
        i = lo
        while i < hi:
            cur = np.floor(g_s + (i - lo) * slope)
            end = i + 1  # a flat or falling model: sample by sample
            if slope > 0.0:
                reach = np.ceil((cur + 1.0 - g_s) / slope)
                end = hi if reach >= hi - lo else max(lo + int(reach), i + 1)
            while end < hi and np.floor(g_s + (end - lo) * slope) == cur:
                end += 1
            while end - 1 > i and np.floor(g_s + (end - 1 - lo) * slope) != cur:
                end -= 1
            parity = cur - 2.0 * np.floor(0.5 * cur)
            sgn = 0.5 if parity == 0.0 else -0.5  # cos(pi frac(g)) = +-cos(pi g)
            s_wr = s_wi = s_r = s_i = s_w = 0.0
            run_len = float(end - i)
            for _ in range(end - i):
                w = 0.5 + sgn * qr
                xv = x[i]
                yr = xv * er
                yi = xv * ei
                s_wr += w * yr
                s_wi += w * yi
                s_r += yr
                s_i += yi
                s_w += w
                er, ei = er * rr - ei * ri, er * ri + ei * rr
                qr, qi = qr * pr - qi * pi_, qr * pi_ + qi * pr
                i += 1
            j = int(cur) - 1 - k_first
            if 0 <= j < nz:
                out[0, j] += s_wr
                out[1, j] += s_wi
                out[2, j] += s_w
            if 0 <= j + 1 < nz:
                out[0, j + 1] += s_r - s_wr
                out[1, j + 1] += s_i - s_wi
                out[2, j + 1] += run_len - s_w


def resample_into(x, starts, lengths, warp, table, half: int, phases: int, out) -> None:
    """Fill ``out`` (shape ``(C, W, M)``) with the band-limited values of ``x`` (shape
    ``(C, n)``) at ``starts[w] + lengths[w] (u + warp[w] u (1 - u))``, ``u = m / M``, using
    the tabulated kernel ``table`` (shape ``(phases + 1, taps)``) looked up at the nearest
    phase. Compiled; the caller checks the kernel stays inside ``x``."""
    _KERNELS["resample"](np.ascontiguousarray(x, dtype=np.float64),
                 np.ascontiguousarray(starts, dtype=np.float64),
                 np.ascontiguousarray(lengths, dtype=np.float64),
                 np.ascontiguousarray(warp, dtype=np.float64), table, int(half), int(phases),
                 out)


def phase_sums(x, mid, count, phi0: float, k_first: int, nz: int):
    """See :func:`_phase_sums_py`; returns an array ``(3, nz)``: the real and imaginary
    weighted sums and the sums of weights."""
    out = np.zeros((3, nz))
    _KERNELS["phase_sums"](np.ascontiguousarray(x, dtype=np.float64),
                   np.ascontiguousarray(mid, dtype=np.float64),
                   np.ascontiguousarray(count, dtype=np.float64), float(phi0), int(k_first),
                   int(nz), out)
    return out


def window_stats():
    """The C loops of :func:`pqcheck.dsp.spectrum._time_stats` (``(all_finite,
    window_stats)`` of :mod:`pqcheck._native`) when the extension is used, else None (numba
    has no form of them: its callers keep the NumPy one)."""
    if not available() or "window_stats" not in _KERNELS:
        return None
    return _KERNELS["all_finite"], _KERNELS["window_stats"]


def cycle_sums():
    """The C loop of the tracker's first pass (:func:`pqcheck._native.cycle_sums`) when the
    extension is used, else None (numba has no form of it: its callers keep the NumPy one,
    :func:`pqcheck.dsp.tracking._cycle_sums_numpy`)."""
    if not available() or "cycle_sums" not in _KERNELS:
        return None
    return _KERNELS["cycle_sums"]
