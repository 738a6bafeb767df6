"""Process-wide settings of a pqcheck command.

:func:`keep_freed_memory`: the analysis allocates and frees the same large buffers block
after block (samples, resampled windows, spectra: tens of MB each). glibc's allocator serves
every request above 128 KiB-32 MiB (its adaptive ``mmap`` threshold) with a fresh ``mmap``
and returns it to the kernel on ``free``; the next block then faults every page in again,
zero-filled by the kernel: measured at a fifth of the analysis time on a long capture.
Raising the threshold keeps such buffers on the heap, and raising the trim threshold keeps
freed memory mapped for the next block. Peak memory is unchanged (the same buffers, reused
instead of re-mapped); only the release to the system waits for the end of the command.

One arena for every thread: glibc gives each new thread (the parser's, the resampling's,
the FFT's) an arena of its own, a 64 MiB heap that is unmapped again as soon as it is empty,
so a thread's buffers were still faulted in afresh block after block, and each arena held
its own high-water mark. With one arena the threads share the kept memory: measured on a
10-minute capture, a quarter fewer page faults and a peak RSS 60 MB lower. The threads take
the arena's lock only for large buffers, a few times per block.
"""

from __future__ import annotations

import ctypes
import ctypes.util
import sys

__all__ = ["keep_freed_memory"]

_M_TRIM_THRESHOLD = -1
_M_TOP_PAD = -2
_M_MMAP_THRESHOLD = -3
_M_ARENA_MAX = -8

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
                      and mallopt(_M_TOP_PAD, 64 << 20)
                      and mallopt(_M_ARENA_MAX, 1))
    _DONE.append(ok)
    return ok
