"""Lossless storage form of an :class:`~pqcheck.analysis.AnalysisResult`: a JSON-ready dict of
scalars and a dict of numpy arrays (no pickle), used by the result cache."""

from __future__ import annotations

import dataclasses

import numpy as np

from .analysis import (
    AnalysisResult,
    AnalysisSettings,
    ChannelResult,
    PhasePower,
    PowerResult,
    WindowSeries,
)
from .export import clean
from .findings import Finding

__all__ = ["result_to_arrays", "result_from_arrays"]

_CHANNEL_ARRAYS = ("orders", "harmonic_rms", "group_rms", "subgroup_rms",
                   "interharmonic_group_rms", "phase_deg")


def result_to_arrays(result: AnalysisResult):
    """Split a result into (meta: dict, arrays: dict of numpy arrays)."""
    arrays = {}
    for f in dataclasses.fields(WindowSeries):
        v = getattr(result.windows, f.name)
        if v is not None:
            arrays[f"windows.{f.name}"] = np.asarray(v)
    chans = []
    for i, c in enumerate(result.channels):
        d = {}
        for f in dataclasses.fields(ChannelResult):
            v = getattr(c, f.name)
            if f.name in _CHANNEL_ARRAYS:
                arrays[f"channels.{i}.{f.name}"] = np.asarray(v)
            else:
                d[f.name] = v
        chans.append(d)
    power = None
    if result.power is not None:
        p = result.power
        power = {"phases": [dataclasses.asdict(ph) for ph in p.phases], "p_w": p.p_w,
                 "se_va": p.se_va, "pf": p.pf, "wiring": p.wiring, "extra": dict(p.extra)}
    meta = {
        "source": result.source, "sha256": result.sha256, "fs_hz": result.fs_hz,
        "n_samples": int(result.n_samples), "duration_s": result.duration_s,
        "settings": dataclasses.asdict(result.settings),
        "fundamental_hz": result.fundamental_hz, "freq_min_hz": result.freq_min_hz,
        "freq_max_hz": result.freq_max_hz, "max_resolved_order": int(result.max_resolved_order),
        "channels": chans, "power": power,
        "findings": [dict(f.to_dict(), detail=f.detail) for f in result.findings],
        "reader_settings": result.reader_settings,
    }
    return clean(meta, finite_only=False), arrays


def result_from_arrays(meta: dict, arrays: dict) -> AnalysisResult:
    """Rebuild a result from :func:`result_to_arrays` output."""
    wkw = {}
    for f in dataclasses.fields(WindowSeries):
        wkw[f.name] = arrays.get(f"windows.{f.name}")
    windows = WindowSeries(**wkw)
    chans = []
    for i, d in enumerate(meta["channels"]):
        kw = dict(d)
        for name in _CHANNEL_ARRAYS:
            kw[name] = arrays[f"channels.{i}.{name}"]
        chans.append(ChannelResult(**kw))
    power = None
    if meta["power"] is not None:
        p = meta["power"]
        power = PowerResult(tuple(PhasePower(**ph) for ph in p["phases"]), p["p_w"], p["se_va"],
                            p["pf"], p["wiring"], dict(p["extra"]))
    findings = tuple(
        Finding(f["code"], f["severity"], f["message"], tuple(f.get("channels", ())),
                tuple(f.get("orders", ())), f.get("value"), f.get("unit", ""),
                dict(f.get("detail") or {}))
        for f in meta["findings"])
    return AnalysisResult(
        source=meta["source"], sha256=meta["sha256"], fs_hz=meta["fs_hz"],
        n_samples=meta["n_samples"], duration_s=meta["duration_s"],
        settings=AnalysisSettings(**meta["settings"]), fundamental_hz=meta["fundamental_hz"],
        freq_min_hz=meta["freq_min_hz"], freq_max_hz=meta["freq_max_hz"],
        max_resolved_order=meta["max_resolved_order"], channels=tuple(chans), windows=windows,
        power=power, findings=findings, reader_settings=dict(meta["reader_settings"]),
    )
