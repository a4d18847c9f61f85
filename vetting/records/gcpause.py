"""Pausing the cyclic garbage collector during bulk work, safely across threads.

Loading or summarising thousands of instruments builds hundreds of thousands of small objects
that hold no reference cycles; with the collector running, every few thousand allocations it
rescans the whole (growing) heap, which more than doubles the time of a large load.

The collector is one switch for the whole process, and the interface loads in several worker
threads at once (the catalogue and the jobs, for instance). A plain disable/enable pair in each
would let the first thread to finish switch the collector back on under the other one (seen in
the interface: seven full collections, about a second, inside one 10,000-instrument load). So
pauses are counted: the collector goes off when the first pause in any thread begins, and back
on (only if it was on before) when the last one ends.
"""

from __future__ import annotations

import contextlib
import functools
import gc
import threading
from collections.abc import Callable, Iterator
from typing import TypeVar

_lock = threading.Lock()
_active = 0
_was_enabled = False

F = TypeVar("F", bound=Callable)


@contextlib.contextmanager
def gc_pause() -> Iterator[None]:
    """The garbage collector is off inside this block (and in any other thread's pause)."""
    global _active, _was_enabled
    with _lock:
        if _active == 0:
            _was_enabled = gc.isenabled()
            gc.disable()
        _active += 1
    try:
        yield
    finally:
        with _lock:
            _active -= 1
            if _active == 0 and _was_enabled:
                gc.enable()


def gc_paused(fn: F) -> F:
    """Decorator: run `fn` inside gc_pause()."""

    @functools.wraps(fn)
    def wrapper(*args, **kwargs):
        with gc_pause():
            return fn(*args, **kwargs)

    return wrapper  # type: ignore[return-value]
