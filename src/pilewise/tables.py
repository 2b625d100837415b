"""Reading table exports (.csv/.tsv/.json/.jsonl/.parquet): one row, one document."""

from __future__ import annotations

import csv
import json
from collections.abc import Iterable
from dataclasses import dataclass
from pathlib import Path

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


@dataclass(frozen=True)
class ColumnChoice:
    """The user's column options; None means guess."""

    text: str | None = None
    title: str | None = None
    id: str | None = None
    date: str | None = None


def read_table(
    path: Path, rel: str, choice: ColumnChoice, max_doc_chars: int
) -> tuple[list[Document], list[IngestEntry], list[str]]:
    """Read one table; rows without text become report entries, never silent drops."""
    table, entries = _load_table(path, rel)
    if table is None:
        return [], entries, []
    header, rows = table
    text_col, title_col, id_col, date_col, notes = _choose_columns(header, rows, rel, choice)
    position = {name: i for i, name in enumerate(header)}
    text_at = position[text_col]
    title_at = position[title_col] if title_col else None
    id_at = position[id_col] if id_col else None
    date_at = position[date_col] if date_col else None
    extra = [(name, i) for i, name in enumerate(header) if name not in {text_col, title_col, id_col, date_col}]
    documents: list[Document] = []
    seen_ids: set[str] = set()
    for row_number, row in enumerate(rows, start=1):
        where = f"{rel}#row{row_number}"
        text = row[text_at].strip()
        if not text:
            entries.append(IngestEntry(where, "skipped", "empty", f"column {text_col!r} is empty"))
            continue
        if len(text) > max_doc_chars:
            entries.append(IngestEntry(where, "note", "truncated", f"kept the first {max_doc_chars:,} characters"))
            text = text[:max_doc_chars]
        doc_id = row[id_at].strip() if id_at is not None else ""
        if not doc_id or doc_id in seen_ids:
            if doc_id:
                entries.append(IngestEntry(where, "note", "duplicate id", f"id {doc_id!r} repeats; used {where}"))
            doc_id = where
        seen_ids.add(doc_id)
        title = row[title_at].strip() if title_at is not None else ""
        documents.append(
            Document(
                doc_id=doc_id,
                source=where,
                title=" ".join(title.split())[:200] or first_line_title(text),
                text=text,
                date=row[date_at].strip() if date_at is not None else "",
                metadata=tuple((name, row[i]) for name, i in extra),
            )
        )
    summary = f"{len(documents)} of {len(rows)} rows became documents (text column {text_col!r})"
    entries.insert(0, IngestEntry(rel, "document", "table", summary))
    return documents, entries, [f"{rel}: {note}" for note in notes]


Table = tuple[list[str], list[list[str]]]


def _cell(value: object) -> str:
    if value is None:
        return ""
    try:
        if pd.isna(value):
            return ""
    except (TypeError, ValueError):
        pass
    return str(value)


def _frame_rows(frame: pd.DataFrame) -> Table:
    header = [str(c) for c in frame.columns]
    return header, [[_cell(v) for v in record] for record in frame.itertuples(index=False, name=None)]


def _load_table(path: Path, rel: str) -> tuple[Table | None, list[IngestEntry]]:
    suffix = path.suffix.lower()
    entries: list[IngestEntry] = []
    try:
        if suffix == ".parquet":
            return _frame_rows(pd.read_parquet(path)), entries
        if suffix in {".csv", ".tsv"}:
            return _read_delimited_file(path, "\t" if suffix == ".tsv" else ",", rel, entries), entries
        raw = path.read_bytes()
        text, note = decode_bytes(raw)
        if note:
            entries.append(IngestEntry(rel, "note", "encoding", note))
        if suffix in {".jsonl", ".ndjson"}:
            return _frame_rows(_read_json_lines(text, rel, entries)), entries
        data = json.loads(text)
        if isinstance(data, dict):
            lists = [v for v in data.values() if isinstance(v, list)]
            data = lists[0] if len(lists) == 1 else [data]
        if not isinstance(data, list):
            raise ValueError("top level is neither a list of records nor an object holding one")
        return _frame_rows(pd.DataFrame([r if isinstance(r, dict) else {"text": r} for r in data])), entries
    except (OSError, ValueError, UnicodeDecodeError, csv.Error, pd.errors.ParserError) as err:
        message = str(err).splitlines()[0][:200] if str(err) else type(err).__name__
        entries.append(IngestEntry(rel, "skipped", "unreadable table", message))
        return None, entries
    except ImportError as err:  # parquet engine missing
        entries.append(IngestEntry(rel, "skipped", "unreadable table", str(err)[:200]))
        return None, entries


def _read_delimited_file(path: Path, sep: str, rel: str, entries: list[IngestEntry]) -> Table:
    """Stream a CSV/TSV file as UTF-8; if it is not UTF-8, read it again in the detected encoding."""
    try:
        with path.open(encoding="utf-8-sig", newline="") as handle:
            return _read_delimited(handle, sep, rel, entries)
    except UnicodeDecodeError:
        pass
    del entries[:]  # rows reported during the failed pass are reported again
    with path.open("rb") as handle:
        head = handle.read(1_000_000)
    best = charset_normalizer.from_bytes(head).best()
    encoding = best.encoding if best is not None and best.encoding else "latin-1"
    entries.append(IngestEntry(rel, "note", "encoding", f"not UTF-8; decoded as {encoding}"))
    with path.open(encoding=encoding, errors="replace", newline="") as handle:
        return _read_delimited(handle, sep, rel, entries)


def _read_delimited(lines: Iterable[str], sep: str, rel: str, entries: list[IngestEntry]) -> Table:
    """CSV/TSV rows with the csv module (quotes, embedded newlines); a row of the wrong width is reported."""
    csv.field_size_limit(2**31 - 1)  # documents may be long; --max-doc-chars truncates them later
    reader = csv.reader(lines, delimiter=sep)
    header = next(reader, None)
    if not header:
        raise ValueError("no header row")
    rows: list[list[str]] = []
    for row in reader:
        if not row:
            continue
        if len(row) != len(header):
            where = f"{rel}#line{reader.line_num}"
            detail = f"{len(row)} fields where the header has {len(header)}"
            entries.append(IngestEntry(where, "skipped", "malformed row", detail))
            continue
        rows.append(row)
    return header, rows


def _read_json_lines(text: str, rel: str, entries: list[IngestEntry]) -> pd.DataFrame:
    records: list[dict[str, object]] = []
    for line_number, line in enumerate(text.splitlines(), start=1):
        if not line.strip():
            continue
        try:
            value = json.loads(line)
        except json.JSONDecodeError as err:
            entries.append(IngestEntry(f"{rel}#line{line_number}", "skipped", "invalid JSON", err.msg))
            continue
        if not isinstance(value, dict):
            entries.append(IngestEntry(f"{rel}#line{line_number}", "skipped", "invalid JSON", "not an object"))
            continue
        records.append(value)
    return pd.DataFrame(records)


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
