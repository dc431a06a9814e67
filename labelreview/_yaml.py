"""One YAML reader for config, taxonomy and lexicon files: a node tree with line numbers, and a
syntax error turned into the caller's LabelReviewError naming file, line and column."""

from __future__ import annotations

from pathlib import Path

import yaml

from labelreview.errors import LabelReviewError


def compose(path: Path | str, text: str, error: type[LabelReviewError]) -> yaml.Node | None:
    """Parse ``text`` (read from ``path``) into a YAML node tree, or None for an empty file.

    Raises:
        error: for invalid YAML, with the file, line and column of the problem.
    """
    try:
        loader = yaml.SafeLoader(text)
        try:
            return loader.get_single_node()
        finally:
            loader.dispose()
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
