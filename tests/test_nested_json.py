"""API dumps: nested JSON records are spread into dotted columns that can be guessed and chosen by name."""

from __future__ import annotations

import json
from pathlib import Path

import pandas as pd

from helpers import read
from pilewise.ingest.tables import ColumnChoice, flat_record

RECORD = {"id": 7, "attributes": {"subject": "Pump stopped", "body": "The pump stopped after a power cut.",
                                  "meta": {"created_at": "2026-01-05", "channel": "web"}},
          "tags": ["a", "b"], "empty": {}}


def test_flat_names_match_pandas_json_normalize() -> None:
    # pandas.json_normalize is the reference for dotted column names of nested records (pandas docs,
    # "pandas.json_normalize": nested keys joined with "."); lists stay one value. pandas drops an empty
    # object; pilewise keeps it as one cell ({}), since no field may vanish unreported.
    expected = pd.json_normalize(RECORD, max_level=3).iloc[0].to_dict()
    flat = flat_record(RECORD)
    assert set(flat) == set(expected) | {"empty"}
    assert flat["empty"] == {}
    assert flat["attributes.meta.created_at"] == "2026-01-05"
    assert flat["tags"] == ["a", "b"]


def test_a_clashing_or_too_deep_object_stays_one_cell() -> None:
    clash = {"a.b": 1, "a": {"b": 2}}
    assert flat_record(clash) == clash  # spreading "a" would overwrite "a.b": nothing is merged silently
    assert flat_record({"a": {"b": {"c": 1}}}, depth=1) == {"a.b": {"c": 1}}


def test_an_api_dump_finds_text_title_id_and_date_inside_nested_records(tmp_path: Path) -> None:
    records = [{"id": i, "attributes": {"subject": f"Case {i} about pumps", "body": f"Text number {i} says the "
                                        "pump stopped after a power cut and needs a restart.",
                                        "created_at": f"2026-01-{i + 1:02d}"}} for i in range(5)]
    path = tmp_path / "dump.json"
    path.write_text(json.dumps({"meta": {"page": 1}, "data": {"tickets": records}}), encoding="utf-8")
    ingested = read(path)
    assert [d.doc_id for d in ingested.documents] == ["0", "1", "2", "3", "4"]
    assert ingested.documents[2].title == "Case 2 about pumps"
    assert ingested.documents[2].text.startswith("Text number 2 says")
    notes = " ".join(ingested.notes)
    assert "guessed date column 'attributes.created_at'" in notes
    assert "guessed title column 'attributes.subject'" in notes


def test_json_lines_records_are_spread_too_and_chosen_by_dotted_name(tmp_path: Path) -> None:
    path = tmp_path / "dump.jsonl"
    path.write_text("\n".join(json.dumps({"n": i, "f": {"note": f"note {i} on the boiler", "other": "x" * 3}})
                              for i in range(4)), encoding="utf-8")
    ingested = read(path, ColumnChoice(text="f.note"))
    assert [d.text for d in ingested.documents] == [f"note {i} on the boiler" for i in range(4)]
