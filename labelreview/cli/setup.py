"""``labelreview init`` and ``labelreview demo``: getting a dataset folder started."""

from __future__ import annotations

import shutil
from pathlib import Path

import click

from labelreview.cli._common import handle_errors, note
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
@handle_errors
def demo(target: Path, sample: str) -> None:
    """Copy a bundled, invented sample set to a working folder and scan it.

    An existing demo folder is reused as it is, so changes made there are never lost; any
    other non-empty folder is refused.
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
    result = run_scan(target).result
    click.echo(scan_table(result))
    note(f"next: labelreview scan {target} --format json")
