"""A small, separate reader of Princeton WordNet 3.0 for the external tests.

Written apart from scripts/derive_occupations.py on purpose, so the test that checks the shipped
occupation lexicon does not reuse the code that made it. It reads Debian's wordnet-base files
(formats in ``man 5 wndb``; lexicographer file numbers in ``man 5 lexnames``) from
``$WORDNET_DIR`` or /usr/share/wordnet, and :func:`load` returns None when they are absent so
the tests can skip with a reason.
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path

DEFAULT_DIR = Path("/usr/share/wordnet")

# Lexicographer file numbers (man 5 lexnames).
NOUN_ANIMAL = 5
NOUN_ARTIFACT = 6
NOUN_FOOD = 13
NOUN_PERSON = 18
NOUN_PLANT = 20


def wordnet_dir() -> Path:
    """Where the database is expected: ``$WORDNET_DIR`` if set, else /usr/share/wordnet."""
    return Path(os.environ.get("WORDNET_DIR") or DEFAULT_DIR)


@dataclass(frozen=True)
class NounSynset:
    """The parts of one data.noun line the tests use."""

    lex_file: int
    lemmas: tuple[str, ...]
    hyponyms: tuple[str, ...]
    """Offsets of ``~`` (ordinary hyponym) pointers; ``~i`` instance hyponyms are left out."""
    gloss: str


class WordNetNouns:
    """The noun synsets of WordNet, keyed by their data.noun offset."""

    def __init__(self, synsets: dict[str, NounSynset]) -> None:
        self.synsets = synsets

    def lemmas_in_lex_file(self, lex_file: int) -> set[str]:
        """Every lemma, as WordNet writes it (underscores, original case), of one lex file."""
        return {
            lemma
            for synset in self.synsets.values()
            if synset.lex_file == lex_file
            for lemma in synset.lemmas
        }

    def person_synset(self, lemma: str, gloss_start: str) -> str:
        """Offset of the noun.person synset holding ``lemma`` whose gloss starts so."""
        for offset, synset in self.synsets.items():
            if (
                synset.lex_file == NOUN_PERSON
                and lemma in synset.lemmas
                and synset.gloss.startswith(gloss_start)
            ):
                return offset
        raise LookupError(f"no noun.person synset {lemma!r} glossed {gloss_start!r}")

    def person_hyponyms(self, root: str) -> set[str]:
        """Offsets of all noun.person synsets below ``root`` (any depth, root itself excluded)."""
        found: set[str] = set()
        todo = [root]
        while todo:
            for child in self.synsets[todo.pop()].hyponyms:
                if child not in found and self.synsets[child].lex_file == NOUN_PERSON:
                    found.add(child)
                    todo.append(child)
        return found

    def occupation_lemmas(self) -> set[str]:
        """Lemmas of the hyponyms of worker.n.01 and professional.n.01 in noun.person."""
        worker = self.person_synset("worker", "a person who works at a specific occupation")
        professional = self.person_synset(
            "professional", "a person engaged in one of the learned professions"
        )
        offsets = self.person_hyponyms(worker) | self.person_hyponyms(professional)
        return {lemma for offset in offsets for lemma in self.synsets[offset].lemmas}


def load(directory: Path | None = None) -> WordNetNouns | None:
    """Read data.noun, or return None when the WordNet database is not installed."""
    path = (directory or wordnet_dir()) / "data.noun"
    if not path.is_file():
        return None
    synsets: dict[str, NounSynset] = {}
    with path.open(encoding="latin-1") as handle:
        for line in handle:
            if line.startswith("  "):
                continue  # the licence header: lines beginning with two spaces
            data, _, gloss = line.partition("|")
            parts = data.split()
            # synset_offset lex_filenum ss_type w_cnt(hex) [word lex_id]... p_cnt [ptr]...
            word_count = int(parts[3], 16)
            lemmas = tuple(parts[4 : 4 + 2 * word_count : 2])
            rest = parts[4 + 2 * word_count :]
            pointer_count = int(rest[0])
            pointers = [rest[1 + 4 * i : 5 + 4 * i] for i in range(pointer_count)]
            hyponyms = tuple(ptr[1] for ptr in pointers if ptr[0] == "~")
            synsets[parts[0]] = NounSynset(int(parts[1]), lemmas, hyponyms, gloss.strip())
    return WordNetNouns(synsets)
