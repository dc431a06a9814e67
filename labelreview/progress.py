"""How long-running core functions say how far they are, without printing anything.

A core function that reads a large file or scans millions of rows takes an optional
``progress`` callback and calls it with a :class:`ProgressEvent` now and then. What to do with
the events is the front end's business: the command line draws progress bars on stderr (and
nothing when output is not a terminal or ``--quiet`` is given); tests and library users pass
nothing, or collect the events.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator
from contextlib import contextmanager
from dataclasses import dataclass


@dataclass(frozen=True)
class ProgressEvent:
    """One step of one task."""

    task: str
    """What is being done, in a few words ("reading annotations.csv")."""
    done: float
    """Units done so far."""
    total: float | None = None
    """Units in all, or None when unknown (a spinner rather than a bar)."""
    unit: str = "bytes"
    """``bytes``, ``rows``, ``items`` or ``parts``."""
    finished: bool = False
    """The task is over (the bar can be completed and closed)."""


ProgressCallback = Callable[[ProgressEvent], None]


def no_progress(_event: ProgressEvent) -> None:
    """The callback used when the caller passes none."""


def tell(progress: ProgressCallback | None) -> ProgressCallback:
    """``progress``, or a callback that ignores every event."""
    return progress if progress is not None else no_progress


@contextmanager
def phase(progress: ProgressCallback | None, task: str) -> Iterator[None]:
    """Report a step whose size is unknown: a start event now, a finished event at the end."""
    report = tell(progress)
    report(ProgressEvent(task, 0, None, unit="steps"))
    try:
        yield
    finally:
        report(ProgressEvent(task, 1, 1, unit="steps", finished=True))
