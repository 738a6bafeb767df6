"""Fixed statements of the report: cautions, standing, method and uncertainty wording.

Kept in one module so that a reviewer can read (and a lab can adapt) every sentence the
report asserts without reading layout code. Strings here are plain text; the PDF escapes them.
"""

from __future__ import annotations

import re

__all__ = [
    "merge_variants",
    "split_remarks",
    "NOT_CERTIFICATION",
    "SAFETY_CAUTIONS",
    "DEFERENCE",
    "UNCERTAINTY_METHOD",
    "UNCERTAINTY_NO_CHAIN",
    "UNCERTAINTY_CLOSE",
    "VERDICT_MEANING",
    "AGGREGATION",
    "STANDARDS_METHOD",
    "CLOSE_MARGIN_PERCENT",
]

CLOSE_MARGIN_PERCENT = 5.0
"""Checks whose margin lies within this many percent of their limit are listed as close to the
limit in the uncertainty section. [%]"""

NOT_CERTIFICATION = (
    "This report is an engineering record produced with pqcheck, an open-source analysis tool. "
    "It is not a certification, a type approval or a declaration of conformity, and pqcheck is "
    "not an accredited test laboratory. A verdict here says how the measured values compare "
    "with the limit tables named in this report under the stated conditions; it becomes part "
    "of a compliance decision only when a competent person has reviewed the measurement set-up, "
    "the data and the applicability of each limit table, and has signed below."
)

SAFETY_CAUTIONS = (
    "Hazardous voltages. The conductors measured for this report operate at mains or higher "
    "voltages and can deliver fault currents large enough to cause fatal electric shock, arc "
    "flash and burns. DC links of converters stay charged after the supply is removed.",
    "Rated equipment only. Connect probes, clamps and voltage leads only with the circuit "
    "isolated and proven dead, unless a documented live-working procedure applies. Every probe, "
    "lead and instrument must carry a measurement category (CAT II, III or IV) and voltage "
    "rating at least equal to the point of connection; the lowest rating in the chain "
    "applies to the whole chain.",
    "Qualified personnel. Measurements at the point of common coupling and inside equipment "
    "must be made only by qualified, authorised persons wearing the protective equipment the "
    "site's risk assessment requires, following the site operator's switching and permit "
    "procedures.",
    "Do not rely on this report to decide that a circuit is safe to touch, or to set "
    "protection settings.",
)

DEFERENCE = (
    "Local electrical codes and regulations, the requirements of the network operator (the "
    "utility) and the judgement of the licensed or chartered engineer responsible for the "
    "installation take precedence over anything in this report. Where they impose different "
    "limits, evaluation periods or measurement methods, theirs apply. Limit values marked "
    "\u2020 (verify against your copy) were entered from secondary sources and must be checked "
    "against the licensed text of the standard before this report is relied on."
)

VERDICT_MEANING = (
    "The overall verdict is FAIL when any check fails, otherwise INCONCLUSIVE when any check "
    "could not be decided (for example because a data-quality finding such as clipping affects "
    "the quantity), otherwise PASS. Checks that do not apply to this case do not affect it."
)

AGGREGATION = (
    "Values for the whole capture are the rms of the valid 10/12-cycle window values. Each "
    "check compares the statistic named with it (for example the average of 1.5 s smoothed "
    "values, or the rms of the window values when a capture is shorter than the observation "
    "period the standard asks for) as defined by the limit table's evaluation rule."
)

STANDARDS_METHOD = (
    ("IEC 61000-4-7:2002+A1:2008 \u2020",
     "harmonic measurement method: synchronised 10/12-cycle rectangular windows, harmonic "
     "groups and subgroups, 1.5 s smoothing where a table asks for it (edition from memory: "
     "verify against your copy)"),
    ("IEEE Std 1459-2010",
     "definitions of active, apparent, fundamental and effective power quantities in "
     "non-sinusoidal and unbalanced conditions"),
)

UNCERTAINTY_METHOD = (
    "Method contribution: each window spans an exact number of measured fundamental cycles "
    "and is resampled to that span before the DFT (software synchronisation), so spectral "
    "leakage and scalloping contribute little compared with the instrument chain. Not covered by the method: the "
    "ratio and phase errors of probes and transducers, their bandwidth and frequency "
    "response at higher orders, the digitiser's gain, offset, resolution and anti-alias "
    "filter, noise, and the representativeness of the captured interval for the operating "
    "point. These must be taken from the calibration certificates and data sheets of the "
    "instrument chain listed here and combined by the person signing this report."
)

UNCERTAINTY_NO_CHAIN = (
    "No instrument chain was recorded for this report (give it in a test plan under "
    "[[conditions.instruments]]). Without it the results carry no stated uncertainty, and "
    "a verdict close to a limit cannot be defended."
)

UNCERTAINTY_CLOSE = (
    "Checks within {pct:g} % of their limit are listed below: their verdict could change "
    "within a typical instrument-chain uncertainty and deserves a reviewer's attention."
)


_SLOT = re.compile(r"'[^']*'|(?<![\w.-])\d+(?:\.\d+)?(?![\w.-])")


def merge_variants(texts) -> list:
    """Texts that differ only in one quoted name or one number, said once.

    ``"the dc component of 'ia' was ..."``, ``"... of 'ib' was ..."`` become ``"the dc
    component of 'ia', 'ib' and 'ic' was ..."``; ``"the capture covers 0.9996 s; ..."`` and
    ``"... covers 1 s; ..."`` become ``"the capture covers 0.9996 to 1 s; ..."`` (the range of
    the numbers). Other texts are kept as they are, in their first order.

    Parameters
    ----------
    texts : sequence of str

    Returns
    -------
    list of str
    """
    entries: list = []  # [parts, values per slot (lists, first order), varying slot or None]
    for t in dict.fromkeys(texts):
        parts, vals = _SLOT.split(t), _SLOT.findall(t)
        for e in entries:
            if e[0] != parts:
                continue
            differ = [i for i, v in enumerate(vals) if v not in e[1][i]]
            if not differ:
                break
            if len(differ) == 1 and e[2] in (None, differ[0]) and all(
                    len(e[1][i]) == 1 for i in range(len(vals)) if i != differ[0]):
                e[1][differ[0]].append(vals[differ[0]])
                e[2] = differ[0]
                break
        else:
            entries.append([parts, [[v] for v in vals], None])
    out = []
    for parts, values, slot in entries:
        shown = [v[0] for v in values]
        if slot is not None:
            vs = values[slot]
            if vs[0].startswith("'"):
                shown[slot] = ", ".join(vs[:-1]) + " and " + vs[-1]
            else:
                nums = sorted(vs, key=float)
                shown[slot] = f"{nums[0]} to {nums[-1]}"
        text = parts[0]
        for v, p in zip(shown, parts[1:]):
            text += v + p
        out.append(text)
    return out


def split_remarks(note: str) -> list:
    """A check's note split at ``"; "`` outside parentheses: ``"a (x; y); b"`` ->
    ``["a (x; y)", "b"]`` (a finding's message in brackets stays whole)."""
    out, depth, start = [], 0, 0
    for i, ch in enumerate(note):
        depth += ch == "("
        depth -= ch == ")"
        if depth == 0 and note.startswith("; ", i):
            out.append(note[start:i])
            start = i + 2
    out.append(note[start:])
    return [f.strip() for f in out if f.strip()]
