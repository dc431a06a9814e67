"""How the annotation columns are stored must not change any figure.

Text columns, pandas Categoricals (any category order, unused categories included) and Arrow
dictionary columns holding the same annotations go through different coding paths in
labelreview/agreement/_coding.py (the dictionary paths skip the string hashing), and small
items are grouped without a sort in _alpha.label_groups. These tests require identical results
from every path, and check the fast paths against the `krippendorff` package (PyPI, a
general-purpose reference implementation) on both sides of the small-item limit.
"""

from __future__ import annotations

import warnings

import krippendorff
import numpy as np
import pandas as pd
import pyarrow as pa
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from labelreview.agreement import (
    UndefinedAgreementWarning,
    agreement_report,
    per_label_alpha,
)
from labelreview.agreement._alpha import count_pairs, label_groups
from labelreview.agreement._coding import NEARBY_LIMIT, code_annotations

COLUMNS = ("item", "annotator", "label")


def random_frame(seed: int) -> pd.DataFrame:
    """Seeded long frame of varied shape: some sorted, some shuffled, gaps, nulls, repeats."""
    rng = np.random.default_rng(seed)
    n_items = int(rng.integers(1, 120))
    n_ann = int(rng.integers(1, 9))
    n_lab = int(rng.integers(1, 6))
    rows = int(rng.integers(1, n_items * n_ann + 2))
    frame = pd.DataFrame(
        {
            "item": [f"i{x:03d}" for x in rng.integers(0, n_items, rows)],
            "annotator": [f"a{x}" for x in rng.integers(0, n_ann, rows)],
            "label": [str(x) for x in rng.integers(0, n_lab, rows)],
        },
        dtype=object,
    )
    if seed % 2 == 0:
        # Mostly one row per item x annotator, so most seeds are single-label data.
        frame = frame.drop_duplicates(["item", "annotator"])
    if seed % 3 == 0:
        frame = frame.sort_values("item", kind="stable")
    if seed % 5 == 0:
        frame.loc[frame.index[rng.random(len(frame)) < 0.1], "label"] = None
    return frame.reset_index(drop=True)


def as_categorical(frame: pd.DataFrame, seed: int) -> pd.DataFrame:
    """The same frame with Categorical columns: shuffled categories plus unused ones."""
    rng = np.random.default_rng(seed + 1000)
    out = {}
    for name in COLUMNS:
        present = sorted({v for v in frame[name] if v is not None})
        categories = present + [f"unused_{name}_{k}" for k in range(int(rng.integers(0, 3)))]
        categories = list(rng.permutation(np.array(categories, dtype=object)))
        out[name] = pd.Categorical(frame[name], categories=categories)
    return pd.DataFrame(out)


def as_arrow_dictionary(frame: pd.DataFrame) -> pd.DataFrame:
    """The same frame with Arrow dictionary<int32, string> columns (as pyarrow.csv gives)."""
    return pd.DataFrame(
        {
            name: pd.Series(
                pd.arrays.ArrowExtensionArray(
                    pa.array(list(frame[name]), type=pa.string()).dictionary_encode()
                )
            )
            for name in COLUMNS
        }
    )


def as_pandas_strings(frame: pd.DataFrame) -> pd.DataFrame:
    """The same frame with pandas' default string dtype (Arrow-backed text)."""
    return frame.astype("str").where(frame.notna(), None).astype("str")


def results(frame: pd.DataFrame, level: str = "nominal") -> tuple[object, object]:
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UndefinedAgreementWarning)
        try:
            report = agreement_report(frame, level=level, bootstrap=20).to_dict()
        except Exception as exc:  # the same error must come from every path
            report = repr(exc)
        try:
            fast = per_label_alpha(frame, min_items=1)
        except Exception as exc:
            fast = repr(exc)
    return report, fast


@pytest.mark.parametrize("seed", range(30))
def test_text_categorical_and_arrow_dictionary_give_identical_results(seed):
    text = random_frame(seed)
    base = results(text)
    assert results(as_categorical(text, seed)) == base
    assert results(as_arrow_dictionary(text)) == base
    assert results(as_pandas_strings(text)) == base


@pytest.mark.parametrize("seed", range(0, 30, 2))
@pytest.mark.parametrize("level", ["ordinal", "interval"])
def test_numeric_levels_identical_for_categorical_labels(seed, level):
    text = random_frame(seed)
    assert results(as_categorical(text, seed), level) == results(text, level)


@pytest.mark.parametrize("seed", range(12))
def test_codes_are_identical_not_just_the_figures(seed):
    # Identical codes mean every sum runs in the same order, so figures match to the last bit.
    text = random_frame(seed)
    a, b = code_annotations(text), code_annotations(as_categorical(text, seed))
    for name in ("unit", "annotator", "value", "label_unit", "label_code"):
        assert np.array_equal(getattr(a, name), getattr(b, name)), name
    assert (a.annotator_names, a.value_names, a.multi) == (
        b.annotator_names,
        b.value_names,
        b.multi,
    )
    assert list(map(str, a.unit_names)) == list(map(str, b.unit_names))


rows_strategy = st.lists(
    st.tuples(st.sampled_from("pqrst"), st.sampled_from("ABCD"), st.sampled_from("xyz")),
    min_size=1,
    max_size=40,
)


@settings(max_examples=80, deadline=None)
@given(rows_strategy, st.randoms(use_true_random=False))
def test_property_categorical_equals_text(rows, rnd):
    text = pd.DataFrame(rows, columns=list(COLUMNS), dtype=object)
    categorical = {}
    for name in COLUMNS:
        categories = sorted(set(text[name])) + ["never_used"]
        rnd.shuffle(categories)
        categorical[name] = pd.Categorical(text[name], categories=categories)
    assert results(pd.DataFrame(categorical)) == results(text)


def test_item_column_categorical_in_any_order_of_appearance():
    # Items appear as b, a, c but the categories are sorted, and rows of b are split: the
    # engine must renumber items by first appearance exactly as for text.
    text = pd.DataFrame(
        {
            "item": ["b", "b", "a", "a", "c", "c", "b"],
            "annotator": ["x", "y", "x", "y", "x", "y", "z"],
            "label": ["1", "1", "2", "1", "2", "2", "1"],
        }
    )
    categorical = text.astype("category")
    assert results(categorical) == results(text)
    assert np.array_equal(code_annotations(categorical).unit, code_annotations(text).unit)


def wide_matrix(rng: np.random.Generator, annotators: int, items: int) -> np.ndarray:
    truth = rng.integers(0, 4, size=items)
    values = np.where(
        rng.random((annotators, items)) < 0.6, truth, rng.integers(0, 4, (annotators, items))
    ).astype(float)
    values[rng.random(values.shape) < 0.15] = np.nan
    return values


def long_from_matrix(matrix: np.ndarray) -> pd.DataFrame:
    ann, item = np.nonzero(~np.isnan(matrix))
    return pd.DataFrame(
        {
            "item": [f"u{i:04d}" for i in item],
            "annotator": [f"c{a:02d}" for a in ann],
            "label": [f"v{int(v)}" for v in matrix[ann, item]],
        }
    ).sort_values(["item", "annotator"], kind="stable")


@pytest.mark.parametrize("annotators", [3, NEARBY_LIMIT, NEARBY_LIMIT + 1, 30])
def test_both_grouping_paths_match_krippendorff_package(annotators):
    # Items up to NEARBY_LIMIT annotations use the sort-free grouping, larger ones the sort;
    # reference: the `krippendorff` package's nominal alpha, overall and one-vs-rest.
    rng = np.random.default_rng(annotators)
    matrix = wide_matrix(rng, annotators, 200)
    frame = long_from_matrix(matrix)
    for data in (frame, frame.astype("category")):
        overall, labels = per_label_alpha(data, min_items=1)
        reference = krippendorff.alpha(reliability_data=matrix, level_of_measurement="nominal")
        assert overall == pytest.approx(reference, abs=1e-10)
        for entry in labels:
            code = float(entry.label[1:])
            binary = np.where(np.isnan(matrix), np.nan, (matrix == code).astype(float))
            expected = krippendorff.alpha(reliability_data=binary, level_of_measurement="nominal")
            assert entry.alpha == pytest.approx(expected, abs=1e-10), entry.label


@pytest.mark.parametrize("seed", range(8))
def test_sort_free_grouping_equals_the_sort(seed):
    rng = np.random.default_rng(seed)
    sizes = rng.integers(1, NEARBY_LIMIT + 1, size=300)
    unit = np.repeat(np.arange(sizes.size), sizes)
    label = rng.integers(0, 5, size=unit.size)
    got = label_groups(unit, label, 5)
    want = count_pairs(unit, label, 5)
    order = np.lexsort((got[1], got[0]))
    for g, w in zip(got, want, strict=True):
        assert np.array_equal(g[order], w)


def test_repeat_at_the_edge_of_the_small_item_limit_is_found():
    # One item of NEARBY_LIMIT rows whose first and last rows share an annotator (giving two
    # labels): the data is multi-label, on every path.
    n = NEARBY_LIMIT
    annotators = [f"a{k:02d}" for k in range(n - 1)] + ["a00"]
    text = pd.DataFrame(
        {"item": ["one"] * n, "annotator": annotators, "label": ["x"] * (n - 1) + ["y"]}
    )
    for data in (text, text.astype("category")):
        coded = code_annotations(data)
        assert coded.multi
    assert results(text.astype("category")) == results(text)
