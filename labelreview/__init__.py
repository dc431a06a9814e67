"""labelreview: review a labelled dataset's vocabulary for labels that pass judgement on people.

The core (loading, lexicons, scanning) knows nothing of the terminal; the CLI and the review app
are thin front ends over it. Importing this package loads neither textual nor click.
"""

from __future__ import annotations

from labelreview.errors import ConfigError, LabelReviewError, LexiconError, LoadError, UsageError
from labelreview.lexicon import Lexicon, load_lexicon
from labelreview.model import Finding, TaxonomyLabel
from labelreview.scan import Scanner, scan_labels, validate_lexicon

__version__ = "0.1.0"

__all__ = [
    "ConfigError",
    "Finding",
    "LabelReviewError",
    "Lexicon",
    "LexiconError",
    "LoadError",
    "Scanner",
    "TaxonomyLabel",
    "UsageError",
    "load_lexicon",
    "scan_labels",
    "validate_lexicon",
]
