"""Data-quality findings: problems in a capture that results must carry, not hide.

A finding is a record, not an exception. Its ``severity`` says what it does to a verdict:

``info``
    Worth knowing; does not weaken any number (e.g. a non-uniform time base was resampled).
``warning``
    Numbers stand, but a reviewer should look (e.g. a large DC offset).
``error``
    The quantities it names (``channels``, ``orders``) cannot support a verdict; an assessment of
    them is *inconclusive*, never a pass (e.g. clipping on a channel, orders above what the
    sample rate resolves).
"""

from __future__ import annotations

from dataclasses import dataclass, field

__all__ = ["Finding", "SEVERITIES", "worst_severity", "channel_flags"]

SEVERITIES = ("info", "warning", "error")


@dataclass(frozen=True)
class Finding:
    """One data-quality finding.

    Attributes
    ----------
    code : str
        Stable machine-readable identifier, e.g. ``"clipping"``, ``"low-sample-rate"``.
    severity : str
        ``"info"``, ``"warning"`` or ``"error"`` (see module docstring).
    message : str
        Human-readable explanation with what to do.
    channels : tuple of str
        Channels concerned; empty means the whole capture.
    orders : tuple of int
        Harmonic orders concerned; empty means all orders (or not order-specific).
    value : float or None
        The measured figure behind the finding, in the unit given by ``unit``.
    unit : str
        Unit of ``value``.
    """

    code: str
    severity: str
    message: str
    channels: tuple = ()
    orders: tuple = ()
    value: float | None = None
    unit: str = ""
    detail: dict = field(default_factory=dict, compare=False)

    def __post_init__(self):
        if self.severity not in SEVERITIES:
            raise ValueError(f"severity must be one of {SEVERITIES}, got {self.severity!r}")

    def affects(self, channel: str | None = None, order: int | None = None) -> bool:
        """Return True when this finding concerns ``channel`` and ``order``.

        An empty ``channels`` or ``orders`` tuple means "all".
        """
        if channel is not None and self.channels and channel not in self.channels:
            return False
        if order is not None and self.orders and order not in self.orders:
            return False
        return True

    def to_dict(self) -> dict:
        """Plain-JSON form."""
        d = {"code": self.code, "severity": self.severity, "message": self.message}
        if self.channels:
            d["channels"] = list(self.channels)
        if self.orders:
            d["orders"] = [int(o) for o in self.orders]
        if self.value is not None:
            d["value"] = float(self.value)
            d["unit"] = self.unit
        return d


def worst_severity(findings) -> str | None:
    """Return the most severe severity among ``findings`` (None if there are none)."""
    worst = None
    for f in findings:
        if worst is None or SEVERITIES.index(f.severity) > SEVERITIES.index(worst):
            worst = f.severity
    return worst


def channel_flags(findings, channels) -> dict:
    """The error findings that undermine each channel's values (rms, distortion, power).

    Parameters
    ----------
    findings : sequence of Finding
    channels : sequence of str
        Channel names.

    Returns
    -------
    dict
        Channel name -> codes of the error findings that concern the whole channel (a
        finding naming no channel concerns every one; a finding limited to some harmonic
        orders is left out: the channel's totals stand). Channels without such a finding
        are left out.
    """
    out: dict = {}
    for f in findings:
        if f.severity != "error" or f.orders:
            continue
        for ch in channels:
            if f.affects(ch):
                codes = out.setdefault(ch, [])
                if f.code not in codes:
                    codes.append(f.code)
    return {ch: tuple(codes) for ch, codes in out.items()}
