"""Pausing Python's cyclic garbage collector during bulk work.

Importing a file or reading the store creates millions of short-lived objects
(cells, row tuples, parameter tuples) that hold no reference cycles: reference
counting frees each one as soon as it is dropped.  The cyclic collector still
runs every few hundred allocations and, once many objects are alive, keeps
walking all of them: on a 10,000-family cohort that cost about a third of an
import's time and of a full read of the studies.  Pausing it for the length of
such work changes no result; it is switched back on (if it was on) when the
work ends, also on error, and anything cyclic made meanwhile is collected later
as usual.
"""

from __future__ import annotations

import gc
from collections.abc import Iterator
from contextlib import contextmanager


@contextmanager
def gc_paused() -> Iterator[None]:
    """The cyclic garbage collector off inside the block, restored after it (nesting is fine)."""
    was_on = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if was_on:
            gc.enable()
