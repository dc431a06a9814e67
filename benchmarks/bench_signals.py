"""Time the data signals on 1,000,000 seeded annotations with two attributes of up to 10 groups.

Target (issue 6): every signal (agreement report with leave-one-out, contested labels, group
disparity over both attributes, proxy columns, annotator skew) in under 10 s on this machine.

Data: ``make_agreement_data.make_annotations`` (invented tags, 50 annotators, about 4.5
annotations per item) for enough items to give 1,000,000 rows, plus an invented item table:
``band`` (10 groups, one of them smaller than k), ``region`` (6 groups), a ``zone`` column that
follows ``band`` (a proxy), a ``device`` column that does not, and a numeric ``seconds`` column.
One tag is given more often in one band (a planted disparity) and one annotator turns a quarter
of their tags into one tag (a planted skew), so the flags are not empty.

Baseline, for the disparity part only: a plain per-label loop, for each (label, attribute) a
pandas crosstab of the per-item share and ``scipy.stats.chi2_contingency`` on it, as one would
write it without vectorising.

    python benchmarks/bench_signals.py [--rows 1000000] [--repeats 3] [--seed 7]
"""

from __future__ import annotations

import argparse
import resource
import statistics
import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd
from scipy.stats import chi2_contingency

sys.path.insert(0, str(Path(__file__).resolve().parent))
sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from make_agreement_data import make_annotations  # noqa: E402

from labelreview.config import AttributeConfig, DatasetConfig, ItemsConfig  # noqa: E402
from labelreview.dataset import Dataset  # noqa: E402
from labelreview.signals import compute_signals  # noqa: E402

ROWS_PER_ITEM = 4.5


def make_dataset(rows: int, seed: int) -> Dataset:
    """An in-memory dataset of about ``rows`` annotations (no files are read or written)."""
    n_items = int(rows / ROWS_PER_ITEM)
    frame = make_annotations(n_items, seed=seed)
    rng = np.random.default_rng(seed + 1)
    items = pd.Index(frame["item"].unique())
    bands = np.array([f"b{i}" for i in range(10)])
    shares = np.array([0.12] * 5 + [0.08] * 5)
    band = rng.choice(bands, size=len(items), p=shares)
    band[:6] = "tiny"  # a group smaller than k = 10: pooled, never shown
    region = rng.choice([f"r{i}" for i in range(6)], size=len(items))
    zone = np.where(rng.random(len(items)) < 0.7, band, rng.choice(bands, size=len(items)))
    table = pd.DataFrame({"item": items, "band": band, "region": region})
    context = pd.DataFrame(
        {
            "zone": zone,
            "device": rng.choice(["north", "south", "east"], size=len(items)),
            "seconds": rng.gamma(2.0, 30.0, size=len(items)).round(1).astype(str),
        }
    )
    # Plant a disparity: in band b0, a fifth of one common tag becomes tag_19.
    in_b0 = frame["item"].map(dict(zip(items, band, strict=True))).to_numpy() == "b0"
    swap = in_b0 & (frame["label"].to_numpy() == "tag_01") & (rng.random(len(frame)) < 0.2)
    frame.loc[swap, "label"] = "tag_19"
    # Plant a heavy user: coder00 turns a quarter of their tags into tag_05.
    heavy = (frame["annotator"].to_numpy() == "coder00") & (rng.random(len(frame)) < 0.25)
    frame.loc[heavy, "label"] = "tag_05"
    root = Path(".")
    config = DatasetConfig(
        root=root,
        name="bench_signals",
        items=ItemsConfig(
            path=root / "items.csv",
            attributes=(
                AttributeConfig("band", True, True),
                AttributeConfig("region", True, True),
            ),
        ),
    )
    return Dataset(
        root=root,
        config=config,
        annotations=frame,
        items=table,
        item_context=context,
    )


def naive_disparity(dataset: Dataset) -> int:
    """The baseline: one pandas crosstab and one scipy test per (label, attribute)."""
    frame = dataset.annotations
    assert frame is not None and dataset.items is not None
    judges = frame.groupby("item")["annotator"].nunique()
    tests = 0
    for attribute in ("band", "region"):
        group = dataset.items.set_index("item")[attribute]
        for label in frame["label"].unique():
            share = (frame["label"] == label).groupby(frame["item"]).sum() / judges
            carried = share.groupby(group.reindex(share.index)).sum()
            sizes = group.reindex(share.index).value_counts()
            table = np.vstack([carried.to_numpy(), (sizes[carried.index] - carried).to_numpy()])
            chi2_contingency(table, correction=False)
            tests += 1
    return tests


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", type=int, default=1_000_000)
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--seed", type=int, default=7)
    parser.add_argument("--skip-baseline", action="store_true")
    args = parser.parse_args()

    started = time.perf_counter()
    dataset = make_dataset(args.rows, args.seed)
    assert dataset.annotations is not None
    print(
        f"data: {len(dataset.annotations):,} annotations, {len(dataset.items):,} items, "
        f"{dataset.annotations['annotator'].nunique()} annotators, "
        f"{dataset.annotations['label'].nunique()} labels; attributes band (10 groups + a tiny "
        f"one) and region (6); made in {time.perf_counter() - started:.1f} s"
    )
    totals: list[float] = []
    parts: dict[str, list[float]] = {}
    signals = None
    for _ in range(args.repeats):
        started = time.perf_counter()
        signals = compute_signals(dataset)
        totals.append(time.perf_counter() - started)
        for key, value in signals.timings.items():
            parts.setdefault(key, []).append(value)
    assert signals is not None
    median = statistics.median(totals)
    print(
        f"all signals: median {median:.2f} s over {args.repeats} runs "
        f"(min {min(totals):.2f}, max {max(totals):.2f}); target < 10 s: "
        f"{'met' if median < 10 else 'NOT met'}"
    )
    for key, values in parts.items():
        print(f"  {key:10} median {statistics.median(values):.2f} s")
    flagged = [d for d in signals.disparity if d.flagged]
    print(
        f"found: {len(signals.contested)} contested labels, {len(flagged)} disparity flags "
        f"({', '.join(sorted({d.label + ' by ' + d.attribute for d in flagged})) or 'none'}), "
        f"{sum(p.flagged for p in signals.proxies)} proxy column(s) "
        f"({', '.join(p.column for p in signals.proxies if p.flagged) or 'none'}), "
        f"{len(signals.skew)} skewed (annotator, label) pairs of {signals.skew_tests} tested"
    )
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(f"peak resident memory of this process: {peak:.0f} MB")
    if not args.skip_baseline:
        started = time.perf_counter()
        tests = naive_disparity(dataset)
        naive = time.perf_counter() - started
        ours = statistics.median(parts["disparity"])
        print(
            f"baseline (per-label pandas crosstab + scipy chi2_contingency, {tests} tests): "
            f"{naive:.2f} s; labelreview's disparity part {ours:.2f} s: {naive / ours:.0f}x faster"
        )


if __name__ == "__main__":
    main()
