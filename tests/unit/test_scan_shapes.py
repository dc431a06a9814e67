"""The scanner's shared path against its per-segment path.

The shared path (the default) matches each distinct spelling of a segment once and builds a
label's findings once per shape, the tokens of each of its segments, copying them for every
label of that shape ("people/quay_13/cowman_818174", "people/quay_7/cowman_20"). The
per-segment path, which subclasses with their own segment rules use, matches every segment of
every label on its own. Both must give the same findings, every field, in the same order.

Labels: the bundled sample sets' taxonomies and annotations, and every term, variant,
suggestion and exception of the shipped lexicons, written under paths, with id prefixes and
numbered leaves, in other cases, with other separators, and with modifiers and gender words
in front. (Refactoring equivalence between two code paths; common practice, no source.)
"""

from __future__ import annotations

import dataclasses

import pytest

from labelreview._resources import sample_sets_dir
from labelreview.dataset import load_dataset
from labelreview.lexicon import load_lexicon
from labelreview.model import Finding
from labelreview.scan import Scanner
from labelreview.textscan import ProseScanner

LEXICON = load_lexicon()

PREFIXES = ("", "people/", "people/quay_13/", "objects/", "animals > dogs > ", "a::", "Staff, ")
FRONTS = ("", "male ", "lazy ", "the ", "old ", "lady ")
TAILS = ("", "_818174", " on duty", " sitting", "'s carry", " shark", " and dog", " building")


def _words() -> list[str]:
    words: set[str] = set()
    for term in LEXICON.terms:
        words.update([term.term, *term.variants, *term.suggestions, *term.exceptions])
    for folder in sorted(sample_sets_dir().iterdir()):
        if (folder / "labelreview.yaml").exists():
            dataset = load_dataset(folder)
            words.update(t.name for t in dataset.taxonomy)
            if dataset.annotations is not None:
                words.update(dataset.annotations["label"].astype(str))
    return sorted(words)


def _labels() -> list[str]:
    """Each word several ways, chosen by its position (deterministic), plus a few odd ones."""
    out: list[str] = []
    for i, word in enumerate(_words()):
        prefix = PREFIXES[i % len(PREFIXES)]
        front = FRONTS[(i // len(PREFIXES)) % len(FRONTS)]
        tail = TAILS[(i // 3) % len(TAILS)]
        label = f"{prefix}{front}{word}{tail}"
        camel = "".join(part[:1].upper() + part[1:] for part in label.split(" "))
        out += [word, label, label.replace(" ", "_"), camel, label.upper(), f"n0{i}_{word}"]
        if len(word) > 5:  # misspelt and obfuscated forms reach the fuzzy stage
            out += [f"people/{word[:2]}{word[3]}{word[2]}{word[4:]}", f"people/{word}{word[-1]}"]
    return [*out, "", "  ", "/", "Naïve CAFÉ worker", "people/fireman's carry", "house wife"]


LABELS = _labels()


def _per_segment(subjects: str) -> Scanner:
    scanner = Scanner(LEXICON, subjects)
    scanner._hits_follow_tokens = False  # the path a subclass with its own segment rules takes
    return scanner


@pytest.mark.parametrize("subjects", ["people", "mixed", "none"])
def test_shared_path_gives_the_per_segment_findings(subjects: str):
    shared = Scanner(LEXICON, subjects)
    found = shared.scan(LABELS)
    assert found == _per_segment(subjects).scan(LABELS)
    # not a vacuous comparison: many findings, and labels that share their shapes
    assert len(found) > 2_000
    assert len(shared._shape_cache) < len(dict.fromkeys(LABELS))


def test_label_by_label_gives_the_batch_findings():
    sample = LABELS[::7]
    batch = Scanner(LEXICON, "people").scan(sample)
    one = Scanner(LEXICON, "people")
    other = _per_segment("people")
    by_label = [f for label in dict.fromkeys(sample) for f in one.scan_label(label)]
    assert by_label == batch
    assert [f for label in dict.fromkeys(sample) for f in other.scan_label(label)] == batch


def test_labels_of_one_shape_share_their_findings_but_not_their_label():
    scanner = Scanner(LEXICON, "people")
    labels = ["people/quay_13/cowman_818174", "People > Quay > Cowman", "people/quay_7/cowman_20"]
    found = scanner.scan(labels)
    assert [f.label for f in found] == labels
    blanked = {dataclasses.replace(f, label="") for f in found}
    assert len(blanked) == 1
    (finding,) = blanked
    assert finding.term == "cowman" and finding.tokens == ("people", "quay", "cowman")
    assert len(scanner._shape_cache) == 1


def test_for_label_copies_every_other_field():
    (finding,) = Scanner(LEXICON, "people").scan_label("people/roles/Firemen")
    copy = finding.for_label("staff/firemen")
    assert copy.label == "staff/firemen"
    assert dataclasses.replace(copy, label=finding.label) == finding
    assert [f.name for f in dataclasses.fields(Finding)][0] == "label"


def test_subclasses_with_their_own_segment_rules_share_nothing_by_tokens():
    class Plain(Scanner):
        pass

    class OwnRule(Scanner):
        def _speaks_of_person(self, hit, tokens, hits):  # noqa: ANN001, ANN202
            return True

    class SaysSo(OwnRule):
        _hits_follow_tokens = True

    assert Scanner._hits_follow_tokens and Plain._hits_follow_tokens
    assert not OwnRule._hits_follow_tokens
    assert SaysSo._hits_follow_tokens
    # prose rules read capitals off the text: "Baker Street" is a name, "baker street" is not
    assert not ProseScanner._hits_follow_tokens
