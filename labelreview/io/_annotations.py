"""Annotation files -> the annotation frame (``item``, ``annotator``, ``label``; all strings).

One entry point, :func:`load_annotations`, reads the long layout (one row per item x annotator,
from CSV, TSV, JSON Lines, a JSON list or Parquet), the wide layout (one row per item, one column
per annotator) and COCO-style object-detection JSON, and always returns the same frame: multi-label
cells split into one row each, labels stripped, empty labels and exact duplicates dropped and
counted in the :class:`~labelreview.model.LoadReport`.

Column roles are detected from common header names unless the dataset config names them; a
detection that finds nothing, or two equally good candidates, is an error that lists the columns
found and the config key to set, never a guess.
"""

from __future__ import annotations

import json
import re
import warnings
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from labelreview.errors import ConfigError, LoadError, UsageError
from labelreview.io._common import (
    TABLE_EXTENSIONS,
    Table,
    as_text,
    check_encoding,
    check_long_fields,
    decode,
    json_kind,
    load_json_document,
    read_bytes,
    read_table,
    text_value,
    unknown_extension,
)
from labelreview.model import ANNOTATION_COLUMNS, LoadReport

ANNOTATION_FORMATS: tuple[str, ...] = ("auto", "csv", "tsv", "jsonl", "json", "parquet", "coco")
LAYOUTS: tuple[str, ...] = ("long", "wide")

ROLE_CANDIDATES: dict[str, tuple[str, ...]] = {
    "item": (
        "item",
        "item_id",
        "image_id",
        "photo_id",
        "id",
        "file",
        "filename",
        "file_name",
        "image",
        "image_name",
        "img_id",
        "example_id",
        "sample_id",
        "record_id",
        "doc_id",
        "document_id",
        "text_id",
        "media_id",
        "asset_id",
        "clip_id",
        "video_id",
    ),
    "annotator": (
        "annotator",
        "annotator_id",
        "annotator_name",
        "rater",
        "rater_id",
        "coder",
        "coder_id",
        "worker",
        "worker_id",
        "user",
        "user_id",
        "username",
        "volunteer",
        "volunteer_id",
        "labeler",
        "labeller",
        "labeler_id",
        "labeller_id",
        "tagger",
        "judge",
        "annotated_by",
        "labeled_by",
        "labelled_by",
    ),
    "label": (
        "label",
        "labels",
        "tag",
        "tags",
        "category",
        "categories",
        "class",
        "class_name",
        "label_name",
        "category_name",
        "keyword",
        "keywords",
        "annotation",
    ),
}
"""Header names (after normalising case and separators) taken to mean each column role.
Common practice, no source."""

COCO_ANNOTATOR_FIELDS: tuple[str, ...] = ("annotator", "annotator_id", "user_id")


class LoadWarning(UserWarning):
    """Something in an input file was repaired on loading; the data is usable."""


class DuplicateRowsWarning(LoadWarning):
    """Identical (item, annotator, label) rows were found and all but one of each dropped."""


def normalise_header(name: str) -> str:
    """``"Photo ID"``, ``"photo-id"``, ``"photoId"`` -> ``"photo_id"`` (for role detection)."""
    name = re.sub(r"(?<=[a-z0-9])(?=[A-Z])", "_", name.strip())
    return re.sub(r"[\s\-.]+", "_", name).lower()


def match_roles(columns: Sequence[str], roles: Sequence[str]) -> dict[str, list[str]]:
    """Every column whose normalised name is a candidate for each role (no errors raised).

    A column named exactly after the role (``item``, ``label``...) is the only match for it.
    """
    found: dict[str, list[str]] = {}
    for role in roles:
        candidates = ROLE_CANDIDATES[role]
        hits = [c for c in columns if normalise_header(c) in candidates]
        exact = [c for c in hits if normalise_header(c) == role]
        found[role] = exact if len(exact) == 1 else hits
    return found


def _quoted(names: Sequence[str]) -> str:
    return ", ".join(f"'{n}'" for n in names) if names else "(none)"


def resolve_columns(
    path: Path,
    columns: Sequence[str],
    roles: Sequence[str],
    given: Mapping[str, str] | None,
    *,
    key: str = "annotations.columns",
) -> dict[str, str]:
    """Map each role to a file column: the configured one, else the one detected.

    Args:
        path: The file, for messages.
        columns: The file's column names.
        roles: Roles to resolve, e.g. ``("item", "annotator", "label")``.
        given: Role -> column set by the user (checked to exist).
        key: The config key naming the columns, for hints.

    Raises:
        LoadError: A configured column is absent; detection finds no column or several.
        ConfigError: ``given`` names an unknown role or maps two roles to one column.
    """
    given = dict(given or {})
    unknown = sorted(set(given) - set(roles))
    if unknown:
        raise ConfigError(
            f"{key} has no role '{unknown[0]}'; the roles are {', '.join(roles)}",
            source=str(path),
        )
    chosen: dict[str, str] = {}
    for role, column in given.items():
        if column not in columns:
            raise LoadError(
                f"column '{column}' (set as {key}.{role}) is not in the file; "
                f"columns found: {_quoted(columns)}",
                hint=f"Correct {key}.{role} in labelreview.yaml.",
                source=str(path),
                line=1,
            )
        chosen[role] = column
    taken = set(chosen.values())
    if len(taken) < len(chosen):
        raise ConfigError(f"{key} maps two roles to the same column", source=str(path))
    matches = match_roles(
        [c for c in columns if c not in taken], [r for r in roles if r not in chosen]
    )
    for role in roles:
        if role in chosen:
            continue
        hits = [c for c in matches[role] if c not in chosen.values()]
        if len(hits) == 1:
            chosen[role] = hits[0]
            continue
        if not hits:
            raise LoadError(
                f"no column looks like the {role} column; columns found: {_quoted(columns)}",
                hint=f"Set {key}.{role} in labelreview.yaml to the column that holds it.",
                source=str(path),
                line=1,
            )
        raise LoadError(
            f"columns {_quoted(hits)} could each be the {role} column",
            hint=f"Set {key}.{role} in labelreview.yaml to the one to use.",
            source=str(path),
            line=1,
        )
    return chosen


def detect_format(path: Path, *, kind: str = "annotations", encoding: str | None = None) -> str:
    """The format a file will be read as, from its name ending (and for ``.json``, its start).

    Args:
        path: The file.
        kind: ``"annotations"``, ``"items"`` or ``"taxonomy"``.
        encoding: Only used to peek into ``.json`` files.

    Returns:
        One of ``csv``, ``tsv``, ``jsonl``, ``json``, ``parquet``, ``coco`` (annotations and
        items) or ``text``, ``csv``, ``tsv``, ``yaml`` (taxonomy).

    Raises:
        LoadError: The ending is not one labelreview reads.
    """
    if kind == "taxonomy":
        from labelreview.io._taxonomy import detect_taxonomy_format

        return detect_taxonomy_format(path)
    if kind not in ("annotations", "items"):
        raise UsageError(f"unknown kind '{kind}'; expected annotations, items or taxonomy")
    suffix = path.suffix.lower()
    fmt = TABLE_EXTENSIONS.get(suffix)
    if fmt is None:
        key = f"{kind}.format" if kind == "annotations" else "the file name"
        raise unknown_extension(path, list(TABLE_EXTENSIONS), key)
    if fmt == "json":
        shape = json_kind(path, read_bytes(path), encoding)
        if shape == "object":
            return "coco" if kind == "annotations" else "json"
        return shape
    return fmt


# -- COCO ------------------------------------------------------------------------------------


def _read_coco(path: Path, encoding: str | None) -> tuple[pd.DataFrame, LoadReport]:
    """COCO object-detection JSON -> raw (item, annotator, label) rows plus a report.

    Layout as described in the COCO "Data format" section (cocodataset.org): top-level lists
    ``images``, ``annotations`` (``image_id``, ``category_id``, ``bbox``...) and ``categories``
    (``id``, ``name``, ``supercategory``).
    """
    document = load_json_document(path, decode(path, read_bytes(path), encoding))
    if not isinstance(document, dict) or not all(
        isinstance(document.get(k), list) for k in ("annotations", "categories")
    ):
        raise LoadError(
            "this JSON file is neither JSON Lines, a list of records, nor COCO "
            "(an object with 'annotations' and 'categories' lists)",
            hint="Convert it to CSV or JSON Lines with one row per item, annotator and label.",
            source=str(path),
        )
    names: dict[Any, str] = {}
    for position, category in enumerate(document["categories"]):
        if not isinstance(category, dict) or "id" not in category or "name" not in category:
            raise LoadError(f"categories[{position}] needs an 'id' and a 'name'", source=str(path))
        if category["id"] in names:
            raise LoadError(
                f"categories[{position}] repeats category id {category['id']!r}", source=str(path)
            )
        names[category["id"]] = text_value(category["name"])
    items: list[str] = []
    annotators: list[str] = []
    labels: list[str] = []
    used_field: set[str] = set()
    for position, annotation in enumerate(document["annotations"]):
        if not isinstance(annotation, dict) or "image_id" not in annotation:
            raise LoadError(f"annotations[{position}] has no 'image_id'", source=str(path))
        category_id = annotation.get("category_id")
        if category_id not in names:
            ident = f" (id {annotation['id']!r})" if "id" in annotation else ""
            raise LoadError(
                f"annotations[{position}]{ident} has category_id {category_id!r}, "
                "which is not among the categories",
                source=str(path),
            )
        annotator = "coco"
        for name in COCO_ANNOTATOR_FIELDS:
            if annotation.get(name) not in (None, ""):
                annotator = text_value(annotation[name])
                used_field.add(name)
                break
        items.append(text_value(annotation["image_id"]))
        annotators.append(annotator)
        labels.append(names[category_id])
    frame = pd.DataFrame(
        {"item": items, "annotator": annotators, "label": labels, "_row": np.arange(len(items))},
    )
    notes = ["several boxes of one category on one image by one annotator count as one label"]
    images = document.get("images")
    if isinstance(images, list):
        annotated = set(items)
        bare = sum(
            1
            for image in images
            if isinstance(image, dict) and text_value(image.get("id")) not in annotated
        )
        if bare:
            notes.append(f"{bare} image(s) have no annotations")
    annotator_source = "/".join(sorted(used_field)) if used_field else "(none: 'coco')"
    report = LoadReport(
        path=str(path),
        format="coco",
        rows_read=len(items),
        column_map={"item": "image_id", "annotator": annotator_source, "label": "category_id"},
        notes=tuple(notes),
    )
    return frame, report


# -- multi-label cells -----------------------------------------------------------------------


def _is_listlike(value: Any) -> bool:
    return isinstance(value, (list, tuple, np.ndarray))


def _json_list(cell: str) -> Any:
    """``'["a", "b"]'`` -> ``["a", "b"]``; anything else (``"[blank]"``) -> the cell unchanged."""
    try:
        parsed = json.loads(cell)
    except json.JSONDecodeError:
        return cell
    if isinstance(parsed, list) and all(not isinstance(v, (list, dict)) for v in parsed):
        return [text_value(v) for v in parsed]
    return cell


def _explode_where(
    frame: pd.DataFrame, mask: pd.Series, lists: pd.Series, *, as_is: bool = False
) -> pd.DataFrame:
    """Replace the ``mask`` rows by one row per element of ``lists`` (aligned to those rows).

    Only the masked rows are exploded; the rest keep their string column untouched, and the
    result keeps the file's order (each cell's labels in the order written).
    """
    order = np.arange(len(frame))
    keep = frame[~mask.to_numpy()].assign(_order=order[~mask.to_numpy()])
    parts = frame[mask.to_numpy()].assign(label=lists.to_numpy(), _order=order[mask.to_numpy()])
    parts = parts.explode("label")
    parts["label"] = (parts["label"] if as_is else parts["label"].map(text_value)).astype(str)
    merged = pd.concat([keep, parts], ignore_index=True)
    merged = merged.sort_values("_order", kind="stable").drop(columns="_order")
    return merged.reset_index(drop=True)


def _split_labels(frame: pd.DataFrame, separator: str | None) -> tuple[pd.DataFrame, int]:
    """Explode list values, JSON-list cells and ``separator``-joined cells to one row each.

    Only rows that need it are touched, so a file without multi-label cells costs three
    vectorised scans. Returns the frame and how many cells were split.
    """
    split = 0
    labels = frame["label"]
    if labels.dtype == object:
        listlike = labels.map(_is_listlike).astype(bool)
        if bool(listlike.any()):
            split += int(listlike.sum())
            text = as_text(labels.where(~listlike, ""))
            frame = _explode_where(frame.assign(label=text), listlike, labels[listlike])
        else:
            frame = frame.assign(label=as_text(labels))
    frame = frame.assign(label=frame["label"].astype(str))
    stripped = frame["label"].str.strip()
    json_cells = stripped.str.startswith("[") & stripped.str.endswith("]")
    if bool(json_cells.any()):
        parsed = stripped[json_cells].map(_json_list)
        really = parsed.map(_is_listlike).astype(bool)
        if bool(really.any()):
            mask = pd.Series(False, index=frame.index)
            mask[parsed.index[really]] = True
            split += int(really.sum())
            frame = _explode_where(frame, mask, parsed[really])
    if separator:
        joined = frame["label"].str.contains(separator, regex=False)
        if bool(joined.any()):
            split += int(joined.sum())
            pieces = frame["label"][joined].str.split(separator, regex=False)
            frame = _explode_where(frame, joined, pieces, as_is=True)
    return frame, split


# -- the loader ------------------------------------------------------------------------------


def _resolve_format(path: Path, fmt: str, encoding: str | None) -> str:
    if fmt not in ANNOTATION_FORMATS:
        raise UsageError(
            f"unknown annotation format '{fmt}'; expected one of {', '.join(ANNOTATION_FORMATS)}"
        )
    if fmt == "auto":
        return detect_format(path, kind="annotations", encoding=encoding)
    return fmt


def _long_frame(
    path: Path, table: Table, columns: Mapping[str, str] | None
) -> tuple[pd.DataFrame, dict[str, str]]:
    chosen = resolve_columns(path, table.columns, ANNOTATION_COLUMNS, columns)
    raw = table.frame
    label = raw[chosen["label"]]
    frame = pd.DataFrame(
        {
            "item": as_text(raw[chosen["item"]]),
            "annotator": as_text(raw[chosen["annotator"]]),
            "label": label if label.dtype == object else as_text(label),
            "_row": np.arange(len(raw)),
        }
    )
    return frame, chosen


def _wide_frame(
    path: Path,
    table: Table,
    columns: Mapping[str, str] | None,
    annotator_columns: Sequence[str],
) -> tuple[pd.DataFrame, dict[str, str]]:
    extra = sorted(set(columns or {}) - {"item"})
    if extra:
        raise ConfigError(
            f"annotations.columns.{extra[0]} does not apply to the wide layout, where each "
            "annotator has a column and the header names the annotator",
            hint="Keep only annotations.columns.item, and list annotator columns in "
            "annotations.annotator_columns if not every other column is one.",
            source=str(path),
        )
    chosen = resolve_columns(path, table.columns, ("item",), columns)
    item_column = chosen["item"]
    if annotator_columns:
        missing = [c for c in annotator_columns if c not in table.columns]
        if missing:
            raise LoadError(
                f"annotator column '{missing[0]}' (listed in annotations.annotator_columns) "
                f"is not in the file; columns found: {_quoted(table.columns)}",
                source=str(path),
                line=1,
            )
        if item_column in annotator_columns:
            raise ConfigError(
                f"column '{item_column}' is the item column and cannot also be an annotator column",
                source=str(path),
            )
        value_columns = list(annotator_columns)
    else:
        value_columns = [c for c in table.columns if c != item_column]
    if not value_columns:
        raise LoadError(
            f"the wide layout needs one column per annotator, but the file has only "
            f"'{item_column}'",
            source=str(path),
            line=1,
        )
    raw = table.frame
    parts = []
    items = as_text(raw[item_column])
    rows = np.arange(len(raw))
    for column in value_columns:
        values = raw[column]
        parts.append(
            pd.DataFrame(
                {
                    "item": items,
                    "annotator": column,
                    "label": values if values.dtype == object else as_text(values),
                    "_row": rows,
                }
            )
        )
    # Row by row, annotators in header order, as a reader of the file would list them.
    frame = pd.concat(parts, ignore_index=True).sort_values("_row", kind="stable")
    chosen["annotator"] = "(column names)"
    chosen["label"] = "(cells)"
    return frame, chosen


def load_annotations(
    path: Path,
    *,
    fmt: str = "auto",
    layout: str = "long",
    columns: Mapping[str, str] | None = None,
    annotator_columns: Sequence[str] = (),
    multi_label_separator: str | None = "|",
    encoding: str | None = None,
) -> tuple[pd.DataFrame, LoadReport]:
    """Read an annotation file into the annotation frame.

    Args:
        path: The file. It is only read, never written.
        fmt: ``auto`` (from the name ending; ``.json`` by content: COCO, JSON Lines or a list),
            ``csv``, ``tsv``, ``jsonl``, ``json``, ``parquet`` or ``coco``.
        layout: ``long`` (one row per item x annotator) or ``wide`` (one row per item, one
            column per annotator, the header naming the annotator). Ignored for COCO.
        columns: Role (``item``, ``annotator``, ``label``) -> the file's column; roles left out
            are detected from common header names. In the wide layout only ``item`` applies.
        annotator_columns: Wide layout: the annotator columns (default: all but the item one).
        multi_label_separator: Cells holding this are split into one label each (``None``: never
            split). JSON-list cells such as ``["a", "b"]`` are always split.
        encoding: The text encoding; ``None`` means UTF-8, with or without a byte order mark.

    Returns:
        The frame (string columns ``item``, ``annotator``, ``label``; labels stripped; empty
        labels and duplicate rows dropped) and a report of what was done.

    Raises:
        LoadError: The file is missing, empty, undecodable, malformed, or its columns cannot be
            told apart; the message names line and column where known.
        ConfigError: ``columns``/``annotator_columns`` contradict the layout.
        UsageError: ``fmt``, ``layout`` or ``encoding`` is not a known value.

    Warns:
        DuplicateRowsWarning: Identical rows were dropped (not for COCO, where several boxes of
            one category on one image are normal).
    """
    path = Path(path)
    if layout not in LAYOUTS:
        raise UsageError(f"unknown layout '{layout}'; expected one of {', '.join(LAYOUTS)}")
    if multi_label_separator == "":
        raise UsageError("multi_label_separator must be a non-empty string or None")
    check_encoding(encoding)
    resolved = _resolve_format(path, fmt, encoding)
    locate: Any
    if resolved == "coco":
        frame, base = _read_coco(path, encoding)
        locate = lambda _row: None  # noqa: E731 - positions in COCO are list indexes
        chosen = dict(base.column_map)
        notes = list(base.notes)
        report_format = "coco"
        rows_read = base.rows_read
    else:
        table = read_table(path, fmt=resolved, encoding=encoding)
        locate = table.locate
        notes = list(table.notes)
        rows_read = len(table.frame)
        if layout == "wide":
            frame, chosen = _wide_frame(path, table, columns, annotator_columns)
            report_format = f"wide-{resolved}"
        else:
            if annotator_columns:
                raise ConfigError(
                    "annotations.annotator_columns applies only to the wide layout",
                    hint="Set annotations.layout: wide, or remove annotator_columns.",
                    source=str(path),
                )
            frame, chosen = _long_frame(path, table, columns)
            report_format = resolved

    frame, counts = clean_rows(
        frame,
        path=path,
        wide=layout == "wide" and resolved != "coco",
        chosen=chosen,
        locate=locate,
        separator=multi_label_separator,
    )
    notes.extend(counts.notes)
    frame, duplicate_count = drop_duplicates(frame)
    if duplicate_count and resolved != "coco":
        warn_duplicates(path, duplicate_count)
    if counts.split_cells:
        notes.append(f"{counts.split_cells} multi-label cell(s) split into one row per label")
    out = as_annotation_frame(frame)
    empty_count = counts.empty_labels
    report = LoadReport(
        path=str(path),
        format=report_format,
        rows_read=rows_read,
        duplicates_dropped=duplicate_count,
        empty_labels_dropped=empty_count,
        column_map=dict(chosen),
        notes=tuple(notes),
    )
    return out, report


# -- the steps every reader shares (whole files here, batches in io._stream) --------------------


@dataclass
class CleanCounts:
    """What :func:`clean_rows` changed."""

    split_cells: int = 0
    empty_labels: int = 0
    notes: list[str] = field(default_factory=list)


def clean_rows(
    frame: pd.DataFrame,
    *,
    path: Path,
    wide: bool,
    chosen: Mapping[str, str],
    locate: Any,
    separator: str | None,
) -> tuple[pd.DataFrame, CleanCounts]:
    """Split multi-label cells, strip, drop empty labels, refuse rows without item or annotator.

    ``frame`` has ``item``, ``annotator``, ``label`` and ``_row`` (the row's position in the
    file, for ``locate``). Works row by row, so a file read in batches gives the same rows.

    Raises:
        LoadError: A label too long to be one, or a row without item (or annotator), with its
            line where ``locate`` knows it.
    """
    counts = CleanCounts()
    labels_text = frame["label"]
    if labels_text.dtype != object or not bool(labels_text.map(_is_listlike).any()):
        text = as_text(labels_text)
        if wide:
            for column, group in frame.assign(label=text).groupby("annotator", sort=False):
                check_long_fields(path, group["label"], group["_row"], str(column), locate)
        else:
            check_long_fields(path, text, frame["_row"], chosen.get("label", "label"), locate)

    frame, counts.split_cells = _split_labels(frame, separator)
    frame["label"] = frame["label"].astype(str).str.strip()
    empty = frame["label"] == ""
    counts.empty_labels = int(empty.sum())
    if counts.empty_labels:
        frame = frame[~empty]
        if wide:
            counts.notes.append(
                f"{counts.empty_labels} blank cell(s) skipped (no label from that annotator)"
            )
    frame["item"] = frame["item"].str.strip()
    frame["annotator"] = frame["annotator"].str.strip()
    for role in ("item", "annotator"):
        if wide and role == "annotator":
            continue
        blank = frame[role] == ""
        if bool(blank.any()):
            first = int(blank.to_numpy().argmax())
            row = int(frame["_row"].iloc[first])
            raise LoadError(
                f"a row has no {role}",
                hint=f"Every annotation needs an {role}; fill it in or delete the row.",
                source=str(path),
                line=locate(row),
                column=chosen.get(role),
            )
    return frame, counts


def drop_duplicates(frame: pd.DataFrame) -> tuple[pd.DataFrame, int]:
    """Drop repeated (item, annotator, label) rows, keeping the first; return how many went.

    A file read in batches must hand over all rows of an item together for the count to match.
    """
    duplicated = frame.duplicated(subset=list(ANNOTATION_COLUMNS))
    count = int(duplicated.sum())
    return (frame[~duplicated] if count else frame), count


def warn_duplicates(path: Path, count: int) -> None:
    warnings.warn(
        DuplicateRowsWarning(
            f"{path}: dropped {count} duplicate (item, annotator, label) "
            f"row(s); each is counted once"
        ),
        stacklevel=3,
    )


def as_annotation_frame(frame: pd.DataFrame) -> pd.DataFrame:
    """The three annotation columns as strings, index reset."""
    out = frame.loc[:, list(ANNOTATION_COLUMNS)].reset_index(drop=True)
    for name in ANNOTATION_COLUMNS:
        if not isinstance(out[name].dtype, pd.StringDtype):
            out[name] = out[name].astype(str)
    return out
