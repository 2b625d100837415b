"""The spark engine on a real standalone Spark cluster: a master and a worker of two cores started on this machine
as separate JVM processes (loopback only), the driver in another process (pilewise's command line), and the
executor's Python workers started by the worker's executor, so that nothing is shared with the driver but the
files. One two-core worker rather than two one-core workers: one JVM fewer for the worker and one for the executor
on a 2-core machine, and the executor still runs two tasks at once.

Checks are against the same run in memory (the adjusted Rand index between the two assignments; the in-memory
run takes seconds where a second Spark run took a minute) and against the planted topics of the collection.
The cluster is started once for the module, within a bounded time, and always stopped.
"""

from __future__ import annotations

import os
import shutil
import socket
import subprocess
import sys
import time
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path

import pytest
from sklearn.metrics import adjusted_rand_score
from tests.helpers import invoke, planted_notes_csv, read_assignments, read_clusters, read_ingest_report

import pilewise
from pilewise.output.exports import describe_file

pytestmark = [pytest.mark.spark, pytest.mark.slow]

START_WITHIN = 120.0  # seconds the master and the worker have to come up (JVM start on 2 shared cores)
RUN_WITHIN = 600  # seconds one pilewise run may take before the test fails instead of hanging


@dataclass(frozen=True)
class StandaloneCluster:
    """A running standalone cluster: its master URL and the environment a driver needs to reach it."""

    master: str
    env: dict[str, str]
    logs: Path


def _free_port() -> int:
    with socket.socket() as probe:
        probe.bind(("127.0.0.1", 0))
        return int(probe.getsockname()[1])


def _spark_home() -> Path:
    from pyspark.find_spark_home import _find_spark_home

    return Path(_find_spark_home())


def _loopback_env(work: Path) -> dict[str, str]:
    """Environment of the cluster's JVMs and of the driver: loopback only, this interpreter for the executors'
    Python workers, and this checkout's pilewise for the driver."""
    env = dict(os.environ)
    env.update({
        "SPARK_HOME": str(_spark_home()),
        "SPARK_LOCAL_IP": "127.0.0.1",  # RPC, block manager and the master's web page bind to loopback only
        "PYSPARK_PYTHON": sys.executable,
        "SPARK_WORKER_DIR": str(work / "worker-dirs"),
        "SPARK_LOG_DIR": str(work / "logs"),
        "PYTHONPATH": os.pathsep.join(filter(None, [str(Path(pilewise.__file__).parents[1]),
                                                    os.environ.get("PYTHONPATH")])),
    })
    return env


def _wait_for(log: Path, text: str, count: int, until: float, processes: list[subprocess.Popen[bytes]]) -> None:
    while time.monotonic() < until:
        if log.exists() and log.read_text(errors="replace").count(text) >= count:
            return
        dead = [p for p in processes if p.poll() is not None]
        if dead:
            raise RuntimeError(f"a cluster process ended early (exit {dead[0].returncode}); see {log.parent}")
        time.sleep(0.5)
    raise TimeoutError(f"{text!r} not seen {count} time(s) in {log} within {START_WITHIN:.0f} s")


@pytest.fixture(scope="module")
def cluster(tmp_path_factory: pytest.TempPathFactory) -> Iterator[StandaloneCluster]:
    """A standalone master and one worker of two cores and 1 GB, on 127.0.0.1; stopped afterwards."""
    try:
        import pyspark  # noqa: F401
    except ImportError:
        pytest.skip("PySpark missing (pip install '.[test]')")
    if not os.environ.get("JAVA_HOME") and shutil.which("java") is None:
        pytest.skip("Java 17 missing (apt-get install openjdk-17-jre-headless)")
    work = tmp_path_factory.mktemp("spark-cluster")
    env = _loopback_env(work)
    (work / "logs").mkdir()
    spark_class = str(_spark_home() / "bin" / "spark-class")
    port = _free_port()
    master = f"spark://127.0.0.1:{port}"
    commands = {
        "master": [spark_class, "org.apache.spark.deploy.master.Master", "--host", "127.0.0.1", "--port", str(port),
                   "--webui-port", str(_free_port())],
        "worker": [spark_class, "org.apache.spark.deploy.worker.Worker", master, "--host", "127.0.0.1",
                   "--cores", "2", "--memory", "1g", "--webui-port", str(_free_port()),
                   "--work-dir", str(work / "worker")],
    }
    processes: list[subprocess.Popen[bytes]] = []
    until = time.monotonic() + START_WITHIN
    try:
        for name, command in commands.items():
            with (work / "logs" / f"{name}.log").open("wb") as log:
                # its own session: the JVM is stopped by its own id below, nothing else
                processes.append(subprocess.Popen(command, stdout=log, stderr=subprocess.STDOUT, env=env,
                                                  start_new_session=True))
            if name == "master":
                _wait_for(work / "logs" / "master.log", "I have been elected leader", 1, until, processes)
        _wait_for(work / "logs" / "master.log", "Registering worker", 1, until, processes)
        yield StandaloneCluster(master, env, work)
    finally:
        for process in reversed(processes):
            process.terminate()
        for process in processes:
            try:
                process.wait(timeout=20)
            except subprocess.TimeoutExpired:
                process.kill()
                process.wait(timeout=10)


# the command line with one k-means start instead of 10 (each start is a dozen Spark jobs, each a round trip to the
# executor): the planted topics are well apart, and the test checks that the start found them
ONE_START_DRIVER = ("import sys; from pilewise.engines import spark_engine; "
                    "spark_engine.kmeans_starts = lambda options, texts: 1; from pilewise.cli import main; main()")


def _run(cluster: StandaloneCluster, source: Path, out: Path, master: str) -> Path:
    command = [sys.executable, "-c", ONE_START_DRIVER, "run", str(source), "--k", "3", "--seed", "0",
               "--out", str(out), "--engine", "spark", "--spark-master", master, "--quiet"]
    done = subprocess.run(command, env=cluster.env, capture_output=True, text=True, timeout=RUN_WITHIN, check=False)
    assert done.returncode == 0, done.stderr[-3000:]
    return Path(done.stdout.strip().splitlines()[-1]).parent


# the whole test, the cluster's start included, within START_WITHIN + RUN_WITHIN and the in-memory run
# (pytest-timeout): a hang on the cluster's sockets fails it instead of blocking the run
@pytest.mark.timeout(START_WITHIN + RUN_WITHIN + 120)
def test_a_standalone_cluster_gives_the_in_memory_clusters(cluster: StandaloneCluster, tmp_path: Path) -> None:
    source = tmp_path / "notes.csv"
    truth = planted_notes_csv(source, per_topic=40, seed=3)
    started = time.monotonic()
    on_cluster = _run(cluster, source, tmp_path / "cluster", cluster.master)
    print(f"standalone cluster run {time.monotonic() - started:.1f} s")
    in_memory = invoke("run", str(source), "--k", "3", "--seed", "0", "--out", str(tmp_path / "memory"), "--quiet")
    assert in_memory.exit_code == 0, in_memory.output
    memory_run = Path(in_memory.output.strip().splitlines()[-1]).parent
    local_rows = {row["doc_id"]: row for row in read_assignments(memory_run)}
    cluster_rows = read_assignments(on_cluster)
    # nothing lost: every row once, in reading order, on both
    assert [row["doc_id"] for row in cluster_rows] == list(local_rows) == list(truth)
    cluster_labels = [row["cluster"] for row in cluster_rows]
    local_labels = [local_rows[row["doc_id"]]["cluster"] for row in cluster_rows]
    planted = [truth[row["doc_id"]] for row in cluster_rows]
    # the executors on the cluster find the clusters the in-memory engine finds; ARI (Hubert and Arabie 1985) by
    # scikit-learn. Measured: 1.000 against local[2] and the planted topics (60 % topic words: well apart)
    ari = adjusted_rand_score(local_labels, cluster_labels)
    print(f"ARI cluster against in memory: {ari:.3f}; against the planted topics: "
          f"{adjusted_rand_score(planted, cluster_labels):.3f}")
    assert ari >= 0.95
    assert adjusted_rand_score(planted, cluster_labels) >= 0.95
    # the site is complete: pages, the executors' parts, and only files the pages describe
    clusters = read_clusters(on_cluster)
    assert clusters["documents"] == len(truth)
    written = [p.relative_to(on_cluster).as_posix() for p in on_cluster.rglob("*") if p.is_file()]
    assert {"index.html", "cluster-00.html", "cluster-02.html", "assignments.csv", "clusters.json", "cuts.csv",
            "ingest-report.csv", "members/cluster-00.csv"} <= set(written)
    assert any(name.startswith("assignments-parquet/") and name.endswith(".parquet") for name in written)
    assert any(name.startswith("assignments-parts/") and name.endswith(".csv") for name in written)
    assert [name for name in written if not describe_file(name)] == []
    assert [row for row in read_ingest_report(on_cluster) if row["status"] == "skipped"] == []
