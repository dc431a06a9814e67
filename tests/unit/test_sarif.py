"""The gate's SARIF output checked against the OASIS SARIF 2.1.0 standard.

Two outside references:

- The published JSON schema of SARIF 2.1.0 (``tests/data/sarif/sarif-2.1.0-rtm.5.json``, taken
  from the npm package ``@microsoft/jest-sarif`` 1.0.0-beta.0; see the README beside it),
  applied with the ``jsonschema`` package's Draft 4 validator, as the schema declares.
- Rules of the standard's text that a schema cannot express, recalled from memory of the OASIS
  SARIF 2.1.0 specification (section numbers recalled too): ``ruleIndex`` is the index in
  ``tool.driver.rules`` of the rule whose ``id`` equals ``ruleId`` (3.27.6, 3.27.7); a region's
  ``startLine`` is 1-based (3.30.5); an ``originalUriBaseIds`` entry's ``uri`` ends with a slash
  (3.14.14); ``level`` is one of none, note, warning, error (3.27.10).
"""

from __future__ import annotations

import copy
import csv
import json
import shutil
from pathlib import Path

import jsonschema
import pytest

from labelreview._resources import sample_sets_dir
from labelreview.gate import check_gate
from labelreview.review import DecisionRequest, ReviewSession
from labelreview.sarif import gate_sarif, gate_sarif_json

SAMPLE = sample_sets_dir() / "harbour_archive"
SCHEMA_PATH = Path(__file__).parent.parent / "data" / "sarif" / "sarif-2.1.0-rtm.5.json"
REASON = "checked against the catalogue card"


@pytest.fixture(scope="module")
def validator() -> jsonschema.Draft4Validator:
    schema = json.loads(SCHEMA_PATH.read_text(encoding="utf-8"))
    jsonschema.Draft4Validator.check_schema(schema)
    return jsonschema.Draft4Validator(schema)


@pytest.fixture
def folder(tmp_path: Path) -> Path:
    target = tmp_path / "harbour"
    shutil.copytree(SAMPLE, target)
    (target / "labelreview-log.jsonl").unlink(missing_ok=True)
    return target


def errors_of(validator: jsonschema.Draft4Validator, doc: dict) -> list[str]:
    return [f"{list(e.path)}: {e.message}" for e in validator.iter_errors(doc)]


def test_failing_gate_validates_against_the_published_schema(folder: Path, validator):
    result = check_gate(ReviewSession.open(folder, curator="mira"))
    doc = gate_sarif(result)
    assert errors_of(validator, doc) == []
    assert doc["version"] == "2.1.0" and doc["$schema"].endswith("sarif-schema-2.1.0.json")
    assert len(doc["runs"]) == 1
    # The JSON text is the same document.
    assert json.loads(gate_sarif_json(result)) == doc


def test_schema_check_can_fail(folder: Path, validator):
    # The validator is not vacuous: a level outside the standard's four is caught.
    doc = gate_sarif(check_gate(ReviewSession.open(folder, curator="mira")))
    broken = copy.deepcopy(doc)
    broken["runs"][0]["results"][0]["level"] = "critical"
    assert errors_of(validator, broken)
    missing = copy.deepcopy(doc)
    del missing["runs"][0]["tool"]["driver"]["name"]
    assert errors_of(validator, missing)


def test_rules_results_and_levels(folder: Path):
    session = ReviewSession.open(folder, curator="mira")
    result = check_gate(session)
    run = gate_sarif(result)["runs"][0]
    driver = run["tool"]["driver"]
    assert driver["name"] == "labelreview" and driver["version"]
    rules = driver["rules"]
    signal_rules = ["data-signal/contested", "data-signal/disparity", "data-signal/annotator_skew"]
    assert [r["id"] for r in rules] == sorted(session.scanned.lexicon.categories) + signal_rules
    mapping = {"high": "error", "medium": "warning", "low": "note"}
    for rule in rules[: -len(signal_rules)]:
        category = session.scanned.lexicon.categories[rule["id"]]
        assert rule["defaultConfiguration"]["level"] == mapping[category.severity]
        assert rule["shortDescription"]["text"] == category.title
    # data signals take their level from queue.severity (defaults: low, medium, low)
    assert [r["defaultConfiguration"]["level"] for r in rules[-3:]] == ["note", "warning", "note"]
    results = run["results"]
    assert len(results) == sum(
        len(g.flag.categories) + len(g.flag.signal_names) for g in result.unresolved
    )
    assert {r["ruleId"] for r in results} >= {"data-signal/contested", "data-signal/annotator_skew"}
    for item in results:
        assert item["level"] in ("none", "note", "warning", "error")
        assert rules[item["ruleIndex"]]["id"] == item["ruleId"]
        assert item["properties"]["label"] in item["message"]["text"]
        assert item["level"] == mapping[item["properties"]["severity"]]
    fingerprints = [r["partialFingerprints"]["labelCategory/v1"] for r in results]
    assert len(set(fingerprints)) == len(fingerprints)
    assert run["invocations"][0]["executionSuccessful"] is True
    assert run["invocations"][0]["exitCode"] == 1


def test_locations_resolve_to_the_line_naming_the_label(folder: Path):
    result = check_gate(ReviewSession.open(folder, curator="mira"))
    run = gate_sarif(result)["runs"][0]
    base = run["originalUriBaseIds"]["DATASETROOT"]["uri"]
    assert base.endswith("/") and base == folder.resolve().as_uri() + "/"
    with open(folder / "taxonomy.csv", encoding="utf-8", newline="") as handle:
        rows = list(csv.reader(handle))
    for item in run["results"]:
        physical = item["locations"][0]["physicalLocation"]
        assert physical["artifactLocation"] == {"uri": "taxonomy.csv", "uriBaseId": "DATASETROOT"}
        line = physical["region"]["startLine"]
        assert line >= 1 and rows[line - 1][1] == item["properties"]["label"]


def test_fingerprints_are_stable_across_runs(folder: Path):
    first = gate_sarif(check_gate(ReviewSession.open(folder, curator="mira")))
    second = gate_sarif(check_gate(ReviewSession.open(folder, curator="olu")))
    key = "labelCategory/v1"

    def prints(doc: dict) -> dict[tuple[str, str], str]:
        return {
            (r["properties"]["label"], r["ruleId"]): r["partialFingerprints"][key]
            for r in doc["runs"][0]["results"]
        }

    assert prints(first) == prints(second)


def test_annotation_only_label_points_at_the_annotation_file(folder: Path, validator):
    with open(folder / "annotations.csv", "a", encoding="utf-8") as handle:
        handle.write("hb_0002,gannet,people/looks/shifty_stranger\n")
    doc = gate_sarif(check_gate(ReviewSession.open(folder, curator="mira")))
    assert errors_of(validator, doc) == []
    hits = [
        r
        for r in doc["runs"][0]["results"]
        if r["properties"]["label"] == "people/looks/shifty_stranger"
    ]
    assert hits, "the new label should be flagged"
    physical = hits[0]["locations"][0]["physicalLocation"]
    assert physical["artifactLocation"]["uri"] == "annotations.csv"
    lines = (folder / "annotations.csv").read_text(encoding="utf-8").splitlines()
    assert physical["region"]["startLine"] == len(lines)


def test_passing_gate_and_gate_notifications_validate(folder: Path, validator):
    session = ReviewSession.open(folder, curator="mira")
    requests = [DecisionRequest(f.label, "accept", REASON) for f in session.unresolved("medium")]
    session.decide_many(requests)
    passing = gate_sarif(check_gate(session))
    assert errors_of(validator, passing) == []
    run = passing["runs"][0]
    assert run["results"] == [] and run["invocations"][0]["exitCode"] == 0
    assert "toolExecutionNotifications" not in run["invocations"][0]
    # A missing sign-off and a torn log become notifications, still valid SARIF.
    with open(session.log.path, "ab") as handle:
        handle.write(b'{"v":1')
    failing = gate_sarif(check_gate(session, require_signoff=True))
    assert errors_of(validator, failing) == []
    notes = failing["runs"][0]["invocations"][0]["toolExecutionNotifications"]
    assert [n["descriptor"]["id"] for n in notes] == ["gate-log", "gate-signoff"]
    ids = {d["id"] for d in failing["runs"][0]["tool"]["driver"]["notifications"]}
    assert {n["descriptor"]["id"] for n in notes} <= ids
