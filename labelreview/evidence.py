"""What the data shows about each flagged label: who used it, on which items, how consistently.

A curator deciding about a label wants to see it in use: how many annotators gave it, a few of
the items it was given to (their caption or text and preview path, from the item table), and
how well the annotators agreed on it. This module gathers those facts for every label in one
pass over the annotation frame, so a front end can then read them per label in microseconds.
It is pure core: pandas and the agreement engine, no printing, no files.
"""

from __future__ import annotations

import warnings
from collections.abc import Iterable
from dataclasses import dataclass, field
from typing import Any

from labelreview.agreement import (
    AgreementThresholds,
    LabelAgreement,
    UndefinedAgreementWarning,
    per_label_alpha,
)
from labelreview.dataset import Dataset
from labelreview.errors import LabelReviewError

EXAMPLES_PER_LABEL = 5


@dataclass(frozen=True)
class ExampleItem:
    """One item a label was given to, with what the item table says about it."""

    item: str
    text: str | None = None
    """The item's caption or text, when the item table has a text column."""
    preview: str | None = None
    """A path or address of a preview (an image file), when the item table has one."""


@dataclass
class LabelEvidence:
    """Per-label annotator counts and example items for a set of labels."""

    annotators: dict[str, int] = field(default_factory=dict)
    """Label -> distinct annotators who gave it."""
    example_ids: dict[str, tuple[str, ...]] = field(default_factory=dict)
    """Label -> the first few distinct items carrying it, in file order."""
    item_details: dict[str, tuple[str | None, str | None]] = field(default_factory=dict)
    """Example item -> (text, preview) from the item table, for the items listed above."""

    def annotator_count(self, label: str) -> int:
        return self.annotators.get(label, 0)

    def examples(self, label: str, limit: int = EXAMPLES_PER_LABEL) -> list[ExampleItem]:
        """Up to ``limit`` items carrying ``label``, with their text and preview if known."""
        out = []
        for item in self.example_ids.get(label, ())[:limit]:
            text, preview = self.item_details.get(item, (None, None))
            out.append(ExampleItem(item=item, text=text, preview=preview))
        return out


def _text(value: Any) -> str | None:
    if value is None or (isinstance(value, float) and value != value):
        return None
    text = str(value).strip()
    return text or None


def gather_evidence(
    dataset: Dataset,
    labels: Iterable[str] | None = None,
    *,
    per_label: int = EXAMPLES_PER_LABEL,
) -> LabelEvidence:
    """Count annotators and pick example items for ``labels`` (default: every label).

    Example items are the first ``per_label`` distinct items carrying the label, in the
    annotation file's order, so the same data always shows the same examples.
    """
    frame = dataset.annotations
    if frame is None or not len(frame):
        return LabelEvidence()
    wanted = None if labels is None else set(labels)
    # Whole-frame group-bys, then plain lists: element-wise access to Arrow-backed string
    # columns is slow, bulk .tolist() is not.
    counts = frame.groupby("label", sort=False)["annotator"].nunique()
    annotators = dict(zip(counts.index.tolist(), counts.tolist(), strict=True))
    firsts = frame.drop_duplicates(["label", "item"]).groupby("label", sort=False).head(per_label)
    examples: dict[str, list[str]] = {}
    for label, item in zip(firsts["label"].tolist(), firsts["item"].tolist(), strict=True):
        if wanted is None or label in wanted:
            examples.setdefault(str(label), []).append(str(item))
    if wanted is not None:
        annotators = {k: v for k, v in annotators.items() if k in wanted}
    needed = {item for items in examples.values() for item in items}
    details: dict[str, tuple[str | None, str | None]] = {}
    table = dataset.items
    if table is not None and len(table):
        none = [None] * len(table)
        texts = table["text"].tolist() if "text" in table.columns else none
        previews = table["preview"].tolist() if "preview" in table.columns else none
        for item, text, preview in zip(table["item"].tolist(), texts, previews, strict=True):
            if item in needed and item not in details:
                details[str(item)] = (_text(text), _text(preview))
    return LabelEvidence(
        annotators={str(k): int(v) for k, v in annotators.items()},
        example_ids={k: tuple(v) for k, v in examples.items()},
        item_details=details,
    )


def label_agreement(dataset: Dataset) -> tuple[dict[str, LabelAgreement], str | None]:
    """Each label's one-vs-rest Krippendorff's alpha, or (empty, why not).

    Uses the dataset config's ``agreement`` section (thresholds for the interpretation words,
    ``min_items``). Never raises for data on which agreement is undefined (no annotations, a
    single annotator): it returns the reason instead.
    """
    frame = dataset.annotations
    if frame is None or not len(frame):
        return {}, "no annotations"
    if frame["annotator"].nunique() < 2:
        return {}, "fewer than two annotators, so agreement is undefined"
    settings = dataset.config.agreement
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UndefinedAgreementWarning)
        try:
            _, per_label = per_label_alpha(
                frame,
                min_items=settings.min_items,
                thresholds=AgreementThresholds(settings.reliable, settings.tentative),
            )
        except LabelReviewError as exc:
            return {}, str(exc)
    return {a.label: a for a in per_label}, None
