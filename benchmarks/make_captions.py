"""Seeded synthetic image captions for the free-text benchmark (invented scenes; no real people).

Each caption is about 12 words built from a small grammar: a subject (a person word, now and then
with a describing word, or a thing), a verb, an object and a place, sometimes a second clause.
About one caption in four names an occupation or a describing word from the shipped lexicons,
a few are misspelt or capitalised, and place names are invented. Items are ``cap0000000``...;
with ``--annotations`` a matching annotation file (three annotators per item, tags from a small
invented vocabulary) is written too, for the labels-beside-terms join.

    python benchmarks/make_captions.py OUT.csv [--rows 1000000] [--seed 11] [--annotations ANN.csv]
"""

from __future__ import annotations

import argparse
from pathlib import Path

import numpy as np
import pandas as pd

PEOPLE = "man woman child boy girl family couple crowd group visitor tourist volunteer".split()
ROLES = (
    "nurse fisherman baker cook porter driver farmer teacher sailor smith beggar policeman "
    "fireman housewife cleaner gardener"
).split()
DESCRIBING = "old young poor lazy tired smiling tall cheerful".split()
THINGS = (
    "boat dog gull cart crane net lantern bicycle barrel tram kite horse ferry bell mast".split()
)
VERBS = (
    "walks with|carries|repairs|watches|holds|paints|waits beside|sits near|leans on|pushes|"
    "stands by"
).split("|")
OBJECTS = (
    "a basket of fish|the old nets|a red bicycle|the harbour wall|a wooden crate|the tram lines|"
    "a bucket|the lighthouse steps|a loaf of bread|the market stall|a paper kite|the ferry rope"
).split("|")
PLACES = (
    "on Brine Street|at Cobble Quay|near Lantern Hill|by the fish market|in the rain|at dawn|"
    "on the pier|outside the chandlery|in the square|along the sea wall|under the crane"
).split("|")
TAGS = [f"scene/{w}" for w in "quay street market pier boat people weather crowd work".split()]


def make_captions(rows: int, seed: int = 11) -> pd.DataFrame:
    """Columns ``item`` and ``caption``; about 12 words a caption."""
    rng = np.random.default_rng(seed)
    kind = rng.random(rows)
    people = np.array(PEOPLE)[rng.integers(0, len(PEOPLE), rows)]
    roles = np.array(ROLES)[rng.integers(0, len(ROLES), rows)]
    things = np.array(THINGS)[rng.integers(0, len(THINGS), rows)]
    describing = np.array(DESCRIBING)[rng.integers(0, len(DESCRIBING), rows)]
    subject = np.where(
        kind < 0.12,
        np.char.add(np.char.add(describing, " "), people),
        np.where(kind < 0.25, roles, np.where(kind < 0.6, people, things)),
    )
    article = np.where(rng.random(rows) < 0.5, "A ", "The ")
    verbs = np.array(VERBS)[rng.integers(0, len(VERBS), rows)]
    objects = np.array(OBJECTS)[rng.integers(0, len(OBJECTS), rows)]
    places = np.array(PLACES)[rng.integers(0, len(PLACES), rows)]
    second = np.where(
        rng.random(rows) < 0.6,
        np.char.add(
            np.char.add(", while a ", np.array(THINGS)[rng.integers(0, len(THINGS), rows)]),
            " drifts past",
        ),
        "",
    )
    text = article
    for part in (subject, " ", verbs, " ", objects, " ", places, second, "."):
        text = np.char.add(text, part)
    captions = text.astype(object)
    typos = np.flatnonzero(rng.random(rows) < 0.01)
    for i in typos:  # a few misspellings ("nurce", "l4zy") for the fuzzy stage
        captions[i] = captions[i].replace("nurse", "nurce").replace("lazy", "l4zy")
    width = len(str(rows - 1))
    items = np.char.add("cap", np.char.zfill(np.arange(rows).astype(str), width)).astype(object)
    return pd.DataFrame({"item": items, "caption": captions})


def make_caption_annotations(items: pd.Series, seed: int = 12) -> pd.DataFrame:
    """Three annotators per item, one invented scene tag each (sorted by item)."""
    rng = np.random.default_rng(seed)
    n = len(items)
    item = np.repeat(items.to_numpy(dtype=object), 3)
    annotator = np.tile(np.array(["ann_a", "ann_b", "ann_c"], dtype=object), n)
    label = np.array(TAGS, dtype=object)[rng.integers(0, len(TAGS), 3 * n)]
    return pd.DataFrame({"item": item, "annotator": annotator, "label": label})


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("out", type=Path)
    parser.add_argument("--rows", type=int, default=1_000_000)
    parser.add_argument("--seed", type=int, default=11)
    parser.add_argument("--annotations", type=Path)
    args = parser.parse_args()
    frame = make_captions(args.rows, args.seed)
    frame.to_csv(args.out, index=False)
    words = frame["caption"].str.split().str.len().mean()
    print(f"wrote {len(frame):,} captions ({words:.1f} words on average) to {args.out}")
    if args.annotations:
        make_caption_annotations(frame["item"]).to_csv(args.annotations, index=False)
        print(f"wrote {3 * len(frame):,} annotations to {args.annotations}")


if __name__ == "__main__":
    main()
