"""The agreement engine's own behaviour: undefined cases, errors, the report and its JSON,
the bootstrap, and invariances (hypothesis). Reference values live in
test_agreement_reference.py."""

from __future__ import annotations

import doctest
import json
import math
import warnings

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import labelreview.agreement._public as public_module
from labelreview.agreement import (
    AgreementThresholds,
    UndefinedAgreementWarning,
    agreement_report,
    cohen_kappa,
    fleiss_kappa,
    gwet_ac1,
    interpret_alpha,
    interpret_kappa,
    krippendorff_alpha,
    per_label_alpha,
)
from labelreview.errors import LabelReviewError, UsageError


def frame(rows):
    return pd.DataFrame(rows, columns=["item", "annotator", "label"])


def test_docstring_examples():
    failures, tried = doctest.testmod(public_module)
    assert tried >= 8 and failures == 0


def test_one_value_everywhere_is_undefined_with_reason():
    data = frame([("i1", "a", "x"), ("i1", "b", "x"), ("i2", "a", "x"), ("i2", "b", "x")])
    with pytest.warns(UndefinedAgreementWarning, match="expected disagreement is zero"):
        assert krippendorff_alpha(data) is None
    with pytest.warns(UndefinedAgreementWarning, match="only one category"):
        assert gwet_ac1(data, replace_undefined_by=0.0) == 0.0
    result = agreement_report(data, bootstrap=50)
    assert result.alpha is None and "'x'" in result.alpha_reason
    assert result.interpretation == "undefined"
    assert result.ci is None and result.ci_reason == "alpha is undefined"
    text = json.dumps(result.to_dict(), allow_nan=False)  # raises on NaN
    assert '"alpha": null' in text


def test_no_pairable_items():
    data = frame([("i1", "a", "x"), ("i2", "b", "y")])
    with pytest.warns(UndefinedAgreementWarning, match="two or more"):
        assert krippendorff_alpha(data) is None
    result = agreement_report(data)
    assert result.n_pairable == 0 and result.n_unpairable == 2
    assert result.fleiss_kappa is None and "nothing to compare" in result.fleiss_kappa_reason
    json.dumps(result.to_dict(), allow_nan=False)


def test_fleiss_needs_equal_ratings_per_item():
    data = frame(
        [("i1", "a", "x"), ("i1", "b", "x"), ("i2", "a", "x"), ("i2", "b", "y"), ("i2", "c", "y")]
    )
    with pytest.warns(UndefinedAgreementWarning, match="between 2 and 3"):
        assert fleiss_kappa(data) is None


def test_cohen_undefined_and_bad_weights():
    with pytest.warns(UndefinedAgreementWarning, match="no chance disagreement"):
        assert cohen_kappa(["a", "a"], ["a", "a"]) is None
    with pytest.raises(UsageError, match="weights must be None, 'linear' or 'quadratic'"):
        cohen_kappa([1], [1], weights="cubic")
    with pytest.raises(UsageError, match="differ in length"):
        cohen_kappa([1, 2], [1])


def test_errors_name_the_problem():
    with pytest.raises(UsageError, match="missing: label"):
        krippendorff_alpha(pd.DataFrame({"item": ["1"], "annotator": ["a"], "tag": ["x"]}))
    with pytest.raises(UsageError, match="level must be one of nominal, ordinal"):
        krippendorff_alpha([[1, 2]], level="cardinal")
    with pytest.raises(UsageError, match="the label 'tall' is not a number"):
        krippendorff_alpha(frame([("i", "a", "1"), ("i", "b", "tall")]), level="ordinal")
    with pytest.raises(UsageError, match="'-2' is negative"):
        krippendorff_alpha(frame([("i", "a", "1"), ("i", "b", "-2")]), level="ratio")
    multi = frame([("i", "a", "1"), ("i", "a", "2"), ("i", "b", "2")])
    with pytest.raises(UsageError, match="multi-label data"):
        agreement_report(multi, level="interval")
    with pytest.raises(UsageError, match="bootstrap must be a whole number"):
        agreement_report(multi, bootstrap=-1)
    with pytest.raises(UsageError, match="'tentative' threshold"):
        AgreementThresholds(reliable=0.6, tentative=0.7)
    assert issubclass(UsageError, LabelReviewError)


def test_interpretation_words():
    # Krippendorff (2004), section 12.4: >= .800 reliable, .667-.800 tentative.
    assert interpret_alpha(0.80) == "reliable"
    assert interpret_alpha(0.7999) == "tentative"
    assert interpret_alpha(0.667) == "tentative"
    assert interpret_alpha(0.6669) == "unreliable"
    assert interpret_alpha(None) == "undefined"
    custom = AgreementThresholds(reliable=0.9, tentative=0.5)
    assert interpret_alpha(0.85, custom) == "tentative"
    # Landis & Koch (1977), Table/benchmarks: <0 poor, .00-.20 slight, .21-.40 fair,
    # .41-.60 moderate, .61-.80 substantial, .81-1.00 almost perfect.
    words = [interpret_kappa(k) for k in (-0.1, 0.0, 0.2, 0.21, 0.4, 0.41, 0.6, 0.61, 0.8, 0.81)]
    assert words == [
        "poor",
        "slight",
        "slight",
        "fair",
        "fair",
        "moderate",
        "moderate",
        "substantial",
        "substantial",
        "almost perfect",
    ]
    assert interpret_kappa(float("nan")) == "undefined"


def seeded_frame(seed: int, items: int = 300, annotators: int = 6, labels: int = 4) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    truth = rng.integers(0, labels, size=items)
    rows = []
    for i in range(items):
        for a in range(annotators):
            if rng.random() < 0.3:
                continue
            lab = truth[i] if rng.random() < 0.7 else rng.integers(0, labels)
            rows.append((f"it{i:04d}", f"coder{a}", f"tag{lab}"))
    return frame(rows)


def test_report_json_keys_and_no_nan():
    result = agreement_report(seeded_frame(1), bootstrap=200, seed=3)
    data = result.to_dict()
    for key in (
        "alpha",
        "level",
        "n_items",
        "n_pairable",
        "n_annotators",
        "ci",
        "interpretation",
        "per_label",
        "per_annotator",
        "fleiss_kappa",
        "fleiss_kappa_reason",
        "pairwise_cohen",
    ):
        assert key in data
    assert {"label", "alpha", "n_items", "prevalence"} <= set(data["per_label"][0])
    json.dumps(data, allow_nan=False)
    low, high = data["ci"]
    assert low <= data["alpha"] <= high
    # Least reliable labels first; annotators who pull agreement down first.
    alphas = [x["alpha"] for x in data["per_label"] if x["alpha"] is not None]
    assert alphas == sorted(alphas)
    changes = [x["change"] for x in data["per_annotator"]]
    assert changes == sorted(changes, reverse=True)
    assert len(data["pairwise_cohen"]) == 15  # 6 annotators, all pairs share >= 10 items


def test_bootstrap_is_seeded_and_resamples_items():
    data = seeded_frame(2)
    first = agreement_report(data, bootstrap=300, seed=9, leave_out=False)
    again = agreement_report(data, bootstrap=300, seed=9, leave_out=False)
    other = agreement_report(data, bootstrap=300, seed=10, leave_out=False)
    assert first.ci == again.ci and first.ci != other.ci
    assert first.bootstrap_used == 300
    none = agreement_report(data, bootstrap=0)
    assert none.ci is None and "bootstrap draws = 0" in none.ci_reason
    # The interval's width shrinks roughly with the square root of the item count.
    small = agreement_report(seeded_frame(2, items=100), bootstrap=400, seed=1, leave_out=False)
    large = agreement_report(seeded_frame(2, items=1600), bootstrap=400, seed=1, leave_out=False)
    ratio = (small.ci[1] - small.ci[0]) / (large.ci[1] - large.ci[0])
    assert 2.5 < ratio < 6.5  # sqrt(16) = 4


def test_per_label_min_items_and_fast_path_agree_with_report():
    data = seeded_frame(4)
    rare = frame([("it0000", "coder0", "rare_tag")])
    data = pd.concat([data[~((data.item == "it0000") & (data.annotator == "coder0"))], rare])
    overall, labels = per_label_alpha(data, min_items=10)
    report = agreement_report(data, bootstrap=0)
    assert overall == pytest.approx(report.alpha, abs=1e-12)
    entry = next(x for x in labels if x.label == "rare_tag")
    assert entry.alpha is None and "at least 10 are needed" in entry.reason
    assert [x.label for x in labels] == [x.label for x in report.per_label]


def brute_majority(data: pd.DataFrame) -> dict[str, tuple[int, int]]:
    out: dict[str, list[int]] = {}
    for _, grp in data.groupby("item"):
        if len(grp) < 2:
            continue
        for _, row in grp.iterrows():
            others = grp[grp.annotator != row.annotator]["label"].value_counts()
            own = int(others.get(row.label, 0))
            best = (
                int(others.drop(row.label, errors="ignore").max())
                if len(others.drop(row.label, errors="ignore"))
                else 0
            )
            tally = out.setdefault(row.annotator, [0, 0])
            if own != best:
                tally[1] += 1
                tally[0] += own > best
    return {k: (v[0], v[1]) for k, v in out.items()}


def test_majority_agreement_matches_a_direct_count():
    # Definition (common practice, no source): agree when the annotator's label is the single
    # most frequent among the other annotators' labels; ties with the top are left out.
    data = seeded_frame(6, items=120, annotators=5, labels=3)
    expected = brute_majority(data)
    result = agreement_report(data, bootstrap=0)
    for entry in result.per_annotator:
        agree, counted = expected[entry.annotator]
        assert entry.majority_items == counted
        assert entry.majority_agreement == pytest.approx(agree / counted)


def test_row_order_and_grouping_do_not_matter():
    data = seeded_frame(7)
    shuffled = data.sample(frac=1.0, random_state=1).reset_index(drop=True)
    as_objects = data.astype(object)
    base = agreement_report(data, bootstrap=0).to_dict()
    for other in (shuffled, as_objects):
        got = agreement_report(other, bootstrap=0).to_dict()
        assert got["alpha"] == pytest.approx(base["alpha"], abs=1e-12)
        assert got["per_label"] == base["per_label"]
        assert got["pairwise_cohen"] == base["pairwise_cohen"]


def test_duplicate_rows_count_once_and_nulls_are_dropped():
    data = seeded_frame(8, items=50)
    doubled = pd.concat([data, data.iloc[:20]], ignore_index=True)
    with_null = pd.concat([data, frame([("x", None, "tag1")])], ignore_index=True)
    base = agreement_report(data, bootstrap=0)
    got = agreement_report(doubled, bootstrap=0)
    assert got.alpha == pytest.approx(base.alpha) and not got.multi_label
    assert any("counted once" in n for n in got.notes)
    nulls = agreement_report(with_null, bootstrap=0)
    assert nulls.alpha == pytest.approx(base.alpha)
    assert any("left out" in n for n in nulls.notes)


matrices = st.integers(min_value=2, max_value=5).flatmap(
    lambda a: st.lists(
        st.lists(st.one_of(st.none(), st.integers(0, 3)), min_size=a, max_size=a),
        min_size=3,
        max_size=25,
    )
)


@settings(max_examples=60, deadline=None)
@given(matrices, st.randoms(use_true_random=False))
def test_properties_symmetry_order_and_renaming(columns, rnd):
    # Property tests (as scikit-learn's common metric tests do): alpha does not depend on the
    # order of annotators or items, nor on the category names.
    matrix = np.array(columns, dtype=object).T  # annotators x items
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UndefinedAgreementWarning)
        base = krippendorff_alpha(matrix)
        rows = list(range(matrix.shape[0]))
        cols = list(range(matrix.shape[1]))
        rnd.shuffle(rows)
        rnd.shuffle(cols)
        permuted = matrix[rows][:, cols]
        names = {0: "quay", 1: "gull", 2: "net", 3: "fog"}
        renamed = np.vectorize(lambda v: None if v is None else names[v], otypes=[object])(matrix)
        for other in (permuted, renamed):
            got = krippendorff_alpha(other)
            if base is None:
                assert got is None
            else:
                assert got is not None and math.isclose(got, base, abs_tol=1e-12)


def test_multi_label_leave_one_out_equals_alpha_computed_without_that_annotator():
    # Self-consistency: leave-one-out computes every annotator's expected disagreement in one
    # batch; each must equal the MASI alpha of the data with that annotator's rows removed.
    rng = np.random.default_rng(12)
    rows = []
    for i in range(150):
        for a in rng.choice(["a", "b", "c", "d", "e"], 3, replace=False):
            for label in rng.choice(["x", "y", "z", "w"], rng.integers(1, 3), replace=False):
                rows.append((f"i{i}", str(a), str(label)))
    data = pd.DataFrame(rows, columns=["item", "annotator", "label"])
    report = agreement_report(data, bootstrap=0)
    assert report.multi_label and report.distance == "masi"
    for entry in report.per_annotator:
        rest = data[data["annotator"] != entry.annotator]
        alone = agreement_report(rest, bootstrap=0, leave_out=False)
        assert entry.alpha_without == pytest.approx(alone.alpha, abs=1e-10), entry.annotator


def test_pairwise_false_skips_only_cohens_kappa():
    data = seeded_frame(3)
    full = agreement_report(data, bootstrap=0)
    light = agreement_report(data, bootstrap=0, pairwise=False)
    assert full.pairwise_cohen and light.pairwise_cohen == ()
    assert light.pairwise_cohen_reason == "not computed (pairwise=False)"
    assert light.alpha == full.alpha and light.per_label == full.per_label
    assert light.per_annotator == full.per_annotator and light.split_pairs == full.split_pairs
