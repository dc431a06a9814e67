"""``labelreview check``: the release gate, as text, JSON or SARIF 2.1.0."""

from __future__ import annotations

import json
import textwrap
from pathlib import Path
from typing import TYPE_CHECKING

import click

from labelreview.cli._common import (
    EXIT_FOUND,
    dataset_options,
    fail_on_option,
    handle_errors,
    open_session,
    quiet_option,
)
from labelreview.cli.scan import cautions_text

if TYPE_CHECKING:
    from labelreview.gate import GateResult


@click.command("check")
@dataset_options
@fail_on_option("Gate level: unresolved flags at or above it fail (default: decisions.fail_on).")
@click.option(
    "--format",
    "fmt",
    type=click.Choice(["text", "json", "sarif"]),
    default="text",
    show_default=True,
    help="Output format; sarif is SARIF 2.1.0 for CI systems.",
)
@click.option(
    "--allow-lexicon-change",
    is_flag=True,
    help="Do not fail when decisions in force were made with another lexicon set.",
)
@click.option(
    "--require-signoff",
    is_flag=True,
    help="Fail unless the latest sign-off still covers the log, data and lexicon set.",
)
@quiet_option
@handle_errors
def check(
    dataset_dir: Path,
    annotations: Path | None,
    taxonomy: Path | None,
    encoding: str | None,
    fail_on: str | None,
    fmt: str,
    allow_lexicon_change: bool,
    require_signoff: bool,
    quiet: bool,
) -> None:
    """The release gate for DATASET_DIR (default: the current folder).

    Exit code 0 when no unresolved flag at or above the gate level remains, the decision log
    verifies, the decisions in force were made with the current lexicon set and (with
    --require-signoff) a valid sign-off covers it all; 1 when any of that fails; 2 on bad input.
    A pass means the review was done and recorded, not that the dataset is fair.
    """
    from labelreview.gate import check_gate

    session = open_session(
        dataset_dir, annotations, taxonomy, encoding, quiet=quiet, describe=False
    )
    result = check_gate(
        session,
        fail_on=fail_on,
        allow_lexicon_change=allow_lexicon_change,
        require_signoff=require_signoff,
    )
    if fmt == "json":
        click.echo(json.dumps(result.to_dict(), indent=2, ensure_ascii=False))
    elif fmt == "sarif":
        from labelreview.sarif import gate_sarif_json

        click.echo(gate_sarif_json(result), nl=False)
    else:
        click.echo(gate_text(result))
    if not result.passed:
        click.get_current_context().exit(EXIT_FOUND)


def gate_text(result: GateResult) -> str:
    """Verdict first, then the unresolved queue entries (score, categories, data signals,
    reasons), the log, lexicon and sign-off lines, the queue's notes, cautions."""
    lines = textwrap.wrap(result.verdict(), width=100, subsequent_indent="      ")
    if result.unresolved:
        lines.append("")
        lines.append(f"Unresolved flags at or above {result.fail_on} severity:")
        for gate_flag in result.unresolved:
            flag = gate_flag.flag
            where = ""
            if gate_flag.location is not None:
                loc = gate_flag.location
                where = f" ({loc.path.name}" + (f" line {loc.line})" if loc.line else ")")
            score = "" if flag.score is None else f"  score {flag.score:.1f}"
            lines.append(f"  {flag.severity:6}  {flag.label}{where}{score}")
            if flag.categories:
                lines.append(f"          categories: {', '.join(flag.categories)}")
            if flag.signal_names:
                lines.append(f"          data signals: {', '.join(flag.signal_names)}")
            for reason in flag.reasons:
                lines.extend(
                    textwrap.wrap(
                        reason,
                        width=100,
                        initial_indent="          why: ",
                        subsequent_indent="               ",
                    )
                )
    lines.append("")
    lines.append(f"decision log: {result.verification.status()}")
    counts = result.counts
    lines.append(
        f"flags: {counts.get('flags', 0)} ({counts.get('decided', 0)} decided, "
        f"{counts.get('open', 0)} open); lexicon {result.lexicon_hash[:19]}"
    )
    for change in result.lexicon_changes:
        lines.append(
            f"lexicon changed: '{change.label}' was decided (seq {change.seq}, {change.curator}) "
            f"with lexicon {change.lexicon_hash[:19]}"
        )
    lines.append(f"sign-off: {result.signoff.summary()}")
    for text in result.notes:
        lines.extend(
            textwrap.wrap(text, width=100, initial_indent="queue: ", subsequent_indent="       ")
        )
    lines.append("")
    lines.extend(cautions_text(result.cautions))
    return "\n".join(lines)
