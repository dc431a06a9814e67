"""Data signals on small invented inputs: small groups, minimum counts, consent, skew, proxies.

The statistics themselves are checked against scipy, statsmodels and scikit-learn in
test_signals_reference.py; these tests pin the rules around them (common practice, no source,
unless a comment says otherwise).
"""

from __future__ import annotations

import json
from dataclasses import replace
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from labelreview.config import SignalsConfig
from labelreview.dataset import load_dataset
from labelreview.errors import ConfigError, LoadError
from labelreview.signals import (
    NO_ATTRIBUTES,
    annotator_skew,
    code_judgements,
    compute_signals,
    group_disparity,
    proxy_columns,
)
from labelreview.signals._disparity import natural_key, pool_small_groups


def frame_of(rows: list[tuple[str, str, str]]) -> pd.DataFrame:
    return pd.DataFrame(rows, columns=["item", "annotator", "label"])


# -- small groups ------------------------------------------------------------------------------


def test_one_small_group_joins_its_neighbour_and_is_never_named():
    names = ["16-24", "25-44", "85+"]
    group = np.array([0] * 40 + [1] * 50 + [2] * 3)
    codes, new_names, pooled = pool_small_groups(group, names, 10)
    assert pooled == 1
    assert new_names[1] == "25-44 + 1 smaller group"
    assert np.bincount(codes[codes >= 0]).tolist()[:2] == [40, 53]
    assert "85+" not in [new_names[c] for c in set(codes.tolist())]


def test_small_groups_that_reach_k_together_are_one_other_group():
    group = np.array([0] * 40 + [1] * 6 + [2] * 7)
    codes, names, pooled = pool_small_groups(group, ["a", "b", "c"], 10)
    assert pooled == 2 and names[-1] == "other (2 smaller groups)"
    assert sorted(np.bincount(codes[codes >= 0]).tolist()) == [0, 0, 13, 40]


def test_without_a_large_group_small_ones_are_left_out():
    group = np.array([0] * 4 + [1] * 3)
    codes, _, pooled = pool_small_groups(group, ["a", "b"], 10)
    assert pooled == 2 and (codes == -1).all()


def test_natural_order_of_group_names():
    assert sorted(["85+", "16-24", "5-15", "25-44"], key=natural_key) == [
        "5-15",
        "16-24",
        "25-44",
        "85+",
    ]


def _banded(sizes: dict[str, tuple[int, int]]) -> tuple[pd.DataFrame, pd.DataFrame]:
    rows, items = [], []
    n = 0
    for band, (yes, no) in sizes.items():
        for i in range(yes + no):
            n += 1
            items.append({"item": f"i{n}", "band": band})
            rows.append((f"i{n}", "a1", "tagged" if i < yes else "other"))
    return frame_of(rows), pd.DataFrame(items)


def test_small_group_never_appears_in_results_or_json():
    frame, items = _banded({"A": (10, 90), "B": (40, 60), "Tiny": (4, 1)})
    results, summaries, notes = group_disparity(
        code_judgements(frame), items, ["band"], SignalsConfig()
    )
    text = json.dumps([r.to_dict() for r in results] + [s.to_dict() for s in summaries])
    assert "Tiny" not in text and "Tiny" not in " ".join(notes)
    found = next(r for r in results if r.label == "tagged")
    assert [g.group for g in found.groups] == ["A", "B + 1 smaller group"]
    assert found.pooled == 1 and summaries[0].pooled == 1


def test_expected_counts_below_the_minimum_skip_the_test_with_the_reason():
    frame, items = _banded({"A": (1, 19), "B": (4, 16)})
    results, _, _ = group_disparity(code_judgements(frame), items, ["band"], SignalsConfig())
    found = next(r for r in results if r.label == "tagged")
    assert not found.tested and not found.flagged and found.p is None
    assert "below 5: too few items" in (found.reason or "")
    assert found.ratio == pytest.approx(0.25)


def test_large_but_not_significant_difference_is_not_flagged():
    frame, items = _banded({"A": (6, 24), "B": (10, 20)})
    results, _, _ = group_disparity(code_judgements(frame), items, ["band"], SignalsConfig())
    found = next(r for r in results if r.label == "tagged")
    assert found.ratio == pytest.approx(0.6) and found.tested and not found.flagged
    assert "not significant after the Benjamini-Hochberg correction" in (found.reason or "")


def test_items_missing_from_the_item_table_are_left_out_and_noted():
    frame, items = _banded({"A": (30, 70), "B": (50, 50)})
    extra = frame_of([("ghost", "a1", "tagged")])
    _, _, notes = group_disparity(
        code_judgements(pd.concat([frame, extra])), items, ["band"], SignalsConfig()
    )
    assert any("1 annotated item(s) are not in the item table" in n for n in notes)


# -- annotator skew ----------------------------------------------------------------------------


def _skewed_frame(seed: int = 1) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    names = ["a1", "a2", "a3", "a4", "a5"]
    rows = []
    for i in range(400):
        for a in rng.choice(names, 3, replace=False):
            heavy = 0.4 if a == "a1" else 0.02
            label = "idle" if rng.random() < heavy else str(rng.choice(["sit", "walk"]))
            rows.append((f"i{i}", str(a), label))
    return frame_of(rows)


def test_the_heavy_user_is_flagged_and_nobody_else():
    codes = code_judgements(_skewed_frame())
    results, summaries, tests = annotator_skew(codes, SignalsConfig())
    assert [(r.annotator, r.label, r.direction) for r in results] == [("a1", "idle", "more")]
    assert tests > 0 and summaries[0].annotator == "a1"
    # The first pass alone (everyone else as the reference) makes every other annotator look
    # like an under-user of 'idle', because a1's heavy use sits in their reference rate.
    from labelreview.signals._skew import _first_pass, _test

    first = _test(*_first_pass(codes), SignalsConfig())
    flagged = {str(codes.annotator_names[a]) for a in first["a"][first["flagged"]]}
    assert flagged == {"a1", "a2", "a3", "a4", "a5"}


def test_skew_expected_counts_are_the_others_rate_on_the_same_items():
    # Three items, three annotators each; a1 gives 'x' on all three, the others never.
    rows = [(f"i{i}", a, "x" if a == "a1" else "y") for i in range(3) for a in ("a1", "a2", "a3")]
    settings = SignalsConfig(skew_min_items=1)
    codes = code_judgements(frame_of(rows))
    from labelreview.signals._skew import _first_pass

    given, expected, n = _first_pass(codes)
    a1 = list(codes.annotator_names).index("a1")
    x = list(codes.label_names).index("x")
    assert (given[a1, x], expected[a1, x], n[a1, x]) == (3.0, 0.0, 3.0)
    a2 = list(codes.annotator_names).index("a2")
    # a2's items: on each, one of a2's two fellow annotators (a1) gave x: expected 3 * 1/2
    assert expected[a2, x] == pytest.approx(1.5)
    results, _, _ = annotator_skew(codes, settings)
    assert results == []  # too few to reach the minimum count of 5


# -- proxies -----------------------------------------------------------------------------------


def test_id_like_and_constant_columns_are_not_measured():
    items = pd.DataFrame({"item": [f"i{i}" for i in range(200)], "band": ["a", "b"] * 100})
    context = pd.DataFrame({"pid": [f"p{i}" for i in range(200)], "same": ["x"] * 200})
    found = {r.column: r for r in proxy_columns(items, context, ["band"], SignalsConfig())}
    assert "distinct values" in (found["pid"].reason or "") and found["pid"].nmi is None
    assert "single value" in (found["same"].reason or "")


def test_numeric_columns_are_binned_and_can_stand_in():
    rng = np.random.default_rng(4)
    band = rng.choice(["young", "old"], 500)
    seconds = np.where(band == "young", rng.normal(20, 3, 500), rng.normal(40, 3, 500))
    items = pd.DataFrame({"item": [f"i{i}" for i in range(500)], "band": band})
    context = pd.DataFrame({"seconds": [f"{x:.2f}" for x in seconds]})
    (found,) = proxy_columns(items, context, ["band"], SignalsConfig())
    assert found.binned and found.levels == 10 and found.flagged


# -- the whole set, through the dataset config ---------------------------------------------------


def _write(folder: Path, config: str, items: str, annotations: str) -> Path:
    folder.mkdir(parents=True, exist_ok=True)
    (folder / "labelreview.yaml").write_text(config, encoding="utf-8")
    (folder / "items.csv").write_text(items, encoding="utf-8")
    (folder / "annotations.csv").write_text(annotations, encoding="utf-8")
    return folder


BASE = """version: 1
annotations: {path: annotations.csv}
items:
  path: items.csv
"""


def test_no_attribute_configured_says_so_and_reads_no_other_column(tmp_path: Path):
    folder = _write(
        tmp_path / "ds",
        BASE,
        "item,age,zone\ni1,20,a\ni2,30,b\n",
        "item,annotator,label\ni1,a,x\ni1,b,y\ni2,a,x\ni2,b,x\n",
    )
    dataset = load_dataset(folder)
    assert list(dataset.items.columns) == ["item"] and dataset.item_context is None
    signals = compute_signals(dataset)
    assert NO_ATTRIBUTES in signals.notes
    assert signals.disparity == () and signals.proxies == () and signals.cautions() == ()


def test_unconsented_attribute_is_refused(tmp_path: Path):
    config = BASE + "  attributes:\n    - {column: age, consented: true}\n"
    folder = _write(tmp_path / "ds", config, "item,age\ni1,20\n", "item,annotator,label\ni1,a,x\n")
    with pytest.raises(ConfigError, match="not marked self_reported: true"):
        load_dataset(folder)


def test_listed_proxy_column_must_exist(tmp_path: Path):
    config = (
        BASE
        + "  attributes:\n    - {column: age, consented: true, self_reported: true}\n"
        + "signals:\n  proxy_columns: [zone, nowhere]\n"
    )
    folder = _write(
        tmp_path / "ds", config, "item,age,zone\ni1,20,a\n", "item,annotator,label\ni1,a,x\n"
    )
    with pytest.raises(LoadError, match=r"column 'nowhere' \(listed in signals.proxy_columns\)"):
        load_dataset(folder)


def test_single_annotator_still_gets_disparity_but_no_agreement(tmp_path: Path):
    lines = ["item,age"] + [f"i{i},{'young' if i < 50 else 'old'}" for i in range(100)]
    ann = ["item,annotator,label"] + [
        f"i{i},solo,{'loud' if (i < 50 and i % 2 == 0) or i % 10 == 0 else 'calm'}"
        for i in range(100)
    ]
    config = BASE + "  attributes:\n    - {column: age, consented: true, self_reported: true}\n"
    folder = _write(tmp_path / "ds", config, "\n".join(lines) + "\n", "\n".join(ann) + "\n")
    signals = compute_signals(load_dataset(folder))
    assert signals.agreement is None and signals.contested == () and signals.skew == ()
    assert any("single annotator" in n for n in signals.notes)
    assert any(d.label == "loud" and d.flagged for d in signals.disparity)
    assert signals.cautions()[0].startswith("A difference between groups is a signal")


def test_settings_override_the_thresholds(tmp_path: Path):
    frame, items = _banded({"A": (30, 70), "B": (50, 50)})
    strict = replace(SignalsConfig(), disparity_ratio=0.5)
    results, _, _ = group_disparity(code_judgements(frame), items, ["band"], strict)
    assert not next(r for r in results if r.label == "tagged").flagged  # 0.6 is not below 0.5
