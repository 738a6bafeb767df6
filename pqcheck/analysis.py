"""Harmonic analysis of a capture by the IEC 61000-4-7 method: the orchestrator.

:func:`analyze` takes a :class:`~pqcheck.capture.Capture` and returns an
:class:`AnalysisResult`: per-window arrays (the standard's 10/12-cycle values), capture-level
aggregates (the rms of the window values), power quantities when voltages and currents are both
present, and the data-quality findings. It works through the capture in blocks, so memory does
not grow with capture length beyond the (small) per-window results.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from . import metrics, quality
from .capture import Capture, require_channels
from .dsp.spectrum import GUARD, analyse_windows, harmonic_groupings
from .dsp.tracking import coarse_frequency, detect_nominal, window_boundaries
from .dsp.tracking import median as tracking_median
from .errors import AnalysisError, InputError
from .findings import Finding

__all__ = [
    "AnalysisSettings",
    "WindowSeries",
    "ChannelResult",
    "PhasePower",
    "PowerResult",
    "AnalysisResult",
    "analyze",
    "WIRINGS",
]

WIRINGS = ("3-wire", "4-wire")
_BLOCK = 1 << 18


@dataclass(frozen=True)
class AnalysisSettings:
    """Settings an analysis ran with (recorded in results and reports).

    Attributes
    ----------
    nominal_hz : float
        Nominal system frequency, 50 or 60. [Hz]
    nominal_source : str
        ``"user"`` or ``"detected"``.
    cycles_per_window : int
        10 (50 Hz) or 12 (60 Hz). [unitless]
    max_order : int
        Highest harmonic order asked for. [unitless]
    il_a : float or None
        Maximum demand load current for TDD. [A]
    wiring : str or None
        ``"3-wire"``, ``"4-wire"`` or None (not three-phase).
    wiring_source : str
        ``"user"``, ``"inferred"`` or ``""``.
    reference : str
        Channel whose fundamental sets the windows and phase reference.
    method : str
        Short description of the method.
    """

    nominal_hz: float
    nominal_source: str
    cycles_per_window: int
    max_order: int
    il_a: float | None
    wiring: str | None
    wiring_source: str
    reference: str
    method: str = (
        "IEC 61000-4-7 synchronous rectangular windows of 10 (50 Hz) or 12 (60 Hz) tracked "
        "fundamental cycles, gapless; each window resampled to its exact span (band-limited "
        "interpolation) before the DFT; harmonic groups, subgroups and interharmonic groups"
    )

    def to_dict(self) -> dict:
        return {
            "nominal_hz": self.nominal_hz,
            "nominal_source": self.nominal_source,
            "cycles_per_window": self.cycles_per_window,
            "max_order": self.max_order,
            "il_a": self.il_a,
            "wiring": self.wiring,
            "wiring_source": self.wiring_source,
            "reference": self.reference,
            "method": self.method,
        }


@dataclass(frozen=True, eq=False)
class WindowSeries:
    """Per-window values over the capture (W windows, C analysed channels, orders 0..H).

    Attributes
    ----------
    t_start_s, duration_s, freq_hz : numpy.ndarray, shape (W,)
        Start time, length and fundamental frequency of each window. [s], [s], [Hz]
    valid : numpy.ndarray of bool, shape (W,)
        False for windows with missing samples (their values are NaN).
    component : numpy.ndarray of complex, shape (W, C, H + 1)
        Harmonic components as rms phasors; phase relative to the reference channel's
        fundamental in the same window (cosine basis). Order 0 is the DC value. [A] or [V]
    group, subgroup, interharmonic_group : numpy.ndarray, shape (W, C, H + 1)
        IEC 61000-4-7 groupings (``interharmonic_group[..., h]`` lies between h and h+1). [A]/[V]
    rms, dc, peak : numpy.ndarray, shape (W, C)
        True rms, mean and largest absolute value. [A] or [V]
    p_w : numpy.ndarray, shape (W, P) or None
        Active power per voltage/current phase pair. [W]
    p_total_w : numpy.ndarray, shape (W,) or None
        Total active power. [W]
    """

    t_start_s: np.ndarray
    duration_s: np.ndarray
    freq_hz: np.ndarray
    valid: np.ndarray
    component: np.ndarray
    group: np.ndarray
    subgroup: np.ndarray
    interharmonic_group: np.ndarray
    rms: np.ndarray
    dc: np.ndarray
    peak: np.ndarray
    p_w: np.ndarray | None = None
    p_total_w: np.ndarray | None = None
    v_ll_rms: np.ndarray | None = None
    i_n_rms: np.ndarray | None = None

    @property
    def n_windows(self) -> int:
        return int(self.t_start_s.size)


@dataclass(frozen=True, eq=False)
class ChannelResult:
    """Capture-level results of one channel (rms over valid windows unless stated).

    Attributes
    ----------
    name, quantity, phase, unit : str
        Channel identity; ``quantity`` is ``"current"`` or ``"voltage"``.
    rms : float
        True rms. [A] or [V]
    dc : float
        Mean value (arithmetic mean of window means). [A] or [V]
    fundamental_rms : float
        Fundamental component. [A] or [V]
    thd_percent, thd_group_percent, thd_subgroup_percent : float
        THD from harmonic components, groups and subgroups (orders 2..max resolved). [%]
    tdd_percent : float or None
        TDD with the IL given (currents only). [%]
    thc, pwhc : float
        Total and partial weighted harmonic current/voltage (groups, orders 2..40, 14..40). [A]/[V]
    pwhd_percent : float
        PWHC relative to the fundamental group. [%]
    crest_factor : float
        Largest window crest factor. [unitless]
    orders : numpy.ndarray of int
        0..H.
    harmonic_rms, group_rms, subgroup_rms, interharmonic_group_rms : numpy.ndarray
        Per-order values, NaN above the highest resolved order. [A] or [V]
    phase_deg : numpy.ndarray
        Phase of each harmonic relative to the reference fundamental (cosine basis). [deg]
    """

    name: str
    quantity: str
    phase: str
    unit: str
    rms: float
    dc: float
    fundamental_rms: float
    thd_percent: float
    thd_group_percent: float
    thd_subgroup_percent: float
    tdd_percent: float | None
    thc: float
    pwhc: float
    pwhd_percent: float
    crest_factor: float
    orders: np.ndarray
    harmonic_rms: np.ndarray
    group_rms: np.ndarray
    subgroup_rms: np.ndarray
    interharmonic_group_rms: np.ndarray
    phase_deg: np.ndarray


@dataclass(frozen=True)
class PhasePower:
    """IEEE 1459 quantities of one phase (means over valid windows; PF = mean P / mean S).

    Attributes
    ----------
    phase : str
    voltage, current : str
        Channel names.
    p_w, s_va, p1_w, q1_var, s1_va : float
        Active, apparent, fundamental active, reactive and apparent power. [W], [VA], [var]
    pf, dpf : float
        Power factor P/S and displacement power factor P1/S1 (negative when exporting). [unitless]
    """

    phase: str
    voltage: str
    current: str
    p_w: float
    s_va: float
    p1_w: float
    q1_var: float
    s1_va: float
    pf: float
    dpf: float


@dataclass(frozen=True)
class PowerResult:
    """Power quantities of the capture.

    Attributes
    ----------
    phases : tuple of PhasePower
    p_w : float
        Total active power. [W]
    se_va : float or None
        IEEE 1459 effective apparent power (three-phase), else the single phase's S. [VA]
    pf : float
        Total power factor ``P / Se``. [unitless]
    wiring : str or None
    extra : dict
        Three-phase extras: ``se1_va``, ``p1pos_w``, ``q1pos_var``, ``s1pos_va``, ``su1_va``,
        ``dpf_pos``, ``i_unbalance_percent``, ``v_unbalance_percent``, ``ie_a``, ``ve_v``,
        and ``arithmetic_s_va`` (sum of phase V I, for comparison only).
    """

    phases: tuple
    p_w: float
    se_va: float | None
    pf: float
    wiring: str | None
    extra: dict = field(default_factory=dict)


@dataclass(frozen=True, eq=False)
class AnalysisResult:
    """Everything :func:`analyze` computed, for the assessment, the report and exports."""

    source: str
    sha256: str
    fs_hz: float
    n_samples: int
    duration_s: float
    settings: AnalysisSettings
    fundamental_hz: float
    freq_min_hz: float
    freq_max_hz: float
    max_resolved_order: int
    channels: tuple
    windows: WindowSeries
    power: PowerResult | None
    findings: tuple
    reader_settings: dict = field(default_factory=dict)
    #: :class:`pqcheck.flicker.FlickerAnalysis` when flicker was evaluated (never cached)
    flicker: object = None

    def channel_index(self, name: str) -> int:
        """Index of channel ``name`` in :attr:`channels` and the window arrays."""
        for i, c in enumerate(self.channels):
            if c.name == name:
                return i
        raise KeyError(f"no analysed channel {name!r}; have {[c.name for c in self.channels]}")

    def channels_of(self, quantity: str) -> list:
        """Channel results of one quantity (``"current"`` or ``"voltage"``)."""
        return [c for c in self.channels if c.quantity == quantity]

    @property
    def analysed_s(self) -> float:
        """Time covered by valid windows. [s]"""
        w = self.windows
        return float(np.sum(w.duration_s[w.valid]))


def analyze(
    capture: Capture,
    *,
    nominal_hz: float | None = None,
    max_order: int = 50,
    il_a: float | None = None,
    wiring: str | None = None,
    reference: str | None = None,
    voltage_connection: str | None = None,
    block_samples: int = _BLOCK,
    progress=None,
) -> AnalysisResult:
    """Analyse a capture by the IEC 61000-4-7 method.

    Parameters
    ----------
    capture : Capture or CaptureStream
        Uniformly sampled record, in memory or read block by block; channels with quantity
        ``"other"`` are ignored.
    nominal_hz : {50, 60} or None
        Nominal frequency; detected from the data when None. [Hz]
    max_order : int, optional
        Highest harmonic order (2..100). Orders the sample rate cannot resolve are reported as
        NaN with a ``low-sample-rate`` finding. [unitless]
    il_a : float or None
        Maximum demand load current for TDD. [A]
    wiring : {"3-wire", "4-wire"} or None
        Three-phase connection for the IEEE 1459 effective quantities; when None, inferred:
        phase currents that do not sum to zero need a neutral (4-wire).
    reference : str or None
        Channel whose fundamental sets the windows; default the first voltage, else the
        current with the largest rms.
    voltage_connection : {"line-to-neutral", "line-to-line"} or None
        How the three voltage channels were measured. Line-to-line voltages (ab, bc, ca) are
        converted to phase voltages against an artificial neutral (``va = (vab - vca) / 3``,
        exact for a 3-wire system) and the wiring is 3-wire. None: line-to-line when the
        three voltage names end in ab, bc, ca (or 12, 23, 31), else line-to-neutral.
    block_samples : int, optional
        Samples processed per block; memory use is bounded by a few blocks. [samples]
    progress : callable or None
        Called as ``progress(done_samples, total_samples)``.

    Returns
    -------
    AnalysisResult

    Raises
    ------
    InputError
        A setting is out of range or names an unknown channel.
    AnalysisError
        The capture is shorter than one window, or no fundamental can be found at all.

    Examples
    --------
    >>> import numpy as np
    >>> fs = 10_000.0
    >>> t = np.arange(int(fs)) / fs
    >>> i = np.sin(2 * np.pi * 50 * t) + 0.2 * np.sin(2 * np.pi * 250 * t)
    >>> res = analyze(Capture.from_arrays(fs, currents={"i": i}), nominal_hz=50)
    >>> round(res.channels[0].thd_percent, 6)
    20.0
    """
    require_channels(capture)
    src = capture.source
    path = src if src != "<memory>" else None
    if nominal_hz is not None and nominal_hz not in (50, 60):
        raise InputError(
            f"nominal frequency must be 50 or 60 Hz, got {nominal_hz!r}", path=path,
            field="nominal_hz",
        )
    if not (isinstance(max_order, (int, np.integer)) and 2 <= max_order <= 100):
        raise InputError(
            f"maximum order must be a whole number from 2 to 100, got {max_order!r}",
            path=path, field="max_order",
        )
    if il_a is not None and not (np.isfinite(il_a) and il_a > 0):
        raise InputError(f"IL must be a positive current in A, got {il_a!r}", field="il_a")
    if wiring is not None and wiring not in WIRINGS:
        raise InputError(f"wiring must be one of {', '.join(WIRINGS)}, got {wiring!r}",
                         field="wiring")
    max_order = int(max_order)
    fs = float(capture.fs_hz)
    chans = [c for c in capture.channels if c.quantity in ("current", "voltage")]
    rows = np.array([capture.index(c.name) for c in chans])
    identity_rows = bool(np.array_equal(rows, np.arange(len(capture.channels))))
    findings: list = []
    names = [c.name for c in chans]
    if reference is not None and reference not in names:
        raise InputError(f"reference channel {reference!r} is not an analysed channel; "
                         f"choose one of {', '.join(names)}", path=path, field="reference")
    nominal_in = nominal_hz
    max_order = int(max_order)
    for c in chans:
        if c.guessed in ("current", "voltage") and c.guessed != c.quantity:
            findings.append(Finding(
                "role-mismatch", "warning",
                f"column {c.name!r} looks like a {c.guessed} (by its name or unit) but is "
                f"analysed as a {c.quantity}; check `current` and `voltage`.",
                channels=(c.name,)))
    transform = None
    ll = _line_to_line(chans, voltage_connection, path)
    if ll is not None:
        transform = np.eye(len(chans))
        ab, bc, ca = ll
        for row, (plus, minus) in zip(ll, ((ab, ca), (bc, ab), (ca, bc))):
            transform[row] = 0.0
            transform[row, plus], transform[row, minus] = 1 / 3, -1 / 3
        findings.append(Finding(
            "line-to-line-voltages", "info",
            "voltages were measured line to line; phase voltages are taken against an "
            "artificial neutral (va = (vab - vca)/3) and the wiring is 3-wire.",
            channels=tuple(chans[k].name for k in ll)))
        if wiring == "4-wire":
            raise InputError("4-wire needs line-to-neutral voltages; these are line to line",
                             path=path, field="wiring")
        wiring = "3-wire"
    one_window_s = 12 / 60  # both 10/50 and 12/60 windows last 0.2 s

    # Power bookkeeping: voltage/current pairs by phase, line-to-line and neutral combos.
    pairs, _ = _phase_pairs(chans)
    volt_abc = _abc(chans, "voltage")
    curr_abc = _abc(chans, "current")
    neutral = [k for k, c in enumerate(chans) if c.quantity == "current" and c.phase == "n"]
    combos = []
    if volt_abc:
        for a, b in ((0, 1), (1, 2), (2, 0)):
            w = np.zeros(len(chans))
            w[volt_abc[a]], w[volt_abc[b]] = 1.0, -1.0
            combos.append(w)
    if curr_abc:
        w = np.zeros(len(chans))
        for k in curr_abc:
            w[k] = 1.0
        combos.append(w)
    combos = np.array(combos) if combos else None

    clip = [quality.ClipDetector(c.name, unit=c.unit) for c in chans]
    nonfinite = np.zeros(len(chans), dtype=np.int64)
    store = _WindowStore()  # per-window arrays; the large ones spill to a temporary file
    acc = None  # capture-level sums over valid windows, added block by block
    bounds_all = [np.array([0.0])]
    start = 0.0  # fractional global position of the next window's start
    buf, buf_start, total = None, 0, 0
    state = None  # set once enough samples are buffered to choose reference and frequency
    init_need = int(2.0 * fs) + 1
    # work in spans of at least four windows, whatever the sample rate
    span_need = max(int(block_samples), int(4 * one_window_s * fs * 1.06) + 1)
    source = capture.blocks(block_samples)
    spans = _SpanPipeline(lambda part: (acc.add(part), store.append(part)))
    hint = getattr(capture, "n_samples_hint", None)
    if hint is None and isinstance(capture, Capture):
        hint = capture.n_samples
    try:
        while True:
            block = next(source, None)
            final = block is None
            if not final:
                blk = np.asarray(block, dtype=np.float64)
                if not identity_rows:  # a gathered copy only when channels are dropped
                    blk = blk[rows]
                if transform is not None:
                    blk = transform @ blk
                if blk.shape[1] == 0:
                    continue
                all_finite = _all_finite(blk)
                if not all_finite:
                    nonfinite += blk.shape[1] - np.isfinite(blk).sum(axis=1)
                for k in range(len(chans)):
                    clip[k].update(blk[k], finite=all_finite)
                total += blk.shape[1]
                buf = blk if buf is None else np.concatenate([buf, blk], axis=1)
                if progress is not None:
                    progress(total, hint)
            if buf is None:
                break
            if state is None:
                if buf.shape[1] < init_need and not final:
                    continue
                if final and total < fs * one_window_s * 0.98:
                    break  # too short for any window: say so, not that no fundamental was found
                state = _initial_state(buf, fs, chans, reference, nominal_in, max_order, path,
                                       findings)
            if not final and buf.shape[1] - (np.floor(start) - buf_start) < span_need:
                continue
            cycles, nominal = state["cycles"], state["nominal_hz"]
            # keep the interpolation kernel's reach before the first window (spectrum.GUARD)
            lo = max(0, int(np.floor(start)) - GUARD - buf_start)
            work = buf[:, lo:]
            off = buf_start + lo
            b = np.array([start])
            halves = None
            if state["tracked"]:
                tr = window_boundaries(work[state["ref"]], fs, state["f_demod"], start, cycles,
                                       offset=off, final=final)
                state["weak"] |= tr.weak
                b, halves = tr.boundaries, tr.halves
            if b.size <= 1 and not (state["tracked"] and final):
                step = fs * cycles / nominal
                m = int(np.floor((off + work.shape[1] - start) / step + 1e-9))
                b = start + step * np.arange(m + 1)
                halves = None
            end = off + work.shape[1]
            # a window is analysed once the kernel's reach after it is buffered (or the record ends)
            b = b[np.rint(b) <= end] if final else b[b + GUARD <= end]
            if halves is not None:
                halves = halves[: max(b.size - 1, 0)]
            if b.size > 1:
                if acc is None:
                    acc = _Accumulator(chans, max_order, state["resolved"], il_a, pairs,
                                       volt_abc, curr_abc, neutral)
                # every block so far was finite: the span need not be checked again
                job = (work, b, dict(max_line=state["max_line"], offset=off, pairs=pairs,
                                     combos=combos, halves=halves,
                                     finite=True if not nonfinite.any() else None),
                       (cycles, max_order, state["resolved"], state["ref"], state["tracked"]))
                spans.submit(job)
                bounds_all.append(b[1:])
                f_new = cycles * fs / np.diff(b)
                if state["tracked"] and np.all(np.isfinite(f_new)):
                    state["f_demod"] = tracking_median(f_new)
                start = float(b[-1])
                keep_from = max(0, int(np.floor(start)) - GUARD - buf_start)
                buf = buf[:, keep_from:]
                buf_start += keep_from
            if final:
                break
            if b.size <= 1 and buf.shape[1] > 4 * span_need:
                break  # no progress possible; stop rather than grow the buffer
        spans.drain()
    finally:
        spans.close()

    if state is None or total < fs * one_window_s * 0.98:
        dur = total / fs
        raise AnalysisError(
            f"the capture lasts {dur:.4g} s; the IEC 61000-4-7 method needs at least one "
            "10-cycle (50 Hz) or 12-cycle (60 Hz) window of 0.2 s. Capture a longer record "
            "(a few seconds or more).",
            path=path, field="duration",
        )
    findings = list(capture.findings) + findings
    cycles, nominal_hz, ref = state["cycles"], state["nominal_hz"], state["ref"]
    resolved, tracked = state["resolved"], state["tracked"]
    weak_any = state["weak"] or not tracked
    n = total
    if acc is None:
        f_used = float(state.get("f_demod") or nominal_hz)
        if weak_any or abs(f_used - nominal_hz) > 0.05 * nominal_hz:
            # the windows follow the reference's cycles: name that, not the record length
            raise AnalysisError(
                f"no {cycles}-cycle window fits in the {total / fs:.4g} s record: the "
                f"reference channel {chans[ref].name!r} has no clear mains fundamental near "
                f"{nominal_hz:g} Hz (the strongest line found is at {f_used:.4g} Hz, where a "
                f"window lasts {cycles / f_used:.3g} s); check that the reference channel "
                "(`reference`) carries the mains voltage or current and the nominal frequency",
                path=path, field="reference")
        raise AnalysisError(
            "no complete window fits in the capture; capture a longer record",
            path=path, field="duration",
        )
    bnd = np.concatenate(bounds_all)
    cat = store.finish()
    valid = cat["valid"]
    prods, crms = cat["products"], cat["combo_rms"]
    orders = np.arange(max_order + 1)
    durations = np.diff(bnd) / fs
    freq_w = cycles / durations
    t_start = capture.t0_s + bnd[:-1] / fs
    p_w = prods[:, : len(pairs)] if pairs else None
    if p_w is not None:
        p_w = np.where(valid[:, None], p_w, np.nan)
    windows = WindowSeries(
        t_start_s=t_start,
        duration_s=durations,
        freq_hz=freq_w,
        valid=valid,
        component=cat["component"],
        group=cat["group"],
        subgroup=cat["subgroup"],
        interharmonic_group=cat["interharmonic_group"],
        rms=cat["rms"],
        dc=cat["dc"],
        peak=cat["peak"],
        p_w=p_w,
        p_total_w=None if p_w is None else p_w.sum(axis=1),
        v_ll_rms=crms[:, :3] if volt_abc else None,
        i_n_rms=crms[:, 3 if volt_abc else 0] if curr_abc else None,
    )
    n_valid = int(valid.sum())
    findings += quality.gap_findings([c.name for c in chans], nonfinite, valid.size, n_valid, n)
    if n_valid == 0 and not nonfinite.any():
        raise AnalysisError(
            "no window gives finite results although every sample is a number: the values "
            "are too large to analyse. Check the units and scaling of the export.",
            path=path, field="samples")
    if n_valid == 0:
        raise AnalysisError(
            "every window contains missing or non-finite samples; no result is possible. "
            "Repair or re-export the capture.", path=path, field="samples")

    # Capture-level aggregates: rms of the window values (summed block by block).
    chan_results = acc.channel_results(orders)

    # Wiring and power.
    wiring_source = ""
    if len(curr_abc) == 3 or len(volt_abc) == 3:
        if wiring is None:
            wiring, wiring_source = acc.infer_wiring(), "inferred"
        else:
            wiring_source = "user"
    else:
        if wiring is not None:
            findings.append(Finding(
                "wiring-ignored", "info",
                f"`wiring` {wiring} ignored: the capture is not three-phase."))
        wiring = None
    power = acc.power(wiring)

    # Findings from the results.
    findings += quality.sample_rate_findings(fs, nominal_hz, max_order, resolved, cycles)
    findings += quality.frequency_findings(freq_w[valid], nominal_hz, tracked=not weak_any,
                                           reference=chans[ref].name)
    findings += quality.dc_offset_findings(
        [c.name for c in chans], [r.dc for r in chan_results],
        [r.fundamental_rms for r in chan_results], [c.quantity for c in chans])
    findings += quality.fundamental_findings(
        [c.name for c in chans], [r.fundamental_rms for r in chan_results],
        [r.rms for r in chan_results])
    for det in clip:
        findings += det.findings()
    tail = (n - bnd[-1]) / fs
    if tail > 0.5 * cycles / nominal_hz:
        findings.append(Finding(
            "incomplete-window", "info",
            f"the last {tail:.3f} s do not fill a whole {cycles}-cycle window and are not analysed.",
            value=tail, unit="s"))
    if wiring_source == "inferred":
        if len(curr_abc) == 3 or neutral:
            why = ("a neutral current was measured" if neutral else
                   f"phase currents {'do not ' if wiring == '4-wire' else ''}sum to zero")
        else:  # nothing measured can tell: say so rather than quote currents that are absent
            why = "no three phase currents were measured to tell; the default"
        findings.append(Finding(
            "wiring-inferred", "info",
            f"three-phase wiring taken as {wiring} from the data ({why}); give the wiring "
            "(wiring) to set it."))

    settings = AnalysisSettings(
        nominal_hz=nominal_hz, nominal_source=state["nominal_source"], cycles_per_window=cycles,
        max_order=max_order, il_a=il_a, wiring=wiring, wiring_source=wiring_source,
        reference=chans[ref].name,
    )
    fv = freq_w[valid]
    return AnalysisResult(
        source=capture.provenance.source,
        sha256=capture.provenance.sha256,
        fs_hz=fs,
        n_samples=n,
        duration_s=n / fs,
        settings=settings,
        fundamental_hz=float(np.mean(fv)),
        freq_min_hz=float(np.min(fv)),
        freq_max_hz=float(np.max(fv)),
        max_resolved_order=resolved,
        channels=tuple(chan_results),
        windows=windows,
        power=power,
        findings=tuple(findings),
        reader_settings=dict(capture.provenance.settings),
    )


def _all_finite(blk) -> bool:
    """``numpy.isfinite(blk).all()``: one pass of the C loop where it is used."""
    from .dsp import _compiled

    native = _compiled.window_stats() if blk.flags.c_contiguous else None
    return native[0](blk) if native is not None else bool(np.isfinite(blk).all())


class _SpanPipeline:
    """The spectra of each span of windows computed on a worker thread, in order.

    The tracker must run span after span (each span starts where the last window of the
    previous one ended), but the resampling, transforms and time statistics of a span need
    only its boundaries. So while the calling thread reads and tracks span ``k + 1``, a
    worker computes span ``k`` (the compiled loops and the FFT release the GIL). At most
    :attr:`DEPTH` spans are in flight, so memory stays bounded; results are absorbed in
    submission order, so every sum is the same as on one thread. With one worker thread
    configured (``spectrum.FFT_WORKERS == 1``: batch worker processes) spans run inline."""

    DEPTH = 1

    def __init__(self, absorb):
        from .dsp import _compiled, spectrum

        _compiled.available()  # import numba here, on the calling thread (signals held)
        self._absorb = absorb
        self._pending: list = []
        self._pool = None
        if spectrum._threads() > 1:
            self._pool = _span_pool()

    @staticmethod
    def _run(job):
        work, b, kw, reduce_args = job
        # the lines of a span are reduced at once, on the same thread: they may live in the
        # thread's reused buffer
        return _reduce_block(analyse_windows(work, b, reuse=True, **kw), *reduce_args)

    def submit(self, job) -> None:
        """Compute ``job`` (arguments of :func:`analyse_windows` and :func:`_reduce_block`),
        absorbing the oldest results beyond :attr:`DEPTH`."""
        if self._pool is None:
            self._absorb(self._run(job))
            return
        self._pending.append(self._pool.submit(self._run, job))
        while len(self._pending) > self.DEPTH:
            self._absorb(self._pending.pop(0).result())

    def drain(self) -> None:
        """Absorb every span still in flight."""
        while self._pending:
            self._absorb(self._pending.pop(0).result())

    def close(self) -> None:
        """Drop what is still in flight (after an error): cancel what has not started and
        wait for what has, so that nothing runs on after :func:`analyze` returns."""
        for fut in self._pending:
            fut.cancel()
        for fut in self._pending:
            if not fut.cancelled():
                try:
                    fut.result()
                except BaseException:  # noqa: BLE001 - the first error is already raised
                    pass
        self._pending.clear()


_SPAN_POOLS: dict = {}


def _span_pool():
    """The one span worker of this process (a forked child makes its own)."""
    import os
    from concurrent.futures import ThreadPoolExecutor

    pid = os.getpid()
    if pid not in _SPAN_POOLS:
        _SPAN_POOLS[pid] = ThreadPoolExecutor(max_workers=1, thread_name_prefix="pqcheck-span")
    return _SPAN_POOLS[pid]


def _initial_state(buf, fs, chans, reference, nominal_hz, max_order, path, findings):
    """Choose the reference channel and frequency from the first seconds of the record."""
    head = buf[:, : int(2.0 * fs) + 1]
    names = [c.name for c in chans]
    if reference is not None:
        ref = names.index(reference)
    else:
        volts = [k for k, c in enumerate(chans) if c.quantity == "voltage"]
        if volts:
            ref = volts[0]
        else:
            with np.errstate(invalid="ignore"):
                head_rms = np.sqrt(np.nanmean(head**2, axis=1))
            ref = int(np.argmax(np.nan_to_num(head_rms)))
    band = (40.0, 70.0) if nominal_hz is None else (0.8 * nominal_hz, 1.2 * nominal_hz)
    f_coarse, amp = coarse_frequency(head[ref], fs, f_lo_hz=band[0], f_hi_hz=band[1])
    source = "user"
    if nominal_hz is None:
        nominal_hz = detect_nominal(f_coarse)
        source = "detected"
        if nominal_hz is None:
            raise AnalysisError(
                f"no fundamental between 40 and 70 Hz found on channel {chans[ref].name!r}; "
                "give `nominal_hz` 50 or 60 and check the channel map",
                path=path, field="nominal_hz",
            )
        findings.append(Finding(
            "nominal-detected", "info",
            f"nominal frequency taken as {nominal_hz} Hz from the measured fundamental "
            f"({f_coarse:.3f} Hz); give `nominal_hz` to set it.",
            value=float(nominal_hz), unit="Hz"))
    nominal_hz = float(nominal_hz)
    cycles = 10 if nominal_hz == 50 else 12
    tracked = bool(np.isfinite(f_coarse)) and amp > 0
    resolved = quality.max_resolved_order(fs, nominal_hz, max_order)
    if resolved < 1:
        raise AnalysisError(
            f"a sample rate of {fs:g} Hz cannot resolve even the fundamental; capture at "
            f"{quality.SAMPLES_PER_PERIOD_MIN * nominal_hz * max_order:g} Hz or more",
            path=path, field="sample rate",
        )
    return {
        "ref": ref, "nominal_hz": nominal_hz, "nominal_source": source, "cycles": cycles,
        "tracked": tracked, "f_demod": f_coarse if tracked else nominal_hz, "weak": False,
        "resolved": resolved, "max_line": cycles * (resolved + 1) + cycles // 2,
    }


def _reduce_block(wb, cycles, max_order, resolved, ref, tracked):
    """Per-window arrays of one block: groupings, phase reference, validity masking."""
    grp = harmonic_groupings(wb.lines, cycles, max_order)
    if resolved < max_order:
        for key in grp:
            grp[key][..., resolved + 1:] = np.nan
    comp = grp["component"]
    if tracked:
        ref_angle = np.angle(comp[:, ref, 1])
        orders = np.arange(max_order + 1)
        comp = comp * np.exp(-1j * orders[None, None, :] * ref_angle[:, None, None])
    valid = wb.valid
    out = {
        "component": comp,
        "group": grp["group"],
        "subgroup": grp["subgroup"],
        "interharmonic_group": grp["interharmonic_group"],
        "rms": wb.rms,
        "dc": wb.mean,
        "peak": wb.peak,
        "products": wb.products,
        "combo_rms": wb.combo_rms,
        "valid": valid,
    }
    for key in ("component", "group", "subgroup", "interharmonic_group", "rms", "dc", "peak"):
        out[key][~valid] = np.nan
    return out


_LL_SUFFIXES = (("ab", "bc", "ca"), ("12", "23", "31"))


def _line_to_line(chans, connection, path):
    """Rows of the ab, bc, ca voltages when voltages are line to line, else None."""
    if connection not in (None, "line-to-neutral", "line-to-line"):
        raise InputError(f"voltage connection must be line-to-neutral or line-to-line, got "
                         f"{connection!r}", path=path, field="voltage_connection")
    if connection == "line-to-neutral":
        return None
    volts = [k for k, c in enumerate(chans) if c.quantity == "voltage" and c.phase != "n"]
    if len(volts) != 3:
        if connection == "line-to-line":
            raise InputError("line-to-line voltages need exactly three voltage channels "
                             "(ab, bc, ca)", path=path, field="voltage_connection")
        return None
    names = [chans[k].name.lower().split("[")[0].split("(")[0].strip() for k in volts]
    if connection is None and not any(
            all(n.endswith(sfx) for n, sfx in zip(names, suffixes)) for suffixes in _LL_SUFFIXES):
        return None
    order = {"a": 0, "b": 1, "c": 2, "": 0}
    volts.sort(key=lambda k: order.get(chans[k].phase, 0))
    return tuple(volts)


def _abc(chans, quantity):
    idx = {c.phase: k for k, c in enumerate(chans) if c.quantity == quantity}
    if all(p in idx for p in "abc"):
        return [idx["a"], idx["b"], idx["c"]]
    return []


def _phase_pairs(chans):
    """(voltage row, current row) pairs matched by phase; single-phase '' pairs with ''/a."""
    volts = {c.phase or "a": k for k, c in enumerate(chans) if c.quantity == "voltage"
             and c.phase != "n"}
    pairs, phases = [], []
    for k, c in enumerate(chans):
        if c.quantity != "current" or c.phase == "n":
            continue
        ph = c.phase or "a"
        if ph in volts:
            pairs.append((volts[ph], k))
            phases.append(c.phase)
    return pairs, phases


class _WindowStore:
    """Per-window arrays collected block by block. The large ones (orders x channels per
    window) go to a temporary file once they pass :attr:`SPILL_BYTES` and come back as a
    read-only memory map, so memory does not grow with the length of the capture."""

    SPILL_BYTES = 16 << 20
    LARGE = ("component", "group", "subgroup", "interharmonic_group")

    def __init__(self):
        self.parts: dict = {}
        self.files: dict = {}

    def append(self, part: dict) -> None:
        for key, arr in part.items():
            arr = np.ascontiguousarray(arr)
            if key in self.files:
                fh, dtype, tail, n = self.files[key]
                arr.tofile(fh)
                self.files[key] = (fh, dtype, tail, n + arr.shape[0])
                continue
            self.parts.setdefault(key, []).append(arr)
            if key in self.LARGE and sum(a.nbytes for a in self.parts[key]) > self.SPILL_BYTES:
                self._spill(key)

    def _spill(self, key) -> None:
        import tempfile

        arrs = self.parts.pop(key)
        fh = tempfile.TemporaryFile(prefix="pqcheck-windows-")
        for a in arrs:
            a.tofile(fh)
        self.files[key] = (fh, arrs[0].dtype, arrs[0].shape[1:], sum(a.shape[0] for a in arrs))

    def finish(self) -> dict:
        out = {key: np.concatenate(arrs) for key, arrs in self.parts.items()}
        for key, (fh, dtype, tail, n) in self.files.items():
            fh.flush()
            out[key] = np.memmap(fh, dtype=dtype, mode="r", shape=(n,) + tuple(tail))
            fh.close()  # the map keeps the data; the file has no name and goes with it
        return out


class _Accumulator:
    """Capture-level sums over valid windows (rms of window values, means of powers),
    added block by block so that no capture-length array is needed."""

    _METRICS = ("thd", "thdg", "thds", "tdd", "thc", "pwhc", "pwhd")
    _THREE = ("p_w", "se_va", "ie_a", "ve_v", "se1_va", "p1pos_w", "q1pos_var", "s1pos_va",
              "su1_va", "i_unbalance_percent", "v_unbalance_percent")

    def __init__(self, chans, max_order, resolved, il_a, pairs, volt_abc, curr_abc, neutral):
        c, h = len(chans), max_order + 1
        self.chans, self.resolved, self.il_a = chans, resolved, il_a
        self.pairs, self.volt_abc, self.curr_abc, self.neutral = pairs, volt_abc, curr_abc, \
            neutral
        self.n = 0
        self.sq = {k: np.zeros((c, h)) for k in ("component", "group", "subgroup",
                                                 "interharmonic_group")}
        self.phasor = np.zeros((c, h), dtype=np.complex128)
        self.rms2 = np.zeros(c)
        self.dc_sum = np.zeros(c)
        self.dc_n = np.zeros(c)
        self.cf = np.full(c, np.nan)
        self.metric2 = {k: np.zeros(c) for k in self._METRICS}
        self.p1 = [{} for _ in pairs]  # key -> [sum, count]
        self.p3 = {"3-wire": {}, "4-wire": {}}
        self.in2 = 0.0
        self._queued: list = []
        self._queued_windows = 0

    BATCH = 256
    """Windows gathered before they are added: the sums of a span of 60-odd windows cost
    about as much in NumPy's per-call overhead as in arithmetic."""

    _KEYS = ("valid", "component", "group", "subgroup", "interharmonic_group", "rms", "dc",
             "peak", "products", "combo_rms")

    def add(self, part: dict) -> None:
        """Add the per-window values of a span (in file order), at once or with the next
        spans' (:attr:`BATCH`); every result below includes all spans added."""
        self._queued.append(part)
        self._queued_windows += part["valid"].size
        if self._queued_windows >= self.BATCH:
            self._flush()

    def _flush(self) -> None:
        if not self._queued:
            return
        parts, self._queued, self._queued_windows = self._queued, [], 0
        if len(parts) == 1:
            self._add_part(parts[0])
            return
        self._add_part({k: np.concatenate([p[k] for p in parts]) for k in self._KEYS
                        if k in parts[0]})

    @staticmethod
    def _add(d, key, values):
        values = np.asarray(values, dtype=np.float64)
        ok = np.isfinite(values)
        s, n = d.get(key, (0.0, 0))
        d[key] = (s + float(values[ok].sum()), n + int(ok.sum()))

    def _add_part(self, part: dict) -> None:
        v = part["valid"]
        if not v.any():
            return
        self.n += int(v.sum())
        comp = part["component"][v]
        mag = np.abs(comp)
        self.sq["component"] += np.sum(mag**2, axis=0)
        for key in ("group", "subgroup", "interharmonic_group"):
            self.sq[key] += np.sum(part[key][v] ** 2, axis=0)
        self.phasor += np.nansum(comp, axis=0)
        rms, dc, peak = part["rms"][v], part["dc"][v], part["peak"][v]
        self.rms2 += np.sum(rms**2, axis=0)
        self.dc_sum += np.nansum(dc, axis=0)
        self.dc_n += np.sum(np.isfinite(dc), axis=0)
        with np.errstate(invalid="ignore", divide="ignore"):
            cf = metrics.crest_factor(peak, rms)
        cf = np.where(np.isfinite(cf), cf, -np.inf).max(axis=0)
        self.cf = np.where(np.isfinite(cf), np.fmax(self.cf, cf), self.cf)
        grp = part["group"][v]
        r, h40 = self.resolved, min(40, self.resolved)
        m = {
            "thd": metrics.thd(mag, max_order=r),
            "thdg": metrics.thd(grp, max_order=r),
            "thds": metrics.thd(part["subgroup"][v], max_order=r),
            "tdd": metrics.tdd(mag, self.il_a, max_order=r) if self.il_a else np.zeros(
                mag.shape[:2]),
            "thc": metrics.thc(grp, max_order=h40),
            "pwhc": metrics.pwhc(grp, hi=h40),
            "pwhd": metrics.pwhd(grp, hi=h40),
        }
        for key, val in m.items():
            self.metric2[key] += np.sum(np.asarray(val) ** 2, axis=0)
        if not self.pairs:
            return
        prods, crms = part["products"][v], part["combo_rms"][v]
        for j, (kv, ki) in enumerate(self.pairs):
            q = metrics.single_phase_power(rms[:, kv], rms[:, ki], prods[:, j], comp[:, kv, 1],
                                           comp[:, ki, 1])
            for key, val in q.items():
                self._add(self.p1[j], key, val)
        va, ia = self.volt_abc, self.curr_abc
        if len(va) == 3 and len(ia) == 3 and len(self.pairs) == 3:
            v_ll = crms[:, :3]
            i_n = crms[:, 3]
            self.in2 += float(np.sum(i_n**2))
            for wiring in ("3-wire", "4-wire"):
                n_rms = rms[:, self.neutral[0]] if self.neutral else i_n
                t = metrics.three_phase_power(
                    p_w=prods[:, :3], i_rms=rms[:, ia], v_rms=rms[:, va], v_ll_rms=v_ll,
                    i1=comp[:, ia, 1], v1=comp[:, va, 1], wiring=wiring,
                    i_n_rms=n_rms if wiring == "4-wire" else None)
                for key in self._THREE:
                    self._add(self.p3[wiring], key, t[key])
        elif len(ia) == 3:
            self.in2 += float(np.sum(crms[:, -1] ** 2))

    def _rms(self, total):
        return np.sqrt(total / self.n)

    def channel_results(self, orders) -> list:
        self._flush()
        out = []
        r = self.resolved
        for k, c in enumerate(self.chans):
            h_rms = self._rms(self.sq["component"][k])
            ph = np.degrees(np.angle(self.phasor[k]))
            if r < len(orders) - 1:
                ph[r + 1:] = np.nan
            tdd = None
            if self.il_a is not None and c.quantity == "current":
                tdd = float(self._rms(self.metric2["tdd"][k]))
            out.append(ChannelResult(
                name=c.name, quantity=c.quantity, phase=c.phase,
                unit=c.unit or ("A" if c.quantity == "current" else "V"),
                rms=float(self._rms(self.rms2[k])),
                dc=float(self.dc_sum[k] / self.dc_n[k]) if self.dc_n[k] else float("nan"),
                fundamental_rms=float(h_rms[1]),
                thd_percent=float(self._rms(self.metric2["thd"][k])),
                thd_group_percent=float(self._rms(self.metric2["thdg"][k])),
                thd_subgroup_percent=float(self._rms(self.metric2["thds"][k])),
                tdd_percent=tdd,
                thc=float(self._rms(self.metric2["thc"][k])),
                pwhc=float(self._rms(self.metric2["pwhc"][k])),
                pwhd_percent=float(self._rms(self.metric2["pwhd"][k])),
                crest_factor=float(self.cf[k]),
                orders=orders,
                harmonic_rms=h_rms,
                group_rms=self._rms(self.sq["group"][k]),
                subgroup_rms=self._rms(self.sq["subgroup"][k]),
                interharmonic_group_rms=self._rms(self.sq["interharmonic_group"][k]),
                phase_deg=ph,
            ))
        return out

    def infer_wiring(self) -> str:
        """4-wire when a neutral was measured or the phase currents do not sum to zero."""
        self._flush()
        if self.neutral:
            return "4-wire"
        if len(self.curr_abc) != 3:
            return "3-wire"
        i_sum = np.sqrt(self.in2 / self.n)
        i_phase = np.mean([np.sqrt(self.rms2[k] / self.n) for k in self.curr_abc])
        return "4-wire" if i_phase > 0 and i_sum > 0.05 * i_phase else "3-wire"

    @staticmethod
    def _mean(d, key):
        s, n = d.get(key, (0.0, 0))
        return s / n if n else float("nan")

    def power(self, wiring):
        self._flush()
        if not self.pairs:
            return None
        phases = []
        for (kv, ki), d in zip(self.pairs, self.p1):
            m = {key: self._mean(d, key) for key in ("p_w", "s_va", "p1_w", "q1_var", "s1_va")}
            phases.append(PhasePower(
                phase=self.chans[ki].phase, voltage=self.chans[kv].name,
                current=self.chans[ki].name, p_w=m["p_w"], s_va=m["s_va"], p1_w=m["p1_w"],
                q1_var=m["q1_var"], s1_va=m["s1_va"],
                pf=m["p_w"] / m["s_va"] if m["s_va"] > 0 else float("nan"),
                dpf=m["p1_w"] / m["s1_va"] if m["s1_va"] > 0 else float("nan")))
        p_total = float(sum(p.p_w for p in phases))
        if wiring is not None and self.p3[wiring]:
            m = {key: self._mean(self.p3[wiring], key) for key in self._THREE}
            extra = {k: m[k] for k in ("se1_va", "p1pos_w", "q1pos_var", "s1pos_va", "su1_va",
                                       "ie_a", "ve_v", "i_unbalance_percent",
                                       "v_unbalance_percent")}
            extra["dpf_pos"] = m["p1pos_w"] / m["s1pos_va"] if m["s1pos_va"] > 0 else \
                float("nan")
            extra["arithmetic_s_va"] = float(sum(p.s_va for p in phases))
            se = m["se_va"]
            return PowerResult(tuple(phases), p_total, se,
                               p_total / se if se > 0 else float("nan"), wiring, extra)
        s_sum = float(sum(p.s_va for p in phases))
        return PowerResult(tuple(phases), p_total, s_sum if len(phases) == 1 else None,
                           p_total / s_sum if s_sum > 0 else float("nan"), None,
                           {"arithmetic_s_va": s_sum})
