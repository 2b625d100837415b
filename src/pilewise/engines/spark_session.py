"""Starting and stopping Apache Spark for a run; the one place that imports PySpark at the top of a call.

PySpark is an optional extra (`pip install 'pilewise[spark]'`) and Spark needs a Java 17 runtime; both
are checked here, and either missing is one line naming the fix.
"""

from __future__ import annotations

import contextlib
import os
import re
import shutil
import tempfile
import threading
import time
import zipfile
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Any

from pilewise.errors import PilewiseError

NEEDS_PYSPARK = ("the spark engine needs PySpark and a Java 17 runtime; install them with "
                 "pip install 'pilewise[spark]' and your system's Java 17 package (Debian: openjdk-17-jre-headless)")
NEEDS_JAVA = ("the spark engine needs a Java 17 runtime and none was found; install one (Debian: apt-get install "
              "openjdk-17-jre-headless) or set JAVA_HOME")
LOG_CONFIG = Path(__file__).with_name("spark-log4j2.properties")  # Spark's log: errors only
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
def spark_session(master: str, *, quiet: bool, partitions: int,
                  say: Callable[[str], None] | None = None) -> Iterator[Any]:
    """A SparkSession on `master` for one run, stopped afterwards when this call started it.

    An active session (as under spark-submit or in a notebook) is used as it is and left running.
    `partitions` sets the shuffle partitions of a session started here (Spark's default of 200 is made
    for clusters; a local run wants about two per core). Spark's console progress bar is off (its carriage
    returns would share a line with the stage lines); `say` gets a line on every long Spark job instead.
    """
    check_spark_available()
    from pyspark.sql import SparkSession

    active = SparkSession.getActiveSession()
    if active is not None:
        _ship_code(active)  # the zip stays for the session's life, which is not this run's
        yield active
        return
    builder = (
        SparkSession.builder.master(master).appName("pilewise")
        .config("spark.ui.enabled", "false")  # no web server on a port the user did not ask for
        .config("spark.ui.showConsoleProgress", "false")  # our own whole lines instead (`job_progress`)
        .config("spark.sql.shuffle.partitions", str(partitions))
        .config("spark.default.parallelism", str(partitions))
        .config("spark.driver.memory", os.environ.get("PILEWISE_SPARK_DRIVER_MEMORY", "4g"))
        .config("spark.driver.extraJavaOptions", f"-Dlog4j.configurationFile={LOG_CONFIG.as_uri()}")
    )
    try:
        session = builder.getOrCreate()
    except Exception as err:  # Spark reports a failed start (no Java, a bad master URL) with several classes
        first = str(err).strip().splitlines()[0] if str(err).strip() else type(err).__name__
        raise PilewiseError(f"Spark did not start on {master!r} ({first}); check --spark-master and Java 17") from None
    session.sparkContext.setLogLevel("ERROR")
    scratch = _ship_code(session)
    try:
        with job_progress(session.sparkContext, None if quiet else say):
            yield session
    except PilewiseError:
        raise
    except Exception as err:  # Py4J and Spark errors (a lost JVM, a failed job): one line, not a traceback
        first = str(err).strip().splitlines()[0][:300] if str(err).strip() else type(err).__name__
        raise PilewiseError(
            f"Spark failed ({first}); if it ran out of memory, raise PILEWISE_SPARK_DRIVER_MEMORY (now "
            f"{os.environ.get('PILEWISE_SPARK_DRIVER_MEMORY', '4g')}) or run on a cluster with --spark-master"
        ) from None
    finally:
        with contextlib.suppress(Exception):  # the JVM may already be gone; the error above says why
            session.stop()
        if scratch is not None:
            shutil.rmtree(scratch, ignore_errors=True)


JOB_LINE_EVERY = 10.0  # seconds between the lines of a running Spark job (and before its first)


@contextmanager
def job_progress(context: Any, say: Callable[[str], None] | None, every: float = JOB_LINE_EVERY) -> Iterator[None]:
    """While the block runs, a whole line through `say` every `every` seconds for each Spark job that has run
    that long: its tasks done of all (Spark's status tracker, polled from a daemon thread). Short jobs (most
    of k-means' iterations) print nothing; `say` None (--quiet) prints nothing."""
    if say is None:
        yield
        return
    done = threading.Event()
    said: dict[int, float] = {}  # job id -> when it was first seen running, then when its last line was said

    def poll() -> None:
        while not done.wait(min(1.0, every)):
            tracker = context.statusTracker()
            now = time.monotonic()
            for job in tracker.getActiveJobsIds():
                if now - said.setdefault(job, now) >= every:
                    said[job] = now
                    line = job_line(tracker, job)
                    if line:
                        say(line)

    watcher = threading.Thread(target=poll, name="pilewise-spark-progress", daemon=True)
    watcher.start()
    try:
        yield
    finally:
        done.set()
        watcher.join(timeout=5)


def job_line(tracker: Any, job: int) -> str:
    """'Spark job 12 (reduceByKey at spark_engine.py:215): 37 of 64 tasks done' from Spark's status tracker;
    "" when the job ended in between."""
    info = tracker.getJobInfo(job)
    if info is None:
        return ""
    stages = [stage for stage in (tracker.getStageInfo(s) for s in info.stageIds) if stage is not None]
    total = sum(stage.numTasks for stage in stages)
    finished = sum(stage.numCompletedTasks for stage in stages)
    running = [stage for stage in stages if stage.numActiveTasks > 0] or stages
    name = running[0].name if running else ""
    where, _, place = name.partition(" at ")
    label = f" ({where} at {Path(place).name})" if place else (f" ({where})" if where else "")
    return f"Spark job {job}{label}: {finished:,} of {total:,} tasks done"


_SHIPPED: set[str] = set()  # Spark applications that have this pilewise's code (a file is added once)


def _ship_code(session: Any) -> Path | None:
    """Ship this pilewise's own code to the executors (a zip of the package, `SparkContext.addPyFile`), so
    that they tokenize and read with exactly the driver's version; its libraries (numpy, scikit-learn) must
    be installed where the executors run. Returns the zip's folder (None when the session has it already)."""
    import pilewise

    context = session.sparkContext
    if context.applicationId in _SHIPPED:
        return None
    package = Path(pilewise.__file__).parent
    scratch = Path(tempfile.mkdtemp(prefix="pilewise-spark-"))
    archive = scratch / "pilewise.zip"
    with zipfile.ZipFile(archive, "w", zipfile.ZIP_DEFLATED) as bundle:
        for path in sorted(package.rglob("*.py")):
            bundle.write(path, path.relative_to(package.parent).as_posix())
    context.addPyFile(str(archive))
    _SHIPPED.add(context.applicationId)
    return scratch
