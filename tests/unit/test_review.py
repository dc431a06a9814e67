"""The review session: one set of decision rules for the app and the command line."""

from __future__ import annotations

import shutil
from datetime import UTC, datetime
from pathlib import Path

import pytest

from labelreview._resources import sample_sets_dir
from labelreview.decisions import verify_log
from labelreview.errors import DecisionError, LogLockedError
from labelreview.review import DecisionRequest, ReviewSession, resolve_curator

SAMPLE = sample_sets_dir() / "harbour_archive"
FLAGGED = "people/roles/cleaning_lady"
CLEANER = "people/roles/cleaner"
REASON = "a neutral job word exists for this"


@pytest.fixture(scope="module")
def sample_copy(tmp_path_factory: pytest.TempPathFactory) -> Path:
    target = tmp_path_factory.mktemp("review") / "harbour"
    shutil.copytree(SAMPLE, target)
    return target


@pytest.fixture
def session(sample_copy: Path, tmp_path: Path) -> ReviewSession:
    # Each test gets its own log in tmp_path by pointing a fresh config copy at it.
    folder = tmp_path / "ds"
    shutil.copytree(sample_copy, folder)
    return ReviewSession.open(folder, curator="mira")


def test_flags_are_the_ranked_queue_highest_score_first(session: ReviewSession):
    # The queue replaced the scan's severity order: every lexicon flag is in it, plus labels
    # only the data signals flag, ranked by score (see labelreview/queue.py).
    scores = [f.score for f in session.flags]
    assert scores == sorted(scores, reverse=True)
    assert FLAGGED in {f.label for f in session.flags}
    lexicon = {f.label for f in session.scanned.result.findings}
    assert lexicon <= {f.label for f in session.flags}
    assert session.progress() == (0, len(session.flags))
    assert session.flags is session.flags  # computed once per session


@pytest.mark.parametrize(
    ("request_", "message"),
    [
        (DecisionRequest(FLAGGED, "accept", ""), "a reason is required"),
        (DecisionRequest(FLAGGED, "accept", "   "), "a reason is required"),
        (DecisionRequest(FLAGGED, "accept", "too short"), "the reason is too short"),
        (DecisionRequest("people/roles/cleaning_ladies", "accept", REASON), "did you mean"),
        (DecisionRequest(FLAGGED, "rename", REASON), "a rename needs a new name"),
        (DecisionRequest(FLAGGED, "rename", REASON, new_label=FLAGGED), "same as the old one"),
        (DecisionRequest(FLAGGED, "rename", REASON, new_label="a\tb"), "control characters"),
        (DecisionRequest(FLAGGED, "retire", REASON, fallback="nowhere"), "not a label of"),
        (DecisionRequest(FLAGGED, "retire", REASON, fallback=FLAGGED), "fall back to itself"),
        (DecisionRequest(FLAGGED, "accept", REASON, fallback=CLEANER), "only a retirement"),
        (DecisionRequest(FLAGGED, "shrug", REASON), "action must be one of"),
    ],
)
def test_bad_requests_are_refused_and_nothing_is_written(session, request_, message):
    check = session.check(request_)
    assert not check.ok and any(message in e for e in check.errors), check.errors
    with pytest.raises(DecisionError, match="refused"):
        session.decide(request_)
    assert not session.log.path.exists()


def test_rename_onto_an_existing_label_is_a_merge(session: ReviewSession):
    check = session.check(DecisionRequest(FLAGGED, "rename", REASON, new_label=CLEANER))
    assert check.ok and check.merge
    assert any("merges" in w for w in check.warnings)
    entry = session.decide(check.request)
    assert entry.get("merge") is True and entry.get("new_label") == CLEANER
    assert session.status(FLAGGED) == "renamed"


def test_new_name_that_is_itself_flagged_is_warned(session: ReviewSession):
    check = session.check(DecisionRequest(FLAGGED, "rename", REASON, new_label="cleaning woman"))
    assert check.ok and any("itself flagged" in w for w in check.warnings)


def test_decision_entry_carries_the_record(session: ReviewSession):
    entry = session.decide(DecisionRequest(FLAGGED, "accept", f"  {REASON}  "))
    data = entry.data
    assert data["reason"] == REASON  # trimmed
    assert data["curator"] == "mira"
    assert data["finding"]["label"] == FLAGGED and data["finding"]["severity"] in (
        "low",
        "medium",
        "high",
    )
    assert data["finding"]["categories"]
    assert data["lexicon_hash"] == session.lexicon_hash and data["lexicon_hash"].startswith(
        "sha256:"
    )
    assert data["dataset_fingerprint"] == session.fingerprint().digest
    assert set(session.fingerprint().files) >= {"annotations", "taxonomy", "config"}


def test_undo_is_a_new_entry(session: ReviewSession):
    session.decide(DecisionRequest(FLAGGED, "retire", REASON, fallback=CLEANER))
    assert session.status(FLAGGED) == "retired"
    undo = session.undo("retired the wrong one, sorry")
    assert undo.kind == "revoke" and undo.get("revokes") == 1
    assert session.status(FLAGGED) == "open"
    assert len(verify_log(session.log.path).entries) == 2  # history kept
    with pytest.raises(DecisionError, match="no decision to undo"):
        session.undo("nothing left to take back")
    with pytest.raises(DecisionError, match="at least 10 characters"):
        session.revoke(1, "no")


def test_batch_is_all_or_nothing(session: ReviewSession):
    good = DecisionRequest(FLAGGED, "accept", REASON)
    bad = DecisionRequest("no/such/label", "accept", REASON, source="batch.yaml line 7")
    with pytest.raises(DecisionError, match=r"batch.yaml line 7: decision on 'no/such/label'"):
        session.decide_many([good, bad])
    assert not session.log.path.exists()
    entries = session.decide_many([good, DecisionRequest(CLEANER, "accept", REASON)])
    assert [e.seq for e in entries] == [1, 2]


def test_unresolved_respects_the_gate_level(session: ReviewSession):
    high = [f for f in session.flags if f.severity == "high"]
    assert high
    assert len(session.unresolved("high")) == len(high)
    assert len(session.unresolved("low")) == len(session.flags)
    session.decide(DecisionRequest(high[0].label, "accept", REASON))
    assert len(session.unresolved("high")) == len(high) - 1


def test_held_session_locks_out_a_second_one(session: ReviewSession):
    other = ReviewSession.open(session.dataset.root, curator="tomas")
    with session.hold():
        session.decide(DecisionRequest(FLAGGED, "accept", REASON))
        with pytest.raises(LogLockedError, match=r"the review app \(mira\)"):
            other.decide(DecisionRequest(CLEANER, "accept", REASON))
        assert session.status(FLAGGED) == "accepted"
    other.decide(DecisionRequest(CLEANER, "accept", REASON))
    assert other.status(FLAGGED) == "accepted"  # the other session sees the first one's work


def test_clock_is_injectable(sample_copy: Path, tmp_path: Path):
    folder = tmp_path / "ds"
    shutil.copytree(sample_copy, folder)
    fixed = datetime(2026, 1, 2, 3, 4, 5, tzinfo=UTC)
    session = ReviewSession.open(folder, curator="mira", clock=lambda: fixed)
    entry = session.decide(DecisionRequest(FLAGGED, "accept", REASON))
    assert entry.time == "2026-01-02T03:04:05.000Z"


def test_resolve_curator_order(monkeypatch):
    assert resolve_curator(" ana ") == "ana"
    monkeypatch.setattr("getpass.getuser", lambda: "osuser")
    assert resolve_curator(None) == "osuser"
