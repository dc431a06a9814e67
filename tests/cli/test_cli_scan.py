"""The real CLI (click's CliRunner and the installed console script) on real files: scan,
lexicon check, init and demo, including bad input and exit codes."""

from __future__ import annotations

import csv
import io
import json
import shutil
import subprocess
import sys
from pathlib import Path

import pytest
from click.testing import CliRunner

from labelreview._resources import sample_sets_dir
from labelreview.cli import cli

DATA = Path(__file__).parent.parent / "data"
SAMPLE = sample_sets_dir() / "harbour_archive"


def run(*args: str, cwd: Path | None = None):
    if cwd is None:
        return CliRunner().invoke(cli, list(args))
    import os

    old = Path.cwd()
    os.chdir(cwd)
    try:
        return CliRunner().invoke(cli, list(args))
    finally:
        os.chdir(old)


@pytest.fixture
def sample(tmp_path: Path) -> Path:
    target = tmp_path / "harbour"
    shutil.copytree(SAMPLE, target)
    return target


def test_scan_json_on_sample_set(sample: Path):
    result = run("scan", str(sample), "--format", "json")
    assert result.exit_code == 0, result.stderr
    findings = json.loads(result.stdout)  # stdout holds only data
    labels = {f["label"] for f in findings}
    for planted in (
        "people/character/lazy_worker",
        "people/roles/cleaning_lady",
        "people/status/vagrant",
        "people/health/cripple",
    ):
        assert planted in labels
    for benign in (
        "animals/fish/nurse_shark",
        "objects/household/lazy_susan",
        "objects/boats/man_of_war",
        "objects/food/black_coffee",
    ):
        assert benign not in labels
    required = {"label", "category", "severity", "term", "match", "score", "suggestions", "reason"}
    assert all(required <= set(f) for f in findings)
    lazy = next(f for f in findings if f["label"] == "people/character/lazy_worker")
    assert lazy["annotations"] > 0 and lazy["items"] > 0
    assert "read " in result.stderr  # what was loaded is reported on stderr


def test_scan_table_and_csv(sample: Path):
    table = run("scan", str(sample))
    assert table.exit_code == 0
    assert "labels flagged" in table.stdout
    assert "candidates for human judgement" in table.stdout
    out = run("scan", str(sample), "--format", "csv")
    rows = list(csv.DictReader(io.StringIO(out.stdout)))
    assert rows and rows[0]["label"]
    assert set(rows[0]) >= {"label", "severity", "category", "term", "reason"}


def test_scan_without_config_defaults_to_mixed(tmp_path: Path):
    ann = tmp_path / "ann.csv"
    ann.write_text("item,annotator,label\n1,a,lazy\n1,b,dog\n2,a,nurse shark\n", encoding="utf-8")
    result = run("scan", "--annotations", str(ann), "--format", "json", str(tmp_path))
    assert result.exit_code == 0, result.stderr
    assert [f["label"] for f in json.loads(result.stdout)] == ["lazy"]
    assert "scanning as 'mixed'" in result.stderr


def test_subjects_none_silences_people_only_terms(tmp_path: Path):
    ann = tmp_path / "ann.csv"
    ann.write_text("item,annotator,label\n1,a,nurse\n2,a,fireman\n", encoding="utf-8")
    result = run(
        "scan", str(tmp_path), "--annotations", str(ann), "--subjects", "none", "--format", "json"
    )
    assert result.exit_code == 0
    # the occupation needs a depicted person; a gendered role word is flagged regardless
    assert [f["label"] for f in json.loads(result.stdout)] == ["fireman"]


def test_zero_findings_csv_still_has_header(tmp_path: Path):
    ann = tmp_path / "ann.csv"
    ann.write_text("item,annotator,label\n1,a,dog\n", encoding="utf-8")
    result = run("scan", str(tmp_path), "--annotations", str(ann), "--format", "csv")
    assert result.exit_code == 0
    assert result.stdout.splitlines()[0].startswith("label,severity,category")
    assert len(result.stdout.splitlines()) == 1


def test_duplicates_are_reported_on_stderr(tmp_path: Path):
    result = run(
        "scan",
        str(tmp_path),
        "--annotations",
        str(DATA / "io" / "duplicates.csv"),
        "--format",
        "json",
    )
    assert result.exit_code == 0
    assert "duplicate" in result.stderr
    json.loads(result.stdout)


@pytest.mark.parametrize(
    ("args", "message"),
    [
        (["scan", ".", "--annotations", "missing.csv"], "missing.csv"),
        (["scan", ".", "--annotations", str(DATA / "io" / "latin1.csv")], "--encoding"),
        (["scan", ".", "--annotations", str(DATA / "io" / "notes.xlsx")], "notes.xlsx"),
        (["scan", ".", "--annotations", str(DATA / "io" / "empty.csv")], "empty.csv"),
    ],
)
def test_bad_input_is_one_line_exit_2(tmp_path: Path, args, message):
    result = run(*args, cwd=tmp_path)
    assert result.exit_code == 2
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1, lines
    assert lines[0].startswith("labelreview: error: ")
    assert message in lines[0]
    assert "Traceback" not in result.stderr
    assert result.stdout == ""


def test_encoding_option_reads_latin1(tmp_path: Path):
    result = run(
        "scan",
        str(tmp_path),
        "--annotations",
        str(DATA / "io" / "latin1.csv"),
        "--encoding",
        "latin-1",
        "--format",
        "json",
    )
    assert result.exit_code == 0, result.stderr


def test_debug_shows_traceback(tmp_path: Path):
    result = run("--debug", "scan", str(tmp_path), "--annotations", "missing.csv")
    assert result.exit_code == 2
    assert "Traceback" in result.stderr


def test_lexicon_check_shipped_set_prints_hash():
    result = run("lexicon", "check")
    assert result.exit_code == 0, result.stderr
    assert "content hash: sha256:" in result.stdout
    assert "slur_or_derogatory" in result.stdout


def test_lexicon_check_reports_file_and_line():
    result = run("lexicon", "check", str(DATA / "lexicon" / "bad_severity.yaml"))
    assert result.exit_code == 2
    assert "bad_severity.yaml:5: error: entry 'idle' has severity 'extreme'" in result.stderr


def test_lexicon_layer_from_config_applies(sample: Path):
    layer = sample / "dataset_lexicon.yaml"
    layer.write_text("schema: 1\nallow_labels: [people/roles/teacher]\n", encoding="utf-8")
    config = sample / "labelreview.yaml"
    text = config.read_text(encoding="utf-8")
    assert "layers: []" in text
    config.write_text(
        text.replace("layers: []", "layers: [dataset_lexicon.yaml]"), encoding="utf-8"
    )
    result = run("scan", str(sample), "--format", "json")
    assert result.exit_code == 0, result.stderr
    assert "people/roles/teacher" not in {f["label"] for f in json.loads(result.stdout)}


def test_init_writes_once_and_never_overwrites(tmp_path: Path):
    (tmp_path / "annotations.csv").write_text(
        "photo_id,volunteer,tag\np1,v1,lazy\n", encoding="utf-8"
    )
    first = run("init", str(tmp_path))
    assert first.exit_code == 0, first.stderr
    written = (tmp_path / "labelreview.yaml").read_text(encoding="utf-8")
    assert "photo_id" in written
    second = run("init", str(tmp_path))
    assert second.exit_code == 2
    assert (tmp_path / "labelreview.yaml").read_text(encoding="utf-8") == written
    scan = run("scan", str(tmp_path), "--format", "json")
    assert scan.exit_code == 0, scan.stderr
    assert [f["label"] for f in json.loads(scan.stdout)] == ["lazy"]


def test_demo_copies_then_reuses_and_refuses_foreign_folder(tmp_path: Path):
    target = tmp_path / "demo"
    result = run("demo", "--dir", str(target))
    assert result.exit_code == 0, result.stderr
    assert (target / "annotations.csv").exists()
    assert "labels flagged" in result.stdout
    edited = "photo_id,volunteer,tag\nhb_0001,gannet,dog\n"
    (target / "annotations.csv").write_text(edited, encoding="utf-8")
    again = run("demo", "--dir", str(target))
    assert again.exit_code == 0
    # the user's edit survives a second demo run
    assert (target / "annotations.csv").read_text(encoding="utf-8") == edited
    foreign = tmp_path / "mine"
    foreign.mkdir()
    (foreign / "notes.txt").write_text("keep me", encoding="utf-8")
    refused = run("demo", "--dir", str(foreign))
    assert refused.exit_code == 2
    assert (foreign / "notes.txt").read_text(encoding="utf-8") == "keep me"


def test_console_entry_point_runs(tmp_path: Path):
    # The real entry point in a subprocess: `python -m labelreview` -> cli.main.
    ann = tmp_path / "ann.csv"
    ann.write_text("item,annotator,label\n1,a,thug\n", encoding="utf-8")
    proc = subprocess.run(
        [
            sys.executable,
            "-m",
            "labelreview",
            "scan",
            str(tmp_path),
            "--annotations",
            str(ann),
            "--format",
            "json",
        ],
        capture_output=True,
        text=True,
        check=False,
        cwd=tmp_path,  # outside the checkout: the installed package must find its lexicons
    )
    assert proc.returncode == 0, proc.stderr
    assert json.loads(proc.stdout)[0]["term"] == "thug"
    bad = subprocess.run(
        [sys.executable, "-m", "labelreview", "scan", str(tmp_path), "--annotations", "nope.csv"],
        capture_output=True,
        text=True,
        check=False,
        cwd=tmp_path,
    )
    assert bad.returncode == 2
    assert len(bad.stderr.strip().splitlines()) == 1
