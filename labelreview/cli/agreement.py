"""``labelreview agreement``: how consistently annotators applied the labels.

Overall figures first, then the least reliable labels, then the annotators; or the whole
:class:`~labelreview.agreement.AgreementResult` as JSON. Defaults come from the dataset config's
``agreement:`` section where it has one; flags override it. Exit code 0 whatever the figures
(agreement informs the review; the release gate decides).
"""

from __future__ import annotations

import json
import textwrap
from pathlib import Path
from typing import Any

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
from labelreview.errors import UsageError

LEVEL_CHOICES = ("nominal", "ordinal", "interval", "ratio")
TABLE_LABELS = 10
TABLE_ANNOTATORS = 10


def _config_defaults(config: Any) -> dict[str, Any]:
    section = getattr(config, "agreement", None)
    defaults: dict[str, Any] = {
        "level": "nominal",
        "reliable": 0.800,
        "tentative": 0.667,
        "min_items": 10,
        "min_pair_items": 10,
        "bootstrap": 1000,
        "seed": 0,
    }
    if section is not None:
        for key in defaults:
            if hasattr(section, key):
                defaults[key] = getattr(section, key)
    return defaults


@click.command("agreement")
@dataset_options
@click.option(
    "--level",
    type=click.Choice(LEVEL_CHOICES),
    help="Measurement level of the labels (default: the config's, else nominal). Ordinal, "
    "interval and ratio need numeric labels.",
)
@click.option(
    "--bootstrap",
    type=click.IntRange(min=0),
    help="Bootstrap draws for alpha's 95% interval; 0 for none (default: the config's, else 1000).",
)
@click.option("--seed", type=click.IntRange(min=0), help="Seed of the bootstrap (default 0).")
@click.option(
    "--format",
    "fmt",
    type=click.Choice(["table", "json"]),
    default="table",
    show_default=True,
    help="Output format.",
)
@engine_options
@handle_errors
def agreement(
    dataset_dir: Path,
    annotations: Path | None,
    taxonomy: Path | None,
    encoding: str | None,
    level: str | None,
    bootstrap: int | None,
    seed: int | None,
    fmt: str,
    stream: bool | None,
    engine: str | None,
    scheduler: str | None,
    temp_dir: Path | None,
    quiet: bool,
) -> None:
    """Measure annotator agreement: Krippendorff's alpha, per label and per annotator.

    DATASET_DIR is a folder with labelreview.yaml (default: the current folder); --annotations
    points at a file directly. Low agreement marks labels for a human look; it is not a verdict
    on the label or on the annotators.
    """
    from labelreview.agreement import AgreementThresholds, agreement_report
    from labelreview.dataset import configure
    from labelreview.progress import phase

    config = configure(dataset_dir, annotations=annotations, taxonomy=taxonomy, encoding=encoding)
    defaults = _config_defaults(config)
    options: dict[str, Any] = {
        "level": level or defaults["level"],
        "bootstrap": defaults["bootstrap"] if bootstrap is None else bootstrap,
        "seed": defaults["seed"] if seed is None else seed,
        "thresholds": AgreementThresholds(
            reliable=float(defaults["reliable"]), tentative=float(defaults["tentative"])
        ),
        "min_items": int(defaults["min_items"]),
        "min_pair_items": int(defaults["min_pair_items"]),
    }
    chosen_engine = engine or config.engine.name
    with progress_bars(quiet) as progress:
        if chosen_engine == "dask":
            from labelreview.distributed import dask_agreement

            result, report = dask_agreement(
                config,
                scheduler=scheduler or config.engine.scheduler,
                progress=progress,
                **options,
            )
            err(describe_load(report))
        elif _streams(config, stream):
            from labelreview.agreement import stream_agreement
            from labelreview.engine import annotation_stream

            result, report = stream_agreement(
                annotation_stream(config),
                progress=progress,
                temp_dir=temp_dir or config.engine.temp_dir,
                **options,
            )
            err(describe_load(report))
        else:
            with phase(progress, "reading the dataset"):
                dataset = load(dataset_dir, annotations, taxonomy, encoding)
            if dataset.annotations is None or not len(dataset.annotations):
                raise UsageError(
                    f"no annotations found in {dataset_dir}; agreement needs who gave which label",
                    hint="Point labelreview.yaml's annotations.path (or --annotations) at the "
                    "file.",
                )
            with phase(progress, "computing agreement"):
                result = agreement_report(dataset.annotations, **options)
    for line in result.notes:
        note(f"note: {line}")
    if fmt == "json":
        click.echo(json.dumps(result.to_dict(), indent=2, allow_nan=False))
    else:
        click.echo(agreement_table(result.to_dict()))


def _streams(config: Any, requested: bool | None) -> bool:
    from labelreview.engine import should_stream

    return should_stream(config, requested)


def _fmt(value: float | None, digits: int = 3) -> str:
    return "-" if value is None else f"{value:.{digits}f}"


def agreement_table(data: dict[str, Any]) -> str:
    """The table view: overall figures, least reliable labels, annotators, cautions."""
    lines: list[str] = []
    ci = data["ci"]
    ci_text = f"95% CI {_fmt(ci[0])} to {_fmt(ci[1])}" if ci else f"no CI ({data['ci_reason']})"
    distance = data["distance"] if data["distance"] != data["level"] else data["level"]
    alpha_line = (
        f"Krippendorff's alpha ({distance}): {_fmt(data['alpha'])}  {data['interpretation']}"
    )
    if data["alpha"] is None:
        alpha_line += f" ({data['alpha_reason']})"
    lines.append(alpha_line)
    lines.append(f"  {ci_text}")
    lines.append(
        f"  {data['n_items']} items ({data['n_pairable']} with two or more annotations, "
        f"{data['n_unpairable']} left out), {data['n_annotators']} annotators, "
        f"{data['n_labels']} labels"
    )
    lines.append(f"percent agreement: {_fmt(data['percent_agreement'])}")
    for name, key in (("Gwet's AC1", "gwet_ac1"), ("Fleiss' kappa", "fleiss_kappa")):
        if data[key] is None:
            lines.append(f"{name}: - ({data[key + '_reason']})")
        else:
            lines.append(f"{name}: {_fmt(data[key])}  {data[key + '_interpretation']}")
    pairs = data["pairwise_cohen"]
    if pairs:
        kappas = [p["kappa"] for p in pairs if p["kappa"] is not None]
        if kappas:
            lines.append(
                f"Cohen's kappa over {len(pairs)} annotator pairs: {min(kappas):.3f} to "
                f"{max(kappas):.3f} (median {sorted(kappas)[len(kappas) // 2]:.3f})"
            )
    elif data["pairwise_cohen_reason"]:
        lines.append(f"Cohen's kappa: - ({data['pairwise_cohen_reason']})")

    labels = data["per_label"][:TABLE_LABELS]
    if labels:
        width = min(max(len(x["label"]) for x in labels), 40)
        lines.append("")
        lines.append(f"Least reliable labels (of {len(data['per_label'])}):")
        lines.append(f"  {'LABEL':{width}}  {'ALPHA':>6}  {'ITEMS':>6}  {'SHARE':>6}  READS AS")
        for x in labels:
            reads = x["interpretation"] if x["alpha"] is not None else x["alpha_reason"]
            lines.append(
                f"  {shorten(x['label'], width):{width}}  {_fmt(x['alpha']):>6}  "
                f"{x['n_items']:>6}  {x['prevalence'] * 100:5.1f}%  {reads}"
            )
    splits = data["split_pairs"][:5]
    if splits:
        lines.append("")
        lines.append("Most frequent splits (two annotators, one item, these two values):")
        for s in splits:
            first, second = sorted(s["labels"])
            lines.append(
                f"  {s['coincidences']:8.1f}  {shorten(first, 40)}  <->  {shorten(second, 40)}"
            )
    annotators = data["per_annotator"][:TABLE_ANNOTATORS]
    if annotators:
        width = min(max(len(a["annotator"]) for a in annotators), 24)
        lines.append("")
        lines.append(
            "Annotators (alpha without them; a positive change means agreement rises without them):"
        )
        lines.append(
            f"  {'ANNOTATOR':{width}}  {'ITEMS':>6}  {'WITHOUT':>7}  {'CHANGE':>7}  MAJORITY"
        )
        for a in annotators:
            change = "-" if a["change"] is None else f"{a['change']:+.3f}"
            lines.append(
                f"  {shorten(a['annotator'], width):{width}}  {a['n_items']:>6}  "
                f"{_fmt(a['alpha_without']):>7}  {change:>7}  {_fmt(a['majority_agreement'])}"
            )
    lines.append("")
    lines.append(
        f"alpha reads as reliable at >= {data['thresholds']['reliable']:.3f} and tentative at "
        f">= {data['thresholds']['tentative']:.3f} (Krippendorff 2004); kappa words after "
        "Landis & Koch (1977)."
    )
    for caution in data["cautions"]:
        lines.extend(
            textwrap.wrap(caution, width=100, initial_indent="note: ", subsequent_indent="      ")
        )
    return "\n".join(lines)
