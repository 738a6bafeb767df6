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

A small fingerprint file maps (absolute path, size, modification time, reader options) to the
SHA-256, so a re-run does not have to hash a large file again; any change to the file changes
the fingerprint and the file is read afresh. Everything is data (JSON and ``numpy.load`` with
``allow_pickle=False``); entries are written to a temporary name and renamed into place, so a
killed run never leaves a half-written entry. Delete the folder at any time to clear it.

Location: the ``cache_dir`` given, else ``$PQCHECK_CACHE_DIR``, else ``$XDG_CACHE_HOME/pqcheck``, else
``~/.cache/pqcheck``. Commands bypass it on request (no cache).
"""

from __future__ import annotations

import functools
import hashlib
import json
import os
import tempfile
from pathlib import Path

import numpy as np

from .. import __version__
from ..capture import CaptureStream, Channel, Provenance
from ..errors import ReportError
from ..files.atomic import write_atomic
from ..findings import Finding

__all__ = ["Cache", "default_cache_dir"]

_FORMAT = 1


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
    """

    def __init__(self, root=None):
        self.root = Path(root) if root is not None else default_cache_dir()

    # ---- fingerprints -------------------------------------------------------------------
    def _fp_path(self, path, reader_opts: dict) -> Path:
        p = Path(path).resolve()
        st = p.stat()
        key = _key({"path": str(p), "size": st.st_size, "mtime": st.st_mtime_ns,
                    "ino": st.st_ino, "opts": reader_opts, "format": _FORMAT})
        return self.root / "fingerprints" / f"{key}.json"

    def known_sha256(self, path, reader_opts: dict) -> str | None:
        """SHA-256 recorded for this exact file state, or None."""
        try:
            return json.loads(self._fp_path(path, reader_opts).read_text())["sha256"]
        except (OSError, ValueError, KeyError):
            return None

    def remember_sha256(self, path, reader_opts: dict, sha256: str) -> None:
        """Record the SHA-256 of the file in its current state."""
        try:
            _atomic_write_bytes(self._fp_path(path, reader_opts),
                                json.dumps({"sha256": sha256}).encode())
        except OSError:
            pass

    # ---- parsed samples -----------------------------------------------------------------
    def _samples_base(self, sha256: str, reader_opts: dict) -> Path:
        return self.root / "samples" / f"{sha256}-{_key(reader_opts)}"

    def open_samples(self, sha256: str, reader_opts: dict, source: str):
        """A :class:`CaptureStream` over cached samples, or None when not cached."""
        base = self._samples_base(sha256, reader_opts)
        meta_path, data_path = base.with_suffix(".json"), base.with_suffix(".f64")
        try:
            meta = json.loads(meta_path.read_text())
            size = data_path.stat().st_size
            n_ch = len(meta["channels"])
            n = meta["n_samples"]
            if meta.get("format") != _FORMAT or size != n * n_ch * 8:
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
        """A cached :class:`~pqcheck.analysis.AnalysisResult`, or None."""
        from ..resultstore import result_from_arrays

        base = self._result_base(sha256, settings)
        try:
            meta = json.loads(base.with_suffix(".json").read_text())
            with np.load(base.with_suffix(".npz"), allow_pickle=False) as npz:
                arrays = {k: npz[k] for k in npz.files}
            return result_from_arrays(meta, arrays)
        except Exception:  # a damaged entry (e.g. a cut-short .npz: BadZipFile) is a miss
            return None

    def save_result(self, sha256: str, settings: dict, result) -> None:
        """Store an analysis result (best effort: a failure to cache is not an error)."""
        import io

        from ..resultstore import result_to_arrays

        base = self._result_base(sha256, settings)
        try:
            meta, arrays = result_to_arrays(result)
            buf = io.BytesIO()
            np.savez(buf, **arrays)
            _atomic_write_bytes(base.with_suffix(".npz"), buf.getvalue())
            _atomic_write_bytes(base.with_suffix(".json"), json.dumps(meta).encode())
        except OSError:
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
        """Move the collected samples into place under their SHA-256."""
        if self.failed or self.fh is None:
            return
        try:
            self.fh.close()
            base = self.cache._samples_base(sha256, reader_opts)
            meta = {
                "format": _FORMAT, "fs_hz": fs_hz, "t0_s": t0_s, "n_samples": self.n,
                "channels": [{"name": c.name, "quantity": c.quantity, "phase": c.phase,
                              "unit": c.unit, "role_source": c.role_source,
                              "guessed": c.guessed} for c in channels],
                "reader": reader, "settings": settings,
                "findings": [f.to_dict() for f in findings],
            }
            os.replace(self.tmp, base.with_suffix(".f64"))
            _atomic_write_bytes(base.with_suffix(".json"), json.dumps(meta, default=str).encode())
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
