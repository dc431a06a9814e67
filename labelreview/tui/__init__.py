"""The review app (Textual): ``labelreview review`` and ``labelreview demo``.

A front end over :mod:`labelreview.review`; the core never imports this package.
"""

from __future__ import annotations

from labelreview.tui.app import ReviewApp
from labelreview.tui.loading import ReviewSource

__all__ = ["ReviewApp", "ReviewSource"]
