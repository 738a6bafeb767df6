"""Voltage at the equipment terminals from its current through a supply impedance.

IEC 61000-3-3 assesses the voltage at the terminals of the equipment supplied from an ideal
source through the reference impedance Zref (IEC 61000-3-3:2013 clause 6.4, from IEC TR
60725): per phase conductor 0.24 ohm + j0.15 ohm and in the neutral 0.16 ohm + j0.10 ohm at
50 Hz, so a single-phase loop of 0.40 ohm + j0.25 ohm. (The resistance 0.24 ohm is confirmed
by the national adoption of IEC 61000-3-11 Annex B; the reactances and the neutral values are
``from memory``, check them against your copy.) IEC 61000-3-11 uses the actual system
impedance instead.

The terminal line-to-neutral voltage of phase p is

    u_p = e_p - R_phase i_p - L_phase di_p/dt - (R_n i_N + L_n di_N/dt),  i_N = sum of i_p

with ``e_p`` the source voltage and ``L = X / (2 pi f_X)`` (see :class:`TerminalVoltage` for
how the reactive drop is formed).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import AnalysisError

__all__ = ["SupplyImpedance", "REFERENCE_IMPEDANCE", "TerminalVoltage"]


@dataclass(frozen=True)
class SupplyImpedance:
    """Impedance of the supply, per phase conductor and in the neutral.

    Attributes
    ----------
    r_phase_ohm, x_phase_ohm : float
        Phase conductor resistance and reactance. [ohm]
    r_neutral_ohm, x_neutral_ohm : float
        Neutral conductor resistance and reactance. [ohm]
    x_at_hz : float
        Frequency the reactances are given at. [Hz]
    name : str
        ``"reference"`` for Zref, ``"system"`` for a user's system impedance.
    """

    r_phase_ohm: float
    x_phase_ohm: float
    r_neutral_ohm: float
    x_neutral_ohm: float
    x_at_hz: float = 50.0
    name: str = "system"

    def __post_init__(self):
        vals = (self.r_phase_ohm, self.x_phase_ohm, self.r_neutral_ohm, self.x_neutral_ohm)
        if not all(np.isfinite(v) and v >= 0 for v in vals) or sum(vals) <= 0:
            raise AnalysisError(
                f"system_impedance: resistances and reactances must be finite, not negative "
                f"and not all zero, got {vals}", field="system_impedance")

    @property
    def loop(self) -> complex:
        """Single-phase loop impedance (phase + neutral) at ``x_at_hz``. [ohm]"""
        return complex(self.r_phase_ohm + self.r_neutral_ohm,
                       self.x_phase_ohm + self.x_neutral_ohm)

    def label(self) -> str:
        """E.g. ``"0.24+j0.15 ohm phase, 0.16+j0.1 ohm neutral at 50 Hz"``."""
        return (f"{self.r_phase_ohm:g}+j{self.x_phase_ohm:g} ohm phase, "
                f"{self.r_neutral_ohm:g}+j{self.x_neutral_ohm:g} ohm neutral at "
                f"{self.x_at_hz:g} Hz")

    @classmethod
    def from_loop(cls, r_ohm, x_ohm, *, x_at_hz=50.0):
        """A single-phase loop impedance split between phase and neutral as Zref is (3:2)."""
        return cls(0.6 * r_ohm, 0.6 * x_ohm, 0.4 * r_ohm, 0.4 * x_ohm, x_at_hz=x_at_hz)


REFERENCE_IMPEDANCE = SupplyImpedance(0.24, 0.15, 0.16, 0.10, 50.0, "reference")
"""IEC 61000-3-3 reference impedance Zref (IEC TR 60725), at 50 Hz."""


class TerminalVoltage:
    """Block-by-block terminal voltages of the phases behind a supply impedance.

    The reactive drop ``L di/dt`` is taken as ``X i(t + T/4)``, the current a quarter of a
    nominal period later (linear interpolation between samples): exact for the fundamental
    (``d/dt sin(wt) = w sin(w(t + T/4))``), and a current that jumps between two samples (a
    synthetic step, which no current through an inductive supply can do) moves the reactive
    drop to the new state a quarter period early instead of putting an impulse of
    ``L di/dt`` into one half period. Harmonic currents get the reactance of the
    fundamental; their share of the terminal rms is second order (well under 0.05 % of Un for
    realistic spectra). The output lags the input by about a quarter period and keeps its
    time base.

    Parameters
    ----------
    fs_hz : float
        Sample rate. [Hz]
    impedance : SupplyImpedance
    n_phases : int
        Number of phase currents fed (their sum flows in the neutral; a single-phase load
        has one, so its loop is phase + neutral).
    source : "ideal" or "measured"
        ``"ideal"``: ``e_p = sqrt(2) un_v sin(2 pi f t + phase_p)``; ``"measured"``: the
        source samples are given to :meth:`feed`.
    un_v, f_hz, phases_rad
        Ideal source rms, frequency and phase angle per phase; ``f_hz`` is also the
        frequency of the quarter-period shift. [V], [Hz], [rad]
    """

    def __init__(self, fs_hz, impedance, n_phases, *, source="ideal", un_v=230.0,
                 f_hz=50.0, phases_rad=(0.0,)):
        self.fs = float(fs_hz)
        self.z = impedance
        self.n = int(n_phases)
        self.source = source
        self.un = float(un_v)
        self.f = float(f_hz)
        self.ph = np.asarray(phases_rad, dtype=float)
        # reactance at the supply frequency
        scale = self.f / impedance.x_at_hz
        self.xp = impedance.x_phase_ohm * scale
        self.xn = impedance.x_neutral_ohm * scale
        q = self.fs / (4.0 * self.f)
        self.q0 = int(np.floor(q))
        self.qf = q - self.q0
        self.look = self.q0 + 1  # samples of look-ahead (currents) and look-back (source)
        self.buf_i = np.empty((self.n, 0))
        self.buf_e = np.empty((self.n, 0))
        self.g0 = 0  # global index of the buffers' first column
        self.k = 0  # next output sample

    @staticmethod
    def _shift(x, c, m, by):
        """Columns c + by .. c + by + m - 1 of x (fractional ``by``), linear interpolation."""
        b0 = int(np.floor(by))
        f = by - b0
        a = c + b0
        return (1.0 - f) * x[:, a:a + m] + f * x[:, a + 1:a + 1 + m]

    def feed(self, currents, sources=None):
        """Terminal voltage, source voltage, quadrature source and currents. [V], [A]

        Four arrays ``(n_phases, n)`` on the same samples: ``u`` the terminal voltage, ``e``
        the source, ``eq`` the source a quarter period earlier (``e(t - T/4)``, for the
        reactive current) and ``i`` the currents. The outputs lag the inputs by about a
        quarter period; :meth:`flush` returns the last ones. The source gives the zero
        crossings that delimit the half periods (IEC 61000-3-3 evaluates half periods
        between the source's zero crossings).
        """
        i = np.atleast_2d(np.asarray(currents, dtype=np.float64))
        if self.source == "measured":
            e = np.atleast_2d(np.asarray(sources, dtype=np.float64))
        else:
            e = np.zeros((self.n, i.shape[1]))  # computed below at exact instants
        self.buf_i = np.concatenate([self.buf_i, i], axis=1)
        self.buf_e = np.concatenate([self.buf_e, e], axis=1)
        g_end = self.g0 + self.buf_i.shape[1]
        return self._out(g_end - self.look - self.k, ahead=True)

    def flush(self):
        """The outputs of the last samples (their quarter-period look-ahead is replaced by
        the sign-flipped quarter-period look-back: ``i(t + T/4) = -i(t - T/4)`` for a
        sinusoid)."""
        return self._out(self.g0 + self.buf_i.shape[1] - self.k, ahead=False)

    def _out(self, m, *, ahead):
        empty = np.empty((self.n, 0))
        if m <= 0:
            return empty, empty, empty, empty
        c = self.k - self.g0
        q = self.q0 + self.qf
        ic = self.buf_i[:, c:c + m]
        iq = self._shift(self.buf_i, c, m, q) if ahead else -self._back(self.buf_i, c, m, q)
        if self.source == "measured":
            ec = self.buf_e[:, c:c + m]
            eq = self._back(self.buf_e, c, m, q)
        else:
            t = (self.k + np.arange(m)) / self.fs
            arg = 2 * np.pi * self.f * t[None, :] + self.ph[:, None]
            ec = np.sqrt(2) * self.un * np.sin(arg)
            eq = -np.sqrt(2) * self.un * np.cos(arg)
        drop_n = self.z.r_neutral_ohm * ic.sum(axis=0) + self.xn * iq.sum(axis=0)
        u = ec - self.z.r_phase_ohm * ic - self.xp * iq - drop_n[None, :]
        self.k += m
        keep = max(self.k - self.look - 1 - self.g0, 0)
        self.buf_i = self.buf_i[:, keep:]
        self.buf_e = self.buf_e[:, keep:]
        self.g0 += keep
        return u, ec, eq, ic

    def _back(self, x, c, m, q):
        """x a quarter period earlier; where the record has no such past (its first quarter
        period), the sign-flipped quarter period later."""
        lead = c + int(np.floor(-q))  # first column the look-back needs
        if lead >= 0:
            return self._shift(x, c, m, -q)
        out = -self._shift(x, c, m, q)
        start = -lead  # the first output that has its past
        if start < m:
            out[:, start:] = self._shift(x, c + start, m - start, -q)
        return out
