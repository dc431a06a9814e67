"""The review app: a queue of flagged labels, a detail pane, and decisions with reasons.

A thin front end over :class:`~labelreview.review.ReviewSession`. It opens the dataset in a
worker thread (the screen appears at once and shows each step), keeps the decision log locked
for the sitting (:meth:`ReviewSession.hold`), and decides only through the session, which
appends and fsyncs each entry before the queue shows the new status. It reads no file itself.
"""

from __future__ import annotations

import contextlib
import gc
import traceback
from collections.abc import Iterable
from pathlib import Path
from typing import TYPE_CHECKING, Any

from textual import events, on, work
from textual.app import App, ComposeResult
from textual.binding import Binding
from textual.containers import Center, Horizontal, Vertical
from textual.content import Content
from textual.widgets import ContentSwitcher, Footer, Input, Label, ProgressBar, Static

from labelreview.decisions import Entry
from labelreview.errors import LabelReviewError, LogLockedError
from labelreview.review import DecisionRequest, ReviewSession
from labelreview.tui.filters import FilterState, apply_filters
from labelreview.tui.loading import STEPS, ReviewSource
from labelreview.tui.rows import QueueRow, attach_agreement, category_words, queue_rows
from labelreview.tui.screens.decision import DecisionScreen, UndoScreen
from labelreview.tui.screens.filters import FilterScreen
from labelreview.tui.screens.info import HelpScreen, MessageScreen, help_content
from labelreview.tui.theme import DEFAULT_THEME, THEMES
from labelreview.tui.widgets.detail import DetailPane, detail_content
from labelreview.tui.widgets.queue import QueueView

if TYPE_CHECKING:
    # The agreement engine (numpy, scipy) loads in the background worker, after the queue is
    # on screen: importing it up front added about 0.3 s to every launch.
    from labelreview.agreement import LabelAgreement
    from labelreview.evidence import LabelEvidence

DONE_WORDS = {"accept": "accepted", "rename": "renamed", "retire": "retired"}


class SearchBox(Input):
    """The label search: Enter goes back to the queue, Escape clears the search and goes back."""

    BINDINGS = [
        Binding("escape", "clear_and_leave", "clear search"),
        Binding("down", "leave", "to the queue", show=False),
    ]

    def action_clear_and_leave(self) -> None:
        self.value = ""
        self.app.query_one(QueueView).focus()

    def action_leave(self) -> None:
        self.app.query_one(QueueView).focus()


class ReviewApp(App[int]):
    """``labelreview review``: accept, rename or retire each flagged label, with a reason."""

    PRELIMINARY_ABOVE = 5_000
    """With at least this many lexicon findings the app first shows the queue as the lexicons
    rank it and swaps in the full queue when the data signals are computed."""

    CSS_PATH = Path(__file__).with_name("review.tcss")  # absolute: subclasses live elsewhere
    TITLE = "labelreview review"
    ENABLE_COMMAND_PALETTE = True

    BINDINGS = [
        Binding("a", "accept", "accept"),
        Binding("r", "rename", "rename"),
        Binding("x", "retire", "retire"),
        Binding("u", "undo", "undo"),
        Binding("slash", "search", "search", key_display="/"),
        Binding("f", "filter", "filter"),
        Binding("question_mark", "help", "help", key_display="?"),
        Binding("q", "quit_review", "quit"),
    ]

    def __init__(
        self,
        source: ReviewSource | None = None,
        *,
        session: ReviewSession | None = None,
        read_only: bool = False,
    ) -> None:
        """Open ``source`` in the background, or use a ready ``session``.

        Args:
            source: The dataset folder and options to open.
            session: An already loaded session (tests, benchmarks); ``source`` is then unused.
            read_only: Browse without taking the log's lock; every decision key is disabled.
        """
        if source is None and session is None:
            raise ValueError("give a source or a session")
        super().__init__()
        self.source = source
        self.session: ReviewSession | None = session
        self.read_only = read_only
        self.read_only_reason = "opened read-only" if read_only else ""
        self.rows: list[QueueRow] = []
        self.by_label: dict[str, QueueRow] = {}
        self.reviewed = 0
        """Rows whose status is not open (kept up to date at each write)."""
        self.filters = FilterState()
        self.evidence: LabelEvidence | None = None
        self.agreement_note: str | None = None
        self.measured = False
        self.loaded = False
        self.ranking = False
        """The queue shown is the lexicons' ranking; the data signals are still computing."""
        self._first_shown: str | None = None
        self.failure: LabelReviewError | None = None
        """Why the app could not open the dataset (the CLI reports it after the app exits)."""
        self.failure_trace: str | None = None
        self._held = contextlib.ExitStack()
        self._gc_paused = False
        self._had_row = False
        for theme in THEMES:
            self.register_theme(theme)
        self.theme = DEFAULT_THEME

    # -- layout --------------------------------------------------------------------------------

    def compose(self) -> ComposeResult:
        with Horizontal(id="topbar"):
            yield Static(id="where", markup=False)
            yield Static(id="progress-text", markup=False)
        with ContentSwitcher(initial="loading", id="switcher"):
            with Center(id="loading"):
                with Vertical(id="loading-box"):
                    yield Label("Opening the dataset", id="loading-title")
                    yield ProgressBar(total=STEPS, show_eta=False, id="loading-bar")
                    yield Label("starting", id="loading-step", markup=False)
            with Vertical(id="main"):
                with Horizontal(id="filterbar"):
                    yield Static(id="filter-summary", markup=False)
                    yield SearchBox(placeholder="/ search labels", id="search")
                with Horizontal(id="body"):
                    yield QueueView(id="queue")
                    yield DetailPane(id="detail")
        # ctrl+p (themes, keys) still works; its footer entry would push "q quit" off
        # an 80-column screen.
        yield Footer(show_command_palette=False)

    def on_mount(self) -> None:
        self._update_topbar()
        self._pause_gc()
        self._load()

    def on_resize(self, event: events.Resize) -> None:
        # Below 100 columns the detail pane goes under the queue instead of beside it.
        narrow = event.size.width < 100
        self.set_class(narrow, "-narrow")
        for footer in self.query(Footer):
            footer.compact = narrow

    def on_unmount(self) -> None:
        self._resume_gc()
        self._held.close()
        gc.unfreeze()

    # -- loading -------------------------------------------------------------------------------

    def _step(self, number: int, text: str) -> None:
        self.query_one("#loading-bar", ProgressBar).update(progress=number - 1)
        self.query_one("#loading-step", Label).update(text)

    def _pause_gc(self) -> None:
        """Keep the cyclic collector off from the start of loading until the loaded queue is
        frozen in :meth:`_loaded` (or loading fails). Loading builds hundreds of thousands of
        long-lived objects; each full collection meanwhile re-walked all of them (about 0.4 s
        of a 2.5 s launch at 50,000 flags, measured)."""
        if gc.isenabled():
            gc.disable()
            self._gc_paused = True

    def _resume_gc(self) -> None:
        if self._gc_paused:
            self._gc_paused = False
            gc.enable()

    @work(thread=True, exclusive=True, group="load", exit_on_error=False)
    def _load(self) -> None:
        def step(number: int, text: str) -> None:
            self.call_from_thread(self._step, number, text)

        session = self.session
        try:
            if session is None:
                assert self.source is not None
                session = self.source.open(step)
            step(3, "opening the decision log")
            if not self.read_only:
                self._held.enter_context(session.hold())
            session.state()
            if (
                session.signals_ready
                or len(session.scanned.result.findings) < self.PRELIMINARY_ABOVE
            ):
                step(4, f"building the queue of {len(session.flags):,} flagged labels")
                rows = queue_rows(session)
            else:
                # A large dataset: show the queue the lexicons rank at once; the data signals
                # (seconds at tens of thousands of labels) follow from the measuring worker.
                step(4, "ranking the lexicon findings")
                rows = queue_rows(session, session.preliminary_flags())
        except LogLockedError as exc:
            self.call_from_thread(self._locked, session, exc)
            return
        except LabelReviewError as exc:
            self.call_from_thread(self._failed, exc, None)
            return
        except Exception as exc:  # noqa: BLE001 - shown and reported by the CLI, never swallowed
            wrapped = LabelReviewError(f"unexpected error: {type(exc).__name__}: {exc}")
            self.call_from_thread(self._failed, wrapped, traceback.format_exc())
            return
        self.call_from_thread(self._loaded, session, rows)

    @work(thread=True, exclusive=True, group="measure", exit_on_error=False)
    def _measure(self, session: ReviewSession) -> None:
        """Agreement, then annotator counts and example items (the queue is usable meanwhile)."""
        try:
            from labelreview.evidence import gather_evidence, label_agreement

            if not session.signals_ready:
                session.flags  # noqa: B018 - computes the data signals and the full queue
                self.call_from_thread(self._queue_ready, queue_rows(session))
            session.fingerprint()  # hashes the input files once; every decision records it
            # The review queue's data signals ran the agreement report already; reuse it.
            computed = session.signals().agreement
            if computed is not None:
                by_label = {a.label: a for a in computed.per_label}
                note = None
            else:
                by_label, note = label_agreement(session.dataset)
            self.call_from_thread(self._agreement_ready, by_label, note)
            labels = [f.label for f in session.flags]
            evidence = gather_evidence(session.dataset, labels)
            self.call_from_thread(self._evidence_ready, evidence)
        except Exception as exc:  # noqa: BLE001 - the queue works without these figures
            self.call_from_thread(
                self.notify,
                f"could not gather agreement and examples: {exc}",
                severity="warning",
            )

    def _loaded(self, session: ReviewSession, rows: list[QueueRow]) -> None:
        self.session = session
        self.ranking = not session.signals_ready
        self.rows = rows
        self.by_label = {row.label: row for row in rows}
        self.reviewed = sum(1 for row in rows if row.status != "open")
        self.loaded = True
        queue = self.query_one(QueueView)
        queue.empty_text = (
            "Nothing flagged. A clean scan does not prove a dataset fair."
            if not rows
            else "No label matches these filters."
        )
        first_open = next((row for row in rows if row.status == "open"), None)
        self._first_shown = first_open.label if first_open is not None else None
        queue.set_rows(rows, keep=first_open)
        self.query_one("#switcher", ContentSwitcher).current = "main"
        queue.focus()
        self._update_topbar()
        self._update_filter_summary()
        self.refresh_bindings()
        for note in session.scanned.notes:
            self.notify(note, severity="warning" if note.startswith("warning") else "information")
        # The loaded queue lives as long as the app: keep the garbage collector from walking it
        # at every full collection. At 50,000 flags a full collection took 0.3 to 0.4 s and
        # came every 50 or so keys; frozen, they take milliseconds. (Frozen again once the
        # background figures arrive; unfrozen when the app closes.)
        gc.freeze()
        self._resume_gc()
        # Measure once the queue is on screen, so the first paint does not wait for it.
        self.call_after_refresh(self._measure, session)

    def _queue_ready(self, rows: list[QueueRow]) -> None:
        """Swap in the full queue (data signals included), keeping the cursor's label."""
        assert self.session is not None
        status = self.session.state().status  # decisions made meanwhile are in the log
        for row in rows:
            row.status = status(row.label)
        current = self.current
        self.rows = rows
        self.by_label = {row.label: row for row in rows}
        self.reviewed = sum(1 for row in rows if row.status != "open")
        self.ranking = False
        keep = self.by_label.get(current.label) if current is not None else None
        if current is not None and current.label == self._first_shown:
            # The curator has not moved yet: start at the top of the full ranking instead.
            keep = next((row for row in rows if row.status == "open"), keep)
        self._refilter(keep=keep)
        self._update_topbar()
        self._show_detail(self.queue.current)

    def _agreement_ready(self, by_label: dict[str, LabelAgreement], note: str | None) -> None:
        attach_agreement(self.rows, by_label)
        self.agreement_note = note
        self.measured = True
        queue = self.query_one(QueueView)
        queue.measured = True
        queue.refresh()
        self._show_detail(queue.current)

    def _evidence_ready(self, evidence: LabelEvidence) -> None:
        self.evidence = evidence
        self._show_detail(self.query_one(QueueView).current)
        gc.freeze()  # the figures just gathered live as long as the app, like the queue

    def _locked(self, session: ReviewSession | None, exc: LogLockedError) -> None:
        self._resume_gc()
        self.failure = exc

        def chosen(key: str | None) -> None:
            if key == "v" and session is not None:
                self.failure = None
                self.read_only = True
                self.read_only_reason = "read-only: the log is locked by another session"
                self._load_read_only(session)
            else:
                self.exit(2, return_code=2)

        message = exc.message[:1].upper() + exc.message[1:]
        body = (
            f"{message}.\n\nAnother review session has this dataset's decision log open. "
            "Nothing was written, and nothing will be: the log stays exactly as it is.\n\n"
            "Quit and finish or close that session first, or look through the queue read-only."
        )
        self.push_screen(
            MessageScreen(
                "The decision log is locked", body, [("q", "quit"), ("v", "view read-only")]
            ),
            chosen,
        )

    def _load_read_only(self, session: ReviewSession) -> None:
        self.session = session
        self._pause_gc()
        self._load()

    def _failed(self, exc: LabelReviewError, trace: str | None) -> None:
        self._resume_gc()
        self.failure = exc
        self.failure_trace = trace
        self.push_screen(
            MessageScreen("Could not open the dataset", str(exc), [("q", "quit")]),
            lambda _key: self.exit(2, return_code=2),
        )

    # -- what is on screen ---------------------------------------------------------------------

    @property
    def queue(self) -> QueueView:
        return self.query_one(QueueView)

    @property
    def current(self) -> QueueRow | None:
        return self.queue.current if self.loaded else None

    @property
    def shown(self) -> list[QueueRow]:
        return self.queue.rows

    def _update_topbar(self) -> None:
        where = self.query_one("#where", Static)
        progress = self.query_one("#progress-text", Static)
        session = self.session
        if session is None or not self.loaded:
            if session is not None:
                name = session.config.name or session.dataset.root.resolve().name
            else:
                name = self.source.dataset_dir.name if self.source is not None else ""
            where.update(Content.assemble(("labelreview", "bold"), f"  {name}  opening…"))
            progress.update(Content.assemble(("reviewed – of –", "bold")))
            return
        name = session.config.name or session.dataset.root.resolve().name
        log_state = self.read_only_reason or "log held"
        ranking = ("  ranking by data signals…", "$warning") if self.ranking else ""
        where.update(
            Content.assemble(
                ("labelreview", "bold"),
                "  ",
                (name, "bold $primary"),
                ("  curator ", "$text-muted"),
                (session.curator, "bold"),
                ("  log ", "$text-muted"),
                session.log.path.name,
                " ",
                (f"({log_state})", "$warning" if self.read_only else "$text-muted"),
                ranking,
            )
        )
        done, total = self.reviewed, len(self.rows)
        share = f" {100 * done / total:.0f}%" if total else ""
        width = 16
        filled = round(width * done / total) if total else 0
        progress.update(
            Content.assemble(
                ("━" * filled, "bold $success"),
                ("━" * (width - filled), "$panel-lighten-2"),
                " ",
                (f"reviewed {done:,} of {total:,}", "bold"),
                (share, "$text-muted"),
            )
        )

    def _update_filter_summary(self) -> None:
        f = self.filters
        parts: list[Any] = [
            ("showing ", "$text-muted"),
            (f"{len(self.shown):,}", "bold"),
            (f" of {len(self.rows):,}", "$text-muted"),
        ]
        for name, value in (
            ("status", f.status),
            ("severity", f.severity),
            ("category", f.category),
        ):
            shown = category_words(value) if (name == "category" and value) else (value or "any")
            parts += [(f"  {name} ", "$text-muted"), (shown, "bold $accent" if value else "")]
        if f.words:
            parts += [("  search ", "$text-muted"), (f"“{f.search.strip()}”", "bold $accent")]
        parts += [("   f filter  / search", "$text-muted")]
        self.query_one("#filter-summary", Static).update(Content.assemble(*parts))

    def _show_detail(self, row: QueueRow | None) -> None:
        if not self.loaded or self.session is None:
            return
        self.query_one(DetailPane).show(
            detail_content(
                row,
                state=self.session.state(),
                evidence=self.evidence,
                agreement_note=self.agreement_note,
                measured=self.measured,
            )
        )

    @on(QueueView.Highlighted)
    def _highlighted(self, event: QueueView.Highlighted) -> None:
        self._show_detail(event.row)
        # Refreshing the bindings rebuilds the footer (costly at every key): only when the
        # decision keys change between available and greyed.
        has_row = event.row is not None
        if has_row != self._had_row:
            self._had_row = has_row
            self.refresh_bindings()

    def _refilter(self, keep: QueueRow | None = None) -> None:
        self.queue.set_rows(apply_filters(self.rows, self.filters), keep=keep)
        self._update_filter_summary()

    # -- actions -------------------------------------------------------------------------------

    def check_action(self, action: str, parameters: tuple[object, ...]) -> bool | None:
        if action in ("accept", "rename", "retire"):
            if not self.loaded or self.read_only:
                return None
            return True if self.current is not None else None
        if action == "undo":
            if not self.loaded or self.read_only or self.session is None:
                return None
            return True if self.session.state().last_active_decision() is not None else None
        if action in ("search", "filter"):
            return True if self.loaded else None
        return True

    def action_accept(self) -> None:
        self._decide("accept")

    def action_rename(self) -> None:
        self._decide("rename")

    def action_retire(self) -> None:
        self._decide("retire")

    def _decide(self, action: str) -> None:
        row = self.current
        if row is None or self.session is None:
            return
        self.push_screen(DecisionScreen(self.session, row, action, self._save_decision))

    def _save_decision(self, request: DecisionRequest) -> str | None:
        """Write one decision through the session; update the queue only once it is saved."""
        assert self.session is not None
        try:
            entry = self.session.decide(request)
        except LabelReviewError as exc:
            return str(exc)
        self._after_write([request.label], advance=True)
        what = DONE_WORDS.get(request.action, request.action)
        target = f" → {request.new_label}" if request.new_label else ""
        self.notify(f"saved #{entry.seq}: {what} {request.label}{target}", timeout=4)
        return None

    def action_undo(self) -> None:
        if self.session is None:
            return
        target = self.session.state().last_active_decision()
        if target is None:
            self.notify("There is no decision to undo.", severity="warning")
            return
        self.push_screen(
            UndoScreen(
                target,
                self.session.recent_reasons(),
                self.session.config.decisions.min_reason_length,
                lambda reason: self._save_undo(target, reason),
            )
        )

    def _save_undo(self, target: Entry, reason: str) -> str | None:
        assert self.session is not None
        try:
            entry = self.session.revoke(target.seq, reason)
        except LabelReviewError as exc:
            return str(exc)
        label = str(target.label)
        self._after_write([label], advance=False)
        row = self.by_label.get(label)
        if row is not None:
            index = self.queue.index_of(row)
            if index is not None:
                self.queue.set_cursor(index)
        status = self.session.status(label)
        self.notify(f"saved #{entry.seq}: undid #{target.seq}; {label} is {status}", timeout=4)
        return None

    def _after_write(self, labels: Iterable[str], *, advance: bool) -> None:
        """Read the new statuses back from the session and show them."""
        assert self.session is not None
        queue = self.queue
        current = queue.current
        for label in labels:
            row = self.by_label.get(label)
            if row is not None:
                was_open = row.status == "open"
                row.status = self.session.status(label)
                self.reviewed += int(was_open) - int(row.status == "open")
        if self.filters.status is not None:
            index = queue.cursor
            queue.set_rows(apply_filters(self.rows, self.filters))
            if current is not None and queue.index_of(current) is None:
                queue.set_cursor(index)
            elif advance:
                self._advance()
        else:
            for label in labels:
                row = self.by_label.get(label)
                if row is not None:
                    queue.refresh_row(row)
            if advance:
                self._advance()
        self._update_topbar()
        self._update_filter_summary()
        self._show_detail(queue.current)
        self.refresh_bindings()

    def _advance(self) -> None:
        """Move to the next open row below the cursor, if there is one."""
        queue = self.queue
        rows = queue.rows
        for index in range(queue.cursor + 1, len(rows)):
            if rows[index].status == "open":
                queue.set_cursor(index)
                return

    def action_search(self) -> None:
        self.query_one("#search", Input).focus()

    @on(Input.Changed, "#search")
    def _search_changed(self, event: Input.Changed) -> None:
        self.filters = FilterState(
            status=self.filters.status,
            severity=self.filters.severity,
            category=self.filters.category,
            search=event.value,
        )
        if self.loaded:
            self._refilter()

    @on(Input.Submitted, "#search")
    def _search_done(self) -> None:
        self.queue.focus()

    def action_filter(self) -> None:
        categories = self._categories()

        def chosen(state: FilterState | None) -> None:
            if state is not None:
                self.filters = state
                self._refilter()
            self.queue.focus()

        self.push_screen(FilterScreen(self.rows, self.filters, categories), chosen)

    def _categories(self) -> list[str]:
        seen: dict[str, None] = {}
        if self.session is not None:
            for category in self.session.scanned.lexicon.categories:
                seen[category] = None
        present = {c for row in self.rows for c in row.categories}
        return [c for c in seen if c in present] + sorted(present - set(seen))

    def action_help(self) -> None:
        settings = self.session.config if self.session is not None else None
        min_reason = settings.decisions.min_reason_length if settings else 10
        reliable = settings.agreement.reliable if settings else 0.8
        tentative = settings.agreement.tentative if settings else 0.667
        self.push_screen(HelpScreen(help_content(min_reason, reliable, tentative)))

    def action_quit_review(self) -> None:
        self.exit(0, return_code=0)
