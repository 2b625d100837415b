"""Starting and stopping Apache Spark for a run; the one place that imports PySpark at the top of a call.

PySpark is an optional extra (`pip install 'pilewise[spark]'`) and Spark needs a Java 17 runtime; both
are checked here, and either missing is one line naming the fix.
"""

from __future__ import annotations

import os
import re
import shutil
from collections.abc import Iterator
from contextlib import contextmanager
from typing import Any

from pilewise.errors import PilewiseError

NEEDS_PYSPARK = ("the spark engine needs PySpark and a Java 17 runtime; install them with "
                 "pip install 'pilewise[spark]' and your system's Java 17 package (Debian: openjdk-17-jre-headless)")
NEEDS_JAVA = ("the spark engine needs a Java 17 runtime and none was found; install one (Debian: apt-get install "
              "openjdk-17-jre-headless) or set JAVA_HOME")
_URL = re.compile(r"^[A-Za-z][A-Za-z0-9+.-]*://")


def is_url(source: str) -> bool:
    """True for a path with a scheme Spark reads (hdfs://, s3a://, file://), which is not checked on this disk."""
    return _URL.match(source) is not None


def check_spark_available() -> None:
    """Raise the one-line error when PySpark or Java is missing, before any reading."""
    try:
        import pyspark  # noqa: F401
    except ImportError:
        raise PilewiseError(NEEDS_PYSPARK) from None
    if not os.environ.get("JAVA_HOME") and shutil.which("java") is None:
        raise PilewiseError(NEEDS_JAVA)


@contextmanager
def spark_session(master: str, *, quiet: bool, partitions: int) -> Iterator[Any]:
    """A SparkSession on `master` for one run, stopped afterwards when this call started it.

    An active session (as under spark-submit or in a notebook) is used as it is and left running.
    `partitions` sets the shuffle partitions of a session started here (Spark's default of 200 is made
    for clusters; a local run wants about two per core). The console progress bar shows unless `quiet`.
    """
    check_spark_available()
    from pyspark.sql import SparkSession

    active = SparkSession.getActiveSession()
    if active is not None:
        yield active
        return
    builder = (
        SparkSession.builder.master(master).appName("pilewise")
        .config("spark.ui.enabled", "false")  # no web server on a port the user did not ask for
        .config("spark.ui.showConsoleProgress", "false" if quiet else "true")
        .config("spark.sql.shuffle.partitions", str(partitions))
        .config("spark.default.parallelism", str(partitions))
        .config("spark.driver.memory", os.environ.get("PILEWISE_SPARK_DRIVER_MEMORY", "4g"))
    )
    try:
        session = builder.getOrCreate()
    except Exception as err:  # Spark reports a failed start (no Java, a bad master URL) with several classes
        first = str(err).strip().splitlines()[0] if str(err).strip() else type(err).__name__
        raise PilewiseError(f"Spark did not start on {master!r} ({first}); check --spark-master and Java 17") from None
    session.sparkContext.setLogLevel("ERROR")
    try:
        yield session
    finally:
        session.stop()
