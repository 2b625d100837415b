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


def submitted_master() -> str | None:
    """The master given to spark-submit when pilewise runs under it (its JVM is then already started, and
    PYSPARK_GATEWAY_PORT names it); None otherwise."""
    if not os.environ.get("PYSPARK_GATEWAY_PORT"):
        return None
    from pyspark import SparkContext

    SparkContext._ensure_initialized()  # connects to spark-submit's JVM; starts nothing
    jvm = SparkContext._jvm
    master = jvm.java.lang.System.getProperty("spark.master") if jvm is not None else None
    return str(master) if master else None


@contextmanager
def spark_session(master: str, *, quiet: bool, partitions: int | None,
                  say: Callable[[str], None] | None = None) -> Iterator[Any]:
    """A SparkSession on `master` for one run, stopped afterwards when this call started it.

    An active session (as under spark-submit or in a notebook) is used as it is and left running.
    `partitions` sets the shuffle partitions and default parallelism of a session started here (a local
    run wants about two per core); None (a cluster's master) leaves Spark's default parallelism, the
    executors' cores, and sets the shuffle partitions to twice that once the first executor has registered.
    Spark's console progress bar is off (its carriage returns would share a line with the stage lines);
    `say` gets a line on every long Spark job instead.
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
        .config("spark.driver.memory", os.environ.get("PILEWISE_SPARK_DRIVER_MEMORY", "4g"))
        .config("spark.driver.extraJavaOptions", f"-Dlog4j.configurationFile={LOG_CONFIG.as_uri()}")
    )
    if partitions is not None:
        builder = (builder.config("spark.sql.shuffle.partitions", str(partitions))
                   .config("spark.default.parallelism", str(partitions)))
    try:
        session = builder.getOrCreate()
    except Exception as err:  # Spark reports a failed start (no Java, a bad master URL) with several classes
        first = str(err).strip().splitlines()[0] if str(err).strip() else type(err).__name__
        raise PilewiseError(f"Spark did not start on {master!r} ({first}); check --spark-master and Java 17") from None
    session.sparkContext.setLogLevel("ERROR")
    scratch = _ship_code(session)
    try:
        if partitions is None:
            _wait_for_executors(session.sparkContext, master)
            session.conf.set("spark.sql.shuffle.partitions", str(2 * session.sparkContext.defaultParallelism))
        check_executors(session.sparkContext)
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


EXECUTOR_WAIT = 120.0  # seconds a cluster's master has to give the run its first executor


def _wait_for_executors(context: Any, master: str, wait: float = EXECUTOR_WAIT) -> None:
    """Block until an executor has registered (Spark's default parallelism is then the executors' cores);
    a cluster without free workers would otherwise leave every job waiting without a word."""
    until = time.monotonic() + wait
    while context._jsc.sc().getExecutorIds().size() == 0:  # the driver is not among these ids
        if time.monotonic() > until:
            memory = context.getConf().get("spark.executor.memory", "1g")
            raise PilewiseError(
                f"no Spark executor started on {master!r} within {wait:.0f} s; check that the cluster has a "
                f"worker with a free core and {memory} of free memory (spark.executor.memory), or pass another "
                "--spark-master")
        time.sleep(0.5)


def _executor_python() -> tuple[str, str]:
    """Run on an executor: its Python's version and where its pilewise was imported from."""
    import sys

    import numpy  # noqa: F401
    import scipy  # noqa: F401
    import sklearn  # noqa: F401

    import pilewise as shipped

    return f"{sys.version_info[0]}.{sys.version_info[1]}", str(shipped.__file__)


# the executor's Python error as Python prints it ("ModuleNotFoundError: No module named 'numpy'", PySpark's
# "...PySparkRuntimeError: [PYTHON_VERSION_MISMATCH] ..."), not a JVM frame or exception around it
_PYTHON_ERROR = re.compile(r"^(?!(?:org|java|py4j|scala)\.)[A-Za-z_][\w.]*(?:Error|Exception): \S")


def check_executors(context: Any) -> tuple[str, str]:
    """One small task on an executor: its Python must import numpy, scipy, scikit-learn and the shipped
    pilewise, in the driver's Python version (PySpark refuses another). One line naming the fix when not;
    returns the executor's Python version and its pilewise's file."""
    python = os.environ.get("PYSPARK_PYTHON") or context.getConf().get("spark.pyspark.python", "python3")
    context.setLogLevel("OFF")  # a failed check is said in one line below, not as Spark's task error log
    try:
        return context.parallelize([0], 1).map(lambda _: _executor_python()).first()
    except Exception as err:  # Py4J wraps the executor's Python error; its last line names the module
        lines = [line.strip() for line in str(err).splitlines() if line.strip()]
        cause = next((line for line in reversed(lines) if _PYTHON_ERROR.match(line)),
                     lines[0] if lines else type(err).__name__)
        raise PilewiseError(
            f"the Spark executors' Python ({python}) cannot run pilewise ({cause[:200]}); install numpy, scipy and "
            "scikit-learn there, in the driver's Python version, or set PYSPARK_PYTHON to such a Python") from None
    finally:
        context.setLogLevel("ERROR")


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
