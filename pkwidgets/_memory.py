"""Heap settings for the engine's temporaries (Linux with glibc only; results do not depend on them).

Each chunk of the array engine allocates and frees a few dozen arrays of
about 1 MB.  With glibc's dynamic defaults, freed memory at the top of the
heap is given back to the operating system as soon as more than about twice
the largest recently freed block is free, so the next chunk takes the same
memory back page by page: on a 2-core machine shared with other jobs,
``bench/nca_speed.py --base`` (fresh-process rows) measured these page faults at 7,000 per chunk
of 8192 profiles and about half of the engine's CPU time (system time).

:func:`keep_heap` sets, once per process, the two glibc thresholds to the
values glibc's own dynamic rule reaches after any 32 MB array has been freed
(``M_MMAP_THRESHOLD`` 32 MiB, glibc's upper limit for the dynamic rule on
64-bit systems; ``M_TRIM_THRESHOLD`` twice that): up to 64 MiB of freed heap
is kept for reuse instead of being returned at once.  It does nothing when
the environment variable ``PKWIDGETS_HEAP`` is ``default``, when
``MALLOC_MMAP_THRESHOLD_`` or ``MALLOC_TRIM_THRESHOLD_`` are set (the user's
own choice stands), or on another C library or operating system.  See
``mallopt(3)``.
"""

from __future__ import annotations

import os
import sys
import threading

__all__ = ["keep_heap", "MMAP_THRESHOLD", "TRIM_THRESHOLD"]

_M_TRIM_THRESHOLD = -1  # glibc <malloc.h>
_M_MMAP_THRESHOLD = -3
#: Blocks below this come from the heap (glibc's DEFAULT_MMAP_THRESHOLD_MAX on 64-bit systems).
MMAP_THRESHOLD = 32 * 2**20
#: Free memory at the top of the heap kept for reuse (twice the above, as glibc's dynamic rule sets it).
TRIM_THRESHOLD = 2 * MMAP_THRESHOLD

_lock = threading.Lock()
_state = {"done": False, "applied": False}


def keep_heap() -> bool:
    """Apply the heap settings once per process (see the module docstring); return whether they apply."""
    if _state["done"]:
        return _state["applied"]
    with _lock:
        if not _state["done"]:
            _state["applied"] = _apply()
            _state["done"] = True
    return _state["applied"]


def _apply() -> bool:
    env = os.environ
    if env.get("PKWIDGETS_HEAP", "").strip().lower() == "default" or not sys.platform.startswith("linux"):
        return False
    if "MALLOC_MMAP_THRESHOLD_" in env or "MALLOC_TRIM_THRESHOLD_" in env:
        return False
    try:
        if not os.confstr("CS_GNU_LIBC_VERSION").startswith("glibc"):
            return False
        import ctypes

        mallopt = ctypes.CDLL(None).mallopt
    except (AttributeError, OSError, ValueError, TypeError):
        return False
    mallopt.argtypes, mallopt.restype = [ctypes.c_int, ctypes.c_int], ctypes.c_int
    return bool(mallopt(_M_MMAP_THRESHOLD, MMAP_THRESHOLD)) and bool(mallopt(_M_TRIM_THRESHOLD, TRIM_THRESHOLD))
