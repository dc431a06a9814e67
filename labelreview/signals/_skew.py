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

A heavy user of a label raises "the others' rate" for everyone who shares items with them, and
would make them all look like under-users. So it runs twice: the first pass finds each label's
heavy users (flagged, giving it more than expected); the second measures every annotator of that
label against the others *without* those heavy users. The flags come from the second pass.

The leave-one-out change of alpha comes from the agreement engine (alpha with the annotator left
out, minus alpha with everyone; positive: agreement rises without them).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np

from labelreview.config import SignalsConfig
from labelreview.signals._judgements import Judgements
from labelreview.signals._stats import benjamini_hochberg, binomial_two_sided

if TYPE_CHECKING:
    from labelreview.agreement import AgreementResult

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


def _first_pass(j: Judgements) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(given, expected, items) as annotators x labels, the others being everyone else."""
    import scipy.sparse as sp  # here, not at the top: the review app's start does not need it

    n_ann, n_lab = j.n_annotators, j.n_labels
    comparable_pair = j.judges[j.pair_item] >= 2
    n_items = np.bincount(j.pair_annotator[comparable_pair], minlength=n_ann)
    rows = j.judges[j.item] >= 2
    item, ann, lab = j.item[rows], j.annotator[rows], j.label[rows]
    share = 1.0 / (j.judges[item] - 1.0)
    # Everyone's share per (item, label), summed over each annotator's comparable items; the
    # annotator's own contribution is taken off afterwards.
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
    return given.astype(float), expected, n


def _recount(
    j: Judgements, label: int, excluded: np.ndarray
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(given, expected, items) per annotator for one label, the others leaving out
    ``excluded`` annotators (and the annotator themself)."""
    n_ann = j.n_annotators
    pair_item, pair_ann = j.pair_item, j.pair_annotator
    in_ref = ~excluded[pair_ann]
    ref_judges = np.bincount(pair_item[in_ref], minlength=j.n_items)
    rows = j.label == label
    item_l, ann_l = j.item[rows], j.annotator[rows]
    ref_gave = np.bincount(item_l[~excluded[ann_l]], minlength=j.n_items)
    pair_keys = pair_item * n_ann + pair_ann  # sorted: pairs come from sorted_unique
    gave = np.zeros(pair_keys.size, dtype=bool)
    gave[np.searchsorted(pair_keys, item_l * n_ann + ann_l)] = True
    others = ref_judges[pair_item] - in_ref
    gave_others = ref_gave[pair_item] - (in_ref & gave)
    valid = others >= 1
    share = np.where(valid, gave_others / np.maximum(others, 1), 0.0)
    n = np.bincount(pair_ann[valid], minlength=n_ann).astype(float)
    expected = np.bincount(pair_ann[valid], weights=share[valid], minlength=n_ann)
    given = np.bincount(pair_ann[valid & gave], minlength=n_ann).astype(float)
    return given, expected, n


def _test(
    given: np.ndarray, expected: np.ndarray, n: np.ndarray, settings: SignalsConfig
) -> dict[str, np.ndarray]:
    tested = (n >= settings.skew_min_items) & ((given + expected) > 0)
    a_idx, l_idx = np.nonzero(tested)
    k = given[a_idx, l_idx]
    e = expected[a_idx, l_idx]
    nn = n[a_idx, l_idx]
    p = binomial_two_sided(k, nn, e / nn)
    q = benjamini_hochberg(p)
    high = np.maximum(k, e)
    ratio = np.where(high > 0, np.minimum(k, e) / np.where(high > 0, high, 1.0), 1.0)
    flagged = (q <= settings.fdr) & (ratio < settings.skew_ratio) & (high >= MIN_COUNT)
    return {
        "a": a_idx,
        "l": l_idx,
        "k": k,
        "e": e,
        "n": nn,
        "p": p,
        "q": q,
        "ratio": ratio,
        "flagged": flagged,
    }


def annotator_skew(
    judgements: Judgements,
    settings: SignalsConfig,
    agreement: AgreementResult | None = None,
) -> tuple[list[SkewResult], list[AnnotatorSummary], int]:
    """Flagged (annotator, label) pairs, strongest first; a summary per annotator; tests run.

    Two passes: the first compares each annotator with everyone else on the same items and
    finds the heavy users of each label (flagged, giving it more than expected). The second
    compares every annotator of such a label with the others minus those heavy users, so one
    heavy user does not make everyone else look as if they under-use the label. The
    Benjamini-Hochberg correction runs over the second pass's tests.

    Args:
        judgements: The coded annotation frame.
        settings: Thresholds.
        agreement: The agreement report, for the leave-one-out change (optional).
    """
    j = judgements
    loo = {a.annotator: a for a in agreement.per_annotator} if agreement is not None else {}
    given, expected, n = _first_pass(j)
    first = _test(given, expected, n, settings)
    heavy = first["flagged"] & (first["k"] > first["e"])
    by_label: dict[int, list[int]] = {}
    for a, label in zip(first["a"][heavy], first["l"][heavy], strict=True):
        by_label.setdefault(int(label), []).append(int(a))
    if by_label:
        n = n.copy()
        for label, users in by_label.items():
            excluded = np.zeros(j.n_annotators, dtype=bool)
            excluded[users] = True
            g, e, items = _recount(j, label, excluded)
            given[:, label], expected[:, label], n[:, label] = g, e, items
    final = _test(given, expected, n, settings)
    a_idx, l_idx, k, e, nn = final["a"], final["l"], final["k"], final["e"], final["n"]
    p, q, ratio, flagged = final["p"], final["q"], final["ratio"], final["flagged"]
    n_items = np.bincount(j.pair_annotator[j.judges[j.pair_item] >= 2], minlength=j.n_annotators)
    tested = a_idx
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
    return results, summaries, int(tested.size)
