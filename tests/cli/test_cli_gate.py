"""``labelreview check``, ``signoff`` and ``compare`` through the real CLI on copies of the
sample set: every exit code, every output format, bad input as one line.

Exit codes follow the convention of POSIX ``diff`` and ``grep`` (POSIX.1-2017, EXIT STATUS: 0
nothing found, 1 found something, >1 trouble). SARIF output is validated against the published
SARIF 2.1.0 JSON schema (tests/data/sarif/, from the npm package @microsoft/jest-sarif
1.0.0-beta.0) with the ``jsonschema`` package. The rest is the contract of issue 4.
"""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import jsonschema
import pandas as pd
import pytest
from click.testing import CliRunner

from labelreview._resources import sample_sets_dir
from labelreview.cli import cli
from labelreview.report import CAUTIONS
from labelreview.review import ReviewSession

SAMPLE = sample_sets_dir() / "harbour_archive"
SCHEMA = Path(__file__).parent.parent / "data" / "sarif" / "sarif-2.1.0-rtm.5.json"
REASON = "checked against the catalogue card"
STATEMENT = "Reviewed every flagged label with the archive board."


def run(*args: str):
    return CliRunner().invoke(cli, list(args))


def one_error_line(result) -> str:
    assert result.exit_code == 2, (result.stdout, result.stderr)
    lines = [line for line in result.stderr.splitlines() if line.strip()]
    assert len(lines) == 1, result.stderr
    assert "Traceback" not in result.stderr and result.stdout == ""
    return lines[0]


@pytest.fixture
def folder(tmp_path: Path) -> Path:
    target = tmp_path / "harbour"
    shutil.copytree(SAMPLE, target)
    (target / "labelreview-log.jsonl").unlink(missing_ok=True)
    return target


def batch_file(folder: Path, level: str, tmp_path: Path, *, curator: str = "mira") -> Path:
    """A `decide --from` file accepting every open flag at or above ``level``."""
    session = ReviewSession.open(folder, curator=curator)
    lines = [f"curator: {curator}", "decisions:"]
    for flag in session.unresolved(level):
        lines += [f"  - label: {flag.label}", "    action: accept", f"    reason: {REASON}"]
    path = tmp_path / f"batch-{level}-{curator}.yaml"
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def decide_all(folder: Path, level: str, tmp_path: Path, *, curator: str = "mira") -> None:
    result = run(
        "decide", "--from", str(batch_file(folder, level, tmp_path, curator=curator)), str(folder)
    )
    assert result.exit_code == 0, result.stderr


def test_check_text_fails_then_passes(folder: Path, tmp_path: Path):
    result = run("check", str(folder))
    assert result.exit_code == 1
    lines = result.stdout.splitlines()
    assert lines[0].startswith("FAIL: 21 unresolved flags at or above medium severity")
    assert "Unresolved flags at or above medium severity:" in result.stdout
    assert "  high    people/looks/suspicious_looking (taxonomy.csv line " in result.stdout
    assert "categories: criminality_inference" in result.stdout
    assert "note: Flags are candidates for human judgement" in result.stdout
    assert "sign-off: not signed off: no sign-off has been recorded" in result.stdout

    decide_all(folder, "medium", tmp_path)
    passed = run("check", str(folder))
    assert passed.exit_code == 0, passed.stdout
    assert passed.stdout.startswith("PASS: no unresolved flags at or above medium severity")
    assert run("check", str(folder), "--fail-on", "low").exit_code == 1
    assert run("check", str(folder), "--fail-on", "high").exit_code == 0


def test_check_json_is_a_stable_object(folder: Path):
    result = run("check", str(folder), "--format", "json", "--fail-on", "high")
    assert result.exit_code == 1
    data = json.loads(result.stdout)  # stdout holds only data
    assert set(data) == {
        "verdict",
        "summary",
        "exit_code",
        "failures",
        "dataset",
        "dataset_fingerprint",
        "lexicon_hash",
        "fail_on",
        "unresolved",
        "log",
        "lexicon_changed",
        "allow_lexicon_change",
        "lexicon_changes",
        "require_signoff",
        "signoff",
        "counts",
        "notes",
        "cautions",
    }
    assert data["verdict"] == "fail" and data["exit_code"] == 1 and data["fail_on"] == "high"
    assert {u["severity"] for u in data["unresolved"]} == {"high"}
    assert len(data["unresolved"]) == data["counts"]["flags_by_severity"]["high"] == 6
    assert data["unresolved"][0]["location"]["uri"] == "taxonomy.csv"
    # Ranked by the queue's score; each entry carries it and its reasons as objects.
    scores = [u["score"] for u in data["unresolved"]]
    assert scores == sorted(scores, reverse=True)
    assert {r["signal"] for r in data["unresolved"][0]["evidence"]} >= {"lexicon", "contested"}
    assert data["cautions"] == list(CAUTIONS)  # no attributes here: no disparity cautions
    assert any("never infers attributes" in n for n in data["notes"])


def test_check_sarif_validates_against_the_schema(folder: Path):
    result = run("check", str(folder), "--format", "sarif")
    assert result.exit_code == 1
    doc = json.loads(result.stdout)
    schema = json.loads(SCHEMA.read_text(encoding="utf-8"))
    errors = [e.message for e in jsonschema.Draft4Validator(schema).iter_errors(doc)]
    assert errors == []
    assert doc["version"] == "2.1.0"
    run0 = doc["runs"][0]
    assert run0["tool"]["driver"]["name"] == "labelreview"
    assert len({r["ruleId"] for r in run0["results"]}) > 1
    assert run0["invocations"][0]["executionSuccessful"] is True


def test_tampered_log_fails_the_check_and_refuses_signoff(folder: Path, tmp_path: Path):
    decide_all(folder, "medium", tmp_path)
    log = folder / "labelreview-log.jsonl"
    lines = log.read_bytes().splitlines(keepends=True)
    log.write_bytes(b"".join(lines[:3] + lines[4:]))  # a deleted line
    result = run("check", str(folder))
    assert result.exit_code == 1
    assert result.stdout.splitlines()[0].startswith("FAIL:")
    assert (
        "the decision log does not verify" in result.stdout and "sequence broken" in result.stdout
    )
    line = one_error_line(
        run("signoff", str(folder), "--approver", "ana", "--statement", STATEMENT)
    )
    assert line.startswith("labelreview: error: sign-off refused:") and "does not verify" in line
    assert log.read_bytes() == b"".join(lines[:3] + lines[4:])  # untouched


def test_lexicon_change_fails_unless_allowed(folder: Path, tmp_path: Path):
    decide_all(folder, "medium", tmp_path)
    (folder / "extra_layer.yaml").write_text(
        "schema: 1\nallow_labels: [people/roles/net_mender]\n", encoding="utf-8"
    )
    config = folder / "labelreview.yaml"
    config.write_text(
        config.read_text("utf-8").replace("  layers: []", "  layers: [extra_layer.yaml]"), "utf-8"
    )
    result = run("check", str(folder))
    assert result.exit_code == 1
    assert "the lexicon set changed since 21 decisions in force were made" in result.stdout
    assert "--allow-lexicon-change" in result.stdout
    assert run("check", str(folder), "--allow-lexicon-change").exit_code == 0


def test_signoff_lifecycle(folder: Path, tmp_path: Path):
    refused = one_error_line(
        run("signoff", str(folder), "--approver", "ana", "--statement", STATEMENT)
    )
    assert "21 flag(s) at or above medium severity are unresolved" in refused
    assert refused.endswith("Nothing was written.")
    assert not (folder / "labelreview-log.jsonl").exists()

    decide_all(folder, "medium", tmp_path)
    short = one_error_line(run("signoff", str(folder), "--approver", "ana", "--statement", "ok"))
    assert "the statement is too short (2 characters; at least 10 needed)" in short

    signed = run("signoff", str(folder), "--approver", "ana", "--statement", STATEMENT)
    assert signed.exit_code == 0, signed.stderr
    entries = [json.loads(x) for x in (folder / "labelreview-log.jsonl").read_text().splitlines()]
    last = entries[-1]
    assert last["kind"] == "signoff" and last["signs_head"] == entries[-2]["hash"]
    assert signed.stdout.startswith(f"signed off: seq {last['seq']} hash {last['hash']} by ana")
    assert run("log", "verify", str(folder)).exit_code == 0
    ok = run("check", str(folder), "--require-signoff")
    verdict = " ".join(ok.stdout.split("\n\n")[0].split())  # the wrapped first paragraph
    assert ok.exit_code == 0 and verdict.startswith("PASS:") and "signed off by ana" in verdict

    # A later decision voids it.
    low = ReviewSession.open(folder, curator="x").unresolved("low")[0].label
    later = run("decide", low, str(folder), "--accept", "--reason", REASON, "--curator", "olu")
    assert later.exit_code == 0, later.stderr
    void = run("check", str(folder), "--require-signoff", "--format", "json")
    assert void.exit_code == 1
    data = json.loads(void.stdout)
    assert data["signoff"]["state"] == "void"
    assert data["signoff"]["reasons"] == [
        f"a decision on '{low}' (seq {last['seq'] + 1}, by olu) came after it"
    ]
    assert run("check", str(folder)).exit_code == 0  # the flags themselves are still resolved


def test_four_eyes_refuses_an_approver_with_high_decisions(folder: Path, tmp_path: Path):
    config = folder / "labelreview.yaml"
    config.write_text(config.read_text("utf-8") + "decisions:\n  four_eyes: true\n", "utf-8")
    decide_all(folder, "high", tmp_path, curator="ana")
    decide_all(folder, "medium", tmp_path, curator="mira")
    line = one_error_line(
        run("signoff", str(folder), "--approver", "ana", "--statement", STATEMENT)
    )
    assert "four-eyes rule: ana made the decision in force on the high-severity label" in line
    ok = run("signoff", str(folder), "--approver", "mira", "--statement", STATEMENT)
    assert ok.exit_code == 0, ok.stderr


def test_bad_input_is_one_line_and_exit_2(folder: Path, tmp_path: Path):
    missing = one_error_line(run("check", str(tmp_path / "nowhere")))
    assert "nowhere" in missing
    (folder / "labelreview.yaml").write_text("version: 1\nsubjects: [unclosed\n", "utf-8")
    broken = one_error_line(run("check", str(folder)))
    assert "labelreview.yaml line" in broken
    usage = run("check", str(folder), "--fail-on", "severe")
    assert usage.exit_code == 2 and "Traceback" not in usage.stderr
    needs = run("signoff", str(folder), "--approver", "ana")
    assert needs.exit_code == 2 and "--statement" in needs.stderr


def _versions(tmp_path: Path) -> tuple[Path, Path]:
    old = tmp_path / "old"
    shutil.copytree(SAMPLE, old)
    (old / "labelreview-log.jsonl").unlink(missing_ok=True)
    decide_all(old, "low", tmp_path)
    new = tmp_path / "new"
    shutil.copytree(SAMPLE, new)
    (new / "labelreview-log.jsonl").unlink(missing_ok=True)
    return old, new


def test_compare_identical_decided_versions(tmp_path: Path):
    old, new = _versions(tmp_path)
    result = run("compare", str(old), str(new), "--fail-on-new")
    assert result.exit_code == 0, result.stdout + result.stderr
    assert result.stdout.startswith("nothing in NEW needs review")
    # 27 lexicon flags plus objects/boats/trawler, which only the data flag (contested)
    assert "Decisions that carry over (28):" in result.stdout
    assert "Labels added: none" in result.stdout


def test_compare_new_flagged_label(tmp_path: Path):
    old, new = _versions(tmp_path)
    with open(new / "annotations.csv", "a", encoding="utf-8") as handle:
        handle.write("hb_0004,gannet,people/looks/shifty_stranger\n")
    text = run("compare", str(old), str(new))
    assert text.exit_code == 0  # without --fail-on-new the comparison only reports
    assert text.stdout.startswith("1 thing in NEW needs review")
    assert "people/looks/shifty_stranger: a new label, flagged, with no decision" in text.stdout
    gated = run("compare", str(old), str(new), "--fail-on-new", "--format", "json")
    assert gated.exit_code == 1
    data = json.loads(gated.stdout)
    assert data["labels_added"] == ["people/looks/shifty_stranger"]
    assert [f["label"] for f in data["new_findings"]] == ["people/looks/shifty_stranger"]
    assert [r["kind"] for r in data["needs_review"]] == ["no_decision"]
    assert len(data["carried_decisions"]) == 28 and data["agreement"]["checked"] is True


def test_compare_single_annotator_notes_agreement_skipped(tmp_path: Path):
    old, new = _versions(tmp_path)
    for folder in (old, new):
        ann = pd.read_csv(folder / "annotations.csv", dtype=str)
        ann.assign(volunteer="gannet").drop_duplicates().to_csv(
            folder / "annotations.csv", index=False
        )
    result = run("compare", str(old), str(new))
    assert result.exit_code == 0
    assert "note: per-label agreement not compared: OLD has fewer than two annotators" in (
        result.stderr
    )
    assert "Per-label agreement: not compared" in result.stdout


def test_compare_bad_input(tmp_path: Path):
    old, _ = _versions(tmp_path)
    line = one_error_line(run("compare", str(old), str(tmp_path / "absent")))
    assert "absent" in line
    log = old / "labelreview-log.jsonl"
    log.write_bytes(log.read_bytes().replace(b"catalogue card", b"catalogue cart", 1))
    tampered = one_error_line(run("compare", str(old), str(old)))
    assert "labelreview-log.jsonl line 1" in tampered and "hash mismatch" in tampered
