"""Verdict gates: does this capture, with these declarations, belong to this limit table?

A limit check compares numbers; a gate asks whether the comparison means anything. Each gate
returns a :class:`Gate` record that the assessment turns into its effect:

``not applicable``
    The case is outside the table's scope (``[scope]`` of the table file): an input current
    above 16 A for IEC 61000-3-2, a class A unit of 75 W or less, a measurement taken at the
    equipment terminals for IEEE 519 (a PCC standard). No limit of the table is assessed.
``inconclusive``
    The capture cannot support a verdict on what the gate names: shorter than the table's
    minimum observation (``[observation]``), not periodic (noise), windows far from the nominal
    frequency, a fundamental far below or above the reference current, one phase of a
    three-phase unit. A ``void`` gate makes every check it concerns inconclusive (a fail too:
    the measurement itself is not trusted); otherwise it caps the verdict (a pass becomes
    inconclusive, a measured excess stays a fail).
``deviation``
    A departure from the standard's conditions that the reader must see next to the verdict
    (location not stated, a declared representative period, the supply voltage not measured).

Inputs that are clearly mislabelled (a measured 7.97 kV phase voltage for a declared 480 V
bus, a voltage channel at a few volts) raise :class:`~pqcheck.errors.InputError` instead.

Thresholds that are not in the tables are pqcheck's own (``common practice``) and documented
beside each constant.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from . import aggregate
from ._limit_model import LOCATIONS
from .errors import InputError

__all__ = ["Gate", "Declared", "BEHAVIOUR_WORDS", "scope_gates", "measurement_gates",
           "observation_gates", "refusals", "periodicity", "EFFECTS"]

EFFECTS = ("not applicable", "inconclusive", "deviation")

#: Harmonic lines (orders 1..H) must carry at least this share of a channel's ac power, and
#: the fundamental's phase must be this coherent from window to window, for the channel to be
#: treated as a periodic signal (white noise: about H / (N/2) and 1/sqrt(W)). common practice
PERIODIC_MIN = 0.5
#: Windows whose fundamental lies further than this from the nominal frequency (fault records,
#: power swings) cannot be assessed with limits meant for steady operation (IEC 61000-4-7's
#: accuracy is specified near nominal, from memory). [unitless]
FREQUENCY_BAND = 0.05
#: A fundamental below this share of IL, Iref or the rated current shows an idle unit, not the
#: load the limits are meant for; above HIGH, the reference current cannot be right. common
#: practice
REFERENCE_LOW = 0.02
REFERENCE_HIGH = 1.5
#: Measured current above the declared rated current by more than this share: the rating
#: given does not describe the unit. common practice
RATED_MARGIN = 0.1
#: A mains voltage channel below this fundamental is mislabelled or unscaled (no table of
#: pqcheck covers supplies below 100 V). [V]
VOLTAGE_MIN_V = 50.0


@dataclass(frozen=True)
class Declared:
    """What the user declares about a test, besides the limit-table selectors.

    Attributes
    ----------
    location : str or None
        Where the capture was taken: ``"pcc"`` or ``"equipment-terminals"`` (None: not
        stated).
    behaviour : str or None
        Type of equipment behaviour for the observation period (IEC 61000-3-2/-3-12:
        ``quasi-stationary``, ``short-cyclic``, ``random``, ``long-cyclic``); None: the
        table's default, listed as a deviation.
    cycle_s : float or None
        Operating cycle of cyclic equipment. [s]
    representative_period : bool
        The user declares the capture a representative period shorter than the standard's
        observation (accepted only where the table allows it for the behaviour).
    rated_power_w : float or None
        Rated active power of the equipment (scope bounds in W). [W]
    phases : int or None
        Number of phases of the equipment (1 or 3).
    chains : tuple of pqcheck.uncertainty.Chain
        The declared instrument chain (accuracy, bandwidth, dc coupling) of the channels, as
        a test plan lists it (mappings of the Chain fields are accepted).
    current_accuracy, voltage_accuracy : str or None
        Accuracy of the whole current (voltage) chain, e.g. ``"1 % of reading + 0.05 A"``.
    bandwidth_hz : float or None
        -3 dB bandwidth of the chain. [Hz]
    dc_coupled : bool
        The current chain passes dc and was zeroed before the capture.
    decision_rule : str
        ``"guarded"`` (default) or ``"simple"`` (see :mod:`pqcheck.uncertainty`).
    plan_problems : tuple of str
        Template text or empty required fields of a test plan (a plan with them cannot pass).
    """

    location: str | None = None
    behaviour: str | None = None
    cycle_s: float | None = None
    representative_period: bool = False
    rated_power_w: float | None = None
    phases: int | None = None
    chains: tuple = ()
    current_accuracy: str | None = None
    voltage_accuracy: str | None = None
    bandwidth_hz: float | None = None
    dc_coupled: bool = False
    decision_rule: str = "guarded"
    plan_problems: tuple = ()

    @property
    def all_chains(self) -> tuple:
        """The chains of :attr:`chains` and those of the one-line declarations
        (``current_accuracy``, ``voltage_accuracy``, ``bandwidth_hz``, ``dc_coupled``)."""
        from .uncertainty import Chain, parse_accuracy

        out = list(self.chains)
        for q in ("current", "voltage"):
            text = getattr(self, f"{q}_accuracy")
            acc = parse_accuracy(text) if text else None
            dc = self.dc_coupled and q == "current"
            if acc is not None or self.bandwidth_hz or dc:
                out.append(Chain(quantity=q, accuracy_percent=acc[0] if acc else None,
                                 floor=acc[1] if acc else None, bandwidth_hz=self.bandwidth_hz,
                                 dc_coupled=True if dc else None, zeroed=True if dc else None,
                                 name="declared on the command line"))
        return tuple(out)

    def __post_init__(self):
        from .uncertainty import Chain, parse_accuracy

        chains = tuple(c if isinstance(c, Chain) else
                       Chain(**{k: tuple(v) if isinstance(v, list) else v for k, v in c.items()})
                       for c in self.chains)
        object.__setattr__(self, "chains", chains)
        object.__setattr__(self, "plan_problems", tuple(self.plan_problems))
        for q in ("current", "voltage"):
            text = getattr(self, f"{q}_accuracy")
            if text is not None and parse_accuracy(text) is None:
                raise InputError(f"cannot read accuracy {text!r}; write e.g. '1 %' or "
                                 "'1 % of reading + 0.05 A'", field=f"{q}_accuracy")
        if self.location is not None and self.location not in LOCATIONS:
            raise InputError(f"location {self.location!r} is not one of: "
                             f"{', '.join(LOCATIONS)}", field="location")
        for name in ("cycle_s", "rated_power_w", "bandwidth_hz"):
            v = getattr(self, name)
            if v is not None and not (isinstance(v, (int, float)) and math.isfinite(v)
                                      and v > 0):
                raise InputError(f"must be a positive number, got {v!r}", field=name)
        if self.decision_rule not in ("guarded", "simple"):
            raise InputError(f"decision rule must be 'guarded' or 'simple', got "
                             f"{self.decision_rule!r}", field="decision_rule")
        if self.phases is not None and self.phases not in (1, 2, 3):
            raise InputError(f"phases must be 1, 2 or 3, got {self.phases!r}", field="phases")


BEHAVIOUR_WORDS = ("quasi-stationary", "short-cyclic", "random", "long-cyclic")


@dataclass(frozen=True)
class Gate:
    """One gate's finding about a capture and a table.

    Attributes
    ----------
    code : str
        Stable identifier, e.g. ``"scope-input-current"``, ``"observation-short"``.
    effect : str
        ``"not applicable"``, ``"inconclusive"`` or ``"deviation"``.
    message : str
        What was found and what to do, shown next to the verdict.
    channels : tuple of str
        Channels concerned (empty: every channel of the table).
    quantities : tuple of str
        Check quantities concerned (``"DC"``, ``"harmonic"``...; empty: all).
    orders : tuple of int
        Harmonic orders concerned (empty: all).
    applies_to : str
        ``"current"``, ``"voltage"`` or "" (both).
    void : bool
        Inconclusive gates only: True makes a fail inconclusive too (the measurement is not
        trusted); False only keeps a pass from standing.
    value : float or None
        The figure behind it, in ``unit``.
    unit : str
    """

    code: str
    effect: str
    message: str
    channels: tuple = ()
    applies_to: str = ""
    void: bool = False
    quantities: tuple = ()
    orders: tuple = ()
    value: float | None = None
    unit: str = ""

    def to_dict(self) -> dict:
        d = {"code": self.code, "effect": self.effect, "message": self.message}
        if self.channels:
            d["channels"] = list(self.channels)
        if self.applies_to:
            d["applies_to"] = self.applies_to
        if self.effect == "inconclusive":
            d["void"] = self.void
        if self.value is not None and math.isfinite(self.value):
            d["value"] = float(self.value)
            d["unit"] = self.unit
        return d

    def concerns(self, channel: str, applies_to: str, quantity: str = "",
                 order: int | None = None) -> bool:
        """True when the gate concerns a check of ``channel`` (a ``applies_to`` quantity)."""
        if self.applies_to and self.applies_to != applies_to:
            return False
        if self.quantities and quantity not in self.quantities:
            return False
        if self.orders and (order is None or order not in self.orders):
            return False
        return not self.channels or channel in self.channels


# --- measured figures ---------------------------------------------------------------------


def _phase_currents(result):
    return [c for c in result.channels if c.quantity == "current" and c.phase != "n"]


def _phase_voltages(result):
    return [c for c in result.channels if c.quantity == "voltage" and c.phase != "n"]


def measured_voltage_ln(result) -> float | None:
    """Mean fundamental of the phase (line-to-neutral) voltage channels, None without. [V]"""
    v = [c.fundamental_rms for c in _phase_voltages(result) if math.isfinite(c.fundamental_rms)]
    return float(np.mean(v)) if v else None


def measured_power(result, tau_s: float) -> float | None:
    """Largest 1.5 s smoothed total active power (or the mean when ``tau_s`` is 0). [W]"""
    w = result.windows
    if w.p_total_w is None:
        return None
    p = np.where(np.asarray(w.valid, bool), np.asarray(w.p_total_w, dtype=np.float64), np.nan)
    if not np.isfinite(p).any():
        return None
    if tau_s:
        s = aggregate.smooth(p, np.asarray(w.duration_s, dtype=np.float64), tau_s=tau_s)
        v = float(np.nanmax(s))
    else:
        v = float(np.nanmean(p))
    return abs(v) if math.isfinite(v) else None


def periodicity(result, k: int) -> tuple:
    """Harmonic-to-total power ratio and fundamental phase coherence of channel ``k``.

    ``eta = median over windows of sum_{h=1..H} |C_h|^2 / (rms^2 - dc^2)``: the share of the
    ac power on the harmonic lines (1 for a periodic signal, about H/(N/2) for white noise
    sampled with N samples per window). ``coherence = |sum_w C_1,w| / sum_w |C_1,w|``: 1 when
    the fundamental keeps its phase relative to the reference from window to window, about
    1/sqrt(W) for noise (None for the reference channel itself, whose phase is 0 by
    construction, or with fewer than 8 windows).

    Returns
    -------
    (eta, coherence) : (float, float or None)
        [unitless]
    """
    w = result.windows
    valid = np.asarray(w.valid, bool)
    comp = np.asarray(w.component[valid, k, :])
    top = min(result.max_resolved_order, comp.shape[1] - 1)
    harm = np.nansum(np.abs(comp[:, 1:top + 1]) ** 2, axis=1)
    ac = np.asarray(w.rms[valid, k], dtype=np.float64) ** 2 - \
        np.asarray(w.dc[valid, k], dtype=np.float64) ** 2
    with np.errstate(divide="ignore", invalid="ignore"):
        eta_w = np.where(ac > 0, harm / ac, np.nan)
    eta = float(np.nanmedian(eta_w)) if np.isfinite(eta_w).any() else 0.0
    coh = None
    name = result.channels[k].name
    c1 = comp[:, 1]
    c1 = c1[np.isfinite(c1)]
    if name != result.settings.reference and c1.size >= 8:
        den = float(np.sum(np.abs(c1)))
        coh = float(abs(np.sum(c1)) / den) if den > 0 else 0.0
    return min(eta, 1.0), coh


# --- refusals: clearly mislabelled input ---------------------------------------------------


def refusals(result, table) -> None:
    """Raise :class:`InputError` when the capture clearly contradicts the declared case.

    A voltage channel whose fundamental is below 50 V is not a mains voltage (mislabelled,
    swapped with a current, or a probe ratio not applied); a measured phase voltage that does
    not fit the declared ``voltage_level`` by more than a factor of 2 is a wrong level (a
    13.8 kV bus declared as 480 V).
    """
    for c in _phase_voltages(result):
        f1 = c.fundamental_rms
        # a sine-like channel at a few volts; a channel without a fundamental (dc only, noise)
        # is left to the no-fundamental and periodicity findings
        if math.isfinite(f1) and f1 < VOLTAGE_MIN_V and f1 >= 0.5 * c.rms:
            raise InputError(
                f"voltage channel {c.name!r} has a fundamental of {f1:.4g} V, below "
                f"{VOLTAGE_MIN_V:g} V, so it is not a mains voltage: the voltage and current "
                "columns may be swapped, or a probe or transformer ratio was not applied; check "
                "the channel map (current, voltage) and the scaling", field="voltage")
    level = table.selector("voltage_level")
    vln = measured_voltage_ln(result)
    if level and vln:
        lo, hi = level / math.sqrt(3.0), level
        if vln < 0.5 * lo or vln > 2.0 * hi:
            raise InputError(
                f"the measured phase voltage ({vln:.4g} V line-to-neutral, "
                f"{vln * math.sqrt(3):.4g} V line-to-line if three-phase) does not fit the "
                f"declared bus voltage of {level:g} V (expected about {lo:.4g} V "
                f"line-to-neutral or {hi:.4g} V): give the nominal bus voltage in volts "
                f"(e.g. {_nominal_guess(vln)})", field="voltage_level_v")


def _nominal_guess(vln: float) -> str:
    ll = vln * math.sqrt(3.0)
    return f"{ll:.4g} V for a three-phase bus"


# --- scope ---------------------------------------------------------------------------------


_LOCATION_WORDS = {"pcc": "point of common coupling (PCC)",
                   "equipment-terminals": "supply terminals of the equipment"}


def _in(x, rule) -> bool:
    lo = rule.low * (1 - rule.tolerance)
    hi = rule.high * (1 + rule.tolerance)
    return lo < x <= hi


def _range_text(rule, unit) -> str:
    u = f" {unit}" if unit else ""
    if math.isinf(rule.high):
        return f"above {rule.low:g}{u}"
    if rule.low == 0:
        return f"up to {rule.high:g}{u}"
    return f"{rule.low:g}{u} to {rule.high:g}{u}"


def scope_gates(result, table, declared: Declared, refs: dict, *, trust_measured: bool) -> list:
    """Gates from the table's ``[scope]``: location, frequency and the scope rules.

    Parameters
    ----------
    result : AnalysisResult
    table : ResolvedLimits
    declared : Declared
    refs : dict
        Reference values given: ``il``, ``rated``, ``iref``, ``power`` (declared active
        power). [A], [W]
    trust_measured : bool
        False when a void gate found the measurement untrustworthy: measured figures are then
        not used to decide the scope (the scope is left undecided, which is inconclusive).

    Returns
    -------
    list of Gate
    """
    sc = table.scope
    tid = table.table_id
    out = []
    if sc.location:
        where = " or ".join(_LOCATION_WORDS[x] for x in sc.location)
        if declared.location is None:
            out.append(Gate("location-not-stated", "deviation",
                            f"{tid}: the measurement location was not stated; the limits apply "
                            f"at the {where}."))
        elif declared.location not in sc.location:
            out.append(Gate("scope-location", "not applicable",
                            f"{tid}: the limits apply at the {where}; the capture was taken at "
                            f"the {_LOCATION_WORDS[declared.location]}."))
    if sc.nominal_frequency_hz:
        fn = result.settings.nominal_hz
        if fn not in sc.nominal_frequency_hz:
            out.append(Gate("scope-frequency", "not applicable",
                            f"{tid}: the table covers {' and '.join(f'{f:g}' for f in sc.nominal_frequency_hz)} Hz "
                            f"systems; the capture is of a {fn:g} Hz system.", value=fn,
                            unit="Hz"))
    tau = table.evaluation.smoothing_tau_s
    for rule in sc.rules:
        value, source = _scope_value(rule.quantity, result, declared, refs, tau,
                                     trust_measured)
        unit = {"input_current_a": "A", "power_w": "W", "supply_voltage_ln_v": "V",
                "phases": ""}[rule.quantity]
        code = _SCOPE_CODE[rule.quantity]
        if value is None:
            if not trust_measured and source == "measured":
                out.append(Gate(code, "inconclusive",
                                f"{tid}: the scope ({_range_text(rule, unit)}) could not be "
                                "checked because the measurement is not trusted (see the "
                                "other findings).", void=True))
            elif rule.unknown == "inconclusive":
                out.append(Gate(code, "inconclusive",
                                f"{tid}: {_quantity_words(rule.quantity)} is not known "
                                f"(declare it, or capture the voltage with the current), so the "
                                f"scope cannot be checked: {rule.reason}."))
            else:
                out.append(Gate(code, "deviation",
                                f"{tid}: {_quantity_words(rule.quantity)} is not known; the "
                                f"table's scope ({_range_text(rule, unit)}) was not verified."))
            continue
        if _in(value, rule):
            continue
        shown = f"{value:.4g} {unit}".strip()
        out.append(Gate(code, rule.effect,
                        f"{tid}: {_quantity_words(rule.quantity)} is {shown} ({source}), "
                        f"outside {_range_text(rule, unit)}: {rule.reason}.",
                        value=value, unit=unit, applies_to="current"
                        if rule.quantity == "phases" else ""))
    return out


_SCOPE_CODE = {"input_current_a": "scope-input-current", "power_w": "scope-power",
               "supply_voltage_ln_v": "scope-supply-voltage", "phases": "scope-phases"}


def _quantity_words(q: str) -> str:
    return {"input_current_a": "the input current per phase",
            "power_w": "the active input power",
            "supply_voltage_ln_v": "the supply voltage (line-to-neutral)",
            "phases": "the number of phase currents captured"}[q]


def _scope_value(q, result, declared, refs, tau, trust_measured):
    """(value, source) of a scope quantity; value None when unknown."""
    if q == "input_current_a":
        rated = refs.get("rated") or refs.get("iref")
        if rated:
            return float(rated), "declared"
        cur = [c.rms for c in _phase_currents(result) if math.isfinite(c.rms)]
        if not cur:
            return None, "measured"
        return (float(max(cur)), "measured") if trust_measured else (None, "measured")
    if q == "power_w":
        if declared.rated_power_w:
            return float(declared.rated_power_w), "declared rated power"
        if refs.get("power"):
            return float(refs["power"]), "declared"
        p = measured_power(result, tau) if trust_measured else None
        return (p, "measured") if p is not None else (None, "measured")
    if q == "supply_voltage_ln_v":
        v = measured_voltage_ln(result) if trust_measured else None
        return (v, "measured") if v is not None else (None, "measured")
    n = len(_phase_currents(result))
    return (float(n), "in the capture") if n else (None, "in the capture")


# --- measurement plausibility ----------------------------------------------------------------


def measurement_gates(result, table, refs: dict, declared: Declared) -> list:
    """Gates on the measurement itself: periodicity, frequency, roles, reference currents,
    phases and the voltage level.

    Returns
    -------
    list of Gate
    """
    tid = table.table_id
    out = []
    # periodicity of each analysed channel (noise is not a harmonic emission)
    for k, c in enumerate(result.channels):
        eta, coh = periodicity(result, k)
        bad = eta < PERIODIC_MIN or (coh is not None and coh < PERIODIC_MIN)
        if not bad:
            continue
        ref = c.name == result.settings.reference
        what = (f"only {100 * eta:.0f} % of its ac power is on the harmonic lines"
                if eta < PERIODIC_MIN else
                f"its fundamental's phase is not stable from window to window (coherence "
                f"{coh:.2f})")
        out.append(Gate("not-periodic", "inconclusive",
                        f"{tid}: channel {c.name!r} is not a periodic signal ({what}; a "
                        f"harmonic emission needs at least {100 * PERIODIC_MIN:.0f} %)"
                        + ("; it is the reference channel, so every window is affected"
                           if ref else "") + ". Check the channel map and the probe.",
                        channels=() if ref else (c.name,), void=True, value=100 * eta,
                        unit="%"))
    # windows far from the nominal frequency (fault records, power swings)
    w = result.windows
    fn = result.settings.nominal_hz
    f = np.asarray(w.freq_hz, dtype=np.float64)[np.asarray(w.valid, bool)]
    off = np.isfinite(f) & (np.abs(f / fn - 1.0) > FREQUENCY_BAND)
    if off.any():
        out.append(Gate("frequency-off", "inconclusive",
                        f"{tid}: {int(off.sum())} of {f.size} windows have a fundamental "
                        f"outside {fn:g} Hz +- {100 * FREQUENCY_BAND:g} % "
                        f"({float(np.min(f[off])):.4g} to {float(np.max(f[off])):.4g} Hz): the "
                        "record is not of steady operation (a fault or power swing), so the "
                        "limits cannot be assessed.",
                        void=True, value=float(np.min(f[off])), unit="Hz"))
    # a column analysed against the role its name or unit suggests
    for fd in result.findings:
        if fd.code == "role-mismatch":
            out.append(Gate("role-mismatch", "inconclusive", f"{tid}: {fd.message}",
                            channels=tuple(fd.channels), void=True))
    currents = _phase_currents(result)
    has_current_limits = any(i.applies_to == "current" for i in table.items)
    if has_current_limits and not currents:
        # with voltage checks left, they must not carry a pass alone; with nothing else to
        # assess, the table is not applicable to this capture
        other = any(i.applies_to == "voltage" for i in table.items) and _phase_voltages(result)
        out.append(Gate("no-current", "inconclusive" if other else "not applicable",
                        f"{tid}: the table limits currents but the capture has no current "
                        "channel (a current column may not have been recognised), so "
                        + ("the table is not fully assessed" if other else
                           "nothing could be assessed") + "; check the current columns given."))
    # fundamental against the reference currents the limits are relative to
    bases = {i.basis for i in table.items if i.applies_to == "current"}
    refname = None
    if "percent_of_il" in bases and refs.get("il"):
        refname, refval = "IL", refs["il"]
    elif "percent_of_iref" in bases and (refs.get("iref") or refs.get("rated")):
        refname, refval = "Iref", refs.get("iref") or refs.get("rated")
    elif "percent_of_rated_current" in bases and refs.get("rated"):
        refname, refval = "the rated current", refs["rated"]
    for c in currents:
        f1 = c.fundamental_rms
        if refname is None or not math.isfinite(f1):
            break
        ratio = f1 / refval
        if ratio < REFERENCE_LOW:
            out.append(Gate("fundamental-low", "inconclusive",
                            f"{tid}: channel {c.name!r} carries a fundamental of {f1:.4g} A, "
                            f"{100 * ratio:.2g} % of {refname} ({refval:g} A): the unit was "
                            "idle or nearly so, and distortion relative to "
                            f"{refname} says nothing about its emission at load. Capture it at "
                            "a representative load.", channels=(c.name,), value=100 * ratio,
                            unit="%"))
        elif ratio > REFERENCE_HIGH:
            out.append(Gate("fundamental-high", "inconclusive",
                            f"{tid}: channel {c.name!r} carries a fundamental of {f1:.4g} A, "
                            f"{ratio:.3g} times {refname} ({refval:g} A): {refname} cannot be "
                            "right for this capture (check its value and unit, and the "
                            "current scaling).", channels=(c.name,), void=True,
                            value=100 * ratio, unit="%"))
    rated = refs.get("rated") or refs.get("iref")
    if rated:
        big = [c for c in currents if math.isfinite(c.rms) and c.rms > rated * (1 + RATED_MARGIN)]
        if big:
            c = big[0]
            out.append(Gate("above-rating", "inconclusive",
                            f"{tid}: channel {c.name!r} carries {c.rms:.4g} A rms, above the "
                            f"declared rated current of {rated:g} A: the rating given does not "
                            "describe this unit.", channels=(c.name,), value=c.rms, unit="A"))
    # phases: a three-phase unit measured on fewer phases
    n_v = len(_phase_voltages(result))
    n_i = len(currents)
    want = declared.phases or (3 if n_v >= 3 else None)
    if has_current_limits and want and want >= 3 and 0 < n_i < 3:
        out.append(Gate("partial-phases", "inconclusive",
                        f"{tid}: the unit is three-phase ({'declared' if declared.phases else 'three phase voltages captured'}) "
                        f"but the capture holds {n_i} phase current{'s' if n_i > 1 else ''}: the "
                        "other phases are not assessed, so the unit cannot be shown to comply.",
                        applies_to="current", value=float(n_i)))
    # the measured voltage against the declared level (moderate mismatch; gross ones refuse)
    level = table.selector("voltage_level")
    vln = measured_voltage_ln(result)
    if level and vln:
        lo, hi = level / math.sqrt(3.0), level
        if vln < 0.8 * lo or vln > 1.2 * hi:
            out.append(Gate("voltage-level", "inconclusive",
                            f"{tid}: the measured phase voltage ({vln:.4g} V) does not fit the "
                            f"declared bus voltage of {level:g} V (about {lo:.4g} V "
                            f"line-to-neutral or {hi:.4g} V), so the row chosen may be wrong.",
                            void=True, value=vln, unit="V"))
    return out


# --- observation period --------------------------------------------------------------------


def _duration(s: float) -> str:
    """``"0.9996 s"``, ``"2.5 min"``, ``"7 days"``."""
    if s >= 86400:
        return f"{s / 86400:.3g} day{'s' if s != 86400 else ''}"
    if s >= 120:
        return f"{s / 60:.3g} min"
    return f"{s:.4g} s"


def observation_gates(table, observed_s: float, declared: Declared) -> list:
    """Gates from the table's ``[observation]``: a capture shorter than the standard's
    observation period is inconclusive, unless the user declares a representative period the
    table allows for the behaviour (then listed as a deviation).

    Parameters
    ----------
    table : ResolvedLimits
    observed_s : float
        Time covered by valid windows. [s]
    declared : Declared

    Returns
    -------
    list of Gate
    """
    ob = table.observation
    tid = table.table_id
    out = []
    minimum, rep, cycles, label = ob.minimum_s, ob.representative_s, 0.0, ""
    if ob.behaviours:
        name = declared.behaviour
        if name is None:
            name = ob.default_behaviour
            out.append(Gate("behaviour-not-stated", "deviation",
                            f"{tid}: the type of equipment behaviour was not declared; the "
                            f"observation period of {name} equipment was applied."))
        b = ob.behaviour(name)
        if b is None:
            raise InputError(f"behaviour {name!r} is not one of the table's: "
                             f"{', '.join(x.name for x in ob.behaviours)}", field="behaviour")
        minimum, rep, cycles, label = b.minimum_s, b.representative_s, b.cycles, f"{name} "
    elif declared.behaviour is not None:
        out.append(Gate("behaviour-ignored", "deviation",
                        f"{tid}: the table does not distinguish types of equipment behaviour; "
                        f"{declared.behaviour!r} was not used."))
    if not (minimum or cycles or rep):
        return out
    need = minimum
    why = _duration(minimum)
    if cycles:
        if declared.cycle_s:
            need = max(need, cycles * declared.cycle_s)
            why = f"{cycles:g} operating cycle{'s' if cycles != 1 else ''} of " \
                  f"{declared.cycle_s:g} s" + (f" and at least {minimum:.4g} s" if minimum else "")
        elif not declared.representative_period or rep is None:
            out.append(Gate("observation-cycle", "inconclusive",
                            f"{tid}: {label}equipment is observed for {cycles:g} operating "
                            f"cycle{'s' if cycles != 1 else ''}; the cycle duration was not "
                            "declared (cycle_s), so the observation period cannot be checked."))
            return out
    if declared.representative_period:
        if rep is None:
            out.append(Gate("representative-not-allowed", "deviation",
                            f"{tid}: a shorter representative period was declared, but the "
                            f"standard allows none for {label or 'this '}equipment; the full "
                            "observation period applies."))
        else:
            if observed_s + 1e-9 < rep:
                out.append(Gate("observation-short", "inconclusive",
                                f"{tid}: the capture covers {observed_s:.4g} s, shorter than the "
                                f"{rep:.4g} s a declared representative period needs.",
                                value=observed_s, unit="s"))
            else:
                out.append(Gate("representative-period", "deviation",
                                f"{tid}: the capture ({observed_s:.4g} s) was declared a "
                                f"representative period of the {label}equipment, in place of "
                                f"the observation period of {why}."))
            return out
    if observed_s + 1e-9 < need:
        extra = (f"; a representative period of at least {rep:.4g} s may be declared instead"
                 if rep is not None else "")
        what = f"for {label}equipment " if label else ""
        out.append(Gate("observation-short", "inconclusive",
                        f"{tid}: the capture covers {_duration(observed_s)}; the standard's "
                        f"observation period {what}is {why}{extra}. "
                        + (ob.note if ob.note and not ob.behaviours else ""),
                        value=observed_s, unit="s"))
    return out


# --- instrument chain --------------------------------------------------------------------------



def plan_gates(table, declared: Declared) -> list:
    """A test plan with template text or empty required fields cannot pass."""
    if not declared.plan_problems:
        return []
    return [Gate("plan-incomplete", "inconclusive",
                 f"{table.table_id}: the test plan is not filled in ("
                 + "; ".join(declared.plan_problems) + "); complete it before a verdict.")]


def chain_gates(result, table, declared: Declared) -> list:
    """Gates from the declared instrument chain: dc checks need a dc-coupled, zeroed chain;
    orders the chain's bandwidth attenuates by more than 10 % cannot be assessed; a declared
    sample rate that is not the capture's is a deviation; no chain at all is a deviation (the
    uncertainty then assumes an IEC 61000-4-7 Class I instrument).
    """
    from .uncertainty import chain_for

    tid = table.table_id
    out = []
    f0 = result.settings.nominal_hz
    chans = [c for c in result.channels if c.phase != "n"]
    kinds = {i.applies_to for i in table.items}
    chans = [c for c in chans if c.quantity in kinds]
    chains = declared.all_chains
    if not chains:
        out.append(Gate("chain-not-declared", "deviation",
                        f"{tid}: the instrument chain (accuracy, bandwidth, dc coupling) was not "
                        "declared; the uncertainty assumes an IEC 61000-4-7 Class I instrument "
                        "(5 % of reading for harmonics)."))
    has_dc = [i for i in table.items if i.quantity == "DC"]
    # a numeric dc-injection limit (IEEE 1547, % of rated current) needs a chain declared
    # dc-coupled and zeroed; a dc offset the standard forbids outright (IEEE 519, % of IL) is
    # checked with an undeclared chain too (a gross offset still shows), but never with a
    # chain declared not to pass dc or not zeroed
    strict = any(i.basis != "percent_of_il" for i in has_dc)
    for c in chans:
        ch = chain_for(chains, c.name, c.quantity)
        undeclared = ch is None or ch.dc_coupled is None
        if has_dc and c.quantity == "current" and undeclared and not strict:
            out.append(Gate("chain-dc-undeclared", "deviation",
                            f"{tid}: the dc component of {c.name!r} was measured through a "
                            "chain not declared dc-coupled and zeroed; a small dc offset may "
                            "be the instrument's."))
        elif has_dc and c.quantity == "current" and not (ch and ch.dc_coupled and ch.zeroed):
            why = ("no chain was declared for it" if ch is None else
                   "its chain does not pass dc" if ch.dc_coupled is False else
                   "its chain was not declared dc-coupled" if not ch.dc_coupled else
                   "its offset was not declared zeroed")
            out.append(Gate("chain-dc", "inconclusive",
                            f"{tid}: the dc component of {c.name!r} cannot be assessed: {why}; "
                            "a dc limit needs a dc-coupled chain (shunt, Hall-effect clamp) "
                            "zeroed before the capture, or the offset is the instrument's.",
                            channels=(c.name,), void=True, quantities=("DC",)))
        if ch is not None and ch.bandwidth_hz:
            # beyond the -3 dB bandwidth a component cannot be measured; within it, the
            # roll-off enters the uncertainty (pqcheck.uncertainty.bandwidth_error)
            bad = tuple(h for h in range(2, (table.max_order or 0) + 1)
                        if h * f0 > ch.bandwidth_hz)
            if bad:
                out.append(Gate("chain-bandwidth", "inconclusive",
                                f"{tid}: the chain of {c.name!r} ({ch.bandwidth_hz:g} Hz "
                                f"bandwidth) cannot measure orders {bad[0]} and above "
                                f"({bad[0] * f0:g} Hz); they are not assessed.",
                                channels=(c.name,), void=True, orders=bad,
                                value=ch.bandwidth_hz, unit="Hz"))
                totals = tuple(i.quantity for i in table.items if i.quantity not in
                               ("harmonic", "DC"))
                if totals:
                    out.append(Gate("chain-bandwidth", "inconclusive",
                                    f"{tid}: totals of {c.name!r} sum orders its chain cannot "
                                    "read.", channels=(c.name,), void=True, quantities=totals))
        if ch is not None and ch.sample_rate_hz and \
                abs(ch.sample_rate_hz - result.fs_hz) > 0.01 * result.fs_hz:
            out.append(Gate("chain-sample-rate", "deviation",
                            f"{tid}: the capture's sample rate ({result.fs_hz:g} Hz) is not "
                            f"the declared {ch.sample_rate_hz:g} Hz of the chain of {c.name!r}; "
                            "the capture's rate was used."))
    return out
