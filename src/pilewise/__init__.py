"""pilewise: cluster a pile of unlabeled text and describe every cluster with evidence."""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

from pilewise.errors import PilewiseError

if TYPE_CHECKING:
    from pilewise.options import RunOptions
    from pilewise.pipeline import RunOutcome, run_collection

__version__ = "0.1.0"


def __getattr__(name: str) -> Any:
    """RunOptions, RunOutcome and run_collection, imported when first asked for (PEP 562): `pilewise.cli` and
    `pilewise.errors` import this package, and should not pull in the pipeline's libraries with it."""
    if name == "RunOptions":
        from pilewise.options import RunOptions

        return RunOptions
    if name in ("RunOutcome", "run_collection"):
        from pilewise import pipeline

        return getattr(pipeline, name)
    raise AttributeError(f"module 'pilewise' has no attribute {name!r}")

__all__ = ["PilewiseError", "RunOptions", "RunOutcome", "run_collection", "__version__"]
