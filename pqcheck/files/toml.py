"""Small TOML helpers: the parser import, line numbers of keys, and a writer.

``tomllib`` (``tomli`` before Python 3.11) parses TOML but does not say on which line a value
stands. :class:`KeyLines` scans the (already valid) text once and maps every key path, array
element and array-of-tables entry to its 1-based line, so validation errors can name
``file:line``. :func:`format_value` writes the plain values pqcheck's limit tables use.
"""

from __future__ import annotations

import bisect
import json
import math
import re

try:  # Python >= 3.11
    import tomllib
except ModuleNotFoundError:  # pragma: no cover - Python 3.10
    import tomli as tomllib

__all__ = ["tomllib", "KeyLines", "syntax_error_line", "format_value", "format_key",
           "loads", "TooDeep", "MAX_DEPTH"]

MAX_DEPTH = 32
"""Deepest nesting of arrays and tables accepted in a user's TOML document (pqcheck's own
documents nest at most 4 deep)."""


class TooDeep(ValueError):
    """A TOML document nests arrays or tables deeper than :data:`MAX_DEPTH`."""


def loads(text: str) -> dict:
    """Parse a TOML document as ``tomllib.loads`` does, refusing deep nesting.

    ``tomllib`` parses nested arrays and inline tables recursively, so a document such as
    ``a = [[[[...]]]]`` a few thousand levels deep exhausts Python's recursion limit; the code
    that reads the parsed values recurses too. Both are stopped here.

    Raises
    ------
    tomllib.TOMLDecodeError
        Invalid TOML.
    TooDeep
        Nested deeper than :data:`MAX_DEPTH` levels.
    """
    try:
        doc = tomllib.loads(text)
    except RecursionError:
        raise TooDeep(f"arrays or tables nested too deeply (more than {MAX_DEPTH} levels)") \
            from None
    stack = [(doc, 1)]
    while stack:  # iterative: the check itself must not recurse
        value, depth = stack.pop()
        if depth > MAX_DEPTH:
            raise TooDeep(f"arrays or tables nested too deeply (more than {MAX_DEPTH} levels)")
        children = value.values() if isinstance(value, dict) else value
        stack.extend((v, depth + 1) for v in children if isinstance(v, (dict, list)))
    return doc

_BARE_KEY = re.compile(r"[A-Za-z0-9_-]+")


def syntax_error_line(message: str, text: str) -> int | None:
    """Return the 1-based line a ``tomllib.TOMLDecodeError`` message points at.

    Parameters
    ----------
    message : str
        The decoder's message, e.g. ``"Expected '=' ... (at line 5, column 3)"``.
    text : str
        The document (used for messages that say "at end of document").

    Returns
    -------
    int or None
        The line number, or None when the message names none.
    """
    m = re.search(r"at line (\d+)", message)
    if m:
        return int(m.group(1))
    if "end of document" in message:
        return text.count("\n") + (0 if text.endswith("\n") else 1)
    return None


class KeyLines:
    """Line numbers of the keys of a valid TOML document.

    Paths are tuples of keys and integer indices, as the parsed document is indexed:
    ``("limits", 1, "rows", 0, "values", 3)`` is the fourth element of ``values`` in the first
    ``[[limits.rows]]`` entry of the second ``[[limits]]`` entry.

    Parameters
    ----------
    text : str
        A TOML document that ``tomllib`` has already accepted.
    """

    def __init__(self, text: str):
        self._text = text
        self._newlines = [i for i, c in enumerate(text) if c == "\n"]
        self._lines: dict[tuple, int] = {}
        self._aot: dict[tuple, int] = {}  # concrete array-of-tables path -> current index
        self._pos = 0
        try:
            self._document()
        except (IndexError, ValueError):  # pragma: no cover - text was validated by tomllib
            pass

    def line(self, path) -> int | None:
        """Return the line of ``path``, or of its nearest recorded parent (None if none)."""
        path = tuple(path)
        while path:
            if path in self._lines:
                return self._lines[path]
            path = path[:-1]
        return None

    # -- scanner -----------------------------------------------------------------------------

    def _line_at(self, pos: int) -> int:
        return bisect.bisect_left(self._newlines, pos) + 1

    def _record(self, path: tuple, pos: int) -> None:
        self._lines.setdefault(path, self._line_at(pos))

    def _peek(self, n: int = 1) -> str:
        return self._text[self._pos:self._pos + n]

    def _skip_space(self, newlines: bool) -> None:
        text = self._text
        while self._pos < len(text):
            c = text[self._pos]
            if c in " \t\r" or (newlines and c == "\n"):
                self._pos += 1
            elif c == "#":
                while self._pos < len(text) and text[self._pos] != "\n":
                    self._pos += 1
            else:
                break

    def _document(self) -> None:
        header: tuple = ()
        text = self._text
        while True:
            self._skip_space(newlines=True)
            if self._pos >= len(text):
                return
            start = self._pos
            if self._peek(2) == "[[":
                self._pos += 2
                keys = self._key()
                self._skip_space(newlines=False)
                self._pos += 2  # "]]"
                parent = self._concrete(keys[:-1]) + (keys[-1],)
                index = self._aot.get(parent, -1) + 1
                self._aot[parent] = index
                header = parent + (index,)
                self._record(parent, start)
                self._record(header, start)
            elif self._peek() == "[":
                self._pos += 1
                keys = self._key()
                self._skip_space(newlines=False)
                self._pos += 1  # "]"
                header = self._concrete(keys)
                self._record(header, start)
            else:
                keys = self._key()
                self._skip_space(newlines=False)
                self._pos += 1  # "="
                self._record(header + keys, start)
                self._skip_space(newlines=False)
                self._value(header + keys)

    def _concrete(self, keys: tuple) -> tuple:
        path: tuple = ()
        for k in keys:
            path += (k,)
            if path in self._aot:
                path += (self._aot[path],)
        return path

    def _key(self) -> tuple:
        keys = []
        while True:
            self._skip_space(newlines=False)
            c = self._peek()
            if c in "\"'":
                keys.append(self._string())
            else:
                m = _BARE_KEY.match(self._text, self._pos)
                if not m:
                    raise ValueError("key expected")
                keys.append(m.group(0))
                self._pos = m.end()
            self._skip_space(newlines=False)
            if self._peek() == ".":
                self._pos += 1
                continue
            return tuple(keys)

    def _string(self) -> str:
        text = self._text
        quote = text[self._pos]
        if text.startswith(quote * 3, self._pos):
            end = text.index(quote * 3, self._pos + 3)
            while text.startswith(quote, end + 3):  # up to two quotes may close the string
                end += 1
            raw = text[self._pos + 3:end]
            self._pos = end + 3
            return raw
        i = self._pos + 1
        while text[i] != quote:
            i += 2 if (quote == '"' and text[i] == "\\") else 1
        raw = text[self._pos + 1:i]
        self._pos = i + 1
        if quote == '"':
            try:
                return json.loads('"' + raw + '"')
            except ValueError:
                return raw
        return raw

    def _value(self, path: tuple) -> None:
        c = self._peek()
        if c == "[":
            self._pos += 1
            index = 0
            while True:
                self._skip_space(newlines=True)
                if self._peek() == "]":
                    self._pos += 1
                    return
                self._record(path + (index,), self._pos)
                self._value(path + (index,))
                self._skip_space(newlines=True)
                if self._peek() == ",":
                    self._pos += 1
                index += 1
        elif c == "{":
            self._pos += 1
            while True:
                self._skip_space(newlines=True)
                if self._peek() == "}":
                    self._pos += 1
                    return
                start = self._pos
                keys = self._key()
                self._skip_space(newlines=False)
                self._pos += 1  # "="
                self._skip_space(newlines=False)
                self._record(path + keys, start)
                self._value(path + keys)
                self._skip_space(newlines=True)
                if self._peek() == ",":
                    self._pos += 1
        elif c in "\"'":
            self._string()
        else:
            m = re.compile(r"[^,\]}\s#]+").match(self._text, self._pos)
            self._pos = m.end() if m else self._pos + 1
            # dates with a time part ("1979-05-27 07:32:00") contain one space
            m2 = re.compile(r" \d\d:\d\d[^,\]}\s#]*").match(self._text, self._pos)
            if m2:
                self._pos = m2.end()


def format_key(key: str) -> str:
    """Return ``key`` bare when TOML allows it, quoted otherwise."""
    return key if _BARE_KEY.fullmatch(key) else json.dumps(key, ensure_ascii=False)


def format_value(value) -> str:
    """Format a plain value (str, bool, int, float, list, tuple or dict) as inline TOML.

    Floats are written with ``repr`` so they read back bit for bit; infinities as ``inf``.
    """
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        if math.isinf(value):
            return "inf" if value > 0 else "-inf"
        if math.isnan(value):
            return "nan"
        return repr(value)
    if isinstance(value, str):
        return json.dumps(value, ensure_ascii=False)
    if isinstance(value, (list, tuple)):
        return "[" + ", ".join(format_value(v) for v in value) + "]"
    if isinstance(value, dict):
        if not value:
            return "{}"
        inner = ", ".join(f"{format_key(k)} = {format_value(v)}" for k, v in value.items())
        return "{ " + inner + " }"
    raise TypeError(f"cannot write {type(value).__name__} as TOML")
