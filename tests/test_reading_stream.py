"""Streaming reader: the same documents and report as read_source, read lazily, with byte progress."""

from __future__ import annotations

import csv
import json
import random
from itertools import islice
from pathlib import Path

import pandas as pd
import pytest

from pilewise.errors import PilewiseError
from pilewise.ingest.reading import ReadLimits, read_source, stream_source
from pilewise.ingest.tables import SAMPLE_ROWS, ColumnChoice

LIMITS = ReadLimits(max_file_bytes=50_000_000, max_doc_chars=300)
WORDS = ["soil", "compost", "seedling", "mulch", "chain", "saddle", "pedal", "spoke", "oven", "flour", "dough", "whisk"]


def _records(n: int, seed: int = 1) -> list[dict[str, str]]:
    """Ticket-like rows with repeated ids, empty texts and over-long texts, so every row rule is exercised."""
    rng = random.Random(seed)
    records = []
    for i in range(n):
        length = rng.choice([0, 12, 40, 80])
        records.append({
            "ticket_id": f"t{i % (n - 7)}",
            "subject": " ".join(rng.choices(WORDS, k=4)),
            "body": " ".join(rng.choices(WORDS, k=length)),
            "created": f"2026-01-{i % 28 + 1:02d}",
            "channel": rng.choice(["web", "mail"]),
        })
    return records


def _write_delimited(path: Path, records: list[dict[str, str]], sep: str = ",") -> None:
    with path.open("w", encoding="utf-8", newline="") as handle:
        writer = csv.writer(handle, delimiter=sep)
        writer.writerow(records[0])
        for i, record in enumerate(records):
            writer.writerow(list(record.values()) + (["extra"] if i % 500 == 3 else []))


def _write_json_lines(path: Path, records: list[dict[str, str]]) -> None:
    with path.open("w", encoding="utf-8") as handle:
        for i, record in enumerate(records):
            if i % 400 == 5:
                handle.write("{not json\n")
            handle.write(json.dumps(record) + "\n")


def _write(folder: Path, fmt: str, n: int = 2 * SAMPLE_ROWS + 50) -> Path:
    """One table of `fmt` ("mixed": a folder of every format plus plain files) with n rows, past the sample."""
    records = _records(n)
    folder.mkdir(parents=True, exist_ok=True)
    if fmt == "csv":
        _write_delimited(folder / "t.csv", records)
    elif fmt == "tsv":
        _write_delimited(folder / "t.tsv", records, sep="\t")
    elif fmt == "jsonl":
        _write_json_lines(folder / "t.jsonl", records)
    elif fmt == "parquet":
        pd.DataFrame(records).to_parquet(folder / "t.parquet", row_group_size=1000)
    elif fmt == "json":
        (folder / "t.json").write_text(json.dumps({"tickets": records}), encoding="utf-8")
    else:
        for table in ("csv", "tsv", "jsonl", "parquet", "json"):
            _write(folder / table, table, n=300)
        (folder / "note.txt").write_text("plain words about soil and compost", encoding="utf-8")
        (folder / "page.html").write_text("<title>Oven</title><p>flour and dough</p>", encoding="utf-8")
        (folder / "empty.md").write_bytes(b"")
        (folder / "scan.pdf").write_bytes(b"%PDF-1.4")
        return folder
    return folder / f"t.{fmt}"


@pytest.mark.parametrize("fmt", ["csv", "tsv", "jsonl", "parquet", "json", "mixed"])
def test_stream_gives_what_read_source_gives(tmp_path: Path, fmt: str) -> None:
    source = _write(tmp_path / "data", fmt)
    stream = stream_source(source, ColumnChoice(), LIMITS)
    documents = list(stream)
    ingested = read_source(source, ColumnChoice(), LIMITS)
    assert documents == list(ingested.documents)
    assert (stream.entries, stream.notes, stream.files_found) == (
        list(ingested.entries), list(ingested.notes), ingested.files_found
    )
    assert stream.ingested(documents) == ingested
    reasons = {e.reason for e in ingested.entries}
    assert {"empty", "truncated", "duplicate id"} <= reasons  # the row rules ran past the sampled rows


@pytest.mark.parametrize("fmt", ["csv", "jsonl"])
def test_taking_a_few_documents_reads_a_small_part_of_the_file(tmp_path: Path, fmt: str) -> None:
    source = _write(tmp_path / "data", fmt, n=50_000)
    stream = stream_source(source, ColumnChoice(), LIMITS)
    first = list(islice(stream, 10))
    assert len(first) == 10
    assert 0 < stream.bytes_done < 0.5 * stream.total_bytes


def test_bytes_are_counted_for_the_files_read_and_all_are_done_at_the_end(tmp_path: Path) -> None:
    folder = _write(tmp_path / "data", "mixed")
    read_later = [p for p in folder.rglob("*") if p.is_file() and p.suffix not in {".pdf", ".md"}]
    stream = stream_source(folder, ColumnChoice(), LIMITS)
    assert stream.total_bytes == sum(p.stat().st_size for p in read_later)  # empty and unsupported files are not
    assert stream.bytes_done == 0
    seen = []
    for _ in stream:
        seen.append(stream.bytes_done)
    assert seen == sorted(seen)
    assert stream.bytes_done == stream.total_bytes


def test_no_documents_is_raised_by_iterating_with_read_source_message(tmp_path: Path) -> None:
    (tmp_path / "a.pdf").write_bytes(b"%PDF")
    (tmp_path / "b.txt").write_bytes(b"")
    (tmp_path / "c.csv").write_text("id,text\n1,\n2,  \n", encoding="utf-8")
    stream = stream_source(tmp_path, ColumnChoice(), LIMITS)
    with pytest.raises(PilewiseError) as from_stream:
        list(stream)
    with pytest.raises(PilewiseError) as from_read:
        read_source(tmp_path, ColumnChoice(), LIMITS)
    assert str(from_stream.value) == str(from_read.value)
    assert str(from_stream.value).startswith("no documents found in 3 file(s) in ")


def test_a_stream_is_read_once_and_reports_only_when_finished(tmp_path: Path) -> None:
    source = _write(tmp_path / "data", "csv", n=50)
    stream = stream_source(source, ColumnChoice(), LIMITS)
    iterator = iter(stream)
    next(iterator)
    with pytest.raises(RuntimeError):
        stream.ingested([])
    with pytest.raises(RuntimeError):
        iter(stream)


def test_json_lines_keys_first_seen_after_the_sample_are_noted_not_read(tmp_path: Path) -> None:
    path = tmp_path / "t.jsonl"
    lines = [{"text": f"record {i} about soil"} | ({"late": "x"} if i == SAMPLE_ROWS + 5 else {}) for i in range(2100)]
    path.write_text("".join(json.dumps(line) + "\n" for line in lines), encoding="utf-8")
    ingested = read_source(path, ColumnChoice(), LIMITS)
    assert len(ingested.documents) == 2100 and all(d.metadata == () for d in ingested.documents)
    assert ingested.notes == ("t.jsonl: guessed text column 'text'",
                              "t.jsonl: key 'late' first appears on line 2,006, after the first 2,000 records, "
                              "so it is not read")


def test_csv_with_carriage_returns_alone_reads_every_row(tmp_path: Path) -> None:
    """Lines are split as open(newline="") splits them, whatever ends them."""
    (tmp_path / "t.csv").write_bytes(b'id,text\r1,first text\r2,"second\rover two lines"\r3,third text\r')
    ingested = read_source(tmp_path / "t.csv", ColumnChoice(), LIMITS)
    assert [d.text for d in ingested.documents] == ["first text", "second\rover two lines", "third text"]


def test_utf8_table_with_bad_bytes_past_the_sniffed_start_is_read_and_noted(tmp_path: Path) -> None:
    rows = "".join(f"{i},some words for row {i}\n" for i in range(60_000))
    (tmp_path / "t.csv").write_bytes(b"id,text\n" + rows.encode() + "60000,caf\xe9 late\n".encode("latin-1"))
    ingested = read_source(tmp_path / "t.csv", ColumnChoice(text="text"), LIMITS)
    assert ingested.documents[-1].text == "caf\ufffd late"
    notes = [e.detail for e in ingested.entries if e.reason == "encoding"]
    assert notes == ["1 line(s) after the first 1,000,000 bytes are not valid UTF-8; their bad bytes read as U+FFFD"]


def test_a_latin1_table_is_decoded_in_the_detected_encoding(tmp_path: Path) -> None:
    rows = "".join(f"{i},une crème brûlée pour le café numéro {i}\n" for i in range(200))
    (tmp_path / "t.csv").write_bytes(("id,text\n" + rows).encode("latin-1"))
    ingested = read_source(tmp_path / "t.csv", ColumnChoice(), LIMITS)
    assert len(ingested.documents) == 200 and "café numéro 0" in ingested.documents[0].text
    assert any(e.reason == "encoding" and e.detail.startswith("not UTF-8; decoded as") for e in ingested.entries)
