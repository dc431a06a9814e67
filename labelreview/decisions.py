"""The decision log: an append-only, hash-chained JSON Lines file, and the state folded from it.

Everything a curator or approver does is one entry in this file, and nothing else records it:
the current state of every label is a fold over the entries, undo is a new entry that revokes an
earlier one, and history is never rewritten. The review app, ``labelreview decide`` and
``labelreview signoff`` all write through :meth:`DecisionLog.writer`, so there is one set of
rules for appending.

Chain. Each line is one JSON object with ``v`` (schema version 1), ``seq`` (1, 2, 3, ...),
``prev`` (the previous entry's ``hash``; 64 zeros for the first) and ``hash``: the SHA-256 hex
digest of the entry's canonical JSON without ``hash`` (keys sorted, no spaces, UTF-8; see
:func:`canonical_json`). Changing a byte, deleting a line or swapping two lines breaks the
chain at a place :func:`verify_log` names. Cutting entries off the end leaves a valid shorter
chain; only a head hash recorded elsewhere (an apply manifest, an export, a sign-off, CI)
reveals that, so :func:`verify_log` takes an ``expect_head``.

Durability. An append is one ``write`` of the whole line, then flush and ``fsync``, before the
caller is told it is saved. A line without its final newline is a torn tail (the machine died
mid-write): it is reported, appends are refused until :func:`repair_log` moves it to a side file.

Locking. A writer holds an exclusive ``flock`` on ``<log>.lock`` and writes who holds it and
since when into that file, so a refused writer can say so. Short writers (one ``decide``) wait a
few seconds for another short writer; a session writer (the review app) is refused at once.
POSIX only (``fcntl``), like the rest of the single-machine review workflow.
"""

from __future__ import annotations

import contextlib
import getpass
import hashlib
import json
import os
import socket
import time
from collections.abc import Callable, Iterator, Mapping, Sequence
from dataclasses import dataclass, field
from datetime import UTC, datetime
from pathlib import Path
from typing import Any, Literal

from labelreview.errors import LogError, LogLockedError

SCHEMA_VERSION = 1
GENESIS = "0" * 64
ACTIONS: tuple[str, ...] = ("accept", "rename", "retire")
KINDS: tuple[str, ...] = ("decision", "revoke", "signoff")

Action = Literal["accept", "rename", "retire"]
Clock = Callable[[], datetime]

_HEX = frozenset("0123456789abcdef")


def utc_now() -> datetime:
    """The current time in UTC."""
    return datetime.now(UTC)


def rfc3339(moment: datetime) -> str:
    """``2026-12-02T18:37:29.123Z``: RFC 3339, UTC, millisecond precision."""
    moment = moment.astimezone(UTC)
    return moment.isoformat(timespec="milliseconds").replace("+00:00", "Z")


def parse_rfc3339(text: str) -> datetime:
    """Read a timestamp written by :func:`rfc3339` (or any RFC 3339 one with a zone)."""
    value = datetime.fromisoformat(text.replace("Z", "+00:00"))
    if value.tzinfo is None:
        raise ValueError("timestamp has no time zone")
    return value


def canonical_json(body: Mapping[str, Any]) -> bytes:
    """Sorted keys, no insignificant spaces, UTF-8: the bytes an entry's hash is taken over."""
    return json.dumps(
        body, sort_keys=True, separators=(",", ":"), ensure_ascii=False, allow_nan=False
    ).encode("utf-8")


def entry_hash(body: Mapping[str, Any]) -> str:
    """SHA-256 hex digest of an entry's canonical JSON, leaving out its own ``hash``."""
    return hashlib.sha256(
        canonical_json({k: v for k, v in body.items() if k != "hash"})
    ).hexdigest()


@dataclass(frozen=True)
class Entry:
    """One verified line of the log."""

    data: dict[str, Any]
    """The whole JSON object as written."""
    line: int
    """1-based line number in the file."""

    @property
    def seq(self) -> int:
        return int(self.data["seq"])

    @property
    def kind(self) -> str:
        return str(self.data["kind"])

    @property
    def hash(self) -> str:
        return str(self.data["hash"])

    @property
    def time(self) -> str:
        return str(self.data["time"])

    @property
    def actor(self) -> str:
        """The curator of a decision or revocation, the approver of a sign-off."""
        return str(self.data.get("curator") or self.data.get("approver") or "")

    @property
    def label(self) -> str | None:
        value = self.data.get("label")
        return None if value is None else str(value)

    def get(self, key: str, default: Any = None) -> Any:
        return self.data.get(key, default)


# -- reading and verifying ---------------------------------------------------------------------


@dataclass(frozen=True)
class Problem:
    """The first thing wrong with a log."""

    line: int
    message: str
    column: int | None = None

    def __str__(self) -> str:
        where = f"line {self.line}" + (f", column {self.column}" if self.column else "")
        return f"{where}: {self.message}"


@dataclass(frozen=True)
class Verification:
    """What :func:`verify_log` found."""

    path: Path
    entries: tuple[Entry, ...]
    """Entries up to (not including) the first problem."""
    problem: Problem | None = None
    """The first bad entry (tampering, bad schema, broken chain), or None."""
    torn_tail: bytes = b""
    """Bytes after the last newline that do not form a valid entry (an interrupted write)."""
    torn_line: int | None = None
    exists: bool = True

    @property
    def ok(self) -> bool:
        """The chain verifies and there is no torn tail."""
        return self.problem is None and not self.torn_tail

    @property
    def head(self) -> str:
        """The hash of the last good entry (64 zeros for an empty log)."""
        return self.entries[-1].hash if self.entries else GENESIS

    def status(self) -> str:
        """One line for people: ``verified (12 entries, head 3f2a...)`` or what is wrong."""
        if not self.exists:
            return "no decision log yet (nothing decided)"
        if self.problem is not None:
            return f"does not verify: {self.path} {self.problem}"
        if self.torn_tail:
            return (
                f"torn last line at line {self.torn_line} ({len(self.torn_tail)} bytes of an "
                "interrupted write); run: labelreview log repair"
            )
        return f"verified ({len(self.entries)} entries, head {self.head[:12]})"

    def to_dict(self) -> dict[str, Any]:
        return {
            "path": str(self.path),
            "exists": self.exists,
            "ok": self.ok,
            "entries": len(self.entries),
            "head": self.head,
            "problem": None
            if self.problem is None
            else {"line": self.problem.line, "message": self.problem.message},
            "torn_tail_bytes": len(self.torn_tail),
            "status": self.status(),
        }


def _is_hex64(value: Any) -> bool:
    return isinstance(value, str) and len(value) == 64 and set(value) <= _HEX


def _text(data: Mapping[str, Any], key: str, *, optional: bool = False) -> str | None:
    value = data.get(key)
    if value is None and optional:
        return None
    if not isinstance(value, str) or not value.strip():
        raise ValueError(f"'{key}' must be non-empty text")
    return value


def check_schema(data: Any, earlier: Mapping[int, Entry]) -> None:
    """Raise ValueError with a plain message when ``data`` is not a valid entry.

    Args:
        data: The decoded JSON object.
        earlier: Entries before it by ``seq``, for checking what a revocation points at.
    """
    if not isinstance(data, dict):
        raise ValueError("an entry must be a JSON object")
    if data.get("v") != SCHEMA_VERSION:
        raise ValueError(f"'v' must be {SCHEMA_VERSION}; got {data.get('v')!r}")
    for key in ("seq",):
        if not isinstance(data.get(key), int) or isinstance(data.get(key), bool):
            raise ValueError(f"'{key}' must be a whole number")
    for key in ("prev", "hash"):
        if not _is_hex64(data.get(key)):
            raise ValueError(f"'{key}' must be 64 lowercase hex digits")
    kind = data.get("kind")
    if kind not in KINDS:
        raise ValueError(f"'kind' must be one of {', '.join(KINDS)}; got {kind!r}")
    stamp = _text(data, "time")
    try:
        parse_rfc3339(str(stamp))
    except ValueError:
        raise ValueError(f"'time' is not an RFC 3339 timestamp: {stamp!r}") from None
    _text(data, "reason" if kind != "signoff" else "statement")
    if kind == "decision":
        _text(data, "curator")
        _text(data, "label")
        action = data.get("action")
        if action not in ACTIONS:
            raise ValueError(f"'action' must be one of {', '.join(ACTIONS)}; got {action!r}")
        if action == "rename":
            _text(data, "new_label")
        elif data.get("new_label") is not None:
            raise ValueError(f"'new_label' is only for renames, not {action}")
        if action != "retire" and data.get("fallback") is not None:
            raise ValueError("'fallback' is only for retirements")
        _text(data, "fallback", optional=True)
        if not isinstance(data.get("finding"), dict):
            raise ValueError("'finding' must be an object (the flag at decision time)")
        _text(data, "lexicon_hash")
        _text(data, "dataset_fingerprint")
    elif kind == "revoke":
        _text(data, "curator")
        target = data.get("revokes")
        if not isinstance(target, int) or isinstance(target, bool):
            raise ValueError("'revokes' must be the seq of an earlier decision")
        if target not in earlier or earlier[target].kind != "decision":
            raise ValueError(f"'revokes' points at seq {target}, which is not an earlier decision")
    else:
        _text(data, "approver")
        for key in ("signs_head", "dataset_fingerprint", "lexicon_hash", "fail_on"):
            _text(data, key)


def verify_log(path: Path, *, expect_head: str | None = None) -> Verification:
    """Read and check the whole log: each line's JSON, schema, hash, sequence and chain.

    Args:
        path: The log file. A missing file is an empty, valid log (``exists`` is False).
        expect_head: A head hash recorded elsewhere; if the chain does not contain it, the
            log was cut short or replaced, and that is reported as the problem.

    Returns:
        A :class:`Verification`; it never raises for a bad log (the caller decides).

    Raises:
        LogError: The file cannot be read at all (permissions, a folder in its place).
    """
    if not path.exists():
        return Verification(path=path, entries=(), exists=False)
    try:
        raw = path.read_bytes()
    except OSError as exc:
        raise LogError(f"cannot read the decision log: {exc.strerror}", source=str(path)) from None
    lines = raw.split(b"\n")
    tail = lines.pop()  # after the last newline: b"" for a complete file
    entries: list[Entry] = []
    by_seq: dict[int, Entry] = {}
    prev = GENESIS

    def bad(number: int, message: str, column: int | None = None) -> Verification:
        return Verification(
            path=path, entries=tuple(entries), problem=Problem(number, message, column)
        )

    for number, line in enumerate(lines, start=1):
        if not line.strip():
            return bad(number, "empty line inside the log (an entry was removed or blanked)")
        try:
            data = json.loads(line.decode("utf-8"))
        except UnicodeDecodeError as exc:
            return bad(number, "not UTF-8 text", exc.start + 1)
        except json.JSONDecodeError as exc:
            return bad(number, f"not valid JSON ({exc.msg})", exc.colno)
        try:
            check_schema(data, by_seq)
        except ValueError as exc:
            return bad(number, f"entry does not match the log schema: {exc}")
        expected_seq = len(entries) + 1
        if data["seq"] != expected_seq:
            return bad(
                number,
                f"sequence broken: expected seq {expected_seq}, found {data['seq']} "
                "(entries were removed, reordered or inserted)",
            )
        if data["prev"] != prev:
            return bad(
                number,
                f"chain broken at seq {data['seq']}: 'prev' does not match the hash of the "
                "entry before it",
            )
        if entry_hash(data) != data["hash"]:
            return bad(
                number, f"entry seq {data['seq']} was changed after it was written (hash mismatch)"
            )
        entry = Entry(data=data, line=number)
        entries.append(entry)
        by_seq[entry.seq] = entry
        prev = entry.hash
    torn = tail  # a line without its newline never finished writing
    torn_line = len(lines) + 1 if tail else None
    result = Verification(path=path, entries=tuple(entries), torn_tail=torn, torn_line=torn_line)
    if expect_head is not None and expect_head not in {e.hash for e in entries} | {GENESIS}:
        return Verification(
            path=path,
            entries=tuple(entries),
            problem=Problem(
                len(lines),
                f"the expected head {expect_head[:12]} is not in the chain (entries were cut "
                "off the end, or the log was replaced)",
            ),
            torn_tail=torn,
            torn_line=torn_line,
        )
    return result


def read_log(path: Path) -> tuple[Entry, ...]:
    """The verified entries, or a LogError naming the first problem.

    A torn tail is ignored here (reading is safe); writers refuse until it is repaired.

    Raises:
        LogError: The log does not verify.
    """
    verification = verify_log(path)
    if verification.problem is not None:
        raise LogError(
            f"the decision log does not verify: {verification.problem.message}",
            hint="Run 'labelreview log verify' for details; the log must be restored from a copy.",
            source=str(path),
            line=verification.problem.line,
            column=verification.problem.column,
        )
    return verification.entries


def repair_log(path: Path) -> Path | None:
    """Move a torn last line to a side file, keeping every byte; return the side file.

    The log is rewritten as its verified prefix through a temporary file and an atomic rename;
    the torn bytes go to ``<log>.torn-<UTC time>`` first, so nothing is ever deleted. Holds the
    writer lock while it works.

    Returns:
        The side file, or None when there was no torn tail.

    Raises:
        LogError: The log has a real problem (tampering), which repair does not touch.
    """
    with _lock(path, holder="labelreview log repair", session=False):
        verification = verify_log(path)
        if verification.problem is not None:
            raise LogError(
                f"the log does not verify ({verification.problem}); repair only handles a torn "
                "last line and leaves this alone",
                source=str(path),
                line=verification.problem.line,
            )
        if not verification.torn_tail:
            return None
        stamp = rfc3339(utc_now()).replace(":", "")
        side = path.with_name(f"{path.name}.torn-{stamp}")
        n = 1
        while side.exists():
            n += 1
            side = path.with_name(f"{path.name}.torn-{stamp}-{n}")
        _write_atomic(side, verification.torn_tail)
        good = b"".join(canonical_json(e.data) + b"\n" for e in verification.entries)
        raw = path.read_bytes()
        if not raw.startswith(good) or raw[len(good) :] != verification.torn_tail:
            # The entries were not written canonically (edited by hand): keep their exact bytes.
            good = raw[: len(raw) - len(verification.torn_tail)]
        _write_atomic(path, good)
        return side


def _write_atomic(path: Path, data: bytes) -> None:
    tmp = path.with_name(f".{path.name}.tmp-{os.getpid()}")
    with open(tmp, "wb") as handle:
        handle.write(data)
        handle.flush()
        os.fsync(handle.fileno())
    os.replace(tmp, path)
    _fsync_dir(path.parent)


def _fsync_dir(folder: Path) -> None:
    with contextlib.suppress(OSError):
        fd = os.open(folder, os.O_RDONLY)
        try:
            os.fsync(fd)
        finally:
            os.close(fd)


# -- locking and writing -----------------------------------------------------------------------


def lock_path(path: Path) -> Path:
    return path.with_name(path.name + ".lock")


def _holder_text(holder: str, session: bool) -> str:
    try:
        user = getpass.getuser()
    except Exception:  # noqa: BLE001 - no user name is not a reason to fail
        user = "unknown"
    info = {
        "holder": holder,
        "user": user,
        "host": socket.gethostname(),
        "pid": os.getpid(),
        "since": rfc3339(utc_now()),
        "session": session,
    }
    return json.dumps(info) + "\n"


def _read_holder(handle: Any) -> dict[str, Any]:
    try:
        handle.seek(0)
        data = json.loads(handle.read() or "{}")
        return data if isinstance(data, dict) else {}
    except (OSError, ValueError):
        return {}


def _describe_holder(info: Mapping[str, Any]) -> str:
    if not info:
        return "another process"
    return (
        f"{info.get('holder', 'another process')} (user {info.get('user', '?')} on "
        f"{info.get('host', '?')}, pid {info.get('pid', '?')}) since {info.get('since', '?')}"
    )


@contextlib.contextmanager
def _lock(path: Path, *, holder: str, session: bool, wait: float = 10.0) -> Iterator[None]:
    import fcntl

    lock_file = lock_path(path)
    try:
        lock_file.parent.mkdir(parents=True, exist_ok=True)
        handle = open(lock_file, "a+", encoding="utf-8")  # noqa: SIM115 - held for the block
    except OSError as exc:
        raise LogError(
            f"cannot open the log's lock file: {exc.strerror}", source=str(lock_file)
        ) from None
    try:
        deadline = time.monotonic() + (0.0 if session else wait)
        while True:
            try:
                fcntl.flock(handle.fileno(), fcntl.LOCK_EX | fcntl.LOCK_NB)
                break
            except BlockingIOError:
                info = _read_holder(handle)
                if info.get("session") or time.monotonic() >= deadline:
                    raise LogLockedError(
                        f"the decision log is locked by {_describe_holder(info)}",
                        hint="Finish or close that session first; nothing was written.",
                        source=str(path),
                    ) from None
                time.sleep(0.02)
        handle.seek(0)
        handle.truncate()
        handle.write(_holder_text(holder, session))
        handle.flush()
        try:
            yield
        finally:
            handle.seek(0)
            handle.truncate()
            handle.flush()
            fcntl.flock(handle.fileno(), fcntl.LOCK_UN)
    finally:
        handle.close()


class LogWriter:
    """Appends entries to a verified log while holding its lock (see :meth:`DecisionLog.writer`)."""

    def __init__(self, path: Path, entries: Sequence[Entry], clock: Clock) -> None:
        self.path = path
        self.entries: list[Entry] = list(entries)
        self._clock = clock

    @property
    def head(self) -> str:
        return self.entries[-1].hash if self.entries else GENESIS

    def append(self, body: Mapping[str, Any]) -> Entry:
        """Complete ``body`` with v, seq, prev, time (if absent) and hash; write it durably.

        The entry is checked against the schema first, so a bad entry never reaches the file.

        Raises:
            LogError: The entry is invalid, or the write failed (nothing is reported as saved).
        """
        data = {k: v for k, v in body.items() if k not in ("v", "seq", "prev", "hash")}
        data.setdefault("time", rfc3339(self._clock()))
        data.update(v=SCHEMA_VERSION, seq=len(self.entries) + 1, prev=self.head)
        data["hash"] = entry_hash(data)
        try:
            check_schema(data, {e.seq: e for e in self.entries})
        except ValueError as exc:
            raise LogError(
                f"refusing to write an invalid entry: {exc}", source=str(self.path)
            ) from None
        line = canonical_json(data) + b"\n"
        new_file = not self.path.exists()
        try:
            self.path.parent.mkdir(parents=True, exist_ok=True)
            fd = os.open(self.path, os.O_WRONLY | os.O_APPEND | os.O_CREAT, 0o644)
            try:
                written = os.write(fd, line)
                while written < len(line):  # pragma: no cover - short writes are rare
                    written += os.write(fd, line[written:])
                os.fsync(fd)
            finally:
                os.close(fd)
        except OSError as exc:
            raise LogError(
                f"could not write the decision log: {exc.strerror}; the entry was not saved",
                source=str(self.path),
            ) from None
        if new_file:
            _fsync_dir(self.path.parent)
        entry = Entry(data=data, line=len(self.entries) + 1)
        self.entries.append(entry)
        return entry


class DecisionLog:
    """The log file of one dataset: read, verify, and open a writer."""

    def __init__(self, path: Path, *, clock: Clock = utc_now) -> None:
        self.path = path
        self.clock = clock

    def verify(self, *, expect_head: str | None = None) -> Verification:
        return verify_log(self.path, expect_head=expect_head)

    def entries(self) -> tuple[Entry, ...]:
        return read_log(self.path)

    def state(self) -> LogState:
        return fold(self.entries())

    @contextlib.contextmanager
    def writer(
        self, *, holder: str = "labelreview", session: bool = False, wait: float = 10.0
    ) -> Iterator[LogWriter]:
        """Lock the log, verify it, and yield a :class:`LogWriter`; unlock on exit.

        Args:
            holder: Who is writing, shown to anyone refused the lock.
            session: A long-lived writer (the review app): others are refused at once, and
                this writer is refused at once if the lock is taken.
            wait: Seconds a short writer waits for another short writer.

        Raises:
            LogLockedError: Someone else holds the lock.
            LogError: The log does not verify or has a torn last line.
        """
        with _lock(self.path, holder=holder, session=session, wait=wait):
            verification = verify_log(self.path)
            if verification.problem is not None:
                raise LogError(
                    f"the decision log does not verify ({verification.problem}); nothing was "
                    "written",
                    hint="Run 'labelreview log verify' for details.",
                    source=str(self.path),
                    line=verification.problem.line,
                )
            if verification.torn_tail:
                raise LogError(
                    f"the decision log ends in a torn line (line {verification.torn_line}, an "
                    "interrupted write); nothing was written",
                    hint="Run 'labelreview log repair', which moves it to a side file.",
                    source=str(self.path),
                    line=verification.torn_line,
                )
            yield LogWriter(self.path, verification.entries, self.clock)


# -- the fold ----------------------------------------------------------------------------------


@dataclass(frozen=True)
class LabelState:
    """Where one label stands after the log: its active decision and its whole history."""

    label: str
    decision: Entry | None
    """The decision in force (None: open, or every decision on it was revoked)."""
    history: tuple[Entry, ...] = ()
    """Every decision and revocation about this label, oldest first."""

    @property
    def status(self) -> str:
        """``open``, ``accepted``, ``renamed`` or ``retired``."""
        if self.decision is None:
            return "open"
        return {"accept": "accepted", "rename": "renamed", "retire": "retired"}[
            str(self.decision.get("action"))
        ]


@dataclass(frozen=True)
class LogState:
    """The fold over a log: active decisions, revocations, sign-offs."""

    entries: tuple[Entry, ...]
    labels: dict[str, LabelState] = field(default_factory=dict)
    revoked: frozenset[int] = frozenset()
    signoffs: tuple[Entry, ...] = ()

    @property
    def head(self) -> str:
        return self.entries[-1].hash if self.entries else GENESIS

    def status(self, label: str) -> str:
        state = self.labels.get(label)
        return "open" if state is None else state.status

    def decision(self, label: str) -> Entry | None:
        state = self.labels.get(label)
        return None if state is None else state.decision

    def active_decisions(self) -> list[Entry]:
        """Decisions in force, in log order."""
        active = [s.decision for s in self.labels.values() if s.decision is not None]
        return sorted(active, key=lambda e: e.seq)

    def last_active_decision(self, curator: str | None = None) -> Entry | None:
        """The most recent decision still in force (by ``curator`` if given)."""
        for entry in reversed(self.entries):
            if entry.kind != "decision" or entry.seq in self.revoked:
                continue
            if self.decision(str(entry.label)) is not entry:
                continue
            if curator is None or entry.actor == curator:
                return entry
        return None

    def last_signoff(self) -> Entry | None:
        return self.signoffs[-1] if self.signoffs else None


def fold(entries: Sequence[Entry]) -> LogState:
    """Replay entries into a :class:`LogState`.

    A later decision on a label supersedes an earlier one; a revocation cancels the decision it
    names, and the label falls back to the latest earlier decision still in force (or open).
    """
    history: dict[str, list[Entry]] = {}
    decisions: dict[str, list[Entry]] = {}
    revoked: set[int] = set()
    signoffs: list[Entry] = []
    by_seq = {e.seq: e for e in entries}
    for entry in entries:
        if entry.kind == "decision":
            label = str(entry.label)
            history.setdefault(label, []).append(entry)
            decisions.setdefault(label, []).append(entry)
        elif entry.kind == "revoke":
            target = by_seq[int(entry.get("revokes"))]
            revoked.add(target.seq)
            history.setdefault(str(target.label), []).append(entry)
        else:
            signoffs.append(entry)
    labels = {}
    for label, entries_for in history.items():
        active = [e for e in decisions.get(label, []) if e.seq not in revoked]
        labels[label] = LabelState(
            label=label, decision=active[-1] if active else None, history=tuple(entries_for)
        )
    return LogState(
        entries=tuple(entries),
        labels=labels,
        revoked=frozenset(revoked),
        signoffs=tuple(signoffs),
    )
