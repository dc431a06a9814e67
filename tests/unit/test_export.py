"""`labelreview.export`: one audit report, four renderings, and untrusted text kept harmless.

Where the checks come from:

- CSV injection: the OWASP "CSV Injection" page lists the characters a cell must not start
  with (=, +, -, @, tab, carriage return) and recommends prefixing a single quote; the CSV is
  read back with Python's csv module (RFC 4180).
- HTML: parsed with the standard library's html.parser; void elements per the WHATWG HTML
  Living Standard, section 13.1.2 ("Elements": area, base, br, col, embed, hr, img, input,
  link, meta, source, track, wbr); no external reference means no src/href/url()/@import
  pointing anywhere.
- Markdown: GitHub Flavored Markdown spec, section 4.10 (tables): a cell's pipe must be
  escaped as \\|; CommonMark 0.31, section 2.4: any ASCII punctuation may be backslash-escaped.
- Golden files (tests/golden/) pin the Markdown and CSV byte for byte, with the generation time
  and tool version normalised. Regenerate with LABELREVIEW_REGENERATE_GOLDEN=1 and read the diff.
"""

from __future__ import annotations

import csv
import html
import io
import itertools
import json
import os
import re
import shutil
from datetime import UTC, datetime, timedelta
from html.parser import HTMLParser
from pathlib import Path
from typing import Any

import pytest

from labelreview.decisions import rfc3339
from labelreview.export import (
    CSV_COLUMNS,
    OutputError,
    agreement_summary,
    build_audit_report,
    csv_cell,
    export_report,
    format_for,
    md_text,
    render,
    render_csv,
    render_html,
    render_markdown,
    write_atomic,
)
from labelreview.gate import sign_off
from labelreview.report import CAUTIONS
from labelreview.review import DecisionRequest, ReviewSession

FERRY = Path(__file__).parent.parent / "data" / "apply" / "ferry"
FIREMAN = "people/crew/fireman"
LAZY = "people/looks/lazy_worker"
PRETTY = "people/looks/pretty_passenger"
PASSENGERS = "people/passengers"
NURSE = "people/roles/nurse"
STANDARD = (
    DecisionRequest(FIREMAN, "rename", "neutral job word", new_label="people/crew/firefighter"),
    DecisionRequest(LAZY, "retire", "a verdict on character"),
    DecisionRequest(PRETTY, "rename", "grades looks; say what is seen", new_label=PASSENGERS),
    DecisionRequest(NURSE, "accept", "the uniform and the ward are in the photo"),
)

GOLDEN = Path(__file__).parent.parent / "golden"
REGENERATE = os.environ.get("LABELREVIEW_REGENERATE_GOLDEN") == "1"
FORMATS = ("csv", "json", "markdown", "html")
SCRIPT = "<script>alert(1)</script>"
INJECTIONS = ("=cmd", "+1", "-1", "@SUM(1+1)", "\tx", "\rx")  # OWASP "CSV Injection"
VOID = {"area", "base", "br", "col", "embed", "hr", "img", "input", "link", "meta", "source",
        "track", "wbr"}  # fmt: skip


def ticking() -> Any:
    """A clock one second per call from a fixed moment, so logs and reports are reproducible."""
    start = datetime(2026, 3, 1, 9, 0, tzinfo=UTC)
    counter = itertools.count()
    return lambda: start + timedelta(seconds=next(counter))


def copy_ferry(tmp_path: Path) -> Path:
    """The fixture and its lexicon side by side, so the config (and its hash) stays as is."""
    shutil.copytree(FERRY.parent / "lexicon", tmp_path / "lexicon")
    return Path(shutil.copytree(FERRY, tmp_path / "ferry"))


def scenario(tmp_path: Path) -> ReviewSession:
    """The ferry fixture with decisions, a revocation, a superseded decision and a sign-off."""
    folder = copy_ferry(tmp_path)
    session = ReviewSession.open(folder, curator="curator_a", clock=ticking())
    session.decide_many(STANDARD)  # seq 1-4
    session.revoke(4, "needs a second look at the ward photos", curator="curator_b")  # seq 5
    session.decide(
        DecisionRequest(
            NURSE, "rename", "a job read off a uniform", new_label="people/roles/ward_staff"
        ),
        curator="curator_b",
    )  # seq 6
    session.decide(
        DecisionRequest(PRETTY, "retire", "grades looks; move to passengers", fallback=PASSENGERS)
    )  # seq 7 supersedes seq 3
    sign(session, "approver_c")  # seq 8
    return session


def sign(session: ReviewSession, approver: str) -> None:
    # Through the gate's sign_off, so the export judges entries written the one real way.
    sign_off(
        session, approver=approver, statement="Reviewed with the archive board; fit to release."
    )


@pytest.fixture
def session(tmp_path: Path) -> ReviewSession:
    return scenario(tmp_path)


GENERATED = datetime(2026, 4, 1, 12, 0, tzinfo=UTC)


def report_for(session: ReviewSession) -> dict[str, Any]:
    agreement = agreement_summary(session.dataset.annotations, session.config)
    return build_audit_report(session, agreement, clock=lambda: GENERATED)


# -- the report structure ----------------------------------------------------------------------


def test_report_holds_every_section(session: ReviewSession):
    report = report_for(session)
    assert list(report) == [
        "report", "report_version", "tool", "generated", "dataset", "lexicon_hash", "log",
        "gate", "counts", "decisions", "unresolved", "queue", "agreement", "signoffs",
        "cautions",
    ]  # fmt: skip
    assert report["dataset"]["fingerprint"] == session.fingerprint().digest
    assert {f["role"] for f in report["dataset"]["files"]} == {"config", "annotations", "taxonomy"}
    assert report["lexicon_hash"] == session.lexicon_hash
    assert report["log"]["verified"] is True and report["log"]["entries"] == 8
    assert report["cautions"] == list(CAUTIONS)
    status = {d["seq"]: d["status"] for d in report["decisions"]}
    assert status == {1: "in force", 2: "in force", 3: "superseded", 4: "revoked", 6: "in force",
                      7: "in force"}  # fmt: skip
    revoked = next(d for d in report["decisions"] if d["seq"] == 4)
    assert (revoked["revoked_by"], revoked["revoke_reason"]) == (
        5,
        "needs a second look at the ward photos",
    )
    assert next(d for d in report["decisions"] if d["seq"] == 3)["superseded_by"] == 7
    # The four lexicon flags are decided; the queue adds one label only the data flag: with
    # agreement.min_items 2 in this fixture, 'people/passengers' is contested (alpha -0.071).
    assert [
        (u["label"], u["severity"], u["signals"], u["at_gate"]) for u in report["unresolved"]
    ] == [("people/passengers", "low", ["contested"], False)]
    assert report["queue"]["data_only"] == 1 and report["queue"]["entries"] == 5
    counts = report["counts"]
    assert {r["action"]: r["decisions"] for r in counts["by_action"]} == {
        "accept": 0, "rename": 2, "retire": 2, "superseded": 1, "revoked": 1,
    }  # fmt: skip
    assert {r["severity"]: r["flags"] for r in counts["by_severity"]} == {
        "high": 1, "medium": 2, "low": 2,
    }  # fmt: skip
    assert {r["signal"]: (r["flags"], r["open"]) for r in counts["by_signal"]} == {
        "contested": (3, 1), "disparity": (0, 0), "annotator_skew": (0, 0),
    }  # fmt: skip
    assert [s["valid"] for s in report["signoffs"]] == [True]


def test_signoff_is_void_after_a_later_decision_or_a_data_change(session: ReviewSession):
    session.decide(DecisionRequest("boats/ferry", "accept", "a boat, not a person"))
    report = report_for(session)
    assert report["signoffs"][0]["valid"] is False
    assert report["signoffs"][0]["void_reasons"] == [
        "a decision on 'boats/ferry' (seq 9, by curator_a) came after it"
    ]
    # a fresh sign-off holds again; then the data changes under it
    sign(session, "approver_c")
    assert report_for(session)["signoffs"][-1]["valid"] is True
    annotations = session.dataset.root / "annotations.csv"
    annotations.write_text(annotations.read_text(encoding="utf-8") + "wf09,rook,boats/ferry,1,\n")
    reopened = ReviewSession.open(session.dataset.root, curator="x")
    last = build_audit_report(reopened)["signoffs"][-1]
    assert last["valid"] is False
    assert last["void_reasons"] == ["the dataset files changed since it was given (annotations)"]


def test_single_annotator_agreement_is_skipped_with_a_note(tmp_path: Path):
    frame = scenario(tmp_path).dataset.annotations
    one = frame[frame["annotator"] == "rook"]
    summary = agreement_summary(one)
    assert summary == {
        "available": False,
        "note": "agreement is undefined: the annotations come from a single annotator",
    }


def test_agreement_summary_matches_the_reference_package(session: ReviewSession):
    # The `krippendorff` package (PyPI) is the reference implementation of Krippendorff's
    # alpha; nominal alpha over items x annotators with the single-label ferry data.
    krippendorff = pytest.importorskip("krippendorff")
    import numpy as np

    frame = session.dataset.annotations
    # wf02/rook carries two labels; without that second one every unit is single-label
    frame = frame[~((frame["item"] == "wf02") & (frame["label"] == "people/crew/firefighter")
                    & (frame["annotator"] == "rook"))]  # fmt: skip
    assert not frame.duplicated(["item", "annotator"]).any()
    summary = agreement_summary(frame, session.config)
    items = sorted(frame["item"].unique())
    raters = sorted(frame["annotator"].unique())
    codes = {label: n for n, label in enumerate(sorted(frame["label"].unique()))}
    matrix = np.full((len(raters), len(items)), np.nan)
    for item, rater, label in frame.itertuples(index=False):
        matrix[raters.index(rater), items.index(item)] = codes[label]
    expected = krippendorff.alpha(reliability_data=matrix, level_of_measurement="nominal")
    assert summary["alpha"] == pytest.approx(expected, abs=1e-4)


# -- four formats, one content -----------------------------------------------------------------


class Page(HTMLParser):
    """Collects text, tags and attributes, and checks that every element is closed."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.stack: list[str] = []
        self.errors: list[str] = []
        self.tags: list[str] = []
        self.attrs: list[tuple[str, str]] = []
        self.text: list[str] = []
        self.styles: list[str] = []
        self._in_style = False

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        self.tags.append(tag)
        self.attrs.extend((k, v or "") for k, v in attrs)
        if tag not in VOID:
            self.stack.append(tag)
        self._in_style = tag == "style"

    def handle_startendtag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        self.tags.append(tag)
        self.attrs.extend((k, v or "") for k, v in attrs)

    def handle_endtag(self, tag: str) -> None:
        if not self.stack or self.stack[-1] != tag:
            self.errors.append(f"</{tag}> closes {self.stack[-1:] or 'nothing'}")
        else:
            self.stack.pop()
        self._in_style = False

    def handle_data(self, data: str) -> None:
        (self.styles if self._in_style else self.text).append(data)


def parse_page(text: str) -> Page:
    page = Page()
    page.feed(text)
    page.close()
    return page


def facts(report: dict[str, Any]) -> list[str]:
    """Strings every rendering must show."""
    out = [report["dataset"]["name"], report["dataset"]["fingerprint"], report["lexicon_hash"],
           report["log"]["status"], report["generated"], report["tool"]["version"]]  # fmt: skip
    out += [f["sha256"] for f in report["dataset"]["files"]]
    for d in report["decisions"]:
        out += [d["label"], d["reason"], d["curator"], d["time"]]
    for u in report["unresolved"]:
        out += [u["label"], str(u["score"]), *u["reasons"]]
    queue = report["queue"]
    out += [queue["formula"], *queue["notes"], *queue["attributes"]]
    out += [p["column"] for p in queue["proxies"]]
    for s in report["signoffs"]:
        out += [s["approver"], s["statement"], s["time"]]
    agreement = report["agreement"]
    if agreement.get("available"):
        out += [str(agreement["alpha"]), agreement["interpretation"]]
        out += [x["label"] for x in agreement["least_reliable"]]
    else:
        out.append(agreement["note"])
    return [*out, *report["cautions"]]


def plain_text(fmt: str, text: str) -> str:
    """What a reader of each format sees, with format escapes undone."""
    if fmt == "html":
        return " ".join(parse_page(text).text)
    if fmt == "markdown":
        return html.unescape(re.sub(r"\\(.)", r"\1", text))
    if fmt == "csv":
        return "\n".join(" ".join(row) for row in csv.reader(io.StringIO(text)))
    return json.dumps(json.loads(text), ensure_ascii=False)


@pytest.mark.parametrize("fmt", FORMATS)
def test_every_format_says_the_same_things(session: ReviewSession, fmt: str):
    report = report_for(session)
    text = plain_text(fmt, render(report, fmt))
    if fmt == "json":
        text = " ".join(str(v) for v in _strings(json.loads(render(report, fmt))))
    missing = [fact for fact in facts(report) if fact not in text]
    assert missing == []
    if fmt != "json":  # JSON says it with the revoked_by / superseded_by keys
        assert "revoked by seq 5" in text and "superseded by seq 7" in text


def _strings(value: Any) -> list[str]:
    if isinstance(value, dict):
        return [s for v in value.values() for s in _strings(v)]
    if isinstance(value, list):
        return [s for v in value for s in _strings(v)]
    return [str(value)]


def test_json_parses_and_holds_the_keys(session: ReviewSession):
    data = json.loads(render(report_for(session), "json"))
    for key in ("dataset", "lexicon_hash", "counts", "decisions", "unresolved", "agreement",
                "signoffs", "cautions", "log", "tool", "generated"):  # fmt: skip
        assert key in data
    assert data["decisions"][0]["seq"] == 1


def test_html_is_self_contained_closed_and_has_svg(session: ReviewSession):
    text = render(report_for(session), "html")
    page = parse_page(text)
    assert page.errors == [] and page.stack == []
    assert "svg" in page.tags and "rect" in page.tags
    assert not {"script", "link", "img", "iframe", "object", "embed"} & set(page.tags)
    for name, value in page.attrs:
        assert name not in ("src", "href"), (name, value)
        assert "http:" not in value and "https:" not in value
    css = " ".join(page.styles)
    assert "@media print" in css
    assert "url(" not in css and "@import" not in css
    assert not re.search(r"https?://", text)
    # severity is in words, not colour alone
    assert "high" in " ".join(page.text) and "medium" in " ".join(page.text)


def hostile(value: Any, prefix: str) -> Any:
    """Every string of a report, prefixed with attack text."""
    if isinstance(value, dict):
        return {k: hostile(v, prefix) for k, v in value.items()}
    if isinstance(value, list):
        return [hostile(v, prefix) for v in value]
    if isinstance(value, str):
        return prefix + value
    return value


def test_html_escapes_everything_from_the_data_including_svg_text(session: ReviewSession):
    report = hostile(report_for(session), SCRIPT)
    report["agreement"]["available"] = True  # keep the chart: hostile() left numbers alone
    text = render_html(report)
    assert "<script" not in text.lower()
    page = parse_page(text)
    assert page.errors == []
    assert "script" not in page.tags
    assert SCRIPT + report["dataset"]["name"].removeprefix(SCRIPT) in " ".join(page.text)
    svg = text[text.index("<svg") : text.rindex("</svg>")]
    assert "&lt;script&gt;" in svg


def test_csv_neutralises_every_injection_vector(session: ReviewSession):
    base = report_for(session)
    for vector in INJECTIONS:
        rows = list(csv.reader(io.StringIO(render_csv(hostile(base, vector)))))
        assert tuple(rows[0]) == CSV_COLUMNS
        for row in rows[1:]:
            for cell in row:
                if _is_number(cell):
                    continue  # numbers the report computed (a negative alpha), not text
                assert cell[:1] not in ("=", "+", "-", "@", "\t", "\r"), (vector, cell)


def _is_number(cell: str) -> bool:
    try:
        float(cell)
    except ValueError:
        return False
    return True


@pytest.mark.parametrize("vector", INJECTIONS)
def test_csv_cell(vector: str):
    assert csv_cell(vector) == "'" + vector
    assert csv_cell("  " + vector) == "'  " + vector  # leading spaces skipped by some programs
    assert csv_cell("plain") == "plain" and csv_cell(3) == 3 and csv_cell(None) == ""


def test_markdown_escapes_pipes_and_markup(session: ReviewSession):
    assert md_text("a|b") == "a\\|b"
    assert md_text("-1") == "\\-1" and md_text("+1") == "\\+1"
    assert md_text(SCRIPT) == "&lt;script&gt;alert(1)&lt;/script&gt;"
    assert md_text("a & b") == "a &amp; b"
    assert md_text("two\nlines") == "two lines"
    report = hostile(report_for(session), "| x | <b>")
    text = render_markdown(report)
    assert "<b>" not in text and "&lt;b&gt;" in text
    for block in text.split("\n\n"):
        lines = [ln for ln in block.splitlines() if ln.startswith("|")]
        if lines:  # every row of a table has the header's number of cells
            widths = {len(re.split(r"(?<!\\)\|", ln)) for ln in lines}
            assert len(widths) == 1, block


def test_a_script_label_from_the_dataset_is_escaped_end_to_end(tmp_path: Path):
    folder = copy_ferry(tmp_path)
    with open(folder / "annotations.csv", "a", encoding="utf-8") as handle:
        handle.write(f'wf09,rook,"{SCRIPT}",0.5,\nwf09,wren,"=cmd",0.5,\n')
    session = ReviewSession.open(folder, curator="=HYPERLINK(1)", clock=ticking())
    session.decide(DecisionRequest(SCRIPT, "retire", "markup, not a tag at all"))
    session.decide(DecisionRequest("=cmd", "retire", "=1+1 is not a tag either"))
    for fmt, ending in (("html", "html"), ("csv", "csv"), ("markdown", "md"), ("json", "json")):
        path, _ = export_report(session, tmp_path / f"audit.{ending}", agreement=None)
        text = path.read_text(encoding="utf-8")
        if fmt == "html":
            assert "<script" not in text and "&lt;script&gt;alert(1)&lt;/script&gt;" in text
        if fmt == "markdown":
            assert "<script" not in text
        if fmt == "csv":
            cells = [c for row in csv.reader(io.StringIO(text)) for c in row]
            assert (
                "'=cmd" in cells
                and "'=HYPERLINK(1)" in cells
                and "'=1+1 is not a tag either" in cells
            )
            assert not [c for c in cells if c[:1] in ("=", "+", "-", "@")]
        if fmt == "json":
            assert SCRIPT in [d["label"] for d in json.loads(text)["decisions"]]


# -- golden files ------------------------------------------------------------------------------


def normalise(text: str, report: dict[str, Any]) -> str:
    """Generation time and tool version replaced, so the golden files pin everything else."""
    version = report["tool"]["version"]
    text = text.replace(report["generated"], "<time>")
    text = text.replace(f"labelreview {version}", "labelreview <version>")
    return text.replace(f"tool_version,,,,,,,,,{version},", "tool_version,,,,,,,,,<version>,")


@pytest.mark.parametrize(
    ("fmt", "name"), [("markdown", "audit_ferry.md"), ("csv", "audit_ferry.csv")]
)
def test_golden(session: ReviewSession, fmt: str, name: str):
    report = report_for(session)
    assert report["generated"] == rfc3339(GENERATED) == "2026-04-01T12:00:00.000Z"
    text = normalise(render(report, fmt), report)
    golden = GOLDEN / name
    if REGENERATE:
        golden.write_text(text, encoding="utf-8")
    assert text == golden.read_text(encoding="utf-8"), (
        f"{name} differs; if the change is intended, rerun with LABELREVIEW_REGENERATE_GOLDEN=1 "
        "and read the diff"
    )


# -- writing -----------------------------------------------------------------------------------


def test_format_for_names_the_allowed_endings():
    assert format_for(Path("a.HTML")) == "html" and format_for(Path("a.md")) == "markdown"
    with pytest.raises(Exception, match=r"allowed: \.csv, \.json, \.md, \.html"):
        format_for(Path("a.pdf"))


def test_write_atomic_refuses_to_overwrite_without_force(tmp_path: Path):
    path = tmp_path / "a.md"
    write_atomic(path, b"one")
    with pytest.raises(OutputError, match="already exists"):
        write_atomic(path, b"two")
    assert path.read_bytes() == b"one"
    write_atomic(path, b"two", force=True)
    assert path.read_bytes() == b"two"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.md"]  # no temporary left


def test_export_never_writes_over_an_input(session: ReviewSession):
    root = session.dataset.root
    before = (root / "annotations.csv").read_bytes()
    with pytest.raises(OutputError, match="input files"):
        export_report(session, root / "annotations.csv", force=True)
    assert (root / "annotations.csv").read_bytes() == before


def test_tampered_log_is_reported_not_hidden(session: ReviewSession):
    log = session.config.log_path
    log.write_bytes(log.read_bytes().replace(b"curator_b", b"curator_x", 1))
    report = build_audit_report(ReviewSession.open(session.dataset.root, curator="x"))
    assert report["log"]["verified"] is False
    assert "does not verify" in report["log"]["status"]
    assert "hash mismatch" in report["log"]["status"]
    assert "does not verify" in render_html(report)
