"""The Dask engine: agreement, label counts and the free-text scan on a Dask cluster.

Data must be Parquet (one file or a folder of files, the usual layout of a dataset on a
cluster's shared storage). ``dask.dataframe`` reads it in partitions; each partition is cleaned
with the loader's own steps, the rows are shuffled so that every item's annotations land in one
partition, and each partition's :class:`~labelreview.agreement._sums.AgreementSums` and label
counts are computed on the workers and added up in a tree. The figures are therefore those of
the local engine, to the last bit: the sums are exact whatever the partitioning.

The free-text scan runs in two rounds: the workers list each partition's distinct words, this
process resolves them once (the fuzzy stage), and the scanner with its resolved words goes to
the workers, which scan their rows.

Dask is optional (``pip install 'labelreview[dask]'``) and imported only here, only when used.
What stays on this machine: the final read-off of the sums, the lexicon scan of the distinct
labels (small), and everything about decisions (see the README).
"""

from __future__ import annotations

from collections.abc import Callable, Iterator, Sequence
from contextlib import contextmanager
from pathlib import Path
from typing import Any

import pandas as pd

from labelreview.agreement._coding import check_level
from labelreview.agreement._report import (
    AgreementResult,
    AgreementThresholds,
    check_report_options,
    ordinal_metric,
    report_from_sums,
    report_parts,
)
from labelreview.agreement._streaming import merge_sums, sums_of_batch
from labelreview.agreement._sums import BUCKETS, AgreementSums, ExactSums
from labelreview.config import DatasetConfig
from labelreview.engine import add_usage, annotation_path
from labelreview.errors import LoadError, UsageError
from labelreview.io._annotations import (
    _long_frame,
    _wide_frame,
    as_annotation_frame,
    clean_rows,
    drop_duplicates,
    resolve_columns,
    warn_duplicates,
)
from labelreview.io._common import Table
from labelreview.model import ANNOTATION_COLUMNS, LoadReport
from labelreview.progress import ProgressCallback, phase
from labelreview.report import LabelUse, label_usage

DASK_HINT = "Install it with: pip install 'labelreview[dask]'"


def require_dask() -> None:
    """Refuse clearly when Dask is not installed.

    Raises:
        UsageError: ``dask``, ``dask.dataframe`` or ``distributed`` cannot be imported.
    """
    try:
        import dask  # noqa: F401
        import dask.dataframe  # noqa: F401
        import distributed  # noqa: F401
    except ImportError as exc:
        raise UsageError(
            f"the Dask engine needs the optional packages dask and distributed ({exc.msg})",
            hint=DASK_HINT,
        ) from None


@contextmanager
def connect(scheduler: str | None = None, *, workers: int = 2) -> Iterator[Any]:
    """A ``distributed.Client``: to ``scheduler``, or to a new cluster on this machine.

    The local cluster listens on the loopback address only and has no dashboard.

    Raises:
        UsageError: The scheduler cannot be reached.
    """
    require_dask()
    import logging

    from distributed import Client, LocalCluster

    # The shuffle announces each shuffle at WARNING level; nothing is wrong, keep stderr clean.
    logging.getLogger("distributed.shuffle").setLevel(logging.ERROR)

    if scheduler:
        try:
            client = Client(scheduler, timeout="10s")
        except (OSError, TimeoutError) as exc:
            raise UsageError(
                f"cannot reach the Dask scheduler at {scheduler}: {exc}",
                hint="Check the address (tcp://HOST:8786) and that the scheduler is running.",
            ) from None
        try:
            yield client
        finally:
            client.close()
        return
    cluster = LocalCluster(
        n_workers=workers,
        threads_per_worker=1,
        processes=True,
        host="127.0.0.1",
        dashboard_address=None,
    )
    client = Client(cluster)
    try:
        yield client
    finally:
        client.close()
        cluster.close()


def _client_or_new(client: Any, scheduler: str | None) -> Any:
    @contextmanager
    def given() -> Iterator[Any]:
        yield client

    return given() if client is not None else connect(scheduler)


# -- annotations ---------------------------------------------------------------------------------


def _parquet_columns(path: Path) -> list[str]:
    import pyarrow as pa
    import pyarrow.dataset as pads

    if not path.exists():
        raise LoadError("the file does not exist", source=str(path))
    try:
        return [str(n) for n in pads.dataset(path, format="parquet").schema.names]
    except (pa.ArrowException, OSError) as exc:
        raise LoadError(
            f"the Dask engine reads Parquet, and this is not a readable Parquet file or folder "
            f"({exc})",
            hint="Convert the annotations to Parquet (one file or a folder of files).",
            source=str(path),
        ) from None


def _clean_partition(
    raw: pd.DataFrame, path: Path, layout: str, chosen: dict[str, str], roles: dict[str, Any]
) -> tuple[pd.DataFrame, tuple[int, int, int]]:
    """One raw partition -> the cleaned annotation rows, and (rows, empty labels, split cells)."""
    table = Table(raw, "parquet", lambda _row: None, [str(c) for c in raw.columns])
    if layout == "wide":
        frame, _ = _wide_frame(path, table, {"item": chosen["item"]}, roles["annotator_columns"])
    else:
        frame, _ = _long_frame(path, table, {r: chosen[r] for r in ANNOTATION_COLUMNS})
    frame, counts = clean_rows(
        frame,
        path=path,
        wide=layout == "wide",
        chosen=chosen,
        locate=lambda _row: None,
        separator=roles["separator"],
    )
    return as_annotation_frame(frame), (len(raw), counts.empty_labels, counts.split_cells)


def _whole_items(config: DatasetConfig) -> tuple[Any, list[Any], Path, dict[str, str]]:
    """The cleaned annotations as a Dask frame shuffled by item, and the per-partition counts."""
    import dask
    import dask.dataframe as dd

    ann = config.annotations
    assert ann is not None
    path = annotation_path(config)
    columns = _parquet_columns(path)
    if ann.layout == "wide":
        empty = Table(pd.DataFrame({c: [] for c in columns}), "parquet", lambda _r: None, columns)
        _, chosen = _wide_frame(path, empty, ann.columns, ann.annotator_columns)
        needed = columns
    else:
        chosen = resolve_columns(path, columns, ANNOTATION_COLUMNS, ann.columns)
        needed = [chosen[r] for r in ANNOTATION_COLUMNS]
    raw = dd.read_parquet(str(path), columns=needed)
    roles = {"annotator_columns": ann.annotator_columns, "separator": ann.multi_label_separator}
    cleaned = [
        dask.delayed(_clean_partition, nout=2)(part, path, ann.layout, chosen, roles)
        for part in raw.to_delayed()
    ]
    meta = pd.DataFrame({c: pd.Series(dtype=str) for c in ANNOTATION_COLUMNS})
    frame = dd.from_delayed([c[0] for c in cleaned], meta=meta, verify_meta=False)
    shuffled = frame.shuffle("item")
    return shuffled, [c[1] for c in cleaned], path, chosen


def _tree(values: list[Any], combine: Callable[[Any, Any], Any]) -> Any:
    """Add up delayed values pairwise (a tree, so no single task holds every part)."""
    import dask

    merge = dask.delayed(combine)
    while len(values) > 1:
        values = [
            merge(values[i], values[i + 1]) if i + 1 < len(values) else values[i]
            for i in range(0, len(values), 2)
        ]
    return values[0]


def _load_report(
    path: Path, chosen: dict[str, str], counts: Sequence[Any], dups: int, n: int, layout: str
) -> LoadReport:
    rows = sum(c[0] for c in counts)
    empty = sum(c[1] for c in counts)
    split = sum(c[2] for c in counts)
    notes = [f"computed with Dask over {n} partitions (rows shuffled by item)"]
    if layout == "wide" and empty:
        notes.insert(0, f"{empty} blank cell(s) skipped (no label from that annotator)")
    if split:
        notes.append(f"{split} multi-label cell(s) split into one row per label")
    return LoadReport(
        path=str(path),
        format="wide-parquet" if layout == "wide" else "parquet",
        rows_read=rows,
        duplicates_dropped=dups,
        empty_labels_dropped=empty,
        column_map=dict(chosen),
        notes=tuple(notes),
    )


def _partition_sums(
    part: pd.DataFrame, level: str, parts: frozenset[str], leave_out: bool
) -> tuple[AgreementSums | None, int]:
    part, dropped = drop_duplicates(part)
    if part.empty:
        return None, dropped
    # One thread per partition: the cluster already runs partitions side by side.
    return sums_of_batch(part.reset_index(drop=True), level, parts, leave_out, threads=1), dropped


def _add_pair(
    first: tuple[AgreementSums | None, int], second: tuple[AgreementSums | None, int]
) -> tuple[AgreementSums | None, int]:
    return merge_sums(first[0], second[0]), first[1] + second[1]


def _partition_disagreement(
    part: pd.DataFrame, sums: AgreementSums, metric: Any, level: str
) -> ExactSums:
    from labelreview.agreement._coding import code_annotations

    part, _ = drop_duplicates(part)
    if part.empty:
        return ExactSums(BUCKETS)
    return sums.add_ordinal_disagreement(
        code_annotations(part.reset_index(drop=True), level), metric
    )


def _add_exact(first: ExactSums, second: ExactSums) -> ExactSums:
    first.merge(second)
    return first


def dask_agreement(
    config: DatasetConfig,
    *,
    level: str = "nominal",
    bootstrap: int = 1000,
    seed: int = 0,
    thresholds: AgreementThresholds | None = None,
    min_items: int = 10,
    min_pair_items: int = 10,
    confidence: float = 0.95,
    leave_out: bool = True,
    top_splits: int = 10,
    scheduler: str | None = None,
    client: Any = None,
    progress: ProgressCallback | None = None,
) -> tuple[AgreementResult, LoadReport]:
    """Every agreement figure, computed on a Dask cluster; see :func:`agreement_report`.

    Args:
        config: The dataset config; its annotation file must be Parquet.
        scheduler: Address of an existing scheduler (None: a local cluster, two workers).
        client: An existing ``distributed.Client`` to use instead (tests).
        progress: Progress callback (one step per round).

    Returns:
        The result (equal to the local engine's) and a load report.
    """
    require_dask()
    import dask

    check_level(level)
    check_report_options(
        bootstrap=bootstrap,
        seed=seed,
        min_items=min_items,
        min_pair_items=min_pair_items,
        confidence=confidence,
    )
    parts = report_parts(bootstrap, leave_out)
    with _client_or_new(client, scheduler) as live:
        shuffled, counts, path, chosen = _whole_items(config)
        pieces = shuffled.to_delayed()
        partial = [dask.delayed(_partition_sums)(p, level, parts, leave_out) for p in pieces]
        with phase(progress, f"agreement on Dask ({len(pieces)} partitions)"):
            (sums, dups), found = live.compute([_tree(partial, _add_pair), counts], sync=True)
        if sums is None:
            raise UsageError(
                f"no annotations found in {path}; agreement needs who gave which label"
            )
        if bootstrap > 0 and sums.bucket_d is None:
            metric = ordinal_metric(sums)
            extra = [dask.delayed(_partition_disagreement)(p, sums, metric, level) for p in pieces]
            with phase(progress, "ordinal bootstrap on Dask"):
                sums.bucket_d = live.compute(_tree(extra, _add_exact), sync=True)
    ann = config.annotations
    assert ann is not None
    report = _load_report(path, chosen, found, dups, len(pieces), ann.layout)
    if dups:
        warn_duplicates(path, dups)
    with phase(progress, "computing the figures"):
        result = report_from_sums(
            sums,
            bootstrap=bootstrap,
            seed=seed,
            thresholds=thresholds,
            min_items=min_items,
            min_pair_items=min_pair_items,
            confidence=confidence,
            leave_out=leave_out,
            top_splits=top_splits,
        )
    return result, report


# -- label counts and free text ---------------------------------------------------------------


def _partition_usage(
    part: pd.DataFrame, wanted: frozenset[str]
) -> tuple[dict[str, LabelUse], pd.DataFrame, int]:
    part, dropped = drop_duplicates(part)
    usage = label_usage(part) if len(part) else {}
    pairs = (
        part.loc[part["item"].isin(list(wanted)), ["item", "label"]].drop_duplicates()
        if wanted
        else part.iloc[:0][["item", "label"]]
    )
    return usage, pairs, dropped


def _add_usage(first: Any, second: Any) -> Any:
    usage = add_usage(dict(first[0]), second[0])
    return usage, pd.concat([first[1], second[1]], ignore_index=True), first[2] + second[2]


def _partition_words(frame: pd.DataFrame, column: str) -> list[str]:
    from labelreview.text import tokenize
    from labelreview.textscan import TextScanner

    vocabulary = TextScanner.words(frame[column])[0].to_pylist()
    out = set()
    for word in vocabulary:
        found = tokenize(word) if word else ()
        if found:
            out.add(found[0].text)
    return sorted(out)


def _union(first: list[str], second: list[str]) -> list[str]:
    return sorted(set(first) | set(second))


def _partition_text(
    frame: pd.DataFrame,
    scanner: Any,
    source: Any,
    first_row: int,
) -> Any:
    from labelreview.io._common import as_text
    from labelreview.textscan import split_cells

    items = as_text(frame[source.item_column]).str.strip()
    labels = (
        split_cells(frame[source.label_column].tolist(), source.separator)
        if source.label_column is not None
        else None
    )
    return scanner.scan_batch(
        source.column, frame[source.column], items, first_row, source=source.source, labels=labels
    )


def _merge_text(first: Any, second: Any) -> Any:
    return first.merge(second)


def dask_scan(
    config: DatasetConfig,
    text_columns: Sequence[str] = (),
    *,
    subjects: str | None = None,
    extra_layers: Sequence[Path] = (),
    scheduler: str | None = None,
    client: Any = None,
    progress: ProgressCallback | None = None,
) -> tuple[dict[str, LabelUse], Any, list[LoadReport]]:
    """Label counts (and the free-text scan) on a Dask cluster.

    Returns:
        The label counts (taxonomy labels added), the text sums or None, and the load reports.
    """
    require_dask()
    import dask
    import dask.dataframe as dd

    from labelreview.engine import with_taxonomy
    from labelreview.io import load_taxonomy
    from labelreview.lexicon import load_lexicon
    from labelreview.textscan import TextScanner, text_sources

    text_sums = None
    with _client_or_new(client, scheduler) as live:
        if text_columns:
            lexicon = load_lexicon(
                [*config.lexicons.layers, *extra_layers], base=config.lexicons.base
            )
            scanner = TextScanner(
                lexicon,
                subjects or config.subjects or "mixed",
                fuzzy_threshold=config.scan.fuzzy_threshold,
                fuzzy_min_length=config.scan.fuzzy_min_length,
            )
            for source in text_sources(config, text_columns):
                _parquet_columns(source.path)
                wanted = [source.item_column, source.column]
                if source.label_column is not None:
                    wanted.append(source.label_column)
                frame = dd.read_parquet(str(source.path), columns=list(dict.fromkeys(wanted)))
                pieces = frame.to_delayed()
                with phase(progress, f"listing the words of {source.column} on Dask"):
                    lengths, words = live.compute(
                        [
                            [dask.delayed(len)(p) for p in pieces],
                            _tree(
                                [dask.delayed(_partition_words)(p, source.column) for p in pieces],
                                _union,
                            ),
                        ],
                        sync=True,
                    )
                scanner.scanner.resolve_words(words)
                scanner.scanner.live_words(words)
                shipped = dask.delayed(scanner, traverse=False)
                offsets = [1]
                for n in lengths[:-1]:
                    offsets.append(offsets[-1] + int(n))
                partial = [
                    dask.delayed(_partition_text)(p, shipped, source, offsets[i])
                    for i, p in enumerate(pieces)
                ]
                with phase(progress, f"scanning {source.column} on Dask"):
                    found = live.compute(_tree(partial, _merge_text), sync=True)
                text_sums = found if text_sums is None else text_sums.merge(found)
        wanted_items = frozenset(text_sums.hit_items()) if text_sums is not None else frozenset()
        shuffled, counts, path, chosen = _whole_items(config)
        pieces = shuffled.to_delayed()
        partial = [dask.delayed(_partition_usage)(p, wanted_items) for p in pieces]
        with phase(progress, f"counting labels on Dask ({len(pieces)} partitions)"):
            (usage, pairs, dups), found_counts = live.compute(
                [_tree(partial, _add_usage), counts], sync=True
            )
    if text_sums is not None:
        text_sums.add_item_labels(pairs)
    ann = config.annotations
    assert ann is not None
    reports = [_load_report(path, chosen, found_counts, dups, len(pieces), ann.layout)]
    if dups:
        warn_duplicates(path, dups)
    names = []
    if config.taxonomy is not None:
        names = [
            t.name
            for t in load_taxonomy(
                config.taxonomy.path, fmt=config.taxonomy.format, encoding=config.taxonomy.encoding
            )
        ]
    return with_taxonomy(usage, names), text_sums, reports


__all__ = ["connect", "dask_agreement", "dask_scan", "require_dask"]
