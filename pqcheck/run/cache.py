"""On-disk cache of parsed captures and of analysis results, for fast re-runs.

Engineers re-run the same capture with different limits several times. The first run parses
the text file once and keeps two things, both keyed by the file's SHA-256:

- the parsed samples, as raw little-endian float64 rows (``samples/<sha>-<opts>.f64``) with a
  JSON description (sample rate, channels, reader settings and findings), read back block by
  block so memory stays bounded;
- each analysis result (``results/<sha>-<settings>.npz`` + ``.json``), keyed also by every
  analysis setting, the channel map, the pqcheck version and a hash of the analysis code, so
  `check` and `report` with other limits skip the analysis too and results of other code are
  never served.

A small fingerprint file maps (absolute path, device, inode, size, modification and change
times, reader options) to the SHA-256, so a re-run does not have to hash a large file again;
it also holds the hash of the file's first and last 64 KiB, compared on every use. A rewrite
in place that keeps the size and puts the old modification time back still changes the change
time (which no program can set), so the file is read afresh.

Trust: every entry carries a keyed checksum (HMAC-SHA256, with a secret made on first use in
``secret.key`` in the cache folder, readable by its owner only) over its name and its stored
numbers. An entry that was edited, damaged or copied under another capture's name fails the
check: it is removed, a notice says so (:attr:`Cache.notices`, printed by the command line),
and the result is computed afresh. The checksum guards against edits and accidents, not
against someone who can also read the secret. Everything is data (JSON and ``numpy.load`` with
``allow_pickle=False``); entries are written to a temporary name and renamed into place, so a
killed run never leaves a half-written entry. Delete the folder at any time to clear it.

Location: the ``cache_dir`` given, else ``$PQCHECK_CACHE_DIR``, else ``$XDG_CACHE_HOME/pqcheck``, else
``~/.cache/pqcheck``. Commands bypass it on request (no cache).
"""

from __future__ import annotations

import contextlib
import functools
import hashlib
import hmac
import io
import json
import os
import secrets
import stat
import tempfile
from pathlib import Path

import numpy as np

from .. import __version__
from ..capture import CaptureStream, Channel, Provenance
from ..errors import ReportError
from ..files.atomic import OutputSet, write_atomic
from ..findings import Finding

__all__ = ["Cache", "default_cache_dir"]

_FORMAT = 2
"""Entry format: 2 adds the keyed checksum (format-1 entries are misses)."""

_SECRET = "secret.key"
_SECRET_BYTES = 32
_ENDS = 1 << 16


def default_cache_dir() -> Path:
    """The cache folder used when none is given."""
    env = os.environ.get("PQCHECK_CACHE_DIR")
    if env:
        return Path(env)
    xdg = os.environ.get("XDG_CACHE_HOME")
    return (Path(xdg) if xdg else Path.home() / ".cache") / "pqcheck"


def _key(obj) -> str:
    return hashlib.sha256(json.dumps(obj, sort_keys=True, default=str).encode()).hexdigest()[:24]


def _atomic_write_bytes(path: Path, data: bytes) -> None:
    """Write a cache file atomically (replacing an older one) with :mod:`pqcheck.files.atomic`.

    Raises ``OSError`` on any failure, which every caller treats as "not cached"."""
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        write_atomic(path, data, force=True)
    except ReportError as exc:
        raise OSError(str(exc)) from exc


def _finding_from(d: dict) -> Finding:
    return Finding(d["code"], d["severity"], d["message"], tuple(d.get("channels", ())),
                   tuple(d.get("orders", ())), d.get("value"), d.get("unit", ""))


_CODE = ("analysis.py", "metrics.py", "quality.py", "capture.py", "dsp", "readers")


@functools.lru_cache(maxsize=1)
def _code_fingerprint() -> str:
    """Hash of the source of every module that computes a result, so that a cached result is
    never served to code that would compute it differently (an edited checkout keeps its
    version number)."""
    root = Path(__file__).parent.parent  # the pqcheck package
    h = hashlib.sha256()
    for name in _CODE:
        p = root / name
        files = sorted(p.glob("*.py")) if p.is_dir() else [p]
        for f in files:
            try:
                h.update(f.name.encode())
                h.update(f.read_bytes())
            except OSError:
                h.update(b"?")
    return h.hexdigest()[:16]


class Cache:
    """The cache folder.

    Parameters
    ----------
    root : str or Path or None
        Folder; :func:`default_cache_dir` when None.

    Attributes
    ----------
    notices : list of str
        What the cache found wrong while it was used (an entry that failed its checksum and
        was recomputed); the command line prints them.
    """

    def __init__(self, root=None):
        self.root = Path(root) if root is not None else default_cache_dir()
        self.notices: list = []
        self._key_bytes = None

    # ---- integrity ------------------------------------------------------------------------
    def _secret(self) -> bytes | None:
        """The cache's own secret (``secret.key``, 32 random bytes, made on first use), or
        None when it cannot be read or made (the cache is then not used)."""
        if self._key_bytes is not None:
            return self._key_bytes
        path = self.root / _SECRET
        for _ in range(2):
            try:
                st = os.lstat(path)
                if not stat.S_ISREG(st.st_mode) or st.st_size != _SECRET_BYTES:
                    return None
                with open(path, "rb") as fh:
                    data = fh.read(_SECRET_BYTES + 1)
                if len(data) != _SECRET_BYTES:
                    return None
                self._key_bytes = data
                return data
            except FileNotFoundError:
                pass
            except OSError:
                return None
            try:  # make it: written whole under a temporary name, then linked into place
                self.root.mkdir(parents=True, exist_ok=True)
                tmp = self.root / f".{_SECRET}.{secrets.token_hex(4)}.part"
                fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600)
                try:
                    with os.fdopen(fd, "wb") as fh:
                        fh.write(secrets.token_bytes(_SECRET_BYTES))
                    with contextlib.suppress(FileExistsError):
                        os.link(tmp, path)  # another run may have made it meanwhile
                finally:
                    tmp.unlink(missing_ok=True)
            except OSError:
                return None
        return None

    def _mac(self, kind: str, name: str, *parts) -> str | None:
        key = self._secret()
        if key is None:
            return None
        h = hmac.new(key, f"{kind}\0{name}\0".encode(), hashlib.sha256)
        for part in parts:
            h.update(part)
        return h.hexdigest()

    def _rejected(self, what: str, files) -> None:
        names = ", ".join(sorted({Path(f).name for f in files}))
        self.notices.append(f"{what} in the cache ({names}) does not match its keyed checksum "
                            "(edited or damaged); it was not used and was recomputed")
        for f in files:
            with contextlib.suppress(OSError):
                Path(f).unlink()

    @staticmethod
    def _wrap(meta_text: str, mac: str) -> bytes:
        return json.dumps({"format": _FORMAT, "meta": meta_text, "mac": mac}).encode()

    @staticmethod
    def _unwrap(raw: bytes):
        doc = json.loads(raw)
        if doc.get("format") != _FORMAT:
            raise ValueError("other format")
        return doc["meta"], doc["mac"]

    # ---- fingerprints -------------------------------------------------------------------
    def _fp_path(self, path, reader_opts: dict) -> Path:
        """The record of the state of every file the capture is read from (a ``.npy`` and its
        side-car, as the digest covers both: an edited side-car is another capture)."""
        from ..readers import capture_files

        states = []
        for f in capture_files(Path(path).resolve()):
            st = Path(f).stat()
            states.append({"path": str(f), "size": st.st_size, "mtime": st.st_mtime_ns,
                           "ctime": st.st_ctime_ns, "ino": st.st_ino, "dev": st.st_dev})
        key = _key({"files": states, "opts": reader_opts, "format": _FORMAT})
        return self.root / "fingerprints" / f"{key}.json"

    @staticmethod
    def _ends(path) -> str:
        """SHA-256 of the first and last 64 KiB of each file of the capture: a cheap check of
        the content."""
        from ..readers import capture_files

        h = hashlib.sha256()
        for f in capture_files(path):
            with open(f, "rb") as fh:
                h.update(fh.read(_ENDS))
                size = os.fstat(fh.fileno()).st_size
                if size > _ENDS:
                    fh.seek(max(_ENDS, size - _ENDS))
                    h.update(fh.read(_ENDS))
        return h.hexdigest()

    def known_sha256(self, path, reader_opts: dict) -> str | None:
        """SHA-256 recorded for this exact file state, or None.

        The state is the path, device, inode, size, modification and change times (a rewrite
        that restores the old modification time still changes the change time), and the hash
        of the file's first and last 64 KiB is compared too; the record carries a keyed
        checksum."""
        try:
            fp = self._fp_path(path, reader_opts)
            raw = fp.read_bytes()
        except (OSError, ValueError):
            return None
        try:
            text, mac = self._unwrap(raw)
            rec = json.loads(text)
            ends = self._ends(path)
        except (OSError, ValueError, KeyError, AttributeError):
            return None
        good = self._mac("fingerprint", fp.name, text.encode())
        if good is None:
            return None
        if not hmac.compare_digest(good, mac):
            self._rejected("a file fingerprint", [fp])
            return None
        if rec.get("ends") != ends:  # same times and size, other bytes
            return None
        return rec.get("sha256")

    def remember_sha256(self, path, reader_opts: dict, sha256: str) -> None:
        """Record the SHA-256 of the file in its current state."""
        try:
            fp = self._fp_path(path, reader_opts)
            text = json.dumps({"sha256": sha256, "ends": self._ends(path)})
            mac = self._mac("fingerprint", fp.name, text.encode())
            if mac is not None:
                _atomic_write_bytes(fp, self._wrap(text, mac))
        except OSError:
            pass

    # ---- parsed samples -----------------------------------------------------------------
    def _samples_base(self, sha256: str, reader_opts: dict) -> Path:
        return self.root / "samples" / f"{sha256}-{_key(reader_opts)}"

    def _samples_mac(self, base: Path, text: str, data_path: Path) -> str | None:
        key = self._secret()
        if key is None:
            return None
        h = hmac.new(key, f"samples\0{base.name}\0".encode(), hashlib.sha256)
        h.update(text.encode())
        h.update(b"\0")
        with open(data_path, "rb") as fh:
            for block in iter(lambda: fh.read(1 << 22), b""):
                h.update(block)
        return h.hexdigest()

    def open_samples(self, sha256: str, reader_opts: dict, source: str):
        """A :class:`CaptureStream` over cached samples, or None when not cached.

        The samples are checked against the entry's keyed checksum first (one sequential read
        of the binary file, much faster than parsing the text again)."""
        base = self._samples_base(sha256, reader_opts)
        meta_path, data_path = base.with_suffix(".json"), base.with_suffix(".f64")
        try:
            text, mac = self._unwrap(meta_path.read_bytes())
            meta = json.loads(text)
            size = data_path.stat().st_size
            n_ch = len(meta["channels"])
            n = meta["n_samples"]
            if size != n * n_ch * 8:
                self._rejected("parsed samples", [meta_path, data_path])
                return None
            good = self._samples_mac(base, text, data_path)
            if good is None:
                return None
            if not hmac.compare_digest(good, mac):
                self._rejected("parsed samples", [meta_path, data_path])
                return None
            chans = tuple(Channel(**c) for c in meta["channels"])
            settings = dict(meta["settings"])
            settings["cache"] = "samples read from cache"
            prov = Provenance(source=source, sha256=sha256, reader=meta["reader"],
                              settings=settings)
            findings = tuple(_finding_from(f) for f in meta["findings"])
        except Exception:  # a damaged or foreign entry is a miss, never an error
            return None

        def factory(block_samples):
            with open(data_path, "rb") as fh:
                while True:
                    rows = np.fromfile(fh, dtype="<f8", count=block_samples * n_ch)
                    if rows.size == 0:
                        return
                    yield np.ascontiguousarray(rows.reshape(-1, n_ch).T)

        return CaptureStream(meta["fs_hz"], chans, factory, prov, findings, meta["t0_s"], n)

    def sample_writer(self, sha_hint: str | None = None):
        """A writer that collects blocks into a temporary file; call ``commit`` at the end."""
        return _SampleWriter(self)

    # ---- analysis results ---------------------------------------------------------------
    def _result_base(self, sha256: str, settings: dict) -> Path:
        key = _key({"s": settings, "v": __version__, "code": _code_fingerprint()})
        return self.root / "results" / f"{sha256}-{key}"

    def load_result(self, sha256: str, settings: dict):
        """A cached :class:`~pqcheck.analysis.AnalysisResult`, or None.

        An entry whose numbers do not match its keyed checksum (edited, damaged, or copied
        from another capture's entry) is not used: it is removed, a notice is recorded in
        :attr:`notices`, and the caller recomputes."""
        from ..resultstore import result_from_arrays

        base = self._result_base(sha256, settings)
        json_path, npz_path = base.with_suffix(".json"), base.with_suffix(".npz")
        try:
            text, mac = self._unwrap(json_path.read_bytes())
            blob = npz_path.read_bytes()
        except (OSError, ValueError, KeyError, TypeError, AttributeError):
            return None
        good = self._mac("result", base.name, text.encode(), b"\0", blob)
        if good is None:
            return None
        if not hmac.compare_digest(good, mac):
            self._rejected("an analysis result", [json_path, npz_path])
            return None
        try:
            with np.load(io.BytesIO(blob), allow_pickle=False) as npz:
                arrays = {k: npz[k] for k in npz.files}
            return result_from_arrays(json.loads(text), arrays)
        except Exception:  # a damaged entry (e.g. a cut-short .npz: BadZipFile) is a miss
            return None

    def save_result(self, sha256: str, settings: dict, result) -> None:
        """Store an analysis result (best effort: a failure to cache is not an error)."""
        from ..resultstore import result_to_arrays

        base = self._result_base(sha256, settings)
        try:
            meta, arrays = result_to_arrays(result)
            buf = io.BytesIO()
            np.savez(buf, **arrays)
            blob = buf.getvalue()
            text = json.dumps(meta)
            mac = self._mac("result", base.name, text.encode(), b"\0", blob)
            if mac is None:
                return
            base.parent.mkdir(parents=True, exist_ok=True)
            outputs = OutputSet(force=True)  # both files or neither
            outputs.put(outputs.add(base.with_suffix(".npz")), blob)
            outputs.put(outputs.add(base.with_suffix(".json")), self._wrap(text, mac))
            outputs.commit()
        except (OSError, ValueError):
            pass


class _SampleWriter:
    """Tee of parsed blocks into the cache; nothing is visible until :meth:`commit`."""

    def __init__(self, cache: Cache):
        self.cache = cache
        self.fh = None
        self.tmp = None
        self.n = 0
        self.failed = False

    def write(self, block) -> None:
        """Append a (C, n) block. [A] or [V]"""
        if self.failed:
            return
        try:
            if self.fh is None:
                d = self.cache.root / "samples"
                d.mkdir(parents=True, exist_ok=True)
                fd, self.tmp = tempfile.mkstemp(dir=d, prefix=".tmp-", suffix=".f64")
                self.fh = os.fdopen(fd, "wb")
            np.ascontiguousarray(np.asarray(block, dtype="<f8").T).tofile(self.fh)
            self.n += block.shape[1]
        except OSError:
            self.abort()
            self.failed = True

    def commit(self, sha256, reader_opts, *, fs_hz, channels, t0_s, reader, settings,
               findings) -> None:
        """Move the collected samples into place under their SHA-256, with the keyed
        checksum of the description and the samples."""
        if self.failed or self.fh is None:
            return
        try:
            self.fh.close()
            base = self.cache._samples_base(sha256, reader_opts)
            meta = {
                "fs_hz": fs_hz, "t0_s": t0_s, "n_samples": self.n,
                "channels": [{"name": c.name, "quantity": c.quantity, "phase": c.phase,
                              "unit": c.unit, "role_source": c.role_source,
                              "guessed": c.guessed} for c in channels],
                "reader": reader, "settings": settings,
                "findings": [f.to_dict() for f in findings],
            }
            text = json.dumps(meta, default=str)
            mac = self.cache._samples_mac(base, text, Path(self.tmp))
            if mac is None:
                self.abort()
                return
            os.replace(self.tmp, base.with_suffix(".f64"))
            self.tmp = None
            _atomic_write_bytes(base.with_suffix(".json"), self.cache._wrap(text, mac))
        except OSError:
            self.abort()

    def abort(self) -> None:
        """Drop the temporary file."""
        try:
            if self.fh is not None and not self.fh.closed:
                self.fh.close()
        except OSError:
            pass
        if self.tmp:
            Path(self.tmp).unlink(missing_ok=True)
