"""A plain (non-editable) install must carry the shipped lexicons and sample sets: build the
wheel and look inside it (the wheel format is a zip archive, PEP 427)."""

from __future__ import annotations

import subprocess
import sys
import zipfile
from pathlib import Path

ROOT = Path(__file__).parent.parent


def test_wheel_contains_lexicons_sample_sets_and_word_list(tmp_path: Path):
    proc = subprocess.run(
        [
            sys.executable,
            "-m",
            "pip",
            "wheel",
            str(ROOT),
            "--no-deps",
            "--no-build-isolation",
            "-q",
            "-w",
            str(tmp_path),
        ],
        capture_output=True,
        text=True,
        check=False,
    )
    assert proc.returncode == 0, proc.stderr
    (wheel,) = tmp_path.glob("labelreview-*.whl")
    names = set(zipfile.ZipFile(wheel).namelist())
    expected = {
        "labelreview/_data/lexicons/base/character_judgement.yaml",
        "labelreview/_data/lexicons/base/occupation_from_appearance.yaml",
        "labelreview/_data/lexicons/WORDNET_LICENSE.txt",
        "labelreview/_data/sample_sets/harbour_archive/annotations.csv",
        "labelreview/_data/sample_sets/harbour_archive/labelreview.yaml",
        "labelreview/data/english_words.txt.gz",
        "labelreview/py.typed",
        "labelreview/tui/review.tcss",  # the review app's stylesheet (not a .py file)
    }
    assert expected <= names, sorted(expected - names)
    base_files = {p.name for p in (ROOT / "lexicons" / "base").glob("*.yaml")}
    shipped = {
        n.rsplit("/", 1)[1] for n in names if n.startswith("labelreview/_data/lexicons/base/")
    }
    assert shipped == base_files
