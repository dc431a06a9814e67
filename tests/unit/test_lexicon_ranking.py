"""The lexicons' part of the ranking: each flagged label's findings summed up once
(``report.lexicon_reasons``), the bare scan's flags (``flags_from_scan``) and the review queue
built from the same summaries, and the label counts both rest on.

The rules checked are the project's own, as documented in ``flags_from_scan``,
``lexicon_reasons`` and ``labelreview/queue.py``; the label counts are checked against plain
counting with the standard library. Labels are invented; the terms come from the shipped
lexicons.
"""

from __future__ import annotations

import math
from collections import Counter, defaultdict

import pytest

from labelreview._resources import sample_sets_dir
from labelreview.config import QueueConfig, SignalsConfig
from labelreview.dataset import load_dataset
from labelreview.lexicon import load_lexicon
from labelreview.model import SEVERITY_RANK
from labelreview.queue import LEXICON_PART, build_queue
from labelreview.report import LabelUse, ScanResult, flags_from_scan, label_usage, lexicon_reasons
from labelreview.scan import Scanner
from labelreview.signals import DataSignals

LEXICON = load_lexicon()


def _result(usage: dict[str, int]) -> ScanResult:
    """The scan of these labels, each used ``n`` times on ``n`` items."""
    findings = Scanner(LEXICON, "people").scan(usage)
    return ScanResult(
        findings=findings,
        usage={label: LabelUse(n, n, True) for label, n in usage.items()},
        subjects="people",
        lexicon_hash=LEXICON.content_hash,
        labels_scanned=len(usage),
    )


def _queue(result: ScanResult):  # noqa: ANN202
    return build_queue(result, DataSignals(settings=SignalsConfig()), QueueConfig())


def test_a_summary_reads_the_findings_most_severe_first():
    result = _result({"lazy male nurse": 3})
    (summary,) = lexicon_reasons(result.findings).values()
    # findings: lazy (high), nurse (medium), the gender word before it (low)
    assert summary.severity == "high"
    assert summary.categories == (
        "character_judgement",
        "occupation_from_appearance",
        "gendered_term",
    )
    assert summary.terms == ("lazy", "nurse", "male + occupation")
    ordered = sorted(result.findings, key=lambda f: (-SEVERITY_RANK[f.severity], f.span, f.term))
    assert summary.reasons == tuple(f.reason for f in ordered)
    assert [(r.signal, r.detail, r.value) for r in summary.evidence] == [
        ("lexicon", f.reason, f.term) for f in ordered
    ]
    assert summary.suggestions == ("resting", "relaxing")


def test_labels_with_the_same_findings_get_equal_summaries_and_their_own_flags():
    labels = {"lazy male nurse": 3, "people/Lazy_Male_Nurse_12": 3, "thug, lazy worker": 1}
    result = _result(labels)
    summaries = lexicon_reasons(result.findings)
    assert list(summaries) == list(labels)  # first-seen order
    assert summaries["lazy male nurse"] == summaries["people/Lazy_Male_Nurse_12"]
    assert summaries["thug, lazy worker"].terms == ("thug", "lazy")
    flags = {f.label: f for f in _queue(result).entries}
    a, b = flags["lazy male nurse"], flags["people/Lazy_Male_Nurse_12"]
    assert (a.reasons, a.score, a.score_parts) == (b.reasons, b.score, b.score_parts)
    a.score_parts["lexicon"] = -1.0  # each flag has its own dict: no change leaks across
    assert b.score_parts["lexicon"] == 1.0


def test_flags_from_scan_orders_by_severity_then_use_then_name():
    result = _result({"nurse": 2, "Thug": 1, "fireman": 9, "lazy worker": 5, "cook": 7})
    flags = flags_from_scan(result)
    assert [f.label for f in flags] == ["lazy worker", "Thug", "cook", "nurse", "fireman"]
    for flag in flags:
        summary = lexicon_reasons(result.findings)[flag.label]
        assert (flag.severity, flag.terms, flag.reasons, flag.evidence) == (
            summary.severity,
            summary.terms,
            summary.reasons,
            summary.evidence,
        )
        assert flag.annotations == flag.items == result.usage[flag.label].annotations
        assert flag.score is None


@pytest.mark.parametrize("order", [["Nurse", "nurse", "NURSE"], ["NURSE", "nurse", "Nurse"]])
def test_queue_ties_keep_the_order_flags_from_scan_gives(order: list[str]):
    # Same score, severity, annotations and case-folded name: nothing left to sort on.
    result = _result({**dict.fromkeys(order, 4), "lazy worker": 4, "cook": 1})
    entries = [f.label for f in _queue(result).entries]
    assert entries == [f.label for f in flags_from_scan(result)]
    assert entries == ["lazy worker", *order, "cook"]


def test_lexicon_only_scores_follow_the_documented_formula():
    counts = {f"people/quay_{i}/nurse_{i}": 1 + i % 4 for i in range(40)}
    counts |= {f"people/lane_{i}/thug_{i}": 1 + i % 3 for i in range(20)}
    queue = _queue(_result(counts))
    weights = queue.weights
    most = max(counts.values())
    for flag in queue.entries:
        prevalence = math.log1p(counts[flag.label]) / math.log1p(most)
        lex = LEXICON_PART[flag.severity]
        expected = 100 * (weights["lexicon"] * lex + weights["prevalence"] * prevalence)
        assert flag.score == round(expected / sum(weights.values()), 1)
        assert flag.score_parts == {
            "lexicon": round(lex, 4),
            "contested": 0.0,
            "disparity": 0.0,
            "annotator_skew": 0.0,
            "prevalence": round(prevalence, 4),
        }


@pytest.mark.parametrize("name", ["harbour_archive", "plaza_study"])
def test_label_usage_counts_rows_and_distinct_items(name: str):
    dataset = load_dataset(sample_sets_dir() / name)
    taxonomy = [t.name for t in dataset.taxonomy]
    rows = list(zip(dataset.annotations["item"], dataset.annotations["label"], strict=True))
    uses = Counter(label for _, label in rows)
    items: defaultdict[str, set[str]] = defaultdict(set)
    for item, label in rows:
        items[label].add(item)
    usage = label_usage(dataset.annotations, taxonomy)
    first_seen = list(dict.fromkeys(label for _, label in rows))
    assert list(usage) == first_seen + [t for t in taxonomy if t not in uses]
    for label, use in usage.items():
        assert use == LabelUse(uses[label], len(items[label]), label in taxonomy)
