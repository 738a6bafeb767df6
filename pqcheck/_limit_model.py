"""Data model of a limit-table file (see ``limits/README.md``) and its small languages.

Kept apart from :mod:`pqcheck.limits` (loading, resolution) and :mod:`pqcheck._limit_parse`
(validation) so each stays readable. Everything here is plain frozen data plus two tiny
parsers: order specifications (``"15-39 odd"``) and limit formulas in the order ``n``
(``"0.15 * 15 / n"``).
"""

from __future__ import annotations

import ast
import operator
import re
from dataclasses import dataclass, field

# --- vocabularies --------------------------------------------------------------------------

SCHEMA_VERSION = 1

#: Confidence tags, strongest first. P and M mean "verify against your copy".
TAGS = ("V", "C", "P", "M")
VERIFY_TAGS = frozenset({"P", "M"})

MEASURES = ("group", "subgroup", "component", "flicker")
#: ``measure = "flicker"``: the table limits flicker and voltage changes (IEC 61000-3-3 /
#: 61000-3-11), measured by pqcheck.flicker, and holds no harmonic orders.
FLICKER_MEASURE = "flicker"
APPLIES_TO = ("current", "voltage")

#: basis -> (unit, quantities it can describe: which `applies_to`)
BASES = {
    "percent_of_fundamental": ("%", ("current", "voltage")),
    "percent_of_il": ("%", ("current",)),
    "percent_of_rated_current": ("%", ("current",)),
    "percent_of_iref": ("%", ("current",)),
    "amperes": ("A", ("current",)),
    "milliamperes_per_watt": ("mA/W", ("current",)),
    "unitless": ("", ("voltage",)),
    "percent_of_nominal_voltage": ("%", ("voltage",)),
    "seconds": ("s", ("voltage",)),
}

#: total quantity -> (bases it may be expressed in, what it is)
TOTALS = {
    "THD": (("percent_of_fundamental",), "total harmonic distortion, % of the fundamental"),
    "TDD": (("percent_of_il",), "total demand distortion, % of IL"),
    "THC": (("percent_of_iref", "amperes"), "total harmonic current"),
    "PWHC": (("percent_of_iref", "amperes"), "partial weighted harmonic current"),
    "PWHD": (("percent_of_fundamental",), "partial weighted harmonic distortion, % of the fundamental"),
    "TRD": (("percent_of_rated_current",), "total rated-current distortion, % of rated current"),
    "DC": (("percent_of_rated_current", "percent_of_il", "amperes"), "dc component"),
    "Pst": (("unitless",), "short-term flicker severity (IEC 61000-4-15), per 10 min"),
    "Plt": (("unitless",), "long-term flicker severity, per 2 h (12 Pst)"),
    "dc_rel": (("percent_of_nominal_voltage",),
               "relative steady-state voltage change dc, % of Un (IEC 61000-3-3)"),
    "dmax": (("percent_of_nominal_voltage",), "maximum relative voltage change, % of Un"),
    "Tmax": (("seconds",), "time the relative voltage change d(t) exceeds 3.3 %"),
}

#: The totals of flicker tables (``measure = "flicker"``) and the series they are taken from.
FLICKER_TOTALS = {"Pst": "pst", "Plt": "plt", "dc_rel": "changes", "dmax": "changes",
                  "Tmax": "changes"}

#: Where a capture was taken (``[scope] location``): the point of common coupling of a site,
#: or the supply terminals of one piece of equipment.
LOCATIONS = ("pcc", "equipment-terminals")

#: Quantities a ``[[scope.rules]]`` entry can bound: name -> (unit, what pqcheck compares).
SCOPE_QUANTITIES = {
    "input_current_a": ("A", "rated input current per phase: the declared rated current (or "
                             "Iref), else the largest measured phase rms current"),
    "power_w": ("W", "rated or declared active input power, else the measured one (largest "
                     "1.5 s smoothed value, or the mean without smoothing)"),
    "supply_voltage_ln_v": ("V", "nominal line-to-neutral supply voltage: the measured "
                                 "phase-voltage fundamental"),
    "phases": ("", "phase currents in the capture"),
}
SCOPE_EFFECTS = ("not applicable", "inconclusive")

#: The one quantity name of an individual harmonic order.
HARMONIC = "harmonic"

#: Selector names pqcheck knows: name -> (kind, the resolve() keyword(s) that give it, unit,
#: meaning)
SELECTORS = {
    "voltage_level": ("band", "`voltage_level_v`", "V", "nominal bus voltage at the PCC"),
    "isc_il": ("band", "`isc_a` and `il_a`", "",
               "ISC/IL, maximum short-circuit current over maximum demand load current at the PCC"),
    "rsce": ("points", "`rsce` (or `ssc_va` and `rated_apparent_power_va`)", "",
             "short-circuit ratio Rsce"),
    "equipment_class": ("choice", "`equipment_class`", "", "equipment class"),
    "equipment": ("choice", "`equipment_kind`", "", "kind of equipment"),
    "generation": ("flag", "`generation`", "", "the equipment is power-generation equipment"),
    "switching": ("choice", "`switching`", "",
                  "how the equipment is switched (selects the IEC 61000-3-3 dmax limit)"),
}

#: Series an evaluation statistic is taken over.
SERIES = ("window", "smoothed", "3s", "10min", "pst", "plt", "changes")
#: Series of flicker tables: Pst per 10 min, Plt per 2 h, the voltage changes of the record.
FLICKER_SERIES = ("pst", "plt", "changes")
#: Statistics: mean, max, rms, or a percentile ``pNN``.
_STATISTIC = re.compile(r"mean|max|rms|p(\d{1,2}(\.\d+)?)$")
#: Measured factors a limit may be multiplied by (``times = ...``).
TIMES = ("power_factor",)


def valid_statistic(name: str) -> bool:
    """Return True when ``name`` is ``mean``, ``max``, ``rms`` or ``pNN`` with 0 < NN < 100."""
    m = _STATISTIC.fullmatch(name)
    if not m:
        return False
    return m.group(1) is None or 0.0 < float(m.group(1)) < 100.0


def weakest_tag(*tags: str) -> str:
    """Return the least confident of ``tags`` (order V, C, P, M); empty tags are skipped."""
    present = [t for t in tags if t]
    return max(present, key=TAGS.index) if present else "V"


# --- order specifications ------------------------------------------------------------------

_ORDER_ITEM = re.compile(r"\s*(\d{1,9})\s*(?:-\s*(\d{1,9})\s*)?$")
_ORDER_CAP = 1000  # no standard limits orders this high; guards memory


def parse_orders(spec: str, *, max_order: int | None = None) -> tuple:
    """Parse an order specification into the sorted tuple of orders it names.

    Parameters
    ----------
    spec : str
        Comma-separated single orders or inclusive ranges, optionally followed by ``odd`` or
        ``even``: ``"5"``, ``"2-10"``, ``"15-39 odd"``, ``"3, 5, 7"``.
    max_order : int, optional
        Highest order allowed.

    Returns
    -------
    tuple of int
        The orders, ascending.

    Raises
    ------
    ValueError
        With a message saying what is wrong (syntax, reversed range, order below 2, above
        ``max_order``, or nothing left after the odd/even filter).
    """
    text = spec.strip()
    parity = None
    for word in ("odd", "even"):
        if text.lower().endswith(" " + word) or text.lower() == word:
            parity = word
            text = text[: -len(word)].strip()
    if not text:
        raise ValueError(f"order specification {spec!r} names no orders; write e.g. '5', "
                         "'2-10' or '15-39 odd'")
    orders = set()
    for part in text.split(","):
        m = _ORDER_ITEM.match(part)
        if not m:
            raise ValueError(f"cannot read order specification {spec!r}; write single orders "
                             "and ranges separated by commas, optionally followed by 'odd' or "
                             "'even', e.g. '15-39 odd'")
        lo = int(m.group(1))
        hi = int(m.group(2)) if m.group(2) else lo
        if hi < lo:
            raise ValueError(f"range {lo}-{hi} in {spec!r} runs backwards; write {hi}-{lo}")
        top = _ORDER_CAP if max_order is None else max_order
        if hi > top:  # before building the set: "2-100000000" must not exhaust memory
            raise ValueError(f"order {hi} in {spec!r} is above "
                             + (f"max_order = {max_order}" if max_order is not None
                                else f"{_ORDER_CAP}"))
        orders.update(range(lo, hi + 1))
    if min(orders) < 2:
        raise ValueError(f"order {min(orders)} in {spec!r}: harmonic limits start at order 2 "
                         "(order 1 is the fundamental; use quantity = \"DC\" for dc)")
    if max_order is not None and max(orders) > max_order:
        raise ValueError(f"order {max(orders)} in {spec!r} is above max_order = {max_order}")
    if parity == "odd":
        orders = {h for h in orders if h % 2}
    elif parity == "even":
        orders = {h for h in orders if not h % 2}
    if not orders:
        raise ValueError(f"order specification {spec!r} has no {parity} orders")
    return tuple(sorted(orders))


def even_orders(spec: str) -> tuple:
    """Return the even orders of ``spec`` (the orders an ``even`` rule gives)."""
    return tuple(h for h in parse_orders(spec) if h % 2 == 0)


def orders_range(spec: str) -> tuple:
    """Return the orders of ``spec`` ignoring its odd/even word (the range it spans)."""
    text = re.sub(r"\s+(odd|even)\s*$", "", spec.strip(), flags=re.IGNORECASE)
    return parse_orders(text)


# --- formulas ------------------------------------------------------------------------------

_BINOPS = {ast.Add: operator.add, ast.Sub: operator.sub, ast.Mult: operator.mul,
           ast.Div: operator.truediv, ast.Pow: operator.pow}
_UNARY = {ast.USub: operator.neg, ast.UAdd: operator.pos}
_FORMULA_MAX_CHARS = 200


def check_formula(text: str) -> None:
    """Check that ``text`` is an arithmetic formula in the harmonic order ``n``.

    Allowed: numbers, ``n``, ``+ - * / **`` and parentheses.

    Raises
    ------
    ValueError
        Naming what is not allowed.
    """
    if len(text) > _FORMULA_MAX_CHARS:
        raise ValueError(f"formula {text[:40]!r}... is {len(text)} characters long; a limit "
                         f"formula has at most {_FORMULA_MAX_CHARS}, e.g. \"0.15 * 15 / n\"")
    try:
        tree = ast.parse(text.strip(), mode="eval")
    except (SyntaxError, ValueError, RecursionError, MemoryError):
        # ValueError: NUL character; RecursionError/MemoryError: absurd nesting
        raise ValueError(f"cannot read formula {text!r}; write arithmetic in the order n, "
                         "e.g. \"0.15 * 15 / n\"") from None
    for node in ast.walk(tree):
        if isinstance(node, (ast.Expression, ast.operator, ast.unaryop, ast.expr_context)):
            continue
        if isinstance(node, ast.BinOp) and type(node.op) in _BINOPS:
            continue
        if isinstance(node, ast.UnaryOp) and type(node.op) in _UNARY:
            continue
        if isinstance(node, ast.Constant) and type(node.value) in (int, float):
            continue
        if isinstance(node, ast.Name) and node.id == "n":
            continue
        if isinstance(node, ast.Name):
            raise ValueError(f"formula {text!r} uses {node.id!r}; the only variable is n "
                             "(the harmonic order)")
        raise ValueError(f"formula {text!r} may only use numbers, n, + - * / ** and "
                         "parentheses")


def evaluate_limit(limit, order: int | None) -> float:
    """Return the numeric value of a limit: a number, or a formula evaluated at ``n = order``.

    Raises
    ------
    ValueError
        When the formula cannot be evaluated (e.g. division by zero).
    """
    if not isinstance(limit, str):
        return float(limit)
    check_formula(limit)

    def ev(node):
        if isinstance(node, ast.Expression):
            return ev(node.body)
        if isinstance(node, ast.Constant):
            return float(node.value)
        if isinstance(node, ast.Name):
            if order is None:
                raise ValueError(f"formula {limit!r} needs an order n but the limit is a total")
            return float(order)
        if isinstance(node, ast.UnaryOp):
            return _UNARY[type(node.op)](ev(node.operand))
        return _BINOPS[type(node.op)](ev(node.left), ev(node.right))

    try:
        return float(ev(ast.parse(limit.strip(), mode="eval")))
    except (ZeroDivisionError, OverflowError):
        raise ValueError(f"formula {limit!r} cannot be evaluated at n = {order}") from None


# --- the model -----------------------------------------------------------------------------


@dataclass(frozen=True)
class SelectorSpec:
    """How one selector picks limits in a file (section ``[selectors.NAME]``).

    Attributes
    ----------
    name : str
        One of :data:`SELECTORS`.
    help : str
        Explanation shown by ``pqcheck limits show``.
    closed : str
        Band selectors: ``"lower"`` (bands read lo <= x < hi) or ``"upper"`` (lo < x <= hi).
    interpolate : str
        Point selectors: ``"linear"`` (between rows) or ``"none"`` (the highest row <= x).
    choices : tuple of str
        Choice selectors: the allowed values.
    default : object or None
        Value used when the user gives none (None: the user must give one).
    first_row_of : str
        Flag selectors: when the flag is set, the first (lowest) band of this selector is used.
    ssc_divisor : tuple of (str, float)
        ``rsce`` only: Rsce = Ssc / (k * rated apparent power), k by ``equipment`` choice.
    """

    name: str
    help: str = ""
    closed: str = "lower"
    interpolate: str = "none"
    choices: tuple = ()
    default: object = None
    first_row_of: str = ""
    ssc_divisor: tuple = ()

    @property
    def kind(self) -> str:
        """``band``, ``points``, ``choice`` or ``flag``."""
        return SELECTORS[self.name][0]

    @property
    def option(self) -> str:
        """Command-line option(s) that give this selector."""
        return SELECTORS[self.name][1]

    @property
    def unit(self) -> str:
        """Unit of a numeric selector ("" when unitless)."""
        return SELECTORS[self.name][2]


@dataclass(frozen=True)
class ItemSpec:
    """One entry of an ``items`` list: a limit for some orders or for a total.

    Attributes
    ----------
    orders : str
        Order specification (individual harmonics), or "" for a total.
    quantity : str
        Total quantity name (``THD``, ``TDD``...), or "" for individual orders.
    limit : float or str
        Number, or a formula in the order ``n``.
    times : str
        Measured factor the limit is multiplied by (``"power_factor"``), or "".
    tag : str
        Confidence tag ("" inherits).
    note : str
        Remark carried to the results.
    """

    orders: str = ""
    quantity: str = ""
    limit: object = None
    times: str = ""
    tag: str = ""
    note: str = ""


@dataclass(frozen=True)
class EvenRule:
    """Limit of even orders derived from the odd-order columns of a block.

    ``factor`` multiplies the value of the column whose range contains the order; ``limit``
    gives the value directly (exactly one of them is set).
    """

    orders: str
    factor: float | None = None
    limit: object = None
    tag: str = ""
    note: str = ""


@dataclass(frozen=True)
class Derive:
    """A block whose items are another block's items times ``factor`` (e.g. Class B)."""

    source: str
    factor: float = 1.0
    orders: str = ""


@dataclass(frozen=True)
class LimitRow:
    """One row of a block: selector conditions and its limits.

    ``conditions`` is a tuple of ``(selector, value)``: a band is ``(lo, hi)``, a point a
    float, a choice a tuple of strings.
    """

    conditions: tuple
    values: tuple = ()
    items: tuple = ()
    clause: str = ""
    tag: str = ""
    note: str = ""


@dataclass(frozen=True)
class LimitBlock:
    """One ``[[limits]]`` entry: limits with one basis, as one table of the standard."""

    name: str
    clause: str
    applies_to: str
    basis: str
    unit: str
    conditions: tuple = ()
    columns: tuple = ()
    parity: str = "all"
    values: tuple = ()
    items: tuple = ()
    even: tuple = ()
    rows: tuple = ()
    derive: Derive | None = None
    tag: str = ""
    note: str = ""


@dataclass(frozen=True)
class EvalCheck:
    """One comparison of the evaluation rule: ``statistic`` of the ``of`` series <=
    ``multiplier`` x limit.

    Attributes
    ----------
    of : str
        ``window`` (10/12-cycle values), ``smoothed`` (1.5 s smoothed window values),
        ``3s`` or ``10min`` (RMS aggregates).
    statistic : str
        ``mean``, ``max``, ``rms`` or ``pNN`` (percentile).
    multiplier : float
        Multiple of the limit the statistic is compared with [unitless].
    applies_to : str
        ``current``, ``voltage`` or "" (both).
    period_s : float
        Period the statistic is defined over (0: the whole observation) [s]. A capture shorter
        than this cannot give the statistic.
    """

    of: str
    statistic: str
    multiplier: float = 1.0
    applies_to: str = ""
    period_s: float = 0.0
    tag: str = ""
    note: str = ""


@dataclass(frozen=True)
class ExceptionRule:
    """Smoothed values may reach ``multiplier`` x limit when above ``over`` x limit for less
    than ``max_fraction`` of the observation and ``max_duration_s`` in total, with the mean
    below ``mean_below`` x limit (IEC 61000-3-2 200 % rule)."""

    conditions: tuple = ()
    multiplier: float = 2.0
    max_fraction: float = 0.1
    max_duration_s: float = 600.0
    mean_below: float = 0.9
    tag: str = ""
    note: str = ""


@dataclass(frozen=True)
class PohcRule:
    """For ``orders`` the mean may reach ``multiplier`` x limit when the measured partial odd
    harmonic current does not exceed the one computed from the limits."""

    orders: str
    multiplier: float = 1.5
    conditions: tuple = ()
    tag: str = ""
    note: str = ""


@dataclass(frozen=True)
class NegligibleRule:
    """Harmonic currents below ``percent_of_input`` % of the input current or ``min_a``,
    whichever is greater, are disregarded."""

    percent_of_input: float
    min_a: float
    conditions: tuple = ()
    tag: str = ""
    note: str = ""


@dataclass(frozen=True)
class PowerRule:
    """Active power used for per-watt limits: ``statistic`` of the ``of`` series."""

    of: str = "smoothed"
    statistic: str = "max"
    conditions: tuple = ()
    tag: str = ""
    note: str = ""


@dataclass(frozen=True)
class Evaluation:
    """The evaluation rule of a table: how measured values are compared with the limits.

    Attributes
    ----------
    smoothing_tau_s : float
        Time constant of the first-order smoothing of window values (0: none) [s].
    checks : tuple of EvalCheck
        Comparisons made.
    short_capture : tuple of EvalCheck
        Comparisons made instead when the capture is shorter than a check's ``period_s``.
    short_capture_note : str
        Note added to the results when ``short_capture`` is used.
    exception, pohc, negligible, power : rule or None
        Optional special rules (see their classes).
    """

    smoothing_tau_s: float = 0.0
    checks: tuple = ()
    short_capture: tuple = ()
    short_capture_note: str = ""
    exception: ExceptionRule | None = None
    pohc: PohcRule | None = None
    negligible: NegligibleRule | None = None
    power: PowerRule | None = None
    tag: str = ""
    note: str = ""


@dataclass(frozen=True)
class ScopeRule:
    """One bound of the table's scope (``[[scope.rules]]``): ``low < value <= high``.

    Attributes
    ----------
    quantity : str
        One of :data:`SCOPE_QUANTITIES`.
    low, high : float
        The range that is in scope (``high`` may be inf). [unit of the quantity]
    reason : str
        Why a value outside the range is out of scope (shown next to the verdict).
    conditions : tuple
        Selector conditions (e.g. ``equipment_class = ["A", "D"]``): the rule holds only then.
    effect : str
        ``"not applicable"`` (default) or ``"inconclusive"`` when the value is outside.
    unknown : str
        What an unknown value does: ``"note"`` (listed as a deviation) or ``"inconclusive"``.
    tolerance : float
        Relative tolerance on a measured value (e.g. 0.1: the supply may be 10 % off its
        nominal value). [unitless]
    """

    quantity: str
    low: float
    high: float
    reason: str
    conditions: tuple = ()
    effect: str = "not applicable"
    unknown: str = "note"
    tolerance: float = 0.0
    tag: str = ""
    note: str = ""


@dataclass(frozen=True)
class Scope:
    """What a table applies to (``[scope]``); empty fields leave that aspect unchecked.

    Attributes
    ----------
    location : tuple of str
        Measurement locations the limits apply at (:data:`LOCATIONS`).
    nominal_frequency_hz : tuple of float
        Nominal system frequencies covered. [Hz]
    rules : tuple of ScopeRule
    """

    location: tuple = ()
    nominal_frequency_hz: tuple = ()
    rules: tuple = ()
    tag: str = ""
    note: str = ""


@dataclass(frozen=True)
class Behaviour:
    """Minimum observation for one type of equipment behaviour (``[observation.behaviour.X]``).

    Attributes
    ----------
    name : str
        E.g. ``"quasi-stationary"``, ``"long-cyclic"``.
    minimum_s : float
        Shortest observation period. [s]
    cycles : float
        Also at least this many operating cycles of the equipment (needs the declared cycle
        duration); 0: none. [unitless]
    representative_s : float or None
        Shortest period the user may declare representative instead (the standard allows it
        for this behaviour); None: no shorter period is allowed. [s]
    """

    name: str
    minimum_s: float = 0.0
    cycles: float = 0.0
    representative_s: float | None = None
    tag: str = ""
    note: str = ""


@dataclass(frozen=True)
class Observation:
    """The minimum observation period of a table (``[observation]``).

    Without behaviours, ``minimum_s`` and ``representative_s`` hold for every capture; with
    them, the declared behaviour (else ``default_behaviour``) chooses.
    """

    minimum_s: float = 0.0
    representative_s: float | None = None
    behaviours: tuple = ()
    default_behaviour: str = ""
    tag: str = ""
    note: str = ""

    def behaviour(self, name: str) -> Behaviour | None:
        """Return the behaviour ``name`` (None when absent)."""
        for b in self.behaviours:
            if b.name == name:
                return b
        return None


@dataclass(frozen=True)
class LimitTable:
    """A whole limit-table file.

    ``source``, ``sha256`` and ``text`` describe where it was read from; they do not take part
    in equality, so a table written by :func:`pqcheck.limits.dump_toml` and read back compares
    equal to the original.
    """

    id: str
    title: str
    standard: str
    edition: str
    measure: str
    max_order: int
    blocks: tuple
    clause: str = ""
    measure_tag: str = ""
    tag: str = "V"
    notes: tuple = ()
    selectors: tuple = ()
    evaluation: Evaluation = field(default_factory=Evaluation)
    scope: Scope = field(default_factory=Scope)
    observation: Observation = field(default_factory=Observation)
    schema: int = SCHEMA_VERSION
    source: str | None = field(default=None, compare=False)
    sha256: str | None = field(default=None, compare=False)
    text: str | None = field(default=None, compare=False, repr=False)

    def selector(self, name: str) -> SelectorSpec | None:
        """Return the selector named ``name`` (None when the table does not use it)."""
        for s in self.selectors:
            if s.name == name:
                return s
        return None

    def block(self, name: str) -> LimitBlock | None:
        """Return the block named ``name`` (None when absent)."""
        for b in self.blocks:
            if b.name == name:
                return b
        return None
