"""Shared fixtures for the review app's tests.

The bundled sample set is loaded and scanned once per test run; each test then gets a fresh
:class:`ReviewSession` over that scan whose decision log lives in the test's own tmp_path (the
input files are only read). A fixed clock that advances one minute per entry makes the times
in the log and on screen the same on every run (snapshots depend on it).
"""

from __future__ import annotations

import json
from collections.abc import Iterator
from dataclasses import replace
from datetime import UTC, datetime, timedelta
from pathlib import Path
from typing import Any

import pytest

from labelreview._resources import sample_sets_dir
from labelreview.config import LOG_NAME
from labelreview.dataset import load_dataset
from labelreview.report import DatasetScan, scan_dataset
from labelreview.review import ReviewSession

SAMPLE = sample_sets_dir() / "harbour_archive"
CURATOR = "mira"


class StepClock:
    """2026-01-05 09:00 UTC, then one minute later at every call."""

    def __init__(self) -> None:
        self.moment = datetime(2026, 1, 5, 9, 0, tzinfo=UTC)

    def __call__(self) -> datetime:
        now = self.moment
        self.moment += timedelta(minutes=1)
        return now


@pytest.fixture(scope="session")
def sample_scan() -> DatasetScan:
    return scan_dataset(load_dataset(SAMPLE))


def make_session(scan: DatasetScan, log: Path, curator: str = CURATOR) -> ReviewSession:
    """A session over the shared scan, writing its log to ``log``."""
    config = scan.dataset.config
    config = replace(config, decisions=replace(config.decisions, log=log))
    dataset = replace(scan.dataset, config=config)
    scanned = DatasetScan(dataset=dataset, lexicon=scan.lexicon, result=scan.result, notes=[])
    return ReviewSession(scanned=scanned, curator=curator, clock=StepClock())


@pytest.fixture
def log_path(tmp_path: Path) -> Path:
    return tmp_path / LOG_NAME


@pytest.fixture
def session(sample_scan: DatasetScan, log_path: Path) -> Iterator[ReviewSession]:
    yield make_session(sample_scan, log_path)


def log_entries(path: Path) -> list[dict[str, Any]]:
    """Every entry of the log file, parsed (empty when the file does not exist)."""
    if not path.exists():
        return []
    return [json.loads(line) for line in path.read_text(encoding="utf-8").splitlines()]
