"""The scanner: a :class:`Lexicon` and a list of labels -> :class:`Finding` objects.

Pure: no printing, no files. The work is arranged for speed on large vocabularies: every
distinct segment of a label is matched once (labels in a hierarchy share most of theirs), every
distinct unknown token is fuzzy-matched once, and only tokens that are not ordinary English
words reach the fuzzy matcher at all, which is also what keeps "bakery" from reading as a
misspelt "baker".

Matching, in order: exact term tokens on token boundaries; listed variants and regular
inflections; then, for unknown tokens only, digit-for-letter and doubled-letter folding and
rapidfuzz similarity. Position rules (documented in ``lexicons/README.md``) decide whether a
match speaks about a person: nouns must head their segment ("nurse", not "nurse shark"),
modifiers must stand alone or beside a person noun ("lazy worker", not "lazy river").
"""

from __future__ import annotations

import gzip
import re
from collections.abc import Iterable
from dataclasses import dataclass
from functools import lru_cache
from importlib import resources
from pathlib import Path

import numpy as np
from rapidfuzz import fuzz, process
from rapidfuzz.distance import OSA

from labelreview._gc import paused_gc
from labelreview.errors import UsageError
from labelreview.lexicon import Lexicon, Problem, Term, collect_problems
from labelreview.model import SUBJECTS, Finding, Subjects
from labelreview.text import (
    Token,
    deobfuscate,
    fold,
    plural_forms,
    split_segments,
    squeeze,
    term_tokens,
    tokenize,
)

DEFAULT_FUZZY_THRESHOLD = 88.0
DEFAULT_FUZZY_MIN_LENGTH = 5

#: Categories whose terms are flagged wherever they stand in a label.
ANYWHERE_CATEGORIES = frozenset({"slur_or_derogatory"})

#: Generic words for people. They are never flagged themselves; they tell the scanner that a
#: modifier next to them describes a person ("lazy man") rather than a thing ("lazy river").
PERSON_NOUNS = frozenset(
    """
man men woman women person people persons guy guys gal gals lady ladies gentleman gentlemen
boy boys girl girls child children kid kids baby babies toddler toddlers infant infants teen
teens teenager teenagers youth youths adult adults human humans individual individuals
someone somebody anyone everyone family families couple couples crowd crowds group groups
folk folks mother mothers father fathers mom moms mum mums dad dads parent parents son sons
daughter daughters brother brothers sister sisters husband husbands wife wives grandmother
grandmothers grandfather grandfathers grandparent grandparents friend friends neighbour
neighbours neighbor neighbors resident residents citizen citizens passenger passengers
pedestrian pedestrians customer customers visitor visitors tourist tourists spectator
spectators participant participants volunteer volunteers student students pupil pupils
player players face faces portrait portraits selfie headshot figure figures male males
female females stranger strangers local locals senior seniors member members
worker workers professional professionals character characters owner owners employee
employees staff tenant tenants landlord landlords patient patients bride brides tribe tribes
""".split()
)

#: Words ending in -ing or -ed that are things, not what a person is doing: after a person noun
#: they make it a modifier ("derelict building"), unlike "beggar sitting".
_THING_ING = frozenset(
    """
building buildings clothing painting paintings drawing drawings ring rings wedding ceiling
housing bedding filling stuffing frosting icing pudding topping dressing covering lighting
fitting fittings setting landing crossing opening evening morning string wing spring thing
things railing siding roofing flooring plumbing wiring seating parking shed bed bred
""".split()
)

#: Words that carry no subject of their own in a label ("suspicious-looking", "a lazy one").
FILLERS = frozenset(
    """
looking appearing seeming looks look type kind sort of a an the very really quite one ones
photo picture image shot style like
""".split()
)

#: Words that may follow a person noun without making it a modifier of a thing:
#: "fireman on duty", "beggar and dog".
_FUNCTION_WORDS = frozenset(
    """
on in at with without and or for by near from to into onto under over behind beside next
is are was were being who that which while during after before outside inside
""".split()
)

#: Path parts that put a label among things, not people: "objects/boats/drifter" is a boat,
#: "animals/dogs/german_shepherd" a dog. Below such a part, terms that judge people only
#: (scope people) do not fire; slurs and other always-scoped terms still do.
THING_BRANCHES = frozenset(
    """
object objects thing things item items animal animals pet pets bird birds fish insect insects
plant plants flower flowers tree trees fungi food foods dish dishes drink drinks meal meals
fruit fruits vegetable vegetables vehicle vehicles car cars boat boats ship ships vessel
vessels aircraft tool tools equipment furniture appliance appliances device devices product
products building buildings architecture structure structures place places landscape
landscapes scenery nature weather material materials texture textures pattern patterns
artifact artifacts artefact artefacts instrument instruments toy toys clothing garment
garments document documents
""".split()
)

#: Markers that give a person's gender where it is not needed: "male nurse", "lady doctor".
_NEVER_FUZZY = PERSON_NOUNS | FILLERS
_SUBSTITUTES = re.compile(r"[0-9@$]")
_RUNS = re.compile(r"((.)\2*)")
_ONE_EDIT_MIN_LENGTH = 6
_FUZZY_BLOCK = 2_000_000
"""Largest tokens x forms block scored at once by the fuzzy stage (about 16 MB of scores)."""


def _runs(word: str) -> list[tuple[str, int]]:
    return [(m.group(2), len(m.group(1))) for m in _RUNS.finditer(word)]


def _doubles_letters_of(token: str, form: str) -> bool:
    """True when ``token`` is ``form`` with some letters repeated ("thuggg" of "thug"), and
    not merely the same after squeezing ("conn" is not a respelling of "coon")."""
    if token == form:
        return False
    a, b = _runs(token), _runs(form)
    return len(a) == len(b) and all(
        ca == cb and na >= nb for (ca, na), (cb, nb) in zip(a, b, strict=True)
    )


GENDER_MARKERS = frozenset({"male", "female", "lady", "woman", "man", "girl", "boy"})


@lru_cache(maxsize=1)
def english_words() -> frozenset[str]:
    """Ordinary English words (derived from WordNet 3.0; see scripts/derive_vocabulary.py)."""
    data = resources.files("labelreview").joinpath("data/english_words.txt.gz").read_bytes()
    text = gzip.decompress(data).decode("utf-8")
    return frozenset(w for w in text.splitlines() if w and not w.startswith("#"))


@dataclass(frozen=True)
class _Form:
    term: Term
    kind: str  # exact | variant


@dataclass(frozen=True)
class _Hit:
    start: int
    end: int
    term: Term
    kind: str
    score: float
    surface: str


_Matched = tuple[tuple[Token, ...], tuple[_Hit, ...]]
"""A segment's tokens and the hits among them that speak of a person."""


class Scanner:
    """Match labels against a lexicon.

    Args:
        lexicon: The effective lexicon (see :func:`labelreview.lexicon.load_lexicon`).
        subjects: Do the items depict or describe people: ``people``, ``mixed`` or ``none``.
            With ``none`` only terms whose scope is ``always`` can fire.
        fuzzy_threshold: rapidfuzz ratio (0-100) a misspelt token needs to match a term.
        fuzzy_min_length: Tokens shorter than this are never fuzzy-matched.

    Example:
        >>> from labelreview.lexicon import load_lexicon
        >>> scanner = Scanner(load_lexicon(), subjects="people")
        >>> sorted({f.category for f in scanner.scan(["people/lazy_worker"])})
        ['character_judgement', 'occupation_from_appearance']
    """

    _hits_follow_tokens: bool = True
    """A segment's hits depend on its tokens alone, so segments (and labels) that spell the
    same tokens share one match."""

    def __init_subclass__(cls, **kwargs: object) -> None:
        """A subclass with its own segment rules may read more than the tokens (ProseScanner
        reads capitals off the text): it shares nothing by tokens unless it says so."""
        super().__init_subclass__(**kwargs)
        if "_hits_follow_tokens" not in cls.__dict__ and (
            "_match_segment" in cls.__dict__ or "_speaks_of_person" in cls.__dict__
        ):
            cls._hits_follow_tokens = False

    def __init__(
        self,
        lexicon: Lexicon,
        subjects: Subjects | str = "mixed",
        *,
        fuzzy_threshold: float = DEFAULT_FUZZY_THRESHOLD,
        fuzzy_min_length: int = DEFAULT_FUZZY_MIN_LENGTH,
    ) -> None:
        if subjects not in SUBJECTS:
            raise UsageError(
                f"The 'subjects' parameter must be one of {', '.join(SUBJECTS)}; got {subjects!r}."
            )
        if not 0 < fuzzy_threshold <= 100:
            raise UsageError(
                f"The 'fuzzy_threshold' parameter must be in (0, 100]; got {fuzzy_threshold!r}."
            )
        if fuzzy_min_length < 1:
            raise UsageError(
                f"The 'fuzzy_min_length' parameter must be at least 1; got {fuzzy_min_length!r}."
            )
        self.lexicon = lexicon
        self.subjects = subjects
        self.fuzzy_threshold = float(fuzzy_threshold)
        self.fuzzy_min_length = int(fuzzy_min_length)
        self._index: dict[tuple[str, ...], _Form] = {}
        self._all_forms: set[str] = set()
        self._exceptions: dict[int, tuple[tuple[str, ...], ...]] = {}
        self._person_tokens: set[str] = set(PERSON_NOUNS)
        people_scope = subjects in ("people", "mixed")
        for term in lexicon.terms:
            forms = self._forms(term)
            for key, _ in forms:
                if len(key) == 1:
                    self._all_forms.add(key[0])
            if term.scope == "people" and not people_scope:
                continue
            for key, kind in forms:
                current = self._index.get(key)
                if current is None or (current.kind != "exact" and kind == "exact"):
                    self._index[key] = _Form(term, kind)
            self._exceptions[id(term)] = tuple(
                tuple(tok) for tok in (term_tokens(e) for e in term.exceptions) if tok
            )
            if term.form == "noun" and term.category not in ANYWHERE_CATEGORIES:
                # Only one-word person nouns tell that a neighbour describes a person: the last
                # word of "water dog" or "hard hat" is not a person.
                for key, _ in forms:
                    if len(key) == 1:
                        self._person_tokens.add(key[0])
        lengths: dict[str, set[int]] = {}
        for key in self._index:
            lengths.setdefault(key[0], set()).add(len(key))
        # first word -> the lengths of forms starting with it, longest first
        self._starts = {w: tuple(sorted(ls, reverse=True)) for w, ls in lengths.items()}
        single = {k[0]: f for k, f in self._index.items() if len(k) == 1}
        self._single = single
        # first parts of one-word forms ("house" of "housewife"): only these can start a
        # compound written as two words, so other words skip that lookup
        self._compound_heads = {f[:k] for f in single for k in range(2, len(f) - 1)}
        self._squeezed: dict[str, str] = {}
        for form in sorted(single):
            self._squeezed.setdefault(squeeze(form), form)
        self._fuzzy_forms = sorted(
            (f for f in single if len(f) >= self.fuzzy_min_length), key=lambda f: (len(f), f)
        )
        self._fuzzy_lengths = np.array([len(f) for f in self._fuzzy_forms])
        self._segment_cache: dict[str, _Matched] = {}
        # While hits depend on the tokens alone (see __init_subclass__), labels that spell the
        # same words share their work ("people/quay_13/cowman_818174", "people/quay_7/cowman_20"
        # and "People > Quay > Cowman"): a segment's match by its tokens, and a label's
        # findings (made for the label "") by its shape, the tokens of each of its segments.
        self._token_cache: dict[tuple[Token, ...], _Matched] = {}
        self._shape_cache: dict[tuple[tuple[Token, ...], ...], tuple[Finding, ...]] = {}
        self._why: dict[str, str] = {}  # category id -> its rationale's first sentence
        self._unknown_cache: dict[str, tuple[str, str, float] | None] = {}
        self._live: dict[str, bool] = {}
        self._vocabulary = english_words()

    def __setstate__(self, state: dict[str, object]) -> None:
        """Unpickling (the Dask engine ships scanners to its workers): exceptions are keyed by
        the identity of their term, which a copy does not keep, so key them again."""
        self.__dict__.update(state)
        self._exceptions = {
            id(term): tuple(tuple(tok) for tok in (term_tokens(e) for e in term.exceptions) if tok)
            for term in self.lexicon.terms
        }

    # -- building ---------------------------------------------------------------------------

    @staticmethod
    def _forms(term: Term) -> list[tuple[tuple[str, ...], str]]:
        out: list[tuple[tuple[str, ...], str]] = []
        base = term_tokens(term.term)
        out.append((base, "exact"))
        spellings = [base, *(term_tokens(v) for v in term.variants)]
        for i, toks in enumerate(spellings):
            if not toks:
                continue
            if i:
                out.append((toks, "variant"))
            for plural in plural_forms(toks[-1]):
                out.append(((*toks[:-1], plural), "variant"))
        return out

    # -- matching ---------------------------------------------------------------------------

    def _resolve_unknown(self, token: str) -> tuple[str, str, float] | None:
        """Fuzzy or obfuscated match of one token: (form, kind, score) or None."""
        if token not in self._unknown_cache:
            self._resolve_many([token])
        return self._unknown_cache[token]

    def _resolve_many(self, tokens: Iterable[str]) -> None:
        """Resolve unknown tokens in one batch: cheap rules first, then one rapidfuzz matrix.

        Batching matters: ``process.cdist`` over all candidate tokens at once is about ten
        times faster than one ``extractOne`` per token.
        """
        fuzzy: dict[str, list[str]] = {}  # plain form -> the tokens that fold to it
        for token in tokens:
            if token in self._unknown_cache:
                continue
            result: tuple[str, str, float] | None = None
            if _SUBSTITUTES.search(token) is None and self._is_word(token):
                self._unknown_cache[token] = None
                continue
            plain = deobfuscate(token)
            if plain != token and plain in self._single:
                result = (plain, "fuzzy", float(fuzz.ratio(token, plain)))
            if result is None:
                form = self._squeezed.get(squeeze(plain))
                if form is not None and _doubles_letters_of(plain, form):
                    result = (form, "fuzzy", float(fuzz.ratio(token, form)))
            self._unknown_cache[token] = result
            if result is None and len(plain) >= self.fuzzy_min_length:
                fuzzy.setdefault(plain, []).append(token)
        if not fuzzy or not self._fuzzy_forms:
            return
        plains = list(fuzzy)
        for plain, result in zip(plains, self._fuzzy_batch(plains), strict=True):
            for token in fuzzy[plain]:
                self._unknown_cache[token] = result

    def _fuzzy_batch(self, plains: list[str]) -> list[tuple[str, str, float] | None]:
        """The best fuzzy form of each plain token (or None), in the order given.

        ``fuzz.ratio`` needs similar sizes, so a token is only compared with the forms within
        two letters of its length: forms are sorted by (length, text), so those are one slice,
        and tokens of one length are compared with their slice in bounded blocks. (One dense
        tokens x forms matrix took 12 s and gigabytes at 55,000 unknown words.)
        """
        forms = self._fuzzy_forms  # one-word forms, sorted by (length, text)
        lengths = self._fuzzy_lengths
        out: list[tuple[str, str, float] | None] = [None] * len(plains)
        by_length: dict[int, list[int]] = {}
        for index, plain in enumerate(plains):
            by_length.setdefault(len(plain), []).append(index)
        for size, indices in by_length.items():
            lo = int(np.searchsorted(lengths, size - 2, side="left"))
            hi = int(np.searchsorted(lengths, size + 2, side="right"))
            if hi <= lo:
                continue
            step = max(1, _FUZZY_BLOCK // (hi - lo))
            for start in range(0, len(indices), step):
                block = indices[start : start + step]
                found = self._fuzzy_block([plains[i] for i in block], forms[lo:hi])
                for i, result in zip(block, found, strict=True):
                    out[i] = result
        return out

    def _fuzzy_block(
        self, plains: list[str], forms: list[str]
    ) -> list[tuple[str, str, float] | None]:
        """:meth:`_fuzzy_batch` for tokens against the forms of similar length, in order."""
        ratios = process.cdist(
            plains,
            forms,
            scorer=fuzz.ratio,
            score_cutoff=self.fuzzy_threshold,
            dtype=np.float32,
            workers=-1,
        )
        edits = process.cdist(
            plains, forms, scorer=OSA.distance, score_cutoff=1, dtype=np.int32, workers=-1
        )
        best_cols = ratios.argmax(axis=1)
        best_scores = ratios[np.arange(len(plains)), best_cols]
        near_any = np.asarray((edits <= 1).any(axis=1), dtype=bool)
        out: list[tuple[str, str, float] | None] = []
        for row, plain in enumerate(plains):
            if best_scores[row] > 0:
                out.append((forms[int(best_cols[row])], "fuzzy", float(best_scores[row])))
                continue
            if not near_any[row]:
                out.append(None)
                continue
            # One typo in a short or mid-length word scores below the ratio threshold
            # ("begger" vs "beggar" is 83): allow exactly one edit (OSA distance, so a swap of
            # two neighbouring letters counts as one) for words of 6 letters or more, and only
            # a swap ("theif") for 5-letter words.
            near = np.flatnonzero(edits[row] <= 1)
            result: tuple[str, str, float] | None = None
            if near.size:
                form = forms[int(near[0])]
                long_enough = len(plain) >= _ONE_EDIT_MIN_LENGTH <= len(form)
                swapped = len(plain) == len(form) and sorted(plain) == sorted(form)
                if long_enough or swapped:
                    result = (form, "fuzzy", float(fuzz.ratio(plain, form)))
            out.append(result)
        return out

    def _can_match(self, word: str) -> bool:
        """Could this word take part in any match (exact, compound or fuzzy)?"""
        if word in self._starts or word in self._compound_heads:
            return True
        if word in _NEVER_FUZZY:
            return False
        return self._resolve_unknown(word) is not None

    def _is_word(self, token: str) -> bool:
        vocab = self._vocabulary
        if token in vocab or token in self._all_forms:
            return True
        for suffix in ("s", "es", "ed", "d", "ing", "er", "ers", "est", "ly", "ness"):
            if token.endswith(suffix) and len(token) - len(suffix) >= 3:
                stem = token[: -len(suffix)]
                if stem in vocab or stem + "e" in vocab:
                    return True
                if stem[-1:] == stem[-2:-1] and stem[:-1] in vocab:  # "robbed" -> "rob"
                    return True
                if stem.endswith("i") and stem[:-1] + "y" in vocab:  # "tidied" -> "tidy"
                    return True
        return False

    def _match_segment(self, segment: str) -> _Matched:
        cached = self._segment_cache.get(segment)
        if cached is not None:
            return cached
        tokens = tokenize(segment)
        if self._hits_follow_tokens:
            result = self._match_shared(tokens)
        else:
            result = (tokens, self._match_tokens(tokens))
        self._segment_cache[segment] = result
        return result

    def _match_shared(self, tokens: tuple[Token, ...]) -> _Matched:
        """One match per distinct tokens (scanners whose hits follow the tokens only)."""
        found = self._token_cache.get(tokens)
        if found is None:
            found = self._token_cache[tokens] = (tokens, self._match_tokens(tokens))
        return found

    def _match_tokens(self, tokens: tuple[Token, ...]) -> tuple[_Hit, ...]:
        """The hits of one segment's tokens that speak of a person."""
        texts = [t.text for t in tokens]
        live = self._live
        for word in texts:
            flag = live.get(word)
            if flag is None:
                flag = live[word] = self._can_match(word)
            if flag:
                break
        else:  # no word can start a match: the common case, decided once per distinct word
            return ()
        n = len(texts)
        hits: list[_Hit] = []
        starts = self._starts
        single = self._single
        unknown = self._unknown_cache
        skip = _NEVER_FUZZY
        heads = self._compound_heads
        i = 0
        while i < n:
            word = texts[i]
            lengths = starts.get(word)
            if lengths is not None:
                found = 0
                for length in lengths:
                    if length <= n - i:
                        form = self._index.get(tuple(texts[i : i + length]))
                        if form is not None:
                            surface = " ".join(texts[i : i + length])
                            hits.append(_Hit(i, i + length, form.term, form.kind, 100.0, surface))
                            found = length
                            break
                if found:
                    i += found
                    continue
            if i + 1 < n and word in heads:
                # "house-wife", "business men": two words written apart that the lexicon
                # writes as one ("housewife", "businessmen")
                joined = single.get(word + texts[i + 1])
                if joined is not None:
                    surface = f"{word} {texts[i + 1]}"
                    hits.append(_Hit(i, i + 2, joined.term, "variant", 100.0, surface))
                    i += 2
                    continue
            if word not in skip:
                resolved = unknown[word] if word in unknown else self._resolve_unknown(word)
                if resolved is not None:
                    form_text, kind, score = resolved
                    hits.append(_Hit(i, i + 1, single[form_text].term, kind, score, word))
            i += 1
        return tuple(h for h in hits if self._speaks_of_person(h, tokens, hits))

    def _excepted(self, hit: _Hit, texts: list[str]) -> bool:
        """Does a benign fixed phrase listed with the term cover this match?"""
        for phrase in self._exceptions.get(id(hit.term), ()):
            size = len(phrase)
            for start in range(0, len(texts) - size + 1):
                if (
                    tuple(texts[start : start + size]) == phrase
                    and start < hit.end
                    and (start + size > hit.start)
                ):
                    return True
        return False

    def _speaks_of_person(self, hit: _Hit, tokens: tuple[Token, ...], hits: list[_Hit]) -> bool:
        texts = [t.text for t in tokens]
        if self._excepted(hit, texts):
            return False
        if hit.term.category in ANYWHERE_CATEGORIES:
            return True
        covered = {k for h in hits for k in range(h.start, h.end)}
        if hit.term.form == "noun":
            return self._heads(tokens, hit.end)
        # modifier: alone (with fillers), or beside a person noun that heads the segment
        others = [k for k in range(len(texts)) if not hit.start <= k < hit.end]
        if all(k in covered or texts[k] in FILLERS for k in others):
            return True
        return any(texts[k] in self._person_tokens and self._heads(tokens, k + 1) for k in others)

    def _heads(self, tokens: tuple[Token, ...], end: int) -> bool:
        """Does the noun ending at token ``end`` head its segment (rather than modify a thing)?

        True at the end of the segment, or when what follows keeps it a person: another person
        noun, a function word ("fireman on duty"), a filler, or a verb form ("beggar sitting").
        A possessive ("fireman's carry") modifies what follows.
        """
        if end >= len(tokens):
            return True
        if tokens[end - 1].possessive:
            return False
        nxt = tokens[end].text
        return (
            nxt in self._person_tokens
            or nxt in _FUNCTION_WORDS
            or nxt in FILLERS
            or (len(nxt) > 4 and nxt.endswith(("ing", "ed")) and nxt not in _THING_ING)
        )

    # -- public ----------------------------------------------------------------------------

    def resolve_words(self, words: Iterable[str]) -> None:
        """Fuzzy-match every word not seen before in one batch (one rapidfuzz call)."""
        seen = self._unknown_cache
        fresh = {w for w in words if w not in seen and w not in self._starts}
        self._resolve_many(sorted(fresh - _NEVER_FUZZY))

    def live_words(self, words: Iterable[str]) -> set[str]:
        """The words that could take part in a match: a term's first word, the first part of
        a compound written as two words, or a misspelt or obfuscated form of a term.

        Call :meth:`resolve_words` first so the fuzzy stage runs once for all of them.
        """
        live = self._live
        out: set[str] = set()
        for word in words:
            flag = live.get(word)
            if flag is None:
                flag = live[word] = self._can_match(word)
            if flag:
                out.add(word)
        return out

    def scan_label(self, label: str) -> list[Finding]:
        """All findings for one label (empty when nothing matched)."""
        if not label or (self.lexicon.allow_labels and fold(label) in self.lexicon.allow_labels):
            return []
        segments = split_segments(label)
        if self._hits_follow_tokens:
            return self._shaped_findings(label, tuple([tokenize(s) for s in segments]))
        return self._build_findings(label, [self._match_segment(s) for s in segments])

    def _shaped_findings(self, label: str, shape: tuple[tuple[Token, ...], ...]) -> list[Finding]:
        """The findings of a label from those of its shape (its segments' tokens).

        Every label of one shape gets the same findings but its own label: built once
        (reasons included), copied after. With the segments' words resolved and matched once
        per distinct spelling, this took the scan of the review benchmark (55,000 labels,
        50,000 flagged, 18,000 shapes) from 1.02 s to 0.54 s (medians of 5).
        """
        found = self._shape_cache.get(shape)
        if found is None:
            matched = [self._match_shared(tokens) for tokens in shape]
            found = self._shape_cache[shape] = tuple(self._build_findings("", matched))
        return [finding.for_label(label) for finding in found]

    def _build_findings(self, label: str, matched: list[_Matched]) -> list[Finding]:
        """The findings of one label from its segments' tokens and hits."""
        if not any(hits for _, hits in matched):
            return []  # the common case: nothing to explain, nothing more to build
        all_tokens: list[str] = []
        findings: list[Finding] = []
        seen: set[tuple[str, str, int]] = set()
        pending: list[tuple[int, _Hit]] = []
        gender_pending: list[tuple[int, int, str]] = []
        under_things = False
        for tokens, hits in matched:
            offset = len(all_tokens)
            all_tokens.extend(t.text for t in tokens)
            for hit in hits:
                if under_things and hit.term.scope == "people":
                    continue
                pending.append((offset, hit))
                if hit.term.category == "occupation_from_appearance" and hit.start > 0:
                    marker = tokens[hit.start - 1].text
                    if marker in GENDER_MARKERS:
                        gender_pending.append((offset + hit.start - 1, offset + hit.start, marker))
            if len(tokens) == 1 and tokens[0].text in THING_BRANCHES:
                under_things = True
        token_tuple = tuple(all_tokens)
        for offset, hit in pending:
            key = (hit.term.category, hit.term.term, offset + hit.start)
            if key in seen:
                continue
            seen.add(key)
            findings.append(self._finding(label, hit, offset, token_tuple))
        gendered = self.lexicon.categories.get("gendered_term")
        if gendered is not None:
            for start, end, marker in gender_pending:
                findings.append(
                    Finding(
                        label=label,
                        category=gendered.id,
                        category_title=gendered.title,
                        severity="low",  # type: ignore[arg-type]
                        term=f"{marker} + occupation",
                        matched=marker,
                        match="exact",
                        score=100.0,
                        span=(start, end),
                        tokens=token_tuple,
                        suggestions=(),
                        reason=(
                            f"'{marker}' marks the gender of an occupation where the occupation "
                            f"alone says the same; gender-marking a job implies it is unusual for "
                            f"that gender."
                        ),
                        source="labelreview/scan.py (gender-marker rule)",
                    )
                )
        return findings

    def _finding(self, label: str, hit: _Hit, offset: int, tokens: tuple[str, ...]) -> Finding:
        term = hit.term
        category = self.lexicon.categories[term.category]
        title = category.title
        if hit.kind == "exact":
            how = f"contains '{term.term}'"
        elif hit.kind == "variant":
            how = f"contains '{hit.surface}', a form of '{term.term}'"
        else:
            how = (
                f"contains '{hit.surface}', which looks like an altered spelling of "
                f"'{term.term}' (similarity {hit.score:.0f} of 100)"
            )
        why = self._why.get(term.category)
        if why is None:
            why = _first_sentence(category.rationale) or f"it is listed under {title.lower()}"
            why = self._why[term.category] = why[0].lower() + why[1:]
        reason = f"The label {how} ({title.lower()}): {why}"
        return Finding(
            label=label,
            category=term.category,
            category_title=title,
            severity=term.severity,  # type: ignore[arg-type]
            term=term.term,
            matched=hit.surface,
            match=hit.kind,  # type: ignore[arg-type]
            score=round(hit.score, 1),
            span=(offset + hit.start, offset + hit.end),
            tokens=tokens,
            suggestions=term.suggestions,
            reason=reason,
            source=term.source,
        )

    def scan(self, labels: Iterable[str]) -> list[Finding]:
        """Findings for every distinct label, in first-seen order of the labels.

        Every unknown word of the batch is resolved in one fuzzy batch before matching.
        """
        allowed = self.lexicon.allow_labels
        out: list[Finding] = []
        # The scan allocates many small, long-lived tuples (the caches); Python's cyclic garbage
        # collector would re-walk all of them again and again.
        with paused_gc():
            distinct = [
                label
                for label in dict.fromkeys(labels)
                if label and not (allowed and fold(label) in allowed)
            ]
            if self._hits_follow_tokens:
                shapes = [tuple([tokenize(s) for s in split_segments(label)]) for label in distinct]
                fresh = {tokens for shape in shapes for tokens in shape} - self._token_cache.keys()
                self.resolve_words(t.text for tokens in fresh for t in tokens)
                for label, shape in zip(distinct, shapes, strict=True):
                    out.extend(self._shaped_findings(label, shape))
            else:
                segmented = [split_segments(label) for label in distinct]
                new = {s for segments in segmented for s in segments} - self._segment_cache.keys()
                self.resolve_words(t.text for s in new for t in tokenize(s))
                for label, segments in zip(distinct, segmented, strict=True):
                    matched = [self._match_segment(s) for s in segments]
                    out.extend(self._build_findings(label, matched))
        return out


def _first_sentence(text: str) -> str:
    text = " ".join(text.split())
    for end in (". ", "! ", "? "):
        if end in text:
            return text.split(end, 1)[0] + "."
    return text if not text or text.endswith(".") else text + "."


def scan_labels(
    labels: Iterable[str], lexicon: Lexicon, subjects: Subjects | str = "mixed", **options: float
) -> list[Finding]:
    """One-call form of :class:`Scanner`: ``Scanner(lexicon, subjects, **options).scan(labels)``."""
    return Scanner(lexicon, subjects, **options).scan(labels)  # type: ignore[arg-type]


def validate_lexicon(
    layers: list[Path | str] | tuple[Path | str, ...] = (), base: Path | str | None = "builtin"
) -> tuple[Lexicon | None, list[Problem]]:
    """Every problem in a lexicon set, including suggestions that are themselves flagged.

    Args:
        layers: Layer files applied after the base, in order.
        base: ``"builtin"``, a folder replacing the shipped set, or None.

    Returns:
        The lexicon (None when it has errors) and the list of problems.
    """
    lexicon, problems = collect_problems(layers, base)
    if lexicon is None:
        return None, problems
    scanner = Scanner(lexicon, "people")
    for term in lexicon.terms:
        for suggestion in term.suggestions:
            hits = [f for f in scanner.scan_label(suggestion) if f.term != term.term]
            # A neutral job title is a fair suggestion for a gendered one ("firefighter" for
            # "fireman"); whether a job can be read off an image is judged when it is a label.
            hits = [
                f
                for f in hits
                if f.category != "occupation_from_appearance" and not f.term.endswith("occupation")
            ]
            if hits:
                file, _, line = term.source.rpartition(":")
                problems.append(
                    Problem(
                        file,
                        int(line) if line.isdigit() else None,
                        f"suggestion '{suggestion}' for '{term.term}' is itself flagged "
                        f"({hits[0].category}, term '{hits[0].term}'); suggest a neutral name",
                    )
                )
    if any(p.level == "error" for p in problems):
        return None, problems
    return lexicon, problems
