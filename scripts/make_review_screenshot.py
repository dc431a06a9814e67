"""Write docs/review-app.svg: the review app on the bundled sample set, mid-session.

The bundled, invented sample set is copied to a temporary folder, a few decisions are recorded
there with a fixed clock (so the times on screen never change), and the app's own SVG export
is saved. Deterministic: run it again after a change to the look and commit the new file.

    python scripts/make_review_screenshot.py [--out docs/review-app.svg]
"""

from __future__ import annotations

import argparse
import asyncio
import shutil
import tempfile
from datetime import UTC, datetime, timedelta
from pathlib import Path

from labelreview._resources import sample_sets_dir
from labelreview.review import DecisionRequest, ReviewSession
from labelreview.tui import ReviewApp
from labelreview.tui.widgets.queue import QueueView

ROOT = Path(__file__).resolve().parent.parent


class Clock:
    def __init__(self) -> None:
        self.moment = datetime(2026, 1, 5, 9, 0, tzinfo=UTC)

    def __call__(self) -> datetime:
        now = self.moment
        self.moment += timedelta(minutes=3)
        return now


async def shoot(out: Path) -> None:
    with tempfile.TemporaryDirectory() as scratch:
        folder = Path(scratch) / "harbour_archive"
        shutil.copytree(sample_sets_dir() / "harbour_archive", folder)
        session = ReviewSession.open(folder, curator="mira", clock=Clock())
        for request in (
            DecisionRequest(
                "people/looks/suspicious_looking",
                "retire",
                "guesses a crime from how someone looks",
            ),
            DecisionRequest(
                "people/character/drunkard", "retire", "a verdict on character, not a scene"
            ),
            DecisionRequest(
                "people/roles/police_officer", "accept", "the uniform and the caption both say so"
            ),
            DecisionRequest(
                "people/roles/fishwife",
                "rename",
                "a neutral trade word exists for this",
                new_label="people/roles/fish_seller",
            ),
        ):
            session.decide(request)
        app = ReviewApp(session=session)
        async with app.run_test(size=(132, 36)) as pilot:
            await app.workers.wait_for_complete()
            await pilot.pause()
            queue = app.query_one(QueueView)
            queue.set_cursor(queue.index_of(app.by_label["people/roles/cleaning_lady"]))
            await pilot.pause()
            app.clear_notifications()
            await pilot.pause()
            out.parent.mkdir(parents=True, exist_ok=True)
            app.save_screenshot(filename=out.name, path=str(out.parent))
    print(f"wrote {out}")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--out", type=Path, default=ROOT / "docs" / "review-app.svg")
    asyncio.run(shoot(parser.parse_args().out))


if __name__ == "__main__":
    main()
