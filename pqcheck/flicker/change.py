"""Relative voltage change characteristics of IEC 61000-3-3: d(t), dc, dmax and Tmax.

The half-period rms voltage is computed between consecutive zero crossings of the supply
(:class:`HalfPeriodRms`, block by block). :func:`voltage_changes` then finds the steady
states and evaluates every voltage change characteristic between them.

Definitions (IEC 61000-3-3:2013+AMD1:2017 clause 3, IEC 61000-4-15:2010 clause 4.7):

* half-period rms ``U_hp``: the rms over each half period between zero crossings;
* steady state: the half-period rms values stay within a tolerance band (here +-0.2 % of
  ``Un``, ``from memory``) for at least 1 s (100 half periods at 50 Hz, 120 at 60 Hz);
* d(t) = (U_before - U_hp(t)) / Un, evaluated outside steady states, ``U_before`` being the
  mean of the last second of the preceding steady state (positive for a voltage drop);
* dc: the difference of two adjacent steady-state voltages (the last second before and the
  first second after the change) over ``Un``;
* dmax: the difference between the largest and the smallest half-period rms of a change
  characteristic, the steady states at its ends included, over ``Un`` (a plain step gives
  dmax = dc, a dip from a steady state its depth);
* Tmax: the time during which |d(t)| exceeds 3.3 % within one change characteristic.

The figures reported are the largest over all changes of the record; each change is kept in
:attr:`VoltageChangeResult.changes`.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import signal
from scipy.ndimage import maximum_filter1d, minimum_filter1d

__all__ = [
    "HalfPeriodRms",
    "half_period_rms",
    "VoltageChange",
    "VoltageChangeResult",
    "voltage_changes",
    "STEADY_TOLERANCE_PERCENT",
    "STEADY_DURATION_S",
    "TMAX_THRESHOLD_PERCENT",
]

STEADY_TOLERANCE_PERCENT = 0.2
"""Half-band of the steady-state tolerance, per cent of Un (``from memory``). [%]"""

STEADY_DURATION_S = 1.0
"""Shortest steady state (IEC 61000-3-3 clause 3). [s]"""

_PERIOD_AVERAGE = 20
"""Half periods over which the boundary spacing is averaged."""

TMAX_THRESHOLD_PERCENT = 3.3
"""Level of d(t) whose exceedance time is Tmax (IEC 61000-3-3 clause 5). [%]"""


class HalfPeriodRms:
    """Half-period rms voltage between zero crossings, block by block.

    Zero crossings are found on a band-passed copy of the reference voltage (2nd-order
    Butterworth, 0.1 to 3 times the nominal frequency, started in the steady state of the
    record's first cycle), so harmonics, noise and a DC offset do not move or add crossings;
    the copy's phase lag at the nominal frequency is taken off, so the boundaries fall on the
    reference's own zero crossings (the mean square of a sinusoid over any
    half-period-long span is the same, but a change of state at a zero crossing then
    stays at a boundary). Each crossing is placed by linear
    interpolation; the half-period boundaries start at the first crossing and advance by the
    mean spacing of the last 20 crossings, so they follow the supply frequency while a
    voltage step (which moves the copy's crossings for a few cycles) does not shorten or
    lengthen any half period. Integrals between two boundaries are sums over the samples
    with the boundary samples counted in part.

    Besides the rms of ``u``, the half-period means of further per-sample quantities can be
    kept (``n_means``), e.g. the products ``e i`` whose means are active powers.

    Parameters
    ----------
    fs_hz : float
        Sample rate. [Hz]
    nominal_hz : float
        Nominal supply frequency. [Hz]
    n_means : int
        Number of further quantities whose half-period means are kept. [unitless]
    """

    def __init__(self, fs_hz, nominal_hz, n_means=0):
        self.fs = float(fs_hz)
        self.f0 = float(nominal_hz)
        self.nm = int(n_means)
        self.sos = signal.butter(2, [0.1 * self.f0, min(3.0 * self.f0, 0.45 * self.fs)],
                                 "bandpass", fs=self.fs, output="sos")
        # the copy's phase at f0, as a delay in samples: crossings are moved back by it, so
        # the boundaries fall on the reference's own zero crossings
        _, hf = signal.sosfreqz(self.sos, worN=[self.f0], fs=self.fs)
        self.delay = -float(np.angle(hf[0])) / (2 * np.pi * self.f0) * self.fs
        self.zi = None
        self.n = 0  # samples seen
        self.c0 = np.zeros(1 + self.nm)  # cumulative integrals before the current block
        self.prev_y = None
        self._last_c = None  # position (global samples) of the last crossing
        self._hist = []  # the last crossings, for the mean half period
        self._last_b = None  # position of the last half-period boundary
        self._last_v = None  # cumulative integrals at that boundary
        self._tail_n = int(4 * self.fs / self.f0)
        self._tail = np.empty((1 + self.nm, 0))
        self.min_gap = 0.3 * self.fs / (2 * self.f0)
        self._t = []
        self._u = []
        self._dt = []
        self._p = []
        self._bad = []  # positions of non-finite samples

    def feed(self, u, ref=None, means=None) -> None:
        """Process the next block of samples. [V]

        ``ref`` (same length) is the voltage whose zero crossings delimit the half periods,
        the source voltage when it is known; by default ``u`` itself. ``means`` (``n_means``
        rows) are the quantities whose half-period means are kept.
        """
        u = np.asarray(u, dtype=np.float64)
        if u.size == 0:
            return
        if not np.isfinite(u).all():
            self._bad.append(np.flatnonzero(~np.isfinite(u)) + self.n)
            u = np.where(np.isfinite(u), u, 0.0)
        r = u if ref is None else np.asarray(ref, dtype=np.float64)
        if r is not u and not np.isfinite(r).all():
            r = np.where(np.isfinite(r), r, 0.0)
        if self.zi is None:
            # pre-roll: the first cycle repeated for half a second settles the band-pass copy
            n_c = max(2, int(round(self.fs / self.f0)))
            cyc = r[:n_c]
            reps = int(np.ceil(0.5 * self.fs / cyc.size))
            _, self.zi = signal.sosfilt(self.sos, np.tile(cyc, reps),
                                        zi=np.zeros((self.sos.shape[0], 2)))
        y, self.zi = signal.sosfilt(self.sos, r, zi=self.zi)
        yy = y if self.prev_y is None else np.concatenate([[self.prev_y], y])
        off = 0 if self.prev_y is None else 1
        sb = np.signbit(yy)
        k = np.flatnonzero(sb[1:] != sb[:-1])  # crossing between yy[k] and yy[k+1]
        frac = yy[k] / (yy[k] - yy[k + 1])
        pos = (k - off + frac) + self.n - self.delay  # global position of the crossing
        pos = self._accept(pos)
        bnd = self._boundaries(pos)
        # integrands: u^2 and the further quantities
        if self.nm:
            x = np.atleast_2d(np.asarray(means, dtype=np.float64))
            if not np.isfinite(x).all():
                self._bad.append(np.flatnonzero(~np.isfinite(x).all(axis=0)) + self.n)
                x = np.where(np.isfinite(x), x, 0.0)
            q = np.empty((1 + x.shape[0], u.size))
            np.multiply(u, u, out=q[0])
            q[1:] = x
        else:
            q = (u * u)[None, :]
        ext = np.concatenate([self._tail, q], axis=1)
        ext0 = self.n - self._tail.shape[1]
        if bnd.size:
            # integral from the start of ext to each boundary b: whole samples below
            # floor(b) (segment sums) plus the fraction of sample floor(b)
            loc = bnd - ext0
            i = np.clip(np.floor(loc).astype(np.int64), 0, ext.shape[1] - 1)
            part = np.clip(loc - i, 0.0, 1.0)
            idx = np.concatenate([[0], i])
            seg = np.add.reduceat(ext, idx, axis=1)[:, :-1] if i.size else np.zeros((1, 0))
            # reduceat gives sum(ext[idx[j]:idx[j+1]]) for j < last; an empty segment
            # (equal indices) returns ext[idx[j]] instead of 0
            empty = idx[1:] == idx[:-1]
            seg[:, empty] = 0.0
            before = self.c0 - self._tail.sum(axis=1)
            vals = before[:, None] + np.cumsum(seg, axis=1) + part[None, :] * ext[:, i]
            if self._last_v is None:
                self._last_v, self._last_b = vals[:, 0], float(bnd[0])
                vals, bnd = vals[:, 1:], bnd[1:]
            if bnd.size:
                allb = np.concatenate([[self._last_b], bnd])
                allv = np.concatenate([self._last_v[:, None], vals], axis=1)
                gap = np.diff(allb)
                dv = np.diff(allv, axis=1) / gap[None, :]
                self._t.append(0.5 * (allb[1:] + allb[:-1]) / self.fs)
                self._u.append(np.sqrt(np.maximum(dv[0], 0.0)))
                self._dt.append(gap / self.fs)
                if self.nm:
                    self._p.append(dv[1:].T.copy())
                self._last_b, self._last_v = float(bnd[-1]), vals[:, -1].copy()
        self.c0 = self.c0 + q.sum(axis=1)
        self.n += u.size
        self.prev_y = y[-1]
        self._tail = ext[:, -self._tail_n:].copy()

    def _accept(self, pos):
        """Crossings at least 0.3 half period after the previous accepted one."""
        prev = -np.inf if self._last_c is None else self._last_c
        gaps = np.diff(np.concatenate([[prev], pos]))
        if pos.size and (gaps < self.min_gap).any():  # rare: noise near a crossing
            keep = []
            for x in pos:
                if x - prev >= self.min_gap:
                    keep.append(x)
                    prev = x
            pos = np.asarray(keep)
        if pos.size:
            self._last_c = float(pos[-1])
        return pos

    def _boundaries(self, pos):
        """Half-period boundaries: the first crossing, then steps of the mean spacing of the
        last crossings (up to ``_PERIOD_AVERAGE``)."""
        if pos.size == 0:
            return pos
        hist = np.asarray(self._hist, dtype=float)
        allc = np.concatenate([hist, pos])
        j = np.arange(hist.size, allc.size)
        lo = np.maximum(j - _PERIOD_AVERAGE, 0)
        self._hist = list(allc[-(_PERIOD_AVERAGE + 1):])
        with np.errstate(invalid="ignore", divide="ignore"):
            gap = (allc[j] - allc[lo]) / (j - lo)
        if self._last_b is None and self._last_v is None:
            start = pos[0]
            steps = gap[1:]
            return np.concatenate([[start], start + np.cumsum(steps)])
        return self._last_bnd() + np.cumsum(gap)

    def _last_bnd(self):
        return self._last_b if self._last_b is not None else 0.0

    def finish(self):
        """Return ``(t_s, u_hp_v, duration_s)`` arrays: mid time, rms, half-period length."""
        t, u, dt = _cat(self._t), _cat(self._u), _cat(self._dt)
        self._mark_gaps(t, dt, u)
        return t, u, dt

    def _mark_gaps(self, t, dt, u):
        """Half periods that held a non-finite sample get NaN (they are no voltage)."""
        if not self._bad or not t.size:
            return
        bad_t = _cat(self._bad) / self.fs
        start = t - dt / 2
        k = np.searchsorted(start, bad_t, side="right") - 1
        k = k[(k >= 0) & (bad_t < t[np.clip(k, 0, t.size - 1)] + dt[np.clip(k, 0, t.size - 1)]
                          / 2)]
        u[k] = np.nan
        self.gap_halfperiods = np.unique(k)

    gap_halfperiods = np.empty(0, dtype=np.int64)

    def means(self) -> np.ndarray:
        """Half-period means of the further quantities, shape ``(n_halfperiods, n_means)``;
        NaN for half periods that held a non-finite sample."""
        if not self._p:
            return np.empty((0, self.nm))
        m = np.concatenate(self._p, axis=0)
        t, _, _ = self.finish()
        m[self.gap_halfperiods] = np.nan
        return m


def _cat(parts):
    return np.concatenate(parts) if parts else np.empty(0)


def half_period_rms(u, *, fs_hz, nominal_hz, ref=None):
    """Half-period rms of a whole record; see :class:`HalfPeriodRms`.

    Returns
    -------
    t_s, u_hp_v, duration_s : numpy.ndarray
        Mid time [s], rms [V] and length [s] of each half period.
    """
    h = HalfPeriodRms(fs_hz, nominal_hz)
    h.feed(u, ref)
    return h.finish()


@dataclass(frozen=True)
class VoltageChange:
    """One voltage change characteristic (between two steady states, or open-ended).

    Attributes
    ----------
    start_s, end_s : float
        Mid times of its first and last half period. [s]
    u_before_v : float
        Steady-state voltage before it (mean of the last second). [V]
    u_after_v : float
        Steady-state voltage after it (mean of the first second), NaN when the record ends
        before a new steady state. [V]
    dc_percent : float
        (u_before - u_after) / Un, NaN without a following steady state. [%]
    dmax_percent : float
        Largest minus smallest half-period rms over the change (its steady ends included),
        relative to Un. [%]
    tmax_s : float
        Time |d(t)| exceeds 3.3 %. [s]
    """

    start_s: float
    end_s: float
    u_before_v: float
    u_after_v: float
    dc_percent: float
    dmax_percent: float
    tmax_s: float


@dataclass(frozen=True)
class VoltageChangeResult:
    """Relative voltage change characteristics of one voltage.

    Attributes
    ----------
    un_v : float
        Nominal voltage the changes are relative to. [V]
    t_s, u_hp_v : numpy.ndarray
        Half-period rms series. [s], [V]
    d_percent : numpy.ndarray
        d(t) per half period, NaN in steady states. [%]
    steady : numpy.ndarray
        True for half periods inside a steady state.
    changes : tuple of VoltageChange
    dc_percent, dmax_percent, tmax_s : float
        Largest over the changes (0 when there is none; dc NaN when no change has a
        following steady state). [%], [%], [s]
    steady_found : bool
        False when the record holds no steady state (d(t) is then relative to its first
        half period and dc is undefined).
    """

    un_v: float
    t_s: np.ndarray
    u_hp_v: np.ndarray
    d_percent: np.ndarray
    steady: np.ndarray
    changes: tuple
    dc_percent: float
    dmax_percent: float
    tmax_s: float
    steady_found: bool


def _steady_runs(u, n, band_v):
    """Steady states as (start, stop) half-period index pairs.

    A window of ``n`` consecutive half periods is steady when its range is within ``band_v``;
    overlapping steady windows form one steady state, windows that only touch (a change
    between two half periods) stay separate.
    """
    m = u.size
    if m < n:
        return []
    c = n // 2
    hi = maximum_filter1d(u, n, mode="nearest")
    lo = minimum_filter1d(u, n, mode="nearest")
    # the centred filter at index s + c covers [s, s + n) (n odd or even: scipy centres at n//2)
    ok = (hi[c:m - n + 1 + c] - lo[c:m - n + 1 + c]) <= band_v
    starts = np.flatnonzero(ok)
    if starts.size == 0:
        return []
    # a new state starts where the next accepted window does not overlap the previous one
    brk = np.flatnonzero(np.diff(starts) >= n)
    first = np.concatenate([[starts[0]], starts[brk + 1]])
    last = np.concatenate([starts[brk], [starts[-1]]])
    return [(int(a), int(b) + n) for a, b in zip(first, last)]


def voltage_changes(t_s, u_hp_v, *, un_v, nominal_hz, duration_s=None,
                    tolerance_percent=STEADY_TOLERANCE_PERCENT,
                    steady_s=STEADY_DURATION_S,
                    threshold_percent=TMAX_THRESHOLD_PERCENT) -> VoltageChangeResult:
    """d(t), dc, dmax and Tmax of a half-period rms series (IEC 61000-3-3).

    Parameters
    ----------
    t_s, u_hp_v : array_like
        Half-period mid times and rms values. [s], [V]
    un_v : float
        Nominal voltage. [V]
    nominal_hz : float
        Nominal frequency (sets the half periods per steady second). [Hz]
    duration_s : array_like or None
        Length of each half period (default ``1 / (2 nominal_hz)``). [s]
    tolerance_percent : float
        Steady-state half-band, per cent of Un. [%]
    steady_s : float
        Shortest steady state. [s]
    threshold_percent : float
        Level for Tmax. [%]

    Returns
    -------
    VoltageChangeResult

    Examples
    --------
    A 230 V supply stepping down by 3 % for good:

    >>> import numpy as np
    >>> t = np.arange(600) / 100
    >>> u = np.where(t < 3, 230.0, 230.0 * 0.97)
    >>> r = voltage_changes(t, u, un_v=230.0, nominal_hz=50)
    >>> round(r.dc_percent, 3), round(r.dmax_percent, 3), r.tmax_s
    (3.0, 3.0, 0.0)
    """
    t = np.asarray(t_s, dtype=float)
    u = np.asarray(u_hp_v, dtype=float)
    dur = (np.full(u.shape, 1.0 / (2 * nominal_hz)) if duration_s is None
           else np.asarray(duration_s, dtype=float))
    n = max(1, int(round(steady_s * 2 * nominal_hz)))
    band = 2.0 * tolerance_percent / 100.0 * un_v
    finite = np.isfinite(u)
    runs = _steady_runs(np.where(finite, u, np.inf), n, band)
    steady = np.zeros(u.shape, dtype=bool)
    for a, b in runs:
        steady[a:b] = True
    d = np.full(u.shape, np.nan)
    changes = []
    if not runs:
        if u.size:
            d = (u[0] - u) / un_v * 100.0
            changes.append(_change(t, d, dur, 0, u.size, u[0], np.nan, un_v, threshold_percent))
        return _result(un_v, t, u, d, steady, changes, steady_found=False)
    # before the first steady state: relative to its first second
    first_level = float(np.mean(u[runs[0][0]:runs[0][0] + n]))
    if runs[0][0] > 0:
        a, b = 0, runs[0][0]
        d[a:b] = (first_level - u[a:b]) / un_v * 100.0
        changes.append(_change(t, d, dur, a, b, first_level, np.nan, un_v, threshold_percent,
                               dc_defined=False))
    for k, (s0, e0) in enumerate(runs):
        before = float(np.mean(u[max(s0, e0 - n):e0]))
        a = e0
        b = runs[k + 1][0] if k + 1 < len(runs) else u.size
        if b < a or a >= u.size:
            continue
        after = float(np.mean(u[b:b + n])) if k + 1 < len(runs) else np.nan
        d[a:b] = (before - u[a:b]) / un_v * 100.0
        changes.append(_change(t, d, dur, a, b, before, after, un_v, threshold_percent))
    return _result(un_v, t, u, d, steady, changes, steady_found=True)


def _change(t, d, dur, a, b, before, after, un_v, thr, dc_defined=True):
    seg = d[a:b]
    if b == a:  # a step between two half periods: the change is the steady-state change
        dc = (before - after) / un_v * 100.0
        return VoltageChange(
            start_s=float(t[a - 1]), end_s=float(t[a]), u_before_v=float(before),
            u_after_v=float(after), dc_percent=float(dc), dmax_percent=abs(float(dc)),
            tmax_s=0.0)
    dc = (before - after) / un_v * 100.0 if dc_defined and np.isfinite(after) else np.nan
    # dmax: maximum minus minimum rms of the characteristic, the steady levels at its ends
    # included (d = 0 before, d = dc after)
    vals = np.concatenate([seg[np.isfinite(seg)], [0.0], [dc] if np.isfinite(dc) else []])
    dmax = float(vals.max() - vals.min())
    with np.errstate(invalid="ignore"):
        over = np.abs(seg) > thr
    return VoltageChange(
        start_s=float(t[a]), end_s=float(t[b - 1]), u_before_v=float(before),
        u_after_v=float(after), dc_percent=float(dc), dmax_percent=dmax,
        tmax_s=float(np.sum(dur[a:b][over])))


def _result(un_v, t, u, d, steady, changes, *, steady_found):
    dcs = [abs(c.dc_percent) for c in changes if np.isfinite(c.dc_percent)]
    return VoltageChangeResult(
        un_v=float(un_v), t_s=t, u_hp_v=u, d_percent=d, steady=steady,
        changes=tuple(changes),
        dc_percent=float(max(dcs)) if dcs else (0.0 if not changes else float("nan")),
        dmax_percent=float(max((c.dmax_percent for c in changes), default=0.0)),
        tmax_s=float(max((c.tmax_s for c in changes), default=0.0)),
        steady_found=steady_found)
