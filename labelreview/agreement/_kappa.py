"""Cohen's kappa (from confusion counts of annotator pairs) and each annotator's agreement with
the other annotators' majority.

Both count on the value groups of :mod:`labelreview.agreement._alpha` (per item x value counts)
or on pairs of annotations within items generated in bounded chunks; the counts are integers,
so :mod:`labelreview.agreement._sums` adds them up across parts of the data. Percent agreement,
Gwet's AC1 and Fleiss' kappa are read off those sums in :mod:`labelreview.agreement._report`.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from labelreview.agreement._alpha import Groups, _chunks, sum_by_key
from labelreview.agreement._coding import Coded

WEIGHTS: tuple[str | None, ...] = (None, "linear", "quadratic")
_DENSE_BUDGET = 20_000_000
_PAIR_BUDGET = 1_000_000
"""Annotation pairs generated at once for Cohen's kappa (bounds memory: about 100 MB)."""


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


@dataclass
class CohenCounts:
    """Pairs of annotations within items, counted per (first, second, value1, value2).

    ``first < second`` by annotator code (codes follow the sorted names, so this holds in any
    part of the data); integer counts, so parts add up exactly.
    """

    first: np.ndarray
    second: np.ndarray
    value1: np.ndarray
    value2: np.ndarray
    count: np.ndarray


def cohen_counts(coded: Coded) -> CohenCounts:
    """Confusion counts for every annotator pair, from pairs of annotations within items."""
    n_ann, v = coded.n_annotators, coded.n_values
    starts = coded.unit_starts()
    sizes = np.diff(starts)
    parts: list[tuple[tuple[np.ndarray, ...], np.ndarray]] = []
    radices = (n_ann, n_ann, v, v)
    for lo, hi in _chunks(sizes.astype(np.float64) ** 2, _PAIR_BUDGET):
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
        keys = (a1[keep], a2[keep], coded.value[left[keep]], coded.value[right[keep]])
        parts.append(sum_by_key(keys, radices, np.ones(keys[0].size, dtype=np.int64)))
    if not parts:
        none = np.zeros(0, dtype=np.int64)
        return CohenCounts(none, none, none, none, none)
    if len(parts) > 1:
        cols = tuple(np.concatenate([p[0][i] for p in parts]) for i in range(4))
        keys_all, total = sum_by_key(cols, radices, np.concatenate([p[1] for p in parts]))
    else:
        keys_all, total = parts[0]
    return CohenCounts(*keys_all, total)


def cohen_from_counts(
    counts: CohenCounts, n_values: int, min_items: int, weighted: bool
) -> PairParts:
    """Cohen's kappa per annotator pair with at least ``min_items`` shared items.

    ``counts`` must be sorted by (first, second, value1, value2), as :func:`cohen_counts` and
    the sums of :mod:`labelreview.agreement._sums` keep them.
    """
    v = n_values
    if counts.first.size == 0:
        none = np.zeros(0, dtype=np.int64)
        return PairParts(none, none, none, np.zeros(0), kappa={}, skipped=0)
    first, second = counts.first, counts.second
    new_pair = np.concatenate(([True], (first[1:] != first[:-1]) | (second[1:] != second[:-1])))
    pair_of = np.cumsum(new_pair) - 1
    starts = np.flatnonzero(new_pair)
    weights = counts.count.astype(np.float64)
    totals = np.bincount(pair_of, weights=weights)
    enough = totals >= min_items
    skipped = int((~enough).sum())
    chosen = np.flatnonzero(enough)
    local = np.full(starts.size, -1)
    local[chosen] = np.arange(chosen.size)
    same = counts.value1 == counts.value2
    agree = np.bincount(pair_of, weights=np.where(same, weights, 0.0))
    kinds: tuple[str | None, ...] = WEIGHTS if weighted else (None,)
    kappa = {w: np.full(chosen.size, np.nan) for w in kinds}
    sel = local[pair_of] >= 0
    if v * v > _DENSE_BUDGET:
        # One pair's confusion matrix alone would be too big (53,000 labels: 22 GB): work
        # from the observed cells and the two marginals instead.
        for w in kinds:
            kappa[w][:] = _sparse_kappa(
                pair_of[sel], counts.value1[sel], counts.value2[sel], weights[sel], w
            )[chosen]
    else:
        cell = counts.value1 * v + counts.value2
        per_chunk = max(1, _DENSE_BUDGET // max(v * v, 1))
        for lo in range(0, chosen.size, per_chunk):
            hi = min(chosen.size, lo + per_chunk)
            part = sel & (local[pair_of] >= lo) & (local[pair_of] < hi)
            conf = np.zeros((hi - lo) * v * v)
            np.add.at(conf, (local[pair_of[part]] - lo) * v * v + cell[part], weights[part])
            conf = conf.reshape(hi - lo, v, v)
            for w in kinds:
                kappa[w][lo:hi] = kappa_from_confusion(conf, w)
    return PairParts(
        first=first[starts][chosen],
        second=second[starts][chosen],
        n_items=totals[chosen].astype(np.int64),
        agreement=agree[chosen] / totals[chosen],
        kappa=kappa,
        skipped=skipped,
    )


def _sparse_kappa(
    pair: np.ndarray,
    value1: np.ndarray,
    value2: np.ndarray,
    count: np.ndarray,
    weights: str | None,
) -> np.ndarray:
    """:func:`kappa_from_confusion` for many pairs without any V x V matrix.

    Same definition (kappa = 1 - sum w o / sum w e, w on the category positions). Observed
    disagreement is summed over the observed cells; expected disagreement over the two
    marginals: unweighted n - sum_i r_i c_i / n; quadratic from the first two moments of r and
    c; linear from cumulative sums of c in value order. Indexed by pair code, so pairs that do
    not occur come out as NaN.
    """
    n_pairs = int(pair.max()) + 1 if pair.size else 0
    v1 = value1.astype(np.float64)
    v2 = value2.astype(np.float64)
    n = np.bincount(pair, weights=count, minlength=n_pairs)
    if weights is None:
        cell_w = (value1 != value2).astype(np.float64)
    elif weights == "linear":
        cell_w = np.abs(v1 - v2)
    else:
        cell_w = (v1 - v2) ** 2
    observed = np.bincount(pair, weights=count * cell_w, minlength=n_pairs)
    # Marginals as (pair, value) -> weight, for the first (r) and second (c) annotator.
    keys = np.concatenate([pair * 2, pair * 2 + 1])
    values = np.concatenate([value1, value2]).astype(np.int64)
    order = np.lexsort((values, keys))
    keys, values, w = keys[order], values[order], np.concatenate([count, count])[order]
    first = np.concatenate(([True], (keys[1:] != keys[:-1]) | (values[1:] != values[:-1])))
    group = np.cumsum(first) - 1
    g_key, g_val = keys[first], values[first]
    g_w = np.bincount(group, weights=w)
    g_pair, is_c = g_key // 2, (g_key % 2).astype(bool)
    pos = g_val.astype(np.float64)
    if weights is None:
        # sum_i r_i c_i: the rows and columns of one pair meet on equal values.
        radix = int(g_val.max()) + 1
        r_keys = g_pair[~is_c] * radix + g_val[~is_c]
        c_keys = g_pair[is_c] * radix + g_val[is_c]
        _, ri, ci = np.intersect1d(r_keys, c_keys, assume_unique=True, return_indices=True)
        rc = np.bincount(
            g_pair[~is_c][ri], weights=g_w[~is_c][ri] * g_w[is_c][ci], minlength=n_pairs
        )
        expected_sum = n * n - rc
    elif weights == "quadratic":
        m: dict[tuple[str, int], np.ndarray] = {}
        for side, mask in (("r", ~is_c), ("c", is_c)):
            for k in (1, 2):
                m[side, k] = np.bincount(
                    g_pair[mask], weights=g_w[mask] * pos[mask] ** k, minlength=n_pairs
                )
        expected_sum = n * m["r", 2] + n * m["c", 2] - 2.0 * m["r", 1] * m["c", 1]
    else:
        # sum_i r_i sum_j c_j |i - j|, in value order within each pair: for each r value i,
        # c at or below contributes i*C - S, c above contributes (S_all - S) - i*(C_all - C).
        c_w = np.where(is_c, g_w, 0.0)
        # Entries are sorted by (pair * 2 + side, value): reorder to (pair, value, side c first).
        order2 = np.lexsort((~is_c, g_val, g_pair))
        pr, vl, cw, rw = g_pair[order2], pos[order2], c_w[order2], np.where(is_c, 0.0, g_w)[order2]
        c_cum = np.cumsum(cw)
        s_cum = np.cumsum(cw * vl)
        starts = np.concatenate(([True], pr[1:] != pr[:-1]))
        base_idx = np.flatnonzero(starts)
        pair_start = np.repeat(base_idx, np.diff(np.append(base_idx, pr.size)))
        c_before = np.concatenate(([0.0], c_cum))[pair_start]
        s_before = np.concatenate(([0.0], s_cum))[pair_start]
        c_le, s_le = c_cum - c_before, s_cum - s_before
        c_all = np.bincount(pr, weights=cw, minlength=n_pairs)[pr]
        s_all = np.bincount(pr, weights=cw * vl, minlength=n_pairs)[pr]
        term = rw * ((vl * c_le - s_le) + (s_all - s_le) - vl * (c_all - c_le))
        expected_sum = np.bincount(pr, weights=term, minlength=n_pairs)
    expected = expected_sum / np.where(n > 0, n, 1.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(expected > 1e-12, 1.0 - observed / expected, np.nan)


def pairwise_cohen(coded: Coded, min_items: int, weighted: bool) -> PairParts:
    """Cohen's kappa for every annotator pair sharing ``min_items`` items."""
    return cohen_from_counts(cohen_counts(coded), coded.n_values, min_items, weighted)


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
