"""Data-quality gates: clipping, gaps, sample rate, frequency, DC offset.

Each gate returns :class:`~pqcheck.findings.Finding` records rather than raising: a capture
with a problem can still be analysed, and the problem travels with the numbers into the
assessment (where a finding of severity ``error`` makes the affected checks inconclusive) and
into the report. Gates that look at raw samples work block by block, so a long capture never
has to sit in memory whole.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from . import numfmt
from .findings import Finding

__all__ = [
    "ClipDetector",
    "max_resolved_order",
    "sample_rate_findings",
    "frequency_findings",
    "dc_offset_findings",
    "gap_findings",
    "fundamental_findings",
    "SYNC_TOLERANCE",
]

SYNC_TOLERANCE = 3e-4
"""Allowed relative error of the window span, +-0.03 % (IEC 61000-4-7, from memory)."""

SAMPLES_PER_PERIOD_MIN = 2.5
"""Fewest samples per period of the highest order reported (Nyquist with a 20 % margin for the
recorder's anti-aliasing filter)."""


def max_resolved_order(fs_hz: float, nominal_hz: float, max_order: int) -> int:
    """Highest order the sample rate resolves: ``h f_nom <= fs / 2.5``. [unitless]

    >>> max_resolved_order(5000.0, 50.0, 50)
    40
    """
    return int(min(max_order, np.floor(fs_hz / (SAMPLES_PER_PERIOD_MIN * nominal_hz) + 1e-9)))


@dataclass
class _Side:
    level: float = -np.inf
    at_level: int = 0
    runs: int = 0
    run_samples: int = 0
    near: int = 0
    steep_entries: int = 0


@dataclass
class ClipDetector:
    """Flat tops at a recorder's rail, accumulated over blocks of one channel.

    A channel is flagged as clipped when samples pile up at its extreme value in runs of three
    or more, at least 4 times as many as in the two quantisation steps just below (a smooth
    waveform, even a quantised one, spends about as long in each step near its peak), and the
    waveform runs into the flat part gradually (a flat-topped waveform such as an ideal
    rectifier current steps onto its plateau and is not flagged).
    """

    name: str
    unit: str = ""
    step: float = 0.0
    top: _Side = field(default_factory=_Side)
    bottom: _Side = field(default_factory=_Side)
    n: int = 0
    lo: float = np.inf
    hi: float = -np.inf

    def update(self, x, *, finite: bool = False) -> None:
        """Add a block of samples (``finite=True`` when the caller knows there is no NaN or
        inf, which saves a copy). [A] or [V]"""
        x = np.asarray(x, dtype=np.float64)
        if not finite:
            x = x[np.isfinite(x)]
        if x.size < 8:
            return
        if self.step == 0.0:
            u = np.unique(x[: 50_000])
            d = np.diff(u)
            d = d[d > 0]
            self.step = float(np.min(d)) if d.size else 0.0
        self.n += x.size
        hi, lo = float(x.max()), float(x.min())
        self.lo = min(self.lo, lo)
        self.hi = max(self.hi, hi)
        span = (hi - lo) or 1.0
        self._side(self.top, x, hi, span, 1.0)
        self._side(self.bottom, x, -lo, span, -1.0)

    def _side(self, side: _Side, x, level: float, span: float, sign: float) -> None:
        """One rail: ``sign`` 1 for the upper, -1 for the lower (levels are in ``sign * x``)."""
        tol = max(0.5 * self.step, 1e-9 * span)
        if level < side.level - tol:
            return
        if level > side.level + tol:
            side.__init__(level=level)
        band = max(3 * self.step, 1e-6 * span)
        if sign > 0:
            n_close = int(np.count_nonzero(x >= side.level - band))
        else:
            n_close = int(np.count_nonzero(x <= -(side.level - band)))
        if n_close < 3:
            side.near += n_close
            return
        at = (x >= side.level - tol) if sign > 0 else (x <= -(side.level - tol))
        n_at = int(np.count_nonzero(at))
        side.at_level += n_at
        side.near += n_close - n_at
        if n_at < 3:
            return
        # runs of >= 3 samples at the level
        edges = np.diff(np.concatenate(([0], at.view(np.int8), [0])))
        starts = np.flatnonzero(edges == 1)
        stops = np.flatnonzero(edges == -1)
        lengths = stops - starts
        long = lengths >= 3
        side.runs += int(long.sum())
        side.run_samples += int(lengths[long].sum())
        s = starts[long]
        s = s[s > 0]
        if s.size:
            jump = side.level - sign * x[s - 1]
            side.steep_entries += int((jump > 0.25 * span).sum())

    def findings(self) -> list:
        """Findings for this channel (empty when no clipping is seen)."""
        out = []
        for label, side in (("upper", self.top), ("lower", self.bottom)):
            if side.runs < 2 or self.n == 0:
                continue
            fraction = side.run_samples / self.n
            if fraction < 1e-4:
                continue
            if side.at_level < 4 * max(side.near, 1):
                continue
            if side.steep_entries > 0.5 * side.runs:
                continue
            level = side.level if label == "upper" else -side.level
            out.append(
                Finding(
                    "clipping",
                    "error",
                    f"channel {self.name!r} looks clipped at its {label} rail ({level:.6g}{' ' + self.unit if self.unit else ''}): "
                    f"{100 * fraction:.2f} % of samples sit flat there in {side.runs} runs. "
                    "Harmonics of a clipped waveform are wrong; re-capture with a larger "
                    "input range (volts/div) or a probe of lower gain.",
                    channels=(self.name,),
                    value=100 * fraction,
                    unit="%",
                )
            )
        return out


def sample_rate_findings(fs_hz, nominal_hz, max_order, resolved, cycles_per_window):
    """Findings about the sample rate: unresolved orders. (Windows are resampled to their exact
    span, so a low rate no longer widens the synchronisation error.)"""
    out = []
    if resolved < max_order:
        need = SAMPLES_PER_PERIOD_MIN * nominal_hz * max_order
        out.append(
            Finding(
                "low-sample-rate",
                "error",
                f"a sample rate of {fs_hz:g} Hz resolves harmonic orders up to {resolved} only "
                f"(order {max_order} needs at least {need:g} Hz); orders "
                f"{resolved + 1}..{max_order} are not reported. Capture faster or lower "
                "`max_order`.",
                orders=tuple(range(resolved + 1, max_order + 1)),
                value=fs_hz,
                unit="Hz",
            )
        )
    return out


def frequency_findings(freq_hz, nominal_hz, *, tracked: bool, reference: str):
    """Findings about the fundamental: off nominal, unstable, not tracked."""
    out = []
    f = np.asarray(freq_hz, dtype=np.float64)
    f = f[np.isfinite(f)]
    if not tracked:
        out.append(
            Finding(
                "frequency-not-tracked",
                "error",
                f"the fundamental of the reference channel {reference!r} is too weak to track; "
                f"windows assume exactly {nominal_hz:g} Hz and may not be synchronous. Include a "
                "voltage channel (`voltage`) or a channel that carries the fundamental.",
                channels=(),
            )
        )
        return out
    if f.size == 0:
        return out
    mean = float(f.mean())
    other = 60.0 if nominal_hz == 50 else 50.0
    if abs(mean - other) < abs(mean - nominal_hz):
        # a 60 Hz capture analysed as 50 Hz (or the reverse): wrong window length (10 cycles
        # instead of 12) and limits meant for another network; no verdict can rest on it
        out.append(
            Finding(
                "wrong-nominal-frequency",
                "error",
                f"measured fundamental {numfmt.value(mean, 'frequency')} is nearer {other:g} Hz "
                "than the nominal "
                f"{nominal_hz:g} Hz given, so the windows do not hold the cycles IEC 61000-4-7 "
                f"prescribes for a {other:g} Hz system. Give `nominal_hz` "
                f"{other:g} (or leave it out to detect it) and check the limits chosen.",
                value=mean,
                unit="Hz",
            )
        )
    elif abs(mean - nominal_hz) > 0.01 * nominal_hz:
        out.append(
            Finding(
                "off-nominal-frequency",
                "warning",
                f"measured fundamental {numfmt.value(mean, 'frequency')} is more than 1 % from "
                "the nominal "
                f"{nominal_hz:g} Hz; windows follow the measured frequency. Check the "
                "`nominal_hz` setting and the supply.",
                value=mean,
                unit="Hz",
            )
        )
    spread = float(f.max() - f.min())
    if spread > 0.01 * nominal_hz:
        out.append(
            Finding(
                "unstable-frequency",
                "warning",
                f"the fundamental varies by {numfmt.value(spread, 'frequency')} over the "
                f"capture ({numfmt.value(f.min(), 'frequency', unit='')} to "
                f"{numfmt.value(f.max(), 'frequency')}).",
                value=spread,
                unit="Hz",
            )
        )
    return out


def dc_offset_findings(names, dc, fundamental, quantities):
    """A DC component above 2 % of the fundamental (probe offset or half-wave load)."""
    out = []
    for name, d, f1, q in zip(names, dc, fundamental, quantities):
        if not (np.isfinite(d) and np.isfinite(f1)) or f1 <= 0:
            continue
        ratio = abs(d) / f1
        if ratio > 0.02:
            out.append(
                Finding(
                    "dc-offset",
                    "warning",
                    f"channel {name!r} has a DC component of {d:.4g} "
                    f"{'A' if q == 'current' else 'V'} ({100 * ratio:.1f} % of its fundamental). "
                    "Zero or degauss the probe before capture; if it is real, the load draws DC.",
                    channels=(name,),
                    value=100 * ratio,
                    unit="%",
                )
            )
    return out


def fundamental_findings(names, fundamental, rms):
    """Channels with no usable fundamental (THD and ratios to the fundamental are undefined)."""
    out = []
    for name, f1, r in zip(names, fundamental, rms):
        if not np.isfinite(r) or r == 0 or not np.isfinite(f1) or f1 < 0.01 * r:
            out.append(
                Finding(
                    "no-fundamental",
                    "error",
                    f"channel {name!r} carries no fundamental component (rms {r:.4g}, "
                    f"fundamental {f1:.4g}); THD and every ratio to the fundamental are "
                    "undefined. Check the channel map and that the equipment was running.",
                    channels=(name,),
                )
            )
    return out


def gap_findings(names, nonfinite_counts, n_windows, n_valid, n_samples):
    """Non-finite samples (empty cells, NaN, inf, time gaps) and the windows they removed."""
    out = []
    for name, c in zip(names, nonfinite_counts):
        if c:
            out.append(
                Finding(
                    "gaps",
                    "warning" if n_valid else "error",
                    f"channel {name!r} has {c} missing or non-finite samples "
                    f"({100 * c / max(n_samples, 1):.2f} %); windows containing them are left "
                    f"out ({n_windows - n_valid} of {n_windows} windows).",
                    channels=(name,),
                    value=float(c),
                    unit="samples",
                )
            )
    return out
