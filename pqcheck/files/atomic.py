"""Atomic file writing that never overwrites by accident, one file or a set of them.

Every command that writes files goes through an :class:`OutputSet` (or the one-file helpers
:func:`atomic_open` and :func:`write_atomic`, which make a set of one). A set is written all
or nothing:

1. Check (:meth:`OutputSet.add`, before any work): every target is refused, with
   :class:`~pqcheck.errors.ReportError` (exit code 2 on the command line), when

   - it is one of the command's inputs (:meth:`OutputSet.protect`; compared by device and
     inode, so a hard link or a symbolic link to an input counts), whatever ``force`` says;
   - it is not a regular file: a folder, a device node, a FIFO, a socket, or a symbolic link
     (links are never written through nor replaced: name the file itself), whatever ``force``
     says;
   - it exists and ``force`` is false;
   - its folder is missing or not writable (a folder of a set that does not exist yet, such as
     a CSV folder, must be creatable: its parent exists and is writable);
   - two targets of the set are the same file.
2. Stage (:meth:`OutputSet.commit`): every file is written to a hidden temporary
   ``.<name>.<random>.part`` in its target's folder and flushed to disk. Any failure (disk
   full, permissions, an exception, SIGINT or SIGTERM) removes every temporary and every
   folder the set created; the targets are untouched.
3. Commit: each temporary takes its target's name (a hard link when the name must not exist,
   so a file created meanwhile is never replaced; a rename over an earlier output with
   ``force``, whose previous content is kept under a hidden name until the whole set is in
   place). A failure, or SIGINT/SIGTERM arriving in this short phase (the handlers are
   deferred, in the main thread, until it ends), rolls the set back: new names are removed,
   earlier outputs restored; then the signal takes its course.

SIGKILL cannot be caught: a killed run may leave hidden ``.part`` temporaries (never a file
under a target's name that is incomplete); killed inside the commit phase, some targets of a
set may be new and others old.
"""

from __future__ import annotations

import contextlib
import os
import secrets
import signal
import stat
import threading
from pathlib import Path

from ..errors import ReportError
from .read import describe_mode

__all__ = ["OutputSet", "check_target", "atomic_open", "write_atomic", "same_file"]


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


def _named(path: Path, option: str | None) -> str:
    return f"{option} {path}" if option else str(path)


def _identity(path) -> tuple | None:
    try:
        st = os.stat(path)
    except (OSError, ValueError):
        return None
    return (st.st_dev, st.st_ino)


def same_file(a, b) -> bool:
    """Whether two paths name the same existing file (device and inode; links followed)."""
    ia = _identity(a)
    return ia is not None and ia == _identity(b)


_kind = describe_mode  # one wording for a file that is not a regular file


class _Target:
    def __init__(self, path: Path, option: str | None, folder_made_by_set: Path | None):
        self.path = path
        self.option = option
        self.folder = folder_made_by_set  # the set creates this folder (it does not exist)
        self.content = None  # bytes, or a callable writing to a binary file handle
        self.tmp: str | None = None
        self.backup: str | None = None
        self.committed = False

    @property
    def named(self) -> str:
        return _named(self.path, self.option)


class OutputSet:
    """Files written all together or not at all (see the module notes).

    Parameters
    ----------
    force : bool
        Replace earlier outputs (never inputs, never files that are not regular files).
    protect : iterable of str or os.PathLike
        Input files the set must never replace (see :meth:`protect`).

    Examples
    --------
    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> s = OutputSet()
    >>> _ = s.add(d / "a.txt"); _ = s.add(d / "b.txt")
    >>> s.put(d / "a.txt", "one"); s.put(d / "b.txt", b"two")
    >>> [p.name for p in s.commit()]
    ['a.txt', 'b.txt']
    >>> (d / "b.txt").read_text()
    'two'
    """

    def __init__(self, *, force: bool = False, protect=()):
        self.force = force
        self._inputs: dict = {}  # (dev, ino) -> path as given
        self._targets: list = []
        self._folders: list = []  # folders the set will create, in order
        self._made: list = []
        self.protect(protect)

    # ---- checks ---------------------------------------------------------------------------
    def protect(self, paths, *, what: str = "an input of this command") -> None:
        """Record input files that no target may be; re-checks the targets added so far.

        Parameters
        ----------
        paths : iterable of str or os.PathLike
            Files (missing ones are ignored: they cannot be overwritten).
        what : str
            How the message describes them.

        Raises
        ------
        ReportError
            A target already added is one of them.
        """
        for p in paths:
            if p is None:
                continue
            ident = _identity(p)
            if ident is not None:
                self._inputs.setdefault(ident, (str(p), what))
        for t in self._targets:
            self._check_input(t.path, t.option)

    def _check_input(self, path: Path, option: str | None) -> None:
        hit = self._inputs.get(_identity(path))
        if hit is not None:
            shown, what = hit
            same = "" if os.path.abspath(shown) == os.path.abspath(path) else f" ({shown})"
            raise ReportError(f"{_named(path, option)}: is {what}{same}; an input is never "
                              "replaced: choose another output name (nothing was written)")

    def _check_file(self, path: Path, option: str | None) -> None:
        named = _named(path, option)
        self._check_input(path, option)
        try:
            st = os.lstat(path)
        except FileNotFoundError:
            st = None
        except OSError as exc:
            raise ReportError(f"{named}: cannot be checked: {exc.strerror or exc}") from None
        if st is not None:
            if stat.S_ISLNK(st.st_mode):
                raise ReportError(
                    f"{named}: is a symbolic link; pqcheck neither writes through nor replaces "
                    "links: give the path of the file itself, or remove the link")
            if stat.S_ISDIR(st.st_mode):
                raise ReportError(f"{named}: is a folder; give a file name")
            if not stat.S_ISREG(st.st_mode):
                raise ReportError(f"{named}: is {_kind(st.st_mode)}, not a regular file; "
                                  "pqcheck writes only regular files: give another name")
            if not self.force:
                raise ReportError(f"{named}: file exists; give `force` to replace it "
                                  "(left unchanged)")

    @staticmethod
    def _check_folder(folder: Path, named: str) -> None:
        if not folder.is_dir():
            raise ReportError(f"{named}: folder {folder} does not exist; create it first")
        if not os.access(folder, os.W_OK | os.X_OK):
            raise ReportError(f"{named}: folder {folder} is not writable (read-only or no "
                              "permission); choose another folder (nothing was written)")

    def add(self, path, option: str | None = None) -> Path:
        """Add a file to the set, checking it now (before any work is done).

        Parameters
        ----------
        path : str or os.PathLike
            File to write.
        option : str or None
            Command-line option that named it, for messages (e.g. ``"-o"``).

        Returns
        -------
        pathlib.Path

        Raises
        ------
        ReportError
            See the module notes.
        """
        p = Path(path)
        parent = p.parent if str(p.parent) else Path(".")
        made = next((f for f in self._folders if f == parent), None)
        if made is None:
            self._check_file(p, option)
            self._check_folder(parent, _named(p, option))
        for t in self._targets:
            if os.path.abspath(t.path) == os.path.abspath(p) or same_file(t.path, p):
                both = (f"{option} and {t.option}" if option and t.option and
                        option != t.option else f"{t.named} and {p}")
                raise ReportError(f"{both} name the same file ({p}); give two different paths")
        self._targets.append(_Target(p, option, made))
        return p

    def add_folder(self, folder, names, option: str | None = None) -> list:
        """Add files ``folder/<name>`` for each name; the folder is created at commit time
        when it does not exist (its parent must exist and be writable).

        Returns
        -------
        list of pathlib.Path
            The files, in the order of ``names``.
        """
        d = Path(folder)
        named = _named(d, option)
        if os.path.lexists(d) and not d.is_dir():
            raise ReportError(f"{named}: exists and is not a folder; give a folder name")
        if not d.exists():
            parent = d.parent if str(d.parent) else Path(".")
            if not parent.is_dir():
                raise ReportError(f"{named}: folder {parent} does not exist, so {d.name} "
                                  "cannot be made in it; create it first")
            if not os.access(parent, os.W_OK | os.X_OK):
                raise ReportError(f"{named}: cannot make the folder: {parent} is not writable "
                                  "(read-only or no permission); choose another folder")
            self._folders.append(d)
        return [self.add(d / n, option) for n in names]

    @property
    def paths(self) -> list:
        """The files of the set, in the order added."""
        return [t.path for t in self._targets]

    # ---- content --------------------------------------------------------------------------
    def _target(self, path) -> _Target:
        p = Path(path)
        for t in self._targets:
            if t.path == p:
                return t
        raise KeyError(f"{p} is not in the output set")

    def put(self, path, content) -> None:
        """Give the content of a file of the set: bytes, str (UTF-8) or a callable that writes
        it to a binary file handle (called at commit time)."""
        t = self._target(path)
        t.content = content.encode("utf-8") if isinstance(content, str) else content

    # ---- writing --------------------------------------------------------------------------
    def commit(self) -> list:
        """Write every file of the set, all or nothing (see the module notes).

        Returns
        -------
        list of pathlib.Path
            The files written, in the order added.

        Raises
        ------
        ReportError
            A file could not be written (nothing of the set was left behind), or a target
            changed since it was checked (appeared, became a link or an input).
        """
        missing = [t.named for t in self._targets if t.content is None]
        if missing:
            raise ValueError(f"no content given for {', '.join(missing)}")
        for t in self._targets:  # again: things may have changed while the work ran
            if t.folder is None:
                self._check_file(t.path, t.option)
        try:
            self._stage()
            with _deferred_signals() as pending:
                try:
                    self._swap()
                except BaseException:
                    self._roll_back()
                    raise
                if pending:
                    self._roll_back()
                else:
                    self._drop_backups()
            if pending:  # the handlers ran and did not stop the program
                raise ReportError("interrupted while writing; nothing was written")
        finally:
            self._clean()
        return self.paths

    def _stage(self) -> None:
        for d in self._folders:
            try:
                d.mkdir()
            except FileExistsError:
                if not d.is_dir():
                    raise ReportError(f"{d}: exists and is not a folder") from None
                continue
            except OSError as exc:
                raise ReportError(f"{d}: cannot make the folder: {exc.strerror or exc} "
                                  "(nothing was written)") from None
            self._made.append(d)
        mode = 0o666 & ~_umask()
        for t in self._targets:
            parent = t.path.parent if str(t.path.parent) else Path(".")
            try:
                fd = _create_temp(t, parent)
                with os.fdopen(fd, "wb") as fh:
                    if callable(t.content):
                        t.content(fh)
                    else:
                        fh.write(t.content)
                    fh.flush()
                    os.fsync(fh.fileno())
                os.chmod(t.tmp, mode)
            except ReportError:
                raise
            except OSError as exc:
                raise ReportError(f"{t.named}: could not be written: {exc.strerror or exc}; "
                                  "nothing was written") from exc

    def _swap(self) -> None:
        for t in self._targets:
            if os.path.lexists(t.path):
                if not self.force:
                    raise ReportError(f"{t.named}: file appeared while writing; give `force` "
                                      "to replace it (nothing was written)")
                t.backup = t.tmp[:-len(".part")] + ".old"
                try:
                    os.link(t.path, t.backup)
                except OSError:  # no hard links here: keep the old file by renaming it
                    os.replace(t.path, t.backup)
                try:
                    os.replace(t.tmp, t.path)
                except OSError as exc:
                    raise ReportError(f"{t.named}: could not be written: "
                                      f"{exc.strerror or exc}; nothing was written") from exc
                t.tmp = None
            else:
                try:
                    os.link(t.tmp, t.path)
                except FileExistsError:
                    raise ReportError(f"{t.named}: file appeared while writing; give `force` "
                                      "to replace it (nothing was written)") from None
                except OSError:  # a file system without hard links
                    if os.path.lexists(t.path):
                        raise ReportError(f"{t.named}: file appeared while writing "
                                          "(nothing was written)") from None
                    os.replace(t.tmp, t.path)
                    t.tmp = None
            t.committed = True

    def _roll_back(self) -> None:
        for t in reversed(self._targets):
            if not t.committed:
                if t.backup and not os.path.lexists(t.path):
                    with contextlib.suppress(OSError):
                        os.replace(t.backup, t.path)
                        t.backup = None
                continue
            with contextlib.suppress(OSError):
                if t.backup:
                    os.replace(t.backup, t.path)
                    t.backup = None
                else:
                    os.unlink(t.path)
            t.committed = False

    def _drop_backups(self) -> None:
        for t in self._targets:
            if t.backup:
                with contextlib.suppress(OSError):
                    os.unlink(t.backup)
                t.backup = None

    def _clean(self) -> None:
        for t in self._targets:
            for name in (t.tmp, t.backup):
                if name:
                    with contextlib.suppress(OSError):
                        os.unlink(name)
            t.tmp = t.backup = None
        if not any(t.committed for t in self._targets):
            for d in reversed(self._made):
                with contextlib.suppress(OSError):
                    os.rmdir(d)  # only when empty: never a file someone else put there
        self._made = []


def _create_temp(t: _Target, parent: Path) -> int:
    """Create the hidden temporary of ``t`` and return its descriptor; its name is recorded
    *before* the file exists, so a signal arriving at any moment never loses track of it."""
    flags = os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_CLOEXEC", 0) | \
        getattr(os, "O_BINARY", 0)
    while True:
        t.tmp = str(parent / f".{t.path.name}.{secrets.token_hex(4)}.part")
        try:
            return os.open(t.tmp, flags, 0o600)
        except FileExistsError:
            continue


_DEFERRED = tuple(s for s in (getattr(signal, "SIGINT", None), getattr(signal, "SIGTERM", None))
                  if s is not None)


@contextlib.contextmanager
def _deferred_signals():
    """Hold SIGINT and SIGTERM during a short critical phase (main thread only).

    Yields a list that holds the signals that arrived; when the block ends their earlier
    handlers run (a Python handler is called; the default action is re-raised by sending the
    signal again).
    """
    if threading.current_thread() is not threading.main_thread():
        yield []
        return
    pending: list = []
    old = {}

    def hold(signum, frame):
        if old.get(signum) != signal.SIG_IGN:
            pending.append(signum)

    for s in _DEFERRED:
        try:
            old[s] = signal.signal(s, hold)
        except (ValueError, OSError):  # pragma: no cover - not allowed here
            pass
    try:
        yield pending
    finally:
        for s, h in old.items():
            signal.signal(s, h)
        for s in dict.fromkeys(pending):
            h = old.get(s)
            if callable(h):
                h(s, None)
            elif h == signal.SIG_DFL:
                os.kill(os.getpid(), s)


def check_target(path, *, force: bool = False, option: str | None = None, protect=()) -> Path:
    """Check that ``path`` can be written (as :meth:`OutputSet.add`), before any work is done.

    Returns
    -------
    pathlib.Path

    Raises
    ------
    ReportError
        See the module notes.
    """
    s = OutputSet(force=force, protect=protect)
    return s.add(path, option)


@contextlib.contextmanager
def atomic_open(path, mode: str = "wb", *, force: bool = False, option: str | None = None,
                encoding: str | None = None, protect=()):
    """Open a temporary file that becomes ``path`` when the block ends without an exception.

    Parameters
    ----------
    path : str or os.PathLike
        Target file.
    mode : {"wb", "w"}
        Binary or text.
    force : bool
        Replace an existing target (never an input, never a special file).
    option : str or None
        Option that named the file, for messages.
    encoding : str or None
        Text encoding for mode ``"w"`` (default UTF-8).
    protect : iterable of paths
        Inputs the file must not be.

    Yields
    ------
    file object
        Write the whole content to it.

    Raises
    ------
    ReportError
        As :class:`OutputSet`.
    """
    if mode not in ("wb", "w"):
        raise ValueError(f"mode must be 'wb' or 'w', got {mode!r}")
    import io

    s = OutputSet(force=force, protect=protect)
    target = s.add(path, option)
    buf = io.StringIO(newline="") if mode == "w" else io.BytesIO()
    yield buf
    data = buf.getvalue()
    s.put(target, data.encode(encoding or "utf-8") if mode == "w" else data)
    s.commit()


def write_atomic(path, data, *, force: bool = False, option: str | None = None,
                 protect=()) -> Path:
    """Write ``data`` (bytes or str, UTF-8) to ``path`` atomically; see :class:`OutputSet`.

    Returns
    -------
    pathlib.Path
        The written path.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> _ = write_atomic(d / "a.txt", "one")
    >>> _ = write_atomic(d / "a.txt", "two", force=True)
    >>> (d / "a.txt").read_text()
    'two'
    """
    s = OutputSet(force=force, protect=protect)
    target = s.add(path, option)
    s.put(target, data)
    s.commit()
    return Path(path)
