"""One YAML reader for config, taxonomy and lexicon files: a node tree with line numbers, and a
syntax error turned into the caller's LabelReviewError naming file, line and column."""

from __future__ import annotations

from pathlib import Path

import yaml

from labelreview.errors import LabelReviewError

# libyaml's parser (when PyYAML was built with it) composes the same node tree with the same
# marks several times faster; the lexicon set alone is 2,500 entries. A file it refuses is read
# again by the pure-Python parser, whose messages are the ones users (and tests) see.
_FAST: type | None = getattr(yaml, "CSafeLoader", None)


def _compose_with(loader_cls: type, text: str) -> yaml.Node | None:
    loader = loader_cls(text)
    try:
        return loader.get_single_node()
    finally:
        loader.dispose()


def compose(path: Path | str, text: str, error: type[LabelReviewError]) -> yaml.Node | None:
    """Parse ``text`` (read from ``path``) into a YAML node tree, or None for an empty file.

    Raises:
        error: for invalid YAML, with the file, line and column of the problem.
    """
    if _FAST is not None:
        try:
            return _compose_with(_FAST, text)
        except yaml.YAMLError:
            pass  # fall through for the pure-Python parser's message
    try:
        return _compose_with(yaml.SafeLoader, text)
    except yaml.MarkedYAMLError as exc:
        mark = exc.problem_mark or exc.context_mark
        raise error(
            f"not valid YAML: {exc.problem or exc.context}",
            source=str(path),
            line=mark.line + 1 if mark else None,
            column=mark.column + 1 if mark else None,
        ) from None
    except yaml.YAMLError as exc:
        raise error(f"not valid YAML: {exc}", source=str(path)) from None
