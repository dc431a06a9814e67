"""The invented sample set plaza_study: reproducible from its seeded script, and the queue finds
every effect its README says was planted (demo data, not a measure of the method)."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest

from labelreview._resources import sample_sets_dir
from labelreview.review import ReviewSession

PLAZA = sample_sets_dir() / "plaza_study"
SCRIPT = Path(__file__).resolve().parents[2] / "scripts" / "make_plaza_study.py"


@pytest.fixture(scope="module")
def session() -> ReviewSession:
    return ReviewSession.open(PLAZA, curator="mira")


def test_the_script_rewrites_the_same_bytes(tmp_path: Path):
    subprocess.run([sys.executable, str(SCRIPT), "--out", str(tmp_path)], check=True)
    for name in ("items.csv", "annotations.csv", "taxonomy.txt"):
        assert (tmp_path / name).read_bytes() == (PLAZA / name).read_bytes(), name


def test_planted_disparity_loitering_by_age_band(session: ReviewSession):
    found = [d for d in session.signals().disparity if d.label == "loitering" and d.flagged]
    assert [d.attribute for d in found] == ["age_band"]
    assert found[0].highest == "16-24" and found[0].ratio < 0.8
    assert "disparity" in session.flag("loitering").signal_names


def test_planted_real_difference_skateboarding_is_flagged_too(session: ReviewSession):
    flag = session.flag("skateboarding")
    assert flag is not None and "disparity" in flag.signal_names


def test_planted_contested_waiting(session: ReviewSession):
    waiting = next(c for c in session.signals().contested if c.label == "waiting")
    assert waiting.alpha < 0.667
    assert waiting.splits[0].other == "standing"


def test_planted_annotator_skew_rowan_on_idle(session: ReviewSession):
    assert [(s.annotator, s.label, s.direction) for s in session.signals().skew] == [
        ("rowan", "idle", "more")
    ]
    rowan = session.signals().annotators[0]
    assert rowan.annotator == "rowan" and (rowan.alpha_change or 0) > 0


def test_planted_proxy_camera_zone_for_age_band(session: ReviewSession):
    flagged = [(p.column, p.attribute) for p in session.signals().proxies if p.flagged]
    assert flagged == [("camera_zone", "age_band")]
    skipped = [p for p in session.signals().proxies if p.column == "participant"]
    assert skipped and all("distinct values" in (p.reason or "") for p in skipped)


def test_nothing_planted_for_gender_and_the_tiny_group_is_never_named(session: ReviewSession):
    signals = session.signals()
    assert not any(d.flagged for d in signals.disparity if d.attribute == "gender")
    names = {g.group for d in signals.disparity for g in d.groups}
    assert "85+" not in names and "65-84 + 1 smaller group" in names
