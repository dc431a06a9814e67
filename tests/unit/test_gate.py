"""The release gate and the sign-off through the core API, on copies of the sample set.

What counts as "unresolved", "tampered" and "void" is the contract of issue 4 (the gate fails on
open flags at or above the level, on a log that does not verify, on decisions made with another
lexicon set, and, when asked, on a sign-off voided by a later decision or changed data or
lexicon). The exit-code convention (0 nothing found, 1 found something, 2 trouble) follows
POSIX ``diff`` and ``grep`` (POSIX.1-2017, EXIT STATUS sections). Everything else here is
common practice, no source.
"""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest

from labelreview._resources import sample_sets_dir
from labelreview.decisions import verify_log
from labelreview.errors import DecisionError, LogError, UsageError
from labelreview.gate import (
    check_gate,
    find_label_lines,
    label_fingerprint,
    sign_off,
    signoff_refusals,
    signoff_status,
)
from labelreview.model import SEVERITY_RANK
from labelreview.review import DecisionRequest, ReviewSession

SAMPLE = sample_sets_dir() / "harbour_archive"
REASON = "checked against the catalogue card"
STATEMENT = "Reviewed every flagged label with the archive board."


@pytest.fixture
def folder(tmp_path: Path) -> Path:
    target = tmp_path / "harbour"
    shutil.copytree(SAMPLE, target)
    (target / "labelreview-log.jsonl").unlink(missing_ok=True)
    return target


def session_of(folder: Path, curator: str = "mira") -> ReviewSession:
    return ReviewSession.open(folder, curator=curator)


def decide_at(session: ReviewSession, level: str, *, curator: str = "mira") -> None:
    """Accept every open flag at or above ``level``."""
    requests = [
        DecisionRequest(label=f.label, action="accept", reason=REASON)
        for f in session.unresolved(level)
    ]
    if requests:
        session.decide_many(requests, curator=curator)


def add_lexicon_layer(folder: Path) -> None:
    """A dataset layer that stops one label being flagged: the lexicon hash changes."""
    (folder / "extra_layer.yaml").write_text(
        "schema: 1\nlayer: test\nallow_labels: [people/roles/net_mender]\n", encoding="utf-8"
    )
    config = folder / "labelreview.yaml"
    text = config.read_text(encoding="utf-8")
    assert "  layers: []" in text
    config.write_text(text.replace("  layers: []", "  layers: [extra_layer.yaml]"), "utf-8")


def test_fresh_sample_fails_on_every_open_flag_at_the_level(folder: Path):
    session = session_of(folder)
    result = check_gate(session)
    expected = [f.label for f in session.flags if SEVERITY_RANK[f.severity] >= 2]
    assert [g.label for g in result.unresolved] == expected
    assert result.fail_on == "medium"  # the config default
    assert result.exit_code == 1 and not result.passed
    assert result.verdict().startswith(f"FAIL: {len(expected)} unresolved flags at or above medium")
    data = result.to_dict()
    assert data["verdict"] == "fail" and data["exit_code"] == 1
    assert data["counts"]["flags"] == len(session.flags)
    assert sum(data["counts"]["flags_by_severity"].values()) == len(session.flags)
    assert data["log"]["exists"] is False and data["signoff"]["state"] == "none"


def test_levels_and_decisions_move_the_gate(folder: Path):
    session = session_of(folder)
    decide_at(session, "high")
    assert check_gate(session, fail_on="high").exit_code == 0
    assert check_gate(session, fail_on="medium").exit_code == 1
    decide_at(session, "medium")
    result = check_gate(session)
    assert result.exit_code == 0, result.failures()
    assert result.verdict().startswith("PASS: no unresolved flags at or above medium")
    # Low flags are still open, so the strictest level fails.
    low = check_gate(session, fail_on="low")
    assert low.exit_code == 1
    assert {g.flag.severity for g in low.unresolved} == {"low"}
    # Undo brings one back.
    session.undo("decided too quickly, look again")
    assert check_gate(session).exit_code == 1


def test_bad_level_is_a_usage_error(folder: Path):
    with pytest.raises(UsageError, match="fail_on must be one of low, medium, high; got 'severe'"):
        check_gate(session_of(folder), fail_on="severe")


def test_tampered_log_fails_and_names_the_problem(folder: Path):
    session = session_of(folder)
    decide_at(session, "medium")
    log = session.log.path
    *good, last = log.read_bytes().splitlines(keepends=True)
    log.write_bytes(b"".join(good) + last.replace(b"catalogue card", b"catalogue cart"))
    result = check_gate(session)
    assert result.exit_code == 1
    assert "does not verify" in result.verdict() and "hash mismatch" in result.verdict()
    # Counted against the verified prefix: only the last decision no longer counts.
    assert len(result.unresolved) == 1


def test_torn_tail_fails_with_the_repair_command(folder: Path):
    session = session_of(folder)
    decide_at(session, "medium")
    with open(session.log.path, "ab") as handle:
        handle.write(b'{"v":1,"seq":99')
    result = check_gate(session)
    assert result.exit_code == 1
    assert "torn last line" in result.verdict() and "labelreview log repair" in result.verdict()
    assert result.unresolved == ()


def test_lexicon_change_fails_unless_allowed(folder: Path):
    session = session_of(folder)
    decide_at(session, "medium")
    add_lexicon_layer(folder)
    changed = session_of(folder)
    assert changed.lexicon_hash != session.lexicon_hash
    result = check_gate(changed)
    assert result.lexicon_changed and result.exit_code == 1
    n = len(result.lexicon_changes)
    assert n == len(changed.state().active_decisions())
    assert f"the lexicon set changed since {n} decisions in force were made" in result.verdict()
    allowed = check_gate(changed, allow_lexicon_change=True)
    assert allowed.exit_code == 0 and "allowed by --allow-lexicon-change" in allowed.verdict()


def test_signoff_refusals(folder: Path):
    session = session_of(folder)
    refusals = signoff_refusals(session, "ana", "short")
    assert refusals[0] == "the statement is too short (5 characters; at least 10 needed)"
    assert any("flag(s) at or above medium severity are unresolved" in r for r in refusals)
    assert signoff_refusals(session, " ", STATEMENT)[0] == "an approver name is required"
    with pytest.raises(DecisionError, match="^sign-off refused: .* are unresolved"):
        sign_off(session, approver="ana", statement=STATEMENT)
    assert not session.log.path.exists()  # nothing written


def test_signoff_refused_on_a_tampered_log(folder: Path):
    session = session_of(folder)
    decide_at(session, "medium")
    lines = session.log.path.read_bytes().splitlines(keepends=True)
    session.log.path.write_bytes(b"".join([lines[1], lines[0], *lines[2:]]))  # swapped
    with pytest.raises(DecisionError, match="the decision log does not verify"):
        sign_off(session, approver="ana", statement=STATEMENT)


def test_four_eyes_names_the_approvers_own_high_decision(folder: Path):
    config = folder / "labelreview.yaml"
    config.write_text(
        config.read_text("utf-8") + "decisions:\n  four_eyes: true\n", encoding="utf-8"
    )
    session = session_of(folder)
    high = [f.label for f in session.flags if f.severity == "high"]
    decide_at(session, "high", curator="ana")
    decide_at(session, "medium", curator="mira")
    with pytest.raises(DecisionError, match=rf"four-eyes rule: ana made .* label '{high[0]}'"):
        sign_off(session, approver="ana", statement=STATEMENT)
    entry = sign_off(session, approver="mira-not-ana", statement=STATEMENT)
    assert entry.kind == "signoff"
    # mira decided only medium flags: the rule does not stop her.
    assert not [r for r in signoff_refusals(session, "mira", STATEMENT) if "four-eyes" in r]


def test_signoff_is_bound_and_valid(folder: Path):
    session = session_of(folder)
    decide_at(session, "medium")
    head = session.state().head
    entry = sign_off(session, approver="ana", statement="  Reviewed   with the board.  ")
    assert entry.get("signs_head") == head == entry.get("prev")
    assert entry.get("dataset_fingerprint") == session.fingerprint().digest
    assert entry.get("lexicon_hash") == session.lexicon_hash
    assert entry.get("fail_on") == "medium"
    assert entry.get("statement") == "Reviewed with the board."
    assert verify_log(session.log.path).ok
    status = signoff_status(session)
    assert status.valid and status.reasons == ()
    assert status.summary().startswith(f"signed off by ana at {entry.time} (seq {entry.seq})")
    assert status.to_dict()["signoff"]["hash"] == entry.hash
    result = check_gate(session, require_signoff=True)
    assert result.exit_code == 0 and "signed off by ana" in result.verdict()


def test_no_signoff_fails_require_signoff(folder: Path):
    session = session_of(folder)
    decide_at(session, "medium")
    result = check_gate(session, require_signoff=True)
    assert result.exit_code == 1
    assert "not signed off: no sign-off has been recorded" in result.verdict()
    assert check_gate(session).exit_code == 0  # not asked for: not required


def test_later_decision_voids_the_signoff(folder: Path):
    session = session_of(folder)
    decide_at(session, "medium")
    sign_off(session, approver="ana", statement=STATEMENT)
    low = session.unresolved("low")[0]
    later = session.decide(DecisionRequest(low.label, "accept", REASON), curator="mira")
    status = signoff_status(session)
    assert status.state == "void"
    assert status.reasons == (
        f"a decision on '{low.label}' (seq {later.seq}, by mira) came after it",
    )
    assert check_gate(session, require_signoff=True).exit_code == 1
    session.undo("that one needs the board again")
    assert "and 1 more came after it" in signoff_status(session).reasons[0]


def test_data_change_voids_the_signoff_and_names_the_file(folder: Path):
    session = session_of(folder)
    decide_at(session, "medium")
    sign_off(session, approver="ana", statement=STATEMENT)
    with open(folder / "annotations.csv", "a", encoding="utf-8") as handle:
        handle.write("hb_0001,gannet,weather/rain\n")
    status = signoff_status(session_of(folder))
    assert status.state == "void"
    assert status.reasons == ("the dataset files changed since it was given (annotations)",)


def test_lexicon_change_voids_the_signoff(folder: Path):
    session = session_of(folder)
    decide_at(session, "medium")
    sign_off(session, approver="ana", statement=STATEMENT)
    add_lexicon_layer(folder)
    reasons = signoff_status(session_of(folder)).reasons
    # The config file is part of the dataset fingerprint, so both are reported.
    assert reasons[0] == "the dataset files changed since it was given (config)"
    assert reasons[1].startswith("the lexicon set changed since it was given (then sha256:")


def test_signoff_at_a_looser_level_does_not_cover_a_stricter_check(folder: Path):
    session = session_of(folder)
    decide_at(session, "high")
    sign_off(session, approver="ana", statement=STATEMENT, fail_on="high")
    assert signoff_status(session, fail_on="high").valid
    status = signoff_status(session, fail_on="medium")
    assert status.reasons == (
        "it was given at gate level high; this check asks for medium, which is stricter",
    )


def test_signoff_naming_the_wrong_head_is_void(folder: Path):
    session = session_of(folder)
    decide_at(session, "medium")
    session.append_entry(
        {
            "kind": "signoff",
            "approver": "ana",
            "statement": STATEMENT,
            "signs_head": "0" * 64,
            "dataset_fingerprint": session.fingerprint().digest,
            "lexicon_hash": session.lexicon_hash,
            "fail_on": "medium",
        }
    )
    status = signoff_status(session)
    assert status.state == "void"
    assert status.reasons[0].startswith("it names log head 000000000000, but the head when")


def test_tampered_log_voids_the_signoff(folder: Path):
    session = session_of(folder)
    decide_at(session, "medium")
    sign_off(session, approver="ana", statement=STATEMENT)
    raw = session.log.path.read_bytes()
    session.log.path.write_bytes(raw.replace(b'"approver":"ana"', b'"approver":"eve"'))
    status = signoff_status(session)
    assert status.state == "void" and "does not verify" in status.reasons[0]


def test_a_write_racing_the_signoff_is_reported_not_hidden(folder: Path, monkeypatch):
    session = session_of(folder)
    decide_at(session, "medium")
    other = session_of(folder, curator="olu")
    original = session.append_entry
    low = session.unresolved("low")[0]

    def racing(body):  # another process appends between the check and the write
        other.decide(DecisionRequest(low.label, "accept", REASON))
        return original(body)

    monkeypatch.setattr(session, "append_entry", racing)
    with pytest.raises(LogError, match="the log changed while signing off; sign-off seq"):
        sign_off(session, approver="ana", statement=STATEMENT)
    assert signoff_status(session).state == "void"


def test_find_label_lines_matches_whole_fields(tmp_path: Path):
    path = tmp_path / "taxonomy.csv"
    path.write_text(
        'id,name\n1,people/roles/fishermen\n2,"people/roles/fisher"\n3,people/roles/fisher/net\n',
        encoding="utf-8",
    )
    lines = find_label_lines(path, ["people/roles/fisher", "people/roles/fishermen", "gone"], None)
    assert lines == {"people/roles/fishermen": 2, "people/roles/fisher": 3}
    assert find_label_lines(tmp_path / "x.parquet", ["a"], None) == {}


def test_locations_point_at_the_taxonomy_line(folder: Path):
    import csv

    result = check_gate(session_of(folder))
    with open(folder / "taxonomy.csv", encoding="utf-8", newline="") as handle:
        rows = list(csv.reader(handle))
    line_of = {row[1]: number for number, row in enumerate(rows, start=1)}  # one row per line
    for gate_flag in result.unresolved:
        assert gate_flag.location is not None
        assert gate_flag.location.uri == "taxonomy.csv" and gate_flag.location.relative
        assert gate_flag.location.line == line_of[gate_flag.label]


def test_label_fingerprint_is_stable_and_distinct():
    assert label_fingerprint("a", "b") == label_fingerprint("a", "b")
    assert label_fingerprint("a", "b") != label_fingerprint("a", "c")
    assert label_fingerprint("ab", "c") != label_fingerprint("a", "bc")
    # SHA-256 of b"a\x00b", computed independently with hashlib's reference implementation.
    import hashlib

    assert label_fingerprint("a", "b") == hashlib.sha256(b"a\x00b").hexdigest()
