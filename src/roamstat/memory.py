"""Give memory the run has freed back to the operating system.

Two allocators keep what a stage frees instead of returning it, so the resident size of a big
run only grows from stage to stage:

* glibc's malloc serves arrays below its mmap threshold from its heaps, and raises that
  threshold dynamically, up to 32 MiB, after the first large block is freed (mallopt(3),
  ``M_MMAP_THRESHOLD``); a heap returns free space only at its top.  ``malloc_trim(0)``
  returns every free page inside the heaps too.
* Arrow's memory pool (behind pandas' text columns) keeps freed blocks for reuse;
  ``release_unused`` returns them.

:func:`give_back` does both between stages (after loading, analysing and writing): on a
1,000,000-fix input the load stage's resident size fell from 592 to 457 MB (the track of
``benchmarks/bench_extremes.py``).  Fixing the mmap threshold low instead would return every
array at once, but it made allocation-heavy numpy loops such as the null walks' chunks about
15 % slower (a page fault per new page), so the threshold is left to glibc.  Where glibc is
absent (macOS, musl) only Arrow's pool is released.
"""

from __future__ import annotations

import ctypes
import ctypes.util


def _glibc():
    name = ctypes.util.find_library("c")
    try:
        libc = ctypes.CDLL(name) if name else None
    except OSError:
        return None
    return libc if libc is not None and hasattr(libc, "malloc_trim") else None


_LIBC = _glibc()


def give_back() -> None:
    """Return freed heap pages and Arrow's unused blocks to the operating system."""
    import pyarrow as pa

    pa.default_memory_pool().release_unused()
    if _LIBC is not None:
        _LIBC.malloc_trim(0)
