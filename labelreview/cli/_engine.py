"""Options for large data (``--stream``, ``--engine``, ``--scheduler``, ``--temp-dir``,
``--quiet``) and the progress bars the core's progress events turn into.

Progress goes to stderr, only when stderr is a terminal and ``--quiet`` is not given, so piped
output and CI logs stay clean; stdout carries only the data. The bars disappear when done.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Any, TypeVar

import click

from labelreview.progress import ProgressCallback, ProgressEvent

F = TypeVar("F", bound=Callable[..., Any])


def engine_options(func: F) -> F:
    """The options every command that reads a whole dataset's annotations shares."""
    options = [
        click.option(
            "--stream/--no-stream",
            "stream",
            default=None,
            help="Read the annotation file in batches, with memory bounded (default: only "
            "files larger than engine.stream_above_mb, 512 MB).",
        ),
        click.option(
            "--engine",
            "engine",
            type=click.Choice(["local", "dask"]),
            help="Where to compute: this machine, or a Dask cluster over Parquet "
            "(default: the config's engine.name, else local). Needs labelreview[dask].",
        ),
        click.option(
            "--scheduler",
            metavar="ADDRESS",
            help="Dask: address of an existing scheduler, e.g. tcp://10.1.2.3:8786 (default: "
            "the config's engine.scheduler, else a local cluster on this machine).",
        ),
        click.option(
            "--temp-dir",
            type=click.Path(file_okay=False, path_type=Path),
            help="Where a file not sorted by item is partitioned while reading in batches "
            "(default: the config's engine.temp_dir, else the system's temporary folder).",
        ),
        click.option(
            "--quiet",
            "-q",
            is_flag=True,
            help="No progress bars (they are also off when stderr is not a terminal).",
        ),
    ]
    for option in reversed(options):
        func = option(func)
    return func


@contextmanager
def progress_bars(quiet: bool) -> Iterator[ProgressCallback | None]:
    """A progress callback drawing rich progress bars on stderr, or None when quiet."""
    from rich.console import Console

    console = Console(stderr=True)
    if quiet or not console.is_terminal:
        yield None
        return
    from rich.progress import (
        BarColumn,
        Progress,
        ProgressColumn,
        SpinnerColumn,
        TextColumn,
        TimeElapsedColumn,
        TimeRemainingColumn,
    )
    from rich.text import Text

    class Amount(ProgressColumn):
        """``12.3 / 45.6 MB`` for bytes, ``3 / 8 parts`` for counts."""

        def render(self, task: Any) -> Text:
            unit = task.fields.get("unit", "")
            if unit == "steps" or task.total is None:
                return Text("")
            if unit == "bytes":
                return Text(f"{task.completed / 1e6:,.1f} / {task.total / 1e6:,.1f} MB")
            return Text(f"{task.completed:,.0f} / {task.total:,.0f} {unit}")

    bars = Progress(
        SpinnerColumn(),
        TextColumn("{task.description}"),
        BarColumn(),
        Amount(),
        TimeElapsedColumn(),
        TimeRemainingColumn(),
        console=console,
        transient=True,
    )
    tasks: dict[str, Any] = {}

    def show(event: ProgressEvent) -> None:
        task = tasks.get(event.task)
        if task is None:
            task = tasks[event.task] = bars.add_task(event.task, total=event.total, unit=event.unit)
        bars.update(task, completed=event.done, total=event.total)
        if event.finished:
            bars.remove_task(task)
            del tasks[event.task]

    with bars:
        yield show
