"""A large frame cut into parts and summed in threads must give the figures of one piece.

labelreview/agreement/_parts.py cuts a frame whose item ids never decrease into parts between
two items and merges the parts' exact sums; labelreview/agreement/_alpha._label_sums_nearby
counts the per-label sums of small single-label items in narrow integers instead of grouping
(item, label) pairs. Both are checked here for identical results against the one-piece path
and the sorting path, and the cut path also against the `krippendorff` package (PyPI, a
general-purpose reference implementation of Krippendorff's alpha).
"""

from __future__ import annotations

import warnings

import krippendorff
import numpy as np
import pandas as pd
import pytest

from labelreview.agreement import (
    UndefinedAgreementWarning,
    _alpha,
    _parts,
    agreement_report,
    per_label_alpha,
)
from labelreview.agreement._coding import code_annotations
from labelreview.agreement._parts import frame_sums, item_cuts
from labelreview.errors import UsageError


@pytest.fixture
def small_parts(monkeypatch):
    """Cut frames of any size, so small test frames take the parallel path."""
    monkeypatch.setattr(_parts, "PARALLEL_ROWS", 1)


def sorted_frame(seed: int, n_items: int = 300, multi: bool = False) -> pd.DataFrame:
    """Seeded long frame sorted by item: 1 to 7 annotators per item, 4 labels."""
    rng = np.random.default_rng(seed)
    rows = []
    for item in range(n_items):
        annotators = rng.choice(9, size=int(rng.integers(1, 8)), replace=False)
        truth = int(rng.integers(0, 4))
        for a in sorted(annotators):
            label = truth if rng.random() < 0.7 else int(rng.integers(0, 4))
            rows.append((f"it{item:05d}", f"c{a}", str(label)))
            if multi and rng.random() < 0.05:
                rows.append((f"it{item:05d}", f"c{a}", str((label + 1) % 4)))
    return pd.DataFrame(rows, columns=["item", "annotator", "label"]).astype("str")


def figures(frame: pd.DataFrame, threads: int, level: str = "nominal") -> tuple[object, ...]:
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UndefinedAgreementWarning)
        monkey = _parts.cpu_count
        _parts.cpu_count = lambda: threads  # type: ignore[assignment]
        try:
            report = agreement_report(frame, level=level, bootstrap=30, seed=3).to_dict()
            fast = per_label_alpha(frame, min_items=1)
        finally:
            _parts.cpu_count = monkey  # type: ignore[assignment]
    return report, fast


@pytest.mark.parametrize("threads", [2, 3, 5])
@pytest.mark.parametrize("seed", range(4))
def test_parts_give_the_figures_of_one_piece(small_parts, seed, threads):
    frame = sorted_frame(seed)
    assert item_cuts(frame["item"], threads) is not None
    assert figures(frame, threads) == figures(frame, 1)


@pytest.mark.parametrize("level", ["ordinal", "interval"])
def test_parts_at_numeric_levels_with_bootstrap(small_parts, level):
    # The ordinal bootstrap needs a second look at each part once all value totals are known.
    frame = sorted_frame(11)
    assert figures(frame, 2, level) == figures(frame, 1, level)


def test_multi_label_in_one_part_only(small_parts):
    # Part one single-label, part two multi-label: every part must carry the MASI sums.
    single = sorted_frame(5, n_items=150)
    multi = sorted_frame(6, n_items=150, multi=True)
    multi["item"] = "zz" + multi["item"]
    frame = pd.concat([single, multi], ignore_index=True)
    assert not code_annotations(single).multi and code_annotations(multi).multi
    assert figures(frame, 2) == figures(frame, 1)


@pytest.mark.parametrize("kind", ["categorical", "numeric"])
def test_categorical_and_numeric_item_columns_are_cut(small_parts, kind):
    frame = sorted_frame(7)
    if kind == "categorical":
        frame = frame.astype("category")
    else:
        frame["item"] = frame["item"].str[2:].astype(np.int64)
    assert item_cuts(frame["item"], 2) is not None
    assert figures(frame, 2) == figures(frame, 1)


def test_unsorted_items_fall_back_to_one_piece(small_parts):
    frame = sorted_frame(8)
    # Swap two items' blocks: ids decrease once, so a cut could split an item across parts.
    swapped = pd.concat([frame.iloc[len(frame) // 2 :], frame.iloc[: len(frame) // 2]])
    swapped = swapped.reset_index(drop=True)
    sums, pieces = frame_sums(swapped, "nominal", {"labels"}, threads=2)
    assert len(pieces) == 1
    assert figures(swapped, 2) == figures(swapped, 1)


def test_item_split_across_a_cut_is_never_summed_twice(small_parts):
    # Item "b" occurs before and after "c": the cut must not treat its two runs as two items.
    frame = pd.DataFrame(
        {
            "item": ["a", "a", "b", "b", "c", "c", "b", "d", "d"],
            "annotator": ["x", "y", "x", "y", "x", "y", "z", "x", "y"],
            "label": ["1", "1", "1", "2", "2", "2", "1", "1", "2"],
        }
    ).astype("str")
    assert figures(frame, 3) == figures(frame, 1)


def test_rows_with_empty_cells_are_not_cut(small_parts):
    frame = sorted_frame(9).astype(object)
    frame.loc[5, "item"] = None
    assert item_cuts(frame["item"].astype("str"), 2) is None
    assert figures(frame, 2) == figures(frame, 1)


def test_an_error_has_the_same_words_whichever_part_finds_it(small_parts):
    frame = sorted_frame(10)
    frame.loc[3, "label"] = "zebra"
    frame.loc[len(frame) - 3, "label"] = "aardvark"
    messages = []
    for threads in (1, 2):
        with pytest.raises(UsageError) as caught:
            figures(frame, threads, "ordinal")
        messages.append(str(caught.value))
    assert messages[0] == messages[1]
    assert "'zebra'" in messages[0]  # the first such label in the file, as in one piece


@pytest.mark.parametrize("seed", range(3))
def test_cut_path_matches_krippendorff_package(small_parts, seed):
    # Reference: the `krippendorff` package's nominal alpha on the annotators x items matrix.
    frame = sorted_frame(20 + seed)
    wide = frame.pivot(index="annotator", columns="item", values="label").astype(float)
    expected = krippendorff.alpha(reliability_data=wide.to_numpy(), level_of_measurement="nominal")
    _parts.cpu_count, saved = (lambda: 2), _parts.cpu_count  # type: ignore[assignment]
    try:
        overall, _ = per_label_alpha(frame)
        report = agreement_report(frame, bootstrap=0)
    finally:
        _parts.cpu_count = saved  # type: ignore[assignment]
    assert overall == pytest.approx(expected, abs=1e-12)
    assert report.alpha == pytest.approx(expected, abs=1e-12)


@pytest.mark.parametrize("n_labels", [3, 150, 3000])
@pytest.mark.parametrize("seed", range(3))
def test_narrow_label_sums_equal_the_grouping_path(monkeypatch, seed, n_labels):
    # 3 labels: 16-bit keys; 150: 32-bit keys (with the bin limit raised for this small
    # frame); 3000: too many bins, the grouping path itself.
    monkeypatch.setattr(_alpha, "_NEARBY_BINS", 2_000_000)
    rng = np.random.default_rng(seed)
    sizes = rng.integers(1, 17, size=2000)
    frame = pd.DataFrame(
        {
            "item": np.repeat([f"u{k:05d}" for k in range(sizes.size)], sizes),
            "annotator": np.concatenate([rng.permutation(20)[:s] for s in sizes]).astype(str),
            "label": rng.integers(0, n_labels, size=int(sizes.sum())).astype(str),
        }
    )
    coded = code_annotations(frame)
    nearby = _alpha._label_sums_nearby(coded.unit, coded.label_code, n_labels, coded.unit_sizes())
    assert (nearby is None) == (n_labels == 3000)
    fast = _alpha.label_sums(coded)
    monkeypatch.setattr(_alpha, "_label_sums_nearby", lambda *args: None)
    slow = _alpha.label_sums(coded)
    for name in ("agree_label", "agree_m", "agree_num", "marked", "items"):
        assert np.array_equal(getattr(fast, name), getattr(slow, name)), name


def test_items_larger_than_the_slot_limit_use_the_grouping_path():
    # One item of 17 annotations (more than 16 rows apart cannot be told apart by slot).
    frame = pd.DataFrame(
        {
            "item": ["big"] * 17 + ["small"] * 2,
            "annotator": [f"a{k:02d}" for k in range(17)] + ["a00", "a01"],
            "label": ["x"] * 9 + ["y"] * 8 + ["x", "x"],
        }
    )
    coded = code_annotations(frame)
    assert _alpha._label_sums_nearby(coded.unit, coded.label_code, 2, coded.unit_sizes()) is None
    wide = frame.pivot(index="annotator", columns="item", values="label")
    matrix = wide.replace({"x": 0.0, "y": 1.0}).to_numpy(dtype=float)
    expected = krippendorff.alpha(reliability_data=matrix, level_of_measurement="nominal")
    assert per_label_alpha(frame, min_items=1)[0] == pytest.approx(expected, abs=1e-12)
