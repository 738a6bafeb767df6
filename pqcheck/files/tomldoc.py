"""Validation of TOML documents written by users (test plans, site descriptions).

:class:`DocReader` checks a parsed document against a small schema (field name -> kind) and
raises :class:`~pqcheck.errors.PlanError` naming the file, the line and the dotted field of
every problem, with what was expected. Plans and site files share it.
"""

from __future__ import annotations

import math
import re
from pathlib import Path

from ..errors import PlanError
from .toml import KeyLines, TooDeep, syntax_error_line, tomllib
from .toml import loads as toml_loads

__all__ = ["DocReader", "read_document", "NUM", "POS", "STR", "BOOL", "STRS", "INT", "LABEL",
           "field_name", "kind_of"]


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
STR = "text"
BOOL = "true or false"
STRS = "list of text"
INT = "whole number"
LABEL = "label"
"""Text such as ``"100 %"``; a bare number is accepted and shown as text."""


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
        """Check a table's fields against ``schema`` and return the converted plain values
        (sub-tables and arrays of tables are left to the caller)."""
        if not isinstance(doc, dict):
            raise self.error(key_path, f"must be a table, got {kind_of(doc)}")
        for key in doc:
            if key not in schema:
                raise self.error(key_path + (key,),
                                 f"unknown field; expected one of {', '.join(sorted(schema))}")
        out = {}
        for key, kind in schema.items():
            if key in doc and kind not in ("table", "array of tables"):
                out[key] = self.value(doc[key], key_path + (key,), kind)
        return out

    def value(self, v, key_path: tuple, kind: str):
        """Check and convert one value of a given kind."""
        if kind == STR:
            if not isinstance(v, str):
                raise self.error(key_path, f"must be text in quotes, got {kind_of(v)}")
            return v
        if kind == LABEL:
            if isinstance(v, bool) or not isinstance(v, (str, int, float)):
                raise self.error(key_path, f"must be text such as \"100 %\", got {kind_of(v)}")
            return v if isinstance(v, str) else f"{v:g}"
        if kind == BOOL:
            if not isinstance(v, bool):
                raise self.error(key_path, f"must be true or false, got {kind_of(v)}")
            return v
        if kind == STRS:
            if not isinstance(v, list) or not all(isinstance(x, str) and x for x in v):
                raise self.error(key_path, "must be a list of non-empty text, e.g. "
                                           '["ia", "ib", "ic"]')
            return tuple(v)
        if kind == INT:
            if isinstance(v, bool) or not isinstance(v, int):
                raise self.error(key_path, f"must be a whole number, got {kind_of(v)}")
            return v
        if kind in (NUM, POS):
            if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
                raise self.error(key_path, f"must be a number, got {kind_of(v)}")
            if kind == POS and v <= 0:
                raise self.error(key_path, f"must be greater than zero, got {v!r}")
            return float(v)
        raise AssertionError(kind)  # pragma: no cover

    def array(self, doc, key_path: tuple) -> list:
        """An array of tables (empty when absent)."""
        v = doc.get(key_path[-1], [])
        if not isinstance(v, list) or not all(isinstance(x, dict) for x in v):
            raise self.error(key_path, "must be an array of tables "
                                       f"([[{'.'.join(str(k) for k in key_path)}]] entries)")
        return v

    def require(self, vals: dict, key_path: tuple, key: str, what: str):
        """A required field's value, or an error saying what it is for."""
        if key not in vals:
            raise self.error(key_path, f"missing field '{key}': {what}")
        return vals[key]

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
