"""The item table -> one row per item: its id, optional text and preview, consented attributes.

Items are what was labelled (photos, sentences...). labelreview reads their text (to scan captions
as well as labels) and a preview reference (a file name or address to show a curator), and
nothing else, except attribute columns the dataset config lists as given by the people
themselves, with consent (``consented: true`` and ``self_reported: true``). labelreview never uses
demographic attributes without consent and never infers them.

Other columns are read only when asked for as *context* (:func:`load_items_with_context`): the
proxy check (``labelreview.signals``) measures, column by column, how much each one says about a
consented attribute, so a curator learns which columns stand in for it. Their values are never
used to guess anything about a person.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Protocol

import pandas as pd

from labelreview.errors import ConfigError, LoadError
from labelreview.io._annotations import (
    ROLE_CANDIDATES,
    detect_format,
    normalise_header,
    resolve_columns,
)
from labelreview.io._common import as_text, check_encoding, read_table

ITEM_ROLES: tuple[str, ...] = ("item", "text", "preview")
OPTIONAL_CANDIDATES: dict[str, tuple[str, ...]] = {
    "text": ("text", "caption", "description", "sentence", "utterance"),
    "preview": (
        "preview",
        "image_file",
        "image_path",
        "image_url",
        "thumbnail",
        "thumbnail_url",
        "preview_url",
        "url",
        "path",
        "file_path",
    ),
}
"""Header names taken for the optional columns when the config does not name them; used only
when exactly one column matches. Common practice, no source."""


class AttributeSpec(Protocol):
    """What :func:`load_items` needs of an attribute entry (``config.AttributeConfig``)."""

    @property
    def column(self) -> str: ...

    @property
    def consented(self) -> bool: ...

    @property
    def self_reported(self) -> bool: ...


def _refuse_unconsented(path: Path, attribute: AttributeSpec) -> None:
    missing = [key for key in ("consented", "self_reported") if getattr(attribute, key) is not True]
    if missing:
        marks = " and ".join(f"{key}: true" for key in missing)
        raise ConfigError(
            f"attribute column '{attribute.column}' is not marked {marks}; labelreview never "
            "uses attributes without consent and never infers them",
            hint="Mark it only if the people described gave this value themselves and agreed "
            "to its use; otherwise remove it from items.attributes.",
            source=str(path),
            column=attribute.column,
        )


def load_items(
    path: Path,
    *,
    columns: Mapping[str, str] | None = None,
    attributes: Sequence[AttributeSpec] = (),
    encoding: str | None = None,
) -> pd.DataFrame:
    """Read the item table (see :func:`load_items_with_context` for the arguments)."""
    return load_items_with_context(path, columns=columns, attributes=attributes, encoding=encoding)[
        0
    ]


def load_items_with_context(
    path: Path,
    *,
    columns: Mapping[str, str] | None = None,
    attributes: Sequence[AttributeSpec] = (),
    encoding: str | None = None,
    context: Sequence[str] | None = (),
    context_key: str = "signals.proxy_columns",
) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Read the item table, and the context columns the proxy check needs.

    Args:
        path: CSV, TSV, JSON Lines, JSON list or Parquet; only read.
        columns: Role (``item``, ``text``, ``preview``) -> the file's column. ``item`` is
            detected like the annotation loader's; ``text`` and ``preview`` are taken only when
            one column has an obvious name, else left out.
        attributes: Attribute columns to keep; each must be ``consented`` and
            ``self_reported``.
        encoding: Text encoding; ``None`` means UTF-8 (a byte order mark is dropped).
        context: Other columns to return as context, by name; None: every column that is
            neither a role nor an attribute; empty: none.
        context_key: The config key that named ``context`` (for the error message).

    Returns:
        (items, context). ``items``: string columns ``item``, then ``text`` and ``preview``
        where present, then the attribute columns under their own names; one row per item.
        ``context``: the context columns as text, same rows and order.

    Raises:
        ConfigError: An attribute is not marked consented and self-reported, or repeats a role
            column.
        LoadError: Unreadable file, a missing column, a row without an item, or an item listed
            twice.
    """
    path = Path(path)
    check_encoding(encoding)
    for attribute in attributes:
        _refuse_unconsented(path, attribute)
    table = read_table(
        path, fmt=detect_format(path, kind="items", encoding=encoding), encoding=encoding
    )
    given = dict(columns or {})
    chosen = resolve_columns(
        path,
        table.columns,
        ("item",),
        {k: v for k, v in given.items() if k == "item"},
        key="items.columns",
    )
    for role in ("text", "preview"):
        if role in given:
            chosen.update(
                resolve_columns(
                    path, table.columns, (role,), {role: given[role]}, key="items.columns"
                )
            )
    unknown = sorted(set(given) - set(ITEM_ROLES))
    if unknown:
        raise ConfigError(
            f"items.columns has no role '{unknown[0]}'; the roles are {', '.join(ITEM_ROLES)}",
            source=str(path),
        )
    for role, candidates in OPTIONAL_CANDIDATES.items():
        if role in chosen:
            continue
        hits = [
            c
            for c in table.columns
            if normalise_header(c) in candidates
            and c not in chosen.values()
            and normalise_header(c) not in ROLE_CANDIDATES["item"]
        ]
        if len(hits) == 1:
            chosen[role] = hits[0]
    raw = table.frame
    out = pd.DataFrame({"item": as_text(raw[chosen["item"]]).str.strip()})
    for role in ("text", "preview"):
        if role in chosen:
            out[role] = as_text(raw[chosen[role]])
    for attribute in attributes:
        name = attribute.column
        if name in chosen.values():
            raise ConfigError(
                f"column '{name}' is used as items.columns and cannot also be an attribute",
                source=str(path),
                column=name,
            )
        if name not in table.columns:
            raise LoadError(
                f"attribute column '{name}' (listed in items.attributes) is not in the file",
                source=str(path),
                line=1,
            )
        if name in out.columns:
            raise ConfigError(f"attribute column '{name}' is listed twice", source=str(path))
        out[name] = as_text(raw[name])
    blank = out["item"] == ""
    if bool(blank.any()):
        row = int(blank.to_numpy().argmax())
        raise LoadError(
            "a row has no item", source=str(path), line=table.locate(row), column=chosen["item"]
        )
    repeated = out["item"].duplicated()
    if bool(repeated.any()):
        row = int(repeated.to_numpy().argmax())
        item = out["item"].iloc[row]
        first = int((out["item"] == item).to_numpy().argmax())
        first_line = table.locate(first)
        earlier = f" (first on line {first_line})" if first_line else ""
        raise LoadError(
            f"item '{item}' is listed twice{earlier}",
            hint="The item table needs one row per item.",
            source=str(path),
            line=table.locate(row),
            column=chosen["item"],
        )
    used = set(chosen.values()) | {a.column for a in attributes}
    if context is None:
        wanted = [c for c in table.columns if c not in used]
    else:
        wanted = list(dict.fromkeys(context))
        for name in wanted:
            if name not in table.columns:
                raise LoadError(
                    f"column '{name}' (listed in {context_key}) is not in the file",
                    source=str(path),
                    line=1,
                )
            if name in used:
                raise ConfigError(
                    f"column '{name}' (listed in {context_key}) is an item role or an "
                    "attribute, not a context column",
                    source=str(path),
                    column=name,
                )
    extra = pd.DataFrame({name: as_text(raw[name]) for name in wanted}, index=out.index)
    return out.reset_index(drop=True), extra.reset_index(drop=True)
