"""Plain, frozen value types shared by every layer of labelreview.

Annotations themselves travel as a pandas DataFrame with the string columns ``item``,
``annotator`` and ``label`` (one row per item x annotator x label); the types here describe
everything around them.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, field
from typing import Any, Literal

Severity = Literal["low", "medium", "high"]
SEVERITIES: tuple[Severity, ...] = ("low", "medium", "high")
SEVERITY_RANK: dict[str, int] = {"low": 1, "medium": 2, "high": 3}

Subjects = Literal["people", "mixed", "none"]
SUBJECTS: tuple[Subjects, ...] = ("people", "mixed", "none")

MatchKind = Literal["exact", "variant", "fuzzy"]

#: The category ids the shipped lexicon set always defines; the rest of labelreview relies on them.
BASE_CATEGORIES: tuple[str, ...] = (
    "character_judgement",
    "appearance_judgement",
    "occupation_from_appearance",
    "gendered_term",
    "demographic_inference",
    "health_inference",
    "socioeconomic_judgement",
    "criminality_inference",
    "slur_or_derogatory",
)

ANNOTATION_COLUMNS: tuple[str, str, str] = ("item", "annotator", "label")


@dataclass(frozen=True)
class TaxonomyLabel:
    """One label of the dataset's vocabulary."""

    name: str
    """The label as annotators see it; for a hierarchy, the full path (``people/roles/x``)."""
    id: str | None = None
    """The taxonomy's own id for it, where the file has one."""
    parent: str | None = None
    """The parent's path, or None at the top."""
    description: str | None = None


@dataclass(frozen=True)
class Finding:
    """One reason to look at one label: a lexicon term matched inside it."""

    label: str
    """The label exactly as it appears in the data."""
    category: str
    """Lexicon category id, e.g. ``character_judgement``."""
    category_title: str
    severity: Severity
    term: str
    """The lexicon term (head word) that matched."""
    matched: str
    """The text in the label that matched, after normalisation."""
    match: MatchKind
    score: float
    """100 for exact and variant matches; the rapidfuzz similarity for fuzzy ones."""
    span: tuple[int, int]
    """Token positions [start, end) within the label's normalised tokens."""
    tokens: tuple[str, ...]
    """The label's normalised tokens, so ``span`` can be read."""
    suggestions: tuple[str, ...]
    reason: str
    """One plain sentence saying why the label was flagged."""
    source: str
    """Lexicon file and line of the term: ``lexicons/base/character.yaml:12``."""

    def for_label(self, label: str) -> Finding:
        """The same finding for another label that spells the same tokens.

        Field by field rather than :func:`dataclasses.replace`, which took 2.9 µs against
        1.7 µs (the scanner copies one finding per flagged label).
        """
        return Finding(
            label=label,
            category=self.category,
            category_title=self.category_title,
            severity=self.severity,
            term=self.term,
            matched=self.matched,
            match=self.match,
            score=self.score,
            span=self.span,
            tokens=self.tokens,
            suggestions=self.suggestions,
            reason=self.reason,
            source=self.source,
        )

    def to_dict(self) -> dict[str, Any]:
        data = asdict(self)
        data["span"] = list(self.span)
        data["tokens"] = list(self.tokens)
        data["suggestions"] = list(self.suggestions)
        return data


@dataclass(frozen=True)
class LoadReport:
    """What a loader did, so the CLI can say it (formats detected, rows dropped...)."""

    path: str
    format: str
    """The format actually used: csv, tsv, jsonl, parquet, wide-csv, coco, ..."""
    rows_read: int = 0
    duplicates_dropped: int = 0
    empty_labels_dropped: int = 0
    column_map: dict[str, str] = field(default_factory=dict)
    """Our column name -> the file's column name."""
    notes: tuple[str, ...] = ()


SIGNAL_NAMES: tuple[str, ...] = (
    "lexicon",
    "contested",
    "disparity",
    "annotator_skew",
    "proxy",
)
"""Where a reason comes from: a lexicon term, or one of the data signals (``labelreview.signals``).
``proxy`` reasons explain and never add to the score."""


@dataclass(frozen=True)
class Reason:
    """One reason to look at a label, in plain words, with the figure it rests on."""

    signal: str
    """One of :data:`SIGNAL_NAMES`."""
    detail: str
    """One plain sentence, with its numbers."""
    value: float | str | None = None
    """The figure the sentence rests on: the matched term (lexicon), the label's alpha
    (contested), the lowest-to-highest rate ratio (disparity, annotator_skew), the normalised
    mutual information (proxy)."""

    def to_dict(self) -> dict[str, Any]:
        return {"signal": self.signal, "detail": self.detail, "value": self.value}


@dataclass(frozen=True)
class Flag:
    """One label that needs a human look, with every reason gathered in one place.

    Built by :func:`labelreview.queue.build_queue` from a scan's findings and the data signals;
    it is what the review queue lists, what the gate counts, and what a decision snapshots into
    the log.
    """

    label: str
    severity: Severity
    """The highest severity among the label's reasons (data signals have configured
    severities, ``queue.severity``)."""
    categories: tuple[str, ...]
    """Lexicon categories; empty for a label only the data signals flag."""
    terms: tuple[str, ...]
    reasons: tuple[str, ...]
    """Plain sentences, one per reason (the ``detail`` of each of ``evidence``)."""
    suggestions: tuple[str, ...] = ()
    annotations: int = 0
    """Annotation rows carrying the label."""
    items: int = 0
    """Distinct items carrying the label."""
    signals: dict[str, Any] = field(default_factory=dict)
    """Data signals by name (``contested``, ``disparity``, ``annotator_skew``), JSON-ready."""
    score: float | None = None
    """The queue's priority, 0 to 100 (formula in the README and :mod:`labelreview.queue`);
    None for a flag the queue did not build (a bare scan's flags)."""
    score_parts: dict[str, float] = field(default_factory=dict)
    """Each score component (0 to 1) before weighting, by name."""
    evidence: tuple[Reason, ...] = ()
    """The reasons as objects (signal, detail, value), in the order of ``reasons``."""

    @property
    def signal_names(self) -> tuple[str, ...]:
        """The data signals behind this flag (``lexicon`` and ``proxy`` left out)."""
        names = (r.signal for r in self.evidence if r.signal not in ("lexicon", "proxy"))
        return tuple(dict.fromkeys(names))

    def to_dict(self) -> dict[str, Any]:
        """A JSON-ready dict (lists instead of tuples); ``reasons`` stay plain sentences and
        ``evidence`` holds them as objects."""
        return {
            "label": self.label,
            "severity": self.severity,
            "score": self.score,
            "categories": list(self.categories),
            "terms": list(self.terms),
            "reasons": list(self.reasons),
            "evidence": [r.to_dict() for r in self.evidence],
            "suggestions": list(self.suggestions),
            "annotations": self.annotations,
            "items": self.items,
            "score_parts": dict(self.score_parts),
            "signals": dict(self.signals),
        }
