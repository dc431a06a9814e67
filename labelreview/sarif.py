"""The release gate's result as a SARIF 2.1.0 log, so CI systems can show the open flags.

SARIF (Static Analysis Results Interchange Format) is an OASIS standard, version 2.1.0. One run:

- ``tool.driver.rules``: one rule per lexicon category (``id`` the category id,
  ``shortDescription`` its title, ``fullDescription`` its rationale, ``defaultConfiguration.level``
  from its severity: high -> ``error``, medium -> ``warning``, low -> ``note``), then one per
  data signal (``data-signal/contested``, ``data-signal/disparity``,
  ``data-signal/annotator_skew``; level from ``queue.severity``).
- ``results``: one per unresolved flag and category or data signal, pointing at the taxonomy
  file (or the annotation file for labels only the annotations use), relative to the dataset
  folder (``uriBaseId`` ``DATASETROOT``), with the label's line where the file is text.
  ``partialFingerprints["labelCategory/v1"]`` is stable per label and rule, so CI systems can
  follow a result across runs.
- ``invocations[0]``: ``executionSuccessful`` (the check ran; findings do not make it false), the
  exit code, and the gate's other reasons to fail (log, lexicon, sign-off) as notifications.

The module builds plain dicts; it prints nothing and imports no front end.
"""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

from labelreview.gate import GateFlag, GateResult, label_fingerprint
from labelreview.queue import DATA_SIGNALS, SIGNAL_TITLES

SARIF_VERSION = "2.1.0"
#: The OASIS-published schema location for SARIF 2.1.0 (recalled from memory).
SARIF_SCHEMA = "https://docs.oasis-open.org/sarif/sarif/v2.1.0/os/schemas/sarif-schema-2.1.0.json"
ROOT_BASE_ID = "DATASETROOT"
FINGERPRINT_KEY = "labelCategory/v1"
SIGNAL_RULE_PREFIX = "data-signal/"
"""Rule ids of the data signals: ``data-signal/contested`` and so on."""

NOTIFICATIONS: dict[str, str] = {
    "gate-log": "The decision log does not verify (tampered, torn or cut short).",
    "gate-lexicon": "Decisions in force were made with a different lexicon set.",
    "gate-signoff": "The current state has no valid sign-off.",
}
"""The gate's own reasons to fail, beside the flags (``driver.notifications``)."""

LEVELS: dict[str, str] = {"high": "error", "medium": "warning", "low": "note"}
"""Severity -> SARIF ``level`` (SARIF 2.1.0 section 3.27.10 allows none, note, warning, error)."""


def _text(value: str) -> dict[str, str]:
    return {"text": value}


def _locate(entry: dict[str, Any], gate_flag: GateFlag) -> None:
    location = gate_flag.location
    if location is None:
        return
    artifact: dict[str, Any] = {"uri": location.uri}
    if location.relative:
        artifact["uriBaseId"] = ROOT_BASE_ID
    physical: dict[str, Any] = {"artifactLocation": artifact}
    if location.line is not None:
        physical["region"] = {"startLine": location.line}
    entry["locations"] = [{"physicalLocation": physical}]


def gate_sarif(result: GateResult) -> dict[str, Any]:
    """The gate result as a SARIF 2.1.0 log object (JSON-ready).

    Args:
        result: What :func:`labelreview.gate.check_gate` returned.

    Returns:
        A dict with ``$schema``, ``version`` and one run.
    """
    category_ids = sorted(result.categories)
    rule_index = {cid: i for i, cid in enumerate(category_ids)}
    rules = []
    for cid in category_ids:
        info = result.categories[cid]
        rules.append(
            {
                "id": cid,
                "name": "".join(part.capitalize() for part in cid.split("_")),
                "shortDescription": _text(info.title),
                "fullDescription": _text(info.rationale or info.title),
                "defaultConfiguration": {"level": LEVELS.get(info.severity, "warning")},
                "properties": {"severity": info.severity, "source": info.source},
            }
        )
    for name in DATA_SIGNALS:
        title, description = SIGNAL_TITLES[name]
        level = result.signal_severity.get(name, "low")
        rule_index[f"{SIGNAL_RULE_PREFIX}{name}"] = len(rules)
        rules.append(
            {
                "id": f"{SIGNAL_RULE_PREFIX}{name}",
                "name": "".join(part.capitalize() for part in name.split("_")),
                "shortDescription": _text(title),
                "fullDescription": _text(description),
                "defaultConfiguration": {"level": LEVELS.get(level, "note")},
                "properties": {"severity": level, "source": "labelreview data signals"},
            }
        )
    results = []
    for gate_flag in result.unresolved:
        flag = gate_flag.flag
        for category, severity, found in gate_flag.by_category():
            reasons = list(dict.fromkeys(f.reason for f in found)) or list(flag.reasons)
            message = f"'{flag.label}' is unresolved: " + " ".join(reasons)
            if flag.suggestions:
                message += f" Suggestions: {', '.join(flag.suggestions)}."
            entry: dict[str, Any] = {
                "ruleId": category,
                "level": LEVELS[severity],
                "message": _text(message),
                "partialFingerprints": {FINGERPRINT_KEY: label_fingerprint(flag.label, category)},
                "properties": {
                    "label": flag.label,
                    "severity": severity,
                    "terms": list(dict.fromkeys(f.term for f in found)),
                    "annotations": flag.annotations,
                    "items": flag.items,
                },
            }
            if category in rule_index:
                entry["ruleIndex"] = rule_index[category]
            _locate(entry, gate_flag)
            results.append(entry)
        for name, severity, reasons in gate_flag.by_signal(result.signal_severity):
            rule_id = f"{SIGNAL_RULE_PREFIX}{name}"
            entry = {
                "ruleId": rule_id,
                "ruleIndex": rule_index[rule_id],
                "level": LEVELS.get(severity, "note"),
                "message": _text(f"'{flag.label}' is unresolved: " + "; ".join(reasons) + "."),
                "partialFingerprints": {FINGERPRINT_KEY: label_fingerprint(flag.label, rule_id)},
                "properties": {
                    "label": flag.label,
                    "severity": severity,
                    "score": flag.score,
                    "annotations": flag.annotations,
                    "items": flag.items,
                },
            }
            _locate(entry, gate_flag)
            results.append(entry)
    notifications = [
        {"level": "error", "message": _text(reason), "descriptor": {"id": f"gate-{kind}"}}
        for kind, reason in result.failure_items()
        if kind != "unresolved"
    ]
    invocation: dict[str, Any] = {
        "executionSuccessful": True,
        "exitCode": result.exit_code,
        "properties": {"verdict": "pass" if result.passed else "fail", "summary": result.verdict()},
    }
    if notifications:
        invocation["toolExecutionNotifications"] = notifications
    root_uri = Path(result.dataset).resolve().as_uri().rstrip("/") + "/"
    run = {
        "tool": {
            "driver": {
                "name": "labelreview",
                "version": result.tool_version,
                "semanticVersion": result.tool_version,
                "rules": rules,
                "notifications": [
                    {"id": nid, "shortDescription": _text(text)}
                    for nid, text in NOTIFICATIONS.items()
                ],
            }
        },
        "originalUriBaseIds": {ROOT_BASE_ID: {"uri": root_uri}},
        "invocations": [invocation],
        "results": results,
        "properties": {
            "fail_on": result.fail_on,
            "lexicon_hash": result.lexicon_hash,
            "dataset_fingerprint": result.dataset_fingerprint,
            "log_head": result.verification.head,
            "log_status": result.verification.status(),
            "cautions": list(result.cautions),
        },
    }
    return {"$schema": SARIF_SCHEMA, "version": SARIF_VERSION, "runs": [run]}


def gate_sarif_json(result: GateResult) -> str:
    """:func:`gate_sarif` as indented JSON text ending in a newline."""
    return json.dumps(gate_sarif(result), indent=2, ensure_ascii=False) + "\n"
