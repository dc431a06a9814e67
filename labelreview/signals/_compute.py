"""All data signals for one loaded dataset, computed in one call."""

from __future__ import annotations

import time
import warnings
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

from labelreview.config import SignalsConfig
from labelreview.dataset import Dataset
from labelreview.errors import LabelReviewError
from labelreview.signals._contested import ContestedLabel, contested_labels
from labelreview.signals._disparity import AttributeSummary, DisparityResult, group_disparity
from labelreview.signals._judgements import code_judgements
from labelreview.signals._proxy import ProxyResult, proxy_columns
from labelreview.signals._skew import AnnotatorSummary, SkewResult, annotator_skew

if TYPE_CHECKING:
    from labelreview.agreement import AgreementResult

SPLITS_LISTED = 1000
"""How many value splits the agreement report lists for the contested labels' partners."""

NO_ATTRIBUTES = (
    "no consented, self-reported attribute is configured (items.attributes), so group "
    "disparity and proxy columns were not checked; labelreview never infers attributes"
)


def disparity_cautions(settings: SignalsConfig) -> tuple[str, ...]:
    """The cautions printed with every disparity result."""
    return (
        "A difference between groups is a signal to investigate, not proof of bias: groups can "
        "differ for reasons the items really show, and these tests cannot tell which.",
        "Attributes are used only because the people described gave them themselves and "
        "consented to their use; labelreview never infers them. Check that this use is within "
        "what they agreed to, and that local law and your ethics review allow it.",
        f"Small numbers: groups with fewer than {settings.min_group_size} items are never shown "
        "or tested, a test needs every expected count to reach "
        f"{settings.min_expected:g}, and rates from small groups swing widely.",
        "The four-fifths comparison (29 CFR 1607.4(D)) is used as a screening rule of thumb, "
        "not a legal test.",
    )


@dataclass(frozen=True)
class DataSignals:
    """Everything the data say about the labels, beyond the lexicons."""

    settings: SignalsConfig
    agreement: AgreementResult | None = None
    """The agreement report the contested and skew signals read (None: not computable)."""
    contested: tuple[ContestedLabel, ...] = ()
    disparity: tuple[DisparityResult, ...] = ()
    """Every label given in at least one shown group, per attribute (flagged or not)."""
    attributes: tuple[AttributeSummary, ...] = ()
    proxies: tuple[ProxyResult, ...] = ()
    skew: tuple[SkewResult, ...] = ()
    """Flagged (annotator, label) pairs."""
    skew_tests: int = 0
    annotators: tuple[AnnotatorSummary, ...] = ()
    notes: tuple[str, ...] = ()
    timings: dict[str, float] = field(default_factory=dict, compare=False)
    """Seconds per part (agreement, coding, disparity, proxies, skew), for the benchmark."""

    @property
    def attribute_names(self) -> tuple[str, ...]:
        return tuple(a.attribute for a in self.attributes)

    def disparity_to_show(self) -> list[DisparityResult]:
        """Flagged results, then those with a ratio below the threshold that were not flagged
        (too few items, or not significant), lowest ratio first."""
        limit = self.settings.disparity_ratio
        shown = [
            d for d in self.disparity if d.flagged or (d.ratio is not None and d.ratio < limit)
        ]
        return sorted(shown, key=lambda d: (not d.flagged, d.ratio or 0.0, d.label, d.attribute))

    def cautions(self) -> tuple[str, ...]:
        """The disparity cautions when attributes were used, else none."""
        return disparity_cautions(self.settings) if self.attributes else ()

    def to_dict(self) -> dict[str, Any]:
        return {
            "attributes": [a.to_dict() for a in self.attributes],
            "contested": [c.to_dict() for c in self.contested],
            "disparity": [d.to_dict() for d in self.disparity_to_show()],
            "proxies": [p.to_dict() for p in self.proxies],
            "annotator_skew": [s.to_dict() for s in self.skew],
            "annotator_skew_tests": self.skew_tests,
            "annotators": [a.to_dict() for a in self.annotators],
            "notes": list(self.notes),
            "cautions": list(self.cautions()),
        }


def compute_signals(dataset: Dataset, settings: SignalsConfig | None = None) -> DataSignals:
    """Contested labels, group disparity, proxy columns and annotator skew for a dataset.

    Never raises for data on which a signal is undefined (one annotator, no item table, no
    attribute): that signal is skipped and a note says why.

    Args:
        dataset: A loaded dataset (its config gives the attributes and agreement settings).
        settings: Overrides the config's ``signals`` section.
    """
    # Imported here: the agreement engine (with scipy) is not needed to start the review app,
    # which computes the signals in the background after its first paint.
    from labelreview.agreement import AgreementThresholds, agreement_report

    config = dataset.config
    settings = settings or config.signals
    notes: list[str] = []
    timings: dict[str, float] = {}
    frame = dataset.annotations
    attributes = tuple(a.column for a in config.items.attributes) if config.items else ()
    if frame is None or not len(frame):
        notes.append("no annotations, so no data signals (only the lexicons flag labels)")
        if not attributes:
            notes.append(NO_ATTRIBUTES)
        return DataSignals(settings=settings, notes=tuple(notes))

    started = time.perf_counter()
    agreement: AgreementResult | None = None
    n_annotators = int(frame["annotator"].nunique())
    if n_annotators < 2:
        notes.append(
            "agreement cannot be computed: the annotations come from a single annotator, so "
            "contested labels and annotator skew were not checked"
        )
    else:
        settings_a = config.agreement
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                agreement = agreement_report(
                    frame,
                    level=settings_a.level,
                    bootstrap=0,
                    seed=settings_a.seed,
                    thresholds=AgreementThresholds(settings_a.reliable, settings_a.tentative),
                    min_items=settings_a.min_items,
                    min_pair_items=settings_a.min_pair_items,
                    leave_out=True,
                    top_splits=SPLITS_LISTED,
                    pairwise=False,  # not used here; grows with the square of the labels
                )
        except LabelReviewError as exc:
            notes.append(
                f"agreement could not be computed ({exc.message}); contested labels and the "
                "leave-one-out change were not checked"
            )
        if agreement is not None and agreement.alpha is None:
            notes.append(
                f"agreement is undefined ({agreement.alpha_reason or 'no comparable items'}); "
                "per-label figures may be missing too"
            )
    timings["agreement"] = time.perf_counter() - started

    contested: list[ContestedLabel] = []
    if agreement is not None:
        contested = contested_labels(agreement, settings.contested_below)

    started = time.perf_counter()
    judgements = code_judgements(frame)
    timings["coding"] = time.perf_counter() - started

    skew: list[SkewResult] = []
    summaries: list[AnnotatorSummary] = []
    tests = 0
    started = time.perf_counter()
    if n_annotators >= 2:
        skew, summaries, tests = annotator_skew(judgements, settings, agreement)
    timings["skew"] = time.perf_counter() - started

    disparity: list[DisparityResult] = []
    attribute_summaries: list[AttributeSummary] = []
    proxies: list[ProxyResult] = []
    if not attributes:
        notes.append(NO_ATTRIBUTES)
    elif dataset.items is None:
        notes.append("attributes are configured but no item table was read; nothing to compare")
    else:
        started = time.perf_counter()
        disparity, attribute_summaries, more = group_disparity(
            judgements, dataset.items, attributes, settings
        )
        notes.extend(more)
        timings["disparity"] = time.perf_counter() - started
        started = time.perf_counter()
        proxies = proxy_columns(dataset.items, dataset.item_context, attributes, settings)
        timings["proxies"] = time.perf_counter() - started
    return DataSignals(
        settings=settings,
        agreement=agreement,
        contested=tuple(contested),
        disparity=tuple(disparity),
        attributes=tuple(attribute_summaries),
        proxies=tuple(proxies),
        skew=tuple(skew),
        skew_tests=tests,
        annotators=tuple(summaries),
        notes=tuple(notes),
        timings=timings,
    )
