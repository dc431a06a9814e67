"""The code stays ruff clean (the house style in pyproject.toml); ruff is in the test extra."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).parent.parent


def test_ruff_check_is_clean():
    cmd = [sys.executable, "-m", "ruff", "check", "labelreview", "tests", "scripts", "benchmarks"]
    proc = subprocess.run(cmd, cwd=ROOT, capture_output=True, text=True, check=False)
    assert proc.returncode == 0, proc.stdout + proc.stderr
