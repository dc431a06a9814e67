"""Free-text scan speed on 1,000,000 seeded captions (``make_captions.py``; about 12 words each).

Figures, each in a fresh process (peak memory is that process's VmHWM):

- **read only** (baseline): reading the item and caption columns in batches with the same
  reader (``TableStream.raw_batches``) and doing nothing else;
- **labelreview**: ``scan_text_sources`` with the full shipped lexicon set (a fresh scanner:
  every fuzzy match is computed in the run), the path behind ``labelreview scan
  --text-column caption``;
- **naive per-row matcher** (named baseline): every word of every row looked up in the set of
  one-word term forms and, when not there, ``rapidfuzz.process.extractOne(word, forms,
  scorer=fuzz.ratio, score_cutoff=88)``; no position rules at all, so it does less than
  labelreview. Timed on ``--naive-rows`` rows and scaled linearly.

Target (issue 7): 1,000,000 captions in under 30 s on this machine.

    python benchmarks/bench_text.py [--rows 1000000] [--naive-rows 2000] [--repeats 3]
"""

from __future__ import annotations

import argparse
import json
import re
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).parent))
from make_captions import make_captions  # noqa: E402


def peak_mb() -> float:
    for line in Path("/proc/self/status").read_text().splitlines():
        if line.startswith("VmHWM:"):
            return int(line.split()[1]) / 1024
    return float("nan")


def probe(kind: str, path: Path, naive_rows: int) -> None:
    out: dict[str, object] = {}
    start = time.perf_counter()
    if kind == "read":
        from labelreview.io import TableStream

        stream = TableStream(path, kind="items")
        rows = sum(len(frame) for frame, _, _ in stream.raw_batches())
        out["rows"] = rows
    elif kind == "scan":
        from labelreview.config import load_config
        from labelreview.lexicon import load_lexicon
        from labelreview.textscan import TextScanner, scan_text_sources, text_sources

        config = load_config(path.parent)
        lexicon = load_lexicon()
        loaded = time.perf_counter()
        scanner = TextScanner(lexicon, "people")
        sums = scan_text_sources(text_sources(config, ["caption"]), scanner)
        out["lexicon_s"] = loaded - start
        out["rows_with_hits"] = sums.with_hits["caption"]
        out["terms"] = len(sums.terms)
    else:
        import pandas as pd
        from rapidfuzz import fuzz, process

        from labelreview.lexicon import load_lexicon
        from labelreview.scan import Scanner

        scanner = Scanner(load_lexicon(), "people")
        forms = sorted(scanner._single)
        form_set = set(forms)
        texts = pd.read_csv(path, nrows=naive_rows)["caption"].tolist()
        start = time.perf_counter()
        hits = 0
        for text in texts:
            for word in re.findall(r"[a-z0-9@$']+", text.lower()):
                if word in form_set or process.extractOne(
                    word, forms, scorer=fuzz.ratio, score_cutoff=88
                ):
                    hits += 1
        out["rows"] = len(texts)
        out["hits"] = hits
    out["seconds"] = time.perf_counter() - start
    out["peak_mb"] = peak_mb()
    print(json.dumps(out))


def run(kind: str, path: Path, naive_rows: int) -> dict[str, object]:
    command = [
        sys.executable,
        __file__,
        "--probe",
        kind,
        str(path),
        "--naive-rows",
        str(naive_rows),
    ]
    done = subprocess.run(command, capture_output=True, text=True, check=True)
    return json.loads(done.stdout.strip().splitlines()[-1])


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", type=int, default=1_000_000)
    parser.add_argument("--naive-rows", type=int, default=2000)
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--probe", nargs=2, metavar=("KIND", "PATH"))
    args = parser.parse_args()
    if args.probe:
        probe(args.probe[0], Path(args.probe[1]), args.naive_rows)
        return
    folder = Path(tempfile.mkdtemp(prefix="labelreview-text-"))
    path = folder / "items.csv"
    make_captions(args.rows).to_csv(path, index=False)
    (folder / "labelreview.yaml").write_text(
        "version: 1\nsubjects: people\nitems: {path: items.csv, columns: {item: item}}\n",
        encoding="utf-8",
    )
    print(f"{args.rows:,} captions, {path.stat().st_size / 1e6:.0f} MB, in {folder}")
    reads = [run("read", path, 0) for _ in range(args.repeats)]
    scans = [run("scan", path, 0) for _ in range(args.repeats)]
    naive = run("naive", path, args.naive_rows)
    read_s = statistics.median(float(r["seconds"]) for r in reads)
    scan_s = statistics.median(float(r["seconds"]) for r in scans)
    naive_s = float(naive["seconds"]) * args.rows / float(naive["rows"])
    print(f"read only (baseline), median of {args.repeats}: {read_s:.2f} s")
    runs = ", ".join(f"{float(r['seconds']):.2f}" for r in scans)
    print(
        f"labelreview scan, median of {args.repeats}: {scan_s:.2f} s "
        f"(runs: {runs}; target < 30 s); "
        f"{scans[0]['rows_with_hits']:,} rows with a hit, {scans[0]['terms']} terms; "
        f"peak {max(float(r['peak_mb']) for r in scans):.0f} MB"
    )
    print(f"ratio scan / read: {scan_s / read_s:.1f}")
    print(
        f"naive per-row matcher: {float(naive['seconds']):.2f} s for {naive['rows']:,} rows, "
        f"scaled to {args.rows:,}: {naive_s:.0f} s; ratio naive / labelreview: "
        f"{naive_s / scan_s:.0f}x"
    )


if __name__ == "__main__":
    main()
