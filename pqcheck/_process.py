"""Process-wide settings of a pqcheck command.

:func:`keep_freed_memory`: the analysis allocates and frees the same large buffers block
after block (samples, resampled windows, spectra: tens of MB each). glibc's allocator serves
every request above 128 KiB-32 MiB (its adaptive ``mmap`` threshold) with a fresh ``mmap``
and returns it to the kernel on ``free``; the next block then faults every page in again,
zero-filled by the kernel: measured at a fifth of the analysis time on a long capture.
Raising the threshold keeps such buffers on the heap, and raising the trim threshold keeps
freed memory mapped for the next block. Peak memory is unchanged (the same buffers, reused
instead of re-mapped); only the release to the system waits for the end of the command.

Each thread keeps its own arena (glibc's default). One arena for every thread
(``M_ARENA_MAX=1``) was tried: it lowered the peak of a 10-minute capture (259 against
327 MB) but not the plateau a longer one reaches (308 against 315 MB at 40 minutes), so the
peak was no longer flat in the capture's length (+19 % at 4x), and it gained no measurable
time.
"""

from __future__ import annotations

import ctypes
import ctypes.util
import sys

__all__ = ["keep_freed_memory"]

_M_TRIM_THRESHOLD = -1
_M_TOP_PAD = -2
_M_MMAP_THRESHOLD = -3

_DONE: list = []


def keep_freed_memory() -> bool:
    """Tune glibc's allocator as above (once per process); False where it is not glibc."""
    if _DONE:
        return _DONE[0]
    ok = False
    if sys.platform.startswith("linux"):
        try:
            libc = ctypes.CDLL(ctypes.util.find_library("c") or "libc.so.6")
            mallopt = libc.mallopt
        except (OSError, AttributeError):  # musl and others: no mallopt
            mallopt = None
        if mallopt is not None:
            mallopt.argtypes = [ctypes.c_int, ctypes.c_int]
            mallopt.restype = ctypes.c_int
            ok = bool(mallopt(_M_MMAP_THRESHOLD, 256 << 20)
                      and mallopt(_M_TRIM_THRESHOLD, 1 << 30)
                      and mallopt(_M_TOP_PAD, 64 << 20))
    _DONE.append(ok)
    return ok
