"""``labelreview review``: open the review app on a dataset folder."""

from __future__ import annotations

import sys
from pathlib import Path

import click

from labelreview.cli._common import dataset_options, err, handle_errors, note
from labelreview.errors import UsageError
from labelreview.model import SUBJECTS


def has_terminal() -> bool:
    """True when both stdin and stdout are a terminal (the app needs one)."""
    return sys.stdin.isatty() and sys.stdout.isatty()


def run_review(
    dataset_dir: Path,
    *,
    curator: str | None = None,
    annotations: Path | None = None,
    taxonomy: Path | None = None,
    encoding: str | None = None,
    subjects: str | None = None,
    extra_layers: tuple[Path, ...] = (),
    read_only: bool = False,
) -> None:
    """Run the review app until the curator quits; raise what stopped it from opening."""
    from labelreview.tui import ReviewApp, ReviewSource

    if not dataset_dir.is_dir():
        raise UsageError(f"{dataset_dir} is not a folder", hint="Give the dataset folder.")
    source = ReviewSource(
        dataset_dir,
        curator=curator,
        annotations=annotations,
        taxonomy=taxonomy,
        encoding=encoding,
        subjects=subjects,
        extra_layers=extra_layers,
    )
    app = ReviewApp(source, read_only=read_only)
    app.run()
    if app.failure is not None:
        if app.failure_trace and click.get_current_context().find_root().params.get("debug"):
            err(app.failure_trace.rstrip())
        raise app.failure
    if app.session is not None and app.loaded:
        done, total = app.session.progress()
        state = app.session.state()
        note(
            f"reviewed {done} of {total} flagged labels; log {app.session.log.path} "
            f"({len(state.entries)} entries, head {state.head[:12]})"
        )


@click.command("review")
@dataset_options
@click.option("--curator", help="Who decides (default: the config's curator, else the OS user).")
@click.option(
    "--subjects",
    type=click.Choice(SUBJECTS),
    help="Do the items depict or describe people (overrides the config).",
)
@click.option(
    "--lexicon",
    "layers",
    multiple=True,
    type=click.Path(dir_okay=False, path_type=Path),
    help="An extra lexicon layer file (repeatable).",
)
@click.option(
    "--read-only",
    is_flag=True,
    help="Browse the queue without locking the log; no decisions can be made.",
)
@handle_errors
def review(
    dataset_dir: Path,
    annotations: Path | None,
    taxonomy: Path | None,
    encoding: str | None,
    curator: str | None,
    subjects: str | None,
    layers: tuple[Path, ...],
    read_only: bool,
) -> None:
    """Open the review app on DATASET_DIR (default: the current folder).

    Accept, rename or retire each flagged label with a reason; every decision is written to
    the decision log and synced to disk before the screen shows it. Keys: a accept, r rename,
    x retire, u undo, / search, f filter, arrows or j/k move, ? help, q quit.
    """
    if not has_terminal():
        raise UsageError(
            "the review app needs a terminal (stdin and stdout are not one)",
            hint="For scripts use `labelreview decide`; `labelreview scan` lists the flags.",
        )
    run_review(
        dataset_dir,
        curator=curator,
        annotations=annotations,
        taxonomy=taxonomy,
        encoding=encoding,
        subjects=subjects,
        extra_layers=layers,
        read_only=read_only,
    )
