"""Options that choose limit tables, shared by `check`, `report` and `batch`.

One definition of every option; the values go into the run specification through
:func:`pqcheck.cli._fields.spec_from_options`, so the three commands accept the same words and
select the same rows. Each option's parameter name is its RunSpec field.
"""

from __future__ import annotations

import click

__all__ = ["LIMIT_OPTION_NAMES", "limit_options"]

LIMIT_OPTION_NAMES = ("table", "voltage_level_v", "isc_a", "generation", "equipment_class",
                      "equipment_kind", "rsce", "ssc_va", "rated_apparent_power_va",
                      "rated_current_a", "iref_a", "active_power_w", "location",
                      "behaviour", "cycle_s", "representative_period", "phases",
                      "switching", "current_accuracy", "voltage_accuracy", "bandwidth_hz",
                      "dc_coupled", "decision_rule")


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
        click.option("--limits", "table", multiple=True, required=required,
                     metavar="ID_OR_PATH", help=help_text),
        click.option("--voltage-level", "voltage_level_v", type=float, metavar="V",
                     help="Nominal bus voltage at the PCC (IEEE 519)."),
        click.option("--isc", "isc_a", type=float, metavar="A",
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
        click.option("--ssc", "ssc_va", type=float, metavar="VA",
                     help="Short-circuit power at the point of connection, to compute Rsce."),
        click.option("--rated-power", "rated_apparent_power_va", type=float, metavar="VA",
                     help="Rated apparent power of the equipment, to compute Rsce."),
        click.option("--rated-current", "rated_current_a", type=float, metavar="A",
                     help="Rated current (IEEE 1547 limits; Iref of IEC 61000-3-12 unless "
                          "--iref)."),
        click.option("--iref", "iref_a", type=float, metavar="A",
                     help="Reference current Iref (IEC 61000-3-12)."),
        click.option("--switching", "switching", metavar="KIND",
                     help="How the equipment is switched (IEC 61000-3-3 / -3-11 dmax limit): "
                          "automatic (4 %), manual-or-delayed-restart (6 %), "
                          "attended-or-twice-daily (7 %)."),
        click.option("--active-power", "active_power_w", type=float, metavar="W",
                     help="Declared active input power for per-watt limits and the scope's "
                          "power bounds (IEC 61000-3-2); used when within 10 % of the "
                          "measured one. Default: measured."),
        click.option("--location", type=click.Choice(["pcc", "equipment-terminals"]),
                     help="Where the capture was taken: at the point of common coupling (IEEE "
                          "519) or at the supply terminals of the equipment (IEC 61000-3-2/-3-12)."),
        click.option("--behaviour", metavar="KIND",
                     help="Type of equipment behaviour for the observation period (IEC "
                          "61000-3-2/-3-12): quasi-stationary, short-cyclic, random, "
                          "long-cyclic. Default: quasi-stationary, listed as a deviation."),
        click.option("--cycle", "cycle_s", type=float, metavar="S",
                     help="Operating cycle of cyclic equipment [s] (short-cyclic: 10 cycles "
                          "are observed; long-cyclic: one full cycle)."),
        click.option("--representative-period", "representative_period", is_flag=True,
                     default=False,
                     help="Declare the capture a representative period shorter than the "
                          "standard's observation, where the table allows it for the behaviour "
                          "(said on page 1 of the report)."),
        click.option("--phases", type=click.IntRange(1, 3), metavar="N",
                     help="Number of phases of the equipment (a three-phase unit captured on "
                          "fewer phases cannot pass)."),
        click.option("--current-accuracy", "current_accuracy", metavar="TEXT",
                     help="Accuracy of the current chain (clamp and digitiser), e.g. '1 %' or "
                          "'1 % of reading + 0.05 A'; feeds the uncertainty. Default: IEC "
                          "61000-4-7 Class I assumed."),
        click.option("--voltage-accuracy", "voltage_accuracy", metavar="TEXT",
                     help="Accuracy of the voltage chain, as --current-accuracy."),
        click.option("--bandwidth", "bandwidth_hz", type=float, metavar="HZ",
                     help="-3 dB bandwidth of the measurement chain; orders it reads more than "
                          "10 % low are not assessed."),
        click.option("--dc-coupled", "dc_coupled", is_flag=True, default=False,
                     help="The current chain passes dc and was zeroed before the capture (dc "
                          "injection limits need it)."),
        click.option("--decision-rule", "decision_rule", type=click.Choice(["guarded", "simple"]),
                     default="guarded", show_default=True,
                     help="guarded: a value within its uncertainty of the limit is "
                          "inconclusive (ILAC-G8 guarded acceptance); simple: it passes, marked "
                          "marginal."),
    ]

    def decorate(func):
        for opt in reversed(opts):
            func = opt(func)
        return func

    return decorate
