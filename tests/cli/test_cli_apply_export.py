"""`labelreview apply` and `labelreview export` through the real CLI, on the sample set.

The sample set is copied to a temporary folder first; the repository's copy is never written.
Outputs are read back with reference readers (pandas, json, csv, html.parser) and hashes are
recomputed with hashlib (SHA-256, FIPS 180-4). Exit codes follow the project's contract: 0
done, 2 bad input or a refusal, one error line on stderr and no traceback.
"""

from __future__ import annotations

import csv
import hashlib
import io
import json
import shutil
from html.parser import HTMLParser
from pathlib import Path

import pandas as pd
import pytest
import yaml
from click.testing import CliRunner

from labelreview._resources import sample_sets_dir
from labelreview.cli import cli
from labelreview.review import ReviewSession

SAMPLE = sample_sets_dir() / "harbour_archive"
CLEANING_LADY = "people/roles/cleaning_lady"
CLEANER = "people/roles/cleaner"


def run(*args: str):
    return CliRunner().invoke(cli, list(args))


def one_error_line(result) -> str:
    """The refusal: exit 2, one `labelreview: error:` line, no traceback."""
    assert result.exit_code == 2, (result.stdout, result.stderr)
    errors = [ln for ln in result.stderr.splitlines() if ln.startswith("labelreview: error:")]
    assert len(errors) == 1, result.stderr
    assert "Traceback" not in result.stderr + result.stdout
    return errors[0]


def digests(folder: Path) -> dict[str, str]:
    return {
        p.name: hashlib.sha256(p.read_bytes()).hexdigest()
        for p in sorted(folder.iterdir())
        if p.is_file() and not p.name.startswith("labelreview-log")
    }


@pytest.fixture
def sample(tmp_path: Path) -> Path:
    return Path(shutil.copytree(SAMPLE, tmp_path / "harbour"))


def decide_everything(folder: Path) -> dict[str, str | None]:
    """Decide every flag through `labelreview decide --from`; return the expected mapping."""
    flags = ReviewSession.open(folder, curator="x").flags
    decisions = []
    expected: dict[str, str | None] = {}
    for flag in flags:
        if flag.label == CLEANING_LADY:
            decisions.append(
                {
                    "label": flag.label,
                    "action": "rename",
                    "new_label": CLEANER,
                    "reason": "the neutral job word already in use",
                }  # fmt: skip
            )
            expected[flag.label] = CLEANER
        elif flag.severity == "high":
            decisions.append(
                {
                    "label": flag.label,
                    "action": "retire",
                    "reason": "a judgement no photograph can show",
                }  # fmt: skip
            )
            expected[flag.label] = None
        else:
            decisions.append(
                {
                    "label": flag.label,
                    "action": "accept",
                    "reason": "kept for now; the caption supports it",
                }  # fmt: skip
            )
    batch = folder.parent / "batch.yaml"
    batch.write_text(yaml.safe_dump({"curator": "mira", "decisions": decisions}), encoding="utf-8")
    result = run("decide", "--from", str(batch), str(folder))
    assert result.exit_code == 0, result.stderr
    return expected


def test_apply_refuses_while_flags_are_undecided(sample: Path, tmp_path: Path):
    open_flags = ReviewSession.open(sample, curator="x").unresolved("medium")
    line = one_error_line(run("apply", str(sample), "--out", str(tmp_path / "out")))
    assert f"{len(open_flags)} flag(s) at or above 'medium' are still undecided" in line
    assert f"'{open_flags[0].label}' ({open_flags[0].severity})" in line
    assert "--allow-unresolved" in line
    assert not (tmp_path / "out").exists()


def test_allow_unresolved_is_recorded_in_the_manifest(sample: Path, tmp_path: Path):
    result = run("apply", str(sample), "--out", str(tmp_path / "out"), "--allow-unresolved")
    assert result.exit_code == 0, result.stderr
    manifest = json.loads((tmp_path / "out" / "manifest.json").read_text(encoding="utf-8"))
    assert manifest["gate"]["allow_unresolved"] is True
    assert manifest["gate"]["unresolved"] > 0
    assert "still undecided" in result.stderr


def test_decide_apply_export_end_to_end(sample: Path, tmp_path: Path):
    expected = decide_everything(sample)
    before = digests(sample)
    out = tmp_path / "revised"
    result = run("apply", str(sample), "--out", str(out))
    assert result.exit_code == 0, result.stderr
    assert "wrote" in result.stdout and "manifest.json" in result.stdout
    assert digests(sample) == before  # the inputs are never touched

    original = pd.read_csv(sample / "annotations.csv", dtype=str, keep_default_na=False)
    revised = pd.read_csv(out / "annotations.csv", dtype=str, keep_default_na=False)
    assert list(revised.columns) == list(original.columns)
    mapped = [expected.get(t, t) for t in original["tag"]]
    keys = set(zip(original["photo_id"], original["volunteer"], mapped, strict=True))
    want = {k for k in keys if k[2] is not None}
    got = set(zip(revised["photo_id"], revised["volunteer"], revised["tag"], strict=True))
    assert got == want
    retired = {label for label, target in expected.items() if target is None}
    assert not retired & set(revised["tag"]) and CLEANING_LADY not in set(revised["tag"])

    taxonomy = pd.read_csv(out / "taxonomy.csv", dtype=str, keep_default_na=False)
    assert not retired & set(taxonomy["name"]) and CLEANING_LADY not in set(taxonomy["name"])
    assert list(taxonomy.columns) == ["id", "name", "parent", "description"]

    mapping = pd.read_csv(out / "mapping.csv", dtype=str, keep_default_na=False)
    row = mapping[mapping["old_label"] == CLEANING_LADY].iloc[0]
    assert (row["action"], row["new_label"], row["result"]) == ("rename", CLEANER, "merge")

    manifest = json.loads((out / "manifest.json").read_text(encoding="utf-8"))
    for output in manifest["outputs"]:
        digest = hashlib.sha256((out / output["file"]).read_bytes()).hexdigest()
        assert output["sha256"] == f"sha256:{digest}"
    assert manifest["counts"]["annotations_out"] == len(revised)
    assert manifest["gate"]["allow_unresolved"] is False

    # a second apply into the same folder needs --force, and then replaces only its own files
    line = one_error_line(run("apply", str(sample), "--out", str(out)))
    assert "earlier apply" in line and "--force" in line
    assert run("apply", str(sample), "--out", str(out), "--force").exit_code == 0

    for ending in ("csv", "json", "md", "html"):
        target = tmp_path / f"audit.{ending}"
        result = run("export", str(sample), "--to", str(target))
        assert result.exit_code == 0, result.stderr
        assert f"wrote {target}" in result.stdout
        text = target.read_text(encoding="utf-8")
        assert "mira" in text and "a judgement no photograph can show" in text
    data = json.loads((tmp_path / "audit.json").read_text(encoding="utf-8"))
    assert data["log"]["verified"] is True
    assert len([d for d in data["decisions"] if d["status"] == "in force"]) == len(
        ReviewSession.open(sample, curator="x").flags
    )
    rows = list(csv.reader(io.StringIO((tmp_path / "audit.csv").read_text(encoding="utf-8"))))
    assert rows[0][0] == "section" and {r[0] for r in rows[1:]} >= {"summary", "decision"}

    class Tags(HTMLParser):
        seen: list[str] = []

        def handle_starttag(self, tag: str, attrs: list) -> None:
            self.seen.append(tag)

    parser = Tags()
    parser.feed((tmp_path / "audit.html").read_text(encoding="utf-8"))
    assert "svg" in parser.seen and "script" not in parser.seen
    assert digests(sample) == before


def test_apply_into_the_dataset_folder_is_refused(sample: Path):
    decide_everything(sample)
    before = digests(sample)
    line = one_error_line(run("apply", str(sample), "--out", str(sample)))
    assert "the dataset folder itself" in line
    assert digests(sample) == before


def test_apply_into_a_folder_with_other_files_is_refused(sample: Path, tmp_path: Path):
    decide_everything(sample)
    out = tmp_path / "mine"
    out.mkdir()
    (out / "notes.md").write_text("my notes", encoding="utf-8")
    line = one_error_line(run("apply", str(sample), "--out", str(out), "--force"))
    assert "not empty (notes.md)" in line
    assert (out / "notes.md").read_text(encoding="utf-8") == "my notes"


def test_tampered_log_refuses_apply_and_is_shown_by_export(sample: Path, tmp_path: Path):
    decide_everything(sample)
    log = sample / "labelreview-log.jsonl"
    lines = log.read_bytes().splitlines(keepends=True)
    lines[1], lines[2] = lines[2], lines[1]  # swapped lines
    log.write_bytes(b"".join(lines))
    line = one_error_line(run("apply", str(sample), "--out", str(tmp_path / "out")))
    assert "does not verify" in line and "line 2" in line
    assert not (tmp_path / "out").exists()
    result = run("export", str(sample), "--to", str(tmp_path / "audit.json"))
    assert result.exit_code == 0, result.stderr
    assert "warning: the decision log does not verify" in result.stderr
    data = json.loads((tmp_path / "audit.json").read_text(encoding="utf-8"))
    assert data["log"]["verified"] is False


def test_dry_run_writes_nothing(sample: Path, tmp_path: Path):
    decide_everything(sample)
    result = run("apply", str(sample), "--out", str(tmp_path / "out"), "--dry-run")
    assert result.exit_code == 0, result.stderr
    assert f"merge   {CLEANING_LADY} -> {CLEANER}" in result.stdout
    assert "nothing written" in result.stdout
    assert not (tmp_path / "out").exists()


def test_export_refusals(sample: Path, tmp_path: Path):
    line = one_error_line(run("export", str(sample), "--to", str(tmp_path / "audit.pdf")))
    assert "allowed: .csv, .json, .md, .html" in line
    target = tmp_path / "audit.md"
    assert run("export", str(sample), "--to", str(target)).exit_code == 0
    first = target.read_bytes()
    line = one_error_line(run("export", str(sample), "--to", str(target)))
    assert "already exists" in line and "--force" in line
    assert target.read_bytes() == first
    assert run("export", str(sample), "--to", str(target), "--force").exit_code == 0
    line = one_error_line(
        run("export", str(sample), "--to", str(sample / "taxonomy.csv"), "--force")
    )
    assert "input files" in line


def test_missing_dataset_folder_is_one_error_line(tmp_path: Path):
    line = one_error_line(run("apply", str(tmp_path / "nowhere"), "--out", str(tmp_path / "o")))
    assert "nowhere" in line
    line = one_error_line(run("export", str(tmp_path / "nowhere"), "--to", str(tmp_path / "a.md")))
    assert "nowhere" in line


def test_help_texts():
    for command in ("apply", "export"):
        result = run(command, "--help")
        assert result.exit_code == 0
        assert f"labelreview {command}" in result.stdout
