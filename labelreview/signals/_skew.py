"""Annotator skew: an annotator who gives a label far more (or less) often than the others do.

Annotators see different items, so a raw rate comparison would mistake a different mix of items
for a habit. The comparison here is on the same items: for annotator *a* and label *l*, over the
comparable items *a* judged (items with two or more annotators),

- ``given`` k = items where *a* gave *l*;
- ``expected`` E = sum over those items of the share of the *other* annotators of the item who
  gave *l*: what *a* would give at the others' rate on exactly these items.

An exact binomial test of k in n items against the rate E / n (two-sided by doubling; treating
the others' rate as known, which makes it a little generous), the Benjamini-Hochberg correction
over every (annotator, label) pair tested, and an effect size: the lower of k and E over the
higher (1 means the same). A pair is flagged when q <= ``signals.fdr``, that ratio is below
``signals.skew_ratio`` and the larger of k and E is at least 5. Annotators need
``signals.skew_min_items`` comparable items to be tested.

The leave-one-out change of alpha comes from the agreement engine (alpha with the annotator left
out, minus alpha with everyone; positive: agreement rises without them).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
import scipy.sparse as sp

from labelreview.agreement import AgreementResult
from labelreview.config import SignalsConfig
from labelreview.signals._judgements import Judgements
from labelreview.signals._stats import benjamini_hochberg, binomial_two_sided

MIN_COUNT = 5
"""The larger of given and expected must reach this (common practice, no source)."""


@dataclass(frozen=True)
class SkewResult:
    """One annotator's use of one label, against the other annotators on the same items."""

    annotator: str
    label: str
    n_items: int
    """Comparable items the annotator judged."""
    given: int
    expected: float
    rate: float
    others_rate: float
    ratio: float
    """Lower of given and expected over the higher."""
    p: float
    q: float
    alpha_without: float | None
    alpha_change: float | None
    """alpha without the annotator minus alpha with everyone (agreement engine)."""

    @property
    def direction(self) -> str:
        return "more" if self.given > self.expected else "less"

    def to_dict(self) -> dict[str, Any]:
        return {
            "annotator": self.annotator,
            "label": self.label,
            "n_items": self.n_items,
            "given": self.given,
            "expected": round(self.expected, 3),
            "rate": round(self.rate, 4),
            "others_rate": round(self.others_rate, 4),
            "ratio": round(self.ratio, 4),
            "direction": self.direction,
            "p": float(f"{self.p:.4g}"),
            "q": float(f"{self.q:.4g}"),
            "alpha_without": None if self.alpha_without is None else round(self.alpha_without, 4),
            "alpha_change": None if self.alpha_change is None else round(self.alpha_change, 4),
        }


@dataclass(frozen=True)
class AnnotatorSummary:
    """One annotator: comparable items, leave-one-out alpha, labels they are skewed on."""

    annotator: str
    n_items: int
    alpha_without: float | None
    alpha_change: float | None
    skewed_labels: tuple[str, ...]

    def to_dict(self) -> dict[str, Any]:
        return {
            "annotator": self.annotator,
            "n_items": self.n_items,
            "alpha_without": None if self.alpha_without is None else round(self.alpha_without, 4),
            "alpha_change": None if self.alpha_change is None else round(self.alpha_change, 4),
            "skewed_labels": list(self.skewed_labels),
        }


def annotator_skew(
    judgements: Judgements,
    settings: SignalsConfig,
    agreement: AgreementResult | None = None,
) -> tuple[list[SkewResult], list[AnnotatorSummary], int]:
    """Flagged (annotator, label) pairs, strongest first; a summary per annotator; tests run.

    Args:
        judgements: The coded annotation frame.
        settings: Thresholds.
        agreement: The agreement report, for the leave-one-out change (optional).
    """
    j = judgements
    n_ann, n_lab = j.n_annotators, j.n_labels
    loo = {a.annotator: a for a in agreement.per_annotator} if agreement is not None else {}
    comparable_pair = j.judges[j.pair_item] >= 2
    n_items = np.bincount(j.pair_annotator[comparable_pair], minlength=n_ann)
    rows = j.judges[j.item] >= 2
    item, ann, lab = j.item[rows], j.annotator[rows], j.label[rows]
    share = 1.0 / (j.judges[item] - 1.0)
    # Others' share per (item, label), summed over each annotator's comparable items.
    per_item = sp.csr_matrix((share, (item, lab)), shape=(j.n_items, n_lab))
    judged = sp.csr_matrix(
        (
            np.ones(int(comparable_pair.sum())),
            (j.pair_annotator[comparable_pair], j.pair_item[comparable_pair]),
        ),
        shape=(n_ann, j.n_items),
    )
    everyone = np.asarray((judged @ per_item).todense())
    own = np.bincount(ann * n_lab + lab, weights=share, minlength=n_ann * n_lab).reshape(
        n_ann, n_lab
    )
    expected = np.maximum(everyone - own, 0.0)
    given = np.bincount(ann * n_lab + lab, minlength=n_ann * n_lab).reshape(n_ann, n_lab)
    n = np.broadcast_to(n_items[:, None], given.shape).astype(float)
    tested = (n >= settings.skew_min_items) & ((given + expected) > 0)
    a_idx, l_idx = np.nonzero(tested)
    k = given[a_idx, l_idx].astype(float)
    e = expected[a_idx, l_idx]
    nn = n[a_idx, l_idx]
    p = binomial_two_sided(k, nn, e / nn)
    q = benjamini_hochberg(p)
    high = np.maximum(k, e)
    ratio = np.where(high > 0, np.minimum(k, e) / np.where(high > 0, high, 1.0), 1.0)
    flagged = (q <= settings.fdr) & (ratio < settings.skew_ratio) & (high >= MIN_COUNT)
    results: list[SkewResult] = []
    for i in np.flatnonzero(flagged):
        name = str(j.annotator_names[a_idx[i]])
        row = loo.get(name)
        results.append(
            SkewResult(
                annotator=name,
                label=str(j.label_names[l_idx[i]]),
                n_items=int(nn[i]),
                given=int(k[i]),
                expected=float(e[i]),
                rate=float(k[i] / nn[i]),
                others_rate=float(e[i] / nn[i]),
                ratio=float(ratio[i]),
                p=float(p[i]),
                q=float(q[i]),
                alpha_without=None if row is None else row.alpha_without,
                alpha_change=None if row is None else row.change,
            )
        )
    results.sort(key=lambda r: (r.ratio, r.q, r.annotator, r.label))
    skewed: dict[str, list[str]] = {}
    for r in results:
        skewed.setdefault(r.annotator, []).append(r.label)
    summaries = []
    for code, name in enumerate(j.annotator_names):
        row = loo.get(str(name))
        summaries.append(
            AnnotatorSummary(
                annotator=str(name),
                n_items=int(n_items[code]),
                alpha_without=None if row is None else row.alpha_without,
                alpha_change=None if row is None else row.change,
                skewed_labels=tuple(skewed.get(str(name), ())),
            )
        )
    summaries.sort(key=lambda s: (-len(s.skewed_labels), -(s.alpha_change or 0.0), s.annotator))
    return results, summaries, int(tested.sum())
