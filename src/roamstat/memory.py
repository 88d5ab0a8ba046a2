"""Give memory the run has freed back to the operating system.

A big animal's stages allocate and free large arrays on several threads.  Two allocators keep
what is freed instead of returning it, so the resident size only grows:

* glibc's malloc raises its mmap threshold dynamically, up to 32 MiB, after the first large
  block is freed (mallopt(3), ``M_MMAP_THRESHOLD``); from then on arrays below it come from the
  heap, whose free space is returned only at its top, and each thread has its own heap
  (arena), so one thread's freed space is not reused by another.  A fixed threshold keeps every
  large array in its own mapping, returned when freed, and ``malloc_trim(0)`` returns the heaps'
  free pages.
* Arrow's memory pool (behind pandas' text columns) keeps freed blocks for reuse;
  ``release_unused`` returns them.

On a 1,000,000-fix input the load stage's resident size fell from 591 to about 400 MB this way
(measured with ``benchmarks/bench_extremes.py``'s track; the same tables).  Elsewhere than glibc
(macOS, musl) the malloc calls are skipped.
"""

from __future__ import annotations

import ctypes
import ctypes.util

#: ``M_MMAP_THRESHOLD`` of glibc's mallopt (malloc.h) and the fixed value set: blocks from 1 MiB up
#: get a mapping of their own (glibc's initial default is 128 KiB; judgement, no source).
_M_MMAP_THRESHOLD = -3
MMAP_THRESHOLD_BYTES = 1 << 20


def _glibc():
    name = ctypes.util.find_library("c")
    try:
        libc = ctypes.CDLL(name) if name else None
    except OSError:
        return None
    return libc if libc is not None and hasattr(libc, "malloc_trim") and hasattr(libc, "mallopt") else None


_LIBC = _glibc()


def fix_mmap_threshold() -> None:
    """Keep large blocks in mappings of their own for the rest of the process (glibc only)."""
    if _LIBC is not None:
        _LIBC.mallopt(_M_MMAP_THRESHOLD, MMAP_THRESHOLD_BYTES)


def give_back() -> None:
    """Return freed heap pages and Arrow's unused blocks to the operating system."""
    import pyarrow as pa

    pa.default_memory_pool().release_unused()
    if _LIBC is not None:
        _LIBC.malloc_trim(0)
