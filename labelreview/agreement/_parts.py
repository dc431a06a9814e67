"""The sums of one in-memory annotation frame, in parallel parts when it is large and sorted.

:class:`~labelreview.agreement._sums.AgreementSums` add up exactly over sets of items that share
no item, which is how the streaming reader and the Dask engine work. A large frame whose item
ids never decrease from one row to the next (a file written item by item, the common case) is
cut into that many parts, between two rows of different items; the parts are coded and summed
in threads (Arrow's hashing and most numpy passes release the GIL) and the sums merged. The
figures are the same to the last bit as from the whole frame in one piece. A frame that is
small, unsorted, or whose item column is of another kind is done in one piece.
"""

from __future__ import annotations

import os
from concurrent.futures import ThreadPoolExecutor
from typing import Any

import numpy as np
import pandas as pd

from labelreview.agreement._coding import (
    Coded,
    ItemsNotSorted,
    _arrow,
    check_level,
    code_frame,
    long_frame,
)
from labelreview.agreement._sums import AgreementSums
from labelreview.errors import UsageError

PARALLEL_ROWS = 400_000
"""Frames with fewer rows are done in one piece (threads would cost more than they save)."""
MAX_PARTS = 8


def cpu_count() -> int:
    """CPUs this process may run on."""
    try:
        return len(os.sched_getaffinity(0))
    except AttributeError:  # not Linux
        return os.cpu_count() or 1


def item_cuts(items: pd.Series, n_parts: int) -> list[int] | None:
    """Row positions that cut ``items`` into about ``n_parts`` equal parts between two items.

    Each cut falls where the item id increases (Categorical columns: the stored code), so two
    parts share no item as long as the ids never decrease within a part, which the coding of
    each part checks (``sorted_items``). None when the column cannot be cut like that.
    """
    n = len(items)
    if n_parts < 2 or n < 2:
        return None
    if isinstance(items.dtype, pd.CategoricalDtype):
        keys: Any = np.asarray(items.cat.codes)
        if bool((keys < 0).any()):
            return None
    elif _arrow(items) is not None:
        if bool(items.isna().any()):
            return None
        keys = items.array
    elif items.dtype.kind in "iuf":
        keys = items.to_numpy()
        if keys.dtype.kind == "f" and bool(np.isnan(keys).any()):
            return None
    else:
        return None
    cuts = [0]
    for part in range(1, n_parts):
        row = max(n * part // n_parts, cuts[-1] + 1)
        while row < n and keys[row] == keys[row - 1]:
            row += 1
        if row >= n:
            break
        if not keys[row - 1] < keys[row]:
            return None
        cuts.append(row)
    cuts.append(n)
    return cuts if len(cuts) > 2 else None


def frame_sums(
    annotations: Any,
    level: str,
    parts: frozenset[str] | set[str],
    *,
    leave_out: bool = True,
    multi_parts: frozenset[str] | set[str] = frozenset(),
    threads: int | None = None,
) -> tuple[AgreementSums, list[Coded]]:
    """The sums of a long frame or reliability matrix, and the coded part(s) they came from.

    Args:
        annotations: The long frame (item, annotator, label) or a reliability matrix.
        level: The measurement level.
        parts: Which figures the sums prepare (see :data:`~labelreview.agreement._sums.PARTS`).
        leave_out: With ``annotators``: also the leave-one-annotator-out changes.
        multi_parts: Figures to add when the data turns out to be multi-label.
        threads: Parts to cut a large sorted frame into (default: the CPUs available, at most
            :data:`MAX_PARTS`); 1 for one piece.

    Raises:
        UsageError: As :func:`~labelreview.agreement._coding.code_annotations`.
    """
    check_level(level)
    frame = long_frame(annotations)
    n_parts = min(cpu_count(), MAX_PARTS) if threads is None else threads
    cuts = item_cuts(frame["item"], n_parts) if len(frame) >= PARALLEL_ROWS else None
    wide = frozenset(parts) | frozenset(multi_parts)

    def sums_of(coded: Coded, multi: bool) -> AgreementSums:
        chosen = wide if multi else frozenset(parts)
        return AgreementSums.from_coded(coded, level, chosen, leave_out=leave_out)

    done: list[tuple[Coded, AgreementSums]] | None = None
    if cuts is not None:
        frames = [frame.iloc[a:b] for a, b in zip(cuts[:-1], cuts[1:], strict=True)]

        def one(piece: pd.DataFrame) -> tuple[Coded, AgreementSums]:
            # Coding and summing in the same thread: a part that finishes its coding early
            # goes on to its sums instead of waiting for the others.
            coded = code_frame(piece, level, sorted_items=True, threads=False)
            return coded, sums_of(coded, coded.multi)

        try:
            with ThreadPoolExecutor(max_workers=len(frames)) as pool:
                done = list(pool.map(one, frames))
        except ItemsNotSorted:
            pass  # ids decrease somewhere: one piece, below
        except UsageError:
            pass  # the one piece below raises it with the same words whichever part found it
    if done is None:
        coded = code_frame(frame, level)
        return sums_of(coded, coded.multi), [coded]
    if any(coded.multi for coded, _ in done) and wide != frozenset(parts):
        # Multi-label somewhere: every part needs the multi-label figures to merge (rare).
        done = [(coded, sums if coded.multi else sums_of(coded, True)) for coded, sums in done]
    sums = done[0][1]
    for _, other in done[1:]:
        sums = sums.merge(other)
    return sums, [coded for coded, _ in done]
