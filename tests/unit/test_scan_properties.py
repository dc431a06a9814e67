"""Property tests: how a label is written (case, separators, path prefixes, id prefixes) must
not change what the scanner finds in it. The labels come from the project's evaluation set;
the invariances are common practice for label normalisation, no source."""

from __future__ import annotations

import codecs
import csv
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from labelreview.lexicon import load_lexicon
from labelreview.scan import Scanner

EVAL = Path(__file__).parent.parent / "data" / "scan_eval.csv"


def _plain_flagged_labels() -> list[str]:
    out = []
    with EVAL.open(encoding="utf-8", newline="") as fh:
        for row in csv.DictReader(fh):
            label = row["label"]
            if row["encoded"] == "rot13":
                label = codecs.decode(label, "rot13")
            # only simple space-separated phrases, so the rewrites below are well defined
            if row["subjects"] == "people" and label.replace(" ", "").isalpha():
                out.append(label.lower())
    return sorted(set(out))


LABELS = _plain_flagged_labels()
SCANNER = Scanner(load_lexicon(), "people")


def _key(label: str) -> list[tuple[str, str]]:
    return sorted({(f.category, f.term) for f in SCANNER.scan_label(label)})


def test_there_are_labels_to_vary():
    assert len(LABELS) > 100


@settings(max_examples=300, deadline=None)
@given(
    label=st.sampled_from(LABELS),
    sep=st.sampled_from(["_", "-", " ", "camel"]),
    upper=st.booleans(),
    prefix=st.sampled_from(["", "people/", "n04567_", "12:", "tags > "]),
)
def test_writing_style_does_not_change_findings(label, sep, upper, prefix):
    words = label.split()
    if sep == "camel":
        styled = "".join(w.capitalize() for w in words)
    else:
        styled = sep.join(words)
    if upper and sep != "camel":
        styled = styled.upper()
    assert _key(prefix + styled) == _key(label)


@pytest.mark.parametrize("label", LABELS[:50])
def test_a_synonym_list_finds_what_its_parts_find(label):
    combined = _key(f"{label}, dog")
    assert combined == sorted(set(_key(label)) | set(_key("dog")))
