"""One thread per process while pilewise runs a second process beside the main one (issue 15, sixth pass).

On two cores, scikit-learn's k-means (OpenMP) and BLAS start a thread per core in each of two processes; the
four threads then wait on one another. These tests check the limits with threadpoolctl's own report
(`threadpool_info`, the library scikit-learn uses for the same purpose) and that the limits end with the block.
No test here times anything.
"""

from __future__ import annotations

import multiprocessing
from pathlib import Path

import numpy as np
import pytest
from threadpoolctl import threadpool_info

from pilewise.cores import one_thread_each
from pilewise.errors import PilewiseError
from pilewise.options import RunOptions
from pilewise.pipeline import _Beside, run_collection
from pilewise.vectors.languages import CLASSIFY_PARALLEL_MIN, DETECT_EARLY_BYTES

needs_fork = pytest.mark.skipif("fork" not in multiprocessing.get_all_start_methods(), reason="needs fork")


def _thread_counts() -> dict[str, int]:
    """The most threads any loaded OpenMP or BLAS pool of this process may start, by API."""
    counts: dict[str, int] = {}
    for pool in threadpool_info():
        counts[pool["user_api"]] = max(counts.get(pool["user_api"], 0), int(pool["num_threads"]))
    return counts


def _pools_loaded() -> None:
    """Load scikit-learn's OpenMP runtime and numpy's BLAS, so that threadpoolctl sees both pools."""
    import sklearn.cluster  # noqa: F401  (its compiled k-means links the OpenMP runtime)

    np.ones((2, 2)) @ np.ones((2, 2))


def test_one_thread_each_limits_and_restores() -> None:
    _pools_loaded()
    before = _thread_counts()
    limiter = one_thread_each()
    try:
        assert set(_thread_counts().values()) == {1}
    finally:
        limiter.restore_original_limits()
    assert _thread_counts() == before


@needs_fork
def test_beside_worker_and_caller_run_one_thread_each() -> None:
    _pools_loaded()
    before = _thread_counts()
    with _Beside({"threads": (_thread_counts, (), {})}, background=True) as beside:
        here = _thread_counts()
        there = beside.result("threads")
    assert set(here.values()) == {1}  # the calling process, while the worker runs
    assert there and set(there.values()) == {1}  # the worker, forked under the limit
    assert _thread_counts() == before  # given back when the block ends


def test_beside_in_place_leaves_the_limits_alone() -> None:
    _pools_loaded()
    before = _thread_counts()
    with _Beside({"threads": (_thread_counts, (), {})}, background=False) as beside:
        assert beside.result("threads") == before  # no second process, no reason to limit


@needs_fork
def test_a_failed_read_gives_the_threads_back(tmp_path: Path) -> None:
    """The detection worker is forked before reading when the source holds 8 MB or more; a read that fails
    (here: more documents than --max-documents) lets it go, and the thread limit ends with it."""
    _pools_loaded()
    before = _thread_counts()
    source = tmp_path / "notes.csv"
    line = "note about the parcel that came late and the refund that never came through again " * 4
    with source.open("w", encoding="utf-8") as out:
        out.write("text\n")
        for i in range(26_000):
            out.write(f"{line} {i}\n")
    assert source.stat().st_size >= DETECT_EARLY_BYTES * CLASSIFY_PARALLEL_MIN  # the early worker is forked
    options = RunOptions(source=source, out=tmp_path / "site", k=2, max_documents=100, workers=2, quiet=True)
    with pytest.raises(PilewiseError, match="more than --max-documents 100"):
        run_collection(options)
    assert _thread_counts() == before


def test_a_worker_that_cannot_start_gives_the_threads_back(monkeypatch: pytest.MonkeyPatch) -> None:
    _pools_loaded()
    before = _thread_counts()

    def no_process(*_: object, **__: object) -> None:
        raise OSError("fork failed")  # what os.fork raises when the system has no process to give (errno EAGAIN)

    monkeypatch.setattr("pilewise.pipeline.ProcessPoolExecutor", no_process)
    with pytest.raises(OSError, match="fork failed"):
        _Beside({"threads": (_thread_counts, (), {})}, background=True).__enter__()
    assert _thread_counts() == before
