"""Agreement engine speed and memory on seeded synthetic data (issue 3 targets).

Data: benchmarks/make_agreement_data.py (1,000,000 items, about 4.5 annotations each, 20 labels,
50 annotators, 10% missing; written to a temporary CSV). Figures are medians over repeats; the
machine is shared (2 cores), so compare the ratios, not the seconds.

Named baselines and targets:
- pandas ``read_csv`` of the file: nominal alpha plus every per-label alpha from the in-memory
  frame (``per_label_alpha``) should take no longer (ratio <= 1.0).
- the ``krippendorff`` package path (build its annotators x items matrix with pandas, then
  ``krippendorff.alpha(level_of_measurement="nominal")``): at least 30x slower.
- nltk's ``AnnotationTask(...).alpha()``: timed on ``--nltk-items`` items and scaled linearly.
- peak memory of a fresh process that reads the file and computes: under 1 GB at 1,000,000
  items (under 3 GB at 5,000,000: ``--items 5000000``).
- bootstrap of 1,000 draws on 100,000 items: under 10 s.

    python benchmarks/bench_agreement.py [--items 1000000] [--repeats 5] [--skip-krippendorff]
"""

from __future__ import annotations

import argparse
import json
import statistics
import subprocess
import sys
import tempfile
import time
from collections.abc import Callable
from pathlib import Path
from typing import Any

import pandas as pd

sys.path.insert(0, str(Path(__file__).parent))
from make_agreement_data import make_annotations  # noqa: E402

from labelreview.agreement import agreement_report, per_label_alpha  # noqa: E402


def median_time(func: Callable[[], Any], repeats: int) -> tuple[float, list[float]]:
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        func()
        times.append(time.perf_counter() - start)
    return statistics.median(times), times


MEMORY_PROBE = """
import json, resource, sys, time, tracemalloc
import pandas as pd
from labelreview.agreement import per_label_alpha
frame = pd.read_csv(sys.argv[1])
after_read = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
tracemalloc.start()
start = time.perf_counter()
per_label_alpha(frame)
seconds = time.perf_counter() - start
numpy_peak = tracemalloc.get_traced_memory()[1]
peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
print(json.dumps({"after_read_mb": after_read / 1024, "peak_mb": peak / 1024,
                  "compute_traced_mb": numpy_peak / 2**20, "seconds": seconds}))
"""


def memory_probe(path: Path) -> dict[str, float]:
    out = subprocess.run(
        [sys.executable, "-c", MEMORY_PROBE, str(path)], capture_output=True, text=True, check=True
    )
    return json.loads(out.stdout)


def krippendorff_path(frame: pd.DataFrame) -> float:
    import krippendorff
    import numpy as np

    codes, _ = pd.factorize(frame["label"])
    wide = (
        frame.assign(code=codes)
        .pivot(index="annotator", columns="item", values="code")
        .to_numpy(dtype=float)
    )
    return float(
        krippendorff.alpha(
            reliability_data=wide,
            level_of_measurement="nominal",
            value_domain=np.arange(codes.max() + 1),
        )
    )


def nltk_path(frame: pd.DataFrame) -> float:
    from nltk.metrics.agreement import AnnotationTask

    triples = list(zip(frame["annotator"], frame["item"], frame["label"], strict=True))
    return float(AnnotationTask(triples).alpha())


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--items", type=int, default=1_000_000)
    parser.add_argument("--repeats", type=int, default=5)
    parser.add_argument("--nltk-items", type=int, default=50_000)
    parser.add_argument("--bootstrap-items", type=int, default=100_000)
    parser.add_argument("--skip-krippendorff", action="store_true")
    parser.add_argument("--skip-report", action="store_true", help="skip the full-report timing")
    args = parser.parse_args()

    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "annotations.csv"
        generated = make_annotations(args.items)
        generated.to_csv(path, index=False)
        del generated
        print(f"data: {args.items:,} items, file {path.stat().st_size / 1e6:.0f} MB")

        read, read_all = median_time(lambda: pd.read_csv(path), args.repeats)
        frame = pd.read_csv(path)
        print(f"rows: {len(frame):,}")
        print(f"baseline pandas read_csv:            median {read:7.3f} s  {fmt(read_all)}")
        ours, ours_all = median_time(lambda: per_label_alpha(frame), args.repeats)
        alpha, labels = per_label_alpha(frame)
        print(
            f"labelreview nominal + {len(labels)} per-label:   median {ours:7.3f} s  "
            f"{fmt(ours_all)}  alpha={alpha:.6f}"
        )
        print(f"  ratio labelreview / read_csv: {ours / read:.2f}  (target <= 1.0)")

        probe = memory_probe(path)
        print(
            f"peak memory, fresh process (read + compute): {probe['peak_mb']:.0f} MB "
            f"(after read {probe['after_read_mb']:.0f} MB; target < "
            f"{'1 GB' if args.items <= 1_000_000 else '3 GB'})"
        )
        print(
            f"  compute allocations traced (numpy/pandas, tracemalloc peak): "
            f"{probe['compute_traced_mb']:.0f} MB"
        )

        if not args.skip_report:
            full, _ = median_time(lambda: agreement_report(frame, bootstrap=0), 1)
            print(
                f"full agreement_report (no bootstrap, with leave-one-out): {full:.2f} s "
                "(information only)"
            )

        if not args.skip_krippendorff:
            start = time.perf_counter()
            ref = krippendorff_path(frame)
            kpp = time.perf_counter() - start
            print(
                f"baseline krippendorff package path:  {kpp:7.2f} s  alpha={ref:.6f} "
                f"(difference {abs(ref - alpha):.1e})"
            )
            print(f"  ratio krippendorff / labelreview: {kpp / ours:.0f}x  (target >= 30x)")

        subset = frame[frame["item"].isin(frame["item"].unique()[: args.nltk_items])]
        start = time.perf_counter()
        nltk_alpha = nltk_path(subset)
        nl = (time.perf_counter() - start) * args.items / args.nltk_items
        print(
            f"baseline nltk AnnotationTask.alpha:  {nl:7.2f} s  (timed on {args.nltk_items:,} "
            f"items and scaled; alpha there {nltk_alpha:.6f})"
        )
        print(f"  ratio nltk / labelreview: {nl / ours:.0f}x")

    boot_frame = make_annotations(args.bootstrap_items, seed=11)
    plain, _ = median_time(lambda: agreement_report(boot_frame, bootstrap=0, leave_out=False), 3)
    with_boot, boot_all = median_time(
        lambda: agreement_report(boot_frame, bootstrap=1000, leave_out=False), 3
    )
    print(
        f"bootstrap 1,000 draws on {args.bootstrap_items:,} items: median "
        f"{with_boot - plain:.2f} s beyond the report ({with_boot:.2f} s in all; target < 10 s)"
    )


def fmt(times: list[float]) -> str:
    return "[" + ", ".join(f"{t:.3f}" for t in times) + "]"


if __name__ == "__main__":
    main()
