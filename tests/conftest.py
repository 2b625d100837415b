"""Shared fixtures: tiny corpora written inside the tests. Plain helpers are in helpers.py."""

from __future__ import annotations

from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest

from helpers import write_topic_folder


@pytest.fixture
def topic_folder(tmp_path: Path) -> Path:
    """60 notes on three well-separated invented topics (garden, bicycle, kitchen), 20 each."""
    folder = tmp_path / "notes"
    write_topic_folder(folder)
    return folder


# --- the spark engine's tests (pytest -m spark) --------------------------------------------------------------


def needs_spark() -> None:
    """Skip (fail under CI, which installs both) when PySpark or Java 17 is missing."""
    import os
    import shutil

    missing = []
    try:
        import pyspark  # noqa: F401
    except ImportError:
        missing.append("PySpark (pip install '.[test]')")
    if not os.environ.get("JAVA_HOME") and shutil.which("java") is None:
        missing.append("Java 17 (apt-get install openjdk-17-jre-headless)")
    if missing:
        if os.environ.get("CI"):
            pytest.fail(f"{' and '.join(missing)} missing; .ci/run installs them for this test")
        pytest.skip(f"{' and '.join(missing)} missing")


@pytest.fixture(scope="session")
def spark() -> Iterator[Any]:
    """One local Spark session (local[2]) for every Spark test of the session: runs in this process find it active
    and use it, so the JVM and the session start once.

    Two partitions, one per core, where `--spark-master local[2]` starts four (two per core, for uneven tasks on
    large inputs): on the tests' small inputs every task is fixed cost (a Python worker's round trip, about 0.1 s),
    and a run is some 60 Spark jobs. The code paths are the same; docs/scale.md has the timings."""
    needs_spark()
    from pilewise.engines.spark_session import spark_session

    with spark_session("local[2]", quiet=False, partitions=2) as session:
        yield session


@pytest.fixture
def one_kmeans_start(monkeypatch: pytest.MonkeyPatch) -> None:
    """The spark engine makes one k-means start instead of 10 (each start is a dozen Spark jobs), for tests that
    check reading or a file system, not the clustering."""
    from pilewise.engines import spark_engine

    monkeypatch.setattr(spark_engine, "kmeans_starts", lambda options, texts: 1)
