"""Help and message dialogs."""

from __future__ import annotations

from collections.abc import Sequence

from textual import on
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical, VerticalScroll
from textual.content import Content
from textual.screen import ModalScreen
from textual.widgets import Button, Footer, Static

from labelreview.report import CAUTIONS

KEYS: tuple[tuple[str, str], ...] = (
    ("a", "accept the label as it is"),
    ("r", "rename it: pick a suggested name or type one"),
    ("x", "retire it, optionally moving its annotations to another label"),
    ("u", "undo the most recent decision still in force"),
    ("/", "search labels; Enter back to the queue, Esc clears the search"),
    ("f", "filter by status, severity and category, with counts"),
    ("↑ ↓  j k", "move; PgUp PgDn, Home End (g G) jump"),
    ("Tab", "queue, search box, detail pane in turn"),
    ("Enter / Esc", "in a dialog: confirm / cancel; ↓ reaches the lists"),
    ("?", "this help; ctrl+p opens the command palette (themes, all keys)"),
    ("q", "quit (every decision is already saved)"),
)


def help_content(min_reason: int, reliable: float, tentative: float) -> Content:
    parts: list[Content | str | tuple[str, str]] = [
        ("Keys", "bold $primary"),
        ("  (a, r, x and u each ask for a reason)\n", "$text-muted"),
    ]
    for key, text in KEYS:
        parts += [(f"  {key:<12}", "bold"), text, "\n"]
    parts += [
        ("\nWhat the columns say\n", "bold $primary"),
        "STATUS: open (no decision yet), accepted, renamed or retired, as the log says.\n",
        "SEVERITY: high, medium or low, the most serious reason the label was flagged for.\n",
        "ITEMS: distinct items carrying the label.\n",
        "ALPHA: the label's own Krippendorff's alpha (given or not given by each annotator); ",
        f"at or above {reliable:g} reliable, from {tentative:g} tentative, below that unreliable; ",
        "– when too few items carry it, … while it is being measured.\n",
        ("\nDecisions\n", "bold $primary"),
        f"Every decision needs a reason of at least {min_reason} characters. It is written "
        "to the decision log and synced to disk before the queue shows it. A later decision on the "
        "same label replaces the earlier one; undo adds an entry and keeps the history.\n",
        ("\nCautions\n", "bold $primary"),
    ]
    for caution in CAUTIONS:
        parts += ["• ", caution, "\n"]
    return Content.assemble(*parts)


class HelpScreen(ModalScreen[None]):
    BINDINGS = [
        Binding("escape,question_mark,q", "close", "close"),
    ]

    def __init__(self, content: Content) -> None:
        super().__init__()
        self.content = content

    def compose(self) -> ComposeResult:
        with VerticalScroll(id="help-dialog"):
            yield Static(
                Content.from_markup("[b $primary]labelreview review: help[/]"), id="dialog-title"
            )
            yield Static(self.content, markup=False)
        yield Footer()

    def action_close(self) -> None:
        self.dismiss(None)


class MessageScreen(ModalScreen[str]):
    """A message with a title and a few keyed choices; returns the chosen key."""

    BINDINGS = [
        Binding("q", "choose('q')", "quit"),
        Binding("v", "choose('v')", "view read-only"),
        Binding("escape", "choose('escape')", "close", show=False),
    ]

    def __init__(self, title: str, body: str, choices: Sequence[tuple[str, str]]) -> None:
        super().__init__()
        self.title_text = title
        self.body = body
        self.choices = list(choices)

    def check_action(self, action: str, parameters: tuple[object, ...]) -> bool | None:
        if action == "choose" and parameters and parameters[0] != "escape":
            return any(key == parameters[0] for key, _ in self.choices)
        return True

    def compose(self) -> ComposeResult:
        with Vertical(id="message-dialog"):
            yield Static(Content.assemble((self.title_text, "bold $error")), id="dialog-title")
            yield Static(self.body, markup=False, id="message-body")
            with Horizontal(id="buttons"):
                for key, text in self.choices:
                    yield Button(f"{text} ({key})", id=f"choice-{key}")
        yield Footer()

    def action_choose(self, key: str) -> None:
        self.dismiss(key)

    @on(Button.Pressed)
    def _pressed(self, event: Button.Pressed) -> None:
        self.dismiss(str(event.button.id).removeprefix("choice-"))
