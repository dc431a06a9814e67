"""The core must not load the terminal front ends: importing it leaves textual, click and rich
out of sys.modules (checked in a fresh interpreter, so other tests cannot hide a leak)."""

from __future__ import annotations

import subprocess
import sys

import pytest

CORE_MODULES = [
    "labelreview",
    "labelreview.errors",
    "labelreview.model",
    "labelreview.text",
    "labelreview.lexicon",
    "labelreview.scan",
    "labelreview.config",
    "labelreview.io",
    "labelreview.dataset",
    "labelreview.report",
]


@pytest.mark.parametrize("module", CORE_MODULES)
def test_core_module_loads_no_front_end(module):
    code = (
        f"import sys, importlib; importlib.import_module({module!r}); "
        "bad = [m for m in ('textual', 'click', 'rich') if m in sys.modules]; "
        "print(','.join(bad))"
    )
    out = subprocess.run(
        [sys.executable, "-c", code], capture_output=True, text=True, check=True
    ).stdout.strip()
    assert out == "", f"{module} imported {out}"
