"""Quality of the shipped lexicon plus scanner, measured on a hand-labelled evaluation set.

``tests/data/scan_eval.csv`` is the project's own labelled data: each row was written by hand
from the meaning of the label and inclusive-language practice, *without* reading the lexicon
files, so that the lexicon is checked against something it was not built from (keeping an
evaluation set independent of the thing evaluated is common practice, no source). Since then,
14 rows were changed to record two project policy decisions (job titles are flagged when items
show people; gendered role words are flagged whatever the items show; each says so in its
``note``), and the lexicon was tuned while watching this set's errors: its figures now flatter
the tool and serve as a regression guard more than as an independent measure. Columns:

* ``label``    the label as a taxonomy or annotation file might spell it
* ``subjects`` people | mixed | none, passed to ``Scanner``
* ``expected`` flag | clean
* ``category`` the expected category id when ``expected`` is flag
* ``note``     reasoning for borderline rows
* ``encoded``  plain | rot13; slur rows are stored ROT13 so the file does not spell them out

The thresholds (precision and recall of "flag" >= 0.9) come from the project's issue tracker,
not from a standard; the 0.85 category-agreement threshold is this test's own choice.
Flags are candidates for human judgement; passing this test does not show that any dataset
scanned with the lexicon is fair.
"""

from __future__ import annotations

import codecs
import csv
import importlib
import importlib.util
from dataclasses import dataclass
from functools import cache
from pathlib import Path

import pytest

from labelreview.model import BASE_CATEGORIES, SUBJECTS

EVAL_PATH = Path(__file__).resolve().parents[1] / "data" / "scan_eval.csv"
MIN_PRECISION = 0.9  # from the issue, not from a standard
MIN_RECALL = 0.9  # from the issue, not from a standard
MIN_CATEGORY_AGREEMENT = 0.85  # this test's own choice
VALID_SUBJECTS = set(SUBJECTS)
VALID_CATEGORIES = set(BASE_CATEGORIES)


@dataclass(frozen=True)
class EvalRow:
    """One hand-labelled row of the evaluation set, decoded."""

    line: int
    label: str
    subjects: str
    expected: str
    category: str
    note: str


@dataclass(frozen=True)
class Outcome:
    """What the scanner said about one evaluation row."""

    row: EvalRow
    categories: frozenset[str]

    @property
    def flagged(self) -> bool:
        return bool(self.categories)


def load_eval_rows(path: Path = EVAL_PATH) -> list[EvalRow]:
    """Read the evaluation CSV, decoding ROT13 rows.

    Args:
        path: The CSV file.

    Returns:
        The rows in file order.
    """
    rows: list[EvalRow] = []
    with path.open(encoding="utf-8", newline="") as handle:
        for line, record in enumerate(csv.DictReader(handle), start=2):
            label = record["label"]
            if record["encoded"] == "rot13":
                label = codecs.decode(label, "rot13")
            rows.append(
                EvalRow(
                    line=line,
                    label=label,
                    subjects=record["subjects"],
                    expected=record["expected"],
                    category=record["category"],
                    note=record["note"],
                )
            )
    return rows


@cache
def scan_outcomes() -> tuple[Outcome, ...]:
    """Scan every evaluation label once, one Scanner per subjects value."""
    # Skip only while the modules are not written yet; a broken module must fail, not skip.
    importlib.import_module("labelreview")
    for name in ("labelreview.lexicon", "labelreview.scan"):
        if importlib.util.find_spec(name) is None:
            pytest.skip(f"{name} does not exist yet")
    lexicon_mod = importlib.import_module("labelreview.lexicon")
    scan_mod = importlib.import_module("labelreview.scan")
    lexicon = lexicon_mod.load_lexicon()
    rows = load_eval_rows()
    found: dict[tuple[str, str], set[str]] = {}
    for subjects in sorted({row.subjects for row in rows}):
        labels = sorted({row.label for row in rows if row.subjects == subjects})
        scanner = scan_mod.Scanner(lexicon, subjects=subjects)
        for label in labels:
            found[(subjects, label)] = {f.category for f in scanner.scan([label])}
    return tuple(
        Outcome(row=row, categories=frozenset(found[(row.subjects, row.label)])) for row in rows
    )


def _describe(outcome: Outcome) -> str:
    row = outcome.row
    got = ",".join(sorted(outcome.categories)) or "-"
    want = row.category or "-"
    note = f"  ({row.note})" if row.note else ""
    return f"  line {row.line}: {row.label!r} [{row.subjects}] want {want}, got {got}{note}"


def test_eval_set_is_well_formed() -> None:
    rows = load_eval_rows()
    assert len(rows) >= 400
    for row in rows:
        assert row.subjects in VALID_SUBJECTS, row
        assert row.expected in {"flag", "clean"}, row
        if row.expected == "flag":
            assert row.category in VALID_CATEGORIES, row
        else:
            assert row.category == "", row
    keys = [(row.subjects, row.label) for row in rows]
    assert len(keys) == len(set(keys)), "duplicate (subjects, label) rows"
    assert sum(row.expected == "clean" for row in rows) >= 150


def test_flag_precision_and_recall() -> None:
    outcomes = scan_outcomes()
    tp = [o for o in outcomes if o.flagged and o.row.expected == "flag"]
    fp = [o for o in outcomes if o.flagged and o.row.expected == "clean"]
    fn = [o for o in outcomes if not o.flagged and o.row.expected == "flag"]
    precision = len(tp) / (len(tp) + len(fp)) if tp or fp else 0.0
    recall = len(tp) / (len(tp) + len(fn)) if tp or fn else 0.0
    report = "\n".join(
        [
            f"precision {precision:.3f} (tp {len(tp)}, fp {len(fp)}); "
            f"recall {recall:.3f} (fn {len(fn)})",
            "false positives:",
            *map(_describe, fp),
            "false negatives:",
            *map(_describe, fn),
        ]
    )
    if precision < MIN_PRECISION or recall < MIN_RECALL:
        print(report)
    assert precision >= MIN_PRECISION, report
    assert recall >= MIN_RECALL, report


def test_flagged_labels_get_the_expected_category() -> None:
    outcomes = scan_outcomes()
    tp = [o for o in outcomes if o.flagged and o.row.expected == "flag"]
    if not tp:
        pytest.fail("the scanner flagged none of the expected labels")
    wrong = [o for o in tp if o.row.category not in o.categories]
    agreement = 1 - len(wrong) / len(tp)
    report = "\n".join(
        [f"category agreement {agreement:.3f} over {len(tp)} true positives; mismatches:"]
        + [_describe(o) for o in wrong]
    )
    if agreement < MIN_CATEGORY_AGREEMENT:
        print(report)
    assert agreement >= MIN_CATEGORY_AGREEMENT, report
