"""Annotation files larger than memory, read in batches.

:class:`AnnotationStream` reads a CSV, TSV, JSON Lines or Parquet file (or a folder of Parquet
files) batch by batch and cleans each batch with the same steps :func:`load_annotations` uses
(columns detected or mapped, multi-label cells split, labels stripped, empty labels dropped,
rows without an item refused), so the rows are the same as the whole-file loader's.

Agreement needs every annotation of an item together. :func:`fold_items` hands a caller
batches that each hold whole items:

- **sorted files** (item ids never decrease, as text or as whole numbers; the usual way files
  are written) are read once: the rows of each batch's last item are carried over to the next
  batch;
- **any other order**: at the first item that breaks the order, the file is read again and
  every row is written to one of several temporary files chosen by a hash of its item
  (Arrow IPC files in a temporary folder, removed afterwards); each such file then holds whole
  items and is small enough to read into memory. This costs a second read and disk space about
  the size of the cleaned rows.

Repeated (item, annotator, label) rows are dropped within each batch of whole items, as the
whole-file loader drops them, and counted.
"""

from __future__ import annotations

import codecs
import csv
import json
import math
import os
import tempfile
from collections.abc import Callable, Iterator, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, TypeVar

import numpy as np
import pandas as pd

from labelreview.errors import ConfigError, LoadError, UsageError
from labelreview.io._annotations import (
    ANNOTATION_FORMATS,
    LAYOUTS,
    _long_frame,
    _wide_frame,
    as_annotation_frame,
    clean_rows,
    detect_format,
    drop_duplicates,
    resolve_columns,
    warn_duplicates,
)
from labelreview.io._common import (
    Table,
    _header,
    check_encoding,
    is_utf8,
)
from labelreview.model import ANNOTATION_COLUMNS, LoadReport
from labelreview.progress import ProgressCallback, ProgressEvent, tell

STREAM_FORMATS: tuple[str, ...] = ("csv", "tsv", "jsonl", "parquet")
"""Formats that can be read in batches (COCO and JSON lists are single documents)."""

BATCH_BYTES = 16 << 20
"""Text read per batch (CSV, TSV, JSON Lines)."""
BATCH_ROWS = 1 << 19
"""Rows read per batch (Parquet)."""
PARTITION_BYTES = 48 << 20
"""Input bytes per temporary partition when a file is not sorted by item."""

T = TypeVar("T")


def _size(path: Path) -> int:
    if path.is_dir():
        return sum(p.stat().st_size for p in path.rglob("*.parquet") if p.is_file())
    return path.stat().st_size


@dataclass
class StreamCounts:
    """What a pass over the file read and dropped (for the :class:`LoadReport`)."""

    rows_read: int = 0
    empty_labels: int = 0
    split_cells: int = 0
    duplicates: int = 0
    notes: list[str] = field(default_factory=list)
    order: str = "auto"
    """The pass :func:`fold_items` took: ``sorted`` or ``partition``."""


class TableStream:
    """A table file (CSV, TSV, JSON Lines, Parquet or a folder of Parquet files) read in batches.

    Args:
        path: The file or folder; only read.
        fmt: ``auto`` or one of :data:`STREAM_FORMATS`.
        encoding: Text encoding of CSV, TSV and JSON Lines files (None: UTF-8).
        batch_bytes: Text per batch; ``batch_rows``: rows per Parquet batch.
        kind: ``annotations`` or ``items`` (for messages and format detection).

    Raises:
        LoadError: Missing or empty file, or an undecodable header.
        UsageError: A format that cannot be read in batches (COCO, a JSON list).
    """

    def __init__(
        self,
        path: Path,
        *,
        fmt: str = "auto",
        encoding: str | None = None,
        batch_bytes: int = BATCH_BYTES,
        batch_rows: int = BATCH_ROWS,
        kind: str = "annotations",
    ) -> None:
        self.path = Path(path)
        if fmt not in ANNOTATION_FORMATS:
            raise UsageError(
                f"unknown annotation format '{fmt}'; expected one of "
                f"{', '.join(ANNOTATION_FORMATS)}"
            )
        self.encoding = check_encoding(encoding)
        if not self.path.exists():
            raise LoadError("the file does not exist", source=str(self.path))
        if self.path.is_dir():
            resolved = "parquet"
        elif fmt == "auto":
            resolved = detect_format(self.path, kind=kind, encoding=encoding)
        else:
            resolved = fmt
        if resolved not in STREAM_FORMATS:
            raise UsageError(
                f"{self.path}: {resolved} files are single documents and cannot be read in batches",
                hint="Convert it to CSV, JSON Lines or Parquet to stream it, or read it whole "
                "(without --stream).",
            )
        if self.path.is_file() and self.path.stat().st_size == 0:
            raise LoadError("the file is empty", source=str(self.path))
        self.format = resolved
        self.batch_bytes = int(batch_bytes)
        self.batch_rows = int(batch_rows)
        self.total_bytes = _size(self.path)
        self.file_columns = self._columns()
        self.wanted: list[str] = list(self.file_columns)

    def check_columns(self, names: Sequence[str]) -> None:
        """Refuse column names the file does not have, listing the ones it has."""
        missing = [c for c in names if c not in self.file_columns]
        if missing:
            raise LoadError(
                f"column '{missing[0]}' is not in the file; columns found: "
                f"{', '.join(self.file_columns)}",
                source=str(self.path),
                line=1,
            )

    def _needed(self) -> list[str]:
        return list(self.wanted)

    # -- columns -------------------------------------------------------------------------------

    def _columns(self) -> list[str]:
        if self.format == "parquet":
            import pyarrow as pa
            import pyarrow.dataset as pads

            try:
                schema = pads.dataset(self.path, format="parquet").schema
            except (pa.ArrowException, OSError) as exc:
                raise LoadError(
                    f"not a readable Parquet file or folder ({exc})", source=str(self.path)
                ) from None
            return [str(n) for n in schema.names]
        if self.format == "jsonl":
            with open(self.path, "rb") as handle:
                for number, raw in enumerate(handle, start=1):
                    line = self._decode_line(raw, number)
                    if line.strip():
                        record = self._parse_json(line.lstrip("\ufeff"), number)
                        return [str(k) for k in record]
            raise LoadError("the file is empty", source=str(self.path))
        with open(self.path, "rb") as handle:
            head = handle.read(1 << 16)
        if not head.strip():
            raise LoadError("the file is empty", source=str(self.path))
        if not is_utf8(self.encoding):
            head = head.decode(self.encoding or "utf-8", errors="replace").encode("utf-8")
        elif head.startswith(codecs.BOM_UTF8):
            head = head[3:]
        header = _header(self.path, head, self._delimiter)
        seen: dict[str, int] = {}
        for number, name in enumerate(header, start=1):
            if name in seen:
                raise LoadError(
                    f"the header names column '{name}' twice (columns {seen[name]} and {number})",
                    hint="Rename one of them so every column has its own name.",
                    source=str(self.path),
                    line=1,
                )
            seen[name] = number
        return header

    @property
    def _delimiter(self) -> str:
        return "\t" if self.format == "tsv" else ","

    # -- raw batches ---------------------------------------------------------------------------

    def raw_batches(self) -> Iterator[tuple[pd.DataFrame, int, float]]:
        """(file columns as read, offset of the batch's first data row, fraction of the file
        read) for each batch. Columns: the role columns and ``extra_columns``."""
        if self.format == "parquet":
            yield from self._parquet_batches()
        elif self.format == "jsonl":
            yield from self._jsonl_batches()
        else:
            yield from self._csv_batches()

    def _csv_batches(self) -> Iterator[tuple[pd.DataFrame, int, float]]:
        """CSV or TSV in blocks cut at record ends, each parsed by pyarrow on its own.

        pyarrow's own streaming reader keeps memory proportional to the file in the versions
        checked (26.0), so the file is read here in ``batch_bytes`` blocks instead. A block
        ends at the last line break outside quotes: with RFC 4180 quoting a line break ends a
        record exactly when an even number of quote characters precede it in the record.
        """
        import pyarrow as pa
        import pyarrow.csv as pacsv

        encoding = None if is_utf8(self.encoding) else str(self.encoding)
        if encoding is not None and codecs.lookup(encoding).name.startswith(("utf-16", "utf-32")):
            raise UsageError(
                f"{self.path}: {encoding} text cannot be read in batches",
                hint="Convert the file to UTF-8, or read it whole (without --stream).",
            )
        needed = self._needed()
        read_options = pacsv.ReadOptions(column_names=self.file_columns, use_threads=True)
        parse_options = pacsv.ParseOptions(delimiter=self._delimiter, newlines_in_values=True)
        convert_options = pacsv.ConvertOptions(
            column_types={name: pa.string() for name in self.file_columns},
            include_columns=needed,
            strings_can_be_null=False,
            quoted_strings_can_be_null=False,
        )
        offset = 0
        done = 0
        for block in _record_blocks(self.path, self.batch_bytes):
            done += len(block)
            data = block if encoding is None else block.decode(encoding).encode("utf-8")
            try:
                table = pacsv.read_csv(
                    pa.BufferReader(data),
                    read_options=read_options,
                    parse_options=parse_options,
                    convert_options=convert_options,
                )
            except (pa.ArrowInvalid, UnicodeDecodeError) as exc:
                raise self._csv_fault(str(exc)) from None
            del data
            frame = table.to_pandas()
            del table
            if len(frame):
                yield frame, offset, min(done / max(self.total_bytes, 1), 1.0)
            offset += len(frame)

    def _parquet_batches(self) -> Iterator[tuple[pd.DataFrame, int, float]]:
        import pyarrow as pa
        import pyarrow.dataset as pads

        dataset = pads.dataset(self.path, format="parquet")
        total = max(dataset.count_rows(), 1)
        offset = 0
        try:
            for batch in dataset.to_batches(columns=self._needed(), batch_size=self.batch_rows):
                if batch.num_rows == 0:
                    continue
                frame = batch.to_pandas()
                frame.columns = [str(c) for c in frame.columns]
                offset += len(frame)
                yield frame, offset - len(frame), min(offset / total, 1.0)
        except (pa.ArrowException, OSError) as exc:
            raise LoadError(f"not a readable Parquet file ({exc})", source=str(self.path)) from None

    def _decode_line(self, raw: bytes, number: int) -> str:
        encoding = "utf-8" if is_utf8(self.encoding) else str(self.encoding)
        try:
            return raw.decode(encoding)
        except UnicodeDecodeError as exc:
            column = len(raw[: exc.start].decode(encoding, errors="replace")) + 1
            raise LoadError(
                f"the file is not valid {encoding.upper() if encoding == 'utf-8' else encoding} "
                f"(byte 0x{raw[exc.start]:02x} at line {number}, column {column})",
                hint="Pass --encoding latin-1 (or the file's encoding).",
                source=str(self.path),
                line=number,
                column=column,
            ) from None

    def _parse_json(self, line: str, number: int) -> dict[str, Any]:
        try:
            record = json.loads(line)
        except json.JSONDecodeError as exc:
            raise LoadError(
                f"not valid JSON: {exc.msg}",
                hint="Each line of a JSON Lines file must hold one complete JSON object.",
                source=str(self.path),
                line=number,
                column=exc.colno,
            ) from None
        if not isinstance(record, dict):
            raise LoadError(
                f"expected a JSON object on each line, found {type(record).__name__}",
                source=str(self.path),
                line=number,
                column=1,
            )
        return record

    def _jsonl_batches(self) -> Iterator[tuple[pd.DataFrame, int, float]]:
        needed = self._needed()
        records: list[dict[str, Any]] = []
        offset = 0
        read = unflushed = 0
        with open(self.path, "rb") as handle:
            for number, raw in enumerate(handle, start=1):
                read += len(raw)
                unflushed += len(raw)
                line = self._decode_line(raw, number)
                if number == 1:
                    line = line.lstrip("\ufeff")
                if not line.strip():
                    continue
                record = self._parse_json(line, number)
                records.append({k: record.get(k) for k in needed})
                if unflushed >= self.batch_bytes:
                    frame = pd.DataFrame.from_records(records, columns=needed)
                    yield frame, offset, read / max(self.total_bytes, 1)
                    offset += len(records)
                    records, unflushed = [], 0
        if records:
            yield pd.DataFrame.from_records(records, columns=needed), offset, 1.0

    # -- where rows are ------------------------------------------------------------------------

    def locate(self, row: int) -> int | None:
        """The 1-based line where data row ``row`` starts (scans the file; errors only)."""
        if self.format == "parquet":
            return None
        if self.format == "jsonl":
            with open(self.path, "rb") as handle:
                index = 0
                for number, raw in enumerate(handle, start=1):
                    if raw.strip():
                        if index == row:
                            return number
                        index += 1
            return None
        encoding = "utf-8-sig" if is_utf8(self.encoding) else str(self.encoding)
        with open(self.path, encoding=encoding, newline="", errors="replace") as handle:
            reader = csv.reader(handle, delimiter=self._delimiter)
            previous = 0
            index = -1  # the header is record -1
            for record in reader:
                start = previous + 1
                previous = reader.line_num
                if not record:
                    continue
                if index == row:
                    return start
                index += 1
        return None

    def _csv_fault(self, arrow_message: str) -> LoadError:
        """Find where a CSV that pyarrow rejected goes wrong, reading it once more in pieces."""
        encoding = "utf-8" if is_utf8(self.encoding) else str(self.encoding)
        bad = _first_undecodable(self.path, encoding)
        if bad is not None:
            line, column, byte = bad
            raise LoadError(
                f"the file is not valid {'UTF-8' if encoding == 'utf-8' else encoding} "
                f"(byte 0x{byte:02x} at line {line}, column {column})",
                hint="Pass --encoding latin-1 (or the file's encoding), or set `encoding:` for "
                "this file in labelreview.yaml.",
                source=str(self.path),
                line=line,
                column=column,
            )
        kind = "tab" if self._delimiter == "\t" else "comma"
        with open(self.path, encoding=encoding, newline="") as handle:
            if is_utf8(self.encoding):
                first = handle.read(1)
                if first != "\ufeff":
                    handle.seek(0)
            reader = csv.reader(handle, delimiter=self._delimiter, strict=True)
            width: int | None = None
            previous = 0
            try:
                for record in reader:
                    start = previous + 1
                    previous = reader.line_num
                    if not record:
                        continue
                    if width is None:
                        width = len(record)
                    elif len(record) != width:
                        return LoadError(
                            f"this row has {len(record)} fields but the header has {width}",
                            hint=(
                                f"A field containing a {kind}, a quote or a line break must be "
                                'enclosed in double quotes, with inner quotes doubled ("") '
                                "(RFC 4180, section 2)."
                            ),
                            source=str(self.path),
                            line=start,
                        )
            except csv.Error as exc:
                return LoadError(
                    f"malformed CSV: {exc}",
                    hint="Check the quoting on this line (RFC 4180, section 2).",
                    source=str(self.path),
                    line=reader.line_num,
                )
        return LoadError(f"cannot parse the file: {arrow_message}", source=str(self.path))


class AnnotationStream(TableStream):
    """An annotation file read in batches, cleaned as :func:`load_annotations` cleans it.

    Args:
        path: The file or folder; only read.
        fmt: ``auto`` or one of :data:`STREAM_FORMATS`.
        layout: ``long`` or ``wide`` (as for :func:`load_annotations`).
        columns: Role -> the file's column (roles left out are detected).
        annotator_columns: Wide layout: the annotator columns.
        multi_label_separator: Split cells holding it (None: never).
        encoding: Text encoding of CSV, TSV and JSON Lines files (None: UTF-8).
        batch_bytes: Text per batch; ``batch_rows``: rows per Parquet batch.
        extra_columns: Other columns to carry along in :meth:`raw_batches` (free text).

    Raises:
        LoadError: Missing or empty file, undecodable header, columns that cannot be told apart.
        UsageError: A format that cannot be read in batches (COCO, a JSON list).
    """

    def __init__(
        self,
        path: Path,
        *,
        fmt: str = "auto",
        layout: str = "long",
        columns: Mapping[str, str] | None = None,
        annotator_columns: Sequence[str] = (),
        multi_label_separator: str | None = "|",
        encoding: str | None = None,
        batch_bytes: int = BATCH_BYTES,
        batch_rows: int = BATCH_ROWS,
        extra_columns: Sequence[str] = (),
    ) -> None:
        if layout not in LAYOUTS:
            raise UsageError(f"unknown layout '{layout}'; expected one of {', '.join(LAYOUTS)}")
        if multi_label_separator == "":
            raise UsageError("multi_label_separator must be a non-empty string or None")
        super().__init__(
            path, fmt=fmt, encoding=encoding, batch_bytes=batch_bytes, batch_rows=batch_rows
        )
        self.layout = layout
        self.annotator_columns = tuple(annotator_columns)
        self.separator = multi_label_separator
        if layout == "wide":
            self.chosen = self._wide_roles(columns)
        else:
            if annotator_columns:
                raise ConfigError(
                    "annotations.annotator_columns applies only to the wide layout",
                    hint="Set annotations.layout: wide, or remove annotator_columns.",
                    source=str(self.path),
                )
            self.chosen = resolve_columns(self.path, self.file_columns, ANNOTATION_COLUMNS, columns)
        self.check_columns(extra_columns)
        self.extra_columns = tuple(extra_columns)
        self.counts = StreamCounts()
        if layout == "wide":
            needed = list(self.file_columns)
        else:
            needed = [self.chosen[r] for r in ANNOTATION_COLUMNS]
        self.wanted = needed + [c for c in self.extra_columns if c not in needed]

    def _wide_roles(self, columns: Mapping[str, str] | None) -> dict[str, str]:
        empty = pd.DataFrame({c: pd.Series(dtype=object) for c in self.file_columns})
        table = Table(empty, self.format, lambda _row: None, list(self.file_columns))
        _, chosen = _wide_frame(self.path, table, columns, self.annotator_columns)
        return chosen

    # -- clean rows ----------------------------------------------------------------------------

    def row_batches(self, progress: ProgressCallback | None = None) -> Iterator[pd.DataFrame]:
        """Cleaned rows (``item``, ``annotator``, ``label``) batch by batch, in file order.

        Batches do not hold whole items; :func:`fold_items` makes batches that do. Counters in
        :attr:`counts` are reset at the start.
        """
        report = tell(progress)
        self.counts = StreamCounts()
        task = f"reading {self.path.name}"
        wide = self.layout == "wide"
        for raw, offset, fraction in self.raw_batches():
            self.counts.rows_read += len(raw)
            table = Table(raw, self.format, lambda _row: None, list(raw.columns))
            if wide:
                frame, _ = _wide_frame(
                    self.path, table, {"item": self.chosen["item"]}, self.annotator_columns
                )
            else:
                frame, _ = _long_frame(
                    self.path, table, {r: self.chosen[r] for r in ANNOTATION_COLUMNS}
                )
            frame["_row"] = frame["_row"].to_numpy() + offset
            frame, found = clean_rows(
                frame,
                path=self.path,
                wide=wide,
                chosen=self.chosen,
                locate=self.locate,
                separator=self.separator,
            )
            self.counts.empty_labels += found.empty_labels
            self.counts.split_cells += found.split_cells
            report(ProgressEvent(task, fraction * self.total_bytes, self.total_bytes))
            yield as_annotation_frame(frame)
        report(ProgressEvent(task, self.total_bytes, self.total_bytes, finished=True))

    def report(self) -> LoadReport:
        """What the last pass read and dropped, as the whole-file loader reports it."""
        notes = list(self.counts.notes)
        if self.layout == "wide" and self.counts.empty_labels:
            notes.insert(
                0,
                f"{self.counts.empty_labels} blank cell(s) skipped (no label from that annotator)",
            )
        if self.counts.split_cells:
            notes.append(
                f"{self.counts.split_cells} multi-label cell(s) split into one row per label"
            )
        chosen = dict(self.chosen)
        return LoadReport(
            path=str(self.path),
            format=f"wide-{self.format}" if self.layout == "wide" else self.format,
            rows_read=self.counts.rows_read,
            duplicates_dropped=self.counts.duplicates,
            empty_labels_dropped=self.counts.empty_labels,
            column_map=chosen,
            notes=tuple(notes),
        )


def _first_undecodable(path: Path, encoding: str) -> tuple[int, int, int] | None:
    """(line, column, byte) of the first byte ``encoding`` cannot decode, reading in blocks."""
    decoder = codecs.getincrementaldecoder(encoding)()
    newlines = 0
    line_tail = b""  # bytes since the last line break, before the current block (capped)
    with open(path, "rb") as handle:
        while True:
            block = handle.read(1 << 20)
            pending = decoder.getstate()[0]
            try:
                decoder.decode(block, final=not block)
            except UnicodeDecodeError as exc:
                data = exc.object if isinstance(exc.object, bytes) else pending + block
                prefix = data[: exc.start]
                cut = prefix.rfind(b"\n")
                line_text = prefix[cut + 1 :] if cut >= 0 else line_tail + prefix
                column = len(line_text.decode(encoding, errors="replace")) + 1
                return newlines + prefix.count(b"\n") + 1, column, data[exc.start]
            if not block:
                return None
            newlines += block.count(b"\n")
            cut = block.rfind(b"\n")
            line_tail = block[cut + 1 :] if cut >= 0 else (line_tail + block)[-(1 << 20) :]


def _record_blocks(path: Path, size: int) -> Iterator[bytes]:
    """The file's data rows (header and a UTF-8 byte order mark skipped) in blocks of about
    ``size`` bytes, each ending at a record end (a line break outside quotes).

    Every block starts at a record start, so a line break ends a record exactly when the
    quote characters before it in the block are even in number (a doubled quote counts two).
    """
    quote, newline = ord('"'), ord("\n")
    with open(path, "rb") as handle:
        if handle.read(3) != codecs.BOM_UTF8:
            handle.seek(0)
        carry = b""
        header_done = False
        while True:
            chunk = handle.read(size)
            if not chunk:
                break
            data = carry + chunk
            view = np.frombuffer(data, dtype=np.uint8)
            marks = np.flatnonzero((view == quote) | (view == newline))
            is_quote = view[marks] == quote
            before = np.cumsum(is_quote) - is_quote
            ends = marks[~is_quote & (before % 2 == 0)]
            if not header_done:
                if ends.size == 0:
                    carry = data
                    continue
                data = data[int(ends[0]) + 1 :]
                ends = ends[1:] - (int(ends[0]) + 1)
                header_done = True
            if ends.size == 0:
                carry = data
                continue
            cut = int(ends[-1]) + 1
            yield data[:cut]
            carry = data[cut:]
        if header_done and carry.strip():
            yield carry if carry.endswith(b"\n") else carry + b"\n"


# -- whole items ---------------------------------------------------------------------------------


class _Unsorted(Exception):
    """The file's item ids went back; whole items need the partitioned pass."""


class ItemOrder:
    """Checks, batch by batch, that item ids never go back (as text, or as whole numbers).

    Either order puts each item's rows next to each other. Whole numbers count only when every
    id is plain digits and equal numbers are equal text ("7" and "07" are different items).
    """

    def __init__(self) -> None:
        self.last: str | None = None
        self.text_ok = True
        self.number_ok = True

    def accept(self, items: pd.Series) -> bool:
        """Check the next batch's item column; False once neither order holds."""
        import pyarrow as pa
        import pyarrow.compute as pc

        if items.empty:
            return self.text_ok or self.number_ok
        values = pa.array(items, type=pa.string(), from_pandas=True)
        if isinstance(values, pa.ChunkedArray):
            values = values.combine_chunks()
        if self.last is not None:
            values = pa.concat_arrays([pa.array([self.last], type=pa.string()), values])
        head, tail = values.slice(0, len(values) - 1), values.slice(1)
        if self.text_ok and len(values) > 1:
            self.text_ok = not pc.any(pc.less(tail, head)).as_py()
        if self.number_ok:
            digits = pc.all(pc.match_substring_regex(values, r"^[0-9]{1,18}$")).as_py()
            if not digits:
                self.number_ok = False
            elif len(values) > 1:
                numbers = pc.cast(values, pa.int64())
                n_head, n_tail = numbers.slice(0, len(numbers) - 1), numbers.slice(1)
                back = pc.any(pc.less(n_tail, n_head)).as_py()
                clash = pc.any(pc.and_(pc.equal(n_tail, n_head), pc.not_equal(tail, head))).as_py()
                self.number_ok = not (back or clash)
        self.last = str(values[len(values) - 1].as_py())
        return self.text_ok or self.number_ok


def _last_item_start(items: pd.Series) -> int:
    """Where the rows of the batch's last item start (its rows are adjacent)."""
    import pyarrow as pa
    import pyarrow.compute as pc

    values = pa.array(items, type=pa.string(), from_pandas=True)
    if isinstance(values, pa.ChunkedArray):
        values = values.combine_chunks()
    last = values[len(values) - 1]
    differs = np.flatnonzero(pc.not_equal(values, last).to_numpy(zero_copy_only=False))
    return int(differs[-1]) + 1 if differs.size else 0


def _sorted_pass(
    stream: AnnotationStream, progress: ProgressCallback | None
) -> Iterator[pd.DataFrame]:
    """Whole-item batches of a file sorted by item: the last item carries over."""
    order = ItemOrder()
    pending: pd.DataFrame | None = None
    for batch in stream.row_batches(progress):
        if not order.accept(batch["item"]):
            raise _Unsorted
        if pending is not None and len(pending):
            batch = pd.concat([pending, batch], ignore_index=True)
        if batch.empty:
            continue
        cut = _last_item_start(batch["item"])
        pending = batch.iloc[cut:]
        if cut:
            yield batch.iloc[:cut].reset_index(drop=True)
    if pending is not None and len(pending):
        yield pending.reset_index(drop=True)


def partition_of(items: pd.Series, n_parts: int) -> np.ndarray:
    """Each row's partition (0 .. n_parts - 1) from a hash of its item id."""
    codes, uniques = pd.factorize(items)
    hashed = pd.util.hash_array(np.asarray(uniques, dtype=object), categorize=False)
    return (hashed % np.uint64(n_parts)).astype(np.int64)[codes]


def _partitioned_pass(
    stream: AnnotationStream,
    progress: ProgressCallback | None,
    temp_dir: Path | None,
    partition_bytes: int,
) -> Iterator[pd.DataFrame]:
    """Whole-item batches of a file in any order: spill rows to hashed partitions, read each."""
    import pyarrow as pa

    report = tell(progress)
    n_parts = max(2, math.ceil(stream.total_bytes / max(partition_bytes, 1)))
    schema = pa.schema([(c, pa.string()) for c in ANNOTATION_COLUMNS])
    with tempfile.TemporaryDirectory(prefix="labelreview-spill-", dir=temp_dir) as folder:
        paths = [Path(folder) / f"part-{i:04d}.arrow" for i in range(n_parts)]
        writers: dict[int, Any] = {}
        sinks: dict[int, Any] = {}
        try:
            for batch in stream.row_batches(progress):
                if batch.empty:
                    continue
                part = partition_of(batch["item"], n_parts)
                order = np.argsort(part, kind="stable")
                ordered = part[order]
                bounds = np.flatnonzero(np.concatenate(([True], ordered[1:] != ordered[:-1])))
                ends = np.append(bounds[1:], ordered.size)
                for lo, hi in zip(bounds, ends, strict=True):
                    p = int(ordered[lo])
                    rows = batch.iloc[order[lo:hi]]
                    table = pa.Table.from_pandas(rows, schema=schema, preserve_index=False)
                    if p not in writers:
                        sinks[p] = pa.OSFile(str(paths[p]), "wb")
                        writers[p] = pa.ipc.new_stream(sinks[p], schema)
                    writers[p].write_table(table)
        finally:
            for p in writers:
                writers[p].close()
                sinks[p].close()
        task = "reading partitions"
        for done, p in enumerate(sorted(writers), start=1):
            with pa.memory_map(str(paths[p]), "r") as source:
                table = pa.ipc.open_stream(source).read_all()
            frame = table.to_pandas()
            del table
            os.unlink(paths[p])
            report(ProgressEvent(task, done, len(writers), unit="parts"))
            yield frame
        report(ProgressEvent(task, len(writers), len(writers), unit="parts", finished=True))


def fold_items(
    stream: AnnotationStream,
    start: Callable[[], T],
    step: Callable[[T, pd.DataFrame], T],
    *,
    progress: ProgressCallback | None = None,
    temp_dir: Path | None = None,
    partition_bytes: int = PARTITION_BYTES,
    order: str = "auto",
    warn: bool = True,
) -> tuple[T, LoadReport]:
    """Fold ``step`` over batches that each hold whole items (see the module docstring).

    ``start()`` makes the initial state and is called again if a first, sorted-order pass has
    to be abandoned, so the result counts every item exactly once.

    Args:
        stream: The file.
        start: Makes the initial state.
        step: (state, batch of whole items, duplicates dropped) -> new state.
        progress: Progress callback.
        temp_dir: Where the temporary partitions go (default: the system's temporary folder).
        partition_bytes: Input bytes per partition in the partitioned pass.
        order: ``auto`` (sorted pass, partitioned when the order breaks), ``sorted`` (refuse
            unsorted files) or ``partition`` (always partition).
        warn: Warn about dropped duplicates (off for a second pass over the same file).

    Returns:
        The final state and the load report (duplicates dropped, notes on the pass taken).

    Warns:
        DuplicateRowsWarning: Repeated (item, annotator, label) rows were dropped.
    """
    if order not in ("auto", "sorted", "partition"):
        raise UsageError(f"order must be auto, sorted or partition; got {order!r}")
    note: str
    duplicates = 0

    def run(batches: Iterator[pd.DataFrame]) -> T:
        nonlocal duplicates
        state = start()
        duplicates = 0
        for batch in batches:
            batch, dropped = drop_duplicates(batch)
            duplicates += dropped
            state = step(state, batch.reset_index(drop=True) if dropped else batch)
        return state

    if order == "partition":
        state = run(_partitioned_pass(stream, progress, temp_dir, partition_bytes))
        note = "read twice: items are not grouped, so rows went to temporary partitions by item"
    else:
        try:
            state = run(_sorted_pass(stream, progress))
            note = "read once in batches (the file is sorted by item)"
        except _Unsorted:
            if order == "sorted":
                raise LoadError(
                    "the file is not sorted by item, so its items cannot be read whole batch "
                    "by batch",
                    hint="Sort it by the item column, or let labelreview partition it on disk.",
                    source=str(stream.path),
                ) from None
            tell(progress)(ProgressEvent(f"reading {stream.path.name}", 0, None, finished=True))
            state = run(_partitioned_pass(stream, progress, temp_dir, partition_bytes))
            note = "not sorted by item: read again and partitioned by item into temporary files"
    stream.counts.duplicates = duplicates
    stream.counts.notes.append(note)
    stream.counts.order = "sorted" if note.startswith("read once") else "partition"
    if duplicates and warn:
        warn_duplicates(stream.path, duplicates)
    return state, stream.report()


__all__ = [
    "BATCH_BYTES",
    "PARTITION_BYTES",
    "STREAM_FORMATS",
    "AnnotationStream",
    "ItemOrder",
    "fold_items",
    "partition_of",
]
