"""``labelreview apply``: write the revised dataset, its mapping table and manifest."""

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


@click.command("apply")
@dataset_options
@click.option(
    "--out",
    "out_dir",
    required=True,
    type=click.Path(path_type=Path),
    help="Folder for the revised dataset (new or empty; never the dataset folder).",
)
@fail_on_option(
    "Refuse while undecided flags at or above this severity remain "
    "(default: the config's decisions.fail_on)."
)
@click.option(
    "--allow-unresolved",
    is_flag=True,
    help="Apply although flags at the gate level are undecided (the manifest records it).",
)
@click.option(
    "--force",
    is_flag=True,
    help="Replace the output of an earlier apply in --out (only files it wrote, unchanged).",
)
@click.option("--dry-run", is_flag=True, help="Show what would change; write nothing.")
@quiet_option
@handle_errors
def apply(
    dataset_dir: Path,
    annotations: Path | None,
    taxonomy: Path | None,
    encoding: str | None,
    out_dir: Path,
    fail_on: str | None,
    allow_unresolved: bool,
    force: bool,
    dry_run: bool,
    quiet: bool,
) -> None:
    """Apply the decisions in force to a copy of DATASET_DIR (default: the current folder).

    \b
      labelreview apply [DATASET_DIR] --out DIR [--fail-on LEVEL] [--allow-unresolved]

    Writes into DIR the revised annotations and taxonomy (same formats as the inputs),
    mapping.csv (each old label, what happened to it, its new label and counts) and
    manifest.json (input and output hashes, the log head, the lexicon hash, counts). The
    inputs are only read. Exit code 2 when refused: undecided flags at the gate level, a log
    that does not verify, decisions that loop, or an output folder holding other files.
    """
    from labelreview.apply import apply_decisions, plan_apply

    session = open_session(dataset_dir, annotations, taxonomy, encoding, quiet=quiet)
    if dry_run:
        plan = plan_apply(session, fail_on=fail_on, allow_unresolved=allow_unresolved)
        changed = [m for m in plan.mapping.values() if m.changed]
        for m in sorted(changed, key=lambda m: m.old_label):
            target = m.new_label if m.new_label is not None else "(annotations dropped)"
            click.echo(
                f"{m.result:6}  {m.old_label} -> {target}  "
                f"({m.annotations_before} -> {m.annotations_after} annotations)"
            )
        for line in plan.notes:
            note(f"note: {line}")
        counts = plan.counts
        click.echo(
            f"dry run: {len(changed)} label(s) change; annotations {counts.annotations_in} -> "
            f"{counts.annotations_out} ({counts.dropped} dropped, {counts.merged} merged); "
            "nothing written"
        )
        return
    result = apply_decisions(
        session, out_dir, fail_on=fail_on, allow_unresolved=allow_unresolved, force=force
    )
    for line in result.plan.notes:
        note(f"note: {line}")
    counts = result.manifest["counts"]
    for role, path in result.files.items():
        click.echo(f"wrote {path} ({role})")
    click.echo(
        f"annotations {counts['annotations_in']} -> {counts['annotations_out']} "
        f"({counts['annotations_dropped']} dropped, {counts['annotations_merged']} merged); "
        f"file rows {counts['rows_in']} -> {counts['rows_out']}; labels: "
        f"{counts['renamed']} renamed, {counts['merged']} merged, {counts['retired']} retired, "
        f"{counts['accepted']} accepted, {counts['moved_with_parent']} moved with a parent"
    )
    log = result.manifest["log"]
    click.echo(f"log head {log['head'][:12]} ({log['status']})")
    if result.manifest["gate"]["allow_unresolved"] and result.plan.unresolved:
        note(
            f"warning: {len(result.plan.unresolved)} flag(s) at or above "
            f"'{result.plan.fail_on}' were still undecided (recorded in the manifest)"
        )
