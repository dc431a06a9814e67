"""The filter dialog: status, severity and category side by side, each value with its count.

Moving the highlight in one list changes the pending filter at once, and the other lists and
the "would show" line count again, so the curator sees what a choice leaves before taking it.
Enter applies, Escape leaves the filters as they were, ``c`` sets every list back to "any".
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import replace

from textual import on
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical
from textual.content import Content
from textual.screen import ModalScreen
from textual.widgets import Footer, Label, OptionList, Static
from textual.widgets.option_list import Option

from labelreview.model import SEVERITIES
from labelreview.tui.filters import DIMENSIONS, Dimension, FilterState, apply_filters, option_counts
from labelreview.tui.rows import STATUSES, QueueRow, category_words

ANY = "any"


class FilterScreen(ModalScreen[FilterState | None]):
    """Pick filters with live counts; returns the new :class:`FilterState` or None."""

    BINDINGS = [
        Binding("escape", "cancel", "cancel"),
        Binding("enter", "apply", "apply", priority=True),
        Binding("c", "clear", "clear all"),
        # Priority: the lists scroll sideways on left/right otherwise.
        Binding("left", "other_list(-1)", "previous list", show=False, priority=True),
        Binding("right", "other_list(1)", "next list", show=False, priority=True),
    ]

    def __init__(self, rows: Sequence[QueueRow], state: FilterState, categories: Sequence[str]):
        super().__init__()
        self.rows = rows
        self.pending = state
        self.values: dict[Dimension, list[str | None]] = {
            "status": [None, *STATUSES],
            "severity": [None, *reversed(SEVERITIES)],
            "category": [None, *categories],
        }

    def compose(self) -> ComposeResult:
        with Vertical(id="filter-dialog"):
            yield Static(Content.from_markup("[b $primary]Filter the queue[/]"), id="dialog-title")
            with Horizontal(id="filter-lists"):
                for dimension in DIMENSIONS:
                    wide = " -wide" if dimension == "category" else ""
                    with Vertical(classes=f"filter-column{wide}"):
                        yield Label(dimension, classes="field-label")
                        yield OptionList(id=f"filter-{dimension}")
            yield Static(id="filter-total")
            if self.pending.search:
                yield Static(
                    Content.assemble(
                        "the search ", (f"“{self.pending.search}”", "bold"), " stays on"
                    ),
                    classes="hint",
                )
        yield Footer()

    def on_mount(self) -> None:
        for dimension in DIMENSIONS:
            widget = self.query_one(f"#filter-{dimension}", OptionList)
            widget.add_options(self._options(dimension))
            current = getattr(self.pending, dimension)
            values = self.values[dimension]
            widget.highlighted = values.index(current) if current in values else 0
        self._recount()
        self.query_one("#filter-status", OptionList).focus()

    def _options(self, dimension: Dimension) -> list[Option]:
        counts = option_counts(self.rows, self.pending, dimension)
        total = sum(counts.values()) if dimension != "category" else None
        options = []
        for value in self.values[dimension]:
            options.append(Option(self._prompt(dimension, value, counts, total)))
        return options

    def _prompt(
        self, dimension: Dimension, value: str | None, counts, total: int | None
    ) -> Content:  # noqa: ANN001
        if value is None:
            count = (
                total
                if total is not None
                else len(apply_filters(self.rows, self.pending.without(dimension)))
            )
            name = ANY
        else:
            count = counts.get(value, 0)
            name = category_words(value) if dimension == "category" else value
        return Content.assemble(
            name.ljust(30 if dimension == "category" else 10), (f"{count:>7,}", "$text-muted")
        )

    def _recount(self) -> None:
        for dimension in DIMENSIONS:
            widget = self.query_one(f"#filter-{dimension}", OptionList)
            counts = option_counts(self.rows, self.pending, dimension)
            total = sum(counts.values()) if dimension != "category" else None
            for index, value in enumerate(self.values[dimension]):
                widget.replace_option_prompt_at_index(
                    index, self._prompt(dimension, value, counts, total)
                )
        shown = len(apply_filters(self.rows, self.pending))
        self.query_one("#filter-total", Static).update(
            Content.assemble(
                ("would show ", "$text-muted"),
                (f"{shown:,}", "bold"),
                (f" of {len(self.rows):,} flagged labels", "$text-muted"),
            )
        )

    @on(OptionList.OptionHighlighted)
    def _highlighted(self, event: OptionList.OptionHighlighted) -> None:
        event.stop()
        dimension = str(event.option_list.id).removeprefix("filter-")
        value = self.values[dimension][event.option_index]  # type: ignore[index]
        if getattr(self.pending, dimension) != value:
            self.pending = replace(self.pending, **{dimension: value})
            self._recount()

    @on(OptionList.OptionSelected)
    def _selected(self, event: OptionList.OptionSelected) -> None:
        event.stop()
        self.dismiss(self.pending)

    def action_other_list(self, step: int) -> None:
        lists = [self.query_one(f"#filter-{d}", OptionList) for d in DIMENSIONS]
        focused = self.focused
        index = lists.index(focused) if focused in lists else 0
        lists[(index + step) % len(lists)].focus()

    def action_apply(self) -> None:
        self.dismiss(self.pending)

    def action_cancel(self) -> None:
        self.dismiss(None)

    def action_clear(self) -> None:
        self.pending = FilterState(search=self.pending.search)
        for dimension in DIMENSIONS:
            self.query_one(f"#filter-{dimension}", OptionList).highlighted = 0
        self._recount()
