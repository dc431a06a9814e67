"""The free-text scan: prose position rules, the vocabulary prefilter (it must never drop a row
the full matcher would flag), additive sums, and where text columns are found.

The prose sentences below are the project's own invented examples; the rules they pin are
common practice, no source (written down in labelreview/textscan.py)."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from labelreview.config import load_config
from labelreview.errors import UsageError
from labelreview.lexicon import load_lexicon
from labelreview.textscan import (
    TextScanner,
    TextSums,
    scan_text_sources,
    text_result,
    text_sources,
)


@pytest.fixture(scope="module")
def scanner() -> TextScanner:
    return TextScanner(load_lexicon(), "people")


def terms(scanner: TextScanner, text: str) -> set[str]:
    return {h.term for h in scanner.scanner.scan_text(text)}


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        ("A nurse walks the dog along the quay.", {"nurse"}),
        ("The cook stands by the stove.", {"cook"}),
        ("A beggar sitting on the steps.", {"beggar"}),
        ("A male nurse and a fireman.", {"nurse", "male + occupation", "fireman"}),
        ("The man looked lazy and poor.", {"lazy", "poor"}),
        ("An old man with a poor family.", {"old", "poor"}),
        ("she is very lazy", {"lazy"}),
        ("Portrait of a LazyWorker", {"lazy"}),
        ("A Nurse With A Dog", {"nurse"}),  # title case: capitals say nothing
        ("THE NURSE WALKS HOME", {"nurse"}),
        ("A l4zy worker by the nets.", {"lazy"}),  # obfuscated: the fuzzy stage
    ],
)
def test_prose_that_speaks_of_people_is_flagged(scanner, text, expected):
    assert terms(scanner, text) == expected


@pytest.mark.parametrize(
    "text",
    [
        "A nurse shark in the aquarium.",  # the next word names a thing
        "Police car parked by the quay.",
        "She cooks fish for the family.",  # a verb after a person word
        "He wants to cook dinner.",  # a verb after "to"
        "Baker Street in the fog.",  # a name, written with a capital
        "Portrait of John Smith",
        "A lazy afternoon by the river.",  # a describing word beside a thing
        "Old boats in the harbour.",
        "Poor lighting in the boatyard.",
        "A lazy susan on the table.",  # a listed exception
    ],
)
def test_prose_about_things_and_names_is_not(scanner, text):
    assert terms(scanner, text) == set()


def random_captions(n: int, seed: int) -> list[str]:
    rng = np.random.default_rng(seed)
    words = (
        "a the nurse shark lazy old man boat poor family fisherman walks sits to cook cooks "
        "Baker street fireman's helmet house wife l4zy beggar café Naïve on by and, . LazyWorker "
        "drunkard 12 n04567 thuggg police car she he looked very"
    ).split()
    return [" ".join(rng.choice(words, size=rng.integers(3, 14))) for _ in range(n)]


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_the_prefilter_never_drops_a_row_with_a_hit(seed):
    # Brute force: run the full matcher on every row; the prefilter's candidates must cover
    # every row that has a hit.
    texts = random_captions(600, seed)
    fresh = TextScanner(load_lexicon(), "people")
    picked = set(fresh.candidates(pd.Series(texts)).tolist())
    brute = TextScanner(load_lexicon(), "people")
    with_hits = {i for i, t in enumerate(texts) if brute.scanner.scan_text(t)}
    assert with_hits <= picked
    assert len(picked) < len(texts)  # and it does filter


def test_batches_add_up_to_the_whole(scanner):
    texts = random_captions(500, 7)
    items = [f"i{i % 350}" for i in range(500)]
    whole = scanner.scan_batch("caption", texts, items, 1, source="items")
    parts = TextSums()
    for start in range(0, 500, 70):
        part = TextScanner(load_lexicon(), "people").scan_batch(
            "caption",
            texts[start : start + 70],
            items[start : start + 70],
            start + 1,
            source="items",
        )
        parts.merge(part)
    lexicon = scanner.lexicon
    a, b = text_result(whole, lexicon), text_result(parts, lexicon)
    assert a.findings == b.findings and a.rows == b.rows
    assert a.scanned == {"caption": 500}


def test_findings_carry_counts_forms_examples_and_labels(scanner):
    texts = ["A nurse at the quay.", "The nurses walk home.", "Boats at dawn.", "A nurrse waits."]
    sums = scanner.scan_batch("caption", texts, ["b", "a", "c", "d"], 1, source="items")
    sums.add_item_labels(pd.DataFrame({"item": ["a", "b", "b"], "label": ["x", "x", "y"]}))
    found = text_result(sums, scanner.lexicon)
    nurse = next(f for f in found.findings if f.term == "nurse")
    assert (nurse.rows, nurse.hits, nurse.items) == (3, 3, 3)
    assert set(nurse.matched) == {"nurse", "nurses", "nurrse"} and nurse.match == "exact"
    assert nurse.labels == (("x", 2), ("y", 1))
    assert [e[0] for e in nurse.examples] == ["a", "b", "d"]
    assert [r.row for r in found.rows] == [1, 2, 4]
    data = nurse.to_dict()
    assert data["kind"] == "text" and data["column"] == "caption"


def test_text_columns_are_found_in_items_then_annotations(tmp_path: Path):
    (tmp_path / "items.csv").write_text("item,caption\na,A nurse.\n", encoding="utf-8")
    (tmp_path / "annotations.csv").write_text(
        "item,annotator,label,comment\na,v1,x|y,looks lazy\na,v2,x,\n", encoding="utf-8"
    )
    (tmp_path / "labelreview.yaml").write_text(
        "version: 1\nannotations: {path: annotations.csv}\nitems: {path: items.csv}\n",
        encoding="utf-8",
    )
    config = load_config(tmp_path)
    found = text_sources(config, ["caption", "comment"])
    assert [(s.column, s.source) for s in found] == [
        ("caption", "items"),
        ("comment", "annotations"),
    ]
    sums = scan_text_sources(found, TextScanner(load_lexicon(), "people"))
    lazy = sums.terms[("comment", "character_judgement", "lazy")]
    assert lazy.labels == {"x": 1, "y": 1}  # the row's own labels, split on "|"
    with pytest.raises(UsageError, match="text column 'notes' is in neither"):
        text_sources(config, ["notes"])
