"""``labelreview review`` and ``labelreview demo`` around the review app: what happens without a
terminal, and how a problem the app met reaches the command line (one line, exit code 2).

The app itself is driven through Pilot in tests/tui; here its ``run`` is replaced so the
command's plumbing can be checked without a terminal.
"""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest
from click.testing import CliRunner

from labelreview._resources import sample_sets_dir
from labelreview.cli import cli
from labelreview.errors import LogLockedError
from labelreview.review import DecisionRequest, ReviewSession
from labelreview.tui import ReviewApp

SAMPLE = sample_sets_dir() / "harbour_archive"


@pytest.fixture
def sample(tmp_path: Path) -> Path:
    target = tmp_path / "harbour"
    shutil.copytree(SAMPLE, target)
    return target


def test_review_without_a_terminal_is_refused(sample: Path):
    result = CliRunner().invoke(cli, ["review", str(sample)])
    assert result.exit_code == 2
    assert "the review app needs a terminal" in result.stderr
    assert "labelreview decide" in result.stderr
    assert "Traceback" not in result.stderr
    assert not (sample / "labelreview-log.jsonl").exists()


def test_demo_without_a_terminal_prints_the_scan(tmp_path: Path):
    result = CliRunner().invoke(cli, ["demo", "--dir", str(tmp_path / "demo")])
    assert result.exit_code == 0, result.stderr
    assert "labels flagged" in result.stdout
    assert "labelreview review" in result.stderr


@pytest.fixture
def fake_terminal(monkeypatch: pytest.MonkeyPatch) -> list[ReviewApp]:
    """Pretend there is a terminal; the app's run() records the app and quits at once."""
    started: list[ReviewApp] = []
    monkeypatch.setattr("labelreview.cli.review.has_terminal", lambda: True)
    monkeypatch.setattr("labelreview.cli.setup.has_terminal", lambda: True)

    def run(self: ReviewApp, *args: object, **kwargs: object) -> None:
        started.append(self)
        return None

    monkeypatch.setattr(ReviewApp, "run", run)
    return started


def test_review_passes_the_options_to_the_app(sample: Path, fake_terminal):
    result = CliRunner().invoke(
        cli, ["review", str(sample), "--curator", "ines", "--subjects", "mixed", "--read-only"]
    )
    assert result.exit_code == 0, result.stderr
    (app,) = fake_terminal
    assert app.source is not None and app.source.dataset_dir == sample
    assert app.source.curator == "ines" and app.source.subjects == "mixed"
    assert app.read_only


def test_a_problem_in_the_app_becomes_one_error_line(sample: Path, fake_terminal, monkeypatch):
    def run(self: ReviewApp, *args: object, **kwargs: object) -> None:
        self.failure = LogLockedError(
            "the decision log is locked by the review app (tomas)",
            hint="Finish or close that session first; nothing was written.",
            source=str(sample / "labelreview-log.jsonl"),
        )

    monkeypatch.setattr(ReviewApp, "run", run)
    result = CliRunner().invoke(cli, ["review", str(sample)])
    assert result.exit_code == 2
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and "locked by the review app (tomas)" in lines[0]
    assert "Traceback" not in result.stderr


def test_review_of_a_missing_folder_is_refused(tmp_path: Path, fake_terminal):
    result = CliRunner().invoke(cli, ["review", str(tmp_path / "nowhere")])
    assert result.exit_code == 2
    assert "is not a folder" in result.stderr
    assert fake_terminal == []


def test_demo_with_a_terminal_opens_the_app_on_the_copy(tmp_path: Path, fake_terminal):
    target = tmp_path / "demo"
    result = CliRunner().invoke(cli, ["demo", "--dir", str(target), "--curator", "ines"])
    assert result.exit_code == 0, result.stderr
    (app,) = fake_terminal
    assert app.source is not None and app.source.dataset_dir == target
    assert (target / "annotations.csv").exists()
    # --no-app prints the scan instead, even with a terminal.
    again = CliRunner().invoke(cli, ["demo", "--dir", str(target), "--no-app"])
    assert again.exit_code == 0 and "labels flagged" in again.stdout
    assert len(fake_terminal) == 1


def test_demo_keeps_the_decisions_made_in_an_earlier_demo(tmp_path: Path, fake_terminal):
    target = tmp_path / "demo"
    assert CliRunner().invoke(cli, ["demo", "--dir", str(target)]).exit_code == 0
    session = ReviewSession.open(target, curator="ines")
    session.decide(
        DecisionRequest("people/roles/teacher", "accept", "the trade is on the source card")
    )
    log = (target / "labelreview-log.jsonl").read_bytes()
    assert CliRunner().invoke(cli, ["demo", "--dir", str(target)]).exit_code == 0
    assert (target / "labelreview-log.jsonl").read_bytes() == log
