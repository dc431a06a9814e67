"""Annotator agreement: Krippendorff's alpha at every level, kappas, AC1, and their views.

Labels that judge people are often the ones annotators cannot agree on, so agreement is one of
the signals that put a label in front of a curator. This package is pure core: numpy, pandas
and scipy only; it prints nothing and raises :class:`~labelreview.errors.UsageError` for bad
parameters.

Naming rule, stated once: every statistic here is an agreement coefficient, and for all of
them higher is better (1 means perfect agreement; 0 means agreement at the level of chance for
the chance-corrected ones; negative values mean systematic disagreement). Distances
(:func:`masi_distance`) are the exception their name announces: lower means more alike.

Undefined figures are never NaN: the single statistics warn
:class:`UndefinedAgreementWarning` and return ``replace_undefined_by`` (None by default);
:func:`agreement_report` sets the figure to None and gives the reason beside it.

Input everywhere: the long annotation frame (``item``, ``annotator``, ``label``; one row per
item x annotator x label; several rows for one item x annotator make the data multi-label) or
a reliability matrix (annotators x items, None or NaN where missing).
"""

from __future__ import annotations

from labelreview.agreement._coding import LEVELS, as_long_frame
from labelreview.agreement._public import (
    UndefinedAgreementWarning,
    cohen_kappa,
    fleiss_kappa,
    gwet_ac1,
    krippendorff_alpha,
    masi_distance,
    pairable_counts,
    percent_agreement,
)
from labelreview.agreement._report import (
    LANDIS_KOCH,
    AgreementResult,
    AgreementThresholds,
    AnnotatorAgreement,
    LabelAgreement,
    LabelSplit,
    PairAgreement,
    agreement_report,
    interpret_alpha,
    interpret_kappa,
    per_label_alpha,
    report_from_sums,
)
from labelreview.agreement._streaming import stream_agreement, stream_per_label_alpha

__all__ = [
    "LANDIS_KOCH",
    "LEVELS",
    "AgreementResult",
    "AgreementThresholds",
    "AnnotatorAgreement",
    "LabelAgreement",
    "LabelSplit",
    "PairAgreement",
    "UndefinedAgreementWarning",
    "agreement_report",
    "as_long_frame",
    "cohen_kappa",
    "fleiss_kappa",
    "gwet_ac1",
    "interpret_alpha",
    "interpret_kappa",
    "krippendorff_alpha",
    "masi_distance",
    "pairable_counts",
    "per_label_alpha",
    "percent_agreement",
    "report_from_sums",
    "stream_agreement",
    "stream_per_label_alpha",
]
