"""Measurement uncertainty of each assessed value, and the decision rule that uses it.

Every limit check carries an expanded uncertainty ``U`` (coverage factor k = 2, about 95 %)
in the unit of its limit, from the declared instrument chain and the analysis method:

``U = 2 sqrt( sum_i (a_i m)^2 / 3 + floor^2 / 3 )``

where ``m`` is the measured value and each ``a_i`` a maximum permissible error taken as a
rectangular distribution (GUM 4.3.7, half-width a, standard uncertainty a / sqrt(3)):

- the chain's accuracy (``% of reading``, probe or clamp and digitiser combined in
  quadrature). A gain error cancels in a ratio of two values of the same channel (a harmonic
  in % of the fundamental, THD), so it is left out there. Without a declared chain the
  harmonic accuracy of an IEC 61000-4-7 Class I instrument is assumed (5 % of reading, from
  memory), which does not cancel, and the assumption is listed as a deviation;
- the chain's bandwidth: a first-order response with -3 dB bandwidth ``B`` reads a
  component at ``f`` low by ``1 - 1/sqrt(1 + (f/B)^2)`` (common practice); for a total the
  highest order it sums is used;
- the method: 0.5 % of reading, the largest error of the analysis on the closed-form spectra
  of the test suite (single windows, leakage beside large components);
- the absolute part of the chain's accuracy (``+ 0.1 A``), in the limit's unit.

Decision rule (``decision_rule``)
    ``"guarded"`` (default): guarded acceptance with a guard band equal to ``U`` (ILAC-G8:09/2019,
    clause 4.2.3): a check passes only when ``m + U <= limit``; a value that meets its limit
    by less than its uncertainty is *inconclusive* (marked ``marginal``), never a clean pass.
    A value above the limit fails (simple rejection, the shared-risk reading of the limit); a
    fail within ``U`` of the limit is marked marginal too.
    ``"simple"``: simple acceptance (ILAC-G8 4.2.1): pass when ``m <= limit``; a pass within
    ``U`` is kept but marked ``marginal`` and counted as not a clean pass in the report.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass

__all__ = ["Chain", "chain_for", "parse_accuracy", "expanded_uncertainty", "DECISION_RULES",
           "CLASS_I_HARMONIC", "METHOD_RELATIVE", "bandwidth_error"]

DECISION_RULES = ("guarded", "simple")
#: IEC 61000-4-7 Class I harmonic accuracy: 5 % of reading (above 3 % of the nominal current
#: or 1 % of the nominal voltage), from memory. [unitless]
CLASS_I_HARMONIC = 0.05
#: The analysis method's own error, from the closed-form tests of the suite. [unitless]
METHOD_RELATIVE = 0.005
_K = 2.0


@dataclass(frozen=True)
class Chain:
    """The declared measurement chain of one quantity or of some channels.

    Attributes
    ----------
    quantity : str
        ``"current"``, ``"voltage"`` or "" (every channel).
    channels : tuple of str
        Capture columns it feeds (empty: every channel of ``quantity``).
    accuracy_percent : float or None
        Maximum permissible error in % of reading (probe and digitiser combined). [%]
    floor : float or None
        Absolute part of the accuracy. [A] or [V]
    bandwidth_hz : float or None
        -3 dB bandwidth of the chain. [Hz]
    sample_rate_hz : float or None
        Declared sample rate of the digitiser. [Hz]
    dc_coupled : bool or None
        The chain passes dc (a shunt, a Hall-effect clamp; not a current transformer or a
        Rogowski coil).
    zeroed : bool or None
        The dc offset was zeroed (degaussed) before the capture.
    name : str
        What it is (instrument models), for the report.
    """

    quantity: str = ""
    channels: tuple = ()
    accuracy_percent: float | None = None
    floor: float | None = None
    bandwidth_hz: float | None = None
    sample_rate_hz: float | None = None
    dc_coupled: bool | None = None
    zeroed: bool | None = None
    name: str = ""

    def feeds(self, channel: str, quantity: str) -> bool:
        """True when the chain feeds ``channel`` (of ``quantity``)."""
        if self.channels:
            return channel in self.channels
        return not self.quantity or self.quantity == quantity


def chain_for(chains, channel: str, quantity: str) -> Chain | None:
    """The combined chain of every element feeding ``channel``: accuracies in quadrature,
    the smallest bandwidth, dc-coupled and zeroed only when every element is (None: no chain
    was declared for it)."""
    parts = [c for c in chains or () if c.feeds(channel, quantity)]
    if not parts:
        return None
    acc = [c.accuracy_percent for c in parts if c.accuracy_percent is not None]
    flo = [c.floor for c in parts if c.floor is not None]
    bws = [c.bandwidth_hz for c in parts if c.bandwidth_hz]
    fss = [c.sample_rate_hz for c in parts if c.sample_rate_hz]

    def all_true(name):
        vals = [getattr(c, name) for c in parts]
        if any(v is False for v in vals):
            return False
        return True if any(v is True for v in vals) else None

    return Chain(quantity=quantity, channels=(channel,),
                 accuracy_percent=math.sqrt(sum(a * a for a in acc)) if acc else None,
                 floor=math.sqrt(sum(f * f for f in flo)) if flo else None,
                 bandwidth_hz=min(bws) if bws else None,
                 sample_rate_hz=min(fss) if fss else None,
                 dc_coupled=all_true("dc_coupled"), zeroed=all_true("zeroed"),
                 name=" + ".join(c.name for c in parts if c.name))


_ACC = re.compile(r"^\s*(?:[+-]|\u00b1)?\s*(\d+(?:\.\d+)?)\s*%\s*(?:of\s+(?:reading|rdg|value))?"
                  r"\s*(?:\+\s*(\d+(?:\.\d+)?)\s*(mA|A|mV|V|kV))?\s*$", re.IGNORECASE)
_UNIT = {"ma": 1e-3, "a": 1.0, "mv": 1e-3, "v": 1.0, "kv": 1e3}


def parse_accuracy(text: str):
    """Read an accuracy written as ``"1 % of reading + 0.1 A"`` or ``"0.5 %"``.

    Returns
    -------
    (percent, floor) : (float, float or None) or None
        [%], [A] or [V]; None when the text is not of that form.

    >>> parse_accuracy("1 % of reading + 50 mA")
    (1.0, 0.05)
    """
    m = _ACC.match(text or "")
    if not m:
        return None
    floor = float(m.group(2)) * _UNIT[m.group(3).lower()] if m.group(2) else None
    return float(m.group(1)), floor


def bandwidth_error(f_hz: float, bandwidth_hz: float | None) -> float:
    """Relative low reading of a first-order chain at ``f_hz``. [unitless]

    >>> round(bandwidth_error(1000.0, 1000.0), 4)
    0.2929
    """
    if not bandwidth_hz:
        return 0.0
    return 1.0 - 1.0 / math.sqrt(1.0 + (f_hz / bandwidth_hz) ** 2)


def expanded_uncertainty(measured: float, *, chain: Chain | None, ratio: bool,
                         f_hz: float, floor_in_unit: float = 0.0,
                         other: Chain | None = None) -> float:
    """Expanded uncertainty (k = 2) of one assessed value, in its own unit.

    Parameters
    ----------
    measured : float
        The assessed statistic. [unit of the limit]
    chain : Chain or None
        The chain of the channel (None: Class I assumed).
    ratio : bool
        The value is a ratio of two values of the same channel (gain errors cancel).
    f_hz : float
        Highest frequency the value depends on (bandwidth error). [Hz]
    floor_in_unit : float
        The chain's absolute accuracy expressed in the value's unit. [unit]
    other : Chain or None
        A second chain whose gain enters (the voltage of a per-watt limit).

    Returns
    -------
    float
        U. [unit of the limit]
    """
    m = abs(float(measured))
    rel = [METHOD_RELATIVE]
    if chain is None:
        rel.append(CLASS_I_HARMONIC)
    else:
        if chain.accuracy_percent is not None and not ratio:
            rel.append(chain.accuracy_percent / 100.0)
        rel.append(bandwidth_error(f_hz, chain.bandwidth_hz))
    if other is not None and other.accuracy_percent is not None:
        rel.append(other.accuracy_percent / 100.0)
    var = sum((a * m) ** 2 for a in rel) / 3.0 + (floor_in_unit ** 2) / 3.0
    return _K * math.sqrt(var)
