"""Writing a finished run (or sweep) into OUT: scratch and staging folders, name locks, the move into place."""

from __future__ import annotations

import multiprocessing
import os
import shutil
import tempfile
import time
from collections.abc import Callable, Iterable, Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Any

from pilewise.model import RunResult
from pilewise.output.exports import DocumentTables, cut_groups, write_compare_json, write_manifest, write_run_records
from pilewise.output.outfolder import (
    check_replaceable,
    inside,
    mark,
    name_lock,
    safe_name,
    site_lock,
    writing_to,
)
from pilewise.output.site import render_comparison, render_run_site
from pilewise.progress import Reporter
from pilewise.vectors.streaming import default_workers

TABLES_BESIDE_FROM = 10_000  # documents from which the document tables are written in a worker beside the pages


@contextmanager
def _claim_name(folder: Path, kind: str, option: str, *, wait: bool = False) -> Iterator[None]:
    """The lock on OUT/kind/NAME, and the check that pilewise may replace what is there."""
    inside(folder.parent.parent, folder)
    with writing_to(folder.parent.parent), name_lock(folder, what=option, wait=wait):
        check_replaceable(folder, kind, f"pass another {option}")
        yield


@contextmanager
def _work_folder(out: Path) -> Iterator[Path]:
    """A private scratch folder inside OUT (the streaming path's document shelf), removed at the end.

    Made before the computation starts, so that an OUT that cannot be written fails at once.
    """
    with writing_to(out):
        out.mkdir(parents=True, exist_ok=True)
        for stale in out.glob(".work-*-*"):  # left by a killed run; another run may be using its own right now
            if not _process_alive(stale.name.split("-")[1]):
                shutil.rmtree(stale, ignore_errors=True)
        folder = Path(tempfile.mkdtemp(prefix=f".work-{os.getpid()}-", dir=out))
    try:
        yield folder
    finally:
        shutil.rmtree(folder, ignore_errors=True)


def _process_alive(pid: str) -> bool:
    if not pid.isdigit():
        return False
    try:
        os.kill(int(pid), 0)
    except ProcessLookupError:
        return False
    except PermissionError:  # alive, under another user
        return True
    return True


def _write_run(folder: Path, result: RunResult, reporter: Reporter) -> None:
    start = time.perf_counter()
    total = len(result.collection.documents)
    tables = None
    if result.population is not None:  # the documents are on the engine that read them; it writes assignments
        result.population.write_assignments(folder, [c.shown for c in result.naming.clusters], cut_groups(result))
    else:
        tables = DocumentTables(folder, result)
    with _TablesBeside(tables, background=tables_beside(result),
                       track=lambda items: reporter.track(items, total=total, label="writing exports")) as beside:
        write_run_records(folder, result)
        render_run_site(folder, result, track=lambda items: reporter.track(items, total=total, label="writing pages"),
                        exports_written=beside.wait)
    # the manifest is written again last, so that its timings include writing the exports and pages
    result.timings["writing site"] = round(time.perf_counter() - start, 3)
    write_manifest(folder, result)


def tables_beside(result: RunResult) -> bool:
    """Whether the document tables are written in a forked worker while the pages are rendered: with a second
    core (not --workers 1), from TABLES_BESIDE_FROM documents, and where processes can be forked."""
    return (result.population is None and (result.options.workers or default_workers()) > 1
            and len(result.collection.documents) >= TABLES_BESIDE_FROM
            and "fork" in multiprocessing.get_all_start_methods())


def _write_tables_in_worker(tables: DocumentTables) -> None:
    """The worker's job; any failure is only its exit status, since the caller writes the tables again in place
    and reports the error there as it would without the worker."""
    try:
        tables.write()
    except BaseException:  # the caller writes them again and raises the error itself
        os._exit(1)


class _TablesBeside:
    """`DocumentTables.write` in one forked worker process beside the caller's work, or in place.

    The worker inherits the run's result at the fork (no copy is pickled) and writes assignments.csv, cuts.csv
    and members/ into the staging folder; `wait` returns when they are complete. A worker that fails (an
    error, out of memory, a signal) leaves the tables to the calling process, which writes them again from the
    start in place, so an error (a full disk) is raised there as one line. Without `background` the tables are
    written in place when the block starts (the order of a sequential writer). Leaving the block on an error
    stops the worker before the staging folder is removed.
    """

    def __init__(self, tables: DocumentTables | None, *, background: bool,
                 track: Callable[[Iterable[Any]], Iterable[Any]] | None = None) -> None:
        self.tables = tables
        self.background = background and tables is not None
        self.track = track
        self.process: multiprocessing.process.BaseProcess | None = None

    def __enter__(self) -> _TablesBeside:
        if self.tables is None:
            return self
        if self.background:
            self.process = multiprocessing.get_context("fork").Process(
                target=_write_tables_in_worker, args=(self.tables,), daemon=True)
            self.process.start()
        else:
            self.tables.write(self.track)
        return self

    def wait(self) -> None:
        """Return once the tables are complete (written again in place if the worker failed)."""
        if self.process is None:
            return
        self.process.join()  # interrupted here (Ctrl-C), the worker is still known to __exit__, which stops it
        process, self.process = self.process, None
        if process.exitcode != 0 and self.tables is not None:
            self.tables.write(self.track)

    def __exit__(self, kind: type[BaseException] | None, *_: object) -> None:
        if kind is not None and self.process is not None:
            self.process.terminate()
            self.process.join()
            self.process = None
        self.wait()


def _write_atomically(target: Path, write: Callable[[Path], None]) -> None:
    """Build into a temporary sibling folder, mark it as pilewise's, and move it into place only when complete.

    The caller holds the lock on the target's name, so the staging folders found here were left by a
    killed run. The move itself happens under the site's lock, so that the root index never sees the
    name missing.
    """
    target.parent.mkdir(parents=True, exist_ok=True)
    for stale in target.parent.glob(f".{target.name}-building-*"):  # left by a killed run
        shutil.rmtree(stale, ignore_errors=True)
    staging = Path(tempfile.mkdtemp(prefix=f".{target.name}-building-", dir=target.parent))
    try:
        write(staging)
        mark(staging)
        os.chmod(staging, 0o755)
        with site_lock(target.parent.parent):
            if target.exists():
                retired = Path(tempfile.mkdtemp(prefix=f".{target.name}-old-", dir=target.parent))
                os.replace(target, retired / target.name)
                os.replace(staging, target)
                shutil.rmtree(retired, ignore_errors=True)
            else:
                os.replace(staging, target)
    finally:
        if staging.exists():
            shutil.rmtree(staging, ignore_errors=True)


def comparison_folder(out: Path, document: dict[str, Any]) -> Path:
    """OUT/compare/A--B, its parts made safe from the runs' recorded names and checked to stay under OUT."""
    a, b = document["runs"]["a"], document["runs"]["b"]
    return inside(out, out / "compare" / f"{safe_name(str(a))}--{safe_name(str(b))}")


def write_comparison(out: Path, document: dict[str, Any], run_a: Path, run_b: Path) -> Path:
    """OUT/compare/A--B/ (compare.json and index.html) for a comparison of the run folders given; the page's path.

    A comparison folder that pilewise did not write is refused. The caller holds the site's lock.
    """
    folder = comparison_folder(out, document)
    check_replaceable(folder, "compare", "pass another --out")
    folder.mkdir(parents=True, exist_ok=True)
    mark(folder)
    write_compare_json(folder, document)
    return render_comparison(folder, out, document, run_a, run_b)

