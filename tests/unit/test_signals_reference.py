"""The data signals' statistics checked against sources outside the project.

References:

- scipy: ``scipy.stats.chi2_contingency`` (Pearson's chi-square test of independence,
  ``correction=False``), ``scipy.stats.contingency.association`` (Cramér's V),
  ``scipy.stats.binomtest`` (exact binomial test, one-sided values).
- statsmodels: ``statsmodels.stats.multitest.multipletests(method="fdr_bh")``
  (Benjamini-Hochberg adjusted p-values).
- scikit-learn: ``sklearn.metrics.mutual_info_score`` and ``normalized_mutual_info_score``
  (arithmetic normalisation, its default).
- The four-fifths rule's worked example: selection rates of 30% and 50% give an impact ratio of
  0.3 / 0.5 = 0.6, below 0.8. Recalled from memory of the questions and answers that accompany
  the US Uniform Guidelines on Employee Selection Procedures (29 CFR 1607.4(D)); not checked
  against the text here.

The data in these tests are small invented tables; the values they are compared with come from
the libraries above, computed in the test.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy.stats import binomtest, chi2_contingency
from scipy.stats.contingency import association
from sklearn.metrics import mutual_info_score, normalized_mutual_info_score
from statsmodels.stats.multitest import multipletests

from labelreview.config import SignalsConfig
from labelreview.signals import (
    benjamini_hochberg,
    binomial_two_sided,
    chi_square,
    code_judgements,
    cramers_v,
    group_disparity,
    mutual_information,
    normalised_mutual_information,
    proxy_columns,
    rate_ratio,
)

TABLES = [
    np.array([[10, 20], [30, 40]]),
    np.array([[12, 5, 9], [3, 14, 8]]),
    np.array([[30, 50], [70, 50]]),
    np.array([[5, 7, 9, 11], [20, 18, 16, 14], [1, 2, 30, 4]]),
    np.array([[2.5, 7.25], [4.0, 1.5]]),  # fractional counts, as the disparity check makes
]


@pytest.mark.parametrize("table", TABLES, ids=range(len(TABLES)))
def test_chi_square_matches_scipy_chi2_contingency(table):
    ours = chi_square(table)
    ref = chi2_contingency(table, correction=False)
    assert float(ours.statistic) == pytest.approx(ref.statistic, rel=1e-12)
    assert float(ours.pvalue) == pytest.approx(ref.pvalue, rel=1e-10)
    assert ours.dof == ref.dof
    np.testing.assert_allclose(ours.expected, ref.expected_freq, rtol=1e-12)
    assert float(ours.min_expected) == pytest.approx(ref.expected_freq.min())


def test_chi_square_of_a_stack_equals_each_table_alone():
    rng = np.random.default_rng(3)
    stack = rng.integers(1, 60, size=(25, 2, 5)).astype(float)
    together = chi_square(stack)
    for i, table in enumerate(stack):
        ref = chi2_contingency(table, correction=False)
        assert together.statistic[i] == pytest.approx(ref.statistic, rel=1e-12)
        assert together.pvalue[i] == pytest.approx(ref.pvalue, rel=1e-10)


def test_chi_square_zero_margin_is_nan_not_an_error():
    result = chi_square(np.array([[0, 0], [3, 4]]))
    assert np.isnan(result.statistic) and np.isnan(result.pvalue)
    with pytest.raises(ValueError):  # scipy refuses the same table
        chi2_contingency(np.array([[0, 0], [3, 4]]), correction=False)


@pytest.mark.parametrize("table", TABLES[:4], ids=range(4))
def test_cramers_v_matches_scipy_association(table):
    chi = chi_square(table)
    ours = float(cramers_v(chi.statistic, chi.n, *table.shape))
    assert ours == pytest.approx(association(table, method="cramer"), rel=1e-12)


def test_benjamini_hochberg_matches_statsmodels():
    rng = np.random.default_rng(11)
    for size in (1, 2, 7, 50, 400):
        p = rng.uniform(0, 1, size) ** 3
        p[: size // 5] = p[0]  # ties
        ref = multipletests(p, alpha=0.05, method="fdr_bh")[1]
        np.testing.assert_allclose(benjamini_hochberg(p), ref, rtol=1e-12)


def test_benjamini_hochberg_leaves_nan_out_of_the_count():
    p = np.array([0.01, np.nan, 0.04, 0.03, np.nan])
    ours = benjamini_hochberg(p)
    ref = multipletests(p[~np.isnan(p)], method="fdr_bh")[1]
    assert np.isnan(ours[1]) and np.isnan(ours[4])
    np.testing.assert_allclose(ours[~np.isnan(p)], ref)


@pytest.mark.parametrize(
    ("k", "n", "p"), [(0, 10, 0.5), (3, 10, 0.5), (9, 10, 0.3), (13, 287, 0.0017), (50, 600, 0.1)]
)
def test_binomial_two_sided_is_twice_scipys_smaller_one_sided_value(k, n, p):
    less = binomtest(k, n, p, alternative="less").pvalue
    greater = binomtest(k, n, p, alternative="greater").pvalue
    expected = min(1.0, 2 * min(less, greater))
    ours = float(binomial_two_sided(np.array(k), np.array(n), np.array(p)))
    assert ours == pytest.approx(expected, rel=1e-9)
    # scipy's own two-sided rule (summing outcomes no likelier than k) is close, not equal
    assert ours == pytest.approx(binomtest(k, n, p).pvalue, abs=0.02)


def test_binomial_against_a_zero_rate():
    # The others never gave the label: any use by this annotator is impossible under p = 0.
    assert float(binomial_two_sided(np.array(3), np.array(40), np.array(0.0))) == 0.0
    assert float(binomial_two_sided(np.array(0), np.array(40), np.array(0.0))) == 1.0


def test_mutual_information_matches_scikit_learn():
    rng = np.random.default_rng(5)
    a = rng.integers(0, 4, 500)
    b = (a + rng.integers(0, 3, 500)) % 6
    table = pd.crosstab(a, b).to_numpy()
    mi, _, _ = mutual_information(table)
    assert mi == pytest.approx(mutual_info_score(a, b), rel=1e-12)
    assert normalised_mutual_information(table) == pytest.approx(
        normalized_mutual_info_score(a, b), rel=1e-12
    )


def test_four_fifths_worked_example():
    # 30% and 50% selection rates: 0.3 / 0.5 = 0.6, below 0.8 (recalled from memory of the
    # Uniform Guidelines' questions and answers; see the module docstring).
    assert float(rate_ratio(np.array([0.30, 0.50]))) == pytest.approx(0.6)
    assert float(rate_ratio(np.array([0.30, 0.50]))) < 0.8


def _one_annotator_frame(groups: dict[str, tuple[int, int]]) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Items per group, (carrying 'tagged', not carrying it), one annotator each."""
    rows, items = [], []
    n = 0
    for group, (yes, no) in groups.items():
        for i in range(yes + no):
            n += 1
            item = f"i{n:04d}"
            items.append({"item": item, "band": group})
            rows.append(
                {"item": item, "annotator": "a1", "label": "tagged" if i < yes else "other"}
            )
    return pd.DataFrame(rows), pd.DataFrame(items)


def test_disparity_end_to_end_on_the_worked_example():
    # 100 people per group: 30 of A and 50 of B given the label (rates 30% and 50%).
    frame, items = _one_annotator_frame({"A": (30, 70), "B": (50, 50)})
    results, _, _ = group_disparity(code_judgements(frame), items, ["band"], SignalsConfig())
    found = next(r for r in results if r.label == "tagged")
    assert found.ratio == pytest.approx(0.6)
    assert (found.lowest, found.highest) == ("A", "B")
    table = np.array([[30, 50], [70, 50]])
    ref = chi2_contingency(table, correction=False)
    assert found.chi2 == pytest.approx(ref.statistic) and found.p == pytest.approx(ref.pvalue)
    assert found.cramers_v == pytest.approx(association(table, method="cramer"))
    assert found.flagged  # ratio 0.6 < 0.8 and p about 0.004


def test_disparity_weights_each_item_once():
    # Two annotators per item; an item where one of two gave the label counts as half.
    rows = []
    items = []
    plan = {"A": [2, 1, 1, 0, 0, 0], "B": [2, 2, 2, 1, 0, 0]}  # annotators giving 'tagged'
    n = 0
    for group, counts in plan.items():
        for _ in range(10):  # ten copies of the pattern per group
            for given in counts:
                n += 1
                item = f"i{n:04d}"
                items.append({"item": item, "band": group})
                for a in ("a1", "a2"):
                    label = "tagged" if (a == "a1" and given >= 1) or given == 2 else "other"
                    rows.append({"item": item, "annotator": a, "label": label})
    results, _, _ = group_disparity(
        code_judgements(pd.DataFrame(rows)), pd.DataFrame(items), ["band"], SignalsConfig()
    )
    found = next(r for r in results if r.label == "tagged")
    carried = {"A": 10 * (1 + 0.5 + 0.5), "B": 10 * (1 + 1 + 1 + 0.5)}
    table = np.array([[carried["A"], carried["B"]], [60 - carried["A"], 60 - carried["B"]]])
    ref = chi2_contingency(table, correction=False)
    assert found.rate("A") == pytest.approx(carried["A"] / 60)
    assert found.chi2 == pytest.approx(ref.statistic) and found.p == pytest.approx(ref.pvalue)


def test_disparity_q_values_are_benjamini_hochberg_over_every_test():
    rng = np.random.default_rng(8)
    rows, items = [], []
    for i in range(600):
        band = ["x", "y", "z"][i % 3]
        gender = ["g1", "g2"][i % 2]
        items.append({"item": f"i{i}", "band": band, "gender": gender})
        boost = 0.25 if band == "x" else 0.0
        for a in ("a1", "a2", "a3"):
            label = rng.choice(["l1", "l2", "l3", "l4"], p=[0.25 + boost, 0.25, 0.25, 0.25 - boost])
            rows.append({"item": f"i{i}", "annotator": a, "label": label})
    results, _, _ = group_disparity(
        code_judgements(pd.DataFrame(rows)),
        pd.DataFrame(items),
        ["band", "gender"],
        SignalsConfig(),
    )
    tested = [r for r in results if r.tested]
    assert len(tested) == 8
    ref = multipletests([r.p for r in tested], method="fdr_bh")[1]
    np.testing.assert_allclose([r.q for r in tested], ref, rtol=1e-12)


def test_proxy_figures_match_scikit_learn_and_scipy():
    rng = np.random.default_rng(2)
    band = rng.choice(["16-24", "25-44", "45-64"], 400)
    zone = np.where(rng.random(400) < 0.7, band, rng.choice(["n", "s", "e"], 400))
    items = pd.DataFrame({"item": [f"i{i}" for i in range(400)], "band": band})
    context = pd.DataFrame({"zone": zone, "noise": rng.choice(["p", "q"], 400)})
    found = {r.column: r for r in proxy_columns(items, context, ["band"], SignalsConfig())}
    assert found["zone"].nmi == pytest.approx(normalized_mutual_info_score(band, zone))
    table = pd.crosstab(zone, band).to_numpy()
    assert found["zone"].cramers_v == pytest.approx(association(table, method="cramer"))
    assert found["zone"].flagged and not found["noise"].flagged
