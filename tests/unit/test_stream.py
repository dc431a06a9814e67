"""Reading annotation files in batches: the rows, label counts and agreement figures equal the
whole-file path exactly, for sorted and unsorted files in every format that can be streamed,
with batches far smaller than the file; bad input is located as the whole-file loader locates
it. (Seeded invented data; CSV quoting per RFC 4180.)"""

from __future__ import annotations

import json
import os
import tempfile
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from labelreview.agreement import agreement_report, stream_agreement
from labelreview.engine import stream_usage, with_taxonomy
from labelreview.errors import LoadError, UsageError
from labelreview.io import AnnotationStream, DuplicateRowsWarning, fold_items, load_annotations
from labelreview.io._stream import ItemOrder
from labelreview.progress import ProgressEvent
from labelreview.report import label_usage

COLUMNS = {"item": "photo_id", "annotator": "volunteer", "label": "tags"}


def make_frame(seed: int = 1, items: int = 900, numeric_ids: bool = False) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    rows = []
    for i in range(items):
        item = str(i * 3 + 7) if numeric_ids else f"p{rng.integers(0, 10**4):05d}_{i}"
        truth = rng.integers(0, 5)
        for a in range(6):
            if rng.random() < 0.4:
                continue
            tags = {truth if rng.random() < 0.6 else rng.integers(0, 5)}
            if rng.random() < 0.2:
                tags.add(rng.integers(0, 5))
            rows.append((item, f"v{a}", "|".join(f"tag{t}" for t in sorted(tags))))
    data = pd.DataFrame(rows, columns=list(COLUMNS.values()))
    return pd.concat([data, data.iloc[:25]], ignore_index=True)  # 25 duplicate rows


def write(data: pd.DataFrame, path: Path) -> Path:
    if path.suffix == ".csv":
        data.to_csv(path, index=False)
    elif path.suffix == ".tsv":
        data.to_csv(path, index=False, sep="\t")
    elif path.suffix == ".jsonl":
        data.to_json(path, orient="records", lines=True)
    else:
        data.to_parquet(path)
    return path


def whole(path: Path, **options):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DuplicateRowsWarning)
        frame, report = load_annotations(path, columns=COLUMNS)
    return frame, report, agreement_report(frame, **options)


def streamed(path: Path, events: list[ProgressEvent] | None = None, **options):
    stream = AnnotationStream(path, columns=COLUMNS, batch_bytes=4096, batch_rows=500)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DuplicateRowsWarning)
        return stream_agreement(
            stream, progress=events.append if events is not None else None, **options
        )


@pytest.mark.parametrize("suffix", [".csv", ".tsv", ".jsonl", ".parquet"])
@pytest.mark.parametrize("order", ["sorted", "shuffled"])
def test_streamed_agreement_equals_the_whole_file(tmp_path: Path, suffix: str, order: str):
    data = make_frame()
    if order == "sorted":
        data = data.sort_values("photo_id", kind="stable")
    else:
        data = data.sample(frac=1.0, random_state=3)
    path = write(data, tmp_path / f"ann{suffix}")
    _, report, expected = whole(path, bootstrap=120, seed=2)
    events: list[ProgressEvent] = []
    got, got_report = streamed(path, events, bootstrap=120, seed=2)
    assert got == expected
    assert got.multi_label and got.n_pairable > 500
    assert (got_report.rows_read, got_report.duplicates_dropped) == (
        report.rows_read,
        report.duplicates_dropped,
    )
    reads = [e for e in events if e.task.startswith("reading ann") and not e.finished]
    assert len(reads) > 3  # many batches, not one
    taken = "read once" if order == "sorted" else "partitioned by item"
    assert any(taken in n for n in got_report.notes)


def test_numeric_item_order_counts_as_sorted(tmp_path: Path):
    data = make_frame(numeric_ids=True)  # 7, 10, 13, ... 100, 103: sorted as numbers, not text
    data = data.sort_values("photo_id", key=lambda c: c.astype(int), kind="stable")
    path = write(data, tmp_path / "ann.csv")
    _, _, expected = whole(path, bootstrap=0)
    got, report = streamed(path, bootstrap=0)
    assert got == expected and any("read once" in n for n in report.notes)


@pytest.mark.parametrize("level", ["ordinal", "interval"])
def test_numeric_levels_stream_exactly_with_a_bootstrap(tmp_path: Path, level: str):
    rng = np.random.default_rng(9)
    rows = [
        (f"u{i:04d}", f"r{a}", str(int(np.clip(3 + rng.normal(), 1, 5))))
        for i in range(400)
        for a in range(4)
        if rng.random() < 0.8
    ]
    data = pd.DataFrame(rows, columns=list(COLUMNS.values())).sample(frac=1.0, random_state=1)
    path = write(data, tmp_path / "ratings.csv")
    _, _, expected = whole(path, level=level, bootstrap=100, seed=3)
    got, report = streamed(path, level=level, bootstrap=100, seed=3)
    assert got == expected and got.ci is not None
    if level == "ordinal":
        assert any("second time" in n for n in report.notes)


def test_wide_layout_streams(tmp_path: Path):
    data = pd.DataFrame(
        {"photo_id": [f"x{i}" for i in range(300)]}
        | {
            f"ann{a}": [f"t{(i * (a + 1)) % 4}" if (i + a) % 5 else "" for i in range(300)]
            for a in range(4)
        }
    )
    path = write(data, tmp_path / "wide.csv")
    frame, _ = load_annotations(path, layout="wide")
    stream = AnnotationStream(path, layout="wide", batch_bytes=2048)
    got, report = stream_agreement(stream, bootstrap=50)
    assert got == agreement_report(frame, bootstrap=50)
    assert report.format == "wide-csv" and report.empty_labels_dropped > 0


def test_label_counts_equal_the_whole_file(tmp_path: Path):
    data = make_frame(2).sample(frac=1.0, random_state=5)
    path = write(data, tmp_path / "ann.csv")
    frame, _, _ = whole(path, bootstrap=0)
    stream = AnnotationStream(path, columns=COLUMNS, batch_bytes=4096)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DuplicateRowsWarning)
        usage, pairs, _ = stream_usage(stream, pairs_for={frame["item"].iloc[0]})
    assert with_taxonomy(usage, ["tag0", "never_used"]) == label_usage(
        frame, ["tag0", "never_used"]
    )
    assert set(pairs["item"]) == {frame["item"].iloc[0]}


def test_duplicates_warn_once_with_the_total(tmp_path: Path):
    path = write(make_frame(), tmp_path / "ann.csv")
    stream = AnnotationStream(path, columns=COLUMNS, batch_bytes=4096)
    with pytest.warns(DuplicateRowsWarning, match=r"dropped \d+ duplicate") as caught:
        fold_items(stream, lambda: 0, lambda n, b: n + len(b))
    assert len(caught) == 1


def test_temporary_partitions_are_removed(tmp_path: Path):
    spill = tmp_path / "spill"
    spill.mkdir()
    path = write(make_frame().sample(frac=1.0, random_state=2), tmp_path / "ann.csv")
    stream = AnnotationStream(path, columns=COLUMNS, batch_bytes=4096)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DuplicateRowsWarning)
        total, _ = fold_items(stream, lambda: 0, lambda n, b: n + len(b), temp_dir=spill)
    assert total > 0 and list(spill.iterdir()) == []


def test_sorted_order_required_refuses_an_unsorted_file(tmp_path: Path):
    path = write(make_frame().sample(frac=1.0, random_state=2), tmp_path / "ann.csv")
    stream = AnnotationStream(path, columns=COLUMNS, batch_bytes=4096)
    with pytest.raises(LoadError, match="not sorted by item"):
        fold_items(stream, lambda: 0, lambda n, b: n, order="sorted")


def test_item_order_checks_text_and_numbers():
    order = ItemOrder()
    assert order.accept(pd.Series(["9", "10", "11"]))  # numbers go up, text does not
    assert not order.text_ok and order.number_ok
    assert not order.accept(pd.Series(["011"]))  # 11 again but written differently
    other = ItemOrder()
    assert other.accept(pd.Series(["a", "b"])) and other.accept(pd.Series(["b", "c"]))
    assert not other.accept(pd.Series(["a"]))


def test_bad_utf8_deep_in_the_file_names_line_and_column(tmp_path: Path):
    path = tmp_path / "ann.csv"
    body = "".join(f"p{i},v1,tag{i % 3}\n" for i in range(5000))
    path.write_bytes(("item,annotator,label\n" + body).encode() + b"p9,v\xff1,tag1\n")
    stream = AnnotationStream(path, batch_bytes=4096)
    with pytest.raises(LoadError) as info:
        fold_items(stream, lambda: 0, lambda n, b: n)
    assert (info.value.line, info.value.column) == (5002, 5)
    assert "not valid UTF-8" in str(info.value)


def test_wrong_field_count_names_the_line(tmp_path: Path):
    path = tmp_path / "ann.csv"
    body = "".join(f"p{i},v1,tag{i % 3}\n" for i in range(3000))
    path.write_text("item,annotator,label\n" + body + "p1,v2,tag1,extra\n", encoding="utf-8")
    stream = AnnotationStream(path, batch_bytes=4096)
    with pytest.raises(LoadError, match="4 fields but the header has 3") as info:
        fold_items(stream, lambda: 0, lambda n, b: n)
    assert info.value.line == 3002


def test_blank_item_names_the_line_as_the_whole_file_loader_does(tmp_path: Path):
    path = tmp_path / "ann.csv"
    rows = "".join(f"p{i},v1,tag\n" for i in range(2000))
    path.write_text("item,annotator,label\n" + rows + '"",v1,tag\n', encoding="utf-8")
    with pytest.raises(LoadError) as whole_error:
        load_annotations(path)
    stream = AnnotationStream(path, batch_bytes=4096)
    with pytest.raises(LoadError) as stream_error:
        fold_items(stream, lambda: 0, lambda n, b: n)
    assert str(stream_error.value) == str(whole_error.value)


def test_single_documents_cannot_be_streamed(tmp_path: Path):
    path = tmp_path / "coco.json"
    path.write_text(json.dumps({"images": [], "annotations": [], "categories": []}))
    with pytest.raises(UsageError, match="cannot be read in batches"):
        AnnotationStream(path)


def test_latin1_file_streams_with_its_encoding(tmp_path: Path):
    path = tmp_path / "ann.csv"
    rows = "".join(f"p{i // 2},v{i % 2},caf\u00e9\n" for i in range(200))
    path.write_bytes(("item,annotator,label\n" + rows).encode("latin-1"))
    stream = AnnotationStream(path, encoding="latin-1", batch_bytes=1024)
    total, _ = fold_items(stream, list, lambda acc, b: acc + b["label"].tolist())
    assert set(total) == {"caf\u00e9"} and len(total) == 200


def test_default_temporary_folder_is_left_clean(tmp_path: Path, monkeypatch):
    monkeypatch.setenv("TMPDIR", str(tmp_path / "tmp"))
    os.makedirs(tmp_path / "tmp")
    tempfile.tempdir = None
    try:
        path = write(make_frame().sample(frac=1.0, random_state=4), tmp_path / "ann.parquet")
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", DuplicateRowsWarning)
            fold_items(
                AnnotationStream(path, columns=COLUMNS, batch_rows=300),
                lambda: 0,
                lambda n, b: n + len(b),
            )
        assert list((tmp_path / "tmp").iterdir()) == []
    finally:
        tempfile.tempdir = None


def test_quoted_line_breaks_and_quotes_survive_block_cuts(tmp_path: Path):
    # RFC 4180, section 2: quoted fields may hold line breaks and doubled quotes.
    rows = []
    for i in range(400):
        label = f'"tag\n""{i % 7}"""' if i % 3 == 0 else f"tag{i % 5}"
        rows.append(f"p{i // 3},v{i % 3},{label}")
    path = tmp_path / "quoted.csv"
    path.write_text("item,annotator,label\r\n" + "\r\n".join(rows) + "\r\n", encoding="utf-8")
    frame, _ = load_annotations(path)
    for size in (64, 333, 4096):
        stream = AnnotationStream(path, batch_bytes=size)
        got, _ = fold_items(stream, list, lambda acc, b: acc + [b])
        joined = pd.concat(got, ignore_index=True)
        assert sorted(map(tuple, joined.to_numpy().tolist())) == sorted(
            map(tuple, frame.to_numpy().tolist())
        )
