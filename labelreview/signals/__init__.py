"""Data signals: what the annotations themselves say about the labels, beyond the lexicons.

A lexicon only finds the words someone thought of. Four signals read the data instead:

- **contested**: a label's one-vs-rest Krippendorff's alpha (from :mod:`labelreview.agreement`)
  is below ``signals.contested_below``; with the values it is most often split with.
- **group disparity**: a label is given at very different rates to items of different groups of
  an attribute the people described gave themselves, with consent (``items.attributes``):
  four-fifths ratio, chi-square test, Cramér's V, Benjamini-Hochberg, minimum expected counts,
  and groups under k items never shown. labelreview never infers an attribute.
- **proxy columns**: other item columns that carry much of a consented attribute (normalised
  mutual information, Cramér's V).
- **annotator skew**: an annotator who gives a label far more or less often than the others on
  the same items (exact binomial test, Benjamini-Hochberg), with the leave-one-out change of
  alpha from the agreement engine.

:func:`compute_signals` runs them all for a loaded dataset; :mod:`labelreview.queue` merges them
with the lexicon findings into the ranked review queue. Pure core: numpy, pandas and scipy; it
prints nothing. A disparity is a signal to investigate, never proof of bias.
"""

from __future__ import annotations

from labelreview.signals._compute import (
    NO_ATTRIBUTES,
    DataSignals,
    compute_signals,
    disparity_cautions,
)
from labelreview.signals._contested import ContestedLabel, Split, contested_labels
from labelreview.signals._disparity import (
    AttributeSummary,
    DisparityResult,
    GroupRate,
    group_disparity,
)
from labelreview.signals._judgements import Judgements, code_judgements
from labelreview.signals._proxy import TEXT_LENGTH, ProxyResult, proxy_columns
from labelreview.signals._skew import AnnotatorSummary, SkewResult, annotator_skew
from labelreview.signals._stats import (
    ChiSquare,
    benjamini_hochberg,
    binomial_two_sided,
    chi_square,
    cramers_v,
    format_p,
    mutual_information,
    normalised_mutual_information,
    rate_ratio,
)

__all__ = [
    "NO_ATTRIBUTES",
    "TEXT_LENGTH",
    "AnnotatorSummary",
    "AttributeSummary",
    "ChiSquare",
    "ContestedLabel",
    "DataSignals",
    "DisparityResult",
    "GroupRate",
    "Judgements",
    "ProxyResult",
    "SkewResult",
    "Split",
    "annotator_skew",
    "benjamini_hochberg",
    "binomial_two_sided",
    "chi_square",
    "code_judgements",
    "compute_signals",
    "contested_labels",
    "cramers_v",
    "disparity_cautions",
    "format_p",
    "group_disparity",
    "mutual_information",
    "normalised_mutual_information",
    "proxy_columns",
    "rate_ratio",
]
