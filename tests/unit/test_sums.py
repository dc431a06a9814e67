"""Agreement sums add up exactly: any split of the items into parts, merged in any order, gives
the same AgreementResult as the whole frame, bit for bit (dataclass equality compares floats
exactly). Checked at every level, for multi-label data and with the bootstrap; the figures
themselves are checked against the `krippendorff` package (a general-purpose reference library)
on the same data read in parts."""

from __future__ import annotations

import random
import warnings

import krippendorff
import numpy as np
import pandas as pd
import pytest

from labelreview.agreement import UndefinedAgreementWarning, agreement_report
from labelreview.agreement._coding import code_annotations
from labelreview.agreement._report import ordinal_metric, report_from_sums, report_parts
from labelreview.agreement._sums import BUCKETS, AgreementSums, ExactSums

SHAPES = [
    # (multi-label, level, items, annotators, labels)
    (False, "nominal", 300, 6, 4),
    (True, "nominal", 250, 5, 5),
    (False, "ordinal", 200, 4, 5),
    (False, "interval", 200, 7, 6),
    (False, "ratio", 150, 3, 4),
    (False, "nominal", 120, 12, 2),
]


def frame(seed: int, items: int, annotators: int, labels: int, multi: bool, numeric: bool):
    rng = np.random.default_rng(seed)
    rows = []
    for i in range(items):
        truth = rng.integers(0, labels)
        item = f"it{rng.integers(0, 10**5)}_{i}"
        for a in range(annotators):
            if rng.random() < 0.35:
                continue
            value = truth if rng.random() < 0.65 else rng.integers(0, labels)
            name = str(value + 1) if numeric else f"tag{value}"
            rows.append((item, f"coder{a}", name))
            if multi and rng.random() < 0.3:
                rows.append((item, f"coder{a}", f"tag{rng.integers(0, labels)}"))
    return pd.DataFrame(rows, columns=["item", "annotator", "label"])


def in_parts(data: pd.DataFrame, level: str, n_parts: int, seed: int, bootstrap: int):
    rnd = random.Random(seed)
    items = list(data["item"].unique())
    rnd.shuffle(items)
    parts = report_parts(bootstrap, True)
    total = None
    coded_parts = []
    for k in range(n_parts):
        chosen = set(items[k::n_parts])
        sub = data[data["item"].isin(chosen)].sample(frac=1.0, random_state=seed)
        if sub.empty:
            continue
        coded = code_annotations(sub, level)
        coded_parts.append(coded)
        sums = AgreementSums.from_coded(coded, level, parts)
        if total is None:
            total = sums
        else:
            total = sums.merge(total) if rnd.random() < 0.5 else total.merge(sums)
    assert total is not None
    if bootstrap and total.bucket_d is None:  # ordinal: the second pass
        metric = ordinal_metric(total)
        d = ExactSums(BUCKETS)
        for coded in coded_parts:
            d.merge(total.add_ordinal_disagreement(coded, metric))
        total.bucket_d = d
    return report_from_sums(total, bootstrap=bootstrap, seed=5)


@pytest.mark.parametrize(("multi", "level", "items", "annotators", "labels"), SHAPES)
@pytest.mark.parametrize("seed", [0, 1])
def test_any_split_in_any_order_gives_the_same_result(
    multi, level, items, annotators, labels, seed
):
    data = frame(seed, items, annotators, labels, multi, level != "nominal")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UndefinedAgreementWarning)
        whole = agreement_report(data, level=level, bootstrap=150, seed=5)
        for n_parts in (2, 5, 13):
            got = in_parts(data, level, n_parts, seed, bootstrap=150)
            assert got == whole, (n_parts, level, multi)


@pytest.mark.parametrize("level", ["nominal", "ordinal", "interval", "ratio"])
def test_parts_agree_with_the_krippendorff_package(level):
    # Reference: the `krippendorff` package (PyPI), alpha on the annotators x items matrix.
    data = frame(3, 200, 5, 5, False, True)
    got = in_parts(data, level, 7, 3, bootstrap=0)
    matrix = data.pivot_table(index="annotator", columns="item", values="label", aggfunc="first")
    reference = krippendorff.alpha(
        reliability_data=matrix.to_numpy(dtype=float), level_of_measurement=level
    )
    assert got.alpha == pytest.approx(reference, abs=1e-12)


def test_exact_sums_do_not_depend_on_order_or_grouping():
    rng = np.random.default_rng(4)
    values = rng.standard_normal(5000) * 10.0 ** rng.integers(-8, 8, 5000)
    keys = rng.integers(0, 7, 5000)
    whole = ExactSums(7)
    whole.add(keys, values)
    order = rng.permutation(5000)
    pieces = [ExactSums(7) for _ in range(3)]
    for i, piece in enumerate(pieces):
        part = order[i::3]
        piece.add(keys[part], values[part])
    merged = ExactSums(7)
    for piece in reversed(pieces):
        merged.merge(piece)
    assert np.array_equal(whole.totals(), merged.totals())
    # And the totals are the exactly rounded sums (math.fsum is correctly rounded).
    import math

    for k in range(7):
        exact = math.fsum(values[keys == k])
        assert whole.totals()[k] == pytest.approx(exact, rel=1e-15, abs=1e-300)


def test_merge_refuses_sums_of_another_level():
    data = frame(0, 20, 3, 3, False, True)
    a = AgreementSums.from_coded(code_annotations(data, "nominal"), "nominal")
    b = AgreementSums.from_coded(code_annotations(data, "interval"), "interval")
    with pytest.raises(ValueError, match="cannot add sums"):
        a.merge(b)
