"""A review session: one dataset, its review queue, its decision log, and the rules for deciding.

Both front ends decide through :class:`ReviewSession`: ``labelreview decide`` opens one for a
single command, the review app keeps one open (and the log locked) for a whole sitting. The
checks in :meth:`ReviewSession.check` are the only validation decisions get, so the app's
modal and the command line refuse exactly the same things, with the same words.
"""

from __future__ import annotations

import contextlib
import difflib
import getpass
import os
from collections.abc import Iterable, Iterator, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from labelreview.config import DatasetConfig
from labelreview.dataset import Dataset, Fingerprint, dataset_fingerprint, load_dataset
from labelreview.decisions import (
    ACTIONS,
    Clock,
    DecisionLog,
    Entry,
    LogState,
    LogWriter,
    fold,
    utc_now,
)
from labelreview.errors import DecisionError, UsageError
from labelreview.model import SEVERITY_RANK, Flag
from labelreview.queue import Queue, build_queue
from labelreview.report import DatasetScan, scan_dataset
from labelreview.scan import Scanner
from labelreview.signals import DataSignals, compute_signals

MAX_LABEL_LENGTH = 200


def resolve_curator(explicit: str | None, config: DatasetConfig | None = None) -> str:
    """The curator's id: the flag, else the config's ``curator``, else the OS user name."""
    for candidate in (explicit, config.curator if config is not None else None):
        if candidate is not None and candidate.strip():
            return candidate.strip()
    with contextlib.suppress(Exception):
        name = getpass.getuser()
        if name:
            return name
    return os.environ.get("USER") or "unknown"


@dataclass(frozen=True)
class DecisionRequest:
    """What a curator asked for, before it is checked."""

    label: str
    action: str
    """``accept``, ``rename`` or ``retire``."""
    reason: str
    new_label: str | None = None
    """The new name, for a rename."""
    fallback: str | None = None
    """For a retirement: the label its annotations move to (None: the configured one, or drop)."""
    source: str | None = None
    """Where the request came from (``batch.yaml line 4``), for error messages."""


@dataclass(frozen=True)
class DecisionCheck:
    """The verdict on a request: errors refuse it, warnings are shown and recorded."""

    request: DecisionRequest
    """The request as it will be written (trimmed; the configured fallback filled in)."""
    errors: tuple[str, ...] = ()
    warnings: tuple[str, ...] = ()
    merge: bool = False
    """A rename onto a label that already exists: the two become one."""

    @property
    def ok(self) -> bool:
        return not self.errors


@dataclass
class ReviewSession:
    """A loaded, scanned dataset plus its decision log.

    :attr:`flags` is the ranked review queue (:mod:`labelreview.queue`): lexicon findings and
    data signals merged, most urgent first. Every front end reads it; the data signals behind
    it are computed once, on first use.
    """

    scanned: DatasetScan
    curator: str
    clock: Clock = utc_now
    log: DecisionLog = field(init=False)
    _state: LogState | None = field(default=None, init=False, repr=False)
    _writer: LogWriter | None = field(default=None, init=False, repr=False)
    _fingerprint: Fingerprint | None = field(default=None, init=False, repr=False)
    _stamp: tuple[int, int] | None = field(default=None, init=False, repr=False)
    _signals: DataSignals | None = field(default=None, init=False, repr=False)
    _queue: Queue | None = field(default=None, init=False, repr=False)
    _flags: list[Flag] | None = field(default=None, init=False, repr=False)
    _preliminary: dict[str, Flag] | None = field(default=None, init=False, repr=False)
    _by_label: dict[str, Flag] | None = field(default=None, init=False, repr=False)
    _name_scanner: Scanner | None = field(default=None, init=False, repr=False)
    _labels: frozenset[str] | None = field(default=None, init=False, repr=False)

    def __post_init__(self) -> None:
        self.log = DecisionLog(self.config.log_path, clock=self.clock)

    # -- opening -------------------------------------------------------------------------------

    @classmethod
    def open(
        cls,
        dataset_dir: Path,
        *,
        curator: str | None = None,
        annotations: Path | None = None,
        taxonomy: Path | None = None,
        encoding: str | None = None,
        subjects: str | None = None,
        extra_layers: Sequence[Path] = (),
        clock: Clock = utc_now,
    ) -> ReviewSession:
        """Load, scan and attach the log of a dataset folder (nothing is locked yet)."""
        dataset = load_dataset(
            dataset_dir,
            annotations=annotations,
            taxonomy=taxonomy,
            encoding=encoding,
            subjects=subjects,
        )
        return cls.from_dataset(
            dataset, curator=curator, subjects=subjects, extra_layers=extra_layers, clock=clock
        )

    @classmethod
    def from_dataset(
        cls,
        dataset: Dataset,
        *,
        curator: str | None = None,
        subjects: str | None = None,
        extra_layers: Sequence[Path] = (),
        clock: Clock = utc_now,
    ) -> ReviewSession:
        scanned = scan_dataset(dataset, subjects=subjects, extra_layers=extra_layers)
        return cls(scanned=scanned, curator=resolve_curator(curator, dataset.config), clock=clock)

    # -- what the session knows ----------------------------------------------------------------

    @property
    def dataset(self) -> Dataset:
        return self.scanned.dataset

    @property
    def config(self) -> DatasetConfig:
        return self.scanned.dataset.config

    @property
    def lexicon_hash(self) -> str:
        return self.scanned.lexicon.content_hash

    @property
    def labels(self) -> frozenset[str]:
        """Every label the taxonomy or the annotations use."""
        if self._labels is None:
            self._labels = frozenset(self.scanned.result.usage)
        return self._labels

    def fingerprint(self) -> Fingerprint:
        """The dataset's input fingerprint (computed once per session)."""
        if self._fingerprint is None:
            self._fingerprint = dataset_fingerprint(self.dataset)
        return self._fingerprint

    def signals(self) -> DataSignals:
        """The data signals (contested, disparity, proxies, skew), computed once per session."""
        if self._signals is None:
            self._signals = compute_signals(self.dataset)
        return self._signals

    def queue(self) -> Queue:
        """The ranked review queue, built once per session from the scan and the signals."""
        if self._queue is None:
            self._queue = build_queue(self.scanned.result, self.signals(), self.config.queue)
        return self._queue

    @property
    def flags(self) -> list[Flag]:
        """The review queue's entries, most urgent first: what every front end lists.

        Labels the lexicons flag and labels only the data signals flag, each with its score,
        severity and reasons (see :mod:`labelreview.queue`). Computed on first use.
        """
        if self._flags is None:
            self._flags = list(self.queue().entries)
        return self._flags

    @flags.setter
    def flags(self, value: Iterable[Flag]) -> None:
        """Hand the session a ready list (benchmarks, tests); it replaces the queue's entries."""
        self._flags = list(value)
        self._by_label = None

    @property
    def signals_ready(self) -> bool:
        """The data signals and the full queue have been computed (:attr:`flags` is cheap)."""
        return self._flags is not None

    def preliminary_flags(self) -> list[Flag]:
        """The queue from the lexicon scan alone, before the data signals are computed.

        The same ranking rule with every data signal absent (contested, disparity and skew
        parts 0). The review app shows it at once and swaps in :attr:`flags` when the signals
        arrive, so a large dataset is browsable seconds earlier. Until then :meth:`flag` (and
        so each decision's snapshot) uses these entries: a decision records what the curator
        was shown.
        """
        queue = build_queue(
            self.scanned.result, DataSignals(settings=self.config.signals), self.config.queue
        )
        self._preliminary = queue.by_label
        return list(queue.entries)

    def flag(self, label: str) -> Flag | None:
        """The entry for ``label`` in :attr:`flags`, or None when nothing flags it.

        While only :meth:`preliminary_flags` has been built, the preliminary entry.
        """
        if self._flags is None and self._preliminary is not None:
            return self._preliminary.get(label)
        if self._by_label is None:
            self._by_label = {f.label: f for f in self.flags}
        return self._by_label.get(label)

    def state(self) -> LogState:
        """The fold over the log (re-read unless this session holds the writer)."""
        if self._writer is not None:
            if self._state is None or len(self._state.entries) != len(self._writer.entries):
                self._state = fold(self._writer.entries)
            return self._state
        try:
            stat = self.log.path.stat()
            stamp: tuple[int, int] | None = (stat.st_size, stat.st_mtime_ns)
        except FileNotFoundError:
            stamp = None
        if self._state is None or stamp is None or stamp != self._stamp:
            self._state = self.log.state()
            self._stamp = stamp
        return self._state

    def status(self, label: str) -> str:
        return self.state().status(label)

    def unresolved(self, fail_on: str | None = None) -> list[Flag]:
        """Flags at or above ``fail_on`` (default: the config's gate level) still open."""
        level = SEVERITY_RANK[fail_on or self.config.decisions.fail_on]
        state = self.state()
        return [
            f
            for f in self.flags
            if SEVERITY_RANK[f.severity] >= level and state.status(f.label) == "open"
        ]

    def progress(self) -> tuple[int, int]:
        """(flags with a decision in force, all flags)."""
        state = self.state()
        done = sum(1 for f in self.flags if state.status(f.label) != "open")
        return done, len(self.flags)

    def recent_reasons(self, limit: int = 8) -> list[str]:
        """Distinct reasons from the log, most recent first, for quick reuse."""
        seen: dict[str, None] = {}
        for entry in reversed(self.state().entries):
            reason = entry.get("reason")
            if isinstance(reason, str) and reason not in seen:
                seen[reason] = None
            if len(seen) >= limit:
                break
        return list(seen)

    # -- checking and deciding -----------------------------------------------------------------

    def check(self, request: DecisionRequest) -> DecisionCheck:
        """Every rule a decision must pass, without writing anything."""
        errors: list[str] = []
        warnings: list[str] = []
        labels = self.labels
        label = request.label
        reason = " ".join(request.reason.split()) if request.reason else ""
        new_label = request.new_label.strip() if request.new_label else None
        fallback = request.fallback.strip() if request.fallback else None
        action = request.action
        merge = False

        if action not in ACTIONS:
            errors.append(f"action must be one of {', '.join(ACTIONS)}; got {action!r}")
        if label not in labels:
            errors.append(f"no label '{label}' in this dataset{_did_you_mean(label, labels)}")
        minimum = self.config.decisions.min_reason_length
        if not reason:
            errors.append("a reason is required")
        elif len(reason) < minimum:
            errors.append(
                f"the reason is too short ({len(reason)} characters; at least {minimum} needed, "
                "so the record says why)"
            )
        if action == "rename":
            if not new_label:
                errors.append("a rename needs a new name")
            elif new_label == label:
                errors.append("the new name is the same as the old one; use accept instead")
            elif len(new_label) > MAX_LABEL_LENGTH:
                errors.append(f"the new name is longer than {MAX_LABEL_LENGTH} characters")
            elif any(ord(ch) < 32 for ch in new_label):
                errors.append("the new name contains control characters (tabs, line breaks)")
            else:
                if new_label in labels:
                    merge = True
                    uses = self.scanned.result.usage[new_label].annotations
                    warnings.append(
                        f"'{new_label}' already exists ({uses} annotations): renaming merges "
                        f"'{label}' into it"
                    )
                flagged = self._scan_name(new_label)
                if flagged:
                    warnings.append(f"the new name is itself flagged: {flagged}")
                if self.state().status(new_label) == "retired":
                    warnings.append(f"'{new_label}' has been retired; apply will follow that too")
        elif new_label:
            errors.append("only a rename takes a new name")
        if action == "retire":
            if fallback is None:
                fallback = self.config.decisions.retire_fallbacks.get(label)
            if fallback is not None:
                if fallback == label:
                    errors.append("a label cannot fall back to itself")
                elif fallback not in labels:
                    errors.append(
                        f"the fallback '{fallback}' is not a label of this dataset"
                        f"{_did_you_mean(fallback, labels)}"
                    )
        elif fallback:
            errors.append("only a retirement takes a fallback label")
        if not errors:
            earlier = self.state().decision(label)
            if earlier is not None:
                warnings.append(
                    f"replaces the earlier decision on '{label}' (seq {earlier.seq}, "
                    f"{earlier.get('action')} by {earlier.actor})"
                )
        clean = DecisionRequest(
            label=label,
            action=action,
            reason=reason,
            new_label=new_label if action == "rename" else None,
            fallback=fallback if action == "retire" else None,
            source=request.source,
        )
        return DecisionCheck(
            request=clean, errors=tuple(errors), warnings=tuple(warnings), merge=merge
        )

    def _scan_name(self, name: str) -> str:
        # One scanner per session: building it costs about 0.1 s, and the review app checks
        # a new name as it is typed.
        if self._name_scanner is None:
            self._name_scanner = Scanner(
                self.scanned.lexicon,
                self.scanned.result.subjects,
                fuzzy_threshold=self.config.scan.fuzzy_threshold,
                fuzzy_min_length=self.config.scan.fuzzy_min_length,
            )
        return "; ".join(dict.fromkeys(f.reason for f in self._name_scanner.scan_label(name)))

    def _body(self, check: DecisionCheck, curator: str) -> dict[str, Any]:
        request = check.request
        flag = self.flag(request.label)
        if flag is not None:
            snapshot = flag.to_dict()
        else:
            snapshot = {"label": request.label, "flagged": False}
        return {
            "kind": "decision",
            "curator": curator,
            "label": request.label,
            "action": request.action,
            "new_label": request.new_label,
            "fallback": request.fallback,
            "merge": check.merge,
            "reason": request.reason,
            "warnings": list(check.warnings),
            "finding": snapshot,
            "lexicon_hash": self.lexicon_hash,
            "dataset_fingerprint": self.fingerprint().digest,
        }

    def decide(self, request: DecisionRequest, *, curator: str | None = None) -> Entry:
        """Check a request and, if it passes, append it to the log durably.

        Returns:
            The written entry (already fsynced).

        Raises:
            DecisionError: The request broke a rule; nothing was written.
            LogLockedError: Another process holds the log.
            LogError: The log does not verify.
        """
        return self.decide_many([request], curator=curator)[0]

    def decide_many(
        self, requests: Iterable[DecisionRequest], *, curator: str | None = None
    ) -> list[Entry]:
        """Check every request first; write them all only if all pass (one lock, in order)."""
        requests = list(requests)
        if not requests:
            raise UsageError("no decisions to record")
        checks = [self.check(r) for r in requests]
        bad = [c for c in checks if not c.ok]
        if bad:
            first = bad[0]
            where = f"{first.request.source}: " if first.request.source else ""
            more = f" ({len(bad) - 1} more refused)" if len(bad) > 1 else ""
            raise DecisionError(
                f"{where}decision on '{first.request.label}' refused: "
                f"{'; '.join(first.errors)}{more}",
                hint="Nothing was written.",
            )
        who = resolve_curator(curator or self.curator)
        with self._writing() as writer:
            return [writer.append(self._body(check, who)) for check in checks]

    def undo(self, reason: str, *, curator: str | None = None) -> Entry:
        """Revoke the most recent decision still in force (a new entry; history stays).

        Raises:
            DecisionError: Nothing to undo, or the reason is missing or too short.
        """
        who = resolve_curator(curator or self.curator)
        target = self.state().last_active_decision()
        if target is None:
            raise DecisionError("there is no decision to undo")
        return self.revoke(target.seq, reason, curator=who)

    def revoke(self, seq: int, reason: str, *, curator: str | None = None) -> Entry:
        """Revoke the decision with sequence number ``seq``."""
        who = resolve_curator(curator or self.curator)
        reason = " ".join(reason.split()) if reason else ""
        minimum = self.config.decisions.min_reason_length
        if len(reason) < minimum:
            raise DecisionError(
                f"a reason of at least {minimum} characters is required to undo a decision"
            )
        state = self.state()
        target = next((e for e in state.entries if e.seq == seq), None)
        if target is None or target.kind != "decision":
            raise DecisionError(f"seq {seq} is not a decision in this log")
        if seq in state.revoked:
            raise DecisionError(f"decision seq {seq} was already revoked")
        with self._writing() as writer:
            return writer.append(
                {
                    "kind": "revoke",
                    "curator": who,
                    "label": target.label,
                    "revokes": seq,
                    "reason": reason,
                    "lexicon_hash": self.lexicon_hash,
                    "dataset_fingerprint": self.fingerprint().digest,
                }
            )

    def append_entry(self, body: dict[str, Any]) -> Entry:
        """Append any already-validated entry (sign-offs) through the session's writer."""
        with self._writing() as writer:
            return writer.append(body)

    # -- the log lock --------------------------------------------------------------------------

    @contextlib.contextmanager
    def _writing(self) -> Iterator[LogWriter]:
        if self._writer is not None:
            yield self._writer
            return
        with self.log.writer(holder=f"labelreview ({self.curator})") as writer:
            yield writer

    @contextlib.contextmanager
    def hold(self, holder: str = "the review app") -> Iterator[ReviewSession]:
        """Keep the log locked for a whole sitting; others are refused while it is held."""
        with self.log.writer(holder=f"{holder} ({self.curator})", session=True) as writer:
            self._writer = writer
            self._state = None
            try:
                yield self
            finally:
                self._writer = None
                self._state = None


def _did_you_mean(name: str, labels: Iterable[str]) -> str:
    close = difflib.get_close_matches(name, list(labels), n=1)
    return f"; did you mean '{close[0]}'?" if close else ""
