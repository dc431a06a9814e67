"""The review queue: lexicon findings and data signals merged into one ranked, explained list.

Every front end reads this one list through ``ReviewSession.flags`` (the review app, ``check``,
``signoff``, ``apply``, ``export``, ``compare``) and ``labelreview queue`` prints it. An entry is
a :class:`~labelreview.model.Flag`: a label with its severity, its reasons in plain words with
their numbers (``evidence``: signal, detail, value) and a score.

**Who is in it.** Every label the lexicons flag, and every label a data signal flags: contested
(one-vs-rest alpha below ``signals.contested_below``), group disparity across a consented
attribute, or annotator skew. Proxy columns add an explaining reason to a label already flagged
for disparity on the attribute they stand in for; they never bring a label in or add to its
score.

**Severity.** The highest of the lexicon severity and the severity configured for each data
signal that fired (``queue.severity``; defaults: contested low, disparity medium, annotator
skew low). Gate levels apply to all of them.

**Score** (0 to 100, higher first)::

    score = 100 * (w_lex * lexicon + w_con * contested + w_dis * disparity
                   + w_skew * annotator_skew + w_prev * prevalence)
            / (w_lex + w_con + w_dis + w_skew + w_prev)

with each part between 0 and 1:

- lexicon = 1, 2/3, 1/3 for a high, medium, low lexicon severity; 0 without a lexicon finding;
- contested = min(1, (t - alpha) / t) for alpha below the threshold t, else 0 (1 at chance-level
  agreement or worse);
- disparity = 1 - the lowest-to-highest rate ratio, the largest over the attributes flagged;
- annotator_skew = 1 - the lower-to-higher ratio of given to expected, the largest over the
  annotators flagged;
- prevalence = log(1 + annotations of the label) / log(1 + annotations of the most used label).

Default weights (``queue.weights``): lexicon 3, contested 2, disparity 3, annotator_skew 1,
prevalence 1. Ties: higher severity, then more annotations, then the label's name.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from typing import Any

from labelreview._gc import paused_gc
from labelreview.config import QueueConfig
from labelreview.model import SEVERITY_RANK, Flag, Reason, Severity
from labelreview.report import CAUTIONS, ScanResult, lexicon_reasons
from labelreview.signals import (
    ContestedLabel,
    DataSignals,
    DisparityResult,
    ProxyResult,
    SkewResult,
    format_p,
)
from labelreview.signals._contested import NOTHING

FORMULA = (
    "score = 100 * (w_lexicon*lexicon + w_contested*contested + w_disparity*disparity + "
    "w_annotator_skew*annotator_skew + w_prevalence*prevalence) / (sum of the weights); "
    "lexicon = 1, 2/3, 1/3 for high, medium, low; contested = min(1, (t - alpha) / t); "
    "disparity and annotator_skew = 1 - ratio; prevalence = log(1 + annotations) / "
    "log(1 + annotations of the most used label)"
)
LEXICON_PART: dict[str, float] = {"high": 1.0, "medium": 2.0 / 3.0, "low": 1.0 / 3.0}
DATA_SIGNALS: tuple[str, ...] = ("contested", "disparity", "annotator_skew")
"""The signals that can bring a label into the queue on their own."""
SIGNAL_TITLES: dict[str, tuple[str, str]] = {
    "contested": (
        "Contested label",
        "Annotators do not agree on this label: its one-vs-rest Krippendorff's alpha is below "
        "signals.contested_below.",
    ),
    "disparity": (
        "Group disparity",
        "The label is given at very different rates across groups of a consented, "
        "self-reported attribute (four-fifths rule of thumb, chi-square test, "
        "Benjamini-Hochberg). A signal to investigate, not proof of bias.",
    ),
    "annotator_skew": (
        "Annotator skew",
        "An annotator gives this label far more or far less often than the other annotators "
        "of the same items (exact binomial test, Benjamini-Hochberg).",
    ),
}
"""Data signal -> (title, one-sentence description), for the SARIF rules and the app."""


@dataclass(frozen=True)
class Queue:
    """The ranked review queue and what it was built from."""

    entries: tuple[Flag, ...]
    """Most urgent first."""
    signals: DataSignals
    weights: Mapping[str, float]
    severity: Mapping[str, str]
    labels: int
    """Labels scanned (taxonomy and annotations)."""
    notes: tuple[str, ...] = ()
    by_label: dict[str, Flag] = field(default_factory=dict, compare=False, repr=False)

    def cautions(self) -> tuple[str, ...]:
        """The general cautions, then the disparity cautions when attributes were used."""
        return CAUTIONS + self.signals.cautions()

    def counts(self) -> dict[str, int]:
        """Entries in total, from the lexicons, from data signals only, and per signal."""
        lexicon = sum(1 for f in self.entries if f.categories)
        out = {
            "entries": len(self.entries),
            "lexicon": lexicon,
            "data_only": len(self.entries) - lexicon,
        }
        for name in DATA_SIGNALS:
            out[name] = sum(1 for f in self.entries if name in f.signal_names)
        return out

    def entry_dict(self, flag: Flag, rank: int, status: str | None = None) -> dict[str, Any]:
        """One entry as the queue's JSON writes it (``reasons`` are objects)."""
        data: dict[str, Any] = {
            "rank": rank,
            "label": flag.label,
            "score": flag.score,
            "severity": flag.severity,
            "categories": list(flag.categories),
            "reasons": [r.to_dict() for r in flag.evidence],
        }
        if status is not None:
            data["status"] = status
        data.update(
            {
                "terms": list(flag.terms),
                "suggestions": list(flag.suggestions),
                "annotations": flag.annotations,
                "items": flag.items,
                "score_parts": dict(flag.score_parts),
                "signals": dict(flag.signals),
            }
        )
        return data

    def to_dict(
        self, *, top: int | None = None, status: Callable[[str], str] | None = None
    ) -> dict[str, Any]:
        """JSON-ready: entries (the first ``top``), the formula, signals, notes and cautions."""
        shown = self.entries if top is None else self.entries[:top]
        return {
            "labels": self.labels,
            "counts": self.counts(),
            "entries": [
                self.entry_dict(f, i, None if status is None else status(f.label))
                for i, f in enumerate(shown, start=1)
            ],
            "score": {"formula": FORMULA, "weights": dict(self.weights)},
            "severity": dict(self.severity),
            "thresholds": thresholds(self.signals),
            "signals": self.signals.to_dict(),
            "notes": list(self.notes),
            "cautions": list(self.cautions()),
        }


def thresholds(signals: DataSignals) -> dict[str, Any]:
    """The settings the signals used, JSON-ready."""
    s = signals.settings
    return {
        "contested_below": s.contested_below,
        "fdr": s.fdr,
        "disparity_ratio": s.disparity_ratio,
        "min_group_size": s.min_group_size,
        "min_expected": s.min_expected,
        "proxy_nmi": s.proxy_nmi,
        "proxy_cramers_v": s.proxy_cramers_v,
        "skew_ratio": s.skew_ratio,
        "skew_min_items": s.skew_min_items,
    }


# -- reasons in plain words ------------------------------------------------------------------


def _pct(value: float) -> str:
    return f"{100 * value:.1f}%"


def contested_reason(c: ContestedLabel) -> Reason:
    text = (
        f"annotators disagree on it: its one-vs-rest Krippendorff's alpha is {c.alpha:.3f} over "
        f"{c.n_items} items, below {c.threshold:.3f}"
    )
    if c.splits:
        parts = [
            ("no label" if s.other == NOTHING else f"'{s.other}'") + f" ({s.coincidences:.1f})"
            for s in c.splits
        ]
        text += "; where one annotator gave it, others most often gave " + ", ".join(parts)
    return Reason("contested", text, round(c.alpha, 4))


def disparity_reason(d: DisparityResult, threshold: float, k: int) -> Reason:
    high = d.rate(d.highest or "") or 0.0
    low = d.rate(d.lowest or "") or 0.0
    ratio = d.ratio if d.ratio is not None else 0.0
    text = (
        f"given at different rates across {d.attribute}: by {_pct(high)} of annotators on items "
        f"where it is '{d.highest}', {_pct(low)} where it is '{d.lowest}' (each item weighing "
        f"the same); ratio {ratio:.2f}, below {threshold:g} (the four-fifths rule of thumb); "
        f"chi-square {d.chi2:.1f} with {d.dof} df, p {format_p(d.p)}, Benjamini-Hochberg q "
        f"{format_p(d.q)}, Cramér's V {d.cramers_v or 0.0:.2f}; {d.items} items in "
        f"{len(d.groups)} groups"
    )
    if d.pooled:
        text += f" ({d.pooled} group(s) under {k} items pooled with another)"
    return Reason("disparity", text, round(ratio, 4))


def skew_reason(s: SkewResult) -> Reason:
    text = (
        f"annotator '{s.annotator}' gave it on {s.given} of {s.n_items} items ({_pct(s.rate)}), "
        f"where the other annotators of the same items gave it at {_pct(s.others_rate)} "
        f"({s.expected:.1f} expected); ratio {s.ratio:.2f}; exact binomial test p "
        f"{format_p(s.p)}, Benjamini-Hochberg q {format_p(s.q)}"
    )
    if s.alpha_change is not None:
        way = "rises" if s.alpha_change > 0 else "falls"
        text += f"; overall agreement {way} by {abs(s.alpha_change):.3f} without them" + (
            f" (alpha {s.alpha_without:.3f})" if s.alpha_without is not None else ""
        )
    return Reason("annotator_skew", text, round(s.ratio, 4))


def proxy_reason(p: ProxyResult) -> Reason:
    text = (
        f"column '{p.column}' carries much of {p.attribute} (normalised mutual information "
        f"{p.nmi or 0.0:.2f}, Cramér's V {p.cramers_v or 0.0:.2f}), so leaving {p.attribute} out "
        "of the data would not hide this pattern"
    )
    return Reason("proxy", text, None if p.nmi is None else round(p.nmi, 4))


# -- building the queue ----------------------------------------------------------------------


def build_queue(result: ScanResult, signals: DataSignals, config: QueueConfig) -> Queue:
    """Merge the scan's findings and the data signals into ranked :class:`Flag` entries.

    Args:
        result: The lexicon scan (findings and label usage).
        signals: The data signals (:func:`labelreview.signals.compute_signals`).
        config: Weights and data-signal severities.

    Returns:
        The queue, most urgent first; see the module docstring for the score.
    """
    # Tens of thousands of entries, each with its dicts: nothing to collect until they are built.
    with paused_gc():
        return _build_queue(result, signals, config)


def _build_queue(result: ScanResult, signals: DataSignals, config: QueueConfig) -> Queue:
    weights = {k: float(v) for k, v in config.weights.items()}
    total_weight = sum(weights.values()) or 1.0
    settings = signals.settings
    # Labels in first-seen order: the ranking below sorts the entries, and labels it leaves
    # tied (same score, severity, annotations and case-folded name) are in that order in
    # flags_from_scan too.
    lexicon = lexicon_reasons(result.findings)
    contested = {c.label: c for c in signals.contested}
    disparity: dict[str, list[DisparityResult]] = {}
    for d in signals.disparity:
        if d.flagged:
            disparity.setdefault(d.label, []).append(d)
    skew: dict[str, list[SkewResult]] = {}
    for s in signals.skew:
        skew.setdefault(s.label, []).append(s)
    proxies: dict[str, list[ProxyResult]] = {}
    for p in signals.proxies:
        if p.flagged:
            proxies.setdefault(p.attribute, []).append(p)
    most = max((u.annotations for u in result.usage.values()), default=0)
    log_most = math.log1p(most) if most > 0 else 0.0
    data_labels = {*contested, *disparity, *skew}
    w_lex, w_prev = weights["lexicon"], weights["prevalence"]
    zero_parts = dict.fromkeys(weights, 0.0)
    labels = list(lexicon) + [label for label in data_labels if label not in lexicon]
    # Lexicon findings alone: the score depends on the severity and the annotations only.
    lexicon_scores: dict[tuple[str, int], tuple[float, dict[str, float]]] = {}
    entries: list[Flag] = []
    for label in labels:
        base = lexicon.get(label)
        use = result.usage.get(label)
        annotations = use.annotations if use is not None else 0
        if base is not None and label not in data_labels:
            # The common case, thousands of labels: no data reasons.
            scored = lexicon_scores.get((base.severity, annotations))
            if scored is None:
                lex = LEXICON_PART[base.severity]
                prevalence = math.log1p(annotations) / log_most if log_most else 0.0
                score = 100.0 * (w_lex * lex + w_prev * prevalence) / total_weight
                scored = lexicon_scores[base.severity, annotations] = (
                    round(score, 1),
                    {**zero_parts, "lexicon": round(lex, 4), "prevalence": round(prevalence, 4)},
                )
            entries.append(
                Flag(
                    label=label,
                    severity=base.severity,
                    categories=base.categories,
                    terms=base.terms,
                    reasons=base.reasons,
                    suggestions=base.suggestions,
                    annotations=annotations,
                    items=use.items if use is not None else 0,
                    score=scored[0],
                    score_parts=dict(scored[1]),  # each flag its own dict
                    evidence=base.evidence,
                )
            )
            continue
        prevalence = math.log1p(annotations) / log_most if log_most else 0.0
        parts = dict.fromkeys(weights, 0.0)
        parts["prevalence"] = prevalence
        severities: list[Severity] = []
        evidence: list[Reason] = []
        data: dict[str, Any] = {}
        if base is not None:
            severities.append(base.severity)
            parts["lexicon"] = LEXICON_PART[base.severity]
            evidence.extend(base.evidence)
        if label in disparity:
            found = sorted(disparity[label], key=lambda d: (d.ratio or 0.0, d.attribute))
            severities.append(config.severity["disparity"])  # type: ignore[arg-type]
            parts["disparity"] = max(1.0 - (d.ratio or 0.0) for d in found)
            evidence.extend(
                disparity_reason(d, settings.disparity_ratio, settings.min_group_size)
                for d in found
            )
            for d in found:
                evidence.extend(proxy_reason(p) for p in proxies.get(d.attribute, []))
            data["disparity"] = [d.to_dict() for d in found]
        if label in contested:
            c = contested[label]
            severities.append(config.severity["contested"])  # type: ignore[arg-type]
            t = c.threshold
            parts["contested"] = 1.0 if t <= 0 else min(1.0, max(0.0, (t - c.alpha) / t))
            evidence.append(contested_reason(c))
            data["contested"] = c.to_dict()
        if label in skew:
            found_s = skew[label]
            severities.append(config.severity["annotator_skew"])  # type: ignore[arg-type]
            parts["annotator_skew"] = max(1.0 - s.ratio for s in found_s)
            evidence.extend(skew_reason(s) for s in found_s)
            data["annotator_skew"] = [s.to_dict() for s in found_s]
        score = 100.0 * sum(weights[k] * parts[k] for k in weights) / total_weight
        severity = max(severities, key=lambda s: SEVERITY_RANK[s])
        entries.append(
            Flag(
                label=label,
                severity=severity,
                categories=base.categories if base is not None else (),
                terms=base.terms if base is not None else (),
                reasons=tuple(r.detail for r in evidence),
                suggestions=base.suggestions if base is not None else (),
                annotations=annotations,
                items=use.items if use is not None else 0,
                signals=data,
                score=round(score, 1),
                score_parts={k: round(v, 4) for k, v in parts.items()},
                evidence=tuple(evidence),
            )
        )
    entries.sort(
        key=lambda f: (
            -(f.score or 0.0),
            -SEVERITY_RANK[f.severity],
            -f.annotations,
            f.label.casefold(),
        )
    )
    notes = list(signals.notes)
    return Queue(
        entries=tuple(entries),
        signals=signals,
        weights=weights,
        severity=dict(config.severity),
        labels=len(result.usage),
        notes=tuple(notes),
        by_label={f.label: f for f in entries},
    )


__all__ = ["DATA_SIGNALS", "FORMULA", "SIGNAL_TITLES", "Queue", "build_queue", "thresholds"]
