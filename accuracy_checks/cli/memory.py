"""The command-line process keeps the memory it frees, for reuse (glibc only).

A run at a million series allocates and frees arrays of tens to hundreds of MB again and again
(several GB in all). glibc's ``malloc`` serves every allocation above its mmap threshold (32 MB
at most) with fresh pages from the kernel and returns them on ``free``, so each such array
costs page faults and the kernel's zeroing of its pages once more: at a million series about
40 % of a run's CPU time was the kernel's (``bench/README.md``, "Memory the run frees").
:func:`keep_freed_memory` asks ``malloc`` to serve every allocation from its heap and to keep
what is freed (``mallopt``: ``M_MMAP_MAX`` 0, ``M_TRIM_THRESHOLD`` 2 GiB, ``M_TOP_PAD``
64 MiB), so later arrays reuse pages the process already has. The numbers computed are the
same; the peak resident memory moves by a few percent (measured: +4 % with the core measures,
−9 % with every measure, at a million series).

Only the command line's own process does this (it ends with the run, so nothing is held after
it): ``run_checks`` called from Python, the Prefect tasks and the Dask workers leave their
host's allocator as it is. ``ACCURACY_CHECKS_MALLOC=default`` keeps glibc's settings; on
other C libraries (musl, macOS, Windows) nothing changes.
"""

from __future__ import annotations

import ctypes
import os
import sys

__all__ = ["keep_freed_memory"]

# mallopt parameters (glibc's malloc.h)
_M_TRIM_THRESHOLD = -1
_M_TOP_PAD = -2
_M_MMAP_MAX = -4

_SETTINGS = ((_M_MMAP_MAX, 0), (_M_TRIM_THRESHOLD, 2**31 - 1), (_M_TOP_PAD, 64 << 20))


def keep_freed_memory() -> bool:
    """Set the ``mallopt`` parameters above; whether they were all set (``False`` when
    ``ACCURACY_CHECKS_MALLOC=default``, off glibc, or when glibc refuses one)."""
    if os.environ.get("ACCURACY_CHECKS_MALLOC", "").strip().lower() == "default":
        return False
    if not sys.platform.startswith("linux") or not _glibc():
        return False
    try:
        mallopt = ctypes.CDLL(None).mallopt  # the C library the interpreter runs on
    except (OSError, AttributeError):
        return False
    mallopt.argtypes = (ctypes.c_int, ctypes.c_int)
    mallopt.restype = ctypes.c_int
    return all(mallopt(param, value) == 1 for param, value in _SETTINGS)


def _glibc() -> bool:
    try:
        return (os.confstr("CS_GNU_LIBC_VERSION") or "").startswith("glibc")
    except (ValueError, OSError):
        return False
