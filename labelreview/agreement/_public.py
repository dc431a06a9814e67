"""The single statistics, one call each, for notebooks and for the rest of labelreview."""

from __future__ import annotations

import math
import warnings
from collections.abc import Collection, Sequence
from typing import Any

import numpy as np
import pandas as pd

from labelreview.agreement._alpha import (
    alpha_from_coincidences,
    coincidences,
    label_alphas,
    masi_from_counts,
    metric_factory,
    pairable_marginals,
    value_groups,
)
from labelreview.agreement._coding import code_annotations
from labelreview.agreement._kappa import WEIGHTS, kappa_from_confusion
from labelreview.agreement._report import fleiss_from_sums, gwet_from_sums, percent_from_sums
from labelreview.agreement._sums import AgreementSums
from labelreview.errors import UsageError


class UndefinedAgreementWarning(UserWarning):
    """A statistic is undefined for this data (after scikit-learn's UndefinedMetricWarning).

    The function returns ``replace_undefined_by`` (None unless the caller chose a value); the
    warning's message says why.
    """


def _undefined(name: str, reason: str | None, replacement: float | None) -> float | None:
    warnings.warn(f"{name} is undefined: {reason}", UndefinedAgreementWarning, stacklevel=3)
    return replacement


def krippendorff_alpha(
    data: Any, *, level: str = "nominal", replace_undefined_by: float | None = None
) -> float | None:
    """Krippendorff's alpha by the coincidence-matrix method (Krippendorff 2011).

    alpha = 1 - D_o / D_e = 1 - (n - 1) * sum_ck o_ck delta^2_ck / sum_ck n_c n_k delta^2_ck,
    with o_ck the coincidences within items (n_uc n_uk / (m_u - 1) summed over items with
    m_u >= 2 values), n_c their totals and n all pairable values. delta^2 is the level's
    difference: nominal 0/1; ordinal (sum of n_g from c to k minus (n_c + n_k) / 2)^2;
    interval (c - k)^2; ratio ((c - k) / (c + k))^2. Multi-label data (several labels from one
    annotator for one item) compares label sets with the MASI distance (Passonneau 2006).

    Range: 1 is perfect agreement, 0 is agreement at chance level, below 0 systematic
    disagreement. Items with a single value are unpairable and ignored.

    Undefined when no item has two values, or when every pairable value is the same (D_e = 0):
    then warns :class:`UndefinedAgreementWarning` and returns ``replace_undefined_by``.

    Reference: K. Krippendorff (2011), "Computing Krippendorff's Alpha-Reliability",
    University of Pennsylvania, Annenberg School for Communication, Departmental Papers 43.

    Args:
        data: The long frame (item, annotator, label) or a reliability matrix (annotators x
            items; None or NaN where an annotator gave no value).
        level: ``nominal``, ``ordinal``, ``interval`` or ``ratio``.
        replace_undefined_by: Returned (with a warning) when alpha is undefined.

    Returns:
        alpha, or ``replace_undefined_by``.

    Raises:
        UsageError: Unknown level, or labels that are not numbers at a numeric level.

    Example:
        >>> round(krippendorff_alpha([[1, 2, 3, 3, 2], [1, 2, 3, 3, 1]]), 3)
        0.727
        >>> round(krippendorff_alpha([[1, 2, 3, 3, 2], [1, 2, 3, 3, 1]], level="interval"), 3)
        0.87
    """
    coded = code_annotations(data, level)
    if not coded.multi and level == "nominal":
        fast = label_alphas(coded).overall_nominal
        if fast is not None:
            return fast
    groups = value_groups(coded.unit, coded.value, coded.n_values, coded.n_units)
    factory = metric_factory(coded, level)
    matrix, _ = coincidences(groups, coded.n_values)
    parts = alpha_from_coincidences(matrix, factory, coded.value_names)
    if parts.alpha is None:
        return _undefined("Krippendorff's alpha", parts.reason, replace_undefined_by)
    return parts.alpha


def percent_agreement(data: Any, *, replace_undefined_by: float | None = None) -> float | None:
    """Observed agreement: the mean, over items with two or more values, of agreeing pairs.

    p_a = (1 / n') sum_u sum_c n_uc (n_uc - 1) / (m_u (m_u - 1)), over the n' items with
    m_u >= 2 values; for two annotators it is the share of items where they gave the same
    value. Multi-label data compares whole label sets. Range 0 to 1, not corrected for chance.

    Undefined when no item has two values. Reference: the observed agreement p_a of Fleiss
    (1971) and of Gwet (2014), Handbook of Inter-Rater Reliability, 4th ed., chapter 2.

    Args:
        data: The long frame or a reliability matrix.
        replace_undefined_by: Returned (with a warning) when undefined.

    Returns:
        The share, or ``replace_undefined_by``.

    Example:
        >>> percent_agreement([["a", "a", "b"], ["a", "b", "b"]])
        0.6666666666666666
    """
    value = percent_from_sums(_kappa_sums(data))
    if value is None:
        return _undefined(
            "percent agreement", "no item has two or more values", replace_undefined_by
        )
    return value


def gwet_ac1(data: Any, *, replace_undefined_by: float | None = None) -> float | None:
    """Gwet's first-order agreement coefficient AC1 for two or more raters, missing allowed.

    AC1 = (p_a - p_e) / (1 - p_e), p_a as in :func:`percent_agreement`,
    p_e = (1 / (q - 1)) sum_c pi_c (1 - pi_c), pi_c = mean over rated items of n_uc / m_u,
    q the number of categories that occur. Range -1 to 1; less affected than kappa by skewed
    category prevalence.

    Undefined with no item rated twice, with a single category (q - 1 = 0), or with
    multi-label data. Reference: K. L. Gwet (2008), "Computing inter-rater reliability and its
    variance in the presence of high agreement", British Journal of Mathematical and
    Statistical Psychology 61, 29-48.

    Args:
        data: The long frame or a reliability matrix.
        replace_undefined_by: Returned (with a warning) when undefined.

    Returns:
        AC1, or ``replace_undefined_by``.

    Example:
        >>> round(gwet_ac1([["a", "a", "b", "a"], ["a", "b", "b", "a"]]), 3)
        0.529
    """
    sums = _kappa_sums(data)
    if sums.multi:
        reason = "multi-label data: AC1 needs one category per annotator and item"
        return _undefined("Gwet's AC1", reason, replace_undefined_by)
    value, reason = gwet_from_sums(sums)
    if value is None:
        return _undefined("Gwet's AC1", reason, replace_undefined_by)
    return value


def fleiss_kappa(data: Any, *, replace_undefined_by: float | None = None) -> float | None:
    """Fleiss' kappa for a fixed number of raters per item (Fleiss 1971).

    kappa = (P - P_e) / (1 - P_e), P the mean over items of
    (sum_j n_ij^2 - m) / (m (m - 1)) with m ratings per item, P_e = sum_j p_j^2 and p_j the
    share of all ratings in category j. Range: 1 perfect, 0 chance, below 0 worse than chance.

    Undefined when items have different numbers of ratings, when m < 2, when only one
    category occurs, or for multi-label data. Reference: J. L. Fleiss (1971), "Measuring
    nominal scale agreement among many raters", Psychological Bulletin 76(5), 378-382.

    Args:
        data: The long frame or a reliability matrix.
        replace_undefined_by: Returned (with a warning) when undefined.

    Returns:
        kappa, or ``replace_undefined_by``.

    Example:
        >>> matrix = [["a", "a", "b", "c"], ["a", "b", "b", "c"], ["a", "a", "b", "c"]]
        >>> round(fleiss_kappa(matrix), 3)
        0.745
    """
    sums = _kappa_sums(data)
    if sums.multi:
        reason = "multi-label data: Fleiss' kappa needs one category per annotator and item"
        return _undefined("Fleiss' kappa", reason, replace_undefined_by)
    value, reason = fleiss_from_sums(sums)
    if value is None:
        return _undefined("Fleiss' kappa", reason, replace_undefined_by)
    return value


def _kappa_sums(data: Any) -> AgreementSums:
    """The sums behind percent agreement, AC1 and Fleiss' kappa (as the report computes them)."""
    return AgreementSums.from_coded(code_annotations(data, "nominal"), "nominal", {"kappas"})


def _ordered_labels(values: Sequence[Any]) -> list[Any]:
    uniq = list(dict.fromkeys(values))
    try:
        return sorted(uniq)
    except TypeError:
        return sorted(uniq, key=str)


def cohen_kappa(
    first: Sequence[Any],
    second: Sequence[Any],
    *,
    weights: str | None = None,
    labels: Sequence[Any] | None = None,
    replace_undefined_by: float | None = None,
) -> float | None:
    """Cohen's kappa for two annotators' values on the same items (Cohen 1960, 1968).

    kappa = 1 - sum w_ij o_ij / sum w_ij e_ij over the confusion matrix o and its chance
    expectation e_ij = row_i col_j / n; w = 1 - identity (unweighted), |i - j| (linear) or
    (i - j)^2 (quadratic) on the positions of ``labels``, as scikit-learn's
    ``cohen_kappa_score`` does. Items where either value is missing are left out.
    Range: 1 perfect, 0 chance, below 0 worse than chance.

    Undefined when there is no chance disagreement (both annotators always give one and the
    same value). References: J. Cohen (1960), Educational and Psychological Measurement 20,
    37-46; weighted: J. Cohen (1968), Psychological Bulletin 70(4), 213-220.

    Args:
        first: The first annotator's values.
        second: The second annotator's values, same length and item order.
        weights: None, ``"linear"`` or ``"quadratic"``.
        labels: The categories in order (default: the values seen, sorted).
        replace_undefined_by: Returned (with a warning) when undefined.

    Returns:
        kappa, or ``replace_undefined_by``.

    Raises:
        UsageError: Different lengths, a bad ``weights``, or a value missing from ``labels``.

    Example:
        >>> round(cohen_kappa(["a", "a", "b", "b"], ["a", "b", "b", "b"]), 3)
        0.5
    """
    if weights not in WEIGHTS:
        raise UsageError(f"weights must be None, 'linear' or 'quadratic'; got {weights!r}")
    a, b = list(first), list(second)
    if len(a) != len(b):
        raise UsageError(f"the two annotators' values differ in length ({len(a)} and {len(b)})")
    keep = [not (pd.isna(x) or pd.isna(y)) for x, y in zip(a, b, strict=True)]
    a = [x for x, k in zip(a, keep, strict=True) if k]
    b = [y for y, k in zip(b, keep, strict=True) if k]
    order = list(labels) if labels is not None else _ordered_labels(a + b)
    position = {v: i for i, v in enumerate(order)}
    unknown = [v for v in a + b if v not in position]
    if unknown:
        raise UsageError(f"the value {unknown[0]!r} is not among the labels given")
    v = len(order)
    confusion = np.zeros((v, v))
    if a:
        np.add.at(confusion, ([position[x] for x in a], [position[y] for y in b]), 1.0)
    value = float(kappa_from_confusion(confusion, weights))
    if not math.isfinite(value):
        reason = "there is no chance disagreement (one value throughout)"
        return _undefined("Cohen's kappa", reason, replace_undefined_by)
    return value


def masi_distance(first: Collection[Any], second: Collection[Any]) -> float:
    """MASI distance between two label sets (Passonneau 2006).

    d = 1 - J * M, with J = |A & B| / |A | B| (Jaccard) and M the monotonicity weight: 1 if the
    sets are equal, 2/3 if one contains the other, 1/3 if they overlap otherwise, 0 if they are
    disjoint. Range 0 (same set) to 1 (disjoint). Two empty sets are at distance 0.

    Reference: R. Passonneau (2006), "Measuring agreement on set-valued items (MASI) for
    semantic and pragmatic annotation", Proceedings of LREC 2006. (nltk's ``masi_distance``
    rounds 2/3 and 1/3 to 0.67 and 0.33.)

    Args:
        first: One annotator's labels for an item.
        second: Another annotator's labels for the same item.

    Returns:
        The distance.

    Example:
        >>> masi_distance({"boat", "harbour"}, {"boat", "harbour"})
        0.0
        >>> round(masi_distance({"boat"}, {"boat", "harbour"}), 4)
        0.6667
    """
    a, b = set(first), set(second)
    value = masi_from_counts(np.array(len(a & b)), np.array(len(a)), np.array(len(b)))
    return float(value)


def pairable_counts(data: Any) -> dict[str, int]:
    """How many items, pairable items and pairable values the data has (for messages)."""
    coded = code_annotations(data, "nominal")
    groups = value_groups(coded.unit, coded.value, coded.n_values, coded.n_units)
    marg = pairable_marginals(groups, coded.n_values)
    return {
        "n_items": coded.n_units,
        "n_pairable": int((groups.m >= 2).sum()),
        "n_values": int(marg.sum()),
    }
