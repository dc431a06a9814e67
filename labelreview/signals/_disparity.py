"""Group disparity: is a label given at very different rates to items of different groups?

Only for attribute columns the dataset config marks as given with consent and self-reported
(``items.attributes``); labelreview never infers an attribute. For each attribute and label:

- **rate by group**: each item counts once and contributes the share of its annotators who gave
  the label (so an item judged by three annotators, two of whom gave it, adds 2/3). The rate of a
  group is the mean of that share over its items.
- **ratio**: the lowest group rate over the highest. Below ``signals.disparity_ratio`` (0.8) it
  fails the four-fifths rule of thumb of the US Uniform Guidelines on Employee Selection
  Procedures (29 CFR 1607.4(D)), used here as a screening heuristic, not a legal test, and
  applied to how often a label is *given*, whichever way that cuts.
- **test**: Pearson's chi-square test of independence on the 2 x groups table (items carrying
  the label, by share, and not carrying it), Cramér's V as the effect size, and
  Benjamini-Hochberg over every (label, attribute) test run. The test is run only when every
  expected count reaches ``signals.min_expected`` (5, after Cochran's rule of thumb as we
  recall it). Counting items rather than judgements keeps annotations of the same item from
  passing as independent evidence.
- **small groups**: a group with fewer than ``signals.min_group_size`` (k) items is never shown
  or tested on its own, and its name is not shown. Small groups are pooled: two or more whose
  items add up to k or more become one group, ``other (N smaller groups)``; otherwise the pool
  joins the group that sorts next to the first small one (for age bands, the adjacent band),
  shown as ``65-84 + 1 smaller group``. Pooling rather than dropping keeps every item in the
  totals, so a small group's figures cannot be worked out by subtracting the groups shown from
  the label's total.

A flag needs all three: the test run, q <= ``signals.fdr``, and the ratio below the threshold.
"""

from __future__ import annotations

import re
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from labelreview.config import SignalsConfig
from labelreview.signals._judgements import Judgements
from labelreview.signals._stats import benjamini_hochberg, chi_square, cramers_v, rate_ratio


@dataclass(frozen=True)
class GroupRate:
    """One group of one attribute: its items and the label's rate among them."""

    group: str
    items: int
    rate: float

    def to_dict(self) -> dict[str, Any]:
        return {"group": self.group, "items": self.items, "rate": round(self.rate, 4)}


@dataclass(frozen=True)
class DisparityResult:
    """One label against one consented attribute."""

    label: str
    attribute: str
    groups: tuple[GroupRate, ...]
    """The groups shown (k or more items), in natural order of their names."""
    pooled: int
    """Groups with fewer than k items, pooled with another group and not shown by name."""
    items: int
    """Items in the groups shown."""
    ratio: float | None
    """Lowest group rate over highest; None when the label is not given in any shown group."""
    lowest: str | None
    highest: str | None
    chi2: float | None
    dof: int | None
    p: float | None
    q: float | None
    """Benjamini-Hochberg adjusted p-value over every test run."""
    cramers_v: float | None
    min_expected: float | None
    tested: bool
    flagged: bool
    reason: str | None
    """Why it was not tested, or why a ratio below the threshold was not flagged."""

    def rate(self, group: str) -> float | None:
        for g in self.groups:
            if g.group == group:
                return g.rate
        return None

    def to_dict(self) -> dict[str, Any]:
        def num(value: float | None, digits: int = 4) -> float | None:
            return None if value is None else round(float(value), digits)

        return {
            "label": self.label,
            "attribute": self.attribute,
            "flagged": self.flagged,
            "ratio": num(self.ratio),
            "lowest": self.lowest,
            "highest": self.highest,
            "groups": [g.to_dict() for g in self.groups],
            "pooled": self.pooled,
            "items": self.items,
            "tested": self.tested,
            "chi2": num(self.chi2),
            "dof": self.dof,
            "p": None if self.p is None else float(f"{self.p:.4g}"),
            "q": None if self.q is None else float(f"{self.q:.4g}"),
            "cramers_v": num(self.cramers_v),
            "min_expected": num(self.min_expected, 2),
            "reason": self.reason,
        }


@dataclass(frozen=True)
class AttributeSummary:
    """What the disparity check could use of one attribute."""

    attribute: str
    groups_shown: int
    pooled: int
    items: int
    """Items in the groups shown."""
    tests: int
    """Labels tested against it."""
    flagged: int

    def to_dict(self) -> dict[str, Any]:
        return {
            "attribute": self.attribute,
            "groups_shown": self.groups_shown,
            "pooled": self.pooled,
            "items": self.items,
            "tests": self.tests,
            "flagged": self.flagged,
        }


def natural_key(text: str) -> list[Any]:
    """Sort key reading digit runs as numbers: ``5-15`` before ``16-24``."""
    parts = re.split(r"(\d+)", text)
    return [(0, int(part), "") if part.isdigit() else (1, 0, part) for part in parts]


def item_groups(
    judgements: Judgements, items: pd.DataFrame, attribute: str
) -> tuple[np.ndarray, list[str], int]:
    """Each annotated item's group code for ``attribute`` (-1: no value, or not in the table).

    Returns:
        (codes per item code, group names, annotated items missing from the item table).
    """
    index = pd.Index(items["item"].to_numpy())
    position = index.get_indexer(judgements.item_names)
    values = items[attribute].astype(str).str.strip()
    codes, names = pd.factorize(values.where(values != "", None), sort=False)
    group = np.where(position >= 0, codes[np.maximum(position, 0)], -1).astype(np.int64)
    missing = int((position < 0).sum())
    return group, [str(n) for n in names], missing


def pool_small_groups(
    group: np.ndarray, names: list[str], k: int
) -> tuple[np.ndarray, list[str], int]:
    """Pool groups with fewer than ``k`` items (see the module docstring).

    Args:
        group: Group code per item (-1: no value).
        names: Group names by code.
        k: The smallest group shown on its own.

    Returns:
        (new codes per item, new names, how many small groups were pooled). Groups that end up
        with no item keep their code and simply have size 0.
    """
    sizes = np.bincount(group[group >= 0], minlength=len(names))
    small = [g for g in range(len(names)) if 0 < sizes[g] < k]
    if not small:
        return group, names, 0
    big = [g for g in range(len(names)) if sizes[g] >= k]
    names = list(names)
    remap = np.arange(len(names) + 1, dtype=np.int64)
    pooled = int(sum(sizes[g] for g in small))
    n = len(small)
    if n >= 2 and pooled >= k:
        names.append(f"other ({n} smaller groups)")
        target = len(names) - 1
    elif big:
        ranked = sorted([*big, small[0]], key=lambda g: natural_key(names[g]))
        at = ranked.index(small[0])
        target = ranked[at - 1] if at > 0 else ranked[1]
        names[target] = f"{names[target]} + {n} smaller group{'s' if n > 1 else ''}"
    else:
        target = -1  # nothing big enough to join: the items are left out
    for g in small:
        remap[g] = target
    codes = np.where(group >= 0, remap[np.maximum(group, 0)], -1)
    return codes, names, n


def group_disparity(
    judgements: Judgements,
    items: pd.DataFrame,
    attributes: Sequence[str],
    settings: SignalsConfig,
) -> tuple[list[DisparityResult], list[AttributeSummary], list[str]]:
    """Every label against every consented attribute; see the module docstring.

    Args:
        judgements: The coded annotation frame.
        items: The item table (``item`` plus the attribute columns).
        attributes: Consented, self-reported attribute columns (the config's list).
        settings: Thresholds and k.

    Returns:
        (results for labels given in at least one shown group, one summary per attribute,
        notes).
    """
    k = settings.min_group_size
    notes: list[str] = []
    pending: list[dict[str, Any]] = []
    summaries: list[dict[str, Any]] = []
    n_labels = judgements.n_labels
    weight = 1.0 / judgements.judges[judgements.item]
    reported_missing = False
    for attribute in attributes:
        group, names, missing = item_groups(judgements, items, attribute)
        if missing and not reported_missing:
            notes.append(
                f"{missing} annotated item(s) are not in the item table; the disparity check "
                "leaves them out"
            )
            reported_missing = True
        group, names, pooled = pool_small_groups(group, names, k)
        sizes = np.bincount(group[group >= 0], minlength=len(names))
        order = sorted(np.flatnonzero(sizes > 0).tolist(), key=lambda g: natural_key(names[g]))
        summary: dict[str, Any] = {
            "attribute": attribute,
            "groups_shown": len(order),
            "pooled": pooled,
            "items": int(sizes[order].sum()) if order else 0,
            "tests": 0,
            "flagged": 0,
        }
        summaries.append(summary)
        if pooled:
            notes.append(
                f"{attribute}: {pooled} group(s) with fewer than {k} items are not shown on "
                "their own; they are pooled with another group (left out when none is large "
                "enough)"
            )
        if len(order) < 2:
            notes.append(
                f"{attribute}: fewer than two groups have {k} or more items, so no label was "
                "compared across its groups"
            )
            continue
        new_code = np.full(len(names), -1, dtype=np.int64)
        new_code[order] = np.arange(len(order))
        row_group = np.where(group[judgements.item] >= 0, new_code[group[judgements.item]], -1)
        mask = row_group >= 0
        n_groups = len(order)
        carried = np.bincount(
            row_group[mask] * n_labels + judgements.label[mask],
            weights=weight[mask],
            minlength=n_groups * n_labels,
        ).reshape(n_groups, n_labels)
        group_items = sizes[order].astype(float)
        tables = np.empty((n_labels, 2, n_groups))
        tables[:, 0, :] = carried.T
        tables[:, 1, :] = group_items[None, :] - carried.T
        result = chi_square(tables)
        rates = carried.T / group_items[None, :]
        ratios = rate_ratio(rates, axis=1)
        vees = cramers_v(result.statistic, result.n, 2, n_groups)
        totals = carried.sum(axis=0)
        for code in np.flatnonzero(totals > 1e-12):
            min_e = float(result.min_expected[code])
            tested = min_e >= settings.min_expected
            reason = None
            if not tested:
                reason = (
                    f"the smallest expected count is {min_e:.1f}, below "
                    f"{settings.min_expected:g}: too few items for the chi-square test"
                )
            row = rates[code]
            pending.append(
                {
                    "label": str(judgements.label_names[code]),
                    "attribute": attribute,
                    "groups": tuple(
                        GroupRate(names[g], int(sizes[g]), float(row[i]))
                        for i, g in enumerate(order)
                    ),
                    "pooled": pooled,
                    "items": int(group_items.sum()),
                    "ratio": float(ratios[code]),
                    "lowest": names[order[int(np.argmin(row))]],
                    "highest": names[order[int(np.argmax(row))]],
                    "chi2": float(result.statistic[code]) if tested else None,
                    "dof": result.dof if tested else None,
                    "p": float(result.pvalue[code]) if tested else None,
                    "cramers_v": float(vees[code]),
                    "min_expected": min_e,
                    "tested": tested,
                    "reason": reason,
                    "summary": summary,
                }
            )
            summary["tests"] += int(tested)
    pvalues = np.array([np.nan if r["p"] is None else r["p"] for r in pending])
    qvalues = benjamini_hochberg(pvalues) if len(pending) else np.zeros(0)
    out: list[DisparityResult] = []
    for record, q in zip(pending, qvalues, strict=True):
        summary = record.pop("summary")
        q_value = None if not np.isfinite(q) else float(q)
        below = record["ratio"] < settings.disparity_ratio
        significant = q_value is not None and q_value <= settings.fdr
        flagged = bool(record["tested"] and below and significant)
        if record["tested"] and below and not flagged:
            record["reason"] = (
                f"the ratio is below {settings.disparity_ratio:g} but the difference is not "
                f"significant after the Benjamini-Hochberg correction (q {q_value:.3g} > "
                f"{settings.fdr:g})"
            )
        summary["flagged"] += int(flagged)
        out.append(DisparityResult(**record, q=q_value, flagged=flagged))
    return out, [AttributeSummary(**s) for s in summaries], notes
