"""Pausing Python's cyclic garbage collector while large results are built.

The scan, the lexicon's summaries and the review queue each create tens of thousands of small,
long-lived objects at once. The collector counts every allocation and, at each threshold, walks
everything alive again, though nothing built here forms a reference cycle. Pausing it while
they are built is a plain speed measure; it is restored afterwards, even on error.
"""

from __future__ import annotations

import contextlib
import gc
from collections.abc import Iterator


@contextlib.contextmanager
def collector_paused() -> Iterator[None]:
    """Pause the cyclic garbage collector for the ``with`` block (nested use is fine)."""
    was_enabled = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if was_enabled:
            gc.enable()
