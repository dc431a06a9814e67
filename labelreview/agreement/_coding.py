"""Turn annotations into integer codes, once, for every statistic in this package.

Input is either the long annotation frame (``item``, ``annotator``, ``label``; one row per item x
annotator x label) or a reliability matrix (annotators x items, missing values allowed). Output is
a :class:`Coded` bundle of numpy arrays sorted by item, so the statistics never loop over items.

Speed notes (the agreement benchmark depends on them): item ids are hashed only when the column is
not already grouped; a file written item by item (the common case) is coded from adjacent
comparisons. The annotator and label columns are factorised in two threads.
"""

from __future__ import annotations

from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd
import scipy.sparse as sp

from labelreview.errors import UsageError
from labelreview.model import ANNOTATION_COLUMNS

LEVELS: tuple[str, ...] = ("nominal", "ordinal", "interval", "ratio")
SET_SEPARATOR = " | "


@dataclass
class Coded:
    """Annotations as integer codes; every per-value array is sorted by unit (item)."""

    n_units: int
    """Items with at least one annotation."""
    annotator_names: list[str]
    """Annotator names; code ``i`` is ``annotator_names[i]`` (sorted)."""
    unit: np.ndarray
    """Per value (one item x annotator judgement): its item code."""
    annotator: np.ndarray
    """Per value: its annotator code."""
    value: np.ndarray
    """Per value: its value code (a label, or a label set for multi-label data)."""
    value_names: list[str]
    """Display names of the value codes (sorted; numeric order for numeric levels)."""
    numbers: np.ndarray | None
    """Numeric value of each value code, for the ordinal, interval and ratio levels."""
    multi: bool
    """True when some annotator gave several labels to one item."""
    label_unit: np.ndarray
    """Per label row (item x annotator x label): its item code (same as ``unit`` when single)."""
    label_annotator: np.ndarray
    label_code: np.ndarray
    label_names: list[str]
    members: sp.csr_matrix | None = None
    """Multi-label only: value (label set) x label membership, 0/1."""
    unit_names: np.ndarray | None = None
    notes: list[str] = field(default_factory=list)

    @property
    def n_values(self) -> int:
        return len(self.value_names)

    @property
    def n_annotators(self) -> int:
        return len(self.annotator_names)

    def unit_starts(self) -> np.ndarray:
        """Offsets of each unit's values in the per-value arrays (length ``n_units + 1``)."""
        counts = np.bincount(self.unit, minlength=self.n_units)
        starts = np.zeros(self.n_units + 1, dtype=np.int64)
        np.cumsum(counts, out=starts[1:])
        return starts


def check_level(level: str) -> str:
    """Refuse an unknown measurement level, naming the allowed ones."""
    if level not in LEVELS:
        raise UsageError(f"level must be one of {', '.join(LEVELS)}; got {level!r}")
    return level


def as_long_frame(data: Any) -> pd.DataFrame:
    """The long frame for ``data``: a long frame as it is, or a reliability matrix melted.

    A reliability matrix has one row per annotator and one column per item; missing values
    (None, NaN, pandas NA) mean "this annotator did not judge this item". A DataFrame with the
    columns ``item``, ``annotator`` and ``label`` is taken as the long frame.

    Raises:
        UsageError: ``data`` is neither.
    """
    if isinstance(data, pd.DataFrame):
        named = set(ANNOTATION_COLUMNS) & set(map(str, data.columns))
        if named:  # a long frame, complete or not (code_annotations names what is missing)
            return data
        matrix = data
        annotators = [str(a) for a in data.index]
        items = [str(i) for i in data.columns]
    else:
        try:
            matrix = pd.DataFrame(np.asarray(data, dtype=object))
        except (TypeError, ValueError) as exc:
            raise UsageError(
                f"cannot read the annotations as a reliability matrix: {exc}"
            ) from None
        if matrix.ndim != 2 or matrix.shape[1] == 0 and matrix.shape[0] == 0:
            raise UsageError("a reliability matrix must be two-dimensional (annotators x items)")
        annotators = [str(a) for a in range(matrix.shape[0])]
        items = [str(i) for i in range(matrix.shape[1])]
    if np.asarray(matrix).ndim != 2:
        raise UsageError("a reliability matrix must be two-dimensional (annotators x items)")
    values = matrix.to_numpy(dtype=object)
    present = ~pd.isna(values)
    rows, cols = np.nonzero(present)
    return pd.DataFrame(
        {
            "item": np.asarray(items, dtype=object)[cols],
            "annotator": np.asarray(annotators, dtype=object)[rows],
            "label": values[rows, cols],
        }
    )


def _factorize(column: pd.Series) -> tuple[np.ndarray, np.ndarray]:
    pa_array = getattr(column.array, "_pa_array", None)
    if pa_array is not None and pa_array.null_count == 0:
        import pyarrow as pa
        import pyarrow.compute as pc

        encoded = pc.dictionary_encode(pa_array)
        if isinstance(encoded, pa.ChunkedArray):
            encoded = encoded.unify_dictionaries()
            dictionary = encoded.chunk(0).dictionary if encoded.num_chunks else pa.array([])
            codes = np.concatenate(
                [c.indices.to_numpy(zero_copy_only=False) for c in encoded.chunks] or [[]]
            )
        else:
            dictionary = encoded.dictionary
            codes = encoded.indices.to_numpy(zero_copy_only=False)
        return codes.astype(np.int64), np.asarray(dictionary.to_pylist(), dtype=object)
    codes, uniques = pd.factorize(column, sort=False)
    return codes.astype(np.int64, copy=False), np.asarray(uniques, dtype=object)


def _factorize_grouped(column: pd.Series) -> tuple[np.ndarray, np.ndarray, bool]:
    """Codes for a column whose equal values are usually adjacent (a file written item by item).

    Returns the codes, the names, and whether the codes are non-decreasing (grouped). When the
    run starts are strictly increasing strings they are all distinct, so the run number is the
    code; otherwise the column is hashed as usual.
    """
    n = len(column)
    pa_array = getattr(column.array, "_pa_array", None)
    if n > 1 and pa_array is not None:
        import pyarrow.compute as pc

        changed = pc.not_equal(pa_array[1:], pa_array[:-1])
        change = np.asarray(changed.to_numpy(zero_copy_only=False), dtype=bool)
        starts = np.concatenate(([0], np.flatnonzero(change) + 1))
        firsts = pa_array.take(starts)
        # Strictly increasing run starts are all distinct, so each run is one whole item.
        if len(starts) < 2 or not pc.any(pc.less_equal(firsts[1:], firsts[:-1])).as_py():
            codes = np.zeros(n, dtype=np.int64)
            np.cumsum(change, out=codes[1:])
            return codes, np.asarray(firsts), True
    codes, names = _factorize(column)
    grouped = bool(n < 2 or (np.diff(codes) >= 0).all())
    return codes, names, grouped


def _sorted_names(names: np.ndarray, codes: np.ndarray) -> tuple[list[str], np.ndarray]:
    """Recode so that code order is the sorted order of the names' text."""
    text = [str(x) for x in names]
    order = np.argsort(np.asarray(text, dtype=object), kind="stable")
    rank = np.empty(len(order), dtype=np.int64)
    rank[order] = np.arange(len(order))
    return [text[i] for i in order], rank[codes]


def _numeric(names: list[str], raw: np.ndarray, level: str) -> np.ndarray:
    numbers = pd.to_numeric(pd.Series(raw, dtype=object), errors="coerce").to_numpy(float)
    bad = ~np.isfinite(numbers)
    if bad.any():
        first = names[int(np.flatnonzero(bad)[0])]
        raise UsageError(
            f"level '{level}' needs numeric labels, but the label {first!r} is not a number",
            hint="Use level nominal for category names, or recode the labels as numbers.",
        )
    if level == "ratio" and (numbers < 0).any():
        first = names[int(np.flatnonzero(numbers < 0)[0])]
        raise UsageError(
            f"level 'ratio' needs values of zero or more, but {first!r} is negative",
            hint="Use level interval for values that can be negative.",
        )
    return numbers


def _encode_columns(
    items: pd.Series, annotators: pd.Series, labels: pd.Series
) -> tuple[tuple[np.ndarray, np.ndarray, bool], tuple[np.ndarray, np.ndarray], ...]:
    """Code the three columns; in threads for large frames (pyarrow and pandas release the GIL)."""
    if len(items) < 200_000:
        return _factorize_grouped(items), _factorize(annotators), _factorize(labels)
    with ThreadPoolExecutor(max_workers=3) as pool:
        first = pool.submit(_factorize_grouped, items)
        second = pool.submit(_factorize, annotators)
        third = pool.submit(_factorize, labels)
        return first.result(), second.result(), third.result()


def code_annotations(data: Any, level: str = "nominal") -> Coded:
    """Code a long annotation frame or a reliability matrix for the statistics.

    Rows with a missing item, annotator or label are dropped (and noted); exact duplicate rows
    count once. Several labels from one annotator for one item make the data multi-label.

    Args:
        data: The long frame (``item``, ``annotator``, ``label``) or a reliability matrix.
        level: ``nominal``, ``ordinal``, ``interval`` or ``ratio``.

    Returns:
        The coded annotations.

    Raises:
        UsageError: Unknown level, missing columns, non-numeric labels at a numeric level, or
            multi-label data at a level other than nominal.
    """
    check_level(level)
    frame = as_long_frame(data)
    columns = [str(c) for c in frame.columns]
    missing = [c for c in ANNOTATION_COLUMNS if c not in columns]
    if missing:
        raise UsageError(
            f"the annotations need the columns item, annotator and label; missing: "
            f"{', '.join(missing)} (columns found: {', '.join(columns) or 'none'})"
        )
    notes: list[str] = []
    item_col, ann_col, label_col = (frame[c] for c in ANNOTATION_COLUMNS)
    nulls = (item_col.isna() | ann_col.isna() | label_col.isna()).to_numpy()
    if nulls.any():
        keep = ~nulls
        notes.append(
            f"{int(nulls.sum())} rows with an empty item, annotator or label were left out"
        )
        item_col, ann_col, label_col = item_col[keep], ann_col[keep], label_col[keep]
    (unit, unit_names, grouped), (ann, ann_raw), (lab, lab_raw) = _encode_columns(
        item_col.reset_index(drop=True),
        ann_col.reset_index(drop=True),
        label_col.reset_index(drop=True),
    )
    if not grouped:
        order = np.argsort(unit, kind="stable")
        unit, ann, lab = unit[order], ann[order], lab[order]
    annotator_names, ann = _sorted_names(ann_raw, ann)
    label_text = [str(x) for x in lab_raw]
    numbers_raw: np.ndarray | None = None
    if level != "nominal":
        numbers_raw = _numeric(label_text, lab_raw, level)
        order = np.lexsort((np.asarray(label_text, dtype=object), numbers_raw))
        rank = np.empty(len(order), dtype=np.int64)
        rank[order] = np.arange(len(order))
        label_names = [label_text[i] for i in order]
        lab = rank[lab]
        numbers_raw = numbers_raw[order]
    else:
        label_names, lab = _sorted_names(lab_raw, lab)
    n_units = len(unit_names)
    n_ann, n_lab = len(annotator_names), len(label_names)

    single, unit, ann, lab = _single_label(unit, ann, lab, n_units, n_ann, n_lab, notes)
    if single:
        return Coded(
            n_units=n_units,
            annotator_names=annotator_names,
            unit=unit,
            annotator=ann,
            value=lab,
            value_names=label_names,
            numbers=numbers_raw,
            multi=False,
            label_unit=unit,
            label_annotator=ann,
            label_code=lab,
            label_names=label_names,
            unit_names=unit_names,
            notes=notes,
        )
    if level != "nominal":
        raise UsageError(
            f"some annotators gave several labels to one item (multi-label data); level "
            f"'{level}' needs one value per annotator and item",
            hint="Use level nominal: multi-label data is compared with the MASI distance.",
        )
    return _code_sets(unit, ann, lab, n_units, annotator_names, label_names, unit_names, notes)


def _single_label(
    unit: np.ndarray,
    ann: np.ndarray,
    lab: np.ndarray,
    n_units: int,
    n_ann: int,
    n_lab: int,
    notes: list[str],
) -> tuple[bool, np.ndarray, np.ndarray, np.ndarray]:
    """Is every item x annotator pair present once? Drops exact duplicate rows on the way."""
    if unit.size == 0:
        return True, unit, ann, lab
    bitcount = getattr(np, "bitwise_count", None)
    if n_ann <= 64 and bitcount is not None:
        starts = np.flatnonzero(np.concatenate(([True], unit[1:] != unit[:-1])))
        bits = np.left_shift(np.uint64(1), ann.astype(np.uint64))
        masks = np.bitwise_or.reduceat(bits, starts)
        if int(bitcount(masks).sum()) == unit.size:
            return True, unit, ann, lab
    else:
        pair = np.sort(unit * n_ann + ann)
        if not (pair[1:] == pair[:-1]).any():
            return True, unit, ann, lab
    # Some item x annotator pair repeats: drop exact duplicates, then look again.
    if float(n_units) * n_ann * n_lab >= 2.0**62:
        raise UsageError(
            f"too many items x annotators x labels to code ({n_units} x {n_ann} x {n_lab})"
        )
    key = (unit * n_ann + ann) * n_lab + lab
    uniq = np.unique(key)
    dropped = key.size - uniq.size
    if dropped:
        notes.append(f"{dropped} repeated (item, annotator, label) rows counted once")
    lab = uniq % n_lab
    pair_key = uniq // n_lab
    ann = pair_key % n_ann
    unit = pair_key // n_ann
    single = not (pair_key[1:] == pair_key[:-1]).any()
    return single, unit, ann, lab


def _code_sets(
    unit: np.ndarray,
    ann: np.ndarray,
    lab: np.ndarray,
    n_units: int,
    annotator_names: list[str],
    label_names: list[str],
    unit_names: np.ndarray,
    notes: list[str],
) -> Coded:
    """Multi-label rows (sorted by item, annotator, label; no duplicates) -> label-set values."""
    n_ann, n_lab = len(annotator_names), len(label_names)
    pair_key = unit * n_ann + ann
    new_pair = np.concatenate(([True], pair_key[1:] != pair_key[:-1]))
    pair_index = np.cumsum(new_pair) - 1
    starts = np.flatnonzero(new_pair)
    sizes = np.diff(np.append(starts, pair_key.size))
    # The set of each pair, as a padded row of its sorted label codes (-1 beyond its size);
    # np.unique over rows then gives exact set ids. Wide rows only where sets are large.
    width = int(sizes.max())
    position = np.arange(pair_key.size) - starts[pair_index]
    padded = np.full((starts.size, width + 1), -1, dtype=np.int64)
    padded[:, 0] = sizes
    padded[pair_index, position + 1] = lab
    uniq_rows, set_of_pair = np.unique(padded, axis=0, return_inverse=True)
    set_of_pair = set_of_pair.ravel()
    names = []
    member_rows: list[np.ndarray] = []
    for row in uniq_rows:
        codes = row[1 : 1 + row[0]]
        member_rows.append(codes)
        names.append(SET_SEPARATOR.join(label_names[c] for c in codes))
    order = np.argsort(np.asarray(names, dtype=object), kind="stable")
    rank = np.empty(order.size, dtype=np.int64)
    rank[order] = np.arange(order.size)
    value_names = [names[i] for i in order]
    indptr = np.zeros(order.size + 1, dtype=np.int64)
    np.cumsum([member_rows[i].size for i in order], out=indptr[1:])
    indices = (
        np.concatenate([member_rows[i] for i in order]) if order.size else np.zeros(0, np.int64)
    )
    members = sp.csr_matrix(
        (np.ones(indices.size), indices, indptr), shape=(order.size, n_lab), dtype=np.float64
    )
    notes.append(
        "multi-label data: the overall alpha compares label sets with the MASI distance; each "
        "label's alpha treats it as present or absent"
    )
    return Coded(
        n_units=n_units,
        annotator_names=annotator_names,
        unit=unit[starts],
        annotator=ann[starts],
        value=rank[set_of_pair],
        value_names=value_names,
        numbers=None,
        multi=True,
        label_unit=unit,
        label_annotator=ann,
        label_code=lab,
        label_names=label_names,
        members=members,
        unit_names=unit_names,
        notes=notes,
    )
