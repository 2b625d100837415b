"""Reading table exports (.csv/.tsv/.json/.jsonl/.parquet): one row, one document.

Tables are read row by row, so a large export is never held in memory whole: only the first
SAMPLE_ROWS rows are kept, to guess the columns from.
"""

from __future__ import annotations

import codecs
import csv
import io
import json
import re
from collections.abc import Iterator
from dataclasses import dataclass, field
from itertools import chain, islice
from pathlib import Path
from typing import BinaryIO

import charset_normalizer
import pandas as pd

from pilewise.errors import PilewiseError
from pilewise.model import Document, IngestEntry
from pilewise.plaintext import decode_bytes, first_line_title

TABLE_SUFFIXES = {".csv", ".tsv", ".json", ".jsonl", ".ndjson", ".parquet"}

TEXT_NAMES = ("text", "body", "message", "content", "description", "comment", "answer", "response", "review")
TITLE_NAMES = ("title", "subject", "headline", "summary", "topic")
ID_NAMES = ("id", "doc_id", "document_id", "message_id", "ticket_id", "ticket", "uuid", "key")
DATE_NAMES = ("date", "created", "created_at", "received", "timestamp", "time", "sent", "submitted")

SAMPLE_ROWS = 2000  # rows kept to guess columns from; also the JSON Lines records that fix the header
_SNIFF_BYTES = 1_000_000  # bytes decoded up front to choose a table's encoding
_PARQUET_BATCH = 4096
_TABLE_ERRORS = (OSError, ValueError, UnicodeDecodeError, csv.Error, pd.errors.ParserError, ImportError)
_LINE_ENDS = re.compile(r"[^\r\n]*(?:\r\n|\r|\n)|[^\r\n]+")


@dataclass(frozen=True)
class ColumnChoice:
    """The user's column options; None means guess."""

    text: str | None = None
    title: str | None = None
    id: str | None = None
    date: str | None = None
    delimiter: str | None = None  # --delimiter; None: sniffed from the file
    encoding: str | None = None  # --encoding; None: detected
    records_key: str | None = None  # --records-key: the key of a JSON object that holds the records


@dataclass
class TableReport:
    """What reading one table found; filled in while its rows are read, complete once they run out.

    ``entries`` are, in order: a summary, what loading found (encoding, malformed rows, invalid
    lines), then one entry per row without text, truncated or with a repeated id.
    ``bytes_read`` is about how far into the file reading has got.
    """

    entries: list[IngestEntry] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    bytes_read: int = 0


def read_table(
    path: Path, rel: str, choice: ColumnChoice, max_doc_chars: int
) -> tuple[list[Document], list[IngestEntry], list[str]]:
    """Read one table whole: its documents, report entries and notes (see `iter_table`)."""
    report = TableReport()
    documents = list(iter_table(path, rel, choice, max_doc_chars, report))
    return documents, report.entries, report.notes


def iter_table(
    path: Path, rel: str, choice: ColumnChoice, max_doc_chars: int, report: TableReport
) -> Iterator[Document]:
    """Documents of one table, row by row; rows without text become report entries, never silent drops.

    Columns are guessed from the first SAMPLE_ROWS rows, which are kept; the rest are read as
    they are needed. A read error within those first rows makes the whole table an "unreadable
    table" entry. A later one cannot take back the documents already given: the table keeps
    them, and an "unreadable table" entry says where reading stopped.

    Raises
    ------
    PilewiseError
        When a column option names no column of the table, or no text column can be guessed.
    """
    rows = _table_rows(path, rel, report)
    try:
        header = next(rows)
        sample = list(islice(rows, SAMPLE_ROWS))
    except _TABLE_ERRORS as err:
        report.entries.append(_unreadable(rel, err))
        return
    text_col, title_col, id_col, date_col, guesses = _choose_columns(header, sample, rel, choice)
    position = {name: i for i, name in enumerate(header)}
    text_at = position[text_col]
    title_at = position[title_col] if title_col else None
    id_at = position[id_col] if id_col else None
    date_at = position[date_col] if date_col else None
    extra = [(name, i) for i, name in enumerate(header) if name not in {text_col, title_col, id_col, date_col}]
    row_entries: list[IngestEntry] = []
    seen_ids: set[str] = set()
    made = 0
    row_number = 0
    remaining = chain(sample, rows)
    del sample
    while True:
        try:
            row = next(remaining)
        except StopIteration:
            break
        except _TABLE_ERRORS as err:
            report.entries.append(_unreadable(rel, err, after_rows=row_number))
            break
        row_number += 1
        where = f"{rel}#row{row_number}"
        text = row[text_at].strip()
        if not text:
            row_entries.append(IngestEntry(where, "skipped", "empty", f"column {text_col!r} is empty"))
            continue
        if len(text) > max_doc_chars:
            row_entries.append(IngestEntry(where, "note", "truncated", f"kept the first {max_doc_chars:,} characters"))
            text = text[:max_doc_chars]
        doc_id = row[id_at].strip() if id_at is not None else ""
        if not doc_id or doc_id in seen_ids:
            if doc_id:
                row_entries.append(IngestEntry(where, "note", "duplicate id", f"id {doc_id!r} repeats; used {where}"))
            doc_id = where
        seen_ids.add(doc_id)
        title = row[title_at].strip() if title_at is not None else ""
        made += 1
        yield Document(
            doc_id=doc_id,
            source=where,
            title=" ".join(title.split())[:200] or first_line_title(text),
            text=text,
            date=row[date_at].strip() if date_at is not None else "",
            metadata=tuple((name, row[i]) for name, i in extra),
        )
    summary = f"{made} of {row_number} rows became documents (text column {text_col!r})"
    report.entries.insert(0, IngestEntry(rel, "document", "table", summary))
    report.entries.extend(row_entries)
    report.notes[:0] = [f"{rel}: {note}" for note in guesses]


def _unreadable(rel: str, err: Exception, after_rows: int | None = None) -> IngestEntry:
    if isinstance(err, ImportError):  # parquet engine missing
        message = str(err)[:200]
    else:
        message = str(err).splitlines()[0][:200] if str(err) else type(err).__name__
    if after_rows is not None:
        message = f"reading stopped after row {after_rows:,}: {message}"
    return IngestEntry(rel, "skipped", "unreadable table", message)


def _cell(value: object) -> str:
    if isinstance(value, str):
        return value
    if value is None:
        return ""
    try:
        if pd.isna(value):
            return ""
    except (TypeError, ValueError):
        pass
    return str(value)


def _table_rows(path: Path, rel: str, report: TableReport) -> Iterator[list[str]]:
    """The header, then the rows, of one table, as text cells."""
    suffix = path.suffix.lower()
    if suffix == ".parquet":
        return _parquet_rows(path, report)
    if suffix in {".csv", ".tsv"}:
        return _delimited_rows(path, "\t" if suffix == ".tsv" else ",", rel, report)
    if suffix in {".jsonl", ".ndjson"}:
        return _json_lines_rows(path, rel, report)
    return _json_rows(path, rel, report)


def _frame_rows(frame: pd.DataFrame) -> Iterator[list[str]]:
    yield [str(c) for c in frame.columns]
    for record in frame.itertuples(index=False, name=None):
        yield [_cell(v) for v in record]


def _parquet_rows(path: Path, report: TableReport) -> Iterator[list[str]]:
    """Rows of a parquet file, a batch at a time, converted as pandas.read_parquet would."""
    import pyarrow.parquet as pq  # an ImportError makes the table unreadable, not the run

    size = path.stat().st_size
    with pq.ParquetFile(path) as parquet:
        # the header without the stored index, as pandas.read_parquet gives it
        yield [str(c) for c in parquet.schema_arrow.empty_table().to_pandas().columns]
        total = max(parquet.metadata.num_rows, 1)
        done = 0
        for batch in parquet.iter_batches(batch_size=_PARQUET_BATCH):
            done += batch.num_rows
            report.bytes_read = size * done // total
            for record in batch.to_pandas().itertuples(index=False, name=None):
                yield [_cell(v) for v in record]


def _json_rows(path: Path, rel: str, report: TableReport) -> Iterator[list[str]]:
    """Rows of a JSON array of records, or of an object holding one."""
    # One JSON value has to be parsed whole, so this format is not streamed; JSON Lines is.
    raw = path.read_bytes()
    report.bytes_read = len(raw)
    text, note = decode_bytes(raw)
    del raw
    if note:
        report.entries.append(IngestEntry(rel, "note", "encoding", note))
    data = json.loads(text)
    del text
    if isinstance(data, dict):
        lists = [v for v in data.values() if isinstance(v, list)]
        data = lists[0] if len(lists) == 1 else [data]
    if not isinstance(data, list):
        raise ValueError("top level is neither a list of records nor an object holding one")
    frame = pd.DataFrame([r if isinstance(r, dict) else {"text": r} for r in data])
    del data
    yield from _frame_rows(frame)


def _delimited_rows(path: Path, sep: str, rel: str, report: TableReport) -> Iterator[list[str]]:
    """CSV/TSV rows with the csv module (quotes, embedded newlines); a row of the wrong width is reported."""
    csv.field_size_limit(2**31 - 1)  # documents may be long; --max-doc-chars truncates them later
    with path.open("rb") as handle:
        lines = _text_lines(handle, rel, report, undetected="not UTF-8; decoded as latin-1")
        reader = csv.reader(lines, delimiter=sep)
        header = next(reader, None)
        if not header:
            raise ValueError("no header row")
        yield header
        for row in reader:
            if not row:
                continue
            if len(row) != len(header):
                where = f"{rel}#line{reader.line_num}"
                detail = f"{len(row)} fields where the header has {len(header)}"
                report.entries.append(IngestEntry(where, "skipped", "malformed row", detail))
                continue
            yield row


def _json_lines_rows(path: Path, rel: str, report: TableReport) -> Iterator[list[str]]:
    """Rows of a JSON Lines file; its columns are the keys of the first SAMPLE_ROWS records, in first-seen order."""
    with path.open("rb") as handle:
        lines = _text_lines(handle, rel, report, undetected="not UTF-8 and no encoding detected; decoded as latin-1")
        records = _json_records(lines, rel, report)
        sample = list(islice(records, SAMPLE_ROWS))
        header = list(dict.fromkeys(key for _, record in sample for key in record))
        yield header
        for _, record in sample:
            yield [_cell(record.get(key)) for key in header]
        del sample
        known = set(header)
        for line_number, record in records:
            if not known.issuperset(record):
                for key in record:
                    if key not in known:
                        known.add(key)
                        report.notes.append(
                            f"{rel}: key {key!r} first appears on line {line_number:,}, after the first "
                            f"{SAMPLE_ROWS:,} records, so it is not read"
                        )
            yield [_cell(record.get(key)) for key in header]


def _json_records(lines: Iterator[str], rel: str, report: TableReport) -> Iterator[tuple[int, dict[str, object]]]:
    """(line number, record) for each JSON object line; other non-blank lines are reported."""
    # splitlines on each piece numbers the lines exactly as splitlines on the whole text would
    numbered = enumerate((line for piece in lines for line in piece.splitlines()), start=1)
    for line_number, line in numbered:
        if not line.strip():
            continue
        try:
            value = json.loads(line)
        except json.JSONDecodeError as err:
            report.entries.append(IngestEntry(f"{rel}#line{line_number}", "skipped", "invalid JSON", err.msg))
            continue
        if not isinstance(value, dict):
            report.entries.append(IngestEntry(f"{rel}#line{line_number}", "skipped", "invalid JSON", "not an object"))
            continue
        yield line_number, value


def _text_lines(handle: BinaryIO, rel: str, report: TableReport, *, undetected: str) -> Iterator[str]:
    """Lines of a table file, split as open(newline="") splits them, decoded as they are read.

    The encoding is chosen from the first _SNIFF_BYTES: UTF-8 when they decode strictly, else the
    one detected, else Latin-1 (noted as `undetected`). Rows already given cannot be taken back, so
    a UTF-8 file with bad bytes further on stays UTF-8: those lines read with U+FFFD, and a note
    says how many.
    """
    head = handle.read(_SNIFF_BYTES)
    handle.seek(0)
    encoding = _choose_encoding(head, complete=len(head) < _SNIFF_BYTES)
    del head
    if encoding is None:
        encoding = "latin-1"
        report.entries.append(IngestEntry(rel, "note", "encoding", undetected))
    elif encoding != "utf-8":
        report.entries.append(IngestEntry(rel, "note", "encoding", f"not UTF-8; decoded as {encoding}"))
    if encoding != "utf-8":
        # rare; any codec, including UTF-16 whose line ends are not single bytes
        for line in io.TextIOWrapper(handle, encoding=encoding, errors="replace", newline=""):
            report.bytes_read = handle.tell()
            yield line
        return
    bad_lines = 0
    codec = "utf-8-sig"  # drops a byte-order mark at the start only
    for raw in handle:
        report.bytes_read += len(raw)
        try:
            line = raw.decode(codec)
        except UnicodeDecodeError:
            line = raw.decode(codec, errors="replace")
            bad_lines += 1
        codec = "utf-8"
        end = len(line) - (2 if line.endswith("\r\n") else 1 if line.endswith("\r") else 0)
        if line.find("\r", 0, end) == -1:
            yield line
        else:  # a carriage return alone ends a line too (old Mac files), as in open(newline="")
            yield from _LINE_ENDS.findall(line)
    if bad_lines:
        report.entries.append(IngestEntry(
            rel, "note", "encoding",
            f"{bad_lines:,} line(s) after the first {_SNIFF_BYTES:,} bytes are not valid UTF-8; "
            "their bad bytes read as U+FFFD",
        ))


def _choose_encoding(head: bytes, *, complete: bool) -> str | None:
    """"utf-8" when a file starting with `head` is UTF-8, else the encoding detected, if any."""
    try:
        codecs.getincrementaldecoder("utf-8-sig")().decode(head, final=complete)
        return "utf-8"
    except UnicodeDecodeError:
        pass
    best = charset_normalizer.from_bytes(head).best()
    if best is None or not best.encoding:
        return None
    try:
        codecs.lookup(best.encoding)
    except LookupError:
        return None
    return str(best.encoding)


def _choose_columns(
    header: list[str], rows: list[list[str]], rel: str, choice: ColumnChoice
) -> tuple[str, str | None, str | None, str | None, list[str]]:
    columns = header
    listing = ", ".join(columns) or "none"
    for flag, name in (("--text-column", choice.text), ("--title-column", choice.title),
                       ("--id-column", choice.id), ("--date-column", choice.date)):
        if name is not None and name not in columns:
            raise PilewiseError(f"{flag} {name!r} is not a column of {rel}; pass one of: {listing}")
    notes: list[str] = []
    lower = {c.lower(): c for c in columns}
    text_col = choice.text
    if text_col is None:
        named = [lower[n] for n in TEXT_NAMES if n in lower]
        text_col = named[0] if len(named) == 1 else _longest_text_column(header, rows, named or columns)
        if text_col is None:
            raise PilewiseError(f"no text column found in {rel}; pass --text-column (columns: {listing})")
        notes.append(f"guessed text column {text_col!r}")

    def guess(given: str | None, names: tuple[str, ...], kind: str) -> str | None:
        if given is not None:
            return given
        hits = [lower[n] for n in names if n in lower and lower[n] != text_col]
        if len(hits) == 1:
            notes.append(f"guessed {kind} column {hits[0]!r}")
            return hits[0]
        return None

    title_col = guess(choice.title, TITLE_NAMES, "title")
    id_col = guess(choice.id, ID_NAMES, "id")
    if id_col is None and choice.id is None:
        suffixed = [c for c in columns if c.lower().endswith("_id") and c != text_col]
        if len(suffixed) == 1:
            id_col = suffixed[0]
            notes.append(f"guessed id column {id_col!r}")
    date_col = guess(choice.date, DATE_NAMES, "date")
    return text_col, title_col, id_col, date_col, notes


def _longest_text_column(header: list[str], rows: list[list[str]], candidates: list[str]) -> str | None:
    """The column whose cells are clearly the longest text (twice the runner-up), else None."""
    sample = rows[:2000]
    lengths: list[tuple[float, str]] = []
    for col in candidates:
        i = header.index(col)
        cells = [len(row[i]) for row in sample if row[i]]
        if cells:
            lengths.append((sum(cells) / len(cells), col))
    lengths.sort(reverse=True)
    if not lengths or lengths[0][0] < 20:
        return None
    if len(lengths) == 1 or lengths[0][0] >= 2 * lengths[1][0]:
        return lengths[0][1]
    return None
