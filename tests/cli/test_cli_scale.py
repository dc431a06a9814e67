"""The large-data options through the real CLI: --stream, --text-column, --engine dask,
--quiet; outputs equal across engines, bad input one line and exit code 2."""

from __future__ import annotations

import csv
import io
import json
import shutil
import sys
from pathlib import Path

import pandas as pd
import pytest
from click.testing import CliRunner

from labelreview._resources import sample_sets_dir
from labelreview.cli import cli

SAMPLE = sample_sets_dir() / "harbour_archive"


def run(*args: str):
    return CliRunner().invoke(cli, list(args))


@pytest.fixture
def sample(tmp_path: Path) -> Path:
    target = tmp_path / "harbour"
    shutil.copytree(SAMPLE, target)
    return target


def test_agreement_streamed_equals_in_memory(sample: Path):
    whole = run("agreement", str(sample), "--format", "json", "--bootstrap", "60")
    streamed = run("agreement", str(sample), "--format", "json", "--bootstrap", "60", "--stream")
    assert whole.exit_code == 0 and streamed.exit_code == 0, streamed.stderr
    assert whole.stdout == streamed.stdout
    assert "read once in batches" in streamed.stderr
    assert "\x1b[" not in streamed.stderr  # no progress bars when stderr is not a terminal


def test_scan_text_column_json_table_and_csv(sample: Path):
    result = run("scan", str(sample), "--text-column", "caption", "--format", "json")
    assert result.exit_code == 0, result.stderr
    data = json.loads(result.stdout)
    text = [x for x in data if x.get("kind") == "text"]
    labels = [x for x in data if "kind" not in x]
    assert labels and text
    for key in (
        "column",
        "term",
        "category",
        "severity",
        "rows",
        "hits",
        "items",
        "labels",
        "examples",
        "matched",
        "reason",
        "suggestions",
        "source",
    ):
        assert key in text[0]
    constable = next(x for x in text if x["term"] == "constable")
    assert constable["labels"][0]["label"] == "people/roles/police_officer"

    table = run("scan", str(sample), "--text-column", "caption")
    assert "Free text 'caption':" in table.stdout and "labels beside it:" in table.stdout

    as_csv = run("scan", str(sample), "--text-column", "caption", "--format", "csv")
    rows = list(csv.DictReader(io.StringIO(as_csv.stdout)))
    kinds = {r["kind"] for r in rows}
    assert kinds == {"label", "text"}
    text_rows = [r for r in rows if r["kind"] == "text"]
    assert all(int(r["hits"]) >= 1 and r["item"] and r["row"] for r in text_rows)

    streamed = run("scan", str(sample), "--text-column", "caption", "--format", "json", "--stream")
    assert streamed.stdout == result.stdout


def test_scan_without_text_column_is_unchanged(sample: Path):
    result = run("scan", str(sample), "--format", "csv")
    assert result.stdout.splitlines()[0].startswith("label,severity")


def test_config_turns_the_text_scan_on(sample: Path):
    config = sample / "labelreview.yaml"
    config.write_text(
        config.read_text(encoding="utf-8").replace(
            "  fuzzy_min_length: 5\n", "  fuzzy_min_length: 5\n  text_columns: [caption]\n"
        ),
        encoding="utf-8",
    )
    result = run("scan", str(sample), "--format", "json", "--quiet")
    assert result.exit_code == 0, result.stderr
    assert any(x.get("kind") == "text" for x in json.loads(result.stdout))


def test_unknown_text_column_is_one_line_exit_2(sample: Path):
    result = run("scan", str(sample), "--text-column", "notes")
    assert result.exit_code == 2
    assert result.stderr.count("\n") == 1 and "text column 'notes' is in neither" in result.stderr


def test_stream_refuses_a_coco_file_with_one_line(tmp_path: Path):
    (tmp_path / "coco.json").write_text(
        json.dumps({"images": [], "annotations": [], "categories": []}), encoding="utf-8"
    )
    result = run(
        "agreement", str(tmp_path), "--annotations", str(tmp_path / "coco.json"), "--stream"
    )
    assert result.exit_code == 2 and "cannot be read in batches" in result.stderr


def parquet_dataset(tmp_path: Path) -> Path:
    data = pd.read_csv(SAMPLE / "annotations.csv")
    folder = tmp_path / "ann"
    folder.mkdir()
    for k in range(3):
        data.iloc[k::3].to_parquet(folder / f"part-{k}.parquet")
    pd.read_csv(SAMPLE / "items.csv").to_parquet(tmp_path / "items.parquet")
    (tmp_path / "labelreview.yaml").write_text(
        "version: 1\nsubjects: people\n"
        "annotations:\n  path: ann\n  columns: {item: photo_id, annotator: volunteer, label: tag}\n"
        "items:\n  path: items.parquet\n  columns: {item: photo_id}\n",
        encoding="utf-8",
    )
    return tmp_path


def test_engine_dask_from_the_command_line(tmp_path: Path):
    pytest.importorskip("distributed")
    root = parquet_dataset(tmp_path)
    local = run("agreement", str(root), "--format", "json", "--bootstrap", "40")
    dask = run("agreement", str(root), "--format", "json", "--bootstrap", "40", "--engine", "dask")
    assert dask.exit_code == 0, dask.stderr
    assert dask.stdout == local.stdout
    assert "computed with Dask" in dask.stderr
    scan_local = run("scan", str(root), "--text-column", "caption", "--format", "json")
    scan_dask = run(
        "scan", str(root), "--text-column", "caption", "--format", "json", "--engine", "dask"
    )
    assert scan_dask.exit_code == 0, scan_dask.stderr
    assert scan_dask.stdout == scan_local.stdout


def test_engine_dask_without_dask_installed(tmp_path: Path, monkeypatch):
    root = parquet_dataset(tmp_path)
    monkeypatch.setitem(sys.modules, "dask", None)
    result = run("agreement", str(root), "--engine", "dask")
    assert result.exit_code == 2
    assert "pip install 'labelreview[dask]'" in result.stderr and "Traceback" not in result.stderr


def test_unreachable_scheduler_is_one_line_exit_2(tmp_path: Path):
    pytest.importorskip("distributed")
    root = parquet_dataset(tmp_path)
    result = run("agreement", str(root), "--engine", "dask", "--scheduler", "tcp://127.0.0.1:9")
    assert result.exit_code == 2
    assert "cannot reach the Dask scheduler at tcp://127.0.0.1:9" in result.stderr
