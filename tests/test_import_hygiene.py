"""The core must not load the terminal front ends: importing it leaves textual, click and rich
out of sys.modules (checked in a fresh interpreter, so other tests cannot hide a leak)."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest

import labelreview

FRONT_ENDS = ("labelreview.cli", "labelreview.tui")


def _core_modules() -> list[str]:
    """Every module of the package except the two front ends, found on disk."""
    root = Path(labelreview.__file__).parent
    names = ["labelreview"]
    for path in sorted(root.rglob("*.py")):
        parts = path.relative_to(root.parent).with_suffix("").parts
        if parts[-1] == "__init__":
            parts = parts[:-1]
        name = ".".join(parts)
        if name == "labelreview" or name.startswith(FRONT_ENDS) or name.endswith("__main__"):
            continue
        names.append(name)
    return names


CORE_MODULES = _core_modules()


def test_core_modules_were_found():
    assert "labelreview.scan" in CORE_MODULES and "labelreview.io" in CORE_MODULES
    assert not any(m.startswith(FRONT_ENDS) for m in CORE_MODULES)


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


# What the review app's start must not wait for: the statistics stack and the engines it runs
# in the background after the first paint (or never, for this command).
LATER = ("scipy", "sklearn", "statsmodels", "dask", "distributed", "labelreview.agreement")


@pytest.mark.parametrize("front_end", FRONT_ENDS)
def test_front_end_import_leaves_heavy_modules_for_later(front_end):
    code = (
        f"import sys, importlib; importlib.import_module({front_end!r}); "
        f"print(','.join(m for m in {LATER!r} if m in sys.modules))"
    )
    out = subprocess.run(
        [sys.executable, "-c", code], capture_output=True, text=True, check=True
    ).stdout.strip()
    assert out == "", f"importing {front_end} loaded {out}"
