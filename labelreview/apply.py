"""Apply the decisions: the log's label mapping, replayed onto a copy of the dataset.

This module owns one job: turn the fold over the decision log into a mapping from every label
to where it ends up (itself, a new name, an existing label it merges into, or nowhere), and
write a revised copy of the annotations and taxonomy in the input's own format, beside a
mapping table and a manifest. It never writes into the dataset folder or over anything a user
wrote; every file goes through a temporary file, ``fsync`` and an atomic rename, and each
revised file is read back with the same loader before it is put in place.

The mapping (see :func:`build_mapping`):

- accepted and open labels map to themselves;
- a rename maps to the new name, following chains (``A`` renamed to ``B``, ``B`` retired with
  fallback ``C``: ``A`` maps to ``C``); a rename onto a label that already exists is a merge;
- a retirement drops the label's annotations, or maps them to its fallback (chains followed);
- decisions that loop (``A`` to ``B``, ``B`` to ``A``) are refused, naming labels and seqs.

Hierarchies (paths such as ``people/looks/x``): a label's parent is its nearest path prefix
that is itself a label (or has a decision). Renaming a parent moves every descendant with it
(``people/looks/x`` becomes ``people/appearance/x``; accepted children too, since a child
cannot stay under a parent that is gone), unless the descendant has a rename or retirement of
its own, which wins. Retiring a parent is refused while any descendant would stay under it:
retire or rename those first, or rename the parent instead.
"""

from __future__ import annotations

import csv
import io
import json
import os
from collections import Counter
from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from datetime import datetime
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from labelreview.dataset import input_paths
from labelreview.decisions import Entry, LogState, rfc3339, utc_now
from labelreview.errors import DecisionError, LabelReviewError, UsageError
from labelreview.export import OutputError, csv_text, fsync_dir, tool_version
from labelreview.io._annotations import _json_list, detect_format, load_annotations
from labelreview.io._common import (
    as_text,
    decode,
    is_utf8,
    load_json_document,
    read_bytes,
    read_delimited,
    text_value,
)
from labelreview.io._taxonomy import _COLUMN_ALIASES, _clean_path, load_taxonomy
from labelreview.model import SEVERITY_RANK
from labelreview.report import CAUTIONS

if TYPE_CHECKING:
    from labelreview.dataset import Dataset
    from labelreview.review import ReviewSession

MANIFEST_NAME = "manifest.json"
MAPPING_NAME = "mapping.csv"
WRITTEN_BY = "labelreview apply"
MANIFEST_VERSION = 1
MAPPING_COLUMNS: tuple[str, ...] = (
    "old_label",
    "action",
    "new_label",
    "annotations_before",
    "annotations_after",
    "decision_seq",
    "result",
    "via",
)
"""Columns of ``mapping.csv``; the first six are the ones the issue lists, in its order."""

RESULTS: tuple[str, ...] = ("keep", "rename", "merge", "drop")
FIRST_FEW = 5


class MappingError(DecisionError):
    """The decisions in force cannot be turned into one label mapping (a loop, a retired
    parent that still has children, a new name apply cannot write)."""


class ApplyRefusedError(LabelReviewError):
    """``apply`` refused to run: unresolved flags at the gate level, or a log that does not
    verify."""


# -- the mapping -------------------------------------------------------------------------------


@dataclass(frozen=True)
class LabelMapping:
    """Where one label of the input ends up."""

    old_label: str
    action: str
    """The label's own status: ``open``, ``accept``, ``rename``, ``retire``; or
    ``follow_parent`` when an ancestor's rename moved it."""
    new_label: str | None
    """The label its annotations carry after apply; None when they are dropped."""
    result: str
    """``keep`` (same label), ``rename`` (a new name), ``merge`` (a label that already
    existed, or one other old labels map to as well), ``drop`` (annotations removed)."""
    decision_seq: int | None
    """The decision that set the result: the label's own, or the ancestor's it followed."""
    via: tuple[str, ...] = ()
    """Every step from the old label to the new one, in words."""
    annotations_before: int = 0
    annotations_after: int = 0

    @property
    def changed(self) -> bool:
        return self.new_label != self.old_label

    def row(self) -> dict[str, Any]:
        """The ``mapping.csv`` row."""
        return {
            "old_label": self.old_label,
            "action": self.action,
            "new_label": self.new_label or "",
            "annotations_before": self.annotations_before,
            "annotations_after": self.annotations_after,
            "decision_seq": "" if self.decision_seq is None else self.decision_seq,
            "result": self.result,
            "via": "; ".join(self.via),
        }


_ACTION_NAME = {"accept": "accept", "rename": "rename", "retire": "retire"}


class _Resolver:
    """Follows rename/retire chains and parent moves for one log state, with loop detection."""

    def __init__(self, state: LogState, labels: Iterable[str]) -> None:
        self.state = state
        self.labels = set(labels)
        self.memo: dict[str, tuple[str | None, tuple[str, ...], int | None]] = {}
        self.stack: list[tuple[str, int | None]] = []
        self.retired_parents: dict[str, tuple[Entry, list[str]]] = {}

    def is_node(self, name: str) -> bool:
        return name in self.labels or self.state.decision(name) is not None

    def ancestor(self, name: str) -> str | None:
        """The nearest path prefix of ``name`` that is a label or has a decision."""
        head = name
        while "/" in head:
            head = head.rpartition("/")[0]
            if self.is_node(head):
                return head
        return None

    def loop(self, name: str) -> MappingError:
        start = next(i for i, (n, _) in enumerate(self.stack) if n == name)
        steps = [
            f"'{n}' (seq {seq})" if seq is not None else f"'{n}' (under a renamed parent)"
            for n, seq in self.stack[start:]
        ]
        return MappingError(
            "the decisions in force form a loop: " + " -> ".join([*steps, f"'{name}'"]),
            hint="apply cannot tell where these labels should end up. Revoke or replace one of "
            "these decisions (labelreview decide), then run apply again.",
        )

    def resolve(self, name: str) -> tuple[str | None, tuple[str, ...], int | None]:
        """(final label or None, steps in words, the deciding seq) for ``name``."""
        if name in self.memo:
            return self.memo[name]
        if any(n == name for n, _ in self.stack):
            raise self.loop(name)
        decision = self.state.decision(name)
        self.stack.append((name, decision.seq if decision is not None else None))
        try:
            result = self._resolve(name, decision)
        finally:
            self.stack.pop()
        self.memo[name] = result
        return result

    def _resolve(
        self, name: str, decision: Entry | None
    ) -> tuple[str | None, tuple[str, ...], int | None]:
        action = decision.get("action") if decision is not None else None
        if decision is not None and action == "rename":
            new = str(decision.get("new_label"))
            step = f"seq {decision.seq}: '{name}' renamed to '{new}'"
            target, steps, _ = self.resolve(new)
            return target, (step, *steps), decision.seq
        if decision is not None and action == "retire":
            fallback = decision.get("fallback")
            if fallback:
                step = f"seq {decision.seq}: '{name}' retired, annotations moved to '{fallback}'"
                target, steps, _ = self.resolve(str(fallback))
                return target, (step, *steps), decision.seq
            step = f"seq {decision.seq}: '{name}' retired, annotations dropped"
            return None, (step,), decision.seq
        parent = self.ancestor(name)
        if parent is None:
            return name, (), None
        rest = name[len(parent) + 1 :]
        parent_decision = self.state.decision(parent)
        parent_action = parent_decision.get("action") if parent_decision is not None else None
        if parent_decision is not None and parent_action == "retire":
            entry = self.retired_parents.setdefault(parent, (parent_decision, []))
            entry[1].append(name)
            return name, (), None  # reported all together by build_mapping
        if parent_decision is not None and parent_action == "rename":
            new_parent = str(parent_decision.get("new_label"))
            moved = f"{new_parent}/{rest}"
            step = (
                f"seq {parent_decision.seq}: parent '{parent}' renamed to '{new_parent}', "
                f"so '{name}' moves to '{moved}'"
            )
            target, steps, _ = self.resolve(moved)
            return target, (step, *steps), parent_decision.seq
        parent_target, parent_steps, parent_seq = self.resolve(parent)
        if parent_target is None or parent_target == parent:
            return name, (), None
        moved = f"{parent_target}/{rest}"
        step = f"parent '{parent}' moved to '{parent_target}', so '{name}' moves to '{moved}'"
        target, steps, _ = self.resolve(moved)
        return target, (step, *steps), parent_seq


def build_mapping(
    state: LogState, labels: Iterable[str], *, separator: str | None = None
) -> dict[str, LabelMapping]:
    """Every label's fate under the decisions in force (counts left at zero).

    Args:
        state: The fold over the decision log.
        labels: Every label of the input (taxonomy and annotations).
        separator: The multi-label separator of the annotation file; a new name containing it
            could not be written into a cell, so it is refused.

    Returns:
        Old label -> :class:`LabelMapping`, in sorted label order.

    Raises:
        MappingError: The decisions loop, a retired parent still has children, or a new name
            holds the multi-label separator.
    """
    names = sorted(set(labels))
    resolver = _Resolver(state, names)
    resolved = {name: resolver.resolve(name) for name in names}
    shared = Counter(target for target, _, _ in resolved.values() if target is not None)
    out: dict[str, LabelMapping] = {}
    for name in names:
        target, steps, seq = resolved[name]
        decision = state.decision(name)
        own = str(decision.get("action")) if decision is not None else "open"
        action = own
        if own in ("open", "accept") and target != name:
            action = "follow_parent"
            if own == "accept" and decision is not None:
                steps = (f"seq {decision.seq}: '{name}' accepted", *steps)
        if target is None:
            result = "drop"
        elif target == name:
            result = "keep"
        elif target in resolver.labels or shared[target] > 1:
            result = "merge"
        else:
            result = "rename"
        if action in ("open", "accept") and seq is None and decision is not None:
            seq = decision.seq
        out[name] = LabelMapping(
            old_label=name,
            action=action,
            new_label=target,
            result=result,
            decision_seq=seq,
            via=steps,
        )
    if resolver.retired_parents:
        parent, (entry, children) = sorted(resolver.retired_parents.items())[0]
        children = sorted(set(children))
        shown = ", ".join(f"'{c}'" for c in children[:3])
        more = f" and {len(children) - 3} more" if len(children) > 3 else ""
        others = len(resolver.retired_parents) - 1
        also = f" ({others} more retired parent(s) have children too)" if others else ""
        raise MappingError(
            f"'{parent}' is retired (seq {entry.seq}) but {len(children)} label(s) would stay "
            f"under it: {shown}{more}{also}",
            hint="Retire or rename those labels first, or rename the parent instead (children "
            "follow a renamed parent).",
        )
    if separator:
        for mapping in out.values():
            if mapping.new_label is not None and separator in mapping.new_label:
                raise MappingError(
                    f"the new label '{mapping.new_label}' (for '{mapping.old_label}', seq "
                    f"{mapping.decision_seq}) contains the multi-label separator '{separator}', "
                    "so a revised cell holding it would read back as two labels",
                    hint="Replace that decision with a name without the separator.",
                )
    return out


# -- counting on the loaded annotation frame ---------------------------------------------------


@dataclass(frozen=True)
class AnnotationCounts:
    """What the mapping does to the loaded annotations (item x annotator x label)."""

    before: dict[str, int]
    after: dict[str, int]
    """Per old label: annotations that survive carrying its new label."""
    by_new_label: dict[str, int]
    annotations_in: int
    annotations_out: int
    dropped: int
    """Annotations removed because their label was retired without a fallback."""
    merged: int
    """Annotations that became duplicates of an existing one and were counted once."""


def count_annotations(
    frame: pd.DataFrame | None, targets: Mapping[str, str | None]
) -> AnnotationCounts:
    """Apply ``targets`` to the annotation frame and count, keeping original rows on merges.

    An annotation whose label is unchanged always stays. A changed one is dropped when the
    same item and annotator already carry its new label (kept once, at its first occurrence).
    """
    if frame is None or not len(frame):
        return AnnotationCounts({}, {}, {}, 0, 0, 0, 0)
    labels = frame["label"].astype(str)
    mapped = labels.map(lambda x: targets.get(x, x))
    changed = mapped != labels
    dropped_mask = mapped.isna()
    unchanged = frame.loc[~changed, ["item", "annotator", "label"]]
    moving = frame.loc[changed & ~dropped_mask, ["item", "annotator"]].assign(
        label=mapped[changed & ~dropped_mask].astype(str),
        old=labels[changed & ~dropped_mask],
    )
    first = moving.drop_duplicates(subset=["item", "annotator", "label"], keep="first")
    merged_in_moving = len(moving) - len(first)
    keyed = first.merge(
        unchanged.drop_duplicates(), on=["item", "annotator", "label"], how="left", indicator=True
    )
    kept = keyed[keyed["_merge"] == "left_only"]
    merged = merged_in_moving + (len(first) - len(kept))
    before = {str(k): int(v) for k, v in labels.value_counts(sort=False).items()}
    after: Counter[str] = Counter(
        {str(k): int(v) for k, v in unchanged["label"].value_counts().items()}
    )
    after.update({str(k): int(v) for k, v in kept["old"].value_counts().items()})
    by_new: Counter[str] = Counter(
        {str(k): int(v) for k, v in unchanged["label"].value_counts().items()}
    )
    by_new.update({str(k): int(v) for k, v in kept["label"].value_counts().items()})
    return AnnotationCounts(
        before=before,
        after=dict(after),
        by_new_label=dict(by_new),
        annotations_in=len(frame),
        annotations_out=len(unchanged) + len(kept),
        dropped=int(dropped_mask.sum()),
        merged=int(merged),
    )


# -- mapping cells of the raw files ------------------------------------------------------------

_EMPTY = object()


def _is_listlike(value: Any) -> bool:
    return isinstance(value, (list, tuple, np.ndarray))


def _is_missing(value: Any) -> bool:
    if value is None:
        return True
    if isinstance(value, float):
        return value != value
    return False


def cell_labels(cell: Any, separator: str | None) -> tuple[list[str], str]:
    """The labels the loader reads from one cell, and the cell's kind.

    Mirrors the annotation loader: list values are exploded, ``["a", "b"]`` text is a JSON
    list, and ``separator`` splits what is left; labels are stripped, blanks skipped.

    Returns:
        (labels in order, kind) with kind ``empty``, ``list``, ``json``, ``text`` or ``scalar``.
    """
    if _is_listlike(cell):
        parts = [text_value(v) for v in list(cell)]
        kind = "list"
    elif _is_missing(cell):
        return [], "empty"
    elif isinstance(cell, str):
        parts, kind = [cell], "text"
    else:
        parts, kind = [text_value(cell)], "scalar"
    pieces: list[str] = []
    for part in parts:
        stripped = part.strip()
        if stripped.startswith("[") and stripped.endswith("]"):
            parsed = _json_list(stripped)
            if _is_listlike(parsed):
                pieces.extend(parsed)
                if kind == "text":
                    kind = "json"
                continue
        pieces.append(part)
    split: list[str] = []
    for piece in pieces:
        split.extend(piece.split(separator) if separator and separator in piece else [piece])
    labels = [p.strip() for p in split if p.strip()]
    return labels, ("empty" if not labels and kind in ("text", "scalar") else kind)


class CellMapper:
    """Maps label cells of a raw file, dropping merge duplicates the same way
    :func:`count_annotations` does."""

    def __init__(
        self,
        targets: Mapping[str, str | None],
        separator: str | None,
        unchanged_keys: set[tuple[str, str, str]],
    ) -> None:
        self.targets = targets
        self.separator = separator
        self.unchanged = unchanged_keys
        self.emitted: set[tuple[str, str, str]] = set()

    def map(self, cell: Any, item: str, annotator: str) -> tuple[Any, bool]:
        """(new cell, changed). The new cell is ``_EMPTY`` when every label went."""
        labels, kind = cell_labels(cell, self.separator)
        if not labels:
            return cell, False
        out: list[str] = []
        changed = False
        for label in labels:
            target = self.targets.get(label, label)
            if target is None:
                changed = True
                continue
            if target == label:
                out.append(label)
                continue
            changed = True
            key = (item, annotator, target)
            if key in self.unchanged or key in self.emitted or target in out:
                continue
            self.emitted.add(key)
            out.append(target)
        if not changed:
            return cell, False
        out = list(dict.fromkeys(out))
        if not out:
            return _EMPTY, True
        if kind == "list":
            return out, True
        if kind == "json":
            return json.dumps(out, ensure_ascii=False), True
        if len(out) == 1:
            return out[0], True
        return str(self.separator).join(out), True


# -- output files ------------------------------------------------------------------------------


@dataclass
class _Output:
    role: str
    name: str
    data: bytes
    format: str
    tmp: Path | None = None


@dataclass
class FileCounts:
    rows_in: int = 0
    rows_out: int = 0
    rows_changed: int = 0
    rows_dropped: int = 0


def _line_ending(raw: bytes) -> str:
    end = raw.find(b"\n")
    return "\r\n" if end > 0 and raw[end - 1 : end] == b"\r" else "\n"


def _encode(text: str, encoding: str | None, had_bom: bool, source: Path) -> bytes:
    enc = "utf-8" if is_utf8(encoding) else str(encoding)
    try:
        data = text.encode(enc)
    except UnicodeEncodeError as exc:
        raise OutputError(
            f"a revised label cannot be written in the input's encoding {enc} "
            f"({exc.object[exc.start : exc.end]!r})",
            hint="Choose a new name the encoding can hold, or convert the input to UTF-8.",
            source=str(source),
        ) from None
    return (b"\xef\xbb\xbf" + data) if had_bom and is_utf8(encoding) else data


def _csv_text(
    header: Sequence[str], rows: Iterable[Sequence[Any]], delimiter: str, end: str
) -> str:
    return csv_text(header, rows, delimiter=delimiter, end=end)


def _annotation_roles(dataset: Dataset) -> tuple[str, str, str]:
    report = dataset.reports[0]
    cmap = report.column_map
    return cmap.get("item", "item"), cmap.get("annotator", "annotator"), cmap.get("label", "label")


def _revise_annotations(
    dataset: Dataset, targets: Mapping[str, str | None], unchanged: set[tuple[str, str, str]]
) -> tuple[bytes, str, FileCounts]:
    """The revised annotation file's bytes, its format, and row counts."""
    ann = dataset.config.annotations
    assert ann is not None and ann.path is not None
    path = ann.path
    fmt = ann.format if ann.format != "auto" else detect_format(path, encoding=ann.encoding)
    mapper = CellMapper(targets, ann.multi_label_separator, unchanged)
    if fmt == "coco":
        data, counts = _revise_coco(path, ann.encoding, targets)
        return data, "coco", counts
    item_col, annotator_col, label_col = _annotation_roles(dataset)
    wide = ann.layout == "wide"
    report_format = f"wide-{fmt}" if wide else fmt
    if fmt in ("csv", "tsv"):
        delimiter = "," if fmt == "csv" else "\t"
        raw = read_bytes(path)
        table = read_delimited(path, delimiter=delimiter, encoding=ann.encoding, fmt=fmt)
        header = list(table.columns)
        records = table.frame.to_dict("records")
        value_columns = _value_columns(header, item_col, ann.annotator_columns) if wide else []
        kept, counts = _map_records(
            records, mapper, item_col, annotator_col, label_col, value_columns, empty=""
        )
        text = _csv_text(
            header, ([r[c] for c in header] for r in kept), delimiter, _line_ending(raw)
        )
        had_bom = raw.startswith(b"\xef\xbb\xbf")
        return _encode(text, ann.encoding, had_bom, path), report_format, counts
    if fmt == "jsonl":
        return _revise_jsonl(path, ann, mapper, item_col, annotator_col, label_col, wide)
    if fmt == "json":
        raw = read_bytes(path)
        document = load_json_document(path, decode(path, raw, ann.encoding))
        records = list(document)
        header = list(dict.fromkeys(str(k) for r in records for k in r))
        value_columns = _value_columns(header, item_col, ann.annotator_columns) if wide else []
        kept, counts = _map_records(
            records, mapper, item_col, annotator_col, label_col, value_columns, empty=None
        )
        text = json.dumps(kept, ensure_ascii=False, indent=2) + "\n"
        return _encode(text, ann.encoding, False, path), report_format, counts
    if fmt == "parquet":
        data, counts = _revise_parquet(path, mapper, item_col, annotator_col, label_col, wide, ann)
        return data, report_format, counts
    raise UsageError(f"apply cannot write annotations in the format '{fmt}'")


def _value_columns(
    header: Sequence[str], item_col: str, annotator_columns: Sequence[str]
) -> list[str]:
    return list(annotator_columns) if annotator_columns else [c for c in header if c != item_col]


def _key_text(value: Any) -> str:
    return text_value(value).strip()


def _map_records(
    records: list[dict[str, Any]],
    mapper: CellMapper,
    item_col: str,
    annotator_col: str,
    label_col: str,
    value_columns: Sequence[str],
    *,
    empty: Any,
) -> tuple[list[dict[str, Any]], FileCounts]:
    """Map the label cell(s) of each record; long rows whose labels all went are dropped."""
    counts = FileCounts(rows_in=len(records))
    kept: list[dict[str, Any]] = []
    for record in records:
        item = _key_text(record.get(item_col))
        if value_columns:
            new = dict(record)
            any_changed = False
            had = False
            left = False
            for column in value_columns:
                cell = record.get(column)
                labels, _ = cell_labels(cell, mapper.separator)
                had = had or bool(labels)
                value, changed = mapper.map(cell, item, column.strip())
                if changed:
                    any_changed = True
                    new[column] = empty if value is _EMPTY else value
                left = left or (value is not _EMPTY and bool(labels))
            if had and not left:
                counts.rows_dropped += 1
                continue
            counts.rows_changed += any_changed
            kept.append(new if any_changed else record)
            continue
        value, changed = mapper.map(
            record.get(label_col), item, _key_text(record.get(annotator_col))
        )
        if value is _EMPTY:
            counts.rows_dropped += 1
            continue
        if changed:
            counts.rows_changed += 1
            record = {**record, label_col: value}
        kept.append(record)
    counts.rows_out = len(kept)
    return kept, counts


def _revise_jsonl(
    path: Path,
    ann: Any,
    mapper: CellMapper,
    item_col: str,
    annotator_col: str,
    label_col: str,
    wide: bool,
) -> tuple[bytes, str, FileCounts]:
    raw = read_bytes(path)
    text = decode(path, raw, ann.encoding)
    lines = [line for line in text.splitlines() if line.strip()]
    records = [json.loads(line) for line in lines]
    header = list(dict.fromkeys(str(k) for r in records for k in r))
    value_columns = _value_columns(header, item_col, ann.annotator_columns) if wide else []
    originals = {id(r): line for r, line in zip(records, lines, strict=True)}
    kept, counts = _map_records(
        records, mapper, item_col, annotator_col, label_col, value_columns, empty=None
    )
    end = _line_ending(raw)
    # Unchanged records keep their exact original line; changed ones are written anew.
    out = "".join(
        (originals[id(r)] if id(r) in originals else json.dumps(r, ensure_ascii=False)) + end
        for r in kept
    )
    return _encode(out, ann.encoding, False, path), ("wide-jsonl" if wide else "jsonl"), counts


def _revise_parquet(
    path: Path,
    mapper: CellMapper,
    item_col: str,
    annotator_col: str,
    label_col: str,
    wide: bool,
    ann: Any,
) -> tuple[bytes, FileCounts]:
    import pyarrow as pa
    import pyarrow.parquet as pq

    table = pq.read_table(path)
    names = [str(n) for n in table.column_names]
    items = as_text(table.column(item_col).to_pandas()).str.strip().tolist()
    value_columns = _value_columns(names, item_col, ann.annotator_columns) if wide else [label_col]
    annotators = (
        None if wide else as_text(table.column(annotator_col).to_pandas()).str.strip().tolist()
    )
    counts = FileCounts(rows_in=table.num_rows)
    keep = [True] * table.num_rows
    had = [False] * table.num_rows
    left = [False] * table.num_rows
    changed_rows = [False] * table.num_rows
    new_columns: dict[str, list[Any]] = {}
    for column in value_columns:
        values = table.column(column).to_pylist()
        new_values: list[Any] = []
        for row, cell in enumerate(values):
            who = column.strip() if wide else annotators[row]  # type: ignore[index]
            labels, _ = cell_labels(cell, mapper.separator)
            had[row] = had[row] or bool(labels)
            value, changed = mapper.map(cell, items[row], who)
            if value is _EMPTY:
                value = None
            elif labels:
                left[row] = True
            changed_rows[row] = changed_rows[row] or changed
            new_values.append(value)
        new_columns[column] = new_values
    for row in range(table.num_rows):
        if had[row] and not left[row]:
            keep[row] = False
    for column, values in new_columns.items():
        index = names.index(column)
        field_type = table.schema.field(index).type
        if pa.types.is_string(field_type) or pa.types.is_large_string(field_type):
            array = pa.array(values, type=field_type)
        elif pa.types.is_list(field_type) or pa.types.is_large_list(field_type):
            array = pa.array(values, type=field_type)
        else:
            array = pa.array([None if v is None else str(v) for v in values], type=pa.string())
        table = table.set_column(index, pa.field(column, array.type), array)
    table = table.filter(pa.array(keep))
    counts.rows_out = table.num_rows
    counts.rows_dropped = counts.rows_in - counts.rows_out
    counts.rows_changed = sum(1 for c, k in zip(changed_rows, keep, strict=True) if c and k)
    sink = pa.BufferOutputStream()
    pq.write_table(table, sink)
    return sink.getvalue().to_pybytes(), counts


def _revise_coco(
    path: Path, encoding: str | None, targets: Mapping[str, str | None]
) -> tuple[bytes, FileCounts]:
    """Categories renamed, merged or removed; annotations re-pointed or removed.

    Several boxes of one category on one image are separate objects, so no annotation is
    dropped as a duplicate: a merge only re-points ``category_id``.
    """
    document = load_json_document(path, decode(path, read_bytes(path), encoding))
    categories = document["categories"]
    kept_ids: dict[str, Any] = {}
    for category in categories:
        name = text_value(category["name"]).strip()
        if targets.get(name, name) == name:
            kept_ids.setdefault(name, category["id"])
    new_categories: list[dict[str, Any]] = []
    remap: dict[Any, Any] = {}
    for category in categories:
        name = text_value(category["name"]).strip()
        target = targets.get(name, name)
        if target is None:
            remap[category["id"]] = None
            continue
        if target == name:
            new_categories.append(category)
            remap[category["id"]] = category["id"]
            continue
        if target in kept_ids:
            remap[category["id"]] = kept_ids[target]
            continue
        kept_ids[target] = category["id"]
        remap[category["id"]] = category["id"]
        new_categories.append({**category, "name": target})
    counts = FileCounts(rows_in=len(document["annotations"]))
    annotations = []
    for annotation in document["annotations"]:
        old = annotation.get("category_id")
        new = remap.get(old, old)
        if new is None:
            counts.rows_dropped += 1
            continue
        if new != old:
            counts.rows_changed += 1
            annotation = {**annotation, "category_id": new}
        annotations.append(annotation)
    counts.rows_out = len(annotations)
    revised = {**document, "categories": new_categories, "annotations": annotations}
    text = json.dumps(revised, ensure_ascii=False, indent=2) + "\n"
    return _encode(text, encoding, False, path), counts


# -- the taxonomy ------------------------------------------------------------------------------


def _keepers(paths: Sequence[str], targets: Mapping[str, str | None]) -> dict[str, str]:
    """For each new path, the old taxonomy entry that carries it (its id and description).

    An entry already at that path wins; then one that only moved with its parent (same last
    segment); then the first in file order.
    """
    chosen: dict[str, tuple[int, int, str]] = {}
    for position, old in enumerate(paths):
        target = targets.get(old, old)
        if target is None:
            continue
        rank = (
            0 if target == old else 1 if target.rpartition("/")[2] == old.rpartition("/")[2] else 2
        )
        best = chosen.get(target)
        if best is None or (rank, position) < best[:2]:
            chosen[target] = (rank, position, old)
    return {target: old for target, (_, _, old) in chosen.items()}


def _revise_taxonomy(
    dataset: Dataset, targets: Mapping[str, str | None]
) -> tuple[bytes, str, list[str]]:
    """The revised taxonomy's bytes, its format, and the label paths it must read back as."""
    tax = dataset.config.taxonomy
    assert tax is not None
    path = tax.path
    fmt = tax.format if tax.format != "auto" else detect_format(path, kind="taxonomy")
    raw = read_bytes(path)
    text = decode(path, raw, tax.encoding)
    end = _line_ending(raw)
    had_bom = raw.startswith(b"\xef\xbb\xbf")
    old_paths = [label.name for label in dataset.taxonomy]
    keepers = _keepers(old_paths, targets)
    expected = [t for t in dict.fromkeys(targets.get(p, p) for p in old_paths) if t is not None]
    if fmt == "text":
        out = _revise_text_taxonomy(path, text, targets, keepers, end)
    elif fmt in ("csv", "tsv"):
        out = _revise_csv_taxonomy(path, text, targets, keepers, "," if fmt == "csv" else "\t", end)
    else:
        out = _revise_yaml_taxonomy(dataset, expected, keepers)
    return _encode(out, tax.encoding, had_bom, path), fmt, expected


def _revise_text_taxonomy(
    path: Path, text: str, targets: Mapping[str, str | None], keepers: Mapping[str, str], end: str
) -> str:
    lines: list[str] = []
    emitted: set[str] = set()
    for number, line in enumerate(text.splitlines(), start=1):
        stripped = line.strip()
        if not stripped or stripped.startswith("#"):
            lines.append(line)
            continue
        name = _clean_path(path, stripped, number)
        target = targets.get(name, name)
        if target is None:
            continue
        if target == name:
            lines.append(line)
            emitted.add(name)
            continue
        if keepers.get(target) != name or target in emitted:
            continue
        emitted.add(target)
        lines.append(target)
    return "".join(line + end for line in lines)


def _csv_positions(header: Sequence[str]) -> dict[str, int]:
    lowered = [h.strip().lower() for h in header]
    position: dict[str, int] = {}
    for role, aliases in _COLUMN_ALIASES.items():
        hits = [i for i, h in enumerate(lowered) if h in aliases]
        exact = [i for i in hits if lowered[i] == role]
        hits = exact or hits
        if hits:
            position[role] = hits[0]
    return position


def _revise_csv_taxonomy(
    path: Path,
    text: str,
    targets: Mapping[str, str | None],
    keepers: Mapping[str, str],
    delimiter: str,
    end: str,
) -> str:
    rows = [r for r in csv.reader(io.StringIO(text, newline=""), delimiter=delimiter) if r]
    header, body = rows[0], rows[1:]
    pos = _csv_positions(header)
    name_at, parent_at, id_at = pos["name"], pos.get("parent"), pos.get("id")

    def cell(row: list[str], index: int | None) -> str:
        return row[index].strip() if index is not None and index < len(row) else ""

    # The full path of every row, resolved as the taxonomy loader does.
    by_id = {cell(r, id_at): r for r in body if cell(r, id_at)}
    by_name: dict[str, list[str]] = {}
    for r in body:
        by_name.setdefault(_clean_path(path, cell(r, name_at), None), r)  # type: ignore[arg-type]
    full: dict[int, str] = {}

    def full_path(row: list[str]) -> str:
        key = id(row)
        if key not in full:
            name = _clean_path(path, cell(row, name_at), None)
            ref = cell(row, parent_at)
            parent = by_id.get(ref) or (by_name.get(_clean_path(path, ref, None)) if ref else None)
            if parent is None:
                full[key] = name
            else:
                prefix = full_path(parent)  # type: ignore[arg-type]
                full[key] = name if name.startswith(prefix + "/") else f"{prefix}/{name}"
        return full[key]

    plan: list[tuple[list[str], str, bool]] = []
    emitted: set[str] = set()
    for row in body:
        old = full_path(row)
        target = targets.get(old, old)
        if target is None:
            continue
        if target != old and (keepers.get(target) != old or target in emitted):
            continue
        emitted.add(target)
        plan.append((row, target, target != old))
    final_row = {target: row for row, target, _ in plan}
    out_rows: list[list[str]] = []
    for row, target, changed in plan:
        if not changed:
            out_rows.append(row)
            continue
        new = list(row) + [""] * (len(header) - len(row))
        parent_path = target.rpartition("/")[0] if "/" in target else None
        parent_row = final_row.get(parent_path) if parent_path else None
        if parent_at is None or parent_row is None:
            new[name_at] = target
            if parent_at is not None:
                new[parent_at] = ""
        else:
            leaf_style = "/" not in cell(row, name_at)
            new[name_at] = target.rpartition("/")[2] if leaf_style else target
            old_ref = cell(row, parent_at)
            parent_id = cell(parent_row, id_at)
            if parent_id and (old_ref in by_id or not old_ref):
                new[parent_at] = parent_id
            else:
                new[parent_at] = parent_path or ""
                new[name_at] = target
        out_rows.append(new)
    return _csv_text(header, out_rows, delimiter, end)


def _revise_yaml_taxonomy(
    dataset: Dataset, expected: Sequence[str], keepers: Mapping[str, str]
) -> str:
    """A fresh YAML tree of the revised paths (comments of the original are not kept).

    A leaf keeps the description of the entry it came from; a node with children cannot hold
    one in this shape (as when it is read), so none is written for it.
    """
    import yaml

    descriptions = {label.name: label.description for label in dataset.taxonomy}
    tree: dict[str, Any] = {}
    for name in expected:
        node = tree
        parts = name.split("/")
        for part in parts[:-1]:
            child = node.get(part)
            if not isinstance(child, dict):
                child = {}
                node[part] = child
            node = child
        if parts[-1] not in node:
            node[parts[-1]] = descriptions.get(keepers.get(name, name))
    header = "# Revised by labelreview apply; the original file's comments are not kept.\n"
    return header + yaml.safe_dump(tree, sort_keys=False, allow_unicode=True)


# -- the whole apply ---------------------------------------------------------------------------


@dataclass
class ApplyPlan:
    """Everything apply will do, computed before anything is written."""

    mapping: dict[str, LabelMapping]
    counts: AnnotationCounts
    fail_on: str
    allow_unresolved: bool
    unresolved: list[str]
    notes: list[str] = field(default_factory=list)

    def label_counts(self) -> dict[str, int]:
        """How many labels of the input were kept, renamed, merged, retired, accepted..."""
        values = list(self.mapping.values())
        return {
            "labels_in": len(values),
            "open": sum(1 for m in values if m.action == "open"),
            "accepted": sum(1 for m in values if m.action == "accept"),
            "renamed": sum(1 for m in values if m.result == "rename"),
            "merged": sum(1 for m in values if m.result == "merge"),
            "retired": sum(1 for m in values if m.action == "retire"),
            "retired_to_fallback": sum(
                1 for m in values if m.action == "retire" and m.new_label is not None
            ),
            "dropped": sum(1 for m in values if m.result == "drop"),
            "moved_with_parent": sum(1 for m in values if m.action == "follow_parent"),
        }


def plan_apply(
    session: ReviewSession, *, fail_on: str | None = None, allow_unresolved: bool = False
) -> ApplyPlan:
    """Check the log and the gate, and work out the mapping and its counts (writes nothing).

    Args:
        session: The dataset and its decision log.
        fail_on: Gate level (``low``, ``medium``, ``high``); default the config's.
        allow_unresolved: Go ahead although flags at or above the gate level are open.

    Raises:
        ApplyRefusedError: The log does not verify or ends in a torn line; or unresolved flags
            remain at the gate level and ``allow_unresolved`` is False.
        MappingError: The decisions cannot be turned into one mapping.
        UsageError: ``fail_on`` is not a severity.
    """
    level = fail_on or session.config.decisions.fail_on
    if level not in SEVERITY_RANK:
        raise UsageError(f"--fail-on must be one of {', '.join(SEVERITY_RANK)}; got {level!r}")
    verification = session.log.verify()
    if not verification.ok and verification.exists:
        raise ApplyRefusedError(
            f"the decision log {verification.status()}; nothing was written",
            hint="Run 'labelreview log verify' (or 'labelreview log repair' for a torn line).",
            source=str(verification.path),
            line=verification.problem.line if verification.problem else verification.torn_line,
        )
    state = session.state()
    unresolved = session.unresolved(level)
    if unresolved and not allow_unresolved:
        shown = ", ".join(f"'{f.label}' ({f.severity})" for f in unresolved[:FIRST_FEW])
        more = f" and {len(unresolved) - FIRST_FEW} more" if len(unresolved) > FIRST_FEW else ""
        raise ApplyRefusedError(
            f"{len(unresolved)} flag(s) at or above '{level}' are still undecided: {shown}{more}; "
            "nothing was written",
            hint="Decide them first (labelreview decide), or pass --allow-unresolved, which the "
            "manifest records.",
        )
    ann = session.config.annotations
    separator = ann.multi_label_separator if ann is not None else None
    fmt = session.dataset.reports[0].format if session.dataset.reports else ""
    mapping = build_mapping(state, session.labels, separator=None if fmt == "coco" else separator)
    targets = {name: m.new_label for name, m in mapping.items()}
    counts = count_annotations(session.dataset.annotations, targets)
    mapping = {
        name: _with_counts(m, counts.before.get(name, 0), counts.after.get(name, 0))
        for name, m in mapping.items()
    }
    notes: list[str] = []
    current = session.fingerprint().digest
    stale = [e for e in state.active_decisions() if e.get("dataset_fingerprint") != current]
    if stale:
        notes.append(
            f"{len(stale)} decision(s) in force were made on other versions of the input files "
            f"(first: seq {stale[0].seq} on '{stale[0].label}')"
        )
    other_lexicon = [
        e for e in state.active_decisions() if e.get("lexicon_hash") != session.lexicon_hash
    ]
    if other_lexicon:
        notes.append(
            f"{len(other_lexicon)} decision(s) in force were made with another lexicon set "
            f"(first: seq {other_lexicon[0].seq} on '{other_lexicon[0].label}')"
        )
    if allow_unresolved and unresolved:
        notes.append(
            f"--allow-unresolved: {len(unresolved)} flag(s) at or above '{level}' are still "
            "undecided"
        )
    return ApplyPlan(
        mapping=mapping,
        counts=counts,
        fail_on=level,
        allow_unresolved=allow_unresolved,
        unresolved=[f.label for f in unresolved],
        notes=notes,
    )


def _with_counts(m: LabelMapping, before: int, after: int) -> LabelMapping:
    return LabelMapping(
        old_label=m.old_label,
        action=m.action,
        new_label=m.new_label,
        result=m.result,
        decision_seq=m.decision_seq,
        via=m.via,
        annotations_before=before,
        annotations_after=after,
    )


def mapping_csv(mapping: Mapping[str, LabelMapping]) -> str:
    """``mapping.csv``: one row per input label (header alone for none)."""
    return csv_text(
        MAPPING_COLUMNS,
        ([mapping[name].row()[c] for c in MAPPING_COLUMNS] for name in sorted(mapping)),
    )


@dataclass
class ApplyResult:
    """What :func:`apply_decisions` wrote."""

    out_dir: Path
    files: dict[str, Path]
    """Role (annotations, taxonomy, mapping, manifest) -> path written."""
    plan: ApplyPlan
    manifest: dict[str, Any]


def _input_paths(session: ReviewSession) -> dict[str, Path]:
    config = session.config
    paths = input_paths(config)
    paths["log"] = config.log_path
    for number, layer in enumerate(config.lexicons.layers, start=1):
        paths[f"lexicon layer {number}"] = layer
    return paths


def _sha256(data: bytes) -> str:
    import hashlib

    return f"sha256:{hashlib.sha256(data).hexdigest()}"


def _check_out_dir(
    out_dir: Path, session: ReviewSession, names: Sequence[str], force: bool
) -> dict[str, Any] | None:
    """Refuse an output folder that holds inputs or anything apply did not write.

    Returns:
        The earlier manifest when the folder holds an earlier apply's output (``force``).
    """
    from labelreview.dataset import file_digest

    target = out_dir.resolve()
    if target.exists() and not target.is_dir():
        raise OutputError("--out must be a folder, and this is a file", source=str(out_dir))
    if target == session.dataset.root.resolve():
        raise OutputError(
            "--out is the dataset folder itself; apply never writes beside its inputs",
            hint="Choose a new folder, e.g. --out revised/.",
            source=str(out_dir),
        )
    inputs = _input_paths(session)
    for role, path in inputs.items():
        resolved = path.resolve()
        if resolved == target or resolved.parent == target:
            raise OutputError(
                f"--out holds the dataset's {role} file ({path.name}); apply never writes "
                "beside its inputs",
                hint="Choose an empty or new folder.",
                source=str(out_dir),
            )
        for name in names:
            if (target / name) == resolved:
                raise OutputError(
                    f"writing {name} would replace the dataset's {role} file",
                    source=str(out_dir),
                )
    if not target.exists():
        return None
    present = sorted(p.name for p in target.iterdir() if not _is_our_temp(p.name))
    if not present:
        return None
    manifest_path = target / MANIFEST_NAME
    earlier: dict[str, Any] | None = None
    if manifest_path.is_file():
        try:
            data = json.loads(manifest_path.read_text(encoding="utf-8"))
            if isinstance(data, dict) and data.get("written_by") == WRITTEN_BY:
                earlier = data
        except (OSError, ValueError):
            earlier = None
    if earlier is None:
        shown = ", ".join(present[:3]) + (
            f" and {len(present) - 3} more" if len(present) > 3 else ""
        )
        raise OutputError(
            f"--out is not empty ({shown}) and was not written by labelreview apply; nothing "
            "was written",
            hint="Choose an empty or new folder; apply never overwrites files it did not write.",
            source=str(out_dir),
        )
    if not force:
        raise OutputError(
            f"--out holds the output of an earlier apply (written {earlier.get('time', '?')})",
            hint="Pass --force to replace it, or choose a new folder.",
            source=str(out_dir),
        )
    ours = {str(o.get("file")): str(o.get("sha256")) for o in earlier.get("outputs", [])}
    for name in present:
        if name == MANIFEST_NAME:
            continue
        if name not in ours:
            raise OutputError(
                f"--out holds '{name}', which the earlier apply did not write; nothing was "
                "written, even with --force",
                hint="Move that file elsewhere, or choose a new folder.",
                source=str(out_dir),
            )
        path = target / name
        if not path.is_file() or file_digest(path) != ours[name]:
            raise OutputError(
                f"'{name}' was changed since the earlier apply wrote it; nothing was written, "
                "even with --force",
                hint="Move the edited file elsewhere first, so it is not lost.",
                source=str(out_dir),
            )
    return earlier


def _is_our_temp(name: str) -> bool:
    return name.startswith(".tmp-") and ".labelreview" in name


def _temp_name(name: str) -> str:
    return f".tmp-{os.getpid()}.labelreview-{name}"


def _verify_annotations(session: ReviewSession, tmp: Path, expected: Mapping[str, int]) -> None:
    """Read the revised annotation file back with the same loader and compare label counts."""
    import warnings

    ann = session.config.annotations
    assert ann is not None
    report = session.dataset.reports[0]
    fmt = "coco" if report.format == "coco" else report.format.removeprefix("wide-")
    columns = {} if fmt == "coco" or ann.layout == "wide" else dict(report.column_map)
    if ann.layout == "wide" and fmt != "coco":
        columns = {"item": report.column_map.get("item", "item")}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        frame, _ = load_annotations(
            tmp,
            fmt=fmt,
            layout=ann.layout,
            columns=columns or None,
            annotator_columns=ann.annotator_columns,
            multi_label_separator=ann.multi_label_separator,
            encoding=ann.encoding,
        )
    got = {str(k): int(v) for k, v in frame["label"].value_counts().items()}
    if got != dict(expected):
        diff = sorted(set(got.items()) ^ set(expected.items()))[:3]
        raise OutputError(
            "the revised annotation file did not read back as planned "
            f"(first differences: {diff}); nothing was put in place",
            hint="Please report this with the dataset's format; the inputs are untouched.",
            source=str(ann.path),
        )


def _verify_taxonomy(session: ReviewSession, tmp: Path, fmt: str, expected: Sequence[str]) -> None:
    tax = session.config.taxonomy
    assert tax is not None
    got = [label.name for label in load_taxonomy(tmp, fmt=fmt, encoding=tax.encoding)]
    if sorted(got) != sorted(expected):
        diff = sorted(set(got) ^ set(expected))[:3]
        raise OutputError(
            f"the revised taxonomy did not read back as planned (first differences: {diff}); "
            "nothing was put in place",
            hint="Please report this with the taxonomy's format; the inputs are untouched.",
            source=str(tax.path),
        )


def output_names(dataset: Dataset) -> dict[str, str]:
    """The file names apply writes, by role: the inputs' own names where they do not clash."""
    names: dict[str, str] = {}
    ann = dataset.config.annotations
    if ann is not None and ann.path is not None and dataset.annotations is not None:
        names["annotations"] = ann.path.name
    if dataset.config.taxonomy is not None and dataset.taxonomy:
        name = dataset.config.taxonomy.path.name
        names["taxonomy"] = f"taxonomy_{name}" if name in names.values() else name
    for role, name in list(names.items()):
        if name in (MANIFEST_NAME, MAPPING_NAME):
            names[role] = f"{role}_{name}"
    names["mapping"] = MAPPING_NAME
    return names


def apply_decisions(
    session: ReviewSession,
    out_dir: Path,
    *,
    fail_on: str | None = None,
    allow_unresolved: bool = False,
    force: bool = False,
    clock: Callable[[], datetime] = utc_now,
) -> ApplyResult:
    """Write the revised dataset, ``mapping.csv`` and ``manifest.json`` into ``out_dir``.

    Every file is written to a temporary file in ``out_dir`` and synced; the revised files are
    read back with the same loaders and checked against the plan; only then are they renamed
    into place, the manifest last. The inputs are only read.

    Args:
        session: The dataset and its decision log.
        out_dir: The output folder (created if missing). Refused when it is the dataset folder,
            holds an input file, or holds anything but an earlier apply's unchanged output
            (which ``force`` replaces).
        fail_on: Gate level; default the config's ``decisions.fail_on``.
        allow_unresolved: Go ahead with undecided flags at the gate level (recorded).
        force: Replace an earlier apply's output in ``out_dir``.
        clock: Time source for the manifest.

    Raises:
        ApplyRefusedError: See :func:`plan_apply`.
        MappingError: See :func:`build_mapping`.
        OutputError: The output folder is refused or cannot be written.
    """
    dataset = session.dataset
    names = output_names(dataset)
    earlier = _check_out_dir(out_dir, session, [*names.values(), MANIFEST_NAME], force)
    plan = plan_apply(session, fail_on=fail_on, allow_unresolved=allow_unresolved)
    targets = {name: m.new_label for name, m in plan.mapping.items()}
    outputs: list[_Output] = []
    file_counts = FileCounts()
    ann_format = None
    tax_expected: list[str] = []
    tax_format = ""
    if "annotations" in names and dataset.annotations is not None:
        frame = dataset.annotations
        same = frame["label"].map(lambda x: targets.get(x, x)) == frame["label"]
        unchanged = set(
            zip(
                frame.loc[same, "item"],
                frame.loc[same, "annotator"],
                frame.loc[same, "label"],
                strict=True,
            )
        )
        data, ann_format, file_counts = _revise_annotations(dataset, targets, unchanged)
        outputs.append(_Output("annotations", names["annotations"], data, ann_format))
    if "taxonomy" in names:
        data, tax_format, tax_expected = _revise_taxonomy(dataset, targets)
        outputs.append(_Output("taxonomy", names["taxonomy"], data, tax_format))
    outputs.append(_Output("mapping", MAPPING_NAME, mapping_csv(plan.mapping).encode(), "csv"))
    target = out_dir
    try:
        target.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise OutputError(
            f"cannot create the folder: {exc.strerror}", source=str(out_dir)
        ) from None

    verification = session.log.verify()
    fingerprint = session.fingerprint()
    written: list[Path] = []
    try:
        for output in outputs:
            output.tmp = target / _temp_name(output.name)
            _write_synced(output.tmp, output.data)
            written.append(output.tmp)
        for output in outputs:
            assert output.tmp is not None
            if output.role == "annotations":
                _verify_annotations(session, output.tmp, plan.counts.by_new_label)
            elif output.role == "taxonomy":
                _verify_taxonomy(session, output.tmp, tax_format, tax_expected)
        inputs = [
            {"role": role, "path": fingerprint.names.get(role, ""), "sha256": digest}
            for role, digest in sorted(fingerprint.files.items())
        ]
        counts = {
            "rows_in": file_counts.rows_in,
            "rows_out": file_counts.rows_out,
            "rows_dropped": file_counts.rows_dropped,
            "rows_changed": file_counts.rows_changed,
            "annotations_in": plan.counts.annotations_in,
            "annotations_out": plan.counts.annotations_out,
            "annotations_dropped": plan.counts.dropped,
            "annotations_merged": plan.counts.merged,
            "taxonomy_labels_in": len(dataset.taxonomy),
            "taxonomy_labels_out": len(tax_expected),
            **plan.label_counts(),
            "unresolved_flags": len(plan.unresolved),
        }
        manifest = {
            "written_by": WRITTEN_BY,
            "manifest_version": MANIFEST_VERSION,
            "tool": {"name": "labelreview", "version": tool_version()},
            "time": rfc3339(clock()),
            "dataset": {
                "name": dataset.config.name,
                "root": str(dataset.root),
                "fingerprint": fingerprint.digest,
                "annotation_format": ann_format,
                "taxonomy_format": tax_format or None,
            },
            "inputs": inputs,
            "outputs": [
                {"role": o.role, "file": o.name, "format": o.format, "sha256": _sha256(o.data)}
                for o in outputs
            ],
            "log": {
                "path": str(verification.path),
                "head": verification.head,
                "entries": len(verification.entries),
                "verified": verification.ok or not verification.exists,
                "status": verification.status(),
            },
            "lexicon_hash": session.lexicon_hash,
            "gate": {
                "fail_on": plan.fail_on,
                "allow_unresolved": plan.allow_unresolved,
                "unresolved": len(plan.unresolved),
                "unresolved_labels": plan.unresolved,
            },
            "counts": counts,
            "notes": plan.notes
            + (
                [
                    "the revised YAML taxonomy is written afresh; the original's comments are "
                    "not kept"
                ]
                if tax_format == "yaml"
                else []
            ),
            "cautions": list(CAUTIONS),
        }
        manifest_bytes = (json.dumps(manifest, indent=2, ensure_ascii=False) + "\n").encode()
        manifest_tmp = target / _temp_name(MANIFEST_NAME)
        _write_synced(manifest_tmp, manifest_bytes)
        written.append(manifest_tmp)
        files: dict[str, Path] = {}
        for output in outputs:
            assert output.tmp is not None
            final = target / output.name
            os.replace(output.tmp, final)
            files[output.role] = final
        os.replace(manifest_tmp, target / MANIFEST_NAME)
        files["manifest"] = target / MANIFEST_NAME
        fsync_dir(target)
    except OSError as exc:
        raise OutputError(
            f"could not write the output: {exc.strerror}; the inputs are untouched",
            source=str(out_dir),
        ) from None
    finally:
        for tmp in written:
            if tmp.exists():
                tmp.unlink()
    if earlier is not None:
        now = {o.name for o in outputs} | {MANIFEST_NAME}
        for old in earlier.get("outputs", []):
            name = str(old.get("file"))
            stale = target / name
            if name not in now and stale.is_file() and "/" not in name:
                stale.unlink()  # our own earlier output, checked unchanged above
    return ApplyResult(out_dir=target, files=files, plan=plan, manifest=manifest)


def _write_synced(path: Path, data: bytes) -> None:
    with open(path, "xb") as handle:
        handle.write(data)
        handle.flush()
        os.fsync(handle.fileno())


__all__ = [
    "MANIFEST_NAME",
    "MAPPING_COLUMNS",
    "MAPPING_NAME",
    "AnnotationCounts",
    "ApplyPlan",
    "ApplyRefusedError",
    "ApplyResult",
    "LabelMapping",
    "MappingError",
    "apply_decisions",
    "build_mapping",
    "cell_labels",
    "count_annotations",
    "mapping_csv",
    "plan_apply",
]
