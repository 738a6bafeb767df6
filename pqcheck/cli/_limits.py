"""Options that choose and resolve limit tables, shared by `check`, `report` and `batch`.

One definition of every option and one function from parsed options to resolved limits, so
the three commands accept the same words and select the same rows.
"""

from __future__ import annotations

import math

import click

__all__ = ["LIMIT_OPTION_NAMES", "limit_options", "resolve_limits", "positive_options",
           "selectors_from", "tables_max_order"]

LIMIT_OPTION_NAMES = ("limits", "voltage_level", "isc", "generation", "equipment_class",
                      "equipment_kind", "rsce", "ssc", "rated_power", "rated_current", "iref",
                      "active_power", "switching")


def limit_options(*, required: bool, limits_help: str | None = None):
    """Decorator adding the limit-table and row-selector options.

    Parameters
    ----------
    required : bool
        Whether ``--limits`` must be given.
    limits_help : str or None
        Help text of ``--limits`` (default: the one of `check`).
    """
    help_text = limits_help or (
        "Limit table: a bundled id (see `pqcheck limits list`) or the path of a .toml file. "
        "Repeat to check against several.")
    opts = [
        click.option("--limits", "limits", multiple=True, required=required,
                     metavar="ID_OR_PATH", help=help_text),
        click.option("--voltage-level", "voltage_level", type=float, metavar="V",
                     help="Nominal bus voltage at the PCC (IEEE 519)."),
        click.option("--isc", type=float, metavar="A",
                     help="Maximum short-circuit current at the PCC (IEEE 519, with --il)."),
        click.option("--generation", is_flag=True, default=None,
                     help="Power-generation equipment: IEEE 519 first ISC/IL row whatever "
                          "the ratio."),
        click.option("--class", "equipment_class", metavar="A|B|C|D",
                     help="Equipment class (IEC 61000-3-2)."),
        click.option("--equipment-kind", "equipment_kind", metavar="KIND",
                     help="Kind of equipment (IEC 61000-3-12): single-phase, interphase, "
                          "unbalanced-three-phase, balanced-three-phase, "
                          "balanced-three-phase-table4."),
        click.option("--rsce", type=float, metavar="N",
                     help="Short-circuit ratio Rsce (IEC 61000-3-12)."),
        click.option("--ssc", type=float, metavar="VA",
                     help="Short-circuit power at the point of connection, to compute Rsce."),
        click.option("--rated-power", "rated_power", type=float, metavar="VA",
                     help="Rated apparent power of the equipment, to compute Rsce."),
        click.option("--rated-current", "rated_current", type=float, metavar="A",
                     help="Rated current (IEEE 1547 limits; Iref of IEC 61000-3-12 unless "
                          "--iref)."),
        click.option("--iref", type=float, metavar="A",
                     help="Reference current Iref (IEC 61000-3-12)."),
        click.option("--switching", "switching", metavar="KIND",
                     help="How the equipment is switched (IEC 61000-3-3 / -3-11 dmax limit): "
                          "automatic (4 %), manual-or-delayed-restart (6 %), "
                          "attended-or-twice-daily (7 %)."),
        click.option("--active-power", "active_power", type=float, metavar="W",
                     help="Active input power for per-watt limits (IEC 61000-3-2 Class D). "
                          "Default: measured."),
    ]

    def decorate(func):
        for opt in reversed(opts):
            func = opt(func)
        return func

    return decorate


def positive_options(lim: dict, il_a) -> None:
    """Refuse zero, negative or non-finite currents and powers (exit 2 naming the option)."""
    from ..errors import InputError

    for name, v in (("--rated-current", lim.get("rated_current")), ("--iref", lim.get("iref")),
                    ("--active-power", lim.get("active_power")), ("--il", il_a)):
        if v is not None and not (math.isfinite(v) and v > 0):
            raise InputError(f"must be a positive number, got {v:g}", field=name)


def selectors_from(lim: dict, il_a) -> dict:
    """Row selectors for :func:`pqcheck.limits.resolve` from parsed options."""
    return dict(voltage_level=lim.get("voltage_level"), isc=lim.get("isc"), il=il_a,
                generation=lim.get("generation"), equipment_class=lim.get("equipment_class"),
                equipment=lim.get("equipment_kind"), rsce=lim.get("rsce"), ssc=lim.get("ssc"),
                rated_power=lim.get("rated_power"), switching=lim.get("switching"))


def resolve_limits(lim: dict, il_a) -> list:
    """Load and resolve every ``--limits`` table with the selectors given."""
    from ..limits import load_table, resolve

    positive_options(lim, il_a)
    selectors = selectors_from(lim, il_a)
    return [resolve(load_table(x), **selectors) for x in lim.get("limits") or ()]


def tables_max_order(ctx, opts: dict, resolved) -> None:
    """Without an explicit --max-order, analyse up to the highest order the tables assess."""
    src = ctx.get_parameter_source("max_order")
    orders = [r.max_order for r in resolved if r.max_order]  # flicker tables have none
    if orders and (src is None or src.name in ("DEFAULT", "DEFAULT_MAP")):
        opts["max_order"] = max(orders)
