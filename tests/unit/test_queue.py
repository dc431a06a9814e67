"""The ranked review queue: one list for every front end, a documented score, plain reasons.

The score formula is the project's own (README, "The review queue"); these tests recompute it
from its documented parts. The bundled sample set plaza_study is invented data; its planted
effects are listed in sample_sets/plaza_study/README.md.
"""

from __future__ import annotations

import math
import shutil
from pathlib import Path

import pytest

from labelreview._resources import sample_sets_dir
from labelreview.gate import check_gate
from labelreview.model import SEVERITY_RANK, SIGNAL_NAMES
from labelreview.queue import LEXICON_PART
from labelreview.review import DecisionRequest, ReviewSession

PLAZA = sample_sets_dir() / "plaza_study"
REASON = "the photos were checked by the study team"


@pytest.fixture(scope="module")
def plaza() -> ReviewSession:
    return ReviewSession.open(PLAZA, curator="mira")


@pytest.fixture
def plaza_copy(tmp_path: Path) -> Path:
    target = tmp_path / "plaza"
    shutil.copytree(PLAZA, target)
    (target / "labelreview-log.jsonl").unlink(missing_ok=True)
    return target


def test_session_flags_are_the_queue(plaza: ReviewSession):
    queue = plaza.queue()
    assert plaza.flags == list(queue.entries)
    assert plaza.flag("loitering") is queue.by_label["loitering"]
    scores = [f.score for f in plaza.flags]
    assert scores == sorted(scores, reverse=True)


def test_signals_are_computed_lazily_once(plaza_copy: Path):
    session = ReviewSession.open(plaza_copy, curator="x")
    assert session._signals is None  # opening does not compute the data signals
    first = session.signals()
    _ = session.flags
    assert session.signals() is first and session.queue() is session.queue()


def test_score_is_the_documented_formula(plaza: ReviewSession):
    queue = plaza.queue()
    weights = queue.weights
    assert dict(weights) == {
        "lexicon": 3.0,
        "contested": 2.0,
        "disparity": 3.0,
        "annotator_skew": 1.0,
        "prevalence": 1.0,
    }
    most = max(u.annotations for u in plaza.scanned.result.usage.values())
    threshold = queue.signals.settings.contested_below
    for flag in plaza.flags:
        parts = flag.score_parts
        expected = 100 * sum(weights[k] * parts[k] for k in weights) / sum(weights.values())
        assert flag.score == pytest.approx(round(expected, 1), abs=0.051)
        lexicon = {f.severity for f in plaza.scanned.result.findings if f.label == flag.label}
        top = max(lexicon, key=lambda s: SEVERITY_RANK[s]) if lexicon else None
        assert parts["lexicon"] == pytest.approx(LEXICON_PART[top] if top else 0.0, abs=1e-4)
        assert parts["prevalence"] == pytest.approx(
            math.log1p(flag.annotations) / math.log1p(most), abs=1e-4
        )
        contested = flag.signals.get("contested")
        if contested:
            alpha = contested["alpha"]
            assert parts["contested"] == pytest.approx(
                min(1.0, (threshold - alpha) / threshold), abs=1e-3
            )
        disparity = flag.signals.get("disparity")
        if disparity:
            assert parts["disparity"] == pytest.approx(
                max(1 - d["ratio"] for d in disparity), abs=1e-3
            )


def test_every_entry_explains_itself(plaza: ReviewSession):
    for flag in plaza.flags:
        assert flag.evidence, flag.label
        assert flag.reasons == tuple(r.detail for r in flag.evidence)
        assert {r.signal for r in flag.evidence} <= set(SIGNAL_NAMES)
        if not flag.categories:  # flagged by data alone
            assert flag.signal_names and flag.terms == ()
        data = flag.to_dict()
        assert data["score"] == flag.score and data["reasons"] == list(flag.reasons)
        assert data["evidence"][0].keys() == {"signal", "detail", "value"}


def test_data_only_severity_comes_from_the_config(plaza: ReviewSession):
    severity = plaza.queue().severity
    loitering = plaza.flag("loitering")
    waiting = plaza.flag("waiting")
    assert loitering is not None and waiting is not None
    assert loitering.categories == () and loitering.severity == severity["disparity"] == "medium"
    assert waiting.signal_names == ("contested",) and waiting.severity == "low"


def test_proxy_reasons_only_explain_a_disparity(plaza: ReviewSession):
    for flag in plaza.flags:
        proxies = [r for r in flag.evidence if r.signal == "proxy"]
        if proxies:
            assert "disparity" in flag.signal_names
            assert all("camera_zone" in r.detail and "age_band" in r.detail for r in proxies)


def _set_config(folder: Path, old: str, new: str) -> None:
    path = folder / "labelreview.yaml"
    text = path.read_text(encoding="utf-8")
    assert old in text
    path.write_text(text.replace(old, new), encoding="utf-8")


def test_weights_change_the_order(plaza_copy: Path):
    _set_config(
        plaza_copy,
        "weights: {lexicon: 3, contested: 2, disparity: 3, annotator_skew: 1, prevalence: 1}",
        "weights: {lexicon: 0, contested: 0, disparity: 0, annotator_skew: 0, prevalence: 1}",
    )
    flags = ReviewSession.open(plaza_copy, curator="x").flags
    uses = [f.annotations for f in flags]
    assert uses == sorted(uses, reverse=True)  # prevalence alone ranks by use


def test_signal_severity_feeds_the_gate(plaza_copy: Path):
    session = ReviewSession.open(plaza_copy, curator="x")
    at_high = {g.label for g in check_gate(session, fail_on="high").unresolved}
    assert "loitering" not in at_high  # disparity is medium by default
    _set_config(
        plaza_copy,
        "severity: {contested: low, disparity: medium, annotator_skew: low}",
        "severity: {contested: low, disparity: high, annotator_skew: low}",
    )
    raised = ReviewSession.open(plaza_copy, curator="x")
    result = check_gate(raised, fail_on="high")
    assert "loitering" in {g.label for g in result.unresolved}
    assert not result.passed


def test_a_decision_snapshots_the_queue_entry(plaza_copy: Path):
    session = ReviewSession.open(plaza_copy, curator="x")
    entry = session.decide(DecisionRequest("idle", "retire", REASON))
    snapshot = entry.get("finding")
    assert snapshot["score"] == session.flag("idle").score
    assert {r["signal"] for r in snapshot["evidence"]} == {"contested", "annotator_skew"}


def test_taxonomy_only_dataset_queues_lexicon_flags_with_a_note(tmp_path: Path):
    folder = tmp_path / "tax"
    folder.mkdir()
    (folder / "taxonomy.txt").write_text("sitting\nsuspicious\nvagrant\n", encoding="utf-8")
    (folder / "labelreview.yaml").write_text(
        "version: 1\nsubjects: people\ntaxonomy: {path: taxonomy.txt}\n", encoding="utf-8"
    )
    session = ReviewSession.open(folder, curator="x")
    assert {f.label for f in session.flags} == {"suspicious", "vagrant"}
    assert all(f.signal_names == () for f in session.flags)
    assert any("no annotations" in n for n in session.queue().notes)
