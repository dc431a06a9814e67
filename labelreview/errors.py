"""The errors labelreview raises: one base class, a few subclasses.

Only the CLI turns these into output (one line on stderr, exit code 2); the core never prints.
"""

from __future__ import annotations


class LabelReviewError(Exception):
    """Base of every error a user can fix by changing their input.

    Args:
        message: What went wrong, in one sentence.
        hint: What to do next (optional).
        source: Where: a path, optionally with ``line`` and ``column``.
        line: 1-based line number in ``source`` where known.
        column: 1-based column number, or a column name, where known.
    """

    def __init__(
        self,
        message: str,
        *,
        hint: str | None = None,
        source: str | None = None,
        line: int | None = None,
        column: int | str | None = None,
    ) -> None:
        super().__init__(message)
        self.message = message
        self.hint = hint
        self.source = source
        self.line = line
        self.column = column

    def where(self) -> str:
        """The location prefix, e.g. ``data/ann.csv line 4, column 'label'`` (empty if unknown)."""
        parts: list[str] = []
        if self.line is not None:
            parts.append(f"line {self.line}")
        if self.column is not None:
            col = self.column if isinstance(self.column, int) else repr(self.column)
            parts.append(f"column {col}")
        place = ", ".join(parts)
        if self.source:
            return f"{self.source} {place}".strip()
        return place

    def __str__(self) -> str:
        where = self.where()
        text = f"{where}: {self.message}" if where else self.message
        if self.hint:
            if not text.endswith((".", "!", "?", ":")):
                text += "."
            text = f"{text} {self.hint}"
        return text


class LoadError(LabelReviewError):
    """A data file is missing, unreadable, or not in a shape labelreview understands."""


class ConfigError(LabelReviewError):
    """The dataset folder's ``labelreview.yaml`` is missing a key or has a bad value."""


class LexiconError(LabelReviewError):
    """A lexicon file is malformed or inconsistent."""


class UsageError(LabelReviewError):
    """A parameter has a value outside the allowed ones."""


class LogError(LabelReviewError):
    """The decision log cannot be read, does not verify, or has a torn last line."""


class LogLockedError(LogError):
    """Another process holds the decision log's lock."""


class DecisionError(LabelReviewError):
    """A decision was refused: empty or short reason, unknown label, bad rename or fallback."""
