"""``labelreview queue``: the ranked review queue, with every reason and its numbers.

The same list the review app, ``check``, ``apply`` and the export read (``ReviewSession.flags``):
lexicon findings and data signals (contested labels, group disparity across consented
attributes, annotator skew) merged and scored. Exit code 0 whatever it holds; the release gate
is ``labelreview check``.
"""

from __future__ import annotations

import json
import textwrap
from pathlib import Path
from typing import TYPE_CHECKING

import click

from labelreview.cli._common import (
    dataset_options,
    handle_errors,
    note,
    open_session,
    quiet_option,
    shorten,
)
from labelreview.cli.scan import cautions_text

if TYPE_CHECKING:
    from labelreview.model import Flag
    from labelreview.queue import Queue
    from labelreview.review import ReviewSession
    from labelreview.signals import DataSignals

WIDTH = 100
ANNOTATOR_ROWS = 10
"""Annotators listed in the table: those skewed on some label first, then by alpha change."""


@click.command("queue")
@dataset_options
@click.option(
    "--format",
    "fmt",
    type=click.Choice(["table", "json"]),
    default="table",
    show_default=True,
    help="Output format.",
)
@click.option(
    "--top",
    type=click.IntRange(min=1),
    help="Show only the N most urgent entries (the sections after them are complete).",
)
@click.option("--open", "open_only", is_flag=True, help="Leave out labels already decided.")
@quiet_option
@handle_errors
def queue(
    dataset_dir: Path,
    annotations: Path | None,
    taxonomy: Path | None,
    encoding: str | None,
    fmt: str,
    top: int | None,
    open_only: bool,
    quiet: bool,
) -> None:
    """The ranked review queue of DATASET_DIR (default: the current folder).

    Every label the lexicons flag and every label the data flag (contested, given at very
    different rates across consented groups, used unlike everyone else by one annotator), most
    urgent first, each with a score (0-100; formula in the README), a severity and its reasons
    in plain words with their numbers. Group disparity needs attribute columns marked as
    consented and self-reported in labelreview.yaml; labelreview never infers them.
    """
    session = open_session(dataset_dir, annotations, taxonomy, encoding, quiet=quiet)
    built = session.queue()
    for line in built.notes:
        note(f"note: {line}")
    state = session.state()
    entries = list(built.entries)
    if open_only:
        entries = [f for f in entries if state.status(f.label) == "open"]
    if fmt == "json":
        data = {"dataset": session.config.name, **built.to_dict(status=state.status)}
        chosen = {f.label for f in (entries if top is None else entries[:top])}
        data["entries"] = [e for e in data["entries"] if e["label"] in chosen]
        click.echo(json.dumps(data, indent=2, ensure_ascii=False, allow_nan=False))
    else:
        click.echo(queue_table(session, built, entries, top))


def _wrap(text: str, first: str, rest: str) -> list[str]:
    return textwrap.wrap(text, width=WIDTH, initial_indent=first, subsequent_indent=rest)


def queue_table(
    session: ReviewSession, built: Queue, entries: list[Flag], top: int | None = None
) -> str:
    """Entries first (rank, score, severity, status, uses, label, then each reason), then the
    disparity tables with their cautions, proxy columns, annotators, and the cautions."""
    state = session.state()
    counts = built.counts()
    shown = entries if top is None else entries[:top]
    lines = [
        f"{session.config.name}: {counts['entries']} of {built.labels} labels need a look "
        f"({counts['lexicon']} flagged by the lexicons, {counts['data_only']} by data signals "
        "only); most urgent first, score 0-100 (formula in the README)"
    ]
    if len(shown) < len(entries):
        lines.append(f"showing the first {len(shown)} of {len(entries)}")
    if shown:
        width = min(max(len(f.label) for f in shown), 48)
        lines.append("")
        lines.append(f"{'RANK':>4}  {'SCORE':>5}  {'SEVERITY':8}  {'STATUS':8}  {'USES':>6}  LABEL")
        for rank, flag in enumerate(shown, start=1):
            lines.append(
                f"{rank:>4}  {flag.score:5.1f}  {flag.severity:8}  "
                f"{state.status(flag.label):8}  {flag.annotations:>6}  "
                f"{shorten(flag.label, width)}"
            )
            found = [*flag.categories, *flag.signal_names]
            lines.extend(_wrap(", ".join(found), "      flagged by: ", " " * 18))
            for reason in flag.evidence:
                lines.extend(_wrap(reason.detail, f"      - {reason.signal}: ", " " * 8))
            if flag.suggestions:
                lines.extend(_wrap(", ".join(flag.suggestions), "      try: ", " " * 11))
    else:
        lines.append("")
        if built.entries:
            lines.append("Every entry has a decision (drop --open to list them).")
        else:
            lines.append("Nothing in the queue: no lexicon term or data signal flags a label.")
    lines.append("")
    lines.extend(disparity_section(built.signals))
    lines.extend(proxy_section(built.signals))
    lines.extend(annotator_section(built.signals))
    lines.append("score weights: " + ", ".join(f"{k} {v:g}" for k, v in built.weights.items()))
    lines.append("")
    lines.extend(cautions_text(built.cautions()))
    return "\n".join(lines).rstrip("\n")


def disparity_section(signals: DataSignals) -> list[str]:
    """Group rates for every label flagged (and those below the ratio but not flagged)."""
    lines: list[str] = []
    if not signals.attributes:
        lines += _wrap(
            "not checked: no consented, self-reported attribute is configured "
            "(items.attributes in labelreview.yaml). labelreview never infers attributes.",
            "Group disparity: ",
            "  ",
        )
        lines.append("")
        return lines
    names = ", ".join(a.attribute for a in signals.attributes)
    lines.append(f"Group disparity across consented, self-reported attributes ({names}):")
    for summary in signals.attributes:
        held = f", {summary.pooled} small group(s) pooled" if summary.pooled else ""
        lines.append(
            f"  {summary.attribute}: {summary.groups_shown} groups shown, {summary.items} items"
            f"{held}; {summary.tests} labels tested, {summary.flagged} flagged"
        )
    candidates = signals.disparity_to_show()
    shown = [d for d in candidates if d.flagged]
    if not shown:
        lines.append(
            "  no label was flagged: none is given at a lowest-to-highest rate ratio below "
            f"{signals.settings.disparity_ratio:g} with a significant difference"
        )
    for d in shown:
        verdict = "FLAGGED" if d.flagged else "not flagged"
        rates = "; ".join(f"{g.group} {100 * g.rate:.1f}% of {g.items}" for g in d.groups)
        lines.append(f"  {d.label} by {d.attribute}: {verdict}")
        lines.extend(_wrap(rates, "      rates: ", " " * 13))
        stats = f"ratio {d.ratio:.2f}" if d.ratio is not None else "ratio -"
        if d.tested:
            stats += (
                f", chi-square {d.chi2:.1f} (df {d.dof}), p {_p(d.p)}, q {_p(d.q)}, "
                f"Cramér's V {d.cramers_v or 0.0:.2f}"
            )
        lines.extend(_wrap(stats, "      ", "      "))
        if d.reason:
            lines.extend(_wrap(d.reason, "      why not flagged: ", " " * 8))
    others = len(candidates) - len(shown)
    if others:
        lines.extend(
            _wrap(
                f"{others} more (label, attribute) pairs have a ratio below "
                f"{signals.settings.disparity_ratio:g} but were not flagged: too few items for "
                "the test, or not significant after the correction (--format json lists them "
                "with the reason).",
                "  ",
                "  ",
            )
        )
    lines.append("  Cautions for these figures:")
    for caution in signals.cautions():
        lines.extend(_wrap(caution, "  - ", "    "))
    lines.append("")
    return lines


def _p(value: float | None) -> str:
    from labelreview.signals import format_p

    return format_p(value)


def proxy_section(signals: DataSignals) -> list[str]:
    if not signals.attributes:
        return []
    lines = ["Columns that stand in for a consented attribute:"]
    flagged = [p for p in signals.proxies if p.flagged]
    for p in flagged:
        binned = " (numbers cut into bins)" if p.binned else ""
        lines.append(
            f"  {p.column}{binned} ~ {p.attribute}: normalised mutual information "
            f"{p.nmi or 0.0:.2f}, Cramér's V {p.cramers_v or 0.0:.2f}, {p.items} items"
        )
    if not flagged:
        lines.append("  none found")
    for attribute in signals.attribute_names:
        checked = [
            p.column
            for p in signals.proxies
            if p.attribute == attribute and p.reason is None and not p.flagged
        ]
        if checked:
            lines.extend(
                _wrap(", ".join(sorted(checked)), f"  not standing in for {attribute}: ", "    ")
            )
    for p in signals.proxies:
        if p.reason is not None:
            lines.extend(
                _wrap(f"{p.column} vs {p.attribute}: {p.reason}", "  not checked: ", "    ")
            )
    lines.append("")
    return lines


def annotator_section(signals: DataSignals) -> list[str]:
    if not signals.annotators:
        return []
    lines = [
        "Annotators (alpha without them, its change; labels they use unlike the others on the "
        "same items):"
    ]
    width = max(min(max(len(a.annotator) for a in signals.annotators), 24), len("ANNOTATOR"))
    lines.append(f"  {'ANNOTATOR':{width}}  {'ITEMS':>6}  {'WITHOUT':>7}  {'CHANGE':>7}  SKEWED ON")
    listed = signals.annotators[:ANNOTATOR_ROWS]
    for a in listed:
        without = "-" if a.alpha_without is None else f"{a.alpha_without:.3f}"
        change = "-" if a.alpha_change is None else f"{a.alpha_change:+.3f}"
        skewed = "-"
        if a.skewed_labels:
            skewed = f"{len(a.skewed_labels)}: " + ", ".join(a.skewed_labels)
        lines.append(
            f"  {shorten(a.annotator, width):{width}}  {a.n_items:>6}  {without:>7}  "
            f"{change:>7}  {shorten(skewed, 56)}"
        )
    more = len(signals.annotators) - len(listed)
    lines.append(
        (f"  ... and {more} more (--format json lists all); " if more else "  (")
        + f"{signals.skew_tests} annotator x label pairs tested; a positive change means "
        "agreement rises without them" + ("" if more else ")")
    )
    lines.append("")
    return lines
