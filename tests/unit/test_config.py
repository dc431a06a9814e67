"""labelreview.yaml: parsing, validation messages with line numbers, detection, starter file."""

from __future__ import annotations

import shutil
import textwrap
from pathlib import Path

import pytest

from labelreview.config import (
    AttributeConfig,
    DatasetConfig,
    load_config,
    write_starter_config,
)
from labelreview.errors import ConfigError

DATA = Path(__file__).resolve().parents[1] / "data" / "io"

FULL = """\
version: 1
name: harbour_archive
subjects: people
annotations:
  path: annotations.csv
  format: csv
  layout: long
  columns: {item: photo_id, annotator: volunteer, label: tag}
  multi_label_separator: ";"
  encoding: latin-1
taxonomy:
  path: taxonomy.csv
  format: csv
items:
  path: items.csv
  columns: {item: photo_id, text: caption, preview: image_file}
  attributes:
    - column: age_band
      consented: true
      self_reported: true
lexicons:
  base: builtin
  layers: [org_layer.yaml, dataset_layer.yaml]
scan:
  fuzzy_threshold: 90
  fuzzy_min_length: 6
curator: R. Tamsin
"""


def write(folder: Path, text: str) -> Path:
    path = folder / "labelreview.yaml"
    path.write_text(textwrap.dedent(text), encoding="utf-8")
    return path


def test_full_schema_round_trip(tmp_path: Path) -> None:
    write(tmp_path, FULL)
    config = load_config(tmp_path)
    assert isinstance(config, DatasetConfig)
    assert config.source == tmp_path / "labelreview.yaml"
    assert (config.name, config.subjects, config.curator) == (
        "harbour_archive",
        "people",
        "R. Tamsin",
    )
    ann = config.annotations
    assert ann is not None
    assert ann.path == tmp_path / "annotations.csv"
    assert (ann.format, ann.layout, ann.multi_label_separator, ann.encoding) == (
        "csv",
        "long",
        ";",
        "latin-1",
    )
    assert ann.columns == {"item": "photo_id", "annotator": "volunteer", "label": "tag"}
    assert config.taxonomy is not None and config.taxonomy.format == "csv"
    assert config.items is not None
    assert config.items.attributes == (AttributeConfig("age_band", True, True),)
    assert config.lexicons.layers == (tmp_path / "org_layer.yaml", tmp_path / "dataset_layer.yaml")
    assert config.lexicons.base == "builtin"
    assert (config.scan.fuzzy_threshold, config.scan.fuzzy_min_length) == (90.0, 6)
    assert config.line_of("annotations.path") == 5
    assert config.notes == ()


def test_dataclasses_are_frozen(tmp_path: Path) -> None:
    write(tmp_path, FULL)
    config = load_config(tmp_path)
    with pytest.raises(AttributeError):
        config.name = "other"  # type: ignore[misc]


@pytest.mark.parametrize(
    ("text", "pattern"),
    [
        (
            "version: 1\nannotation:\n  path: a.csv\n",
            r"labelreview\.yaml line 2, column 1: unknown key 'annotation'; known keys here: "
            r"version, name, subjects, annotations, taxonomy, items, lexicons, scan, agreement, "
            r"decisions, compare, signals, queue, engine, curator\. "
            r"Did you mean 'annotations'\?",
        ),
        (
            "annotations:\n  path: a.csv\n  layot: wide\n",
            r"line 3, column 3: unknown key 'annotations\.layot'.* Did you mean 'layout'\?",
        ),
        (
            "subjects: humans\n",
            r"line 1, column 11: 'subjects' must be one of people, mixed, none; got 'humans'",
        ),
        (
            "version: 2\n",
            r"line 1, column 10: 'version' must be 1 \(the only schema this labelreview reads\); "
            r"got 2",
        ),
        (
            "annotations:\n  path: a.csv\n  layout: tall\n",
            r"line 3, column 11: 'annotations\.layout' must be one of long, wide; got 'tall'",
        ),
        (
            "annotations:\n  format: xlsx\n",
            r"line 2, column 11: 'annotations\.format' must be one of auto, csv, tsv, jsonl, json, "
            r"parquet, coco; got 'xlsx'",
        ),
        (
            "annotations:\n  columns: {item: a, label: a}\n",
            r"line 2, column 29: 'annotations\.columns' maps both item and label to 'a'",
        ),
        (
            "annotations:\n  columns: {photo: a}\n",
            r"line 2, column 13: unknown key 'annotations\.columns\.photo'; known keys here: "
            r"item, annotator, label",
        ),
        (
            "annotations:\n  annotator_columns: [a, b]\n",
            r"line 2, column 22: 'annotations\.annotator_columns' applies only to the wide layout",
        ),
        (
            "annotations:\n  layout: wide\n  columns: {item: a, label: b}\n",
            r"line 3, column 12: 'annotations\.columns\.label' does not apply to the wide layout",
        ),
        (
            "annotations:\n  multi_label_separator: ''\n",
            r"line 2, column 26: 'annotations\.multi_label_separator' must be the text between "
            r"labels in a cell, or null; got ''",
        ),
        (
            "annotations:\n  encoding: klingon-8\n",
            r"line 2, column 13: 'annotations\.encoding': unknown text encoding 'klingon-8'",
        ),
        (
            "scan:\n  fuzzy_threshold: 101\n",
            r"line 2, column 20: 'scan\.fuzzy_threshold' must be between 0 and 100; got 101",
        ),
        (
            "scan:\n  fuzzy_min_length: 2.5\n",
            r"line 2, column 21: 'scan\.fuzzy_min_length' must be a whole number; got 2\.5",
        ),
        ("taxonomy:\n  format: text\n", r"line 2, column 3: 'taxonomy' needs a 'path'"),
        (
            "items:\n  path: items.csv\n  attributes:\n    - column: ethnicity\n"
            "      consented: true\n",
            r"line 4, column 7: attribute column 'ethnicity' is not marked self_reported: true; "
            r"labelreview never uses attributes without consent and never infers them",
        ),
        (
            "items:\n  path: items.csv\n  attributes:\n    - column: age\n"
            "      consented: yes please\n      self_reported: true\n",
            r"line 5, column 18: 'consented' must be true or false; got 'yes please'",
        ),
        ("name: a\nname: b\n", r"line 2, column 1: key 'name' appears twice"),
        (
            "annotations: [a.csv]\n",
            r"line 1, column 14: 'annotations' must be a mapping of keys to values",
        ),
        ("curator: [a, b]\n", r"line 1, column 10: 'curator' must be text or null, not a list"),
        (
            "annotations:\n  path: a.csv\n   layout: long\n",
            r"line 3, column 10: not valid YAML: mapping values are not allowed here",
        ),
    ],
)
def test_bad_values_name_file_line_and_column(tmp_path: Path, text: str, pattern: str) -> None:
    write(tmp_path, text)
    with pytest.raises(ConfigError, match=pattern) as info:
        load_config(tmp_path)
    assert info.value.source == str(tmp_path / "labelreview.yaml")
    assert info.value.line is not None


def test_config_not_utf8(tmp_path: Path) -> None:
    (tmp_path / "labelreview.yaml").write_bytes("name: caf\xe9\n".encode("latin-1"))
    with pytest.raises(
        ConfigError,
        match=r"line 1: the file is not valid UTF-8 \(byte 0xe9 at "
        r"line 1\)",
    ):
        load_config(tmp_path)


def test_missing_folder(tmp_path: Path) -> None:
    with pytest.raises(ConfigError, match=r"nowhere: the dataset folder does not exist"):
        load_config(tmp_path / "nowhere")


def test_empty_config_file_means_defaults_with_detection(tmp_path: Path) -> None:
    shutil.copy(DATA / "bom.csv", tmp_path / "annotations.csv")
    write(tmp_path, "# nothing yet\n")
    config = load_config(tmp_path)
    assert config.annotations is not None
    assert config.annotations.path == tmp_path / "annotations.csv"
    assert config.subjects is None  # not set: the scan uses mixed and says so
    assert config.taxonomy is None  # an explicit file means what it says: no taxonomy
    assert "annotations.path is not set; using annotations.csv (detected)" in config.notes


def harbour_folder(tmp_path: Path) -> Path:
    shutil.copy(DATA / "latin1.csv", tmp_path / "annotations.csv")
    shutil.copy(DATA / "taxonomy.csv", tmp_path / "taxonomy.csv")
    shutil.copy(DATA / "items.csv", tmp_path / "items.csv")
    (tmp_path / "README.txt").write_text("not a taxonomy\n")
    (tmp_path / "decisions.jsonl").write_text('{"item": "p1", "label": "x"}\n')
    return tmp_path


def test_folder_without_config_detects_everything(tmp_path: Path) -> None:
    config = load_config(harbour_folder(tmp_path))
    assert config.source is None
    assert config.annotations is not None
    assert config.annotations.path == tmp_path / "annotations.csv"
    assert config.taxonomy is not None and config.taxonomy.path == tmp_path / "taxonomy.csv"
    assert config.items is not None and config.items.path == tmp_path / "items.csv"
    assert config.items.attributes == ()  # attributes are never picked up by detection
    assert config.name == tmp_path.name


def test_detection_reports_ties_instead_of_guessing(tmp_path: Path) -> None:
    shutil.copy(DATA / "bom.csv", tmp_path / "labels_a.csv")
    shutil.copy(DATA / "bom.csv", tmp_path / "labels_b.csv")
    config = load_config(tmp_path)
    assert config.annotations is None
    assert (
        "several files could be the annotations (labels_a.csv, labels_b.csv); set "
        "annotations.path to one"
    ) in config.notes


def test_detection_of_coco_and_wide(tmp_path: Path) -> None:
    shutil.copy(DATA / "coco_small.json", tmp_path / "instances.json")
    assert load_config(tmp_path).annotations.path == tmp_path / "instances.json"  # type: ignore[union-attr]
    other = tmp_path / "wide"
    other.mkdir()
    shutil.copy(DATA / "wide.csv", other / "annotations.csv")
    config = load_config(other)
    assert config.annotations is not None and config.annotations.layout == "wide"


def test_starter_config_is_written_and_loads(tmp_path: Path) -> None:
    folder = harbour_folder(tmp_path)
    before = {p.name: p.read_bytes() for p in folder.iterdir()}
    path = write_starter_config(folder)
    assert path == folder / "labelreview.yaml"
    text = path.read_text()
    assert "  columns:" in text and '    label: "tag"' in text
    assert "# This file is not valid UTF-8" in text
    assert "# attributes:" in text  # shown commented out, never filled in
    config = load_config(folder)
    assert config.source == path
    assert config.annotations is not None
    assert config.annotations.columns == {
        "item": "photo_id",
        "annotator": "volunteer",
        "label": "tag",
    }
    assert config.items is not None and config.items.columns == {
        "item": "photo_id",
        "text": "caption",
        "preview": "image_file",
    }
    assert config.taxonomy is not None
    assert {p.name: p.read_bytes() for p in folder.iterdir() if p != path} == before


def test_starter_config_never_overwrites(tmp_path: Path) -> None:
    existing = write(tmp_path, "name: mine\n")
    with pytest.raises(
        ConfigError,
        match=r"labelreview\.yaml: labelreview\.yaml already exists "
        r"here and labelreview never overwrites it\. Edit it, or use --force to "
        r"write a fresh starter beside it as labelreview\.new\.yaml\.",
    ):
        write_starter_config(tmp_path)
    assert existing.read_text() == "name: mine\n"
    beside = write_starter_config(tmp_path, force=True)
    assert beside == tmp_path / "labelreview.new.yaml"
    assert existing.read_text() == "name: mine\n"
    with pytest.raises(ConfigError, match=r"labelreview\.new\.yaml already exists too"):
        write_starter_config(tmp_path, force=True)


def test_starter_config_in_an_empty_folder_is_valid(tmp_path: Path) -> None:
    path = write_starter_config(tmp_path)
    assert "# No annotation file was recognised" in path.read_text()
    config = load_config(tmp_path)
    assert config.annotations is None and config.taxonomy is None


def test_starter_config_lists_ambiguous_columns(tmp_path: Path) -> None:
    shutil.copy(DATA / "ambiguous_columns.csv", tmp_path / "annotations.csv")
    text = write_starter_config(tmp_path).read_text()
    assert "# item: ?" in text and "several could be it: image_id, id" in text
    load_config(tmp_path)  # still valid YAML in our schema


GOVERNANCE = """\
version: 1
agreement:
  level: ordinal
  reliable: 0.75
  tentative: 0.6
  min_items: 5
  bootstrap: 0
decisions:
  log: audit/decisions.jsonl
  min_reason_length: 20
  fail_on: high
  four_eyes: true
  retire_fallbacks:
    beauty queen: person
compare:
  agreement_drop: 0.05
"""


def test_governance_sections(tmp_path: Path) -> None:
    config = load_config(write(tmp_path, GOVERNANCE).parent)
    assert config.agreement.level == "ordinal"
    assert (config.agreement.reliable, config.agreement.tentative) == (0.75, 0.6)
    assert config.agreement.min_items == 5 and config.agreement.bootstrap == 0
    assert config.agreement.min_pair_items == 10  # default kept
    assert config.log_path == tmp_path / "audit" / "decisions.jsonl"
    assert config.decisions.min_reason_length == 20
    assert config.decisions.fail_on == "high" and config.decisions.four_eyes
    assert config.decisions.retire_fallbacks == {"beauty queen": "person"}
    assert config.compare.agreement_drop == 0.05


def test_governance_defaults(tmp_path: Path) -> None:
    config = load_config(write(tmp_path, "version: 1\n").parent)
    assert config.log_path == tmp_path / "labelreview-log.jsonl"
    assert config.decisions.fail_on == "medium"
    assert (config.agreement.reliable, config.agreement.tentative) == (0.8, 0.667)


@pytest.mark.parametrize(
    ("text", "pattern"),
    [
        ("agreement:\n  level: fuzzy\n", r"line 3, column 10: 'agreement.level' must be one of"),
        ("agreement:\n  reliable: 0.5\n", r"'agreement.tentative' \(0.667\) must not be above"),
        ("decisions:\n  fail_on: severe\n", r"line 3, column 12: 'decisions.fail_on' must be"),
        ("decisions:\n  retire_fallbacks:\n    a: a\n", r"line 4, column 8: .*fall back to itself"),
        ("decisions:\n  min_reason_length: 0\n", r"must be at least 1"),
        ("compare:\n  drop: 1\n", r"unknown key 'compare.drop'"),
    ],
)
def test_governance_errors(tmp_path: Path, text: str, pattern: str) -> None:
    with pytest.raises(ConfigError, match=pattern):
        load_config(write(tmp_path, "version: 1\n" + text).parent)


SIGNALS = """\
version: 1
signals:
  contested_below: 0.5
  fdr: 0.1
  disparity_ratio: 0.75
  min_group_size: 20
  min_expected: 1
  proxy_columns: [zone, device]
  skew_min_items: 50
queue:
  weights: {lexicon: 5, prevalence: 0}
  severity: {disparity: high}
"""


def test_signals_and_queue_sections(tmp_path: Path) -> None:
    config = load_config(write(tmp_path, SIGNALS).parent)
    s = config.signals
    assert (s.contested_below, s.fdr, s.disparity_ratio) == (0.5, 0.1, 0.75)
    assert (s.min_group_size, s.min_expected, s.skew_min_items) == (20, 1.0, 50)
    assert s.proxy_columns == ("zone", "device") and s.proxy_nmi == 0.25  # default kept
    assert config.queue.weights == {
        "lexicon": 5.0,
        "contested": 2.0,
        "disparity": 3.0,
        "annotator_skew": 1.0,
        "prevalence": 0.0,
    }
    assert config.queue.severity == {
        "contested": "low",
        "disparity": "high",
        "annotator_skew": "low",
    }


def test_signals_and_queue_defaults(tmp_path: Path) -> None:
    config = load_config(write(tmp_path, "version: 1\n").parent)
    assert config.signals.min_group_size == 10 and config.signals.proxy_columns is None
    assert config.signals.disparity_ratio == 0.8 and config.signals.fdr == 0.05
    assert config.queue.severity["disparity"] == "medium"


@pytest.mark.parametrize(
    ("text", "pattern"),
    [
        ("signals:\n  min_group_size: 0\n", r"line 3, column 19: 'signals.min_group_size' must"),
        ("signals:\n  disparity_ratio: 1.5\n", r"'signals.disparity_ratio' must be between 0"),
        ("signals:\n  fdr: 0\n", r"line 3, column 8: 'signals.fdr' must be above 0"),
        ("signals:\n  k: 5\n", r"unknown key 'signals.k'"),
        ("signals:\n  proxy_columns: zone\n", r"'signals.proxy_columns' must be a list"),
        ("queue:\n  weights: {lexcon: 1}\n", r"unknown key 'queue.weights.lexcon'.*lexicon"),
        ("queue:\n  weights: {lexicon: -1}\n", r"'queue.weights.lexicon' must be between 0"),
        (
            "queue:\n  weights: {lexicon: 0, contested: 0, disparity: 0, annotator_skew: 0, "
            "prevalence: 0}\n",
            r"'queue.weights' are all 0",
        ),
        ("queue:\n  severity: {proxy: high}\n", r"unknown key 'queue.severity.proxy'"),
        ("queue:\n  severity: {contested: loud}\n", r"'queue.severity.contested' must be one of"),
    ],
)
def test_signals_and_queue_errors(tmp_path: Path, text: str, pattern: str) -> None:
    with pytest.raises(ConfigError, match=pattern):
        load_config(write(tmp_path, "version: 1\n" + text).parent)
