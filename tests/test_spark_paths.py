"""Paths on other file systems with the spark engine: a scheme whose Hadoop connector is not installed is one
line naming the fix, before anything is read (PySpark ships HDFS and local files, not the S3A connector)."""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
from pathlib import Path

import pytest
from tests.helpers import assert_one_line_error, invoke

import pilewise

pytestmark = [pytest.mark.spark, pytest.mark.slow]  # each starts Spark: over 10 s


def test_an_s3a_path_without_the_connector_is_one_line_naming_the_fix(tmp_path: Path) -> None:
    """Before: Spark's ClassNotFoundException for S3AFileSystem came back as a generic 'Spark could not read'
    line quoting a Py4J call ('An error occurred while calling o41.csv')."""
    pytest.importorskip("pyspark")
    if not os.environ.get("JAVA_HOME") and shutil.which("java") is None:
        pytest.skip("Java 17 missing (apt-get install openjdk-17-jre-headless)")
    from pyspark.find_spark_home import _find_spark_home

    jars = {path.name for path in (Path(_find_spark_home()) / "jars").glob("*.jar")}
    if any(name.startswith("hadoop-aws") for name in jars):
        pytest.skip("this PySpark has the S3A connector")
    result = invoke("run", "s3a://pile/notes.csv", "--k", "2", "--engine", "spark", "--spark-master", "local[1]",
                    "--out", str(tmp_path / "out"))
    # Hadoop's S3A connector lives in hadoop-aws (Hadoop docs, "Hadoop-AWS module: Integration with Amazon Web
    # Services"); PySpark's jars/ folder holds hadoop-client-api and -runtime only
    assert_one_line_error(result, (
        "Spark cannot read s3a:// paths here: the S3A connector (hadoop-aws of Spark's Hadoop "
        "version and the AWS SDK bundle it was built with) is not on its class path; add its jars with "
        "PYSPARK_SUBMIT_ARGS='--jars A.jar,B.jar pyspark-shell' (or spark-submit --jars), or copy SOURCE to a "
        "local path"))


def test_executors_whose_python_lacks_the_libraries_are_one_line_naming_pyspark_python(
        tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    """Before: a Python without numpy (and the rest) on the executors failed the first tokenizing job with a Py4J error
    several screens long, quoted as 'Spark failed (An error occurred while calling ...)'."""
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
    monkeypatch.setenv("PYSPARK_PYTHON", str(bare))
    (tmp_path / "notes").mkdir()
    for i in range(4):
        (tmp_path / "notes" / f"{i}.txt").write_text(f"note {i} on soil and compost\n", encoding="utf-8")
    result = invoke("run", str(tmp_path / "notes"), "--k", "2", "--engine", "spark", "--spark-master", "local[1]",
                    "--out", str(tmp_path / "out"))
    assert_one_line_error(result, (
        f"the Spark executors' Python ({bare}) cannot run pilewise ({missing}); "
        "install numpy, scipy and scikit-learn there, in the driver's Python version, or set PYSPARK_PYTHON to such "
        "a Python"))
