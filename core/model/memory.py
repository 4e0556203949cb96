"""Keep freed large arrays in the process's heap, so the next fit reuses mapped pages.

glibc hands every allocation above its mmap threshold (128 kB, rising to at most 32 MB as large
blocks are freed) straight to the operating system and back, so every refit at a million rows
faults in fresh zeroed pages for its columns, design and residuals. On the 2-core virtual
machine the benchmarks run on, that faulting cost more than the arithmetic: a fresh copy of an
8 MB column took 3.4-5.5 ms against 0.6 ms into pages already mapped, and a refit of the
bench's ten-log workload 223 ms against 180 ms with the setting below (bench/refit.py,
December 2026). Raising the mmap and trim thresholds (mallopt(3)) keeps freed blocks of up
to ``KEEP_BYTES`` in the heap for reuse; the price is that the process's resident size stays
near its high-water mark instead of shrinking between fits. Elsewhere than glibc this does
nothing.
"""

from __future__ import annotations

import ctypes
import ctypes.util
import sys

KEEP_BYTES = 512 * 1024 * 1024
_M_TRIM_THRESHOLD = -1
_M_MMAP_THRESHOLD = -3
_applied: bool | None = None


def keep_freed_memory() -> bool:
    """Apply the thresholds once per process; whether the allocator took them."""
    global _applied
    if _applied is None:
        _applied = False
        if sys.platform.startswith("linux"):
            try:
                libc = ctypes.CDLL(ctypes.util.find_library("c") or "libc.so.6")
                mallopt = libc.mallopt
            except (OSError, AttributeError):  # musl and others have no mallopt: nothing to tune
                return False
            mallopt.argtypes = [ctypes.c_int, ctypes.c_int]
            mallopt.restype = ctypes.c_int
            _applied = bool(mallopt(_M_MMAP_THRESHOLD, KEEP_BYTES)) and bool(mallopt(_M_TRIM_THRESHOLD, KEEP_BYTES))
    return _applied
