"""The review app's start-up reading: imports, ``load_dataset`` and the lexicon set.

What the review app does before it can scan (issue 5): ``import labelreview.tui`` (and
``labelreview.cli`` for ``labelreview review``), ``load_dataset`` (config, annotations,
taxonomy, item table) and ``load_lexicon`` for the dataset's layers (the shipped set here).
Each run is a fresh child process, so every import is a first import; the child prints its
own timings and the parent also times the whole child, Python's start and exit included.

Baseline, named for the ratios: the same child run against another checkout of labelreview,
given with ``--against DIR``, e.g. the code before this work::

    git archive <commit> | tar -x -C /tmp/labelreview-before
    python benchmarks/bench_load.py --data /tmp/rv50k --against /tmp/labelreview-before

Runs of the two alternate, so both see the same machine load. Without ``--against`` only the
current code is measured. In-process, the taxonomy reader's fast path is also timed against
its careful per-row reader (the fallback), with the collector paused as ``load_dataset``
pauses it.

``--bytecode`` runs the children with a private bytecode cache (as an installed package has);
by default the environment decides (PYTHONDONTWRITEBYTECODE=1 makes Python compile every
module of a checkout at every start).

Data: ``make_review_data.py`` (seeded, invented; 50,000 flagged labels: a 55,000-row taxonomy,
300,000 annotations, 100,000 items). Medians over runs; the machines are shared and noisy.

    python benchmarks/bench_load.py [--data DIR] [--runs 7] [--against DIR] [--bytecode]
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
STEPS = ("import", "load_dataset", "lexicons", "total")

CHILD = """
import json, sys, time
from pathlib import Path
started = time.perf_counter()
import labelreview.tui
import labelreview.cli
imported = time.perf_counter()
from labelreview.dataset import load_dataset
from labelreview.lexicon import load_lexicon
dataset = load_dataset(Path(sys.argv[1]))
loaded = time.perf_counter()
lexicons = dataset.config.lexicons
load_lexicon(lexicons.layers, base=lexicons.base)
done = time.perf_counter()
later = ("scipy", "sklearn", "statsmodels", "dask", "labelreview.agreement")
print(json.dumps({
    "import": imported - started,
    "load_dataset": loaded - imported,
    "lexicons": done - loaded,
    "total": done - started,
    "heavy_modules": [m for m in later if m in sys.modules],
    "code": str(Path(labelreview.__file__).parent),
}))
"""


def run_child(data: Path, source: Path | None, cache: Path | None) -> dict[str, object]:
    env = dict(os.environ)
    if source is not None:
        env["PYTHONPATH"] = str(source)
    if cache is not None:
        env.pop("PYTHONDONTWRITEBYTECODE", None)
        env["PYTHONPYCACHEPREFIX"] = str(cache)
    started = time.perf_counter()
    out = subprocess.run(
        [sys.executable, "-c", CHILD, str(data)],
        env=env,
        capture_output=True,
        text=True,
        check=True,
        cwd=source if source is not None else None,
    )
    figures: dict[str, object] = json.loads(out.stdout)
    figures["process"] = time.perf_counter() - started
    return figures


def summary(runs: list[dict[str, object]], key: str) -> tuple[float, str]:
    values = [float(r[key]) for r in runs]  # type: ignore[arg-type]
    middle = statistics.median(values)
    return middle, f"{middle:.3f} s ({min(values):.3f}-{max(values):.3f})"


def careful_vs_fast(data: Path, repeats: int) -> None:
    """The taxonomy reader in-process: fast path against its careful per-row reader."""
    from labelreview._gc import paused_gc
    from labelreview.io import _taxonomy, load_taxonomy

    path = data / "taxonomy.csv"

    def timed() -> float:
        times = []
        for _ in range(repeats):
            with paused_gc():
                started = time.perf_counter()
                load_taxonomy(path)
                times.append(time.perf_counter() - started)
        return statistics.median(times)

    fast = timed()
    keep = _taxonomy._csv_fast
    _taxonomy._csv_fast = lambda *args: None  # type: ignore[assignment]
    try:
        careful = timed()
        assert _taxonomy._read_csv(path, path.read_text(encoding="utf-8"), ",") == keep(
            path, path.read_text(encoding="utf-8"), ","
        )
    finally:
        _taxonomy._csv_fast = keep  # type: ignore[assignment]
    print(
        f"taxonomy reader in-process, {path.name}: fast {fast:.3f} s, careful per-row reader "
        f"(baseline) {careful:.3f} s, ratio {fast / careful:.2f} (median of {repeats})"
    )


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--data", type=Path, help="folder from make_review_data.py")
    parser.add_argument("--flags", type=int, default=50_000)
    parser.add_argument("--runs", type=int, default=7)
    parser.add_argument("--against", type=Path, help="another checkout: the named baseline")
    parser.add_argument("--bytecode", action="store_true", help="cache compiled modules")
    args = parser.parse_args()

    with tempfile.TemporaryDirectory() as scratch:
        data = args.data
        if data is None:
            data = Path(scratch) / "data"
            subprocess.run(
                [
                    sys.executable,
                    str(HERE / "make_review_data.py"),
                    str(data),
                    "--flags",
                    str(args.flags),
                ],
                check=True,
            )
        cache = Path(scratch) / "pycache" if args.bytecode else None
        sources: dict[str, Path | None] = {"current": None}
        if args.against is not None:
            sources["baseline"] = args.against.resolve()
        if cache is not None:  # one warm-up run each fills the bytecode cache
            for source in sources.values():
                run_child(data, source, cache)
        runs: dict[str, list[dict[str, object]]] = {name: [] for name in sources}
        for _ in range(args.runs):
            for name, source in sources.items():
                runs[name].append(run_child(data, source, cache))

    print(f"data: {data}; {args.runs} fresh processes each; bytecode cache: {bool(cache)}")
    for name, results in runs.items():
        print(f"\n{name}: code in {results[0]['code']}")
        for key in (*STEPS, "process"):
            print(f"  {key:13s} {summary(results, key)[1]}")
        heavy = sorted({m for r in results for m in r["heavy_modules"]})  # type: ignore[attr-defined]
        print(f"  imported at start though needed only later: {', '.join(heavy) or 'none'}")
    if "baseline" in runs:
        print("\nratio current / baseline (medians):")
        for key in (*STEPS, "process"):
            now, before = summary(runs["current"], key)[0], summary(runs["baseline"], key)[0]
            print(f"  {key:13s} {now:.3f} / {before:.3f} = {now / before:.2f}")
    print()
    careful_vs_fast(data, max(args.runs, 5))


if __name__ == "__main__":
    main()
