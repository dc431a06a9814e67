"""Free text (captions, descriptions, comments) scanned with the same lexicons and scanner.

Built for millions of rows: the text is tokenised with Arrow compute functions, the distinct
words are looked up once (and only the unknown ones go to the fuzzy matcher, in one batch),
and only the rows holding a word that could start a match go through the scanner's matching and
position rules in Python. Every other row is known to be clean without being looked at again.

Prose is not a label, so the position rules differ (:class:`ProseScanner`); in order:

1. Text is split into sentences (after ``.``, ``!``, ``?``) and clauses (at ``,``, ``;``,
   ``:``, brackets, quotes, slashes and dashes between spaces); each clause is matched as a
   label segment is (exact terms, variants and inflections, compounds written apart, fuzzy
   forms of unknown words).
2. A word written with a capital inside a sentence is taken for a name ("Baker Street",
   "Mrs Cooper") and not flagged; rows written mostly in capitals or title case are read as if
   in lower case.
3. A person noun (``nurse``, ``beggar``) speaks of a person unless the next word is a thing it
   names ("nurse shark", "police car"; the list :data:`THING_HEADS`, common practice, no
   source) or it is used as a verb ("she nurses a cup", "to cook": a regular -s form right
   after a pronoun or person word, or any form after ``to``, ``will``, ``can``...).
4. A describing word (``lazy``, ``poor``) speaks of a person when the next content word is a
   person word ("a lazy old man") or when it follows a person word or pronoun and a linking
   verb ("the man looked lazy", "she seemed poor"), or when it stands alone in its clause.
5. Slurs are flagged wherever they stand; listed exceptions suppress a term; a gender word
   before an occupation ("a male nurse") is flagged as a gendered term, as in labels.

Counts are additive (:class:`TextSums`), so batches, partitions and the whole file give the same
result; examples are the rows with the smallest (item, text), not the first ones read.
"""

from __future__ import annotations

import csv
import heapq
import io
import re
from collections import Counter
from collections.abc import Iterable, Iterator, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from labelreview.config import DatasetConfig
from labelreview.errors import UsageError
from labelreview.lexicon import Lexicon
from labelreview.model import SEVERITY_RANK
from labelreview.progress import ProgressCallback, ProgressEvent, tell
from labelreview.scan import (
    ANYWHERE_CATEGORIES,
    FILLERS,
    GENDER_MARKERS,
    PERSON_NOUNS,
    Scanner,
    _first_sentence,
    _Hit,
)
from labelreview.text import Token, tokenize

PRONOUNS = frozenset(
    """
he she him her his hers they them their theirs himself herself themselves someone somebody
anyone everyone nobody who whom i me we us you
""".split()
)
"""Words that stand for a person in prose (they are not in labels)."""

LINKING_VERBS = frozenset(
    """
is are was were be been being am seems seem seemed looks look looked appears appear appeared
became become becomes remains remain remained stays stay stayed feels feel felt sounds sound
sounded 's
""".split()
)
"""Verbs that join a person to a describing word: "the man is lazy"."""

_ADVERBS = frozenset("very really quite rather so too somewhat extremely fairly pretty".split())
_SKIP_TO_HEAD = FILLERS | _ADVERBS | frozenset({"and", "or", "but"})
_VERB_CUES = frozenset(
    "to will would can could shall should must may might did does do not never".split()
)

THING_HEADS = frozenset(
    """
car cars van vans truck trucks lorry lorries bus buses boat boats ship ships engine engines
station stations uniform uniforms hat hats cap caps helmet helmets badge badges office offices
shark sharks fish dog dogs horse horses costume costumes outfit outfits kit kits bag bags
school schools academy academies college department departments tape gear equipment tool tools
shop shops hall halls house houses home homes stall stalls desk desks coat coats jacket jackets
apron aprons boot boots shoe shoes book books street streets road roads lane lanes square
squares bridge bridges bay bays union unions service services training course courses job jobs
role roles duty duties fund funds day days week association
""".split()
)
"""Words after a person noun that make it name a thing: "nurse shark", "police car", "cook book".
Common practice, no source; extend it when a dataset's captions show more."""

_SENTENCE = re.compile(r"(?<=[.!?])\s+|[\r\n]+")
_CLAUSE = re.compile(r"[,;:()\[\]{}\"\u201c\u201d\u2018/\\|]+|\s[-\u2013\u2014]+\s")
_WORD = re.compile(r"[^\W_]+(?:['\u2019][^\W_]+)*['\u2019]?|[@$0-9]+")
_START = "\x02"  # marks a clause that starts a sentence (not a token character)
_PROSE_SPLIT = "[^0-9a-z@$'\u2019]+"  # RE2 syntax; the \u2019 is decoded by Python


@dataclass(frozen=True)
class TextHit:
    """One term found in one row of text."""

    category: str
    term: str
    severity: str
    surface: str
    """The words of the text that matched, normalised."""
    match: str
    score: float


class ProseScanner(Scanner):
    """The label scanner with position rules for prose (see the module docstring)."""

    def __init__(self, lexicon: Lexicon, subjects: str = "mixed", **options: Any) -> None:
        super().__init__(lexicon, subjects, **options)
        self._caps: tuple[bool, ...] = ()
        self._person_words = frozenset(self._person_tokens) | PRONOUNS

    def _match_segment(self, segment: str) -> tuple[tuple[Token, ...], tuple[_Hit, ...]]:
        cached = self._segment_cache.get(segment)
        if cached is not None:
            return cached
        self._caps = _name_flags(segment)
        return super()._match_segment(segment)

    def _speaks_of_person(self, hit: _Hit, tokens: tuple[Token, ...], hits: list[_Hit]) -> bool:
        texts = [t.text for t in tokens]
        if self._excepted(hit, texts):
            return False
        if hit.term.category in ANYWHERE_CATEGORIES:
            return True
        caps = self._caps if len(self._caps) == len(tokens) else (False,) * len(tokens)
        if any(caps[hit.start : hit.end]):
            return False  # a name: "Baker Street", "Mrs Cooper"
        before = texts[hit.start - 1] if hit.start > 0 else ""
        if hit.term.form == "noun":
            if hit.end < len(tokens) and not tokens[hit.end - 1].possessive:
                if texts[hit.end] in THING_HEADS:
                    return False
            if before in _VERB_CUES:
                return False  # "to cook", "will nurse"
            if hit.kind == "variant" and hit.surface.endswith("s") and before in self._person_words:
                return False  # "she cooks", "the man nurses": a verb
            return True
        covered = {k for h in hits for k in range(h.start, h.end)}
        others = [k for k in range(len(texts)) if not hit.start <= k < hit.end]
        if all(k in covered or texts[k] in FILLERS for k in others):
            return True  # alone in its clause
        k = hit.end
        while k < len(texts) and (k in covered or texts[k] in _SKIP_TO_HEAD):
            if k in covered and any(h.start == k and h.term.form == "noun" for h in hits):
                return True  # "a lazy beggar": the next word is a person noun itself
            k += 1
        if k < len(texts) and texts[k] in self._person_words:
            return True  # "a poor family", "lazy old man"
        k = hit.start - 1
        while k >= 0 and (texts[k] in _ADVERBS or texts[k] in ("and", "or") or k in covered):
            k -= 1
        if k >= 0 and texts[k] in LINKING_VERBS:
            window = texts[max(0, k - 4) : k]
            return any(w in self._person_words for w in window)  # "the man looked lazy"
        return False

    def scan_text(self, text: str) -> list[TextHit]:
        """Every hit in one row of text."""
        if not text:
            return []
        if _mostly_capitals(text):
            text = text.lower()
        out: list[TextHit] = []
        for sentence in _SENTENCE.split(text):
            first = True
            for clause in _CLAUSE.split(sentence):
                if not clause.strip():
                    continue
                segment = (_START + clause) if first else clause
                first = False
                tokens, hits = self._match_segment(segment)
                for hit in hits:
                    term = hit.term
                    out.append(
                        TextHit(
                            term.category,
                            term.term,
                            term.severity,
                            hit.surface,
                            hit.kind,
                            round(hit.score, 1),
                        )
                    )
                    if (
                        term.category == "occupation_from_appearance"
                        and hit.start > 0
                        and tokens[hit.start - 1].text in GENDER_MARKERS
                        and "gendered_term" in self.lexicon.categories
                    ):
                        marker = tokens[hit.start - 1].text
                        out.append(
                            TextHit(
                                "gendered_term",
                                f"{marker} + occupation",
                                "low",
                                marker,
                                "exact",
                                100.0,
                            )
                        )
        return out


_CAPITALS = re.compile(r"\b[^\W\d_]")


def _mostly_capitals(text: str) -> bool:
    """Text in capitals or title case, where a capital says nothing about names."""
    if text.isupper():
        return True
    starts = _CAPITALS.findall(text)
    if len(starts) < 4:
        return False
    capital = sum(1 for c in starts if c.isupper())
    return capital * 5 >= len(starts) * 4


def _name_flags(segment: str) -> tuple[bool, ...]:
    """Per token of ``tokenize(segment)``: written with a capital inside a sentence (a name)."""
    starts = segment.startswith(_START)
    flags: list[bool] = []
    for position, word in enumerate(_WORD.findall(segment)):
        pieces = tokenize(word)
        # "Baker" is a name; "LazyWorker" (camelCase) and "NURSE" are not.
        capital = word[:1].isupper() and word[1:].islower() and not (starts and position == 0)
        flags.extend([capital] * len(pieces))
    return tuple(flags)


# -- sums over rows -----------------------------------------------------------------------------

Key = tuple[str, str, str]
"""(column, category, term)."""

EXAMPLES = 3
TOP_LABELS = 10


@dataclass
class TermSums:
    """What one term of one category did in one text column."""

    rows: int = 0
    hits: int = 0
    items: set[str] = field(default_factory=set)
    forms: Counter[str] = field(default_factory=Counter)
    kinds: Counter[str] = field(default_factory=Counter)
    low_score: float = 100.0
    labels: Counter[str] = field(default_factory=Counter)
    """Label -> rows (annotation comments) or items (captions) carrying it beside the term."""
    examples: list[tuple[str, str]] = field(default_factory=list)
    """The (item, text) pairs that sort first."""

    def merge(self, other: TermSums) -> None:
        self.rows += other.rows
        self.hits += other.hits
        self.items |= other.items
        self.forms.update(other.forms)
        self.kinds.update(other.kinds)
        self.low_score = min(self.low_score, other.low_score)
        self.labels.update(other.labels)
        self.examples = heapq.nsmallest(EXAMPLES, set(self.examples) | set(other.examples))


@dataclass(frozen=True)
class RowHits:
    """One row of text with at least one hit (the per-row CSV)."""

    column: str
    row: int
    """Position of the row among the file's data rows, from 1."""
    item: str
    hits: int
    terms: tuple[str, ...]
    categories: tuple[str, ...]
    severity: str
    text: str


@dataclass
class TextSums:
    """Additive results of scanning text: per term, per row, and how much was read."""

    terms: dict[Key, TermSums] = field(default_factory=dict)
    rows: list[RowHits] = field(default_factory=list)
    scanned: Counter[str] = field(default_factory=Counter)
    """Column -> rows scanned."""
    with_hits: Counter[str] = field(default_factory=Counter)
    """Column -> rows with at least one hit."""
    sources: dict[str, str] = field(default_factory=dict)
    """Column -> ``items`` or ``annotations``: which file it came from."""

    def merge(self, other: TextSums) -> TextSums:
        for key, sums in other.terms.items():
            mine = self.terms.get(key)
            if mine is None:
                self.terms[key] = TermSums()
                mine = self.terms[key]
            mine.merge(sums)
        self.rows.extend(other.rows)
        self.scanned.update(other.scanned)
        self.with_hits.update(other.with_hits)
        self.sources.update(other.sources)
        return self

    def hit_items(self) -> set[str]:
        """Every item with a hit in a column from the item table (for the labels beside)."""
        out: set[str] = set()
        for (column, _, _), sums in self.terms.items():
            if self.sources.get(column) == "items":
                out |= sums.items
        return out

    def add_item_labels(self, pairs: pd.DataFrame) -> None:
        """Count, per term in an item-table column, the labels its items carry.

        Args:
            pairs: Distinct (item, label) rows for (at least) the items of :meth:`hit_items`.
        """
        if pairs.empty:
            return
        by_item: dict[str, list[str]] = {}
        for item, label in zip(pairs["item"].tolist(), pairs["label"].tolist(), strict=True):
            by_item.setdefault(item, []).append(label)
        for (column, _, _), sums in self.terms.items():
            if self.sources.get(column) != "items":
                continue
            for item in sums.items:
                sums.labels.update(by_item.get(item, ()))


class TextScanner:
    """Scan text columns with one lexicon set; the fuzzy stage remembers every word it saw.

    Args:
        lexicon: The effective lexicon.
        subjects: ``people``, ``mixed`` or ``none`` (as for labels).
        fuzzy_threshold: As for :class:`~labelreview.scan.Scanner`.
        fuzzy_min_length: As for :class:`~labelreview.scan.Scanner`.
    """

    def __init__(self, lexicon: Lexicon, subjects: str = "mixed", **options: Any) -> None:
        self.scanner = ProseScanner(lexicon, subjects, **options)
        self._pairs: set[tuple[str, str]] | None = None

    @property
    def lexicon(self) -> Lexicon:
        return self.scanner.lexicon

    # -- the vectorised stage --------------------------------------------------------------

    @staticmethod
    def words(texts: Any) -> tuple[Any, np.ndarray, np.ndarray, np.ndarray]:
        """Tokenise with Arrow: (distinct words, each token's word index, each token's row,
        rows that need the exact path whatever their words).

        Rows with non-ASCII text or camelCase words are always checked in Python (their
        normalisation is the scanner's own); everything else is lower-cased and split on the
        characters a token cannot hold, which gives the words the scanner would see.
        """
        import pyarrow as pa
        import pyarrow.compute as pc

        array = pa.array(texts, type=pa.string(), from_pandas=True)
        if isinstance(array, pa.ChunkedArray):
            array = array.combine_chunks()
        array = array.fill_null("")
        special = pc.or_(
            pc.invert(pc.string_is_ascii(array)),
            pc.match_substring_regex(array, r"[a-z][A-Z]|[A-Z][A-Z][a-z]"),
        )
        lists = pc.split_pattern_regex(pc.utf8_lower(array), _PROSE_SPLIT)
        flat = pc.list_flatten(lists)
        parents = pc.list_parent_indices(lists).to_numpy(zero_copy_only=False)
        encoded = pc.dictionary_encode(flat)
        indices = encoded.indices.to_numpy(zero_copy_only=False)
        return (
            encoded.dictionary,
            indices,
            parents,
            np.asarray(special.to_numpy(zero_copy_only=False), dtype=bool),
        )

    def candidates(self, texts: Any) -> np.ndarray:
        """Rows (positions) that may hold a match; no other row can.

        A row is a candidate when one of its words is a one-word term form or a misspelt or
        obfuscated form of one (the fuzzy stage runs once, over the distinct unknown words),
        or when two neighbouring words are the start of a term of several words or a compound
        written apart ("house wife"); or when the row needs the exact path anyway (non-ASCII
        text, camelCase).
        """
        vocabulary, indices, parents, special = self.words(texts)
        scanner = self.scanner
        raw = vocabulary.to_pylist()
        first: list[str | None] = []
        for word in raw:
            found = tokenize(word) if word else ()
            first.append(found[0].text if found else None)
        words = sorted({w for w in first if w is not None})
        scanner.resolve_words(words)
        position = {w: i for i, w in enumerate(words)}
        word_of = np.fromiter(
            (position[w] if w is not None else -1 for w in first), dtype=np.int64, count=len(first)
        )
        strong = np.zeros(len(words) + 1, dtype=bool)  # index -1 (no word) stays False
        for i, word in enumerate(words):
            strong[i] = self._complete(word)
        rows = np.zeros(special.size, dtype=bool)
        if indices.size:
            token_word = word_of[indices]
            keep = token_word >= 0
            token_word, token_row = token_word[keep], parents[keep]
            rows[token_row[strong[token_word]]] = True
            pairs = self._pair_keys(position)
            if pairs.size and token_word.size > 1:
                same = token_row[1:] == token_row[:-1]
                key = token_word[:-1] * len(words) + token_word[1:]
                hit = same & np.isin(key, pairs)
                rows[token_row[1:][hit]] = True
        rows |= special
        return np.flatnonzero(rows)

    def _complete(self, word: str) -> bool:
        """A one-word form, or an unknown word the fuzzy stage resolved to one."""
        scanner = self.scanner
        if word in scanner._single:
            return True
        return scanner._unknown_cache.get(word) is not None

    def _pair_keys(self, position: Mapping[str, int]) -> np.ndarray:
        """Keys (first * n + second) of the word pairs that can start a longer match."""
        if self._pairs is None:
            scanner = self.scanner
            pairs: set[tuple[str, str]] = set()
            for key in scanner._index:
                if len(key) >= 2:
                    pairs.add((key[0], key[1]))
            for form in scanner._single:
                for k in range(2, len(form) - 1):
                    pairs.add((form[:k], form[k:]))
            self._pairs = pairs
        n = len(position)
        keys = [
            position[a] * n + position[b] for a, b in self._pairs if a in position and b in position
        ]
        return np.asarray(sorted(keys), dtype=np.int64)

    # -- rows -------------------------------------------------------------------------------

    def scan_batch(
        self,
        column: str,
        texts: Sequence[Any],
        items: Sequence[Any],
        first_row: int,
        *,
        source: str,
        labels: Sequence[Sequence[str]] | None = None,
    ) -> TextSums:
        """Scan one batch of rows of one column.

        Args:
            column: The column's name.
            texts: The text of each row (None or NaN: no text).
            items: Each row's item id.
            first_row: The batch's first row's number (1-based) in the file.
            source: ``items`` (a caption per item) or ``annotations`` (a comment per row).
            labels: Annotation rows only: each row's labels, counted beside each term.
        """
        sums = TextSums()
        sums.sources[column] = source
        values = pd.Series(texts, dtype=object)
        sums.scanned[column] += len(values)
        if not len(values):
            return sums
        picked = self.candidates(values)
        text_list = values.to_numpy(dtype=object)
        item_list = np.asarray(items, dtype=object)
        scanner = self.scanner
        for position in picked.tolist():
            text = text_list[position]
            if not isinstance(text, str) or not text:
                continue
            found = scanner.scan_text(text)
            if not found:
                continue
            item = str(item_list[position])
            sums.with_hits[column] += 1
            seen: set[Key] = set()
            for hit in found:
                key = (column, hit.category, hit.term)
                term = sums.terms.get(key)
                if term is None:
                    term = sums.terms[key] = TermSums()
                term.hits += 1
                term.forms[hit.surface] += 1
                term.kinds[hit.match] += 1
                term.low_score = min(term.low_score, hit.score)
                if key in seen:
                    continue
                seen.add(key)
                term.rows += 1
                term.items.add(item)
                if labels is not None:
                    term.labels.update(set(labels[position]))
                pair = (item, text)
                if len(term.examples) < EXAMPLES or pair < max(term.examples):
                    term.examples = heapq.nsmallest(EXAMPLES, set(term.examples) | {pair})
            severity = max((h.severity for h in found), key=lambda s: SEVERITY_RANK[s])
            sums.rows.append(
                RowHits(
                    column=column,
                    row=first_row + position,
                    item=item,
                    hits=len(found),
                    terms=tuple(dict.fromkeys(h.term for h in found)),
                    categories=tuple(dict.fromkeys(h.category for h in found)),
                    severity=severity,
                    text=text,
                )
            )
        return sums


# -- the result --------------------------------------------------------------------------------


@dataclass(frozen=True)
class TextFinding:
    """One term of one category found in one text column, with its counts."""

    column: str
    category: str
    category_title: str
    severity: str
    term: str
    rows: int
    hits: int
    items: int
    matched: tuple[str, ...]
    match: str
    score: float
    labels: tuple[tuple[str, int], ...]
    examples: tuple[tuple[str, str], ...]
    suggestions: tuple[str, ...]
    reason: str
    source: str

    def to_dict(self) -> dict[str, Any]:
        return {
            "kind": "text",
            "column": self.column,
            "term": self.term,
            "category": self.category,
            "category_title": self.category_title,
            "severity": self.severity,
            "matched": list(self.matched),
            "match": self.match,
            "score": self.score,
            "rows": self.rows,
            "hits": self.hits,
            "items": self.items,
            "labels": [{"label": label, "rows": n} for label, n in self.labels],
            "examples": [{"item": item, "text": text} for item, text in self.examples],
            "suggestions": list(self.suggestions),
            "reason": self.reason,
            "source": self.source,
        }


@dataclass
class TextScanResult:
    """Everything a text scan found, ready to print or write."""

    findings: list[TextFinding]
    rows: list[RowHits]
    scanned: dict[str, int]
    with_hits: dict[str, int]


def text_result(sums: TextSums, lexicon: Lexicon) -> TextScanResult:
    """Findings sorted most severe first, then by column, most rows, term; rows by position."""
    findings: list[TextFinding] = []
    terms = {(t.category, t.term): t for t in lexicon.terms}
    for (column, category, term_name), part in sums.terms.items():
        cat = lexicon.categories.get(category)
        title = cat.title if cat is not None else category
        entry = terms.get((category, term_name))
        why = _first_sentence(cat.rationale) if cat is not None else ""
        why = why or f"it is listed under {title.lower()}"
        reason = f"The text contains '{term_name}' ({title.lower()}): {why[0].lower() + why[1:]}"
        if entry is None:  # the gender-marker rule
            reason = (
                f"'{term_name.split(' + ')[0]}' marks the gender of an occupation where the "
                "occupation alone says the same; gender-marking a job implies it is unusual for "
                "that gender."
            )
        kinds = part.kinds
        best = next((k for k in ("exact", "variant", "fuzzy") if kinds.get(k)), "exact")
        labels = sorted(part.labels.items(), key=lambda x: (-x[1], x[0]))[:TOP_LABELS]
        findings.append(
            TextFinding(
                column=column,
                category=category,
                category_title=title,
                severity=entry.severity if entry is not None else "low",
                term=term_name,
                rows=part.rows,
                hits=part.hits,
                items=len(part.items),
                matched=tuple(
                    f for f, _ in sorted(part.forms.items(), key=lambda x: (-x[1], x[0]))
                ),
                match=best,
                score=part.low_score,
                labels=tuple(labels),
                examples=tuple(sorted(part.examples)),
                suggestions=entry.suggestions if entry is not None else (),
                reason=reason,
                source=entry.source if entry is not None else "labelreview/textscan.py",
            )
        )
    findings.sort(key=lambda f: (-SEVERITY_RANK[f.severity], f.column, -f.rows, f.term, f.category))
    rows = sorted(sums.rows, key=lambda r: (r.column, r.row))
    return TextScanResult(findings, rows, dict(sums.scanned), dict(sums.with_hits))


TEXT_ROW_COLUMNS: tuple[str, ...] = (
    "column",
    "row",
    "item",
    "hits",
    "severity",
    "terms",
    "categories",
    "text",
)


def text_rows_table(result: TextScanResult) -> list[dict[str, Any]]:
    """One dict per row with a hit (the per-row CSV)."""
    return [
        {
            "column": r.column,
            "row": r.row,
            "item": r.item,
            "hits": r.hits,
            "severity": r.severity,
            "terms": "; ".join(r.terms),
            "categories": "; ".join(r.categories),
            "text": r.text,
        }
        for r in result.rows
    ]


def text_csv(result: TextScanResult, neutralise: Any) -> str:
    """The per-row CSV on its own (header alone when no row has a hit)."""
    buf = io.StringIO()
    writer = csv.DictWriter(buf, fieldnames=list(TEXT_ROW_COLUMNS), lineterminator="\n")
    writer.writeheader()
    for row in text_rows_table(result):
        writer.writerow({k: neutralise(v) for k, v in row.items()})
    return buf.getvalue()


def label_pairs(frame: pd.DataFrame, items: Iterable[str]) -> pd.DataFrame:
    """Distinct (item, label) rows of an annotation frame for the given items."""
    wanted = pd.Index(list(items))
    if frame is None or frame.empty or wanted.empty:
        return pd.DataFrame({"item": [], "label": []})
    part = frame.loc[frame["item"].isin(wanted), ["item", "label"]]
    return part.drop_duplicates()


def split_cells(cells: Sequence[Any], separator: str | None) -> list[list[str]]:
    """Each raw label cell as its labels (for comments in the annotation file)."""
    out: list[list[str]] = []
    for cell in cells:
        if cell is None or (isinstance(cell, float) and cell != cell):
            out.append([])
            continue
        if isinstance(cell, (list, tuple, np.ndarray)):
            out.append([str(x).strip() for x in cell if str(x).strip()])
            continue
        text = str(cell)
        parts = text.split(separator) if separator else [text]
        out.append([p.strip() for p in parts if p.strip()])
    return out


__all__ = [
    "PERSON_NOUNS",
    "PRONOUNS",
    "THING_HEADS",
    "ProseScanner",
    "RowHits",
    "TextFinding",
    "TextScanResult",
    "TextScanner",
    "TextSource",
    "TextSums",
    "label_pairs",
    "scan_text_sources",
    "split_cells",
    "text_csv",
    "text_result",
    "text_sources",
]


# -- where the text is ---------------------------------------------------------------------------


@dataclass(frozen=True)
class TextSource:
    """One text column and the file it is read from."""

    column: str
    path: Path
    source: str
    """``items`` (one text per item) or ``annotations`` (one per annotation row)."""
    item_column: str
    label_column: str | None = None
    """Annotation file only: the label cell beside the text."""
    separator: str | None = None
    encoding: str | None = None
    fmt: str = "auto"


def _file_columns(path: Path, kind: str, encoding: str | None, fmt: str = "auto") -> list[str]:
    from labelreview.io import TableStream
    from labelreview.io._common import read_table

    try:
        return list(TableStream(path, fmt=fmt, encoding=encoding, kind=kind).file_columns)
    except UsageError:  # a single JSON document: read it whole
        from labelreview.io import detect_format

        resolved = detect_format(path, kind=kind, encoding=encoding) if fmt == "auto" else fmt
        return list(read_table(path, fmt=resolved, encoding=encoding).columns)


def text_sources(config: DatasetConfig, names: Sequence[str]) -> list[TextSource]:
    """Find each text column: in the item table first, else in the annotation file.

    Raises:
        UsageError: A column is in neither (the message lists the columns of both).
    """
    from labelreview.io._annotations import resolve_columns

    out: list[TextSource] = []
    seen: dict[str, list[str]] = {}
    items = config.items
    if items is not None and items.path.is_file():
        seen[str(items.path)] = _file_columns(items.path, "items", items.encoding)
    ann = config.annotations
    if ann is not None and ann.path is not None and ann.path.exists() and ann.layout == "long":
        seen[str(ann.path)] = _file_columns(ann.path, "annotations", ann.encoding, ann.format)
    for name in dict.fromkeys(names):
        if items is not None and name in seen.get(str(items.path), ()):
            columns = seen[str(items.path)]
            given = {k: v for k, v in items.columns.items() if k == "item"}
            chosen = resolve_columns(items.path, columns, ("item",), given, key="items.columns")
            out.append(
                TextSource(name, items.path, "items", chosen["item"], encoding=items.encoding)
            )
            continue
        if ann is not None and ann.path is not None and name in seen.get(str(ann.path), ()):
            columns = seen[str(ann.path)]
            chosen = resolve_columns(ann.path, columns, ("item", "annotator", "label"), ann.columns)
            out.append(
                TextSource(
                    name,
                    ann.path,
                    "annotations",
                    chosen["item"],
                    label_column=chosen["label"],
                    separator=ann.multi_label_separator,
                    encoding=ann.encoding,
                    fmt=ann.format,
                )
            )
            continue
        listing = "; ".join(f"{Path(p).name}: {', '.join(c)}" for p, c in seen.items())
        raise UsageError(
            f"text column '{name}' is in neither the item table nor the annotation file "
            f"({listing or 'no files found'})",
            hint="Name a column from the list (--text-column or scan.text_columns).",
        )
    return out


def text_batches(source: TextSource, batch_bytes: int) -> Iterator[tuple[pd.DataFrame, int, float]]:
    """(frame with ``item``, ``text`` and for annotation files ``labels``; the first row's
    number from 1; fraction read) per batch."""
    from labelreview.io import TableStream
    from labelreview.io._common import as_text, read_table

    wanted = [source.item_column, source.column]
    if source.label_column is not None:
        wanted.append(source.label_column)
    try:
        stream = TableStream(
            source.path,
            fmt=source.fmt,
            encoding=source.encoding,
            batch_bytes=batch_bytes,
            kind=source.source,
        )
        stream.wanted = list(dict.fromkeys(wanted))
        batches: Iterator[tuple[pd.DataFrame, int, float]] = stream.raw_batches()
    except UsageError:
        from labelreview.io import detect_format

        fmt = detect_format(source.path, kind=source.source, encoding=source.encoding)
        table = read_table(source.path, fmt=fmt, encoding=source.encoding)
        batches = iter([(table.frame, 0, 1.0)])
    for raw, offset, fraction in batches:
        frame = pd.DataFrame(
            {
                "item": as_text(raw[source.item_column]).str.strip(),
                "text": raw[source.column],
            }
        )
        if source.label_column is not None:
            frame["labels"] = split_cells(raw[source.label_column].tolist(), source.separator)
        yield frame, offset + 1, fraction


def scan_text_sources(
    sources: Sequence[TextSource],
    scanner: TextScanner,
    *,
    batch_bytes: int = 32 << 20,
    progress: ProgressCallback | None = None,
) -> TextSums:
    """Scan every text column, batch by batch, into one :class:`TextSums`."""
    report = tell(progress)
    total = TextSums()
    for source in sources:
        task = f"scanning {source.column} in {source.path.name}"
        size = source.path.stat().st_size if source.path.is_file() else None
        for frame, first_row, fraction in text_batches(source, batch_bytes):
            labels = frame["labels"].tolist() if "labels" in frame else None
            total.merge(
                scanner.scan_batch(
                    source.column,
                    frame["text"],
                    frame["item"],
                    first_row,
                    source=source.source,
                    labels=labels,
                )
            )
            if size:
                report(ProgressEvent(task, fraction * size, size))
        report(ProgressEvent(task, size or 1, size or 1, finished=True))
    return total


def combined_csv(label_rows: Sequence[Mapping[str, Any]], text: TextScanResult) -> str:
    """Label findings and text rows in one CSV, told apart by the first column ``kind``.

    ``kind`` is ``label`` for a label finding (the columns of the label CSV) or ``text`` for a
    row of free text with at least one hit (``column``, ``row``, ``item``, ``hits``, ``terms``,
    ``categories``, ``text``; ``severity`` is the row's highest). Cells that do not apply are
    empty. Spreadsheet formula starts are neutralised as in the label CSV.
    """
    from labelreview.report import CSV_COLUMNS, neutralise_cell

    fields = ["kind", *CSV_COLUMNS]
    fields += [c for c in TEXT_ROW_COLUMNS if c not in fields]
    buf = io.StringIO()
    writer = csv.DictWriter(buf, fieldnames=fields, extrasaction="ignore", lineterminator="\n")
    writer.writeheader()
    for row in label_rows:
        out = dict(row)
        out["suggestions"] = "; ".join(out.get("suggestions", ()))
        out["kind"] = "label"
        writer.writerow({k: neutralise_cell(v) for k, v in out.items()})
    for row in text_rows_table(text):
        writer.writerow({k: neutralise_cell(v) for k, v in {"kind": "text", **row}.items()})
    return buf.getvalue()
