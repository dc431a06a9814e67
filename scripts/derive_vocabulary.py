"""Derive labelreview's list of ordinary English words from Princeton WordNet 3.0.

The scanner uses it for one thing: a token that is an ordinary English word (or a regular
inflection of one) is never fuzzy-matched, so "bakery" is not read as a misspelt "baker" and
"water" not as "waiter". Only unknown tokens ("prostitue", "thuggg") go to fuzzy matching.

Run from the repository root (needs Debian's wordnet-base, or --wordnet DIR):

    python scripts/derive_vocabulary.py

Writes labelreview/data/english_words.txt.gz (sorted, one word a line, deterministic: gzip
mtime 0). WordNet 3.0 licence: see lexicons/WORDNET_LICENSE.txt; the notice is kept in the file
header as the licence requires.
"""

from __future__ import annotations

import argparse
import gzip
import re
from pathlib import Path

HEADER = (
    "# Ordinary English words, derived from Princeton WordNet 3.0"
    " by scripts/derive_vocabulary.py.\n"
    "# WordNet 3.0 Copyright 2006 by Princeton University. All rights reserved.\n"
    "# Used and redistributed under the WordNet licence (lexicons/WORDNET_LICENSE.txt).\n"
)
_WORD = re.compile(r"^[a-z]+$")


def collect(wordnet: Path) -> set[str]:
    """Every single-word lemma and every word of a multi-word lemma, plus exception forms."""
    words: set[str] = set()
    for pos in ("noun", "verb", "adj", "adv"):
        for line in (wordnet / f"index.{pos}").read_text(encoding="latin-1").splitlines():
            if line.startswith(" "):
                continue  # licence header lines
            lemma = line.split(" ", 1)[0]
            for part in re.split(r"[_\-]", lemma):
                if _WORD.match(part) and len(part) > 1:
                    words.add(part)
        exc = wordnet / f"{pos}.exc"
        if exc.exists():
            for line in exc.read_text(encoding="latin-1").splitlines():
                for part in line.split():
                    if _WORD.match(part):
                        words.add(part)
    return words


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--wordnet", type=Path, default=Path("/usr/share/wordnet"))
    parser.add_argument("--out", type=Path, default=Path("labelreview/data/english_words.txt.gz"))
    args = parser.parse_args()
    words = sorted(collect(args.wordnet))
    body = HEADER + "\n".join(words) + "\n"
    with open(args.out, "wb") as raw, gzip.GzipFile(fileobj=raw, mode="wb", mtime=0) as gz:
        gz.write(body.encode("utf-8"))
    print(f"wrote {len(words)} words to {args.out}")


if __name__ == "__main__":
    main()
