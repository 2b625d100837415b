"""Progress and stage timing: bars on a terminal, plain log lines otherwise, nothing when quiet."""

from __future__ import annotations

import sys
import time
from collections.abc import Callable, Iterable, Iterator
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
        if not self.quiet:  # one write, line and end together: Spark's progress lines come from another thread
            sys.stderr.write(f"pilewise: {message}\n")
            sys.stderr.flush()

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

    @contextmanager
    def meter(self, *, total: int, label: str, every: float = 10.0) -> Iterator[Callable[[int, int], None]]:
        """Progress through `total` bytes: a bar with rate and time left on a terminal, else a plain line every
        `every` seconds; nothing when quiet. Yields `update(bytes_done, documents_in_step)`."""
        start = time.perf_counter()
        state: dict[str, float] = {"documents": 0, "last": start}
        bar = None
        if not self.quiet and self._tty:
            bar = tqdm(total=total, desc=label, unit="B", unit_scale=True, leave=False, file=sys.stderr)

        def update(done: int, documents: int) -> None:
            state["documents"] += documents
            if bar is not None:
                bar.update(max(0, min(done, total) - bar.n))
                bar.set_postfix_str(f"{int(state['documents']):,} documents", refresh=True)
                return
            now = time.perf_counter()
            if self.quiet or now - state["last"] < every:
                return
            state["last"] = now
            self.say(f"{label}: {progress_line(done, total, int(state['documents']), now - start)}")

        try:
            yield update
        finally:
            if bar is not None:
                bar.close()

    def track(self, items: Iterable[T], *, total: int, label: str, unit: str = "doc") -> Iterable[T]:
        """Wrap a loop with a progress bar with counts and time left (terminal only; quiet and pipes get none).

        Loops over documents get a bar from 200 documents on; loops over blocks or batches whenever there
        are at least two.
        """
        if self.quiet or not self._tty or total < (200 if unit == "doc" else 2):
            return items
        return tqdm(items, total=total, desc=label, unit=unit, leave=False, file=sys.stderr)


def progress_line(done: int, total: int, documents: int, elapsed: float) -> str:
    """'412 of 980 MB (42%), 420,000 documents, about 1 min 20 s left' (time left assumes a steady rate)."""
    share = done / total if total else 0.0
    line = f"{done / 1e6:,.0f} of {total / 1e6:,.0f} MB ({100 * share:.0f}%), {documents:,} documents"
    if 0 < share < 1:
        left = elapsed * (1 - share) / share
        line += f", about {int(left // 60)} min {int(left % 60)} s left" if left >= 60 else f", about {left:.0f} s left"
    return line
