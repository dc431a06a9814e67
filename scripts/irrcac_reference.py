"""Compute reference agreement values with the ``irrCAC`` package, for labelreview's tests.

This script is run by hand, once, in a scratch environment; it is never imported by labelreview
or by its tests. irrCAC 0.4.4 pins ``scipy==1.12.0`` and ``pandas<3``, which would break the
project's own environment, so it must not be installed into /work/venv. Make the scratch
environment and run the script like this::

    python3.11 -m venv /tmp/irrcac-env
    /tmp/irrcac-env/bin/pip install irrCAC==0.4.4   # pulls numpy 1.26.4, pandas 2.3.3, scipy 1.12.0
    /tmp/irrcac-env/bin/python scripts/irrcac_reference.py            # writes tests/data/agreement
    /tmp/irrcac-env/bin/python scripts/irrcac_reference.py --out /tmp/x   # or anywhere else

What it writes:

* ``gwet_<name>.csv``: one file per data set, long format, header ``item,annotator,label``, one
  row per rating; a missing rating is an absent row. Labels are written as strings exactly as in
  the source (irrCAC stores numeric ratings with gaps as floats; ``1.0`` is written ``1``).
* ``gwet_reference.json``: for each CSV, every statistic irrCAC's ``raw.CAC`` (and, for complete
  two-rater data, ``table.CAC``) offers, both unrounded and as irrCAC rounds them (``digits=5``),
  with the weight matrix, the categories, the exact calls and a source line.

irrCAC rounds every figure it returns. The unrounded figures are obtained by running the same
methods a second time with irrCAC's module-level ``round``/``np.round`` made the identity
(``_unrounded`` below); nothing else in irrCAC is changed.

The data sets come from two places: ``irrCAC.datasets`` (examples from Gwet's handbook, as the
package's docstrings say) and three random tables generated here with a fixed seed from Python's
``random`` module (stable across Python versions). The random tables are written to disk, so
nobody needs to regenerate them; running the script again rewrites the same bytes. An existing
file with different content is not overwritten: the script stops with exit code 1 and says which
file differs (pass ``--force`` to replace it deliberately).
"""

from __future__ import annotations

import argparse
import contextlib
import csv
import functools
import io
import json
import math
import platform
import random
import sys
from collections.abc import Callable, Iterator
from importlib.metadata import version
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import scipy
from irrCAC import datasets
from irrCAC import raw as irr_raw
from irrCAC import table as irr_table

DEFAULT_OUT = Path(__file__).resolve().parents[1] / "tests" / "data" / "agreement"
SEED = 20250117
HANDBOOK = (
    "Gwet, K.L. (2014), Handbook of Inter-Rater Reliability, 4th edition, Advanced Analytics, "
    "LLC (ISBN 978-0970806284)"
)
# The edition and ISBN are read off irrCAC's own README (package METADATA, "All of these
# statistical procedures are described in details in Gwet, K.L. (2014, ISBN:978-0970806284):
# Handbook of Inter-Rater Reliability, 4th edition"); the datasets' docstrings cite it as
# :cite:p:`Gwe14`. distrib_6raters is cited there as :cite:p:`Fle71` instead.

# Figures printed in irrCAC's own module docstrings (irrCAC/raw.py and irrCAC/table.py, 0.4.4);
# the script stops if its rounded results disagree, so the JSON cannot drift from the package.
DOCSTRING_VALUES = [
    ("gwet_raw_4raters.csv", "results", "identity", "gwet", "coefficient_value", 0.77544),
    ("gwet_raw_4raters.csv", "results", "identity", "gwet", "pa", 0.81818),
    ("gwet_raw_4raters.csv", "results", "identity", "gwet", "pe", 0.19032),
    ("gwet_raw_4raters.csv", "results", "identity", "fleiss", "coefficient_value", 0.76117),
    ("gwet_raw_4raters.csv", "results", "identity", "fleiss", "pe", 0.23872),
    ("gwet_cont3x3abstractors.csv", "table", "identity", "gwet", "coefficient_value", 0.84933),
    ("gwet_cont3x3abstractors.csv", "table", "identity", "gwet", "pa", 0.89),
    ("gwet_cont3x3abstractors.csv", "table", "identity", "gwet", "pe", 0.26992),
    ("gwet_cont3x3abstractors.csv", "results", "identity", "gwet", "coefficient_value", 0.84933),
]

RAW_METHODS = ("gwet", "fleiss", "krippendorff", "conger", "bp")
TABLE_METHODS = ("gwet", "cohen", "scott", "krippendorff", "bp", "pa2")


class _NumpyWithoutRound:
    """Stands in for ``numpy`` inside irrCAC's modules, with ``round`` made the identity."""

    def __getattr__(self, name: str) -> Any:
        if name == "round":
            return lambda x, *args, **kwargs: x
        return getattr(np, name)


@contextlib.contextmanager
def _unrounded() -> Iterator[None]:
    """Make irrCAC's final rounding a no-op, so its methods return full float precision.

    irrCAC rounds with the builtin ``round`` (which, on numpy floats, calls ``np.round``) and
    with ``np.round``. A module-level ``round`` shadows the builtin inside irrCAC's modules;
    the ``np`` name in those modules is swapped for a proxy whose ``round`` returns its input.
    """
    modules = (irr_raw, irr_table)
    saved = [m.np for m in modules]
    try:
        for m in modules:
            m.round = lambda x, *args: x  # type: ignore[attr-defined]
            m.np = _NumpyWithoutRound()  # type: ignore[assignment]
        yield
    finally:
        for m, old in zip(modules, saved, strict=True):
            m.np = old
            del m.round  # type: ignore[attr-defined]


def _plain(value: Any) -> Any:
    """Turn numpy scalars/arrays and tuples into JSON-ready Python values."""
    if isinstance(value, dict):
        return {str(k): _plain(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_plain(v) for v in value]
    if isinstance(value, np.ndarray):
        return _plain(value.tolist())
    if isinstance(value, np.bool_ | bool):
        return bool(value)
    if isinstance(value, np.integer):
        return int(value)
    if isinstance(value, float | np.floating):
        f = float(value)
        if not math.isfinite(f):
            return repr(f)  # "nan" / "inf": JSON has no such numbers
        return f
    return value


def _label_text(value: Any) -> str:
    """A rating as the source wrote it: 3.0 (a float only because of gaps) -> "3"."""
    if isinstance(value, float | np.floating) and float(value).is_integer():
        return str(int(value))
    return str(value)


def _long_rows(wide: pd.DataFrame, item_ids: list[Any]) -> list[tuple[str, str, str]]:
    """Wide (items x raters) -> long rows (item, annotator, label), skipping missing ratings."""
    rows = []
    for item, (_, ratings) in zip(item_ids, wide.iterrows(), strict=True):
        for annotator, value in ratings.items():
            if pd.isna(value):
                continue
            rows.append((str(item), str(annotator), _label_text(value)))
    return rows


def _csv_text(rows: list[tuple[str, str, str]]) -> str:
    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\n")
    writer.writerow(["item", "annotator", "label"])
    writer.writerows(rows)
    return buf.getvalue()


def _check_round_trip(
    rows: list[tuple[str, str, str]], wide: pd.DataFrame, items: list[Any]
) -> None:
    """Fail unless the long rows pivot back to exactly the ratings irrCAC was given."""
    given = {
        (str(item), str(annotator)): value
        for item, (_, ratings) in zip(items, wide.iterrows(), strict=True)
        for annotator, value in ratings.items()
        if not pd.isna(value)
    }
    written = {(item, annotator): label for item, annotator, label in rows}
    if len(written) != len(rows) or set(written) != set(given):
        raise AssertionError("long rows do not match the wide table")
    for key, value in given.items():
        if _label_text(value) != written[key]:
            raise AssertionError(f"{key}: {value!r} written as {written[key]!r}")
        if isinstance(value, float | np.floating) and float(written[key]) != value:
            raise AssertionError(f"{key}: {value!r} does not survive as {written[key]!r}")


def _expand_table(table: pd.DataFrame, rater_names: tuple[str, str]) -> pd.DataFrame:
    """A 2-rater contingency table (rows: rater 1, columns: rater 2) -> one row per subject."""
    first, second = [], []
    for row_label in table.index:
        for col_label in table.columns:
            count = int(table.loc[row_label, col_label])
            first += [row_label] * count
            second += [col_label] * count
    return pd.DataFrame({rater_names[0]: first, rater_names[1]: second})


def _expand_distribution(dist: pd.DataFrame, n_raters: int) -> pd.DataFrame:
    """Counts per (subject, category) -> a wide frame with made-up rater columns r1..rN.

    The distribution does not say which rater gave which rating, so ratings are dealt to r1, r2,
    ... in category-column order. Statistics that ignore rater identity (Fleiss, Gwet, Krippendorff,
    Brennan-Prediger) are unaffected; Conger's kappa would not be, so it is not computed.
    """
    rows = []
    for _, counts in dist.iterrows():
        labels = [cat for cat, count in counts.items() for _ in range(int(count))]
        if len(labels) != n_raters:
            raise ValueError(f"expected {n_raters} ratings per subject, got {len(labels)}")
        rows.append(labels)
    return pd.DataFrame(rows, columns=[f"r{i}" for i in range(1, n_raters + 1)])


def _random_wide(
    rng: random.Random,
    n_items: int,
    raters: list[str],
    categories: list[Any],
    p_agree: float,
    p_missing: float,
) -> pd.DataFrame:
    """Seeded random ratings: each item has a 'usual' category; a rater gives it with p_agree.

    With p_missing > 0 each rating is dropped with that probability, but every item keeps at
    least one rating (items with none would simply not exist in long format).
    """
    table = []
    for _ in range(n_items):
        usual = rng.choice(categories)
        row: list[Any] = []
        for _ in raters:
            row.append(usual if rng.random() < p_agree else rng.choice(categories))
        if p_missing > 0:
            kept = [i for i in range(len(raters)) if rng.random() >= p_missing]
            if not kept:
                kept = [rng.randrange(len(raters))]
            row = [v if i in kept else None for i, v in enumerate(row)]
        table.append(row)
    frame = pd.DataFrame(table, columns=raters)
    if all(isinstance(c, int) for c in categories):
        frame = frame.astype(float)
    return frame


def _run(factory: Callable[[], Any], method: str) -> dict[str, Any]:
    """One irrCAC method, rounded (as irrCAC returns it) and unrounded."""
    rounded = getattr(factory(), method)()
    with _unrounded():
        full = getattr(factory(), method)()
    return {
        "coefficient_name": rounded["est"]["coefficient_name"],
        "full": _plain({k: v for k, v in full["est"].items() if k != "coefficient_name"}),
        "rounded": _plain({k: v for k, v in rounded["est"].items() if k != "coefficient_name"}),
        "_weights": _plain(full["weights"]),
        "_categories": _plain(full["categories"]),
    }


def _dataset_specs() -> list[dict[str, Any]]:
    """Every data set: its wide frame, item ids, provenance and which analyses to run."""
    rng = random.Random(SEED)
    specs: list[dict[str, Any]] = []

    def from_irrcac(name: str, what: str, weights: tuple[str, ...] = ("identity",)) -> None:
        frame = getattr(datasets, name)()
        items = [idx[-1] if isinstance(idx, tuple) else idx for idx in frame.index]
        specs.append(
            {
                "name": name,
                "wide": frame,
                "items": items,
                "weights": weights,
                "build": f"irrCAC.datasets.{name}()",
                "source": f"irrCAC {version('irrCAC')}, irrCAC.datasets.{name}; {what}",
                "table": False,
                "conger": True,
            }
        )

    from_irrcac(
        "raw_4raters",
        f"12 subjects x 4 raters, categories 1-5, with missing ratings; from {HANDBOOK} "
        "(the docstring cites Gwe14).",
        ("identity", "linear", "quadratic"),
    )
    from_irrcac(
        "raw_5observers",
        f"15 units x 5 observers, ordinal scale 0-3, with missing ratings; from {HANDBOOK} "
        "(the docstring cites Gwe14).",
        ("identity", "linear", "quadratic"),
    )
    from_irrcac(
        "raw_g1g2",
        "14 subjects x 4 raters, categories a-e, with missing ratings; the docstring gives no "
        f"citation, the package as a whole follows {HANDBOOK}. The Group column is dropped.",
    )
    from_irrcac(
        "raw_ben_gerry",
        "12 units x 2 raters (Ben, Gerry), categories a-e, one missing rating; the docstring "
        f"gives no citation, the package as a whole follows {HANDBOOK}. Group column dropped.",
    )
    from_irrcac(
        "raw_gender",
        "15 subjects x 4 raters, categories a-c, complete; the docstring gives no citation, the "
        f"package as a whole follows {HANDBOOK}. Only the ratings are kept: the Group column "
        "(subjects' recorded sex) is dropped and is not used.",
    )

    abstractors = datasets.table_cont3x3abstractors()
    wide = _expand_table(abstractors, ("Abstractor1", "Abstractor2"))
    specs.append(
        {
            "name": "cont3x3abstractors",
            "wide": wide,
            "items": list(range(1, len(wide) + 1)),
            "weights": ("identity",),
            "build": "_expand_table(irrCAC.datasets.table_cont3x3abstractors(), "
            "('Abstractor1', 'Abstractor2'))",
            "source": f"irrCAC {version('irrCAC')}, irrCAC.datasets.table_cont3x3abstractors "
            f"(a 3x3 contingency table of 100 subjects, cited Gwe14: {HANDBOOK}), expanded here "
            "to one row per subject: table rows are Abstractor1, columns Abstractor2; items "
            "numbered 1..100 row by row.",
            "table": abstractors,
            "conger": True,
        }
    )

    dist = datasets.distrib_6raters()
    wide = _expand_distribution(dist, 6)
    specs.append(
        {
            "name": "distrib_6raters",
            "wide": wide,
            "items": list(dist.index),
            "weights": ("identity",),
            "build": "_expand_distribution(irrCAC.datasets.distrib_6raters(), 6)",
            "source": f"irrCAC {version('irrCAC')}, irrCAC.datasets.distrib_6raters (counts of 6 "
            "psychiatrists per patient and diagnosis, 15 patients; the docstring cites Fle71, "
            "i.e. Fleiss (1971), Psychological Bulletin 76(5), 378-382 -- the citation is "
            "recalled from memory, the package only gives the key). Expanded here to made-up "
            "raters r1..r6 dealt in category order; Conger's kappa is not computed because it "
            "depends on rater identity, which the source does not record.",
            "table": False,
            "conger": False,
        }
    )

    random_sets = [
        ("random_30x4x3_missing", 30, 4, ["dune", "reef", "cove"], 0.7, 0.15, ("identity",)),
        ("random_50x2x4", 50, 2, [1, 2, 3, 4], 0.6, 0.0, ("identity", "linear", "quadratic")),
        ("random_20x6x2", 20, 6, ["yes", "no"], 0.75, 0.0, ("identity",)),
    ]
    for name, n_items, n_raters, cats, p_agree, p_missing, weights in random_sets:
        raters = [f"a{i}" for i in range(1, n_raters + 1)]
        wide = _random_wide(rng, n_items, raters, cats, p_agree, p_missing)
        table: Any = False
        if n_raters == 2 and p_missing == 0:
            table = pd.crosstab(wide[raters[0]], wide[raters[1]]).reindex(
                index=[float(c) for c in cats], columns=[float(c) for c in cats], fill_value=0
            )
        specs.append(
            {
                "name": name,
                "wide": wide,
                "items": [f"i{i:02d}" for i in range(1, n_items + 1)],
                "weights": weights,
                "build": f"random.Random({SEED}) shared across the three random sets, in order; "
                f"_random_wide(rng, {n_items}, {raters}, {cats}, p_agree={p_agree}, "
                f"p_missing={p_missing})",
                "source": f"invented by scripts/irrcac_reference.py (seeded, Python random); "
                f"statistics from irrCAC {version('irrCAC')}. No handbook source.",
                "table": table,
                "conger": True,
            }
        )
    return specs


def _write(path: Path, text: str, force: bool) -> bool:
    """Write text to path; refuse (return False) if a different file is already there."""
    if path.exists() and path.read_text(encoding="utf-8") != text and not force:
        print(f"{path}: exists with different content; not overwritten (use --force)")
        return False
    path.write_text(text, encoding="utf-8")
    return True


NOTES = [
    "All figures were computed by irrCAC (Python port of Gwet's R package irrCAC). 'rounded' is "
    "what irrCAC returns with its default digits=5; 'full' is the same computation with irrCAC's "
    "final rounding disabled. p_value is never rounded by irrCAC's raw.CAC.",
    "Notation (irrCAC.raw.CAC): subjects with no rating at all are dropped first (n = number of "
    "remaining subjects, including subjects with a single rating). r_ik = number of raters who "
    "put subject i in category k; r_i = sum_k r_ik; q = number of categories = the sorted set of "
    "all values that occur anywhere in the table (or the 'categories' argument if given; an "
    "unused category in that list changes q and so changes AC1's pe). W = q x q weight matrix "
    "(identity = unweighted); r*_ik = sum_l w_kl r_il.",
    "Percent agreement pa (same for gwet, fleiss, conger, bp): pa = (1/n2) * sum over subjects "
    "with r_i >= 2 of sum_k r_ik (r*_ik - 1) / (r_i (r_i - 1)), n2 = number of subjects with "
    "r_i >= 2. Subjects rated once do not enter pa.",
    "Class proportions for gwet and fleiss: pi_k = (1/n) * sum over ALL n subjects (including "
    "subjects rated only once) of r_ik / r_i -- the mean of per-subject proportions, not the "
    "pooled share of all ratings. The two coincide only when every subject has the same r_i.",
    "Gwet's AC1/AC2 (raw.CAC.gwet): pe = T_w * sum_k pi_k (1 - pi_k) / (q (q - 1)), with T_w = "
    "sum of all entries of W (T_w = q for identity weights, so pe = sum_k pi_k(1-pi_k)/(q-1)); "
    "AC1 = (pa - pe) / (1 - pe). This is the missing-data form in Gwet's handbook (4th ed., "
    "which irrCAC follows; the formula is read off irrCAC's source, its attribution to a "
    "particular handbook equation is recalled from memory). The name is 'AC1' when T_w == q "
    "else 'AC2'. If q < 2, pe is set to 1 - 1e-15.",
    "Fleiss' kappa (raw.CAC.fleiss): pa as above; pe = sum_{k,l} w_kl pi_k pi_l with the same "
    "pi_k; kappa = (pa - pe)/(1 - pe). With complete data (all r_i equal) this is Fleiss (1971) "
    "and equals statsmodels' fleiss_kappa; with missing ratings it generally differs from "
    "implementations that pool all ratings for pi_k or drop incomplete subjects.",
    "Krippendorff's alpha (raw.CAC.krippendorff): only subjects with r_i >= 2 are kept (n' of "
    "them, rbar = mean r_i over them); pa' = (1/n') sum_i sum_k r_ik (r*_ik - 1) / (rbar (r_i - "
    "1)); eps = 1/sum_i r_i; pa = (1 - eps) pa' + eps; pi_k = (1/n') sum_i r_ik / rbar (= the "
    "pooled share of pairable ratings); pe = sum_{k,l} w_kl pi_k pi_l; alpha = (pa - pe)/(1 - "
    "pe). With identity weights this is Krippendorff's nominal alpha.",
    "Conger's kappa (raw.CAC.conger): pa as above; pe = sum_{k,l} w_kl (pbar_k pbar_l - s2_kl / "
    "r), where p_gk = share of rater g's ratings in category k (over the subjects rater g "
    "rated), pbar_k = mean over the r raters of p_gk, s2_kl = sample covariance over raters of "
    "p_gk and p_gl (divisor r - 1). Not computed for distrib_6raters (rater identity unknown).",
    "Brennan-Prediger (raw.CAC.bp): pe = T_w / q^2; bp = (pa - pe)/(1 - pe).",
    "Weights (irrCAC.weights.Weights): if every category is a number, weights use the numeric "
    "values c (sorted): linear w_kl = 1 - |c_k - c_l| / (max c - min c), quadratic w_kl = 1 - "
    "((c_k - c_l) / (max c - min c))^2; otherwise categories are sorted as strings and replaced "
    "by ranks 1..q. All weighted data sets here use equally spaced integers, so value-based and "
    "rank-based weights coincide. The CSV labels are strings ('1'); read them as numbers (or in "
    "numeric order) to reproduce the weighted figures.",
    "table.CAC (two raters, complete data, from a q x q contingency table; rows = first rater): "
    "pa = sum_k w_kk-weighted diagonal share; gwet uses pi_k = (row share + column share)/2; "
    "cohen uses the product of the two raters' own marginals; krippendorff applies eps = 1/(2n) "
    "as above. For ben_gerry the table is built from the 11 subjects both raters rated.",
    "What this means for an AC1 implementation that must match irrCAC: (1) drop subjects with "
    "no rating; (2) q = all categories seen anywhere (or the declared scheme); (3) pi_k = mean "
    "over every remaining subject, single-rated ones included, of r_ik / r_i; (4) pa = mean over "
    "subjects with r_i >= 2 only; (5) pe = sum_k pi_k (1 - pi_k) / (q - 1) unweighted, or "
    "T_w sum_k pi_k (1 - pi_k) / (q (q - 1)) weighted. With complete data every variant agrees; "
    "with gaps they do not: gwet_raw_ben_gerry.csv gives AC1 0.66144 from raw.CAC (12 subjects, "
    "one rated once, which still enters pi_k) but 0.66154 from table.CAC on the 11 complete "
    "pairs. Gwet's 2008 paper states AC1 for complete data (pi_k = (1/n) sum_i r_ik / r); the "
    "r_i form above is its missing-data generalisation as irrCAC codes it (the 2008 form is "
    "recalled from memory; the irrCAC form is read off irrCAC/raw.py).",
    "Cross-checks run separately in the project venv (python 3.11.7, statsmodels 0.15.0, "
    "krippendorff 0.9.0, scikit-learn 1.9.1), not by this script: on every complete table "
    "statsmodels fleiss_kappa(method='fleiss') equals irrCAC fleiss and method='randolph' equals "
    "irrCAC bp (|diff| < 1e-15); statsmodels refuses tables with unequal rater counts (assert). "
    "krippendorff.alpha nominal equals irrCAC identity krippendorff on all ten sets, missing "
    "data included, and interval equals irrCAC quadratic krippendorff (|diff| < 1e-15). "
    "sklearn cohen_kappa_score (none/linear/quadratic) equals irrCAC table cohen and raw conger "
    "for complete 2-rater data; for ben_gerry raw conger (0.657143) differs from Cohen on the 11 "
    "pairs (0.65625) because each rater's marginals use all subjects that rater rated.",
    "Standard errors, z, p-values and confidence intervals follow irrCAC's variance formulas "
    "(t distribution with n - 1 degrees of freedom, 95% level, N = infinity, upper bound capped "
    "at 1); they are recorded for completeness, the coefficients and pa/pe are the values meant "
    "to be pinned.",
]


def main(argv: list[str] | None = None) -> int:
    """Write the CSVs and gwet_reference.json; return the exit code."""
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--out", type=Path, default=DEFAULT_OUT, help="output folder")
    parser.add_argument("--force", action="store_true", help="replace differing files")
    args = parser.parse_args(argv)
    args.out.mkdir(parents=True, exist_ok=True)

    reference: dict[str, Any] = {
        "generated_by": "scripts/irrcac_reference.py (run in a scratch venv, see its docstring)",
        "environment": {
            "python": platform.python_version(),
            "irrCAC": version("irrCAC"),
            "numpy": np.__version__,
            "pandas": pd.__version__,
            "scipy": scipy.__version__,
        },
        "calls": {
            "raw": "irrCAC.raw.CAC(wide, weights=<weights>).<method>() for method in "
            f"{list(RAW_METHODS)}; wide = items x raters DataFrame (NaN/None = missing); "
            "defaults otherwise (categories=None, confidence_level=0.95, N=inf, digits=5)",
            "table": "irrCAC.table.CAC(contingency_table).<method>() for method in "
            f"{list(TABLE_METHODS)} (two raters, complete pairs only)",
            "unrounded": "the same calls inside _unrounded(), which makes irrCAC's round and "
            "np.round the identity",
        },
        "notes": NOTES,
        "datasets": {},
    }
    ok = True
    for spec in _dataset_specs():
        wide: pd.DataFrame = spec["wide"]
        rows = _long_rows(wide, spec["items"])
        file_name = f"gwet_{spec['name']}.csv"
        numeric = all(
            isinstance(v, float | int | np.floating | np.integer) for v in wide.stack().tolist()
        )
        # The CSV must describe exactly the table irrCAC saw.
        _check_round_trip(rows, wide, spec["items"])
        ok &= _write(args.out / file_name, _csv_text(rows), args.force)

        entry: dict[str, Any] = {
            "source": spec["source"],
            "built_with": spec["build"],
            "n_items": int(wide.dropna(how="all").shape[0]),
            "n_annotators": int(wide.shape[1]),
            "n_ratings": len(rows),
            "n_missing": int(wide.dropna(how="all").isna().sum().sum()),
            "label_kind": "numeric" if numeric else "text",
            "results": {},
        }
        for weights in spec["weights"]:
            per_method: dict[str, Any] = {}
            matrices = []
            for method in RAW_METHODS:
                if method == "conger" and not spec["conger"]:
                    continue

                result = _run(functools.partial(irr_raw.CAC, wide, weights=weights), method)
                result["call"] = f"irrCAC.raw.CAC(wide, weights={weights!r}).{method}()"
                matrices.append((result.pop("_weights"), result.pop("_categories")))
                per_method[method] = result
            if any(m != matrices[0] for m in matrices):
                raise AssertionError("irrCAC used different weights for different methods")
            entry["results"][weights] = {
                "categories": matrices[0][1],
                "weight_matrix": matrices[0][0],
                **per_method,
            }

        table = spec["table"]
        if table is False and wide.shape[1] == 2:
            complete = wide.dropna()
            first, second = wide.columns
            cats = sorted(set(complete[first]) | set(complete[second]))
            table = pd.crosstab(complete[first], complete[second]).reindex(
                index=cats, columns=cats, fill_value=0
            )
            entry["table_note"] = (
                f"table built from the {len(complete)} subjects rated by both raters"
            )
        if table is not False:
            tab_results = {}
            for method in TABLE_METHODS:
                result = _run(functools.partial(irr_table.CAC, table), method)
                result["call"] = f"irrCAC.table.CAC(contingency_table).{method}()"
                result.pop("_categories")
                weights_used = result.pop("_weights")
                tab_results[method] = result
            entry["table"] = {
                "rows_are": str(wide.columns[0]),
                "columns_are": str(wide.columns[1]),
                "categories_in_order": _plain([_label_text(c) for c in table.index]),
                "contingency_table": _plain(table.to_numpy()),
                "weight_matrix": weights_used,
                "identity": tab_results,
            }
        reference["datasets"][file_name] = entry

    for file_name, part, weights, method, field, printed in DOCSTRING_VALUES:
        got = reference["datasets"][file_name][part][weights][method]["rounded"][field]
        if got != printed:
            raise AssertionError(
                f"{file_name} {part} {method} {field}: {got} != docstring {printed}"
            )
    reference["checked_against_irrcac_docstrings"] = [
        {"file": f, "part": p, "weights": w, "method": m, "field": k, "printed": v}
        for f, p, w, m, k, v in DOCSTRING_VALUES
    ]

    text = json.dumps(reference, indent=2, ensure_ascii=False, allow_nan=False) + "\n"
    ok &= _write(args.out / "gwet_reference.json", text, args.force)
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
