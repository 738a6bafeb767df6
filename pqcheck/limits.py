"""Limit tables as data: load, validate, resolve for one site or piece of equipment, write back.

A limit table is a TOML file (schema in ``limits/README.md``). The bundled ones ship in the
package as ``pqcheck.limit_tables`` and are found by id (case-insensitive); a user's own file
is found by path. :func:`resolve` turns a table and the selector values of one case (bus
voltage, ISC/IL, equipment class, Rsce, ...) into a flat, frozen list of :class:`LimitItem`.

Band edges
    Each band selector says which end of its bands is closed (``closed``). IEEE 519 ISC/IL bands
    read ``lo <= ISC/IL < hi``: a ratio of exactly 20 takes the row "20 < 50", exactly 1000 the
    row "> 1000". IEEE 519 voltage bands read ``lo < V <= hi`` as the standard writes them:
    1.0 kV exactly is "V <= 1.0 kV", 69 kV exactly is Table 2.

Rows between points
    IEC 61000-3-12 rows are minimum Rsce values. An Rsce between two rows takes the linear
    interpolation of every limit between them (the standard allows it); Rsce at or above the last
    row takes the last row; below the first row no limits apply and :func:`resolve` refuses.

Examples
--------
>>> from pqcheck.limits import load_table, resolve
>>> lim = resolve(load_table("IEEE519-2014"), voltage_level_v=480, isc_a=35_000, il_a=1_000)
>>> [i.limit for i in lim.find("harmonic", 11, "current")]  # IEEE 519-2014 Table 2, 20 < 50
[3.5]
"""

from __future__ import annotations

import functools
import hashlib
import math
import os
from dataclasses import dataclass, replace
from importlib import resources
from pathlib import Path

from . import numfmt
from ._limit_model import (
    BASES,
    HARMONIC,
    SELECTORS,
    TOTALS,
    VERIFY_TAGS,
    Derive,
    EvalCheck,
    Evaluation,
    EvenRule,
    ExceptionRule,
    ItemSpec,
    LimitBlock,
    LimitRow,
    LimitTable,
    NegligibleRule,
    Observation,
    PohcRule,
    PowerRule,
    Scope,
    SelectorSpec,
    evaluate_limit,
    even_orders,
    orders_range,
    parse_orders,
    weakest_tag,
)
from ._limit_parse import parse_table
from .errors import InputError, LimitTableError
from .files.toml import format_key, format_value

__all__ = [
    "LimitTable",
    "LimitBlock",
    "LimitRow",
    "ItemSpec",
    "EvenRule",
    "Derive",
    "SelectorSpec",
    "Evaluation",
    "EvalCheck",
    "ExceptionRule",
    "PohcRule",
    "NegligibleRule",
    "PowerRule",
    "LimitItem",
    "ResolvedLimits",
    "HARMONIC",
    "bundled_ids",
    "table_path",
    "list_tables",
    "load_table",
    "read_table",
    "validate_file",
    "resolve",
    "dump_toml",
    "parse_orders",
    "designation",
]

_PACKAGE = "pqcheck.limit_tables"


# --- results -------------------------------------------------------------------------------


def quantity_label(quantity, applies_to, order) -> str:
    """How pqcheck names a limited quantity: ``"I11"``, ``"V5"``, ``"TDD"``, ``"THD(V)"``."""
    if quantity is None:
        return "-"
    iv = "I" if applies_to == "current" else "V"
    if quantity == HARMONIC:
        return f"{iv}{int(order)}"
    if quantity == "THD":
        return f"THD({iv})"
    if quantity == "dc_rel":  # IEC 61000-3-3 relative steady-state voltage change
        return "dc"
    return quantity


@dataclass(frozen=True)
class LimitItem:
    """One applicable limit after resolution.

    Attributes
    ----------
    quantity : str
        ``"harmonic"`` for an individual order, else the total: ``THD``, ``TDD``, ``THC``,
        ``PWHC``, ``PWHD``, ``TRD`` or ``DC``.
    order : int or None
        Harmonic order (None for totals).
    limit : float
        The limit in ``unit`` [%, A or mA/W]. For ``times = "power_factor"`` it is the value
        before multiplication by the measured circuit power factor.
    unit : str
        ``"%"``, ``"A"`` or ``"mA/W"``.
    basis : str
        What the limit is relative to (``percent_of_il``, ``amperes``, ...; see
        ``limits/README.md``).
    applies_to : str
        ``"current"`` or ``"voltage"``.
    clause : str
        Clause or table of the standard.
    verify : bool
        True when the value is tagged P or M: verify it against your copy of the standard.
    note : str
        Remark from the table.
    tag : str
        Confidence tag: V, C, P or M.
    times : str
        ``"power_factor"`` when the limit is multiplied by the measured circuit power factor.
    block : str
        Name of the ``[[limits]]`` block it came from.
    """

    quantity: str
    order: int | None
    limit: float
    unit: str
    basis: str
    applies_to: str
    clause: str
    verify: bool
    note: str = ""
    tag: str = "V"
    times: str = ""
    block: str = ""

    @property
    def label(self) -> str:
        """Short name: ``"I11"``, ``"V5"``, ``"TDD"``, ``"THD(V)"``."""
        return quantity_label(self.quantity, self.applies_to, self.order)


@dataclass(frozen=True)
class ResolvedLimits:
    """The limits of one table for one case, ready for assessment.

    Attributes
    ----------
    table_id, title, standard, edition : str
        From the table file.
    source : str or None
        Path the table was read from.
    sha256 : str or None
        SHA-256 of the file bytes (hex).
    selectors : tuple of (str, object)
        Selector values used, including inputs they were computed from (``isc``, ``il`` for
        ``isc_il``; ``ssc``, ``rated_power`` for ``rsce``).
    rows : tuple of str
        The blocks and rows chosen, in words (with interpolation when it happened).
    evaluation : Evaluation
        The evaluation rule, with special rules that do not apply to this case removed.
    measure : str
        IEC 61000-4-7 quantity the limits are compared with: ``group``, ``subgroup`` or
        ``component``.
    max_order : int
        Highest order assessed.
    items : tuple of LimitItem
        Every applicable limit.
    notes : tuple of str
        The table's notes.
    measure_verify : bool
        True when the choice of measure is tagged P or M.
    scope : Scope
        The table's scope, with the rules whose selector conditions hold for this case.
    observation : Observation
        The table's minimum observation period.
    provenance : str
        ``"bundled"``, ``"modified copy of the bundled ID (SHA-256 ...)"``, ``"copy of the
        bundled ID, same limits"`` or ``"user table"``.
    ignored : tuple of str
        Selectors given that the table does not use (shown as a notice).
    """

    table_id: str
    title: str
    standard: str
    edition: str
    source: str | None
    sha256: str | None
    selectors: tuple
    rows: tuple
    evaluation: Evaluation
    measure: str
    max_order: int
    items: tuple
    notes: tuple = ()
    measure_verify: bool = False
    scope: Scope = Scope()
    observation: Observation = Observation()
    provenance: str = ""
    ignored: tuple = ()

    @property
    def display_name(self) -> str:
        """The table's id, marked ``"(modified copy of the bundled ...)"`` when its file is an
        edited copy of a bundled table of the same id."""
        if self.provenance.startswith("modified copy"):
            return f"{self.table_id} ({self.provenance})"
        return self.table_id

    def selector(self, name: str, default=None):
        """Return the value used for selector (or input) ``name``."""
        return dict(self.selectors).get(name, default)

    def find(self, quantity: str = HARMONIC, order: int | None = None,
             applies_to: str | None = None) -> tuple:
        """Return the items for ``quantity`` (and ``order``, ``applies_to`` when given)."""
        return tuple(i for i in self.items if i.quantity == quantity
                     and (order is None or i.order == order)
                     and (applies_to is None or i.applies_to == applies_to))


# --- loading -------------------------------------------------------------------------------


def _bundled() -> dict:
    out = {}
    for res in resources.files(_PACKAGE).iterdir():
        if res.name.endswith(".toml"):
            out[res.name[:-5].casefold()] = res
    return out


def bundled_ids() -> list:
    """Return the ids of the bundled tables, sorted."""
    return sorted(_bundled())


def list_tables() -> list:
    """Load every bundled table (sorted by id)."""
    return [load_table(i) for i in bundled_ids()]


def table_path(id_or_path, folder=None) -> Path | None:
    """The one rule that tells a bundled table id from the path of a table file.

    A path is an ``os.PathLike``, or text with a folder separator (``/`` or ``\\``) or ending
    in ``.toml`` (any case); anything else is a bundled id (name XOR path: a file in the
    current folder is never taken for an id, nor an id for a file). Every place that takes a
    table (the API's :func:`load_table`, the command line, test plans, site files) decides
    it here.

    Parameters
    ----------
    id_or_path : str or os.PathLike
        As the user wrote it.
    folder : str or os.PathLike or None
        The folder a relative path resolves against (a plan's or a site file's); None: as
        given (the current folder).

    Returns
    -------
    pathlib.Path or None
        The table file's path (``~`` expanded, relative ones joined to ``folder``), or None
        for a bundled id.

    Examples
    --------
    >>> table_path("ieee519-2022") is None
    True
    >>> str(table_path("tables/utility.toml", folder="/srv/plans"))
    '/srv/plans/tables/utility.toml'
    """
    if not isinstance(id_or_path, os.PathLike):
        text = str(id_or_path).strip()
        if not ("/" in text or "\\" in text or os.sep in text
                or text.lower().endswith(".toml")):
            return None
        id_or_path = text
    p = Path(id_or_path).expanduser()
    if folder is not None and not p.is_absolute():
        p = Path(folder) / p
    return p


def load_table(id_or_path) -> LimitTable:
    """Load a bundled table by id (case-insensitive) or a table file by path.

    Parameters
    ----------
    id_or_path : str or os.PathLike
        ``"ieee519-2022"``, ``"IEC61000-3-2"``, or ``"./my-utility.toml"``.

    Returns
    -------
    LimitTable

    Raises
    ------
    LimitTableError
        The file is missing, not valid TOML, or breaks the schema (the first problem; all of
        them are in the exception's ``errors`` attribute).
    """
    if table_path(id_or_path) is not None:
        return read_table(id_or_path)
    name = str(id_or_path).strip()
    res = _bundled().get(name.casefold())
    if res is None:
        import difflib

        ids = bundled_ids()
        near = [i for i in ids if i.startswith(name.casefold())] or difflib.get_close_matches(
            name.casefold(), ids, n=3, cutoff=0.5)
        hint = f"did you mean {' or '.join(near)}? " if near else ""
        file = (f"; a bare name is a bundled id: to use the file {name!r}, write "
                f"'./{name}'") if os.path.isfile(name) else ""
        raise LimitTableError(
            f"unknown limit table {name!r}; {hint}bundled tables: {', '.join(ids)} "
            f"(or give the path of a .toml file){file}", field="table")
    with resources.as_file(res) as p:
        return read_table(p)


def read_table(path) -> LimitTable:
    """Read and validate the table file at ``path`` (see :func:`load_table`)."""
    table, errors = _read(path)
    if errors:
        first = errors[0]
        first.errors = errors
        raise first
    return table


def validate_file(path) -> list:
    """Return every problem of the table file at ``path`` (empty list: valid).

    Returns
    -------
    list of LimitTableError
        In line order; each names the file, line and field.
    """
    return _read(path)[1]


def _read(path):
    p = Path(path)
    from .files.read import read_bounded

    if not p.exists() and not p.is_symlink():
        return None, [LimitTableError("no such file", path=str(p))]
    if p.is_dir():
        return None, [LimitTableError("is a directory, not a limit-table file", path=str(p))]
    try:
        data = read_bounded(p, what="limit table", error=LimitTableError)
    except LimitTableError as exc:
        return None, [exc]
    try:
        text = data.decode("utf-8").removeprefix("\ufeff")  # byte-order mark (Windows editors)
    except UnicodeDecodeError as exc:
        line = data[:exc.start].count(b"\n") + 1
        return None, [LimitTableError("not UTF-8 text", path=str(p), line=line)]
    table, errors = parse_table(text, str(p))
    if errors:
        return None, errors
    return replace(table, source=str(p), sha256=hashlib.sha256(data).hexdigest(), text=text), []


def provenance(table: LimitTable) -> str:
    """Where a table's limits come from, compared with the bundled table of the same id.

    Returns
    -------
    str
        ``"bundled"`` (the same bytes as the bundled file), ``"copy of the bundled ID, same
        limits"`` (other bytes, equal content), ``"modified copy of the bundled ID (bundled
        SHA-256 ...)"``, or ``"user table"`` (no bundled table has its id).
    """
    key = str(table.id).casefold()
    if key not in _bundled():
        return "user table"
    sha, ref = _bundled_reference(key)
    if ref is not None and ref == table:
        return "bundled" if table.sha256 == sha else f"copy of the bundled {ref.id}, same limits"
    return f"modified copy of the bundled {table.id} (bundled SHA-256 {sha[:12]}...)"


@functools.cache
def _bundled_reference(key: str):
    """SHA-256 and parsed table of the bundled file ``key`` (read once per process)."""
    res = _bundled()[key]
    sha = hashlib.sha256(res.read_bytes()).hexdigest()
    with resources.as_file(res) as p:
        ref, errors = _read(p)
    return sha, (ref if not errors else None)


# --- resolution ----------------------------------------------------------------------------

# resolve() keyword of each input (the run-specification names, see pqcheck.record) -> the
# selector or input it gives inside a table
_KEYWORDS = {
    "voltage_level_v": "voltage_level",
    "isc_a": "isc",
    "il_a": "il",
    "isc_il": "isc_il",
    "generation": "generation",
    "equipment_class": "equipment_class",
    "equipment_kind": "equipment",
    "rsce": "rsce",
    "ssc_va": "ssc",
    "rated_apparent_power_va": "rated_power",
    "switching": "switching",
}
_INPUTS = {inner: kw for kw, inner in _KEYWORDS.items()}  # for error fields
_NUMERIC = ("voltage_level", "isc", "il", "isc_il", "rsce", "ssc", "rated_power")
_KIND_ORDER = {"choice": 0, "flag": 1, "band": 2, "points": 3}


def designation(standard: str, edition: str, fallback: str = "") -> str:
    """The standard as it is cited: ``"IEEE Std 519-2022"`` (a year edition joined by a
    hyphen), ``"IEC 61000-3-2 ed. 5.0 (2018)"``; ``fallback`` (a table id) without a
    standard."""
    std, ed = (standard or "").strip(), (edition or "").strip()
    if not std:
        return fallback
    if not ed:
        return std
    if ed.isdigit() and len(ed) == 4:
        return f"{std}-{ed}"
    return f"{std} ed. {ed}"


def resolve(table, **selectors) -> ResolvedLimits:
    """Pick the limits of ``table`` that apply to one case.

    Parameters
    ----------
    table : LimitTable or str
        A loaded table, or an id or path for :func:`load_table`.
    voltage_level_v : float, optional
        Nominal bus voltage at the PCC [V].
    isc_a, il_a : float, optional
        Maximum short-circuit current and maximum demand load current at the PCC [A]; give
        both, or ``isc_il`` [unitless] directly.
    generation : bool, optional
        Power-generation equipment (IEEE 519: first ISC/IL row whatever the ratio).
    equipment_class : str, optional
        IEC 61000-3-2 class: ``"A"``, ``"B"``, ``"C"`` or ``"D"`` (case-insensitive).
    equipment_kind : str, optional
        IEC 61000-3-12 kind of equipment (choices in the table).
    rsce : float, optional
        Short-circuit ratio [unitless]; or give ``ssc_va`` [VA] and
        ``rated_apparent_power_va`` [VA] and ``equipment_kind`` to compute
        Rsce = Ssc / (k x rated power).

    The keywords are the field names of :class:`pqcheck.record.LimitSelection`; errors name
    them.
    Selectors that are None are ignored; selectors the table does not use are ignored too.

    Returns
    -------
    ResolvedLimits

    Raises
    ------
    InputError
        A selector the table needs is missing (the message names the option to give), a value
        is out of range or not a valid choice, or no row covers it.
    """
    if not isinstance(table, LimitTable):
        table = load_table(table)
    given = {}
    for kw, v in selectors.items():
        if kw not in _KEYWORDS:
            raise InputError(f"unknown selector {kw!r}; known: {', '.join(_KEYWORDS)}", field=kw)
        if v is None:
            continue
        key = _KEYWORDS[kw]
        if key in _NUMERIC:
            if isinstance(v, bool) or not isinstance(v, (int, float)) or not 0 < v < math.inf:
                raise InputError(f"must be a positive number, got {v!r}", field=kw)
            v = float(v)
        given[key] = v
    values, used = _selector_values(table, given)
    _plausible_selectors(table, given, values)
    return _Resolver(table, values, used, given).run()


#: Lowest nominal bus voltage any bundled table covers (IEEE 519 Table 2 starts at 120 V):
#: a smaller value is a unit slip (13.8 typed for 13.8 kV). [V]
_LEVEL_MIN_V = 100.0


def _plausible_selectors(table, given: dict, values: dict) -> None:
    """Refuse selector values no real case has (a unit slip, a ratio upside down)."""
    lvl = given.get("voltage_level")
    if lvl is not None and lvl < _LEVEL_MIN_V:
        raise InputError(
            f"a bus voltage of {lvl:g} V is below {_LEVEL_MIN_V:g} V, lower than any table "
            f"covers; give it in volts (a {lvl:g} kV bus is {lvl * 1000:g} V)",
            field="voltage_level_v")
    ratio = values.get("isc_il") if table.selector("isc_il") else None
    if ratio is None and "isc" in given and "il" in given:
        ratio = given["isc"] / given["il"]
    if ratio is not None and ratio < 1.0:
        raise InputError(
            f"ISC/IL = {ratio:.3g}: the short-circuit current at the PCC cannot be smaller "
            "than the load current; check isc_a and il_a (both in A, isc is usually kA)",
            field="isc_a")


def _selector_values(table: LimitTable, given: dict):
    values: dict = {}
    used: dict = {}
    for spec in table.selectors:
        name = spec.name
        if name == "isc_il":
            if "isc_il" in given:
                values[name] = given["isc_il"]
            elif "isc" in given and "il" in given:
                values[name] = given["isc"] / given["il"]
                used.update(isc=given["isc"], il=given["il"])
        elif name == "rsce":
            if "rsce" in given:
                values[name] = given["rsce"]
            elif "ssc" in given and "rated_power" in given and spec.ssc_divisor:
                eq = _choice(table.selector("equipment"), given.get("equipment"))
                if eq is None:
                    raise InputError(
                        "Rsce from `ssc_va` and `rated_apparent_power_va` needs the kind of "
                        f"equipment: give `equipment_kind` "
                        f"({', '.join(c for c, _ in spec.ssc_divisor)})",
                        field="equipment_kind")
                k = dict(spec.ssc_divisor)[eq]
                values[name] = given["ssc"] / (k * given["rated_power"])
                used.update(ssc=given["ssc"], rated_power=given["rated_power"])
        elif spec.kind == "choice":
            if name in given:
                values[name] = _choice(spec, given[name])
        elif spec.kind == "flag":
            if name in given:
                values[name] = bool(given[name])
        elif name in given:
            values[name] = given[name]
        if name not in values and spec.default is not None:
            values[name] = spec.default
    return values, used


def _choice(spec: SelectorSpec | None, value):
    if value is None or spec is None:
        return None
    for c in spec.choices:
        if c.casefold() == str(value).strip().casefold():
            return c
    raise InputError(f"{value!r} is not one of: {', '.join(spec.choices)}",
                     field=_INPUTS[spec.name])


def _fmt(x: float) -> str:
    return numfmt.given(x)


def _cond_text(spec: SelectorSpec, cond) -> str:
    unit = f" {spec.unit}" if spec.unit else ""
    if spec.kind == "band":
        lo, hi = cond
        le, ge = ("<", "<=") if spec.closed == "upper" else ("<=", "<")
        if math.isinf(hi):
            return f"{spec.name} {'>' if le == '<' else '>='} {_fmt(lo)}{unit}"
        if lo == 0:
            return f"{spec.name} {ge} {_fmt(hi)}{unit}"
        return f"{_fmt(lo)} {le} {spec.name} {ge} {_fmt(hi)}{unit}"
    if spec.kind == "points":
        return f"{spec.name} = {_fmt(cond)}{unit}"
    return f"{spec.name} = {' or '.join(cond)}"


class _Resolver:
    def __init__(self, table: LimitTable, values: dict, used: dict, given: dict):
        self.t = table
        self.values = values
        self.used = used
        self.given = given
        self.rows: list = []
        self.items: list = []
        self.notes: list = list(table.notes)
        gen = next((s for s in table.selectors if s.kind == "flag" and values.get(s.name)), None)
        self.first_row_of = gen.first_row_of if gen else ""
        if gen is not None:
            self.used[gen.name] = True

    # -- selector values ---------------------------------------------------------------------

    def _missing(self, name: str, where: str) -> InputError:
        spec = self.t.selector(name)
        meaning = SELECTORS[name][3]
        if name == "isc_il":
            meaning = meaning.split(", ", 1)[-1]
            lack = [_INPUTS[o] for o in ("isc", "il") if o not in self.given]
            option = " and ".join(f"`{o}`" for o in lack)
            return InputError(
                f"table {self.t.id} ({where}) selects its row by ISC/IL ({meaning}); give "
                f"{option} [A]", field=lack[0] if len(lack) == 1 else "isc_il")
        if spec.kind == "choice":
            return InputError(f"table {self.t.id} ({where}) needs the {meaning}: give "
                              f"{spec.option} ({', '.join(spec.choices)})", field=_INPUTS[name])
        if name == "rsce":
            return InputError(f"table {self.t.id} ({where}) selects its row by the {meaning}: "
                              "give `rsce`, or `ssc_va` [VA] with `rated_apparent_power_va` "
                              "[VA] and `equipment_kind`", field="rsce")
        unit = f" [{spec.unit}]" if spec.unit else ""
        return InputError(f"table {self.t.id} ({where}) selects limits by the {meaning}: give "
                          f"{spec.option}{unit}", field=_INPUTS[name])

    def _value(self, name: str, where: str):
        if name not in self.values:
            raise self._missing(name, where)
        v = self.values[name]
        self.used[name] = v
        return v

    def _matches(self, name, cond, where) -> bool:
        spec = self.t.selector(name)
        v = self._value(name, where)
        if spec.kind == "choice":
            return v in cond
        if spec.kind == "points":
            return v >= cond
        lo, hi = cond
        return (lo <= v < hi) if spec.closed == "lower" else (lo < v <= hi)

    def _ordered(self, conds):
        return sorted(conds, key=lambda kv: _KIND_ORDER[self.t.selector(kv[0]).kind])

    # -- main --------------------------------------------------------------------------------

    def run(self) -> ResolvedLimits:
        t = self.t
        for blk in t.blocks:
            where = f"{blk.name}"
            if not all(self._matches(k, c, where) for k, c in self._ordered(blk.conditions)):
                continue
            head = blk.name
            if blk.note:
                self.notes.append(f"{blk.name}: {blk.note}")
            if blk.conditions:
                head += " [" + "; ".join(_cond_text(t.selector(k), c)
                                         for k, c in blk.conditions) + "]"
            if blk.derive is not None:
                self.items += self._derived(blk)
                self.rows.append(f"{head}: {blk.derive.factor:g} x {blk.derive.source}")
            elif not blk.rows:
                self.items += self._items(blk, None)
                self.rows.append(head)
            else:
                self._rows(blk, head)
        if not self.items:
            raise InputError(f"no limits of table {t.id} apply to the selectors given "
                             f"({', '.join(f'{k} = {v}' for k, v in self.values.items())})")
        ev = self._evaluation(t.evaluation)
        selectors = tuple(sorted(self.used.items()))
        scope = replace(t.scope, rules=tuple(r for r in t.scope.rules if self._holds(r)))
        known = {s.name for s in t.selectors} | ({"isc", "il"} if t.selector("isc_il") else
                                                 set())
        if t.selector("rsce") and t.selector("rsce").ssc_divisor:
            known |= {"ssc", "rated_power"}
        ignored = tuple(k for k in self.given if k not in known)
        return ResolvedLimits(
            table_id=t.id, title=t.title, standard=t.standard, edition=t.edition,
            source=t.source, sha256=t.sha256, selectors=selectors, rows=tuple(self.rows),
            evaluation=ev, measure=t.measure, max_order=t.max_order, items=tuple(self.items),
            notes=tuple(self.notes), measure_verify=(t.measure_tag or t.tag) in VERIFY_TAGS,
            scope=scope, observation=t.observation, provenance=provenance(t),
            ignored=ignored)

    def _holds(self, rule) -> bool:
        """True when every selector condition of a scope rule holds for this case."""
        for k, cond in rule.conditions:
            if k not in self.values:
                return False
            spec = self.t.selector(k)
            v = self.values[k]
            if spec.kind == "choice" and v not in cond:
                return False
            if spec.kind == "band" and not (cond[0] <= v < cond[1]):
                return False
        return True

    def _rows(self, blk: LimitBlock, head: str) -> None:
        t = self.t
        cand = list(blk.rows)
        names = []
        for r in blk.rows:
            for k, _ in r.conditions:
                if k not in names:
                    names.append(k)
        names.sort(key=lambda n: _KIND_ORDER[t.selector(n).kind])
        forced = ""
        for name in names:
            if t.selector(name).kind == "points" or name == self.first_row_of:
                continue
            cand = [r for r in cand if name not in dict(r.conditions)
                    or self._matches(name, dict(r.conditions)[name], blk.name)]
        if self.first_row_of in names and cand:
            name = self.first_row_of
            lowest = min(dict(r.conditions)[name] for r in cand if name in dict(r.conditions))
            cand = [r for r in cand if dict(r.conditions).get(name, lowest) == lowest]
            forced = f" (first {name} row: generation equipment)"
        points = [n for n in names if t.selector(n).kind == "points"]
        if not cand:
            name = names[-1] if names else ""
            spec = t.selector(name)
            bands = sorted({dict(r.conditions)[name] for r in blk.rows
                            if name in dict(r.conditions)})
            span = f"{_fmt(bands[0][0])} to {_fmt(bands[-1][1])}" if bands and \
                spec.kind == "band" else ""
            raise InputError(f"{name} = {_fmt(self.values[name])} is outside the rows of "
                             f"{blk.name} in table {t.id}" + (f" ({span})" if span else ""),
                             field=_INPUTS[name])
        if points:
            name = points[0]
            spec = t.selector(name)
            v = self._value(name, blk.name)
            cand.sort(key=lambda r: dict(r.conditions)[name])
            pts = [dict(r.conditions)[name] for r in cand]
            if v < pts[0]:
                raise InputError(f"{name} = {v:g} is below the lowest row ({pts[0]:g}) of "
                                 f"{blk.name} in table {t.id}: the table does not cover it",
                                 field=_INPUTS[name])
            i = max(j for j, p in enumerate(pts) if p <= v)
            row = cand[i]
            if v == pts[i] or i == len(pts) - 1 or spec.interpolate != "linear":
                self.items += self._items(blk, row)
                self.rows.append(f"{head}: {row.clause + ': ' if row.clause else ''}"
                                 f"row {name} = {pts[i]:g} (for {name} = {v:g})")
                return
            frac = (v - pts[i]) / (pts[i + 1] - pts[i])
            self.items += self._interpolate(self._items(blk, row),
                                            self._items(blk, cand[i + 1]), frac,
                                            f"interpolated between {name} = {pts[i]:g} and "
                                            f"{pts[i + 1]:g}")
            self.rows.append(f"{head}: {name} = {v:g} interpolated linearly between rows "
                             f"{name} = {pts[i]:g} and {name} = {pts[i + 1]:g}")
            return
        row = cand[0]
        text = "; ".join(_cond_text(t.selector(k), c) for k, c in row.conditions)
        self.items += self._items(blk, row)
        self.rows.append(f"{head}: {row.clause + ': ' if row.clause else ''}{text}{forced}")

    # -- items -------------------------------------------------------------------------------

    def _make(self, blk, quantity, order, limit, *, tag, clause, note="", times=""):
        return LimitItem(quantity=quantity, order=order, limit=float(limit),
                         unit=BASES[blk.basis][0], basis=blk.basis, applies_to=blk.applies_to,
                         clause=clause, verify=tag in VERIFY_TAGS, note=note, tag=tag,
                         times=times, block=blk.name)

    def _items(self, blk: LimitBlock, row: LimitRow | None) -> list:
        # the nearest tag wins: row, then block, then file
        base_tag = (row.tag if row is not None else "") or blk.tag or self.t.tag
        clause = (row.clause if row is not None and row.clause else "") or blk.clause
        row_note = row.note if row is not None else ""
        out = []
        values = row.values if row is not None and row.values else blk.values
        for col, val in zip(blk.columns, values):
            note = row_note
            if col in TOTALS:
                out.append(self._make(blk, col, None, evaluate_limit(val, None), tag=base_tag,
                                      clause=clause, note=note))
                continue
            for h in parse_orders(col):
                if blk.parity != "all" and (h % 2 == 1) != (blk.parity == "odd"):
                    continue
                out.append(self._make(blk, HARMONIC, h, evaluate_limit(val, h), tag=base_tag,
                                      clause=clause, note=note))
        for rule in blk.even:
            tag = weakest_tag(base_tag, rule.tag)
            for h in even_orders(rule.orders):
                if rule.factor is not None:
                    j = next(j for j, c in enumerate(blk.columns)
                             if c not in TOTALS and h in orders_range(c))
                    lim = rule.factor * evaluate_limit(values[j], h)
                else:
                    lim = evaluate_limit(rule.limit, h)
                out.append(self._make(blk, HARMONIC, h, lim, tag=tag, clause=clause,
                                      note=rule.note))
        for it in blk.items + (row.items if row is not None else ()):
            tag = it.tag or base_tag
            if it.quantity:
                out.append(self._make(blk, it.quantity, None, evaluate_limit(it.limit, None),
                                      tag=tag, clause=clause, note=it.note))
                continue
            for h in parse_orders(it.orders):
                out.append(self._make(blk, HARMONIC, h, evaluate_limit(it.limit, h), tag=tag,
                                      clause=clause, note=it.note, times=it.times))
        return _sorted(out)

    def _derived(self, blk: LimitBlock) -> list:
        src = self.t.block(blk.derive.source)
        keep = set(parse_orders(blk.derive.orders)) if blk.derive.orders else None
        out = []
        for it in self._items(src, None):
            if keep is not None and (it.quantity != HARMONIC or it.order not in keep):
                continue
            tag = weakest_tag(it.tag, blk.tag) if blk.tag else it.tag
            out.append(replace(it, limit=it.limit * blk.derive.factor, clause=blk.clause,
                               tag=tag, verify=tag in VERIFY_TAGS, block=blk.name,
                               unit=BASES[blk.basis][0]))
        return out

    @staticmethod
    def _interpolate(lo: list, hi: list, frac: float, note: str) -> list:
        other = {(i.quantity, i.order, i.basis): i for i in hi}
        out = []
        for a in lo:
            b = other[(a.quantity, a.order, a.basis)]
            tag = weakest_tag(a.tag, b.tag)
            lim = a.limit + frac * (b.limit - a.limit)
            out.append(replace(a, limit=lim, tag=tag, verify=tag in VERIFY_TAGS,
                               note="; ".join(x for x in (a.note, note) if x)))
        return out

    # -- evaluation --------------------------------------------------------------------------

    def _evaluation(self, ev: Evaluation) -> Evaluation:
        def keep(rule):
            if rule is None:
                return None
            for k, cond in rule.conditions:
                if k not in self.values:
                    return None
                spec = self.t.selector(k)
                v = self.values[k]
                if spec.kind == "choice" and v not in cond:
                    return None
            return rule

        return replace(ev, exception=keep(ev.exception), pohc=keep(ev.pohc),
                       negligible=keep(ev.negligible), power=keep(ev.power))


def _sorted(items: list) -> list:
    totals = [i.quantity for i in items if i.quantity != HARMONIC]
    return sorted(items, key=lambda i: (0, i.order, 0) if i.quantity == HARMONIC
                  else (1, 0, totals.index(i.quantity)))


# --- writing -------------------------------------------------------------------------------


def _put(lines: list, key: str, value) -> None:
    lines.append(f"{format_key(key)} = {format_value(value)}")


def _cond_value(spec: SelectorSpec, cond):
    if spec.kind == "choice":
        return cond[0] if len(cond) == 1 else list(cond)
    if spec.kind == "band":
        return [cond[0], cond[1]]
    return cond


def _item_dict(it: ItemSpec) -> dict:
    d = {}
    if it.orders:
        d["orders"] = it.orders
    if it.quantity:
        d["quantity"] = it.quantity
    d["limit"] = it.limit
    for k in ("times", "tag", "note"):
        if getattr(it, k):
            d[k] = getattr(it, k)
    return d


def _list(lines: list, key: str, dicts: list) -> None:
    if not dicts:
        return
    lines.append(f"{key} = [")
    for d in dicts:
        lines.append(f"    {format_value(d)},")
    lines.append("]")


def _check_dict(c: EvalCheck) -> dict:
    d = {"of": c.of, "statistic": c.statistic, "multiplier": c.multiplier}
    if c.applies_to:
        d["applies_to"] = c.applies_to
    if c.period_s:
        d["period_s"] = c.period_s
    if c.tag:
        d["tag"] = c.tag
    if c.note:
        d["note"] = c.note
    return d


def _dump_scope(out: list, t: LimitTable) -> None:
    """The ``[scope]`` and ``[observation]`` sections (nothing when the table has none)."""
    sc = t.scope
    if sc.location or sc.nominal_frequency_hz or sc.rules or sc.tag or sc.note:
        out += ["", "[scope]"]
        if sc.location:
            _put(out, "location", list(sc.location))
        if sc.nominal_frequency_hz:
            _put(out, "nominal_frequency_hz", [int(f) if f == int(f) else f
                                               for f in sc.nominal_frequency_hz])
        for key in ("tag", "note"):
            if getattr(sc, key):
                _put(out, key, getattr(sc, key))
        for r in sc.rules:
            out += ["", "[[scope.rules]]"]
            _put(out, "quantity", r.quantity)
            for k, cond in r.conditions:
                _put(out, k, _cond_value(t.selector(k), cond))
            _put(out, "range", [r.low, r.high])
            _put(out, "reason", r.reason)
            if r.effect != "not applicable":
                _put(out, "effect", r.effect)
            if r.unknown != "note":
                _put(out, "unknown", r.unknown)
            if r.tolerance:
                _put(out, "tolerance", r.tolerance)
            for key in ("tag", "note"):
                if getattr(r, key):
                    _put(out, key, getattr(r, key))
    ob = t.observation
    if ob.minimum_s or ob.behaviours or ob.representative_s is not None or ob.note:
        out += ["", "[observation]"]
        if ob.minimum_s:
            _put(out, "minimum_s", ob.minimum_s)
        if ob.representative_s is not None:
            _put(out, "representative_s", ob.representative_s)
        for key in ("default_behaviour", "tag", "note"):
            if getattr(ob, key):
                _put(out, key, getattr(ob, key))
        for b in ob.behaviours:
            out += ["", f"[observation.behaviour.{format_key(b.name)}]"]
            _put(out, "minimum_s", b.minimum_s)
            if b.cycles:
                _put(out, "cycles", b.cycles)
            if b.representative_s is not None:
                _put(out, "representative_s", b.representative_s)
            for key in ("tag", "note"):
                if getattr(b, key):
                    _put(out, key, getattr(b, key))


def dump_toml(table: LimitTable) -> str:
    """Write ``table`` as TOML that :func:`load_table` reads back to an equal table.

    Comments of the original file are not kept (``pqcheck limits show`` in TOML format
    prints the file itself, comments included).

    Returns
    -------
    str
        The TOML document.
    """
    t = table
    out = [
        f"# pqcheck limit table {t.id}: {t.standard} {t.edition}.",
        "# Schema: limits/README.md. Values tagged P or M: verify against your copy of the "
        "standard.",
        "",
    ]
    _put(out, "schema", t.schema)
    for key in ("id", "title", "standard", "edition", "clause", "measure", "measure_tag"):
        if getattr(t, key) or key in ("id", "title", "standard", "edition", "measure"):
            _put(out, key, getattr(t, key))
    if t.max_order:  # a flicker table has none
        _put(out, "max_order", t.max_order)
    _put(out, "tag", t.tag)
    if t.notes:
        out.append("notes = [")
        out += [f"    {format_value(n)}," for n in t.notes]
        out.append("]")
    for s in t.selectors:
        out += ["", f"[selectors.{s.name}]"]
        if s.kind == "band":
            _put(out, "closed", s.closed)
        if s.kind == "points":
            _put(out, "interpolate", s.interpolate)
        if s.kind == "choice":
            _put(out, "choices", list(s.choices))
        if s.first_row_of:
            _put(out, "first_row_of", s.first_row_of)
        if s.default is not None:
            _put(out, "default", s.default)
        if s.ssc_divisor:
            _put(out, "ssc_divisor", dict(s.ssc_divisor))
        if s.help:
            _put(out, "help", s.help)
    ev = t.evaluation
    out += ["", "[evaluation]"]
    _put(out, "smoothing_tau_s", ev.smoothing_tau_s)
    for key in ("tag", "note"):
        if getattr(ev, key):
            _put(out, key, getattr(ev, key))
    _list(out, "checks", [_check_dict(c) for c in ev.checks])
    _list(out, "short_capture", [_check_dict(c) for c in ev.short_capture])
    if ev.short_capture_note:
        _put(out, "short_capture_note", ev.short_capture_note)
    for name in ("exception", "pohc", "negligible", "power"):
        rule = getattr(ev, name)
        if rule is None:
            continue
        out += ["", f"[evaluation.{name}]"]
        for k, cond in rule.conditions:
            _put(out, k, _cond_value(t.selector(k), cond))
        fields = {"exception": ("multiplier", "max_fraction", "max_duration_s", "mean_below"),
                  "pohc": ("orders", "multiplier"),
                  "negligible": ("percent_of_input", "min_a"),
                  "power": ("of", "statistic")}[name]
        for k in fields + ("tag", "note"):
            v = getattr(rule, k)
            if v != "":
                _put(out, k, v)
    _dump_scope(out, t)
    for blk in t.blocks:
        out += ["", "[[limits]]"]
        _put(out, "name", blk.name)
        _put(out, "clause", blk.clause)
        for k, cond in blk.conditions:
            _put(out, k, _cond_value(t.selector(k), cond))
        _put(out, "applies_to", blk.applies_to)
        _put(out, "basis", blk.basis)
        _put(out, "unit", blk.unit)
        for key in ("tag", "note"):
            if getattr(blk, key):
                _put(out, key, getattr(blk, key))
        if blk.derive is not None:
            d = {"from": blk.derive.source, "factor": blk.derive.factor}
            if blk.derive.orders:
                d["orders"] = blk.derive.orders
            _put(out, "derive", d)
            continue
        if blk.columns:
            _put(out, "columns", list(blk.columns))
        if blk.parity != "all":
            _put(out, "parity", blk.parity)
        if blk.values:
            _put(out, "values", list(blk.values))
        evens = []
        for r in blk.even:
            d = {"orders": r.orders}
            if r.factor is not None:
                d["factor"] = r.factor
            else:
                d["limit"] = r.limit
            for k in ("tag", "note"):
                if getattr(r, k):
                    d[k] = getattr(r, k)
            evens.append(d)
        _list(out, "even", evens)
        _list(out, "items", [_item_dict(i) for i in blk.items])
        for row in blk.rows:
            out += ["", "[[limits.rows]]"]
            for k, cond in row.conditions:
                _put(out, k, _cond_value(t.selector(k), cond))
            if row.values:
                _put(out, "values", list(row.values))
            _list(out, "items", [_item_dict(i) for i in row.items])
            for key in ("clause", "tag", "note"):
                if getattr(row, key):
                    _put(out, key, getattr(row, key))
    return "\n".join(out) + "\n"
