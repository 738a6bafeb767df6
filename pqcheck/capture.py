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
    evidence : str
        Why the reader guessed this quantity and phase (shown by ``inspect``); empty when
        nothing was guessed.
    """

    name: str
    quantity: str = "other"
    phase: str = ""
    unit: str = ""
    role_source: str = "guess"
    guessed: str = ""
    evidence: str = field(default="", compare=False)

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

    @property
    def source(self) -> str:
        """The capture's file (``provenance.source``)."""
        return self.provenance.source

    @property
    def sha256_known(self) -> str:
        """The SHA-256 of the source (``provenance.sha256``; ``""`` when none)."""
        return self.provenance.sha256

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
    """Phase named in a channel name, on strong evidence only (see :func:`phase_evidence`)."""
    return phase_evidence(name)[0]


# A phase is read from a name only where the name says "phase": L1/L2/L3, ph1, phase 2,
# a quantity letter followed by the phase (ia, v_b, U1, IL3, vab), or R/S/T, L1/L2/L3 or
# A/B/C as the last word of a multi-word name ("Line current L2", "Voltage R"). A bare digit
# ("Channel 1", "CH2", "1") or a de-duplication suffix ("ia_3") is not a phase.
_PHASE_WORD = re.compile(r"(?:^|[\s_.-])(?:l|ph|phase)\s*[_-]?([123])$")
_PHASE_QTY_DIGIT = re.compile(r"^(?:i|v|u|il|ul|vl|i_l|u_l|v_l|i_|u_|v_)([123])$")
_PHASE_QTY_LETTER = re.compile(r"^(?:i|v|u|curr|volt|current|voltage)[_\s.-]?(?:l|ph)?([abcrst])$")
_PHASE_LAST_WORD = re.compile(r"[\s_.-](?:l|ph|phase)?\s*([abcrst])$")
_PHASE_LL = re.compile(r"^(?:v|u)?[_\s.-]?(ab|bc|ca)$")
_LETTER_PHASE = {"a": "a", "b": "b", "c": "c", "r": "a", "s": "b", "t": "c"}


def phase_evidence(name: str) -> tuple:
    """``(phase or None, evidence)`` read from a channel name; evidence says what matched."""
    base = re.sub(r"[\[(].*?[\])]", "", name).strip().lower()
    if _NEUTRAL_NAMES.match(base):
        return "n", f"name {name!r} says neutral"
    m = _PHASE_WORD.search(base) or _PHASE_QTY_DIGIT.match(base)
    if m:
        return "abc"[int(m.group(1)) - 1], f"name {name!r} ends in phase {m.group(0).strip()!r}"
    m = _PHASE_LL.match(base)
    if m:
        return m.group(1)[0], f"name {name!r} is the line-to-line pair {m.group(1)!r}"
    m = _PHASE_QTY_LETTER.match(base) or _PHASE_QTY_LETTER.match(re.sub(r"_\d+$", "", base))
    if m:  # (the second: ia_3, a name made unique by a number suffix, is still phase a)
        return _LETTER_PHASE[m.group(1)], f"name {name!r} reads quantity + phase {m.group(1)!r}"
    m = _PHASE_LAST_WORD.search(base)
    # "Channel A", "CH B", "Input C", "Trace A": a scope's channel letter, not a phase
    if m and re.search(r"[a-z]{2,}", base[: m.start()]) and not re.search(
            r"(?:^|[\s_.-])(?:channel|chan|ch|input|inp|trace|probe|signal|source)[\s_.-]*$",
            base[: m.start()]):
        return _LETTER_PHASE[m.group(1)], (f"phase letter {m.group(1).upper()!r} is the last "
                                           f"word of {name!r}")
    return None, ""


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
        """Source, SHA-256 (complete after a full pass, or once a hash running beside the
        reading has finished: see :meth:`hash_pending`) and reader settings."""
        pending = self._shared.get("hash")
        if pending is not None:
            self._shared["hash"] = None
            self._shared["provenance"] = replace(
                self._shared["provenance"], sha256=pending.result())
        return self._shared["provenance"]

    @property
    def source(self) -> str:
        """The capture's file (``provenance.source``), without waiting for a SHA-256 still
        being computed beside the reading."""
        return self._shared["provenance"].source

    @property
    def sha256_known(self) -> str:
        """The SHA-256 if it is known without waiting (recorded, or a hash beside the reading
        that has finished), else ``""``."""
        pending = self._shared.get("hash")
        if pending is not None and not pending.done():
            return ""
        return self.provenance.sha256

    @property
    def hashed_in_this_run(self) -> bool:
        """True when the SHA-256 is (being) computed beside the reading, not taken from a
        record: the digest is then worth recording for the file's state, even when the hash
        had already finished by the time it was first asked for."""
        return bool(self._shared.get("hashed_here"))

    def hash_pending(self, hasher) -> None:
        """Take the SHA-256 from ``hasher`` (an object whose ``result()`` returns the hex
        digest, computing it on another thread, and ``done()`` tells whether it has) when
        :attr:`provenance` is first read."""
        self._shared["hash"] = hasher
        self._shared["hashed_here"] = True  # kept once the digest is taken

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
        # the shared state, not the provenance property: a pending hash is not waited for
        other = CaptureStream(self.fs_hz, channels, self._factory, self._shared["provenance"],
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
_TIME_RE = re.compile(
    r"^(t|time|times|seconds?|secs?|timestamp|x|x-axis|x axis|xaxis|time_?s|t_s|time_ms|t_ms"
    r"|time_us|t_us)$", re.IGNORECASE)


def guess_role(name: str, unit: str = "") -> tuple:
    """Guess ``(quantity, phase)`` of a column from its name and unit.

    Returns ``("other", "")`` when nothing fits; the guess is shown to the user by
    ``pqcheck inspect`` and can be overridden by naming the current and voltage columns.
    """
    quantity, phase, _ = guess_role_evidence(name, unit)
    return quantity, phase


def guess_role_evidence(name: str, unit: str = "") -> tuple:
    """``(quantity, phase, evidence)``: :func:`guess_role` and why."""
    u = unit.strip()
    base = re.sub(r"[\[(].*?[\])]", "", name).strip()
    why = []
    if _TIME_RE.match(base):
        return "other", "", f"name {name!r} is a time name"
    if u == "A" or (not u and _CURRENT_RE.match(base)):
        quantity = "current"
        why.append("unit A" if u == "A" else f"name {name!r} starts like a current")
    elif u == "V" or (not u and _VOLTAGE_RE.match(base)):
        quantity = "voltage"
        why.append("unit V" if u == "V" else f"name {name!r} starts like a voltage")
    else:
        quantity = "other"
    phase, pwhy = phase_evidence(name)
    if phase:
        why.append(pwhy)
    return quantity, phase or "", "; ".join(why)


def _did_you_mean(name: str, names) -> str:
    """``" (did you mean 'ia'?)"`` for a column name given in another case or slightly
    misspelt (names are matched exactly: a record names its columns as the file does)."""
    import difflib

    folded = {n.casefold(): n for n in names}
    hits = [folded[name.casefold()]] if name.casefold() in folded else [
        folded[m] for m in difflib.get_close_matches(name.casefold(), list(folded), n=2,
                                                     cutoff=0.6)]
    return f" (did you mean {' or '.join(repr(h) for h in hits)}?)" if hits else ""


def assign_roles(capture: Capture, *, current=None, voltage=None) -> Capture:
    """Return a copy of ``capture`` with channel roles set by the user.

    Parameters
    ----------
    capture : Capture
    current, voltage : sequence of str or None
        Column names in phase order a, b, c (a neutral current may follow, named ``in`` or
        ``n``). When both are None the guessed roles are kept. When only one is given, the
        other quantity's recognised (guessed) channels keep their role, so naming the
        currents never silently drops a recognised voltage; give both to set every role.

    Raises
    ------
    InputError
        A name is unknown or listed twice.
    """
    if current is None and voltage is None:
        return capture
    given_current, given_voltage = current, voltage
    current = list(current or [])
    voltage = list(voltage or [])
    src = capture.source
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
                    f"no column named {n!r}{_did_you_mean(n, capture.names)}; the capture "
                    f"has: {', '.join(capture.names)}",
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
    given_q = {q for q, names in (("current", given_current), ("voltage", given_voltage))
               if names is not None}
    chans = []
    for c in capture.channels:
        if c.name in roles:
            q, p = roles[c.name]
            unit = "A" if q == "current" else "V"
            guessed = c.guessed or (c.quantity if c.role_source == "guess" else "")
            chans.append(Channel(c.name, q, p, unit, "user", guessed, c.evidence))
        elif c.quantity in ("current", "voltage") and c.quantity not in given_q:
            chans.append(c)  # a recognised channel of the quantity the user did not name
        else:
            chans.append(Channel(c.name, "other", c.phase, c.unit, "user", c.guessed,
                                 c.evidence))
    return capture.with_channels(chans)


def require_channels(capture: Capture) -> None:
    """Raise CaptureFormatError when no channel is a current or a voltage."""
    if not any(c.quantity in ("current", "voltage") for c in capture.channels):
        src = capture.source
        raise CaptureFormatError(
            "no current or voltage channel recognised among "
            f"{', '.join(capture.names) or '(none)'}; name them with `current` and `voltage`",
            path=src if src != "<memory>" else None,
            field="channels",
        )

