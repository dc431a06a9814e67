"""The queue adapter and the filters, without a screen (plain behaviour of the app's own code;
common practice, no source)."""

from __future__ import annotations

import itertools
from dataclasses import dataclass

from labelreview.model import Flag
from labelreview.tui.filters import DIMENSIONS, FilterState, apply_filters, option_counts
from labelreview.tui.rows import STATUSES, QueueRow, flag_score, queue_rows, reason_text

TITLES = {"gendered_term": "Gendered role words", "character_judgement": "Verdicts on character"}


def flag(label: str, severity: str = "low", *categories: str, **extra) -> Flag:  # noqa: ANN003
    return Flag(
        label=label,
        severity=severity,  # type: ignore[arg-type]
        categories=categories or ("gendered_term",),
        terms=("x",),
        reasons=("a reason",),
        **extra,
    )


def make_rows() -> list[QueueRow]:
    flags = [
        flag("people/roles/Cleaning_Lady", "low", "gendered_term"),
        flag("people/character/lazy_worker", "high", "character_judgement"),
        flag("people/roles/old_spinster", "medium", "gendered_term", "character_judgement"),
        flag("signals/only", "medium", "contested_label"),
    ]
    statuses = ["open", "accepted", "renamed", "open"]
    return [QueueRow(i, f, TITLES, s) for i, (f, s) in enumerate(zip(flags, statuses, strict=True))]


def test_rows_read_the_flag_and_titles():
    row = make_rows()[2]
    assert (row.label, row.severity, row.status, row.rank) == (
        "people/roles/old_spinster",
        "medium",
        "renamed",
        2,
    )
    assert row.category_titles == ("Gendered role words", "Verdicts on character")
    assert make_rows()[3].category_titles == ("contested label",)  # no title: the id in words
    assert row.severity_rank == 2 and row.alpha is None and row.score is None


def test_rows_come_from_the_session_in_order(sample_scan, log_path):
    from labelreview.review import DecisionRequest
    from tests.tui.conftest import make_session

    session = make_session(sample_scan, log_path)
    session.decide(DecisionRequest("people/roles/teacher", "accept", "the trade is on the card"))
    rows = queue_rows(session)
    assert [r.label for r in rows] == [f.label for f in session.flags]
    assert {r.label: r.status for r in rows}["people/roles/teacher"] == "accepted"
    assert sum(r.status != "open" for r in rows) == session.progress()[0]


@dataclass
class StructuredReason:
    signal: str
    detail: str
    value: float | None = None


def test_reasons_as_text_or_structured():
    assert reason_text("plain words") == "plain words"
    assert (
        reason_text({"signal": "contested", "detail": "annotators disagree", "value": 0.21})
        == "annotators disagree (0.21)"
    )
    assert reason_text(StructuredReason("skew", "one annotator uses it far more")) == (
        "one annotator uses it far more"
    )
    assert reason_text({"signal": "proxy_column"}) == "proxy_column"


def test_score_from_an_attribute_or_the_signals():
    assert flag_score(flag("a", signals={"score": 3})) == 3.0
    assert flag_score(flag("a")) is None

    @dataclass(frozen=True)
    class Scored(Flag):
        score: float = 0.0

    scored = Scored(label="b", severity="high", categories=(), terms=(), reasons=(), score=7.5)
    assert flag_score(scored) == 7.5


def test_filters_and_search():
    rows = make_rows()
    assert apply_filters(rows, FilterState()) == rows
    assert [r.rank for r in apply_filters(rows, FilterState(status="open"))] == [0, 3]
    assert [r.rank for r in apply_filters(rows, FilterState(severity="medium"))] == [2, 3]
    assert [r.rank for r in apply_filters(rows, FilterState(category="character_judgement"))] == [
        1,
        2,
    ]
    # Search: case-insensitive, every word must occur, in queue order.
    assert [r.rank for r in apply_filters(rows, FilterState(search="LADY"))] == [0]
    assert [r.rank for r in apply_filters(rows, FilterState(search="roles spin"))] == [2]
    assert apply_filters(rows, FilterState(search="roles zebra")) == []
    both = FilterState(status="open", category="gendered_term", search="roles")
    assert [r.rank for r in apply_filters(rows, both)] == [0]


def test_option_counts_say_what_each_choice_would_show():
    rows = make_rows()
    values = {
        "status": STATUSES,
        "severity": ("low", "medium", "high"),
        "category": ("gendered_term", "character_judgement", "contested_label"),
    }
    searches = ("", "roles")
    for status, severity, search in itertools.product((None, "open"), (None, "medium"), searches):
        state = FilterState(status=status, severity=severity, search=search)
        for dimension in DIMENSIONS:
            counts = option_counts(rows, state, dimension)
            for value in values[dimension]:
                chosen = FilterState(**{**state.__dict__, dimension: value})
                assert counts.get(value, 0) == len(apply_filters(rows, chosen)), (state, value)
