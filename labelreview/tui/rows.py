"""The one place the review app reads its queue from the session.

Everything the app shows per flagged label goes through :func:`queue_rows`, which turns the
session's :class:`~labelreview.model.Flag` list (most urgent first) into :class:`QueueRow`
objects. ``ReviewSession.flags`` is the ranked review queue (:mod:`labelreview.queue`): each
flag carries a ``score`` and its reasons as objects (``evidence``: signal, detail, value), which
:attr:`QueueRow.reasons` prefixes with the data signal's name; :func:`reason_text` also takes
plain sentences, and :func:`flag_score` reads the ``score``.

Nothing here imports Textual; the widgets read these rows.
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping, Sequence
from typing import TYPE_CHECKING, Any

from labelreview.model import SEVERITY_RANK

if TYPE_CHECKING:
    from labelreview.agreement import LabelAgreement
    from labelreview.model import Flag
    from labelreview.review import ReviewSession

SIGNAL_WORDS: dict[str, str] = {
    "contested": "Contested",
    "disparity": "Group disparity",
    "annotator_skew": "Annotator skew",
    "proxy": "Stand-in column",
}
"""How the detail pane names the data signal a reason comes from."""

STATUSES: tuple[str, ...] = ("open", "accepted", "renamed", "retired")
"""Every status a queue row can have, in the order the filters list them."""


class QueueRow:
    """One flagged label as the app shows it. ``status`` and ``agreement`` change in place.

    Built for every flag at launch (50,000 of them in the benchmark), so it keeps only what
    the queue and the filters read and works out the rest from the flag when the detail pane
    asks for it.
    """

    __slots__ = ("agreement", "flag", "folded", "rank", "status", "_titles")

    def __init__(
        self, rank: int, flag: Flag, titles: Mapping[str, str], status: str = "open"
    ) -> None:
        self.rank = rank
        """0-based position in the session's queue (most urgent first)."""
        self.flag = flag
        self.status = status
        self.agreement: LabelAgreement | None = None
        """This label's per-label alpha, once it has been measured."""
        self.folded = flag.label.casefold()
        """The label case-folded, for search."""
        self._titles = titles

    def __repr__(self) -> str:
        return f"QueueRow({self.label!r}, {self.severity}, {self.status})"

    @property
    def label(self) -> str:
        return self.flag.label

    @property
    def severity(self) -> str:
        return self.flag.severity

    @property
    def severity_rank(self) -> int:
        return SEVERITY_RANK.get(self.flag.severity, 0)

    @property
    def categories(self) -> tuple[str, ...]:
        """Category ids (``character_judgement``)."""
        return tuple(self.flag.categories)

    @property
    def category_titles(self) -> tuple[str, ...]:
        """The lexicon's titles for the categories, same order."""
        return tuple(self._titles.get(c) or category_words(c) for c in self.flag.categories)

    @property
    def terms(self) -> tuple[str, ...]:
        return tuple(self.flag.terms)

    @property
    def reasons(self) -> tuple[str, ...]:
        """Plain sentences; a data signal's reason starts with the signal's name."""
        evidence = getattr(self.flag, "evidence", ())
        if evidence:
            return tuple(
                r.detail
                if r.signal == "lexicon"
                else f"{SIGNAL_WORDS.get(r.signal, r.signal)}: {r.detail}"
                for r in evidence
            )
        return tuple(reason_text(r) for r in self.flag.reasons)

    @property
    def signal_names(self) -> tuple[str, ...]:
        """The data signals behind the flag (contested, disparity, annotator_skew)."""
        return tuple(getattr(self.flag, "signal_names", ()))

    @property
    def suggestions(self) -> tuple[str, ...]:
        return tuple(self.flag.suggestions)

    @property
    def annotations(self) -> int:
        return int(self.flag.annotations)

    @property
    def items(self) -> int:
        return int(self.flag.items)

    @property
    def score(self) -> float | None:
        return flag_score(self.flag)

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


def queue_rows(session: ReviewSession, flags: Sequence[Flag] | None = None) -> list[QueueRow]:
    """Every flag of the session (or ``flags``: the preliminary queue) as a row, in order,
    with its logged status."""
    titles = {cid: category.title for cid, category in session.scanned.lexicon.categories.items()}
    state = session.state()
    status = state.status
    entries = session.flags if flags is None else flags
    return [QueueRow(rank, flag, titles, status(flag.label)) for rank, flag in enumerate(entries)]


def attach_agreement(rows: Iterable[QueueRow], by_label: Mapping[str, LabelAgreement]) -> None:
    """Give each row its per-label agreement (rows without a figure keep None)."""
    for row in rows:
        row.agreement = by_label.get(row.label)
