"""The detail pane: everything known about the label under the cursor, in plain words."""

from __future__ import annotations

from textual.containers import VerticalScroll
from textual.content import Content
from textual.widgets import Static

from labelreview.decisions import Entry, LogState
from labelreview.evidence import LabelEvidence
from labelreview.tui.rows import QueueRow

SEVERITY_STYLE = {"high": "bold $error", "medium": "bold $warning", "low": "$text-muted"}
STATUS_STYLE = {
    "open": "bold $text",
    "accepted": "bold $success",
    "renamed": "bold $accent",
    "retired": "bold $secondary",
}
ALPHA_STYLE = {"reliable": "$success", "tentative": "$warning", "unreliable": "$error"}
ALPHA_WORDS = {
    "reliable": "reliable (at or above the reliable threshold)",
    "tentative": "tentative conclusions only",
    "unreliable": "unreliable: annotators often disagree on this label",
    "undefined": "undefined",
}


def _heading(text: str) -> Content:
    return Content.assemble("\n", (text, "bold $primary"), "\n")


def describe_entry(entry: Entry, state: LogState) -> Content:
    """One history line: time, who, what, why."""
    when = entry.time[:16].replace("T", " ")
    who = entry.actor
    if entry.kind == "revoke":
        what = Content.assemble(("undo", "bold $warning"), f" of seq {entry.get('revokes')}")
    else:
        action = str(entry.get("action"))
        what = Content.assemble((action, STATUS_STYLE.get(_status_of(action), "bold")))
        if action == "rename":
            what = what.append(f" → {entry.get('new_label')}")
            if entry.get("merge"):
                what = what.append(" (merge)")
        elif action == "retire":
            fallback = entry.get("fallback")
            what = what.append(
                f", annotations to {fallback}" if fallback else ", annotations dropped"
            )
        if entry.seq in state.revoked:
            what = what.append(Content.assemble(("  (undone)", "$text-muted italic")))
    return Content.assemble(
        (f"  #{entry.seq} {when} ", "$text-muted"),
        (who, "italic"),
        "  ",
        what,
        "\n",
        ("      “", "$text-muted"),
        str(entry.get("reason") or ""),
        ("”", "$text-muted"),
        "\n",
    )


def _status_of(action: str) -> str:
    return {"accept": "accepted", "rename": "renamed", "retire": "retired"}.get(action, "open")


def detail_content(
    row: QueueRow | None,
    *,
    state: LogState | None,
    evidence: LabelEvidence | None,
    agreement_note: str | None,
    measured: bool,
) -> Content:
    """Everything about one row, as styled text (data is inserted literally, never as markup)."""
    if row is None:
        return Content.from_markup("[$text-muted]No label selected.[/]")
    parts: list[Content | str | tuple[str, str]] = [
        (row.label, "bold"),
        "\n",
        (row.severity, SEVERITY_STYLE.get(row.severity, "bold")),
        (" severity", "$text-muted"),
        "  ·  ",
        (row.status, STATUS_STYLE.get(row.status, "bold")),
    ]
    if row.score is not None:
        parts += ["  ·  ", (f"score {row.score:.2f}", "$text-muted")]
    parts.append("\n")
    if row.category_titles:
        parts += [("categories: ", "$text-muted"), "; ".join(row.category_titles), "\n"]
    parts.append(_heading("Why it was flagged"))
    for reason in row.reasons:
        parts += [("  • ", "$primary"), reason, "\n"]
    if row.terms:
        parts += [("matched terms: ", "$text-muted"), ", ".join(row.terms), "\n"]
    if row.suggestions:
        parts += [("suggested neutral names: ", "$text-muted"), ", ".join(row.suggestions), "\n"]

    parts.append(_heading("In the data"))
    annotators = "…"
    if evidence is not None:
        annotators = f"{evidence.annotator_count(row.label):,}"
    parts += [
        f"  {row.annotations:,} annotations on {row.items:,} items by {annotators} annotators\n"
    ]
    parts.append(("  agreement: ", "$text-muted"))
    if row.agreement is not None and row.alpha is not None:
        word = row.agreement.interpretation
        parts += [
            (f"Krippendorff's alpha {row.alpha:.3f}", ALPHA_STYLE.get(word, "")),
            f" on {row.agreement.n_items:,} items: ",
            (ALPHA_WORDS.get(word, word), ALPHA_STYLE.get(word, "")),
            "\n",
        ]
    elif row.agreement is not None:
        parts += [f"not measured for this label ({row.agreement.reason})\n"]
    elif agreement_note:
        parts += [f"not measured ({agreement_note})\n"]
    else:
        parts += ["measuring…\n" if not measured else "not measured for this label\n"]

    if evidence is not None:
        examples = evidence.examples(row.label)
        if examples:
            parts.append(_heading("Example items"))
            for example in examples:
                parts += [("  " + example.item, "bold"), "\n"]
                if example.text:
                    parts += ["    ", example.text, "\n"]
                if example.preview:
                    parts += [(f"    preview: {example.preview}", "$text-muted"), "\n"]

    parts.append(_heading("Decision history"))
    history = ()
    if state is not None and row.label in state.labels:
        history = state.labels[row.label].history
    if not history:
        parts.append(("  no decisions yet\n", "$text-muted"))
    for entry in history:
        parts.append(describe_entry(entry, state))  # type: ignore[arg-type]
    return Content.assemble(*parts)


class DetailPane(VerticalScroll, can_focus=True):
    """A scrolling pane holding the selected label's details."""

    def compose(self):  # noqa: ANN201 - Textual's compose
        yield Static(id="detail-body", markup=False)

    def show(self, content: Content) -> None:
        self.query_one("#detail-body", Static).update(content)
