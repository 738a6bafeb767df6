"""How pqcheck writes a number for a person to read: the one set of rules for the PDF reports,
the terminal and the Markdown tables.

Machine-readable outputs (JSON, CSV, Parquet) keep full precision and never pass through
here. Everything a person reads does, so one value prints the same wherever it appears.

The rules
---------
- Precision by kind of quantity (:data:`KINDS`): significant digits for magnitudes
  (currents, voltages, powers, durations, percentages of distortion), fixed decimals where
  the scale is fixed (margins: one decimal; power factors: three; the fundamental frequency:
  four, i.e. 0.1 mHz).
- Significant digits never round the integer part: ``12345.6`` with 4 digits is ``"12346"``.
  A magnitude below 1e-4 or from 1e7 up is written with an exponent (``"1.000e-09"``).
- Columns: the numbers of one column share one count of decimals (:func:`decimals_for`,
  :func:`column`), taken from the smallest non-zero reference value of the column (the limits,
  for a column of checks) shown with three significant digits, at most five decimals.
  A check's measured value and its limit use the decimals of its group, the checks of one
  limit table for currents or voltages on one basis (:func:`check_decimals`), so a check reads the same in every
  output that shows it, whatever rows stand beside it.
- Missing values (None, NaN) are an en dash ``"–"`` with no unit; infinities are ``"inf"``
  and ``"-inf"``.
- Signs: a minus for negative values (ASCII ``-``, so a copied value parses); a plus only
  for signed kinds (margins). A value that rounds to zero loses its minus (``"0.000"``),
  except in a signed kind, where the sign tells on which side of its limit a value is
  (``"-0.0 %"`` is a tiny excess).
- No thousands separators (a value pastes into any spreadsheet, whatever its locale).
- A unit follows its number after one space, ``%`` and ``°C`` included (``"12.5 %"``).
- A marker on a value (the "verify against your copy of the standard" mark, the source of a
  limit) follows the unit, never sits between number and unit (:func:`marked`); where the
  unit has a column of its own, the marker goes at the end of the unit's cell.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

__all__ = ["MISSING", "Kind", "KINDS", "number", "fixed", "value", "power", "given", "margin",
           "decimals_for", "column", "value_and_limit", "channel_columns", "marked", "check_key",
           "check_decimals", "check_cells", "order_ranges"]

MISSING = "\u2013"
"""How a missing value (None, NaN) is written."""

COLUMN_DIGITS = 3
"""Significant digits of a column's smallest non-zero reference value."""

MAX_DECIMALS = 5
"""Most decimals a column gets."""


@dataclass(frozen=True)
class Kind:
    """Precision and unit of one kind of quantity.

    Attributes
    ----------
    unit : str
        Unit written after the number ("" for none).
    digits : int or None
        Significant digits (exclusive with ``decimals``).
    decimals : int or None
        Fixed decimals.
    sign : bool
        Always write the sign (``+`` for positive values).
    """

    unit: str = ""
    digits: int | None = 4
    decimals: int | None = None
    sign: bool = False


KINDS = {
    "percent": Kind("%", digits=3),            # unbalance, loading, d(t) [%]
    "distortion": Kind("%", digits=None, decimals=2),  # THD, THDG, TDD, PWHD [%]
    "harmonic": Kind("%", digits=None, decimals=3),  # a harmonic in % of fundamental [%]
    "margin": Kind("%", digits=None, decimals=1, sign=True),  # (limit - measured) / limit [%]
    "current": Kind("A", digits=4),            # [A]
    "voltage": Kind("V", digits=4),            # [V]
    "power": Kind("W", digits=4),              # [W] (scale to kW with unit="kW")
    "frequency": Kind("Hz", digits=None, decimals=4),  # a fundamental frequency [Hz]
    "sample_rate": Kind("Hz", digits=6),       # [Hz]
    "duration": Kind("s", digits=4),           # [s]
    "days": Kind("days", digits=None, decimals=3),  # a survey's span [d]
    "ratio": Kind("", digits=3),               # ISC/IL, X/R [unitless]
    "crest_factor": Kind("", digits=None, decimals=3),  # [unitless]
    "power_factor": Kind("", digits=None, decimals=3),  # PF, DPF [unitless]
    "flicker": Kind("", digits=None, decimals=3),  # Pst, Plt, Pinst [unitless]
    "plain": Kind("", digits=4),               # anything else
}
"""Precision and unit of each kind of quantity a person reads."""


def _float(x):
    """``x`` as a float, or None when it is missing (None, NaN); a string stays a string."""
    if x is None:
        return None
    if isinstance(x, str):
        return x
    try:
        xf = float(x)
    except (TypeError, ValueError):
        return str(x)
    return None if math.isnan(xf) else xf


def _signed(s: str, xf: float, sign: bool) -> str:
    """Sign rule: drop the minus of a value that rounds to zero unless ``sign``; with
    ``sign``, write ``+`` for positive values and keep the sign of the value itself."""
    zero = "e" not in s and set(s.lstrip("-").replace(".", "")) <= {"0"}
    body = s.lstrip("-")
    if not sign:
        return body if zero else s
    if xf > 0:
        return "+" + body
    if xf < 0:
        return "-" + body
    return body


def _with_unit(s: str, unit: str) -> str:
    return f"{s} {unit}" if unit else s


def _special(xf, unit: str, sign: bool):
    """The text of a missing or infinite value, else None."""
    if xf is None:
        return MISSING
    if math.isinf(xf):
        return _with_unit(("-" if xf < 0 else "+" if sign else "") + "inf", unit)
    return None


def number(x, digits: int = 4, unit: str = "", *, sign: bool = False) -> str:
    """``x`` with ``digits`` significant digits and its unit.

    Parameters
    ----------
    x : float or None
        The value. [any unit]
    digits : int
        Significant digits (the integer part is never rounded).
    unit : str
        Unit written after one space.
    sign : bool
        Write ``+`` for positive values.

    Returns
    -------
    str

    Examples
    --------
    >>> number(0.123456, 3, "%")
    '0.123 %'
    >>> number(99.99996, 4)
    '100.0'
    >>> number(1e-9, 4, "A")
    '1.000e-09 A'
    >>> number(float("nan"), 4, "A")
    '–'
    """
    xf = _float(x)
    if isinstance(xf, str):
        return xf
    special = _special(xf, unit, sign)
    if special is not None:
        return special
    if xf == 0:
        s = "0"
    else:
        rounded = float(f"{xf:.{digits}g}")  # 99.99996 -> 100.0 (4 digits), not 100.00
        mag = math.floor(math.log10(abs(rounded)))
        if -4 <= mag < 7:
            s = f"{xf:.{max(0, digits - 1 - mag)}f}"
        else:
            s = f"{xf:.{digits - 1}e}"
    return _with_unit(_signed(s, xf, sign), unit)


def fixed(x, decimals: int, unit: str = "", *, sign: bool = False) -> str:
    """``x`` with exactly ``decimals`` decimals and its unit.

    Examples
    --------
    >>> fixed(-0.0004, 3)
    '0.000'
    >>> fixed(-0.04, 1, "%", sign=True)
    '-0.0 %'
    >>> fixed(12.5, 1, "%", sign=True)
    '+12.5 %'
    """
    xf = _float(x)
    if isinstance(xf, str):
        return xf
    special = _special(xf, unit, sign)
    if special is not None:
        return special
    return _with_unit(_signed(f"{xf:.{int(decimals)}f}", xf, sign), unit)


def value(x, kind: str, *, unit: str | None = None) -> str:
    """``x`` written as its kind says (:data:`KINDS`); ``unit`` replaces the kind's unit
    (a scaled unit such as ``"kW"``, or ``""`` for a column whose head names the unit).

    Examples
    --------
    >>> value(50.00123, "frequency")
    '50.0012 Hz'
    >>> value(-12.345, "margin")
    '-12.3 %'
    >>> value(0.98765, "power_factor")
    '0.988'
    """
    k = KINDS[kind]
    u = k.unit if unit is None else unit
    if k.decimals is not None:
        return fixed(x, k.decimals, u, sign=k.sign)
    return number(x, k.digits, u, sign=k.sign)


_PREFIXES = ((1e9, "G"), (1e6, "M"), (1e3, "k"))


def power(x, unit: str = "W", *, ref=None, digits: int = 4) -> str:
    """A power (or any quantity written with an SI prefix): prefix and decimals from the
    magnitude of ``ref`` (the phase's apparent power for its P, Q and S, so one row reads
    in one unit and one count of decimals), else of ``x``, shown with ``digits``
    significant digits.

    Examples
    --------
    >>> power(150690.0)
    '150.7 kW'
    >>> power(-1234.5, "var", ref=150690.0)
    '-1.2 kvar'
    >>> power(48.25)
    '48.25 W'
    """
    xf = _float(x)
    if isinstance(xf, str):
        return xf
    special = _special(xf, unit, False)
    if special is not None:
        return special
    r = _float(ref)
    r = abs(r) if isinstance(r, float) and math.isfinite(r) and r != 0 else abs(xf)
    scale, prefix = next(((sc, pf) for sc, pf in _PREFIXES if r >= sc), (1.0, ""))
    return fixed(xf / scale, decimals_for([r / scale], digits), prefix + unit)


def given(x, unit: str = "") -> str:
    """A value as a person or a file gave it (a selector such as ISC/IL, a rating, a row
    bound): no digits added or rounded off (up to 12 significant), no trailing zeros.

    >>> given(20.0, "A")
    '20 A'
    >>> given(123456.7)
    '123456.7'
    >>> given(float("inf"))
    'inf'
    """
    xf = _float(x)
    if isinstance(xf, str):
        return xf
    special = _special(xf, unit, False)
    if special is not None:
        return special
    return _with_unit(f"{xf:.12g}", unit)


def margin(x, *, signed: bool = True) -> str:
    """A margin ``(limit - measured) / limit``: one decimal, ``%``, signed (unless
    ``signed`` is False, for prose such as "at least 52.3 % inside its limit").

    >>> margin(3.14159)
    '+3.1 %'
    >>> margin(52.25, signed=False)
    '52.2 %'
    """
    if signed:
        return value(x, "margin")
    return fixed(x, KINDS["margin"].decimals, KINDS["margin"].unit)


def decimals_for(values, digits: int = COLUMN_DIGITS) -> int:
    """Decimals of a column: enough to show its smallest non-zero finite value with
    ``digits`` significant digits, between 0 and :data:`MAX_DECIMALS` (3 when the column
    has no such value).

    >>> decimals_for([4.0, 2.0, 0.3])
    3
    >>> decimals_for([15.0, 120.0])
    1
    """
    mags = []
    for v in values:
        xf = _float(v)
        if isinstance(xf, float) and math.isfinite(xf) and xf != 0.0:
            mags.append(abs(xf))
    if not mags:
        return 3
    return int(min(MAX_DECIMALS, max(0, digits - 1 - math.floor(math.log10(min(mags))))))


def column(values, *, reference=None, unit: str = "", digits: int = COLUMN_DIGITS) -> list:
    """A column of numbers with one count of decimals, taken from ``reference`` (the
    column's limits, say) or from the values themselves.

    >>> column([12.0, 0.25, None], unit="%")
    ['12.000 %', '0.250 %', '–']
    """
    values = list(values)
    dec = decimals_for(values if reference is None else reference, digits)
    return [fixed(v, dec, unit) for v in values]


def marked(text: str, marker: str) -> str:
    """``text`` (a number with its unit) followed by a marker: ``"5.000 % of IL †"``."""
    return f"{text} {marker}" if marker and text else text or marker


# -- tables of results -----------------------------------------------------------------------

RMS_DIGITS = 4
"""Significant digits of the smallest rms value of a channel table's column."""


def channel_columns(channels) -> list:
    """``(rms, fundamental)`` texts of each channel of a channel table, with units: each of
    the two columns has one count of decimals, enough for its smallest value to show
    :data:`RMS_DIGITS` significant digits.

    Parameters
    ----------
    channels : sequence of ChannelResult
        The rows of the table, in order (``rms``, ``fundamental_rms``, ``unit``).

    Returns
    -------
    list of tuple of str
    """
    channels = list(channels)
    out = [[], []]
    for j, attr in enumerate(("rms", "fundamental_rms")):
        values = [getattr(c, attr) for c in channels]
        dec = decimals_for(values, RMS_DIGITS)
        out[j] = [fixed(v, dec, c.unit) for v, c in zip(values, channels)]
    return list(zip(*out))


def value_and_limit(x, limit, unit: str = "") -> tuple:
    """A value and the limit it is compared with, in the decimals of the limit (a check's
    rule, :func:`check_cells`, for a pair outside a list of checks).

    >>> value_and_limit(4.5678, 5.0, "%")
    ('4.57 %', '5.00 %')
    """
    a, b = column([x, limit], reference=[limit], unit=unit)
    return a, b


# -- checks -----------------------------------------------------------------------------------

def check_key(check) -> tuple:
    """The group whose limits set a check's decimals: its limit table, what it applies to
    (currents or voltages) and its basis (or unit)."""
    return (getattr(check, "table_id", ""), getattr(check, "applies_to", ""),
            getattr(check, "basis", "") or getattr(check, "unit", ""))


def check_decimals(checks) -> dict:
    """Decimals of each group of checks (:func:`check_key`): from the group's limits.

    Parameters
    ----------
    checks : iterable of Check
        Every check of the assessment (not only the rows shown), so the decimals of a check
        do not depend on which rows a table shows.

    Returns
    -------
    dict
        ``check_key -> decimals``.
    """
    groups: dict = {}
    for c in checks:
        groups.setdefault(check_key(c), []).append(getattr(c, "limit", None))
    return {k: decimals_for(v) for k, v in groups.items()}


def check_cells(check, decimals: dict | None = None) -> tuple:
    """``(measured, limit, margin)`` texts of a check, without units.

    Parameters
    ----------
    check : Check
    decimals : dict, optional
        :func:`check_decimals` of the checks the check belongs to (default: its own limit).

    Returns
    -------
    tuple of str

    Examples
    --------
    >>> from types import SimpleNamespace as C
    >>> check_cells(C(table_id="t", basis="b", measured=1.2345, limit=2.0,
    ...               margin_percent=38.275))
    ('1.23', '2.00', '+38.3 %')
    """
    key = check_key(check)
    dec = (decimals or {}).get(key)
    if dec is None:
        dec = decimals_for([check.limit])
    return (fixed(check.measured, dec), fixed(check.limit, dec),
            margin(check.margin_percent))


def order_ranges(orders, dash: str = "\u2013") -> str:
    """Harmonic orders written as runs: ``[2, 3, 4, 5, 7]`` -> ``"2–5, 7"`` (``dash`` between
    the ends of a run of three or more, or of two)."""
    orders = sorted({int(o) for o in orders})
    parts, k = [], 0
    while k < len(orders):
        j = k
        while j + 1 < len(orders) and orders[j + 1] == orders[j] + 1:
            j += 1
        parts.append(str(orders[k]) if j == k else f"{orders[k]}{dash}{orders[j]}")
        k = j + 1
    return ", ".join(parts)
