"""The whole release workflow through the real entry point (``python -m labelreview`` in a
subprocess), on a copy of the bundled sample set: gate fails, decisions, gate passes, apply,
export in every format, sign-off, gate with --require-signoff, then tampering caught.

Exit codes follow POSIX ``diff``/``grep`` (POSIX.1-2017, EXIT STATUS: 0 nothing found, 1 found
something, >1 trouble). The hash chain is SHA-256 (FIPS 180-4) over canonical JSON; the
expectation that one changed byte breaks verification is what a hash chain is for.
"""

from __future__ import annotations

import csv
import json
import shutil
import subprocess
import sys
from pathlib import Path

import pandas as pd
import pytest

from labelreview._resources import sample_sets_dir
from labelreview.review import ReviewSession

SAMPLE = sample_sets_dir() / "harbour_archive"
RETIRED = "people/looks/suspicious_looking"
RENAMED = "people/roles/cleaning_lady"
NEW_NAME = "people/roles/cleaner"


def lr(*args: str | Path, ok: tuple[int, ...] = (0,)) -> subprocess.CompletedProcess[str]:
    proc = subprocess.run(
        [sys.executable, "-m", "labelreview", *map(str, args)],
        capture_output=True,
        text=True,
        timeout=300,
    )
    assert proc.returncode in ok, (args, proc.returncode, proc.stdout[-2000:], proc.stderr)
    assert "Traceback" not in proc.stderr
    return proc


@pytest.fixture(scope="module")
def flow(tmp_path_factory: pytest.TempPathFactory) -> dict[str, Path]:
    root = tmp_path_factory.mktemp("flow")
    data = root / "harbour"
    shutil.copytree(SAMPLE, data)
    (data / "labelreview-log.jsonl").unlink(missing_ok=True)
    return {"root": root, "data": data}


def test_release_flow_end_to_end(flow: dict[str, Path]):
    root, data = flow["root"], flow["data"]
    log = data / "labelreview-log.jsonl"
    inputs_before = {p.name: p.read_bytes() for p in data.iterdir() if p.is_file()}

    # 1. A fresh dataset fails the gate (1), not as bad input (2).
    first = lr("check", data, ok=(1,))
    assert first.stdout.startswith("FAIL: ")

    # 2. Decide every open flag (all levels): one retire, one rename, the rest accepted.
    session = ReviewSession.open(data, curator="mira")
    open_labels = [f.label for f in session.unresolved("low")]
    assert RETIRED in open_labels and RENAMED in open_labels
    lines = ["curator: mira", "decisions:"]
    for label in open_labels:
        lines.append(f"  - label: {label}")
        if label == RETIRED:
            lines += ["    action: retire", "    reason: guesses a crime from how someone looks"]
        elif label == RENAMED:
            lines += [
                "    action: rename",
                f"    new_label: {NEW_NAME}",
                "    reason: a neutral job word exists",
            ]
        else:
            lines += ["    action: accept", "    reason: checked against the catalogue card"]
    batch = root / "batch.yaml"
    batch.write_text("\n".join(lines) + "\n", encoding="utf-8")
    lr("decide", "--from", batch, data)
    entries = [json.loads(x) for x in log.read_text(encoding="utf-8").splitlines()]
    assert len(entries) == len(open_labels)
    assert {e["action"] for e in entries} == {"accept", "rename", "retire"}

    # 3. The gate passes now, but not when a sign-off is required.
    assert lr("check", data).stdout.startswith("PASS: ")
    assert lr("check", data, "--require-signoff", ok=(1,)).stdout.startswith("FAIL: ")

    # 4. Apply writes a revised copy; the inputs are untouched.
    out = root / "revised"
    lr("apply", data, "--out", out)
    revised = pd.read_csv(out / "annotations.csv")
    original = pd.read_csv(data / "annotations.csv")
    tag = "tag"  # the sample set's label column (its labelreview.yaml)
    assert RETIRED in set(original[tag]) and RETIRED not in set(revised[tag])
    assert RENAMED not in set(revised[tag]) and NEW_NAME in set(revised[tag])
    with open(out / "mapping.csv", newline="", encoding="utf-8") as handle:
        mapping = {row["old_label"]: row for row in csv.DictReader(handle)}
    assert mapping[RETIRED]["action"] == "retire" and mapping[RENAMED]["new_label"] == NEW_NAME
    manifest = json.loads((out / "manifest.json").read_text(encoding="utf-8"))
    head = entries[-1]["hash"]
    assert json.dumps(manifest).count(head) >= 1  # the manifest names the log head it applied

    # 5. Export in every format; each says the same decisions.
    for suffix in (".csv", ".json", ".md", ".html"):
        target = root / f"audit{suffix}"
        lr("export", data, "--to", target, "--no-agreement")
        text = target.read_text(encoding="utf-8").replace("\\_", "_")  # Markdown escapes _
        assert RETIRED in text and "guesses a crime from how someone looks" in text
    report = json.loads((root / "audit.json").read_text(encoding="utf-8"))
    assert len(report["decisions"]) == len(open_labels) and report["signoffs"] == []

    # 6. Sign off; the gate with --require-signoff passes and the export shows the sign-off.
    lr("signoff", data, "--approver", "board chair", "--statement", "Reviewed at the board.")
    assert lr("check", data, "--require-signoff").stdout.startswith("PASS: ")
    lr("export", data, "--to", root / "audit.json", "--force", "--no-agreement")
    report = json.loads((root / "audit.json").read_text(encoding="utf-8"))
    assert [(s["approver"], s["valid"]) for s in report["signoffs"]] == [("board chair", True)]

    # 7. The inputs were never written to (only the log and its lock file were added).
    after = {p.name: p.read_bytes() for p in data.iterdir() if p.is_file()}
    assert {k: v for k, v in after.items() if k in inputs_before} == inputs_before
    assert set(after) - set(inputs_before) <= {log.name, log.name + ".lock"}

    # 8. One changed byte in the log: verify says tampered (1), the gate fails (1), apply and
    #    sign-off refuse as bad input (2).
    raw = bytearray(log.read_bytes())
    at = raw.index(b"catalogue card")
    raw[at] = ord("C")
    log.write_bytes(bytes(raw))
    verify = lr("log", "verify", data, ok=(1,))
    assert "line" in verify.stdout + verify.stderr
    assert lr("check", data, "--allow-lexicon-change", ok=(1,)).stdout.startswith("FAIL: ")
    lr("apply", data, "--out", root / "again", ok=(2,))
    lr("signoff", data, "--approver", "x", "--statement", "should be refused", ok=(2,))
