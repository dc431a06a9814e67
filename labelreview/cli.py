"""The ``labelreview`` command line: parse arguments, call the core, print.

Exit codes: 0 success; 1 reserved for "the check found something" (the release gate);
2 bad input or usage (a :class:`~labelreview.errors.LabelReviewError`, shown as one line on
stderr; ``--debug`` shows the traceback). Data goes to stdout, messages to stderr.
"""

from __future__ import annotations

import functools
import shutil
import sys
import textwrap
import traceback
import warnings
from collections.abc import Callable
from pathlib import Path
from typing import Any, TypeVar

import click

from labelreview.errors import LabelReviewError, UsageError

F = TypeVar("F", bound=Callable[..., Any])

EXIT_FOUND = 1
EXIT_BAD_INPUT = 2


def _err(message: str) -> None:
    click.echo(message, err=True)


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
                _err(f"labelreview: error: {exc}")
                ctx.exit(EXIT_BAD_INPUT)
            except (click.exceptions.Exit, click.ClickException, click.Abort):
                raise
            except KeyboardInterrupt:
                _err("labelreview: interrupted")
                ctx.exit(130)
            except Exception as exc:  # noqa: BLE001 - the one place surprises are reported
                if debug:
                    traceback.print_exc()
                _err(
                    f"labelreview: unexpected error: {type(exc).__name__}: {exc} "
                    "(run with --debug for a traceback, and please report it)"
                )
                ctx.exit(EXIT_BAD_INPUT)
            finally:
                for w in caught:
                    _err(f"labelreview: warning: {w.message}")

    return wrapper  # type: ignore[return-value]


@click.group(context_settings={"help_option_names": ["-h", "--help"]})
@click.option("--debug", is_flag=True, help="Show tracebacks for errors.")
@click.version_option(package_name="labelreview")
def cli(debug: bool) -> None:
    """Review a labelled dataset's vocabulary for labels that pass judgement on people.

    Flags are candidates for human judgement; a clean scan does not prove a dataset fair.
    """


def main() -> None:
    """Console-script entry point."""
    cli(prog_name="labelreview")


# ---------------------------------------------------------------------------------------------
# scan


def _dataset_options(func: F) -> F:
    options = [
        click.argument(
            "dataset_dir",
            required=False,
            default=".",
            type=click.Path(file_okay=False, path_type=Path),
        ),
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
    return func


@cli.command()
@_dataset_options
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
    result = _run_scan(dataset_dir, annotations, taxonomy, encoding, subjects, extra_layers)
    if fmt == "json":
        from labelreview.report import findings_json

        click.echo(findings_json(result), nl=False)
    elif fmt == "csv":
        from labelreview.report import findings_csv

        click.echo(findings_csv(result), nl=False)
    else:
        click.echo(_scan_table(result))


def _run_scan(
    dataset_dir: Path,
    annotations: Path | None,
    taxonomy: Path | None,
    encoding: str | None,
    subjects: str | None,
    extra_layers: tuple[Path, ...] = (),
) -> Any:
    from labelreview.dataset import load_dataset
    from labelreview.lexicon import load_lexicon
    from labelreview.report import label_usage, scan_usage

    dataset = load_dataset(
        dataset_dir,
        annotations=annotations,
        taxonomy=taxonomy,
        encoding=encoding,
        subjects=subjects,
    )
    for report in dataset.reports:
        _err(_describe_load(report))
    config = dataset.config
    chosen = subjects or config.subjects
    if chosen is None:
        chosen = "mixed"
        _err(
            "labelreview: note: 'subjects' is not set; scanning as 'mixed' (people-only terms "
            "fire). Set it in labelreview.yaml or pass --subjects."
        )
    lex_cfg = config.lexicons
    layers = [*lex_cfg.layers, *extra_layers]
    lexicon = load_lexicon(layers, base=lex_cfg.base)
    for problem in lexicon.warnings:
        _err(f"labelreview: warning: {problem}")
    usage = label_usage(dataset.annotations, [t.name for t in dataset.taxonomy])
    if not usage:
        raise UsageError(
            f"no labels found in {dataset_dir}",
            hint="Point labelreview.yaml (or --annotations / --taxonomy) at your label files.",
        )
    return scan_usage(
        usage,
        lexicon,
        chosen,
        fuzzy_threshold=config.scan.fuzzy_threshold,
        fuzzy_min_length=config.scan.fuzzy_min_length,
    )


def _describe_load(report: Any) -> str:
    parts = [f"labelreview: read {report.path} as {report.format}: {report.rows_read} rows"]
    if report.duplicates_dropped:
        parts.append(f"{report.duplicates_dropped} duplicate rows dropped")
    if report.empty_labels_dropped:
        parts.append(f"{report.empty_labels_dropped} empty labels dropped")
    parts.extend(report.notes)
    return "; ".join(parts)


def _shorten(text: str, width: int) -> str:
    return text if len(text) <= width else text[: max(width - 1, 1)] + "\u2026"


def _scan_table(result: Any) -> str:
    from labelreview.report import CAUTIONS

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
                f"{r['severity']:8}  {_shorten(r['label'], label_w):{label_w}}  "
                f"{_shorten(r['category'], 26):26}  {_shorten(r['term'], 18):18}  "
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
    for caution in CAUTIONS:
        lines.extend(
            textwrap.wrap(caution, width=100, initial_indent="note: ", subsequent_indent="      ")
        )
    return "\n".join(lines)


# ---------------------------------------------------------------------------------------------
# lexicon


@cli.group()
def lexicon() -> None:
    """Validate and describe lexicon files."""


@lexicon.command("check")
@click.argument("files", nargs=-1, type=click.Path(dir_okay=False, path_type=Path))
@click.option(
    "--no-base",
    is_flag=True,
    help="Check FILES on their own, without the shipped base set before them.",
)
@handle_errors
def lexicon_check(files: tuple[Path, ...], no_base: bool) -> None:
    """Validate the shipped lexicon set plus FILES (layers, applied in order).

    Reports file:line for every problem and prints the set's content hash, which the audit
    trail records. Exit code 2 when any error is found.
    """
    from labelreview.scan import validate_lexicon

    lex, problems = validate_lexicon(list(files), base=None if no_base else "builtin")
    for problem in problems:
        _err(str(problem))
    errors = [p for p in problems if p.level == "error"]
    if lex is None or errors:
        _err(f"labelreview: {len(errors)} error(s) in the lexicon set")
        sys.exit(EXIT_BAD_INPUT)
    click.echo(
        f"{len(lex.terms)} terms in {len(lex.categories)} categories from "
        f"{len(lex.files)} files; {len(problems)} warning(s)"
    )
    for cid, cat in lex.categories.items():
        n = sum(1 for t in lex.terms if t.category == cid)
        click.echo(f"  {cid:28} {cat.severity:6} {n:5} terms")
    click.echo(f"content hash: {lex.content_hash}")


# ---------------------------------------------------------------------------------------------
# init and demo


@cli.command()
@click.argument("dataset_dir", type=click.Path(file_okay=False, path_type=Path))
@handle_errors
def init(dataset_dir: Path) -> None:
    """Sniff the files in DATASET_DIR and write a commented starter labelreview.yaml.

    Never overwrites an existing config.
    """
    from labelreview.config import write_starter_config

    path = write_starter_config(dataset_dir)
    click.echo(f"wrote {path}; read it, set 'subjects', then run: labelreview scan {dataset_dir}")


@cli.command()
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
        _err(f"labelreview: copied the sample set '{sample}' to {target}")
    else:
        _err(f"labelreview: reusing the demo folder {target}")
    result = _run_scan(target, None, None, None, None)
    click.echo(_scan_table(result))
    _err(f"labelreview: next: labelreview scan {target} --format json")


if __name__ == "__main__":  # pragma: no cover
    main()
