"""Pausing Python's cyclic garbage collector while many small, long-lived objects are built.

Loading a dataset or the lexicon set, the scan, the lexicon summaries and the review queue each
allocate tens or hundreds of thousands of objects that live on (labels, YAML nodes, lexicon
entries, findings, queue entries). The cyclic collector runs every few hundred
allocations, and its older generations re-walk everything already alive, including every
module the review app has imported. None of them makes reference cycles that must be
freed early, so they pause the collector for their duration. Counting stays on, so the
collector looks at the new objects once, at its next run after the pause.
"""

from __future__ import annotations

import gc
from collections.abc import Iterator
from contextlib import contextmanager


@contextmanager
def paused_gc() -> Iterator[None]:
    """Disable the cyclic garbage collector inside the ``with`` block; restore it after.

    Nesting is safe: only the outermost block that found the collector enabled enables it
    again, also when the block raises.
    """
    was_enabled = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if was_enabled:
            gc.enable()
