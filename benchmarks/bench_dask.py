"""The Dask engine against the local streaming engine on the same partitioned Parquet data.

Data: ``make_agreement_data.make_annotations`` (seeded, invented), ``--items`` items written as
``--parts`` Parquet files in random row order (so the local engine must partition by item too).
Figures: wall time of the full agreement report (bootstrap 200) with the local streaming engine
and with ``--engine dask`` on a LocalCluster of two worker processes on loopback (started
before timing; its start-up time is printed apart); the two results must be equal. On a
2-core machine Dask cannot be faster than one local process: the point is that it gives the
same figures and runs where the data is too large for one machine. The baseline for both is
the time to read the Parquet files (``pyarrow.dataset`` to pandas).

    python benchmarks/bench_dask.py [--items 500000] [--parts 8]
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
import warnings
from pathlib import Path

sys.path.insert(0, str(Path(__file__).parent))
from make_agreement_data import make_annotations  # noqa: E402


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--items", type=int, default=500_000)
    parser.add_argument("--parts", type=int, default=8)
    args = parser.parse_args()
    warnings.simplefilter("ignore")
    import pyarrow.dataset as pads
    from distributed import Client, LocalCluster

    from labelreview.agreement import stream_agreement
    from labelreview.config import load_config
    from labelreview.distributed import dask_agreement
    from labelreview.engine import annotation_stream

    folder = Path(tempfile.mkdtemp(prefix="labelreview-dask-"))
    frame = make_annotations(args.items).sample(frac=1.0, random_state=1)
    (folder / "ann").mkdir()
    for k in range(args.parts):
        frame.iloc[k :: args.parts].to_parquet(folder / "ann" / f"part-{k:03d}.parquet")
    (folder / "labelreview.yaml").write_text(
        "version: 1\nannotations: {path: ann}\n", encoding="utf-8"
    )
    print(f"{args.items:,} items, {len(frame):,} rows in {args.parts} Parquet files ({folder})")
    config = load_config(folder)

    start = time.perf_counter()
    pads.dataset(folder / "ann", format="parquet").to_table().to_pandas()
    read_s = time.perf_counter() - start
    print(f"read the Parquet files (baseline): {read_s:.2f} s")

    start = time.perf_counter()
    local, _ = stream_agreement(annotation_stream(config), bootstrap=200)
    local_s = time.perf_counter() - start
    print(f"local streaming engine: {local_s:.2f} s (ratio to read {local_s / read_s:.1f})")

    start = time.perf_counter()
    cluster = LocalCluster(
        n_workers=2,
        threads_per_worker=1,
        processes=True,
        host="127.0.0.1",
        dashboard_address=None,
    )
    client = Client(cluster)
    print(f"LocalCluster start-up (2 workers, loopback): {time.perf_counter() - start:.2f} s")
    start = time.perf_counter()
    distributed, _ = dask_agreement(config, bootstrap=200, client=client)
    dask_s = time.perf_counter() - start
    print(
        f"Dask engine: {dask_s:.2f} s (ratio to read {dask_s / read_s:.1f}, to local "
        f"{dask_s / local_s:.2f})"
    )
    print(f"results equal: {distributed == local}")
    client.close()
    cluster.close()


if __name__ == "__main__":
    main()
