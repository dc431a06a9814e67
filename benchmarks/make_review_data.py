"""Write a seeded, invented dataset folder whose scan flags a given number of labels.

Used by ``bench_review.py``. Every flagged label is a lexicon term under an invented path with a
numeric suffix (``people/quay_17/<term>_10432``), so each is a distinct label that the scanner
flags for the same reason as the bare term; a tenth as many labels naming things are added
unflagged. Annotations: items each seen by three of twelve invented annotators, one label each,
so usage counts, annotator counts and per-label agreement are all defined.

    python benchmarks/make_review_data.py OUT_DIR [--flags 50000] [--seed 20261203]

Deterministic: the same arguments write the same bytes.
"""

from __future__ import annotations

import argparse
import csv
import random
from pathlib import Path

from labelreview.lexicon import load_lexicon
from labelreview.scan import Scanner

AREAS = ("quay", "market", "lane", "yard", "pier", "terrace", "green", "wharf")
ANNOTATORS = tuple(f"volunteer_{i:02d}" for i in range(12))
THINGS = ("boats/dinghy", "places/slipway", "weather/squall", "objects/lantern", "animals/gull")

CONFIG = """\
# Invented benchmark dataset written by benchmarks/make_review_data.py; not real data.
version: 1
name: review_bench
subjects: people
annotations:
  path: annotations.csv
  columns: {item: item, annotator: annotator, label: label}
taxonomy:
  path: taxonomy.csv
items:
  path: items.csv
  columns: {item: item, text: caption, preview: image}
"""


def flagged_labels(n: int, seed: int) -> list[str]:
    """``n`` distinct labels the shipped lexicon flags, in a seeded order."""
    rng = random.Random(seed)
    lexicon = load_lexicon()
    scanner = Scanner(lexicon, "people")
    terms = sorted({t.term for t in lexicon.terms})
    out: list[str] = []
    seen: set[str] = set()
    while len(out) < n:
        batch = []
        while len(batch) < (n - len(out)) * 11 // 10 + 10:
            term = rng.choice(terms).replace(" ", "_")
            label = f"people/{rng.choice(AREAS)}_{rng.randrange(100)}/{term}_{rng.randrange(10**6)}"
            if label not in seen:
                seen.add(label)
                batch.append(label)
        hit = {f.label for f in scanner.scan(batch)}
        out.extend(label for label in batch if label in hit)
    return out[:n]


def write_dataset(out: Path, n_flags: int, seed: int) -> None:
    rng = random.Random(seed + 1)
    out.mkdir(parents=True, exist_ok=True)
    flagged = flagged_labels(n_flags, seed)
    things = [f"{rng.choice(THINGS)}_{i}" for i in range(max(n_flags // 10, 10))]
    labels = flagged + things
    with open(out / "taxonomy.csv", "w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle)
        writer.writerow(["name"])
        writer.writerows([label] for label in sorted(labels))
    n_items = n_flags * 2
    with (
        open(out / "annotations.csv", "w", newline="", encoding="utf-8") as ann,
        open(out / "items.csv", "w", newline="", encoding="utf-8") as items,
    ):
        a = csv.writer(ann)
        i = csv.writer(items)
        a.writerow(["item", "annotator", "label"])
        i.writerow(["item", "caption", "image"])
        for number in range(n_items):
            item = f"it_{number:07d}"
            i.writerow([item, f"Invented scene number {number}.", f"images/{item}.jpg"])
            first = rng.choice(labels)
            for annotator in rng.sample(ANNOTATORS, 3):
                label = first if rng.random() < 0.7 else rng.choice(labels)
                a.writerow([item, annotator, label])
    (out / "labelreview.yaml").write_text(CONFIG, encoding="utf-8")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("out", type=Path)
    parser.add_argument("--flags", type=int, default=50_000)
    parser.add_argument("--seed", type=int, default=20261203)
    args = parser.parse_args()
    write_dataset(args.out, args.flags, args.seed)
    print(f"wrote {args.out} ({args.flags} flagged labels)")


if __name__ == "__main__":
    main()
