"""Agreement as sums over items: the one engine behind the in-memory, streaming and Dask paths.

Every agreement figure is a function of sums over items: integer counts (coincidence numerators
per cell and item size, label counts, annotator-pair confusion counts, ...) and, for the
bootstrap, each bucket's observed disagreement. :class:`AgreementSums` holds them keyed by
*names* (annotators, labels and values, each list sorted), so the sums of two disjoint sets of
items add up with :meth:`AgreementSums.merge`, whatever codes each part was coded with.

Integers add up exactly in any order, and the few float sums are kept exact
(:class:`ExactSums`), so a result does not depend on how the items were split into batches or
partitions, nor on their order: :func:`~labelreview.agreement.agreement_report` on a frame, the
streaming reader over a file larger than memory and the Dask engine over a cluster give the same
figures to the last bit. The division by (m_u - 1) and everything after it happens once, on the
merged sums (:mod:`labelreview.agreement._report`).

The one rule for callers: all annotations of an item must be in the same part, because alpha
compares the annotations of an item with each other.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd
import scipy.sparse as sp

from labelreview.agreement._alpha import (
    Groups,
    Metric,
    Numerators,
    coincidence_numerators,
    item_disagreement,
    label_sums,
    leave_one_out_numerators,
    level_metric_factory,
    metric_factory,
    sum_by_key,
    value_groups,
)
from labelreview.agreement._coding import SET_SEPARATOR, Coded
from labelreview.agreement._kappa import cohen_counts, majority_agreement

BUCKETS = 1 << 16
"""Items are grouped into this many buckets by a hash of their name for the bootstrap."""

PARTS: frozenset[str] = frozenset({"overall", "labels", "kappas", "annotators", "bootstrap"})
"""What :meth:`AgreementSums.from_coded` can accumulate (``overall``: the coincidences); the
item sizes are always kept."""

_ROLES: dict[str, tuple[str | None, ...]] = {
    "sizes": (None,),  # (m) -> items with m values
    "coin": ("value", "value", None),  # (c, k, m) -> coincidence numerator
    "label_agree": ("label", None),  # (label, m) -> sum n_uc (n_uc - 1), pairable items
    "label_marked": ("label",),  # (label) -> pairable values carrying it
    "label_items": ("label",),  # (label) -> pairable items carrying it
    "percent": (None,),  # (m) -> sum over values of n_uc (n_uc - 1), pairable items
    "value_by_size": ("value", None),  # (value, m) -> sum n_uc over every item
    "cohen": ("annotator", "annotator", "value", "value"),  # -> pairs within items
    "majority": ("annotator", None),  # (annotator, 0 agrees | 1 counted) -> values
    "judged": ("annotator",),  # (annotator) -> values
    "loo": ("annotator", "value", "value", None),  # (a, c, k, m) -> change without a
    "bucket_values": (None, "value"),  # (bucket, value) -> pairable values
}


@dataclass
class Tally:
    """Integer counts per distinct key row: int64 columns, rows sorted, no zero counts."""

    columns: tuple[np.ndarray, ...]
    counts: np.ndarray

    @classmethod
    def of(cls, columns: tuple[np.ndarray, ...], counts: np.ndarray) -> Tally:
        cols = tuple(np.asarray(c, dtype=np.int64) for c in columns)
        radices = tuple(int(c.max()) + 1 if c.size else 1 for c in cols)
        keys, totals = sum_by_key(cols, radices, np.asarray(counts, dtype=np.int64))
        return cls(keys, totals)

    @classmethod
    def empty(cls, width: int) -> Tally:
        none = np.zeros(0, dtype=np.int64)
        return cls(tuple(none for _ in range(width)), none)

    def remapped(self, maps: tuple[np.ndarray | None, ...]) -> Tally:
        """The same counts with column codes renumbered (``None``: column unchanged)."""
        if all(m is None for m in maps) or self.counts.size == 0:
            return self
        cols = tuple(c if m is None else m[c] for c, m in zip(self.columns, maps, strict=True))
        return Tally.of(cols, self.counts)

    def plus(self, other: Tally) -> Tally:
        if other.counts.size == 0:
            return self
        if self.counts.size == 0:
            return other
        cols = tuple(
            np.concatenate((a, b)) for a, b in zip(self.columns, other.columns, strict=True)
        )
        return Tally.of(cols, np.concatenate((self.counts, other.counts)))

    def where(self, column: int, value: int) -> Tally:
        """The rows whose ``column`` equals ``value``."""
        keep = self.columns[column] == value
        return Tally(tuple(c[keep] for c in self.columns), self.counts[keep])


class ExactSums:
    """Exact sums of float64 values per key (``0 .. n_keys - 1``), in any order of adding.

    Each value is split into its integer mantissa and binary exponent; mantissas are summed
    per (exponent, key) in three 18-bit limbs, each of which float64 adds exactly (up to 2**35
    values per slot). The state after adding a multiset of values is therefore the same
    whatever the order or grouping, and so is :meth:`totals`.
    """

    def __init__(self, n_keys: int) -> None:
        self.n_keys = int(n_keys)
        self.limbs: dict[int, np.ndarray] = {}
        """Exponent -> (3, n_keys) limb sums (float64 holding exact integers)."""

    def add(self, keys: np.ndarray, values: np.ndarray) -> None:
        values = np.asarray(values, dtype=np.float64)
        keys = np.asarray(keys, dtype=np.int64)
        nonzero = values != 0.0
        if not nonzero.all():
            keys, values = keys[nonzero], values[nonzero]
        if values.size == 0:
            return
        mantissa, exponent = np.frexp(values)
        whole = np.ldexp(mantissa, 53).astype(np.int64)  # exact: |whole| < 2**53
        limbs = (whole & 0x3FFFF, (whole >> 18) & 0x3FFFF, whole >> 36)
        exponents, which = np.unique(exponent, return_inverse=True)
        slot = which.ravel().astype(np.int64) * self.n_keys + keys
        size = exponents.size * self.n_keys
        sums = [
            np.bincount(slot, weights=limb, minlength=size).reshape(exponents.size, self.n_keys)
            for limb in limbs
        ]
        for i, e in enumerate(exponents.tolist()):
            target = self.limbs.get(e - 53)
            if target is None:
                target = self.limbs[e - 53] = np.zeros((3, self.n_keys))
            for j in range(3):
                target[j] += sums[j][i]

    def merge(self, other: ExactSums) -> None:
        for e, limbs in other.limbs.items():
            target = self.limbs.get(e)
            if target is None:
                self.limbs[e] = limbs.copy()
            else:
                target += limbs

    def totals(self) -> np.ndarray:
        """The sum per key as float64 (computed from the exact state in a fixed order)."""
        out = np.zeros(self.n_keys)
        for e in sorted(self.limbs):
            lo, mid, hi = self.limbs[e]
            out += np.ldexp(hi * 2.0**36 + mid * 2.0**18 + lo, e)
        return out


def item_buckets(names: Any) -> np.ndarray:
    """Each item's bucket (0 .. BUCKETS - 1) from a hash of its name as text.

    pandas' ``hash_array`` (SipHash with pandas' fixed default key) is deterministic across
    runs and machines, so an item lands in the same bucket in every path.
    """
    values = np.asarray(names, dtype=object)
    if values.size and pd.api.types.infer_dtype(values, skipna=False) != "string":
        values = np.asarray([str(v) for v in values], dtype=object)
    hashed = pd.util.hash_array(values, categorize=False)
    return (hashed & np.uint64(BUCKETS - 1)).astype(np.int64)


def _value_key(members: tuple[str, ...]) -> tuple[str, tuple[str, ...]]:
    return SET_SEPARATOR.join(members), members


def _rank_map(names: list[Any], registry: list[Any], key: Any = None) -> np.ndarray | None:
    """Position in ``registry`` of each of ``names`` (None when it is the identity)."""
    position = {name: i for i, name in enumerate(registry)}
    out = np.fromiter((position[n] for n in names), dtype=np.int64, count=len(names))
    if out.size == len(registry) and bool((out == np.arange(out.size)).all()):
        return None
    return out


@dataclass
class AgreementSums:
    """Additive sums of one set of items; see the module docstring.

    Codes in every tally index the sorted registries ``annotators``, ``labels`` and
    ``values`` (a value is a label set: a 1-tuple for single-label data).
    """

    level: str
    parts: frozenset[str]
    annotators: list[str]
    labels: list[str]
    values: list[tuple[str, ...]]
    multi: bool = False
    n_null_rows: int = 0
    n_repeated: int = 0
    square_sum: int = 0
    """Sum of n_uc squared over every item (Fleiss' kappa)."""
    tallies: dict[str, Tally] = field(default_factory=dict)
    bucket_m: np.ndarray | None = None
    """Bootstrap: pairable values per bucket (int64, length BUCKETS)."""
    bucket_d: ExactSums | None = None
    """Bootstrap: observed disagreement per bucket (None until computed)."""

    # -- building -------------------------------------------------------------------------------

    @classmethod
    def from_coded(
        cls,
        coded: Coded,
        level: str,
        parts: frozenset[str] | set[str] = PARTS,
        *,
        leave_out: bool = True,
    ) -> AgreementSums:
        """The sums of one coded set of items.

        Args:
            coded: Annotations coded by :func:`~labelreview.agreement._coding.code_annotations`.
            level: The measurement level they were coded at.
            parts: Which figures to prepare (see :data:`PARTS`).
            leave_out: With ``annotators``: also the leave-one-annotator-out changes.
        """
        parts = frozenset(parts)
        m = coded.unit_sizes().astype(np.int64)
        need_groups = bool(parts & {"overall", "kappas", "annotators", "bootstrap"})
        groups = (
            value_groups(coded.unit, coded.value, coded.n_values, coded.n_units)
            if need_groups
            else None
        )
        annotators = list(coded.annotator_names)
        labels = sorted(coded.label_names)
        label_map = _rank_map(list(coded.label_names), labels)
        if coded.multi:
            assert coded.members is not None
            members = coded.members.tocsr()
            tuples = [
                tuple(coded.label_names[c] for c in members.indices[a:b])
                for a, b in zip(members.indptr[:-1], members.indptr[1:], strict=True)
            ]
        else:
            tuples = [(name,) for name in coded.value_names]
        values = sorted(tuples, key=_value_key)
        value_map = _rank_map(tuples, values)
        sums = cls(
            level=level,
            parts=parts,
            annotators=annotators,
            labels=labels,
            values=values,
            multi=coded.multi,
            n_null_rows=coded.n_null_rows,
            n_repeated=coded.n_repeated,
        )
        raw: dict[str, Tally] = {}
        per_size = np.bincount(m)
        per_size[:1] = 0
        present = np.flatnonzero(per_size)
        raw["sizes"] = Tally((present.astype(np.int64),), per_size[present].astype(np.int64))
        if "overall" in parts:
            assert groups is not None
            num = coincidence_numerators(groups, coded.n_values)
            raw["coin"] = Tally((num.c, num.k, num.m), num.num)
        pairable = m[groups.unit] >= 2 if groups is not None else None
        if "labels" in parts:
            ls = label_sums(coded)
            raw["label_agree"] = Tally((ls.agree_label, ls.agree_m), ls.agree_num)
            codes = np.arange(len(coded.label_names))
            raw["label_marked"] = Tally.of((codes,), ls.marked)
            raw["label_items"] = Tally.of((codes,), ls.items)
        if "kappas" in parts:
            assert groups is not None and pairable is not None
            count = groups.count.astype(np.int64)
            g_m = m[groups.unit]
            raw["percent"] = Tally.of((g_m[pairable],), (count * (count - 1))[pairable])
            raw["value_by_size"] = Tally.of((groups.value, g_m), count)
            sums.square_sum = int((count * count).sum())
            if not coded.multi:
                found = cohen_counts(coded)
                raw["cohen"] = Tally(
                    (found.first, found.second, found.value1, found.value2), found.count
                )
        if "annotators" in parts:
            assert groups is not None
            agree, counted = majority_agreement(coded, groups)
            codes = np.arange(coded.n_annotators)
            raw["majority"] = Tally.of(
                (np.concatenate((codes, codes)), np.repeat([0, 1], codes.size)),
                np.concatenate((agree, counted)).astype(np.int64),
            )
            raw["judged"] = Tally.of(
                (codes,), np.bincount(coded.annotator, minlength=coded.n_annotators)
            )
            if leave_out:
                changes = leave_one_out_numerators(coded)
                cols = [
                    (np.full(x.c.size, a, dtype=np.int64), x.c, x.k, x.m, x.num)
                    for a, x in enumerate(changes)
                ]
                if cols:
                    raw["loo"] = Tally.of(
                        tuple(np.concatenate([c[i] for c in cols]) for i in range(4)),
                        np.concatenate([c[4] for c in cols]),
                    )
        if "bootstrap" in parts:
            assert groups is not None and pairable is not None
            bucket = item_buckets(coded.unit_names)
            items = np.flatnonzero(m >= 2)
            sums.bucket_m = np.bincount(bucket[items], weights=m[items], minlength=BUCKETS).astype(
                np.int64
            )
            raw["bucket_values"] = Tally.of(
                (bucket[groups.unit[pairable]], groups.value[pairable]),
                groups.count[pairable],
            )
            if level != "ordinal":
                # The difference function needs nothing from the other items, so each part
                # computes its items' disagreement now; ordinal waits for the value totals.
                metric = metric_factory(coded, level)(np.zeros(coded.n_values))
                d_u = item_disagreement(groups, metric)
                sums.bucket_d = ExactSums(BUCKETS)
                sums.bucket_d.add(bucket[items], d_u[items])
        maps = {"annotator": None, "label": label_map, "value": value_map}
        for name, tally in raw.items():
            sums.tallies[name] = tally.remapped(
                tuple(maps[role] if role else None for role in _ROLES[name])
            )
        return sums

    # -- adding up --------------------------------------------------------------------------

    def merge(self, other: AgreementSums) -> AgreementSums:
        """The sums of both sets of items (which must not share an item); a new object."""
        if other.level != self.level:
            raise ValueError(f"cannot add sums at level {other.level} to sums at {self.level}")
        annotators = sorted(set(self.annotators) | set(other.annotators))
        labels = sorted(set(self.labels) | set(other.labels))
        values = sorted(set(self.values) | set(other.values), key=_value_key)
        out = AgreementSums(
            level=self.level,
            parts=self.parts & other.parts,
            annotators=annotators,
            labels=labels,
            values=values,
            multi=self.multi or other.multi,
            n_null_rows=self.n_null_rows + other.n_null_rows,
            n_repeated=self.n_repeated + other.n_repeated,
            square_sum=self.square_sum + other.square_sum,
        )
        remapped = []
        for side in (self, other):
            maps = {
                "annotator": _rank_map(side.annotators, annotators),
                "label": _rank_map(side.labels, labels),
                "value": _rank_map(side.values, values),
            }
            remapped.append(
                {
                    name: tally.remapped(
                        tuple(maps[role] if role else None for role in _ROLES[name])
                    )
                    for name, tally in side.tallies.items()
                }
            )
        for name in set(remapped[0]) | set(remapped[1]):
            width = len(_ROLES[name])
            out.tallies[name] = (
                remapped[0]
                .get(name, Tally.empty(width))
                .plus(remapped[1].get(name, Tally.empty(width)))
            )
        if self.bucket_m is not None and other.bucket_m is not None:
            out.bucket_m = self.bucket_m + other.bucket_m
        if self.bucket_d is not None and other.bucket_d is not None:
            out.bucket_d = ExactSums(BUCKETS)
            out.bucket_d.merge(self.bucket_d)
            out.bucket_d.merge(other.bucket_d)
        return out

    def tally(self, name: str) -> Tally:
        return self.tallies.get(name, Tally.empty(len(_ROLES[name])))

    # -- reading off ------------------------------------------------------------------------

    @property
    def value_names(self) -> list[str]:
        """Display names of the values, in registry order."""
        return [SET_SEPARATOR.join(v) for v in self.values]

    def final_order(self) -> np.ndarray:
        """Registry value code -> final value code (numeric levels: by number, then text)."""
        n = len(self.values)
        if self.level == "nominal" or self.multi:
            return np.arange(n)
        numbers = self.numbers_by_registry()
        text = np.asarray(self.value_names, dtype=object)
        order = np.lexsort((text, numbers))
        rank = np.empty(n, dtype=np.int64)
        rank[order] = np.arange(n)
        return rank

    def numbers_by_registry(self) -> np.ndarray:
        """The number of each value (numeric levels; registry order)."""
        names = self.value_names
        return pd.to_numeric(pd.Series(names, dtype=object), errors="coerce").to_numpy(float)

    def sizes(self) -> tuple[np.ndarray, np.ndarray]:
        """(item size m, items of that size), m ascending."""
        t = self.tally("sizes")
        return t.columns[0], t.counts

    def pairable_values(self) -> int:
        m, items = self.sizes()
        keep = m >= 2
        return int((m[keep] * items[keep]).sum())

    def metric_factory(self) -> Any:
        """The level's difference function factory, on final value codes."""
        rank = self.final_order()
        if self.multi:
            position = {name: i for i, name in enumerate(self.labels)}
            rows, cols = [], []
            for code, members in enumerate(self.values):
                for label in members:
                    rows.append(int(rank[code]))
                    cols.append(position[label])
            members_matrix = sp.csr_matrix(
                (np.ones(len(rows)), (rows, cols)),
                shape=(len(self.values), len(self.labels)),
            )
            return level_metric_factory("nominal", True, None, members_matrix)
        numbers = None
        if self.level != "nominal":
            numbers = np.empty(len(self.values))
            numbers[rank] = self.numbers_by_registry()
        return level_metric_factory(self.level, False, numbers, None)

    def add_ordinal_disagreement(self, coded: Coded, metric: Metric) -> ExactSums:
        """Bootstrap, ordinal level: the bucket disagreement of one part, given the difference
        function of all the data (on final codes); merge the results into :attr:`bucket_d`."""
        rank = self.final_order()
        position = {name: i for i, name in enumerate(self.values)}
        if coded.multi:
            assert coded.members is not None
            members = coded.members.tocsr()
            tuples = [
                tuple(coded.label_names[c] for c in members.indices[a:b])
                for a, b in zip(members.indptr[:-1], members.indptr[1:], strict=True)
            ]
        else:
            tuples = [(name,) for name in coded.value_names]
        to_final = rank[np.fromiter((position[t] for t in tuples), dtype=np.int64)]
        groups = value_groups(coded.unit, coded.value, coded.n_values, coded.n_units)
        d_u = item_disagreement(groups, metric, value_map=to_final)
        items = np.flatnonzero(groups.m >= 2)
        found = ExactSums(BUCKETS)
        found.add(item_buckets(coded.unit_names)[items], d_u[items])
        return found


def numerators_of(tally: Tally, rank: np.ndarray) -> Numerators:
    """A (c, k, m) tally as :class:`Numerators` on final value codes, sorted by (c, k, m)."""
    if tally.counts.size == 0:
        empty = np.zeros(0, dtype=np.int64)
        return Numerators(empty, empty, empty, empty)
    c, k, m = tally.columns
    if not bool((rank == np.arange(rank.size)).all()):
        fixed = Tally.of((rank[c], rank[k], m), tally.counts)
        c, k, m = fixed.columns
        return Numerators(c, k, m, fixed.counts)
    return Numerators(c, k, m, tally.counts)


def groups_of_buckets(sums: AgreementSums, rank: np.ndarray) -> tuple[Groups, np.ndarray]:
    """The non-empty bootstrap buckets as units of :func:`bootstrap_alpha`, and their d."""
    assert sums.bucket_m is not None and sums.bucket_d is not None
    used = np.flatnonzero(sums.bucket_m)
    local = np.full(BUCKETS, -1, dtype=np.int64)
    local[used] = np.arange(used.size)
    t = sums.tally("bucket_values")
    bucket, value = t.columns
    groups = Groups(
        unit=local[bucket],
        value=rank[value],
        count=t.counts,
        m=sums.bucket_m[used],
    )
    return groups, sums.bucket_d.totals()[used]
