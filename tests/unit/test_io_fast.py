"""The loaders' fast paths give exactly what the careful per-row readers give.

The taxonomy reader first tries a column-wise pass (``_csv_fast``, ``_text_fast``) and falls
back to the careful per-row reader whenever that pass declines (returns None). These tests run
both on the same files: where the fast pass accepts a file its labels must equal the careful
reader's, and on malformed input it must decline, so that the error (file, line, column) is the
careful reader's own. The messages pinned below are the ones the careful reader gave before the
fast path existed (checked against the previous commit's code).

The last section covers the shortcuts in the table readers (the empty-file test without a
copy, quote-free files split at every line break).

CSV cases follow RFC 4180 section 2 (quoted fields holding commas, doubled quotes and line
breaks; CRLF record ends); the byte order mark case follows RFC 3629 section 6.
"""

from __future__ import annotations

import re
import tempfile
from collections.abc import Callable
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from labelreview.errors import LoadError
from labelreview.io import _taxonomy, load_annotations, load_taxonomy
from labelreview.io._common import decode, read_bytes
from labelreview.model import TaxonomyLabel

ROOT = Path(__file__).resolve().parents[2]
DATA = ROOT / "tests" / "data" / "io"


def fast(path: Path, encoding: str | None = None) -> list[TaxonomyLabel] | None:
    """The fast pass alone, dispatched as load_taxonomy does."""
    text = decode(path, read_bytes(path), encoding)
    fmt = _taxonomy.detect_taxonomy_format(path)
    if fmt == "text":
        return _taxonomy._text_fast(text)
    return _taxonomy._csv_fast(path, text, "," if fmt == "csv" else "\t")


def outcome(load: Callable[[], list[TaxonomyLabel]]) -> list[TaxonomyLabel] | str:
    """The labels, or the error's full text."""
    try:
        return load()
    except LoadError as exc:
        return str(exc)


def careful(
    path: Path, monkeypatch: pytest.MonkeyPatch, encoding: str | None = None
) -> list[TaxonomyLabel]:
    """load_taxonomy with the fast pass switched off."""
    with monkeypatch.context() as patch:
        patch.setattr(_taxonomy, "_csv_fast", lambda *args: None)
        patch.setattr(_taxonomy, "_text_fast", lambda *args: None)
        return load_taxonomy(path, encoding=encoding)


# -- accepted input: the same labels -----------------------------------------------------------

ACCEPTED: dict[str, str | bytes] = {
    "plain.csv": "name\nvessels\nvessels/boat\n",
    # RFC 4180 section 2, rules 5-7: quoted fields with a comma, doubled quotes, a line break.
    "quoted.csv": 'id,name,description\n1,vessels,"Things that float, mostly"\n'
    '2,"vessels/boat","A ""small"" one"\n3,vessels/raft,"two\nlines"\n',
    "bom.csv": b"\xef\xbb\xbfid,name\n1,vessels\n2,vessels/boat\n",
    "crlf.csv": "name,description\r\nvessels,x\r\nvessels/boat,\r\n",
    "lone_cr.csv": "name\rvessels\rvessels/boat\r",
    "no_final_newline.csv": "name\nvessels\nvessels/boat",
    "extra_columns.csv": "name,colour,notes\nvessels,blue,\nvessels/boat,red,n\n",
    "spaced_slashes.csv": "name\n people / roles /x \nvessels/ boat\nvessels /ship\n"
    "vessels\u00a0/\u3000raft\n",
    "quoted_tab_by_slash.csv": 'name\n"vessels\t/boat"\n"a /\nb"\n',
    "duplicate_names.csv": "id,name,description\n1,vessels,first\n2,vessels,second\n"
    "3, vessels ,third\n4,vessels/ boat,\n5,vessels/boat,later\n",
    "blank_lines.csv": "name\n\nvessels\n\n\nvessels/boat\n",
    "header_aliases.csv": " Label_ID ,Label,Definition\nt1,vessels,Things that float\n",
    "empty_parents.csv": "id,name,parent\n1,a,\n2,a/b,\n",
    "blank_description.csv": "name,description\nvessels,   \n",
    "trailing_delimiter.csv": "name,\nvessels,\nvessels/boat,\n",
    "tabs.tsv": "name\tdescription\nvessels\tthings, that float\nvessels / boat\t\n",
    "plain.txt": "# comment\n\nvessels\n vessels / ship \nvessels/boat\nvessels/boat\n",
    "line_separators.txt": "a\u2028b\x0cc\x1cd\r\ne\n",
    "hash_inside.txt": "vessels#1\n  # indented comment\nvessels#1/boat\n",
}


@pytest.mark.parametrize("name", sorted(ACCEPTED))
def test_fast_path_accepts_and_matches_careful(
    name: str, tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    path = tmp_path / name
    content = ACCEPTED[name]
    if isinstance(content, bytes):
        path.write_bytes(content)
    else:
        path.write_bytes(content.encode("utf-8"))
    got = fast(path)
    assert got is not None, "the fast pass should handle this file"
    assert got == careful(path, monkeypatch)
    assert load_taxonomy(path) == got


def test_spaced_slashes_are_cleaned(tmp_path: Path) -> None:
    path = tmp_path / "t.csv"
    path.write_text(ACCEPTED["spaced_slashes.csv"], encoding="utf-8")  # type: ignore[arg-type]
    assert [label.name for label in load_taxonomy(path)] == [
        "people/roles/x",
        "vessels/boat",
        "vessels/ship",
        "vessels/raft",  # no-break space and ideographic space are whitespace to str.strip
    ]


def test_duplicate_names_keep_the_first(tmp_path: Path) -> None:
    path = tmp_path / "t.csv"
    path.write_text(ACCEPTED["duplicate_names.csv"], encoding="utf-8")  # type: ignore[arg-type]
    assert load_taxonomy(path) == [
        TaxonomyLabel("vessels", id="1", description="first"),
        TaxonomyLabel("vessels/boat", id="4", parent="vessels"),
    ]


def test_other_encoding(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    path = tmp_path / "t.csv"
    path.write_bytes("name\ncafé/table\n".encode("latin-1"))
    got = fast(path, "latin-1")
    assert (
        got == careful(path, monkeypatch, "latin-1") == [TaxonomyLabel("café/table", parent="café")]
    )


@pytest.mark.parametrize(
    "path",
    sorted(ROOT.glob("sample_sets/*/taxonomy.*")) + sorted(DATA.glob("taxonomy*.[ct][sx][vt]")),
    ids=lambda p: f"{p.parent.name}/{p.name}",
)
def test_bundled_files(path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    expected = outcome(lambda: careful(path, monkeypatch))
    got = fast(path)
    if got is None:
        # Parent links (harbour_archive, the io fixtures) are resolved by the careful reader.
        assert "parent" in path.read_text(encoding="utf-8").splitlines()[0]
    else:
        assert got == expected
    assert outcome(lambda: load_taxonomy(path)) == expected


def test_plain_sample_set_takes_the_fast_path() -> None:
    path = ROOT / "sample_sets" / "plaza_study" / "taxonomy.txt"
    assert fast(path) is not None


# -- malformed input: the careful reader's message ---------------------------------------------

MALFORMED: dict[str, tuple[str, str]] = {
    "t.txt": (
        "boats\nboats//dinghy\n",
        "t.txt line 2: the label 'boats//dinghy' has an empty part between slashes",
    ),
    "lead.txt": (
        "vessels\n/ boat\n",
        "lead.txt line 2: the label '/ boat' has an empty part between slashes",
    ),
    "long.txt": (
        "vessels\n" + "y" * 10_001 + "\n",
        "long.txt line 2: a label is 10,001 characters long (more than 10,000)",
    ),
    "lead.csv": (
        "name\nvessels\n/boat\n",
        "lead.csv line 3, column 'name': the label '/boat' has an empty part between slashes",
    ),
    "trail.csv": (
        "id,name\n1,vessels\n2,vessels/boat/ \n",
        "trail.csv line 3, column 'name': the label 'vessels/boat/' has an empty part "
        "between slashes",
    ),
    "noname.csv": (
        "name,id\nvessels,1\n,2\n",
        "noname.csv line 3, column 'name': a row has no name",
    ),
    "blankrow.csv": (
        "name\nvessels\n   \n",
        "blankrow.csv line 3, column 'name': a row has no name",
    ),
    "width.csv": (
        "name,description\nvessels,x\nvessels/boat\n",
        "width.csv line 3: this row has 1 fields but the header has 2",
    ),
    "quote.csv": (
        'name\nvessels\n"vessels/boat"x\n',
        "quote.csv line 3: malformed CSV: ',' expected after '\"'",
    ),
    "dupid.csv": (
        "id,name\n1,a\n1,b\n",
        "dupid.csv line 3, column 'id': id '1' is used twice (lines 2 and 3)",
    ),
    "long.csv": (
        "name\n" + "x" * 10_001 + "\n",
        "long.csv line 2, column 'name': a label is 10,001 characters long (more than 10,000)",
    ),
    "nonamecol.csv": (
        "id,colour\n1,x\n",
        "nonamecol.csv line 1: the taxonomy has no 'name' column; columns found: 'id', 'colour'",
    ),
    "twoname.csv": (
        "name,Name\na,b\n",
        "twoname.csv line 1: columns 'name', 'Name' could each be the taxonomy's name column",
    ),
    "parent.csv": (
        "id,name,parent\n1,a,\n2,b,9\n",
        "parent.csv line 3, column 'parent': parent '9' is neither an id nor a name in this "
        "taxonomy",
    ),
    "header_only.csv": ("name\n", "header_only.csv: the taxonomy holds no labels"),
}


@pytest.mark.parametrize("name", sorted(MALFORMED))
def test_malformed_input_gets_the_careful_message(
    name: str, tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    content, message = MALFORMED[name]
    monkeypatch.chdir(tmp_path)  # messages name the file as given
    path = Path(name)
    path.write_text(content, encoding="utf-8")
    assert fast(path) is None
    with pytest.raises(LoadError, match=re.escape(message)):
        load_taxonomy(path)


# -- the whitespace rule the fast pass relies on -----------------------------------------------


def test_regex_whitespace_is_what_strip_removes() -> None:
    # Python documents both in terms of Unicode whitespace (re: "\s ... matches Unicode
    # whitespace characters"; str.strip/str.isspace); the fast pass needs them to be the very
    # same set, so check it on every code point of the running Python.
    everything = "".join(map(chr, range(0x110000)))
    by_regex = set(re.findall(r"\s", everything))
    by_strip = {c for c in everything if not c.strip()}
    assert by_regex == by_strip == {c for c in everything if c.isspace()}
    assert len(by_regex) == 29  # Unicode White_Space plus the ASCII separators \x1c-\x1f


# -- random input: the fast pass either declines or agrees -------------------------------------

TRICKY = st.text(alphabet=list('ab/ \t\u00a0,"#\n\r'), max_size=8)  # often malformed
FRIENDLY = st.text(alphabet=list("abé/ \u3000"), min_size=1, max_size=8)  # often well formed
CELLS = st.one_of(st.lists(FRIENDLY, max_size=8), st.lists(st.one_of(TRICKY, FRIENDLY), max_size=8))


@settings(max_examples=300, deadline=None)
@given(
    header=st.sampled_from(["name", "id,name", "name,description", "name,parent", "Label"]),
    cells=CELLS,
    text_format=st.booleans(),
)
def test_random_files(header: str, cells: list[str], text_format: bool) -> None:
    with tempfile.TemporaryDirectory() as folder:
        if text_format:
            path = Path(folder) / "t.txt"
            path.write_text("\n".join(cells), encoding="utf-8")
        else:
            path = Path(folder) / "t.csv"
            path.write_text(header + "\n" + "\n".join(cells), encoding="utf-8")
        if not path.read_bytes().strip():
            return  # an empty file is refused before either pass runs
        with pytest.MonkeyPatch.context() as patch:
            expected = outcome(lambda: careful(path, patch))
        got = fast(path)
        if got is not None:
            assert got == expected
        assert outcome(lambda: load_taxonomy(path)) == expected


# -- annotation and item files: the reading shortcuts ------------------------------------------


@pytest.mark.parametrize("content", [b" ", b" \t\r\n\x0b\x0c\n"], ids=["space", "ascii_blanks"])
def test_blank_files_are_empty(content: bytes, tmp_path: Path) -> None:
    # bytes.isspace and bytes.strip both use ASCII whitespace (Python docs, bytes methods).
    path = tmp_path / "a.csv"
    path.write_bytes(content)
    with pytest.raises(LoadError, match=r"a\.csv: the file is empty"):
        load_annotations(path)


def test_non_ascii_blank_is_not_empty(tmp_path: Path) -> None:
    path = tmp_path / "a.csv"
    path.write_bytes("\u00a0\n".encode())  # a no-break space is content to the byte check
    with pytest.raises(LoadError) as caught:
        load_annotations(path)
    assert "the file is empty" not in str(caught.value)


def test_quoted_and_unquoted_files_read_alike(tmp_path: Path) -> None:
    # Without any quote the reader splits rows at every line break (no line break can be
    # inside a value, RFC 4180 section 2); with quotes it must keep quoted line breaks.
    plain = tmp_path / "plain.csv"
    plain.write_text("item,annotator,label\np1,a1,boat\np2,a1,rope coil\r\np3,a2,hull\n")
    quoted = tmp_path / "quoted.csv"
    quoted.write_text(
        '"item","annotator","label"\n"p1","a1","boat"\np2,a1,"rope coil"\r\np3,a2,hull\n'
    )
    multiline = tmp_path / "multiline.csv"
    multiline.write_text('item,annotator,label\np1,a1,boat\np2,a1,"rope\ncoil"\np3,a2,hull\n')
    frame, _ = load_annotations(plain)
    assert frame.equals(load_annotations(quoted)[0])
    assert list(load_annotations(multiline)[0]["label"]) == ["boat", "rope\ncoil", "hull"]
