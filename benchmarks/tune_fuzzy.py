"""How the fuzzy threshold was chosen: a seeded misspelling experiment.

Positives: one random edit (substitute, insert, delete, swap) applied to single-word lexicon
terms of 5+ letters; the scanner should flag them. Negatives: the same kind of edit applied to
ordinary English words (from labelreview's word list) that are not lexicon terms; a flag there
is a false alarm on a misspelt ordinary word, the realistic failure of fuzzy matching. Only
edits that produce a token outside the English word list count (the others never reach the
fuzzy stage by design).

    python benchmarks/tune_fuzzy.py [--n 2000]

Prints recall on misspelt terms and the false-alarm rate on misspelt ordinary words for a grid
of ratio thresholds and minimum lengths. The shipped defaults are ratio 88, minimum length 5.
"""

from __future__ import annotations

import argparse
import random
import string

from labelreview.lexicon import load_lexicon
from labelreview.scan import Scanner, english_words


def misspell(word: str, rng: random.Random) -> str:
    i = rng.randrange(len(word))
    kind = rng.choice("sids")
    letter = rng.choice(string.ascii_lowercase)
    if kind == "s":
        return word[:i] + letter + word[i + 1 :]
    if kind == "i":
        return word[:i] + letter + word[i:]
    if kind == "d":
        return word[:i] + word[i + 1 :]
    j = min(i + 1, len(word) - 1)
    chars = list(word)
    chars[i], chars[j] = chars[j], chars[i]
    return "".join(chars)


def sample(words: list[str], n: int, vocab: frozenset[str], rng: random.Random) -> list[str]:
    out: set[str] = set()
    while len(out) < n:
        word = rng.choice(words)
        typo = misspell(word, rng)
        if typo != word and typo not in vocab:
            out.add(typo)
    return sorted(out)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--n", type=int, default=2000)
    args = parser.parse_args()
    rng = random.Random(20261202)
    lexicon = load_lexicon()
    vocab = english_words()
    terms = sorted({t.term for t in lexicon.terms if " " not in t.term and len(t.term) >= 5})
    term_set = set(terms)
    ordinary = sorted(w for w in vocab if len(w) >= 5 and w not in term_set)
    positives = sample(terms, args.n, vocab, rng)
    negatives = sample(ordinary, args.n, vocab, rng)
    print(f"{len(positives)} misspelt terms, {len(negatives)} misspelt ordinary words")
    print(f"{'ratio':>5} {'min_len':>7} {'recall':>7} {'false alarms':>12}")
    for min_length in (4, 5, 6):
        for threshold in (80, 84, 88, 92, 96):
            scanner = Scanner(
                lexicon, "people", fuzzy_threshold=threshold, fuzzy_min_length=min_length
            )
            recall = sum(bool(scanner.scan_label(w)) for w in positives) / len(positives)
            alarms = sum(bool(scanner.scan_label(w)) for w in negatives) / len(negatives)
            mark = "  <- shipped default" if (threshold, min_length) == (88, 5) else ""
            print(f"{threshold:>5} {min_length:>7} {recall:>7.1%} {alarms:>12.1%}{mark}")


if __name__ == "__main__":
    main()
