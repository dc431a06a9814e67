"""Streaming agreement over annotation files larger than memory: time, peak memory, equality.

Data: seeded synthetic annotations (``make_agreement_data.make_annotations``, invented; 20 labels,
50 annotators, about 4.5 annotations per item), written chunk by chunk to CSV files of growing
size, so the generator itself never holds a large file in memory. ``--order sorted`` writes
items in order (one pass, the last item carried over); ``--order shuffled`` writes every chunk's
rows in random order (items not grouped: the file is partitioned into temporary files by item
and read again).

Each figure comes from a fresh process (peak memory is that process's VmHWM, the peak resident
set of its own address space, from /proc/self/status):

- **read only** (the baseline): the same batch reader (``TableStream.raw_batches``: blocks cut
  at record ends, each parsed by pyarrow and converted to pandas) with nothing done to the
  rows: the time to just read the data in batches;
- **stream**: ``stream_agreement`` (overall alpha, per-label alphas, kappas, per-annotator
  figures; bootstrap off unless ``--bootstrap N``), the path behind ``labelreview agreement
  --stream``; with ``--quick`` only the overall and per-label alphas
  (``stream_per_label_alpha``), the figures ``bench_agreement.py`` times in memory;
- **whole** (sizes up to ``--whole-max-mb`` only): ``load_annotations`` + ``agreement_report``,
  the in-memory path; its alpha must equal the streamed one exactly.

Target (issue 7): peak memory stays flat as the file grows (under 1.5 GB for a 10 GB CSV).

    python benchmarks/bench_stream.py --sizes 256 1024 4096 [--order sorted] [--dir /tmp/x]
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).parent))
from make_agreement_data import make_annotations  # noqa: E402

CHUNK_ITEMS = 200_000


def write_csv(path: Path, megabytes: int, order: str, seed: int = 7) -> dict[str, int]:
    """Write about ``megabytes`` MB of annotations, chunk by chunk; return rows and items."""
    target = megabytes * 1_000_000
    rng = np.random.default_rng(seed)
    rows = items = chunk = 0
    with open(path, "w", encoding="utf-8", newline="") as handle:
        handle.write("item,annotator,label\n")
        while handle.tell() < target:
            frame = make_annotations(CHUNK_ITEMS, seed=seed + chunk)
            # Items of this chunk get their own id range so ids stay unique across chunks.
            frame["item"] = "c" + f"{chunk:05d}" + frame["item"].str.slice(4)
            if order == "shuffled":
                frame = frame.sample(frac=1.0, random_state=int(rng.integers(0, 2**31)))
            frame.to_csv(handle, index=False, header=False)
            rows += len(frame)
            items += CHUNK_ITEMS
            chunk += 1
    return {"rows": rows, "items": items, "bytes": path.stat().st_size}


def peak_mb() -> float:
    for line in Path("/proc/self/status").read_text().splitlines():
        if line.startswith("VmHWM:"):
            return int(line.split()[1]) / 1024
    return float("nan")


def probe(kind: str, path: Path, bootstrap: int) -> None:
    """Run in a fresh process and print one JSON line."""
    import warnings

    warnings.simplefilter("ignore")
    start = time.perf_counter()
    out: dict[str, object] = {}
    if kind == "read":
        from labelreview.io import TableStream

        rows = 0
        for frame, _, _ in TableStream(path).raw_batches():
            rows += len(frame)
        out["rows"] = rows
    elif kind == "stream":
        from labelreview.agreement import stream_agreement, stream_per_label_alpha
        from labelreview.io import AnnotationStream

        if bootstrap < 0:  # the quick figures only: alpha and per-label alphas
            (alpha, labels), report = stream_per_label_alpha(AnnotationStream(path))
            out["alpha"], out["labels"] = alpha, [x.alpha for x in labels]
        else:
            result, report = stream_agreement(AnnotationStream(path), bootstrap=bootstrap)
            out["alpha"] = result.alpha
            out["labels"] = [x.alpha for x in result.per_label]
        out["notes"] = list(report.notes)
    else:
        from labelreview.agreement import agreement_report, per_label_alpha
        from labelreview.io import load_annotations

        frame, _ = load_annotations(path)
        if bootstrap < 0:
            alpha, labels = per_label_alpha(frame)
            out["alpha"], out["labels"] = alpha, [x.alpha for x in labels]
        else:
            result = agreement_report(frame, bootstrap=bootstrap)
            out["alpha"] = result.alpha
            out["labels"] = [x.alpha for x in result.per_label]
    out["seconds"] = time.perf_counter() - start
    out["peak_mb"] = peak_mb()
    print(json.dumps(out))


def run_probe(kind: str, path: Path, bootstrap: int) -> dict[str, object]:
    command = [sys.executable, __file__, "--probe", kind, str(path), "--bootstrap", str(bootstrap)]
    done = subprocess.run(command, capture_output=True, text=True)
    if done.returncode != 0:  # e.g. the whole-file path killed for lack of memory
        return {"failed": f"exit {done.returncode}"}
    return json.loads(done.stdout.strip().splitlines()[-1])


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", type=int, nargs="+", default=[256, 1024])
    parser.add_argument("--order", choices=["sorted", "shuffled"], default="sorted")
    parser.add_argument("--bootstrap", type=int, default=0)
    parser.add_argument("--quick", action="store_true", help="alpha and per-label alphas only")
    parser.add_argument("--whole-max-mb", type=int, default=1024)
    parser.add_argument("--dir", type=Path)
    parser.add_argument("--keep", action="store_true", help="keep the generated files")
    parser.add_argument("--probe", nargs=2, metavar=("KIND", "PATH"))
    args = parser.parse_args()
    if args.probe:
        probe(args.probe[0], Path(args.probe[1]), args.bootstrap)
        return
    if args.quick:
        args.bootstrap = -1
    folder = args.dir or Path(tempfile.mkdtemp(prefix="labelreview-bench-"))
    folder.mkdir(parents=True, exist_ok=True)
    figures = "alpha + per-label only" if args.quick else f"full report, bootstrap {args.bootstrap}"
    print(f"order: {args.order}; {figures}; files in {folder}")
    print(
        f"{'file':>9} {'rows':>12} {'read s':>8} {'stream s':>9} {'ratio':>6} "
        f"{'read MB':>8} {'stream MB':>10} {'whole s':>8} {'whole MB':>9}  equal"
    )
    for size in args.sizes:
        path = folder / f"ann_{size}mb_{args.order}.csv"
        if not path.exists():
            info = write_csv(path, size, args.order)
        else:
            info = {"rows": sum(1 for _ in open(path, "rb")) - 1, "bytes": path.stat().st_size}
        read = run_probe("read", path, args.bootstrap)
        stream = run_probe("stream", path, args.bootstrap)
        whole_s = whole_mb = "-"
        equal = "-"
        if size <= args.whole_max_mb:
            whole = run_probe("whole", path, args.bootstrap)
            if "failed" in whole:
                whole_s, whole_mb = "killed", str(whole["failed"])
            else:
                whole_s = f"{whole['seconds']:.1f}"
                whole_mb = f"{whole['peak_mb']:.0f}"
                equal = str(
                    whole["alpha"] == stream["alpha"] and whole["labels"] == stream["labels"]
                )
        ratio = float(stream["seconds"]) / float(read["seconds"])
        print(
            f"{info['bytes'] / 1e9:7.2f}GB {info['rows']:>12,} {read['seconds']:8.1f} "
            f"{stream['seconds']:9.1f} {ratio:6.2f} {read['peak_mb']:8.0f} "
            f"{stream['peak_mb']:10.0f} {whole_s:>8} {whole_mb:>9}  {equal}",
            flush=True,
        )
        if not args.keep:
            os.unlink(path)


if __name__ == "__main__":
    main()
