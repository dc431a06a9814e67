"""``labelreview init`` and ``labelreview demo``: getting a dataset folder started."""

from __future__ import annotations

import shutil
from pathlib import Path

import click

from labelreview.cli._common import handle_errors, note
from labelreview.cli.review import has_terminal, run_review
from labelreview.cli.scan import run_scan, scan_table
from labelreview.errors import UsageError


@click.command("init")
@click.argument("dataset_dir", type=click.Path(file_okay=False, path_type=Path))
@handle_errors
def init(dataset_dir: Path) -> None:
    """Sniff the files in DATASET_DIR and write a commented starter labelreview.yaml.

    Never overwrites an existing config.
    """
    from labelreview.config import write_starter_config

    path = write_starter_config(dataset_dir)
    click.echo(f"wrote {path}; read it, set 'subjects', then run: labelreview scan {dataset_dir}")


@click.command("demo")
@click.option(
    "--dir",
    "target",
    type=click.Path(file_okay=False, path_type=Path),
    default=Path("labelreview-demo"),
    show_default=True,
    help="Working folder to copy the sample set into.",
)
@click.option(
    "--sample",
    default="harbour_archive",
    show_default=True,
    help="Which bundled sample set to use.",
)
@click.option(
    "--no-app",
    is_flag=True,
    help="Print the scan instead of opening the review app (the default without a terminal).",
)
@click.option("--curator", help="Who decides in the review app (default: the OS user).")
@handle_errors
def demo(target: Path, sample: str, no_app: bool, curator: str | None) -> None:
    """Copy a bundled, invented sample set to a working folder and open the review app on it.

    An existing demo folder is reused as it is, so changes made there (and decisions already
    logged) are never lost; any other non-empty folder is refused. Without a terminal, or with
    --no-app, the scan is printed instead.
    """
    from labelreview._resources import sample_sets_dir

    source = sample_sets_dir() / sample
    if not source.is_dir():
        names = sorted(p.name for p in sample_sets_dir().iterdir() if p.is_dir())
        raise UsageError(f"no sample set named '{sample}'; available: {', '.join(names)}")
    marker = target / ".labelreview-demo"
    if target.exists() and any(target.iterdir()) and not marker.exists():
        raise UsageError(
            f"{target} exists and is not a labelreview demo folder; refusing to write into it.",
            hint="Pass --dir with a new folder name.",
        )
    if not marker.exists():
        shutil.copytree(source, target, dirs_exist_ok=True)
        marker.write_text(f"copied from the bundled sample set '{sample}'\n", encoding="utf-8")
        note(f"copied the sample set '{sample}' to {target}")
    else:
        note(f"reusing the demo folder {target}")
    if not no_app and has_terminal():
        run_review(target, curator=curator)
        return
    result = run_scan(target).result
    click.echo(scan_table(result))
    note(f"next: labelreview review {target}  (the review app; it needs a terminal)")
