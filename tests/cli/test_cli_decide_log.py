"""`labelreview decide` and `labelreview log verify|show|repair` through the real CLI."""

from __future__ import annotations

import json
import shutil
import subprocess
import sys
from pathlib import Path

import pytest
from click.testing import CliRunner

from labelreview._resources import sample_sets_dir
from labelreview.cli import cli

SAMPLE = sample_sets_dir() / "harbour_archive"
FLAGGED = "people/roles/cleaning_lady"
CLEANER = "people/roles/cleaner"
VAGRANT = "people/status/vagrant"


def run(*args: str):
    return CliRunner().invoke(cli, list(args))


@pytest.fixture
def sample(tmp_path: Path) -> Path:
    target = tmp_path / "harbour"
    shutil.copytree(SAMPLE, target)
    return target


def log_lines(folder: Path) -> list[dict]:
    path = folder / "labelreview-log.jsonl"
    return [json.loads(line) for line in path.read_text(encoding="utf-8").splitlines()]


def test_decide_each_action_and_show(sample: Path):
    r = run("decide", FLAGGED, str(sample), "--rename", CLEANER, "--reason", "neutral job word")
    assert r.exit_code == 0, r.stderr
    assert "recorded seq 1: rename" in r.stdout and "merge" in r.stdout
    assert "merges" in r.stderr  # the warning goes to stderr
    r = run(
        "decide",
        VAGRANT,
        str(sample),
        "--retire",
        "--reason",
        "status judgement",
        "--curator",
        "tomas",
    )
    assert r.exit_code == 0, r.stderr
    r = run("decide", CLEANER, str(sample), "--accept", "--reason", "already neutral wording")
    assert r.exit_code == 0, r.stderr
    entries = log_lines(sample)
    assert [e["action"] for e in entries] == ["rename", "retire", "accept"]
    assert entries[1]["curator"] == "tomas"
    r = run("log", "show", str(sample), "--curator", "tomas")
    assert r.exit_code == 0 and VAGRANT in r.stdout and FLAGGED not in r.stdout
    r = run("log", "show", str(sample), "--label", FLAGGED, "--format", "json")
    assert [e["seq"] for e in json.loads(r.stdout)] == [1]
    r = run("log", "verify", str(sample))
    assert r.exit_code == 0 and "verified (3 entries" in r.stdout


@pytest.mark.parametrize(
    ("args", "message"),
    [
        (["--accept", "--reason", "short"], "the reason is too short"),
        (["--accept"], "--reason is required"),
        (["--accept", "--retire", "--reason", "long enough reason"], "exactly one of"),
        (["--rename", "", "--reason", "long enough reason"], "a rename needs a new name"),
        (["--accept", "--fallback", CLEANER, "--reason", "long enough"], "--fallback goes with"),
        (["--retire", "--fallback", "nope", "--reason", "long enough"], "not a label of"),
    ],
)
def test_decide_refusals_are_one_line_exit_2(sample: Path, args, message):
    r = run("decide", FLAGGED, str(sample), *args)
    assert r.exit_code == 2, r.output
    assert message in r.stderr
    assert len(r.stderr.strip().splitlines()) == 1 or "read " in r.stderr
    assert "Traceback" not in r.stderr
    assert not (sample / "labelreview-log.jsonl").exists()


def test_decide_unknown_label_suggests(sample: Path):
    r = run("decide", "people/roles/cleaning_ladie", str(sample), "--accept", "--reason", "x" * 12)
    assert r.exit_code == 2 and f"did you mean '{FLAGGED}'" in r.stderr


def test_batch_file(sample: Path, tmp_path: Path):
    batch = tmp_path / "batch.yaml"
    batch.write_text(
        f"""curator: board
decisions:
  - label: {FLAGGED}
    action: rename
    new_label: {CLEANER}
    reason: neutral job word exists
  - label: {VAGRANT}
    action: retire
    reason: judges a person's status
""",
        encoding="utf-8",
    )
    r = run("decide", "--from", str(batch), str(sample))
    assert r.exit_code == 0, r.stderr
    entries = log_lines(sample)
    assert [(e["label"], e["curator"]) for e in entries] == [(FLAGGED, "board"), (VAGRANT, "board")]


def test_batch_with_a_bad_entry_writes_nothing_and_names_the_line(sample: Path, tmp_path: Path):
    batch = tmp_path / "batch.yaml"
    batch.write_text(
        f"""decisions:
  - label: {FLAGGED}
    action: accept
    reason: fine in this archive context
  - label: {VAGRANT}
    action: retire
    fallback: nowhere/at/all
    reason: judges a person's status
""",
        encoding="utf-8",
    )
    r = run("decide", "--from", str(batch), str(sample))
    assert r.exit_code == 2
    assert "batch.yaml line 5" in r.stderr and "not a label of" in r.stderr
    assert not (sample / "labelreview-log.jsonl").exists()


@pytest.mark.parametrize(
    ("text", "where"),
    [
        (
            "decisions:\n  - label: a\n    action: accept\n",
            "line 2, column 5: this decision has no",
        ),
        ("decisions:\n  - label: a\n    colour: red\n", "line 3, column 5: unknown key 'colour'"),
        ("decisions: [\n", "not valid YAML"),
        ("- a\n", "must be a mapping"),
    ],
)
def test_malformed_batch_files(sample: Path, tmp_path: Path, text: str, where: str):
    batch = tmp_path / "batch.yaml"
    batch.write_text(text, encoding="utf-8")
    r = run("decide", "--from", str(batch), str(sample))
    assert r.exit_code == 2 and where in r.stderr and "batch.yaml" in r.stderr


def test_verify_names_tampering_and_exits_1(sample: Path):
    for label in (FLAGGED, VAGRANT):
        assert run("decide", label, str(sample), "--accept", "--reason", "x" * 12).exit_code == 0
    path = sample / "labelreview-log.jsonl"
    path.write_bytes(path.read_bytes().replace(b"xxxxxxxxxxxx", b"xxxxxxxxxxxy", 1))
    r = run("log", "verify", str(sample))
    assert r.exit_code == 1
    assert "line 1" in r.stdout and "changed after it was written" in r.stdout
    r = run("log", "verify", str(sample), "--format", "json")
    data = json.loads(r.stdout)
    assert r.exit_code == 1 and data["ok"] is False and data["problem"]["line"] == 1
    r = run("decide", CLEANER, str(sample), "--accept", "--reason", "x" * 12)
    assert r.exit_code == 2 and "does not verify" in r.stderr


def test_torn_tail_reported_then_repaired(sample: Path):
    assert run("decide", FLAGGED, str(sample), "--accept", "--reason", "x" * 12).exit_code == 0
    path = sample / "labelreview-log.jsonl"
    before = path.read_bytes()
    with open(path, "ab") as handle:
        handle.write(b'{"v":1,"seq":2,')
    r = run("log", "verify", str(sample))
    assert r.exit_code == 1 and "labelreview log repair" in r.stdout
    r = run("decide", VAGRANT, str(sample), "--accept", "--reason", "x" * 12)
    assert r.exit_code == 2 and "labelreview log repair" in r.stderr
    r = run("log", "repair", str(sample))
    assert r.exit_code == 0, r.stderr
    side = next(sample.glob("labelreview-log.jsonl.torn-*"))
    assert side.read_bytes() == b'{"v":1,"seq":2,' and path.read_bytes() == before
    assert run("log", "verify", str(sample)).exit_code == 0
    assert "nothing to repair" in run("log", "repair", str(sample)).stdout


def test_verify_expect_head(sample: Path):
    assert run("decide", FLAGGED, str(sample), "--accept", "--reason", "x" * 12).exit_code == 0
    head = log_lines(sample)[-1]["hash"]
    assert run("decide", VAGRANT, str(sample), "--accept", "--reason", "x" * 12).exit_code == 0
    assert run("log", "verify", str(sample), "--expect-head", head).exit_code == 0
    r = run("log", "verify", str(sample), "--expect-head", "f" * 64)
    assert r.exit_code == 1 and "not in the chain" in r.stdout


def test_no_log_yet(sample: Path):
    r = run("log", "verify", str(sample))
    assert r.exit_code == 0 and "no decision log yet" in r.stdout
    assert "no decision log yet" in run("log", "show", str(sample)).stdout


def test_configured_log_path(sample: Path):
    config = sample / "labelreview.yaml"
    config.write_text(
        config.read_text(encoding="utf-8") + "decisions:\n  log: audit/trail.jsonl\n",
        encoding="utf-8",
    )
    assert run("decide", FLAGGED, str(sample), "--accept", "--reason", "x" * 12).exit_code == 0
    assert (sample / "audit" / "trail.jsonl").is_file()
    assert run("log", "verify", str(sample)).exit_code == 0


def test_console_script_decide_in_current_folder(sample: Path):
    # The installed entry point, run from inside the dataset folder (DATASET_DIR defaults to .).
    r = subprocess.run(
        [sys.executable, "-m", "labelreview", "decide", FLAGGED, "--accept", "--reason", "x" * 12],
        cwd=sample,
        capture_output=True,
        text=True,
    )
    assert r.returncode == 0, r.stderr
    assert (sample / "labelreview-log.jsonl").is_file()
