"""Loaders: annotation files, taxonomies, item tables (labelreview.io).

Fixtures live in tests/data/io/, each named for what it tests. Data in them is invented (a
harbour photo archive); the format checks are against published descriptions cited beside them.
"""

from __future__ import annotations

import hashlib
import warnings
from pathlib import Path

import pandas as pd
import pytest

from labelreview.config import AttributeConfig
from labelreview.errors import ConfigError, LabelReviewError, LoadError, UsageError
from labelreview.io import (
    DuplicateRowsWarning,
    detect_format,
    load_annotations,
    load_items,
    load_taxonomy,
)
from labelreview.model import ANNOTATION_COLUMNS, TaxonomyLabel

DATA = Path(__file__).resolve().parents[1] / "data" / "io"


def rows(frame: pd.DataFrame) -> list[tuple[str, str, str]]:
    return [tuple(r) for r in frame[list(ANNOTATION_COLUMNS)].itertuples(index=False)]


def assert_annotation_frame(frame: pd.DataFrame) -> None:
    assert list(frame.columns) == list(ANNOTATION_COLUMNS)
    for name in ANNOTATION_COLUMNS:
        assert pd.api.types.is_string_dtype(frame[name].dtype)
        assert not frame[name].isna().any()
        assert all(isinstance(v, str) for v in frame[name])


def load_quiet(path: Path, **kwargs: object):  # type: ignore[no-untyped-def]
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # no warning expected unless the test says so
        return load_annotations(path, **kwargs)  # type: ignore[arg-type]


# -- long format, encodings, CSV dialect ---------------------------------------------------


def test_bom_is_stripped_from_the_first_column_name() -> None:
    frame, report = load_quiet(DATA / "bom.csv")
    assert_annotation_frame(frame)
    assert rows(frame) == [("p1", "ann1", "harbour"), ("p2", "ann1", "crane")]
    assert report.format == "csv"
    assert report.column_map == {"item": "item", "annotator": "annotator", "label": "label"}


def test_latin1_file_without_encoding_names_byte_line_and_column() -> None:
    with pytest.raises(
        LoadError,
        match=r"^.*latin1\.csv line 3, column 10: the file is not "
        r"valid UTF-8 \(byte 0xe9 at line 3, column 10\)\. Pass --encoding "
        r"latin-1 \(or the file's encoding\)",
    ) as info:
        load_annotations(DATA / "latin1.csv")
    assert (info.value.line, info.value.column) == (3, 10)
    assert info.value.source == str(DATA / "latin1.csv")


def test_latin1_file_with_encoding_loads_and_detects_columns() -> None:
    frame, report = load_quiet(DATA / "latin1.csv", encoding="latin-1")
    assert rows(frame) == [("p1", "v1", "quay"), ("p2", "v2", "café terrace")]
    assert report.column_map == {"item": "photo_id", "annotator": "volunteer", "label": "tag"}


def test_unknown_encoding_is_a_usage_error() -> None:
    with pytest.raises(UsageError, match="unknown text encoding 'latin-99'"):
        load_annotations(DATA / "bom.csv", encoding="latin-99")


def test_rfc4180_quoted_fields() -> None:
    # RFC 4180, section 2, rules 5-7: fields may be enclosed in double quotes; quoted fields may
    # contain commas and line breaks (CRLF); a double quote inside is escaped by doubling it.
    # The file also uses CRLF record ends (rule 1).
    frame, _ = load_quiet(DATA / "rfc4180.csv")
    assert rows(frame) == [
        ("p1", "a1", "boat, small"),
        ("p2", "a1", "rope\r\ncoil"),
        ("p3", "a2", 'the "blue" hull'),
    ]


def test_tsv_keeps_commas_inside_labels() -> None:
    frame, report = load_quiet(DATA / "annotations.tsv")
    assert rows(frame) == [("p1", "a1", "boat, small")]
    assert report.format == "tsv"


def test_malformed_row_names_its_line_and_cites_rfc4180() -> None:
    with pytest.raises(
        LoadError,
        match=r"malformed\.csv line 4: this row has 4 fields but the "
        r"header has 3\. .*RFC 4180, section 2",
    ) as info:
        load_annotations(DATA / "malformed.csv")
    assert info.value.line == 4


def test_bad_json_line_names_line_and_column() -> None:
    with pytest.raises(
        LoadError,
        match=r"bad_line\.jsonl line 2, column 44: not valid JSON: "
        r"Unterminated string",
    ) as info:
        load_annotations(DATA / "bad_line.jsonl")
    assert (info.value.line, info.value.column) == (2, 44)


def test_empty_file() -> None:
    with pytest.raises(LoadError, match=r"empty\.csv: the file is empty$"):
        load_annotations(DATA / "empty.csv")


def test_header_only_file_gives_an_empty_frame_and_a_note() -> None:
    frame, report = load_quiet(DATA / "header_only.csv")
    assert_annotation_frame(frame)
    assert len(frame) == 0
    assert report.notes == ("the file has a header but no rows",)


def test_missing_file() -> None:
    with pytest.raises(LoadError, match=r"nope\.csv: the file does not exist"):
        load_annotations(DATA / "nope.csv")


def test_unknown_extension_lists_supported_formats() -> None:
    with pytest.raises(
        LoadError,
        match=r"notes\.xlsx: cannot tell the file's format from its "
        r"name ending '\.xlsx'; supported: \.csv, \.tsv, \.tab, \.jsonl, "
        r"\.ndjson, \.json, \.parquet, \.pq\. Rename the file, or set "
        r"annotations\.format in labelreview\.yaml\.",
    ):
        load_annotations(DATA / "notes.xlsx")


def test_unknown_format_value_is_a_usage_error() -> None:
    with pytest.raises(UsageError, match="unknown annotation format 'excel'"):
        load_annotations(DATA / "bom.csv", fmt="excel")


def test_long_field_names_line_and_column() -> None:
    with pytest.raises(
        LoadError,
        match=r"long_field\.csv line 3, column 'label': a value in "
        r"column 'label' is 10,001 characters long \(more than 10,000\)",
    ) as info:
        load_annotations(DATA / "long_field.csv")
    assert (info.value.line, info.value.column) == (3, "label")


def test_long_field_line_counts_quoted_line_breaks(tmp_path: Path) -> None:
    path = tmp_path / "a.csv"
    path.write_text('item,annotator,label\np1,a,"two\nlines"\np2,a,' + "y" * 10_001 + "\n")
    with pytest.raises(LoadError) as info:
        load_annotations(path)
    assert info.value.line == 4  # record 2 starts on line 4 because record 1 spans lines 2-3


# -- column detection ----------------------------------------------------------------------


def test_ambiguous_columns_are_named_with_the_key_to_set() -> None:
    with pytest.raises(
        LoadError,
        match=r"ambiguous_columns\.csv line 1: columns 'image_id', "
        r"'id' could each be the item column\. Set annotations\.columns\.item in "
        r"labelreview\.yaml to the one to use\.",
    ):
        load_annotations(DATA / "ambiguous_columns.csv")


def test_ambiguity_resolved_by_configuring_the_column() -> None:
    frame, report = load_quiet(DATA / "ambiguous_columns.csv", columns={"item": "image_id"})
    assert rows(frame) == [("1", "r1", "boat")]
    assert report.column_map == {"item": "image_id", "annotator": "rater", "label": "label"}


def test_no_label_column_lists_the_columns_found() -> None:
    with pytest.raises(
        LoadError,
        match=r"no column looks like the label column; columns found: "
        r"'item', 'annotator', 'notes'\. Set annotations\.columns\.label",
    ):
        load_annotations(DATA / "no_label_column.csv")


def test_configured_column_missing() -> None:
    with pytest.raises(
        LoadError,
        match=r"column 'tagz' \(set as annotations\.columns\.label\) "
        r"is not in the file; columns found: 'item', 'annotator', 'label'",
    ):
        load_annotations(DATA / "bom.csv", columns={"label": "tagz"})


def test_exact_role_name_wins_over_other_candidates(tmp_path: Path) -> None:
    path = tmp_path / "a.csv"
    path.write_text("item,image_id,Annotator ID,label,Tags\np1,9,a,boat,x\n")
    frame, report = load_quiet(path)
    assert report.column_map == {"item": "item", "annotator": "Annotator ID", "label": "label"}
    assert rows(frame) == [("p1", "a", "boat")]


# -- multi-label cells, duplicates, empties ---------------------------------------------------


def test_pipe_separated_cells_are_exploded_and_stripped() -> None:
    frame, report = load_quiet(DATA / "multilabel_pipe.csv")
    assert rows(frame) == [
        ("p1", "ann1", "boat"),
        ("p1", "ann1", "harbour"),
        ("p1", "ann1", "rope"),
        ("p2", "ann2", "dock"),
    ]
    assert report.empty_labels_dropped == 2  # "| " is two empty labels
    assert "2 multi-label cell(s) split into one row per label" in report.notes


def test_separator_none_keeps_cells_whole() -> None:
    frame, _ = load_quiet(DATA / "multilabel_pipe.csv", multi_label_separator=None)
    assert ("p1", "ann1", "boat|harbour| rope") in rows(frame)


def test_json_list_cells_and_real_lists_are_exploded() -> None:
    frame, report = load_quiet(DATA / "multilabel_json.jsonl")
    assert rows(frame) == [
        ("p1", "ann1", "boat"),
        ("p1", "ann1", "net"),
        ("p2", "ann1", "quay"),
        ("p2", "ann1", "gull"),
        ("3", "ann2", "[blank]"),  # not a JSON list: kept as the literal label
    ]
    assert report.format == "jsonl"
    assert report.column_map["label"] == "labels"


def test_duplicates_are_counted_dropped_and_warned() -> None:
    with pytest.warns(
        DuplicateRowsWarning,
        match=r"duplicates\.csv: dropped 2 duplicate "
        r"\(item, annotator, label\) row\(s\); each is counted once",
    ):
        frame, report = load_annotations(DATA / "duplicates.csv")
    assert rows(frame) == [("p1", "ann1", "boat"), ("p1", "ann2", "boat")]
    assert report.duplicates_dropped == 2  # " boat" equals "boat" once stripped
    assert report.empty_labels_dropped == 1
    assert report.rows_read == 5


def test_row_without_item_is_refused_with_its_line(tmp_path: Path) -> None:
    path = tmp_path / "a.csv"
    path.write_text("item,annotator,label\np1,a,boat\n,a,dock\n")
    with pytest.raises(LoadError, match=r"a\.csv line 3, column 'item': a row has no item"):
        load_annotations(path)


# -- wide layout ---------------------------------------------------------------------------


def test_wide_layout_uses_column_names_as_annotators() -> None:
    frame, report = load_quiet(DATA / "wide.csv", layout="wide")
    assert rows(frame) == [
        ("p1", "ana", "boat"),
        ("p1", "ben", "boat"),
        ("p1", "cleo", "ship"),
        ("p2", "ana", "crane"),
        ("p2", "cleo", "crane"),
        ("p2", "cleo", "dock"),
    ]
    assert report.format == "wide-csv"
    assert report.empty_labels_dropped == 4


def test_wide_layout_with_listed_annotator_columns() -> None:
    frame, _ = load_quiet(DATA / "wide.csv", layout="wide", annotator_columns=["ben"])
    assert rows(frame) == [("p1", "ben", "boat")]


def test_wide_layout_refuses_label_column_setting() -> None:
    with pytest.raises(
        ConfigError,
        match=r"annotations\.columns\.label does not apply to the "
        r"wide layout",
    ):
        load_annotations(DATA / "wide.csv", layout="wide", columns={"label": "ana"})


def test_annotator_columns_need_wide_layout() -> None:
    with pytest.raises(ConfigError, match="applies only to the wide layout"):
        load_annotations(DATA / "bom.csv", annotator_columns=["x"])


# -- Parquet -------------------------------------------------------------------------------


def test_parquet_with_integer_ids_and_list_labels(tmp_path: Path) -> None:
    path = tmp_path / "ann.parquet"
    pd.DataFrame(
        {"image_id": [1, 2], "worker_id": ["w1", "w2"], "tags": [["boat", "dock"], ["gull"]]}
    ).to_parquet(path)
    frame, report = load_quiet(path)
    assert rows(frame) == [("1", "w1", "boat"), ("1", "w1", "dock"), ("2", "w2", "gull")]
    assert report.format == "parquet"


def test_not_parquet(tmp_path: Path) -> None:
    path = tmp_path / "x.parquet"
    path.write_text("item,annotator,label\n")
    with pytest.raises(LoadError, match=r"x\.parquet: not a readable Parquet file"):
        load_annotations(path)


# -- COCO ------------------------------------------------------------------------------------


def test_coco_small_matches_the_published_layout() -> None:
    # coco_small.json is written by hand from the COCO "Data format" description
    # (cocodataset.org, object detection section), from memory: top-level "info", "licenses",
    # "images" (id, width, height, file_name), "annotations" (id, image_id, category_id,
    # segmentation, area, bbox [x, y, width, height], iscrowd) and "categories"
    # (id, name, supercategory). Two "boat" boxes on image 101 are one label; image 103 has none.
    assert detect_format(DATA / "coco_small.json") == "coco"
    frame, report = load_quiet(DATA / "coco_small.json")
    assert rows(frame) == [
        ("101", "coco", "boat"),
        ("101", "coco", "person"),
        ("102", "coco", "crane"),
    ]
    assert report.format == "coco"
    assert report.rows_read == 4
    assert report.duplicates_dropped == 1
    assert "1 image(s) have no annotations" in report.notes


def test_coco_annotator_fields() -> None:
    frame, report = load_quiet(DATA / "coco_annotators.json")
    assert rows(frame) == [("7", "42", "gull"), ("7", "mara", "gull")]
    assert report.column_map["annotator"] == "annotator/user_id"


def test_coco_unknown_category() -> None:
    with pytest.raises(
        LoadError,
        match=r"coco_bad_category\.json: annotations\[0\] \(id 9\) has "
        r"category_id 77, which is not among the categories",
    ):
        load_annotations(DATA / "coco_bad_category.json")


def test_json_list_of_records_and_json_lines_in_a_json_file(tmp_path: Path) -> None:
    records = tmp_path / "a.json"
    records.write_text('[{"item": "p1", "annotator": "a", "label": "boat"}]')
    lines = tmp_path / "b.json"
    lines.write_text(
        '{"item": "p1", "annotator": "a", "label": "boat"}\n'
        '{"item": "p2", "annotator": "a", "label": "dock"}\n'
    )
    assert (detect_format(records), detect_format(lines)) == ("json", "jsonl")
    assert rows(load_quiet(records)[0]) == [("p1", "a", "boat")]
    assert len(load_quiet(lines)[0]) == 2


def test_input_files_are_never_modified() -> None:
    before = {p.name: hashlib.sha256(p.read_bytes()).hexdigest() for p in DATA.iterdir()}
    for path in DATA.iterdir():
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                if path.name.startswith("taxonomy"):
                    load_taxonomy(path)
                else:
                    load_annotations(path)
        except LabelReviewError:
            pass
    after = {p.name: hashlib.sha256(p.read_bytes()).hexdigest() for p in DATA.iterdir()}
    assert before == after


# -- taxonomy ------------------------------------------------------------------------------


def test_taxonomy_text() -> None:
    labels = load_taxonomy(DATA / "taxonomy.txt")
    assert labels == [
        TaxonomyLabel("vessels"),
        TaxonomyLabel("vessels/boat", parent="vessels"),
        TaxonomyLabel("vessels/ship", parent="vessels"),  # " vessels / ship " cleaned
        TaxonomyLabel("dockside/crane", parent="dockside"),
    ]  # comment, blank lines and the repeated "vessels/boat" are skipped


def test_taxonomy_csv_parents_by_id_or_name() -> None:
    labels = load_taxonomy(DATA / "taxonomy.csv")
    assert [(t.name, t.id, t.parent) for t in labels] == [
        ("vessels", "1", None),
        ("vessels/boat", "2", "vessels"),
        ("vessels/boat/dinghy", "3", "vessels/boat"),  # parent given by name
        ("dockside", "4", None),
        ("dockside/crane", "5", "dockside"),
    ]
    assert labels[4].description == "Lifts cargo, mostly"  # RFC 4180 quoted comma


def test_taxonomy_yaml_tree() -> None:
    labels = load_taxonomy(DATA / "taxonomy_tree.yaml")
    assert [t.name for t in labels] == [
        "vessels",
        "vessels/boat",
        "vessels/ship",
        "vessels/ship/ferry",
        "vessels/ship/tanker",
        "dockside",
        "dockside/crane",
        "dockside/bollard",
        "weather",
        "weather/fog",
        "weather/rain",
    ]
    assert labels[6] == TaxonomyLabel(
        "dockside/crane", parent="dockside", description="Lifts cargo"
    )


def test_taxonomy_errors() -> None:
    with pytest.raises(
        LoadError,
        match=r"taxonomy_bad_parent\.csv line 3, column 'parent': "
        r"parent '9' is neither an id nor a name in this taxonomy",
    ):
        load_taxonomy(DATA / "taxonomy_bad_parent.csv")
    with pytest.raises(LoadError, match=r"line 2, column 'parent': 'a' is its own ancestor"):
        load_taxonomy(DATA / "taxonomy_loop.csv")
    with pytest.raises(
        LoadError,
        match=r"taxonomy_bad\.yaml line 2, column 5: a list inside a "
        r"list has no name",
    ):
        load_taxonomy(DATA / "taxonomy_bad.yaml")
    with pytest.raises(
        LoadError,
        match=r"cannot tell the file's format from its name ending "
        r"'\.json'; supported: \.txt, \.text, \.lst, \.csv, \.tsv, \.tab, \.yaml, "
        r"\.yml",
    ):
        load_taxonomy(DATA / "coco_small.json")


def test_taxonomy_text_empty_path_part(tmp_path: Path) -> None:
    path = tmp_path / "t.txt"
    path.write_text("boats\nboats//dinghy\n")
    with pytest.raises(
        LoadError,
        match=r"t\.txt line 2: the label 'boats//dinghy' has an empty "
        r"part between slashes",
    ):
        load_taxonomy(path)


def test_taxonomy_only_comments(tmp_path: Path) -> None:
    path = tmp_path / "t.txt"
    path.write_text("# nothing yet\n")
    with pytest.raises(LoadError, match="the taxonomy holds no labels"):
        load_taxonomy(path)


# -- items ---------------------------------------------------------------------------------


def test_items_keep_only_consented_self_reported_attributes() -> None:
    attributes = [AttributeConfig(column="age_band", consented=True, self_reported=True)]
    items = load_items(DATA / "items.csv", columns=None, attributes=attributes)
    assert list(items.columns) == ["item", "text", "preview", "age_band"]  # "region" not read
    assert items.to_dict("records") == [
        {"item": "p1", "text": "A boat at dawn", "preview": "p1.jpg", "age_band": "30-39"},
        {"item": "p2", "text": "Cranes at dusk", "preview": "p2.jpg", "age_band": ""},
    ]


@pytest.mark.parametrize(
    ("consented", "self_reported", "missing"),
    [
        (False, True, "consented: true"),
        (True, False, "self_reported: true"),
        (False, False, "consented: true and self_reported: true"),
    ],
)
def test_items_refuse_unconsented_attributes(
    consented: bool, self_reported: bool, missing: str
) -> None:
    attributes = [AttributeConfig("region", consented=consented, self_reported=self_reported)]
    with pytest.raises(
        ConfigError,
        match=rf"attribute column 'region' is not marked {missing}; "
        r"labelreview never uses attributes without consent and never infers "
        r"them",
    ):
        load_items(DATA / "items.csv", columns=None, attributes=attributes)


def test_items_duplicate_ids() -> None:
    with pytest.raises(
        LoadError,
        match=r"items_duplicate\.csv line 4, column 'photo_id': item "
        r"'p1' is listed twice \(first on line 2\)",
    ):
        load_items(DATA / "items_duplicate.csv", columns=None, attributes=())


def test_items_configured_columns() -> None:
    items = load_items(
        DATA / "items.csv", columns={"item": "photo_id", "text": "region"}, attributes=()
    )
    assert list(items.columns) == ["item", "text", "preview"]
    assert items["text"].tolist() == ["north", "south"]


def test_row_without_annotator_is_refused(tmp_path: Path) -> None:
    path = tmp_path / "a.tsv"
    path.write_text("item\tannotator\tlabel\np1\t\tboat\n")
    with pytest.raises(
        LoadError,
        match=r"a\.tsv line 2, column 'annotator': a row has no "
        r"annotator",
    ):
        load_annotations(path)


def test_tsv_row_with_extra_field_mentions_tabs(tmp_path: Path) -> None:
    path = tmp_path / "a.tsv"
    path.write_text("item\tannotator\tlabel\np1\ta\tboat\tx\n")
    with pytest.raises(
        LoadError,
        match=r"line 2: this row has 4 fields but the header has 3\. A "
        r"field containing a tab",
    ):
        load_annotations(path)


def test_float_ids_with_gaps_become_whole_number_text(tmp_path: Path) -> None:
    path = tmp_path / "a.parquet"
    pd.DataFrame(
        {"item": [1.0, None, 3.0], "annotator": ["a", "a", "b"], "label": ["boat", "dock", "net"]}
    ).to_parquet(path)
    with pytest.raises(LoadError, match="a row has no item"):
        load_annotations(path)
    pd.DataFrame(
        {"item": [1.0, 3.0], "annotator": ["a", "b"], "label": ["boat", "net"]}
    ).to_parquet(path)
    frame, _ = load_quiet(path)
    assert rows(frame) == [("1", "a", "boat"), ("3", "b", "net")]


def test_duplicate_rows_warning_is_a_user_warning() -> None:
    assert issubclass(DuplicateRowsWarning, UserWarning)
