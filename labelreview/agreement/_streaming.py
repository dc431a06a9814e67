"""Agreement over an annotation file larger than memory: the same sums, batch by batch.

Each batch of whole items (see :mod:`labelreview.io._stream`) is coded and turned into
:class:`~labelreview.agreement._sums.AgreementSums`; the sums are merged and read off once by
:func:`~labelreview.agreement._report.report_from_sums`. Memory holds one batch plus the sums
(whose size depends on the numbers of labels, annotators and item sizes, not on the number of
items), and the figures equal :func:`~labelreview.agreement.agreement_report` on the whole file.

The ordinal level with a bootstrap reads the file twice: its difference function depends on
every value's total, which is known only after the first pass.
"""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path

import pandas as pd

from labelreview.agreement._coding import check_level, code_annotations
from labelreview.agreement._parts import frame_sums
from labelreview.agreement._report import (
    AgreementResult,
    AgreementThresholds,
    LabelAgreement,
    check_report_options,
    ordinal_metric,
    per_label_from_sums,
    report_from_sums,
    report_parts,
)
from labelreview.agreement._sums import BUCKETS, AgreementSums, ExactSums
from labelreview.errors import UsageError
from labelreview.io._stream import AnnotationStream, fold_items
from labelreview.model import LoadReport
from labelreview.progress import ProgressCallback, phase


def sums_of_batch(
    batch: pd.DataFrame,
    level: str,
    parts: frozenset[str],
    leave_out: bool = True,
    threads: int | None = None,
) -> AgreementSums:
    """The sums of one batch of whole items (``threads``: see :func:`frame_sums`)."""
    return frame_sums(batch, level, parts, leave_out=leave_out, threads=threads)[0]


def merge_sums(first: AgreementSums | None, second: AgreementSums | None) -> AgreementSums | None:
    """Add two sums, either of which may be None (nothing yet)."""
    if first is None:
        return second
    if second is None:
        return first
    return first.merge(second)


def stream_agreement(
    stream: AnnotationStream,
    *,
    level: str = "nominal",
    bootstrap: int = 1000,
    seed: int = 0,
    thresholds: AgreementThresholds | None = None,
    min_items: int = 10,
    min_pair_items: int = 10,
    confidence: float = 0.95,
    leave_out: bool = True,
    top_splits: int = 10,
    progress: ProgressCallback | None = None,
    temp_dir: Path | None = None,
    order: str = "auto",
) -> tuple[AgreementResult, LoadReport]:
    """Every agreement figure for a file read in batches; see :func:`agreement_report`.

    Args:
        stream: The annotation file.
        progress: Progress callback (reading, partitioning).
        temp_dir: Where an unsorted file's temporary partitions go.
        order: ``auto``, ``sorted`` or ``partition`` (see :func:`~labelreview.io.fold_items`).

    Returns:
        The result and the load report.

    Raises:
        UsageError: No annotations, or a bad parameter.
        LoadError: The file cannot be read.
    """
    check_level(level)
    check_report_options(
        bootstrap=bootstrap,
        seed=seed,
        min_items=min_items,
        min_pair_items=min_pair_items,
        confidence=confidence,
    )
    parts = report_parts(bootstrap, leave_out)

    def step(state: AgreementSums | None, batch: pd.DataFrame) -> AgreementSums | None:
        if batch.empty:
            return state
        return merge_sums(state, sums_of_batch(batch, level, parts, leave_out))

    sums, report = fold_items(
        stream, lambda: None, step, progress=progress, temp_dir=temp_dir, order=order
    )
    if sums is None:
        raise UsageError(
            f"no annotations found in {stream.path}; agreement needs who gave which label"
        )
    if bootstrap > 0 and sums.bucket_d is None:
        metric = ordinal_metric(sums)
        final = sums

        def add(state: ExactSums, batch: pd.DataFrame) -> ExactSums:
            if not batch.empty:
                state.merge(final.add_ordinal_disagreement(code_annotations(batch, level), metric))
            return state

        sums.bucket_d, _ = fold_items(
            stream,
            lambda: ExactSums(BUCKETS),
            add,
            progress=progress,
            temp_dir=temp_dir,
            order="sorted" if stream.counts.order == "sorted" else "partition",
            warn=False,
        )
        report = replace(
            report, notes=(*report.notes, "read a second time for the ordinal bootstrap")
        )
    with phase(progress, "computing the figures"):
        result = report_from_sums(
            sums,
            bootstrap=bootstrap,
            seed=seed,
            thresholds=thresholds,
            min_items=min_items,
            min_pair_items=min_pair_items,
            confidence=confidence,
            leave_out=leave_out,
            top_splits=top_splits,
        )
    return result, report


def stream_per_label_alpha(
    stream: AnnotationStream,
    *,
    min_items: int = 10,
    thresholds: AgreementThresholds | None = None,
    progress: ProgressCallback | None = None,
    temp_dir: Path | None = None,
) -> tuple[tuple[float | None, list[LabelAgreement]], LoadReport]:
    """:func:`~labelreview.agreement.per_label_alpha` for a file read in batches (the overall
    alpha and every label's one-vs-rest alpha only, the quickest figures)."""
    parts = frozenset({"labels", "overall"})

    def step(state: AgreementSums | None, batch: pd.DataFrame) -> AgreementSums | None:
        if batch.empty:
            return state
        return merge_sums(state, sums_of_batch(batch, "nominal", parts))

    sums, report = fold_items(stream, lambda: None, step, progress=progress, temp_dir=temp_dir)
    if sums is None:
        raise UsageError(f"no annotations found in {stream.path}")
    return per_label_from_sums(sums, min_items=min_items, thresholds=thresholds), report
