"""Seeded synthetic annotation data for the agreement benchmark (invented; no real people).

Each item gets 5 annotators drawn from a pool without repeats, and each of those annotations is
missing with probability 0.1, so items carry about 4.5 annotations. Every item has a hidden
"intended" label drawn from a skewed distribution over ``n_labels`` labels; an annotator gives
it with their own accuracy (0.55 to 0.95) and otherwise picks a label at random. Labels are plain
invented tags (``tag_00`` ...).

    python benchmarks/make_agreement_data.py OUT.csv [--items 1000000] [--seed 7]
"""

from __future__ import annotations

import argparse
from pathlib import Path

import numpy as np
import pandas as pd

PER_ITEM = 5
MISSING = 0.1


def make_annotations(
    n_items: int, *, n_labels: int = 20, n_annotators: int = 50, seed: int = 7
) -> pd.DataFrame:
    """The long annotation frame (item, annotator, label), all strings, sorted by item.

    Args:
        n_items: Items to generate.
        n_labels: Size of the label vocabulary.
        n_annotators: Size of the annotator pool (at least 5).
        seed: Seed for numpy's default generator.

    Returns:
        About ``4.5 * n_items`` rows.
    """
    rng = np.random.default_rng(seed)
    weights = 1.0 / np.arange(1, n_labels + 1)
    weights /= weights.sum()
    truth = rng.choice(n_labels, size=n_items, p=weights)
    accuracy = rng.uniform(0.55, 0.95, size=n_annotators)
    # Five distinct annotators per item: a random offset and stride walk over the pool.
    start = rng.integers(0, n_annotators, size=n_items)
    slots = (start[:, None] + np.arange(PER_ITEM)[None, :] * 7) % n_annotators
    item = np.repeat(np.arange(n_items), PER_ITEM)
    annotator = slots.ravel()
    keep = rng.random(item.size) >= MISSING
    item, annotator = item[keep], annotator[keep]
    correct = rng.random(item.size) < accuracy[annotator]
    label = np.where(correct, truth[item], rng.integers(0, n_labels, size=item.size))
    width = len(str(n_items - 1))
    item_names = np.char.add("item", np.char.zfill(np.arange(n_items).astype(str), width))
    ann_names = np.array([f"coder{i:02d}" for i in range(n_annotators)])
    label_names = np.array([f"tag_{i:02d}" for i in range(n_labels)])
    return pd.DataFrame(
        {
            "item": item_names[item],
            "annotator": ann_names[annotator],
            "label": label_names[label],
        }
    )


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("out", type=Path)
    parser.add_argument("--items", type=int, default=1_000_000)
    parser.add_argument("--seed", type=int, default=7)
    args = parser.parse_args()
    frame = make_annotations(args.items, seed=args.seed)
    frame.to_csv(args.out, index=False)
    print(f"wrote {len(frame):,} rows for {args.items:,} items to {args.out}")


if __name__ == "__main__":
    main()
