"""Nested JSON on Spark: struct columns are spread into the same dotted columns as the local reader's, and
arrays are JSON text, never a Python repr."""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

import pytest
from tests.helpers import read
from tests.test_spark_engine import spark  # noqa: F401 (the module's one local Spark session)

from pilewise.ingest.reading import ReadLimits
from pilewise.ingest.tables import ColumnChoice

pytestmark = pytest.mark.spark


def test_nested_json_lines_read_on_spark_as_locally(spark: Any, tmp_path: Path) -> None:  # noqa: F811
    from pilewise.engines.spark_reading import read_on_spark

    records = [{"id": f"t{i}", "tags": ["pump", "ü"],
                "attributes": {"subject": f"Case {i}", "body": f"The pump number {i} stopped after a power cut.",
                               "meta": {"channel": "web"}}} for i in range(6)]
    path = tmp_path / "dump.jsonl"
    path.write_text("\n".join(json.dumps(r, ensure_ascii=False) for r in records), encoding="utf-8")
    local = read(path)
    source = read_on_spark(spark, str(path), ColumnChoice(), ReadLimits())
    on_spark = [doc for _, doc in sorted(source.documents.collect(), key=lambda item: item[0])]
    assert [(d.doc_id, d.title, d.text) for d in on_spark] == [(d.doc_id, d.title, d.text) for d in local.documents]
    metadata = dict(on_spark[0].metadata)
    # Python json docs: the array cell parses back to the original list (a repr would read "['pump', 'ü']")
    assert json.loads(metadata["tags"]) == ["pump", "ü"]
    assert metadata["attributes.meta.channel"] == "web" == dict(local.documents[0].metadata)["attributes.meta.channel"]
    assert any("guessed text column 'attributes.body'" in note for note in source.notes)
