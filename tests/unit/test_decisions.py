"""The decision log: hashing, the chain, tamper detection, torn tails, locking, the fold."""

from __future__ import annotations

import hashlib
import json
import os
import re
import subprocess
import sys
import threading
import time
from datetime import UTC, datetime
from pathlib import Path

import pytest

from labelreview import decisions as dl
from labelreview.decisions import (
    GENESIS,
    DecisionLog,
    canonical_json,
    entry_hash,
    fold,
    repair_log,
    rfc3339,
    verify_log,
)
from labelreview.errors import LogError, LogLockedError

# RFC 3339 section 5.6 "date-time" with the "Z" offset, written as a regular expression
# (RFC 3339, Date and Time on the Internet: Timestamps, 2002).
RFC3339 = re.compile(r"^\d{4}-\d{2}-\d{2}T\d{2}:\d{2}:\d{2}(\.\d+)?(Z|[+-]\d{2}:\d{2})$")


def decision(label: str, action: str = "accept", **extra: object) -> dict[str, object]:
    body: dict[str, object] = {
        "kind": "decision",
        "curator": "mira",
        "label": label,
        "action": action,
        "new_label": None,
        "fallback": None,
        "merge": False,
        "reason": f"reason for {label}",
        "finding": {"label": label, "severity": "high"},
        "lexicon_hash": "sha256:lex",
        "dataset_fingerprint": "sha256:data",
    }
    body.update(extra)
    return body


def write_entries(path: Path, bodies: list[dict[str, object]]) -> list[dl.Entry]:
    log = DecisionLog(path)
    with log.writer() as writer:
        return [writer.append(b) for b in bodies]


@pytest.fixture
def log_path(tmp_path: Path) -> Path:
    path = tmp_path / "labelreview-log.jsonl"
    write_entries(path, [decision("a"), decision("b", "retire"), decision("c")])
    return path


def test_sha256_is_the_standard_one():
    # FIPS 180-4 / NIST example "abc" -> SHA-256 digest (published test vector).
    assert hashlib.sha256(b"abc").hexdigest() == (
        "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
    )


def test_entry_hash_is_sha256_of_canonical_json_without_hash(log_path: Path):
    lines = log_path.read_bytes().splitlines()
    first = json.loads(lines[0])
    unsigned = {k: v for k, v in first.items() if k != "hash"}
    # Canonical form written out independently: sorted keys, no spaces, UTF-8.
    expected = hashlib.sha256(
        json.dumps(unsigned, sort_keys=True, separators=(",", ":"), ensure_ascii=False).encode()
    ).hexdigest()
    assert first["hash"] == expected == entry_hash(first)
    assert first["prev"] == GENESIS and first["seq"] == 1 and first["v"] == 1
    second = json.loads(lines[1])
    assert second["prev"] == first["hash"] and second["seq"] == 2
    assert lines[0] == canonical_json(first)  # the file holds exactly the canonical bytes
    assert RFC3339.match(first["time"]) and first["time"].endswith("Z")


def test_rfc3339_is_utc():
    moment = datetime(2026, 12, 2, 18, 37, 29, 123456, tzinfo=UTC)
    assert rfc3339(moment) == "2026-12-02T18:37:29.123Z"


def test_clean_log_verifies(log_path: Path):
    result = verify_log(log_path)
    assert result.ok and len(result.entries) == 3
    assert result.head == json.loads(log_path.read_bytes().splitlines()[-1])["hash"]
    assert "verified (3 entries" in result.status()


def test_missing_log_is_empty_and_valid(tmp_path: Path):
    result = verify_log(tmp_path / "none.jsonl")
    assert result.ok and not result.exists and result.head == GENESIS


def test_changed_byte_is_named(log_path: Path):
    raw = log_path.read_bytes().replace(b"reason for b", b"reason for B")
    log_path.write_bytes(raw)
    result = verify_log(log_path)
    assert not result.ok
    assert result.problem is not None and result.problem.line == 2
    assert "changed after it was written" in result.problem.message
    assert len(result.entries) == 1


def test_changed_entry_with_recomputed_hash_breaks_the_next_link(log_path: Path):
    lines = log_path.read_bytes().splitlines()
    second = json.loads(lines[1])
    second["reason"] = "a different story"
    second["hash"] = entry_hash(second)
    lines[1] = canonical_json(second)
    log_path.write_bytes(b"\n".join(lines) + b"\n")
    result = verify_log(log_path)
    assert result.problem is not None and result.problem.line == 3
    assert "chain broken at seq 3" in result.problem.message


def test_deleted_line_is_named(log_path: Path):
    lines = log_path.read_bytes().splitlines()
    del lines[1]
    log_path.write_bytes(b"\n".join(lines) + b"\n")
    result = verify_log(log_path)
    assert result.problem is not None and result.problem.line == 2
    assert "expected seq 2, found 3" in result.problem.message


def test_swapped_lines_are_named(log_path: Path):
    lines = log_path.read_bytes().splitlines()
    lines[1], lines[2] = lines[2], lines[1]
    log_path.write_bytes(b"\n".join(lines) + b"\n")
    result = verify_log(log_path)
    assert result.problem is not None and result.problem.line == 2
    assert "sequence broken" in result.problem.message


def test_cut_off_tail_needs_a_recorded_head(log_path: Path):
    head = verify_log(log_path).head
    lines = log_path.read_bytes().splitlines()
    log_path.write_bytes(b"\n".join(lines[:2]) + b"\n")
    assert verify_log(log_path).ok  # a shorter chain is still a chain
    result = verify_log(log_path, expect_head=head)
    assert not result.ok and "not in the chain" in str(result.problem)


@pytest.mark.parametrize(
    ("mutate", "message"),
    [
        (lambda d: d.update(action="delete"), "'action' must be one of"),
        (lambda d: d.update(time="yesterday"), "not an RFC 3339 timestamp"),
        (lambda d: d.pop("reason"), "'reason' must be non-empty text"),
        (lambda d: d.update(v=2), "'v' must be 1"),
    ],
)
def test_schema_errors_are_named(log_path: Path, mutate, message):
    lines = log_path.read_bytes().splitlines()
    data = json.loads(lines[0])
    mutate(data)
    data["hash"] = entry_hash(data)
    lines[0] = canonical_json(data)
    log_path.write_bytes(b"\n".join(lines) + b"\n")
    result = verify_log(log_path)
    assert result.problem is not None and result.problem.line == 1
    assert message in result.problem.message


def test_invalid_json_names_the_column(log_path: Path):
    lines = log_path.read_bytes().splitlines()
    lines[2] = lines[2][:10] + b"}" + lines[2][10:]
    log_path.write_bytes(b"\n".join(lines) + b"\n")
    result = verify_log(log_path)
    assert result.problem is not None and result.problem.line == 3
    assert result.problem.column is not None and "not valid JSON" in result.problem.message


def test_torn_tail_is_detected_refused_and_repaired_without_loss(log_path: Path):
    good = log_path.read_bytes()
    torn = b'{"v":1,"seq":4,"kind":"decis'
    with open(log_path, "ab") as handle:
        handle.write(torn)
    result = verify_log(log_path)
    assert result.problem is None and result.torn_tail == torn and result.torn_line == 4
    assert "labelreview log repair" in result.status()
    with pytest.raises(LogError, match="torn line") as info:
        write_entries(log_path, [decision("d")])
    assert info.value.line == 4
    side = repair_log(log_path)
    assert side is not None and side.read_bytes() == torn
    assert log_path.read_bytes() == good  # nothing lost: log + side file = the bytes before
    assert verify_log(log_path).ok
    write_entries(log_path, [decision("d")])
    assert len(verify_log(log_path).entries) == 4
    assert repair_log(log_path) is None


def test_repair_refuses_a_tampered_log(log_path: Path):
    log_path.write_bytes(log_path.read_bytes().replace(b"reason for a", b"reason for A"))
    with pytest.raises(LogError, match="repair only handles a torn last line"):
        repair_log(log_path)


def test_writer_refuses_a_tampered_log(log_path: Path):
    log_path.write_bytes(log_path.read_bytes().replace(b"reason for c", b"reason for C"))
    before = log_path.read_bytes()
    with pytest.raises(LogError, match="does not verify"):
        write_entries(log_path, [decision("d")])
    assert log_path.read_bytes() == before


def test_invalid_entry_never_reaches_the_file(log_path: Path):
    before = log_path.read_bytes()
    with pytest.raises(LogError, match="refusing to write an invalid entry"):
        write_entries(log_path, [decision("d", action="maybe")])
    assert log_path.read_bytes() == before


def test_append_is_fsynced_before_it_returns(tmp_path: Path, monkeypatch):
    calls: list[int] = []
    real = os.fsync
    monkeypatch.setattr(dl.os, "fsync", lambda fd: (calls.append(fd), real(fd))[1])
    path = tmp_path / "log.jsonl"
    with DecisionLog(path).writer() as writer:
        writer.append(decision("a"))
        assert calls, "append returned before fsync"
        assert path.read_bytes().endswith(b"\n")


def test_session_lock_refuses_others_with_holder_and_time(log_path: Path):
    log = DecisionLog(log_path)
    with log.writer(holder="the review app (mira)", session=True):
        start = time.monotonic()
        with pytest.raises(LogLockedError) as info:
            write_entries(log_path, [decision("d")])
        assert time.monotonic() - start < 2  # refused at once, no waiting on a session
        message = str(info.value)
        assert "the review app (mira)" in message and "since 20" in message
        assert f"pid {os.getpid()}" in message
    write_entries(log_path, [decision("d")])  # released afterwards
    assert len(verify_log(log_path).entries) == 4


def test_short_writers_wait_for_each_other(log_path: Path):
    log = DecisionLog(log_path)
    released = threading.Event()

    def hold_briefly() -> None:
        with log.writer(holder="first"):
            released.wait(0.3)

    thread = threading.Thread(target=hold_briefly)
    thread.start()
    time.sleep(0.05)
    write_entries(log_path, [decision("d")])  # waits for the first writer, then appends
    thread.join()
    assert len(verify_log(log_path).entries) == 4


WRITER_SCRIPT = """
import sys
from pathlib import Path
from labelreview.decisions import DecisionLog
log = DecisionLog(Path(sys.argv[1]))
for i in range(int(sys.argv[3])):
    with log.writer(holder=sys.argv[2], wait=30) as w:
        w.append({"kind": "decision", "curator": sys.argv[2], "label": f"{sys.argv[2]}-{i}",
                  "action": "accept", "new_label": None, "fallback": None, "merge": False,
                  "reason": "x" * 2000, "finding": {}, "lexicon_hash": "h",
                  "dataset_fingerprint": "f"})
"""


def test_two_processes_writing_at_once_lose_nothing(tmp_path: Path):
    path = tmp_path / "log.jsonl"
    n = 40
    procs = [
        subprocess.Popen([sys.executable, "-c", WRITER_SCRIPT, str(path), name, str(n)])
        for name in ("alpha", "beta")
    ]
    for proc in procs:
        assert proc.wait(timeout=120) == 0
    result = verify_log(path)
    assert result.ok, result.status()
    labels = {e.label for e in result.entries}
    assert labels == {f"{name}-{i}" for name in ("alpha", "beta") for i in range(n)}
    assert [e.seq for e in result.entries] == list(range(1, 2 * n + 1))


def test_fold_supersedes_and_revokes(tmp_path: Path):
    path = tmp_path / "log.jsonl"
    log = DecisionLog(path)
    with log.writer() as w:
        w.append(decision("a"))
        w.append(decision("a", "rename", new_label="b"))
        w.append(
            {
                "kind": "revoke",
                "curator": "mira",
                "label": "a",
                "revokes": 2,
                "reason": "back to accept",
            }
        )
        w.append(decision("c", "retire", fallback="d"))
    state = log.state()
    assert state.status("a") == "accepted" and state.decision("a").seq == 1
    assert [e.seq for e in state.labels["a"].history] == [1, 2, 3]
    assert state.status("c") == "retired" and state.status("zzz") == "open"
    assert state.revoked == frozenset({2})
    assert state.last_active_decision().seq == 4
    assert [e.seq for e in state.active_decisions()] == [1, 4]


def test_revoke_must_point_at_an_earlier_decision(tmp_path: Path):
    path = tmp_path / "log.jsonl"
    with DecisionLog(path).writer() as w, pytest.raises(LogError, match="not an earlier decision"):
        w.append({"kind": "revoke", "curator": "mira", "revokes": 7, "reason": "nothing here"})


def test_fold_of_nothing():
    state = fold([])
    assert state.head == GENESIS and state.labels == {} and state.last_active_decision() is None
