"""``labelreview scan``: findings for a dataset's labels, as a table, JSON or CSV."""

from __future__ import annotations

import json
import shutil
import textwrap
from collections.abc import Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any

import click

from labelreview.cli._common import (
    dataset_options,
    describe_load,
    err,
    handle_errors,
    load,
    note,
    shorten,
)
from labelreview.cli._engine import engine_options, progress_bars
from labelreview.report import CAUTIONS, DatasetScan, ScanResult, scan_dataset

if TYPE_CHECKING:
    from labelreview.textscan import TextScanResult


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
    "--text-column",
    "text_columns",
    multiple=True,
    metavar="NAME",
    help="Also scan this free-text column (captions, descriptions, comments) of the item "
    "table, or else of the annotation file (repeatable; default: the config's "
    "scan.text_columns).",
)
@click.option(
    "--format",
    "fmt",
    type=click.Choice(["table", "json", "csv"]),
    default="table",
    show_default=True,
    help="Output format.",
)
@engine_options
@handle_errors
def scan(
    dataset_dir: Path,
    annotations: Path | None,
    taxonomy: Path | None,
    encoding: str | None,
    subjects: str | None,
    extra_layers: tuple[Path, ...],
    text_columns: tuple[str, ...],
    fmt: str,
    stream: bool | None,
    engine: str | None,
    scheduler: str | None,
    temp_dir: Path | None,
    quiet: bool,
) -> None:
    """Scan a dataset's labels (and free-text columns) against the lexicons.

    DATASET_DIR is a folder with labelreview.yaml (default: the current folder); --annotations
    and --taxonomy point at files directly. Exit code 0 whether or not anything is found.
    """
    with progress_bars(quiet) as progress:
        scanned, text = run_scan_all(
            dataset_dir,
            annotations,
            taxonomy,
            encoding,
            subjects,
            extra_layers,
            text_columns=text_columns,
            stream=stream,
            engine=engine,
            scheduler=scheduler,
            temp_dir=temp_dir,
            progress=progress,
        )
    result = scanned.result
    if fmt == "json":
        rows: list[Any] = result.rows()
        if text is not None:
            rows += [f.to_dict() for f in text.findings]
        click.echo(json.dumps(rows, indent=2, ensure_ascii=False))
    elif fmt == "csv":
        if text is None:
            from labelreview.report import findings_csv

            click.echo(findings_csv(result), nl=False)
        else:
            from labelreview.textscan import combined_csv

            click.echo(combined_csv(result.rows(), text), nl=False)
    else:
        click.echo(scan_table(result))
        if text is not None:
            click.echo("")
            click.echo(text_table(text))


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


def run_scan_all(
    dataset_dir: Path,
    annotations: Path | None,
    taxonomy: Path | None,
    encoding: str | None,
    subjects: str | None,
    extra_layers: tuple[Path, ...],
    *,
    text_columns: tuple[str, ...] = (),
    stream: bool | None = None,
    engine: str | None = None,
    scheduler: str | None = None,
    temp_dir: Path | None = None,
    progress: Any = None,
) -> tuple[DatasetScan, TextScanResult | None]:
    """Labels and, when asked, free text, with the engine the options and config choose."""
    from labelreview.dataset import configure
    from labelreview.engine import should_stream
    from labelreview.progress import phase

    config = configure(
        dataset_dir,
        annotations=annotations,
        taxonomy=taxonomy,
        encoding=encoding,
        subjects=subjects,
    )
    names = text_columns or config.scan.text_columns
    if names:
        from labelreview.textscan import text_sources

        text_sources(config, names)  # a column that is nowhere fails now, before any reading
    chosen = engine or config.engine.name
    text_sums = None
    if chosen == "dask":
        from labelreview.distributed import dask_scan
        from labelreview.engine import taxonomy_dataset

        dataset = taxonomy_dataset(config)
        usage, text_sums, reports = dask_scan(
            config,
            names,
            subjects=subjects,
            extra_layers=extra_layers,
            scheduler=scheduler or config.engine.scheduler,
            progress=progress,
        )
        for report in [*dataset.reports, *reports]:
            err(describe_load(report))
        scanned = scan_dataset(dataset, subjects=subjects, extra_layers=extra_layers, usage=usage)
    elif should_stream(config, stream):
        from labelreview.engine import (
            annotation_stream,
            stream_usage,
            taxonomy_dataset,
            with_taxonomy,
        )

        dataset = taxonomy_dataset(config)
        for report in dataset.reports:
            err(describe_load(report))
        scanner, lexicon_scan = (
            _text_scanner(dataset, subjects, extra_layers) if names else (None, None)
        )
        if names:
            text_sums = _scan_text(config, names, scanner, progress)
        usage, pairs, report = stream_usage(
            annotation_stream(config),
            progress=progress,
            temp_dir=temp_dir or config.engine.temp_dir,
            pairs_for=text_sums.hit_items() if text_sums is not None else None,
        )
        err(describe_load(report))
        if text_sums is not None:
            text_sums.add_item_labels(pairs)
        names_tax = [t.name for t in dataset.taxonomy]
        scanned = scan_dataset(
            dataset,
            subjects=subjects,
            extra_layers=extra_layers,
            usage=with_taxonomy(usage, names_tax),
        )
    else:
        with phase(progress, "reading the dataset"):
            dataset = load(dataset_dir, annotations, taxonomy, encoding, subjects)
        with phase(progress, "scanning labels"):
            scanned = scan_dataset(dataset, subjects=subjects, extra_layers=extra_layers)
        if names:
            from labelreview.textscan import label_pairs

            scanner, _ = _text_scanner(dataset, subjects, extra_layers)
            text_sums = _scan_text(config, names, scanner, progress)
            text_sums.add_item_labels(
                label_pairs(dataset.annotations, text_sums.hit_items())
                if dataset.annotations is not None
                else label_pairs(None, ())
            )
    for line in scanned.notes:
        note(line if line.startswith("warning:") else f"note: {line}")
    text = None
    if text_sums is not None:
        from labelreview.textscan import text_result

        text = text_result(text_sums, scanned.lexicon)
    return scanned, text


def _text_scanner(dataset: Any, subjects: str | None, extra_layers: tuple[Path, ...]) -> Any:
    from labelreview.lexicon import load_lexicon
    from labelreview.textscan import TextScanner

    config = dataset.config
    lexicon = load_lexicon([*config.lexicons.layers, *extra_layers], base=config.lexicons.base)
    chosen = subjects or config.subjects or "mixed"
    scanner = TextScanner(
        lexicon,
        chosen,
        fuzzy_threshold=config.scan.fuzzy_threshold,
        fuzzy_min_length=config.scan.fuzzy_min_length,
    )
    return scanner, lexicon


def _scan_text(config: Any, names: tuple[str, ...], scanner: Any, progress: Any) -> Any:
    from labelreview.textscan import scan_text_sources, text_sources

    return scan_text_sources(
        text_sources(config, names),
        scanner,
        batch_bytes=int(config.engine.batch_mb * (1 << 20)),
        progress=progress,
    )


def text_table(text: TextScanResult) -> str:
    """The free-text findings as plain text: counts per column, then each term."""
    lines: list[str] = []
    for column, scanned in text.scanned.items():
        hits = text.with_hits.get(column, 0)
        lines.append(f"Free text '{column}': {hits:,} of {scanned:,} rows have a hit")
    width = min(shutil.get_terminal_size((100, 24)).columns, 120)
    for f in text.findings:
        forms = ", ".join(f.matched[:4])
        lines.append("")
        lines.append(
            f"{f.severity:8}  {shorten(f.term, 24):24}  {shorten(f.category, 26):26}  "
            f"{f.column}: {f.rows:,} rows, {f.hits:,} hits (as {forms})"
        )
        lines.extend(
            textwrap.wrap(
                f.reason,
                width=max(width, 60),
                initial_indent=" " * 10 + "why: ",
                subsequent_indent=" " * 15,
            )
        )
        if f.suggestions:
            lines.append(f"{'':10}try: {', '.join(f.suggestions)}")
        if f.labels:
            beside = ", ".join(f"{label} ({n:,})" for label, n in f.labels[:5])
            lines.append(f"{'':10}labels beside it: {beside}")
        for item, example in f.examples[:2]:
            lines.append(f"{'':10}e.g. {item}: {shorten(example, 80)}")
    return "\n".join(lines)


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
