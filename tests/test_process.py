"""The allocator setting of every pqcheck command (pqcheck/_process.py): a large buffer
that is freed stays mapped for the next one, instead of going back to the kernel (and being
faulted in and zeroed again by the next block).

Reference: the kernel's own count of the process's resident pages (``/proc/self/statm``):
a 64 MiB buffer returned to the kernel leaves the resident set; one kept by the allocator
does not.
"""

from __future__ import annotations

import subprocess
import sys

import pytest

pytestmark = pytest.mark.skipif(not sys.platform.startswith("linux"),
                                reason="glibc's mallopt (Linux)")

_CHILD = """
import os, sys
import numpy as np
from pqcheck._process import keep_freed_memory
if sys.argv[1] == "1" and not keep_freed_memory():
    print("unsupported"); raise SystemExit
def rss():
    with open("/proc/self/statm") as fh:
        return int(fh.read().split()[1]) * os.sysconf("SC_PAGE_SIZE")
a = np.ones(8 << 20)
held = rss()
del a
print((held - rss()) >> 20)  # MiB given back by the free
"""


def _released_mib(flag: str) -> str:
    out = subprocess.run([sys.executable, "-c", _CHILD, flag], capture_output=True, text=True,
                         timeout=120)
    assert out.returncode == 0, out.stderr
    return out.stdout.strip()


def test_freed_buffer_stays_mapped_for_the_next_block():
    tuned = _released_mib("1")
    if tuned == "unsupported":
        pytest.skip("not glibc")
    assert int(tuned) < 8  # the heap keeps the freed 64 MiB
    assert int(_released_mib("0")) > 56  # the default: an mmap, unmapped at once


def test_setting_is_applied_once():
    from pqcheck import _process

    first = _process.keep_freed_memory()
    assert _process.keep_freed_memory() is first
