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
#: whether pauses switch the collector off (see set_pausing)
_pausing = True

F = TypeVar("F", bound=Callable)


def set_pausing(on: bool) -> None:
    """Whether gc_pause() switches the collector off (on by default).

    A pause saves the collector's rescans of a growing heap, but what it allocates is all in the
    youngest generation when it ends, and the first collection after it scans all of that in one
    step that holds the interpreter lock (about 0.15 s after ranking 10,000 instruments). A
    program that must answer keys while a worker thread does bulk work, and that keeps full
    collections out of the way itself (the terminal interface defers them to idle moments),
    turns pausing off: its young collections then stay small steps. Set it before any pause
    begins."""
    global _pausing
    _pausing = on


@contextlib.contextmanager
def gc_pause() -> Iterator[None]:
    """The garbage collector is off inside this block (and in any other thread's pause), unless
    pausing is turned off (set_pausing)."""
    global _active, _was_enabled
    if not _pausing:
        yield
        return
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
