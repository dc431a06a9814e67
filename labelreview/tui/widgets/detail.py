"""The detail pane: everything known about the label under the cursor, in plain words."""

from __future__ import annotations

from typing import TYPE_CHECKING

from textual.binding import Binding
from textual.content import Content
from textual.geometry import Size
from textual.scroll_view import ScrollView
from textual.strip import Strip
from textual.visual import Visual

from labelreview.decisions import Entry, LogState
from labelreview.tui.rows import QueueRow

if TYPE_CHECKING:
    from labelreview.evidence import LabelEvidence

SEVERITY_STYLE = {"high": "bold $error", "medium": "bold $warning", "low": "$text-muted"}
STATUS_STYLE = {
    "open": "bold $text",
    "accepted": "bold $success",
    "renamed": "bold $accent",
    "retired": "bold $secondary",
}
ALPHA_STYLE = {"reliable": "$success", "tentative": "$warning", "unreliable": "$error"}
ALPHA_WORDS = {
    "reliable": "reliable (at or above the reliable threshold)",
    "tentative": "tentative conclusions only",
    "unreliable": "unreliable: annotators often disagree on this label",
    "undefined": "undefined",
}


def _heading(text: str) -> Content:
    return Content.assemble("\n", (text, "bold $primary"), "\n")


def describe_entry(entry: Entry, state: LogState) -> Content:
    """One history entry: number, time, who, what, then the reason on its own line."""
    when = entry.time[:16].replace("T", " ")
    if entry.kind == "revoke":
        what = Content.assemble(("undo", "bold $warning"), f" of #{entry.get('revokes')}")
    else:
        what = describe_decision(entry)
        if entry.seq in state.revoked:
            what = what.append(Content.assemble(("  (undone)", "$text-muted italic")))
    return Content.assemble(
        (f"#{entry.seq} {when} ", "$text-muted"),
        (entry.actor, "italic"),
        "  ",
        what,
        "\n",
        ("“", "$text-muted"),
        str(entry.get("reason") or ""),
        ("”", "$text-muted"),
        "\n",
    )


def describe_decision(entry: Entry) -> Content:
    """``renamed → new`` / ``retired, annotations dropped`` / ``accepted``."""
    action = str(entry.get("action"))
    status = _status_of(action)
    what = Content.assemble((status, STATUS_STYLE.get(status, "bold")))
    if action == "rename":
        what = what.append(f" → {entry.get('new_label')}")
        if entry.get("merge"):
            what = what.append(" (merge)")
    elif action == "retire":
        fallback = entry.get("fallback")
        what = what.append(f", annotations to {fallback}" if fallback else ", annotations dropped")
    return what


def _status_of(action: str) -> str:
    return {"accept": "accepted", "rename": "renamed", "retire": "retired"}.get(action, "open")


def detail_content(
    row: QueueRow | None,
    *,
    state: LogState | None,
    evidence: LabelEvidence | None,
    agreement_note: str | None,
    measured: bool,
) -> Content:
    """Everything about one row, as styled text (data is inserted literally, never as markup).

    Paragraphs start at the left edge: wrapped lines cannot keep an indent.
    """
    if row is None:
        return Content.from_markup("[$text-muted]No label selected.[/]")
    parts: list[Content | str | tuple[str, str]] = [
        (row.label, "bold"),
        "\n",
        (row.severity, SEVERITY_STYLE.get(row.severity, "bold")),
        (" severity", "$text-muted"),
        "  ·  ",
    ]
    decision = state.decision(row.label) if state is not None else None
    if decision is not None:
        parts += [
            describe_decision(decision),
            (f"  (#{decision.seq}, {decision.actor})", "$text-muted"),
        ]
    else:
        parts.append((row.status, STATUS_STYLE.get(row.status, "bold")))
    if row.score is not None:
        parts += ["  ·  ", (f"score {row.score:.2f}", "$text-muted")]
    parts.append("\n")
    if row.category_titles:
        parts += [("categories: ", "$text-muted"), "; ".join(row.category_titles), "\n"]
    parts.append(_heading("Why it was flagged"))
    for reason in row.reasons:
        parts += [("• ", "bold $primary"), reason, "\n"]
    if row.terms:
        parts += [("matched terms: ", "$text-muted"), ", ".join(row.terms), "\n"]
    if row.suggestions:
        parts += [("suggested neutral names: ", "$text-muted"), ", ".join(row.suggestions), "\n"]

    parts.append(_heading("In the data"))
    annotators = "…"
    if evidence is not None:
        annotators = f"{evidence.annotator_count(row.label):,}"
    parts.append(
        f"{row.annotations:,} annotations on {row.items:,} items by {annotators} annotators\n"
    )
    parts.append(("agreement: ", "$text-muted"))
    if row.agreement is not None and row.alpha is not None:
        word = row.agreement.interpretation
        parts += [
            (f"Krippendorff's alpha {row.alpha:.3f}", ALPHA_STYLE.get(word, "")),
            f" on {row.agreement.n_items:,} items: ",
            (ALPHA_WORDS.get(word, word), ALPHA_STYLE.get(word, "")),
            "\n",
        ]
    elif row.agreement is not None:
        parts += [f"not measured for this label ({row.agreement.reason})\n"]
    elif agreement_note:
        parts += [f"not measured ({agreement_note})\n"]
    else:
        parts += ["measuring…\n" if not measured else "not measured for this label\n"]

    if evidence is not None:
        examples = evidence.examples(row.label)
        if examples:
            parts.append(_heading("Example items"))
            for example in examples:
                parts += [(example.item, "bold")]
                if example.text:
                    parts += ["  ", example.text]
                parts.append("\n")
                if example.preview:
                    parts += [(f"preview {example.preview}", "$text-muted"), "\n"]

    parts.append(_heading("Decision history"))
    history: tuple[Entry, ...] = ()
    if state is not None and row.label in state.labels:
        history = state.labels[row.label].history
    if not history:
        parts.append(("no decisions yet\n", "$text-muted"))
    for entry in history:
        assert state is not None
        parts.append(describe_entry(entry, state))
    return Content.assemble(*parts)


class DetailPane(ScrollView, can_focus=True):
    """The selected label's details, wrapped once per update and drawn line by line.

    A Static inside a scrolling container re-lays out the whole screen on every update (about
    20 ms per cursor move); this pane renders its lines itself and repaints only its region.
    """

    BINDINGS = [
        Binding("up", "scroll_up", "scroll up", show=False),
        Binding("down", "scroll_down", "scroll down", show=False),
        Binding("pageup", "page_up", "page up", show=False),
        Binding("pagedown", "page_down", "page down", show=False),
    ]

    # A stable gutter: the text is wrapped to the content width before Textual decides whether
    # a scrollbar is needed; a scrollbar appearing later would leave the lines wrapped too wide.
    DEFAULT_CSS = """
    DetailPane { overflow-x: hidden; overflow-y: auto; scrollbar-gutter: stable; }
    """

    def __init__(self, *, id: str | None = None) -> None:  # noqa: A002 - Textual's name
        super().__init__(id=id)
        self.content = Content("")
        self._lines: list[Strip] = []
        self._blank = Strip([])
        self._width = 0

    @property
    def text(self) -> str:
        """The plain text shown (for tests)."""
        return self.content.plain

    def show(self, content: Content) -> None:
        self.content = content
        self._wrap()
        self.scroll_to(y=0, animate=False, immediate=True)
        self.refresh()

    def _wrap(self) -> None:
        width = self.scrollable_content_region.width
        self._width = width
        if width <= 0:
            self._lines = []
            return
        base = self.rich_style
        self._blank = Strip.blank(width, base)
        self._lines = [
            strip.extend_cell_length(width, base)
            for strip in Visual.to_strips(self, self.content, width, None, self.visual_style)
        ]
        # A change of virtual size re-lays out the whole screen (about 10 ms at every cursor
        # move): the height is rounded up to whole pages, so it seldom changes.
        page = max(self.scrollable_content_region.height, 1)
        height = -(-len(self._lines) // page) * page
        if self.virtual_size.height != height or self.virtual_size.width != width:
            self.virtual_size = Size(width, height)

    def on_resize(self) -> None:
        self._wrap()
        self.refresh()

    def render_line(self, y: int) -> Strip:
        index = int(self.scroll_offset.y) + y
        if 0 <= index < len(self._lines):
            return self._lines[index]
        return self._blank
