"""The audit trail for a governance board: one report structure, four renderings.

:func:`build_audit_report` gathers everything a board reads about one dataset into a plain,
JSON-ready dict: the input fingerprints, the lexicon hash, counts by category, severity, data
signal and action, every decision (in force, superseded or revoked) with its reason, curator and
time, the review queue's entries still undecided (score, categories, data signals, reasons),
the queue's formula, weights and notes, the agreement summary where it is defined, the sign-offs
and whether they still hold, the log's verification status and the cautions (with the disparity
cautions when consented attributes are used). :func:`render` turns that one dict
into CSV, JSON, Markdown or a self-contained HTML page, so the four formats say the same things.
Empty sections still render (with a header, or a line saying there is nothing).

Dataset text is untrusted: the CSV neutralises cells a spreadsheet would run as a formula
(OWASP "CSV Injection"), the HTML escapes every value taken from the data (inside SVG too) and
loads nothing from outside, and the Markdown escapes characters that would change a table or
turn text into markup.

This module also owns the one atomic writer both ``export`` and ``apply`` use: a temporary file
in the target's folder, ``fsync``, then a rename, so a crash leaves the old file or the new one,
never half of either.
"""

from __future__ import annotations

import csv
import html
import io
import itertools
import json
import math
import os
import warnings
from collections.abc import Callable, Iterable, Mapping, Sequence
from datetime import datetime
from pathlib import Path
from typing import TYPE_CHECKING, Any

from labelreview.decisions import Entry, fold, rfc3339, utc_now
from labelreview.errors import LabelReviewError, UsageError
from labelreview.gate import signoff_void_reasons
from labelreview.model import SEVERITIES, SEVERITY_RANK
from labelreview.queue import DATA_SIGNALS, FORMULA
from labelreview.report import neutralise_cell

if TYPE_CHECKING:
    import pandas as pd

    from labelreview.agreement import AgreementResult
    from labelreview.config import DatasetConfig
    from labelreview.review import ReviewSession

REPORT_VERSION = 1
EXPORT_FORMATS: dict[str, str] = {
    ".csv": "csv",
    ".json": "json",
    ".md": "markdown",
    ".html": "html",
}
"""File name ending -> format of :func:`render`."""
CSV_COLUMNS: tuple[str, ...] = (
    "section",
    "key",
    "label",
    "action",
    "new_label",
    "severity",
    "status",
    "who",
    "time",
    "seq",
    "value",
    "text",
)
LEAST_RELIABLE = 8
"""How many of the least reliable labels the agreement summary lists."""


class OutputError(LabelReviewError):
    """An output cannot be written where asked (exists, is an input, cannot be created)."""


def tool_version() -> str:
    """labelreview's version, for reports and manifests."""
    from labelreview import __version__

    return __version__


# -- atomic writing ----------------------------------------------------------------------------


def fsync_dir(folder: Path) -> None:
    """Sync a folder so a rename inside it survives a crash (best effort on every platform)."""
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


def write_atomic(path: Path, data: bytes, *, force: bool = False) -> Path:
    """Write ``data`` to ``path`` through a synced temporary file and a rename.

    Args:
        path: The file to write.
        data: Its whole content.
        force: Replace an existing file (without it, an existing file is refused).

    Raises:
        OutputError: The file exists (without ``force``), is a folder, or cannot be written.
    """
    if path.is_dir():
        raise OutputError("this is a folder; give a file name", source=str(path))
    if path.exists() and not force:
        raise OutputError(
            "the file already exists and labelreview does not overwrite it",
            hint="Pass --force to replace it, or choose another name.",
            source=str(path),
        )
    folder = path.parent
    if not folder.is_dir():
        raise OutputError("the folder to write into does not exist", source=str(path))
    tmp = folder / f".tmp-{os.getpid()}.labelreview-{path.name}"
    try:
        with open(tmp, "wb") as handle:
            handle.write(data)
            handle.flush()
            os.fsync(handle.fileno())
        os.replace(tmp, path)
    except OSError as exc:
        raise OutputError(f"cannot write the file: {exc.strerror}", source=str(path)) from None
    finally:
        if tmp.exists():
            tmp.unlink()
    fsync_dir(folder)
    return path


# -- the report --------------------------------------------------------------------------------


def agreement_summary(
    annotations: pd.DataFrame | None,
    config: DatasetConfig | None = None,
    *,
    result: AgreementResult | None = None,
) -> dict[str, Any]:
    """Overall Krippendorff's alpha with its reading and the least reliable labels.

    Never raises for data on which agreement is undefined (one annotator, one label, no item
    seen twice): the summary then says ``available: False`` and why.

    Args:
        annotations: The annotation frame.
        config: The dataset config (agreement level, thresholds, min_items).
        result: An agreement report already computed for these annotations (the review
            session's, from the data signals); None computes one.
    """
    from labelreview.agreement import AgreementThresholds, agreement_report

    if annotations is None or not len(annotations):
        return {"available": False, "note": "no annotations, so no agreement to measure"}
    if annotations["annotator"].nunique() < 2:
        return {
            "available": False,
            "note": "agreement is undefined: the annotations come from a single annotator",
        }
    settings = config.agreement if config is not None else None
    if result is None:
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                result = agreement_report(
                    annotations,
                    level=settings.level if settings else "nominal",
                    bootstrap=0,
                    leave_out=False,
                    thresholds=AgreementThresholds(settings.reliable, settings.tentative)
                    if settings
                    else None,
                    min_items=settings.min_items if settings else 10,
                )
        except LabelReviewError as exc:
            return {"available": False, "note": f"agreement could not be computed: {exc.message}"}
    if result.alpha is None:
        return {
            "available": False,
            "note": f"agreement is undefined: {result.alpha_reason or 'no comparable items'}",
        }
    labels = [x for x in result.per_label if x.alpha is not None][:LEAST_RELIABLE]
    return {
        "available": True,
        "note": None,
        "measure": f"Krippendorff's alpha ({result.level})",
        "alpha": round(float(result.alpha), 4),
        "interpretation": result.interpretation,
        "n_items": result.n_items,
        "n_annotators": result.n_annotators,
        "reliable": result.thresholds.reliable,
        "tentative": result.thresholds.tentative,
        "least_reliable": [
            {
                "label": x.label,
                "alpha": round(float(x.alpha), 4) if x.alpha is not None else None,
                "interpretation": x.interpretation,
                "n_items": x.n_items,
            }
            for x in labels
        ],
    }


def _file_name(path: str, root: Path) -> str:
    try:
        return str(Path(path).resolve().relative_to(root.resolve()))
    except ValueError:
        return Path(path).name


def build_audit_report(
    session: ReviewSession,
    agreement: Mapping[str, Any] | None = None,
    *,
    fail_on: str | None = None,
    clock: Callable[[], datetime] = utc_now,
) -> dict[str, Any]:
    """Everything the audit trail says, as one JSON-ready dict.

    Args:
        session: The dataset and its decision log.
        agreement: A summary from :func:`agreement_summary`; None leaves the section saying it
            was not computed.
        fail_on: Gate level for "at the gate" marks; default the config's.
        clock: Time source for the generation time.

    Returns:
        The report (see the module docstring for its sections). A log that does not verify is
        reported from its verified prefix, with the problem in ``log.status``.
    """
    level = fail_on or session.config.decisions.fail_on
    if level not in SEVERITY_RANK:
        raise UsageError(f"--fail-on must be one of {', '.join(SEVERITIES)}; got {level!r}")
    verification = session.log.verify()
    state = fold(verification.entries)
    root = session.dataset.root
    fingerprint = session.fingerprint()
    flags = session.flags

    revoked_by: dict[int, Entry] = {}
    for entry in state.entries:
        if entry.kind == "revoke":
            revoked_by[int(entry.get("revokes"))] = entry
    later_on_label: dict[str, list[Entry]] = {}
    decisions: list[dict[str, Any]] = []
    for entry in state.entries:
        if entry.kind != "decision":
            continue
        label = str(entry.label)
        later_on_label.setdefault(label, []).append(entry)
        finding = entry.get("finding") or {}
        if entry.seq in state.revoked:
            status = "revoked"
        elif state.decision(label) is entry:
            status = "in force"
        else:
            status = "superseded"
        revoke = revoked_by.get(entry.seq)
        decisions.append(
            {
                "seq": entry.seq,
                "time": entry.time,
                "curator": entry.actor,
                "label": label,
                "action": entry.get("action"),
                "new_label": entry.get("new_label"),
                "fallback": entry.get("fallback"),
                "merge": bool(entry.get("merge")),
                "reason": entry.get("reason"),
                "severity": finding.get("severity") or "not flagged",
                "categories": list(finding.get("categories") or []),
                "status": status,
                "revoked_by": revoke.seq if revoke is not None else None,
                "revoke_reason": revoke.get("reason") if revoke is not None else None,
            }
        )
    for record in decisions:
        if record["status"] == "superseded":
            newer = [e.seq for e in later_on_label[record["label"]] if e.seq > record["seq"]]
            record["superseded_by"] = newer[0] if newer else None
        else:
            record["superseded_by"] = None

    gate_rank = SEVERITY_RANK[level]
    unresolved = [
        {
            "label": f.label,
            "score": f.score,
            "severity": f.severity,
            "categories": list(f.categories),
            "signals": list(f.signal_names),
            "reasons": list(f.reasons),
            "annotations": f.annotations,
            "at_gate": SEVERITY_RANK[f.severity] >= gate_rank,
        }
        for f in flags
        if state.status(f.label) == "open"
    ]
    by_signal: dict[str, dict[str, int]] = {
        name: {"flags": 0, "decided": 0, "open": 0} for name in DATA_SIGNALS
    }
    for f in flags:
        decided = state.status(f.label) != "open"
        for name in f.signal_names:
            row = by_signal[name]
            row["flags"] += 1
            row["decided" if decided else "open"] += 1
    queue = session.queue()
    queue_section = {
        "formula": FORMULA,
        "weights": dict(queue.weights),
        "signal_severity": dict(queue.severity),
        "entries": len(flags),
        "data_only": sum(1 for f in flags if not f.categories),
        "attributes": list(queue.signals.attribute_names),
        "proxies": [
            {
                "column": p.column,
                "attribute": p.attribute,
                "nmi": None if p.nmi is None else round(p.nmi, 4),
                "cramers_v": None if p.cramers_v is None else round(p.cramers_v, 4),
            }
            for p in queue.signals.proxies
            if p.flagged
        ],
        "notes": list(queue.notes),
    }

    categories: dict[str, dict[str, int]] = {}
    severities: dict[str, dict[str, int]] = {
        s: {"flags": 0, "decided": 0, "open": 0} for s in reversed(SEVERITIES)
    }
    for f in flags:
        decided = state.status(f.label) != "open"
        for category in f.categories:
            row = categories.setdefault(category, {"flags": 0, "decided": 0, "open": 0})
            row["flags"] += 1
            row["decided" if decided else "open"] += 1
        row = severities[f.severity]
        row["flags"] += 1
        row["decided" if decided else "open"] += 1
    in_force = [d for d in decisions if d["status"] == "in force"]
    by_action = [
        {"action": action, "decisions": sum(1 for d in in_force if d["action"] == action)}
        for action in ("accept", "rename", "retire")
    ]
    by_action.append(
        {
            "action": "superseded",
            "decisions": sum(1 for d in decisions if d["status"] == "superseded"),
        }
    )
    by_action.append(
        {"action": "revoked", "decisions": sum(1 for d in decisions if d["status"] == "revoked")}
    )

    signoffs = []
    for entry in state.signoffs:
        problems = signoff_void_reasons(
            entry, state, fingerprint=fingerprint, lexicon_hash=session.lexicon_hash
        )
        signoffs.append(
            {
                "seq": entry.seq,
                "time": entry.time,
                "approver": entry.actor,
                "statement": entry.get("statement"),
                "fail_on": entry.get("fail_on"),
                "valid": not problems,
                "void_reasons": problems,
            }
        )

    if agreement is None:
        agreement_section: dict[str, Any] = {
            "available": False,
            "note": "agreement was not computed for this export",
        }
    else:
        agreement_section = dict(agreement)

    log_info = verification.to_dict()
    return {
        "report": "labelreview audit trail",
        "report_version": REPORT_VERSION,
        "tool": {"name": "labelreview", "version": tool_version()},
        "generated": rfc3339(clock()),
        "dataset": {
            "name": session.config.name,
            "fingerprint": fingerprint.digest,
            "files": [
                {
                    "role": role,
                    "file": _file_name(fingerprint.names.get(role, ""), root),
                    "sha256": digest,
                }
                for role, digest in sorted(fingerprint.files.items())
            ],
        },
        "lexicon_hash": session.lexicon_hash,
        "log": {
            "file": _file_name(str(verification.path), root),
            "verified": bool(log_info["ok"]) or not verification.exists,
            "exists": verification.exists,
            "entries": log_info["entries"],
            "head": log_info["head"],
            "status": verification.status().replace(
                str(verification.path), _file_name(str(verification.path), root)
            ),
        },
        "gate": {
            "fail_on": level,
            "unresolved_at_gate": sum(1 for u in unresolved if u["at_gate"]),
            "flags": len(flags),
        },
        "counts": {
            "by_category": [{"category": k, **v} for k, v in sorted(categories.items())],
            "by_severity": [{"severity": k, **v} for k, v in severities.items()],
            "by_signal": [{"signal": k, **v} for k, v in by_signal.items()],
            "by_action": by_action,
        },
        "decisions": decisions,
        "unresolved": unresolved,
        "queue": queue_section,
        "agreement": agreement_section,
        "signoffs": signoffs,
        "cautions": list(queue.cautions()),
    }


# -- rendering ---------------------------------------------------------------------------------


def render(report: Mapping[str, Any], fmt: str) -> str:
    """The report as ``csv``, ``json``, ``markdown`` or ``html`` text.

    Raises:
        UsageError: An unknown format.
    """
    renderers: dict[str, Callable[[Mapping[str, Any]], str]] = {
        "csv": render_csv,
        "json": render_json,
        "markdown": render_markdown,
        "html": render_html,
    }
    if fmt not in renderers:
        raise UsageError(f"unknown export format '{fmt}'; expected one of {', '.join(renderers)}")
    return renderers[fmt](report)


def format_for(path: Path) -> str:
    """The export format a file name asks for.

    Raises:
        UsageError: The ending is not ``.csv``, ``.json``, ``.md`` or ``.html``.
    """
    fmt = EXPORT_FORMATS.get(path.suffix.lower())
    if fmt is None:
        ending = path.suffix or "(no extension)"
        raise UsageError(
            f"cannot tell the export format from the ending '{ending}'; allowed: "
            f"{', '.join(EXPORT_FORMATS)}",
            hint="Name the file e.g. audit.html.",
        )
    return fmt


def export_report(
    session: ReviewSession,
    path: Path,
    *,
    agreement: Mapping[str, Any] | None = None,
    fail_on: str | None = None,
    force: bool = False,
    clock: Callable[[], datetime] = utc_now,
) -> tuple[Path, dict[str, Any]]:
    """Build the report and write it atomically in the format ``path``'s ending names.

    Raises:
        UsageError: An unknown ending.
        OutputError: The file exists (without ``force``), is one of the dataset's input files,
            or cannot be written.
    """
    fmt = format_for(path)
    target = path.resolve()
    config = session.config
    inputs = [config.source, config.log_path]
    if config.annotations is not None:
        inputs.append(config.annotations.path)
    if config.taxonomy is not None:
        inputs.append(config.taxonomy.path)
    if config.items is not None:
        inputs.append(config.items.path)
    inputs.extend(config.lexicons.layers)
    for candidate in inputs:
        if candidate is not None and candidate.resolve() == target:
            raise OutputError(
                "this is one of the dataset's input files; export never writes over an input",
                hint="Choose another file name.",
                source=str(path),
            )
    report = build_audit_report(session, agreement, fail_on=fail_on, clock=clock)
    write_atomic(path, render(report, fmt).encode("utf-8"), force=force)
    return path, report


def render_json(report: Mapping[str, Any]) -> str:
    """Indented JSON, UTF-8, keys in report order."""
    return json.dumps(report, indent=2, ensure_ascii=False) + "\n"


def _join(values: Sequence[Any]) -> str:
    return "; ".join(str(v) for v in values)


def _weights(values: Mapping[str, Any]) -> str:
    return ", ".join(
        f"{k} {v:g}" if isinstance(v, float) else f"{k} {v}" for k, v in values.items()
    )


def _csv_rows(report: Mapping[str, Any]) -> list[dict[str, Any]]:
    rows: list[dict[str, Any]] = []

    def add(section: str, **values: Any) -> None:
        rows.append({"section": section, **values})

    dataset = report["dataset"]
    add("summary", key="report", value=report["report"])
    add("summary", key="tool_version", value=report["tool"]["version"])
    add("summary", key="generated", value=report["generated"])
    add("summary", key="dataset", value=dataset["name"])
    add("summary", key="dataset_fingerprint", value=dataset["fingerprint"])
    for item in dataset["files"]:
        add("summary", key=f"file:{item['role']}", label=item["file"], value=item["sha256"])
    add("summary", key="lexicon_hash", value=report["lexicon_hash"])
    log = report["log"]
    add(
        "summary",
        key="log_status",
        status="verified" if log["verified"] else "not verified",
        value=log["head"],
        text=log["status"],
    )
    gate = report["gate"]
    add(
        "summary",
        key="gate",
        severity=gate["fail_on"],
        value=gate["unresolved_at_gate"],
        text=f"unresolved flags at or above {gate['fail_on']}",
    )
    for row in report["counts"]["by_category"]:
        add(
            "count",
            key=f"category:{row['category']}",
            value=row["flags"],
            text=f"{row['decided']} decided, {row['open']} open",
        )
    for row in report["counts"]["by_severity"]:
        add(
            "count",
            key=f"severity:{row['severity']}",
            severity=row["severity"],
            value=row["flags"],
            text=f"{row['decided']} decided, {row['open']} open",
        )
    for row in report["counts"]["by_signal"]:
        add(
            "count",
            key=f"signal:{row['signal']}",
            value=row["flags"],
            text=f"{row['decided']} decided, {row['open']} open",
        )
    for row in report["counts"]["by_action"]:
        add("count", key=f"action:{row['action']}", action=row["action"], value=row["decisions"])
    for d in report["decisions"]:
        status = d["status"]
        if d["revoked_by"] is not None:
            status = f"revoked by seq {d['revoked_by']}"
        elif d.get("superseded_by") is not None:
            status = f"superseded by seq {d['superseded_by']}"
        add(
            "decision",
            key=_join(d["categories"]),
            label=d["label"],
            action=d["action"],
            new_label=d["new_label"] or d["fallback"] or "",
            severity=d["severity"],
            status=status,
            who=d["curator"],
            time=d["time"],
            seq=d["seq"],
            value="merge" if d["merge"] else "",
            text=d["reason"],
        )
    for u in report["unresolved"]:
        add(
            "unresolved",
            key=_join([*u["categories"], *u["signals"]]),
            label=u["label"],
            severity=u["severity"],
            status="at gate" if u["at_gate"] else "below gate",
            value=u["score"],
            text=f"{u['annotations']} annotations; " + _join(u["reasons"]),
        )
    queue = report["queue"]
    add("queue", key="formula", text=queue["formula"])
    add("queue", key="weights", text=_weights(queue["weights"]))
    add("queue", key="signal_severity", text=_weights(queue["signal_severity"]))
    add("queue", key="entries", value=queue["entries"], text=f"{queue['data_only']} data-only")
    add("queue", key="attributes", text=_join(queue["attributes"]) or "none configured")
    for p in queue["proxies"]:
        add(
            "queue",
            key="proxy",
            label=p["column"],
            value=p["nmi"],
            text=f"stands in for {p['attribute']} (Cramér's V {p['cramers_v']})",
        )
    for text in queue["notes"]:
        add("queue", key="note", text=text)
    agreement = report["agreement"]
    if agreement.get("available"):
        add(
            "agreement",
            key="overall",
            status=agreement["interpretation"],
            value=agreement["alpha"],
            text=agreement["measure"],
        )
        for x in agreement["least_reliable"]:
            add(
                "agreement",
                key="label",
                label=x["label"],
                status=x["interpretation"],
                value=x["alpha"],
                text=f"{x['n_items']} items",
            )
    else:
        add("agreement", key="overall", status="not available", text=agreement.get("note"))
    for s in report["signoffs"]:
        add(
            "signoff",
            who=s["approver"],
            time=s["time"],
            seq=s["seq"],
            status="valid" if s["valid"] else "void",
            value=_join(s["void_reasons"]),
            text=s["statement"],
        )
    for caution in report["cautions"]:
        add("caution", text=caution)
    return rows


def csv_text(
    header: Sequence[str], rows: Iterable[Sequence[Any]], *, delimiter: str = ",", end: str = "\n"
) -> str:
    """RFC 4180 CSV text with ``end`` after each record.

    Fields holding a carriage return or a line feed are always quoted (the csv module only
    quotes the characters of its own line terminator, so it writes with CRLF and the ending is
    swapped per record; line breaks inside quoted fields stay as they were).
    """
    buf = io.StringIO()
    writer = csv.writer(buf, delimiter=delimiter, lineterminator="\r\n")
    out: list[str] = []
    for row in itertools.chain([list(header)], rows):
        buf.seek(0)
        buf.truncate()
        writer.writerow(row)
        out.append(buf.getvalue()[:-2] + end)
    return "".join(out)


def render_csv(report: Mapping[str, Any]) -> str:
    """One table, a row per fact (``section`` says which); every text cell neutralised."""
    return csv_text(
        CSV_COLUMNS,
        ([csv_cell(row.get(k)) for k in CSV_COLUMNS] for row in _csv_rows(report)),
    )


def csv_cell(value: Any) -> Any:
    """A CSV cell a spreadsheet will show, never run (OWASP "CSV Injection").

    Text starting with ``=``, ``+``, ``-``, ``@``, tab or carriage return gets a leading
    apostrophe (via :func:`labelreview.report.neutralise_cell`); so does text whose first
    non-space character is one of them, since some spreadsheet programs skip leading spaces.
    """
    if value is None:
        return ""
    if isinstance(value, bool):
        return "true" if value else "false"
    if not isinstance(value, str):
        return value
    neutral = neutralise_cell(value)
    if neutral is value and value.lstrip(" ")[:1] in ("=", "+", "-", "@", "\t", "\r"):
        return "'" + value
    return neutral


_MD_SPECIAL = set("\\`*_[]|#~!")
_MD_ENTITIES = {"&": "&amp;", "<": "&lt;", ">": "&gt;"}


def md_text(value: Any) -> str:
    """Text safe inside a Markdown table cell or list item.

    Line breaks and tabs become spaces. ``|`` (which would end a table cell) and Markdown
    punctuation that could start markup (`` \\ ` * _ [ ] # ~ !``) are backslash-escaped, which
    CommonMark allows for any ASCII punctuation; ``& < >`` become entity references, so no raw
    HTML can reach a renderer and the text holds no ``<`` at all. A leading ``+ - = :`` that
    could start a block is escaped too.
    """
    if value is None:
        return ""
    text = " ".join(str(value).replace("\r", " ").replace("\t", " ").split("\n"))
    out = "".join(_MD_ENTITIES.get(ch) or (f"\\{ch}" if ch in _MD_SPECIAL else ch) for ch in text)
    if out[:1] in ("+", "-", "=", ":"):
        out = "\\" + out
    return out


def _md_cell(value: Any) -> str:
    """Numbers the report computed go in as they are; text is escaped."""
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        return str(value)
    return md_text(value)


def _md_table(header: Sequence[str], rows: Sequence[Sequence[Any]]) -> list[str]:
    if not rows:
        return ["(none)", ""]
    lines = ["| " + " | ".join(header) + " |", "|" + "|".join("---" for _ in header) + "|"]
    lines.extend("| " + " | ".join(_md_cell(c) for c in row) + " |" for row in rows)
    lines.append("")
    return lines


def _decision_status(d: Mapping[str, Any]) -> str:
    if d["revoked_by"] is not None:
        return f"revoked by seq {d['revoked_by']}"
    if d.get("superseded_by") is not None:
        return f"superseded by seq {d['superseded_by']}"
    return str(d["status"])


def _decision_target(d: Mapping[str, Any]) -> str:
    if d["action"] == "rename":
        return f"{d['new_label']}{' (merge)' if d['merge'] else ''}"
    if d["action"] == "retire":
        return f"fallback {d['fallback']}" if d["fallback"] else "annotations dropped"
    return ""


def render_markdown(report: Mapping[str, Any]) -> str:
    """Headings, key-value lists and tables (GitHub-flavoured Markdown)."""
    dataset = report["dataset"]
    log = report["log"]
    gate = report["gate"]
    queue = report["queue"]
    lines = [
        f"# Audit trail: {md_text(dataset['name'])}",
        "",
        f"- Generated: {md_text(report['generated'])} by labelreview "
        f"{md_text(report['tool']['version'])}",
        f"- Dataset fingerprint: {md_text(dataset['fingerprint'])}",
        f"- Lexicon hash: {md_text(report['lexicon_hash'])}",
        f"- Decision log ({md_text(log['file'])}): {md_text(log['status'])}",
        f"- Gate: {gate['unresolved_at_gate']} unresolved flag(s) at or above "
        f"{md_text(gate['fail_on'])}, of {gate['flags']} flags",
        "",
        "## Input files",
        "",
        *_md_table(
            ["role", "file", "sha256"],
            [[f["role"], f["file"], f["sha256"]] for f in dataset["files"]],
        ),
        "## Counts",
        "",
        "### By category",
        "",
        *_md_table(
            ["category", "flags", "decided", "open"],
            [
                [r["category"], r["flags"], r["decided"], r["open"]]
                for r in report["counts"]["by_category"]
            ],
        ),
        "### By severity",
        "",
        *_md_table(
            ["severity", "flags", "decided", "open"],
            [
                [r["severity"], r["flags"], r["decided"], r["open"]]
                for r in report["counts"]["by_severity"]
            ],
        ),
        "### By data signal",
        "",
        *_md_table(
            ["signal", "flags", "decided", "open"],
            [
                [r["signal"], r["flags"], r["decided"], r["open"]]
                for r in report["counts"]["by_signal"]
            ],
        ),
        "### By action",
        "",
        *_md_table(
            ["action", "decisions"],
            [[r["action"], r["decisions"]] for r in report["counts"]["by_action"]],
        ),
        "## Decisions",
        "",
        *_md_table(
            ["seq", "label", "action", "to", "severity", "status", "curator", "time", "reason"],
            [
                [
                    d["seq"],
                    d["label"],
                    d["action"],
                    _decision_target(d),
                    d["severity"],
                    _decision_status(d),
                    d["curator"],
                    d["time"],
                    d["reason"],
                ]
                for d in report["decisions"]
            ],
        ),
        "## Unresolved flags",
        "",
        *_md_table(
            [
                "score",
                "label",
                "severity",
                "at gate",
                "categories, signals",
                "annotations",
                "reasons",
            ],
            [
                [
                    u["score"],
                    u["label"],
                    u["severity"],
                    "yes" if u["at_gate"] else "no",
                    _join([*u["categories"], *u["signals"]]),
                    u["annotations"],
                    _join(u["reasons"]),
                ]
                for u in report["unresolved"]
            ],
        ),
        "## The review queue",
        "",
        f"- Entries: {queue['entries']} ({queue['data_only']} flagged by data signals only)",
        f"- Score: {md_text(queue['formula'])}",
        f"- Weights: {md_text(_weights(queue['weights']))}",
        f"- Severity of data signals: {md_text(_weights(queue['signal_severity']))}",
        "- Consented attributes: "
        + (md_text(_join(queue["attributes"])) if queue["attributes"] else "none configured"),
        *[f"- Note: {md_text(n)}" for n in queue["notes"]],
        "",
        "Columns that stand in for a consented attribute:",
        "",
        *_md_table(
            ["column", "attribute", "NMI", "Cramér's V"],
            [[p["column"], p["attribute"], p["nmi"], p["cramers_v"]] for p in queue["proxies"]],
        ),
        "## Annotator agreement",
        "",
    ]
    agreement = report["agreement"]
    if agreement.get("available"):
        lines += [
            f"- {md_text(agreement['measure'])}: {agreement['alpha']} "
            f"({md_text(agreement['interpretation'])}), {agreement['n_items']} items, "
            f"{agreement['n_annotators']} annotators",
            "",
            "Least reliable labels:",
            "",
            *_md_table(
                ["label", "alpha", "reading", "items"],
                [
                    [x["label"], x["alpha"], x["interpretation"], x["n_items"]]
                    for x in agreement["least_reliable"]
                ],
            ),
        ]
    else:
        lines += [f"Not available: {md_text(agreement.get('note'))}", ""]
    lines += [
        "## Sign-offs",
        "",
        *_md_table(
            ["seq", "approver", "time", "still valid", "statement"],
            [
                [
                    s["seq"],
                    s["approver"],
                    s["time"],
                    "yes" if s["valid"] else "no: " + _join(s["void_reasons"]),
                    s["statement"],
                ]
                for s in report["signoffs"]
            ],
        ),
        "## Cautions",
        "",
        *[f"- {md_text(c)}" for c in report["cautions"]],
        "",
    ]
    return "\n".join(lines)


# -- HTML --------------------------------------------------------------------------------------

_CSS = """
body { font-family: Georgia, 'Times New Roman', serif; margin: 2rem auto; max-width: 60rem;
  color: #1d1d1d; background: #fdfdfb; line-height: 1.45; padding: 0 1rem; }
h1 { font-size: 1.6rem; border-bottom: 3px double #555; padding-bottom: .3rem; }
h2 { font-size: 1.2rem; margin-top: 2rem; border-bottom: 1px solid #999; }
h3 { font-size: 1rem; }
table { border-collapse: collapse; width: 100%; margin: .5rem 0 1rem; font-size: .9rem; }
th, td { border: 1px solid #bbb; padding: .25rem .45rem; text-align: left; vertical-align: top; }
th { background: #ecebe6; }
td.num { text-align: right; font-variant-numeric: tabular-nums; }
code, .hash { font-family: 'DejaVu Sans Mono', Menlo, monospace; font-size: .8rem;
  word-break: break-all; }
.sev { font-weight: bold; text-transform: uppercase; font-size: .8rem; letter-spacing: .05em; }
.sev-high::before { content: "\\25B2 "; }
.sev-medium::before { content: "\\25C6 "; }
.sev-low::before { content: "\\25BD "; }
.status-bad { font-weight: bold; }
.cautions { border: 1px solid #777; padding: .5rem 1rem; background: #f4f3ee; }
svg text { font-family: Georgia, serif; font-size: 12px; fill: #1d1d1d; }
dl.facts { display: grid; grid-template-columns: max-content 1fr; gap: .2rem 1rem; }
dl.facts dt { font-weight: bold; }
dl.facts dd { margin: 0; }
@media print {
  body { margin: 0; max-width: none; background: #fff; font-size: 10pt; }
  h2 { break-after: avoid; }
  table, svg, .cautions { break-inside: avoid; }
  th { background: #eee; -webkit-print-color-adjust: exact; print-color-adjust: exact; }
}
""".strip()


_BAD = ' class="status-bad"'


def _e(value: Any) -> str:
    return html.escape("" if value is None else str(value), quote=True)


def _html_table(
    header: Sequence[str], rows: Sequence[Sequence[str]], numeric: Sequence[int] = ()
) -> str:
    """``rows`` hold already-escaped HTML per cell."""
    if not rows:
        return "<p>(none)</p>"
    head = "".join(f"<th>{_e(h)}</th>" for h in header)
    body = "".join(
        "<tr>"
        + "".join(
            f'<td class="num">{c}</td>' if i in numeric else f"<td>{c}</td>"
            for i, c in enumerate(row)
        )
        + "</tr>"
        for row in rows
    )
    return f"<table><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>"


def _sev(severity: str) -> str:
    cls = f" sev-{severity}" if severity in SEVERITY_RANK else ""
    return f'<span class="sev{cls}">{_e(severity)}</span>'


def _bars_svg(
    title: str,
    rows: Sequence[tuple[str, float, float, str]],
    *,
    scale_max: float,
    marks: Sequence[tuple[float, str]] = (),
) -> str:
    """Horizontal bars: (label, full length, filled length, text at the end), escaped here."""
    label_w, bar_w, row_h, top = 260, 360, 22, 28
    height = top + row_h * len(rows) + 24
    width = label_w + bar_w + 160
    parts = [
        f'<svg role="img" width="{width}" height="{height}" '
        f'viewBox="0 0 {width} {height}" aria-label="{_e(title)}">',
        f"<title>{_e(title)}</title>",
        f'<text x="0" y="16" font-weight="bold">{_e(title)}</text>',
    ]
    for i, (label, full, filled, note) in enumerate(rows):
        y = top + i * row_h
        full_w = 0.0 if scale_max <= 0 else bar_w * max(0.0, min(full, scale_max)) / scale_max
        fill_w = 0.0 if scale_max <= 0 else bar_w * max(0.0, min(filled, scale_max)) / scale_max
        shown = label if len(label) <= 40 else label[:39] + "\u2026"
        parts.append(f'<text x="{label_w - 8}" y="{y + 15}" text-anchor="end">{_e(shown)}</text>')
        parts.append(
            f'<rect x="{label_w}" y="{y + 3}" width="{full_w:.1f}" height="{row_h - 8}" '
            'fill="#ffffff" stroke="#444444" stroke-width="1"></rect>'
        )
        parts.append(
            f'<rect x="{label_w}" y="{y + 3}" width="{fill_w:.1f}" height="{row_h - 8}" '
            'fill="#5b5b5b"></rect>'
        )
        parts.append(f'<text x="{label_w + full_w + 6:.1f}" y="{y + 15}">{_e(note)}</text>')
    bottom = top + row_h * len(rows)
    for value, name in marks:
        x = label_w + bar_w * value / scale_max
        parts.append(
            f'<line x1="{x:.1f}" y1="{top - 4}" x2="{x:.1f}" y2="{bottom}" stroke="#000000" '
            'stroke-dasharray="4 3"></line>'
        )
        parts.append(f'<text x="{x:.1f}" y="{bottom + 16}" text-anchor="middle">{_e(name)}</text>')
    parts.append("</svg>")
    return "".join(parts)


def render_html(report: Mapping[str, Any]) -> str:
    """One self-contained page: inline CSS, inline SVG charts, no scripts, nothing external."""
    dataset = report["dataset"]
    log = report["log"]
    gate = report["gate"]
    counts = report["counts"]
    queue = report["queue"]
    out: list[str] = [
        "<!DOCTYPE html>",
        '<html lang="en">',
        "<head>",
        '<meta charset="utf-8">',
        f"<title>Audit trail: {_e(dataset['name'])}</title>",
        f"<style>{_CSS}</style>",
        "</head>",
        "<body>",
        f"<h1>Audit trail: {_e(dataset['name'])}</h1>",
        '<dl class="facts">',
        f"<dt>Generated</dt><dd>{_e(report['generated'])} by labelreview "
        f"{_e(report['tool']['version'])}</dd>",
        f'<dt>Dataset fingerprint</dt><dd class="hash">{_e(dataset["fingerprint"])}</dd>',
        f'<dt>Lexicon hash</dt><dd class="hash">{_e(report["lexicon_hash"])}</dd>',
        f"<dt>Decision log</dt><dd{'' if log['verified'] else _BAD}>"
        f"{_e(log['file'])}: {_e(log['status'])}</dd>",
        f"<dt>Gate</dt><dd>{_e(gate['unresolved_at_gate'])} unresolved flag(s) at or above "
        f"{_sev(gate['fail_on'])}, of {_e(gate['flags'])} flags</dd>",
        "</dl>",
        '<section class="cautions"><h2>Cautions</h2><ul>',
        *[f"<li>{_e(c)}</li>" for c in report["cautions"]],
        "</ul></section>",
        "<h2>Input files</h2>",
        _html_table(
            ["role", "file", "sha256"],
            [
                [_e(f["role"]), _e(f["file"]), f'<span class="hash">{_e(f["sha256"])}</span>']
                for f in dataset["files"]
            ],
        ),
        "<h2>Counts</h2>",
    ]
    categories = counts["by_category"]
    if categories:
        biggest = max(r["flags"] for r in categories)
        out.append(
            _bars_svg(
                "Flags by category: filled part decided, outline still open",
                [
                    (
                        r["category"],
                        r["flags"],
                        r["decided"],
                        f"{r['decided']} of {r['flags']} decided",
                    )
                    for r in categories
                ],
                scale_max=float(biggest),
            )
        )
    out += [
        "<h3>By category</h3>",
        _html_table(
            ["category", "flags", "decided", "open"],
            [
                [_e(r["category"]), _e(r["flags"]), _e(r["decided"]), _e(r["open"])]
                for r in categories
            ],
            numeric=(1, 2, 3),
        ),
        "<h3>By severity</h3>",
        _html_table(
            ["severity", "flags", "decided", "open"],
            [
                [_sev(r["severity"]), _e(r["flags"]), _e(r["decided"]), _e(r["open"])]
                for r in counts["by_severity"]
            ],
            numeric=(1, 2, 3),
        ),
        "<h3>By data signal</h3>",
        _html_table(
            ["signal", "flags", "decided", "open"],
            [
                [_e(r["signal"]), _e(r["flags"]), _e(r["decided"]), _e(r["open"])]
                for r in counts["by_signal"]
            ],
            numeric=(1, 2, 3),
        ),
        "<h3>By action</h3>",
        _html_table(
            ["action", "decisions"],
            [[_e(r["action"]), _e(r["decisions"])] for r in counts["by_action"]],
            numeric=(1,),
        ),
        "<h2>Decisions</h2>",
        _html_table(
            ["seq", "label", "action", "to", "severity", "status", "curator", "time", "reason"],
            [
                [
                    _e(d["seq"]),
                    _e(d["label"]),
                    _e(d["action"]),
                    _e(_decision_target(d)),
                    _sev(d["severity"]),
                    _e(_decision_status(d)),
                    _e(d["curator"]),
                    _e(d["time"]),
                    _e(d["reason"]),
                ]
                for d in report["decisions"]
            ],
            numeric=(0,),
        ),
        "<h2>Unresolved flags</h2>",
        _html_table(
            [
                "score",
                "label",
                "severity",
                "at gate",
                "categories, signals",
                "annotations",
                "reasons",
            ],
            [
                [
                    _e(u["score"]),
                    _e(u["label"]),
                    _sev(u["severity"]),
                    "yes" if u["at_gate"] else "no",
                    _e(_join([*u["categories"], *u["signals"]])),
                    _e(u["annotations"]),
                    _e(_join(u["reasons"])),
                ]
                for u in report["unresolved"]
            ],
            numeric=(0, 5),
        ),
        "<h2>The review queue</h2>",
        '<dl class="facts">',
        f"<dt>Entries</dt><dd>{_e(queue['entries'])} ({_e(queue['data_only'])} flagged by "
        "data signals only)</dd>",
        f"<dt>Score</dt><dd>{_e(queue['formula'])}</dd>",
        f"<dt>Weights</dt><dd>{_e(_weights(queue['weights']))}</dd>",
        f"<dt>Severity of data signals</dt><dd>{_e(_weights(queue['signal_severity']))}</dd>",
        "<dt>Consented attributes</dt><dd>"
        + (_e(_join(queue["attributes"])) if queue["attributes"] else "none configured")
        + "</dd>",
        *[f"<dt>Note</dt><dd>{_e(n)}</dd>" for n in queue["notes"]],
        "</dl>",
        "<h3>Columns that stand in for a consented attribute</h3>",
        _html_table(
            ["column", "attribute", "NMI", "Cramér's V"],
            [
                [_e(p["column"]), _e(p["attribute"]), _e(p["nmi"]), _e(p["cramers_v"])]
                for p in queue["proxies"]
            ],
            numeric=(2, 3),
        ),
        "<h2>Annotator agreement</h2>",
    ]
    agreement = report["agreement"]
    if agreement.get("available"):
        out.append(
            f"<p>{_e(agreement['measure'])}: <strong>{_e(agreement['alpha'])}</strong> "
            f"({_e(agreement['interpretation'])}), {_e(agreement['n_items'])} items, "
            f"{_e(agreement['n_annotators'])} annotators.</p>"
        )
        least = agreement["least_reliable"]
        if least:
            out.append(
                _bars_svg(
                    "Least reliable labels: per-label alpha (below 0 drawn as 0)",
                    [
                        (
                            x["label"],
                            1.0,
                            float(x["alpha"]) if _finite(x["alpha"]) else 0.0,
                            f"{x['alpha']} ({x['interpretation']})",
                        )
                        for x in least
                    ],
                    scale_max=1.0,
                    marks=[
                        (float(agreement["tentative"]), f"tentative {agreement['tentative']}"),
                        (float(agreement["reliable"]), f"reliable {agreement['reliable']}"),
                    ],
                )
            )
        out.append(
            _html_table(
                ["label", "alpha", "reading", "items"],
                [
                    [_e(x["label"]), _e(x["alpha"]), _e(x["interpretation"]), _e(x["n_items"])]
                    for x in least
                ],
                numeric=(1, 3),
            )
        )
    else:
        out.append(f"<p>Not available: {_e(agreement.get('note'))}</p>")
    out += [
        "<h2>Sign-offs</h2>",
        _html_table(
            ["seq", "approver", "time", "still valid", "statement"],
            [
                [
                    _e(s["seq"]),
                    _e(s["approver"]),
                    _e(s["time"]),
                    "yes" if s["valid"] else f"<strong>no</strong>: {_e(_join(s['void_reasons']))}",
                    _e(s["statement"]),
                ]
                for s in report["signoffs"]
            ],
            numeric=(0,),
        ),
        "</body>",
        "</html>",
        "",
    ]
    return "\n".join(out)


def _finite(value: Any) -> bool:
    return isinstance(value, (int, float)) and math.isfinite(value)


__all__ = [
    "CSV_COLUMNS",
    "EXPORT_FORMATS",
    "OutputError",
    "agreement_summary",
    "build_audit_report",
    "csv_cell",
    "csv_text",
    "export_report",
    "format_for",
    "md_text",
    "render",
    "render_csv",
    "render_html",
    "render_json",
    "render_markdown",
    "write_atomic",
]
