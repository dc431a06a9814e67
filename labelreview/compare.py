"""Compare two versions of a dataset: the tripwire before a new version is released.

Given OLD and NEW (each an open :class:`~labelreview.review.ReviewSession`),
:func:`compare_versions` lists:

- labels added and removed;
- new findings: labels flagged in NEW that OLD did not flag, or flagged for new categories;
- decisions that carry over: OLD's decision in force on a label NEW still has, made with the same
  lexicon set NEW is scanned with now;
- what needs a new look: flagged NEW labels that no carried decision (nor a decision in NEW's own
  log, made with NEW's lexicon set) covers; OLD decisions made with another lexicon set; OLD
  decisions on labels NEW no longer has;
- labels whose per-label agreement (Krippendorff's alpha, one label against the rest) fell by
  more than NEW's ``compare.agreement_drop``. Where agreement cannot be computed (one annotator,
  too few items) the section is skipped or the label left out, with a note; that is not an error.

The result is a :class:`Comparison`; the CLI prints it or writes its ``to_dict()`` as JSON.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any, Literal

from labelreview.decisions import Entry, LogState
from labelreview.model import SEVERITY_RANK, Flag

if TYPE_CHECKING:
    from labelreview.review import ReviewSession

ReviewKind = Literal["no_decision", "lexicon_changed", "label_removed", "agreement_drop"]


@dataclass(frozen=True)
class NewFinding:
    """A label NEW flags that OLD did not, or flags for more categories."""

    label: str
    severity: str
    categories: tuple[str, ...]
    """All of NEW's categories for the label."""
    new_categories: tuple[str, ...]
    """The categories OLD did not flag it for (all of them for a newly flagged label)."""
    reasons: tuple[str, ...]
    was_flagged: bool
    """OLD flagged the label too (for other categories)."""

    def to_dict(self) -> dict[str, Any]:
        return {
            "label": self.label,
            "severity": self.severity,
            "categories": list(self.categories),
            "new_categories": list(self.new_categories),
            "reasons": list(self.reasons),
            "was_flagged": self.was_flagged,
        }


@dataclass(frozen=True)
class CarriedDecision:
    """OLD's decision in force that still applies to NEW."""

    label: str
    seq: int
    action: str
    new_label: str | None
    curator: str
    reason: str
    time: str

    @classmethod
    def from_entry(cls, entry: Entry) -> CarriedDecision:
        return cls(
            label=str(entry.label),
            seq=entry.seq,
            action=str(entry.get("action")),
            new_label=entry.get("new_label"),
            curator=entry.actor,
            reason=str(entry.get("reason", "")),
            time=entry.time,
        )

    def to_dict(self) -> dict[str, Any]:
        return {
            "label": self.label,
            "seq": self.seq,
            "action": self.action,
            "new_label": self.new_label,
            "curator": self.curator,
            "reason": self.reason,
            "time": self.time,
        }


@dataclass(frozen=True)
class ReviewItem:
    """One thing in NEW that needs a curator's look, and why."""

    label: str
    kind: ReviewKind
    why: str
    """One plain sentence."""
    severity: str | None = None
    """NEW's severity for the label, where NEW flags it."""
    old_seq: int | None = None
    """The OLD decision concerned, if any."""

    def to_dict(self) -> dict[str, Any]:
        return {
            "label": self.label,
            "kind": self.kind,
            "why": self.why,
            "severity": self.severity,
            "old_seq": self.old_seq,
        }


@dataclass(frozen=True)
class AgreementDrop:
    """A label whose per-label alpha fell by more than the configured amount."""

    label: str
    old_alpha: float
    new_alpha: float

    @property
    def drop(self) -> float:
        return self.old_alpha - self.new_alpha

    def to_dict(self) -> dict[str, Any]:
        return {
            "label": self.label,
            "old_alpha": round(self.old_alpha, 6),
            "new_alpha": round(self.new_alpha, 6),
            "drop": round(self.drop, 6),
        }


@dataclass(frozen=True)
class Comparison:
    """What changed between two dataset versions and what needs review."""

    old: str
    new: str
    old_fingerprint: str
    new_fingerprint: str
    old_lexicon_hash: str
    new_lexicon_hash: str
    labels_added: tuple[str, ...]
    labels_removed: tuple[str, ...]
    new_findings: tuple[NewFinding, ...]
    carried: tuple[CarriedDecision, ...]
    needs_review: tuple[ReviewItem, ...]
    """Everything needing a look, agreement drops included."""
    agreement_drops: tuple[AgreementDrop, ...]
    agreement_threshold: float
    agreement_checked: bool
    """Per-label agreement was computed for both versions."""
    notes: tuple[str, ...] = field(default_factory=tuple)

    @property
    def anything_to_review(self) -> bool:
        return bool(self.needs_review)

    def to_dict(self) -> dict[str, Any]:
        return {
            "old": {
                "dataset": self.old,
                "dataset_fingerprint": self.old_fingerprint,
                "lexicon_hash": self.old_lexicon_hash,
            },
            "new": {
                "dataset": self.new,
                "dataset_fingerprint": self.new_fingerprint,
                "lexicon_hash": self.new_lexicon_hash,
            },
            "lexicon_changed": self.old_lexicon_hash != self.new_lexicon_hash,
            "labels_added": list(self.labels_added),
            "labels_removed": list(self.labels_removed),
            "new_findings": [f.to_dict() for f in self.new_findings],
            "carried_decisions": [c.to_dict() for c in self.carried],
            "needs_review": [r.to_dict() for r in self.needs_review],
            "agreement": {
                "checked": self.agreement_checked,
                "threshold": self.agreement_threshold,
                "drops": [d.to_dict() for d in self.agreement_drops],
            },
            "anything_to_review": self.anything_to_review,
            "notes": list(self.notes),
        }


def _label_alphas(session: ReviewSession) -> tuple[dict[str, float] | None, str | None]:
    """Per-label alpha by label, or (None, why not)."""
    # The review queue's data signals ran the agreement report for this session already.
    computed = session.signals().agreement
    if computed is not None:
        return {a.label: float(a.alpha) for a in computed.per_label if a.alpha is not None}, None
    from labelreview.evidence import label_agreement

    labels, reason = label_agreement(session.dataset)
    if reason is not None:
        return None, reason
    return {a.label: float(a.alpha) for a in labels.values() if a.alpha is not None}, None


def _covered_in_new(state: LogState | None, label: str, lexicon_hash: str) -> Entry | None:
    if state is None:
        return None
    entry = state.decision(label)
    if entry is not None and entry.get("lexicon_hash") == lexicon_hash:
        return entry
    return None


def compare_versions(
    old: ReviewSession,
    new: ReviewSession,
    *,
    agreement_drop: float | None = None,
    agreement: bool = True,
) -> Comparison:
    """Compare OLD with NEW; see the module docstring for each section.

    Args:
        old: The earlier version, with the decision log that applied to it.
        new: The version to be released.
        agreement_drop: Alpha drop that needs a look (default: NEW's ``compare.agreement_drop``).
        agreement: Compute per-label agreement (False skips the section with a note).

    Returns:
        A :class:`Comparison`.

    Raises:
        LogError: OLD's (or NEW's) decision log does not verify.
    """
    threshold = new.config.compare.agreement_drop if agreement_drop is None else agreement_drop
    notes: list[str] = []
    old_labels, new_labels = old.labels, new.labels
    added = tuple(sorted(new_labels - old_labels))
    removed = tuple(sorted(old_labels - new_labels))

    old_flags: dict[str, Flag] = {f.label: f for f in old.flags}
    new_findings: list[NewFinding] = []
    for flag in new.flags:
        before = old_flags.get(flag.label)
        fresh = tuple(c for c in flag.categories if before is None or c not in before.categories)
        if fresh:
            new_findings.append(
                NewFinding(
                    label=flag.label,
                    severity=flag.severity,
                    categories=flag.categories,
                    new_categories=fresh,
                    reasons=flag.reasons,
                    was_flagged=before is not None,
                )
            )

    old_state = old.state()
    new_state = new.state() if new.log.path.resolve() != old.log.path.resolve() else None
    carried: dict[str, CarriedDecision] = {}
    review: list[ReviewItem] = []
    for entry in old_state.active_decisions():
        label = str(entry.label)
        if label not in new_labels:
            review.append(
                ReviewItem(
                    label=label,
                    kind="label_removed",
                    why=f"decided in OLD (seq {entry.seq}, {entry.get('action')}) but NEW no "
                    "longer has this label; check where its annotations went",
                    old_seq=entry.seq,
                )
            )
        elif entry.get("lexicon_hash") == new.lexicon_hash:
            carried[label] = CarriedDecision.from_entry(entry)
        elif _covered_in_new(new_state, label, new.lexicon_hash) is None:
            current = new.flag(label)
            review.append(
                ReviewItem(
                    label=label,
                    kind="lexicon_changed",
                    why=f"decided in OLD (seq {entry.seq}, {entry.get('action')}) with lexicon "
                    f"{str(entry.get('lexicon_hash'))[:19]}; NEW is scanned with "
                    f"{new.lexicon_hash[:19]}",
                    severity=None if current is None else current.severity,
                    old_seq=entry.seq,
                )
            )
    listed = {r.label for r in review}
    for flag in new.flags:
        if flag.label in carried or flag.label in listed:
            continue
        if _covered_in_new(new_state, flag.label, new.lexicon_hash) is not None:
            continue
        if flag.label in added:
            why = "a new label, flagged, with no decision"
        elif flag.label in old_flags:
            why = "flagged in both versions and never decided"
        else:
            why = "newly flagged, with no decision"
        review.append(
            ReviewItem(label=flag.label, kind="no_decision", why=why, severity=flag.severity)
        )

    drops: list[AgreementDrop] = []
    checked = False
    if not agreement:
        notes.append("per-label agreement not compared (turned off)")
    else:
        old_alpha, old_why = _label_alphas(old)
        new_alpha, new_why = _label_alphas(new)
        if old_alpha is None or new_alpha is None:
            which = "OLD" if old_alpha is None else "NEW"
            notes.append(f"per-label agreement not compared: {which} has {old_why or new_why}")
        else:
            checked = True
            both = sorted(set(old_alpha) & set(new_alpha))
            common = old_labels & new_labels
            skipped = sum(1 for lab in common if (lab in old_alpha) != (lab in new_alpha))
            for label in both:
                if old_alpha[label] - new_alpha[label] > threshold:
                    drops.append(AgreementDrop(label, old_alpha[label], new_alpha[label]))
            if skipped > 0:
                notes.append(
                    f"{skipped} label(s) have a per-label alpha in only one version (too few "
                    "items in the other) and were not compared"
                )
    drops.sort(key=lambda d: (-d.drop, d.label))
    for d in drops:
        current = new.flag(d.label)
        review.append(
            ReviewItem(
                label=d.label,
                kind="agreement_drop",
                why=f"per-label agreement fell from {d.old_alpha:.3f} to {d.new_alpha:.3f} "
                f"(more than {threshold:.2f})",
                severity=None if current is None else current.severity,
            )
        )
    review.sort(
        key=lambda r: (
            -SEVERITY_RANK.get(r.severity or "", 0),
            ["no_decision", "lexicon_changed", "label_removed", "agreement_drop"].index(r.kind),
            r.label,
        )
    )
    return Comparison(
        old=str(old.dataset.root),
        new=str(new.dataset.root),
        old_fingerprint=old.fingerprint().digest,
        new_fingerprint=new.fingerprint().digest,
        old_lexicon_hash=old.lexicon_hash,
        new_lexicon_hash=new.lexicon_hash,
        labels_added=added,
        labels_removed=removed,
        new_findings=tuple(new_findings),
        carried=tuple(sorted(carried.values(), key=lambda c: c.seq)),
        needs_review=tuple(review),
        agreement_drops=tuple(drops),
        agreement_threshold=threshold,
        agreement_checked=checked,
        notes=tuple(notes),
    )
