"""What the review app opens, and the steps it reports while opening it.

The app runs :meth:`ReviewSource.open` in a worker thread; every step calls the core
(``load_dataset``, then ``ReviewSession.from_dataset``), so the app reads no file itself.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from pathlib import Path

from labelreview.dataset import load_dataset
from labelreview.decisions import Clock, utc_now
from labelreview.review import ReviewSession

Step = Callable[[int, str], None]
"""Called with (step number from 1, what is happening now)."""

STEPS = 4
"""Steps the app shows: read files, scan, open the log, build the queue."""


@dataclass(frozen=True)
class ReviewSource:
    """A dataset folder and the options it is opened with (as ``labelreview review`` takes)."""

    dataset_dir: Path
    curator: str | None = None
    annotations: Path | None = None
    taxonomy: Path | None = None
    encoding: str | None = None
    subjects: str | None = None
    extra_layers: Sequence[Path] = ()
    clock: Clock = field(default=utc_now)

    def open(self, step: Step | None = None) -> ReviewSession:
        """Load and scan the dataset; the log is attached but not yet locked."""
        report = step or (lambda number, text: None)
        report(1, f"reading the dataset files in {self.dataset_dir}")
        dataset = load_dataset(
            self.dataset_dir,
            annotations=self.annotations,
            taxonomy=self.taxonomy,
            encoding=self.encoding,
            subjects=self.subjects,
        )
        report(2, "scanning the labels against the lexicons")
        return ReviewSession.from_dataset(
            dataset,
            curator=self.curator,
            subjects=self.subjects,
            extra_layers=self.extra_layers,
            clock=self.clock,
        )
