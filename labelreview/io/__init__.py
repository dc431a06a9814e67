"""Loaders: annotation files, taxonomies and item tables -> frames and labels.

Each loader reads one file, never writes it, and fails with one
:class:`~labelreview.errors.LoadError` naming the file and, where known, line and column.
"""

from __future__ import annotations

from labelreview.io._annotations import (
    ANNOTATION_FORMATS,
    LAYOUTS,
    DuplicateRowsWarning,
    LoadWarning,
    detect_format,
    load_annotations,
)
from labelreview.io._common import MAX_FIELD_CHARS
from labelreview.io._items import load_items, load_items_with_context
from labelreview.io._stream import STREAM_FORMATS, AnnotationStream, TableStream, fold_items
from labelreview.io._taxonomy import TAXONOMY_FORMATS, load_taxonomy

__all__ = [
    "ANNOTATION_FORMATS",
    "AnnotationStream",
    "LAYOUTS",
    "MAX_FIELD_CHARS",
    "STREAM_FORMATS",
    "TAXONOMY_FORMATS",
    "TableStream",
    "DuplicateRowsWarning",
    "LoadWarning",
    "detect_format",
    "fold_items",
    "load_annotations",
    "load_items",
    "load_items_with_context",
    "load_taxonomy",
]
