"""``labelreview queue`` through the real CLI, and the queue as check and export show it.

The JSON keys are the contract of issue 6 (label, score, severity, categories, reasons as
objects with signal, detail, value). SARIF output is validated against the published SARIF
2.1.0 JSON schema (tests/data/sarif/, from the npm package @microsoft/jest-sarif 1.0.0-beta.0).
"""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import jsonschema
import pytest
from click.testing import CliRunner

from labelreview._resources import sample_sets_dir
from labelreview.cli import cli

PLAZA = sample_sets_dir() / "plaza_study"
HARBOUR = sample_sets_dir() / "harbour_archive"
SCHEMA = Path(__file__).parent.parent / "data" / "sarif" / "sarif-2.1.0-rtm.5.json"
REASON = "checked against the study protocol"


def run(*args: str):
    return CliRunner().invoke(cli, list(args))


@pytest.fixture
def plaza(tmp_path: Path) -> Path:
    target = tmp_path / "plaza"
    shutil.copytree(PLAZA, target)
    (target / "labelreview-log.jsonl").unlink(missing_ok=True)
    return target


def test_json_entries_hold_the_promised_keys(plaza: Path):
    result = run("queue", str(plaza), "--format", "json")
    assert result.exit_code == 0, result.stderr
    data = json.loads(result.stdout)  # stdout holds only data
    assert data["dataset"] == "plaza_study"
    entries = data["entries"]
    assert entries and [e["rank"] for e in entries] == list(range(1, len(entries) + 1))
    for entry in entries:
        assert {"label", "score", "severity", "categories", "reasons", "status"} <= set(entry)
        assert entry["reasons"] and all(
            set(r) == {"signal", "detail", "value"} for r in entry["reasons"]
        )
    assert [e["score"] for e in entries] == sorted((e["score"] for e in entries), reverse=True)
    loitering = next(e for e in entries if e["label"] == "loitering")
    assert loitering["categories"] == [] and loitering["severity"] == "medium"
    assert {r["signal"] for r in loitering["reasons"]} >= {"disparity", "proxy"}
    assert data["score"]["formula"].startswith("score = 100 * (w_lexicon*lexicon")
    assert any("signal to investigate, not proof of bias" in c for c in data["cautions"])
    assert data["signals"]["proxies"][0]["column"] == "camera_zone"
    assert "85+" not in result.stdout


def test_top_limits_the_entries(plaza: Path):
    data = json.loads(run("queue", str(plaza), "--format", "json", "--top", "2").stdout)
    assert len(data["entries"]) == 2 and data["counts"]["entries"] > 2
    table = run("queue", str(plaza), "--top", "1")
    assert table.exit_code == 0
    assert "showing the first 1 of" in table.stdout


def test_table_shows_reasons_disparity_cautions_and_proxies(plaza: Path):
    result = run("queue", str(plaza))
    assert result.exit_code == 0
    out = result.stdout
    assert out.startswith("plaza_study: ")
    assert "RANK  SCORE  SEVERITY  STATUS" in out
    assert "- disparity: given at different rates across age_band" in out
    assert "loitering by age_band: FLAGGED" in out
    assert "signal to investigate, not proof of bias" in out
    assert "camera_zone ~ age_band: normalised mutual information" in out
    assert "rowan" in out and "1: idle" in out
    assert "note: Flags are candidates for human judgement" in out


def test_without_attributes_it_says_so(tmp_path: Path):
    folder = tmp_path / "harbour"
    shutil.copytree(HARBOUR, folder)
    result = run("queue", str(folder), "--top", "3")
    assert result.exit_code == 0
    assert "Group disparity: not checked: no consented, self-reported attribute" in result.stdout
    assert "labelreview never infers attributes" in result.stdout
    assert "never infers attributes" in result.stderr
    data = json.loads(run("queue", str(folder), "--format", "json").stdout)
    assert any("never infers attributes" in n for n in data["notes"])


def test_open_leaves_out_decided_labels(plaza: Path):
    assert run("decide", "idle", str(plaza), "--retire", "--reason", REASON).exit_code == 0
    data = json.loads(run("queue", str(plaza), "--format", "json").stdout)
    assert next(e for e in data["entries"] if e["label"] == "idle")["status"] == "retired"
    data = json.loads(run("queue", str(plaza), "--format", "json", "--open").stdout)
    assert "idle" not in {e["label"] for e in data["entries"]}


def test_bad_input_is_one_line_exit_2(tmp_path: Path):
    result = run("queue", str(tmp_path / "nowhere"))
    assert result.exit_code == 2
    lines = [line for line in result.stderr.splitlines() if line.strip()]
    assert len(lines) == 1 and "Traceback" not in result.stderr and result.stdout == ""


def test_bad_queue_config_names_file_and_line(plaza: Path):
    config = plaza / "labelreview.yaml"
    text = config.read_text(encoding="utf-8").replace("disparity: medium", "disparity: urgent")
    config.write_text(text, encoding="utf-8")
    result = run("queue", str(plaza))
    assert result.exit_code == 2
    assert "labelreview.yaml line" in result.stderr
    assert "'queue.severity.disparity' must be one of low, medium, high" in result.stderr


def test_check_lists_data_only_flags_and_sarif_validates(plaza: Path):
    result = run("check", str(plaza))
    assert result.exit_code == 1
    assert "  medium  loitering (taxonomy.txt line " in result.stdout
    assert "data signals: disparity, contested" in result.stdout
    doc = json.loads(run("check", str(plaza), "--format", "sarif").stdout)
    schema = json.loads(SCHEMA.read_text(encoding="utf-8"))
    assert [e.message for e in jsonschema.Draft4Validator(schema).iter_errors(doc)] == []
    rules = {r["ruleId"] for r in doc["runs"][0]["results"]}
    assert "data-signal/disparity" in rules
    data = json.loads(run("check", str(plaza), "--format", "json").stdout)
    assert any("not proof of bias" in c for c in data["cautions"])


def test_export_carries_scores_reasons_and_the_disparity_cautions(plaza: Path, tmp_path: Path):
    target = tmp_path / "audit.md"
    result = run("export", str(plaza), "--to", str(target))
    assert result.exit_code == 0, result.stderr
    text = target.read_text(encoding="utf-8")
    assert "## The review queue" in text and "camera\\_zone" in text
    assert "| loitering | medium | yes | disparity; contested |" in text
    assert "signal to investigate, not proof of bias" in text
