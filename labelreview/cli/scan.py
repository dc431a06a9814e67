"""``labelreview scan``: findings for a dataset's labels, as a table, JSON or CSV."""

from __future__ import annotations

import shutil
import textwrap
from collections.abc import Sequence
from pathlib import Path

import click

from labelreview.cli._common import dataset_options, handle_errors, load, note, shorten
from labelreview.report import CAUTIONS, DatasetScan, ScanResult, scan_dataset


@click.command("scan")
@dataset_options
@click.option(
    "--subjects",
    type=click.Choice(["people", "mixed", "none"]),
    help="Do the items depict or describe people? (default: the config's, else mixed)",
)
@click.option(
    "--lexicon",
    "extra_layers",
    multiple=True,
    type=click.Path(dir_okay=False, path_type=Path),
    help="An extra lexicon layer file, applied after the config's layers (repeatable).",
)
@click.option(
    "--format",
    "fmt",
    type=click.Choice(["table", "json", "csv"]),
    default="table",
    show_default=True,
    help="Output format.",
)
@handle_errors
def scan(
    dataset_dir: Path,
    annotations: Path | None,
    taxonomy: Path | None,
    encoding: str | None,
    subjects: str | None,
    extra_layers: tuple[Path, ...],
    fmt: str,
) -> None:
    """Scan a dataset's labels against the lexicons and list what needs a human look.

    DATASET_DIR is a folder with labelreview.yaml (default: the current folder); --annotations
    and --taxonomy point at files directly. Exit code 0 whether or not anything is found.
    """
    result = run_scan(dataset_dir, annotations, taxonomy, encoding, subjects, extra_layers).result
    if fmt == "json":
        from labelreview.report import findings_json

        click.echo(findings_json(result), nl=False)
    elif fmt == "csv":
        from labelreview.report import findings_csv

        click.echo(findings_csv(result), nl=False)
    else:
        click.echo(scan_table(result))


def run_scan(
    dataset_dir: Path,
    annotations: Path | None = None,
    taxonomy: Path | None = None,
    encoding: str | None = None,
    subjects: str | None = None,
    extra_layers: tuple[Path, ...] = (),
) -> DatasetScan:
    """Load and scan a dataset folder, passing the core's notes on to stderr."""
    dataset = load(dataset_dir, annotations, taxonomy, encoding, subjects)
    scanned = scan_dataset(dataset, subjects=subjects, extra_layers=extra_layers)
    for line in scanned.notes:
        note(line if line.startswith("warning:") else f"note: {line}")
    return scanned


def scan_table(result: ScanResult) -> str:
    """The scan as a plain-text table with reasons, suggestions and the cautions."""
    rows = result.rows()
    lines: list[str] = []
    n_labels = len({r["label"] for r in rows})
    lines.append(
        f"{n_labels} of {result.labels_scanned} labels flagged ({len(rows)} findings); "
        f"subjects: {result.subjects}; lexicon {result.lexicon_hash[:19]}"
    )
    if rows:
        width = min(shutil.get_terminal_size((100, 24)).columns, 120)
        label_w = min(max(len(r["label"]) for r in rows), 40)
        head = (
            f"{'SEVERITY':8}  {'LABEL':{label_w}}  {'CATEGORY':26}  {'TERM':18}  {'MATCH':10}  USES"
        )
        lines.append("")
        lines.append(head)
        for r in rows:
            match = r["match"] if r["match"] != "fuzzy" else f"fuzzy {r['score']:.0f}"
            lines.append(
                f"{r['severity']:8}  {shorten(r['label'], label_w):{label_w}}  "
                f"{shorten(r['category'], 26):26}  {shorten(r['term'], 18):18}  "
                f"{match:10}  {r['annotations']}"
            )
            lines.extend(
                textwrap.wrap(
                    r["reason"],
                    width=max(width, 60),
                    initial_indent=" " * 10 + "why: ",
                    subsequent_indent=" " * 15,
                )
            )
            if r["suggestions"]:
                lines.append(f"{'':10}try: {', '.join(r['suggestions'])}")
    lines.append("")
    lines.extend(cautions_text())
    return "\n".join(lines)


def cautions_text(cautions: Sequence[str] = CAUTIONS) -> list[str]:
    """The cautions, wrapped, one ``note:`` paragraph each."""
    lines: list[str] = []
    for caution in cautions:
        lines.extend(
            textwrap.wrap(caution, width=100, initial_indent="note: ", subsequent_indent="      ")
        )
    return lines
