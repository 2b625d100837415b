"""The shelf's small file of fields (id, date, table cells) against the full records it stands in for."""

from __future__ import annotations

from pathlib import Path

import numpy as np

from pilewise.describe.profiles import metadata_columns
from pilewise.ingest.shelf import DocumentShelf, document_fields
from pilewise.model import Document
from pilewise.options import RunOptions
from pilewise.pipeline import compute_run, dated_trends
from pilewise.progress import Reporter

DOCUMENTS = [
    Document("a-1", "notes.csv", "Repotting", "Loosen the roots first.", "2026-01-04", (("team", "garden"),)),
    Document("a-2", "notes.csv", "Courier", "The parcel was wet.", "", (("team", "post"), ("urgent", "yes"))),
    Document("é \u2603 \udcff", "notes.csv", "Odd id", "A lone surrogate in the id.", "2026-02-11", ()),
    Document("a-4", "notes.csv", "Refund", "The pot arrived cracked.", "2026-02-12", (("urgent", "ja, \"sehr\""),)),
]


def _shelf(tmp_path: Path) -> DocumentShelf:
    shelf = DocumentShelf(tmp_path / "documents.jsonl")
    shelf.extend(DOCUMENTS[:1])
    shelf.extend(DOCUMENTS[1:])
    shelf.close_writing()
    return shelf


def test_fields_equal_the_full_records(tmp_path: Path) -> None:
    shelf = _shelf(tmp_path)
    expected = [(d.doc_id, d.date, d.metadata) for d in DOCUMENTS]
    assert list(shelf) == DOCUMENTS
    assert list(document_fields(shelf)) == expected
    assert list(document_fields(DOCUMENTS)) == expected  # the same function on documents held in memory
    shelf.close()


def test_metadata_and_dates_read_from_the_fields_as_from_the_documents(tmp_path: Path) -> None:
    shelf = _shelf(tmp_path)
    from_shelf = list(document_fields(shelf))
    assert metadata_columns([m for _, _, m in from_shelf]) == metadata_columns([d.metadata for d in DOCUMENTS]) == {
        "team": ["garden", "post", "", ""], "urgent": ["", "yes", "", 'ja, "sehr"']}
    labels = np.array([0, 1, 0, 1])
    trends = dated_trends([date for _, date, _ in from_shelf], labels, 2, "month")
    assert trends is not None and trends == dated_trends([d.date for d in DOCUMENTS], labels, 2, "month")
    assert (trends.dated, trends.undated) == (3, 1)
    shelf.close()


def test_a_streamed_run_profiles_the_table_columns_and_dates(tmp_path: Path) -> None:
    """A table streamed through the shelf: its category column profiled and its dates counted, as in memory."""
    source = tmp_path / "notes.csv"
    topics = {"garden": "fern compost roots repotting soil watering", "post": "courier parcel door wet delivery late"}
    lines = ["id,team,date,text"]
    for i in range(120):
        team = "garden" if i % 2 else "post"
        lines.append(f"n{i},{team},2026-0{1 + i % 3}-1{i % 9},{topics[team]} note {i % 7} {'extra ' * (i % 4)}")
    source.write_text("\n".join(lines) + "\n", encoding="utf-8")
    results = {}
    for mode in ("memory", "stream"):
        work = tmp_path / f"work-{mode}"
        work.mkdir()
        options = RunOptions(source=source, out=tmp_path / f"out-{mode}", k=2, mode=mode, workers=1, quiet=True,
                             text_column="text", id_column="id", date_column="date")
        results[mode] = compute_run(options, Reporter(quiet=True), work)
    memory, stream = results["memory"], results["stream"]
    assert isinstance(stream.collection.documents, DocumentShelf)
    profiled = [[c.column for c in r.metadata.categorical] for r in (memory, stream) if r.metadata is not None]
    assert profiled == [["team"], ["team"]]
    assert stream.trends is not None and memory.trends is not None
    assert stream.trends.totals == memory.trends.totals and sum(stream.trends.totals) == 120
