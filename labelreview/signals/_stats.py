"""The small statistics every data signal shares, each written once and vectorised.

- :func:`chi_square`: Pearson's chi-square test of independence for one table or a stack of
  tables of the same shape (thousands of labels at once), with the expected counts.
- :func:`cramers_v`: Cramér's V from a chi-square statistic.
- :func:`benjamini_hochberg`: step-up adjusted p-values (q-values) controlling the false
  discovery rate.
- :func:`binomial_two_sided`: exact binomial test, two-sided by doubling the smaller tail.
- :func:`mutual_information`: mutual information and both entropies of a contingency table, and
  :func:`normalised_mutual_information` (arithmetic mean of the entropies).
- :func:`rate_ratio`: lowest rate over highest rate (the four-fifths comparison).

Tests check each against scipy, statsmodels and scikit-learn (tests/unit/test_signals_reference.py).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class ChiSquare:
    """Pearson's chi-square test of independence, for one table or a stack of tables.

    Arrays have the stack's shape (a scalar array for a single table). Tables with a zero row or
    column total have no expected counts there: their statistic and p-value are NaN.
    """

    statistic: np.ndarray
    dof: int
    pvalue: np.ndarray
    expected: np.ndarray
    """Expected counts under independence: row total x column total / grand total."""
    min_expected: np.ndarray
    """The smallest expected count of each table."""
    n: np.ndarray
    """Each table's grand total."""


def chi_square(observed: np.ndarray) -> ChiSquare:
    """Pearson's chi-square test of independence, without continuity correction.

    X^2 = sum over cells of (O - E)^2 / E with E = row total x column total / n, referred to
    the chi-square distribution with (r - 1)(c - 1) degrees of freedom. Counts may be
    fractional (weighted). This is ``scipy.stats.chi2_contingency(table, correction=False)``
    computed for a whole stack of tables at once.

    Args:
        observed: Shape (..., r, c) with r, c >= 2; non-negative.

    Returns:
        A :class:`ChiSquare`.

    >>> result = chi_square(np.array([[10, 20], [30, 40]]))
    >>> round(float(result.statistic), 4), result.dof
    (0.7937, 1)
    """
    obs = np.asarray(observed, dtype=float)
    if obs.ndim < 2 or obs.shape[-1] < 2 or obs.shape[-2] < 2:
        raise ValueError("a contingency table needs at least two rows and two columns")
    rows = obs.sum(axis=-1, keepdims=True)
    cols = obs.sum(axis=-2, keepdims=True)
    n = obs.sum(axis=(-2, -1), keepdims=True)
    with np.errstate(divide="ignore", invalid="ignore"):
        expected = rows * cols / n
        cells = (obs - expected) ** 2 / expected
        statistic = cells.sum(axis=(-2, -1))
    r, c = obs.shape[-2:]
    dof = (r - 1) * (c - 1)
    min_expected = expected.min(axis=(-2, -1))
    statistic = np.where(min_expected > 0, statistic, np.nan)
    from scipy import stats  # imported here: scipy.stats costs about 0.5 s to import

    pvalue = stats.chi2.sf(statistic, dof)
    return ChiSquare(
        statistic=statistic,
        dof=dof,
        pvalue=pvalue,
        expected=expected,
        min_expected=min_expected,
        n=n[..., 0, 0],
    )


def cramers_v(statistic: np.ndarray | float, n: np.ndarray | float, r: int, c: int) -> np.ndarray:
    """Cramér's V = sqrt(X^2 / (n (min(r, c) - 1))), between 0 (independent) and 1.

    Without bias correction, as ``scipy.stats.contingency.association(method="cramer")``. For a
    2 x c table it equals the phi coefficient.

    >>> round(float(cramers_v(0.7937, 100, 2, 2)), 4)
    0.0891
    """
    k = min(r, c) - 1
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.sqrt(np.asarray(statistic, dtype=float) / (np.asarray(n, dtype=float) * k))


def benjamini_hochberg(pvalues: np.ndarray) -> np.ndarray:
    """Benjamini-Hochberg adjusted p-values (q-values); NaN entries stay NaN and are not counted.

    q_(i) = min over j >= i of p_(j) m / j, capped at 1, for the m defined p-values sorted
    ascending (Benjamini & Hochberg 1995, J. R. Statist. Soc. B 57, 289-300). Rejecting every
    hypothesis with q <= alpha controls the false discovery rate at alpha. Same values as
    ``statsmodels.stats.multitest.multipletests(p, method="fdr_bh")[1]``.

    >>> benjamini_hochberg(np.array([0.01, 0.04, 0.03, 0.5])).round(4).tolist()
    [0.04, 0.0533, 0.0533, 0.5]
    """
    p = np.asarray(pvalues, dtype=float)
    out = np.full(p.shape, np.nan)
    ok = np.isfinite(p)
    values = p[ok]
    m = values.size
    if m == 0:
        return out
    order = np.argsort(values, kind="stable")
    scaled = values[order] * m / np.arange(1, m + 1)
    scaled = np.minimum.accumulate(scaled[::-1])[::-1]
    adjusted = np.empty(m)
    adjusted[order] = np.minimum(scaled, 1.0)
    out[ok] = adjusted
    return out


def binomial_two_sided(k: np.ndarray, n: np.ndarray, p: np.ndarray) -> np.ndarray:
    """Exact binomial test of k successes in n trials against rate p, two-sided by doubling.

    The p-value is min(1, 2 min(P(X <= k), P(X >= k))) for X ~ Binomial(n, p): twice the
    smaller one-sided exact p-value (the "doubling" two-sided rule). Each one-sided value equals
    ``scipy.stats.binomtest(k, n, p, alternative="less" / "greater").pvalue``; scipy's own
    two-sided rule sums the outcomes no likelier than k instead, which differs a little either
    way on skewed distributions.

    >>> float(binomial_two_sided(np.array(0), np.array(10), np.array(0.5)).round(6))
    0.001953
    """
    k = np.asarray(k, dtype=float)
    n = np.asarray(n, dtype=float)
    p = np.clip(np.asarray(p, dtype=float), 0.0, 1.0)
    from scipy import stats  # imported here: scipy.stats costs about 0.5 s to import

    lower = stats.binom.cdf(k, n, p)
    upper = stats.binom.sf(k - 1, n, p)
    return np.minimum(1.0, 2.0 * np.minimum(lower, upper))


def mutual_information(table: np.ndarray) -> tuple[float, float, float]:
    """Mutual information of a contingency table and the entropies of its margins (nats).

    I(X; Y) = sum p_xy log(p_xy / (p_x p_y)); H(X) = -sum p_x log p_x. The natural log, as
    ``sklearn.metrics.mutual_info_score``.

    Returns:
        (I, H(rows), H(columns)).
    """
    counts = np.asarray(table, dtype=float)
    n = counts.sum()
    if n <= 0:
        return 0.0, 0.0, 0.0
    joint = counts / n
    px = joint.sum(axis=1)
    py = joint.sum(axis=0)
    nz = joint > 0
    outer = np.outer(px, py)
    mi = float(np.sum(joint[nz] * np.log(joint[nz] / outer[nz])))
    hx = float(-np.sum(px[px > 0] * np.log(px[px > 0])))
    hy = float(-np.sum(py[py > 0] * np.log(py[py > 0])))
    return max(mi, 0.0), hx, hy


def normalised_mutual_information(table: np.ndarray) -> float:
    """I(X; Y) / ((H(X) + H(Y)) / 2), between 0 (independent) and 1 (each determines the other).

    The arithmetic-mean normalisation, ``sklearn.metrics.normalized_mutual_info_score``'s
    default. Both margins constant: 1.0 (as scikit-learn); one constant: 0.0.

    >>> normalised_mutual_information(np.array([[5, 0], [0, 5]]))
    1.0
    """
    mi, hx, hy = mutual_information(table)
    if hx == 0.0 and hy == 0.0:
        return 1.0
    mean = (hx + hy) / 2.0
    return float(min(1.0, mi / mean)) if mean > 0 else 0.0


def rate_ratio(rates: np.ndarray, axis: int = -1) -> np.ndarray:
    """Lowest rate over highest rate along ``axis``; NaN when the highest is 0.

    The comparison of the four-fifths rule of thumb (US Uniform Guidelines on Employee Selection
    Procedures, 29 CFR 1607.4(D)): a ratio below 0.8 marks a difference worth a look.

    >>> float(rate_ratio(np.array([0.30, 0.50])))
    0.6
    """
    r = np.asarray(rates, dtype=float)
    high = r.max(axis=axis)
    low = r.min(axis=axis)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(high > 0, low / high, np.nan)


def format_p(value: float | None) -> str:
    """A p- or q-value for people: ``< 0.001`` or three decimals."""
    if value is None or not np.isfinite(value):
        return "-"
    return "< 0.001" if value < 0.001 else f"{value:.3f}"
