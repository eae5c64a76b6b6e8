"""Pause the cyclic garbage collector while building large acyclic structures.

Reading a 100k-element netlist creates millions of small objects and no reference
cycles; with the collector running, each generation-2 pass walks them all and reading
becomes several times slower (measured in bench/). Collection resumes afterwards.
"""

from __future__ import annotations

import gc
from collections.abc import Iterator
from contextlib import contextmanager


@contextmanager
def paused_gc() -> Iterator[None]:
    was_enabled = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        # What was built is long-lived and acyclic: move it out of the collector's
        # generations, so the next collections do not walk it again. Reference counting
        # still frees it when it is dropped.
        gc.freeze()
        if was_enabled:
            gc.enable()
