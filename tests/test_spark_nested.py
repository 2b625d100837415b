"""Nested JSON on Spark: struct columns are spread into the same dotted columns as the local reader's, and
arrays are JSON text, never a Python repr."""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

import pytest
from tests.helpers import read

from pilewise.ingest.reading import ReadLimits
from pilewise.ingest.tables import ColumnChoice

pytestmark = pytest.mark.spark


def test_nested_json_lines_read_on_spark_as_locally(spark: Any, tmp_path: Path) -> None:
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


def test_files_of_no_known_type_are_read_on_spark_as_locally(spark: Any, tmp_path: Path) -> None:
    from pilewise.engines.spark_reading import read_on_spark

    folder = tmp_path / "pile"
    folder.mkdir()
    (folder / "README").write_text("How to restart the pump after a power cut.\n", encoding="utf-8")
    (folder / "Apache-2.0").write_text("Licensed under the terms below, with no warranty.\n", encoding="utf-8")
    (folder / "blob").write_bytes(bytes(range(256)) * 4)  # control and NUL bytes: not text
    (folder / "logo.png").write_bytes(b"\x89PNG\r\n\x1a\n" + bytes(range(64)))  # PNG signature (RFC 2083 sec. 12.12)
    local = read(folder)
    source = read_on_spark(spark, str(folder), ColumnChoice(), ReadLimits())
    assert sorted(d.doc_id for _, d in source.documents.collect()) == sorted(d.doc_id for d in local.documents) == [
        "Apache-2.0", "README"]
    reasons = {e.source: e.reason for e in source.entries if e.status == "skipped"}
    assert reasons == {e.source: e.reason for e in local.entries if e.status == "skipped"}
    assert reasons == {"blob": "binary", "logo.png": "unsupported"}
