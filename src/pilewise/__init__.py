"""pilewise: cluster a pile of unlabeled text and describe every cluster with evidence."""

from __future__ import annotations

from pilewise.errors import PilewiseError
from pilewise.options import RunOptions
from pilewise.pipeline import RunOutcome, run_collection

__version__ = "0.1.0"

__all__ = ["PilewiseError", "RunOptions", "RunOutcome", "run_collection", "__version__"]
