"""Validation of a limit-table file: TOML text -> :class:`pqcheck._limit_model.LimitTable`.

Every problem becomes a :class:`pqcheck.errors.LimitTableError` that names the file, the line
and the field. Validation goes on after a problem where it can, so ``pqcheck limits validate``
can list them all; :func:`parse_table` returns the table and the list of problems.
"""

from __future__ import annotations

import difflib
import itertools
import math
from collections import defaultdict

from . import numfmt
from ._limit_model import (
    APPLIES_TO,
    BASES,
    FLICKER_MEASURE,
    FLICKER_SERIES,
    FLICKER_TOTALS,
    LOCATIONS,
    MEASURES,
    SCHEMA_VERSION,
    SCOPE_EFFECTS,
    SCOPE_QUANTITIES,
    SELECTORS,
    SERIES,
    TAGS,
    TIMES,
    TOTALS,
    Behaviour,
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
    ScopeRule,
    SelectorSpec,
    check_formula,
    evaluate_limit,
    even_orders,
    orders_range,
    parse_orders,
    valid_statistic,
)
from .errors import LimitTableError
from .files.toml import KeyLines, TooDeep, syntax_error_line, tomllib
from .files.toml import loads as toml_loads
from .files.tomldoc import (
    NONNEG,
    NUM,
    POS,
    STR,
    TABLE,
    Field,
    as_field,
    check_value,
    missing_key,
    unknown_key,
)

__all__ = ["parse_table", "block_keys"]

_TOP_FIELDS = ("schema", "id", "title", "standard", "edition", "clause", "measure",
               "measure_tag", "max_order", "tag", "notes", "selectors", "evaluation", "limits",
               "scope", "observation")
_SCOPE_FIELDS = ("location", "nominal_frequency_hz", "rules", "tag", "note")
_SCOPE_RULE_FIELDS = ("quantity", "range", "reason", "effect", "unknown", "tolerance", "tag",
                      "note")
_TAG = Field(STR, choices=TAGS)
# Sections declared as data (pqcheck.files.tomldoc.Field), read by _Ctx.section:
_OBSERVATION = {"minimum_s": NONNEG, "representative_s": POS, "behaviour": TABLE,
                "default_behaviour": STR, "tag": _TAG, "note": STR}
_BEHAVIOUR = {"minimum_s": Field(NONNEG, required=""), "cycles": NONNEG,
              "representative_s": POS, "tag": _TAG, "note": STR}
_DERIVE = {"from": Field(STR, required=""), "factor": POS, "orders": STR}
_BLOCK_FIELDS = ("name", "clause", "applies_to", "basis", "unit", "columns", "parity", "values",
                 "items", "even", "rows", "derive", "tag", "note")
_ROW_FIELDS = ("values", "items", "clause", "tag", "note")
_ITEM_FIELDS = ("orders", "quantity", "limit", "times", "tag", "note")
_EVEN_FIELDS = ("orders", "factor", "limit", "tag", "note")
_SELECTOR_FIELDS = {
    "band": ("help", "default", "closed"),
    "points": ("help", "default", "interpolate", "ssc_divisor"),
    "choice": ("help", "default", "choices"),
    "flag": ("help", "default", "first_row_of"),
}
_EVAL_FIELDS = ("smoothing_tau_s", "checks", "short_capture", "short_capture_note", "exception",
                "pohc", "negligible", "power", "tag", "note")
_CHECK_FIELDS = ("of", "statistic", "multiplier", "applies_to", "period_s", "tag", "note")
_RULE_FIELDS = {
    "exception": ("multiplier", "max_fraction", "max_duration_s", "mean_below", "tag", "note"),
    "pohc": ("orders", "multiplier", "tag", "note"),
    "negligible": ("percent_of_input", "min_a", "tag", "note"),
    "power": ("of", "statistic", "tag", "note"),
}

_MISSING = object()


class _Ctx:
    """Error collector that knows the file and the line of every key."""

    def __init__(self, path: str, text: str):
        self.path = path
        self.lines = KeyLines(text)
        self.errors: list[LimitTableError] = []
        self.selectors: dict[str, SelectorSpec] = {}
        self.max_order: int | None = None
        self.flicker = False

    def error(self, problem: str, where, field: str | None = None) -> None:
        where = tuple(where)
        if field is None:
            field = ".".join(k for k in where if isinstance(k, str)) or None
        self.errors.append(LimitTableError(problem, path=self.path, line=self.lines.line(where),
                                           field=field))

    # -- typed getters -----------------------------------------------------------------------

    def keys(self, d: dict, allowed, where, what: str = "") -> None:
        """Unknown keys of ``d`` (``what``: the section, unused in the message: the field
        names it)."""
        for k in d:
            if k not in allowed:
                self.error(unknown_key(k, allowed), where + (k,))

    def missing(self, key, where) -> None:
        self.error(missing_key(key, Field(STR, required="")), where,
                   field=".".join([k for k in where if isinstance(k, str)] + [key]))

    def string(self, d, key, where, *, required=False, default="", choices=None):
        v = d.get(key, _MISSING)
        if v is _MISSING:
            if required:
                self.missing(key, where)
            return default
        val, problem = check_value(v, Field(STR, choices=tuple(choices or ())))
        if problem is not None:
            self.error(problem, where + (key,))
            return default
        return val

    def number(self, d, key, where, *, required=False, default=None, positive=False,
               nonneg=False, what="value"):
        v = d.get(key, _MISSING)
        if v is _MISSING:
            if required:
                self.missing(key, where)
            return default
        # the key names the value: no lead word in the message
        return self.check_number(v, where + (key,), positive=positive, nonneg=nonneg,
                                 what="", default=default)

    def check_number(self, v, where, *, positive=False, nonneg=False, what="",
                     default=None):
        kind = POS if positive else (NONNEG if nonneg else NUM)
        val, problem = check_value(v, Field(kind), what=what)
        if problem is not None:
            self.error(problem, where)
            return default
        return val

    def section(self, d: dict, where, schema: dict) -> dict:
        """A section declared as data (key -> :class:`~pqcheck.files.tomldoc.Field`): every
        problem recorded (the validator's wording), the valid values returned."""
        for k in d:
            if k not in schema:
                self.error(unknown_key(k, schema), where + (k,))
        out = {}
        for key, spec in schema.items():
            f = as_field(spec)
            if key not in d:
                if f.required is not None:
                    self.missing(key, where)
                continue
            v, problem = check_value(d[key], f)
            if problem is not None:
                self.error(problem, where + (key,))
            else:
                out[key] = v
        return out

    def tag(self, d, where):
        return self.string(d, "tag", where, choices=TAGS)


def _field(where, key):
    return ".".join([k for k in where if isinstance(k, str)] + [key])


# --- entry point ---------------------------------------------------------------------------


def parse_table(text: str, path: str) -> tuple[LimitTable | None, list]:
    """Parse and validate a limit table.

    Parameters
    ----------
    text : str
        The TOML document.
    path : str
        Where it came from (used in messages).

    Returns
    -------
    table : LimitTable or None
        None when the problems leave nothing usable.
    errors : list of LimitTableError
        Every problem found, in line order (empty when the table is valid).
    """
    try:
        raw = toml_loads(text)
    except TooDeep as exc:
        return None, [LimitTableError(f"not a limit table: {exc}", path=path)]
    except tomllib.TOMLDecodeError as exc:
        msg = str(exc)
        line = syntax_error_line(msg, text)
        field = _syntax_field(text, line)
        problem = f"invalid TOML: {msg}"
        return None, [LimitTableError(problem, path=path, line=line, field=field)]
    ctx = _Ctx(path, text)
    table = _table(ctx, raw)
    errors = sorted(ctx.errors, key=lambda e: (e.line or 0))
    return (None if errors else table), errors


def _syntax_field(text: str, line: int | None) -> str | None:
    """Best guess of the key on a line with a syntax error."""
    if not line:
        return None
    lines = text.splitlines()
    if line > len(lines):
        return None
    s = lines[line - 1].strip()
    if s.startswith("["):
        return s.strip("[] ") or None
    if "=" in s:
        key = s.split("=", 1)[0].strip()
        return key or None
    return None


def _table(ctx: _Ctx, raw: dict) -> LimitTable | None:
    where: tuple = ()
    ctx.keys(raw, _TOP_FIELDS, where, "the top level")
    schema = raw.get("schema", _MISSING)
    if schema is _MISSING:
        ctx.error(f"missing field 'schema' (write schema = {SCHEMA_VERSION} at the top)", (),
                  field="schema")
    elif schema != SCHEMA_VERSION or isinstance(schema, bool):
        ctx.error(f"schema {schema!r} is not supported; this pqcheck reads schema = "
                  f"{SCHEMA_VERSION}", ("schema",))
    tid = ctx.string(raw, "id", where, required=True)
    if tid and (not tid.strip() or any(c.isspace() for c in tid)):
        ctx.error(f"id {tid!r} must be one word without spaces (e.g. 'my-utility-519')",
                  ("id",))
    title = ctx.string(raw, "title", where, required=True)
    standard = ctx.string(raw, "standard", where, required=True)
    edition = ctx.string(raw, "edition", where, required=True)
    clause = ctx.string(raw, "clause", where)
    measure = ctx.string(raw, "measure", where, required=True, choices=MEASURES)
    measure_tag = ctx.string(raw, "measure_tag", where, choices=TAGS)
    tag = ctx.string(raw, "tag", where, default="V", choices=TAGS) or "V"
    max_order = raw.get("max_order", _MISSING)
    ctx.flicker = measure == FLICKER_MEASURE
    if max_order is _MISSING and ctx.flicker:
        max_order = None  # a flicker table limits no harmonic order
    elif max_order is _MISSING:
        ctx.error("missing field 'max_order' (the highest harmonic order the standard assesses, "
                  "e.g. 40 or 50)", (), field="max_order")
        max_order = None
    elif isinstance(max_order, bool) or not isinstance(max_order, int) or max_order < 2:
        ctx.error(f"max_order must be a whole number >= 2, got {max_order!r}", ("max_order",))
        max_order = None
    elif max_order > 100:  # the analysis reports orders up to 100 (max_order)
        ctx.error(f"max_order must be at most 100 (the highest order pqcheck analyses), got "
                  f"{max_order}", ("max_order",))
        max_order = None
    ctx.max_order = max_order
    notes = _strings(ctx, raw, "notes", where)

    selectors = _selectors(ctx, raw.get("selectors", {}))
    evaluation = _evaluation(ctx, raw.get("evaluation", _MISSING))
    scope = _scope(ctx, raw.get("scope", {}))
    observation = _observation(ctx, raw.get("observation", {}))
    blocks_raw = raw.get("limits", _MISSING)
    blocks = []
    if blocks_raw is _MISSING or not isinstance(blocks_raw, list) or not blocks_raw:
        ctx.error("missing limits: add at least one [[limits]] entry", ("limits",), field="limits")
    else:
        for i, b in enumerate(blocks_raw):
            blk = _block(ctx, b, ("limits", i))
            if blk is not None:
                blocks.append((i, blk))
    if not ctx.errors:
        _cross_checks(ctx, blocks, selectors)
    return LimitTable(
        id=tid, title=title, standard=standard, edition=edition, clause=clause,
        measure=measure, measure_tag=measure_tag, max_order=max_order or 0, tag=tag,
        notes=notes, selectors=tuple(selectors.values()), evaluation=evaluation,
        scope=scope, observation=observation,
        blocks=tuple(b for _, b in blocks), schema=SCHEMA_VERSION)


def _strings(ctx, d, key, where) -> tuple:
    v = d.get(key, [])
    if not isinstance(v, list) or not all(isinstance(s, str) for s in v):
        ctx.error("must be a list of strings", where + (key,))
        return ()
    return tuple(v)


# --- selectors -----------------------------------------------------------------------------


def _selectors(ctx: _Ctx, raw) -> dict:
    where = ("selectors",)
    out: dict[str, SelectorSpec] = {}
    if not isinstance(raw, dict):
        ctx.error("must be a table of [selectors.NAME] sections", where)
        return out
    for name, d in raw.items():
        w = where + (name,)
        if name not in SELECTORS:
            hint = difflib.get_close_matches(name, list(SELECTORS), n=1)
            also = f"; did you mean {hint[0]!r}?" if hint else ""
            ctx.error(f"unknown selector {name!r}{also} (known: {', '.join(SELECTORS)})", w)
            continue
        if not isinstance(d, dict):
            ctx.error(f"must be a table, e.g. [selectors.{name}]", w)
            continue
        kind = SELECTORS[name][0]
        ctx.keys(d, _SELECTOR_FIELDS[kind], w, f"[selectors.{name}] (a {kind} selector)")
        kw = {"name": name, "help": ctx.string(d, "help", w)}
        if kind == "band":
            kw["closed"] = ctx.string(d, "closed", w, default="lower", choices=("lower", "upper"))
        elif kind == "points":
            kw["interpolate"] = ctx.string(d, "interpolate", w, default="none",
                                           choices=("none", "linear"))
        elif kind == "choice":
            ch = d.get("choices", _MISSING)
            if (ch is _MISSING or not isinstance(ch, list) or not ch
                    or not all(isinstance(c, str) and c for c in ch)):
                ctx.error("choices must be a non-empty list of strings", w + ("choices",),
                          field=_field(w, "choices"))
                ch = []
            elif len({c.casefold() for c in ch}) != len(ch):
                ctx.error("choices repeat a value (case is ignored)", w + ("choices",))
            kw["choices"] = tuple(ch)
        elif kind == "flag":
            kw["first_row_of"] = ctx.string(d, "first_row_of", w)
        if "default" in d:
            dv = d["default"]
            ok = {
                "band": isinstance(dv, (int, float)) and not isinstance(dv, bool) and dv > 0,
                "points": isinstance(dv, (int, float)) and not isinstance(dv, bool) and dv > 0,
                "choice": isinstance(dv, str) and dv in kw.get("choices", ()),
                "flag": isinstance(dv, bool),
            }[kind]
            if not ok:
                ctx.error(f"default {dv!r} does not fit a {kind} selector", w + ("default",))
            else:
                kw["default"] = float(dv) if kind in ("band", "points") else dv
        out[name] = SelectorSpec(**kw)
    # second pass: references between selectors
    for name, spec in list(out.items()):
        w = where + (name,)
        if spec.first_row_of:
            target = out.get(spec.first_row_of)
            if target is None or target.kind != "band":
                ctx.error(f"first_row_of = {spec.first_row_of!r} must name a band selector "
                          "declared in this file", w + ("first_row_of",))
        raw_div = raw[name].get("ssc_divisor", _MISSING) if isinstance(raw[name], dict) else \
            _MISSING
        if raw_div is not _MISSING:
            out[name] = _ssc_divisor(ctx, spec, raw_div, out, w)
    ctx.selectors = out
    return out


def _ssc_divisor(ctx, spec, raw_div, selectors, w) -> SelectorSpec:
    from dataclasses import replace

    wd = w + ("ssc_divisor",)
    if spec.name != "rsce":
        ctx.error("ssc_divisor belongs to the rsce selector only", wd)
        return spec
    equipment = selectors.get("equipment")
    if equipment is None:
        ctx.error("ssc_divisor needs an [selectors.equipment] choice selector whose choices it "
                  "keys", wd)
        return spec
    if not isinstance(raw_div, dict):
        ctx.error("must be a table {choice = k, ...}", wd)
        return spec
    pairs = []
    for k, v in raw_div.items():
        if k not in equipment.choices:
            ctx.error(f"{k!r} is not a choice of the equipment selector "
                      f"({', '.join(equipment.choices)})", wd + (k,))
            continue
        num = ctx.check_number(v, wd + (k,), positive=True, what="divisor")
        if num is not None:
            pairs.append((k, num))
    missing = [c for c in equipment.choices if c not in raw_div]
    if missing:
        ctx.error(f"no divisor for equipment {', '.join(map(repr, missing))}", wd)
    return replace(spec, ssc_divisor=tuple(pairs))


def _conditions(ctx: _Ctx, d: dict, where, reserved) -> tuple:
    """Read the selector conditions among the keys of ``d`` (keys not in ``reserved``)."""
    out = []
    for key, v in d.items():
        if key in reserved:
            continue
        w = where + (key,)
        spec = ctx.selectors.get(key)
        if spec is None:
            if key in SELECTORS:
                ctx.error(f"selector {key!r} is used but not declared; add a [selectors.{key}] "
                          "section", w)
            else:
                allowed = tuple(reserved) + tuple(ctx.selectors)
                hint = difflib.get_close_matches(key, list(allowed), n=1)
                also = f"; did you mean {hint[0]!r}?" if hint else ""
                ctx.error(f"unknown field {key!r}{also} (allowed: {', '.join(sorted(allowed))})",
                          w)
            continue
        cond = _condition(ctx, spec, v, w)
        if cond is not None:
            out.append((key, cond))
    return tuple(out)


def _condition(ctx, spec: SelectorSpec, v, w):
    if spec.kind == "band":
        if (not isinstance(v, list) or len(v) != 2
                or not all(isinstance(x, (int, float)) and not isinstance(x, bool) for x in v)):
            ctx.error(f"a {spec.name} band must be [low, high], e.g. [20, 50] (use inf for no "
                      f"upper end), got {v!r}", w)
            return None
        lo, hi = float(v[0]), float(v[1])
        if math.isnan(lo) or math.isnan(hi) or lo < 0 or not lo < hi:
            ctx.error(f"band [{v[0]}, {v[1]}] must have 0 <= low < high", w)
            return None
        return (lo, hi)
    if spec.kind == "points":
        return ctx.check_number(v, w, positive=True, what=f"{spec.name} row value")
    if spec.kind == "choice":
        vals = [v] if isinstance(v, str) else v
        if not isinstance(vals, list) or not vals or not all(isinstance(x, str) for x in vals):
            ctx.error(f"{spec.name} must be a choice or a list of choices", w)
            return None
        out = []
        for x in vals:
            match = [c for c in spec.choices if c.casefold() == x.casefold()]
            if not match:
                ctx.error(f"{x!r} is not a choice of {spec.name} ({', '.join(spec.choices)})", w)
                return None
            out.append(match[0])
        return tuple(out)
    ctx.error(f"{spec.name} is a flag selector; flags cannot select rows or blocks", w)
    return None


# --- evaluation ----------------------------------------------------------------------------


def _evaluation(ctx: _Ctx, raw) -> Evaluation:
    where = ("evaluation",)
    if raw is _MISSING:
        ctx.error("missing [evaluation] section: say which statistic is compared with the "
                  "limits (see limits/README.md)", where, field="evaluation")
        return Evaluation()
    if not isinstance(raw, dict):
        ctx.error("must be a table", where)
        return Evaluation()
    ctx.keys(raw, _EVAL_FIELDS, where, "[evaluation]")
    tau = ctx.number(raw, "smoothing_tau_s", where, default=0.0, nonneg=True,
                     what="smoothing_tau_s")
    checks = _checks(ctx, raw, "checks", where, tau)
    if "checks" not in raw:
        ctx.error("missing field 'checks' (at least one comparison, e.g. { of = \"window\", "
                  "statistic = \"rms\", multiplier = 1.0 })", where, field="evaluation.checks")
    short = _checks(ctx, raw, "short_capture", where, tau)
    kw = {}
    for name, cls in (("exception", ExceptionRule), ("pohc", PohcRule),
                      ("negligible", NegligibleRule), ("power", PowerRule)):
        if name in raw:
            kw[name] = _rule(ctx, name, cls, raw[name], where + (name,), tau)
    return Evaluation(
        smoothing_tau_s=tau or 0.0, checks=checks, short_capture=short,
        short_capture_note=ctx.string(raw, "short_capture_note", where),
        tag=ctx.tag(raw, where), note=ctx.string(raw, "note", where), **kw)


def _checks(ctx, raw, key, where, tau) -> tuple:
    v = raw.get(key, [])
    if not isinstance(v, list) or not all(isinstance(c, dict) for c in v):
        ctx.error("must be a list of inline tables { of = ..., statistic = ..., multiplier = ... }",
                  where + (key,))
        return ()
    if key == "checks" and not v:
        ctx.error("checks is empty; give at least one comparison", where + (key,))
        return ()
    out = []
    for i, c in enumerate(v):
        w = where + (key, i)
        ctx.keys(c, _CHECK_FIELDS, w, f"an evaluation.{key} entry")
        of = ctx.string(c, "of", w, required=True, choices=SERIES)
        if of and (of in FLICKER_SERIES) != ctx.flicker:
            ctx.error(f"of = {of!r} " + ("is for harmonic tables; a flicker table compares "
                      f"{', '.join(map(repr, FLICKER_SERIES))}" if ctx.flicker else
                      "needs measure = 'flicker'"), w + ("of",))
        stat = ctx.string(c, "statistic", w, required=True)
        if stat and not valid_statistic(stat):
            ctx.error(f"statistic {stat!r} is not one of mean, max, rms or pNN (a percentile, "
                      "e.g. p95)", w + ("statistic",))
        if of == "smoothed" and not tau:
            ctx.error("of = 'smoothed' needs smoothing_tau_s > 0 in [evaluation]", w + ("of",))
        out.append(EvalCheck(
            of=of, statistic=stat,
            multiplier=ctx.number(c, "multiplier", w, default=1.0, positive=True,
                                  what="multiplier"),
            applies_to=ctx.string(c, "applies_to", w, choices=APPLIES_TO),
            period_s=ctx.number(c, "period_s", w, default=0.0, nonneg=True, what="period_s"),
            tag=ctx.tag(c, w), note=ctx.string(c, "note", w)))
    return tuple(out)


def _rule(ctx, name, cls, raw, where, tau):
    if not isinstance(raw, dict):
        ctx.error("must be a table", where)
        return None
    fields = _RULE_FIELDS[name]
    conds = _conditions(ctx, raw, where, fields)
    kw = {"conditions": conds, "tag": ctx.tag(raw, where), "note": ctx.string(raw, "note", where)}
    if name == "exception":
        kw.update(
            multiplier=ctx.number(raw, "multiplier", where, required=True, positive=True,
                                  what="multiplier"),
            max_fraction=ctx.number(raw, "max_fraction", where, required=True, positive=True,
                                    what="max_fraction"),
            max_duration_s=ctx.number(raw, "max_duration_s", where, required=True,
                                      positive=True, what="max_duration_s"),
            mean_below=ctx.number(raw, "mean_below", where, required=True, positive=True,
                                  what="mean_below"))
    elif name == "pohc":
        spec = ctx.string(raw, "orders", where, required=True)
        _orders(ctx, spec, where + ("orders",))
        kw.update(orders=spec, multiplier=ctx.number(raw, "multiplier", where, required=True,
                                                     positive=True, what="multiplier"))
    elif name == "negligible":
        kw.update(
            percent_of_input=ctx.number(raw, "percent_of_input", where, required=True,
                                        positive=True, what="percent_of_input"),
            min_a=ctx.number(raw, "min_a", where, required=True, positive=True, what="min_a"))
    else:
        of = ctx.string(raw, "of", where, default="smoothed", choices=SERIES)
        if of == "smoothed" and not tau:
            ctx.error("of = 'smoothed' needs smoothing_tau_s > 0 in [evaluation]", where + ("of",))
        stat = ctx.string(raw, "statistic", where, default="max")
        if not valid_statistic(stat):
            ctx.error(f"statistic {stat!r} is not one of mean, max, rms or pNN",
                      where + ("statistic",))
        kw.update(of=of, statistic=stat)
    if any(v is None for k, v in kw.items() if k not in ("conditions",)):
        return None
    return cls(**kw)


# --- scope and observation -----------------------------------------------------------------


def _scope(ctx: _Ctx, raw) -> Scope:
    where = ("scope",)
    if not isinstance(raw, dict):
        ctx.error("must be a table ([scope])", where)
        return Scope()
    ctx.keys(raw, _SCOPE_FIELDS, where, "[scope]")
    loc = raw.get("location", [])
    if isinstance(loc, str):
        loc = [loc]
    if not isinstance(loc, list) or not all(isinstance(x, str) for x in loc):
        ctx.error(f"location must be a list of: {', '.join(LOCATIONS)}", where + ("location",))
        loc = []
    for x in loc:
        if x not in LOCATIONS:
            ctx.error(f"location {x!r} is not one of: {', '.join(LOCATIONS)}",
                      where + ("location",))
    freqs = raw.get("nominal_frequency_hz", [])
    if not isinstance(freqs, list) or not all(
            isinstance(f, (int, float)) and not isinstance(f, bool) and f in (50, 60)
            for f in freqs):
        ctx.error("nominal_frequency_hz must be a list of 50 and/or 60",
                  where + ("nominal_frequency_hz",))
        freqs = []
    rules_raw = raw.get("rules", [])
    rules = []
    if not isinstance(rules_raw, list) or not all(isinstance(r, dict) for r in rules_raw):
        ctx.error("rules must be [[scope.rules]] entries", where + ("rules",))
        rules_raw = []
    for i, r in enumerate(rules_raw):
        w = where + ("rules", i)
        conds = _conditions(ctx, r, w, _SCOPE_RULE_FIELDS)
        q = ctx.string(r, "quantity", w, required=True, choices=tuple(SCOPE_QUANTITIES))
        rng = r.get("range", _MISSING)
        lo = hi = None
        if (not isinstance(rng, list) or len(rng) != 2 or not all(
                isinstance(x, (int, float)) and not isinstance(x, bool) and not math.isnan(x)
                for x in rng) or not 0 <= rng[0] < rng[1]):
            ctx.error(f"range must be [low, high] with 0 <= low < high (inf for no upper end), "
                      f"got {rng if rng is not _MISSING else 'nothing'}", w + ("range",),
                      field=_field(w, "range"))
        else:
            lo, hi = float(rng[0]), float(rng[1])
        reason = ctx.string(r, "reason", w, required=True)
        effect = ctx.string(r, "effect", w, default="not applicable", choices=SCOPE_EFFECTS)
        unknown = ctx.string(r, "unknown", w, default="note", choices=("note", "inconclusive"))
        tol = ctx.number(r, "tolerance", w, default=0.0, nonneg=True, what="tolerance")
        if q and lo is not None and reason:
            rules.append(ScopeRule(quantity=q, low=lo, high=hi, reason=reason, conditions=conds,
                                   effect=effect or "not applicable", unknown=unknown or "note",
                                   tolerance=tol or 0.0, tag=ctx.tag(r, w),
                                   note=ctx.string(r, "note", w)))
    return Scope(location=tuple(loc), nominal_frequency_hz=tuple(float(f) for f in freqs),
                 rules=tuple(rules), tag=ctx.tag(raw, where), note=ctx.string(raw, "note", where))


def _observation(ctx: _Ctx, raw) -> Observation:
    where = ("observation",)
    if not isinstance(raw, dict):
        ctx.error("must be a table ([observation])", where)
        return Observation()
    obs = ctx.section(raw, where, _OBSERVATION)
    minimum = obs.get("minimum_s", 0.0)
    rep = obs.get("representative_s")
    beh_raw = raw.get("behaviour", {}) if isinstance(raw.get("behaviour", {}), dict) else {}
    behaviours = []
    for name, d in beh_raw.items():
        w = where + ("behaviour", name)
        if not isinstance(d, dict):
            ctx.error(f"must be a table, e.g. [observation.behaviour.{name}]", w)
            continue
        b = ctx.section(d, w, _BEHAVIOUR)
        behaviours.append(Behaviour(
            name=name, minimum_s=b.get("minimum_s", 0.0), cycles=b.get("cycles", 0.0),
            representative_s=b.get("representative_s"), tag=b.get("tag", ""),
            note=b.get("note", "")))
    default = obs.get("default_behaviour", "")
    names = [b.name for b in behaviours]
    if behaviours and not default:
        ctx.error("default_behaviour is missing: name the behaviour used when the user declares "
                  f"none ({', '.join(names)})", where, field="observation.default_behaviour")
    elif default and default not in names:
        ctx.error(f"default_behaviour {default!r} is not one of the behaviours given "
                  f"({', '.join(names) or 'none'})", where + ("default_behaviour",))
    return Observation(minimum_s=minimum, representative_s=rep,
                       behaviours=tuple(behaviours), default_behaviour=default,
                       tag=obs.get("tag", ""), note=obs.get("note", ""))


# --- limits blocks -------------------------------------------------------------------------


def _orders(ctx, spec, where) -> tuple:
    if not spec:
        return ()
    if ctx.flicker:
        ctx.error(f"a flicker table (measure = 'flicker') limits no harmonic orders, got "
                  f"{spec!r}; give quantity = one of {', '.join(FLICKER_TOTALS)}", where)
        return ()
    try:
        return parse_orders(spec, max_order=ctx.max_order)
    except ValueError as exc:
        ctx.error(str(exc), where)
        return ()


def _block(ctx: _Ctx, raw, where) -> LimitBlock | None:
    if not isinstance(raw, dict):
        ctx.error("must be a table ([[limits]])", where)
        return None
    n_err = len(ctx.errors)
    name = ctx.string(raw, "name", where, required=True)
    conds = _conditions(ctx, raw, where, _BLOCK_FIELDS)
    clause = ctx.string(raw, "clause", where, required=True)
    applies_to = ctx.string(raw, "applies_to", where, required=True, choices=APPLIES_TO)
    basis = ctx.string(raw, "basis", where, required=True, choices=tuple(BASES))
    unit = ctx.string(raw, "unit", where)
    if basis and "unit" not in raw:
        ctx.error(f"missing field 'unit' (for basis {basis!r} it is {BASES[basis][0]!r})", where,
                  field=_field(where, "unit"))
    elif basis and unit != BASES[basis][0]:
        ctx.error(f"unit {unit!r} does not match basis {basis!r}, whose unit is "
                  f"{BASES[basis][0]!r}", where + ("unit",))
    if basis and applies_to and applies_to not in BASES[basis][1]:
        ctx.error(f"basis {basis!r} does not fit applies_to = {applies_to!r}: it describes "
                  f"{' and '.join(BASES[basis][1])} only (voltage limits use "
                  "percent_of_fundamental)", where + ("basis",))
    parity = ctx.string(raw, "parity", where, default="all", choices=("all", "odd", "even"))
    tag = ctx.tag(raw, where)
    note = ctx.string(raw, "note", where)
    if len(ctx.errors) > n_err:
        return None
    derive = None
    if "derive" in raw:
        others = [k for k in ("columns", "values", "items", "even", "rows", "parity") if k in raw]
        if others:
            ctx.error(f"a derived block takes its limits from another block; remove "
                      f"{', '.join(others)}", where + ("derive",))
            return None
        derive = _derive(ctx, raw["derive"], where + ("derive",))
        if derive is None:
            return None
        return LimitBlock(name=name, clause=clause, applies_to=applies_to, basis=basis,
                          unit=unit, conditions=conds, derive=derive, tag=tag, note=note)

    columns = _columns(ctx, raw, where, basis)
    if columns is None:
        return None
    has_rows = "rows" in raw
    if "values" in raw and has_rows:
        ctx.error("give values in each [[limits.rows]] entry, not in the block as well",
                  where + ("values",))
        return None
    if columns and "values" not in raw and not has_rows:
        ctx.error("missing limits: columns are given but no values (add values = [...] or "
                  "[[limits.rows]] entries)", where + ("columns",), field=_field(where, "values"))
        return None
    if "values" in raw and not columns:
        ctx.error("values need a columns = [...] header saying what each value limits",
                  where + ("values",))
        return None
    values = _values(ctx, raw, where, columns, parity) if "values" in raw else ()
    items = _items(ctx, raw, where, basis)
    even = _even(ctx, raw, where, columns, parity)
    rows = ()
    if has_rows:
        rows = _rows(ctx, raw["rows"], where, columns, basis, parity)
    elif not columns and not items:
        ctx.error("missing limits: give columns and values, items, rows or derive",
                  where, field=_field(where, "items"))
    if len(ctx.errors) > n_err:
        return None
    blk = LimitBlock(name=name, clause=clause, applies_to=applies_to, basis=basis, unit=unit,
                     conditions=conds, columns=tuple(columns), parity=parity, values=values,
                     items=items, even=even, rows=rows, tag=tag, note=note)
    _check_block_orders(ctx, blk, where)
    return blk


def _columns(ctx, raw, where, basis) -> list | None:
    cols = raw.get("columns", [])
    w = where + ("columns",)
    if not isinstance(cols, list) or not all(isinstance(c, str) for c in cols):
        ctx.error("columns must be a list of strings (order specifications like '2-10' or "
                  "totals like 'TDD')", w)
        return None
    out = []
    for i, c in enumerate(cols):
        q = _total_name(c)
        if q:
            _check_total_basis(ctx, q, basis, w + (i,))
            out.append(q)
        else:
            if not _orders(ctx, c, w + (i,)):
                return None
            out.append(c)
    return out


def _total_name(text: str) -> str:
    for q in TOTALS:
        if text.strip().casefold() == q.casefold():
            return q
    return ""


def _check_total_basis(ctx, q, basis, where):
    bases, meaning = TOTALS[q]
    if (q in FLICKER_TOTALS) != ctx.flicker:
        ctx.error(f"{q} ({meaning}) belongs in a table with measure = 'flicker'" if ctx.flicker
                  is False else f"a flicker table (measure = 'flicker') limits only "
                  f"{', '.join(FLICKER_TOTALS)}, not {q}", where)
        return
    if basis and basis not in bases:
        ctx.error(f"basis {basis!r} does not fit {q} ({meaning}); {q} takes basis "
                  f"{' or '.join(map(repr, bases))}: put it in a [[limits]] block with that "
                  "basis", where)


def _limit_value(ctx, v, where, orders, *, what=""):
    """Check one limit (number or formula) at every order it applies to."""
    if isinstance(v, str):
        try:
            check_formula(v)
        except ValueError as exc:
            ctx.error(str(exc), where)
            return None
        for h in orders or (None,):
            try:
                val = evaluate_limit(v, h)
            except ValueError as exc:
                ctx.error(str(exc), where)
                return None
            if not (0 < val < math.inf):
                ctx.error(f"formula {v!r} gives {val:g} at n = {h}; limits must be finite "
                          "positive numbers", where)
                return None
        return v
    return ctx.check_number(v, where, positive=True, what=what)


def _values(ctx, d, where, columns, parity="all") -> tuple:
    vals = d.get("values")
    w = where + ("values",)
    if not isinstance(vals, list):
        ctx.error("values must be a list with one limit per column", w)
        return ()
    if len(vals) < len(columns):
        missing = ", ".join(repr(c) for c in columns[len(vals):])
        ctx.error(f"missing limit for column {missing} ({len(vals)} values for {len(columns)} "
                  "columns)", w)
        return ()
    if len(vals) > len(columns):
        ctx.error(f"{len(vals)} values for {len(columns)} columns; give one limit per column", w)
        return ()
    out = []
    for i, (v, c) in enumerate(zip(vals, columns)):
        orders = () if c in TOTALS else tuple(
            h for h in parse_orders(c) if parity == "all" or (h % 2 == 1) == (parity == "odd"))
        out.append(_limit_value(ctx, v, w + (i,), orders, what=f"limit for column {c!r}"))
    return tuple(out)


def _items(ctx, d, where, basis) -> tuple:
    raw = d.get("items", [])
    w = where + ("items",)
    if not isinstance(raw, list) or not all(isinstance(x, dict) for x in raw):
        ctx.error("items must be a list of inline tables, e.g. { orders = \"3\", limit = 2.3 }", w)
        return ()
    out = []
    for i, it in enumerate(raw):
        wi = w + (i,)
        ctx.keys(it, _ITEM_FIELDS, wi, "an items entry")
        orders_spec = ctx.string(it, "orders", wi)
        quantity = ctx.string(it, "quantity", wi)
        if bool(orders_spec) == bool(quantity):
            ctx.error("an item needs either orders = \"...\" (individual harmonics) or "
                      "quantity = \"THD\" (a total), not both or neither", wi,
                      field=_field(wi, "orders"))
            continue
        orders = ()
        if orders_spec:
            orders = _orders(ctx, orders_spec, wi + ("orders",))
            if not orders:
                continue
        else:
            q = _total_name(quantity)
            if not q:
                ctx.error(f"unknown quantity {quantity!r} (known: {', '.join(TOTALS)})",
                          wi + ("quantity",))
                continue
            quantity = q
            _check_total_basis(ctx, q, basis, wi + ("quantity",))
        if "limit" not in it:
            ctx.error("missing limit", wi, field=_field(wi, "limit"))
            continue
        limit = _limit_value(ctx, it["limit"], wi + ("limit",), orders)
        if limit is None:
            continue
        times = ctx.string(it, "times", wi, choices=TIMES)
        if times and quantity:
            ctx.error("times applies to individual orders only", wi + ("times",))
        out.append(ItemSpec(orders=orders_spec, quantity=quantity, limit=limit, times=times,
                            tag=ctx.tag(it, wi), note=ctx.string(it, "note", wi)))
    return tuple(out)


def _even(ctx, d, where, columns, parity) -> tuple:
    if "even" not in d:
        return ()
    raw = d["even"]
    w = where + ("even",)
    if not columns or parity != "odd":
        ctx.error("even rules derive even orders from odd-order columns: they need columns and "
                  "parity = \"odd\"", w)
        return ()
    if not isinstance(raw, list) or not all(isinstance(x, dict) for x in raw):
        ctx.error("even must be a list of inline tables, e.g. { orders = \"2-50\", factor = "
                  "0.25 }", w)
        return ()
    ranges = [(c, orders_range(c)) for c in columns if c not in TOTALS]
    out = []
    for i, r in enumerate(raw):
        wi = w + (i,)
        ctx.keys(r, _EVEN_FIELDS, wi, "an even entry")
        spec = ctx.string(r, "orders", wi, required=True)
        orders = _orders(ctx, spec, wi + ("orders",))
        if not orders:
            continue
        orders = tuple(h for h in orders if h % 2 == 0)
        if not orders:
            ctx.error(f"even rule orders {spec!r} name no even order", wi + ("orders",))
            continue
        has_f, has_l = "factor" in r, "limit" in r
        if has_f == has_l:
            ctx.error("an even entry needs either factor (x the odd limit of the column range "
                      "that contains the order) or limit, not both or neither", wi,
                      field=_field(wi, "factor"))
            continue
        factor = limit = None
        if has_f:
            factor = ctx.check_number(r["factor"], wi + ("factor",), positive=True)
            for h in orders:
                holders = [c for c, rng in ranges if h in rng]
                if not holders:
                    ctx.error(f"order {h} lies in no column range, so factor has no odd limit to "
                              "multiply; widen a column (e.g. '2-10') or give limit = ...",
                              wi + ("orders",))
                    break
                if len(holders) > 1:
                    ctx.error(f"order {h} lies in two column ranges ({holders[0]!r} and "
                              f"{holders[1]!r}); make the column ranges disjoint",
                              wi + ("orders",))
                    break
        else:
            limit = _limit_value(ctx, r["limit"], wi + ("limit",), orders)
        out.append(EvenRule(orders=spec, factor=factor, limit=limit, tag=ctx.tag(r, wi),
                            note=ctx.string(r, "note", wi)))
    return tuple(out)


def _rows(ctx, raw, where, columns, basis, parity) -> tuple:
    w = where + ("rows",)
    if not isinstance(raw, list) or not raw or not all(isinstance(r, dict) for r in raw):
        ctx.error("rows must be [[limits.rows]] entries", w)
        return ()
    out = []
    for i, r in enumerate(raw):
        wr = w + (i,)
        conds = _conditions(ctx, r, wr, _ROW_FIELDS)
        if not conds and not any(k in ctx.selectors for k in r):
            ctx.error("a row needs a selector condition (e.g. isc_il = [20, 50]) saying when "
                      "it applies", wr, field=_field(w, "conditions"))
        if columns and "values" not in r:
            ctx.error("missing limits: the row has no values for the block's columns", wr,
                      field=_field(wr, "values"))
            continue
        if not columns and "values" in r:
            ctx.error("values need a columns = [...] header in the block", wr + ("values",))
            continue
        if not columns and "items" not in r:
            ctx.error("missing limits: the row has no items", wr, field=_field(wr, "items"))
            continue
        values = _values(ctx, r, wr, columns, parity) if columns else ()
        items = _items(ctx, r, wr, basis)
        out.append(LimitRow(conditions=conds, values=values, items=items,
                            clause=ctx.string(r, "clause", wr), tag=ctx.tag(r, wr),
                            note=ctx.string(r, "note", wr)))
    return tuple(out)


def _derive(ctx, raw, where) -> Derive | None:
    if not isinstance(raw, dict):
        ctx.error("derive must be a table { from = \"Class A\", factor = 1.5 }", where)
        return None
    n_err = len(ctx.errors)
    d = ctx.section(raw, where, _DERIVE)
    src, factor, spec = d.get("from", ""), d.get("factor", 1.0), d.get("orders", "")
    if len(ctx.errors) > n_err:
        return None
    if spec and not _orders(ctx, spec, where + ("orders",)):
        return None
    if not src or factor is None:
        return None
    return Derive(source=src, factor=factor, orders=spec)


# --- block content: keys, duplicates -------------------------------------------------------


def block_keys(blk: LimitBlock, row: LimitRow | None) -> list:
    """List ``(quantity, order, origin)`` for every limit a block (and one of its rows) gives.

    ``origin`` is ``(field, index)`` inside the block or row, used to locate duplicates.
    """
    keys = []
    for j, c in enumerate(blk.columns):
        if c in TOTALS:
            keys.append((c, None, ("columns", j)))
            continue
        for h in parse_orders(c):
            if blk.parity == "all" or (h % 2) == (blk.parity == "odd"):
                keys.append(("harmonic", h, ("columns", j)))
    for j, r in enumerate(blk.even):
        for h in even_orders(r.orders):
            keys.append(("harmonic", h, ("even", j)))
    for src, items in (("block", blk.items), ("row", row.items if row else ())):
        for j, it in enumerate(items):
            if it.quantity:
                keys.append((it.quantity, None, (src, "items", j)))
            else:
                for h in parse_orders(it.orders):
                    keys.append(("harmonic", h, (src, "items", j)))
    return keys


def _origin_path(where_block, where_row, origin):
    if origin[0] == "block":
        return where_block + origin[1:]
    if origin[0] == "row":
        return where_row + origin[1:]
    return where_block + origin


def _describe_origin(blk, origin):
    if origin[0] == "columns":
        return f"column {blk.columns[origin[1]]!r}"
    if origin[0] == "even":
        return f"even rule {blk.even[origin[1]].orders!r}"
    return f"{'row ' if origin[0] == 'row' else ''}item {origin[2] + 1}"


def _check_block_orders(ctx, blk: LimitBlock, where) -> None:
    rows = list(enumerate(blk.rows)) or [(None, None)]
    for ri, row in rows:
        wr = where + ("rows", ri) if ri is not None else where
        seen = {}
        for q, h, origin in block_keys(blk, row):
            key = (q, h)
            if key in seen:
                what = f"order {h}" if h is not None else q
                ctx.error(f"{what} is given twice: by {_describe_origin(blk, seen[key])} and by "
                          f"{_describe_origin(blk, origin)}; keep one",
                          _origin_path(where, wr, origin))
                return
            seen[key] = origin


# --- cross checks: bands, derive, choices --------------------------------------------------


def _cross_checks(ctx, blocks, selectors) -> None:
    names = defaultdict(list)
    for i, b in blocks:
        names[b.name].append(i)
    for name, idx in names.items():
        if len(idx) > 1:
            ctx.error(f"two [[limits]] blocks are named {name!r}; names must be unique",
                      ("limits", idx[1], "name"))
    by_name = {b.name: b for _, b in blocks}
    for i, b in blocks:
        if b.derive is None:
            continue
        w = ("limits", i, "derive")
        src = by_name.get(b.derive.source)
        if src is None or src is b:
            ctx.error(f"derive from {b.derive.source!r}: no other [[limits]] block has that name "
                      f"(blocks: {', '.join(n for n in by_name if n != b.name)})",
                      w + ("from",))
            continue
        if src.derive is not None or src.rows:
            ctx.error(f"derive from {src.name!r}: the source must have its own limits and no "
                      "rows", w + ("from",))
            continue
        if (src.basis, src.applies_to) != (b.basis, b.applies_to):
            ctx.error(f"derive from {src.name!r} (basis {src.basis}, {src.applies_to}) into "
                      f"basis {b.basis}, {b.applies_to}: scaling cannot change the basis",
                      w + ("from",))
            continue
        if b.derive.orders:
            have = {h for q, h, _ in block_keys(src, None) if q == "harmonic"}
            extra = sorted(set(parse_orders(b.derive.orders)) - have)
            if extra:
                ctx.error(f"derive orders include {extra[0]}, which {src.name!r} does not limit",
                          w + ("orders",))
    _check_bands(ctx, blocks, selectors)
    _check_interpolation(ctx, blocks, selectors)
    _check_choices(ctx, blocks, selectors)


def _expand(conds: tuple, selectors) -> list:
    """Expand choice lists so each entry holds one value per selector."""
    fixed = []
    for k, v in conds:
        if selectors[k].kind == "choice":
            fixed.append([(k, c) for c in v])
        else:
            fixed.append([(k, v)])
    return [dict(p) for p in itertools.product(*fixed)] if fixed else [{}]


def _check_bands(ctx, blocks, selectors) -> None:
    band_names = [s.name for s in selectors.values() if s.kind == "band"]
    # rows within each block
    for i, b in blocks:
        entries = []
        for ri, r in enumerate(b.rows):
            for conds in _expand(r.conditions, selectors):
                entries.append((conds, ("limits", i, "rows", ri)))
        _tile_groups(ctx, entries, band_names, selectors, same_ok=False,
                     label=f"rows of {b.name!r}")
    # blocks against each other (block-level conditions), per quantity
    by_kind = defaultdict(list)
    for i, b in blocks:
        for conds in _expand(b.conditions, selectors):
            by_kind[b.applies_to].append((conds, ("limits", i)))
    for entries in by_kind.values():
        _tile_groups(ctx, entries, band_names, selectors, same_ok=True, label="blocks")


def _tile_groups(ctx, entries, band_names, selectors, *, same_ok, label) -> None:
    groups = defaultdict(list)
    for conds, w in entries:
        key = tuple(sorted((k, v) for k, v in conds.items() if selectors[k].kind != "band"))
        groups[key].append((conds, w))
    for es in groups.values():
        _tile(ctx, es, band_names, selectors, same_ok=same_ok, label=label)


def _fmt(x: float) -> str:
    return numfmt.given(x)


def _band_text(spec, band) -> str:
    lo, hi = band
    if spec.closed == "upper":
        return f"{_fmt(lo)} < {spec.name} <= {_fmt(hi)}"
    return f"{_fmt(lo)} <= {spec.name} < {_fmt(hi)}"


def _tile(ctx, entries, band_names, selectors, *, same_ok, label) -> None:
    if not band_names:
        if not same_ok and len(entries) > 1:
            first = ctx.lines.line(entries[0][1])
            ctx.error(f"duplicated row: it repeats the conditions of the row at line {first}",
                      entries[1][1])
        return
    name = band_names[0]
    has = [e for e in entries if name in e[0]]
    if not has:
        _tile(ctx, entries, band_names[1:], selectors, same_ok=same_ok, label=label)
        return
    if len(has) != len(entries):
        lacking = next(e for e in entries if name not in e[0])
        ctx.error(f"{label}: some give a {name} band and this one does not; give every one a "
                  f"{name} band", lacking[1])
        return
    spec = selectors[name]
    distinct = sorted({e[0][name] for e in has})
    for a, b in zip(distinct, distinct[1:]):
        at = next(e[1] for e in has if e[0][name] == b) + (name,)
        if b[0] < a[1]:
            ctx.error(f"overlapping {name} bands in {label}: [{_fmt(a[0])}, {_fmt(a[1])}] and "
                      f"[{_fmt(b[0])}, {_fmt(b[1])}] both cover {_fmt(b[0])} to "
                      f"{_fmt(min(a[1], b[1]))}", at)
            return
        if b[0] > a[1]:
            ctx.error(f"gap in {name} bands of {label}: nothing covers {_fmt(a[1])} to "
                      f"{_fmt(b[0])} (the band before ends at {_fmt(a[1])}, this one starts at "
                      f"{_fmt(b[0])})", at)
            return
    del spec
    for band in distinct:
        _tile(ctx, [e for e in has if e[0][name] == band], band_names[1:], selectors,
              same_ok=same_ok, label=label)


def _check_interpolation(ctx, blocks, selectors) -> None:
    for s in selectors.values():
        if s.kind != "points" or s.interpolate != "linear":
            continue
        for i, b in blocks:
            groups = defaultdict(list)
            for ri, r in enumerate(b.rows):
                if not any(k == s.name for k, _ in r.conditions):
                    continue
                other = tuple((k, v) for k, v in r.conditions if k != s.name)
                keys = sorted((q, h or 0) for q, h, _ in block_keys(b, r))
                groups[other].append((ri, keys))
            for members in groups.values():
                ri0, k0 = members[0]
                for ri, k in members[1:]:
                    if k != k0:
                        ctx.error(f"rows interpolated along {s.name} must limit the same orders "
                                  f"and totals; this row differs from the first row",
                                  ("limits", i, "rows", ri))
                        break


def _check_choices(ctx, blocks, selectors) -> None:
    for s in selectors.values():
        if s.kind != "choice":
            continue
        used = set()
        unconditional = False
        for _, b in blocks:
            conds = dict(b.conditions)
            if s.name in conds:
                used.update(conds[s.name])
            elif b.rows and any(s.name in dict(r.conditions) for r in b.rows):
                for r in b.rows:
                    used.update(dict(r.conditions).get(s.name, s.choices))
            else:
                unconditional = True
        if unconditional:
            continue
        for c in s.choices:
            if c not in used:
                ctx.error(f"choice {c!r} of selector {s.name} selects no [[limits]] block; add "
                          f"a block with {s.name} = {c!r} or remove the choice",
                          ("selectors", s.name, "choices"))
