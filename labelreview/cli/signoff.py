"""``labelreview signoff``: record an approver's sign-off in the decision log."""

from __future__ import annotations

from pathlib import Path

import click

from labelreview.cli._common import (
    dataset_options,
    fail_on_option,
    handle_errors,
    open_session,
    quiet_option,
)


@click.command("signoff")
@dataset_options
@click.option("--approver", required=True, help="Who signs off (name or id).")
@click.option(
    "--statement",
    required=True,
    help="What the approver states (at least decisions.min_reason_length characters).",
)
@fail_on_option("Gate level signed for (default: decisions.fail_on).")
@quiet_option
@handle_errors
def signoff(
    dataset_dir: Path,
    annotations: Path | None,
    taxonomy: Path | None,
    encoding: str | None,
    approver: str,
    statement: str,
    fail_on: str | None,
    quiet: bool,
) -> None:
    """Sign off DATASET_DIR (default: the current folder) for release.

    The sign-off is bound to the log head, the dataset fingerprint and the lexicon hash; any
    later decision, data change or lexicon change voids it (see `labelreview check
    --require-signoff`). It is refused while flags at or above the gate level are unresolved,
    when the log does not verify, with a short statement, and, under the four-eyes rule
    (decisions.four_eyes), for an approver who made a high-severity decision in force.
    """
    from labelreview.gate import sign_off

    session = open_session(
        dataset_dir, annotations, taxonomy, encoding, quiet=quiet, describe=False
    )
    entry = sign_off(session, approver=approver, statement=statement, fail_on=fail_on)
    click.echo(
        f"signed off: seq {entry.seq} hash {entry.hash} by {entry.actor} at {entry.time} "
        f"(gate level {entry.get('fail_on')})"
    )
    click.echo(
        f"bound to log head {entry.get('signs_head')}, dataset {entry.get('dataset_fingerprint')}, "
        f"lexicon {entry.get('lexicon_hash')}"
    )
