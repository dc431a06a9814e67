"""The agreement report: every figure for one annotation frame, with interpretation words.

:func:`agreement_report` is the one call the CLI, the data-signals queue, ``compare`` and the
export make; the result's :meth:`AgreementResult.to_dict` is the JSON they write. Undefined
figures are None with a reason string, never NaN.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from labelreview.agreement._alpha import (
    AlphaParts,
    alpha_from_coincidences,
    bootstrap_alpha,
    coincidences,
    label_alphas,
    leave_one_out,
    metric_factory,
    pairable_marginals,
    value_groups,
)
from labelreview.agreement._coding import Coded, code_annotations
from labelreview.agreement._kappa import (
    fleiss_from_groups,
    gwet_from_groups,
    majority_agreement,
    pairwise_cohen,
    percent_from_groups,
)
from labelreview.errors import UsageError

CAUTIONS: tuple[str, ...] = (
    "Agreement figures describe how consistently people applied the labels, not whether the "
    "labels are fair; low agreement marks labels for a human look.",
    "Demographic attributes are used only where people gave them with consent; labelreview "
    "never infers them. Local law, data-protection rules and your ethics review come first.",
)

LANDIS_KOCH: tuple[tuple[float, str], ...] = (
    (0.0, "poor"),
    (0.20, "slight"),
    (0.40, "fair"),
    (0.60, "moderate"),
    (0.80, "substantial"),
    (1.0, "almost perfect"),
)
"""Landis & Koch (1977) bands: below 0 poor, up to 0.20 slight, 0.21-0.40 fair, 0.41-0.60
moderate, 0.61-0.80 substantial, 0.81-1.00 almost perfect."""


@dataclass(frozen=True)
class AgreementThresholds:
    """Where alpha reads as reliable or tentative (Krippendorff 2004, section 12.4)."""

    reliable: float = 0.800
    """alpha at or above this: reliable."""
    tentative: float = 0.667
    """alpha at or above this (and below ``reliable``): tentative conclusions only."""

    def __post_init__(self) -> None:
        for name in ("reliable", "tentative"):
            value = getattr(self, name)
            if isinstance(value, bool) or not isinstance(value, (int, float)):
                raise UsageError(f"the '{name}' threshold must be a number; got {value!r}")
            if not -1.0 <= float(value) <= 1.0:
                raise UsageError(f"the '{name}' threshold must be between -1 and 1; got {value}")
        if self.tentative > self.reliable:
            raise UsageError(
                f"the 'tentative' threshold ({self.tentative}) must not be above 'reliable' "
                f"({self.reliable})"
            )


def interpret_alpha(alpha: float | None, thresholds: AgreementThresholds | None = None) -> str:
    """'reliable', 'tentative', 'unreliable' (Krippendorff 2004), or 'undefined'."""
    t = thresholds or AgreementThresholds()
    if alpha is None or not math.isfinite(alpha):
        return "undefined"
    if alpha >= t.reliable:
        return "reliable"
    if alpha >= t.tentative:
        return "tentative"
    return "unreliable"


def interpret_kappa(kappa: float | None) -> str:
    """The Landis & Koch (1977) band for a kappa-type coefficient, or 'undefined'."""
    if kappa is None or not math.isfinite(kappa):
        return "undefined"
    if kappa < 0:
        return LANDIS_KOCH[0][1]
    for upper, word in LANDIS_KOCH[1:]:
        if kappa <= upper + 1e-12:
            return word
    return LANDIS_KOCH[-1][1]


def _num(value: float | None, digits: int = 6) -> float | None:
    if value is None:
        return None
    value = float(value)
    return round(value, digits) if math.isfinite(value) else None


@dataclass(frozen=True)
class LabelAgreement:
    """One label as binary (given / not given) nominal data: the contested-label signal."""

    label: str
    alpha: float | None
    reason: str | None
    """Why ``alpha`` is None."""
    n_items: int
    """Items with two or more annotations where at least one annotator gave the label."""
    n_annotations: int
    """Comparable annotations carrying the label."""
    prevalence: float
    """Share of comparable annotations (item x annotator judgements) carrying the label."""
    interpretation: str

    def to_dict(self) -> dict[str, Any]:
        return {
            "label": self.label,
            "alpha": _num(self.alpha),
            "alpha_reason": self.reason,
            "n_items": self.n_items,
            "n_annotations": self.n_annotations,
            "prevalence": _num(self.prevalence),
            "interpretation": self.interpretation,
        }


@dataclass(frozen=True)
class AnnotatorAgreement:
    """One annotator: alpha without them, and their agreement with the others' majority."""

    annotator: str
    n_items: int
    """Items this annotator judged."""
    alpha_without: float | None
    change: float | None
    """alpha without them minus alpha with everyone: positive means they pull agreement down."""
    reason: str | None
    majority_agreement: float | None
    """Share of counted items where their value is the one most other annotators gave."""
    majority_items: int
    """Items counted for ``majority_agreement`` (ties with the others' top value left out)."""

    def to_dict(self) -> dict[str, Any]:
        return {
            "annotator": self.annotator,
            "n_items": self.n_items,
            "alpha_without": _num(self.alpha_without),
            "change": _num(self.change),
            "alpha_without_reason": self.reason,
            "majority_agreement": _num(self.majority_agreement),
            "majority_items": self.majority_items,
        }


@dataclass(frozen=True)
class PairAgreement:
    """Cohen's kappa for one pair of annotators over the items both judged."""

    first: str
    second: str
    n_items: int
    agreement: float
    """Observed share of shared items where they gave the same value."""
    kappa: float | None
    kappa_linear: float | None = None
    """Linearly weighted kappa (ordinal and numeric levels only)."""
    kappa_quadratic: float | None = None
    """Quadratically weighted kappa (ordinal and numeric levels only)."""

    def to_dict(self) -> dict[str, Any]:
        return {
            "annotators": [self.first, self.second],
            "n_items": self.n_items,
            "agreement": _num(self.agreement),
            "kappa": _num(self.kappa),
            "kappa_linear": _num(self.kappa_linear),
            "kappa_quadratic": _num(self.kappa_quadratic),
            "interpretation": interpret_kappa(self.kappa),
        }


@dataclass(frozen=True)
class LabelSplit:
    """Two values annotators split between on the same item (an off-diagonal coincidence)."""

    first: str
    second: str
    coincidences: float
    """o_ck: for two annotators per item, the number of items split between the two values."""
    share: float
    """Share of all disagreeing coincidences."""

    def to_dict(self) -> dict[str, Any]:
        return {
            "labels": [self.first, self.second],
            "coincidences": _num(self.coincidences),
            "share": _num(self.share),
        }


@dataclass(frozen=True)
class AgreementResult:
    """Every agreement figure for one annotation frame; see :func:`agreement_report`."""

    level: str
    distance: str
    """The difference function: nominal, ordinal, interval, ratio, or masi (multi-label)."""
    alpha: float | None
    alpha_reason: str | None
    interpretation: str
    observed_disagreement: float | None
    expected_disagreement: float | None
    ci: tuple[float, float] | None
    ci_reason: str | None
    confidence: float
    bootstrap_draws: int
    bootstrap_used: int
    seed: int
    p_below_reliable: float | None
    """Share of bootstrap draws below the reliable threshold."""
    p_below_tentative: float | None
    n_items: int
    n_pairable: int
    n_annotators: int
    n_labels: int
    n_values: int
    """Comparable (pairable) values: item x annotator judgements in items with two or more."""
    multi_label: bool
    percent_agreement: float | None
    gwet_ac1: float | None
    gwet_ac1_reason: str | None
    fleiss_kappa: float | None
    fleiss_kappa_reason: str | None
    per_label: tuple[LabelAgreement, ...]
    per_annotator: tuple[AnnotatorAgreement, ...]
    pairwise_cohen: tuple[PairAgreement, ...]
    pairwise_cohen_skipped: int
    pairwise_cohen_reason: str | None
    split_pairs: tuple[LabelSplit, ...]
    thresholds: AgreementThresholds = field(default_factory=AgreementThresholds)
    min_items: int = 10
    min_pair_items: int = 10
    notes: tuple[str, ...] = ()

    @property
    def n_unpairable(self) -> int:
        """Items with a single annotation: they cannot be compared and are left out."""
        return self.n_items - self.n_pairable

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready: numbers, strings, lists; undefined figures are None with a reason."""
        return {
            "alpha": _num(self.alpha),
            "alpha_reason": self.alpha_reason,
            "level": self.level,
            "distance": self.distance,
            "interpretation": self.interpretation,
            "observed_disagreement": _num(self.observed_disagreement),
            "expected_disagreement": _num(self.expected_disagreement),
            "ci": [_num(self.ci[0]), _num(self.ci[1])] if self.ci is not None else None,
            "ci_reason": self.ci_reason,
            "ci_confidence": self.confidence,
            "bootstrap": {
                "draws": self.bootstrap_draws,
                "used": self.bootstrap_used,
                "seed": self.seed,
                "resamples": "items with two or more annotations",
                "p_below_reliable": _num(self.p_below_reliable),
                "p_below_tentative": _num(self.p_below_tentative),
            },
            "n_items": self.n_items,
            "n_pairable": self.n_pairable,
            "n_unpairable": self.n_unpairable,
            "n_values": self.n_values,
            "n_annotators": self.n_annotators,
            "n_labels": self.n_labels,
            "multi_label": self.multi_label,
            "percent_agreement": _num(self.percent_agreement),
            "gwet_ac1": _num(self.gwet_ac1),
            "gwet_ac1_reason": self.gwet_ac1_reason,
            "gwet_ac1_interpretation": interpret_kappa(self.gwet_ac1),
            "fleiss_kappa": _num(self.fleiss_kappa),
            "fleiss_kappa_reason": self.fleiss_kappa_reason,
            "fleiss_kappa_interpretation": interpret_kappa(self.fleiss_kappa),
            "per_label": [x.to_dict() for x in self.per_label],
            "per_annotator": [x.to_dict() for x in self.per_annotator],
            "pairwise_cohen": [x.to_dict() for x in self.pairwise_cohen],
            "pairwise_cohen_skipped": self.pairwise_cohen_skipped,
            "pairwise_cohen_reason": self.pairwise_cohen_reason,
            "split_pairs": [x.to_dict() for x in self.split_pairs],
            "thresholds": {
                "reliable": self.thresholds.reliable,
                "tentative": self.thresholds.tentative,
                "source_alpha": "Krippendorff (2004)",
                "source_kappa": "Landis & Koch (1977)",
                "min_items": self.min_items,
                "min_pair_items": self.min_pair_items,
            },
            "notes": list(self.notes),
            "cautions": list(CAUTIONS),
        }


def _check_count(name: str, value: Any, low: int) -> int:
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or value < low:
        raise UsageError(f"{name} must be a whole number of at least {low}; got {value!r}")
    return int(value)


def per_label_alpha(
    annotations: Any,
    *,
    min_items: int = 10,
    thresholds: AgreementThresholds | None = None,
) -> tuple[float | None, list[LabelAgreement]]:
    """Overall nominal alpha and every label's one-vs-rest alpha, from one pass.

    The fast path the benchmark times; :func:`agreement_report` gives the same figures and more.
    For multi-label data the overall figure is the MASI alpha.

    Args:
        annotations: The long frame (item, annotator, label) or a reliability matrix.
        min_items: A label needs this many comparable items carrying it, else its alpha is
            None with the reason.
        thresholds: Interpretation thresholds.

    Returns:
        (overall alpha or None, labels sorted least reliable first).
    """
    _check_count("min_items", min_items, 1)
    coded = code_annotations(annotations, "nominal")
    parts = label_alphas(coded)
    overall = parts.overall_nominal
    if coded.multi or overall is None:
        overall = _overall(coded, "nominal")[0].alpha
    return overall, _labels(coded, parts, min_items, thresholds or AgreementThresholds())


def _overall(coded: Coded, level: str) -> tuple[AlphaParts, Any, Any, Any]:
    groups = value_groups(coded.unit, coded.value, coded.n_values, coded.n_units)
    factory = metric_factory(coded, level)
    metric = factory(pairable_marginals(groups, coded.n_values))
    matrix, d_u = coincidences(groups, coded.n_values, metric)
    return (
        alpha_from_coincidences(matrix, factory, coded.value_names),
        groups,
        matrix,
        (metric, d_u),
    )


def _labels(
    coded: Coded, parts: Any, min_items: int, thresholds: AgreementThresholds
) -> list[LabelAgreement]:
    out: list[LabelAgreement] = []
    n = parts.n_values
    for code, name in enumerate(coded.label_names):
        alpha = float(parts.alpha[code])
        items = int(parts.n_items[code])
        marked = float(parts.n_marked[code])
        reason = None
        if items < min_items:
            reason = (
                f"only {items} comparable item(s) carry this label; at least {min_items} are needed"
            )
        elif not math.isfinite(alpha):
            if marked >= n:
                reason = "every comparable annotation carries this label, so it cannot vary"
            else:
                reason = "no comparable annotation carries this label"
        value = alpha if reason is None else None
        out.append(
            LabelAgreement(
                label=name,
                alpha=value,
                reason=reason,
                n_items=items,
                n_annotations=int(round(marked)),
                prevalence=marked / n if n > 0 else 0.0,
                interpretation=interpret_alpha(value, thresholds),
            )
        )
    out.sort(key=lambda x: (x.alpha is None, x.alpha if x.alpha is not None else 0.0, x.label))
    return out


def agreement_report(
    annotations: Any,
    *,
    level: str = "nominal",
    bootstrap: int = 1000,
    seed: int = 0,
    thresholds: AgreementThresholds | None = None,
    min_items: int = 10,
    min_pair_items: int = 10,
    confidence: float = 0.95,
    leave_out: bool = True,
    top_splits: int = 10,
    pairwise: bool = True,
) -> AgreementResult:
    """Every agreement figure for one annotation frame.

    Args:
        annotations: The long frame (``item``, ``annotator``, ``label``; one row per item x
            annotator x label) or a reliability matrix (annotators x items, missing allowed).
        level: ``nominal``, ``ordinal``, ``interval`` or ``ratio``; labels must be numbers for
            the last three. Multi-label data is nominal only (MASI distance overall).
        bootstrap: Bootstrap draws for the confidence interval of alpha; 0 for none.
        seed: Seed of the bootstrap's random generator (same seed, same interval).
        thresholds: Interpretation thresholds for alpha (default Krippendorff 2004).
        min_items: Comparable items a label needs for its own alpha.
        min_pair_items: Shared items an annotator pair needs for Cohen's kappa.
        confidence: Coverage of the bootstrap interval (percentile method).
        leave_out: Compute alpha with each annotator left out (the slowest part).
        pairwise: Compute Cohen's kappa for every annotator pair (False: skip it with a
            reason). Its confusion matrices grow with the square of the number of labels, so
            the review queue, which does not use it, turns it off.
        top_splits: How many of the most frequent value splits to list.

    Returns:
        The result; ``to_dict()`` gives the JSON.

    Raises:
        UsageError: A bad parameter, missing columns, or non-numeric labels at a numeric level.
    """
    bootstrap = _check_count("bootstrap", bootstrap, 0)
    seed = _check_count("seed", seed, 0)
    min_items = _check_count("min_items", min_items, 1)
    min_pair_items = _check_count("min_pair_items", min_pair_items, 1)
    if isinstance(confidence, bool) or not isinstance(confidence, float) or not 0 < confidence < 1:
        raise UsageError(f"confidence must be a number between 0 and 1; got {confidence!r}")
    thresholds = thresholds or AgreementThresholds()
    coded = code_annotations(annotations, level)
    notes = list(coded.notes)
    parts, groups, matrix, (metric, d_u) = _overall(coded, level)
    alpha = parts.alpha
    distance = "masi" if coded.multi else level
    n_pairable = int((groups.m >= 2).sum())
    if coded.n_units > n_pairable:
        notes.append(
            f"{coded.n_units - n_pairable} item(s) have a single annotation and are left out of "
            "every figure (nothing to compare them with)"
        )

    ci: tuple[float, float] | None = None
    ci_reason: str | None = None
    used = 0
    p_rel = p_ten = None
    if bootstrap == 0:
        ci_reason = "no bootstrap was asked for (bootstrap draws = 0)"
    elif alpha is None:
        ci_reason = "alpha is undefined"
    else:
        boot = bootstrap_alpha(groups, d_u, metric, coded.n_values, bootstrap, seed)
        used = int(boot.alphas.size)
        if used < 2:
            ci_reason = "fewer than two bootstrap draws gave a defined alpha"
        else:
            tail = (1.0 - confidence) / 2.0
            low, high = np.quantile(boot.alphas, [tail, 1.0 - tail])
            ci = (float(low), float(high))
            p_rel = float((boot.alphas < thresholds.reliable).mean())
            p_ten = float((boot.alphas < thresholds.tentative).mean())
            if boot.undefined:
                notes.append(f"{boot.undefined} bootstrap draw(s) gave an undefined alpha")

    labels = _labels(coded, label_alphas(coded), min_items, thresholds)
    percent, _ = percent_from_groups(groups)
    if coded.multi:
        gwet = fleiss = None
        gwet_reason = fleiss_reason = (
            "multi-label data: this coefficient needs one category per annotator and item"
        )
    else:
        gwet, gwet_reason = gwet_from_groups(groups, coded.n_values)
        fleiss, fleiss_reason = fleiss_from_groups(groups, coded.n_values)

    annotators = _annotators(coded, groups, matrix, alpha, level, leave_out)
    pairs: list[PairAgreement] = []
    skipped = 0
    pair_reason: str | None = None
    if coded.multi:
        pair_reason = "multi-label data: Cohen's kappa needs one label per annotator and item"
    elif not pairwise:
        pair_reason = "not computed (pairwise=False)"
    else:
        found = pairwise_cohen(coded, min_pair_items, weighted=level != "nominal")
        skipped = found.skipped
        names = coded.annotator_names
        for i in range(found.first.size):
            kap = {w: found.kappa[w][i] for w in found.kappa}
            pairs.append(
                PairAgreement(
                    first=names[int(found.first[i])],
                    second=names[int(found.second[i])],
                    n_items=int(found.n_items[i]),
                    agreement=float(found.agreement[i]),
                    kappa=_num(kap.get(None)),
                    kappa_linear=_num(kap.get("linear")) if "linear" in kap else None,
                    kappa_quadratic=_num(kap.get("quadratic")) if "quadratic" in kap else None,
                )
            )
        pairs.sort(key=lambda p: (p.kappa is None, p.kappa or 0.0, p.first, p.second))
        if not pairs:
            pair_reason = f"no annotator pair shares {min_pair_items} or more items"
    return AgreementResult(
        level=level,
        distance=distance,
        alpha=alpha,
        alpha_reason=parts.reason,
        interpretation=interpret_alpha(alpha, thresholds),
        observed_disagreement=parts.observed,
        expected_disagreement=parts.expected,
        ci=ci,
        ci_reason=ci_reason,
        confidence=confidence,
        bootstrap_draws=bootstrap,
        bootstrap_used=used,
        seed=seed,
        p_below_reliable=p_rel,
        p_below_tentative=p_ten,
        n_items=coded.n_units,
        n_pairable=n_pairable,
        n_annotators=coded.n_annotators,
        n_labels=len(coded.label_names),
        n_values=int(round(parts.n_values)),
        multi_label=coded.multi,
        percent_agreement=percent,
        gwet_ac1=gwet,
        gwet_ac1_reason=gwet_reason,
        fleiss_kappa=fleiss,
        fleiss_kappa_reason=fleiss_reason,
        per_label=tuple(labels),
        per_annotator=tuple(annotators),
        pairwise_cohen=tuple(pairs),
        pairwise_cohen_skipped=skipped,
        pairwise_cohen_reason=pair_reason,
        split_pairs=tuple(_splits(coded, matrix, top_splits)),
        thresholds=thresholds,
        min_items=min_items,
        min_pair_items=min_pair_items,
        notes=tuple(notes),
    )


def _annotators(
    coded: Coded, groups: Any, matrix: Any, alpha: float | None, level: str, leave_out: bool
) -> list[AnnotatorAgreement]:
    factory = metric_factory(coded, level)
    without = leave_one_out(coded, matrix, factory) if leave_out else None
    agree, counted = majority_agreement(coded, groups)
    judged = np.bincount(coded.annotator, minlength=coded.n_annotators)
    out: list[AnnotatorAgreement] = []
    for a, name in enumerate(coded.annotator_names):
        part = without[a] if without is not None else None
        value = part.alpha if part is not None else None
        reason = part.reason if part is not None else "not computed (leave_out=False)"
        change = value - alpha if value is not None and alpha is not None else None
        n_counted = int(counted[a])
        out.append(
            AnnotatorAgreement(
                annotator=name,
                n_items=int(judged[a]),
                alpha_without=value,
                change=change,
                reason=reason,
                majority_agreement=float(agree[a] / n_counted) if n_counted else None,
                majority_items=n_counted,
            )
        )
    out.sort(key=lambda x: (x.change is None, -(x.change or 0.0), x.annotator))
    return out


def _splits(coded: Coded, matrix: Any, top: int) -> list[LabelSplit]:
    coo = matrix.tocoo()
    upper = coo.row < coo.col
    rows, cols, vals = coo.row[upper], coo.col[upper], coo.data[upper]
    total = float(vals.sum())
    if total <= 0:
        return []
    order = np.lexsort((cols, rows, -vals))[:top]
    names = coded.value_names
    return [
        LabelSplit(
            first=names[int(rows[i])],
            second=names[int(cols[i])],
            coincidences=float(vals[i]),
            share=float(vals[i] / total),
        )
        for i in order
    ]
