"""The fuzzy stage scores tokens only against forms of similar length, in blocks.

labelreview/scan.py ``Scanner._fuzzy_batch`` once built one dense tokens x forms matrix and
masked the forms more than two letters longer or shorter (12 s and gigabytes at 55,000
unknown words). It now compares each token length with its slice of the length-sorted forms.
These tests hold it to the dense computation, written out here as the reference, on seeded
misspellings of the shipped lexicon's forms and on random letter strings of many lengths.
The scores themselves come from rapidfuzz (``fuzz.ratio``, OSA distance), a general-purpose
string-matching library.
"""

from __future__ import annotations

import random

import numpy as np
import pytest
from rapidfuzz import fuzz, process
from rapidfuzz.distance import OSA

from labelreview import scan as scan_module
from labelreview.lexicon import load_lexicon
from labelreview.scan import Scanner


def dense_reference(scanner: Scanner, plains: list[str]) -> list[tuple[str, str, float] | None]:
    """The earlier one-matrix computation, kept as the reference."""
    forms = scanner._fuzzy_forms
    lengths = scanner._fuzzy_lengths
    query_lengths = np.array([len(p) for p in plains])
    window = np.abs(query_lengths[:, None] - lengths[None, :]) <= 2
    ratios = process.cdist(
        plains, forms, scorer=fuzz.ratio, score_cutoff=scanner.fuzzy_threshold, dtype=np.float32
    )
    ratios[~window] = 0
    edits = process.cdist(plains, forms, scorer=OSA.distance, score_cutoff=1, dtype=np.int32)
    best_cols = ratios.argmax(axis=1)
    best_scores = ratios[np.arange(len(plains)), best_cols]
    out: list[tuple[str, str, float] | None] = []
    for row, plain in enumerate(plains):
        if best_scores[row] > 0:
            out.append((forms[int(best_cols[row])], "fuzzy", float(best_scores[row])))
            continue
        near = np.flatnonzero((edits[row] <= 1) & window[row])
        result = None
        if near.size:
            form = forms[int(near[0])]
            long_enough = len(plain) >= scan_module._ONE_EDIT_MIN_LENGTH <= len(form)
            swapped = len(plain) == len(form) and sorted(plain) == sorted(form)
            if long_enough or swapped:
                result = (form, "fuzzy", float(fuzz.ratio(plain, form)))
        out.append(result)
    return out


def seeded_tokens(forms: list[str], seed: int) -> list[str]:
    rng = random.Random(seed)
    letters = "abcdefghijklmnopqrstuvwxyz"
    tokens = set()
    for form in rng.sample(forms, 400):
        chars = list(form)
        k = rng.randrange(len(chars))
        edit = rng.choice(("replace", "delete", "insert", "swap"))
        if edit == "replace":
            chars[k] = rng.choice(letters)
        elif edit == "delete" and len(chars) > 1:
            del chars[k]
        elif edit == "insert":
            chars.insert(k, rng.choice(letters))
        elif k + 1 < len(chars):
            chars[k], chars[k + 1] = chars[k + 1], chars[k]
        tokens.add("".join(chars))
    # Two letters short of a long form: its best match is two letters longer than itself.
    for form in rng.sample([f for f in forms if len(f) >= 11], 60):
        k = rng.randrange(1, len(form) - 2)
        tokens.add(form[:k] + form[k + 2 :])
    for _ in range(600):
        tokens.add("".join(rng.choice(letters) for _ in range(rng.randint(3, 22))))
    return sorted(tokens)


@pytest.fixture(scope="module")
def scanner() -> Scanner:
    return Scanner(load_lexicon(), "people")


@pytest.mark.parametrize("block", [scan_module._FUZZY_BLOCK, 5_000])
@pytest.mark.parametrize("seed", range(3))
def test_length_slices_give_the_dense_result(scanner, monkeypatch, seed, block):
    # block=5,000: many small blocks per length, so the block edges are crossed too.
    monkeypatch.setattr(scan_module, "_FUZZY_BLOCK", block)
    tokens = seeded_tokens(list(scanner._fuzzy_forms), seed)
    got = scanner._fuzzy_batch(tokens)
    assert got == dense_reference(scanner, tokens)
    assert any(r is not None for r in got) and any(r is None for r in got)
    # the two-letters-short tokens reach forms at the edge of the length window
    assert any(r is not None and len(r[0]) == len(t) + 2 for t, r in zip(tokens, got, strict=True))


def test_tokens_longer_than_every_form_find_nothing(scanner):
    longest = int(scanner._fuzzy_lengths.max())
    assert scanner._fuzzy_batch(["x" * (longest + 3)]) == [None]
