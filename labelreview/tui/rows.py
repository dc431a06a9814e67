"""The one place the review app reads its queue from the session.

Everything the app shows per flagged label goes through :func:`queue_rows`, which turns the
session's :class:`~labelreview.model.Flag` list (most urgent first) into :class:`QueueRow`
objects. When the ranked queue replaces what ``ReviewSession.flags`` returns, or adds a score
and structured reasons, this module is the only one to change: :func:`reason_text` already
accepts reasons given as plain sentences or as objects with ``detail`` / ``signal`` /
``value``, and :func:`flag_score` reads a ``score`` attribute or signal when there is one.

Nothing here imports Textual; the widgets read these rows.
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

from labelreview.model import SEVERITY_RANK

if TYPE_CHECKING:
    from labelreview.agreement import LabelAgreement
    from labelreview.model import Flag
    from labelreview.review import ReviewSession

STATUSES: tuple[str, ...] = ("open", "accepted", "renamed", "retired")
"""Every status a queue row can have, in the order the filters list them."""


@dataclass(eq=False)
class QueueRow:
    """One flagged label as the app shows it. ``status`` and ``agreement`` change in place."""

    rank: int
    """0-based position in the session's queue (most urgent first)."""
    label: str
    severity: str
    categories: tuple[str, ...]
    """Category ids (``character_judgement``)."""
    category_titles: tuple[str, ...]
    """The lexicon's titles for them, same order."""
    terms: tuple[str, ...]
    reasons: tuple[str, ...]
    """Plain sentences."""
    suggestions: tuple[str, ...]
    annotations: int
    items: int
    score: float | None = None
    status: str = "open"
    agreement: LabelAgreement | None = None
    """This label's per-label alpha, once it has been measured."""
    folded: str = field(default="", repr=False)
    """The label case-folded, for search."""

    def __post_init__(self) -> None:
        if not self.folded:
            self.folded = self.label.casefold()

    @property
    def severity_rank(self) -> int:
        return SEVERITY_RANK.get(self.severity, 0)

    @property
    def alpha(self) -> float | None:
        return None if self.agreement is None else self.agreement.alpha


def category_words(category: str) -> str:
    """``character_judgement`` -> ``character judgement`` (the short form for the queue)."""
    return category.replace("_", " ")


def reason_text(reason: Any) -> str:
    """A reason as one plain sentence, whether given as text or as a structured object."""
    if isinstance(reason, str):
        return reason
    get = reason.get if isinstance(reason, Mapping) else lambda k: getattr(reason, k, None)
    detail = get("detail") or get("text") or get("reason")
    signal = get("signal")
    value = get("value")
    text = str(detail) if detail else (str(signal) if signal else str(reason))
    if value is not None and detail and str(value) not in text:
        text += f" ({value})"
    return text


def flag_score(flag: Flag) -> float | None:
    """The ranked queue's score for a flag, when the flag carries one."""
    score = getattr(flag, "score", None)
    if score is None:
        score = flag.signals.get("score") if isinstance(flag.signals, Mapping) else None
    return float(score) if isinstance(score, (int, float)) else None


def row_from_flag(rank: int, flag: Flag, titles: Mapping[str, str], status: str) -> QueueRow:
    return QueueRow(
        rank=rank,
        label=flag.label,
        severity=flag.severity,
        categories=tuple(flag.categories),
        category_titles=tuple(titles.get(c, category_words(c)) for c in flag.categories),
        terms=tuple(flag.terms),
        reasons=tuple(reason_text(r) for r in flag.reasons),
        suggestions=tuple(flag.suggestions),
        annotations=int(flag.annotations),
        items=int(flag.items),
        score=flag_score(flag),
        status=status,
    )


def queue_rows(session: ReviewSession) -> list[QueueRow]:
    """Every flag of the session as a row, in the session's order, with its logged status."""
    titles = {cid: category.title for cid, category in session.scanned.lexicon.categories.items()}
    state = session.state()
    return [
        row_from_flag(rank, flag, titles, state.status(flag.label))
        for rank, flag in enumerate(session.flags)
    ]


def attach_agreement(rows: Iterable[QueueRow], by_label: Mapping[str, LabelAgreement]) -> None:
    """Give each row its per-label agreement (rows without a figure keep None)."""
    for row in rows:
        row.agreement = by_label.get(row.label)
