"""Where the shipped lexicons and sample sets live, installed or in a source checkout."""

from __future__ import annotations

from pathlib import Path

_PACKAGE_DIR = Path(__file__).resolve().parent


def _find(name: str) -> Path:
    installed = _PACKAGE_DIR / "_data" / name
    if installed.is_dir():
        return installed
    checkout = _PACKAGE_DIR.parent / name
    if checkout.is_dir():
        return checkout
    raise FileNotFoundError(
        f"labelreview's bundled '{name}' folder is missing; reinstall the package."
    )


def lexicons_dir() -> Path:
    """The folder of the shipped lexicon set (``lexicons/``)."""
    return _find("lexicons")


def sample_sets_dir() -> Path:
    """The folder of the shipped, invented sample sets (``sample_sets/``)."""
    return _find("sample_sets")
