"""Independent reference: least-squares fit of sinusoids at a known frequency.

Deliberately slow and obviously correct: it builds the design matrix column by column from
the definition ``x(t) = c_0 + sum_h sqrt(2) Re(C_h exp(j 2 pi h f0 t))`` and solves it with
``numpy.linalg.lstsq``. It shares no code with pqcheck (no FFT, no windows, no tracking), so
agreement between the two is evidence that the FFT path is right.
"""

from __future__ import annotations

import numpy as np


def fit_harmonics(x, fs_hz: float, f0_hz: float, orders, *, t0_s: float = 0.0) -> dict:
    """Fit DC and the given harmonic orders of ``f0_hz`` to ``x`` by least squares.

    Parameters
    ----------
    x : array_like
        Samples. [A] or [V]
    fs_hz : float
        Sample rate. [Hz]
    f0_hz : float
        Fundamental frequency, known exactly. [Hz]
    orders : iterable of int
        Harmonic orders to fit (>= 1).
    t0_s : float
        Time of the first sample; phases refer to t = 0. [s]

    Returns
    -------
    dict
        ``0``: the DC value, and for each order ``h`` the complex rms phasor ``C_h`` (cosine
        basis: ``sqrt(2) |C_h| cos(2 pi h f0 t + angle(C_h))``). [A] or [V]
    """
    x = np.asarray(x, dtype=np.float64)
    orders = [int(h) for h in orders]
    t = t0_s + np.arange(x.size) / fs_hz
    columns = [np.ones_like(t)]
    for h in orders:
        w = 2 * np.pi * h * f0_hz
        # sqrt(2) |C| cos(wt + phi) = sqrt(2) Re(C) cos(wt) - sqrt(2) Im(C) sin(wt)
        columns.append(np.sqrt(2) * np.cos(w * t))
        columns.append(-np.sqrt(2) * np.sin(w * t))
    design = np.column_stack(columns)
    coef, *_ = np.linalg.lstsq(design, x, rcond=None)
    out = {0: float(coef[0])}
    for k, h in enumerate(orders):
        out[h] = complex(coef[1 + 2 * k], coef[2 + 2 * k])
    return out


def referenced(phasors: dict) -> dict:
    """Phasors relative to the fundamental: ``C_h exp(-j h angle(C_1))`` (time-shift free)."""
    a1 = np.angle(phasors[1])
    return {h: c * np.exp(-1j * h * a1) for h, c in phasors.items() if h >= 1}
