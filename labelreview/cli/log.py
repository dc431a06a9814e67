"""``labelreview log verify | show | repair``: check, read and mend the decision log."""

from __future__ import annotations

import json
import textwrap
from pathlib import Path

import click

from labelreview.cli._common import EXIT_FOUND, dataset_argument, err, handle_errors, note


def _log_path(dataset_dir: Path, log_file: Path | None) -> Path:
    if log_file is not None:
        return log_file
    from labelreview.config import load_config

    return load_config(dataset_dir).log_path


_log_option = click.option(
    "--log",
    "log_file",
    type=click.Path(dir_okay=False, path_type=Path),
    help="The log file (default: the dataset config's decisions.log).",
)


@click.group("log")
def log() -> None:
    """Verify, show and repair the decision log (the audit trail)."""


@log.command("verify")
@dataset_argument
@_log_option
@click.option(
    "--expect-head",
    metavar="HASH",
    help="A head hash recorded elsewhere (manifest, export, CI); fail if the chain lacks it.",
)
@click.option("--format", "fmt", type=click.Choice(["text", "json"]), default="text")
@handle_errors
def log_verify(dataset_dir: Path, log_file: Path | None, expect_head: str | None, fmt: str) -> None:
    """Check every entry's schema, hash, sequence and chain; name the first bad entry.

    Exit code 0 when the log verifies (or does not exist yet), 1 when it was tampered with
    or ends in a torn line, 2 when it cannot be read.
    """
    from labelreview.decisions import verify_log

    path = _log_path(dataset_dir, log_file)
    result = verify_log(path, expect_head=expect_head)
    if fmt == "json":
        click.echo(json.dumps(result.to_dict(), indent=2))
    else:
        click.echo(f"{path}: {result.status()}" if result.exists else result.status())
        if result.problem is not None:
            click.echo(
                f"first bad entry: line {result.problem.line}; the {len(result.entries)} entries "
                "before it verify. Restore the log from a copy; labelreview never rewrites it."
            )
    if not result.ok:
        raise SystemExit(EXIT_FOUND)


@log.command("show")
@dataset_argument
@_log_option
@click.option("--label", help="Only entries about this label.")
@click.option("--curator", help="Only entries by this curator or approver.")
@click.option("--format", "fmt", type=click.Choice(["text", "json"]), default="text")
@handle_errors
def log_show(
    dataset_dir: Path, log_file: Path | None, label: str | None, curator: str | None, fmt: str
) -> None:
    """Print the decision history, oldest first, marking what was later revoked."""
    from labelreview.cli.decide import describe_decision
    from labelreview.decisions import fold, verify_log

    path = _log_path(dataset_dir, log_file)
    result = verify_log(path)
    if result.problem is not None:
        note(f"warning: {result.status()}; showing the entries before it")
    elif result.torn_tail:
        note(f"warning: {result.status()}")
    state = fold(result.entries)
    by_seq = {e.seq: e for e in result.entries}
    shown = []
    for entry in result.entries:
        about = entry.label
        if entry.kind == "revoke":
            about = by_seq[int(entry.get("revokes"))].label
        if label is not None and about != label:
            continue
        if curator is not None and entry.actor != curator:
            continue
        shown.append(entry)
    if fmt == "json":
        click.echo(json.dumps([e.data for e in shown], indent=2, ensure_ascii=False))
        return
    if not result.exists:
        click.echo("no decision log yet (nothing decided)")
        return
    for entry in shown:
        if entry.kind == "decision":
            text = describe_decision(entry.data)
            if entry.seq in state.revoked:
                text += "  [revoked]"
        elif entry.kind == "revoke":
            text = (
                f"undo seq {entry.get('revokes')} ('{entry.label}') by {entry.actor}: "
                f"{entry.get('reason')}"
            )
        else:
            text = f"sign-off by {entry.actor}: {entry.get('statement')}"
        lines = textwrap.wrap(
            text,
            width=100,
            initial_indent=f"{entry.seq:>5}  {entry.time}  ",
            subsequent_indent=" " * 33,
        )
        click.echo("\n".join(lines))
    if not shown:
        err("labelreview: no entries match")


@log.command("repair")
@dataset_argument
@_log_option
@handle_errors
def log_repair(dataset_dir: Path, log_file: Path | None) -> None:
    """Move a torn last line (an interrupted write) to a side file; never deletes anything."""
    from labelreview.decisions import repair_log

    path = _log_path(dataset_dir, log_file)
    side = repair_log(path)
    if side is None:
        click.echo(f"{path}: nothing to repair")
    else:
        click.echo(f"moved the torn last line of {path} to {side}; the log verifies again")
