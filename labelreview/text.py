"""Text normalisation shared by the lexicon and the scanner.

One place decides how a label becomes tokens, so a lexicon term and a label that spells the same
words always meet: Unicode NFKC, case folding, diacritics removed, labels split into segments
(path parts, comma or semicolon lists) and tokens (spaces, snake_case, kebab-case, camelCase),
id prefixes dropped, possessives marked.
"""

from __future__ import annotations

import re
import unicodedata
from functools import lru_cache
from typing import NamedTuple

# Segment separators: hierarchy paths ("people/roles/x", "a > b", "a::b") and synonym lists
# ("a, b; c"). A pipe never reaches here as a separator: multi-label cells are split on load.
_SEGMENT_SPLIT = re.compile(r"\s*(?:/|\\|>|::|,|;|\|)\s*")
# camelCase and PascalCase boundaries: "LazyWorker" -> "Lazy Worker", "HTMLPage" -> "HTML Page".
_CAMEL_1 = re.compile(r"(?<=[a-z])(?=[A-Z])")
_CAMEL_2 = re.compile(r"(?<=[A-Z])(?=[A-Z][a-z])")
# Token characters: letters, digits and the few symbols used as letter substitutes (l4zy, $lut,
# b@d); apostrophes are kept so possessives can be recognised.
_TOKEN = re.compile(r"[0-9a-z@$'\u2019]+")
# Identifier-like tokens carry no words: "n04567" (WordNet-style ids), "12", "0x1f", "a1b2c3d4".
_ID_TOKEN = re.compile(r"^(?:\d+|[a-z]\d{3,}|0x[0-9a-f]+|[0-9a-f]{8,})$")
_LEET = str.maketrans(
    {"0": "o", "1": "i", "3": "e", "4": "a", "5": "s", "7": "t", "@": "a", "$": "s"}
)
_DOUBLED = re.compile(r"(.)\1+")
_PLAIN: dict[str, Token] = {}  # one shared Token per plain word: creating them is the hot path


class Token(NamedTuple):
    """One word of a label after normalisation."""

    text: str
    """Folded form used for matching (possessive ending removed)."""
    possessive: bool = False
    """True for "man's" / "ladies'": the word modifies what follows rather than heading it."""


def fold(text: str) -> str:
    """NFKC, case folding and diacritics removed: the form every comparison uses.

    >>> fold("Naïve CAFÉ")
    'naive cafe'
    """
    if text.isascii():
        return text.lower()  # ASCII: NFKC and diacritics change nothing; casefold == lower
    text = unicodedata.normalize("NFKC", text).casefold()
    decomposed = unicodedata.normalize("NFKD", text)
    stripped = "".join(ch for ch in decomposed if not unicodedata.combining(ch))
    return unicodedata.normalize("NFC", stripped)


def split_segments(label: str) -> list[str]:
    """Split a label into its parts: path components and list items, empty parts dropped.

    >>> split_segments("people/roles/fireman, firefighter")
    ['people', 'roles', 'fireman', 'firefighter']
    """
    return [part for part in _SEGMENT_SPLIT.split(label.strip()) if part]


@lru_cache(maxsize=200_000)
def tokenize(segment: str) -> tuple[Token, ...]:
    """Turn one segment into folded tokens; id-like tokens are dropped.

    >>> [t.text for t in tokenize("n04567_LazyWorker")]
    ['lazy', 'worker']
    """
    if not segment.islower():
        segment = _CAMEL_2.sub(" ", _CAMEL_1.sub(" ", segment))
    folded = fold(segment)
    if "\u2019" in folded:
        folded = folded.replace("\u2019", "'")
    tokens: list[Token] = []
    for raw in _TOKEN.findall(folded):
        if raw.isalpha():
            plain = _PLAIN.get(raw)
            if plain is None:
                if len(_PLAIN) > 500_000:
                    _PLAIN.clear()
                plain = _PLAIN[raw] = Token(raw)
            tokens.append(plain)
            continue
        if raw.isdigit():  # a number is an id (_ID_TOKEN): "cowman_818174" -> "cowman"
            continue
        possessive = False
        word = raw.strip("'")
        if raw.endswith("'s") and len(raw) > 2:
            word, possessive = raw[:-2].strip("'"), True
        elif raw.endswith("s'") and len(raw) > 2:
            word, possessive = raw[:-1].strip("'"), True
        word = word.replace("'", "")
        if not word or _ID_TOKEN.match(word):
            continue
        tokens.append(Token(word, possessive))
    return tuple(tokens)


def term_tokens(term: str) -> tuple[str, ...]:
    """The token texts of a lexicon term or phrase, normalised exactly as labels are."""
    return tuple(t.text for seg in split_segments(term) for t in tokenize(seg))


def plural_forms(word: str) -> set[str]:
    """Regular English plurals of a noun (irregular ones belong in the lexicon's variants).

    >>> sorted(plural_forms("lady"))
    ['ladies', 'ladys']
    >>> sorted(plural_forms("witch"))
    ['witches']
    """
    forms: set[str] = set()
    if len(word) < 2:
        return forms
    if word.endswith(("s", "x", "z", "ch", "sh")):
        forms.add(word + "es")
    elif word.endswith("y") and word[-2] not in "aeiou":
        forms.add(word[:-1] + "ies")
        forms.add(word + "s")
    else:
        forms.add(word + "s")
    return forms


def deobfuscate(word: str) -> str:
    """Undo digit-for-letter and symbol-for-letter spellings: ``l4zy`` -> ``lazy``."""
    return word.translate(_LEET)


def squeeze(word: str) -> str:
    """Collapse doubled letters so ``thuggg`` and ``thug`` meet: ``thuggg`` -> ``thug``."""
    return _DOUBLED.sub(_first_group, word)


def _first_group(match: re.Match[str]) -> str:
    return match.group(1)
