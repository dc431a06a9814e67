"""Lexicon loading, layering, validation messages and the content hash.

The fixture lexicons in tests/data/lexicon are invented for testing the mechanics only.
"""

from __future__ import annotations

import codecs
import shutil
from pathlib import Path

import pytest

from labelreview.errors import LexiconError
from labelreview.lexicon import collect_problems, load_lexicon
from labelreview.model import BASE_CATEGORIES
from labelreview.scan import Scanner, validate_lexicon

DATA = Path(__file__).parent.parent / "data" / "lexicon"
BASE = DATA / "base"


def _terms(lex):
    return {t.term: t for t in lex.terms}


def test_base_folder_loads_with_sources_and_rot13():
    lex = load_lexicon(base=BASE)
    terms = _terms(lex)
    assert set(lex.categories) == {
        "character_judgement",
        "gendered_term",
        "occupation_from_appearance",
        "slur_or_derogatory",
    }
    # ROT13 entries are decoded on load (the file keeps them out of plain sight).
    assert codecs.encode("fyhg", "rot13") in terms
    assert terms["lazy"].source.endswith("tiny_base.yaml:17")
    assert terms["lazy"].severity == "high"  # inherited from the category
    assert terms["fireman"].severity == "low"


@pytest.mark.parametrize(
    ("fixture", "message"),
    [
        ("unknown_key.yaml", r"unknown_key\.yaml line 5: unknown key 'colour' in term"),
        (
            "missing_category.yaml",
            r"missing_category\.yaml line 3: entry 'plumber' has no "
            r"'category'\. Add one of: character_judgement",
        ),
        (
            "bad_severity.yaml",
            r"bad_severity\.yaml line 5: entry 'idle' has severity 'extreme'; "
            r"use one of: low, medium, high",
        ),
        (
            "two_categories.yaml",
            r"term 'lazy' is already in category 'character_judgement' at "
            r".*tiny_base\.yaml:17",
        ),
        ("broken_yaml.yaml", r"broken_yaml\.yaml line 5: not valid YAML: expected .,. or .\]."),
        ("disable_unknown.yaml", r"disable_terms names 'astronaut', which no earlier layer"),
    ],
)
def test_problems_name_file_and_line(fixture, message):
    with pytest.raises(LexiconError, match=message):
        load_lexicon([DATA / fixture], base=BASE)


def test_collect_problems_lists_every_problem():
    lex, problems = collect_problems(
        [DATA / "unknown_key.yaml", DATA / "bad_severity.yaml"], base=BASE
    )
    assert lex is None
    assert len([p for p in problems if p.level == "error"]) == 2


def test_suggestion_that_is_itself_flagged_is_an_error():
    lex, problems = validate_lexicon([DATA / "flagged_suggestion.yaml"], base=BASE)
    assert lex is None
    assert any(
        "suggestion 'lazy person' for 'slacker' is itself flagged (character_judgement, term "
        "'lazy')" in p.message
        for p in problems
    )


def test_layers_disable_add_exceptions_and_allow_labels():
    lex = load_lexicon([DATA / "org_layer.yaml"], base=BASE)
    terms = _terms(lex)
    assert "nurse" not in terms
    assert "idle" in terms
    assert "lazy eye" in terms["lazy"].exceptions
    scanner = Scanner(lex, "people")
    assert scanner.scan_label("nurse") == []
    assert scanner.scan_label("lazy eye") == []
    assert scanner.scan_label("Thug Life Poster") == []
    assert [f.term for f in scanner.scan_label("thug")] == ["thug"]


def test_content_hash_ignores_comments_but_not_content(tmp_path):
    base = tmp_path / "base"
    shutil.copytree(BASE, base)
    first = load_lexicon(base=base).content_hash
    path = base / "tiny_base.yaml"
    path.write_text("# a new comment line\n" + path.read_text(encoding="utf-8"), encoding="utf-8")
    assert load_lexicon(base=base).content_hash == first
    path.write_text(
        path.read_text(encoding="utf-8").replace("[resting]", "[relaxing]"), encoding="utf-8"
    )
    assert load_lexicon(base=base).content_hash != first
    assert first.startswith("sha256:") and len(first) == len("sha256:") + 64


def test_missing_file_and_bad_encoding(tmp_path):
    with pytest.raises(LexiconError, match=r"nope\.yaml: lexicon file not found"):
        load_lexicon([tmp_path / "nope.yaml"], base=BASE)
    bad = tmp_path / "latin1.yaml"
    bad.write_bytes("terms:\n  - term: na\xefve\n".encode("latin-1"))
    with pytest.raises(LexiconError, match=r"latin1\.yaml: not valid UTF-8"):
        load_lexicon([bad], base=BASE)


def test_shipped_set_validates_without_errors():
    lex, problems = validate_lexicon()
    errors = [str(p) for p in problems if p.level == "error"]
    assert errors == []
    assert lex is not None
    required = set(BASE_CATEGORIES)
    assert required <= set(lex.categories)
    by_category = {c: sum(1 for t in lex.terms if t.category == c) for c in required}
    # "Hundreds of terms, not a dozen" (the issue): every category carries a real list.
    assert sum(by_category.values()) >= 500
    assert min(by_category.values()) >= 20, by_category


# -- reading speed paths: same content ---------------------------------------------------------


@pytest.mark.parametrize(
    "path", sorted((Path(__file__).parents[2] / "lexicons" / "base").glob("*.yaml")), ids=str
)
def test_read_yaml_matches_pyyaml_safe_load(path):
    # PyYAML's own pure-Python SafeLoader is the reference: our node walk (libyaml composer,
    # text scalars taken directly, line numbers kept on the side) must give the same data.
    import yaml

    from labelreview.lexicon import _read_yaml

    reference = yaml.load(path.read_text(encoding="utf-8-sig"), Loader=yaml.SafeLoader)
    assert _read_yaml(path) == reference


def test_text_scalars_taken_directly_give_the_same_lexicon(monkeypatch):
    import labelreview.lexicon as lexicon

    direct = load_lexicon()
    monkeypatch.setattr(lexicon, "_STR_TAG", "(never a tag)")  # every scalar via PyYAML
    constructed = load_lexicon()
    assert direct == constructed
    assert direct.content_hash == constructed.content_hash


def test_loading_keeps_no_yaml_nodes_alive():
    # A PyYAML constructor remembers every node it built (for aliases); one shared by all loads
    # kept each load's 29,000 nodes, with their position marks, alive for the whole process.
    import gc

    import yaml

    def nodes_alive() -> int:
        gc.collect()
        return sum(isinstance(o, yaml.nodes.Node) for o in gc.get_objects())

    before = nodes_alive()
    load_lexicon()
    assert nodes_alive() == before


def test_loading_restores_the_garbage_collector():
    import gc

    assert gc.isenabled()
    load_lexicon()
    assert gc.isenabled()
    with pytest.raises(LexiconError):
        load_lexicon(base=Path("/nonexistent/lexicons"))
    assert gc.isenabled()
