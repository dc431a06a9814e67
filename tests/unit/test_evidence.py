"""What the data shows about a label (labelreview.evidence), checked against independent readings
of the same files: the csv module for counts and example items, nltk's AnnotationTask for the
per-label alpha (present / absent data, as in tests/unit/test_agreement_reference.py)."""

from __future__ import annotations

import csv
from dataclasses import replace

import pytest
from nltk.metrics.agreement import AnnotationTask

from labelreview._resources import sample_sets_dir
from labelreview.config import AgreementConfig
from labelreview.dataset import load_dataset
from labelreview.evidence import gather_evidence, label_agreement

SAMPLE = sample_sets_dir() / "harbour_archive"
LABELS = ("people/roles/cleaning_lady", "people/roles/fisher", "people/status/vagrant")


@pytest.fixture(scope="module")
def dataset():
    return load_dataset(SAMPLE)


def read_csv(name: str) -> list[dict[str, str]]:
    with open(SAMPLE / name, newline="", encoding="utf-8") as handle:
        return list(csv.DictReader(handle))


def test_annotator_counts_and_examples_match_a_plain_reading(dataset):
    rows = read_csv("annotations.csv")  # photo_id, volunteer, tag (see labelreview.yaml)
    items = {r["photo_id"]: r for r in read_csv("items.csv")}
    evidence = gather_evidence(dataset, LABELS, per_label=4)
    assert set(evidence.annotators) == set(LABELS)
    for label in LABELS:
        volunteers = {r["volunteer"] for r in rows if r["tag"] == label}
        assert evidence.annotator_count(label) == len(volunteers)
        first: list[str] = []
        for r in rows:
            if r["tag"] == label and r["photo_id"] not in first:
                first.append(r["photo_id"])
        examples = evidence.examples(label)
        assert [e.item for e in examples] == first[:4]
        for example in examples:
            assert example.text == items[example.item]["caption"]
            assert example.preview == items[example.item]["image_file"]
    assert evidence.examples("no/such/label") == []
    assert evidence.annotator_count("no/such/label") == 0


def test_examples_without_an_item_table(dataset):
    bare = replace(dataset, items=None)
    examples = gather_evidence(bare, LABELS[:1]).examples(LABELS[0])
    assert examples and all(e.text is None and e.preview is None for e in examples)


def test_per_label_alpha_matches_nltk_on_present_absent_data(dataset):
    by_label, note = label_agreement(dataset)
    assert note is None
    frame = dataset.annotations
    sets = frame.groupby(["annotator", "item"])["label"].apply(frozenset)
    triples = [(a, i, s) for (a, i), s in sets.items()]
    checked = 0
    for label in LABELS:
        entry = by_label[label]
        if entry.alpha is None:
            continue
        binary = [(a, i, label in s) for a, i, s in triples]
        assert entry.alpha == pytest.approx(AnnotationTask(binary).alpha(), abs=1e-10)
        checked += 1
    assert checked >= 2


def test_interpretation_words_follow_the_dataset_config(dataset):
    strict = replace(
        dataset, config=replace(dataset.config, agreement=AgreementConfig(reliable=0.95))
    )
    by_label, _ = label_agreement(strict)
    fisher = by_label["people/roles/fisher"]
    assert fisher.alpha is not None and 0.667 <= fisher.alpha < 0.95
    assert fisher.interpretation == "tentative"


def test_undefined_agreement_says_why(dataset):
    one = dataset.annotations[dataset.annotations["annotator"] == "gannet"]
    by_label, note = label_agreement(replace(dataset, annotations=one))
    assert by_label == {} and note == "fewer than two annotators, so agreement is undefined"
    by_label, note = label_agreement(replace(dataset, annotations=None))
    assert by_label == {} and note == "no annotations"
