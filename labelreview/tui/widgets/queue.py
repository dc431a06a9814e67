"""The queue of flagged labels: a Line-API widget that draws only the lines on screen.

Textual's DataTable measures every cell of every row after rows are added (seconds at 50,000
rows, again after each refill) and each ``update_cell`` rebuilds its row caches; this widget
keeps a plain list of rows and renders the visible ones on demand, so a filter is one list
assignment and a status change repaints one line. Line 0 is a fixed header.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

from rich.segment import Segment
from rich.style import Style
from textual import events
from textual.binding import Binding
from textual.geometry import Size
from textual.message import Message
from textual.reactive import reactive
from textual.scroll_view import ScrollView
from textual.strip import Strip

from labelreview.tui.rows import QueueRow, category_words

STATUS_MARKS: dict[str, str] = {
    "open": "· open",
    "accepted": "✓ accepted",
    "renamed": "→ renamed",
    "retired": "× retired",
}
"""Status words with a leading mark; the word itself always carries the meaning."""


@dataclass(frozen=True)
class Columns:
    """Column widths for one widget width (0 means the column is left out)."""

    status: int = 10
    severity: int = 8
    label: int = 30
    category: int = 24
    items: int = 6
    alpha: int = 5

    @classmethod
    def fit(cls, width: int) -> Columns:
        # pad, status, gap, severity, gap, [label], gap, items, gap, alpha, pad
        fixed = 1 + 10 + 1 + 8 + 1 + 1 + 6 + 1 + 5 + 1
        if width < 90:  # the categories are in the detail pane too; the label comes first
            return cls(category=0, label=max(width - fixed, 8))
        category = min(24, max(14, (width - fixed) // 4))
        return cls(category=category, label=max(width - fixed - category - 1, 8))


def _fit(text: str, width: int, right: bool = False) -> str:
    if width <= 0:
        return ""
    if len(text) > width:
        text = text[: max(width - 1, 0)] + "…"
    return text.rjust(width) if right else text.ljust(width)


def alpha_text(row: QueueRow, measured: bool) -> str:
    if row.agreement is None or row.alpha is None:
        return "…" if not measured else "–"
    return f"{row.alpha:.2f}"


class QueueView(ScrollView, can_focus=True):
    """Flagged labels, most urgent first, with status, severity, categories, items, alpha."""

    BINDINGS = [
        Binding("down,j", "cursor_down", "move", key_display="↑↓jk"),
        Binding("up,k", "cursor_up", "up", show=False),
        Binding("pagedown", "page_down", "page down", show=False),
        Binding("pageup", "page_up", "page up", show=False),
        Binding("home,g", "first", "first", show=False),
        Binding("end,G", "last", "last", show=False),
    ]

    COMPONENT_CLASSES = {
        "queue-view--header",
        "queue-view--cursor",
        "queue-view--cursor-blurred",
        "queue-view--high",
        "queue-view--medium",
        "queue-view--low",
        "queue-view--open",
        "queue-view--accepted",
        "queue-view--renamed",
        "queue-view--retired",
        "queue-view--decided",
        "queue-view--reliable",
        "queue-view--tentative",
        "queue-view--unreliable",
        "queue-view--muted",
        "queue-view--empty",
    }

    DEFAULT_CSS = """
    QueueView {
        overflow-x: hidden;
        overflow-y: auto;
        background: $surface;
        & > .queue-view--header { text-style: bold; color: $text-muted; background: $panel; }
        & > .queue-view--cursor { background: $primary 40%; text-style: bold; }
        & > .queue-view--cursor-blurred { background: $primary 15%; }
        & > .queue-view--high { color: $error; text-style: bold; }
        & > .queue-view--medium { color: $warning; }
        & > .queue-view--low { color: $text-muted; }
        & > .queue-view--open { color: $text; }
        & > .queue-view--accepted { color: $success; }
        & > .queue-view--renamed { color: $accent; }
        & > .queue-view--retired { color: $secondary; }
        & > .queue-view--decided { color: $text-muted; }
        & > .queue-view--reliable { color: $success; }
        & > .queue-view--tentative { color: $warning; }
        & > .queue-view--unreliable { color: $error; }
        & > .queue-view--muted { color: $text-muted; }
        & > .queue-view--empty { color: $text-muted; text-style: italic; }
    }
    """

    cursor: reactive[int] = reactive(0, always_update=True, init=False)
    """Index into the shown rows."""

    class Highlighted(Message):
        """The cursor is on another row (or on none)."""

        def __init__(self, queue: QueueView, row: QueueRow | None) -> None:
            super().__init__()
            self.queue = queue
            self.row = row

        @property
        def control(self) -> QueueView:
            return self.queue

    def __init__(self, *, id: str | None = None) -> None:  # noqa: A002 - Textual's name
        super().__init__(id=id)
        self.rows: list[QueueRow] = []
        self.measured = False
        """True once agreement was measured (a missing figure then reads "–", not "…")."""
        self.empty_text = "Loading…"
        self._last_posted: QueueRow | None = None
        self._line_cache: dict[tuple[object, ...], Strip] = {}
        self._base_style: Style | None = None
        self._cell_styles: dict[str, Style] = {}
        """Drawn lines by (row, status, alpha, cursor state, width): repaints after a layout
        change cost a lookup per line."""

    # -- data ----------------------------------------------------------------------------------

    @property
    def current(self) -> QueueRow | None:
        if 0 <= self.cursor < len(self.rows):
            return self.rows[self.cursor]
        return None

    def set_rows(self, rows: Sequence[QueueRow], *, keep: QueueRow | None = None) -> None:
        """Show ``rows``; the cursor stays on ``keep`` (or the current row) if it is still shown."""
        target = keep if keep is not None else self.current
        old_index = self.cursor
        self.rows = list(rows)
        index = -1
        if target is not None:
            for i, row in enumerate(self.rows):
                if row is target:
                    index = i
                    break
        if index < 0:
            index = min(old_index, len(self.rows) - 1)
        self.virtual_size = Size(0, len(self.rows) + 1)
        self.set_cursor(max(index, 0))
        self.refresh()

    def refresh_row(self, row: QueueRow) -> None:
        """Repaint one row after its status or agreement changed."""
        for i in range(
            max(int(self.scroll_offset.y), 0), min(len(self.rows), self._last_visible() + 1)
        ):
            if self.rows[i] is row:
                self.refresh_line(i + 1)
        if row is self.current:
            self._post(force=True)

    def index_of(self, row: QueueRow) -> int | None:
        for i, shown in enumerate(self.rows):
            if shown is row:
                return i
        return None

    # -- cursor --------------------------------------------------------------------------------

    def set_cursor(self, index: int) -> None:
        self.cursor = max(0, min(index, len(self.rows) - 1)) if self.rows else 0

    def watch_cursor(self, old: int, new: int) -> None:
        self.refresh_line(old + 1)
        self.refresh_line(new + 1)
        self._scroll_to_cursor()
        self._post()

    def _post(self, force: bool = False) -> None:
        row = self.current
        if force or row is not self._last_posted:
            self._last_posted = row
            self.post_message(self.Highlighted(self, row))

    def _page(self) -> int:
        return max(self.size.height - 2, 1)

    def _last_visible(self) -> int:
        return int(self.scroll_offset.y) + self._page()

    def _scroll_to_cursor(self) -> None:
        top = int(self.scroll_offset.y)
        visible = max(self.size.height - 1, 1)
        if self.cursor < top:
            self.scroll_to(y=self.cursor, animate=False, immediate=True)
        elif self.cursor >= top + visible:
            self.scroll_to(y=self.cursor - visible + 1, animate=False, immediate=True)

    def action_cursor_down(self) -> None:
        self.set_cursor(self.cursor + 1)

    def action_cursor_up(self) -> None:
        self.set_cursor(self.cursor - 1)

    def action_page_down(self) -> None:
        self.set_cursor(self.cursor + self._page())

    def action_page_up(self) -> None:
        self.set_cursor(self.cursor - self._page())

    def action_first(self) -> None:
        self.set_cursor(0)

    def action_last(self) -> None:
        self.set_cursor(len(self.rows) - 1)

    def on_click(self, event: events.Click) -> None:
        offset = event.get_content_offset(self)
        if offset is None or offset.y == 0:
            return
        self.set_cursor(int(self.scroll_offset.y) + offset.y - 1)

    def on_resize(self, event: events.Resize) -> None:
        self._scroll_to_cursor()

    def on_focus(self) -> None:
        self.refresh_line(self.cursor + 1)

    def on_blur(self) -> None:
        self.refresh_line(self.cursor + 1)

    # -- drawing -------------------------------------------------------------------------------

    def _style(self, name: str) -> Style:
        """A cell's foreground (colour, bold, italic) from its component class.

        Taken from the full style so that colours with alpha ($text-muted) come out blended
        with the background, then stripped of the background so a cursor row keeps its own.
        """
        style = self._cell_styles.get(name)
        if style is None:
            full = self.get_component_rich_style(f"queue-view--{name}")
            style = Style(color=full.color, bold=full.bold, italic=full.italic)
            self._cell_styles[name] = style
        return style

    def notify_style_update(self) -> None:
        super().notify_style_update()
        self._line_cache.clear()
        self._cell_styles.clear()
        self._base_style = None

    @property
    def base_style(self) -> Style:
        # Widget.rich_style walks the ancestors' styles on every call; once per style change
        # is enough.
        if self._base_style is None:
            self._base_style = self.rich_style
        return self._base_style

    def render_line(self, y: int) -> Strip:
        width = self.scrollable_content_region.width  # without the scrollbar
        base = self.base_style
        if y == 0:
            return self._header(Columns.fit(width), width)
        index = int(self.scroll_offset.y) + y - 1
        if not self.rows:
            if y == 2:
                text = _fit(f"  {self.empty_text}", width)
                return Strip([Segment(text, base + self._style("empty"))], width)
            return Strip.blank(width, base)
        if index >= len(self.rows):
            return Strip.blank(width, base)
        row = self.rows[index]
        cursor = 0 if index != self.cursor else (1 if self.has_focus else 2)
        key = (id(row), row.status, row.alpha, self.measured, cursor, width)
        strip = self._line_cache.get(key)
        if strip is None:
            if len(self._line_cache) > 4000:
                self._line_cache.clear()
            strip = self._line_cache[key] = self._render_row(row, index, width)
        return strip

    def _render_row(self, row: QueueRow, index: int, width: int) -> Strip:
        base = self.base_style
        columns = Columns.fit(width)
        if index == self.cursor:
            cursor = "cursor" if self.has_focus else "cursor-blurred"
            base = base + self.get_component_rich_style(f"queue-view--{cursor}")
        decided = row.status != "open"
        label_style = self._style("decided") if decided else Style()
        segments = [
            Segment(" ", base),
            Segment(
                _fit(STATUS_MARKS.get(row.status, row.status), columns.status),
                base + self._style(row.status),
            ),
            Segment(" ", base),
            Segment(_fit(row.severity, columns.severity), base + self._style(row.severity)),
            Segment(" ", base),
            Segment(_fit(row.label, columns.label), base + label_style),
        ]
        if columns.category:
            extra = f" +{len(row.categories) - 1}" if len(row.categories) > 1 else ""
            if row.categories:
                first = category_words(row.categories[0])
            elif row.signal_names:
                first = category_words(row.signal_names[0])
            else:
                first = "data signal"
            cat_width = columns.category
            text = _fit(first, cat_width - len(extra)) + extra
            segments += [Segment(" ", base), Segment(text, base + self._style("muted"))]
        segments += [
            Segment(" ", base),
            Segment(_fit(f"{row.items:,}", columns.items, right=True), base),
            Segment(" ", base),
            Segment(
                _fit(alpha_text(row, self.measured), columns.alpha, right=True),
                base + self._alpha_style(row),
            ),
        ]
        return Strip(segments).adjust_cell_length(width, base)

    def _alpha_style(self, row: QueueRow) -> Style:
        if row.agreement is None or row.alpha is None:
            return self._style("muted")
        word = row.agreement.interpretation
        if word in ("reliable", "tentative", "unreliable"):
            return self._style(word)
        return Style()

    def _header(self, columns: Columns, width: int) -> Strip:
        style = self.base_style + self.get_component_rich_style("queue-view--header")
        parts = [
            " ",
            _fit("STATUS", columns.status),
            " ",
            _fit("SEVERITY", columns.severity),
            " ",
            _fit("LABEL", columns.label),
        ]
        if columns.category:
            parts += [" ", _fit("CATEGORY", columns.category)]
        parts += [
            " ",
            _fit("ITEMS", columns.items, right=True),
            " ",
            _fit("ALPHA", columns.alpha, right=True),
        ]
        return Strip([Segment("".join(parts), style)]).adjust_cell_length(width, style)
