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
    _BLOCK_BUDGET,
    AlphaParts,
    LabelParts,
    LabelSums,
    Metric,
    OrdinalMetric,
    alpha_from_coincidences,
    bootstrap_alpha,
    label_parts,
    to_matrix,
)
from labelreview.agreement._kappa import CohenCounts, cohen_from_counts
from labelreview.agreement._parts import frame_sums
from labelreview.agreement._sums import (
    BUCKETS,
    AgreementSums,
    ExactSums,
    Tally,
    groups_of_buckets,
    numerators_of,
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
    # Multi-label data: the overall figure is the MASI alpha, which needs the overall sums.
    sums, _ = frame_sums(annotations, "nominal", {"labels"}, multi_parts={"overall"})
    return per_label_from_sums(sums, min_items=min_items, thresholds=thresholds)


def per_label_from_sums(
    sums: AgreementSums,
    *,
    min_items: int = 10,
    thresholds: AgreementThresholds | None = None,
) -> tuple[float | None, list[LabelAgreement]]:
    """:func:`per_label_alpha` from sums (in memory, streamed or from a cluster)."""
    _check_count("min_items", min_items, 1)
    parts = _label_parts(sums)
    overall = parts.overall_nominal
    if sums.multi or overall is None:
        overall = _overall(sums)[0].alpha
    return overall, _labels(sums.labels, parts, min_items, thresholds or AgreementThresholds())


def _label_parts(sums: AgreementSums) -> LabelParts:
    agree = sums.tally("label_agree")
    n_labels = len(sums.labels)
    marked = np.zeros(n_labels, dtype=np.int64)
    items = np.zeros(n_labels, dtype=np.int64)
    t = sums.tally("label_marked")
    marked[t.columns[0]] = t.counts
    t = sums.tally("label_items")
    items[t.columns[0]] = t.counts
    label = LabelSums(agree.columns[0], agree.columns[1], agree.counts, marked, items)
    return label_parts(label, n_labels, float(sums.pairable_values()), sums.multi)


def _overall(sums: AgreementSums) -> tuple[AlphaParts, Any, Any, np.ndarray]:
    """Alpha from the merged coincidences; also the matrix, the factory and the value rank."""
    rank = sums.final_order()
    names = [""] * len(sums.values)
    for code, name in enumerate(sums.value_names):
        names[int(rank[code])] = name
    matrix = to_matrix(numerators_of(sums.tally("coin"), rank), len(sums.values))
    factory = sums.metric_factory()
    return alpha_from_coincidences(matrix, factory, names), matrix, factory, rank


def _labels(
    label_names: list[str], parts: Any, min_items: int, thresholds: AgreementThresholds
) -> list[LabelAgreement]:
    out: list[LabelAgreement] = []
    n = parts.n_values
    for code, name in enumerate(label_names):
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


def check_report_options(
    *,
    bootstrap: int,
    seed: int,
    min_items: int,
    min_pair_items: int,
    confidence: float,
) -> None:
    """Refuse bad report parameters early, naming the parameter."""
    _check_count("bootstrap", bootstrap, 0)
    _check_count("seed", seed, 0)
    _check_count("min_items", min_items, 1)
    _check_count("min_pair_items", min_pair_items, 1)
    if isinstance(confidence, bool) or not isinstance(confidence, float) or not 0 < confidence < 1:
        raise UsageError(f"confidence must be a number between 0 and 1; got {confidence!r}")


def report_parts(bootstrap: int, leave_out: bool) -> frozenset[str]:
    """The sums :func:`agreement_report` needs for these options."""
    parts = {"overall", "labels", "kappas", "annotators"}
    if bootstrap > 0:
        parts.add("bootstrap")
    return frozenset(parts)


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

    The frame is coded, turned into :class:`~labelreview.agreement._sums.AgreementSums` and read
    off by :func:`report_from_sums`: the same steps the streaming reader and the Dask engine
    take part by part, so all three give the same figures.

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
    check_report_options(
        bootstrap=bootstrap,
        seed=seed,
        min_items=min_items,
        min_pair_items=min_pair_items,
        confidence=confidence,
    )
    sums, pieces = frame_sums(
        annotations, level, report_parts(bootstrap, leave_out), leave_out=leave_out
    )
    if bootstrap > 0 and sums.bucket_d is None:
        metric = ordinal_metric(sums)
        sums.bucket_d = ExactSums(BUCKETS)
        for coded in pieces:
            sums.bucket_d.merge(sums.add_ordinal_disagreement(coded, metric))
    return report_from_sums(
        sums,
        bootstrap=bootstrap,
        seed=seed,
        thresholds=thresholds,
        min_items=min_items,
        min_pair_items=min_pair_items,
        confidence=confidence,
        leave_out=leave_out,
        top_splits=top_splits,
        pairwise=pairwise,
    )


def ordinal_metric(sums: AgreementSums) -> Metric:
    """The ordinal difference function of all the data (from the merged value totals)."""
    _, matrix, factory, _ = _overall(sums)
    return factory(np.asarray(matrix.sum(axis=1)).ravel())


def report_from_sums(
    sums: AgreementSums,
    *,
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
    """Every agreement figure from merged sums; see :func:`agreement_report` for the options.

    ``sums`` must hold the parts the options need (:func:`report_parts`), and for the
    bootstrap at the ordinal level its bucket disagreement (``add_ordinal_disagreement``).
    """
    check_report_options(
        bootstrap=bootstrap,
        seed=seed,
        min_items=min_items,
        min_pair_items=min_pair_items,
        confidence=confidence,
    )
    thresholds = thresholds or AgreementThresholds()
    level = sums.level
    notes: list[str] = []
    if sums.n_null_rows:
        notes.append(
            f"{sums.n_null_rows} rows with an empty item, annotator or label were left out"
        )
    if sums.n_repeated:
        notes.append(f"{sums.n_repeated} repeated (item, annotator, label) rows counted once")
    if sums.multi:
        notes.append(
            "multi-label data: the overall alpha compares label sets with the MASI distance; "
            "each label's alpha treats it as present or absent"
        )
    parts, matrix, factory, rank = _overall(sums)
    alpha = parts.alpha
    distance = "masi" if sums.multi else level
    sizes, counts = sums.sizes()
    n_items = int(counts.sum())
    n_pairable = int(counts[sizes >= 2].sum())
    if n_items > n_pairable:
        notes.append(
            f"{n_items - n_pairable} item(s) have a single annotation and are left out of "
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
        groups, d_b = groups_of_buckets(sums, rank)
        metric = factory(np.asarray(matrix.sum(axis=1)).ravel())
        boot = bootstrap_alpha(groups, d_b, metric, len(sums.values), bootstrap, seed)
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

    labels = _labels(sums.labels, _label_parts(sums), min_items, thresholds)
    percent = percent_from_sums(sums)
    if sums.multi:
        gwet = fleiss = None
        gwet_reason = fleiss_reason = (
            "multi-label data: this coefficient needs one category per annotator and item"
        )
    else:
        gwet, gwet_reason = gwet_from_sums(sums)
        fleiss, fleiss_reason = fleiss_from_sums(sums)

    annotators = _annotators(sums, matrix, factory, rank, alpha, leave_out)
    pairs: list[PairAgreement] = []
    skipped = 0
    pair_reason: str | None = None
    if sums.multi:
        pair_reason = "multi-label data: Cohen's kappa needs one label per annotator and item"
    elif not pairwise:
        pair_reason = "not computed (pairwise=False)"
    else:
        t = sums.tally("cohen")
        counts_c = CohenCounts(
            t.columns[0], t.columns[1], rank[t.columns[2]], rank[t.columns[3]], t.counts
        )
        found = cohen_from_counts(counts_c, len(sums.values), min_pair_items, level != "nominal")
        skipped = found.skipped
        names = sums.annotators
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
    value_names = [""] * len(sums.values)
    for code, name in enumerate(sums.value_names):
        value_names[int(rank[code])] = name
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
        n_items=n_items,
        n_pairable=n_pairable,
        n_annotators=len(sums.annotators),
        n_labels=len(sums.labels),
        n_values=int(round(parts.n_values)),
        multi_label=sums.multi,
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
        split_pairs=tuple(_splits(value_names, matrix, top_splits)),
        thresholds=thresholds,
        min_items=min_items,
        min_pair_items=min_pair_items,
        notes=tuple(notes),
    )


def percent_from_sums(sums: AgreementSums) -> float | None:
    """Mean over pairable items of the share of agreeing annotator pairs.

    p_u = sum over c of n_uc (n_uc - 1) / (m_u (m_u - 1)); summed per item size m from the
    integer numerators. None without pairable items.
    """
    sizes, counts = sums.sizes()
    n_pairable = int(counts[sizes >= 2].sum())
    if n_pairable == 0:
        return None
    t = sums.tally("percent")
    m = t.columns[0].astype(np.float64)
    return float((t.counts / (m * (m - 1.0))).sum() / n_pairable)


def gwet_from_sums(sums: AgreementSums) -> tuple[float | None, str | None]:
    """Gwet's AC1 for several raters with missing ratings (Gwet 2008; handbook, chapter 4).

    p_a as in :func:`percent_from_sums`; pi_c = mean over items with a rating of n_uc / m_u;
    p_e = sum of pi_c (1 - pi_c) / (q - 1) with q categories; AC1 = (p_a - p_e) / (1 - p_e).
    """
    p_a = percent_from_sums(sums)
    if p_a is None:
        return None, "no item has two or more annotations"
    q = len(sums.values)
    if q < 2:
        return None, "only one category occurs, so chance agreement (q - 1 = 0) is undefined"
    _, counts = sums.sizes()
    rated = int(counts.sum())
    t = sums.tally("value_by_size")
    value, m = t.columns
    pi = np.zeros(q)
    starts = np.flatnonzero(np.concatenate(([True], value[1:] != value[:-1])))
    pi[value[starts]] = np.add.reduceat(t.counts / m.astype(np.float64), starts)
    pi /= rated
    p_e = float((pi * (1.0 - pi)).sum() / (q - 1))
    return float((p_a - p_e) / (1.0 - p_e)), None


def fleiss_from_sums(sums: AgreementSums) -> tuple[float | None, str | None]:
    """Fleiss' kappa (Fleiss 1971), defined only when every item has the same number of ratings.

    P_i = (sum_j n_ij^2 - m) / (m (m - 1)); P = mean P_i; p_j = sum_i n_ij / (N m);
    P_e = sum p_j^2; kappa = (P - P_e) / (1 - P_e).
    """
    sizes, counts = sums.sizes()
    if sizes.size == 0:
        return None, "there are no annotations"
    low, high = int(sizes.min()), int(sizes.max())
    if low != high:
        return None, (
            f"items have between {low} and {high} annotations; Fleiss' kappa needs the same "
            "number for every item"
        )
    if low < 2:
        return None, "every item has one annotation, so there is nothing to compare"
    m = float(low)
    n_items = int(counts.sum())
    p_bar = float((sums.square_sum - n_items * m) / (n_items * m * (m - 1.0)))
    t = sums.tally("value_by_size")
    totals = np.zeros(len(sums.values))
    np.add.at(totals, t.columns[0], t.counts.astype(np.float64))
    p_j = totals / (n_items * m)
    p_e = float((p_j * p_j).sum())
    if p_e >= 1.0 - 1e-12:
        return None, "only one category occurs, so chance agreement is 1 and kappa is undefined"
    return (p_bar - p_e) / (1.0 - p_e), None


def _annotators(
    sums: AgreementSums,
    matrix: Any,
    factory: Any,
    rank: np.ndarray,
    alpha: float | None,
    leave_out: bool,
) -> list[AnnotatorAgreement]:
    n_ann = len(sums.annotators)
    agree = np.zeros(n_ann)
    counted = np.zeros(n_ann)
    t = sums.tally("majority")
    for kind, target in ((0, agree), (1, counted)):
        part = t.where(1, kind)
        target[part.columns[0]] = part.counts
    judged = np.zeros(n_ann, dtype=np.int64)
    t = sums.tally("judged")
    judged[t.columns[0]] = t.counts
    parts: list[Any] = _leave_one_out_parts(sums, factory, rank) if leave_out else [None] * n_ann
    out: list[AnnotatorAgreement] = []
    for a, name in enumerate(sums.annotators):
        without = parts[a]
        value = without.alpha if without is not None else None
        reason = without.reason if without is not None else "not computed (leave_out=False)"
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


def _leave_one_out_parts(sums: AgreementSums, factory: Any, rank: np.ndarray) -> list[Any]:
    """Alpha without each annotator, from the coincidences minus their own changes.

    For a fixed difference function (all but ordinal, whose function depends on each matrix's
    own marginals) the expected sums of every annotator's matrix come from one pass over the
    difference blocks, which is what makes this cheap for MASI on many label sets.
    """
    coin = sums.tally("coin")
    loo = sums.tally("loo")
    n_values = len(sums.values)
    matrices = []
    for a in range(len(sums.annotators)):
        own = loo.where(0, a)
        reduced = coin.plus(Tally(own.columns[1:], own.counts))
        matrices.append(to_matrix(numerators_of(reduced, rank), n_values))
    if not matrices or factory is OrdinalMetric:
        return [alpha_from_coincidences(m, factory, None) for m in matrices]
    margs = np.vstack([np.asarray(m.sum(axis=1)).ravel() for m in matrices])
    metric = factory(margs[0])
    chunk = max(1, _BLOCK_BUDGET // max(n_values, 1))
    totals = np.concatenate(
        [
            np.atleast_1d(metric.expected_sum(margs[i : i + chunk]))
            for i in range(0, len(matrices), chunk)
        ]
    )
    return [
        alpha_from_coincidences(m, factory, None, expected_sum=float(t))
        for m, t in zip(matrices, totals, strict=True)
    ]


def _splits(names: list[str], matrix: Any, top: int) -> list[LabelSplit]:
    coo = matrix.tocoo()
    upper = coo.row < coo.col
    rows, cols, vals = coo.row[upper], coo.col[upper], coo.data[upper]
    total = float(vals.sum())
    if total <= 0:
        return []
    order = np.lexsort((cols, rows, -vals))[:top]
    return [
        LabelSplit(
            first=names[int(rows[i])],
            second=names[int(cols[i])],
            coincidences=float(vals[i]),
            share=float(vals[i] / total),
        )
        for i in order
    ]
