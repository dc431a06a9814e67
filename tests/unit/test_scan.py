"""Scanner mechanics on a tiny invented lexicon: normalisation, boundaries, position rules,
exceptions, subjects, fuzzy matching, and the shape of a finding."""

from __future__ import annotations

import codecs
from pathlib import Path

import pytest

from labelreview.errors import UsageError
from labelreview.lexicon import load_lexicon
from labelreview.scan import Scanner
from labelreview.text import fold, split_segments, term_tokens, tokenize

BASE = Path(__file__).parent.parent / "data" / "lexicon" / "base"
SLUR = codecs.decode("fyhg", "rot13")


@pytest.fixture(scope="module")
def lex():
    return load_lexicon(base=BASE)


@pytest.fixture(scope="module")
def people(lex):
    return Scanner(lex, "people")


def flagged(scanner, label):
    return sorted({f.term for f in scanner.scan_label(label)})


# -- normalisation -----------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("label", "tokens"),
    [
        ("LazyWorker", ("lazy", "worker")),
        ("lazy_worker", ("lazy", "worker")),
        ("lazy-worker", ("lazy", "worker")),
        ("n04567_LAZY worker", ("lazy", "worker")),
        ("12:lazy", ("lazy",)),
        ("cowman_818174", ("cowman",)),
        ("4x4_driver", ("4x4", "driver")),
        ("Ｌａｚｙ", ("lazy",)),  # full-width letters: NFKC
        ("Naïve", ("naive",)),
        ("HTMLPage", ("html", "page")),
        ("fireman's carry", ("fireman", "carry")),
    ],
)
def test_tokens(label, tokens):
    assert term_tokens(label) == tokens


def test_segments_and_possessive():
    assert split_segments("people/roles/fireman, firefighter; cook") == [
        "people",
        "roles",
        "fireman",
        "firefighter",
        "cook",
    ]
    assert [t.possessive for t in tokenize("fireman's carry")] == [True, False]
    assert fold("ÉCOLE") == "ecole"


# -- matching ----------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("label", "terms"),
    [
        ("lazy", ["lazy"]),
        ("people/roles/lazy", ["lazy"]),
        ("LazyMan", ["lazy"]),
        ("lazy nurse", ["lazy", "nurse"]),
        ("laziest", ["lazy"]),
        ("suspicious-looking, lazy", ["lazy"]),
        ("firemen", ["fireman"]),
        ("Firemen on duty", ["fireman"]),
        ("nurses", ["nurse"]),
        ("drug dealers", ["drug dealer"]),
        ("night nurse", ["nurse"]),
        # token boundaries: "cookie" is not "cook", "thugs" is a plural of "thug"
        ("cookie", []),
        ("cookware", []),
        ("thugs", ["thug"]),
        # position rules: a noun must head its segment, a modifier must describe a person
        ("nurse shark", []),
        ("fireman's carry", []),
        ("lazy river", []),
        ("lazy dog", []),
        # exceptions
        ("Lazy Susan", []),
        ("lazy susan turntable", []),
    ],
)
def test_matching(people, label, terms):
    assert flagged(people, label) == terms


@pytest.mark.parametrize(
    ("label", "term", "kind"),
    [
        ("l4zy", "lazy", "fuzzy"),  # digits for letters
        ("lazzy", "lazy", "fuzzy"),  # doubled letters
        ("thuggg", "thug", "fuzzy"),
        ("prostitue", "prostitute", "fuzzy"),  # misspelling, rapidfuzz ratio >= threshold
        ("firemen", "fireman", "variant"),
        ("lazy", "lazy", "exact"),
    ],
)
def test_match_kinds(people, label, term, kind):
    (finding,) = people.scan_label(label)
    assert (finding.term, finding.match) == (term, kind)
    if kind == "fuzzy":
        assert 0 < finding.score < 100
    else:
        assert finding.score == 100


def test_real_words_are_not_fuzzy_matched(people):
    # "cooks" would be a plural; "crook" / "nursery" are ordinary words near lexicon terms.
    assert flagged(people, "nursery") == []
    assert flagged(people, "crook") == []


def test_subjects_none_keeps_only_always_terms(lex):
    scanner = Scanner(lex, "none")
    assert flagged(scanner, "lazy nurse") == []
    assert flagged(scanner, "thug") == ["thug"]
    assert flagged(scanner, SLUR + " poster") == [SLUR]  # slurs fire anywhere


def test_gender_marker_on_an_occupation(people):
    cats = sorted(f.category for f in people.scan_label("male nurse"))
    assert cats == ["gendered_term", "occupation_from_appearance"]


def test_finding_fields(people):
    (finding,) = people.scan_label("people/roles/Firemen")
    assert finding.label == "people/roles/Firemen"
    assert finding.category == "gendered_term"
    assert finding.severity == "low"
    assert finding.tokens == ("people", "roles", "firemen")
    assert finding.span == (2, 3)
    assert finding.matched == "firemen"
    assert finding.suggestions == ("firefighter",)
    assert finding.reason == (
        "The label contains 'firemen', a form of 'fireman' (gendered role word): gives a gender "
        "where a neutral word exists."
    )
    assert finding.source.endswith("tiny_base.yaml:23")
    assert finding.to_dict()["span"] == [2, 3]


def test_scan_dedupes_labels(people):
    findings = people.scan(["lazy", "lazy", "nurse"])
    assert [f.label for f in findings] == ["lazy", "nurse"]


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"subjects": "some"}, r"The 'subjects' parameter must be one of people, mixed, none"),
        ({"fuzzy_threshold": 0}, r"The 'fuzzy_threshold' parameter must be in \(0, 100\]"),
        ({"fuzzy_min_length": 0}, r"The 'fuzzy_min_length' parameter must be at least 1"),
    ],
)
def test_bad_parameters(lex, kwargs, message):
    with pytest.raises(UsageError, match=message):
        Scanner(lex, **kwargs)
