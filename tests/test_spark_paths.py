"""Paths on other file systems with the spark engine: a scheme whose Hadoop connector is not installed, or an
HDFS namenode that is not there, is one line naming the fix, before anything is read (PySpark ships the HDFS and
WebHDFS clients and local files, not the S3A connector)."""

from __future__ import annotations

import os
import shutil
import socket
import subprocess
import sys
import time
from pathlib import Path
from typing import Any

import pytest
from tests.helpers import assert_one_line_error, invoke

import pilewise

pytestmark = [pytest.mark.spark, pytest.mark.slow]  # a Spark run: over 10 s


def test_an_s3a_path_without_the_connector_is_one_line_naming_the_fix(spark: Any, tmp_path: Path) -> None:
    """Before: Spark's ClassNotFoundException for S3AFileSystem came back as a generic 'Spark could not read'
    line quoting a Py4J call ('An error occurred while calling o41.csv')."""
    from pyspark.find_spark_home import _find_spark_home

    jars = {path.name for path in (Path(_find_spark_home()) / "jars").glob("*.jar")}
    if any(name.startswith("hadoop-aws") for name in jars):
        pytest.skip("this PySpark has the S3A connector")
    result = invoke("run", "s3a://pile/notes.csv", "--k", "2", "--engine", "spark", "--out", str(tmp_path / "out"))
    # Hadoop's S3A connector lives in hadoop-aws (Hadoop docs, "Hadoop-AWS module: Integration with Amazon Web
    # Services"); PySpark's jars/ folder holds hadoop-client-api and -runtime only
    assert_one_line_error(result, (
        "Spark cannot read s3a:// paths here: the S3A connector (hadoop-aws of Spark's Hadoop "
        "version and the AWS SDK bundle it was built with) is not on its class path; add its jars with "
        "PYSPARK_SUBMIT_ARGS='--jars A.jar,B.jar pyspark-shell' (or spark-submit --jars), or copy SOURCE to a "
        "local path"))


@pytest.mark.timeout(120)  # a hang on the socket fails the test (pytest-timeout) instead of blocking the run
def test_an_hdfs_namenode_that_is_not_there_is_one_line_within_seconds(spark: Any, tmp_path: Path) -> None:
    """Before: Hadoop's IPC client retried the refused connection (ipc.client.connect.max.retries, 10 by default,
    a second apart: core-default.xml) and the line quoted Py4J ('An error occurred while calling o111.csv.')."""
    with socket.socket() as probe:  # a loopback port nothing listens on once the probe socket is closed
        probe.bind(("127.0.0.1", 0))
        port = probe.getsockname()[1]
    started = time.monotonic()
    result = invoke("run", f"hdfs://127.0.0.1:{port}/in/notes.csv", "--k", "2", "--engine", "spark",
                    "--out", str(tmp_path / "out"))
    seconds = time.monotonic() - started
    assert result.exit_code == 1, result.output
    lines = [line for line in result.stderr.splitlines() if line.startswith("pilewise: error")]
    assert len(lines) == 1 and "Traceback" not in result.output + result.stderr, result.stderr
    # Java's own words for a refused TCP connection (java.net.ConnectException), with the port asked for
    assert lines[0].startswith(f"pilewise: error: Spark cannot reach hdfs://127.0.0.1:{port} "
                               "(java.net.ConnectException: "), lines[0]
    assert f":{port} failed on connection exception" in lines[0]
    assert lines[0].endswith("; check the host and port in SOURCE and that the namenode (or other server) is "
                             "running and reachable from this machine")
    # asked once, no retries: well under the 10 s of the default retries even on a shared machine
    assert seconds < 10, seconds


def test_executors_whose_python_lacks_the_libraries_are_one_line_naming_pyspark_python(
        tmp_path: Path) -> None:
    """Before: a Python without numpy (and the rest) on the executors failed the first tokenizing job with a Py4J error
    several screens long, quoted as 'Spark failed (An error occurred while calling ...)'.

    The run is a process of its own: the executors' Python is fixed when a Spark session starts, and this process
    shares one session among the Spark tests."""
    pytest.importorskip("pyspark")
    if not os.environ.get("JAVA_HOME") and shutil.which("java") is None:
        pytest.skip("Java 17 missing (apt-get install openjdk-17-jre-headless)")
    # a virtual environment of this Python without its site-packages: the same version, no numpy (Python venv docs)
    subprocess.run([sys.executable, "-m", "venv", "--without-pip", str(tmp_path / "bare")], check=True)
    bare = tmp_path / "bare" / "bin" / "python"
    # the module the executors miss first, found independently: that Python importing pilewise's Spark code and
    # the libraries a run needs there (pilewise's own package imports them lazily, so either may come first)
    # pilewise's package alone on the path: an installed pilewise's parent folder is site-packages, numpy and all
    shipped = tmp_path / "shipped"
    shutil.copytree(Path(pilewise.__file__).parent, shipped / "pilewise")
    tried = subprocess.run([str(bare), "-c", "import pilewise.engines.spark_session; import numpy, scipy, sklearn"],
                           capture_output=True, text=True, env={"PYTHONPATH": str(shipped)}, check=False)
    missing = tried.stderr.strip().splitlines()[-1]
    assert missing.startswith("ModuleNotFoundError: No module named"), tried.stderr
    (tmp_path / "notes").mkdir()
    for i in range(4):
        (tmp_path / "notes" / f"{i}.txt").write_text(f"note {i} on soil and compost\n", encoding="utf-8")
    env = {**os.environ, "PYSPARK_PYTHON": str(bare),
           # the package's copy alone: an installed pilewise's parent folder is site-packages, which would hand the
           # executors numpy and all (CI's non-editable install); the driver has its libraries in its own site-packages
           "PYTHONPATH": os.pathsep.join(filter(None, [str(shipped), os.environ.get("PYTHONPATH")]))}
    done = subprocess.run([sys.executable, "-m", "pilewise.cli", "run", str(tmp_path / "notes"), "--k", "2",
                           "--engine", "spark", "--spark-master", "local[1]", "--out", str(tmp_path / "out")],
                          capture_output=True, text=True, env=env, timeout=300, check=False)
    assert done.returncode == 1, done.stderr[-3000:]
    assert "Traceback" not in done.stdout + done.stderr
    assert [line for line in done.stderr.splitlines() if line.startswith("pilewise: error")] == [
        f"pilewise: error: the Spark executors' Python ({bare}) cannot run pilewise ({missing}); "
        "install numpy, scipy and scikit-learn there, in the driver's Python version, or set PYSPARK_PYTHON to such "
        "a Python"]
