"""Proxy columns: other item columns that carry much of a consented attribute.

Leaving an attribute out of a dataset does not remove it when another column (a location code,
a device, the length of a text) says much the same thing. For each other column and each
consented attribute this measures, over the items that have both values:

- the **normalised mutual information** (arithmetic mean of the two entropies; 0 independent,
  1 each determines the other), and
- **Cramér's V** from the chi-square statistic of the column x attribute table.

A column is reported when either reaches its threshold (``signals.proxy_nmi``,
``signals.proxy_cramers_v``). Numeric columns with many values are cut into ten quantile bins;
text columns with more than ``signals.proxy_max_levels`` distinct values (ids, free text) are
left out, as are tables too sparse to read (fewer than ``signals.min_expected`` items per cell
on average), because both measures run high by chance there. Only column-level figures are
reported: no value of any item, and nothing about a person, is inferred or shown.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from labelreview.config import SignalsConfig
from labelreview.signals._stats import chi_square, cramers_v, normalised_mutual_information

TEXT_LENGTH = "(length of the item text)"
"""The derived column checked when the item table has a text column."""
BINS = 10
NUMERIC_SHARE = 0.95
"""A column is numeric when this share of its non-empty values parse as numbers."""


@dataclass(frozen=True)
class ProxyResult:
    """One item column against one consented attribute."""

    column: str
    attribute: str
    nmi: float | None
    cramers_v: float | None
    levels: int
    """Distinct values of the column (bins, for a binned numeric column)."""
    items: int
    """Items with a value in both."""
    binned: bool
    flagged: bool
    reason: str | None
    """Why the pair was not measured."""

    def to_dict(self) -> dict[str, Any]:
        return {
            "column": self.column,
            "attribute": self.attribute,
            "flagged": self.flagged,
            "nmi": None if self.nmi is None else round(self.nmi, 4),
            "cramers_v": None if self.cramers_v is None else round(self.cramers_v, 4),
            "levels": self.levels,
            "items": self.items,
            "binned": self.binned,
            "reason": self.reason,
        }


def _column_codes(values: pd.Series, max_levels: int) -> tuple[np.ndarray, int, bool, str | None]:
    """(codes with -1 for empty, levels, binned, reason it cannot be used)."""
    text = values.astype(str).str.strip()
    codes, uniques = pd.factorize(text.where(text != "", None), sort=False)
    codes = codes.astype(np.int64)
    distinct = len(uniques)
    counts = np.bincount(codes[codes >= 0], minlength=distinct)
    # Numbers are parsed once per distinct value, not once per row.
    numbers = pd.to_numeric(pd.Series(np.asarray(uniques, dtype=object)), errors="coerce")
    numeric = numbers.notna().to_numpy()
    present = int(counts.sum())
    binned = False
    if present and counts[numeric].sum() >= NUMERIC_SHARE * present and distinct > max_levels:
        per_row = np.where(codes >= 0, numbers.to_numpy(dtype=float)[np.maximum(codes, 0)], np.nan)
        cut = pd.qcut(per_row, BINS, labels=False, duplicates="drop")
        codes = np.where(np.isnan(cut), -1, cut).astype(np.int64)
        binned = True
    elif distinct > max_levels:
        return (
            np.zeros(0, np.int64),
            distinct,
            False,
            f"{distinct} distinct values (an id or free text?); only columns with at most "
            f"{max_levels} are checked",
        )
    levels = int(np.count_nonzero(np.bincount(codes[codes >= 0]))) if codes.size else 0
    if levels < 2:
        return codes, levels, binned, "a single value: it cannot stand in for anything"
    return codes, levels, binned, None


def proxy_columns(
    items: pd.DataFrame,
    context: pd.DataFrame | None,
    attributes: Sequence[str],
    settings: SignalsConfig,
) -> list[ProxyResult]:
    """Every context column (and the text's length) against every consented attribute.

    Args:
        items: The item table (attributes, and ``text`` when present).
        context: Other item columns, same rows (see ``load_items_with_context``).
        attributes: The consented, self-reported attribute columns.
        settings: Thresholds.

    Returns:
        One result per (column, attribute), flagged ones first, then by NMI.
    """
    candidates: dict[str, pd.Series] = {}
    if context is not None:
        for name in context.columns:
            candidates[str(name)] = context[name]
    if settings.proxy_columns is None and "text" in items.columns:
        candidates[TEXT_LENGTH] = items["text"].astype(str).str.len().astype(str)
    coded = {
        name: _column_codes(column, settings.proxy_max_levels)
        for name, column in candidates.items()
    }
    out: list[ProxyResult] = []
    for attribute in attributes:
        values = items[attribute].astype(str).str.strip()
        a_codes, _ = pd.factorize(values.where(values != "", None), sort=False)
        a_codes = a_codes.astype(np.int64)
        for name, (codes, levels, binned, reason) in coded.items():
            both = (a_codes >= 0) & (codes >= 0) if reason is None else np.zeros(0, bool)
            n_items = int(both.sum())
            nmi = vee = None
            if reason is None:
                a_used, a_index = np.unique(a_codes[both], return_inverse=True)
                c_used, c_index = np.unique(codes[both], return_inverse=True)
                if a_used.size < 2:
                    reason = f"{attribute} has a single value where this column has one"
                elif n_items < settings.min_expected * a_used.size * c_used.size:
                    reason = (
                        f"too few items ({n_items}) for a {c_used.size} x {a_used.size} table "
                        f"(at least {settings.min_expected:g} per cell on average)"
                    )
                else:
                    table = np.bincount(
                        c_index * a_used.size + a_index, minlength=c_used.size * a_used.size
                    ).reshape(c_used.size, a_used.size)
                    nmi = normalised_mutual_information(table)
                    chi = chi_square(table)
                    vee = float(cramers_v(chi.statistic, chi.n, *table.shape))
            flagged = reason is None and (
                (nmi is not None and nmi >= settings.proxy_nmi)
                or (vee is not None and vee >= settings.proxy_cramers_v)
            )
            out.append(
                ProxyResult(
                    column=name,
                    attribute=attribute,
                    nmi=nmi,
                    cramers_v=vee,
                    levels=levels,
                    items=n_items,
                    binned=binned,
                    flagged=bool(flagged),
                    reason=reason,
                )
            )
    out.sort(key=lambda r: (not r.flagged, -(r.nmi or 0.0), r.column, r.attribute))
    return out
