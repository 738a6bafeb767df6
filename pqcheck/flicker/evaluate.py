"""Flicker and voltage change evaluation of a capture, per voltage (or current) channel.

Three paths give the voltage that the flickermeter and the voltage change characteristics
see (the result says which one was used, in :attr:`ChannelFlicker.path`):

``"voltage"``
    The capture holds the voltage at the equipment terminals (behind the reference
    impedance, as the IEC 61000-3-3 test circuit has it): each voltage channel is evaluated.
``"reference-impedance"``
    The capture holds the equipment current: the terminal voltage is computed from it
    through the IEC 61000-3-3 reference impedance Zref. The source is the capture's voltage
    of the same phase when there is one (the supply), otherwise an ideal sinusoid of the
    nominal voltage at the nominal frequency, in phase with the current's fundamental (the
    displacement of the load is then assumed to be zero; a finding says so).
``"system-impedance"``
    As above through the user's system impedance (IEC 61000-3-11).

On the impedance paths the flickermeter sees the terminal waveform
(:class:`~pqcheck.flicker.impedance.TerminalVoltage`, the exact circuit), and d(t) follows
IEC 61000-3-3 clause 4.1's indirect method, ``dU = |dIp R + dIq X|``: for each half period
between the source's zero crossings

    U_hp = E - (Rp Ip + Xp Iq) - (Rn Ip,N + Xn Iq,N)

with the active and reactive currents ``Ip = mean(e i) / E`` and ``Iq = mean(e(t - T/4) i)
/ E`` (the neutral's share from the sum of the phase currents). With the ideal source,
assumed in phase with the current, the phase's own current is taken as all active:
``Ip = I_hp`` (its half-period rms, which counts harmonic current as active: conservative)
and ``Iq = 0``; then a current step inside a half period gives a value between the states
before and after, and ``d = R dI / Un`` exactly for steady states. With a measured source a
step inside a half period can put that one half period up to about 2 % of the step beyond
the states around it (the quadrature product over part of a half period is not a reactive
current). The in-phase drop differs from the exact ``|E - Z I|`` by ``(X Ip - R Iq)^2 / 2E``
(0.035 V for 16 A through Zref), which the flickermeter's waveform does include.

Everything runs block by block over :meth:`Capture.blocks`, so a long stream stays in
bounded memory.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..errors import AnalysisError
from ..findings import Finding
from .change import HalfPeriodRms, VoltageChangeResult, voltage_changes
from .impedance import REFERENCE_IMPEDANCE, SupplyImpedance, TerminalVoltage
from .meter import PLT_COUNT, PST_INTERVAL_S, Flickermeter, FlickerResult, lamp_for

__all__ = ["FlickerSettings", "ChannelFlicker", "FlickerAnalysis", "analyze_flicker",
           "PATHS", "STANDARD_NOMINAL_V"]

PATHS = ("auto", "voltage", "reference-impedance", "system-impedance")
"""Choices of :attr:`FlickerSettings.path`."""

STANDARD_NOMINAL_V = (100.0, 110.0, 115.0, 120.0, 127.0, 200.0, 208.0, 220.0, 230.0, 240.0,
                      277.0, 347.0, 380.0, 400.0, 415.0, 440.0, 480.0, 600.0, 690.0)
"""Nominal voltages the data may be rounded to when none is given (common practice). [V]"""


@dataclass(frozen=True)
class FlickerSettings:
    """How flicker is evaluated.

    Attributes
    ----------
    path : str
        One of :data:`PATHS`; ``"auto"`` takes ``"voltage"`` when the capture has voltage
        channels, else ``"reference-impedance"``.
    lamp : str or None
        ``"230V"`` or ``"120V"``; None picks by the nominal voltage (120 V lamp below 180 V).
    nominal_v : float or None
        Nominal line-to-neutral voltage Un; None takes the standard value nearest to the
        data (voltage path) or 230 V / 120 V for 50 Hz / 60 Hz (impedance paths). [V]
    system_impedance : SupplyImpedance or None
        Required for ``"system-impedance"``.
    """

    path: str = "auto"
    lamp: str | None = None
    nominal_v: float | None = None
    system_impedance: SupplyImpedance | None = None

    def __post_init__(self):
        if self.path not in PATHS:
            raise AnalysisError(f"flicker path {self.path!r} is not one of {PATHS}",
                                field="flicker.path")
        if self.path == "system-impedance" and self.system_impedance is None:
            raise AnalysisError("the system-impedance path needs the system impedance; give "
                                "system_impedance (R and X of the phase and neutral)",
                                field="system_impedance")
        if self.nominal_v is not None and not (np.isfinite(self.nominal_v)
                                               and self.nominal_v > 0):
            raise AnalysisError(f"nominal_v must be a positive voltage, got {self.nominal_v!r}",
                                field="nominal_v")


@dataclass(frozen=True)
class ChannelFlicker:
    """Flicker and voltage changes of one voltage (measured, or derived from a current).

    Attributes
    ----------
    channel : str
        The voltage channel, or the current channel it was derived from.
    derived_from : str or None
        The current channel when the voltage was computed through an impedance.
    path : str
        ``"voltage"``, ``"reference-impedance"`` or ``"system-impedance"``.
    impedance : str or None
        The impedance used (label), None on the voltage path.
    source : str or None
        ``"ideal"`` or the supply voltage channel, None on the voltage path.
    un_v : float
        Nominal voltage the changes are relative to. [V]
    meter : FlickerResult
    change : VoltageChangeResult
    findings : tuple of Finding
    phase : str
        Phase of the channel (``a``, ``b``, ``c`` or "").
    """

    channel: str
    derived_from: str | None
    path: str
    impedance: str | None
    source: str | None
    un_v: float
    meter: FlickerResult
    change: VoltageChangeResult
    findings: tuple = ()
    phase: str = ""

    @property
    def plt(self):
        """Largest Plt of the record, None when it has fewer than 12 complete intervals."""
        return max(self.meter.plt) if self.meter.plt else None

    @property
    def plt_reason(self) -> str | None:
        """Why there is no Plt (None when there is one)."""
        if self.meter.plt:
            return None
        n = len(self.meter.pst) if self.meter.complete_intervals else 0
        return (f"Plt needs {PLT_COUNT} consecutive complete 10-minute intervals (2 h); the "
                f"capture has {n}")

    @property
    def pst_max(self) -> float:
        """Largest Pst (NaN when none is valid). [unitless]"""
        vals = [p for p in self.meter.pst if np.isfinite(p)]
        return float(max(vals)) if vals else float("nan")

    def to_dict(self) -> dict:
        """The ``flicker`` object of the JSON results."""
        m, c = self.meter, self.change
        return {
            "lamp": m.lamp,
            "path": self.path,
            "derived_from": self.derived_from,
            "impedance": self.impedance,
            "source": self.source,
            "un_v": self.un_v,
            "pst": [None if not np.isfinite(p) else round(float(p), 6) for p in m.pst],
            "pst_interval_s": round(m.interval_s, 3),
            "pst_complete_intervals": m.complete_intervals,
            "plt": None if self.plt is None else round(float(self.plt), 6),
            "plt_reason": self.plt_reason,
            "pinst_max": round(m.pinst_max, 6),
            "dc_percent": None if not np.isfinite(c.dc_percent) else round(c.dc_percent, 6),
            "dmax_percent": round(c.dmax_percent, 6),
            "tmax_s": round(c.tmax_s, 6),
            "n_changes": len(c.changes),
            "steady_state_found": c.steady_found,
            "internal_rate_hz": m.fs_int_hz,
            "findings": [f.to_dict() for f in self.findings],
        }


@dataclass(frozen=True)
class FlickerAnalysis:
    """Flicker evaluation of a capture.

    Attributes
    ----------
    channels : tuple of ChannelFlicker
    path : str
        The path used.
    nominal_hz : int
    findings : tuple of Finding
    """

    channels: tuple
    path: str
    nominal_hz: int
    findings: tuple = field(default=())

    def channel(self, name: str) -> ChannelFlicker:
        """The result of one channel (voltage, or the current it was derived from)."""
        for c in self.channels:
            if c.channel == name:
                return c
        raise KeyError(name)


def _nearest_nominal(rms_v):
    return float(min(STANDARD_NOMINAL_V, key=lambda v: abs(v - rms_v)))


def _fundamental_phase(x, fs, f0):
    """Phase angle (of a sine reference) of the fundamental of ``x`` at t = 0. [rad]"""
    x = np.nan_to_num(np.asarray(x, dtype=float))
    n = int(np.floor(x.size * f0 / fs) * fs / f0)  # whole cycles
    if n < 2:
        return 0.0, 0.0
    t = np.arange(n) / fs
    s = np.sum(x[:n] * np.sin(2 * np.pi * f0 * t))
    c = np.sum(x[:n] * np.cos(2 * np.pi * f0 * t))
    return float(np.arctan2(c, s)), float(np.hypot(s, c) * np.sqrt(2) / n)


def analyze_flicker(capture, *, nominal_hz, settings=None, block_samples=1 << 18,
                    progress=None) -> FlickerAnalysis:
    """Flickermeter and voltage change characteristics of every voltage of a capture.

    Parameters
    ----------
    capture : Capture or CaptureStream
    nominal_hz : int
        50 or 60 (from the harmonic analysis or the user). [Hz]
    settings : FlickerSettings or None
    block_samples : int
        Samples per block. [unitless]

    Returns
    -------
    FlickerAnalysis

    Raises
    ------
    AnalysisError
        When the chosen path has nothing to work on (no voltage channel for ``"voltage"``, no
        current channel for an impedance path).
    """
    s = settings or FlickerSettings()
    fs = float(capture.fs_hz)
    chans = list(capture.channels)
    volts = [k for k, c in enumerate(chans) if c.quantity == "voltage"]
    currs = [k for k, c in enumerate(chans) if c.quantity == "current" and c.phase != "n"]
    path = s.path
    if path == "auto":
        path = "voltage" if volts else "reference-impedance"
    findings = []
    if path == "voltage":
        if not volts:
            raise AnalysisError("flicker on the voltage path needs a voltage channel; the "
                                "capture has none (choose an impedance path to derive the "
                                "voltage from the current)", field="flicker.path")
        return _voltage_path(capture, fs, nominal_hz, volts, s, block_samples, findings)
    if not currs:
        raise AnalysisError(f"flicker on the {path} path needs a current channel; the capture "
                            "has none", field="flicker.path")
    z = REFERENCE_IMPEDANCE if path == "reference-impedance" else s.system_impedance
    return _impedance_path(capture, fs, nominal_hz, currs, volts, z, path, s, block_samples,
                           findings)


def _voltage_path(capture, fs, f0, volts, s, block_samples, findings):
    head = capture.head(int(min(capture.n_samples, 2 * fs)))
    uns = []
    for k in volts:
        if s.nominal_v is not None:
            uns.append(float(s.nominal_v))
        else:
            x = head[k][np.isfinite(head[k])]
            rms = float(np.sqrt(np.mean(x * x))) if x.size else float("nan")
            un = _nearest_nominal(rms) if np.isfinite(rms) else 230.0
            uns.append(un)
            findings.append(Finding(
                "flicker-nominal-voltage", "info",
                f"nominal voltage of {capture.channels[k].name!r} taken as {un:g} V (the "
                f"standard value nearest to its {rms:.1f} V rms); give nominal_voltage_v to set it",
                channels=(capture.channels[k].name,), value=un, unit="V"))
    meters = [Flickermeter(fs, nominal_hz=f0, lamp=s.lamp or lamp_for(un)) for un in uns]
    hps = [HalfPeriodRms(fs, f0) for _ in volts]
    done = 0
    for block in capture.blocks(block_samples):
        for j, k in enumerate(volts):
            meters[j].feed(block[k])
            hps[j].feed(block[k])
        done += block.shape[1]
    out = []
    for j, k in enumerate(volts):
        name = capture.channels[k].name
        out.append(_finish(name, None, "voltage", None, None, uns[j], meters[j], hps[j], f0,
                           capture, findings))
    return FlickerAnalysis(tuple(out), "voltage", int(f0), tuple(findings))


def _impedance_path(capture, fs, f0, currs, volts, z, path, s, block_samples, findings):
    chans = capture.channels
    un = s.nominal_v or (230.0 if f0 == 50 else 120.0)
    by_phase = {chans[k].phase: k for k in volts}
    sources = [by_phase.get(chans[k].phase) for k in currs]
    measured = all(v is not None for v in sources) and bool(volts)
    names = [chans[k].name for k in currs]
    if measured:
        src_label = [chans[v].name for v in sources]
    else:
        head = capture.head(int(min(capture.n_samples, 10 * fs)))
        order = {"a": 0, "": 0, "b": -2 * np.pi / 3, "c": 2 * np.pi / 3}
        ph0, amp = None, 0.0
        for k in currs:
            p, a = _fundamental_phase(head[k], fs, f0)
            if a > amp:
                ph0, amp = p - order.get(chans[k].phase, 0.0), a
        ph0 = 0.0 if ph0 is None else ph0
        phases = [ph0 + order.get(chans[k].phase, 0.0) for k in currs]
        src_label = ["ideal"] * len(currs)
        findings.append(Finding(
            "flicker-ideal-source", "info",
            f"no supply voltage for the current channel(s) {', '.join(names)}: the terminal "
            f"voltage is computed from an ideal {un:g} V, {f0} Hz source in phase with the "
            f"current's fundamental (zero displacement assumed) through {z.label()}",
            channels=tuple(names)))
    tv = TerminalVoltage(fs, z, len(currs), source="measured" if measured else "ideal",
                         un_v=un, f_hz=f0, phases_rad=(0.0,) if measured else phases)
    lamp = s.lamp or lamp_for(un)
    meters = [Flickermeter(fs, nominal_hz=f0, lamp=lamp) for _ in currs]
    # d(t) by IEC 61000-3-3 clause 4.1: dU = dIp R + dIq X with the active and reactive
    # currents of each half period (see the module notes)
    n = len(currs)
    hps = [HalfPeriodRms(fs, f0, n_means=1 + 2 * n) for _ in currs]
    def outputs():
        for block in capture.blocks(block_samples):
            yield tv.feed(block[currs], block[sources] if measured else None)
        yield tv.flush()

    for u, ec, eq, ic in outputs():
        if u.shape[1] == 0:
            continue
        for j in range(n):
            meters[j].feed(u[j])
            # the rms kept is the source's (E); the means are i^2, e i and e(t - T/4) i
            hps[j].feed(ec[j], ec[j], np.vstack([ic[j:j + 1] ** 2, ec[j] * ic, eq[j] * ic]))
    scale = f0 / z.x_at_hz
    rp, xp = z.r_phase_ohm, z.x_phase_ohm * scale
    rn, xn = z.r_neutral_ohm, z.x_neutral_ohm * scale
    out = []
    for j in range(len(currs)):
        mm = hps[j].means()
        e_rms = hps[j].finish()[1]
        with np.errstate(invalid="ignore", divide="ignore"):
            ip = mm[:, 1:1 + n] / e_rms[:, None]
            iq = mm[:, 1 + n:] / e_rms[:, None]
        if not measured:
            # ideal source in phase with the current: the phase's own current is all active
            ip[:, j] = np.sqrt(np.maximum(mm[:, 0], 0.0))
            iq[:, j] = 0.0
        u_hp = e_rms - (rp * ip[:, j] + xp * iq[:, j] + rn * ip.sum(axis=1)
                        + xn * iq.sum(axis=1))
        out.append(_finish(names[j], names[j], path, z.label(), src_label[j], un, meters[j],
                           hps[j], f0, capture, findings, u_hp=u_hp))
    return FlickerAnalysis(tuple(out), path, int(f0), tuple(findings))


def _finish(name, derived, path, zlabel, src, un, meter, hp, f0, capture, findings,
            u_hp=None):
    res = meter.finish()
    t, u, dur = hp.finish()
    if u_hp is not None:
        u = u_hp
    change = voltage_changes(t, u, un_v=un, nominal_hz=f0, duration_s=dur)
    own = []
    if not res.complete_intervals:
        own.append(Finding(
            "flicker-short-observation", "warning",
            f"{name}: the capture is {res.interval_s:.1f} s long, shorter than the "
            f"{PST_INTERVAL_S:.0f} s Pst observation period; its one Pst value covers "
            f"{res.interval_s:.1f} s and cannot support a verdict on a Pst limit",
            channels=(name,), value=res.interval_s, unit="s"))
    if res.invalid_intervals:
        own.append(Finding(
            "flicker-gap", "error",
            f"{name}: short-term interval(s) {list(res.invalid_intervals)} contain missing or "
            f"non-finite samples; their Pst is not computed", channels=(name,)))
    n_gap = int(np.sum(~np.isfinite(u)))
    if n_gap:
        own.append(Finding(
            "flicker-gap-halfperiods", "error",
            f"{name}: {n_gap} half period(s) held missing or non-finite samples; d(t) is not "
            "evaluated there and the voltage changes around them cannot support a pass",
            channels=(name,), value=float(n_gap), unit="half periods"))
    if not change.steady_found:
        own.append(Finding(
            "flicker-no-steady-state", "warning",
            f"{name}: the voltage is never steady (within +-0.2 % for 1 s); d(t) is taken "
            f"relative to its first half period and dc is undefined", channels=(name,)))
    for f in capture.findings:
        if f.severity == "error" and f.affects(channel=derived or name):
            own.append(f)
    phase = next((c.phase for c in capture.channels if c.name == (derived or name)), "")
    return ChannelFlicker(name, derived, path, zlabel, src, float(un), res, change,
                          tuple(own), phase)
