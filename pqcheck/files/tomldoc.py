"""The one validator of TOML documents written by users: limit tables, test plans, site files.

Each document declares its keys as data: a table is a mapping key -> :class:`Field` (the
kind of value, whether it is required and what it is for, allowed choices, a physical range
with its unit). :func:`check_table` and :func:`check_value` check a parsed table against it
and word every problem the same way, whichever document it is in: a wrong type ("must be a
number, got the text '3500'"), an unknown key with a suggestion (a near name, or the same
name with the unit the document uses: ``ssc_mva`` -> ``ssc_va``), a missing required key
(saying what it is), a number out of its range, a value that is not one of the choices.
:class:`DocReader` (plans, site files) turns the problems into
:class:`~pqcheck.errors.PlanError`, the limit-table parser (:mod:`pqcheck._limit_parse`)
into :class:`~pqcheck.errors.LimitTableError`; both name the file, the line and the key.

Checks across keys and rows (band tiling, a capture naming a table the plan does not list)
stay in the document's own loader.
"""

from __future__ import annotations

import difflib
import math
import re
from dataclasses import dataclass
from pathlib import Path

from ..errors import PlanError
from .toml import KeyLines, TooDeep, syntax_error_line, tomllib
from .toml import loads as toml_loads

__all__ = ["Field", "DocReader", "read_document", "check_value", "check_table", "unknown_key",
           "missing_key", "choice_text", "as_field", "NUM", "POS", "NONNEG", "STR", "BOOL",
           "STRS", "INT", "LABEL", "TABLE", "TABLES", "UNIT_SUFFIXES", "field_name", "kind_of"]


def read_document(path: Path, what: str) -> tuple:
    """Read and parse a user's TOML document; returns ``(raw bytes, text, parsed dict)``.

    A UTF-8 byte-order mark (as Windows editors write) is accepted. Errors are
    :class:`PlanError` naming the file (and the line, for bad UTF-8 or TOML syntax).
    """
    from .read import read_bounded

    raw = read_bounded(path, what=what, error=PlanError)
    try:
        text = raw.decode("utf-8").removeprefix("\ufeff")
    except UnicodeDecodeError as exc:
        raise PlanError(f"not UTF-8 text (byte {exc.start})", path=path,
                        line=raw[:exc.start].count(b"\n") + 1) from None
    try:
        doc = toml_loads(text)
    except TooDeep as exc:
        raise PlanError(f"not a {what} pqcheck can read: {exc}", path=path) from None
    except tomllib.TOMLDecodeError as exc:
        msg = str(exc)
        raise PlanError(f"not valid TOML: {re.sub(r' [(]at .*[)]$', '', msg)}", path=path,
                        line=syntax_error_line(msg, text)) from None
    return raw, text, doc

NUM = "number"
POS = "positive number"
NONNEG = "number, zero or more"
STR = "text"
BOOL = "true or false"
STRS = "list of text"
INT = "whole number"
LABEL = "label"
"""Text such as ``"100 %"``; a bare number is accepted and shown as text."""
TABLE = "table"
TABLES = "array of tables"

#: Unit suffixes of key names (SI, as every pqcheck document writes them) and what they mean;
#: a key with another suffix of the same stem gets a suggestion naming the unit to use.
UNIT_SUFFIXES = {"v": "V", "a": "A", "va": "VA", "w": "W", "hz": "Hz", "s": "s",
                 "percent": "%", "deg": "degrees", "c": "degrees Celsius", "ohm": "ohm"}


def field_name(key_path: tuple) -> str:
    """Dotted field name of a key path, array entries 1-based: ``captures[2].file``."""
    out = ""
    for k in key_path:
        if isinstance(k, int):
            out += f"[{k + 1}]"
        else:
            out += ("." if out else "") + k
    return out


def kind_of(v) -> str:
    """How a value reads in an error message."""
    if isinstance(v, bool):
        return f"{str(v).lower()} (true/false)"
    if isinstance(v, (int, float)):
        return f"the number {v!r}"
    if isinstance(v, str):
        return f"the text {v!r}"
    if isinstance(v, list):
        return "a list"
    if isinstance(v, dict):
        return "a table"
    return type(v).__name__


@dataclass(frozen=True)
class Field:
    """One key of a TOML document, declared: what its value must be.

    Attributes
    ----------
    kind : str
        One of :data:`NUM`, :data:`POS`, :data:`NONNEG`, :data:`STR`, :data:`BOOL`,
        :data:`STRS`, :data:`INT`, :data:`LABEL`, :data:`TABLE`, :data:`TABLES`.
    required : str or None
        None: optional. Text: the key is required, and the text says what it is (shown when
        it is missing).
    choices : tuple
        Allowed values (empty: any value of the kind).
    low, high : float or None
        Inclusive physical range of a number. [unit of the key]
    unit : str
        Unit of the range, for the message.
    what : str
        What the number is, for the range message ("a phase shift").
    hint : str
        Appended to a choice or range problem (what each choice means).
    """

    kind: str
    required: str | None = None
    choices: tuple = ()
    low: float | None = None
    high: float | None = None
    unit: str = ""
    what: str = ""
    hint: str = ""


def as_field(spec) -> Field:
    """A :class:`Field` from a field or a bare kind."""
    return spec if isinstance(spec, Field) else Field(spec)


def _g(v) -> str:
    return f"{v:g}" if isinstance(v, (int, float)) and not isinstance(v, bool) else repr(v)


def _literal(v) -> str:
    """A value as it is written in TOML (text in double quotes)."""
    if isinstance(v, str):
        return '"' + v.replace("\\", "\\\\").replace('"', '\\"') + '"'
    return _g(v)


def choice_text(choices) -> str:
    """``"a" or "b"``, ``"a", "b" or "c"``: the allowed values as TOML literals."""
    words = [_literal(c) for c in choices]
    return words[0] if len(words) == 1 else ", ".join(words[:-1]) + " or " + words[-1]


def check_value(v, spec, *, what: str = ""):
    """Check and convert one value against its declaration.

    Parameters
    ----------
    v : object
        The parsed TOML value.
    spec : Field or str
        The declaration (or a bare kind).
    what : str
        Names the value at the start of the problem when the key does not (an entry of an
        array: ``"limit for column '2-10'"``); empty for a key's own value.

    Returns
    -------
    (value, problem)
        The converted value and None, or None and the problem, worded the same way for every
        document pqcheck reads (limit tables, test plans, site files).
    """
    f = as_field(spec)
    lead = f"{what} " if what else ""
    kind = f.kind

    def bad(problem):
        return None, lead + problem

    if kind == STR:
        if not isinstance(v, str):
            return bad(f"must be text in quotes, got {kind_of(v)}")
    elif kind == LABEL:
        if isinstance(v, bool) or not isinstance(v, (str, int, float)):
            return bad(f"must be text such as \"100 %\", got {kind_of(v)}")
        v = v if isinstance(v, str) else f"{v:g}"
    elif kind == BOOL:
        if not isinstance(v, bool):
            return bad(f"must be true or false, got {kind_of(v)}")
    elif kind == STRS:
        if not isinstance(v, list) or not all(isinstance(x, str) and x for x in v):
            return bad('must be a list of non-empty text, e.g. ["ia", "ib", "ic"]')
        v = tuple(v)
    elif kind == INT:
        if isinstance(v, bool) or not isinstance(v, int):
            return bad(f"must be a whole number, got {kind_of(v)}")
    elif kind in (NUM, POS, NONNEG):
        if isinstance(v, bool) or not isinstance(v, (int, float)):
            return bad(f"must be a number, got {kind_of(v)}")
        if not math.isfinite(v):
            return bad(f"must be a finite number, got {kind_of(v)}")
        if kind == POS and v <= 0:
            return bad(f"must be greater than zero, got {_g(v)}")
        if kind == NONNEG and v < 0:
            return bad(f"must be zero or more, got {_g(v)}")
        v = float(v)
    elif kind == TABLE:
        if not isinstance(v, dict):
            return bad(f"must be a table, got {kind_of(v)}")
    elif kind == TABLES:
        if not isinstance(v, list) or not all(isinstance(x, dict) for x in v):
            return bad("must be an array of tables ([[...]] entries)")
    else:  # pragma: no cover
        raise AssertionError(kind)
    hint = f" ({f.hint})" if f.hint else ""
    if f.choices and v not in f.choices:
        return bad(f"must be {'one of ' if len(f.choices) > 2 and kind != STR else ''}"
                   f"{choice_text(f.choices)}, got {_g(v)}{hint}")
    if (f.low is not None and v < f.low) or (f.high is not None and v > f.high):
        unit = f" {f.unit}" if f.unit else ""
        about = f" ({f.what})" if f.what else ""
        if f.low is None:
            bound = f"at most {_g(f.high)}"
        elif f.high is None:
            bound = f"at least {_g(f.low)}"
        else:
            bound = f"from {_g(f.low)} to {_g(f.high)}"
        return bad(f"must be {bound}{unit}{about}, got {_g(v)}{hint}")
    return v, None


def unknown_key(key, allowed) -> str:
    """The problem of an unknown key: a suggestion (a near name, or the same name with the
    unit the document uses) and the allowed keys."""
    allowed = list(allowed)
    hint = ""
    stem = str(key).rpartition("_")[0]
    same_stem = [a for a in allowed if stem and a.rpartition("_")[0] == stem
                 and a.rpartition("_")[2] in UNIT_SUFFIXES]
    if same_stem:  # the same name with another unit: say which unit the document takes
        unit = UNIT_SUFFIXES[same_stem[0].rpartition("_")[2]]
        hint = (f"; did you mean {same_stem[0]!r}? (the unit is part of the name: give the "
                f"value in {unit})")
    else:
        near = difflib.get_close_matches(str(key), allowed, n=1)
        hint = f"; did you mean {near[0]!r}?" if near else ""
    return f"unknown field {str(key)!r}{hint} (allowed: {', '.join(sorted(allowed))})"


def missing_key(key, spec) -> str:
    """The problem of a missing required key (saying what it is)."""
    f = as_field(spec)
    what = f": {f.required}" if f.required else ""
    if f.kind == TABLE:
        return f"missing table [{key}]{what}"
    if f.kind == TABLES:
        return f"missing [[{key}]] entries{what}"
    return f"missing field {key!r}{what}"


def check_table(doc: dict, schema: dict) -> tuple:
    """Check a table's keys and values against its declaration.

    Parameters
    ----------
    doc : dict
        The parsed table.
    schema : dict
        Key -> :class:`Field` (or a bare kind).

    Returns
    -------
    values : dict
        The converted values of the keys present and valid (tables and arrays of tables are
        only checked to be ones: the caller descends into them).
    problems : list of (key or None, problem)
        Unknown keys, wrong values, missing required keys (key None: on the table itself).
    """
    values, problems = {}, []
    for key in doc:
        if key not in schema:
            problems.append((key, unknown_key(key, schema)))
    for key, spec in schema.items():
        f = as_field(spec)
        if key not in doc:
            if f.required is not None:
                problems.append((None, missing_key(key, f)))
            continue
        v, problem = check_value(doc[key], f)
        if problem is not None:
            problems.append((key, problem))
        elif f.kind not in (TABLE, TABLES):
            values[key] = v
    return values, problems


class DocReader:
    """Validates one parsed document, naming file, line and field in every error.

    Parameters
    ----------
    path : Path
        The document's file (for messages and to resolve relative paths).
    text : str
        Its text (for line numbers).
    what : str
        What the document is, for messages ("plan", "site file").
    """

    def __init__(self, path: Path, text: str, what: str = "document"):
        self.path = path
        self.what = what
        self.lines = KeyLines(text)

    def error(self, key_path: tuple, problem: str) -> PlanError:
        return PlanError(problem, path=self.path, line=self.lines.line(key_path),
                         field=field_name(key_path) or None)

    def table(self, doc, key_path: tuple, schema: dict) -> dict:
        """Check a table against its declaration (key -> :class:`Field`, :func:`check_table`)
        and return the converted values (sub-tables and arrays of tables are left to the
        caller).

        Raises
        ------
        PlanError
            The first problem (in line order); all of them are in its ``errors``.
        """
        if not isinstance(doc, dict):
            raise self.error(key_path, f"must be a table, got {kind_of(doc)}")
        values, problems = check_table(doc, schema)
        if problems:
            errors = [self.error(key_path + ((key,) if key is not None else ()), problem)
                      for key, problem in problems]
            errors.sort(key=lambda e: e.line or 0)
            first = errors[0]
            first.errors = errors
            raise first
        return values

    def value(self, v, key_path: tuple, spec):
        """Check and convert one value against its declaration (:func:`check_value`)."""
        v, problem = check_value(v, spec)
        if problem is not None:
            raise self.error(key_path, problem)
        return v

    def array(self, doc, key_path: tuple) -> list:
        """An array of tables (empty when absent)."""
        v = doc.get(key_path[-1], [])
        if not isinstance(v, list) or not all(isinstance(x, dict) for x in v):
            raise self.error(key_path, "must be an array of tables "
                                       f"([[{'.'.join(str(k) for k in key_path)}]] entries)")
        return v

    def file(self, text: str, folder: Path, key_path: tuple, check: bool,
             what: str = "file") -> Path:
        """A file path, relative ones resolved against ``folder``; checked to exist
        (``what`` names it in the message: "file", "limit table")."""
        p = Path(text).expanduser()
        if not p.is_absolute():
            p = folder / p
        if check and not p.is_file():
            where = f" (resolved against the {self.what}'s folder {folder})" \
                if not Path(text).is_absolute() else ""
            if p.is_dir():
                raise self.error(key_path, f"{text!r} is a folder, not a file{where}; give the "
                                           "file inside it")
            raise self.error(key_path, f"{what} {text!r} not found{where}")
        return p
