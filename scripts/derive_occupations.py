"""Derive the occupation lexicon (lexicons/base/occupation_from_appearance.yaml) from WordNet 3.0.

Source: Princeton WordNet 3.0 as shipped by Debian's wordnet-base (data.noun, index.noun,
noun.exc; formats in ``man 5 wndb``, lexicographer files in ``man 5 lexnames``). The script
collects every lemma of every noun.person synset that is a hyponym, at any depth, of
worker.n.01 ("a person who works at a specific occupation") or professional.n.01 ("a person
engaged in one of the learned professions"). Instance hyponyms (``~i``: named people) are not
followed. Lemmas written with a capital letter in WordNet (proper names, abbreviations) are
dropped, and so is any lemma that another file in lexicons/base/ already lists as a term or
variant (ROT13 files are decoded first), so no word belongs to two categories. Six generic
words for people ("man", "woman", ...) are left out, and so are the few lemmas whose most
frequent WordNet sense is a thing ("instrument", "rat", "cookie"; ``--keep-thing-first-sense``
keeps them).

Lemmas that WordNet also lists in noun.artifact, noun.food, noun.plant or noun.animal
("printer", "cutter", "tender"), or whose most frequent WordNet sense (sense 1 in index.noun)
is not a person at all ("help", "page"), stay in the lexicon with severity low and a note saying
so.

Run from the repository root (quick and idempotent: it rewrites the same bytes for the same
inputs; ``--check`` only reports whether the file is current):

    python scripts/derive_occupations.py
    python scripts/derive_occupations.py --wordnet /usr/share/wordnet --check

Also writes lexicons/WORDNET_LICENSE.txt, the licence notice the WordNet licence asks to travel
with every copy of the data.
"""

from __future__ import annotations

import argparse
import codecs
import json
import os
import re
import sys
import textwrap
from collections.abc import Iterable
from dataclasses import dataclass, field
from pathlib import Path

import yaml

REPO = Path(__file__).resolve().parent.parent
DEFAULT_WORDNET = Path("/usr/share/wordnet")
DEFAULT_LEXICONS = REPO / "lexicons" / "base"
OUTPUT_NAME = "occupation_from_appearance.yaml"
LICENSE_PATH = REPO / "lexicons" / "WORDNET_LICENSE.txt"
CATEGORY = "occupation_from_appearance"

# Lexicographer file numbers, from `man 5 lexnames`.
LEX_NAMES = {
    5: "noun.animal",
    6: "noun.artifact",
    13: "noun.food",
    18: "noun.person",
    20: "noun.plant",
}
PERSON = 18
THING_FILES = (6, 13, 20, 5)  # artifact, food, plant, animal: the order used in notes

# The two roots, found by lemma, lexicographer file and the start of the gloss (then checked to
# be sense 1 of the lemma in index.noun, i.e. worker.n.01 and professional.n.01).
ROOTS = (
    ("worker", "a person who works at a specific occupation"),
    ("professional", "a person engaged in one of the learned professions"),
)
# Hyponyms of serviceman.n.01 ("someone who serves in the armed forces") get a neutral
# description a curator can rename to; the rest get no suggestion.
UNIFORM_ROOT = ("serviceman", "someone who serves in the armed forces")
UNIFORM_SUGGESTION = "person in uniform"

# morphy(7WN) strips "men" to "man" when looking up plurals, so noun.exc lists few -men plurals.
# These words ending in "man" take a regular "-mans" plural instead (recalled from memory).
REGULAR_MAN_PLURALS = frozenset(
    {
        "shaman",
        "talisman",
        "caiman",
        "cayman",
        "ottoman",
        "human",
        "dragoman",
        "doberman",
        "german",
        "roman",
    }
)

# Ordinary words for people that WordNet also files under worker.n.01 through a minor sense
# ("man" via serviceman.n.01, "elder" as a church officer, "resident" as a hospital doctor,
# "volunteer" as a soldier). Listed as occupations they would mark every "man" or "woman" label
# as a guessed job, so they are left out (our judgement, common practice, no source). They are
# the words the scanner treats as generic person nouns.
GENERIC_PERSON_WORDS = frozenset({"man", "woman", "gentleman", "elder", "resident", "volunteer"})

WORDNET_LICENSE = """\
WordNet Release 3.0

This software and database is being provided to you, the LICENSEE, by
Princeton University under the following license.  By obtaining, using
and/or copying this software and database, you agree that you have
read, understood, and will comply with these terms and conditions.:

Permission to use, copy, modify and distribute this software and
database and its documentation for any purpose and without fee or
royalty is hereby granted, provided that you agree to comply with
the following copyright notice and statements, including the disclaimer,
and that the same appear on ALL copies of the software, database and
documentation, including modifications that you make for internal
use or for distribution.

WordNet 3.0 Copyright 2006 by Princeton University.  All rights reserved.

THIS SOFTWARE AND DATABASE IS PROVIDED "AS IS" AND PRINCETON
UNIVERSITY MAKES NO REPRESENTATIONS OR WARRANTIES, EXPRESS OR
IMPLIED.  BY WAY OF EXAMPLE, BUT NOT LIMITATION, PRINCETON
UNIVERSITY MAKES NO REPRESENTATIONS OR WARRANTIES OF MERCHANT-
ABILITY OR FITNESS FOR ANY PARTICULAR PURPOSE OR THAT THE USE
OF THE LICENSED SOFTWARE, DATABASE OR DOCUMENTATION WILL NOT
INFRINGE ANY THIRD PARTY PATENTS, COPYRIGHTS, TRADEMARKS OR
OTHER RIGHTS.

The name of Princeton University or Princeton may not be used in
advertising or publicity pertaining to distribution of the software
and/or database.  Title to copyright in this software, database and
any associated documentation shall at all times remain with
Princeton University and LICENSEE agrees to preserve same.
"""

LICENSE_FILE_TEXT = (
    "The file lexicons/base/occupation_from_appearance.yaml and the word list\n"
    "labelreview/data/english_words.txt.gz are derived from Princeton WordNet 3.0\n"
    "(the Debian wordnet-base package, /usr/share/doc/wordnet-base/copyright).\n"
    "WordNet's licence asks that the following notice travel with every copy:\n"
    "\n" + WORDNET_LICENSE
)

RATIONALE = (
    "A label that names a trade or profession for a person in a picture guesses what they do "
    "for a living from how they look: their clothes, tools or surroundings. The guess is often "
    "wrong and tends to follow stereotypes about who does which job."
)


class DeriveError(Exception):
    """The WordNet database or a lexicon file could not be read."""


@dataclass
class Synset:
    """One line of data.noun, reduced to what this script needs."""

    offset: str
    lex_filenum: int
    words: list[str]
    hyponyms: list[str]
    gloss: str


@dataclass
class Term:
    """One lexicon entry being built."""

    lemma: str
    synsets: list[str] = field(default_factory=list)
    roots: set[str] = field(default_factory=set)
    variants: set[str] = field(default_factory=set)
    thing_files: set[int] = field(default_factory=set)
    first_sense_other: str | None = None
    uniform: bool = False


def read_data_noun(wordnet: Path) -> dict[str, Synset]:
    """Parse data.noun: offset -> Synset (only ``~`` hyponym pointers are kept)."""
    path = wordnet / "data.noun"
    synsets: dict[str, Synset] = {}
    try:
        text = path.read_text(encoding="latin-1")
    except OSError as exc:
        raise DeriveError(
            f"cannot read {path}: {exc}. Install Debian's wordnet-base or pass --wordnet DIR."
        ) from exc
    for lineno, line in enumerate(text.splitlines(), start=1):
        if line.startswith(" "):
            continue  # licence header lines start with two spaces
        head, _, gloss = line.partition(" | ")
        fields = head.split()
        try:
            w_cnt = int(fields[3], 16)
            words = [fields[4 + 2 * i] for i in range(w_cnt)]
            pos = 4 + 2 * w_cnt
            p_cnt = int(fields[pos])
            pointers = [fields[pos + 1 + 4 * k : pos + 5 + 4 * k] for k in range(p_cnt)]
        except (IndexError, ValueError) as exc:
            raise DeriveError(f"{path} line {lineno}: not a data.noun synset line") from exc
        synsets[fields[0]] = Synset(
            offset=fields[0],
            lex_filenum=int(fields[1]),
            words=words,
            hyponyms=[p[1] for p in pointers if p[0] == "~" and p[2] == "n"],
            gloss=gloss.strip(),
        )
    return synsets


def read_index_noun(wordnet: Path) -> tuple[dict[str, list[str]], dict[str, int]]:
    """Parse index.noun.

    Returns:
        lower-case lemma -> synset offsets in sense-number order, and lemma -> tagsense_cnt
        (how many of its senses are ranked by frequency in the semantic concordance texts).
    """
    index: dict[str, list[str]] = {}
    tagged: dict[str, int] = {}
    for line in (wordnet / "index.noun").read_text(encoding="latin-1").splitlines():
        if line.startswith(" "):
            continue
        fields = line.split()
        synset_cnt, p_cnt = int(fields[2]), int(fields[3])
        tagged[fields[0]] = int(fields[4 + p_cnt + 1])
        start = 4 + p_cnt + 2  # skip pointer symbols, sense_cnt and tagsense_cnt
        index[fields[0]] = fields[start : start + synset_cnt]
    return index, tagged


def read_noun_exc(wordnet: Path) -> dict[str, set[str]]:
    """Parse noun.exc: base form -> its irregular inflected forms (plurals)."""
    forms: dict[str, set[str]] = {}
    for line in (wordnet / "noun.exc").read_text(encoding="latin-1").splitlines():
        parts = line.split()
        for base in parts[1:]:
            forms.setdefault(base, set()).add(parts[0])
    return forms


def synset_name(synset: Synset, index: dict[str, list[str]]) -> str:
    """The usual ``lemma.n.NN`` name: first lemma and its sense number for this synset."""
    lemma = synset.words[0].lower()
    return f"{lemma}.n.{index[lemma].index(synset.offset) + 1:02d}"


def find_root(
    synsets: dict[str, Synset], index: dict[str, list[str]], lemma: str, gloss_start: str
) -> Synset:
    """The noun.person synset holding ``lemma`` whose gloss begins with ``gloss_start``."""
    for offset in index.get(lemma, []):
        synset = synsets[offset]
        if synset.lex_filenum == PERSON and synset.gloss.startswith(gloss_start):
            return synset
    raise DeriveError(
        f"WordNet has no noun.person synset '{lemma}' glossed "
        f"'{gloss_start}...'; is this WordNet 3.0?"
    )


def descendants(synsets: dict[str, Synset], root: str) -> set[str]:
    """Offsets of every noun.person hyponym of ``root`` at any depth (root excluded)."""
    seen: set[str] = set()
    stack = [root]
    while stack:
        for child in synsets[stack.pop()].hyponyms:
            if child not in seen and synsets[child].lex_filenum == PERSON:
                seen.add(child)
                stack.append(child)
    return seen


def match_key(text: str) -> tuple[str, ...]:
    """Words of a term, folded simply: lower case, possessive endings and apostrophes dropped.

    The lexicon loader reads "state's attorney" and "state attorney", or "bo's'n" and "bos'n",
    as the same term, so this key does too.
    """
    words: list[str] = []
    for raw in re.findall(r"[0-9a-z']+", text.lower().replace("\u2019", "'")):
        if raw.endswith("'s") and len(raw) > 2:
            raw = raw[:-2]
        elif raw.endswith("s'") and len(raw) > 2:
            raw = raw[:-1]
        word = raw.replace("'", "")
        if word:
            words.append(word)
    return tuple(words)


def other_lexicon_keys(lexicons: Path, output: Path) -> set[tuple[str, ...]]:
    """Every term and variant of the other lexicon files (ROT13 files decoded)."""
    keys: set[tuple[str, ...]] = set()
    for path in sorted(lexicons.glob("*.yaml")) + sorted(lexicons.glob("*.yml")):
        if path.resolve() == output.resolve() or path.name == OUTPUT_NAME:
            continue  # this script's own output (also when --output writes elsewhere)
        try:
            doc = yaml.safe_load(path.read_text(encoding="utf-8"))
        except (OSError, yaml.YAMLError) as exc:
            raise DeriveError(f"cannot read lexicon {path}: {exc}") from exc
        if not isinstance(doc, dict):
            continue
        rot13 = doc.get("encoding") == "rot13"
        for entry in doc.get("terms") or []:
            if not isinstance(entry, dict):
                continue
            words = [entry.get("term")] + list(entry.get("variants") or [])
            for word in words:
                if isinstance(word, str):
                    keys.add(match_key(codecs.decode(word, "rot13") if rot13 else word))
    return keys


def man_plural(lemma: str) -> str | None:
    """``fireman`` -> ``firemen`` (morphy's men/man rule), unless the word pluralises regularly."""
    last = lemma.split(" ")[-1].split("-")[-1]
    if last.endswith("man") and last not in REGULAR_MAN_PLURALS:
        return lemma[:-3] + "men"
    return None


def regular_plurals(word: str) -> set[str]:
    """Regular English plurals of a lemma's last word: ``plier`` -> ``pliers``."""
    if word.endswith(("s", "x", "z", "ch", "sh")):
        return {word + "es"}
    if word.endswith("y") and word[-2:-1] not in ("a", "e", "i", "o", "u"):
        return {word[:-1] + "ies", word + "s"}
    return {word + "s"}


def build_terms(
    wordnet: Path, excluded: set[tuple[str, ...]], drop_thing_first: bool = True
) -> tuple[list[Term], dict[str, int], list[str]]:
    """Collect the occupation lemmas; returns the sorted terms and counts for the report.

    Args:
        wordnet: Folder of the WordNet 3.0 database files.
        excluded: Match keys of terms other lexicon files already hold.
        drop_thing_first: Leave out lemmas whose most frequent WordNet sense is an artifact,
            food, plant or animal ("instrument", "rat", "cookie"): sense 1 in index.noun, trusted
            only when the lemma's senses are ranked by tagged frequency (tagsense_cnt > 0).

    Returns:
        The terms sorted by lemma, counts describing what was kept and dropped, and the
        lemmas left out because their most frequent sense is a thing.
    """
    synsets = read_data_noun(wordnet)
    index, tagged = read_index_noun(wordnet)
    exceptions = read_noun_exc(wordnet)

    roots = [find_root(synsets, index, lemma, gloss) for lemma, gloss in ROOTS]
    for root in roots:
        if index[root.words[0].lower()][0] != root.offset:
            raise DeriveError(f"synset {root.offset} is not sense 1 of '{root.words[0]}'")
    members: dict[str, set[str]] = {}
    for root in roots:
        for offset in descendants(synsets, root.offset):
            members.setdefault(offset, set()).add(synset_name(root, index))
    uniform_root = find_root(synsets, index, *UNIFORM_ROOT)
    uniform = descendants(synsets, uniform_root.offset) | {uniform_root.offset}

    thing_lemmas: dict[str, set[int]] = {}
    for synset in synsets.values():
        if synset.lex_filenum in THING_FILES:
            for word in synset.words:
                thing_lemmas.setdefault(word.lower(), set()).add(synset.lex_filenum)

    counts = {
        "synsets": len(members),
        "lemmas_seen": 0,
        "dropped_capitalised": 0,
        "dropped_other_lexicon": 0,
        "dropped_generic_person_word": 0,
    }
    terms: dict[tuple[str, ...], Term] = {}
    thing_first_dropped: set[str] = set()
    for offset in sorted(members):
        synset = synsets[offset]
        for word in synset.words:
            counts["lemmas_seen"] += 1
            if word != word.lower():
                counts["dropped_capitalised"] += 1
                continue
            lemma = word.replace("_", " ")
            key = match_key(lemma)
            if key in excluded:
                counts["dropped_other_lexicon"] += 1
                continue
            if word in GENERIC_PERSON_WORDS:
                counts["dropped_generic_person_word"] += 1
                continue
            first = index[word][0]
            # Left out when the most frequent sense (backed by WordNet's frequency counts) is
            # not a person at all: "head", "hand", "agent", "model" name things first.
            thing_first = synsets[first].lex_filenum != PERSON and tagged[word] > 0
            if drop_thing_first and thing_first:
                thing_first_dropped.add(lemma)
                continue
            term = terms.setdefault(key, Term(lemma=lemma))
            term.synsets.append(offset)
            term.roots |= members[offset]
            term.uniform = term.uniform or offset in uniform
            plurals = exceptions.get(word, set()) | {
                word[: len(word) - len(last)] + form
                for last in [re.split(r"[_-]", word)[-1]]
                for form in regular_plurals(last)
            }
            for form in (word, *sorted(plurals)):
                term.thing_files |= thing_lemmas.get(form, set())
            term.variants |= {form.replace("_", " ") for form in exceptions.get(word, ())}
            if synsets[first].lex_filenum != PERSON:
                term.first_sense_other = (
                    f"{synset_name(synsets[first], index)}, "
                    f"{LEX_NAMES.get(synsets[first].lex_filenum, 'noun')}"
                )
    # noun.exc may give one plural two bases ("ploughmen ploughman plowman"): keep it only on
    # the base it shares most letters with, so no spelling belongs to two entries.
    owners: dict[tuple[str, ...], list[Term]] = {}
    for term in terms.values():
        for form in term.variants:
            owners.setdefault(match_key(form), []).append(term)
    for key, claimants in owners.items():
        if len(claimants) > 1 or key in terms:
            form = " ".join(key)
            keep = (
                None
                if key in terms
                else max(
                    claimants, key=lambda t: (len(os.path.commonprefix([t.lemma, form])), t.lemma)
                )
            )
            for term in claimants:
                if term is not keep:
                    term.variants = {v for v in term.variants if match_key(v) != key}
    for term in terms.values():
        plural = man_plural(term.lemma)
        if plural:
            term.variants.add(plural)
        term.variants.discard(term.lemma)
    ordered = sorted(terms.values(), key=lambda t: t.lemma)
    counts["dropped_thing_first_sense"] = len(thing_first_dropped)
    counts["terms"] = len(ordered)
    counts["low_thing_overlap"] = sum(1 for t in ordered if t.thing_files)
    for lex in THING_FILES:
        counts[f"overlap_{LEX_NAMES[lex]}"] = sum(1 for t in ordered if lex in t.thing_files)
    counts["low_other_first_sense"] = sum(
        1 for t in ordered if not t.thing_files and t.first_sense_other
    )
    return ordered, counts, sorted(thing_first_dropped)


def _q(text: str) -> str:
    """A YAML double-quoted scalar (JSON string syntax is valid YAML)."""
    return json.dumps(text, ensure_ascii=False)


def _flow(items: Iterable[str]) -> str:
    return "[" + ", ".join(_q(item) for item in items) + "]"


def render(terms: list[Term], counts: dict[str, int], thing_first: list[str], command: str) -> str:
    """The YAML text, deterministic for the same inputs."""
    lines = [
        "# Occupation words derived from Princeton WordNet 3.0. GENERATED FILE: do not edit",
        "# by hand; switch terms off or add exceptions in a layer file instead. Regenerate",
        "# from the repository root with:",
        "#",
        f"#     {command}",
        "#",
        "# Terms: every lemma of every noun.person synset that is a hyponym (at any depth,",
        "# instance hyponyms excluded) of worker.n.01 or professional.n.01, minus lemmas",
        "# written with a capital letter, lemmas already listed in another lexicons/base file",
        "# and six generic words for people (man, woman, gentleman, elder, resident, volunteer).",
    ]
    if thing_first:
        lines.append("# Left out because their most frequent WordNet sense is a thing:")
        lines += textwrap.wrap(
            ", ".join(thing_first) + ".", width=92, initial_indent="#   ", subsequent_indent="#   "
        )
    lines += [
        f"# {counts['terms']} terms from {counts['synsets']} synsets; severity low for "
        f"{counts['low_thing_overlap']} that are also words for things",
        "# (noun.artifact, noun.food, noun.plant, noun.animal) and for "
        f"{counts['low_other_first_sense']} whose most frequent sense",
        "# is not a person.",
        "#",
        "# The WordNet data is used and redistributed under its licence (also in",
        "# lexicons/WORDNET_LICENSE.txt), whose notice follows:",
        "#",
    ]
    lines += [("# " + row).rstrip() for row in WORDNET_LICENSE.splitlines()]
    lines += [
        "",
        "schema: 1",
        "encoding: plain",
        "categories:",
        f"  - id: {CATEGORY}",
        "    title: Occupation read off appearance",
        "    severity: medium",
        f"    rationale: {_q(RATIONALE)}",
        "terms:",
    ]
    for term in terms:
        ids = ", ".join(f"{offset}-n" for offset in term.synsets)
        plural = "synsets" if len(term.synsets) > 1 else "synset"
        roots = " and ".join(sorted(term.roots))
        note = (
            f"WordNet 3.0 {plural} {ids}, hyponym{'s' if len(term.synsets) > 1 else ''} of {roots}"
        )
        severity = None
        if term.thing_files:
            files = ", ".join(LEX_NAMES[lex] for lex in THING_FILES if lex in term.thing_files)
            note += f"; also an everyday word for a thing (WordNet {files})"
            severity = "low"
        elif term.first_sense_other:
            note += f"; its most frequent WordNet sense is not a person ({term.first_sense_other})"
            severity = "low"
        lines += [
            f"  - term: {_q(term.lemma)}",
            f"    category: {CATEGORY}",
            "    form: noun",
            "    scope: people",
        ]
        if term.variants:
            lines.append(f"    variants: {_flow(sorted(term.variants))}")
        suggestions = [UNIFORM_SUGGESTION] if term.uniform else []
        lines.append(f"    suggestions: {_flow(suggestions)}")
        if severity:
            lines.append(f"    severity: {severity}")
        lines.append(f"    note: {_q(note)}")
    return "\n".join(lines) + "\n"


def main(argv: list[str] | None = None) -> int:
    """Command-line entry point; returns the exit code."""
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument(
        "--wordnet",
        type=Path,
        default=DEFAULT_WORDNET,
        help="folder holding data.noun, index.noun, noun.exc",
    )
    parser.add_argument(
        "--lexicons",
        type=Path,
        default=DEFAULT_LEXICONS,
        help="folder of the base lexicon files whose terms are left out",
    )
    parser.add_argument(
        "--output", type=Path, default=None, help=f"file to write (default: LEXICONS/{OUTPUT_NAME})"
    )
    parser.add_argument(
        "--check",
        action="store_true",
        help="write nothing; exit 1 if the output file is not up to date",
    )
    parser.add_argument(
        "--keep-thing-first-sense",
        action="store_true",
        help="keep lemmas whose most frequent WordNet sense is a thing (instrument, rat)",
    )
    args = parser.parse_args(argv)
    output: Path = args.output or args.lexicons / OUTPUT_NAME
    try:
        excluded = other_lexicon_keys(args.lexicons, output)
        terms, counts, thing_first = build_terms(
            args.wordnet, excluded, drop_thing_first=not args.keep_thing_first_sense
        )
    except DeriveError as exc:
        print(f"derive_occupations: {exc}", file=sys.stderr)
        return 2
    command = "python scripts/derive_occupations.py"
    if args.keep_thing_first_sense:
        command += " --keep-thing-first-sense"
    text = render(
        terms, counts, thing_first, command + "   (add --wordnet DIR if not /usr/share/wordnet)"
    )
    current = output.read_text(encoding="utf-8") if output.exists() else None
    license_current = LICENSE_PATH.read_text(encoding="utf-8") if LICENSE_PATH.exists() else None
    if args.check:
        stale = current != text or license_current != LICENSE_FILE_TEXT
        print(f"{output}: {'out of date' if stale else 'up to date'}", file=sys.stderr)
        return 1 if stale else 0
    if current != text:
        output.write_text(text, encoding="utf-8")
    if license_current != LICENSE_FILE_TEXT:
        LICENSE_PATH.write_text(LICENSE_FILE_TEXT, encoding="utf-8")
    summary = ", ".join(f"{name} {value}" for name, value in counts.items())
    print(f"wrote {output}: {summary}", file=sys.stderr)
    return 0


if __name__ == "__main__":
    sys.exit(main())
