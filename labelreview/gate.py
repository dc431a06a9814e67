"""The release gate and the sign-off: may this dataset version be released, and who said so.

Two questions a CI pipeline and a governance board ask of the same log, answered in one place so
``labelreview check``, ``labelreview signoff`` and the export never disagree:

- :func:`check_gate`: are flags at or above the gate level still open, does the decision log
  verify, were the decisions in force made with the lexicon set in use now, and (when asked) is
  the current state signed off? It returns a :class:`GateResult`; the text, JSON and SARIF views
  (:mod:`labelreview.sarif`) all render that one object.
- :func:`sign_off` records a sign-off entry bound to the log head, the dataset fingerprint and the
  lexicon hash, and :func:`signoff_status` says whether the latest one still holds and, if not,
  every reason why (a later decision or revocation, changed data, a changed lexicon set).

A passing gate says only that the recorded process was followed: flags are candidates for human
judgement, and a clean scan does not prove a dataset fair.
"""

from __future__ import annotations

import hashlib
import re
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any, Literal

from labelreview.dataset import Fingerprint
from labelreview.decisions import Entry, LogState, Verification, fold
from labelreview.errors import DecisionError, LogError, UsageError
from labelreview.lexicon import Category
from labelreview.model import SEVERITIES, SEVERITY_RANK, Finding, Flag
from labelreview.report import CAUTIONS

if TYPE_CHECKING:
    from labelreview.review import ReviewSession

SignoffState = Literal["none", "valid", "void"]

#: File extensions read as text when looking for the line a label is on.
TEXT_SUFFIXES: frozenset[str] = frozenset(
    {".csv", ".tsv", ".tab", ".txt", ".jsonl", ".ndjson", ".json", ".yaml", ".yml"}
)


def _check_level(fail_on: str | None, default: str) -> str:
    level = fail_on or default
    if level not in SEVERITY_RANK:
        raise UsageError(f"fail_on must be one of {', '.join(SEVERITIES)}; got {level!r}")
    return level


# -- sign-off status ---------------------------------------------------------------------------


@dataclass(frozen=True)
class SignoffStatus:
    """Whether the latest sign-off still covers the current state, and why not."""

    state: SignoffState
    """``none`` (never signed off), ``valid``, or ``void`` (also: the log does not verify)."""
    entry: Entry | None = None
    """The latest sign-off entry, if there is one."""
    reasons: tuple[str, ...] = ()
    """Plain sentences: why there is no valid sign-off (empty when valid)."""

    @property
    def valid(self) -> bool:
        return self.state == "valid"

    def summary(self) -> str:
        """One line: ``signed off by X at T (seq 9)`` or why not."""
        if self.entry is None:
            return "not signed off: " + "; ".join(self.reasons)
        who = f"by {self.entry.actor} at {self.entry.time} (seq {self.entry.seq})"
        if self.valid:
            return f"signed off {who}"
        return f"sign-off {who} is void: " + "; ".join(self.reasons)

    def to_dict(self) -> dict[str, Any]:
        entry = self.entry
        return {
            "state": self.state,
            "valid": self.valid,
            "reasons": list(self.reasons),
            "summary": self.summary(),
            "signoff": None
            if entry is None
            else {
                "seq": entry.seq,
                "hash": entry.hash,
                "time": entry.time,
                "approver": entry.actor,
                "statement": entry.get("statement"),
                "signs_head": entry.get("signs_head"),
                "dataset_fingerprint": entry.get("dataset_fingerprint"),
                "lexicon_hash": entry.get("lexicon_hash"),
                "fail_on": entry.get("fail_on"),
            },
        }


def signoff_void_reasons(
    entry: Entry,
    state: LogState,
    *,
    fingerprint: Fingerprint,
    lexicon_hash: str,
    fail_on: str | None = None,
) -> list[str]:
    """Why one sign-off entry no longer holds, as plain sentences (empty: it still holds).

    The one rule for sign-off validity: :func:`signoff_status` (``check --require-signoff``)
    applies it to the latest sign-off, the audit export to every sign-off. The entry must name as
    ``signs_head`` the head the log had when it was written (its ``prev``); no decision or
    revocation may follow it; the dataset fingerprint and the lexicon hash must be unchanged; and,
    when ``fail_on`` is given, it must have been given at that gate level or a stricter one.
    Whether the log verifies is the caller's question.
    """
    reasons: list[str] = []
    head_then = str(entry.get("prev"))
    if entry.get("signs_head") != head_then:
        reasons.append(
            f"it names log head {str(entry.get('signs_head'))[:12]}, but the head when it was "
            f"written was {head_then[:12]}"
        )
    later = [e for e in state.entries if e.seq > entry.seq and e.kind != "signoff"]
    if later:
        first = later[0]
        what = "decision" if first.kind == "decision" else "revocation"
        more = f" and {len(later) - 1} more" if len(later) > 1 else ""
        reasons.append(
            f"a {what} on '{first.label}' (seq {first.seq}, by {first.actor}){more} came after it"
        )
    if entry.get("dataset_fingerprint") != fingerprint.digest:
        then_files = entry.get("dataset_files")
        changed = ""
        if isinstance(then_files, Mapping):
            roles = sorted(
                role
                for role in set(then_files) | set(fingerprint.files)
                if then_files.get(role) != fingerprint.files.get(role)
            )
            if roles:
                changed = f" ({', '.join(roles)})"
        reasons.append(f"the dataset files changed since it was given{changed}")
    if entry.get("lexicon_hash") != lexicon_hash:
        reasons.append(
            f"the lexicon set changed since it was given (then "
            f"{str(entry.get('lexicon_hash'))[:19]}, now {lexicon_hash[:19]})"
        )
    signed_level = str(entry.get("fail_on"))
    if fail_on is not None and SEVERITY_RANK.get(signed_level, 99) > SEVERITY_RANK[fail_on]:
        reasons.append(
            f"it was given at gate level {signed_level}; this check asks for {fail_on}, which "
            "is stricter"
        )
    return reasons


def signoff_status(
    session: ReviewSession,
    *,
    fail_on: str | None = None,
    verification: Verification | None = None,
) -> SignoffStatus:
    """Does the latest sign-off still hold for the dataset, lexicon set and log as they are now?

    A sign-off holds while (1) the log verifies, (2) it names as ``signs_head`` the head the log
    had when it was written, (3) no decision or revocation came after it, (4) the dataset
    fingerprint and (5) the lexicon hash are unchanged, and (6) when ``fail_on`` is given, it was
    given at that gate level or a stricter one.

    Args:
        session: The open dataset.
        fail_on: The gate level the caller checks at (None: do not compare levels).
        verification: The log's verification if the caller already has one.

    Returns:
        A :class:`SignoffStatus`; ``none`` when the log has no sign-off.

    Raises:
        UsageError: ``fail_on`` is not a severity.
        LogError: The log file cannot be read at all.
    """
    if fail_on is not None:
        _check_level(fail_on, fail_on)
    verification = verification if verification is not None else session.log.verify()
    state = fold(verification.entries)
    latest = state.last_signoff()
    if verification.problem is not None:
        reason = f"the decision log does not verify ({verification.problem})"
        # Whatever the log says about sign-offs after the bad entry cannot be trusted.
        return SignoffStatus("void", latest, (reason,))
    if latest is None:
        return SignoffStatus("none", None, ("no sign-off has been recorded",))
    reasons = signoff_void_reasons(
        latest,
        state,
        fingerprint=session.fingerprint(),
        lexicon_hash=session.lexicon_hash,
        fail_on=fail_on,
    )
    if reasons:
        return SignoffStatus("void", latest, tuple(reasons))
    return SignoffStatus("valid", latest)


# -- the gate ----------------------------------------------------------------------------------


@dataclass(frozen=True)
class LexiconChange:
    """A decision in force that was made with a different lexicon set than the current one."""

    label: str
    seq: int
    curator: str
    lexicon_hash: str

    def to_dict(self) -> dict[str, Any]:
        return {
            "label": self.label,
            "seq": self.seq,
            "curator": self.curator,
            "lexicon_hash": self.lexicon_hash,
        }


@dataclass(frozen=True)
class LabelLocation:
    """Where a label can be seen: a file (relative to the dataset folder if inside it), a line."""

    path: Path
    """The file as loaded."""
    uri: str
    """Relative to the dataset folder with forward slashes, or an absolute ``file:`` URI."""
    relative: bool
    """``uri`` is relative to the dataset folder."""
    line: int | None = None
    """1-based line of the first line naming the label, where the file is text."""

    def to_dict(self) -> dict[str, Any]:
        return {"uri": self.uri, "line": self.line}


@dataclass(frozen=True)
class GateFlag:
    """One unresolved flag as the gate reports it: the flag, its findings, where it is."""

    flag: Flag
    findings: tuple[Finding, ...]
    location: LabelLocation | None

    @property
    def label(self) -> str:
        return self.flag.label

    def by_category(self) -> list[tuple[str, str, list[Finding]]]:
        """(category, highest severity, findings) per category, in the flag's order."""
        out: list[tuple[str, str, list[Finding]]] = []
        for category in self.flag.categories:
            found = [f for f in self.findings if f.category == category]
            if found:
                top = max(found, key=lambda f: SEVERITY_RANK[f.severity]).severity
            else:
                top = self.flag.severity
            out.append((category, top, found))
        return out

    def by_signal(self, severities: Mapping[str, str]) -> list[tuple[str, str, list[str]]]:
        """(data signal, its configured severity, its reasons) per data signal of the flag."""
        out = []
        for name in self.flag.signal_names:
            reasons = [r.detail for r in self.flag.evidence if r.signal == name]
            out.append((name, severities.get(name, self.flag.severity), reasons))
        return out

    def to_dict(self) -> dict[str, Any]:
        data = self.flag.to_dict()
        data["location"] = None if self.location is None else self.location.to_dict()
        return data


@dataclass(frozen=True)
class GateResult:
    """Everything ``labelreview check`` decides and shows, in one object."""

    dataset: Path
    fail_on: str
    unresolved: tuple[GateFlag, ...]
    """Open flags at or above ``fail_on``, most urgent first."""
    verification: Verification
    lexicon_hash: str
    lexicon_changes: tuple[LexiconChange, ...]
    """Decisions in force made with another lexicon set."""
    allow_lexicon_change: bool
    require_signoff: bool
    signoff: SignoffStatus
    categories: Mapping[str, Category]
    """The lexicon's categories by id (the SARIF rules)."""
    counts: Mapping[str, Any] = field(default_factory=dict)
    signal_severity: Mapping[str, str] = field(default_factory=dict)
    """Data signal -> the severity it gives a label (``queue.severity``; the SARIF rules)."""
    notes: tuple[str, ...] = ()
    """What the review queue could not check (no attributes, agreement undefined...)."""
    dataset_fingerprint: str = ""
    tool_version: str = ""
    cautions: tuple[str, ...] = CAUTIONS

    @property
    def lexicon_changed(self) -> bool:
        return bool(self.lexicon_changes)

    def failure_items(self) -> list[tuple[str, str]]:
        """Why the gate fails as (kind, sentence) pairs; kinds: ``unresolved``, ``log``,
        ``lexicon``, ``signoff``. Empty when it passes."""
        out: list[tuple[str, str]] = []
        if self.unresolved:
            n = len(self.unresolved)
            out.append(
                (
                    "unresolved",
                    f"{n} unresolved flag{'s' if n != 1 else ''} at or above {self.fail_on} "
                    "severity",
                )
            )
        if not self.verification.ok:
            out.append(("log", f"the decision log {self.verification.status()}"))
        if self.lexicon_changes and not self.allow_lexicon_change:
            n = len(self.lexicon_changes)
            first = self.lexicon_changes[0]
            out.append(
                (
                    "lexicon",
                    f"the lexicon set changed since {n} decision{'s' if n != 1 else ''} in "
                    f"force {'were' if n != 1 else 'was'} made (e.g. '{first.label}', seq "
                    f"{first.seq}); review them again or pass --allow-lexicon-change",
                )
            )
        if self.require_signoff and not self.signoff.valid:
            out.append(("signoff", self.signoff.summary()))
        return out

    def failures(self) -> list[str]:
        """Why the gate fails, one sentence each (empty when it passes)."""
        return [text for _, text in self.failure_items()]

    @property
    def passed(self) -> bool:
        return not self.failures()

    @property
    def exit_code(self) -> int:
        """0 when the gate passes, 1 when it found something."""
        return 0 if self.passed else 1

    def verdict(self) -> str:
        """The one-line verdict: ``PASS: ...`` or ``FAIL: reason; reason``."""
        failures = self.failures()
        if failures:
            return "FAIL: " + "; ".join(failures)
        parts = [f"no unresolved flags at or above {self.fail_on} severity"]
        if self.verification.exists:
            parts.append(f"decision log {self.verification.status()}")
        if self.lexicon_changes:
            parts.append(
                f"{len(self.lexicon_changes)} decision(s) made with another lexicon set, "
                "allowed by --allow-lexicon-change"
            )
        if self.require_signoff:
            parts.append(self.signoff.summary())
        return "PASS: " + "; ".join(parts)

    def to_dict(self) -> dict[str, Any]:
        """A stable JSON-ready object (keys documented in the README's check section)."""
        return {
            "verdict": "pass" if self.passed else "fail",
            "summary": self.verdict(),
            "exit_code": self.exit_code,
            "failures": self.failures(),
            "dataset": str(self.dataset),
            "dataset_fingerprint": self.dataset_fingerprint,
            "lexicon_hash": self.lexicon_hash,
            "fail_on": self.fail_on,
            "unresolved": [g.to_dict() for g in self.unresolved],
            "log": self.verification.to_dict(),
            "lexicon_changed": self.lexicon_changed,
            "allow_lexicon_change": self.allow_lexicon_change,
            "lexicon_changes": [c.to_dict() for c in self.lexicon_changes],
            "require_signoff": self.require_signoff,
            "signoff": self.signoff.to_dict(),
            "counts": dict(self.counts),
            "notes": list(self.notes),
            "cautions": list(self.cautions),
        }


def unresolved_flags(flags: Iterable[Flag], state: LogState, fail_on: str) -> list[Flag]:
    """Flags at or above ``fail_on`` with no decision in force, in the given order."""
    level = SEVERITY_RANK[fail_on]
    return [
        f for f in flags if SEVERITY_RANK[f.severity] >= level and state.status(f.label) == "open"
    ]


def lexicon_changes(state: LogState, lexicon_hash: str) -> list[LexiconChange]:
    """Decisions in force whose recorded lexicon hash differs from ``lexicon_hash``."""
    return [
        LexiconChange(
            label=str(e.label),
            seq=e.seq,
            curator=e.actor,
            lexicon_hash=str(e.get("lexicon_hash")),
        )
        for e in state.active_decisions()
        if e.get("lexicon_hash") != lexicon_hash
    ]


def _tool_version() -> str:
    try:
        from importlib.metadata import version

        return version("labelreview")
    except Exception:  # noqa: BLE001 - running from a source tree without metadata
        from labelreview import __version__

        return __version__


def check_gate(
    session: ReviewSession,
    *,
    fail_on: str | None = None,
    allow_lexicon_change: bool = False,
    require_signoff: bool = False,
) -> GateResult:
    """Run the release gate over an open dataset.

    A tampered log does not raise: the gate fails and says why. Flags are then counted against
    the entries before the first bad one, so the listing is still useful.

    Args:
        session: The open dataset and its log.
        fail_on: The gate level (default: the config's ``decisions.fail_on``).
        allow_lexicon_change: Do not fail when decisions in force were made with another lexicon
            set (they are still listed).
        require_signoff: Fail unless the latest sign-off still holds (see :func:`signoff_status`).

    Raises:
        UsageError: ``fail_on`` is not a severity.
        LogError: The log file cannot be read at all.
    """
    level = _check_level(fail_on, session.config.decisions.fail_on)
    verification = session.log.verify()
    state = fold(verification.entries)
    open_flags = unresolved_flags(session.flags, state, level)
    findings: dict[str, list[Finding]] = {}
    for finding in session.scanned.result.findings:
        findings.setdefault(finding.label, []).append(finding)
    locations = label_locations(session, [f.label for f in open_flags])
    unresolved = tuple(
        GateFlag(f, tuple(findings.get(f.label, ())), locations.get(f.label)) for f in open_flags
    )
    changes = tuple(lexicon_changes(state, session.lexicon_hash))
    status = signoff_status(session, fail_on=level, verification=verification)
    by_severity = {s: 0 for s in SEVERITIES}
    for f in session.flags:
        by_severity[f.severity] += 1
    decided = sum(1 for f in session.flags if state.status(f.label) != "open")
    counts = {
        "labels": len(session.labels),
        "flags": len(session.flags),
        "flags_by_severity": by_severity,
        "data_only": sum(1 for f in session.flags if not f.categories),
        "decided": decided,
        "open": len(session.flags) - decided,
        "unresolved_at_level": len(unresolved),
        "decisions_in_force": len(state.active_decisions()),
        "log_entries": len(verification.entries),
        "signoffs": len(state.signoffs),
    }
    return GateResult(
        dataset=session.dataset.root,
        fail_on=level,
        unresolved=unresolved,
        verification=verification,
        lexicon_hash=session.lexicon_hash,
        lexicon_changes=changes,
        allow_lexicon_change=allow_lexicon_change,
        require_signoff=require_signoff,
        signoff=status,
        categories=dict(session.scanned.lexicon.categories),
        counts=counts,
        signal_severity=dict(session.queue().severity),
        notes=session.queue().notes,
        cautions=session.queue().cautions(),
        dataset_fingerprint=session.fingerprint().digest,
        tool_version=_tool_version(),
    )


# -- where a label is --------------------------------------------------------------------------


def _uri_for(path: Path, root: Path) -> tuple[str, bool]:
    from urllib.parse import quote

    try:
        rel = path.resolve().relative_to(root.resolve())
    except ValueError:
        return path.resolve().as_uri(), False
    return quote(rel.as_posix()), True


def _label_pattern(label: str) -> re.Pattern[str]:
    # The label as a whole field: not preceded or followed by a character a label could
    # continue with, so 'people/roles/fisher' does not match inside 'people/roles/fishermen'.
    edge = r"[\w/.\-]"
    return re.compile(rf"(?<!{edge}){re.escape(label)}(?!{edge})")


def find_label_lines(path: Path, labels: Sequence[str], encoding: str | None) -> dict[str, int]:
    """The first 1-based line of a text file that names each label as a whole field.

    Binary formats (parquet, spreadsheets) and unreadable files give no lines; that is not an
    error, the location just has no region.
    """
    if path.suffix.lower() not in TEXT_SUFFIXES or not labels:
        return {}
    try:
        text = path.read_text(encoding=encoding or "utf-8-sig", errors="replace")
    except OSError:
        return {}
    wanted = {label: _label_pattern(label) for label in labels}
    found: dict[str, int] = {}
    for number, line in enumerate(text.splitlines(), start=1):
        for label in [lab for lab in wanted if lab in line]:
            if wanted[label].search(line):
                found[label] = number
                del wanted[label]
        if not wanted:
            break
    return found


def label_locations(session: ReviewSession, labels: Sequence[str]) -> dict[str, LabelLocation]:
    """Where each label is seen: its taxonomy line if the taxonomy lists it, else the
    annotation file (with the first line naming it, for text formats)."""
    config = session.config
    root = session.dataset.root
    taxonomy_names = {t.name for t in session.dataset.taxonomy}
    out: dict[str, LabelLocation] = {}
    sources: list[tuple[Path, str | None, list[str]]] = []
    if config.taxonomy is not None:
        sources.append(
            (
                config.taxonomy.path,
                config.taxonomy.encoding,
                [lab for lab in labels if lab in taxonomy_names],
            )
        )
    if config.annotations is not None and config.annotations.path is not None:
        sources.append(
            (
                config.annotations.path,
                config.annotations.encoding,
                [lab for lab in labels if lab not in taxonomy_names],
            )
        )
    for path, encoding, wanted in sources:
        if not wanted:
            continue
        lines = find_label_lines(path, wanted, encoding)
        uri, relative = _uri_for(path, root)
        for label in wanted:
            out[label] = LabelLocation(path, uri, relative, lines.get(label))
    return out


def label_fingerprint(label: str, category: str) -> str:
    """A stable id for one (label, category) result: SHA-256 hex of ``label NUL category``."""
    return hashlib.sha256(f"{label}\0{category}".encode()).hexdigest()


# -- sign-off ----------------------------------------------------------------------------------


def signoff_refusals(
    session: ReviewSession,
    approver: str,
    statement: str,
    *,
    fail_on: str | None = None,
) -> list[str]:
    """Every reason a sign-off would be refused now (empty: it may be recorded)."""
    level = _check_level(fail_on, session.config.decisions.fail_on)
    refusals: list[str] = []
    if not approver.strip():
        refusals.append("an approver name is required")
    minimum = session.config.decisions.min_reason_length
    text = " ".join(statement.split())
    if not text:
        refusals.append("a statement is required")
    elif len(text) < minimum:
        refusals.append(
            f"the statement is too short ({len(text)} characters; at least {minimum} needed)"
        )
    verification = session.log.verify()
    if not verification.ok:
        refusals.append(f"the decision log {verification.status()}")
        return refusals
    state = fold(verification.entries)
    open_flags = unresolved_flags(session.flags, state, level)
    if open_flags:
        names = ", ".join(f"'{f.label}'" for f in open_flags[:3])
        more = f" and {len(open_flags) - 3} more" if len(open_flags) > 3 else ""
        refusals.append(
            f"{len(open_flags)} flag(s) at or above {level} severity are unresolved: {names}{more}"
        )
    if session.config.decisions.four_eyes and approver.strip():
        own = _own_high_decision(session, state, approver.strip())
        if own is not None:
            refusals.append(
                f"four-eyes rule: {approver.strip()} made the decision in force on the "
                f"high-severity label '{own.label}' (seq {own.seq}); another person must sign off"
            )
    return refusals


def _own_high_decision(session: ReviewSession, state: LogState, approver: str) -> Entry | None:
    for entry in state.active_decisions():
        if entry.actor != approver:
            continue
        finding = entry.get("finding")
        then = finding.get("severity") if isinstance(finding, Mapping) else None
        flag = session.flag(str(entry.label))
        if then == "high" or (flag is not None and flag.severity == "high"):
            return entry
    return None


def sign_off(
    session: ReviewSession,
    *,
    approver: str,
    statement: str,
    fail_on: str | None = None,
) -> Entry:
    """Record a sign-off bound to the log head, the dataset fingerprint and the lexicon hash.

    Args:
        session: The open dataset.
        approver: Who signs off.
        statement: What they state (at least ``decisions.min_reason_length`` characters).
        fail_on: The gate level signed for (default: the config's).

    Returns:
        The written entry (already synced to disk).

    Raises:
        DecisionError: The sign-off is refused (names every reason); nothing was written.
        LogError: The log does not verify, or changed while signing (the entry is then void and
            the error says so).
        LogLockedError: Another process holds the log.
    """
    level = _check_level(fail_on, session.config.decisions.fail_on)
    refusals = signoff_refusals(session, approver, statement, fail_on=level)
    if refusals:
        raise DecisionError("sign-off refused: " + "; ".join(refusals), hint="Nothing was written.")
    head = session.log.verify().head
    fingerprint = session.fingerprint()
    entry = session.append_entry(
        {
            "kind": "signoff",
            "approver": approver.strip(),
            "statement": " ".join(statement.split()),
            "signs_head": head,
            "dataset_fingerprint": fingerprint.digest,
            "dataset_files": dict(fingerprint.files),
            "lexicon_hash": session.lexicon_hash,
            "fail_on": level,
        }
    )
    if entry.get("prev") != head:
        # Another process appended between the check and the write: the sign-off names a head
        # that is no longer the one before it, so signoff_status() treats it as void.
        raise LogError(
            f"the log changed while signing off; sign-off seq {entry.seq} names an older head "
            "and is void",
            hint="Run 'labelreview signoff' again.",
            source=str(session.log.path),
        )
    return entry
