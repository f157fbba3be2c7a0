"""Pausing Python's cyclic garbage collector around bulk work that makes no reference cycles.

A characterization run or a catalog store makes hundreds of thousands of small objects (records,
rows, flags) and no cycles; each generation-2 pass of the collector walks every live object
again, so its cost grows faster than the run (4 000 variants: 5.9 s with it, 3.4 s without,
measured; see DEVELOPERS.md "Performance"). Objects are still freed by reference counting.
"""

from __future__ import annotations

import gc
from collections.abc import Iterator
from contextlib import contextmanager


@contextmanager
def collector_paused() -> Iterator[None]:
    """The cyclic collector off for the block, then as it was before (nested use is safe)."""
    was_on = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if was_on:
            gc.enable()
