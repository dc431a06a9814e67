"""The dataset folder's ``labelreview.yaml`` -> a validated, frozen :class:`DatasetConfig`.

The file says where the annotations, taxonomy and item table are and how to read them, whether
the items show people, which lexicon layers apply and how the scanner matches (schema version 1,
described in ``docs/CONTRACTS.md``). Every key is checked here, once, so the loaders and the
scanner can trust what they get: an unknown key or a bad value is a
:class:`~labelreview.errors.ConfigError` naming the file, line and column, with the allowed values.

A folder without the file still works: the files are detected by name and columns, the same way
:func:`write_starter_config` (behind ``labelreview init``) detects them to write a commented
starter file for the curator to check. That writer never replaces an existing file.
"""

from __future__ import annotations

import csv
import difflib
import io
import json
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

import yaml
from yaml.constructor import ConstructorError, SafeConstructor

from labelreview._yaml import compose
from labelreview.errors import ConfigError, UsageError
from labelreview.io._annotations import (
    ANNOTATION_FORMATS,
    LAYOUTS,
    match_roles,
    normalise_header,
)
from labelreview.io._common import TABLE_EXTENSIONS, check_encoding, json_kind
from labelreview.io._taxonomy import TAXONOMY_FORMATS
from labelreview.model import SEVERITIES, SUBJECTS, Severity, Subjects

CONFIG_NAME = "labelreview.yaml"
STARTER_FALLBACK_NAME = "labelreview.new.yaml"
SCHEMA_VERSION = 1


@dataclass(frozen=True)
class AnnotationsConfig:
    """The ``annotations:`` section."""

    path: Path | None
    """The annotation file (dataset folder joined in); None when none was found."""
    format: str = "auto"
    layout: str = "long"
    columns: dict[str, str] = field(default_factory=dict)
    """Role (item, annotator, label) -> the file's column; roles left out are detected."""
    annotator_columns: tuple[str, ...] = ()
    multi_label_separator: str | None = "|"
    encoding: str | None = None


@dataclass(frozen=True)
class TaxonomyConfig:
    """The ``taxonomy:`` section."""

    path: Path
    format: str = "auto"
    encoding: str | None = None


@dataclass(frozen=True)
class AttributeConfig:
    """One entry of ``items.attributes``: a column people filled in about themselves."""

    column: str
    consented: bool
    """The people described agreed to this use of the value."""
    self_reported: bool
    """The people described gave the value themselves (it was not guessed or inferred)."""


@dataclass(frozen=True)
class ItemsConfig:
    """The ``items:`` section."""

    path: Path
    columns: dict[str, str] = field(default_factory=dict)
    """Role (item, text, preview) -> the file's column."""
    attributes: tuple[AttributeConfig, ...] = ()
    encoding: str | None = None


@dataclass(frozen=True)
class LexiconsConfig:
    """The ``lexicons:`` section."""

    base: str | Path = "builtin"
    """``"builtin"`` for the shipped set, or a folder replacing it."""
    layers: tuple[Path, ...] = ()
    """Organisation layer, then dataset layer; applied in order."""


@dataclass(frozen=True)
class ScanConfig:
    """The ``scan:`` section."""

    fuzzy_threshold: float = 88.0
    """rapidfuzz ratio (0-100) a token needs to count as a misspelling of a term."""
    fuzzy_min_length: int = 5
    """Tokens shorter than this are never fuzzy-matched."""
    text_columns: tuple[str, ...] = ()
    """Free-text columns (captions, descriptions, comments) to scan as well as the labels: in
    the item table, or else in the annotation file. Empty: labels only."""


ENGINES: tuple[str, ...] = ("local", "dask")


@dataclass(frozen=True)
class EngineConfig:
    """The ``engine:`` section: where and how large data is read."""

    name: str = "local"
    """``local`` (this machine; large files are read in batches) or ``dask``."""
    scheduler: str | None = None
    """Dask: address of an existing scheduler (``tcp://host:8786``); None starts a local one."""
    stream_above_mb: float = 512.0
    """Local: read annotation files larger than this many megabytes in batches."""
    batch_mb: float = 16.0
    """Local, in batches: megabytes of text read per batch."""
    temp_dir: Path | None = None
    """Where a file not sorted by item is partitioned (None: the system's temporary folder)."""


AGREEMENT_LEVELS: tuple[str, ...] = ("nominal", "ordinal", "interval", "ratio")
LOG_NAME = "labelreview-log.jsonl"


@dataclass(frozen=True)
class AgreementConfig:
    """The ``agreement:`` section: defaults for ``labelreview agreement`` and its bands."""

    level: str = "nominal"
    """Measurement level of the labels: nominal, ordinal, interval or ratio."""
    reliable: float = 0.800
    """Alpha at or above this reads "reliable" (Krippendorff 2004, Content Analysis, 2nd ed.)."""
    tentative: float = 0.667
    """Alpha at or above this (and below ``reliable``) reads "tentative"; below, "unreliable"."""
    min_items: int = 10
    """A per-label alpha needs at least this many items carrying the label."""
    min_pair_items: int = 10
    """Cohen's kappa for an annotator pair needs at least this many shared items."""
    bootstrap: int = 1000
    """Bootstrap draws for alpha's confidence interval (0: no interval)."""
    seed: int = 0
    """Seed of the bootstrap, so the interval is reproducible."""


@dataclass(frozen=True)
class DecisionsConfig:
    """The ``decisions:`` section: the decision log and the rules decisions must follow."""

    log: Path | None = None
    """The decision log; None means ``labelreview-log.jsonl`` in the dataset folder."""
    min_reason_length: int = 10
    """Shortest reason accepted for a decision, in characters (after trimming)."""
    fail_on: Severity = "medium"
    """The gate level: unresolved flags at or above it block ``apply``, ``signoff``, ``check``."""
    retire_fallbacks: dict[str, str] = field(default_factory=dict)
    """Label -> the label its annotations move to when it is retired without a fallback."""
    four_eyes: bool = False
    """Refuse a sign-off by anyone who made a high-severity decision themselves."""


@dataclass(frozen=True)
class CompareConfig:
    """The ``compare:`` section."""

    agreement_drop: float = 0.10
    """A label whose per-label alpha fell by more than this between versions needs a look."""


@dataclass(frozen=True)
class SignalsConfig:
    """The ``signals:`` section: thresholds of the data signals (``labelreview.signals``)."""

    contested_below: float = 0.667
    """A label whose one-vs-rest alpha is below this is contested (Krippendorff 2004's
    "tentative" bound). Labels need ``agreement.min_items`` comparable items to get an alpha."""
    fdr: float = 0.05
    """Benjamini-Hochberg false discovery rate, over all tests of one kind."""
    disparity_ratio: float = 0.8
    """Lowest-to-highest group rate ratio below which a label is flagged (the four-fifths rule
    of thumb, 29 CFR 1607.4(D), used as a screening heuristic)."""
    min_group_size: int = 10
    """k: groups with fewer items are never shown or tested."""
    min_expected: float = 5.0
    """The chi-square test is run only when every expected cell count reaches this."""
    proxy_nmi: float = 0.25
    """An item column whose normalised mutual information with an attribute reaches this is
    reported as standing in for it ..."""
    proxy_cramers_v: float = 0.5
    """... as is one whose Cramér's V reaches this."""
    proxy_columns: tuple[str, ...] | None = None
    """Item columns checked as stand-ins; None: every column but the item, text and preview
    roles and the attributes (plus the text's length); ``[]``: none."""
    proxy_max_levels: int = 50
    """Text columns with more distinct values than this (ids, free text) are not checked."""
    skew_ratio: float = 0.5
    """An annotator whose rate for a label, against the others' on the same items, has a
    lower-to-higher ratio below this is flagged (when the test also holds)."""
    skew_min_items: int = 20
    """Annotators need this many comparable items to be tested."""


QUEUE_WEIGHT_KEYS: tuple[str, ...] = (
    "lexicon",
    "contested",
    "disparity",
    "annotator_skew",
    "prevalence",
)
QUEUE_SEVERITY_KEYS: tuple[str, ...] = ("contested", "disparity", "annotator_skew")


def _default_weights() -> dict[str, float]:
    return {
        "lexicon": 3.0,
        "contested": 2.0,
        "disparity": 3.0,
        "annotator_skew": 1.0,
        "prevalence": 1.0,
    }


def _default_signal_severity() -> dict[str, Severity]:
    return {"contested": "low", "disparity": "medium", "annotator_skew": "low"}


@dataclass(frozen=True)
class QueueConfig:
    """The ``queue:`` section: how the review queue scores and grades its entries."""

    weights: dict[str, float] = field(default_factory=_default_weights)
    """Weight of each score component (:data:`QUEUE_WEIGHT_KEYS`); 0 switches one off."""
    severity: dict[str, Severity] = field(default_factory=_default_signal_severity)
    """The severity each data signal gives a label (:data:`QUEUE_SEVERITY_KEYS`)."""


@dataclass(frozen=True)
class DatasetConfig:
    """A dataset folder's settings, validated; paths are joined to the folder."""

    root: Path
    """The dataset folder."""
    source: Path | None = None
    """The ``labelreview.yaml`` read, or None when the folder has none (all detected)."""
    version: int = SCHEMA_VERSION
    name: str = ""
    subjects: Subjects | None = None
    """Do the items depict or describe people? None when the config does not say (the scan
    then uses ``mixed`` and says so)."""
    annotations: AnnotationsConfig | None = None
    taxonomy: TaxonomyConfig | None = None
    items: ItemsConfig | None = None
    lexicons: LexiconsConfig = field(default_factory=LexiconsConfig)
    scan: ScanConfig = field(default_factory=ScanConfig)
    agreement: AgreementConfig = field(default_factory=AgreementConfig)
    decisions: DecisionsConfig = field(default_factory=DecisionsConfig)
    compare: CompareConfig = field(default_factory=CompareConfig)
    signals: SignalsConfig = field(default_factory=SignalsConfig)
    queue: QueueConfig = field(default_factory=QueueConfig)
    engine: EngineConfig = field(default_factory=EngineConfig)
    curator: str | None = None
    notes: tuple[str, ...] = ()
    """What detection found or could not decide, in plain sentences."""
    lines: dict[str, int] = field(default_factory=dict, compare=False, repr=False)
    """Dotted key (``annotations.path``) -> its line in ``source``, for later messages."""

    @property
    def log_path(self) -> Path:
        """Where the decision log lives (configured, else ``labelreview-log.jsonl`` here)."""
        return self.decisions.log if self.decisions.log is not None else self.root / LOG_NAME

    def line_of(self, key: str) -> int | None:
        """The line of a dotted key in ``labelreview.yaml``, if it was written there."""
        return self.lines.get(key)


# -- reading YAML nodes with their positions -------------------------------------------------


_TOP_KEYS = (
    "version",
    "name",
    "subjects",
    "annotations",
    "taxonomy",
    "items",
    "lexicons",
    "scan",
    "agreement",
    "decisions",
    "compare",
    "signals",
    "queue",
    "engine",
    "curator",
)
_ANNOTATION_KEYS = (
    "path",
    "format",
    "layout",
    "columns",
    "annotator_columns",
    "multi_label_separator",
    "encoding",
)
_TAXONOMY_KEYS = ("path", "format", "encoding")
_ITEM_KEYS = ("path", "columns", "attributes", "encoding")
_ATTRIBUTE_KEYS = ("column", "consented", "self_reported")
_LEXICON_KEYS = ("base", "layers")
_SCAN_KEYS = ("fuzzy_threshold", "fuzzy_min_length", "text_columns")
_ENGINE_KEYS = ("name", "scheduler", "stream_above_mb", "batch_mb", "temp_dir")
_AGREEMENT_KEYS = (
    "level",
    "reliable",
    "tentative",
    "min_items",
    "min_pair_items",
    "bootstrap",
    "seed",
)
_DECISION_KEYS = ("log", "min_reason_length", "fail_on", "retire_fallbacks", "four_eyes")
_COMPARE_KEYS = ("agreement_drop",)
_SIGNAL_KEYS = (
    "contested_below",
    "fdr",
    "disparity_ratio",
    "min_group_size",
    "min_expected",
    "proxy_nmi",
    "proxy_cramers_v",
    "proxy_columns",
    "proxy_max_levels",
    "skew_ratio",
    "skew_min_items",
)
_QUEUE_KEYS = ("weights", "severity")
_NULL = "tag:yaml.org,2002:null"


class _Reader:
    """Validates a composed YAML tree, raising ConfigError at the offending node."""

    def __init__(self, path: Path, root: Path) -> None:
        self.path = path
        self.root = root
        self.lines: dict[str, int] = {}
        self._constructor = SafeConstructor()

    def error(self, node: yaml.Node, message: str, hint: str | None = None) -> ConfigError:
        return ConfigError(
            message,
            hint=hint,
            source=str(self.path),
            line=node.start_mark.line + 1,
            column=node.start_mark.column + 1,
        )

    def value(self, node: yaml.Node) -> Any:
        try:
            return self._constructor.construct_object(node, deep=True)
        except ConstructorError as exc:
            raise self.error(node, f"cannot read this value: {exc.problem}") from None

    @staticmethod
    def is_null(node: yaml.Node) -> bool:
        return isinstance(node, yaml.ScalarNode) and node.tag == _NULL

    def mapping(self, node: yaml.Node, key: str, allowed: tuple[str, ...]) -> dict[str, yaml.Node]:
        """A mapping's entries by key, refusing unknown and repeated keys."""
        where = f"'{key}'" if key else "the file"
        if not isinstance(node, yaml.MappingNode):
            raise self.error(node, f"{where} must be a mapping of keys to values")
        out: dict[str, yaml.Node] = {}
        for key_node, value_node in node.value:
            name = self.value(key_node) if isinstance(key_node, yaml.ScalarNode) else None
            if not isinstance(name, str):
                raise self.error(key_node, "keys must be plain words")
            dotted = f"{key}.{name}" if key else name
            if name not in allowed:
                close = difflib.get_close_matches(name, allowed, n=1)
                hint = f"Did you mean '{close[0]}'?" if close else None
                known = ", ".join(allowed)
                raise self.error(
                    key_node,
                    f"unknown key '{dotted}'; known keys here: {known}",
                    hint,
                )
            if name in out:
                raise self.error(key_node, f"key '{dotted}' appears twice")
            out[name] = value_node
            self.lines[dotted] = key_node.start_mark.line + 1
        return out

    def text(self, node: yaml.Node, key: str, *, nullable: bool = False) -> str | None:
        if nullable and self.is_null(node):
            return None
        value = self.value(node)
        if isinstance(value, bool) or not isinstance(value, (str, int, float)):
            expected = "text or null" if nullable else "text"
            raise self.error(node, f"'{key}' must be {expected}, not {_kind(value)}")
        value = str(value)
        if not value.strip():
            raise self.error(node, f"'{key}' is empty")
        return value

    def choice(self, node: yaml.Node, key: str, allowed: tuple[str, ...]) -> str:
        value = self.value(node)
        if value not in allowed:
            close = difflib.get_close_matches(str(value), allowed, n=1)
            hint = f"Did you mean '{close[0]}'?" if close else None
            raise self.error(
                node, f"'{key}' must be one of {', '.join(allowed)}; got {value!r}", hint
            )
        return str(value)

    def flag(self, node: yaml.Node, key: str) -> bool:
        value = self.value(node)
        if not isinstance(value, bool):
            raise self.error(node, f"'{key}' must be true or false; got {value!r}")
        return value

    def number(
        self, node: yaml.Node, key: str, low: float, high: float | None, integer: bool
    ) -> float:
        value = self.value(node)
        ok_type = isinstance(value, int) if integer else isinstance(value, (int, float))
        if isinstance(value, bool) or not ok_type:
            kind = "a whole number" if integer else "a number"
            raise self.error(node, f"'{key}' must be {kind}; got {value!r}")
        if value < low or (high is not None and value > high):
            span = f"between {low:g} and {high:g}" if high is not None else f"at least {low:g}"
            raise self.error(node, f"'{key}' must be {span}; got {value!r}")
        return float(value)

    def text_list(self, node: yaml.Node, key: str) -> tuple[str, ...]:
        if self.is_null(node):
            return ()
        if not isinstance(node, yaml.SequenceNode):
            raise self.error(node, f"'{key}' must be a list")
        return tuple(str(self.text(child, f"{key} entry")) for child in node.value)

    def column_map(self, node: yaml.Node, key: str, roles: tuple[str, ...]) -> dict[str, str]:
        if self.is_null(node):
            return {}
        entries = self.mapping(node, key, roles)
        out = {role: str(self.text(child, f"{key}.{role}")) for role, child in entries.items()}
        seen: dict[str, str] = {}
        for role, column in out.items():
            if column in seen:
                raise self.error(
                    entries[role], f"'{key}' maps both {seen[column]} and {role} to '{column}'"
                )
            seen[column] = role
        return out

    def file(self, node: yaml.Node, key: str) -> Path:
        value = str(self.text(node, key))
        candidate = Path(value).expanduser()
        return candidate if candidate.is_absolute() else self.root / candidate

    def encoding(self, node: yaml.Node, key: str) -> str | None:
        value = self.text(node, key, nullable=True)
        if value is None:
            return None
        try:
            check_encoding(value)
        except UsageError as exc:
            raise self.error(node, f"'{key}': {exc.message}", exc.hint) from None
        return value


def _kind(value: Any) -> str:
    if value is None:
        return "null"
    if isinstance(value, bool):
        return "true/false"
    if isinstance(value, dict):
        return "a mapping"
    if isinstance(value, list):
        return "a list"
    return type(value).__name__


def _parse(path: Path, root: Path, text: str) -> DatasetConfig:
    tree = compose(path, text, ConfigError)
    reader = _Reader(path, root)
    if tree is None:
        top: dict[str, yaml.Node] = {}
    else:
        top = reader.mapping(tree, "", _TOP_KEYS)

    version = SCHEMA_VERSION
    if "version" in top:
        value = reader.value(top["version"])
        if value != SCHEMA_VERSION or isinstance(value, bool):
            raise reader.error(
                top["version"],
                f"'version' must be {SCHEMA_VERSION} (the only schema this labelreview reads); "
                f"got {value!r}",
            )
    name = root.resolve().name
    if "name" in top:
        name = str(reader.text(top["name"], "name"))
    subjects: Subjects | None = None
    if "subjects" in top:
        subjects = reader.choice(top["subjects"], "subjects", SUBJECTS)  # type: ignore[assignment]
    curator = None
    if "curator" in top:
        curator = reader.text(top["curator"], "curator", nullable=True)

    annotations = None
    annotations_given = "annotations" in top and not reader.is_null(top["annotations"])
    if annotations_given:
        annotations = _annotations(reader, top["annotations"])
    taxonomy = None
    if "taxonomy" in top and not reader.is_null(top["taxonomy"]):
        section = reader.mapping(top["taxonomy"], "taxonomy", _TAXONOMY_KEYS)
        if "path" not in section:
            raise reader.error(top["taxonomy"], "'taxonomy' needs a 'path'")
        taxonomy = TaxonomyConfig(
            path=reader.file(section["path"], "taxonomy.path"),
            format=reader.choice(section["format"], "taxonomy.format", TAXONOMY_FORMATS)
            if "format" in section
            else "auto",
            encoding=reader.encoding(section["encoding"], "taxonomy.encoding")
            if "encoding" in section
            else None,
        )
    items = None
    if "items" in top and not reader.is_null(top["items"]):
        items = _items(reader, top["items"])
    lexicons = LexiconsConfig()
    if "lexicons" in top and not reader.is_null(top["lexicons"]):
        section = reader.mapping(top["lexicons"], "lexicons", _LEXICON_KEYS)
        base: str | Path = "builtin"
        if "base" in section:
            raw = str(reader.text(section["base"], "lexicons.base"))
            base = "builtin" if raw == "builtin" else reader.file(section["base"], "lexicons.base")
        layers: tuple[Path, ...] = ()
        if "layers" in section:
            node = section["layers"]
            reader.text_list(node, "lexicons.layers")
            if isinstance(node, yaml.SequenceNode):
                layers = tuple(reader.file(child, "lexicons.layers entry") for child in node.value)
        lexicons = LexiconsConfig(base=base, layers=layers)
    scan = ScanConfig()
    if "scan" in top and not reader.is_null(top["scan"]):
        section = reader.mapping(top["scan"], "scan", _SCAN_KEYS)
        threshold = scan.fuzzy_threshold
        min_length = scan.fuzzy_min_length
        if "fuzzy_threshold" in section:
            threshold = reader.number(
                section["fuzzy_threshold"], "scan.fuzzy_threshold", 0, 100, integer=False
            )
        if "fuzzy_min_length" in section:
            min_length = int(
                reader.number(
                    section["fuzzy_min_length"], "scan.fuzzy_min_length", 1, None, integer=True
                )
            )
        text_columns: tuple[str, ...] = ()
        if "text_columns" in section:
            text_columns = reader.text_list(section["text_columns"], "scan.text_columns")
        scan = ScanConfig(
            fuzzy_threshold=threshold, fuzzy_min_length=min_length, text_columns=text_columns
        )
    engine = _engine(reader, top["engine"]) if "engine" in top else EngineConfig()

    agreement = _agreement(reader, top["agreement"]) if "agreement" in top else AgreementConfig()
    decisions = _decisions(reader, top["decisions"]) if "decisions" in top else DecisionsConfig()
    compare = CompareConfig()
    if "compare" in top and not reader.is_null(top["compare"]):
        section = reader.mapping(top["compare"], "compare", _COMPARE_KEYS)
        if "agreement_drop" in section:
            compare = CompareConfig(
                agreement_drop=reader.number(
                    section["agreement_drop"], "compare.agreement_drop", 0, 2, integer=False
                )
            )

    signals = _signals(reader, top["signals"]) if "signals" in top else SignalsConfig()
    queue = _queue(reader, top["queue"]) if "queue" in top else QueueConfig()

    config = DatasetConfig(
        root=root,
        source=path,
        version=version,
        name=name,
        subjects=subjects,
        annotations=annotations,
        taxonomy=taxonomy,
        items=items,
        lexicons=lexicons,
        scan=scan,
        agreement=agreement,
        decisions=decisions,
        compare=compare,
        signals=signals,
        queue=queue,
        engine=engine,
        curator=curator,
        lines=dict(reader.lines),
    )
    if annotations is None or annotations.path is None:
        found = _sniff(root)
        notes = list(found.notes)
        if found.annotations is not None:
            base_config = annotations or AnnotationsConfig(path=None)
            layout = base_config.layout if annotations_given else found.annotations.layout
            annotations = AnnotationsConfig(
                path=found.annotations.path,
                format=base_config.format,
                layout=layout,
                columns=base_config.columns,
                annotator_columns=base_config.annotator_columns,
                multi_label_separator=base_config.multi_label_separator,
                encoding=base_config.encoding,
            )
            notes.append(
                f"annotations.path is not set; using {found.annotations.path.name} (detected)"
            )
        config = replace(config, annotations=annotations, notes=tuple(notes))
    return config


def _agreement(reader: _Reader, node: yaml.Node) -> AgreementConfig:
    if reader.is_null(node):
        return AgreementConfig()
    section = reader.mapping(node, "agreement", _AGREEMENT_KEYS)
    defaults = AgreementConfig()
    values: dict[str, Any] = {}
    if "level" in section:
        values["level"] = reader.choice(section["level"], "agreement.level", AGREEMENT_LEVELS)
    for key in ("reliable", "tentative"):
        if key in section:
            values[key] = reader.number(section[key], f"agreement.{key}", -1, 1, integer=False)
    for key, low in (("min_items", 1), ("min_pair_items", 1), ("bootstrap", 0), ("seed", 0)):
        if key in section:
            values[key] = int(reader.number(section[key], f"agreement.{key}", low, None, True))
    result = replace(defaults, **values)
    if result.tentative > result.reliable:
        where = section.get("tentative") or section.get("reliable") or node
        raise reader.error(
            where,
            f"'agreement.tentative' ({result.tentative:g}) must not be above "
            f"'agreement.reliable' ({result.reliable:g})",
        )
    return result


def _signals(reader: _Reader, node: yaml.Node) -> SignalsConfig:
    if reader.is_null(node):
        return SignalsConfig()
    section = reader.mapping(node, "signals", _SIGNAL_KEYS)
    values: dict[str, Any] = {}
    # (key, lowest, highest, whole number)
    bounds: dict[str, tuple[float, float | None, bool]] = {
        "contested_below": (-1, 1, False),
        "fdr": (0, 1, False),
        "disparity_ratio": (0, 1, False),
        "min_group_size": (1, None, True),
        "min_expected": (0, None, False),
        "proxy_nmi": (0, 1, False),
        "proxy_cramers_v": (0, 1, False),
        "proxy_max_levels": (2, None, True),
        "skew_ratio": (0, 1, False),
        "skew_min_items": (1, None, True),
    }
    for key, (low, high, whole) in bounds.items():
        if key in section:
            number = reader.number(section[key], f"signals.{key}", low, high, whole)
            values[key] = int(number) if whole else number
    if "fdr" in values and values["fdr"] <= 0:
        raise reader.error(section["fdr"], "'signals.fdr' must be above 0; got 0")
    if "proxy_columns" in section:
        node = section["proxy_columns"]
        values["proxy_columns"] = (
            None if reader.is_null(node) else reader.text_list(node, "signals.proxy_columns")
        )
    return replace(SignalsConfig(), **values)


def _queue(reader: _Reader, node: yaml.Node) -> QueueConfig:
    if reader.is_null(node):
        return QueueConfig()
    section = reader.mapping(node, "queue", _QUEUE_KEYS)
    weights = _default_weights()
    if "weights" in section and not reader.is_null(section["weights"]):
        entries = reader.mapping(section["weights"], "queue.weights", QUEUE_WEIGHT_KEYS)
        for key, child in entries.items():
            weights[key] = reader.number(child, f"queue.weights.{key}", 0, 1000, integer=False)
        if not any(weights.values()):
            raise reader.error(
                section["weights"],
                "'queue.weights' are all 0; at least one must be above 0 to rank the queue",
            )
    severity = _default_signal_severity()
    if "severity" in section and not reader.is_null(section["severity"]):
        entries = reader.mapping(section["severity"], "queue.severity", QUEUE_SEVERITY_KEYS)
        for key, child in entries.items():
            severity[key] = reader.choice(child, f"queue.severity.{key}", SEVERITIES)  # type: ignore[assignment]
    return QueueConfig(weights=weights, severity=severity)


def _engine(reader: _Reader, node: yaml.Node) -> EngineConfig:
    if reader.is_null(node):
        return EngineConfig()
    section = reader.mapping(node, "engine", _ENGINE_KEYS)
    values: dict[str, Any] = {}
    if "name" in section:
        values["name"] = reader.choice(section["name"], "engine.name", ENGINES)
    if "scheduler" in section:
        values["scheduler"] = reader.text(section["scheduler"], "engine.scheduler", nullable=True)
    for key, low in (("stream_above_mb", 0.0), ("batch_mb", 1.0)):
        if key in section:
            values[key] = reader.number(section[key], f"engine.{key}", low, None, integer=False)
    if "temp_dir" in section and not reader.is_null(section["temp_dir"]):
        values["temp_dir"] = reader.file(section["temp_dir"], "engine.temp_dir")
    return replace(EngineConfig(), **values)


def _decisions(reader: _Reader, node: yaml.Node) -> DecisionsConfig:
    if reader.is_null(node):
        return DecisionsConfig()
    section = reader.mapping(node, "decisions", _DECISION_KEYS)
    values: dict[str, Any] = {}
    if "log" in section:
        values["log"] = reader.file(section["log"], "decisions.log")
    if "min_reason_length" in section:
        values["min_reason_length"] = int(
            reader.number(
                section["min_reason_length"], "decisions.min_reason_length", 1, None, True
            )
        )
    if "fail_on" in section:
        values["fail_on"] = reader.choice(section["fail_on"], "decisions.fail_on", SEVERITIES)
    if "four_eyes" in section:
        values["four_eyes"] = reader.flag(section["four_eyes"], "decisions.four_eyes")
    if "retire_fallbacks" in section and not reader.is_null(section["retire_fallbacks"]):
        mapping = section["retire_fallbacks"]
        if not isinstance(mapping, yaml.MappingNode):
            raise reader.error(
                mapping, "'decisions.retire_fallbacks' must map labels to fallback labels"
            )
        fallbacks: dict[str, str] = {}
        for key_node, value_node in mapping.value:
            label = str(reader.text(key_node, "decisions.retire_fallbacks key"))
            if label in fallbacks:
                raise reader.error(
                    key_node, f"label '{label}' appears twice in 'decisions.retire_fallbacks'"
                )
            target = str(reader.text(value_node, f"decisions.retire_fallbacks.{label}"))
            if target == label:
                raise reader.error(value_node, f"label '{label}' cannot fall back to itself")
            fallbacks[label] = target
        values["retire_fallbacks"] = fallbacks
    return replace(DecisionsConfig(), **values)


def _annotations(reader: _Reader, node: yaml.Node) -> AnnotationsConfig:
    section = reader.mapping(node, "annotations", _ANNOTATION_KEYS)
    path = reader.file(section["path"], "annotations.path") if "path" in section else None
    layout = (
        reader.choice(section["layout"], "annotations.layout", LAYOUTS)
        if "layout" in section
        else "long"
    )
    columns = (
        reader.column_map(section["columns"], "annotations.columns", ("item", "annotator", "label"))
        if "columns" in section
        else {}
    )
    annotator_columns: tuple[str, ...] = ()
    if "annotator_columns" in section:
        annotator_columns = reader.text_list(
            section["annotator_columns"], "annotations.annotator_columns"
        )
        if annotator_columns and layout != "wide":
            raise reader.error(
                section["annotator_columns"],
                "'annotations.annotator_columns' applies only to the wide layout",
                "Set annotations.layout: wide, or remove annotator_columns.",
            )
    if layout == "wide":
        extra = sorted(set(columns) - {"item"})
        if extra:
            raise reader.error(
                section["columns"],
                f"'annotations.columns.{extra[0]}' does not apply to the wide layout, where "
                "each annotator has a column named after them",
                "Keep only annotations.columns.item.",
            )
    separator: str | None = "|"
    if "multi_label_separator" in section:
        node = section["multi_label_separator"]
        value = None if reader.is_null(node) else reader.value(node)
        if value is not None and (not isinstance(value, str) or value == ""):
            raise reader.error(
                node,
                "'annotations.multi_label_separator' must be the text between labels in a "
                f"cell, or null; got {value!r}",
                'For example "|" or ";"; null never splits cells.',
            )
        separator = value
    return AnnotationsConfig(
        path=path,
        format=reader.choice(section["format"], "annotations.format", ANNOTATION_FORMATS)
        if "format" in section
        else "auto",
        layout=layout,
        columns=columns,
        annotator_columns=annotator_columns,
        multi_label_separator=separator,
        encoding=reader.encoding(section["encoding"], "annotations.encoding")
        if "encoding" in section
        else None,
    )


def _items(reader: _Reader, node: yaml.Node) -> ItemsConfig:
    section = reader.mapping(node, "items", _ITEM_KEYS)
    if "path" not in section:
        raise reader.error(node, "'items' needs a 'path'")
    columns = (
        reader.column_map(section["columns"], "items.columns", ("item", "text", "preview"))
        if "columns" in section
        else {}
    )
    attributes: list[AttributeConfig] = []
    if "attributes" in section and not reader.is_null(section["attributes"]):
        listing = section["attributes"]
        if not isinstance(listing, yaml.SequenceNode):
            raise reader.error(listing, "'items.attributes' must be a list")
        seen: set[str] = set()
        for entry in listing.value:
            fields = reader.mapping(entry, "items.attributes entry", _ATTRIBUTE_KEYS)
            if "column" not in fields:
                raise reader.error(entry, "an items.attributes entry needs a 'column'")
            column = str(reader.text(fields["column"], "column"))
            marks = {
                key: reader.flag(fields[key], key) if key in fields else False
                for key in ("consented", "self_reported")
            }
            unmet = [key for key, value in marks.items() if not value]
            if unmet:
                needed = " and ".join(f"{key}: true" for key in unmet)
                raise reader.error(
                    entry,
                    f"attribute column '{column}' is not marked {needed}; labelreview never "
                    "uses attributes without consent and never infers them",
                    "Mark it only if the people described gave this value themselves and "
                    "agreed to its use; otherwise remove the entry.",
                )
            if column in seen:
                raise reader.error(fields["column"], f"attribute column '{column}' is listed twice")
            if column in columns.values():
                raise reader.error(
                    fields["column"],
                    f"column '{column}' is already used in items.columns",
                )
            seen.add(column)
            attributes.append(AttributeConfig(column=column, consented=True, self_reported=True))
    return ItemsConfig(
        path=reader.file(section["path"], "items.path"),
        columns=columns,
        attributes=tuple(attributes),
        encoding=reader.encoding(section["encoding"], "items.encoding")
        if "encoding" in section
        else None,
    )


# -- detecting files -------------------------------------------------------------------------

_ANNOTATION_WORDS = (
    "annotation",
    "label",
    "tag",
    "rating",
    "vote",
    "judg",
    "response",
    "instances",
    "coding",
)
_TAXONOMY_WORDS = (
    "taxonomy",
    "vocab",
    "categor",
    "classes",
    "label_set",
    "labelset",
    "labels",
    "tags",
    "ontology",
    "tagset",
)
_ITEM_WORDS = (
    "item",
    "image",
    "photo",
    "metadata",
    "media",
    "document",
    "text",
    "example",
    "sample",
    "caption",
    "record",
)
_TEXT_NAMES = ("text", "caption", "description", "sentence")
_PREVIEW_NAMES = (
    "preview",
    "image_file",
    "image_path",
    "file",
    "filename",
    "file_name",
    "path",
    "url",
    "image_url",
    "thumbnail",
)


@dataclass
class _Found:
    path: Path
    kind: str
    score: int
    fmt: str = "auto"
    layout: str = "long"
    columns: dict[str, str] = field(default_factory=dict)
    ambiguous: dict[str, list[str]] = field(default_factory=dict)
    missing: list[str] = field(default_factory=list)
    not_utf8: bool = False


@dataclass
class _Sniffed:
    annotations: _Found | None = None
    taxonomy: _Found | None = None
    items: _Found | None = None
    notes: list[str] = field(default_factory=list)
    files: list[str] = field(default_factory=list)


def _peek(path: Path, size: int = 1 << 16) -> bytes:
    try:
        with path.open("rb") as handle:
            return handle.read(size)
    except OSError:
        return b""


def _header_of(path: Path, fmt: str) -> tuple[list[str], bool] | None:
    """Column names of a tabular file and whether its start is valid UTF-8 (None: unreadable)."""
    head = _peek(path)
    if not head.strip():
        return None
    if head.startswith(b"\xef\xbb\xbf"):
        head = head[3:]
    try:
        head.decode("utf-8")
        utf8 = True
    except UnicodeDecodeError as exc:
        utf8 = exc.start >= len(head) - 3
    text = head.decode("utf-8", errors="replace")
    try:
        if fmt in ("csv", "tsv"):
            reader = csv.reader(
                io.StringIO(text, newline=""), delimiter="," if fmt == "csv" else "\t"
            )
            return [c.strip() for c in next(reader, [])], utf8
        if fmt == "jsonl":
            for line in text.splitlines():
                if line.strip():
                    record = json.loads(line)
                    if not isinstance(record, dict):
                        return None
                    return [str(key) for key in record], utf8
            return None
        if fmt == "parquet":
            import pyarrow.parquet as pq

            return list(pq.read_schema(path).names), True
    except Exception:  # noqa: BLE001 - an unreadable file is simply not a candidate
        return None
    return None


def _has_word(stem: str, words: tuple[str, ...]) -> bool:
    return any(word in stem for word in words)


def _classify(path: Path) -> list[_Found]:
    stem = path.stem.lower()
    suffix = path.suffix.lower()
    out: list[_Found] = []
    if suffix in (".txt", ".text", ".lst", ".yaml", ".yml"):
        if _has_word(stem, _TAXONOMY_WORDS):
            out.append(_Found(path, "taxonomy", 3))
        return out
    fmt = TABLE_EXTENSIONS.get(suffix)
    if fmt is None:
        return out
    if fmt == "json":
        data = path.read_bytes() if path.stat().st_size < (512 << 20) else _peek(path, 1 << 24)
        shape = json_kind(path, data, None)
        if shape == "object":
            if b'"annotations"' in data and b'"categories"' in data:
                out.append(_Found(path, "annotations", 4, fmt="coco"))
            return out
        fmt = shape
        if fmt == "json":
            return out  # a JSON list: too unusual to guess about
    peeked = _header_of(path, fmt)
    if peeked is None:
        return out
    header, utf8 = peeked
    normal = {normalise_header(c) for c in header}
    roles = match_roles(header, ("item", "annotator", "label"))
    if "name" in normal and normal & {"parent", "parent_id", "description"}:
        out.append(_Found(path, "taxonomy", 1 + 2 * _has_word(stem, _TAXONOMY_WORDS)))
        return out
    if roles["item"] and roles["label"]:
        found = _Found(
            path,
            "annotations",
            1 + 2 * _has_word(stem, _ANNOTATION_WORDS) + bool(roles["annotator"]),
            not_utf8=not utf8,
        )
        for role, hits in roles.items():
            if len(hits) == 1:
                found.columns[role] = hits[0]
            elif hits:
                found.ambiguous[role] = hits
            else:
                found.missing.append(role)
        out.append(found)
        return out
    if roles["item"]:
        others = [c for c in header if c not in roles["item"]]
        if _has_word(stem, _ANNOTATION_WORDS) and len(roles["item"]) == 1 and others:
            out.append(
                _Found(
                    path,
                    "annotations",
                    2,
                    layout="wide",
                    not_utf8=not utf8,
                    columns={"item": roles["item"][0]},
                )
            )
        texty = normal & set(_TEXT_NAMES)
        item_columns = {"item": roles["item"][0]} if len(roles["item"]) == 1 else {}
        for column in header:
            key = normalise_header(column)
            if "text" not in item_columns and key in _TEXT_NAMES:
                item_columns["text"] = column
            elif "preview" not in item_columns and key in _PREVIEW_NAMES:
                item_columns["preview"] = column
        out.append(
            _Found(
                path,
                "items",
                1 + 2 * _has_word(stem, _ITEM_WORDS) + bool(texty),
                not_utf8=not utf8,
                columns=item_columns,
            )
        )
    return out


def _pick(
    candidates: list[_Found], kind: str, notes: list[str], exclude: set[Path]
) -> _Found | None:
    pool = [c for c in candidates if c.kind == kind and c.path not in exclude]
    if not pool:
        return None
    best = max(c.score for c in pool)
    top = [c for c in pool if c.score == best]
    if len(top) > 1:
        names = ", ".join(sorted(c.path.name for c in top))
        notes.append(f"several files could be the {kind} ({names}); set {kind}.path to one")
        return None
    return top[0]


def _sniff(root: Path) -> _Sniffed:
    result = _Sniffed()
    if not root.is_dir():
        return result
    candidates: list[_Found] = []
    for path in sorted(root.iterdir()):
        name = path.name.lower()
        if (
            not path.is_file()
            or name.startswith(".")
            or name.startswith("labelreview")
            or "decision" in name
        ):
            continue
        result.files.append(path.name)
        try:
            candidates.extend(_classify(path))
        except OSError:
            continue
    result.annotations = _pick(candidates, "annotations", result.notes, set())
    taken = {result.annotations.path} if result.annotations else set()
    result.taxonomy = _pick(candidates, "taxonomy", result.notes, taken)
    if result.taxonomy:
        taken.add(result.taxonomy.path)
    result.items = _pick(candidates, "items", result.notes, taken)
    return result


def _default_config(root: Path) -> DatasetConfig:
    found = _sniff(root)
    notes = [f"no {CONFIG_NAME} in {root}; files were detected by name and columns"]
    notes.extend(found.notes)
    annotations = None
    if found.annotations is not None:
        annotations = AnnotationsConfig(
            path=found.annotations.path, layout=found.annotations.layout
        )
        notes.append(f"annotations: {found.annotations.path.name} ({found.annotations.layout})")
    else:
        notes.append("no annotation file found")
    taxonomy = TaxonomyConfig(path=found.taxonomy.path) if found.taxonomy else None
    if taxonomy:
        notes.append(f"taxonomy: {taxonomy.path.name}")
    items = ItemsConfig(path=found.items.path) if found.items else None
    if items:
        notes.append(
            f"items: {items.path.name} (no attribute columns are read without an "
            f"items.attributes entry in {CONFIG_NAME})"
        )
    return DatasetConfig(
        root=root,
        source=None,
        name=root.resolve().name,
        annotations=annotations,
        taxonomy=taxonomy,
        items=items,
        notes=tuple(notes),
    )


def load_config(dataset_dir: Path) -> DatasetConfig:
    """Read and validate ``dataset_dir/labelreview.yaml``, or detect everything without one.

    Args:
        dataset_dir: The dataset folder.

    Returns:
        The config; paths are joined to ``dataset_dir``. Without the file, annotation,
        taxonomy and item files are detected by name and columns (see ``notes``).

    Raises:
        ConfigError: The folder is missing; the file is not valid YAML, has an unknown key or a
            bad value (message names file, line and column, and the allowed values).
    """
    root = Path(dataset_dir)
    if not root.is_dir():
        what = "does not exist" if not root.exists() else "is not a folder"
        raise ConfigError(f"the dataset folder {what}", source=str(root))
    path = root / CONFIG_NAME
    if not path.is_file():
        return _default_config(root)
    data = path.read_bytes()
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = data.count(b"\n", 0, exc.start) + 1
        raise ConfigError(
            f"the file is not valid UTF-8 (byte 0x{data[exc.start]:02x} at line {line})",
            hint=f"Save {CONFIG_NAME} as UTF-8.",
            source=str(path),
            line=line,
        ) from None
    return _parse(path, root, text)


# -- the starter file ------------------------------------------------------------------------


def _q(value: str) -> str:
    """A YAML scalar for ``value``: a JSON string is a valid YAML double-quoted scalar."""
    return json.dumps(value, ensure_ascii=False)


def _starter_text(root: Path, found: _Sniffed) -> str:
    lines = [
        f"# {CONFIG_NAME}: how labelreview reads this dataset (schema version {SCHEMA_VERSION}).",
        "# Written by `labelreview init` from the files it found here: check every value.",
        "# Paths are relative to this folder. Delete a key to fall back to detection/defaults.",
        f"version: {SCHEMA_VERSION}",
        f"name: {_q(root.resolve().name)}",
        "# Do the items depict or describe people? people | mixed | none",
        "# (with none, terms that only matter when a label describes a person stay quiet).",
        "subjects: mixed",
        "",
    ]
    ann = found.annotations
    if ann is None:
        lines += [
            "# No annotation file was recognised. Fill in and uncomment:",
            "# annotations:",
            '#   path: "annotations.csv"',
            "#   layout: long              # long | wide",
            "#   columns: {item: item_id, annotator: annotator, label: label}",
        ]
    else:
        fmt = ann.fmt
        lines += [
            "annotations:",
            f"  path: {_q(ann.path.name)}",
            f"  format: {fmt}"
            + " " * max(1, 22 - len(fmt))
            + "# auto | csv | tsv | jsonl | json | parquet | coco",
            f"  layout: {ann.layout}"
            + " " * max(1, 22 - len(ann.layout))
            + "# long: a row per item and annotator; wide: a column per annotator",
        ]
        if fmt != "coco":
            roles = ("item",) if ann.layout == "wide" else ("item", "annotator", "label")
            lines.append("  columns:                      # the file's column for each role")
            for role in roles:
                if role in ann.columns:
                    lines.append(f"    {role}: {_q(ann.columns[role])}")
                elif role in ann.ambiguous:
                    options = ", ".join(ann.ambiguous[role])
                    lines.append(f"    # {role}: ?               # several could be it: {options}")
                else:
                    lines.append(f"    # {role}: ?               # no column looked like it")
            if ann.layout == "wide":
                lines.append(
                    "  annotator_columns: []         # empty: every column but the item one"
                )
            lines.append(
                '  multi_label_separator: "|"    # a cell "a|b" is two labels; null: never split'
            )
            if ann.not_utf8:
                lines.append(
                    "  # This file is not valid UTF-8: set its encoding, e.g. latin-1 or cp1252."
                )
            lines.append("  encoding: utf-8")
    lines.append("")
    if found.taxonomy is None:
        lines += [
            "# taxonomy:                   # optional: the full list of labels annotators chose",
            '#   path: "taxonomy.csv"      # from (text, CSV with id/name/parent, or YAML tree)',
        ]
    else:
        lines += [
            "taxonomy:                     # the full list of labels annotators chose from",
            f"  path: {_q(found.taxonomy.path.name)}",
            "  format: auto                # auto | text | csv | yaml",
        ]
    lines.append("")
    attribute_help = [
        "  # attributes:                # only columns the people described filled in",
        "  #   - column: age_band       # themselves and agreed to have used; labelreview",
        "  #     consented: true        # never uses other attributes and never infers them",
        "  #     self_reported: true",
    ]
    if found.items is None:
        lines += [
            "# items:                      # optional: one row per item (text, preview)",
            '#   path: "items.csv"',
        ]
        lines += ["#" + line[1:] for line in attribute_help]
    else:
        lines += [
            "items:                        # one row per item: its text and preview",
            f"  path: {_q(found.items.path.name)}",
        ]
        if found.items.columns:
            pairs = ", ".join(f"{role}: {_q(col)}" for role, col in found.items.columns.items())
            lines.append(f"  columns: {{{pairs}}}")
        lines += attribute_help
    lines += [
        "",
        "lexicons:",
        "  base: builtin                # the shipped term lists, or a folder replacing them",
        "  layers: []                   # your organisation's layer, then this dataset's",
        "",
        "scan:",
        "  fuzzy_threshold: 88          # 0-100: how close a misspelling must be to a term",
        "  fuzzy_min_length: 5          # shorter words are only matched exactly",
        "",
        "curator: null                  # who reviews this dataset (recorded in the audit trail)",
    ]
    if found.notes:
        lines += ["", "# Detection notes:"] + [f"#   {note}" for note in found.notes]
    return "\n".join(lines) + "\n"


def write_starter_config(dataset_dir: Path, *, force: bool = False) -> Path:
    """Write a commented starter ``labelreview.yaml`` from the files found in the folder.

    Never overwrites anything. With ``force``, an existing ``labelreview.yaml`` is kept and the
    starter goes beside it as ``labelreview.new.yaml`` (refused too if that exists).

    Args:
        dataset_dir: The dataset folder.
        force: Write ``labelreview.new.yaml`` when ``labelreview.yaml`` exists.

    Returns:
        The path written.

    Raises:
        ConfigError: The folder is missing, or the target file already exists.
    """
    root = Path(dataset_dir)
    if not root.is_dir():
        raise ConfigError("the dataset folder does not exist", source=str(root))
    target = root / CONFIG_NAME
    if target.exists():
        if not force:
            raise ConfigError(
                f"{CONFIG_NAME} already exists here and labelreview never overwrites it",
                hint=f"Edit it, or use --force to write a fresh starter beside it as "
                f"{STARTER_FALLBACK_NAME}.",
                source=str(target),
            )
        target = root / STARTER_FALLBACK_NAME
        if target.exists():
            raise ConfigError(
                f"{STARTER_FALLBACK_NAME} already exists too and labelreview never overwrites it",
                hint="Rename or remove it, then run again.",
                source=str(target),
            )
    text = _starter_text(root, _sniff(root))
    try:
        with target.open("x", encoding="utf-8") as handle:  # "x": fail rather than overwrite
            handle.write(text)
    except FileExistsError:
        raise ConfigError(
            "the file appeared while writing; it was left untouched", source=str(target)
        ) from None
    except OSError as exc:
        raise ConfigError(f"cannot write the file: {exc.strerror}", source=str(target)) from None
    return target


__all__ = [
    "CONFIG_NAME",
    "AnnotationsConfig",
    "AttributeConfig",
    "DatasetConfig",
    "ItemsConfig",
    "LexiconsConfig",
    "QueueConfig",
    "ScanConfig",
    "SignalsConfig",
    "TaxonomyConfig",
    "load_config",
    "write_starter_config",
]
