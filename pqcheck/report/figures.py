"""Report figures: harmonic spectra against limits, waveforms, distortion over time.

Each figure is built in two steps, so tests can compare what is drawn with the result objects:

1. an extractor (``*_data``) copies the values to plot out of the result objects (an
   :class:`~pqcheck.analysis.AnalysisResult`, the checks of an assessment, the
   :class:`~pqcheck.capture.Capture` for raw samples) into a small frozen record, without
   computing anything new;
2. a plotter (``plot_*``) draws that record with matplotlib's Agg back end and returns a
   :class:`matplotlib.figure.Figure`; :func:`to_png` renders it.

Pass and fail are never shown by colour alone: failing orders are filled black and marked
with a cross and their order number, inconclusive ones are hatched and marked "\u25d0" (the
report's undecided glyph), and the
legend says so in words.
"""

from __future__ import annotations

import io
from dataclasses import dataclass

import matplotlib

matplotlib.use("Agg")

import numpy as np  # noqa: E402
from matplotlib import ticker  # noqa: E402
from matplotlib.figure import Figure  # noqa: E402
from matplotlib.lines import Line2D  # noqa: E402
from matplotlib.patches import Patch  # noqa: E402

__all__ = [
    "SpectrumPanel",
    "SpectrumData",
    "WaveformData",
    "TrendData",
    "spectrum_from_checks",
    "spectrum_from_result",
    "waveform_data",
    "trend_data",
    "plot_spectrum",
    "plot_waveforms",
    "plot_trend",
    "FlickerData",
    "flicker_data",
    "plot_flicker",
    "to_png",
    "FIG_WIDTH_IN",
]

FIG_WIDTH_IN = 6.7
"""Width of every figure (fits the text column of an A4 or Letter page). [in]"""

_INK = "#1a1a1a"
_PASS_FILL = "#a9b4bf"
_FAIL_FILL = "#1a1a1a"
_GRID = "#d9dde1"
_LIMIT_INK = "#24404f"
_BAR_WIDTH = 0.56
_LIMIT_HALF_WIDTH = 0.46
_LINE_STYLES = ("-", "--", ":", "-.")
_LINE_GREYS = ("#1a1a1a", "#4d5966", "#7f8b96", "#1a1a1a")

_RC = {
    "font.family": "DejaVu Sans",
    "font.size": 7.5,
    "axes.titlesize": 8,
    "axes.labelsize": 7.5,
    "axes.edgecolor": "#555555",
    "axes.linewidth": 0.6,
    "axes.spines.top": False,
    "axes.spines.right": False,
    "xtick.labelsize": 7,
    "ytick.labelsize": 7,
    "xtick.major.width": 0.5,
    "ytick.major.width": 0.5,
    "legend.fontsize": 7,
    "legend.frameon": False,
    "hatch.linewidth": 0.6,
}

_PHASE_ORDER = {"a": 0, "": 0, "b": 1, "c": 2, "n": 3}
_MAX_LABELLED = 12


# ---------------------------------------------------------------------------------------------
# Data records
# ---------------------------------------------------------------------------------------------


@dataclass(frozen=True, eq=False)
class SpectrumPanel:
    """One channel's harmonic values, with limits when a table was applied.

    Attributes
    ----------
    label : str
        Panel title, e.g. ``"phase a (ia)"``.
    orders : numpy.ndarray of int
        Harmonic orders. [unitless]
    measured : numpy.ndarray
        Measured value per order, in the figure's unit. [%, A or mA/W]
    limit : numpy.ndarray
        Limit per order (NaN: none). [%, A or mA/W]
    verdicts : tuple of str
        Verdict per order (``"pass"``, ``"fail"``, ``"inconclusive"``, ``"not applicable"``,
        or ``""`` when no limit was applied).
    """

    label: str
    orders: np.ndarray
    measured: np.ndarray
    limit: np.ndarray
    verdicts: tuple


@dataclass(frozen=True, eq=False)
class SpectrumData:
    """A spectrum figure: one panel per channel, all in one unit.

    Attributes
    ----------
    title : str
    unit : str
        Axis unit, e.g. ``"% of IL"`` or ``"A"``.
    panels : tuple of SpectrumPanel
    note : str
        Caption text (what was compared, which statistic).
    """

    title: str
    unit: str
    panels: tuple
    note: str = ""


@dataclass(frozen=True, eq=False)
class WaveformData:
    """A few cycles of raw samples.

    Attributes
    ----------
    t_ms : numpy.ndarray
        Time from the first plotted sample. [ms]
    t0_s : float
        Capture time of the first plotted sample. [s]
    voltages, currents : tuple of (str, numpy.ndarray)
        Label and samples per channel. [V], [A]
    """

    t_ms: np.ndarray
    t0_s: float
    voltages: tuple
    currents: tuple


@dataclass(frozen=True, eq=False)
class TrendData:
    """Distortion per measurement window over the capture.

    Attributes
    ----------
    t_s : numpy.ndarray
        Start time of each window. [s]
    currents, voltages : tuple of (str, numpy.ndarray)
        Label and THD per window. [%]
    """

    t_s: np.ndarray
    currents: tuple
    voltages: tuple


# ---------------------------------------------------------------------------------------------
# Extractors (copy values out of result objects; compute nothing)
# ---------------------------------------------------------------------------------------------


def _channel_label(result, name: str) -> tuple:
    """(sort key, label, quantity) of channel ``name``."""
    try:
        c = result.channels[result.channel_index(name)]
    except KeyError:
        return (9, name), name, ""
    label = f"phase {c.phase} ({c.name})" if c.phase else c.name
    return (_PHASE_ORDER.get(c.phase, 9), c.name), label, c.quantity


def spectrum_from_checks(result, checks, *, title: str, unit_label: str | None = None,
                         note: str = "") -> SpectrumData | None:
    """Spectrum figure of the individual-order checks of one table, quantity and statistic.

    Parameters
    ----------
    result : AnalysisResult
        For channel phases and labels only.
    checks : sequence of Check
        Checks of one table, one statistic and one quantity (current or voltage); only those
        with ``quantity == "harmonic"`` are drawn.
    title : str
    unit_label : str or None
        Axis unit (default: the checks' ``unit``).
    note : str

    Returns
    -------
    SpectrumData or None
        None when no check is an individual order.
    """
    by_channel: dict = {}
    unit = ""
    for chk in checks:
        if chk.quantity != "harmonic" or chk.order is None:
            continue
        by_channel.setdefault(chk.channel, []).append(chk)
        unit = unit or chk.unit
    if not by_channel:
        return None
    panels = []
    for name in sorted(by_channel, key=lambda n: _channel_label(result, n)[0]):
        rows = sorted(by_channel[name], key=lambda c: c.order)
        panels.append(SpectrumPanel(
            label=_channel_label(result, name)[1],
            orders=np.array([c.order for c in rows], dtype=int),
            measured=np.array([np.nan if c.measured is None else c.measured for c in rows],
                              dtype=float),
            limit=np.array([np.nan if c.limit is None else c.limit for c in rows], dtype=float),
            verdicts=tuple(c.verdict for c in rows),
        ))
    return SpectrumData(title=title, unit=unit_label or unit, panels=tuple(panels), note=note)


def spectrum_from_result(result, quantity: str, *, harmonics=None) -> SpectrumData | None:
    """Spectrum figure of one quantity's channels in percent of the fundamental, no limits.

    Parameters
    ----------
    result : AnalysisResult
    quantity : {"current", "voltage"}
    harmonics : pandas.DataFrame or None
        :func:`pqcheck.export.harmonics_frame` of ``result`` (computed when None).

    Returns
    -------
    SpectrumData or None
        None when the result has no channel of that quantity.
    """
    from ..export import harmonics_frame

    chans = [c for c in result.channels if c.quantity == quantity and c.phase != "n"]
    if not chans:
        return None
    frame = harmonics_frame(result) if harmonics is None else harmonics
    panels = []
    for c in sorted(chans, key=lambda c: _channel_label(result, c.name)[0]):
        rows = frame[(frame["channel"] == c.name) & (frame["order"] >= 2)
                     & (frame["order"] <= result.max_resolved_order)]
        panels.append(SpectrumPanel(
            label=_channel_label(result, c.name)[1],
            orders=rows["order"].to_numpy(dtype=int),
            measured=rows["percent_of_fundamental"].to_numpy(dtype=float),
            limit=np.full(len(rows), np.nan),
            verdicts=("",) * len(rows),
        ))
    what = "Current" if quantity == "current" else "Voltage"
    return SpectrumData(
        title=f"{what} harmonics, orders 2 to {result.max_resolved_order}",
        unit="% of fundamental", panels=tuple(panels),
        note="Harmonic components over the capture (rms of the window values); no limit table "
             "applied.")


def waveform_data(capture, result, *, cycles: float = 3.0) -> WaveformData:
    """A few cycles of the raw samples, starting at the first valid analysis window.

    Parameters
    ----------
    capture : Capture or CaptureStream
        The capture the result was computed from; its first samples (``head``) are used, so
        a long streamed capture is not read again.
    result : AnalysisResult
        For the channel roles, the first valid window and the measured fundamental.
    cycles : float
        Number of fundamental cycles to show. [unitless]

    Returns
    -------
    WaveformData
    """
    w = result.windows
    valid = np.flatnonzero(w.valid)
    t_start = float(w.t_start_s[valid[0]] if valid.size else w.t_start_s[0])
    fs = capture.fs_hz
    f1 = result.fundamental_hz if np.isfinite(result.fundamental_hz) else \
        result.settings.nominal_hz
    n = int(round(cycles * fs / f1)) + 1
    start = max(0, int(round((t_start - capture.t0_s) * fs)))
    # The first samples are held by both in-memory captures and streamed ones (``head``).
    head = capture.head(start + n)
    if head.shape[1] < start + n:
        start = 0
        head = capture.head(n)
    n = min(n, head.shape[1] - start)
    t_ms = np.arange(n) / fs * 1e3
    volts, amps = [], []
    for c in sorted(result.channels, key=lambda c: _channel_label(result, c.name)[0]):
        x = head[capture.index(c.name), start:start + n]
        label = _channel_label(result, c.name)[1]
        (volts if c.quantity == "voltage" else amps).append((label, x))
    return WaveformData(t_ms=t_ms, t0_s=capture.t0_s + start / fs, voltages=tuple(volts),
                        currents=tuple(amps))


def trend_data(result, *, windows=None) -> TrendData:
    """THD of every channel per measurement window.

    Parameters
    ----------
    result : AnalysisResult
    windows : pandas.DataFrame or None
        :func:`pqcheck.export.windows_frame` of ``result`` (computed when None, with the
        analysis's THD; a report passes the frame of its THD check's table).

    Returns
    -------
    TrendData
    """
    from ..export import windows_frame

    frame = windows_frame(result) if windows is None else windows
    cur, vol = [], []
    for c in sorted(result.channels, key=lambda c: _channel_label(result, c.name)[0]):
        if c.phase == "n":
            continue
        series = (_channel_label(result, c.name)[1],
                  frame[f"{c.name}_thd_percent"].to_numpy(dtype=float))
        (vol if c.quantity == "voltage" else cur).append(series)
    return TrendData(t_s=frame["t_start_s"].to_numpy(dtype=float), currents=tuple(cur),
                     voltages=tuple(vol))


# ---------------------------------------------------------------------------------------------
# Plotters
# ---------------------------------------------------------------------------------------------


def _figure(height_in: float) -> Figure:
    fig = Figure(figsize=(FIG_WIDTH_IN, height_in), dpi=100, layout="constrained")
    return fig


def _style_axes(ax) -> None:
    ax.grid(True, axis="y", color=_GRID, linewidth=0.5)
    ax.set_axisbelow(True)
    ax.tick_params(length=2.5)


_UNDECIDED = "\u25d0"
"""The undecided glyph, as the report's tables write it (``style.VERDICT_MARK``)."""


def plot_spectrum(data: SpectrumData) -> Figure:
    """Bar chart per panel: measured values, limits as black bars across each order, failing
    orders filled black and labelled with a cross and the order number.

    Parameters
    ----------
    data : SpectrumData

    Returns
    -------
    matplotlib.figure.Figure
    """
    import matplotlib as mpl

    with mpl.rc_context(_RC):
        n = len(data.panels)
        fig = _figure(max(2.0, 0.4 + 1.0 * n))
        axes = fig.subplots(n, 1, sharex=True, squeeze=False)[:, 0]
        has_limit = any(np.isfinite(p.limit).any() for p in data.panels)
        any_fail = any(v == "fail" for p in data.panels for v in p.verdicts)
        any_inc = any(v == "inconclusive" for p in data.panels for v in p.verdicts)
        lo = min((int(p.orders.min()) for p in data.panels if p.orders.size), default=2)
        hi = max((int(p.orders.max()) for p in data.panels if p.orders.size), default=50)
        for ax, p in zip(axes, data.panels):
            _style_axes(ax)
            x = p.orders
            y = np.nan_to_num(p.measured, nan=0.0)
            verdicts = np.array(p.verdicts + ("",) * (len(x) - len(p.verdicts)), dtype=object)
            fail = verdicts == "fail"
            inc = verdicts == "inconclusive"
            ok = ~(fail | inc)
            ax.bar(x[ok], y[ok], width=_BAR_WIDTH, color=_PASS_FILL, edgecolor="#4d5966",
                   linewidth=0.4, zorder=2)
            if inc.any():
                ax.bar(x[inc], y[inc], width=_BAR_WIDTH, color="white", edgecolor=_INK,
                       linewidth=0.6, hatch="////", zorder=2)
            if fail.any():
                ax.bar(x[fail], y[fail], width=_BAR_WIDTH, color=_FAIL_FILL, edgecolor=_INK,
                       linewidth=0.6, zorder=2)
            lim = p.limit
            fin = np.isfinite(lim)
            if fin.any():
                # The limit mark is wider than its bar and drawn *behind* the bars, without a
                # halo: a bar's top stays visible however close it is to its limit (a bar just
                # above the limit covers the middle of the mark, whose ends still show).
                ax.hlines(lim[fin], x[fin] - _LIMIT_HALF_WIDTH, x[fin] + _LIMIT_HALF_WIDTH,
                          colors=_LIMIT_INK, linewidth=1.5, zorder=1.5)
            top_vals = np.concatenate([y, np.where(fin, lim, 0.0)])
            top = float(np.nanmax(top_vals)) if top_vals.size else 1.0
            top = top if top > 0 else 1.0
            ax.set_ylim(0, top * 1.3)
            # Mark each failing (inconclusive) order; when there are too many to label
            # legibly, mark them without numbers and say how many in the panel.
            for mask, sym, weight in ((fail, "\u2715", "bold"), (inc, _UNDECIDED, "normal")):
                count = int(mask.sum())
                numbered = count <= _MAX_LABELLED
                for xi, yi in zip(x[mask], y[mask]):
                    ax.annotate(f"{sym}{xi}" if numbered else sym, (xi, yi), xytext=(0, 2),
                                textcoords="offset points", ha="center", va="bottom",
                                fontsize=6.5, fontweight=weight, color=_INK)
            summary = []
            if fail.sum() > _MAX_LABELLED:
                summary.append(f"\u2715 {int(fail.sum())} orders exceed their limit")
            if inc.sum() > _MAX_LABELLED:
                summary.append(f"{_UNDECIDED} {int(inc.sum())} orders inconclusive")
            if summary:
                ax.text(0.995, 0.97, "; ".join(summary), transform=ax.transAxes, ha="right",
                        va="top", fontsize=7, color=_INK,
                        bbox={"facecolor": "white", "edgecolor": _INK, "linewidth": 0.5,
                              "boxstyle": "square,pad=0.25"})
            ax.set_title(p.label, loc="left", fontweight="bold")
            ax.set_ylabel(f"[{data.unit}]")
            ax.yaxis.set_major_formatter(ticker.FuncFormatter(lambda v, _: f"{v:g}"))
        axes[-1].set_xlabel("harmonic order")
        axes[-1].set_xlim(lo - 0.8, hi + 0.8)
        step = 1 if hi - lo <= 20 else 2 if hi - lo <= 40 else 5
        ticks = [t for t in range(0, hi + 1, step) if t >= lo] if step > 1 else list(
            range(lo, hi + 1))
        axes[-1].set_xticks(ticks)
        handles = [Patch(facecolor=_PASS_FILL, edgecolor="#4d5966", linewidth=0.4,
                         label="measured" + (" (within limit)" if has_limit else ""))]
        if has_limit:
            handles.append(Line2D([], [], color=_LIMIT_INK, linewidth=1.5,
                                  label="limit (mark wider than its bar)"))
        if any_fail:
            handles.append(Patch(facecolor=_FAIL_FILL, edgecolor=_INK,
                                 label="\u2715 n  exceeds its limit (FAIL)"))
        if any_inc:
            handles.append(Patch(facecolor="white", edgecolor=_INK, hatch="////",
                                 label=f"{_UNDECIDED} n  inconclusive"))
        # the legend in a row of its own above the panels, never over a panel's title
        fig.legend(handles=handles, loc="outside upper right", ncol=len(handles),
                   handlelength=1.4, columnspacing=1.2)
        return fig


def plot_waveforms(data: WaveformData) -> Figure:
    """Voltages (top) and currents (bottom) over a few cycles, one line style per phase.

    Parameters
    ----------
    data : WaveformData

    Returns
    -------
    matplotlib.figure.Figure
    """
    import matplotlib as mpl

    with mpl.rc_context(_RC):
        groups = [(lbl, series, unit) for lbl, series, unit in
                  (("Voltage", data.voltages, "V"), ("Current", data.currents, "A")) if series]
        fig = _figure(0.35 + 1.15 * len(groups))
        axes = fig.subplots(len(groups), 1, sharex=True, squeeze=False)[:, 0]
        for ax, (lbl, series, unit) in zip(axes, groups):
            ax.grid(True, color=_GRID, linewidth=0.5)
            ax.set_axisbelow(True)
            for k, (name, x) in enumerate(series):
                ax.plot(data.t_ms[: len(x)], x, color=_LINE_GREYS[k % 4],
                        linestyle=_LINE_STYLES[k % 4], linewidth=0.9, label=name)
            ax.axhline(0.0, color="#888888", linewidth=0.5)
            ax.set_ylabel(f"{lbl.lower()} [{unit}]")
            ax.legend(loc="lower right", bbox_to_anchor=(1.0, 1.0), ncol=len(series),
                      handlelength=2.2, borderaxespad=0.2)
            ax.set_title(lbl, loc="left", fontweight="bold")
        axes[-1].set_xlabel(f"time from t = {data.t0_s:.3f} s in the capture [ms]")
        axes[-1].set_xlim(0, float(data.t_ms[-1]) if data.t_ms.size else 1.0)
        return fig


def plot_trend(data: TrendData) -> Figure:
    """THD per measurement window over the capture; currents and voltages in separate panels.

    Parameters
    ----------
    data : TrendData

    Returns
    -------
    matplotlib.figure.Figure
    """
    import matplotlib as mpl

    with mpl.rc_context(_RC):
        groups = [(lbl, s) for lbl, s in (("Current THD", data.currents),
                                          ("Voltage THD", data.voltages)) if s]
        fig = _figure(0.5 + 1.45 * len(groups))
        axes = fig.subplots(len(groups), 1, sharex=True, squeeze=False)[:, 0]
        marker = "o" if data.t_s.size <= 60 else None
        for ax, (lbl, series) in zip(axes, groups):
            ax.grid(True, color=_GRID, linewidth=0.5)
            ax.set_axisbelow(True)
            for k, (name, y) in enumerate(series):
                ax.plot(data.t_s, y, color=_LINE_GREYS[k % 4], linestyle=_LINE_STYLES[k % 4],
                        linewidth=0.9, marker=marker, markersize=2.0, label=name)
            ax.set_ylabel("THD [%]")
            ax.set_title(f"{lbl} per measurement window", loc="left", fontweight="bold")
            ax.legend(loc="lower right", bbox_to_anchor=(1.0, 1.0), ncol=len(series),
                      handlelength=2.2, borderaxespad=0.2)
            ymax = np.nanmax([np.nanmax(y) if np.isfinite(y).any() else 0.0
                              for _, y in series])
            ax.set_ylim(0, (ymax if ymax > 0 else 1.0) * 1.25)
        axes[-1].set_xlabel("time in the capture [s] (window start)")
        if data.t_s.size:
            lo, hi = float(data.t_s[0]), float(data.t_s[-1])
            pad = 0.03 * (hi - lo) if hi > lo else 0.1
            axes[-1].set_xlim(lo - pad, hi + pad)
        return fig


@dataclass(frozen=True)
class FlickerData:
    """d(t) and Pinst over the capture for one voltage (measured or derived from a current).

    Attributes
    ----------
    label : str
        Channel label (with the current it was derived from).
    t_s, d_percent : numpy.ndarray
        Half-period mid times and d(t), NaN in steady states. [s], [%]
    u_rel_percent : numpy.ndarray
        Half-period rms relative to Un minus 100 (the whole record, for context). [%]
    pinst_t_s, pinst : numpy.ndarray
        Pinst maximum per step and the step start times. [s], [unitless]
    d_limits : tuple of (str, float)
        Horizontal limit lines of d(t): label and level. [%]
    """

    label: str
    t_s: np.ndarray
    d_percent: np.ndarray
    u_rel_percent: np.ndarray
    pinst_t_s: np.ndarray
    pinst: np.ndarray
    d_limits: tuple


def flicker_data(cf, checks=()) -> FlickerData:
    """Copy the series of a :class:`pqcheck.flicker.ChannelFlicker` (and the d(t) limit lines
    of its checks: dmax, dc and the 3.3 % level of Tmax) into a :class:`FlickerData`."""
    c, m = cf.change, cf.meter
    lines = []
    for k in checks:
        if k.channel == cf.channel and k.quantity in ("dmax", "dc_rel") and k.limit:
            lines.append((f"{'dmax' if k.quantity == 'dmax' else 'dc'} limit", float(k.limit)))
    lines.append(("Tmax level", 3.3))
    label = cf.channel if not cf.derived_from else f"{cf.channel} through {cf.impedance}"
    n = m.pinst.size
    return FlickerData(
        label=label, t_s=np.asarray(c.t_s), d_percent=np.asarray(c.d_percent),
        u_rel_percent=(np.asarray(c.u_hp_v) / c.un_v - 1.0) * 100.0,
        pinst_t_s=np.arange(n) * m.pinst_step_s, pinst=np.asarray(m.pinst),
        d_limits=tuple(dict(lines).items()))


def plot_flicker(data: FlickerData) -> Figure:
    """Two panels: d(t) with its limit lines (and the half-period rms for context), and
    Pinst over the capture with the Pinst = 1 level.

    Parameters
    ----------
    data : FlickerData

    Returns
    -------
    matplotlib.figure.Figure
    """
    import matplotlib as mpl

    with mpl.rc_context(_RC):
        fig = _figure(3.6)
        ax1, ax2 = fig.subplots(2, 1, squeeze=True)
        for ax in (ax1, ax2):
            ax.grid(True, color=_GRID, linewidth=0.5)
            ax.set_axisbelow(True)
        ax1.plot(data.t_s, -data.u_rel_percent, color=_LINE_GREYS[2], linewidth=0.6,
                 label="(Un - U_hp) / Un")
        ax1.plot(data.t_s, data.d_percent, color=_INK, linewidth=1.0, label="d(t)")
        for k, (name, level) in enumerate(data.d_limits):
            ax1.axhline(level, color=_LIMIT_INK, linestyle=_LINE_STYLES[(k + 1) % 4],
                        linewidth=0.9, label=f"{name} {level:g} %")
        ax1.set_ylabel("d [%]")
        ax1.set_xlabel("time in the capture [s] (half periods)")
        ax1.set_title(f"Relative voltage change, {data.label}", loc="left", fontweight="bold")
        ax1.legend(loc="upper right", fontsize=6.5, ncol=2)
        vals = np.concatenate([data.d_percent[np.isfinite(data.d_percent)],
                               [lv for _, lv in data.d_limits]])
        ax1.set_ylim(min(0.0, float(np.nanmin(-data.u_rel_percent))) if data.t_s.size else 0.0,
                     float(vals.max()) * 1.2 if vals.size else 5.0)
        ax2.plot(data.pinst_t_s, data.pinst, color=_INK, linewidth=0.8,
                 label="Pinst (max per step)")
        ax2.axhline(1.0, color=_LIMIT_INK, linestyle="--", linewidth=0.9, label="Pinst = 1")
        ax2.set_ylabel("Pinst")
        ax2.set_xlabel("time in the capture [s]")
        ax2.set_title("Instantaneous flicker sensation (IEC 61000-4-15)", loc="left",
                      fontweight="bold")
        ax2.legend(loc="upper right", fontsize=6.5)
        if data.pinst.size:
            top = float(np.nanmax(data.pinst))
            ax2.set_ylim(0, max(top, 1.0) * 1.15)
        return fig


def to_png(fig: Figure, *, dpi: int = 200) -> bytes:
    """Render a figure to PNG bytes (Agg). [dpi: dots per inch]"""
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=dpi, facecolor="white")
    return buf.getvalue()
