"""load_dataset: config + loaders + overrides; Dataset.labels()."""

from __future__ import annotations

import shutil
import textwrap
import warnings
from pathlib import Path

import pandas as pd
import pytest

from labelreview.dataset import Dataset, load_dataset
from labelreview.errors import ConfigError, LoadError, UsageError

DATA = Path(__file__).resolve().parents[1] / "data" / "io"


def folder_with(tmp_path: Path, config: str | None = None, **files: str) -> Path:
    for target, source in files.items():
        shutil.copy(DATA / source, tmp_path / target.replace("__", "."))
    if config is not None:
        (tmp_path / "labelreview.yaml").write_text(textwrap.dedent(config))
    return tmp_path


def test_configured_dataset_loads_every_file(tmp_path: Path) -> None:
    root = folder_with(
        tmp_path,
        """\
        version: 1
        subjects: people
        annotations:
          path: photos.csv
          encoding: latin-1
        taxonomy:
          path: vocab.txt
        items:
          path: items.csv
          attributes:
            - {column: age_band, consented: true, self_reported: true}
        """,
        photos__csv="latin1.csv",
        vocab__txt="taxonomy.txt",
        items__csv="items.csv",
    )
    dataset = load_dataset(root)
    assert isinstance(dataset, Dataset)
    assert dataset.root == root
    assert dataset.config.subjects == "people"
    assert dataset.annotations is not None
    assert dataset.annotations["label"].tolist() == ["quay", "café terrace"]
    assert [t.name for t in dataset.taxonomy][:2] == ["vessels", "vessels/boat"]
    assert dataset.items is not None
    assert list(dataset.items.columns) == ["item", "text", "preview", "age_band"]
    assert [(r.path, r.format) for r in dataset.reports] == [
        (str(root / "photos.csv"), "csv"),
        (str(root / "vocab.txt"), "text"),
        (str(root / "items.csv"), "csv"),
    ]


def test_overrides_win_over_the_config(tmp_path: Path) -> None:
    root = folder_with(
        tmp_path,
        "annotations:\n  path: annotations.csv\n  encoding: utf-8\nsubjects: none\n",
        annotations__csv="bom.csv",
    )
    other = tmp_path / "elsewhere.csv"
    shutil.copy(DATA / "latin1.csv", other)
    taxonomy = DATA / "taxonomy_tree.yaml"
    dataset = load_dataset(
        root, annotations=other, taxonomy=taxonomy, encoding="latin-1", subjects="mixed"
    )
    assert dataset.config.subjects == "mixed"
    assert dataset.config.annotations is not None
    assert dataset.config.annotations.path == other
    assert dataset.config.annotations.encoding == "latin-1"
    assert dataset.annotations is not None
    assert "café terrace" in dataset.annotations["label"].tolist()
    assert dataset.taxonomy[0].name == "vessels"
    assert dataset.reports[1].format == "yaml"


def test_bad_subjects_override(tmp_path: Path) -> None:
    folder_with(tmp_path, annotations__csv="bom.csv")
    with pytest.raises(UsageError, match="subjects must be one of people, mixed, none; got 'all'"):
        load_dataset(tmp_path, subjects="all")


def test_configured_file_missing_points_at_the_config_line(tmp_path: Path) -> None:
    folder_with(tmp_path, "version: 1\nannotations:\n  path: annotatons.csv\n")
    with pytest.raises(
        ConfigError,
        match=r"labelreview\.yaml line 3: annotations\.path names "
        r"'annotatons\.csv', which does not exist in .* Correct annotations\.path "
        r"in labelreview\.yaml\.",
    ):
        load_dataset(tmp_path)


def test_folder_with_nothing_to_read(tmp_path: Path) -> None:
    (tmp_path / "README.txt").write_text("hello\n")
    with pytest.raises(
        LoadError,
        match=r"found no annotation or taxonomy file here; files "
        r"seen: README\.txt\. Run `labelreview init",
    ):
        load_dataset(tmp_path)


def test_taxonomy_only_dataset(tmp_path: Path) -> None:
    folder_with(tmp_path, taxonomy__txt="taxonomy.txt")
    dataset = load_dataset(tmp_path)
    assert dataset.annotations is None
    labels = dataset.labels()
    assert labels["count"].tolist() == [0, 0, 0, 0]
    assert labels["in_annotations"].tolist() == [False] * 4


def test_labels_merge_taxonomy_and_annotations(tmp_path: Path) -> None:
    root = folder_with(
        tmp_path,
        "annotations:\n  path: ann.csv\ntaxonomy:\n  path: t.txt\n",
        ann__csv="multilabel_pipe.csv",
        t__txt="taxonomy.txt",
    )
    (root / "t.txt").write_text("boat\nvessels/ship\n")
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        dataset = load_dataset(root)
    expected = pd.DataFrame(
        {
            "label": ["boat", "dock", "harbour", "rope", "vessels/ship"],
            "count": [1, 1, 1, 1, 0],
            "in_taxonomy": [True, False, False, False, True],
            "in_annotations": [True, True, True, True, False],
        }
    )
    got = dataset.labels()
    assert got.to_dict("list") == expected.to_dict("list")
    assert list(got.columns) == ["label", "count", "in_taxonomy", "in_annotations"]


def test_load_dataset_never_writes(tmp_path: Path) -> None:
    folder_with(tmp_path, annotations__csv="bom.csv", taxonomy__csv="taxonomy.csv")
    before = {p.name: p.read_bytes() for p in tmp_path.iterdir()}
    load_dataset(tmp_path)
    assert {p.name: p.read_bytes() for p in tmp_path.iterdir()} == before


def test_paused_gc_restores_the_collector() -> None:
    import gc

    from labelreview._gc import paused_gc

    assert gc.isenabled()
    with paused_gc():
        assert not gc.isenabled()
        with paused_gc():  # nested: the inner block must not turn it back on
            assert not gc.isenabled()
        assert not gc.isenabled()
    assert gc.isenabled()
    with pytest.raises(ZeroDivisionError), paused_gc():
        1 / 0  # noqa: B018
    assert gc.isenabled()
    gc.disable()
    try:
        with paused_gc():
            pass
        assert not gc.isenabled()  # it was off before; it stays off
    finally:
        gc.enable()


def test_loading_restores_the_garbage_collector(tmp_path: Path) -> None:
    import gc

    root = folder_with(tmp_path, taxonomy__txt="taxonomy.txt")
    load_dataset(root)
    assert gc.isenabled()
    (root / "taxonomy.txt").write_text("boats\nboats//dinghy\n")
    with pytest.raises(LoadError):
        load_dataset(root)
    assert gc.isenabled()
