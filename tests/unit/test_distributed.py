"""The Dask engine on a real cluster: a LocalCluster with two worker processes talking TCP on
the loopback address (127.0.0.1). Its figures must equal the local engine's exactly: agreement
(several shapes of data, a bootstrap, the ordinal second round), label counts and the free-text
scan. Without Dask installed the engine says how to install it."""

from __future__ import annotations

import sys
import warnings
from collections.abc import Iterator
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

pytest.importorskip("distributed")

from labelreview.agreement import agreement_report  # noqa: E402
from labelreview.config import load_config  # noqa: E402
from labelreview.distributed import dask_agreement, dask_scan  # noqa: E402
from labelreview.engine import annotation_stream, stream_usage, with_taxonomy  # noqa: E402
from labelreview.errors import UsageError  # noqa: E402
from labelreview.io import DuplicateRowsWarning  # noqa: E402
from labelreview.lexicon import load_lexicon  # noqa: E402
from labelreview.textscan import (  # noqa: E402
    TextScanner,
    scan_text_sources,
    text_result,
    text_sources,
)


@pytest.fixture(scope="module")
def client() -> Iterator[object]:
    from distributed import Client, LocalCluster

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        cluster = LocalCluster(
            n_workers=2,
            threads_per_worker=1,
            processes=True,
            host="127.0.0.1",
            dashboard_address=None,
        )
    live = Client(cluster)
    try:
        assert all(w.startswith("tcp://127.0.0.1:") for w in live.scheduler_info()["workers"])
        yield live
    finally:
        live.close()
        cluster.close()


def dataset(tmp_path: Path, data: pd.DataFrame, parts: int, captions: bool = False) -> Path:
    folder = tmp_path / "ann"
    folder.mkdir()
    shuffled = data.sample(frac=1.0, random_state=1)
    for k in range(parts):
        shuffled.iloc[k::parts].to_parquet(folder / f"part-{k}.parquet")
    config = "version: 1\nsubjects: people\nannotations:\n  path: ann\n  layout: long\n"
    if captions:
        items = pd.DataFrame(
            {
                "item": sorted(data["item"].unique()),
            }
        )
        texts = [
            "A nurse on the quay.",
            "A nurse shark in the tank.",
            "The lazy man by the nets.",
            "Boats at dawn.",
            "A beggar sitting on the steps.",
        ]
        items["caption"] = [texts[i % len(texts)] for i in range(len(items))]
        items.to_parquet(tmp_path / "items.parquet")
        config += "items:\n  path: items.parquet\n"
    (tmp_path / "labelreview.yaml").write_text(config, encoding="utf-8")
    return tmp_path


def make(seed: int, items: int, multi: bool, numeric: bool) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    rows = []
    for i in range(items):
        truth = int(rng.integers(1, 6))
        for a in range(5):
            if rng.random() < 0.3:
                continue
            value = truth if rng.random() < 0.7 else int(rng.integers(1, 6))
            label = str(value) if numeric else f"tag{value}"
            rows.append((f"it{i:05d}", f"ann{a}", label))
            if multi and rng.random() < 0.3:
                rows.append((f"it{i:05d}", f"ann{a}", f"tag{int(rng.integers(1, 6))}"))
    return pd.DataFrame(rows, columns=["item", "annotator", "label"])


@pytest.mark.parametrize(
    ("multi", "level", "parts"),
    [(False, "nominal", 3), (True, "nominal", 4), (False, "ordinal", 5), (False, "interval", 2)],
)
def test_dask_agreement_equals_the_local_engine(tmp_path, client, multi, level, parts):
    data = make(parts, 400, multi, level != "nominal")
    root = dataset(tmp_path, data, parts)
    config = load_config(root)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DuplicateRowsWarning)  # multi-label data repeats rows
        got, report = dask_agreement(config, level=level, bootstrap=80, seed=2, client=client)
    from labelreview.io import load_annotations

    data.to_parquet(tmp_path / "whole.parquet")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DuplicateRowsWarning)
        frame, _ = load_annotations(tmp_path / "whole.parquet")
    expected = agreement_report(frame, level=level, bootstrap=80, seed=2)
    assert got == expected
    assert report.rows_read == len(data) and "Dask over" in report.notes[0]


def test_dask_scan_equals_the_local_engine(tmp_path, client):
    data = make(7, 300, True, False)
    data = pd.concat([data, data.iloc[:5]])  # duplicates are dropped the same way
    root = dataset(tmp_path, data, 3, captions=True)
    config = load_config(root)
    with pytest.warns(DuplicateRowsWarning):
        usage, text, reports = dask_scan(config, ["caption"], client=client)
    lexicon = load_lexicon()
    local = scan_text_sources(text_sources(config, ["caption"]), TextScanner(lexicon, "people"))
    with pytest.warns(DuplicateRowsWarning):
        local_usage, pairs, local_report = stream_usage(
            annotation_stream(config), pairs_for=local.hit_items()
        )
    local.add_item_labels(pairs)
    assert usage == with_taxonomy(local_usage, [])
    a, b = text_result(text, lexicon), text_result(local, lexicon)
    assert a.findings == b.findings and a.rows == b.rows
    assert {f.term for f in a.findings} == {"nurse", "lazy", "beggar"}  # not the shark
    assert reports[0].duplicates_dropped == local_report.duplicates_dropped >= 5


def test_csv_is_refused_with_a_hint(tmp_path, client):
    (tmp_path / "a.csv").write_text("item,annotator,label\n1,a,x\n", encoding="utf-8")
    (tmp_path / "labelreview.yaml").write_text(
        "version: 1\nannotations: {path: a.csv}\n", encoding="utf-8"
    )
    with pytest.raises(Exception, match="reads Parquet"):
        dask_agreement(load_config(tmp_path), bootstrap=0, client=client)


def test_missing_dask_is_one_clear_usage_error(monkeypatch, tmp_path):
    monkeypatch.setitem(sys.modules, "distributed", None)
    (tmp_path / "labelreview.yaml").write_text("version: 1\n", encoding="utf-8")
    with pytest.raises(UsageError, match=r"pip install 'labelreview\[dask\]'"):
        dask_agreement(load_config(tmp_path))
