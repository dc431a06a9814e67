"""The decision dialogs: accept, rename, retire, and undo. Each one asks for a reason.

The rules come from the session: :meth:`ReviewSession.check` says what is wrong (shown in the
dialog) and what deserves a warning (shown, then saved only on a second Enter). Saving happens
through a callback the app passes in, which writes to the log through the session; the dialog
closes only once that write has returned, and stays open with the message if it failed, so a
typed reason is never lost.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence

from textual import on
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical
from textual.content import Content
from textual.screen import ModalScreen
from textual.suggester import SuggestFromList
from textual.widgets import Button, Footer, Input, Label, OptionList, Static
from textual.widgets.option_list import Option

from labelreview.decisions import Entry
from labelreview.review import DecisionCheck, DecisionRequest, ReviewSession
from labelreview.tui.rows import QueueRow

Save = Callable[[DecisionRequest], str | None]
"""Writes a checked request; returns None when saved, else the message to show."""
SaveUndo = Callable[[str], str | None]

TITLES = {"accept": "Accept", "rename": "Rename", "retire": "Retire", "undo": "Undo"}
UNDO_REASONS = (
    "decided by mistake; reopening for another look",
    "decided too quickly; needs a discussion first",
)


def _options(texts: Sequence[str]) -> list[Option]:
    return [Option(Content(text), id=f"o{i}") for i, text in enumerate(texts)]


class DialogInput(Input):
    """An Input whose Enter shows in the footer as "confirm" (it submits the dialog)."""

    BINDINGS = [Binding("enter", "submit", "confirm")]


class ReasonScreen(ModalScreen[bool]):
    """A dialog with a required reason, recent reasons to reuse, messages and two buttons."""

    BINDINGS = [
        Binding("escape", "cancel", "cancel"),
        Binding("enter", "confirm", "confirm", show=True, priority=False),
        Binding("down", "to_list", "choices", show=False),
    ]

    action_name = "accept"

    def __init__(self, recent: Sequence[str], min_reason: int) -> None:
        super().__init__()
        self.recent = list(recent)
        self.min_reason = min_reason
        self._acknowledged: tuple[str, ...] | None = None
        self._attempted = False

    # -- layout --------------------------------------------------------------------------------

    def compose(self) -> ComposeResult:
        with Vertical(id="dialog", classes=f"dialog-{self.action_name}"):
            yield from self.compose_head()
            yield Label(
                f"Reason (required, at least {self.min_reason} characters; kept in the log)",
                classes="field-label",
            )
            yield DialogInput(id="reason", placeholder="why, in a sentence")
            if self.recent:
                yield Label("Recent reasons (↓ to reach them): Enter copies one", classes="hint")
                yield OptionList(*_options(self.recent), id="recent")
            yield Static(id="messages", markup=False)
            with Horizontal(id="buttons"):
                yield Button(f"{TITLES[self.action_name]} (Enter)", id="save", variant="primary")
                yield Button("Cancel (Esc)", id="cancel")
        yield Footer()

    def compose_head(self) -> ComposeResult:
        yield from ()

    def on_mount(self) -> None:
        self.first_field().focus()

    def first_field(self) -> Input:
        return self.query_one("#reason", Input)

    # -- messages ------------------------------------------------------------------------------

    def show_messages(
        self, errors: Sequence[str] = (), warnings: Sequence[str] = (), extra: str = ""
    ) -> None:
        parts: list[Content | tuple[str, str] | str] = []
        for error in errors:
            parts += [("✗ ", "bold $error"), (error, "$error"), "\n"]
        for warning in warnings:
            parts += [("! ", "bold $warning"), (warning, "$warning"), "\n"]
        if extra:
            parts += [(extra, "bold"), "\n"]
        messages = self.query_one("#messages", Static)
        messages.update(Content.assemble(*parts).rstrip() if parts else Content(""))
        messages.set_class(bool(errors), "-errors")

    # -- keys and events -----------------------------------------------------------------------

    def action_cancel(self) -> None:
        self.dismiss(False)

    def action_confirm(self) -> None:
        self.confirm()

    def action_to_list(self) -> None:
        """↓ in a text field moves into the list under it (suggestions, reasons), else on to
        the reason."""
        focused = self.focused
        if not isinstance(focused, Input):
            return
        target = {"new-name": "#suggestions", "reason": "#recent"}.get(str(focused.id))
        if target and self.query(target):
            self.query_one(target, OptionList).focus()
        elif focused.id != "reason":
            self.query_one("#reason", Input).focus()

    def confirm(self) -> None:  # pragma: no cover - every dialog overrides it
        raise NotImplementedError

    @on(Button.Pressed, "#save")
    def _save_pressed(self) -> None:
        self.confirm()

    @on(Button.Pressed, "#cancel")
    def _cancel_pressed(self) -> None:
        self.dismiss(False)

    @on(Input.Submitted)
    def _submitted(self, event: Input.Submitted) -> None:
        event.stop()
        reason = self.query_one("#reason", Input)
        if event.input is not reason and not reason.value.strip():
            reason.focus()  # Enter in an earlier field moves on to the empty reason
            return
        self.confirm()

    @on(OptionList.OptionSelected, "#recent")
    def _reuse_reason(self, event: OptionList.OptionSelected) -> None:
        event.stop()
        reason = self.query_one("#reason", Input)
        reason.value = self.recent[event.option_index]
        reason.focus()
        reason.cursor_position = len(reason.value)

    def needs_acknowledging(self, warnings: tuple[str, ...]) -> bool:
        """True the first time these warnings are shown: the next Enter saves anyway."""
        if warnings and warnings != self._acknowledged:
            self._acknowledged = warnings
            return True
        return False


class DecisionScreen(ReasonScreen):
    """Accept, rename or retire one label."""

    def __init__(self, session: ReviewSession, row: QueueRow, action: str, save: Save) -> None:
        super().__init__(session.recent_reasons(), session.config.decisions.min_reason_length)
        self.session = session
        self.row = row
        self.action_name = action
        self.save = save
        self._label_list: list[str] | None = None

    def _labels(self) -> list[str]:
        if self._label_list is None:
            self._label_list = sorted(self.session.labels)
        return self._label_list

    def compose_head(self) -> ComposeResult:
        row = self.row
        yield Static(
            Content.assemble(
                (f"{TITLES[self.action_name]} ", "bold $primary"), (row.label, "bold")
            ),
            id="dialog-title",
        )
        yield Static(
            Content.assemble(
                (row.severity, "bold"),
                " severity · now ",
                (row.status, "bold"),
                f" · {row.annotations:,} annotations on {row.items:,} items",
            ),
            classes="hint",
        )
        if self.action_name == "accept":
            yield Static("Keeps the label as it is. Say why it is acceptable here.", classes="hint")
        elif self.action_name == "rename":
            yield Label(
                "New name (→ completes an existing label; that would merge)", classes="field-label"
            )
            yield DialogInput(
                id="new-name",
                placeholder="type a new name, or ↓ to pick a suggestion",
                suggester=SuggestFromList(self._labels(), case_sensitive=True),
            )
            names = self.suggested_names()
            if names:
                yield Label("Suggested neutral names (↓): Enter copies one", classes="hint")
                yield OptionList(*_options(names), id="suggestions")
        else:
            configured = self.session.config.decisions.retire_fallbacks.get(row.label)
            hint = (
                f"empty: the configured fallback {configured}"
                if configured
                else "empty: its annotations are dropped"
            )
            yield Label("Move its annotations to (optional)", classes="field-label")
            yield DialogInput(
                id="fallback",
                placeholder=hint,
                suggester=SuggestFromList(self._labels(), case_sensitive=True),
            )

    def first_field(self) -> Input:
        if self.action_name == "rename":
            return self.query_one("#new-name", Input)
        if self.action_name == "retire":
            return self.query_one("#fallback", Input)
        return super().first_field()

    def suggested_names(self) -> list[str]:
        """The lexicon's neutral words, placed where the label's last part stands."""
        label = self.row.label
        parent, _, last = label.rpartition("/")
        joiner = "_" if "_" in last else ("-" if "-" in last else " ")
        names: list[str] = []
        for word in self.row.suggestions:
            name = word.replace(" ", joiner) if joiner != " " else word
            if parent:
                name = f"{parent}/{name}"
            if name != label and name not in names:
                names.append(name)
        return names

    # -- building and checking the request ------------------------------------------------------

    def request(self) -> DecisionRequest:
        def value(selector: str) -> str | None:
            found = self.query(selector)
            return found.first(Input).value if found else None

        return DecisionRequest(
            label=self.row.label,
            action=self.action_name,
            reason=self.query_one("#reason", Input).value,
            new_label=value("#new-name") or None,
            fallback=value("#fallback") or None,
        )

    def _check(self) -> DecisionCheck:
        return self.session.check(self.request())

    @on(Input.Changed, "#new-name")
    def _name_changed(self) -> None:
        # Show merge and "itself flagged" warnings while typing; errors only after a first try.
        # (Not for the fallback: an unknown name there costs a close-match search per key.)
        check = self._check()
        errors = check.errors if self._attempted else ()
        self.show_messages(errors, check.warnings)

    @on(OptionList.OptionSelected, "#suggestions")
    def _use_suggestion(self, event: OptionList.OptionSelected) -> None:
        event.stop()
        name = self.query_one("#new-name", Input)
        name.value = self.suggested_names()[event.option_index]
        self.query_one("#reason", Input).focus()

    def confirm(self) -> None:
        self._attempted = True
        check = self._check()
        if not check.ok:
            self.show_messages(check.errors, check.warnings)
            self._focus_problem(check.errors[0])
            return
        if self.needs_acknowledging(check.warnings):
            self.show_messages((), check.warnings, "Press Enter again to save with these warnings.")
            return
        problem = self.save(check.request)
        if problem is not None:
            self.show_messages((problem,), check.warnings)
            return
        self.dismiss(True)

    def _focus_problem(self, error: str) -> None:
        if "reason" in error:
            self.query_one("#reason", Input).focus()
        elif "name" in error and self.query("#new-name"):
            self.query_one("#new-name", Input).focus()
        elif "fallback" in error and self.query("#fallback"):
            self.query_one("#fallback", Input).focus()


class UndoScreen(ReasonScreen):
    """Revoke the most recent decision still in force (a new log entry; history stays)."""

    action_name = "undo"

    def __init__(
        self, target: Entry, recent: Sequence[str], min_reason: int, save: SaveUndo
    ) -> None:
        reasons = list(dict.fromkeys([*recent, *UNDO_REASONS]))
        super().__init__(reasons, min_reason)
        self.target = target
        self.save = save

    def compose_head(self) -> ComposeResult:
        entry = self.target
        action = str(entry.get("action"))
        what = {"accept": "accepted", "rename": "renamed", "retire": "retired"}.get(action, action)
        detail = ""
        if action == "rename":
            detail = f" to {entry.get('new_label')}"
        yield Static(
            Content.assemble(("Undo ", "bold $primary"), (str(entry.label), "bold")),
            id="dialog-title",
        )
        yield Static(
            Content.assemble(
                f"Decision #{entry.seq}: {what}{detail} by {entry.actor} at ",
                entry.time[:16].replace("T", " "),
                "\n“",
                str(entry.get("reason") or ""),
                "”\nThe undo is written as a new entry; the decision stays in the history.",
            ),
            classes="hint",
        )

    def confirm(self) -> None:
        self._attempted = True
        reason = self.query_one("#reason", Input).value
        problem = self.save(reason)
        if problem is not None:
            self.show_messages((problem,))
            self.query_one("#reason", Input).focus()
            return
        self.dismiss(True)
