"""Taxonomy files -> the dataset's vocabulary as :class:`~labelreview.model.TaxonomyLabel` values.

A taxonomy is the list of labels annotators could choose from, whether or not anyone used them;
scanning it finds problems before they reach the annotations. Three shapes are read:

- plain text: one label a line, ``#`` comment lines and blank lines skipped; ``a/b/c`` is a
  path whose parent is ``a/b``;
- CSV (or TSV): columns ``id``, ``name``, ``parent``, ``description`` (only ``name`` is
  required); ``parent`` may hold a parent's id or name; names become full paths ``parent/child``;
- YAML: a tree of nested mappings and lists, each node becoming a path such as ``people/roles/x``.

Labels are returned in file order, each once; hierarchy paths use ``/`` with the parts stripped.
"""

from __future__ import annotations

import csv
import io
from pathlib import Path
from typing import Any

import yaml

from labelreview._yaml import compose
from labelreview.errors import LoadError, UsageError
from labelreview.io._common import (
    MAX_FIELD_CHARS,
    check_encoding,
    decode,
    read_bytes,
    unknown_extension,
)
from labelreview.model import TaxonomyLabel

TAXONOMY_FORMATS: tuple[str, ...] = ("auto", "text", "csv", "tsv", "yaml")
TAXONOMY_EXTENSIONS: dict[str, str] = {
    ".txt": "text",
    ".text": "text",
    ".lst": "text",
    ".csv": "csv",
    ".tsv": "tsv",
    ".tab": "tsv",
    ".yaml": "yaml",
    ".yml": "yaml",
}

_COLUMN_ALIASES: dict[str, tuple[str, ...]] = {
    "id": ("id", "label_id", "category_id", "code"),
    "name": ("name", "label", "label_name", "category", "title"),
    "parent": ("parent", "parent_id", "parent_name", "broader"),
    "description": ("description", "definition", "note", "notes", "gloss"),
}
"""Accepted header names for the taxonomy CSV columns (case-insensitive). Common practice, no
source."""


def detect_taxonomy_format(path: Path) -> str:
    """``text``, ``csv``, ``tsv`` or ``yaml`` from the file name ending.

    Raises:
        LoadError: An ending not listed in :data:`TAXONOMY_EXTENSIONS`.
    """
    fmt = TAXONOMY_EXTENSIONS.get(path.suffix.lower())
    if fmt is None:
        raise unknown_extension(path, list(TAXONOMY_EXTENSIONS), "taxonomy.format")
    return fmt


def _clean_path(path: Path, raw: str, line: int | None, column: int | str | None = None) -> str:
    """``" people / roles /x "`` -> ``"people/roles/x"``; refuse empty parts and huge values."""
    if len(raw) > MAX_FIELD_CHARS:
        raise LoadError(
            f"a label is {len(raw):,} characters long (more than {MAX_FIELD_CHARS:,})",
            hint="Usually a quote opened and never closed; check the quoting on or before "
            "this line.",
            source=str(path),
            line=line,
            column=column,
        )
    parts = [part.strip() for part in raw.strip().split("/")]
    if any(not part for part in parts):
        raise LoadError(
            f"the label '{raw.strip()}' has an empty part between slashes",
            hint="Hierarchical labels are written parent/child, with no leading, trailing or "
            "doubled '/'.",
            source=str(path),
            line=line,
            column=column,
        )
    return "/".join(parts)


def _parent_of(name: str) -> str | None:
    head, sep, _ = name.rpartition("/")
    return head if sep else None


def _keep_first(labels: list[TaxonomyLabel]) -> list[TaxonomyLabel]:
    seen: set[str] = set()
    out: list[TaxonomyLabel] = []
    for label in labels:
        if label.name not in seen:
            seen.add(label.name)
            out.append(label)
    return out


def _read_text(path: Path, text: str) -> list[TaxonomyLabel]:
    labels: list[TaxonomyLabel] = []
    for number, line in enumerate(text.splitlines(), start=1):
        stripped = line.strip()
        if not stripped or stripped.startswith("#"):
            continue
        name = _clean_path(path, stripped, number)
        labels.append(TaxonomyLabel(name=name, parent=_parent_of(name)))
    return _keep_first(labels)


def _read_csv(path: Path, text: str, delimiter: str) -> list[TaxonomyLabel]:
    reader = csv.reader(io.StringIO(text, newline=""), delimiter=delimiter, strict=True)
    rows: list[tuple[int, list[str]]] = []
    previous = 0
    try:
        for row in reader:
            start, previous = previous + 1, reader.line_num
            if row:
                rows.append((start, row))
    except csv.Error as exc:
        raise LoadError(
            f"malformed CSV: {exc}",
            hint="Check the quoting on this line (RFC 4180, section 2).",
            source=str(path),
            line=reader.line_num,
        ) from None
    if not rows:
        raise LoadError("the file is empty", source=str(path))
    header = [h.strip() for h in rows[0][1]]
    lowered = [h.lower() for h in header]
    position: dict[str, int] = {}
    for role, aliases in _COLUMN_ALIASES.items():
        hits = [i for i, h in enumerate(lowered) if h in aliases]
        exact = [i for i in hits if lowered[i] == role]
        hits = exact or hits
        if len(hits) > 1:
            names = ", ".join(f"'{header[i]}'" for i in hits)
            raise LoadError(
                f"columns {names} could each be the taxonomy's {role} column",
                hint="Rename all but one of them.",
                source=str(path),
                line=1,
            )
        if hits:
            position[role] = hits[0]
    if "name" not in position:
        raise LoadError(
            "the taxonomy has no 'name' column; columns found: "
            + ", ".join(f"'{h}'" for h in header),
            hint="A taxonomy CSV needs a 'name' column, and may have 'id', 'parent' and "
            "'description'.",
            source=str(path),
            line=1,
        )

    def cell(row: list[str], role: str) -> str:
        index = position.get(role)
        return row[index].strip() if index is not None and index < len(row) else ""

    records: list[dict[str, Any]] = []
    for line, row in rows[1:]:
        if len(row) != len(header):
            raise LoadError(
                f"this row has {len(row)} fields but the header has {len(header)}",
                hint="Quote fields containing the delimiter (RFC 4180, section 2).",
                source=str(path),
                line=line,
            )
        raw_name = cell(row, "name")
        if not raw_name:
            raise LoadError(
                "a row has no name", source=str(path), line=line, column=header[position["name"]]
            )
        records.append(
            {
                "line": line,
                "id": cell(row, "id") or None,
                "name": _clean_path(path, raw_name, line, header[position["name"]]),
                "parent": cell(row, "parent") or None,
                "description": cell(row, "description") or None,
            }
        )

    by_id: dict[str, dict[str, Any]] = {}
    for record in records:
        if record["id"] is not None:
            if record["id"] in by_id:
                raise LoadError(
                    f"id '{record['id']}' is used twice (lines {by_id[record['id']]['line']} "
                    f"and {record['line']})",
                    source=str(path),
                    line=record["line"],
                    column="id",
                )
            by_id[record["id"]] = record
    by_name: dict[str, list[dict[str, Any]]] = {}
    for record in records:
        by_name.setdefault(record["name"], []).append(record)

    paths: dict[int, str] = {}

    def full_path(record: dict[str, Any], trail: tuple[int, ...]) -> str:
        key = record["line"]
        if key in paths:
            return paths[key]
        if key in trail:
            raise LoadError(
                f"'{record['name']}' is its own ancestor (the parent links form a loop)",
                source=str(path),
                line=key,
                column="parent",
            )
        ref = record["parent"]
        if ref is None:
            result = record["name"]
        else:
            parent = by_id.get(ref)
            if parent is None:
                named = by_name.get(_clean_path(path, ref, key, "parent"), [])
                if len(named) > 1:
                    lines = ", ".join(str(r["line"]) for r in named)
                    raise LoadError(
                        f"parent '{ref}' matches several rows (lines {lines})",
                        hint="Give rows an 'id' and refer to parents by id.",
                        source=str(path),
                        line=key,
                        column="parent",
                    )
                parent = named[0] if named else None
            if parent is None:
                raise LoadError(
                    f"parent '{ref}' is neither an id nor a name in this taxonomy",
                    source=str(path),
                    line=key,
                    column="parent",
                )
            prefix = full_path(parent, (*trail, key))
            name = record["name"]
            result = name if name.startswith(prefix + "/") else f"{prefix}/{name}"
        paths[key] = result
        return result

    labels = []
    for record in records:
        name = full_path(record, ())
        labels.append(
            TaxonomyLabel(
                name=name,
                id=record["id"],
                parent=_parent_of(name),
                description=record["description"],
            )
        )
    return _keep_first(labels)


def _read_yaml(path: Path, text: str) -> list[TaxonomyLabel]:
    root = compose(path, text, LoadError)
    if root is None:
        raise LoadError("the file is empty", source=str(path))
    labels: list[TaxonomyLabel] = []

    def where(node: yaml.Node) -> dict[str, Any]:
        return {
            "source": str(path),
            "line": node.start_mark.line + 1,
            "column": node.start_mark.column + 1,
        }

    def name_of(node: yaml.Node) -> str:
        if not isinstance(node, yaml.ScalarNode) or node.tag == "tag:yaml.org,2002:null":
            raise LoadError("expected a label name here", **where(node))
        return _clean_path(
            path, str(node.value), node.start_mark.line + 1, node.start_mark.column + 1
        )

    def add(name: str, parent: str | None, description: str | None = None) -> str:
        full = f"{parent}/{name}" if parent else name
        labels.append(TaxonomyLabel(name=full, parent=_parent_of(full), description=description))
        return full

    def walk(node: yaml.Node, parent: str | None) -> None:
        if isinstance(node, yaml.MappingNode):
            seen: dict[str, int] = {}
            for key_node, value_node in node.value:
                name = name_of(key_node)
                if name in seen:
                    raise LoadError(
                        f"'{name}' appears twice under the same parent (first on line "
                        f"{seen[name]})",
                        **where(key_node),
                    )
                seen[name] = key_node.start_mark.line + 1
                if isinstance(value_node, yaml.ScalarNode):
                    description = (
                        None
                        if value_node.tag == "tag:yaml.org,2002:null" or value_node.value == ""
                        else str(value_node.value)
                    )
                    add(name, parent, description)
                else:
                    walk(value_node, add(name, parent))
        elif isinstance(node, yaml.SequenceNode):
            for child in node.value:
                if isinstance(child, yaml.ScalarNode):
                    add(name_of(child), parent)
                elif isinstance(child, yaml.MappingNode):
                    walk(child, parent)
                else:
                    raise LoadError(
                        "a list inside a list has no name; write it under a key", **where(child)
                    )
        else:
            add(name_of(node), parent)

    walk(root, None)
    return _keep_first(labels)


def load_taxonomy(
    path: Path, *, fmt: str = "auto", encoding: str | None = None
) -> list[TaxonomyLabel]:
    """Read a taxonomy file (plain text, CSV/TSV or a YAML tree).

    Args:
        path: The file; only read.
        fmt: ``auto`` (from the name ending), ``text``, ``csv``, ``tsv`` or ``yaml``.
        encoding: Text encoding; ``None`` means UTF-8 (a byte order mark is dropped).

    Returns:
        The labels in file order, each once, ``name`` being the full path for hierarchies.

    Raises:
        LoadError: Missing, empty, undecodable or malformed file; an unresolvable parent.
        UsageError: ``fmt`` or ``encoding`` is not a known value.

    Example:
        A text file holding ``animals`` and ``animals/dog`` gives two labels; the second has
        ``parent == "animals"``.
    """
    path = Path(path)
    if fmt not in TAXONOMY_FORMATS:
        raise UsageError(
            f"unknown taxonomy format '{fmt}'; expected one of {', '.join(TAXONOMY_FORMATS)}"
        )
    check_encoding(encoding)
    resolved = detect_taxonomy_format(path) if fmt == "auto" else fmt
    text = decode(path, read_bytes(path), encoding)
    if resolved == "text":
        labels = _read_text(path, text)
    elif resolved in ("csv", "tsv"):
        labels = _read_csv(path, text, "," if resolved == "csv" else "\t")
    else:
        labels = _read_yaml(path, text)
    if not labels:
        raise LoadError("the taxonomy holds no labels", source=str(path))
    return labels
