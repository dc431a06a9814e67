"""Snapshots of the review app's main screens (pytest-textual-snapshot).

The SVGs under ``__snapshots__/test_snapshots/`` are committed. After an intended change to
the look, regenerate them with ``pytest tests/tui/test_snapshots.py --snapshot-update`` and
look at every changed picture before committing. They depend on the environment: NO_COLOR and
TEXTUAL_THEME must be unset (``.ci/run`` unsets them). Toasts are cleared and text cursors
stop blinking before each picture, and the log's times come from a fixed clock.
"""

from __future__ import annotations

from textual.widgets import Input

from labelreview.review import DecisionRequest
from labelreview.tui import ReviewApp
from labelreview.tui.widgets.queue import QueueView
from tests.tui.conftest import make_session

SIZE = (130, 36)
REASON = "a neutral job word exists for this"


async def settle(pilot) -> None:  # noqa: ANN001 - Textual's Pilot
    """Wait for loading and measuring, then remove what changes from run to run."""
    await pilot.app.workers.wait_for_complete()
    await pilot.pause()
    pilot.app.clear_notifications()
    for field in pilot.app.screen.query(Input):
        field.cursor_blink = False
    await pilot.pause()


def with_history(sample_scan, log_path):  # noqa: ANN001, ANN201
    session = make_session(sample_scan, log_path)
    session.decide(DecisionRequest("people/roles/teacher", "accept", REASON))
    session.decide(
        DecisionRequest(
            "people/roles/cleaning_lady", "rename", REASON, new_label="people/roles/cleaner"
        )
    )
    session.decide(
        DecisionRequest("people/looks/suspicious_looking", "retire", "guesses a crime from looks")
    )
    session.undo("decided too quickly; needs a discussion")
    return session


def test_main_screen(snap_compare, sample_scan, log_path):
    app = ReviewApp(session=with_history(sample_scan, log_path))

    async def run_before(pilot) -> None:  # noqa: ANN001
        await settle(pilot)
        queue = pilot.app.query_one(QueueView)
        queue.set_cursor(queue.index_of(pilot.app.by_label["people/roles/cleaning_lady"]))
        await settle(pilot)

    assert snap_compare(app, terminal_size=SIZE, run_before=run_before)


def test_rename_dialog_warns_of_a_merge(snap_compare, sample_scan, log_path):
    app = ReviewApp(session=make_session(sample_scan, log_path))

    async def run_before(pilot) -> None:  # noqa: ANN001
        await settle(pilot)
        queue = pilot.app.query_one(QueueView)
        queue.set_cursor(queue.index_of(pilot.app.by_label["people/roles/fishwife"]))
        await pilot.press("r")
        pilot.app.screen.query_one("#new-name", Input).value = "people/roles/fisher"
        pilot.app.screen.query_one("#reason", Input).value = REASON
        await settle(pilot)

    assert snap_compare(app, terminal_size=SIZE, run_before=run_before)


def test_filter_dialog_with_counts(snap_compare, sample_scan, log_path):
    app = ReviewApp(session=with_history(sample_scan, log_path))

    async def run_before(pilot) -> None:  # noqa: ANN001
        await settle(pilot)
        await pilot.press("f", "down", "right", "down", "down")  # status open, severity medium
        await settle(pilot)

    assert snap_compare(app, terminal_size=SIZE, run_before=run_before)


def test_locked_log_message(snap_compare, sample_scan, log_path):
    holder = make_session(sample_scan, log_path, curator="tomas")
    app = ReviewApp(session=make_session(sample_scan, log_path))
    with holder.hold():
        # The holder's "since" time is real; keep it out of the picture.
        lock = log_path.with_name(log_path.name + ".lock")
        text = lock.read_text(encoding="utf-8")
        import json

        info = json.loads(text)
        info.update(since="2026-01-05T09:00:00.000Z", pid=4242, host="harbour-desk", user="tomas")
        lock.write_text(json.dumps(info) + "\n", encoding="utf-8")
        assert snap_compare(app, terminal_size=SIZE, run_before=settle)
