"""Progress and stage timing: bars on a terminal, plain log lines otherwise, nothing when quiet."""

from __future__ import annotations

import sys
import time
from collections.abc import Iterable, Iterator
from contextlib import contextmanager
from typing import TypeVar

from tqdm import tqdm

T = TypeVar("T")


class Reporter:
    """Times named stages and reports them on standard error."""

    def __init__(self, *, quiet: bool = False) -> None:
        self.quiet = quiet
        self.timings: dict[str, float] = {}
        self._tty = sys.stderr.isatty()

    def say(self, message: str) -> None:
        if not self.quiet:
            print(f"pilewise: {message}", file=sys.stderr, flush=True)

    def warn(self, message: str) -> None:
        """A warning is printed even when quiet."""
        print(f"pilewise: warning: {message}", file=sys.stderr, flush=True)

    @contextmanager
    def stage(self, name: str) -> Iterator[None]:
        self.say(f"{name} ...")
        start = time.perf_counter()
        try:
            yield
        finally:
            self.timings[name] = round(time.perf_counter() - start, 3)

    def track(self, items: Iterable[T], *, total: int, label: str) -> Iterable[T]:
        """Wrap a loop with a progress bar (terminal only; quiet and pipes get none)."""
        if self.quiet or not self._tty or total < 200:
            return items
        return tqdm(items, total=total, desc=label, unit="doc", leave=False, file=sys.stderr)
