"""Paths on other file systems with the spark engine: a scheme whose Hadoop connector is not installed is one
line naming the fix, before anything is read (PySpark ships HDFS and local files, not the S3A connector)."""

from __future__ import annotations

import os
import shutil
from pathlib import Path

import pytest
from tests.helpers import assert_one_line_error, invoke

pytestmark = pytest.mark.spark


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
