"""Krippendorff's alpha by the coincidence-matrix method, vectorised over items.

Everything here works on the integer codes of :mod:`labelreview.agreement._coding`: per-item
value counts come from one sort of ``item * n_values + value``, and the coincidence matrix, the
per-item observed disagreement (which the bootstrap resamples) and the leave-one-annotator-out
matrices come from pairs of value groups within items, generated in bounded chunks. No dense
items x labels matrix is built and no Python loop runs over items.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp

from labelreview.agreement._coding import (
    NEARBY_LIMIT,
    Coded,
    Lookup,
    count_codes,
    narrow_key,
    run_lengths,
)

_PAIR_BUDGET = 1_000_000
"""Largest number of value-group pairs generated at once (bounds memory: about 80 MB)."""
_BLOCK_BUDGET = 2_000_000
"""Largest block of the values x values difference table held at once."""


# -- difference functions ---------------------------------------------------------------------


class Metric:
    """A difference function delta^2 over value codes, and the expected-disagreement sum."""

    name = "nominal"

    def pairs(self, c: np.ndarray, k: np.ndarray) -> np.ndarray:
        """delta^2 for value codes ``c`` and ``k`` (broadcast together)."""
        return (np.asarray(c) != np.asarray(k)).astype(np.float64)

    def block(self, rows: np.ndarray, n_values: int) -> np.ndarray:
        """delta^2 for ``rows`` x every value code, as a dense block."""
        return self.pairs(rows[:, None], np.arange(n_values)[None, :])

    def expected_sum(self, marginals: np.ndarray) -> np.ndarray:
        """sum over c, k of n_c n_k delta^2_ck, for marginals of shape (V,) or (draws, V)."""
        marg = np.atleast_2d(np.asarray(marginals, dtype=np.float64))
        n_values = marg.shape[1]
        total = np.zeros(marg.shape[0])
        step = max(1, _BLOCK_BUDGET // max(n_values, 1))
        for start in range(0, n_values, step):
            rows = np.arange(start, min(n_values, start + step))
            delta = self.block(rows, n_values)
            total += ((marg[:, rows] @ delta) * marg).sum(axis=1)
        return total if np.ndim(marginals) == 2 else total[0]


class NominalMetric(Metric):
    """delta^2 = 0 if c == k else 1."""

    def expected_sum(self, marginals: np.ndarray) -> np.ndarray:
        marg = np.asarray(marginals, dtype=np.float64)
        n = marg.sum(axis=-1)
        return n * n - (marg * marg).sum(axis=-1)


class IntervalMetric(Metric):
    """delta^2 = (c - k)^2 on the values' numbers."""

    name = "interval"

    def __init__(self, numbers: np.ndarray) -> None:
        self.x = np.asarray(numbers, dtype=np.float64)

    def pairs(self, c: np.ndarray, k: np.ndarray) -> np.ndarray:
        return (self.x[c] - self.x[k]) ** 2

    def expected_sum(self, marginals: np.ndarray) -> np.ndarray:
        marg = np.asarray(marginals, dtype=np.float64)
        n = marg.sum(axis=-1)
        s1 = marg @ self.x
        s2 = marg @ (self.x * self.x)
        return 2.0 * (n * s2 - s1 * s1)


class RatioMetric(IntervalMetric):
    """delta^2 = ((c - k) / (c + k))^2; 0 when both are 0."""

    name = "ratio"

    def pairs(self, c: np.ndarray, k: np.ndarray) -> np.ndarray:
        xc, xk = self.x[c], self.x[k]
        total = xc + xk
        with np.errstate(divide="ignore", invalid="ignore"):
            out = np.where(total == 0, 0.0, (xc - xk) / np.where(total == 0, 1.0, total))
        return out * out

    expected_sum = Metric.expected_sum


class OrdinalMetric(Metric):
    """delta^2 = (sum of n_g for g from c to k, minus (n_c + n_k) / 2)^2 over ranked values."""

    name = "ordinal"

    def __init__(self, marginals: np.ndarray) -> None:
        self.n = np.asarray(marginals, dtype=np.float64)
        self.cum = np.cumsum(self.n)

    def pairs(self, c: np.ndarray, k: np.ndarray) -> np.ndarray:
        lo, hi = np.minimum(c, k), np.maximum(c, k)
        delta = self.cum[hi] - self.cum[lo] + (self.n[lo] - self.n[hi]) / 2.0
        return delta * delta


class MasiMetric(Metric):
    """MASI distance (Passonneau 2006) between label sets, used directly as the difference."""

    name = "masi"

    def __init__(self, members: sp.csr_matrix) -> None:
        self.members = members.tocsr()
        self.sizes = np.asarray(self.members.sum(axis=1)).ravel()

    def _from_counts(self, inter: np.ndarray, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        return masi_from_counts(inter, a, b)

    def pairs(self, c: np.ndarray, k: np.ndarray) -> np.ndarray:
        c, k = np.broadcast_arrays(np.asarray(c), np.asarray(k))
        shape = c.shape
        n_sets = self.members.shape[0]
        combo, inverse = np.unique(c.ravel() * n_sets + k.ravel(), return_inverse=True)
        ci, ki = combo // n_sets, combo % n_sets
        inter = np.asarray(self.members[ci].multiply(self.members[ki]).sum(axis=1)).ravel()
        out = self._from_counts(inter, self.sizes[ci], self.sizes[ki])
        return out[inverse.ravel()].reshape(shape)

    def block(self, rows: np.ndarray, n_values: int) -> np.ndarray:
        inter = (self.members[rows] @ self.members.T).toarray()
        return self._from_counts(inter, self.sizes[rows][:, None], self.sizes[None, :])


def masi_from_counts(inter: np.ndarray, size_a: np.ndarray, size_b: np.ndarray) -> np.ndarray:
    """MASI distance from |A & B|, |A| and |B| (arrays broadcast together).

    1 - J * M, with J = |A & B| / |A | B| (Jaccard) and M = 1 if A = B, 2/3 if one contains the
    other, 1/3 if they overlap otherwise, 0 if disjoint (Passonneau 2006). Two empty sets are
    equal (distance 0).
    """
    inter = np.asarray(inter, dtype=np.float64)
    size_a = np.asarray(size_a, dtype=np.float64)
    size_b = np.asarray(size_b, dtype=np.float64)
    union = size_a + size_b - inter
    equal = (inter == size_a) & (inter == size_b)
    subset = inter == np.minimum(size_a, size_b)
    mono = np.where(equal, 1.0, np.where(subset, 2.0 / 3.0, np.where(inter > 0, 1.0 / 3.0, 0.0)))
    with np.errstate(divide="ignore", invalid="ignore"):
        jaccard = np.where(union > 0, inter / np.where(union > 0, union, 1.0), 1.0)
    return 1.0 - jaccard * mono


def metric_factory(coded: Coded, level: str) -> Callable[[np.ndarray], Metric]:
    """A function from pairable-value marginals to the level's difference function."""
    return level_metric_factory(level, coded.multi, coded.numbers, coded.members)


def level_metric_factory(
    level: str,
    multi: bool,
    numbers: np.ndarray | None,
    members: sp.csr_matrix | None,
) -> Callable[[np.ndarray], Metric]:
    """:func:`metric_factory` from its parts: the level, whether values are label sets, the
    values' numbers (numeric levels) and the set x label membership (multi-label)."""
    if multi:
        assert members is not None
        masi = MasiMetric(members)
        return lambda _marg: masi
    if level == "nominal":
        nominal = NominalMetric()
        return lambda _marg: nominal
    assert numbers is not None
    if level == "interval":
        interval = IntervalMetric(numbers)
        return lambda _marg: interval
    if level == "ratio":
        ratio = RatioMetric(numbers)
        return lambda _marg: ratio
    return OrdinalMetric


# -- value groups and the coincidence matrix --------------------------------------------------


@dataclass
class Groups:
    """Per item x value: how many annotators gave it; sorted by item then value."""

    unit: np.ndarray
    value: np.ndarray
    count: np.ndarray
    m: np.ndarray
    """Values per item (indexed by item code)."""


def count_pairs(unit: np.ndarray, value: np.ndarray, n_values: int) -> tuple[np.ndarray, ...]:
    """Distinct (item, value) pairs, sorted, with their counts: one stable sort of the key.

    The key is 32-bit when it fits, and the input is already sorted by item, so the stable sort
    (radix/timsort) mostly merges presorted runs.
    """
    key = unit * n_values + value
    if n_values and (unit.size == 0 or int(unit[-1]) * n_values + n_values < 2**31):
        key = key.astype(np.int32)
    ordered = np.sort(key, kind="stable")
    if ordered.size == 0:
        empty = np.zeros(0, dtype=np.int64)
        return empty, empty, empty
    starts = np.flatnonzero(np.concatenate(([True], ordered[1:] != ordered[:-1])))
    count = np.diff(np.append(starts, ordered.size))
    uniq = ordered[starts].astype(np.int64)
    return uniq // n_values, uniq % n_values, count


def value_groups(unit: np.ndarray, value: np.ndarray, n_values: int, n_units: int) -> Groups:
    """Count each (item, value) pair; ``unit`` and ``value`` are codes, sorted by ``unit``."""
    g_unit, g_value, count = count_pairs(unit, value, n_values)
    m = np.bincount(unit, minlength=n_units)
    return Groups(unit=g_unit, value=g_value, count=count, m=m)


def pairable_marginals(groups: Groups, n_values: int) -> np.ndarray:
    """n_c: how many pairable values (in items with two or more) are ``c``."""
    keep = groups.m[groups.unit] >= 2
    return np.bincount(groups.value[keep], weights=groups.count[keep], minlength=n_values)


def _chunks(weights: np.ndarray, budget: int) -> list[tuple[int, int]]:
    """Split ``range(len(weights))`` into consecutive runs whose weight sum stays near budget."""
    if weights.size == 0:
        return []
    cum = np.cumsum(weights)
    edges = np.searchsorted(cum, np.arange(budget, cum[-1], budget), side="right")
    bounds = np.unique(np.concatenate(([0], edges, [weights.size])))
    return [(int(a), int(b)) for a, b in zip(bounds[:-1], bounds[1:], strict=True) if b > a]


@dataclass
class PairablePairs:
    """The value groups of items with two or more values, and how to walk their pairs."""

    unit: np.ndarray
    value: np.ndarray
    count: np.ndarray
    """Annotators who gave this value to this item (int64)."""
    m: np.ndarray
    """Per group: the values of its item (int64)."""
    unit_first: np.ndarray
    per_unit: np.ndarray
    owner: np.ndarray

    def pairs(self) -> Iterator[tuple[np.ndarray, np.ndarray]]:
        """Every ordered pair (left, right) of groups within one item, in bounded chunks.

        Pairs come item by item, and within an item left-major: the same order whatever other
        items are present, so per-item sums over them come out the same to the last bit.
        """
        n = self.unit.size
        for lo, hi in _chunks(self.per_unit.astype(np.float64) ** 2, _PAIR_BUDGET):
            g_lo = self.unit_first[lo]
            g_hi = self.unit_first[hi] if hi < self.unit_first.size else n
            g = np.arange(g_lo, g_hi)
            reps = self.per_unit[self.owner[g]]
            left = np.repeat(g, reps)
            offsets = np.arange(left.size) - np.repeat(np.cumsum(reps) - reps, reps)
            right = self.unit_first[self.owner[left]] + offsets
            yield left, right


def pairable_pairs(groups: Groups) -> PairablePairs:
    """Keep the value groups of pairable items (m_u >= 2) and index their items."""
    m = groups.m
    keep = m[groups.unit] >= 2
    g_unit = groups.unit[keep]
    first = np.concatenate(([True], g_unit[1:] != g_unit[:-1])) if g_unit.size else keep[:0]
    unit_first = np.flatnonzero(first)
    per_unit = np.diff(np.append(unit_first, g_unit.size))
    owner = np.repeat(np.arange(unit_first.size), per_unit)
    return PairablePairs(
        unit=g_unit,
        value=groups.value[keep],
        count=groups.count[keep].astype(np.int64),
        m=m[g_unit].astype(np.int64),
        unit_first=unit_first,
        per_unit=per_unit,
        owner=owner,
    )


@dataclass
class Numerators:
    """Coincidences as exact integers: o_ck = sum over item sizes m of num[c, k, m] / (m - 1).

    Rows are (c, k, m, num), one per cell and item size, sorted by (c, k, m). Integers add up
    exactly in any order, so coincidences summed over parts of the data (batches, partitions)
    are the same numbers as over the whole; the division happens once, in :func:`to_matrix`.
    """

    c: np.ndarray
    k: np.ndarray
    m: np.ndarray
    num: np.ndarray


def sum_by_key(
    columns: tuple[np.ndarray, ...], radices: tuple[int, ...], values: np.ndarray
) -> tuple[tuple[np.ndarray, ...], np.ndarray]:
    """Integer ``values`` summed per distinct row of ``columns``; zero sums dropped.

    Rows come out sorted by the columns in order. ``radices`` bound each column (exclusive).
    A dense ``bincount`` when the key space is small (integer sums below 2**53 are exact in
    float64), else one sort.
    """
    values = np.asarray(values, dtype=np.int64)
    space = 1
    for r in radices:
        space *= max(int(r), 1)
    if values.size == 0:
        return tuple(np.zeros(0, dtype=np.int64) for _ in columns), values
    if space < 2**62:
        key = np.zeros(values.size, dtype=np.int64)
        for col, r in zip(columns, radices, strict=True):
            key *= max(int(r), 1)
            key += col
        if space <= _DENSE_KEYS and space <= 8 * values.size + 1024:
            sums = np.bincount(key, weights=values, minlength=space)
            uniq = np.flatnonzero(sums)
            totals = sums[uniq].astype(np.int64)
        else:
            order = np.argsort(key, kind="stable")
            key = key[order]
            starts = np.flatnonzero(np.concatenate(([True], key[1:] != key[:-1])))
            totals = np.add.reduceat(values[order], starts)
            uniq = key[starts]
            nonzero = totals != 0
            uniq, totals = uniq[nonzero], totals[nonzero]
        out: list[np.ndarray] = []
        for r in reversed(radices):
            r = max(int(r), 1)
            out.append(uniq % r)
            uniq = uniq // r
        return tuple(reversed(out)), totals
    order = np.lexsort(tuple(reversed(columns)))
    cols = tuple(c[order] for c in columns)
    change = np.zeros(values.size, dtype=bool)
    change[0] = True
    for c in cols:
        change[1:] |= c[1:] != c[:-1]
    starts = np.flatnonzero(change)
    totals = np.add.reduceat(values[order], starts)
    nonzero = totals != 0
    return tuple(c[starts][nonzero] for c in cols), totals[nonzero]


_DENSE_KEYS = 1 << 22


def coincidence_numerators(groups: Groups, n_values: int) -> Numerators:
    """The integer numerators of the coincidence matrix, per cell and item size.

    o_ck = sum over pairable items u of (n_uc n_uk - [c = k] n_uc) / (m_u - 1) (Krippendorff
    2011); here the part before the division is summed per (c, k, m_u).
    """
    p = pairable_pairs(groups)
    cols: list[tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]] = []
    max_m = int(p.m.max()) + 1 if p.m.size else 1
    for left, right in p.pairs():
        num = p.count[left] * p.count[right] - np.where(left == right, p.count[left], 0)
        keys, total = sum_by_key(
            (p.value[left], p.value[right], p.m[left]), (n_values, n_values, max_m), num
        )
        cols.append((*keys, total))
    return _join_numerators(cols, n_values, max_m)


def _join_numerators(
    parts: list[tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]], n_values: int, max_m: int
) -> Numerators:
    if not parts:
        empty = np.zeros(0, dtype=np.int64)
        return Numerators(empty, empty, empty, empty)
    if len(parts) == 1:
        c, k, m, num = parts[0]
        return Numerators(c, k, m, num)
    joined = [np.concatenate([p[i] for p in parts]) for i in range(4)]
    (c, k, m), num = sum_by_key(tuple(joined[:3]), (n_values, n_values, max_m), joined[3])
    return Numerators(c, k, m, num)


def to_matrix(numerators: Numerators, n_values: int) -> sp.csr_matrix:
    """o_ck from the numerators: each divided by (m - 1), summed over m in increasing order."""
    c, k, m, num = numerators.c, numerators.k, numerators.m, numerators.num
    if c.size == 0:
        return sp.csr_matrix((n_values, n_values))
    contrib = num / (m - 1.0)
    starts = np.flatnonzero(np.concatenate(([True], (c[1:] != c[:-1]) | (k[1:] != k[:-1]))))
    data = np.add.reduceat(contrib, starts)
    return sp.csr_matrix((data, (c[starts], k[starts])), shape=(n_values, n_values))


def item_disagreement(
    groups: Groups, delta: Metric, value_map: np.ndarray | None = None
) -> np.ndarray:
    """d_u per item: sum over c, k of n_uc n_uk delta^2_ck / (m_u - 1); zero if unpairable.

    The sum over d_u is the observed-disagreement sum; the bootstrap resamples it. Each item's
    figure depends only on that item's value counts (pairs summed in a fixed order), so it is
    the same whichever other items were coded with it. ``value_map`` turns the groups' value
    codes into the codes ``delta`` knows (for a difference function built on all the data).
    """
    p = pairable_pairs(groups)
    d_u = np.zeros(groups.m.size)
    values = p.value if value_map is None else value_map[p.value]
    count = p.count.astype(np.float64)
    for left, right in p.pairs():
        weight = 1.0 / (p.m[left] - 1.0)
        d_pair = count[left] * count[right] * weight * delta.pairs(values[left], values[right])
        d_u += np.bincount(p.unit[left], weights=d_pair, minlength=d_u.size)
    return d_u


def coincidences(
    groups: Groups, n_values: int, delta: Metric | None = None
) -> tuple[sp.csr_matrix, np.ndarray | None]:
    """The coincidence matrix o_ck and, with ``delta``, each item's observed disagreement.

    o_ck = sum over pairable items u of (n_uc n_uk - [c = k] n_uc) / (m_u - 1) (Krippendorff
    2011), from :func:`coincidence_numerators`. The per-item figure is
    d_u = sum over c, k of n_uc n_uk delta^2_ck / (m_u - 1) (:func:`item_disagreement`).

    Returns:
        The matrix (values x values, sparse) and d_u per item (zero for unpairable items), or
        None without ``delta``.
    """
    matrix = to_matrix(coincidence_numerators(groups, n_values), n_values)
    return matrix, (item_disagreement(groups, delta) if delta is not None else None)


@dataclass
class AlphaParts:
    """Alpha with the sums it came from; ``alpha`` is None when undefined (see ``reason``)."""

    alpha: float | None
    reason: str | None
    n_values: float
    observed: float | None
    """Observed disagreement D_o."""
    expected: float | None
    """Expected disagreement D_e."""


def alpha_from_coincidences(
    matrix: sp.csr_matrix,
    factory: Callable[[np.ndarray], Metric],
    value_names: list[str] | None = None,
    *,
    expected_sum: float | None = None,
) -> AlphaParts:
    """alpha = 1 - (n - 1) * sum o_ck delta^2_ck / sum n_c n_k delta^2_ck.

    ``expected_sum`` (sum n_c n_k delta^2_ck for this matrix's marginals) may be passed when the
    caller computed it already, for many matrices at once (the report's leave-one-out pass).
    """
    marg = np.asarray(matrix.sum(axis=1)).ravel()
    n = float(marg.sum())
    if n < 2 - 1e-9:
        return AlphaParts(
            None,
            "no item has two or more annotations, so there is nothing to compare",
            n,
            None,
            None,
        )
    metric = factory(marg)
    coo = matrix.tocoo()
    observed_sum = float((coo.data * metric.pairs(coo.row, coo.col)).sum())
    if expected_sum is None:
        expected_sum = float(metric.expected_sum(marg))
    observed = observed_sum / n
    if expected_sum <= 1e-12 * max(n * n, 1.0):
        used = np.flatnonzero(marg > 0)
        if used.size == 1 and value_names is not None:
            why = f"every comparable annotation is {value_names[int(used[0])]!r}"
        else:
            why = "the comparable annotations do not vary"
        return AlphaParts(
            None, f"{why}, so expected disagreement is zero and alpha is undefined", n, observed, 0
        )
    expected = expected_sum / (n * (n - 1.0))
    alpha = 1.0 - (n - 1.0) * observed_sum / expected_sum
    return AlphaParts(float(alpha), None, n, observed, expected)


# -- per label ----------------------------------------------------------------------------------


@dataclass
class LabelParts:
    """Per label (arrays indexed by label code), from the one-vs-rest binary alphas."""

    alpha: np.ndarray
    """NaN where undefined."""
    n_items: np.ndarray
    """Pairable items where at least one annotator gave the label."""
    n_marked: np.ndarray
    """Pairable values carrying the label (n_c)."""
    agreeing: np.ndarray
    """o_cc: the diagonal coincidences."""
    n_values: float
    """All pairable values (n)."""
    overall_nominal: float | None
    """Single-label data: the nominal alpha from the same pass (None if undefined)."""


def label_groups(
    unit: np.ndarray, label: np.ndarray, n_labels: int, sizes: np.ndarray | None = None
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Distinct (item, label) pairs with their counts, for rows sorted by item.

    Small items (the usual case) need no sort: rows of one item are adjacent, so equal pairs are
    at most ``longest - 1`` rows apart and one comparison per distance finds them all. Each
    pair is then reported at its first row, so the pairs come in item order and, for any one
    label, in the same order as from the sort of :func:`count_pairs`: sums over them are the
    same to the last bit. Larger items use :func:`count_pairs`. ``sizes``: rows per item, when
    already known.
    """
    if unit.size == 0:
        return count_pairs(unit, label, n_labels)
    n_units = int(unit[-1]) + 1
    longest = int((run_lengths(unit, n_units) if sizes is None else sizes).max())
    if longest > NEARBY_LIMIT:
        return count_pairs(unit, label, n_labels)
    key = narrow_key(unit, n_labels, label, n_units)
    seen_before = np.zeros(key.size, dtype=bool)
    later = np.zeros(key.size, dtype=np.int8)
    for d in range(1, longest):
        same = key[d:] == key[:-d]
        seen_before[d:] |= same
        later[:-d] += same  # rows after this one with the same pair; all of them at a first row
    del key
    first = np.flatnonzero(~seen_before)
    count = later[first].astype(np.int64)
    count += 1
    return unit[first], label[first], count


_SLOTS = 16
"""Rows of items at most this far apart are told apart by ``item % _SLOTS`` (see below)."""
_NEARBY_BINS = 1 << 20
"""The narrow per-label count uses at most this many bins, or one per row if more."""


def _label_sums_nearby(
    unit: np.ndarray, label: np.ndarray, n_labels: int, sizes: np.ndarray
) -> tuple[np.ndarray, np.ndarray, np.ndarray] | None:
    """Single-label sums of :func:`label_sums` for small items, in narrow integers; else None.

    Rows are sorted by item and every item code below ``sizes.size`` occurs, so two rows fewer
    than ``_SLOTS`` apart belong to items whose codes differ by less than ``_SLOTS``: the item
    code modulo ``_SLOTS`` tells them apart. Each row gets the key (item slot, m_u, label) in 16
    bits when it fits; one comparison per row distance marks the rows whose (item, label) pair
    occurred earlier (``seen``) and counts the later rows with the same pair (``later``; its sum
    over a pair's rows is n_uc (n_uc - 1) / 2). One count over (key, later, seen) then gives
    every sum. The sums are integers, so they equal those of the sorting path exactly.

    Returns:
        (agree[label, m] = sum of n_uc (n_uc - 1) over items of size m >= 2; marked; items), or
        None when the items are too large or the key space too wide for this path.
    """
    n_units = sizes.size
    longest = int(sizes.max()) if n_units else 0
    if n_units == 0 or longest > _SLOTS or not bool((sizes > 0).all()):
        return None
    n_m = longest + 1
    space = _SLOTS * n_m * max(n_labels, 1)
    if space * 2 * _SLOTS > max(unit.size, _NEARBY_BINS):
        return None
    kind = np.int16 if space < 2**15 else np.int32
    item_key = (np.arange(n_units, dtype=np.int64) % _SLOTS) * n_m + sizes
    key = item_key.astype(kind)[unit]
    key *= kind(n_labels)
    np.add(key, label, out=key, casting="unsafe")
    seen = np.zeros(key.size, dtype=bool)
    later = np.zeros(key.size, dtype=np.int8)
    for d in range(1, longest):
        same = key[d:] == key[:-d]
        seen[d:] |= same
        later[:-d] += same
    code = key.astype(np.int32)
    del key
    code *= np.int32(2 * _SLOTS)
    later *= 2
    later += seen
    code += later
    counts = count_codes(code, space * 2 * _SLOTS).reshape(_SLOTS, n_m, n_labels, _SLOTS, 2)
    counts = counts.sum(axis=0)  # (m, label, later, seen)
    pairs = np.tensordot(counts.sum(axis=3), np.arange(_SLOTS), axes=([2], [0]))  # (m, label)
    agree = (2 * pairs).T.astype(np.int64)
    agree[:, :2] = 0
    marked = counts[2:].sum(axis=(0, 2, 3)).astype(np.int64)
    n_items = counts[2:, :, :, 0].sum(axis=(0, 2)).astype(np.int64)
    return agree, marked, n_items


def _renumber(per_code: np.ndarray, table: np.ndarray, used: np.ndarray, size: int) -> np.ndarray:
    """Per-stored-code figures (rows) -> per-final-code figures (stored code c becomes table[c])."""
    out = np.zeros((size, *per_code.shape[1:]), dtype=per_code.dtype)
    out[table[used]] = per_code[used]
    return out


@dataclass
class LabelSums:
    """Per label, sums over pairable items that add up across parts of the data.

    ``agree`` rows are (label, m, sum of n_uc (n_uc - 1)) sorted by (label, m): the diagonal
    coincidence of label c is the sum over m of those numerators divided by (m - 1).
    """

    agree_label: np.ndarray
    agree_m: np.ndarray
    agree_num: np.ndarray
    marked: np.ndarray
    """Per label code: pairable values carrying it (n_c), int64."""
    items: np.ndarray
    """Per label code: pairable items where at least one annotator gave it, int64."""


def label_sums(coded: Coded) -> LabelSums:
    """Each label as binary data (given / not given): its sums, in one pass over (item, label).

    For multi-label data m_u counts the annotators who labelled the item and n_uc those who
    gave label c.
    """
    n_labels = len(coded.label_names)
    m = coded.unit_sizes()
    # Work on the label codes as stored when they are not renumbered yet, and renumber the
    # per-label sums at the end (the sums are integers, so the order does not matter).
    codes = coded.label_codes
    table = codes.table if isinstance(codes, Lookup) and codes._final is None else None
    raw = codes.stored if table is not None else coded.label_code
    n_bins = table.size if table is not None else n_labels
    sizes = m if coded.label_unit is coded.unit else None
    if sizes is not None:
        nearby = _label_sums_nearby(coded.unit, raw, n_bins, sizes)
        if nearby is not None:
            agree, marked, n_items = nearby
            if table is not None:
                used = table >= 0
                agree = _renumber(agree, table, used, n_labels)
                marked, n_items = (_renumber(x, table, used, n_labels) for x in (marked, n_items))
            a_label, a_m = np.nonzero(agree)
            return LabelSums(a_label, a_m, agree[a_label, a_m], marked, n_items)
    g_unit, g_label, count = label_groups(coded.label_unit, raw, n_bins, sizes)
    m_g = m[g_unit]
    keep = m_g >= 2
    g_label, count, m_g = g_label[keep], count[keep].astype(np.int64), m_g[keep].astype(np.int64)
    marked = np.bincount(g_label, weights=count, minlength=n_bins).astype(np.int64)
    n_items = np.bincount(g_label, minlength=n_bins).astype(np.int64)
    max_m = int(m_g.max()) + 1 if m_g.size else 1
    if table is not None:
        used = table >= 0
        g_label = table[g_label]
        marked, n_items = (_renumber(x, table, used, n_labels) for x in (marked, n_items))
    (a_label, a_m), a_num = sum_by_key((g_label, m_g), (n_labels, max_m), count * (count - 1))
    return LabelSums(a_label, a_m, a_num, marked, n_items)


def label_parts(sums: LabelSums, n_labels: int, n: float, multi: bool) -> LabelParts:
    """The one-vs-rest alphas from :class:`LabelSums` and the pairable value count ``n``.

    With n_c the pairable values carrying label c, n all pairable values and o_cc the diagonal
    coincidence sum over items of n_uc (n_uc - 1) / (m_u - 1), the binary alpha is
    1 - (n - 1) (n_c - o_cc) / (n_c (n - n_c)); for single-label data this is the one-vs-rest
    alpha read off the coincidence matrix's diagonal and totals.
    """
    agreeing = np.zeros(n_labels)
    if sums.agree_label.size:
        contrib = sums.agree_num / (sums.agree_m - 1.0)
        lab = sums.agree_label
        starts = np.flatnonzero(np.concatenate(([True], lab[1:] != lab[:-1])))
        agreeing[lab[starts]] = np.add.reduceat(contrib, starts)
    marked = sums.marked.astype(np.float64)
    with np.errstate(divide="ignore", invalid="ignore"):
        alpha = 1.0 - (n - 1.0) * (marked - agreeing) / (marked * (n - marked))
    alpha[(marked <= 0) | (marked >= n)] = np.nan
    overall = None
    if not multi and n >= 2:
        expected = n * n - float((marked * marked).sum())
        if expected > 0:
            overall = float(1.0 - (n - 1.0) * (n - float(agreeing.sum())) / expected)
    return LabelParts(alpha, sums.items, marked, agreeing, n, overall)


def label_alphas(coded: Coded) -> LabelParts:
    """Each label as binary nominal data (given / not given); see :func:`label_parts`."""
    m = coded.unit_sizes()
    n = float(m[m >= 2].sum())
    return label_parts(label_sums(coded), len(coded.label_names), n, coded.multi)


# -- leave one annotator out ------------------------------------------------------------------


def _ranges(starts: np.ndarray, stops: np.ndarray) -> np.ndarray:
    """Concatenated ``arange(start, stop)`` for each pair, without a Python loop."""
    lengths = stops - starts
    total = int(lengths.sum())
    if total == 0:
        return np.zeros(0, dtype=np.int64)
    offsets = np.arange(total) - np.repeat(np.cumsum(lengths) - lengths, lengths)
    return np.repeat(starts, lengths) + offsets


def leave_one_out_numerators(coded: Coded) -> list[Numerators]:
    """Per annotator code: how the coincidence numerators change without that annotator.

    Only the items an annotator judged change: their coincidences without the annotator minus
    their coincidences with everyone. The work is the sum of the squared item sizes, not
    annotators x items; the changes are integers, so they add up across parts of the data.
    """
    starts = coded.unit_starts()
    annotator = coded.annotator
    order = np.argsort(annotator, kind="stable")
    bounds = np.searchsorted(annotator[order], np.arange(coded.n_annotators + 1))
    out: list[Numerators] = []
    n_values, n_units = coded.n_values, coded.n_units
    for a in range(coded.n_annotators):
        own = order[bounds[a] : bounds[a + 1]]
        units = np.unique(coded.unit[own])
        idx = _ranges(starts[units], starts[units + 1])
        sub_unit, sub_value = coded.unit[idx], coded.value[idx]
        others = annotator[idx] != a
        before = coincidence_numerators(
            value_groups(sub_unit, sub_value, n_values, n_units), n_values
        )
        after = coincidence_numerators(
            value_groups(sub_unit[others], sub_value[others], n_values, n_units), n_values
        )
        max_m = int(max(before.m.max(initial=0), after.m.max(initial=0))) + 1
        out.append(
            _join_numerators(
                [
                    (after.c, after.k, after.m, after.num),
                    (before.c, before.k, before.m, -before.num),
                ],
                n_values,
                max_m,
            )
        )
    return out


# -- bootstrap ----------------------------------------------------------------------------------


@dataclass
class BootstrapParts:
    """The bootstrap distribution of alpha over resampled items."""

    alphas: np.ndarray
    """Defined draws only."""
    draws: int
    undefined: int


def bootstrap_alpha(
    groups: Groups,
    d_u: np.ndarray,
    metric: Metric,
    n_values: int,
    draws: int,
    seed: int,
) -> BootstrapParts:
    """Resample pairable items with replacement and recompute alpha from their contributions.

    Each draw picks as many pairable items as there are, with replacement (numpy's seeded
    ``default_rng``), and sums each picked item's observed disagreement d_u, its pairable values
    m_u and its value counts n_uc; expected disagreement is recomputed from the resampled
    totals. The difference function stays the one from the full data (this matters only for
    the ordinal level, whose differences depend on the value totals).
    """
    rng = np.random.default_rng(seed)
    pairable = np.flatnonzero(groups.m >= 2)
    n_units = pairable.size
    if n_units == 0 or draws <= 0:
        return BootstrapParts(np.zeros(0), draws, draws)
    local = np.full(groups.m.size, -1, dtype=np.int64)
    local[pairable] = np.arange(n_units)
    keep = groups.m[groups.unit] >= 2
    counts = sp.csr_matrix(
        (
            groups.count[keep].astype(np.float64),
            (local[groups.unit[keep]], groups.value[keep]),
        ),
        shape=(n_units, n_values),
    )
    counts_t = counts.T.tocsr()
    d = d_u[pairable]
    m = groups.m[pairable].astype(np.float64)
    per_chunk = max(1, min(draws, 4_000_000 // n_units))
    alphas: list[np.ndarray] = []
    done = 0
    while done < draws:
        b = min(per_chunk, draws - done)
        picks = rng.integers(0, n_units, size=(b, n_units))
        picks += (np.arange(b) * n_units)[:, None]
        weights = np.bincount(picks.ravel(), minlength=b * n_units).reshape(b, n_units)
        weights = weights.astype(np.float64)
        observed = weights @ d
        n = weights @ m
        marg = (counts_t @ weights.T).T
        expected = np.asarray(metric.expected_sum(marg), dtype=np.float64)
        with np.errstate(divide="ignore", invalid="ignore"):
            alpha = 1.0 - (n - 1.0) * observed / expected
        alphas.append(alpha[expected > 1e-12 * n * n])
        done += b
    values = np.concatenate(alphas) if alphas else np.zeros(0)
    return BootstrapParts(values, draws, draws - values.size)
