"""Process-wide tuning of the C allocator for photo-sized arrays.

A 12-megapixel photo makes a few hundred megabytes of full-size arrays per
measurement. By default the C library (glibc) maps each large array from the
kernel and unmaps it when freed, so every new array is memory the process has
never touched: the kernel must hand out and zero fresh pages, which on some
virtual machines costs one to two seconds per gigabyte. :func:`keep_freed_memory`
asks the allocator to serve large arrays from its heap and to keep freed memory
for the next ones instead: a command or a batch worker that measures photo after
photo then reuses the same pages. It changes no result and only affects the
calling process; the command-line entry point and the batch workers call it, the
library itself never does (a notebook's process is left as it is).
"""

from __future__ import annotations

import ctypes
import sys

__all__ = ["keep_freed_memory"]

# mallopt parameters of glibc's <malloc.h>
_M_TRIM_THRESHOLD = -1
_M_MMAP_MAX = -4

_DONE = False


def keep_freed_memory() -> bool:
    """Keep freed large allocations in the process for reuse (glibc only).

    Returns True when the allocator accepted the settings, False where they do
    not apply (another C library or operating system); calling it again does
    nothing.
    """
    global _DONE
    if _DONE:
        return True
    if not sys.platform.startswith("linux"):
        return False
    try:
        libc = ctypes.CDLL("libc.so.6")
        mallopt = libc.mallopt
    except (OSError, AttributeError):  # not glibc (e.g. musl)
        return False
    mallopt.argtypes = (ctypes.c_int, ctypes.c_int)
    mallopt.restype = ctypes.c_int
    # large blocks from the heap, not separate mappings; freed memory is not trimmed
    # back to the kernel below 2 GiB - 1
    _DONE = bool(mallopt(_M_MMAP_MAX, 0)) and bool(mallopt(_M_TRIM_THRESHOLD, 2**31 - 1))
    return _DONE
