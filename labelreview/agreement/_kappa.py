"""Chance-corrected agreement beside alpha: Cohen's and Fleiss' kappa, Gwet's AC1, percent
agreement, and each annotator's agreement with the other annotators' majority.

All work on the value groups of :mod:`labelreview.agreement._alpha` (per item x value counts)
or, for Cohen's kappa, on pairs of annotations within items generated in bounded chunks.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from labelreview.agreement._alpha import Groups, _chunks
from labelreview.agreement._coding import Coded

WEIGHTS: tuple[str | None, ...] = (None, "linear", "quadratic")
_DENSE_BUDGET = 20_000_000


def percent_from_groups(groups: Groups) -> tuple[float | None, int]:
    """Mean over pairable items of the share of agreeing annotator pairs, and the item count.

    p_u = sum over c of n_uc (n_uc - 1) / (m_u (m_u - 1)); None without pairable items.
    """
    m_g = groups.m[groups.unit].astype(np.float64)
    keep = m_g >= 2
    count = groups.count[keep].astype(np.float64)
    share = count * (count - 1.0) / (m_g[keep] * (m_g[keep] - 1.0))
    n_pairable = int((groups.m >= 2).sum())
    if n_pairable == 0:
        return None, 0
    return float(share.sum() / n_pairable), n_pairable


def gwet_from_groups(groups: Groups, n_categories: int) -> tuple[float | None, str | None]:
    """Gwet's AC1 for several raters with missing ratings (Gwet 2008; handbook, chapter 4).

    p_a as in :func:`percent_from_groups`; pi_c = mean over items with a rating of n_uc / m_u;
    p_e = sum of pi_c (1 - pi_c) / (q - 1) with q categories; AC1 = (p_a - p_e) / (1 - p_e).
    """
    p_a, n_pairable = percent_from_groups(groups)
    if p_a is None:
        return None, "no item has two or more annotations"
    if n_categories < 2:
        return None, "only one category occurs, so chance agreement (q - 1 = 0) is undefined"
    rated = int((groups.m >= 1).sum())
    share = groups.count / groups.m[groups.unit]
    pi = np.bincount(groups.value, weights=share, minlength=n_categories) / rated
    p_e = float((pi * (1.0 - pi)).sum() / (n_categories - 1))
    return float((p_a - p_e) / (1.0 - p_e)), None


def fleiss_from_groups(groups: Groups, n_categories: int) -> tuple[float | None, str | None]:
    """Fleiss' kappa (Fleiss 1971), defined only when every item has the same number of ratings.

    P_i = (sum_j n_ij^2 - m) / (m (m - 1)); P = mean P_i; p_j = sum_i n_ij / (N m);
    P_e = sum p_j^2; kappa = (P - P_e) / (1 - P_e).
    """
    rated = groups.m[groups.m > 0]
    if rated.size == 0:
        return None, "there are no annotations"
    low, high = int(rated.min()), int(rated.max())
    if low != high:
        return None, (
            f"items have between {low} and {high} annotations; Fleiss' kappa needs the same "
            "number for every item"
        )
    if low < 2:
        return None, "every item has one annotation, so there is nothing to compare"
    m = float(low)
    n_items = rated.size
    count = groups.count.astype(np.float64)
    p_bar = float(((count * count).sum() - n_items * m) / (n_items * m * (m - 1.0)))
    p_j = np.bincount(groups.value, weights=count, minlength=n_categories) / (n_items * m)
    p_e = float((p_j * p_j).sum())
    if p_e >= 1.0 - 1e-12:
        return None, "only one category occurs, so chance agreement is 1 and kappa is undefined"
    return (p_bar - p_e) / (1.0 - p_e), None


def kappa_from_confusion(confusion: np.ndarray, weights: str | None = None) -> np.ndarray:
    """Cohen's kappa for one confusion matrix (V x V) or a stack of them (P x V x V).

    kappa = 1 - sum w_ij o_ij / sum w_ij e_ij, e_ij = row_i col_j / n, with w = 1 - identity
    (unweighted), |i - j| (linear) or (i - j)^2 (quadratic) over the category positions, as in
    scikit-learn's ``cohen_kappa_score``. NaN where undefined (no chance disagreement).
    """
    conf = np.asarray(confusion, dtype=np.float64)
    single = conf.ndim == 2
    if single:
        conf = conf[None, :, :]
    v = conf.shape[-1]
    idx = np.arange(v, dtype=np.float64)
    if weights is None:
        w = 1.0 - np.eye(v)
    elif weights == "linear":
        w = np.abs(idx[:, None] - idx[None, :])
    else:
        w = (idx[:, None] - idx[None, :]) ** 2
    n = conf.sum(axis=(1, 2))
    rows, cols = conf.sum(axis=2), conf.sum(axis=1)
    expected = np.einsum("pi,pj,ij->p", rows, cols, w) / np.where(n > 0, n, 1.0)
    observed = np.einsum("pij,ij->p", conf, w)
    with np.errstate(divide="ignore", invalid="ignore"):
        kappa = np.where(expected > 1e-12, 1.0 - observed / expected, np.nan)
    return kappa[0] if single else kappa


@dataclass
class PairParts:
    """Cohen's kappa per annotator pair with enough shared items."""

    first: np.ndarray
    second: np.ndarray
    n_items: np.ndarray
    agreement: np.ndarray
    kappa: dict[str | None, np.ndarray]
    skipped: int
    """Annotator pairs that shared at least one item but fewer than the minimum."""


def pairwise_cohen(coded: Coded, min_items: int, weighted: bool) -> PairParts:
    """Confusion counts for every annotator pair from pairs of annotations within items."""
    n_ann, v = coded.n_annotators, coded.n_values
    starts = coded.unit_starts()
    sizes = np.diff(starts)
    keys: list[np.ndarray] = []
    for lo, hi in _chunks(sizes.astype(np.float64) ** 2, _DENSE_BUDGET // 4):
        units = np.arange(lo, hi)
        reps = sizes[units]
        rows = np.arange(starts[lo], starts[hi])
        owner = np.repeat(units, reps)
        own_reps = sizes[owner]
        left = np.repeat(rows, own_reps)
        offsets = np.arange(left.size) - np.repeat(np.cumsum(own_reps) - own_reps, own_reps)
        right = starts[np.repeat(owner, own_reps)] + offsets
        a1, a2 = coded.annotator[left], coded.annotator[right]
        keep = a1 < a2
        pair = a1[keep] * n_ann + a2[keep]
        key = (pair * v + coded.value[left[keep]]) * v + coded.value[right[keep]]
        uniq, cnt = np.unique(key, return_counts=True)
        keys.append(np.stack([uniq, cnt]))
    if not keys:
        none = np.zeros(0, dtype=np.int64)
        return PairParts(none, none, none, np.zeros(0), kappa={}, skipped=0)
    joined = np.concatenate(keys, axis=1)
    uniq, inverse = np.unique(joined[0], return_inverse=True)
    counts = np.bincount(inverse.ravel(), weights=joined[1]).astype(np.int64)
    cell = uniq % (v * v)
    pair = uniq // (v * v)
    pair_ids, pair_of = np.unique(pair, return_inverse=True)
    pair_of = pair_of.ravel()
    totals = np.bincount(pair_of, weights=counts)
    enough = totals >= min_items
    skipped = int((~enough).sum())
    chosen = np.flatnonzero(enough)
    local = np.full(pair_ids.size, -1)
    local[chosen] = np.arange(chosen.size)
    agree = np.bincount(pair_of, weights=np.where(cell // v == cell % v, counts, 0))
    kinds: tuple[str | None, ...] = WEIGHTS if weighted else (None,)
    kappa = {w: np.full(chosen.size, np.nan) for w in kinds}
    sel = local[pair_of] >= 0
    per_chunk = max(1, _DENSE_BUDGET // max(v * v, 1))
    for lo in range(0, chosen.size, per_chunk):
        hi = min(chosen.size, lo + per_chunk)
        part = sel & (local[pair_of] >= lo) & (local[pair_of] < hi)
        conf = np.zeros((hi - lo) * v * v)
        np.add.at(conf, (local[pair_of[part]] - lo) * v * v + cell[part], counts[part])
        conf = conf.reshape(hi - lo, v, v)
        for w in kinds:
            kappa[w][lo:hi] = kappa_from_confusion(conf, w)
    ids = pair_ids[chosen]
    return PairParts(
        first=ids // n_ann,
        second=ids % n_ann,
        n_items=totals[chosen].astype(np.int64),
        agreement=agree[chosen] / totals[chosen],
        kappa=kappa,
        skipped=skipped,
    )


def majority_agreement(coded: Coded, groups: Groups) -> tuple[np.ndarray, np.ndarray]:
    """Per annotator: how often their value is the one most of the others gave.

    For each value in an item with two or more: the other annotators' counts are n_uc, less one
    for the annotator's own value. It agrees when its own value has the strictly highest count
    among the others, disagrees when another value has more, and is left out on a tie.

    Returns:
        (agreeing, counted) per annotator code; the rate is their ratio.
    """
    n_ann = coded.n_annotators
    m_g = groups.m[groups.unit]
    keep = m_g >= 2
    g_unit, g_value, g_count = groups.unit[keep], groups.value[keep], groups.count[keep]
    if g_unit.size == 0:
        return np.zeros(n_ann), np.zeros(n_ann)
    first = np.flatnonzero(np.concatenate(([True], g_unit[1:] != g_unit[:-1])))
    owner = np.repeat(np.arange(first.size), np.diff(np.append(first, g_unit.size)))
    top = np.maximum.reduceat(g_count, first)
    n_top = np.add.reduceat((g_count == top[owner]).astype(np.int64), first)
    second = np.maximum.reduceat(np.where(g_count == top[owner], 0, g_count), first)
    # Per value: find its group's count by looking up (unit, value) in the sorted groups.
    v = coded.n_values
    g_key = g_unit * v + g_value
    rows = np.flatnonzero(groups.m[coded.unit] >= 2)
    pos = np.searchsorted(g_key, coded.unit[rows] * v + coded.value[rows])
    own = g_count[pos]
    unit_slot = owner[pos]
    unique_top = (own == top[unit_slot]) & (n_top[unit_slot] == 1)
    best_other = np.where(unique_top, second[unit_slot], top[unit_slot])
    own_others = own - 1
    agrees = own_others > best_other
    counted = own_others != best_other
    ann = coded.annotator[rows]
    return (
        np.bincount(ann, weights=agrees, minlength=n_ann),
        np.bincount(ann, weights=counted, minlength=n_ann),
    )
