"""Flicker and voltage change results against a flicker limit table (IEC 61000-3-3 / -3-11).

Called by :func:`pqcheck.assess.assess` for tables with ``measure = "flicker"``. One
:class:`~pqcheck.assess.Check` per limit and per evaluated voltage:

* ``Pst``: the largest 10-minute Pst. Inconclusive when the capture is shorter than the
  rule's ``period_s`` (600 s) or when an interval could not be computed and the others pass.
* ``Plt``: the largest 2-hour Plt; inconclusive without 12 complete intervals.
* ``dc_rel``, ``dmax``, ``Tmax``: the largest over the voltage changes of the capture;
  ``dc_rel`` is inconclusive when no change ends in a steady state.

A finding of severity ``error`` on the channel makes its checks inconclusive unless they
fail anyway; nothing is passed that the data cannot back.
"""

from __future__ import annotations

import math

import numpy as np

from .._limit_model import FLICKER_TOTALS

__all__ = ["flicker_checks"]

_STAT = {
    "Pst": "largest 10-minute Pst",
    "Plt": "largest 2-hour Plt",
    "dc_rel": "largest relative steady-state voltage change dc",
    "dmax": "largest maximum relative voltage change dmax",
    "Tmax": "longest time d(t) exceeds 3.3 %",
}


def flicker_checks(flicker, table, *, check_cls):
    """Checks of one flicker table; returns ``(checks, notes)``.

    Parameters
    ----------
    flicker : pqcheck.flicker.evaluate.FlickerAnalysis
    table : pqcheck.limits.ResolvedLimits
        A table with ``measure = "flicker"``.
    check_cls : type
        :class:`pqcheck.assess.Check` (passed in to keep the import one-way).
    """
    notes = []
    rules = {c.of: c for c in table.evaluation.checks}
    path_text = {"voltage": "measured terminal voltage",
                 "reference-impedance": "voltage computed from the current through Zref",
                 "system-impedance": "voltage computed from the current through the system "
                                     "impedance"}
    notes.append(f"{table.table_id}: flicker evaluated on the {path_text[flicker.path]}"
                 + (f" ({flicker.channels[0].impedance})" if flicker.channels
                    and flicker.channels[0].impedance else "") + ".")
    checks = []
    for cf in flicker.channels:
        blocking = [f for f in cf.findings if f.severity == "error"]
        for it in table.items:
            if it.quantity not in FLICKER_TOTALS:
                continue
            rule = rules.get(FLICKER_TOTALS[it.quantity])
            mult = rule.multiplier if rule else 1.0
            limit = mult * it.limit
            measured, verdict, note, undecided = _measure(cf, it.quantity, rule)
            if verdict is None:
                verdict = "pass" if measured <= limit else "fail"
            if verdict == "pass" and undecided:
                verdict = "inconclusive"
            if verdict == "pass" and blocking:
                verdict = "inconclusive"
                note = "; ".join([note] + [f.message for f in blocking] if note else
                                 [f.message for f in blocking])
            margin = ((limit - measured) / limit * 100.0
                      if measured is not None and math.isfinite(measured) and limit > 0
                      else None)
            extra = [x for x in (note, it.note) if x]
            if cf.derived_from:
                extra.append(f"derived from {cf.derived_from} through {cf.impedance}")
            checks.append(check_cls(
                table_id=table.table_id, quantity=it.quantity, order=None,
                applies_to="voltage", phase=_phase(cf), channel=cf.channel,
                statistic=_STAT[it.quantity] + (f" ({cf.meter.lamp} lamp)"
                                                 if it.quantity in ("Pst", "Plt") else ""),
                measured=None if measured is None or not math.isfinite(measured)
                else float(measured),
                limit=limit, unit=it.unit, margin_percent=margin, verdict=verdict,
                clause=it.clause, verify=it.verify, note="; ".join(extra),
                table_limit=it.limit, multiplier=mult, basis=it.basis, tag=it.tag))
    if not flicker.channels:
        notes.append(f"{table.table_id}: no voltage to evaluate.")
    return checks, notes


def _phase(cf):
    return cf.phase


def _measure(cf, quantity, rule):
    """(measured, forced verdict or None, note, a pass is only inconclusive) of a quantity."""
    m, c = cf.meter, cf.change
    n_changes = f"{len(c.changes)} voltage change(s)"
    if quantity == "Pst":
        vals = np.asarray(m.pst, dtype=float)
        good = vals[np.isfinite(vals)]
        worst = float(good.max()) if good.size else float("nan")
        period = rule.period_s if rule else 600.0
        if not m.complete_intervals or m.interval_s + 1e-6 < period:
            return worst, "inconclusive", (
                f"the capture is {m.interval_s:.1f} s long, shorter than the {period:g} s Pst "
                f"observation period (its Pst over {m.interval_s:.1f} s is {worst:.3g})"), True
        if not good.size:
            return None, "inconclusive", "no interval could be computed (missing samples)", True
        if good.size < vals.size:
            return worst, None, (f"{vals.size - good.size} of {vals.size} intervals could not "
                                 "be computed (missing samples)"), True
        return worst, None, f"{vals.size} interval(s) of {m.interval_s:g} s", False
    if quantity == "Plt":
        if not m.plt:
            return None, "inconclusive", cf.plt_reason, True
        return float(max(m.plt)), None, f"{len(m.plt)} period(s) of 2 h", False
    if quantity == "dc_rel":
        if not np.isfinite(c.dc_percent):
            return None, "inconclusive", ("no voltage change ends in a steady state (within "
                                          "+-0.2 % for 1 s), so dc is undefined"), True
        return float(c.dc_percent), None, n_changes, False
    if quantity == "dmax":
        return float(c.dmax_percent), None, n_changes, not c.steady_found
    if quantity == "Tmax":
        return float(c.tmax_s), None, n_changes, not c.steady_found
    raise KeyError(quantity)
