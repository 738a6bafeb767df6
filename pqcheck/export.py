"""Plain-data forms of results: JSON-ready dicts and pandas tables.

The report, the CLI and the exports all format results through these functions; they never
recompute a number. Non-finite values become ``null`` in JSON.
"""

from __future__ import annotations

import json
import math

import numpy as np

from . import __version__

__all__ = ["analysis_to_dict", "harmonics_frame", "windows_frame", "clean", "dumps"]

SCHEMA_VERSION = 2
"""Version of the results documents (:mod:`pqcheck.results`; 1: before the run specification
was recorded)."""



def clean(obj, *, finite_only: bool = True):
    """Recursively convert numpy types to Python; non-finite floats become None unless
    ``finite_only`` is False (lossless storage, where NaN marks an unmeasured value)."""
    if isinstance(obj, dict):
        return {str(k): clean(v, finite_only=finite_only) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [clean(v, finite_only=finite_only) for v in obj]
    if isinstance(obj, np.ndarray):
        return clean(obj.tolist(), finite_only=finite_only)
    if isinstance(obj, (np.bool_,)):
        return bool(obj)
    if isinstance(obj, (np.integer,)):
        return int(obj)
    if isinstance(obj, (float, np.floating)):
        f = float(obj)
        return f if math.isfinite(f) or not finite_only else None
    return obj


def dumps(obj, *, indent: int | None = 2) -> str:
    """JSON text of ``obj`` after :func:`clean`."""
    return json.dumps(clean(obj), indent=indent, ensure_ascii=False, allow_nan=False)


def _round(x, digits=10):
    if x is None:
        return None
    x = float(x)
    if not math.isfinite(x):
        return None
    return float(f"{x:.{digits}g}")


def analysis_to_dict(result, *, include_windows: bool = False) -> dict:
    """JSON-ready summary of an :class:`~pqcheck.analysis.AnalysisResult`.

    Keys: ``tool``, ``capture`` (source, sha256, sample rate, duration, reader settings),
    ``settings``, ``fundamental_hz``, ``frequency_range_hz``, ``windows`` (count, valid),
    ``max_resolved_order``, ``channels`` (each with ``name``, ``quantity``, ``phase``, ``unit``,
    ``rms``, ``dc``, ``fundamental_rms``, ``thd_percent``, ``thd_group_percent``,
    ``thd_subgroup_percent``, ``tdd_percent``, ``thc``, ``pwhc``, ``pwhd_percent``,
    ``crest_factor`` and ``harmonics``: a list of ``{order, rms, percent_of_fundamental,
    phase_deg, group_rms, subgroup_rms, interharmonic_group_rms}`` for orders 1..H (the
    interharmonic group of order h lies between h and h + 1), values ``null`` where the
    sample rate does not resolve the order), ``power`` (``phases`` with ``p_w``, ``s_va``,
    ``p1_w``, ``q1_var``, ``s1_va``, ``pf``, ``dpf``; ``total`` with ``p_w``, ``se_va``, ``pf``,
    ``wiring`` and the three-phase extras) and ``findings``. With a flicker evaluation, each
    evaluated channel (the voltage, or the current it was derived from) has a ``flicker``
    object (``lamp``, ``pst``, ``pst_interval_s``, ``plt`` or null with ``plt_reason``,
    ``pinst_max``, ``dc_percent``, ``dmax_percent``, ``tmax_s``, ``derived_from``, ``path``,
    ...) and the top level a ``flicker`` summary (``path``, ``nominal_hz``, ``findings``).
    """
    w = result.windows
    chans = []
    for c in result.channels:
        f1 = c.harmonic_rms[1]
        harmonics = []
        for h in range(1, len(c.orders)):
            harmonics.append({
                "order": h,
                "rms": _round(c.harmonic_rms[h]),
                "percent_of_fundamental": _round(100 * c.harmonic_rms[h] / f1)
                if f1 and np.isfinite(f1) and f1 > 0 else None,
                "phase_deg": _round(c.phase_deg[h], 6),
                "group_rms": _round(c.group_rms[h]),
                "subgroup_rms": _round(c.subgroup_rms[h]),
                "interharmonic_group_rms": _round(c.interharmonic_group_rms[h]),
            })
        chans.append({
            "name": c.name,
            "quantity": c.quantity,
            "phase": c.phase,
            "unit": c.unit,
            "rms": _round(c.rms),
            "dc": _round(c.dc),
            "fundamental_rms": _round(c.fundamental_rms),
            "thd_percent": _round(c.thd_percent),
            "thd_group_percent": _round(c.thd_group_percent),
            "thd_subgroup_percent": _round(c.thd_subgroup_percent),
            "tdd_percent": _round(c.tdd_percent),
            "thc": _round(c.thc),
            "pwhc": _round(c.pwhc),
            "pwhd_percent": _round(c.pwhd_percent),
            "crest_factor": _round(c.crest_factor),
            "dc_group_rms": _round(c.group_rms[0]),
            "harmonics": harmonics,
        })
    power = None
    if result.power is not None:
        p = result.power
        total = {"p_w": _round(p.p_w), "se_va": _round(p.se_va), "pf": _round(p.pf),
                 "wiring": p.wiring}
        total.update({k: _round(v) for k, v in p.extra.items()})
        power = {
            "phases": [
                {"phase": ph.phase, "voltage": ph.voltage, "current": ph.current,
                 "p_w": _round(ph.p_w), "s_va": _round(ph.s_va), "p1_w": _round(ph.p1_w),
                 "q1_var": _round(ph.q1_var), "s1_va": _round(ph.s1_va), "pf": _round(ph.pf),
                 "dpf": _round(ph.dpf)}
                for ph in p.phases
            ],
            "total": total,
        }
    out = {
        "tool": {"name": "pqcheck", "version": __version__, "schema": SCHEMA_VERSION},
        "capture": {
            "source": result.source,
            "sha256": result.sha256,
            "sample_rate_hz": _round(result.fs_hz),
            "n_samples": int(result.n_samples),
            "duration_s": _round(result.duration_s),
            "reader": clean(result.reader_settings),
        },
        "settings": result.settings.to_dict(),
        "fundamental_hz": _round(result.fundamental_hz),
        "frequency_range_hz": [_round(result.freq_min_hz), _round(result.freq_max_hz)],
        "windows": {"count": int(w.n_windows), "valid": int(w.valid.sum()),
                    "analysed_s": _round(result.analysed_s)},
        "max_resolved_order": int(result.max_resolved_order),
        "channels": chans,
        "power": power,
        "findings": [f.to_dict() for f in result.findings],
    }
    fa = getattr(result, "flicker", None)
    if fa is not None:
        by_name = {c["name"]: c for c in chans}
        for cf in fa.channels:
            if cf.channel in by_name:
                by_name[cf.channel]["flicker"] = cf.to_dict()
        out["flicker"] = {"path": fa.path, "nominal_hz": fa.nominal_hz,
                          "channels": [cf.channel for cf in fa.channels],
                          "findings": [f.to_dict() for f in fa.findings]}
    if include_windows:
        out["window_series"] = clean(windows_frame(result).to_dict(orient="list"))
    return clean(out)


def harmonics_frame(result):
    """Tidy table: one row per channel and order (1..H) with rms, % of fundamental, phase,
    group and subgroup values."""
    import pandas as pd

    rows = []
    for c in result.channels:
        f1 = c.harmonic_rms[1]
        for h in range(1, len(c.orders)):
            rows.append({
                "channel": c.name, "quantity": c.quantity, "phase": c.phase, "order": h,
                "rms": c.harmonic_rms[h],
                "percent_of_fundamental": 100 * c.harmonic_rms[h] / f1 if f1 > 0 else np.nan,
                "phase_deg": c.phase_deg[h], "group_rms": c.group_rms[h],
                "subgroup_rms": c.subgroup_rms[h],
                "interharmonic_group_rms": c.interharmonic_group_rms[h],
            })
    return pd.DataFrame(rows)


def windows_frame(result, *, measure: str = "component", max_order: int | None = None):
    """Per-window table: time, frequency, validity, and per channel rms and THD.

    Parameters
    ----------
    result : AnalysisResult
    measure, max_order
        Which THD: :func:`pqcheck.assess.window_thd_percent` (default: harmonic components,
        orders 2 to the highest resolved, as the channel values; a report passes its THD
        check's table so that its figure shows what the check compares).

    Returns
    -------
    pandas.DataFrame
    """
    import pandas as pd

    from .assess import window_thd_percent

    w = result.windows
    data = {"t_start_s": w.t_start_s, "duration_s": w.duration_s, "freq_hz": w.freq_hz,
            "valid": w.valid}
    thd = window_thd_percent(result, measure=measure, max_order=max_order)
    for k, c in enumerate(result.channels):
        data[f"{c.name}_rms"] = w.rms[:, k]
        data[f"{c.name}_thd_percent"] = thd[:, k]
    if w.p_total_w is not None:
        data["p_total_w"] = w.p_total_w
    return pd.DataFrame(data)
