"""``labelreview export``: the audit trail for a governance board (CSV, JSON, Markdown, HTML)."""

from __future__ import annotations

from pathlib import Path

import click

from labelreview.cli._common import (
    dataset_options,
    fail_on_option,
    handle_errors,
    note,
    open_session,
    quiet_option,
)


@click.command("export")
@dataset_options
@click.option(
    "--to",
    "target",
    required=True,
    type=click.Path(dir_okay=False, path_type=Path),
    help="The file to write; its ending picks the format: .csv, .json, .md or .html.",
)
@click.option("--force", is_flag=True, help="Replace the file if it exists.")
@fail_on_option("Gate level for the 'at gate' marks (default: the config's decisions.fail_on).")
@click.option("--no-agreement", is_flag=True, help="Leave out the annotator agreement summary.")
@quiet_option
@handle_errors
def export(
    dataset_dir: Path,
    annotations: Path | None,
    taxonomy: Path | None,
    encoding: str | None,
    target: Path,
    force: bool,
    fail_on: str | None,
    no_agreement: bool,
    quiet: bool,
) -> None:
    """Write the audit trail of DATASET_DIR (default: the current folder) to a file.

    \b
      labelreview export [DATASET_DIR] --to audit.html
      labelreview export [DATASET_DIR] --to audit.csv --force

    The report holds the input fingerprints, the lexicon hash, counts by category, severity,
    data signal and action, every decision with its reason, curator and time (revoked ones
    marked), the undecided entries of the review queue with their scores and reasons, the
    queue's formula and weights, the agreement summary where defined, sign-offs and whether
    they still hold, the log's verification status and the cautions. The HTML page is
    self-contained.
    """
    from labelreview.export import agreement_summary, export_report, format_for

    fmt = format_for(target)  # refuse a bad ending before any work
    session = open_session(dataset_dir, annotations, taxonomy, encoding, quiet=quiet)
    dataset = session.dataset
    agreement = None
    if not no_agreement:
        agreement = agreement_summary(
            dataset.annotations, dataset.config, result=session.signals().agreement
        )
    for line in session.queue().notes:
        note(f"note: {line}")
    if agreement is not None and not agreement.get("available"):
        note(f"note: {agreement.get('note')}")
    path, report = export_report(session, target, agreement=agreement, fail_on=fail_on, force=force)
    if not report["log"]["verified"]:
        note(f"warning: the decision log {report['log']['status']}; the report says so")
    click.echo(
        f"wrote {path} ({fmt}): {len(report['decisions'])} decision(s), "
        f"{len(report['unresolved'])} undecided flag(s), {len(report['signoffs'])} sign-off(s)"
    )
