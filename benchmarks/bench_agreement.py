"""Agreement engine speed and memory on seeded synthetic data (issue 3 targets).

Data: benchmarks/make_agreement_data.py (1,000,000 items, about 4.5 annotations each, 20 labels,
50 annotators, 10% missing; written to a temporary CSV). Figures are medians over repeats; the
machine is shared (2 cores), so compare the ratios, not the seconds.

Two ways in, both timed (the engine gives identical figures for both, checked here):

- text columns: ``pandas.read_csv`` (pandas' default string columns), then the engine hashes
  the item, annotator and label strings;
- dictionary columns, the path for large files: ``pyarrow.csv.read_csv`` with the three columns
  typed ``dictionary<int32, string>``, then ``to_pandas()``, which gives pandas Categoricals;
  the engine uses their codes and skips the hashing;
- mixed: the same reader with only annotator and label as dictionaries, item ids as text.

Named baselines and targets:

- pandas ``read_csv`` of the file (the read alone): nominal alpha plus every per-label alpha
  (``per_label_alpha``) from the in-memory frame should take no longer (ratio <= 1.0).
- the ``krippendorff`` package path (build its annotators x items matrix with pandas, then
  ``krippendorff.alpha(level_of_measurement="nominal")``): at least 30x slower. It needs about
  30 s and 10 GB at 1,000,000 items, so it runs only with ``--krippendorff``.
- nltk's ``AnnotationTask(...).alpha()``: timed on ``--nltk-items`` items and scaled linearly.
- peak memory of a fresh process that reads the CSV and computes: under 1 GB at 1,000,000
  items, under 3 GB at 5,000,000 (``--items 5000000``). Peak memory is the process's VmHWM
  (peak resident set size of its own address space, from /proc/self/status). Not ru_maxrss:
  on Linux that figure survives fork and exec, so a child started by a big parent reports the
  parent's size.
- bootstrap of 1,000 draws on 100,000 items: under 10 s.

    python benchmarks/bench_agreement.py [--items 1000000] [--repeats 5] [--krippendorff]
"""

from __future__ import annotations

import argparse
import json
import resource
import statistics
import subprocess
import sys
import tempfile
import time
from collections.abc import Callable
from functools import partial
from pathlib import Path
from typing import Any

import pandas as pd

sys.path.insert(0, str(Path(__file__).parent))
from make_agreement_data import make_annotations  # noqa: E402

from labelreview.agreement import agreement_report, per_label_alpha  # noqa: E402
from labelreview.agreement._parts import MAX_PARTS, PARALLEL_ROWS, cpu_count  # noqa: E402

COLUMNS = ("item", "annotator", "label")


def read_text(path: Path) -> pd.DataFrame:
    """The baseline read: pandas' own CSV reader with its default string columns."""
    return pd.read_csv(path)


def read_dictionary(path: Path) -> pd.DataFrame:
    """The large-file read: pyarrow's CSV reader with dictionary columns -> Categoricals."""
    import pyarrow as pa
    import pyarrow.csv as pcsv

    kind = pa.dictionary(pa.int32(), pa.string())
    options = pcsv.ConvertOptions(column_types=dict.fromkeys(COLUMNS, kind))
    return pcsv.read_csv(path, convert_options=options).to_pandas()


def read_mixed(path: Path) -> pd.DataFrame:
    """pyarrow's CSV reader with annotator and label as dictionaries, item ids as text.

    Converting a million-entry item dictionary to pandas costs more than the engine saves on
    it, so this is the quicker whole path when item ids are mostly distinct.
    """
    import pyarrow as pa
    import pyarrow.csv as pcsv

    kind = pa.dictionary(pa.int32(), pa.string())
    types = {"item": pa.large_string(), "annotator": kind, "label": kind}
    options = pcsv.ConvertOptions(column_types=types)
    return pcsv.read_csv(path, convert_options=options).to_pandas()


READERS: dict[str, Callable[[Path], pd.DataFrame]] = {
    "text": read_text,
    "dictionary": read_dictionary,
    "mixed": read_mixed,
}


def median_time(func: Callable[[], Any], repeats: int) -> tuple[float, list[float]]:
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        func()
        times.append(time.perf_counter() - start)
    return statistics.median(times), times


def peak_rss_mb() -> float:
    """VmHWM of this process in MB (Linux); ru_maxrss as a fallback elsewhere."""
    try:
        for line in Path("/proc/self/status").read_text().splitlines():
            if line.startswith("VmHWM:"):
                return int(line.split()[1]) / 1024
    except OSError:
        pass
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024


def probe(reader: str, path: Path, compute: bool) -> None:
    """Run in a fresh process: read (and compute); print the peak memory as JSON."""
    start = time.perf_counter()
    frame = READERS[reader](path)
    read_s = time.perf_counter() - start
    after_read = peak_rss_mb()
    alpha = None
    compute_s = 0.0
    if compute:
        start = time.perf_counter()
        alpha, _ = per_label_alpha(frame)
        compute_s = time.perf_counter() - start
    result = {
        "after_read_mb": after_read,
        "peak_mb": peak_rss_mb(),
        "read_s": read_s,
        "compute_s": compute_s,
        "alpha": alpha,
    }
    print(json.dumps(result))


def memory_probe(reader: str, path: Path, compute: bool) -> dict[str, Any]:
    command = [sys.executable, __file__, "--probe", reader, str(path)]
    if compute:
        command.append("--probe-compute")
    out = subprocess.run(command, capture_output=True, text=True, check=True)
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


def fmt(times: list[float]) -> str:
    return "[" + ", ".join(f"{t:.3f}" for t in times) + "]"


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--items", type=int, default=1_000_000)
    parser.add_argument("--repeats", type=int, default=5)
    parser.add_argument("--nltk-items", type=int, default=50_000)
    parser.add_argument("--bootstrap-items", type=int, default=100_000)
    parser.add_argument(
        "--krippendorff", action="store_true", help="time the krippendorff package (~30 s, 10 GB)"
    )
    parser.add_argument("--skip-nltk", action="store_true")
    parser.add_argument("--skip-bootstrap", action="store_true")
    parser.add_argument("--skip-report", action="store_true", help="skip the full-report timing")
    parser.add_argument("--probe", nargs=2, metavar=("READER", "CSV"), help=argparse.SUPPRESS)
    parser.add_argument("--probe-compute", action="store_true", help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.probe:
        probe(args.probe[0], Path(args.probe[1]), args.probe_compute)
        return

    target_mb = 1024 if args.items <= 1_000_000 else 3 * 1024
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "annotations.csv"
        generated = make_annotations(args.items)
        generated.to_csv(path, index=False)
        del generated
        print(f"data: {args.items:,} items, file {path.stat().st_size / 1e6:.0f} MB")

        # Memory first, each in a fresh process (VmHWM: peak resident set of that process).
        print("peak memory, fresh process per line (VmHWM):")
        for reader in READERS:
            alone = memory_probe(reader, path, compute=False)
            full = memory_probe(reader, path, compute=True)
            met = "met" if full["peak_mb"] < target_mb else "MISSED"
            print(
                f"  {reader:10s} read alone {alone['peak_mb']:6.0f} MB; read + nominal + "
                f"per-label {full['peak_mb']:6.0f} MB (target < {target_mb} MB: {met})"
            )

        text_read, text_all = median_time(lambda: read_text(path), args.repeats)
        dict_read, dict_all = median_time(lambda: read_dictionary(path), args.repeats)
        mixed_read, mixed_all = median_time(lambda: read_mixed(path), args.repeats)
        text = read_text(path)
        categorical = read_dictionary(path)
        mixed = read_mixed(path)
        print(f"rows: {len(text):,}")
        print(
            f"engine: sorted frames of {PARALLEL_ROWS:,}+ rows are cut into "
            f"{min(cpu_count(), MAX_PARTS)} parts summed in threads ({cpu_count()} CPUs here)"
        )
        print(f"baseline pandas read_csv (text):     median {text_read:7.3f} s  {fmt(text_all)}")
        print(f"pyarrow read_csv, dictionary columns: median {dict_read:7.3f} s  {fmt(dict_all)}")
        print(f"pyarrow read_csv, mixed (item text):  median {mixed_read:7.3f} s  {fmt(mixed_all)}")

        from_text, text_times = median_time(partial(per_label_alpha, text), args.repeats)
        from_cat, cat_times = median_time(partial(per_label_alpha, categorical), args.repeats)
        from_mixed, mixed_times = median_time(partial(per_label_alpha, mixed), args.repeats)
        alpha, labels = per_label_alpha(text)
        same = all(per_label_alpha(f) == (alpha, labels) for f in (categorical, mixed))
        print(
            f"nominal + {len(labels)} per-label, text columns:        median {from_text:7.3f} s  "
            f"{fmt(text_times)}  alpha={alpha:.6f}"
        )
        print(
            f"nominal + {len(labels)} per-label, categorical columns: median {from_cat:7.3f} s  "
            f"{fmt(cat_times)}  identical results: {same}"
        )
        print(
            f"nominal + {len(labels)} per-label, mixed columns:       median {from_mixed:7.3f} s  "
            f"{fmt(mixed_times)}"
        )
        for name, seconds in (
            ("text", from_text),
            ("categorical", from_cat),
            ("mixed", from_mixed),
        ):
            ratio = seconds / text_read
            verdict = "met" if ratio <= 1.0 else "MISSED"
            print(
                f"  ratio compute ({name}) / pandas read_csv: {ratio:.2f}  (target <= 1.0: "
                f"{verdict})"
            )
        print(
            f"  whole path, read + compute (information): pandas {text_read + from_text:.3f} s, "
            f"pyarrow dictionary {dict_read + from_cat:.3f} s, pyarrow mixed "
            f"{mixed_read + from_mixed:.3f} s"
        )
        del categorical, mixed

        if not args.skip_report:
            full_s, _ = median_time(partial(agreement_report, text, bootstrap=0), 1)
            print(
                f"full agreement_report (no bootstrap, with leave-one-out): {full_s:.2f} s "
                "(information only)"
            )

        if args.krippendorff:
            start = time.perf_counter()
            ref = krippendorff_path(text)
            kpp = time.perf_counter() - start
            print(
                f"baseline krippendorff package path:  {kpp:7.2f} s  alpha={ref:.6f} "
                f"(difference {abs(ref - alpha):.1e})"
            )
            for name, seconds in (("text", from_text), ("categorical", from_cat)):
                print(
                    f"  ratio krippendorff / labelreview ({name}): {kpp / seconds:.0f}x  "
                    "(target >= 30x)"
                )

        if not args.skip_nltk:
            subset = text[text["item"].isin(text["item"].unique()[: args.nltk_items])]
            start = time.perf_counter()
            nltk_alpha = nltk_path(subset)
            nl = (time.perf_counter() - start) * args.items / args.nltk_items
            print(
                f"baseline nltk AnnotationTask.alpha:  {nl:7.2f} s  (timed on "
                f"{args.nltk_items:,} items and scaled; alpha there {nltk_alpha:.6f})"
            )
            print(f"  ratio nltk / labelreview (text): {nl / from_text:.0f}x")
        del text

    if not args.skip_bootstrap:
        boot_frame = make_annotations(args.bootstrap_items, seed=11)
        plain, _ = median_time(
            lambda: agreement_report(boot_frame, bootstrap=0, leave_out=False), 3
        )
        with_boot, _ = median_time(
            lambda: agreement_report(boot_frame, bootstrap=1000, leave_out=False), 3
        )
        print(
            f"bootstrap 1,000 draws on {args.bootstrap_items:,} items: median "
            f"{with_boot - plain:.2f} s beyond the report ({with_boot:.2f} s in all; target < 10 s)"
        )


if __name__ == "__main__":
    main()
