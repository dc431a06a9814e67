"""Turn annotations into integer codes, once, for every statistic in this package.

Input is either the long annotation frame (``item``, ``annotator``, ``label``; one row per item x
annotator x label) or a reliability matrix (annotators x items, missing values allowed). Output is
a :class:`Coded` bundle of numpy arrays sorted by item, so the statistics never loop over items.

Speed notes (the agreement benchmark depends on them): a pandas Categorical or an Arrow
dictionary column is coded from its stored codes and categories, with no string hashing (read a
large CSV with ``pyarrow.csv`` and dictionary column types to get them). Otherwise item ids are
hashed only when the column is not already grouped: a file written item by item (the common case)
is coded from adjacent comparisons, and the annotator and label columns are factorised in
threads. Either way the codes come out identical, so every figure is the same. Item names are
kept as they came and converted only on request (nothing in the statistics needs them).
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
class Lookup:
    """Per-row codes kept as found plus a table: the final code of row ``i`` is
    ``table[stored[i]]`` (-1 in the table for stored codes that are not in use).

    The final int64 array is built on first use, so a statistic that can work on the stored
    codes and renumber its few per-code results (the per-label alphas) skips that pass.
    """

    stored: np.ndarray
    table: np.ndarray
    _final: np.ndarray | None = field(default=None, repr=False)

    def final(self) -> np.ndarray:
        """The final codes (int64), computed once."""
        if self._final is None:
            self._final = self.table[self.stored]
        return self._final


def _final(codes: np.ndarray | Lookup) -> np.ndarray:
    return codes.final() if isinstance(codes, Lookup) else codes


@dataclass
class Coded:
    """Annotations as integer codes; every per-value array is sorted by unit (item)."""

    n_units: int
    """Items with at least one annotation."""
    annotator_names: list[str]
    """Annotator names; code ``i`` is ``annotator_names[i]`` (sorted)."""
    unit: np.ndarray
    """Per value (one item x annotator judgement): its item code."""
    annotator_codes: np.ndarray | Lookup
    """Per value: its annotator code (see :attr:`annotator`)."""
    value_codes: np.ndarray | Lookup
    """Per value: its value code (see :attr:`value`)."""
    value_names: list[str]
    """Display names of the value codes (sorted; numeric order for numeric levels)."""
    numbers: np.ndarray | None
    """Numeric value of each value code, for the ordinal, interval and ratio levels."""
    multi: bool
    """True when some annotator gave several labels to one item."""
    label_unit: np.ndarray
    """Per label row (item x annotator x label): its item code (same as ``unit`` when single)."""
    label_annotator_codes: np.ndarray | Lookup
    label_codes: np.ndarray | Lookup
    """Per label row: its label code (see :attr:`label_code`)."""
    label_names: list[str]
    members: sp.csr_matrix | None = None
    """Multi-label only: value (label set) x label membership, 0/1."""
    item_name_source: Any = None
    """Item names as they came (numpy, pandas or Arrow array), indexed by ``item_name_at``."""
    item_name_at: np.ndarray | None = None
    """Position in ``item_name_source`` of each item code's name (None: position = code)."""
    notes: list[str] = field(default_factory=list)
    n_null_rows: int = 0
    """Rows left out because their item, annotator or label was empty."""
    n_repeated: int = 0
    """Repeated (item, annotator, label) rows counted once."""
    _sizes: np.ndarray | None = field(default=None, repr=False)

    @property
    def annotator(self) -> np.ndarray:
        """Per value: its annotator code (int64)."""
        return _final(self.annotator_codes)

    @property
    def value(self) -> np.ndarray:
        """Per value: its value code (a label, or a label set for multi-label data; int64)."""
        return _final(self.value_codes)

    @property
    def label_annotator(self) -> np.ndarray:
        """Per label row: its annotator code (int64)."""
        return _final(self.label_annotator_codes)

    @property
    def label_code(self) -> np.ndarray:
        """Per label row: its label code (int64)."""
        return _final(self.label_codes)

    @property
    def unit_names(self) -> np.ndarray | None:
        """Item names by item code, as an object array (converted on each call)."""
        if self.item_name_source is None:
            return None
        names = np.asarray(self.item_name_source, dtype=object)
        return names if self.item_name_at is None else names[self.item_name_at]

    @property
    def n_values(self) -> int:
        return len(self.value_names)

    @property
    def n_annotators(self) -> int:
        return len(self.annotator_names)

    def unit_sizes(self) -> np.ndarray:
        """m_u: values per unit (indexed by item code); computed once."""
        if self._sizes is None:
            self._sizes = run_lengths(self.unit, self.n_units)
        return self._sizes

    def unit_starts(self) -> np.ndarray:
        """Offsets of each unit's values in the per-value arrays (length ``n_units + 1``)."""
        starts = np.zeros(self.n_units + 1, dtype=np.int64)
        np.cumsum(self.unit_sizes(), out=starts[1:])
        return starts


def run_starts(codes: np.ndarray) -> np.ndarray:
    """Where each run of equal adjacent codes starts (empty for no codes)."""
    if codes.size == 0:
        return np.zeros(0, dtype=np.int64)
    change = np.empty(codes.size, dtype=bool)
    change[0] = True
    np.not_equal(codes[1:], codes[:-1], out=change[1:])
    return np.flatnonzero(change)


def run_lengths(unit: np.ndarray, n_units: int) -> np.ndarray:
    """Values per unit for sorted unit codes; from run starts when every code occurs."""
    starts = run_starts(unit)
    if starts.size == n_units and (n_units == 0 or int(unit[-1]) == n_units - 1):
        return np.diff(starts, append=unit.size)
    return np.bincount(unit, minlength=n_units)


def count_codes(codes: np.ndarray, n_codes: int) -> np.ndarray:
    """``np.bincount(codes, minlength=n_codes)``; narrow codes in cache-sized slices.

    bincount widens its input to intp first; slices keep that copy small (twice as fast on
    int8 category codes).
    """
    if codes.dtype.itemsize >= 8 or codes.size <= _SLICE:
        return np.bincount(codes, minlength=n_codes)
    total = np.zeros(n_codes, dtype=np.int64)
    for start in range(0, codes.size, _SLICE):
        part = np.bincount(codes[start : start + _SLICE], minlength=n_codes)
        if part.size > total.size:
            part[: total.size] += total
            total = part
        else:
            total[: part.size] += part
    return total


_SLICE = 1 << 16


def narrow_key(major: np.ndarray, n_minor: int, minor: np.ndarray, n_major: int) -> np.ndarray:
    """``major * n_minor + minor`` as int32 when every key fits (half the memory traffic)."""
    if float(n_major) * max(n_minor, 1) < 2.0**31:
        key = major.astype(np.int32)
        key *= np.int32(n_minor)
        np.add(key, minor, out=key, casting="unsafe")
        return key
    return major.astype(np.int64) * n_minor + minor


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


def _arrow(column: pd.Series) -> Any:
    """The Arrow array behind a pandas column, or None."""
    return getattr(column.array, "_pa_array", None)


def _objects(values: Any) -> np.ndarray:
    """Names as a numpy object array (from a numpy, pandas or Arrow array)."""
    to_pylist = getattr(values, "to_pylist", None)
    if to_pylist is not None:
        return np.asarray(to_pylist(), dtype=object)
    return np.asarray(values, dtype=object)


def _stored_codes(column: pd.Series) -> tuple[np.ndarray, Any] | None:
    """The stored codes and categories of a Categorical or Arrow dictionary column, else None.

    Categories are returned as stored, unused ones included; the codes index them. Missing
    rows are dropped before this is called, so no code is -1.
    """
    if isinstance(column.dtype, pd.CategoricalDtype):
        return np.asarray(column.cat.codes), column.cat.categories
    pa_array = _arrow(column)
    if pa_array is None:
        return None
    import pyarrow as pa

    if not pa.types.is_dictionary(pa_array.type):
        return None
    chunked = pa_array if isinstance(pa_array, pa.ChunkedArray) else pa.chunked_array([pa_array])
    chunked = chunked.unify_dictionaries()
    if chunked.num_chunks == 0:
        return np.zeros(0, dtype=np.int32), pa.array([], type=pa_array.type.value_type)
    codes = np.concatenate(
        [c.indices.to_numpy(zero_copy_only=False) for c in chunked.chunks]
    ).astype(np.int64, copy=False)
    return codes, chunked.chunk(0).dictionary


def _factorize(column: pd.Series) -> tuple[np.ndarray, np.ndarray]:
    """Codes (any integer dtype) and names of a column, numbered by first appearance."""
    pa_array = _arrow(column)
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
        if codes.size == 0:
            codes = np.zeros(0, dtype=np.int64)
        return codes, _objects(dictionary)
    codes, uniques = pd.factorize(column, sort=False)
    return codes, np.asarray(uniques, dtype=object)


@dataclass
class _Items:
    """Item codes numbered by first appearance, and where their names are."""

    codes: np.ndarray
    n_items: int
    name_source: Any
    name_at: np.ndarray | None
    grouped: bool
    """Each item's rows are adjacent (the codes are then non-decreasing)."""
    sizes: np.ndarray | None = None
    """Rows per item, when already known (grouped rows: the run lengths)."""


def _runs(starts: np.ndarray, n: int) -> tuple[np.ndarray, np.ndarray]:
    """Per row, the number of the run it belongs to (int64); and the run lengths."""
    lengths = np.diff(starts, append=n)
    return np.repeat(np.arange(starts.size, dtype=np.int64), lengths), lengths


class ItemsNotSorted(Exception):
    """Raised when coding with ``sorted_items`` and the item ids are not in sorted runs."""


def _items_from_text(column: pd.Series, sorted_items: bool = False) -> _Items:
    """Item codes for a text column whose equal values are usually adjacent.

    When the text never decreases from one row to the next (a file written item by item in
    sorted order), every run of equal values is one whole item and the run number is the code;
    otherwise the column is hashed as usual (``sorted_items``: :class:`ItemsNotSorted` instead).
    """
    n = len(column)
    pa_array = _arrow(column)
    if n > 1 and pa_array is not None:
        import pyarrow.compute as pc

        if not pc.any(pc.less(pa_array[1:], pa_array[:-1])).as_py():
            changed = pc.not_equal(pa_array[1:], pa_array[:-1])
            change = np.asarray(changed.to_numpy(zero_copy_only=False), dtype=bool)
            starts = np.concatenate(([0], np.flatnonzero(change) + 1))
            codes, lengths = _runs(starts, n)
            return _Items(codes, starts.size, pa_array, starts, True, lengths)
    if sorted_items and n > 1 and (pa_array is not None or _descending(column)):
        raise ItemsNotSorted
    codes, names = _factorize(column)
    grouped = bool(n < 2 or (codes[1:] >= codes[:-1]).all())
    return _Items(codes.astype(np.int64, copy=False), len(names), names, None, grouped)


def _descending(column: pd.Series) -> bool:
    """Whether a numeric item column decreases somewhere (other dtypes: True)."""
    values = column.to_numpy()
    if values.dtype.kind not in "iuf":
        return True
    return bool((values[1:] < values[:-1]).any())


def _items_from_codes(codes: np.ndarray, categories: Any, sorted_items: bool = False) -> _Items:
    """Item codes from stored dictionary codes, numbered exactly as :func:`_items_from_text` would.

    Stored codes may follow any category order and skip unused categories; the item codes are
    renumbered by first appearance, which is what factorising the text gives.
    ``sorted_items``: raise :class:`ItemsNotSorted` unless the stored codes never decrease.
    """
    starts = run_starts(codes)
    run_code = codes[starts]
    increasing = run_code.size < 2 or bool((run_code[1:] > run_code[:-1]).all())
    if sorted_items and not increasing:
        raise ItemsNotSorted
    if increasing or int(np.bincount(run_code).max()) == 1:
        # every run is a whole item: the run number is the code
        unit, lengths = _runs(starts, codes.size)
        return _Items(unit, starts.size, categories, run_code, True, lengths)
    order = np.argsort(run_code, kind="stable")
    ordered = run_code[order]
    firsts = run_starts(ordered)
    present = ordered[firsts]
    # order[firsts] is each item's first run (the sort is stable), so this is appearance order.
    positions = present[np.argsort(order[firsts])]
    renumber = np.zeros(int(present[-1]) + 1, dtype=np.int64)
    renumber[positions] = np.arange(positions.size)
    return _Items(renumber[codes], positions.size, categories, positions, False)


@dataclass
class _Values:
    """Annotator or label codes as found, their names, and how to renumber them."""

    codes: np.ndarray
    names: np.ndarray
    """Names of the codes in use (object array)."""
    compact: np.ndarray | None
    """Stored code -> index into ``names`` (None when every stored code is in use)."""


def _values_from_text(column: pd.Series) -> _Values:
    codes, names = _factorize(column)
    return _Values(codes, names, None)


def _values_from_codes(codes: np.ndarray, categories: Any) -> _Values:
    """Drop unused categories: only the names in use get codes, as with text."""
    n_categories = len(categories)
    used = np.flatnonzero(count_codes(codes, n_categories))
    names = _objects(categories)
    if used.size == n_categories:
        return _Values(codes, names, None)
    compact = np.full(n_categories, -1, dtype=np.int64)
    compact[used] = np.arange(used.size)
    return _Values(codes, names[used], compact)


def _lookup(values: _Values, rank: np.ndarray) -> Lookup:
    """The final codes as a :class:`Lookup`: the rank of each name, through the compaction."""
    if values.compact is None:
        return Lookup(values.codes, rank)
    table = np.full(values.compact.size, -1, dtype=np.int64)
    used = values.compact >= 0
    table[used] = rank[values.compact[used]]
    return Lookup(values.codes, table)


def _sorted_names(names: np.ndarray) -> tuple[list[str], np.ndarray]:
    """The names' text in sorted order, and the rank (new code) of each old code."""
    text = [str(x) for x in names]
    order = np.argsort(np.asarray(text, dtype=object), kind="stable")
    rank = np.empty(len(order), dtype=np.int64)
    rank[order] = np.arange(len(order))
    return [text[i] for i in order], rank


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


def _encode_items(column: pd.Series, sorted_items: bool = False) -> _Items:
    stored = _stored_codes(column)
    if stored is None:
        return _items_from_text(column, sorted_items)
    return _items_from_codes(*stored, sorted_items)


def _encode_values(column: pd.Series) -> _Values:
    stored = _stored_codes(column)
    return _values_from_text(column) if stored is None else _values_from_codes(*stored)


def _encode_columns(
    items: pd.Series,
    annotators: pd.Series,
    labels: pd.Series,
    sorted_items: bool = False,
    threads: bool = True,
) -> tuple[_Items, _Values, _Values]:
    """Code the three columns; text columns of large frames in threads (Arrow releases the GIL).

    Categorical and dictionary columns need no hashing, so they are coded in this thread. The
    item column goes first, so a ``sorted_items`` refusal comes before any hashing.
    """
    text = [not isinstance(c.dtype, pd.CategoricalDtype) for c in (items, annotators, labels)]
    if not threads or len(items) < 200_000 or sum(text) < 2:
        coded_items = _encode_items(items, sorted_items)
        return coded_items, _encode_values(annotators), _encode_values(labels)
    with ThreadPoolExecutor(max_workers=3) as pool:
        first = pool.submit(_encode_items, items, sorted_items)
        second = pool.submit(_encode_values, annotators)
        third = pool.submit(_encode_values, labels)
        return first.result(), second.result(), third.result()


def code_annotations(data: Any, level: str = "nominal") -> Coded:
    """Code a long annotation frame or a reliability matrix for the statistics.

    Rows with a missing item, annotator or label are dropped (and noted); exact duplicate rows
    count once. Several labels from one annotator for one item make the data multi-label.
    Text columns and Categorical (or Arrow dictionary) columns holding the same values give
    identical codes, so every statistic is the same; the Categorical path skips the hashing.

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
    return code_frame(long_frame(data), level)


def long_frame(data: Any) -> pd.DataFrame:
    """:func:`as_long_frame`, refused unless it has the item, annotator and label columns."""
    frame = as_long_frame(data)
    columns = [str(c) for c in frame.columns]
    missing = [c for c in ANNOTATION_COLUMNS if c not in columns]
    if missing:
        raise UsageError(
            f"the annotations need the columns item, annotator and label; missing: "
            f"{', '.join(missing)} (columns found: {', '.join(columns) or 'none'})"
        )
    return frame


def code_frame(
    frame: pd.DataFrame, level: str, sorted_items: bool = False, threads: bool = True
) -> Coded:
    """:func:`code_annotations` of a checked long frame.

    ``sorted_items``: refuse (:class:`ItemsNotSorted`) item ids that ever decrease from one
    row to the next (Categorical and dictionary columns: their stored codes), so that frames
    cut between two rows with different items share no item. ``threads``: code the text
    columns of a large frame in threads (off when the caller already runs parts in threads).
    """
    notes: list[str] = []
    item_col, ann_col, label_col = (frame[c] for c in ANNOTATION_COLUMNS)
    nulls = (item_col.isna() | ann_col.isna() | label_col.isna()).to_numpy()
    n_null = int(nulls.sum())
    if nulls.any():
        keep = ~nulls
        notes.append(
            f"{int(nulls.sum())} rows with an empty item, annotator or label were left out"
        )
        item_col, ann_col, label_col = item_col[keep], ann_col[keep], label_col[keep]
    items, annotators, labels = _encode_columns(
        item_col.reset_index(drop=True),
        ann_col.reset_index(drop=True),
        label_col.reset_index(drop=True),
        sorted_items,
        threads,
    )
    annotator_names, ann_rank = _sorted_names(annotators.names)
    ann = _lookup(annotators, ann_rank)
    lab_raw = labels.names
    label_text = [str(x) for x in lab_raw]
    numbers_raw: np.ndarray | None = None
    if level != "nominal":
        numbers_raw = _numeric(label_text, lab_raw, level)
        order = np.lexsort((np.asarray(label_text, dtype=object), numbers_raw))
        lab_rank = np.empty(len(order), dtype=np.int64)
        lab_rank[order] = np.arange(len(order))
        label_names = [label_text[i] for i in order]
        numbers_raw = numbers_raw[order]
    else:
        label_names, lab_rank = _sorted_names(lab_raw)
    lab = _lookup(labels, lab_rank)
    unit = items.codes
    if not items.grouped:
        order = np.argsort(unit, kind="stable")
        unit = unit[order]
        ann, lab = Lookup(ann.stored[order], ann.table), Lookup(lab.stored[order], lab.table)
    n_units = items.n_items
    n_ann, n_lab = len(annotator_names), len(label_names)

    sizes = _pairs_once(unit, ann.stored, ann.table.size, n_units, items.sizes)
    if sizes is not None:
        return Coded(
            n_units=n_units,
            annotator_names=annotator_names,
            unit=unit,
            annotator_codes=ann,
            value_codes=lab,
            value_names=label_names,
            numbers=numbers_raw,
            multi=False,
            label_unit=unit,
            label_annotator_codes=ann,
            label_codes=lab,
            label_names=label_names,
            item_name_source=items.name_source,
            item_name_at=items.name_at,
            notes=notes,
            n_null_rows=n_null,
            _sizes=sizes,
        )
    single, unit, ann_final, lab_final, repeated = _drop_repeats(
        unit, ann.final(), lab.final(), n_units, n_ann, n_lab, notes
    )
    if single:
        coded = Coded(
            n_units=n_units,
            annotator_names=annotator_names,
            unit=unit,
            annotator_codes=ann_final,
            value_codes=lab_final,
            value_names=label_names,
            numbers=numbers_raw,
            multi=False,
            label_unit=unit,
            label_annotator_codes=ann_final,
            label_codes=lab_final,
            label_names=label_names,
            notes=notes,
        )
    elif level != "nominal":
        raise UsageError(
            f"some annotators gave several labels to one item (multi-label data); level "
            f"'{level}' needs one value per annotator and item",
            hint="Use level nominal: multi-label data is compared with the MASI distance.",
        )
    else:
        coded = _code_sets(unit, ann_final, lab_final, n_units, annotator_names, label_names, notes)
    coded.item_name_source, coded.item_name_at = items.name_source, items.name_at
    coded.n_null_rows, coded.n_repeated = n_null, repeated
    return coded


NEARBY_LIMIT = 16
"""Largest item size for which repeats are found by comparing rows up to that far apart (each
distance is one vectorised comparison); larger items fall back to a sort or bit masks."""


def _pairs_once(
    unit: np.ndarray,
    ann: np.ndarray,
    n_ann: int,
    n_units: int,
    sizes: np.ndarray | None = None,
) -> np.ndarray | None:
    """Values per item if every item x annotator pair occurs once (rows sorted by item), else None.

    ``ann`` may be any one-to-one annotator numbering below ``n_ann`` (the stored codes);
    ``sizes`` are the values per item when already known.
    """
    if sizes is None:
        sizes = run_lengths(unit, n_units)
    if unit.size == 0:
        return sizes
    longest = int(sizes.max())
    if longest <= NEARBY_LIMIT:
        # Rows of one item are adjacent, so a repeated pair is at most longest - 1 rows apart.
        key = narrow_key(unit, n_ann, ann, n_units)
        repeated = any(np.any(key[d:] == key[:-d]) for d in range(1, longest))
        return None if repeated else sizes
    bitcount = getattr(np, "bitwise_count", None)
    if n_ann <= 64 and bitcount is not None:
        bits = np.left_shift(np.uint64(1), ann.astype(np.uint64))
        masks = np.bitwise_or.reduceat(bits, run_starts(unit))
        return sizes if int(bitcount(masks).sum()) == unit.size else None
    pair = np.sort(unit.astype(np.int64) * n_ann + ann)
    return None if (pair[1:] == pair[:-1]).any() else sizes


def _drop_repeats(
    unit: np.ndarray,
    ann: np.ndarray,
    lab: np.ndarray,
    n_units: int,
    n_ann: int,
    n_lab: int,
    notes: list[str],
) -> tuple[bool, np.ndarray, np.ndarray, np.ndarray, int]:
    """Some item x annotator pair repeats: drop exact duplicate rows, then look again.

    Returns whether the data is single-label after all, the codes sorted by item, annotator
    and label, and how many repeated rows were dropped.
    """
    if float(n_units) * n_ann * n_lab >= 2.0**62:
        raise UsageError(
            f"too many items x annotators x labels to code ({n_units} x {n_ann} x {n_lab})"
        )
    key = np.sort((unit * n_ann + ann) * n_lab + lab)
    # np.unique's result, from one sort (np.unique itself is far slower on large int arrays).
    uniq = key[np.concatenate(([True], key[1:] != key[:-1]))]
    dropped = key.size - uniq.size
    if dropped:
        notes.append(f"{dropped} repeated (item, annotator, label) rows counted once")
    lab = uniq % n_lab
    pair_key = uniq // n_lab
    ann = pair_key % n_ann
    unit = pair_key // n_ann
    single = not (pair_key[1:] == pair_key[:-1]).any()
    return single, unit, ann, lab, int(dropped)


def _code_sets(
    unit: np.ndarray,
    ann: np.ndarray,
    lab: np.ndarray,
    n_units: int,
    annotator_names: list[str],
    label_names: list[str],
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
        annotator_codes=ann[starts],
        value_codes=rank[set_of_pair],
        value_names=value_names,
        numbers=None,
        multi=True,
        label_unit=unit,
        label_annotator_codes=ann,
        label_codes=lab,
        label_names=label_names,
        members=members,
        notes=notes,
    )
