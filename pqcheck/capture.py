"""The in-memory capture: uniformly sampled channels with roles, units and provenance.

A :class:`Capture` is what every reader returns and what the analysis consumes. Nothing downstream
of a reader opens a capture file again: provenance (path, SHA-256, reader settings) travels with
the samples so that reports can cite it.

Samples are SI (amperes, volts) as float64, shape ``(n_channels, n_samples)``, sampled at
``fs_hz`` from ``t0_s``.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field, replace

import numpy as np

from .errors import CaptureFormatError, InputError

__all__ = [
    "Channel",
    "Provenance",
    "Capture",
    "CaptureStream",
    "guess_role",
    "assign_roles",
    "QUANTITIES",
    "PHASES",
]

QUANTITIES = ("current", "voltage", "other")
PHASES = ("a", "b", "c", "n", "")


@dataclass(frozen=True)
class Channel:
    """One recorded channel.

    Attributes
    ----------
    name : str
        Column or channel name as found in the file.
    quantity : str
        ``"current"``, ``"voltage"`` or ``"other"`` (not analysed as either).
    phase : str
        ``"a"``, ``"b"``, ``"c"``, ``"n"`` (neutral) or ``""`` (single-phase / unknown).
    unit : str
        SI unit of the stored samples: ``"A"``, ``"V"`` or ``""``.
    role_source : str
        ``"user"`` when roles were given explicitly, ``"guess"`` when inferred from names/units.
    guessed : str
        The quantity the reader guessed from the column's name and unit, kept when the user
        assigns roles, so that a current given as a voltage (or the reverse) can be flagged.
    """

    name: str
    quantity: str = "other"
    phase: str = ""
    unit: str = ""
    role_source: str = "guess"
    guessed: str = ""

    def __post_init__(self):
        if self.quantity not in QUANTITIES:
            raise ValueError(f"quantity must be one of {QUANTITIES}, got {self.quantity!r}")
        if self.phase not in PHASES:
            raise ValueError(f"phase must be one of {PHASES}, got {self.phase!r}")


@dataclass(frozen=True)
class Provenance:
    """Where the samples came from.

    Attributes
    ----------
    source : str
        Path of the capture file (or ``"<memory>"``).
    sha256 : str
        SHA-256 of the file's bytes (hex), empty for in-memory captures.
    reader : str
        Reader that produced the capture, e.g. ``"csv"``.
    settings : dict
        Reader settings as detected or given (delimiter, decimal, header line, time unit, ...).
    """

    source: str = "<memory>"
    sha256: str = ""
    reader: str = "memory"
    settings: dict = field(default_factory=dict, compare=False)


@dataclass(frozen=True, eq=False)
class Capture:
    """Uniformly sampled multi-channel record.

    Attributes
    ----------
    samples : numpy.ndarray
        float64 array, shape ``(n_channels, n_samples)``, SI units. [A] or [V]
    fs_hz : float
        Sample rate. [Hz]
    channels : tuple of Channel
        One per row of ``samples``.
    t0_s : float
        Time of the first sample. [s]
    provenance : Provenance
        Source file, hash and reader settings.
    findings : tuple of Finding
        Findings raised while reading (resampled time base, gaps, non-finite cells, ...).
    """

    samples: np.ndarray
    fs_hz: float
    channels: tuple
    t0_s: float = 0.0
    provenance: Provenance = Provenance()
    findings: tuple = ()

    def __post_init__(self):
        s = np.asarray(self.samples, dtype=np.float64)
        if s.ndim == 1:
            s = s[np.newaxis, :]
        if s.ndim != 2:
            raise ValueError(f"samples must be 2-D (n_channels, n_samples), got shape {s.shape}")
        if s.shape[0] != len(self.channels):
            raise ValueError(
                f"samples has {s.shape[0]} rows but {len(self.channels)} channels were described"
            )
        if not (np.isfinite(self.fs_hz) and self.fs_hz > 0):
            raise ValueError(f"fs_hz must be a positive number, got {self.fs_hz!r}")
        names = [c.name for c in self.channels]
        if len(set(names)) != len(names):
            raise ValueError(f"channel names must be unique, got {names}")
        object.__setattr__(self, "samples", s)
        object.__setattr__(self, "channels", tuple(self.channels))
        object.__setattr__(self, "findings", tuple(self.findings))

    @property
    def n_samples(self) -> int:
        """Number of samples per channel."""
        return int(self.samples.shape[1])

    @property
    def duration_s(self) -> float:
        """Record length ``n_samples / fs_hz``. [s]"""
        return self.n_samples / self.fs_hz

    @property
    def names(self) -> tuple:
        """Channel names in row order."""
        return tuple(c.name for c in self.channels)

    def index(self, name: str) -> int:
        """Row index of channel ``name`` (raises InputError listing the names if unknown)."""
        try:
            return self.names.index(name)
        except ValueError:
            raise InputError(
                f"no channel named {name!r}; the capture has: {', '.join(self.names)}",
                path=self.provenance.source if self.provenance.source != "<memory>" else None,
                field="channel",
            ) from None

    def channel(self, name: str) -> np.ndarray:
        """Samples of channel ``name``. [A] or [V]"""
        return self.samples[self.index(name)]

    def by_quantity(self, quantity: str) -> list:
        """Channels of one quantity in phase order a, b, c, then others, then n."""
        order = {"a": 0, "": 0, "b": 1, "c": 2, "n": 3}
        chans = [c for c in self.channels if c.quantity == quantity]
        return sorted(chans, key=lambda c: order[c.phase])

    def blocks(self, block_samples: int = 1 << 20):
        """Iterate over the samples in blocks of ``block_samples`` columns (views, no copy)."""
        for lo in range(0, self.n_samples, block_samples):
            yield self.samples[:, lo : lo + block_samples]

    def head(self, n_samples: int) -> np.ndarray:
        """The first ``n_samples`` samples of every channel, shape (C, n). [A] or [V]"""
        return self.samples[:, :n_samples]

    def with_channels(self, channels) -> Capture:
        """Copy with other channel descriptions (same samples)."""
        return replace(self, channels=tuple(channels))

    def with_findings(self, extra) -> Capture:
        """Copy with more findings appended."""
        return replace(self, findings=self.findings + tuple(extra))

    @classmethod
    def from_arrays(
        cls,
        fs_hz: float,
        *,
        currents: dict | None = None,
        voltages: dict | None = None,
        t0_s: float = 0.0,
        source: str = "<memory>",
    ) -> Capture:
        """Build a capture from arrays, for notebooks and tests.

        Parameters
        ----------
        fs_hz : float
            Sample rate. [Hz]
        currents, voltages : dict of str to array_like
            Channel name to samples, in phase order a, b, c (a fourth current named
            ``in``/``n``/``neutral`` is taken as neutral). [A], [V]

        Examples
        --------
        >>> import numpy as np
        >>> t = np.arange(2000) / 10_000
        >>> cap = Capture.from_arrays(10_000, currents={"i": np.sin(2 * np.pi * 50 * t)})
        >>> cap.channels[0].quantity
        'current'
        """
        chans, rows = [], []
        for quantity, group, unit in (("current", currents, "A"), ("voltage", voltages, "V")):
            group = group or {}
            names = list(group)
            phases = _phases_for(names)
            for name, phase in zip(names, phases):
                chans.append(Channel(name, quantity, phase, unit, "user"))
                rows.append(np.asarray(group[name], dtype=np.float64))
        if not rows:
            raise InputError("give at least one current or voltage channel", field="channels")
        lengths = {len(r) for r in rows}
        if len(lengths) != 1:
            raise InputError(f"channels have different lengths: {sorted(lengths)}", field="channels")
        return cls(np.vstack(rows), float(fs_hz), tuple(chans), t0_s, Provenance(source=source))


_NEUTRAL_NAMES = re.compile(r"^(i|v|u|curr|current)?[_\s.-]?(n|neutral)$", re.IGNORECASE)


def _phase_from_name(name: str) -> str | None:
    base = re.sub(r"[\[(].*?[\])]", "", name).strip().lower()
    if _NEUTRAL_NAMES.match(base):
        return "n"
    m = re.search(r"(?:^|[^a-z])(?:l|ph|phase)?\s*([123])$", base)
    if m:
        return "abc"[int(m.group(1)) - 1]
    m = re.search(r"(?:^|[_\s.-])(?:l|ph|phase)?([abcrst])$", base) or re.search(
        r"^(?:i|v|u|curr|volt)([abcrst])$", base
    )
    if m:
        return {"a": "a", "b": "b", "c": "c", "r": "a", "s": "b", "t": "c"}[m.group(1)]
    m = re.search(r"([abc])[bca]$", base)  # line-to-line names such as vab
    if m and len(base) <= 4:
        return m.group(1)
    return None


class CaptureStream:
    """A capture read block by block from its file, for records too long to hold in memory.

    It offers what :func:`pqcheck.analyze` needs from a :class:`Capture` (sample rate,
    channels, provenance, findings, :meth:`blocks`) without loading every sample. The file's
    SHA-256 is computed while the blocks are read, so :attr:`provenance` is complete once a
    pass over :meth:`blocks` has finished.

    Parameters
    ----------
    fs_hz : float
        Sample rate. [Hz]
    channels : sequence of Channel
    block_factory : callable
        ``block_factory(block_samples)`` returns an iterator of float64 arrays of shape
        ``(C, n)`` (SI units) and may be called again for another pass.
    provenance : Provenance
    findings : sequence of Finding
    t0_s : float
        Time of the first sample. [s]
    n_samples_hint : int or None
        Expected number of samples (for progress), if known.
    """

    def __init__(self, fs_hz, channels, block_factory, provenance, findings=(), t0_s=0.0,
                 n_samples_hint=None):
        self.fs_hz = float(fs_hz)
        self.channels = tuple(channels)
        self._factory = block_factory
        self.t0_s = float(t0_s)
        self.n_samples_hint = n_samples_hint
        # state shared with copies made by with_channels: a pass over any of them completes
        # the provenance (SHA-256) and findings of all
        self._shared = {"provenance": provenance, "findings": tuple(findings), "head": None,
                        "n": None}

    @property
    def provenance(self) -> Provenance:
        """Source, SHA-256 (complete after a full pass) and reader settings."""
        return self._shared["provenance"]

    @provenance.setter
    def provenance(self, value):
        self._shared["provenance"] = value

    @property
    def findings(self) -> tuple:
        """Findings of the reader (complete after a full pass)."""
        return self._shared["findings"]

    @findings.setter
    def findings(self, value):
        self._shared["findings"] = tuple(value)

    names = Capture.names
    index = Capture.index
    channel = Capture.channel
    by_quantity = Capture.by_quantity

    @property
    def n_samples(self) -> int:
        """Number of samples (known after a full pass; else the hint, else a full count)."""
        if self._shared["n"] is None:
            if self.n_samples_hint is not None:
                return int(self.n_samples_hint)
            self._shared["n"] = sum(b.shape[1] for b in self.blocks())
        return int(self._shared["n"])

    @property
    def duration_s(self) -> float:
        """Record length. [s]"""
        return self.n_samples / self.fs_hz

    def blocks(self, block_samples: int = 1 << 20):
        """Iterate over the samples in blocks, shape (C, n) each. [A] or [V]"""
        count = 0
        for block in self._factory(block_samples):
            if self._shared["head"] is None:
                self._shared["head"] = block[:, : 1 << 16].copy()
            count += block.shape[1]
            yield block
        self._shared["n"] = count

    def head(self, n_samples: int) -> np.ndarray:
        """The first samples (up to 65536 are kept from the first block). [A] or [V]"""
        head = self._shared["head"]
        if head is None or head.shape[1] < min(n_samples, 1 << 16):
            for block in self._factory(max(n_samples, 1 << 16)):
                head = self._shared["head"] = block[:, : max(n_samples, 1 << 16)].copy()
                break
        return head[:, :n_samples]

    @property
    def samples(self) -> np.ndarray:
        """All samples in memory (reads the whole file: avoid for long captures). [A] or [V]"""
        return self.load().samples

    def load(self) -> Capture:
        """Read every block into an in-memory :class:`Capture`."""
        data = np.concatenate(list(self.blocks()), axis=1)
        return Capture(data, self.fs_hz, self.channels, self.t0_s, self.provenance,
                       self.findings)

    def with_channels(self, channels) -> CaptureStream:
        """Copy with other channel descriptions (same source)."""
        other = CaptureStream(self.fs_hz, channels, self._factory, self.provenance,
                              self.findings, self.t0_s, self.n_samples_hint)
        other._shared = self._shared
        return other


def _phases_for(names) -> list:
    """Phases for a list of same-quantity channel names given in phase order."""
    named = [_phase_from_name(n) for n in names]
    if len(names) == 1:
        return ["n" if named[0] == "n" else ""]
    out, order = [], iter("abc")
    for p in named:
        if p == "n":
            out.append("n")
        else:
            out.append(next(order, ""))
    return out


_CURRENT_RE = re.compile(r"^(i|curr|current|amp|amps|ia|ib|ic|il\d|i_)", re.IGNORECASE)
_VOLTAGE_RE = re.compile(r"^(v|u|volt|voltage|ua|ub|uc|ul\d|v_)", re.IGNORECASE)
_TIME_RE = re.compile(r"^(t|time|times|seconds|sec|timestamp|x)$", re.IGNORECASE)


def guess_role(name: str, unit: str = "") -> tuple:
    """Guess ``(quantity, phase)`` of a column from its name and unit.

    Returns ``("other", "")`` when nothing fits; the guess is shown to the user by
    ``pqcheck inspect`` and can be overridden with ``current`` / ``voltage``.
    """
    u = unit.strip()
    base = re.sub(r"[\[(].*?[\])]", "", name).strip()
    if u == "A" or (not u and _CURRENT_RE.match(base)):
        quantity = "current"
    elif u == "V" or (not u and _VOLTAGE_RE.match(base)):
        quantity = "voltage"
    else:
        quantity = "other"
    if _TIME_RE.match(base):
        quantity = "other"
    phase = _phase_from_name(name) or ""
    return quantity, phase


def assign_roles(capture: Capture, *, current=None, voltage=None) -> Capture:
    """Return a copy of ``capture`` with channel roles set by the user.

    Parameters
    ----------
    capture : Capture
    current, voltage : sequence of str or None
        Column names in phase order a, b, c (a neutral current may follow, named ``in`` or
        ``n``). When both are None the guessed roles are kept. When only one is given, the
        other quantity's guessed channels are dropped from analysis (set to ``"other"``).

    Raises
    ------
    InputError
        A name is unknown or listed twice.
    """
    if current is None and voltage is None:
        return capture
    current = list(current or [])
    voltage = list(voltage or [])
    src = capture.provenance.source
    path = src if src != "<memory>" else None
    seen = set()
    for opt, names in (("current", current), ("voltage", voltage)):
        if len(names) > 4:
            raise InputError(
                f"at most 4 channels (phases a, b, c and neutral) per quantity, got {len(names)}",
                path=path,
                field=opt,
            )
        for n in names:
            if n not in capture.names:
                raise InputError(
                    f"no column named {n!r}; the capture has: {', '.join(capture.names)}",
                    path=path,
                    field=opt,
                )
            if n in seen:
                raise InputError(f"column {n!r} is listed twice", path=path, field=opt)
            seen.add(n)
    roles = {}
    for quantity, names in (("current", current), ("voltage", voltage)):
        for n, p in zip(names, _phases_for(names)):
            roles[n] = (quantity, p)
    chans = []
    for c in capture.channels:
        if c.name in roles:
            q, p = roles[c.name]
            unit = "A" if q == "current" else "V"
            guessed = c.guessed or (c.quantity if c.role_source == "guess" else "")
            chans.append(Channel(c.name, q, p, unit, "user", guessed))
        else:
            chans.append(Channel(c.name, "other", c.phase, c.unit, "user", c.guessed))
    return capture.with_channels(chans)


def require_channels(capture: Capture) -> None:
    """Raise CaptureFormatError when no channel is a current or a voltage."""
    if not any(c.quantity in ("current", "voltage") for c in capture.channels):
        src = capture.provenance.source
        raise CaptureFormatError(
            "no current or voltage channel recognised among "
            f"{', '.join(capture.names) or '(none)'}; name them with `current` and `voltage`",
            path=src if src != "<memory>" else None,
            field="channels",
        )

