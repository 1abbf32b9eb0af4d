"""Give memory the process no longer uses back to the operating system.

CPython and Arrow free their objects into the C library's heap, which keeps the pages for
reuse; after a large temporary working set (checking a study's files) the process's resident
size stays at its peak although most of it is free. glibc's
`malloc_trim` returns those free pages (measured on a 2000-participant study: 494 MiB resident
after loading, 228 MiB after trimming, for 99 MiB of data). Elsewhere this only collects.
"""

from __future__ import annotations

import ctypes
import ctypes.util
import functools
import gc
import sys
from collections.abc import Callable


@functools.cache
def _trim() -> Callable[[int], int] | None:
    if not sys.platform.startswith("linux"):
        return None
    name = ctypes.util.find_library("c")
    try:
        libc = ctypes.CDLL(name or "libc.so.6")
        trim = libc.malloc_trim  # glibc only (musl has none)
    except (OSError, AttributeError):
        return None
    trim.argtypes = [ctypes.c_size_t]
    trim.restype = ctypes.c_int
    return trim


def release_free_memory() -> None:
    """Collect garbage, then hand the heap's free pages back to the system (glibc)."""
    gc.collect()
    trim = _trim()
    if trim is not None:
        trim(0)
