"""What every command shares: error handling, the dataset options, small printing helpers.

Exit codes: 0 success; 1 "the check found something" (the release gate, ``log verify``,
``compare --fail-on-new``); 2 bad input or usage (a :class:`~labelreview.errors.LabelReviewError`,
shown as one line on stderr; ``--debug`` shows the traceback). Data goes to stdout, messages to
stderr.
"""

from __future__ import annotations

import functools
import traceback
import warnings
from collections.abc import Callable
from pathlib import Path
from typing import TYPE_CHECKING, Any, TypeVar

import click

from labelreview.errors import LabelReviewError

if TYPE_CHECKING:
    from labelreview.dataset import Dataset
    from labelreview.model import LoadReport
    from labelreview.review import ReviewSession

F = TypeVar("F", bound=Callable[..., Any])

EXIT_FOUND = 1
EXIT_BAD_INPUT = 2


def err(message: str) -> None:
    """Write one message line to stderr."""
    click.echo(message, err=True)


def note(message: str) -> None:
    """Write a ``labelreview: `` prefixed line to stderr."""
    err(f"labelreview: {message}")


def handle_errors(func: F) -> F:
    """Turn LabelReviewError (and surprises) into one stderr line and exit code 2."""

    @functools.wraps(func)
    def wrapper(*args: Any, **kwargs: Any) -> Any:
        ctx = click.get_current_context()
        debug = bool(ctx.find_root().params.get("debug"))
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            try:
                return func(*args, **kwargs)
            except LabelReviewError as exc:
                if debug:
                    traceback.print_exc()
                err(f"labelreview: error: {exc}")
                ctx.exit(EXIT_BAD_INPUT)
            except (click.exceptions.Exit, click.ClickException, click.Abort):
                raise
            except KeyboardInterrupt:
                err("labelreview: interrupted")
                ctx.exit(130)
            except Exception as exc:  # noqa: BLE001 - the one place surprises are reported
                if debug:
                    traceback.print_exc()
                err(
                    f"labelreview: unexpected error: {type(exc).__name__}: {exc} "
                    "(run with --debug for a traceback, and please report it)"
                )
                ctx.exit(EXIT_BAD_INPUT)
            finally:
                for w in caught:
                    err(f"labelreview: warning: {w.message}")

    return wrapper  # type: ignore[return-value]


def dataset_argument(func: F) -> F:
    """The DATASET_DIR argument alone (default: the current folder)."""
    return click.argument(
        "dataset_dir",
        required=False,
        default=".",
        type=click.Path(file_okay=False, path_type=Path),
    )(func)


def dataset_options(func: F) -> F:
    """DATASET_DIR plus --annotations, --taxonomy and --encoding, shared by every data command."""
    options = [
        click.option(
            "--annotations",
            type=click.Path(dir_okay=False, path_type=Path),
            help="Annotation file (overrides the dataset config).",
        ),
        click.option(
            "--taxonomy",
            type=click.Path(dir_okay=False, path_type=Path),
            help="Taxonomy file (overrides the dataset config).",
        ),
        click.option("--encoding", help="Text encoding of the input files (default UTF-8)."),
    ]
    for option in reversed(options):
        func = option(func)
    return dataset_argument(func)


def load(
    dataset_dir: Path,
    annotations: Path | None = None,
    taxonomy: Path | None = None,
    encoding: str | None = None,
    subjects: str | None = None,
    *,
    quiet: bool = False,
) -> Dataset:
    """Load a dataset folder and say on stderr what was read."""
    from labelreview.dataset import load_dataset

    dataset = load_dataset(
        dataset_dir,
        annotations=annotations,
        taxonomy=taxonomy,
        encoding=encoding,
        subjects=subjects,
    )
    if not quiet:
        for report in dataset.reports:
            err(describe_load(report))
    return dataset


def fail_on_option(help_text: str) -> Callable[[F], F]:
    """``--fail-on low|medium|high``, the gate level, with each command's own help text."""
    from labelreview.model import SEVERITIES

    return click.option("--fail-on", type=click.Choice(list(SEVERITIES)), help=help_text)


def quiet_option(func: F) -> F:
    """``--quiet``: no progress display on stderr (it is off anyway when stderr is no terminal)."""
    return click.option(
        "--quiet",
        "-q",
        is_flag=True,
        help="No progress display (it is also off when stderr is not a terminal).",
    )(func)


def open_session(
    dataset_dir: Path,
    annotations: Path | None = None,
    taxonomy: Path | None = None,
    encoding: str | None = None,
    *,
    curator: str | None = None,
    quiet: bool = False,
    describe: bool = True,
) -> ReviewSession:
    """Load and scan a dataset folder and build its review queue, with progress on stderr.

    The one way the data commands open a dataset: reading, the lexicon scan and the data
    signals each show a step on stderr when it is a terminal (never with ``quiet``); the scan's
    notes (subjects defaulted, lexicon warnings) follow as ``note:`` lines, and the queue's own
    notes are the caller's to print (``session.queue().notes``). ``describe`` prints what each
    loader read.
    """
    from labelreview.cli._engine import progress_bars
    from labelreview.progress import phase
    from labelreview.review import ReviewSession

    with progress_bars(quiet) as progress:
        with phase(progress, f"reading {dataset_dir}"):
            dataset = load(dataset_dir, annotations, taxonomy, encoding, quiet=not describe)
        with phase(progress, "scanning the labels against the lexicons"):
            session = ReviewSession.from_dataset(dataset, curator=curator)
        with phase(progress, "computing the data signals and the review queue"):
            session.queue()
    for line in session.scanned.notes:
        note(line if line.startswith("warning:") else f"note: {line}")
    return session


def describe_load(report: LoadReport) -> str:
    """One line saying what a loader read and dropped."""
    parts = [f"labelreview: read {report.path} as {report.format}: {report.rows_read} rows"]
    if report.duplicates_dropped:
        parts.append(f"{report.duplicates_dropped} duplicate rows dropped")
    if report.empty_labels_dropped:
        parts.append(f"{report.empty_labels_dropped} empty labels dropped")
    parts.extend(report.notes)
    return "; ".join(parts)


def shorten(text: str, width: int) -> str:
    """Cut ``text`` to ``width`` characters, ending in an ellipsis when cut."""
    return text if len(text) <= width else text[: max(width - 1, 1)] + "\u2026"
