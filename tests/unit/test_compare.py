"""Comparing two versions of the sample set through the core API.

OLD is a copy of the sample set with decisions recorded through ReviewSession; NEW is a copy
edited by a seeded script: a neutral label added, a decided label removed, a judgemental label
added, and one label's annotations changed so its annotators agree less. Which sections each
change must land in is the contract of issue 4 (common practice, no source). The agreement
drop is checked against the ``krippendorff`` package (PyPI), computing the one-label-vs-rest
alpha independently from the raw annotation rows.
"""

from __future__ import annotations

import shutil
from pathlib import Path

import krippendorff
import numpy as np
import pandas as pd
import pytest

from labelreview._resources import sample_sets_dir
from labelreview.compare import compare_versions
from labelreview.review import DecisionRequest, ReviewSession

SAMPLE = sample_sets_dir() / "harbour_archive"
REASON = "checked against the catalogue card"

ADDED_NEUTRAL = "objects/boats/dinghy"
ADDED_FLAGGED = "people/looks/shifty_stranger"
REMOVED = "people/status/vagrant"  # retired in OLD, gone from NEW
LOWERED = "places/beach/sands"  # every annotator agrees on it in the sample set
SWAPPED_TO = "places/beach/rock_pools"
OTHER_LEXICON = "people/roles/teacher"  # decided in OLD with an extra lexicon layer
NEVER_DECIDED = "people/roles/boatman"  # flagged in both, never decided


def _copy(tmp_path: Path, name: str) -> Path:
    target = tmp_path / name
    shutil.copytree(SAMPLE, target)
    (target / "labelreview-log.jsonl").unlink(missing_ok=True)
    return target


def build_versions(tmp_path: Path, seed: int = 7) -> tuple[Path, Path]:
    """OLD with decisions, NEW with the four edits described in the module docstring."""
    old = _copy(tmp_path, "old")
    session = ReviewSession.open(old, curator="mira")
    decide = [
        DecisionRequest(f.label, "accept", REASON)
        for f in session.flags
        if f.label not in (REMOVED, OTHER_LEXICON, NEVER_DECIDED)
    ]
    decide.append(DecisionRequest(REMOVED, "retire", "a status verdict read off clothing"))
    session.decide_many(decide)
    layer = tmp_path / "extra_layer.yaml"
    layer.write_text("schema: 1\nlayer: test\nallow_labels: [objects/none]\n", encoding="utf-8")
    other = ReviewSession.open(old, curator="olu", extra_layers=[layer])
    assert other.lexicon_hash != session.lexicon_hash
    other.decide(DecisionRequest(OTHER_LEXICON, "accept", "the trade is on the source card"))

    new = _copy(tmp_path, "new")
    taxonomy = pd.read_csv(new / "taxonomy.csv", dtype=str, keep_default_na=False)
    taxonomy = taxonomy[taxonomy["name"] != REMOVED]
    extra = pd.DataFrame(
        [
            {"id": "t900", "name": ADDED_NEUTRAL, "parent": "objects/boats", "description": "x"},
            {"id": "t901", "name": ADDED_FLAGGED, "parent": "people/looks", "description": "x"},
        ]
    )
    pd.concat([taxonomy, extra]).to_csv(new / "taxonomy.csv", index=False)
    ann = pd.read_csv(new / "annotations.csv", dtype=str, keep_default_na=False)
    ann = ann[ann["tag"] != REMOVED].copy()
    rng = np.random.default_rng(seed)
    carrying = ann.index[ann["tag"] == LOWERED]
    for _, rows in ann.loc[carrying].groupby("photo_id"):
        if len(rows) >= 2:  # one annotator of each item now says something else
            ann.loc[rng.choice(rows.index.to_numpy()), "tag"] = SWAPPED_TO
    more = pd.DataFrame(
        [
            {"photo_id": "hb_0003", "volunteer": "gannet", "tag": ADDED_NEUTRAL},
            {"photo_id": "hb_0004", "volunteer": "gannet", "tag": ADDED_FLAGGED},
        ]
    )
    pd.concat([ann, more]).to_csv(new / "annotations.csv", index=False)
    return old, new


def reference_label_alpha(folder: Path, label: str) -> float:
    """One label vs the rest, with the krippendorff package: 1 if the annotator gave the label
    to the item, 0 if they annotated the item without it, missing if they did not annotate it."""
    ann = pd.read_csv(folder / "annotations.csv", dtype=str).drop_duplicates()
    given = ann.assign(has=(ann["tag"] == label).astype(float))
    matrix = given.groupby(["volunteer", "photo_id"])["has"].max().unstack()
    return float(krippendorff.alpha(reliability_data=matrix.to_numpy(dtype=float)))


@pytest.fixture
def versions(tmp_path: Path) -> tuple[ReviewSession, ReviewSession, Path, Path]:
    old, new = build_versions(tmp_path)
    return ReviewSession.open(old, curator="x"), ReviewSession.open(new, curator="x"), old, new


def test_labels_added_and_removed(versions):
    old, new, _, _ = versions
    result = compare_versions(old, new)
    assert result.labels_added == (ADDED_NEUTRAL, ADDED_FLAGGED)
    assert result.labels_removed == (REMOVED,)


def test_new_findings(versions):
    old, new, _, _ = versions
    result = compare_versions(old, new)
    assert [f.label for f in result.new_findings] == [ADDED_FLAGGED]
    finding = result.new_findings[0]
    assert finding.new_categories == finding.categories == ("character_judgement",)
    assert not finding.was_flagged


def test_carried_decisions_are_same_label_same_lexicon(versions):
    old, new, _, _ = versions
    result = compare_versions(old, new)
    carried = {c.label for c in result.carried}
    expected = {
        e.label
        for e in old.state().active_decisions()
        if e.label in new.labels and e.get("lexicon_hash") == new.lexicon_hash
    }
    assert carried == expected and len(carried) == len(old.flags) - 3
    assert OTHER_LEXICON not in carried and REMOVED not in carried
    assert all(c.action == "accept" and c.reason == REASON for c in result.carried)


def test_needs_review_sections(versions):
    old, new, _, _ = versions
    result = compare_versions(old, new)
    kinds = {(r.label, r.kind) for r in result.needs_review}
    assert (ADDED_FLAGGED, "no_decision") in kinds
    assert (NEVER_DECIDED, "no_decision") in kinds
    assert (OTHER_LEXICON, "lexicon_changed") in kinds
    assert (REMOVED, "label_removed") in kinds
    assert (LOWERED, "agreement_drop") in kinds
    why = {r.label: r.why for r in result.needs_review}
    assert why[ADDED_FLAGGED] == "a new label, flagged, with no decision"
    assert why[NEVER_DECIDED] == "flagged in both versions and never decided"
    assert why[REMOVED].startswith("decided in OLD (seq ") and "no longer has" in why[REMOVED]
    assert result.anything_to_review
    data = result.to_dict()
    assert data["anything_to_review"] is True and not data["lexicon_changed"]


def test_agreement_drop_matches_the_krippendorff_package(versions):
    old, new, old_dir, new_dir = versions
    result = compare_versions(old, new)
    assert result.agreement_checked and result.agreement_threshold == 0.10
    drops = {d.label: d for d in result.agreement_drops}
    assert LOWERED in drops
    d = drops[LOWERED]
    assert d.old_alpha == pytest.approx(reference_label_alpha(old_dir, LOWERED), abs=1e-9)
    assert d.new_alpha == pytest.approx(reference_label_alpha(new_dir, LOWERED), abs=1e-9)
    assert d.drop > 0.10
    # A threshold above the drop leaves it out.
    higher = compare_versions(old, new, agreement_drop=d.drop + 0.01)
    assert LOWERED not in {x.label for x in higher.agreement_drops}


def test_identical_versions_need_nothing_once_decided(tmp_path: Path):
    old_dir = _copy(tmp_path, "old")
    session = ReviewSession.open(old_dir, curator="mira")
    session.decide_many([DecisionRequest(f.label, "accept", REASON) for f in session.flags])
    new_dir = _copy(tmp_path, "new")
    result = compare_versions(session, ReviewSession.open(new_dir, curator="x"))
    assert result.labels_added == result.labels_removed == ()
    assert result.new_findings == () and result.needs_review == ()
    assert len(result.carried) == len(session.flags)
    assert result.agreement_checked and result.agreement_drops == ()
    assert not result.anything_to_review


def test_decision_in_new_log_covers_a_flag(tmp_path: Path):
    old_dir, new_dir = build_versions(tmp_path)
    new = ReviewSession.open(new_dir, curator="ana")
    new.decide(DecisionRequest(ADDED_FLAGGED, "retire", "a character verdict from a photograph"))
    result = compare_versions(ReviewSession.open(old_dir, curator="x"), new)
    assert ADDED_FLAGGED not in {r.label for r in result.needs_review}
    assert ADDED_FLAGGED in {f.label for f in result.new_findings}  # still a new finding


def test_single_annotator_skips_agreement_with_a_note(tmp_path: Path):
    old_dir = _copy(tmp_path, "old")
    new_dir = _copy(tmp_path, "new")
    for folder in (old_dir, new_dir):
        ann = pd.read_csv(folder / "annotations.csv", dtype=str)
        ann.assign(volunteer="gannet").drop_duplicates().to_csv(
            folder / "annotations.csv", index=False
        )
    result = compare_versions(
        ReviewSession.open(old_dir, curator="x"), ReviewSession.open(new_dir, curator="x")
    )
    assert not result.agreement_checked and result.agreement_drops == ()
    assert result.notes == (
        "per-label agreement not compared: OLD has fewer than two annotators, so agreement is "
        "undefined",
    )
