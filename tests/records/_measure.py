"""Shared by the records tests: the peak of Python memory allocations while a call runs."""

from __future__ import annotations

import tracemalloc


def peak_kib(fn) -> int:
    """Peak traced allocation (KiB) while `fn()` runs."""
    tracemalloc.start()
    try:
        fn()
    finally:
        peak = tracemalloc.get_traced_memory()[1]
        tracemalloc.stop()
    return peak // 1024
