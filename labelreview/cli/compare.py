"""``labelreview compare``: what changed between two dataset versions, and what needs a look."""

from __future__ import annotations

import json
import textwrap
from pathlib import Path
from typing import TYPE_CHECKING

import click

from labelreview.cli._common import EXIT_FOUND, handle_errors, note, open_session, quiet_option
from labelreview.cli.scan import cautions_text

if TYPE_CHECKING:
    from labelreview.compare import Comparison

_dir = click.Path(file_okay=False, path_type=Path)


@click.command("compare")
@click.argument("old_dir", type=_dir)
@click.argument("new_dir", type=_dir)
@click.option("--fail-on-new", is_flag=True, help="Exit 1 when anything in NEW_DIR needs review.")
@click.option(
    "--agreement-drop",
    type=click.FloatRange(0.0, 2.0),
    help="Alpha drop that needs a look (default: NEW_DIR's compare.agreement_drop, 0.10).",
)
@click.option(
    "--format",
    "fmt",
    type=click.Choice(["text", "json"]),
    default="text",
    show_default=True,
    help="Output format.",
)
@quiet_option
@handle_errors
def compare(
    old_dir: Path,
    new_dir: Path,
    fail_on_new: bool,
    agreement_drop: float | None,
    fmt: str,
    quiet: bool,
) -> None:
    """Compare dataset version OLD_DIR with NEW_DIR.

    Lists labels added and removed, new findings, OLD's decisions that carry over (same label,
    same lexicon set) and those that need a new look, and labels whose per-label agreement fell
    by more than compare.agreement_drop. Exit code 0, or 1 with --fail-on-new when anything
    needs review; 2 on bad input.
    """
    from labelreview.compare import compare_versions

    old = open_session(old_dir, quiet=quiet, describe=False)
    new = open_session(new_dir, quiet=quiet, describe=False)
    result = compare_versions(old, new, agreement_drop=agreement_drop)
    for line in result.notes:
        note(f"note: {line}")
    if fmt == "json":
        click.echo(json.dumps(result.to_dict(), indent=2, ensure_ascii=False))
    else:
        click.echo(comparison_text(result))
    if fail_on_new and result.anything_to_review:
        click.get_current_context().exit(EXIT_FOUND)


def _section(lines: list[str], title: str, rows: list[str]) -> None:
    lines.append("")
    lines.append(f"{title} ({len(rows)}):" if rows else f"{title}: none")
    for row in rows:
        lines.extend(textwrap.wrap(row, width=100, initial_indent="  ", subsequent_indent="      "))


def comparison_text(result: Comparison) -> str:
    """The comparison as plain text, one section per question, then the cautions."""
    n = len(result.needs_review)
    head = (
        f"{n} thing{'s' if n != 1 else ''} in NEW need{'s' if n == 1 else ''} review"
        if n
        else "nothing in NEW needs review"
    )
    lines = [f"{head}: {result.old} -> {result.new}"]
    if result.old_lexicon_hash != result.new_lexicon_hash:
        lines.append(
            f"lexicon set changed: {result.old_lexicon_hash[:19]} -> {result.new_lexicon_hash[:19]}"
        )
    _section(lines, "Labels added", list(result.labels_added))
    _section(lines, "Labels removed", list(result.labels_removed))
    _section(
        lines,
        "New findings",
        [
            f"{f.severity:6}  {f.label}: {', '.join(f.new_categories)}"
            + (" (newly flagged for these categories)" if f.was_flagged else "")
            for f in result.new_findings
        ],
    )
    _section(
        lines,
        "Decisions that carry over",
        [
            f"{c.label}: {c.action}"
            + (f" -> {c.new_label}" if c.new_label else "")
            + f" (seq {c.seq}, {c.curator}): {c.reason}"
            for c in result.carried
        ],
    )
    _section(
        lines,
        "Needs a new look",
        [
            (f"{r.severity:6}  " if r.severity else f"{'-':6}  ") + f"{r.label}: {r.why}"
            for r in result.needs_review
        ],
    )
    if result.agreement_checked:
        _section(
            lines,
            f"Per-label agreement dropped by more than {result.agreement_threshold:.2f}",
            [
                f"{d.label}: {d.old_alpha:.3f} -> {d.new_alpha:.3f} (-{d.drop:.3f})"
                for d in result.agreement_drops
            ],
        )
    else:
        lines.append("")
        lines.append("Per-label agreement: not compared (see the note above)")
    lines.append("")
    lines.extend(cautions_text())
    return "\n".join(lines)
