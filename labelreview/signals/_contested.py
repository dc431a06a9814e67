"""Contested labels: per-label one-vs-rest alpha below a threshold, and who they are confused with.

Every figure comes from the agreement engine's report
(:func:`labelreview.agreement.agreement_report`): the per-label alpha (each label as binary
data, given or not given, with at least ``agreement.min_items`` comparable items) and the
value pairs annotators split between (the off-diagonal cells of the coincidence matrix).
Nothing here recomputes agreement.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    from labelreview.agreement import AgreementResult

PARTNERS = 3
"""How many split partners a contested label lists."""


@dataclass(frozen=True)
class Split:
    """Another value annotators gave where someone gave this label, and how often."""

    other: str
    """The other label (multi-label data: a label of the other set, or :data:`NOTHING`)."""
    coincidences: float
    """Coincidences of the splits involved (for two annotators per item: items split)."""

    def to_dict(self) -> dict[str, Any]:
        return {"other": self.other, "coincidences": round(self.coincidences, 3)}


@dataclass(frozen=True)
class ContestedLabel:
    """A label annotators do not agree on."""

    label: str
    alpha: float
    """One-vs-rest Krippendorff's alpha."""
    n_items: int
    """Comparable items where someone gave the label."""
    prevalence: float
    threshold: float
    splits: tuple[Split, ...]
    """The values it is most often split with, most frequent first."""

    def to_dict(self) -> dict[str, Any]:
        return {
            "label": self.label,
            "alpha": round(self.alpha, 4),
            "n_items": self.n_items,
            "prevalence": round(self.prevalence, 4),
            "threshold": self.threshold,
            "splits": [s.to_dict() for s in self.splits],
        }


NOTHING = "(no label)"
"""The partner shown when, in multi-label data, the other annotator gave nothing instead."""


def _members(value: str, multi: bool) -> set[str]:
    from labelreview.agreement._coding import SET_SEPARATOR  # how label sets are written

    return set(value.split(SET_SEPARATOR)) if multi else {value}


def _partners(result: AgreementResult, labels: set[str]) -> dict[str, tuple[Split, ...]]:
    """What annotators gave instead of each label in ``labels``, from one pass over the splits.

    Single-label data: the other label of each split. Multi-label data (values are label sets):
    the labels in the other set that are not in the set with the label; none at all counts as
    :data:`NOTHING`.
    """
    totals: dict[str, dict[str, float]] = {}
    for pair in result.split_pairs:
        first = _members(pair.first, result.multi_label)
        second = _members(pair.second, result.multi_label)
        for mine, other in ((first, second), (second, first)):
            instead = sorted(other - mine) or [NOTHING]
            for label in (mine - other) & labels:
                found = totals.setdefault(label, {})
                for name in instead:
                    found[name] = found.get(name, 0.0) + float(pair.coincidences)
    out: dict[str, tuple[Split, ...]] = {}
    for label, found in totals.items():
        ranked = sorted(found.items(), key=lambda kv: (-kv[1], kv[0]))[:PARTNERS]
        out[label] = tuple(Split(other=name, coincidences=count) for name, count in ranked)
    return out


def contested_labels(
    result: AgreementResult, threshold: float, labels: Sequence[str] | None = None
) -> list[ContestedLabel]:
    """Labels whose one-vs-rest alpha is defined and below ``threshold``, least reliable first.

    Args:
        result: The agreement report (``split_pairs`` should list enough pairs; the queue asks
            for up to 1,000).
        threshold: Alpha below this is contested.
        labels: Only these labels (None: all).
    """
    wanted = None if labels is None else set(labels)
    rows = [
        row
        for row in result.per_label
        if row.alpha is not None
        and row.alpha < threshold
        and (wanted is None or row.label in wanted)
    ]
    partners = _partners(result, {row.label for row in rows})
    return [
        ContestedLabel(
            label=row.label,
            alpha=float(row.alpha),  # type: ignore[arg-type]  # filtered above
            n_items=row.n_items,
            prevalence=float(row.prevalence),
            threshold=threshold,
            splits=partners.get(row.label, ()),
        )
        for row in rows
    ]
