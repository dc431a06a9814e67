"""``labelreview agreement`` on real files: the bundled sample set, a single-label file
written for the test (the Krippendorff 2011 example in long form), and bad input."""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import pytest
from click.testing import CliRunner

from labelreview._resources import sample_sets_dir
from labelreview.cli import cli

DATA = Path(__file__).parent.parent / "data" / "agreement"
SAMPLE = sample_sets_dir() / "harbour_archive"


def run(*args: str):
    return CliRunner().invoke(cli, list(args))


@pytest.fixture
def sample(tmp_path: Path) -> Path:
    target = tmp_path / "harbour"
    shutil.copytree(SAMPLE, target)
    return target


def test_json_on_sample_set(sample: Path):
    result = run("agreement", str(sample), "--format", "json", "--bootstrap", "50")
    assert result.exit_code == 0, result.stderr
    data = json.loads(result.stdout)  # stdout holds only data
    for key in (
        "alpha",
        "level",
        "n_items",
        "n_pairable",
        "n_annotators",
        "ci",
        "interpretation",
        "per_label",
        "per_annotator",
        "fleiss_kappa",
        "fleiss_kappa_reason",
        "pairwise_cohen",
    ):
        assert key in data
    assert data["multi_label"] is True and data["distance"] == "masi"
    assert data["fleiss_kappa"] is None and data["fleiss_kappa_reason"]
    assert len(data["ci"]) == 2
    # The sample set's planted judgemental labels are among the least agreed on.
    worst = {x["label"] for x in data["per_label"][:15]}
    assert "people/character/lazy_worker" in worst
    assert "read " in result.stderr


def test_table_on_sample_set(sample: Path):
    result = run("agreement", str(sample), "--bootstrap", "0")
    assert result.exit_code == 0, result.stderr
    out = result.stdout
    assert out.index("Krippendorff's alpha") < out.index("Least reliable labels")
    assert out.index("Least reliable labels") < out.index("Annotators")
    assert "Krippendorff 2004" in out and "Landis & Koch (1977)" in out
    assert "no CI (no bootstrap was asked for" in out


def long_2011(tmp_path: Path) -> Path:
    lines = (DATA / "krippendorff_2011_reliability.csv").read_text().splitlines()
    units = lines[0].split(",")[1:]
    rows = ["item,annotator,label"]
    for line in lines[1:]:
        observer, *values = line.split(",")
        rows += [f"{u},{observer},{v}" for u, v in zip(units, values, strict=True) if v]
    path = tmp_path / "ratings.csv"
    path.write_text("\n".join(rows) + "\n", encoding="utf-8")
    return path


@pytest.mark.parametrize(
    ("level", "published"),
    [("nominal", 0.743), ("ordinal", 0.815), ("interval", 0.849), ("ratio", 0.797)],
)
def test_levels_on_the_krippendorff_2011_example(tmp_path: Path, level: str, published: float):
    # Krippendorff (2011) worked example; values recalled from memory, confirmed in
    # tests/unit/test_agreement_reference.py against the `krippendorff` package.
    path = long_2011(tmp_path)
    result = run(
        "agreement",
        str(tmp_path),
        "--annotations",
        str(path),
        "--level",
        level,
        "--format",
        "json",
        "--bootstrap",
        "100",
        "--seed",
        "4",
    )
    assert result.exit_code == 0, result.stderr
    data = json.loads(result.stdout)
    assert round(data["alpha"], 3) == published
    assert data["n_unpairable"] == 1 and data["level"] == level


def test_config_section_is_optional_and_flags_override(tmp_path: Path):
    path = long_2011(tmp_path)
    one = run(
        "agreement",
        str(tmp_path),
        "--annotations",
        str(path),
        "--format",
        "json",
        "--bootstrap",
        "30",
        "--seed",
        "1",
    )
    two = run(
        "agreement",
        str(tmp_path),
        "--annotations",
        str(path),
        "--format",
        "json",
        "--bootstrap",
        "30",
        "--seed",
        "1",
    )
    assert json.loads(one.stdout)["ci"] == json.loads(two.stdout)["ci"]
    assert json.loads(one.stdout)["bootstrap"]["draws"] == 30


def test_non_numeric_labels_at_ordinal_level_exit_2(sample: Path):
    result = run("agreement", str(sample), "--level", "ordinal")
    assert result.exit_code == 2
    errors = [line for line in result.stderr.splitlines() if "error" in line]
    assert len(errors) == 1 and "needs numeric labels" in errors[0]
    assert "Traceback" not in result.stderr and result.stdout == ""


def test_missing_file_and_bad_columns_exit_2(tmp_path: Path):
    missing = run("agreement", str(tmp_path), "--annotations", str(tmp_path / "nope.csv"))
    assert missing.exit_code == 2
    assert "nope.csv" in missing.stderr and "Traceback" not in missing.stderr
    bad = tmp_path / "bad.csv"
    bad.write_text("photo,colour\n1,red\n", encoding="utf-8")
    result = run("agreement", str(tmp_path), "--annotations", str(bad))
    assert result.exit_code == 2
    assert "bad.csv" in result.stderr and "Traceback" not in result.stderr
    assert len([x for x in result.stderr.splitlines() if "error" in x]) == 1


def test_bad_option_values_exit_2(sample: Path):
    assert run("agreement", str(sample), "--level", "cardinal").exit_code == 2
    assert run("agreement", str(sample), "--bootstrap", "-3").exit_code == 2


def test_help_mentions_levels():
    result = run("agreement", "--help")
    assert result.exit_code == 0
    assert "ordinal" in result.stdout and "--bootstrap" in result.stdout
