"""`labelreview.apply`: the label mapping from the log, and revised datasets in every format.

Where the checks come from:

- The mapping rules (chains, loops, merges, parents) are this project's own rules, written in
  the issue and in the module docstring of labelreview/apply.py; no outside source.
- Every revised file is read back with general-purpose reference readers, not only with our own
  loader: Python's csv module (RFC 4180 reading), pandas.read_csv, json, pyarrow.parquet and
  PyYAML. The expected annotations are worked out independently in this file with plain sets.
- Hashes in the manifest are recomputed with hashlib (SHA-256, FIPS 180-4).
- The timestamps are parsed with datetime.fromisoformat as RFC 3339 (UTC, "Z").
"""

from __future__ import annotations

import csv
import hashlib
import io
import itertools
import json
import shutil
from collections import Counter
from datetime import UTC, datetime, timedelta
from pathlib import Path
from typing import Any

import pandas as pd
import pytest
import yaml

from labelreview.apply import (
    MAPPING_COLUMNS,
    ApplyRefusedError,
    MappingError,
    apply_decisions,
    build_mapping,
    cell_labels,
    count_annotations,
    plan_apply,
)
from labelreview.decisions import Entry, fold
from labelreview.export import OutputError
from labelreview.io import load_annotations, load_taxonomy
from labelreview.review import DecisionRequest, ReviewSession

DATA = Path(__file__).parent.parent / "data" / "apply"
FERRY = DATA / "ferry"
LEXICON = DATA / "lexicon"

FIREMAN = "people/crew/fireman"
FIREFIGHTER = "people/crew/firefighter"
LAZY = "people/looks/lazy_worker"
PRETTY = "people/looks/pretty_passenger"
PASSENGERS = "people/passengers"
NURSE = "people/roles/nurse"

# The decisions most tests record: a merge, a drop, a second merge, an accept.
STANDARD = (
    DecisionRequest(FIREMAN, "rename", "neutral job word", new_label=FIREFIGHTER),
    DecisionRequest(LAZY, "retire", "a verdict on character"),
    DecisionRequest(PRETTY, "rename", "grades looks; say what is seen", new_label=PASSENGERS),
    DecisionRequest(NURSE, "accept", "the uniform and the ward are in the photo"),
)
STANDARD_MAP = {FIREMAN: FIREFIGHTER, LAZY: None, PRETTY: PASSENGERS}


def ticking() -> Any:
    """A clock one second per call from a fixed moment, so logs are reproducible."""
    start = datetime(2026, 3, 1, 9, 0, tzinfo=UTC)
    counter = itertools.count()
    return lambda: start + timedelta(seconds=next(counter))


def base_rows() -> list[dict[str, str]]:
    """The fixture's annotation rows, read with the csv module."""
    with open(FERRY / "annotations.csv", encoding="utf-8", newline="") as handle:
        return list(csv.DictReader(handle))


def expected_keys(mapping: dict[str, str | None]) -> set[tuple[str, str, str]]:
    """(item, annotator, label) after the mapping, worked out with plain sets."""
    out = set()
    for row in base_rows():
        label = mapping.get(row["tag"], row["tag"])
        if label is not None:
            out.add((row["photo"], row["rater"], label))
    return out


def digests(folder: Path) -> dict[str, str]:
    return {
        p.name: hashlib.sha256(p.read_bytes()).hexdigest()
        for p in sorted(folder.rglob("*"))
        if p.is_file() and not p.name.startswith("labelreview-log")
    }


def write_config(folder: Path, annotations: str, *, layout: str = "long", extra: str = "") -> None:
    columns = (
        "  columns: {item: photo, annotator: rater, label: tag}\n"
        if layout == "long"
        else "  columns: {item: photo}\n"
        if layout == "wide"
        else ""
    )
    (folder / "labelreview.yaml").write_text(
        "version: 1\nname: wrenhaven_ferry\nsubjects: people\n"
        f"annotations:\n  path: {annotations}\n  layout: {'wide' if layout == 'wide' else 'long'}\n"
        f"{columns}"
        '  multi_label_separator: "|"\n'
        "taxonomy:\n  path: taxonomy.csv\n"
        f"lexicons:\n  base: {LEXICON}\n"
        f"{extra}",
        encoding="utf-8",
    )


def make_dataset(tmp_path: Path, fmt: str) -> Path:
    """The ferry fixture rewritten in ``fmt`` (other columns and their names kept)."""
    folder = tmp_path / f"ferry_{fmt}"
    folder.mkdir()
    shutil.copy(FERRY / "taxonomy.csv", folder / "taxonomy.csv")
    rows = base_rows()
    if fmt == "csv":
        shutil.copy(FERRY / "annotations.csv", folder / "annotations.csv")
        write_config(folder, "annotations.csv")
    elif fmt == "tsv":
        with open(folder / "annotations.tsv", "w", encoding="utf-8", newline="") as handle:
            writer = csv.DictWriter(handle, fieldnames=list(rows[0]), delimiter="\t")
            writer.writeheader()
            writer.writerows(rows)
        write_config(folder, "annotations.tsv")
    elif fmt == "jsonl":
        with open(folder / "annotations.jsonl", "w", encoding="utf-8") as handle:
            for n, row in enumerate(rows):
                record = {**row, "confidence": float(row["confidence"]), "meta": {"n": n}}
                handle.write(json.dumps(record) + "\n")
        write_config(folder, "annotations.jsonl")
    elif fmt == "json":
        records = [{**row, "confidence": float(row["confidence"])} for row in rows]
        (folder / "annotations.json").write_text(json.dumps(records, indent=1), encoding="utf-8")
        write_config(folder, "annotations.json")
    elif fmt == "parquet":
        frame = pd.DataFrame(rows).astype({"confidence": "float64"})
        frame.to_parquet(folder / "annotations.parquet", index=False)
        write_config(folder, "annotations.parquet")
    elif fmt in ("pipe", "jsonlist"):
        grouped: dict[tuple[str, str], list[str]] = {}
        for row in rows:
            grouped.setdefault((row["photo"], row["rater"]), []).append(row["tag"])
        if fmt == "pipe":
            with open(folder / "annotations.csv", "w", encoding="utf-8", newline="") as handle:
                writer = csv.writer(handle)
                writer.writerow(["photo", "rater", "tag"])
                for (photo, rater), tags in grouped.items():
                    writer.writerow([photo, rater, "|".join(tags)])
            write_config(folder, "annotations.csv")
        else:
            with open(folder / "annotations.jsonl", "w", encoding="utf-8") as handle:
                for (photo, rater), tags in grouped.items():
                    handle.write(json.dumps({"photo": photo, "rater": rater, "tag": tags}) + "\n")
            write_config(folder, "annotations.jsonl")
    elif fmt == "wide":
        cells: dict[str, dict[str, list[str]]] = {}
        for row in rows:
            cells.setdefault(row["photo"], {}).setdefault(row["rater"], []).append(row["tag"])
        with open(folder / "annotations.csv", "w", encoding="utf-8", newline="") as handle:
            writer = csv.writer(handle)
            writer.writerow(["photo", "rook", "wren", "season"])
            for photo, by in cells.items():
                writer.writerow(
                    [photo, "|".join(by.get("rook", [])), "|".join(by.get("wren", [])), "summer"]
                )
        write_config(folder, "annotations.csv", layout="wide", extra="")
        text = (folder / "labelreview.yaml").read_text(encoding="utf-8")
        text = text.replace(
            "  columns: {item: photo}\n",
            "  columns: {item: photo}\n  annotator_columns: [rook, wren]\n",
        )
        (folder / "labelreview.yaml").write_text(text, encoding="utf-8")
    elif fmt == "coco":
        names = sorted({row["tag"] for row in rows})
        ids = {name: 10 + n for n, name in enumerate(names)}
        document = {
            "info": {"description": "invented test set"},
            "images": [
                {"id": p, "file_name": f"{p}.jpg"} for p in sorted({r["photo"] for r in rows})
            ],
            "categories": [{"id": ids[n], "name": n, "supercategory": "x"} for n in names],
            "annotations": [
                {
                    "id": k,
                    "image_id": r["photo"],
                    "category_id": ids[r["tag"]],
                    "bbox": [k, k, 5, 5],
                    "annotator": r["rater"],
                }
                for k, r in enumerate(rows, start=1)
            ],
        }
        (folder / "boxes.json").write_text(json.dumps(document), encoding="utf-8")
        write_config(folder, "boxes.json", layout="coco")
    else:  # pragma: no cover - a typo in a parametrize list
        raise AssertionError(fmt)
    return folder


def open_session(folder: Path) -> ReviewSession:
    return ReviewSession.open(folder, curator="curator_a", clock=ticking())


def decided(folder: Path, requests: tuple[DecisionRequest, ...] = STANDARD) -> ReviewSession:
    session = open_session(folder)
    session.decide_many(requests)
    return session


# -- the mapping, on a log state built by hand ------------------------------------------------


def state_of(*decisions: dict[str, Any]) -> Any:
    """A LogState from decision/revoke bodies (seq in order; the fold needs no hashes)."""
    entries = []
    for seq, body in enumerate(decisions, start=1):
        data = {"kind": "decision", "seq": seq, **body}
        entries.append(Entry(data=data, line=seq))
    return fold(entries)


def rename(label: str, new: str) -> dict[str, Any]:
    return {"label": label, "action": "rename", "new_label": new}


def retire(label: str, fallback: str | None = None) -> dict[str, Any]:
    return {"label": label, "action": "retire", "fallback": fallback}


def accept(label: str) -> dict[str, Any]:
    return {"label": label, "action": "accept"}


def test_open_and_accepted_labels_map_to_themselves():
    mapping = build_mapping(state_of(accept("a")), ["a", "b"])
    assert (mapping["a"].action, mapping["a"].new_label, mapping["a"].result) == (
        "accept",
        "a",
        "keep",
    )
    assert mapping["a"].decision_seq == 1
    assert (mapping["b"].action, mapping["b"].new_label, mapping["b"].decision_seq) == (
        "open",
        "b",
        None,
    )


def test_rename_onto_existing_label_is_a_merge_and_onto_new_name_is_a_rename():
    mapping = build_mapping(state_of(rename("a", "b"), rename("c", "d")), ["a", "b", "c"])
    assert (mapping["a"].new_label, mapping["a"].result) == ("b", "merge")
    assert (mapping["c"].new_label, mapping["c"].result) == ("d", "rename")


def test_two_labels_renamed_to_one_new_name_is_a_merge():
    mapping = build_mapping(state_of(rename("a", "n"), rename("b", "n")), ["a", "b"])
    assert mapping["a"].result == mapping["b"].result == "merge"


def test_chain_rename_then_retire_with_fallback_follows_to_the_fallback():
    # A renamed to B, B retired with fallback C => A maps to C (issue 4, "Apply").
    mapping = build_mapping(state_of(rename("A", "B"), retire("B", "C")), ["A", "B", "C"])
    assert mapping["A"].new_label == "C"
    assert mapping["A"].result == "merge"
    assert mapping["A"].decision_seq == 1
    assert mapping["A"].via == (
        "seq 1: 'A' renamed to 'B'",
        "seq 2: 'B' retired, annotations moved to 'C'",
    )
    assert (mapping["B"].new_label, mapping["B"].action) == ("C", "retire")


def test_chain_rename_then_retire_without_fallback_drops():
    mapping = build_mapping(state_of(rename("A", "B"), retire("B")), ["A", "B"])
    assert mapping["A"].new_label is None and mapping["A"].result == "drop"
    assert mapping["B"].new_label is None


def test_loop_is_refused_naming_labels_and_seqs():
    with pytest.raises(MappingError, match=r"loop: 'A' \(seq 1\) -> 'B' \(seq 2\) -> 'A'"):
        build_mapping(state_of(rename("A", "B"), rename("B", "A")), ["A", "B"])


def test_three_step_loop_through_a_fallback_is_refused():
    state = state_of(rename("A", "B"), retire("B", "C"), rename("C", "A"))
    with pytest.raises(MappingError, match=r"'A' \(seq 1\) -> 'B' \(seq 2\) -> 'C' \(seq 3\)"):
        build_mapping(state, ["A", "B", "C"])


def test_revoked_decision_no_longer_maps():
    entries = [
        Entry(data={"kind": "decision", "seq": 1, **rename("a", "b")}, line=1),
        Entry(data={"kind": "revoke", "seq": 2, "label": "a", "revokes": 1}, line=2),
    ]
    mapping = build_mapping(fold(entries), ["a", "b"])
    assert mapping["a"].new_label == "a" and mapping["a"].action == "open"


def test_renamed_parent_moves_children_and_grandchildren():
    labels = ["p", "p/x", "p/x/y", "p/z", "q"]
    mapping = build_mapping(state_of(rename("p", "r"), accept("p/z")), labels)
    assert mapping["p"].new_label == "r"
    assert (mapping["p/x"].new_label, mapping["p/x"].action) == ("r/x", "follow_parent")
    assert mapping["p/x"].decision_seq == 1
    assert mapping["p/x/y"].new_label == "r/x/y"
    # accepted children follow too: the parent they sat under is gone
    assert (mapping["p/z"].new_label, mapping["p/z"].action) == ("r/z", "follow_parent")
    assert mapping["p/z"].via[0] == "seq 2: 'p/z' accepted"
    assert mapping["q"].new_label == "q"


def test_child_own_decision_wins_over_the_parent_move():
    labels = ["p", "p/x", "p/y", "other"]
    mapping = build_mapping(state_of(rename("p", "r"), rename("p/x", "other")), labels)
    assert mapping["p/x"].new_label == "other"
    assert mapping["p/y"].new_label == "r/y"


def test_parent_renamed_onto_existing_parent_merges_children():
    labels = ["old", "old/a", "new", "new/a", "new/b"]
    mapping = build_mapping(state_of(rename("old", "new")), labels)
    assert (mapping["old/a"].new_label, mapping["old/a"].result) == ("new/a", "merge")


def test_retiring_a_parent_with_children_is_refused():
    labels = ["p", "p/a", "p/b", "p/c", "p/d"]
    with pytest.raises(
        MappingError,
        match=r"'p' is retired \(seq 1\) but 4 label\(s\) would stay under it: "
        r"'p/a', 'p/b', 'p/c' and 1 more",
    ):
        build_mapping(state_of(retire("p")), labels)


def test_retiring_a_parent_whose_children_are_all_decided_away_is_allowed():
    labels = ["p", "p/a", "p/b", "q"]
    state = state_of(retire("p/a"), rename("p/b", "q"), retire("p"))
    mapping = build_mapping(state, labels)
    assert mapping["p"].result == "drop"
    assert mapping["p/a"].result == "drop"
    assert mapping["p/b"].new_label == "q"


def test_child_renamed_under_a_retired_parent_is_refused():
    with pytest.raises(MappingError, match="'p' is retired"):
        build_mapping(state_of(retire("p"), rename("p/a", "p/b")), ["p", "p/a"])


def test_new_name_holding_the_separator_is_refused():
    with pytest.raises(MappingError, match="contains the multi-label separator"):
        build_mapping(state_of(rename("a", "b|c")), ["a"], separator="|")


def test_cell_labels_mirror_the_loader():
    assert cell_labels("a | b", "|") == (["a", "b"], "text")
    assert cell_labels('["a", "b"]', "|") == (["a", "b"], "json")
    assert cell_labels(["a", "b|c"], "|") == (["a", "b", "c"], "list")
    assert cell_labels("", "|") == ([], "empty")
    assert cell_labels(None, "|") == ([], "empty")
    assert cell_labels(7, None) == (["7"], "scalar")


def test_count_annotations_against_a_set_computation():
    frame, _ = load_annotations(
        FERRY / "annotations.csv", columns={"item": "photo", "annotator": "rater", "label": "tag"}
    )
    counts = count_annotations(frame, STANDARD_MAP)
    expected = Counter(label for _, _, label in expected_keys(STANDARD_MAP))
    assert counts.by_new_label == dict(expected)
    assert counts.annotations_in == 17
    assert counts.annotations_out == sum(expected.values()) == 15
    assert counts.dropped == 1  # the one lazy_worker annotation
    assert counts.merged == 1  # wf02/rook carried both fireman and firefighter
    assert counts.before[FIREMAN] == 3 and counts.after[FIREMAN] == 2
    assert sum(counts.after.values()) == counts.annotations_out


# -- apply on real files ----------------------------------------------------------------------


def read_back_keys(out: Path, fmt: str) -> set[tuple[str, str, str]]:
    """(item, annotator, label) from a revised file, read with reference readers only."""
    keys: set[tuple[str, str, str]] = set()
    if fmt in ("csv", "tsv", "pipe"):
        name = "annotations.tsv" if fmt == "tsv" else "annotations.csv"
        frame = pd.read_csv(
            out / name, sep="\t" if fmt == "tsv" else ",", dtype=str, keep_default_na=False
        )
        for photo, rater, tag in zip(frame["photo"], frame["rater"], frame["tag"], strict=True):
            for label in tag.split("|"):
                keys.add((photo, rater, label))
    elif fmt in ("jsonl", "jsonlist"):
        for line in (out / "annotations.jsonl").read_text(encoding="utf-8").splitlines():
            record = json.loads(line)
            tags = record["tag"] if isinstance(record["tag"], list) else [record["tag"]]
            for label in tags:
                keys.add((record["photo"], record["rater"], label))
    elif fmt == "json":
        for record in json.loads((out / "annotations.json").read_text(encoding="utf-8")):
            keys.add((record["photo"], record["rater"], record["tag"]))
    elif fmt == "parquet":
        import pyarrow.parquet as pq

        table = pq.read_table(out / "annotations.parquet").to_pydict()
        keys.update(zip(table["photo"], table["rater"], table["tag"], strict=True))
    elif fmt == "wide":
        with open(out / "annotations.csv", encoding="utf-8", newline="") as handle:
            for row in csv.DictReader(handle):
                for rater in ("rook", "wren"):
                    for label in filter(None, row[rater].split("|")):
                        keys.add((row["photo"], rater, label))
    elif fmt == "coco":
        document = json.loads((out / "boxes.json").read_text(encoding="utf-8"))
        names = {c["id"]: c["name"] for c in document["categories"]}
        for a in document["annotations"]:
            keys.add((a["image_id"], a["annotator"], names[a["category_id"]]))
    return keys


FORMATS = ("csv", "tsv", "jsonl", "json", "parquet", "pipe", "jsonlist", "wide", "coco")


@pytest.mark.parametrize("fmt", FORMATS)
def test_apply_writes_the_revised_annotations_in_the_input_format(tmp_path: Path, fmt: str):
    folder = make_dataset(tmp_path, fmt)
    before = digests(folder)
    session = decided(folder)
    result = apply_decisions(session, tmp_path / "out", clock=ticking())
    assert digests(folder) == before  # the inputs are never touched
    assert read_back_keys(tmp_path / "out", fmt) == expected_keys(STANDARD_MAP)
    manifest = result.manifest
    assert manifest["counts"]["annotations_in"] == 17
    assert manifest["counts"]["annotations_out"] == 15
    assert (
        manifest["counts"]["rows_in"] - manifest["counts"]["rows_dropped"]
        == (manifest["counts"]["rows_out"])
    )
    # our own loader agrees with the reference readers
    cfg = session.config.annotations
    columns = {
        "coco": None,
        "wide": {"item": "photo"},
    }.get(fmt, {"item": "photo", "annotator": "rater", "label": "tag"})
    frame, _ = load_annotations(
        tmp_path / "out" / cfg.path.name,
        layout=cfg.layout,
        columns=columns,
        annotator_columns=cfg.annotator_columns,
    )
    assert set(zip(frame["item"], frame["annotator"], frame["label"], strict=True)) == (
        expected_keys(STANDARD_MAP)
    )


def test_csv_keeps_every_other_column_and_the_original_row_on_a_merge(tmp_path: Path):
    folder = make_dataset(tmp_path, "csv")
    apply_decisions(decided(folder), tmp_path / "out")
    with open(tmp_path / "out" / "annotations.csv", encoding="utf-8", newline="") as handle:
        reader = csv.DictReader(handle)
        assert reader.fieldnames == ["photo", "rater", "tag", "confidence", "note"]
        rows = list(reader)
    original = {(r["photo"], r["rater"], r["tag"]): r for r in base_rows()}
    for row in rows:
        key = (row["photo"], row["rater"], row["tag"])
        if key in original:
            assert row == original[key]
    # wf02/rook had fireman (0.7) and firefighter (0.6, "same person twice"): the row that
    # already carried firefighter is the one kept.
    wf02 = [r for r in rows if r["photo"] == "wf02" and r["rater"] == "rook"]
    assert wf02 == [original[("wf02", "rook", FIREFIGHTER)]]
    renamed = [r for r in rows if r["photo"] == "wf07"]
    assert [(r["tag"], r["confidence"]) for r in renamed] == [(FIREFIGHTER, "0.8")] * 2
    assert any("two lines\nin one note" == r["note"] for r in rows)  # quoted line break kept


def test_jsonl_keeps_unchanged_lines_byte_for_byte(tmp_path: Path):
    folder = make_dataset(tmp_path, "jsonl")
    apply_decisions(decided(folder), tmp_path / "out")
    original = (folder / "annotations.jsonl").read_text(encoding="utf-8").splitlines()
    revised = (tmp_path / "out" / "annotations.jsonl").read_text(encoding="utf-8").splitlines()
    unchanged = [line for line in original if json.loads(line)["tag"] not in STANDARD_MAP]
    assert [line for line in revised if line in original] == unchanged
    for line in revised:
        assert isinstance(json.loads(line)["meta"]["n"], int)  # nested fields kept


def test_parquet_keeps_the_schema(tmp_path: Path):
    import pyarrow.parquet as pq

    folder = make_dataset(tmp_path, "parquet")
    apply_decisions(decided(folder), tmp_path / "out")
    before = pq.read_schema(folder / "annotations.parquet")
    after = pq.read_schema(tmp_path / "out" / "annotations.parquet")
    assert before.names == after.names
    assert [f.type for f in before] == [f.type for f in after]


def test_multi_label_cells_map_inside_the_cell_and_drop_duplicates(tmp_path: Path):
    folder = make_dataset(tmp_path, "pipe")
    apply_decisions(decided(folder), tmp_path / "out")
    with open(tmp_path / "out" / "annotations.csv", encoding="utf-8", newline="") as handle:
        cells = {(r["photo"], r["rater"]): r["tag"] for r in csv.DictReader(handle)}
    assert cells[("wf02", "rook")] == FIREFIGHTER  # was "fireman|firefighter"
    assert ("wf03", "rook") not in cells  # its only label was retired: the row goes


def test_wide_layout_blanks_a_retired_cell_and_keeps_the_row(tmp_path: Path):
    folder = make_dataset(tmp_path, "wide")
    result = apply_decisions(decided(folder), tmp_path / "out")
    with open(tmp_path / "out" / "annotations.csv", encoding="utf-8", newline="") as handle:
        rows = {r["photo"]: r for r in csv.DictReader(handle)}
    assert rows["wf03"]["rook"] == "" and rows["wf03"]["wren"] == "people/crew/deckhand"
    assert rows["wf02"]["rook"] == FIREFIGHTER
    assert all(r["season"] == "summer" for r in rows.values())
    assert result.manifest["dataset"]["annotation_format"] == "wide-csv"


def test_coco_merges_categories_and_keeps_every_box(tmp_path: Path):
    folder = make_dataset(tmp_path, "coco")
    apply_decisions(decided(folder), tmp_path / "out")
    document = json.loads((tmp_path / "out" / "boxes.json").read_text(encoding="utf-8"))
    names = [c["name"] for c in document["categories"]]
    assert FIREMAN not in names and LAZY not in names and PRETTY not in names
    assert names.count(FIREFIGHTER) == 1
    assert len(document["annotations"]) == 16  # 17 boxes, one retired; merged boxes stay
    assert document["info"] == {"description": "invented test set"}


def test_mapping_csv_and_manifest(tmp_path: Path):
    folder = make_dataset(tmp_path, "csv")
    session = decided(folder)
    result = apply_decisions(session, tmp_path / "out", clock=ticking())
    out = tmp_path / "out"
    with open(out / "mapping.csv", encoding="utf-8", newline="") as handle:
        reader = csv.DictReader(handle)
        assert tuple(reader.fieldnames or ()) == MAPPING_COLUMNS
        rows = {r["old_label"]: r for r in reader}
    assert rows[FIREMAN] == {
        "old_label": FIREMAN,
        "action": "rename",
        "new_label": FIREFIGHTER,
        "annotations_before": "3",
        "annotations_after": "2",
        "decision_seq": "1",
        "result": "merge",
        "via": f"seq 1: '{FIREMAN}' renamed to '{FIREFIGHTER}'",
    }
    assert (rows[LAZY]["action"], rows[LAZY]["new_label"], rows[LAZY]["result"]) == (
        "retire",
        "",
        "drop",
    )
    assert rows[NURSE]["action"] == "accept" and rows[NURSE]["result"] == "keep"
    assert rows["boats/ferry"]["action"] == "open"
    assert sum(int(r["annotations_after"]) for r in rows.values()) == 15

    manifest = json.loads((out / "manifest.json").read_text(encoding="utf-8"))
    assert manifest == result.manifest
    for output in manifest["outputs"]:
        data = (out / output["file"]).read_bytes()
        assert output["sha256"] == "sha256:" + hashlib.sha256(data).hexdigest()
    for item in manifest["inputs"]:
        data = Path(item["path"]).read_bytes()
        assert item["sha256"] == "sha256:" + hashlib.sha256(data).hexdigest()
    verification = session.log.verify()
    assert manifest["log"]["head"] == verification.head
    assert manifest["log"]["verified"] is True
    assert manifest["lexicon_hash"] == session.lexicon_hash
    assert manifest["gate"] == {
        "fail_on": "medium",
        "allow_unresolved": False,
        "unresolved": 0,
        "unresolved_labels": [],
    }
    counts = manifest["counts"]
    assert (counts["renamed"], counts["merged"], counts["retired"], counts["accepted"]) == (
        0,
        2,
        1,
        1,
    )
    assert (counts["rows_in"], counts["rows_out"], counts["rows_dropped"]) == (17, 15, 2)
    assert counts["taxonomy_labels_in"] == 14 and counts["taxonomy_labels_out"] == 11
    assert datetime.fromisoformat(manifest["time"].replace("Z", "+00:00")).tzinfo is not None
    assert manifest["tool"]["name"] == "labelreview"


def test_csv_taxonomy_follows_a_renamed_parent(tmp_path: Path):
    folder = make_dataset(tmp_path, "csv")
    requests = (
        *STANDARD,
        DecisionRequest(
            "people/crew", "rename", "a neutral heading word", new_label="people/staff"
        ),
    )
    result = apply_decisions(decided(folder, requests), tmp_path / "out")
    with open(tmp_path / "out" / "taxonomy.csv", encoding="utf-8", newline="") as handle:
        rows = {r["id"]: r for r in csv.DictReader(handle)}
    assert rows["t05"]["name"] == "people/staff"
    assert (rows["t08"]["name"], rows["t08"]["parent"]) == ("people/staff/deckhand", "t05")
    assert rows["t07"]["name"] == "people/staff/firefighter"
    assert "t06" not in rows  # fireman merged into firefighter, which moved too
    assert rows["t08"]["description"] == "Deck crew at work."
    names = {t.name for t in load_taxonomy(tmp_path / "out" / "taxonomy.csv")}
    assert "people/staff/deckhand" in names and "people/crew" not in names
    mapping = result.plan.mapping
    assert mapping["people/crew/deckhand"].action == "follow_parent"
    assert mapping[FIREMAN].new_label == "people/staff/firefighter"


def yaml_paths(node: Any, prefix: str, paths: set[str]) -> None:
    """Every node of a YAML taxonomy tree as a path (read with PyYAML, not our loader)."""
    for key, value in (node or {}).items():
        paths.add(f"{prefix}{key}")
        if isinstance(value, dict):
            yaml_paths(value, f"{prefix}{key}/", paths)


def test_text_and_yaml_taxonomies(tmp_path: Path):
    for fmt in ("text", "yaml"):
        base = tmp_path / fmt
        base.mkdir()
        folder = make_dataset(base, "csv")
        names = [t.name for t in load_taxonomy(FERRY / "taxonomy.csv")]
        if fmt == "text":
            (folder / "taxonomy.txt").write_text(
                "# ferry tags\n" + "\n".join(names) + "\n", encoding="utf-8"
            )
        else:
            tree: dict[str, Any] = {}
            for name in names:
                node = tree
                for part in name.split("/"):
                    node = node.setdefault(part, {})
            (folder / "taxonomy.yaml").write_text(yaml.safe_dump(tree), encoding="utf-8")
        config = (folder / "labelreview.yaml").read_text(encoding="utf-8")
        ending = "txt" if fmt == "text" else "yaml"
        (folder / "labelreview.yaml").write_text(
            config.replace("path: taxonomy.csv", f"path: taxonomy.{ending}"), encoding="utf-8"
        )
        (folder / "taxonomy.csv").unlink()
        requests = (
            *STANDARD,
            DecisionRequest(
                "people/crew", "rename", "a neutral heading word", new_label="people/staff"
            ),
        )
        apply_decisions(decided(folder, requests), tmp_path / fmt / "out")
        revised = tmp_path / fmt / "out" / f"taxonomy.{ending}"
        if fmt == "text":
            lines = revised.read_text(encoding="utf-8").splitlines()
            assert lines[0] == "# ferry tags"  # comments kept
            paths = set(lines[1:])
        else:
            paths = set()
            yaml_paths(yaml.safe_load(revised.read_text(encoding="utf-8")), "", paths)
        assert "people/staff/deckhand" in paths and "people/staff/firefighter" in paths
        assert not {FIREMAN, LAZY, PRETTY, "people/crew"} & paths
        assert "boats/dinghy" in paths


# -- refusals ---------------------------------------------------------------------------------


def test_unresolved_flags_refuse_naming_how_many_and_which(tmp_path: Path):
    folder = make_dataset(tmp_path, "csv")
    session = decided(folder, STANDARD[:1])  # only fireman decided
    with pytest.raises(
        ApplyRefusedError,
        match=r"3 flag\(s\) at or above 'low' are still undecided: "
        rf"'{LAZY}' \(high\), '{PRETTY}' \(medium\), '{NURSE}' \(medium\)",
    ):
        apply_decisions(session, tmp_path / "out", fail_on="low")
    assert not (tmp_path / "out").exists()
    # at 'high' only lazy_worker blocks
    with pytest.raises(ApplyRefusedError, match=r"^1 flag\(s\) at or above 'high'"):
        plan_apply(session, fail_on="high")


def test_allow_unresolved_is_recorded(tmp_path: Path):
    folder = make_dataset(tmp_path, "csv")
    session = open_session(folder)
    result = apply_decisions(session, tmp_path / "out", allow_unresolved=True)
    gate = result.manifest["gate"]
    assert gate["allow_unresolved"] is True and gate["unresolved"] == 3
    assert gate["unresolved_labels"] == [LAZY, PRETTY, NURSE]
    assert any("--allow-unresolved" in n for n in result.manifest["notes"])
    # with no decisions, every annotation is kept as it was
    assert (tmp_path / "out" / "annotations.csv").read_bytes() == (
        folder / "annotations.csv"
    ).read_bytes()


def test_a_log_that_does_not_verify_refuses(tmp_path: Path):
    folder = make_dataset(tmp_path, "csv")
    session = decided(folder)
    log = session.config.log_path
    log.write_bytes(log.read_bytes().replace(b"neutral job word", b"neutral job wOrd"))
    with pytest.raises(ApplyRefusedError, match="does not verify"):
        apply_decisions(open_session(folder), tmp_path / "out")
    assert not (tmp_path / "out").exists()


def test_out_dir_rules(tmp_path: Path):
    folder = make_dataset(tmp_path, "csv")
    session = decided(folder)
    with pytest.raises(OutputError, match="the dataset folder itself"):
        apply_decisions(session, folder)
    foreign = tmp_path / "foreign"
    foreign.mkdir()
    (foreign / "notes.txt").write_text("mine", encoding="utf-8")
    with pytest.raises(OutputError, match=r"not empty \(notes.txt\)"):
        apply_decisions(session, foreign, force=True)
    assert (foreign / "notes.txt").read_text(encoding="utf-8") == "mine"
    sub = folder / "revised"  # a subfolder of the dataset is allowed
    apply_decisions(session, sub)
    with pytest.raises(OutputError, match="earlier apply"):
        apply_decisions(session, sub)
    apply_decisions(session, sub, force=True)
    (sub / "mine.csv").write_text("x\n", encoding="utf-8")
    with pytest.raises(OutputError, match="'mine.csv', which the earlier apply did not write"):
        apply_decisions(session, sub, force=True)
    (sub / "mine.csv").unlink()
    with open(sub / "mapping.csv", "a", encoding="utf-8") as handle:
        handle.write("edited by hand\n")
    with pytest.raises(OutputError, match="'mapping.csv' was changed since"):
        apply_decisions(session, sub, force=True)
    assert (sub / "mapping.csv").read_text(encoding="utf-8").endswith("edited by hand\n")


def test_out_dir_holding_an_input_is_refused(tmp_path: Path):
    folder = make_dataset(tmp_path, "csv")
    shared = tmp_path / "shared"
    shared.mkdir()
    shutil.move(folder / "taxonomy.csv", shared / "taxonomy.csv")
    config = (folder / "labelreview.yaml").read_text(encoding="utf-8")
    (folder / "labelreview.yaml").write_text(
        config.replace("path: taxonomy.csv", f"path: {shared / 'taxonomy.csv'}"), encoding="utf-8"
    )
    with pytest.raises(OutputError, match=r"holds the dataset's taxonomy file \(taxonomy.csv\)"):
        apply_decisions(decided(folder), shared)


def test_no_temporary_files_are_left(tmp_path: Path):
    folder = make_dataset(tmp_path, "csv")
    apply_decisions(decided(folder), tmp_path / "out")
    assert sorted(p.name for p in (tmp_path / "out").iterdir()) == [
        "annotations.csv",
        "manifest.json",
        "mapping.csv",
        "taxonomy.csv",
    ]


def test_mapping_csv_is_plain_rfc4180(tmp_path: Path):
    folder = make_dataset(tmp_path, "csv")
    apply_decisions(decided(folder), tmp_path / "out")
    text = (tmp_path / "out" / "mapping.csv").read_text(encoding="utf-8")
    rows = list(csv.reader(io.StringIO(text)))
    assert all(len(r) == len(MAPPING_COLUMNS) for r in rows)


def test_encoding_line_endings_and_byte_order_mark_are_kept(tmp_path: Path):
    folder = make_dataset(tmp_path, "csv")
    text = (folder / "annotations.csv").read_text(encoding="utf-8")
    text = text.replace("same person twice", "même personne")  # a latin-1 character
    (folder / "annotations.csv").write_bytes(text.replace("\n", "\r\n").encode("latin-1"))
    config = (folder / "labelreview.yaml").read_text(encoding="utf-8")
    (folder / "labelreview.yaml").write_text(
        config.replace('  multi_label_separator: "|"\n', '  multi_label_separator: "|"\n'
                       "  encoding: latin-1\n"),
        encoding="utf-8",
    )  # fmt: skip
    taxonomy = (folder / "taxonomy.csv").read_bytes()
    (folder / "taxonomy.csv").write_bytes(b"\xef\xbb\xbf" + taxonomy)
    apply_decisions(decided(folder), tmp_path / "out")
    raw = (tmp_path / "out" / "annotations.csv").read_bytes()
    assert raw.count(b"\r\n") == raw.count(b"\n")  # every record ends in CRLF, as the input
    assert "même personne" in raw.decode("latin-1")
    with pytest.raises(UnicodeDecodeError):
        raw.decode("utf-8")
    assert (tmp_path / "out" / "taxonomy.csv").read_bytes().startswith(b"\xef\xbb\xbf")


def test_a_new_name_the_encoding_cannot_hold_is_refused(tmp_path: Path):
    folder = make_dataset(tmp_path, "csv")
    text = (folder / "annotations.csv").read_text(encoding="utf-8")
    (folder / "annotations.csv").write_bytes(text.encode("latin-1"))
    config = (folder / "labelreview.yaml").read_text(encoding="utf-8")
    (folder / "labelreview.yaml").write_text(
        config.replace("  layout: long\n", "  layout: long\n  encoding: latin-1\n"),
        encoding="utf-8",
    )
    requests = (
        DecisionRequest(FIREMAN, "rename", "neutral job word", new_label="people/crew/火"),
        *STANDARD[1:],
    )
    with pytest.raises(OutputError, match="cannot be written in the input's encoding latin-1"):
        apply_decisions(decided(folder, requests), tmp_path / "out")
    assert not (tmp_path / "out" / "annotations.csv").exists()


def test_annotations_without_a_taxonomy(tmp_path: Path):
    folder = make_dataset(tmp_path, "csv")
    (folder / "taxonomy.csv").unlink()
    config = (folder / "labelreview.yaml").read_text(encoding="utf-8")
    (folder / "labelreview.yaml").write_text(
        config.replace("taxonomy:\n  path: taxonomy.csv\n", ""), encoding="utf-8"
    )
    result = apply_decisions(decided(folder), tmp_path / "out")
    assert set(result.files) == {"annotations", "mapping", "manifest"}
    assert read_back_keys(tmp_path / "out", "csv") == expected_keys(STANDARD_MAP)


def test_taxonomy_without_annotations(tmp_path: Path):
    folder = make_dataset(tmp_path, "csv")
    (folder / "annotations.csv").unlink()
    config = (folder / "labelreview.yaml").read_text(encoding="utf-8")
    start = config.index("annotations:")
    end = config.index("taxonomy:")
    (folder / "labelreview.yaml").write_text(config[:start] + config[end:], encoding="utf-8")
    result = apply_decisions(decided(folder), tmp_path / "out")
    assert set(result.files) == {"taxonomy", "mapping", "manifest"}
    names = {t.name for t in load_taxonomy(tmp_path / "out" / "taxonomy.csv")}
    assert FIREMAN not in names and LAZY not in names and FIREFIGHTER in names
    assert result.manifest["counts"]["annotations_in"] == 0
