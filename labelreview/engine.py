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
from labelreview.dataset import Dataset
from labelreview.errors import UsageError
from labelreview.io import STREAM_FORMATS, AnnotationStream, detect_format, fold_items
from labelreview.model import LoadReport, TaxonomyLabel
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
    if path.is_dir():
        return True  # a folder of Parquet files is only ever read in batches
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
    pairs_for: set[str] | None = None,
) -> tuple[dict[str, LabelUse], pd.DataFrame, LoadReport]:
    """Annotations and distinct items per label, over a file read in batches of whole items.

    Args:
        stream: The annotation file.
        progress: Progress callback.
        temp_dir: Where an unsorted file is partitioned.
        pairs_for: Also collect the distinct (item, label) rows of these items (the items whose
            text had a hit, for the labels beside each term).

    Returns:
        The counts, the (item, label) rows asked for, and the load report.
    """
    wanted = pd.Index(sorted(pairs_for or ()))

    def step(
        state: tuple[dict[str, LabelUse], list[pd.DataFrame]], batch: pd.DataFrame
    ) -> tuple[dict[str, LabelUse], list[pd.DataFrame]]:
        total, pairs = state
        if not len(batch):
            return state
        add_usage(total, label_usage(batch))
        if len(wanted):
            part = batch.loc[batch["item"].isin(wanted), ["item", "label"]].drop_duplicates()
            if len(part):
                pairs.append(part)
        return total, pairs

    (usage, pairs), report = fold_items(
        stream, lambda: ({}, []), step, progress=progress, temp_dir=temp_dir
    )
    frame = (
        pd.concat(pairs, ignore_index=True)
        if pairs
        else pd.DataFrame({"item": pd.Series(dtype=str), "label": pd.Series(dtype=str)})
    )
    return usage, frame, report


def taxonomy_dataset(config: DatasetConfig) -> Dataset:
    """The dataset with its taxonomy read and its annotations left to a stream or a cluster."""
    from labelreview.io import load_taxonomy

    labels: list[TaxonomyLabel] = []
    reports: list[LoadReport] = []
    tax = config.taxonomy
    if tax is not None:
        labels = load_taxonomy(tax.path, fmt=tax.format, encoding=tax.encoding)
        used = tax.format if tax.format != "auto" else detect_format(tax.path, kind="taxonomy")
        reports.append(LoadReport(path=str(tax.path), format=used, rows_read=len(labels)))
    return Dataset(
        root=config.root, config=config, annotations=None, taxonomy=labels, reports=reports
    )
