"""Scan a whole dataset: labels from taxonomy and annotations -> findings with their counts.

This is the one path both front ends (the CLI today, the review app later) use to turn a loaded
:class:`~labelreview.dataset.Dataset` into findings, so counts and ordering never differ
between them. Writers for the scan's rows live here too; zero findings still writes a header.
"""

from __future__ import annotations

import csv
import io
import json
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import pandas as pd

from labelreview.lexicon import Lexicon
from labelreview.model import SEVERITY_RANK, Finding
from labelreview.scan import Scanner

CAUTIONS: tuple[str, ...] = (
    "Flags are candidates for human judgement, not verdicts: a curator decides each one.",
    "A clean scan does not prove a dataset fair; lexicons only find the words someone listed.",
    "Demographic attributes are used only where people gave them with consent and self-reported "
    "them; labelreview never infers them.",
    "Local law, data-protection rules and your organisation's ethics review come first.",
)

CSV_COLUMNS: tuple[str, ...] = (
    "label",
    "severity",
    "category",
    "term",
    "matched",
    "match",
    "score",
    "suggestions",
    "annotations",
    "items",
    "reason",
    "source",
)


@dataclass(frozen=True)
class LabelUse:
    """How much the data uses one label."""

    annotations: int = 0
    items: int = 0
    in_taxonomy: bool = False


@dataclass
class ScanResult:
    """Everything a scan found, ready to print or write."""

    findings: list[Finding]
    usage: Mapping[str, LabelUse]
    subjects: str
    lexicon_hash: str
    labels_scanned: int

    def rows(self) -> list[dict[str, Any]]:
        """One dict per finding, most severe first, then by label."""
        out = []
        for f in sorted_findings(self.findings):
            use = self.usage.get(f.label, LabelUse())
            row = f.to_dict()
            row["annotations"] = use.annotations
            row["items"] = use.items
            out.append(row)
        return out


def sorted_findings(findings: Sequence[Finding]) -> list[Finding]:
    return sorted(
        findings, key=lambda f: (-SEVERITY_RANK[f.severity], f.label.casefold(), f.span, f.term)
    )


def label_usage(
    annotations: pd.DataFrame | None, taxonomy_names: Sequence[str] = ()
) -> dict[str, LabelUse]:
    """Count annotations and distinct items per label; taxonomy-only labels count zero."""
    usage: dict[str, LabelUse] = {}
    in_tax = set(taxonomy_names)
    if annotations is not None and len(annotations):
        grouped = annotations.groupby("label", sort=False)["item"].agg(["size", "nunique"])
        for label, size, nunique in zip(
            grouped.index, grouped["size"], grouped["nunique"], strict=True
        ):
            usage[str(label)] = LabelUse(int(size), int(nunique), str(label) in in_tax)
    for name in taxonomy_names:
        if name not in usage:
            usage[name] = LabelUse(0, 0, True)
    return usage


def scan_usage(
    usage: Mapping[str, LabelUse],
    lexicon: Lexicon,
    subjects: str,
    *,
    fuzzy_threshold: float | None = None,
    fuzzy_min_length: int | None = None,
) -> ScanResult:
    """Scan every label in ``usage`` and return the findings with their counts."""
    options: dict[str, Any] = {}
    if fuzzy_threshold is not None:
        options["fuzzy_threshold"] = fuzzy_threshold
    if fuzzy_min_length is not None:
        options["fuzzy_min_length"] = fuzzy_min_length
    scanner = Scanner(lexicon, subjects, **options)
    findings = scanner.scan(usage.keys())
    return ScanResult(
        findings=findings,
        usage=usage,
        subjects=subjects,
        lexicon_hash=lexicon.content_hash,
        labels_scanned=len(usage),
    )


def _neutralise(value: Any) -> Any:
    """Keep spreadsheet programs from running dataset text as a formula (OWASP CSV injection)."""
    if isinstance(value, str) and value[:1] in ("=", "+", "-", "@", "\t", "\r"):
        return "'" + value
    return value


def findings_csv(result: ScanResult) -> str:
    """CSV text: a header and one row per finding (the header alone when none)."""
    buf = io.StringIO()
    writer = csv.DictWriter(
        buf, fieldnames=list(CSV_COLUMNS), extrasaction="ignore", lineterminator="\n"
    )
    writer.writeheader()
    for row in result.rows():
        row = dict(row)
        row["suggestions"] = "; ".join(row["suggestions"])
        writer.writerow({k: _neutralise(v) for k, v in row.items()})
    return buf.getvalue()


def findings_json(result: ScanResult) -> str:
    """A JSON list of findings (``[]`` when none)."""
    return json.dumps(result.rows(), indent=2, ensure_ascii=False) + "\n"
