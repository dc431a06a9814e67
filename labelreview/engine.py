"""Which way the annotations are read: whole, in batches on this machine, or on a Dask cluster.

All three give the same figures (the agreement sums and label counts add up exactly across
batches and partitions); they differ in memory and in where the work runs. This module holds
the choices and the local batch path; the Dask path lives in :mod:`labelreview.distributed`.

- **whole** (the default for files up to ``engine.stream_above_mb``): the loaders read the file
  into one frame;
- **in batches** (``--stream``, or larger files in a format that can be read in batches): see
  :mod:`labelreview.io._stream`; memory stays about one batch plus the sums;
- **Dask** (``engine.name: dask`` or ``--engine dask``): Parquet read by ``dask.dataframe`` and
  the sums computed on the cluster's workers.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from pathlib import Path

import pandas as pd

from labelreview.config import DatasetConfig
from labelreview.errors import UsageError
from labelreview.io import STREAM_FORMATS, AnnotationStream, detect_format, fold_items
from labelreview.model import LoadReport
from labelreview.progress import ProgressCallback
from labelreview.report import LabelUse, label_usage

ENGINES: tuple[str, ...] = ("local", "dask")


def annotation_path(config: DatasetConfig) -> Path:
    """The configured annotation file (or Parquet folder).

    Raises:
        UsageError: The config names none.
    """
    ann = config.annotations
    if ann is None or ann.path is None:
        raise UsageError(
            f"no annotation file is configured or detected in {config.root}",
            hint="Point labelreview.yaml's annotations.path (or --annotations) at the file.",
        )
    return ann.path


def can_stream(config: DatasetConfig) -> bool:
    """Can the configured annotation file be read in batches (CSV, TSV, JSON Lines, Parquet)?"""
    ann = config.annotations
    if ann is None or ann.path is None or not ann.path.exists():
        return False
    if ann.path.is_dir():
        return True
    fmt = ann.format
    if fmt == "auto":
        try:
            fmt = detect_format(ann.path, kind="annotations", encoding=ann.encoding)
        except Exception:  # noqa: BLE001 - the whole-file loader will say what is wrong
            return False
    return fmt in STREAM_FORMATS


def should_stream(config: DatasetConfig, requested: bool | None) -> bool:
    """Read in batches? ``requested`` (``--stream``/``--no-stream``) wins; otherwise files
    larger than ``engine.stream_above_mb`` in a format that can be read in batches are."""
    if requested is not None:
        return requested
    if not can_stream(config):
        return False
    path = annotation_path(config)
    size = (
        sum(p.stat().st_size for p in path.rglob("*") if p.is_file())
        if path.is_dir()
        else path.stat().st_size
    )
    return size > config.engine.stream_above_mb * 1e6


def annotation_stream(
    config: DatasetConfig, *, extra_columns: Sequence[str] = ()
) -> AnnotationStream:
    """The configured annotation file as an :class:`~labelreview.io.AnnotationStream`."""
    ann = config.annotations
    path = annotation_path(config)
    assert ann is not None
    return AnnotationStream(
        path,
        fmt=ann.format,
        layout=ann.layout,
        columns=ann.columns,
        annotator_columns=ann.annotator_columns,
        multi_label_separator=ann.multi_label_separator,
        encoding=ann.encoding,
        batch_bytes=int(config.engine.batch_mb * (1 << 20)),
        extra_columns=extra_columns,
    )


def add_usage(total: dict[str, LabelUse], part: Mapping[str, LabelUse]) -> dict[str, LabelUse]:
    """Label counts of two sets of whole items, added (items are never in both)."""
    for label, use in part.items():
        seen = total.get(label)
        total[label] = (
            use
            if seen is None
            else LabelUse(seen.annotations + use.annotations, seen.items + use.items)
        )
    return total


def with_taxonomy(usage: dict[str, LabelUse], taxonomy_names: Sequence[str]) -> dict[str, LabelUse]:
    """Mark taxonomy labels, and add the ones no annotation uses (count zero), as
    :func:`~labelreview.report.label_usage` does."""
    in_tax = set(taxonomy_names)
    out = {
        label: LabelUse(use.annotations, use.items, label in in_tax) for label, use in usage.items()
    }
    for name in taxonomy_names:
        if name not in out:
            out[name] = LabelUse(0, 0, True)
    return out


def stream_usage(
    stream: AnnotationStream,
    *,
    progress: ProgressCallback | None = None,
    temp_dir: Path | None = None,
) -> tuple[dict[str, LabelUse], LoadReport]:
    """Annotations and distinct items per label, over a file read in batches of whole items."""

    def step(total: dict[str, LabelUse], batch: pd.DataFrame) -> dict[str, LabelUse]:
        return add_usage(total, label_usage(batch)) if len(batch) else total

    return fold_items(stream, dict, step, progress=progress, temp_dir=temp_dir)
