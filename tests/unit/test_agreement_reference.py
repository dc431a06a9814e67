"""Agreement figures checked against sources outside labelreview: published worked examples
and general-purpose reference libraries (test-only dependencies: krippendorff, statsmodels,
scikit-learn, nltk; irrCAC values pinned in tests/data/agreement/gwet_reference.json)."""

from __future__ import annotations

import json
import warnings
from pathlib import Path

import krippendorff
import numpy as np
import pandas as pd
import pytest
from nltk.metrics.agreement import AnnotationTask
from nltk.metrics.distance import masi_distance as nltk_masi
from sklearn.metrics import cohen_kappa_score
from statsmodels.stats.inter_rater import fleiss_kappa as sm_fleiss_kappa

from labelreview.agreement import (
    agreement_report,
    cohen_kappa,
    fleiss_kappa,
    gwet_ac1,
    krippendorff_alpha,
    masi_distance,
    per_label_alpha,
    percent_agreement,
)

DATA = Path(__file__).parent.parent / "data" / "agreement"
LEVELS = ("nominal", "ordinal", "interval", "ratio")


def reliability_2011() -> pd.DataFrame:
    return pd.read_csv(DATA / "krippendorff_2011_reliability.csv", index_col="observer")


# Krippendorff (2011), "Computing Krippendorff's Alpha-Reliability", section C: 4 observers x
# 12 units with missing values. The published values were recalled from memory (nominal 0.743,
# ordinal 0.815, interval 0.849, ratio 0.797) and are confirmed here both by our engine and by
# the `krippendorff` package on the same matrix.
@pytest.mark.parametrize(
    ("level", "published"),
    [("nominal", 0.743), ("ordinal", 0.815), ("interval", 0.849), ("ratio", 0.797)],
)
def test_krippendorff_2011_worked_example(level: str, published: float):
    matrix = reliability_2011()
    ours = krippendorff_alpha(matrix, level=level)
    assert ours is not None
    assert round(ours, 3) == published
    reference = krippendorff.alpha(
        reliability_data=matrix.to_numpy(float), level_of_measurement=level
    )
    assert ours == pytest.approx(reference, abs=1e-12)


def test_krippendorff_2011_counts_unpairable_unit():
    # Unit 12 has a single value (observer B's 3): unpairable, left out and counted.
    result = agreement_report(reliability_2011(), bootstrap=0)
    assert result.n_items == 12
    assert result.n_pairable == 11
    assert result.n_values == 40  # 41 values, less the lone one (Krippendorff 2011: n = 40)


def fleiss_table() -> np.ndarray:
    return pd.read_csv(DATA / "fleiss_14_raters_counts.csv", index_col="subject").to_numpy()


def table_to_long(table: np.ndarray) -> pd.DataFrame:
    rows = []
    for subject, counts in enumerate(table):
        rater = 0
        for category, n in enumerate(counts):
            for _ in range(int(n)):
                rows.append((f"s{subject}", f"r{rater}", f"c{category + 1}"))
                rater += 1
    return pd.DataFrame(rows, columns=["item", "annotator", "label"])


def test_fleiss_kappa_widely_reproduced_example():
    # The 10 subjects x 14 raters x 5 categories example reproduced in many textbooks and in
    # Wikipedia's "Fleiss' kappa" article, kappa 0.210 (recalled from memory; statsmodels
    # confirms it on the same table). Raters are anonymous, so rater ids are arbitrary.
    table = fleiss_table()
    ours = fleiss_kappa(table_to_long(table))
    assert ours is not None
    assert round(ours, 3) == 0.210
    assert ours == pytest.approx(sm_fleiss_kappa(table, method="fleiss"), abs=1e-12)
    # Its observed agreement P-bar 0.378 (same source, recalled from memory).
    assert round(percent_agreement(table_to_long(table)), 3) == 0.378


def random_matrix(rng, annotators, items, categories, missing):
    values = rng.integers(1, categories + 1, size=(annotators, items)).astype(float)
    # Correlate annotators a little so alpha is not always near zero.
    truth = rng.integers(1, categories + 1, size=items)
    copy = rng.random((annotators, items)) < 0.5
    values[copy] = np.broadcast_to(truth, values.shape)[copy]
    values[rng.random(values.shape) < missing] = np.nan
    return values


SHAPES = [(2, 40, 2, 0.0), (3, 200, 5, 0.2), (7, 150, 4, 0.5), (12, 60, 9, 0.3), (4, 500, 3, 0.1)]


@pytest.mark.parametrize("shape", SHAPES)
@pytest.mark.parametrize("level", LEVELS)
def test_alpha_matches_krippendorff_package(shape, level):
    rng = np.random.default_rng(abs(hash((shape, level))) % 2**32)
    matrix = random_matrix(rng, *shape)
    reference = krippendorff.alpha(reliability_data=matrix, level_of_measurement=level)
    assert krippendorff_alpha(matrix, level=level) == pytest.approx(reference, abs=1e-10)
    report = agreement_report(matrix, level=level, bootstrap=0)
    assert report.alpha == pytest.approx(reference, abs=1e-10)


@pytest.mark.parametrize("shape", SHAPES)
def test_per_label_alpha_matches_krippendorff_package_on_binary_data(shape):
    # One-vs-rest: recode each category as 1 (this label) / 0 (any other) and ask the package.
    rng = np.random.default_rng(sum(shape[:3]))
    matrix = random_matrix(rng, *shape)
    _, labels = per_label_alpha(matrix, min_items=1)
    checked = 0
    for entry in labels:
        code = float(entry.label)
        binary = np.where(np.isnan(matrix), np.nan, (matrix == code).astype(float))
        if np.nansum(binary) in (0, np.count_nonzero(~np.isnan(binary))):
            continue
        reference = krippendorff.alpha(reliability_data=binary, level_of_measurement="nominal")
        assert entry.alpha == pytest.approx(reference, abs=1e-10), entry.label
        checked += 1
    assert checked >= 2


def test_leave_one_out_matches_krippendorff_package_without_that_row():
    rng = np.random.default_rng(5)
    matrix = random_matrix(rng, 6, 120, 4, 0.3)
    frame = pd.DataFrame(matrix, index=[f"coder{i}" for i in range(6)])
    for level in ("nominal", "ordinal"):
        report = agreement_report(frame, level=level, bootstrap=0)
        by_name = {a.annotator: a for a in report.per_annotator}
        for i in range(6):
            rest = np.delete(matrix, i, axis=0)
            reference = krippendorff.alpha(reliability_data=rest, level_of_measurement=level)
            assert by_name[f"coder{i}"].alpha_without == pytest.approx(reference, abs=1e-9)
            assert by_name[f"coder{i}"].change == pytest.approx(reference - report.alpha, abs=1e-9)


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_fleiss_matches_statsmodels_on_complete_data(seed):
    rng = np.random.default_rng(seed)
    matrix = random_matrix(rng, 5, 80, 4, 0.0)
    counts = np.stack([(matrix == c).sum(axis=0) for c in range(1, 5)], axis=1)
    counts = counts[:, counts.sum(axis=0) > 0]
    assert fleiss_kappa(matrix) == pytest.approx(sm_fleiss_kappa(counts), abs=1e-12)
    assert agreement_report(matrix, bootstrap=0).fleiss_kappa == pytest.approx(
        sm_fleiss_kappa(counts), abs=1e-9
    )


@pytest.mark.parametrize("weights", [None, "linear", "quadratic"])
def test_cohen_kappa_matches_scikit_learn(weights):
    rng = np.random.default_rng(11)
    first = rng.integers(0, 5, size=300)
    second = np.where(rng.random(300) < 0.6, first, rng.integers(0, 5, size=300))
    expected = cohen_kappa_score(first, second, weights=weights)
    assert cohen_kappa(first, second, weights=weights) == pytest.approx(expected, abs=1e-12)


def test_pairwise_cohen_matches_scikit_learn_on_shared_items():
    rng = np.random.default_rng(3)
    matrix = random_matrix(rng, 4, 200, 4, 0.3)
    report = agreement_report(matrix, level="ordinal", bootstrap=0, min_pair_items=10)
    assert len(report.pairwise_cohen) == 6
    categories = [1.0, 2.0, 3.0, 4.0]  # every value in the data, in order (as our ranks)
    for pair in report.pairwise_cohen:
        a, b = matrix[int(pair.first)], matrix[int(pair.second)]
        both = ~np.isnan(a) & ~np.isnan(b)
        assert pair.n_items == both.sum()
        for weights, ours in [
            (None, pair.kappa),
            ("linear", pair.kappa_linear),
            ("quadratic", pair.kappa_quadratic),
        ]:
            expected = cohen_kappa_score(a[both], b[both], weights=weights, labels=categories)
            assert ours == pytest.approx(expected, abs=1e-6)


def test_pairwise_cohen_without_dense_matrices_matches_scikit_learn(monkeypatch):
    # Vocabularies of tens of thousands of labels take the path that builds no V x V
    # confusion matrix; forced here with a tiny budget and checked against scikit-learn's
    # cohen_kappa_score (reference library), unweighted and weighted.
    from labelreview.agreement import _kappa

    monkeypatch.setattr(_kappa, "_DENSE_BUDGET", 1)
    rng = np.random.default_rng(5)
    matrix = random_matrix(rng, 4, 200, 6, 0.3)
    report = agreement_report(matrix, level="ordinal", bootstrap=0, min_pair_items=10)
    assert len(report.pairwise_cohen) == 6
    categories = sorted({float(x) for x in matrix[~np.isnan(matrix)]})
    for pair in report.pairwise_cohen:
        a, b = matrix[int(pair.first)], matrix[int(pair.second)]
        both = ~np.isnan(a) & ~np.isnan(b)
        for weights, ours in [
            (None, pair.kappa),
            ("linear", pair.kappa_linear),
            ("quadratic", pair.kappa_quadratic),
        ]:
            expected = cohen_kappa_score(a[both], b[both], weights=weights, labels=categories)
            assert ours == pytest.approx(expected, abs=1e-6)  # the report rounds to 6 places


def test_alpha_matches_nltk_nominal():
    rng = np.random.default_rng(8)
    matrix = random_matrix(rng, 5, 60, 3, 0.3)
    triples = [
        (f"c{a}", f"i{i}", str(int(matrix[a, i])))
        for a in range(5)
        for i in range(60)
        if not np.isnan(matrix[a, i])
    ]
    assert krippendorff_alpha(matrix) == pytest.approx(AnnotationTask(triples).alpha(), abs=1e-10)


def passonneau_masi(a: frozenset, b: frozenset) -> float:
    # Passonneau (2006): 1 - Jaccard * monotonicity, monotonicity 1 / 2/3 / 1/3 / 0.
    inter, union = len(a & b), len(a | b)
    if a == b:
        mono = 1.0
    elif a <= b or b <= a:
        mono = 2 / 3
    elif inter:
        mono = 1 / 3
    else:
        mono = 0.0
    return 1.0 - inter / union * mono


def multi_label_frame(seed: int, items: int = 60, annotators: int = 5) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    labels = ["boat", "net", "quay", "fog", "gull"]
    rows = []
    for i in range(items):
        core = set(rng.choice(labels, size=rng.integers(1, 3), replace=False))
        for a in range(annotators):
            if rng.random() < 0.25:
                continue
            chosen = set(core)
            if rng.random() < 0.4:
                chosen ^= {str(rng.choice(labels))}
            if not chosen:
                chosen = {labels[0]}
            rows.extend((f"i{i:03d}", f"a{a}", lab) for lab in sorted(chosen))
    return pd.DataFrame(rows, columns=["item", "annotator", "label"])


@pytest.mark.parametrize("seed", [1, 2])
def test_masi_alpha_matches_nltk(seed):
    frame = multi_label_frame(seed)
    sets = frame.groupby(["annotator", "item"])["label"].apply(frozenset)
    triples = [(a, i, s) for (a, i), s in sets.items()]
    # nltk rounds MASI's 2/3 and 1/3 to 0.67 and 0.33, so its alpha is run with Passonneau's
    # exact weights; nltk still does the alpha arithmetic.
    reference = AnnotationTask(triples, distance=passonneau_masi).alpha()
    report = agreement_report(frame, bootstrap=0)
    assert report.multi_label and report.distance == "masi"
    assert report.alpha == pytest.approx(reference, abs=1e-10)
    # And the per-label binary alphas against nltk on present/absent data.
    for entry in report.per_label:
        binary = [(a, i, entry.label in s) for a, i, s in triples]
        if entry.alpha is None:
            continue
        assert entry.alpha == pytest.approx(AnnotationTask(binary).alpha(), abs=1e-10)


def test_masi_distance_against_nltk_and_passonneau():
    cases = [
        ({"a"}, {"a"}),
        ({"a"}, {"a", "b"}),
        ({"a", "b"}, {"b", "c"}),
        ({"a"}, {"b"}),
        ({"a", "b", "c"}, {"a"}),
    ]
    for a, b in cases:
        ours = masi_distance(a, b)
        assert ours == pytest.approx(passonneau_masi(frozenset(a), frozenset(b)), abs=1e-12)
        # nltk's weights are 0.67 / 0.33: within 0.0034 of the exact ones (times Jaccard <= 1).
        assert ours == pytest.approx(nltk_masi(set(a), set(b)), abs=0.0034)


GWET = json.loads((DATA / "gwet_reference.json").read_text(encoding="utf-8"))


def gwet_raw_cases():
    for name, info in GWET["datasets"].items():
        results = info.get("results", {}).get("identity")
        if results is not None:
            yield pytest.param(name, results, id=name)


@pytest.mark.parametrize(("name", "results"), list(gwet_raw_cases()))
def test_gwet_ac1_and_alpha_match_irrcac(name, results):
    # Reference values computed by irrCAC 0.4.4 (Python port of Gwet's R package) in a scratch
    # environment; see tests/data/agreement/gwet_reference.json for versions and calls. Several
    # data sets are irrCAC's bundled examples from Gwet's Handbook of Inter-Rater Reliability.
    frame = pd.read_csv(DATA / name, dtype=str)
    gwet = results["gwet"]["full"]
    assert gwet_ac1(frame) == pytest.approx(gwet["coefficient_value"], abs=1e-9)
    assert percent_agreement(frame) == pytest.approx(gwet["pa"], abs=1e-9)
    alpha = results["krippendorff"]["full"]["coefficient_value"]
    assert krippendorff_alpha(frame) == pytest.approx(alpha, abs=1e-9)
    report = agreement_report(frame, bootstrap=0)
    assert report.gwet_ac1 == pytest.approx(gwet["coefficient_value"], abs=1e-9)
    sizes = frame.groupby("item").size()
    if sizes.min() == sizes.max():
        # irrCAC's Fleiss equals Fleiss (1971) when every subject has the same raters count.
        fleiss = results["fleiss"]["full"]["coefficient_value"]
        assert report.fleiss_kappa == pytest.approx(fleiss, abs=1e-9)
    else:
        assert report.fleiss_kappa is None and "between" in report.fleiss_kappa_reason


def test_gwet_reference_file_covers_the_handbook_examples():
    # Guards against the pinned file silently losing its data sets.
    assert len(list(gwet_raw_cases())) >= 8
    assert GWET["environment"]["irrCAC"]


def test_no_warning_from_reference_paths():
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        krippendorff_alpha(reliability_2011())
