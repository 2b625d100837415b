"""Reading table exports (.csv/.tsv/.json/.jsonl/.parquet): one row, one document.

Tables are read row by row, so a large export is never held in memory whole: only the first
SAMPLE_ROWS rows are kept, to guess the columns from. Other programs write these files in many
ways (semicolons, a `sep=` line, legacy code pages, records nested in an API response, list and
binary cells), so each table's separator, encoding and layout are sniffed and every guess is
reported.
"""

from __future__ import annotations

import codecs
import csv
import io
import json
import re
from collections import Counter
from collections.abc import Iterator, Sequence
from dataclasses import dataclass, field
from itertools import chain, islice
from pathlib import Path
from typing import Any, BinaryIO, cast

import numpy as np
import pandas as pd

from pilewise.errors import PilewiseError
from pilewise.ingest.plaintext import detect_encoding, first_line_title
from pilewise.model import Document, IngestEntry

TABLE_SUFFIXES = {".csv", ".tsv", ".json", ".jsonl", ".ndjson", ".parquet"}

TEXT_NAMES = ("text", "body", "message", "content", "description", "comment", "answer", "response", "review")
TITLE_NAMES = ("title", "subject", "headline", "summary", "topic")
ID_NAMES = ("id", "doc_id", "document_id", "message_id", "ticket_id", "ticket", "uuid", "key")
DATE_NAMES = ("date", "created", "created_at", "received", "timestamp", "time", "sent", "submitted")

SAMPLE_ROWS = 2000  # rows kept to guess columns from; also the JSON Lines records that fix the header
_SNIFF_BYTES = 1_000_000  # bytes decoded up front to choose a table's encoding
_DIALECT_CHARS = 64_000  # decoded characters (whole lines) a CSV/TSV separator is sniffed from
_DIALECT_LINES = 500
# csv.Sniffer's quote search can take time quadratic in its sample when quotes do not pair up
# (seconds for 64,000 characters, measured); a few thousand characters are what its docs suggest
_SNIFFER_CHARS = 8_000
_SEPARATORS = ",;\t|"  # the candidates sniffed; anything else needs --delimiter
_MALFORMED_WARNING = (5, 0.1)  # at least this many malformed rows, and this share of all rows, earn a warning
_RECORDS_DEPTH = 10  # how deep inside a JSON object lists of records are looked for
_PARQUET_BATCH = 4096
_TABLE_ERRORS = (OSError, ValueError, UnicodeDecodeError, csv.Error, pd.errors.ParserError, ImportError,
                 RecursionError)  # json's parser raises RecursionError for arrays nested thousands deep
_LINE_ENDS = re.compile(r"[^\r\n]*(?:\r\n|\r|\n)|[^\r\n]+")
_SEP_LINE = re.compile(r"sep=(.)", re.IGNORECASE)
# a TSV field quoted as a whole ("..." with quotes inside doubled), between tabs or line ends; the two
# alternatives start with different characters, so the pattern cannot backtrack badly
_QUOTED_TAB_FIELD = re.compile(r'(?:^|\t)"(?:[^"]|"")*"(?=\t|\r|\n|$)', re.MULTILINE)

Cell = object  # a cell as read (str from CSV; any JSON or Arrow value otherwise), made text by `_cell`


class _ReportedRow(list[object]):
    """The type of REPORTED_ROW."""


# Yielded by the row readers in place of a data row they reported (malformed, invalid JSON), so
# that `#rowN` stays the N-th data row of the file and default ids can be joined back to it.
REPORTED_ROW = _ReportedRow()


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

    ``entries`` are, in order: a summary, what loading found (encoding, separator, malformed rows,
    invalid lines), then one entry per row without text, truncated or with a repeated id.
    ``bytes_read`` is about how far into the file reading has got.
    """

    entries: list[IngestEntry] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    bytes_read: int = 0

    def note(self, rel: str, reason: str, detail: str) -> None:
        """Record a guess both as a report entry and as a note line shown to the user."""
        self.entries.append(IngestEntry(rel, "note", reason, detail))
        self.notes.append(f"{rel}: {detail}")


class _Unusable(Exception):
    """A table that cannot be read as it is: an error when it is SOURCE, a skipped entry inside a folder."""

    def __init__(self, reason: str, message: str) -> None:
        super().__init__(message)
        self.reason = reason
        self.message = message


class _BinaryCell(Exception):
    """A cell of bytes that are not UTF-8 text."""


def read_table(
    path: Path, rel: str, choice: ColumnChoice, max_doc_chars: int, *, single: bool = True
) -> tuple[list[Document], list[IngestEntry], list[str]]:
    """Read one table whole: its documents, report entries and notes (see `iter_table`)."""
    report = TableReport()
    documents = list(iter_table(path, rel, choice, max_doc_chars, report, single=single))
    return documents, report.entries, report.notes


def iter_table(
    path: Path, rel: str, choice: ColumnChoice, max_doc_chars: int, report: TableReport, *, single: bool = True
) -> Iterator[Document]:
    """Documents of one table, row by row; rows without text become report entries, never silent drops.

    Columns are guessed from the first SAMPLE_ROWS rows, which are kept; the rest are read as
    they are needed. A read error within those first rows makes the whole table an "unreadable
    table" entry. A later one cannot take back the documents already given: the table keeps
    them, and an "unreadable table" entry says where reading stopped.

    Parameters
    ----------
    single : bool, default True
        Whether the table is SOURCE itself. A table that cannot be used as it is (repeated column
        names, no text column, several lists of JSON records) is then an error; inside a folder it
        becomes a skipped entry and the other files are still read.

    Raises
    ------
    PilewiseError
        When a column option names no column of the table, or (`single`) the table cannot be used.
    """
    rows = _table_rows(path, rel, choice, report)
    try:
        header = _named_columns([str(name) for name in next(rows)])
        sample = list(islice(rows, SAMPLE_ROWS))
        _check_unique(header, rel)
        text_col, title_col, id_col, date_col, guesses = _choose_columns(
            header, [row for row in sample if row is not REPORTED_ROW], rel, choice
        )
    except _Unusable as err:
        if single:
            raise PilewiseError(err.message) from None
        report.entries.append(IngestEntry(rel, "skipped", err.reason, err.message))
        return
    except _TABLE_ERRORS as err:
        report.entries.append(_unreadable(rel, err))
        return
    position = {name: i for i, name in enumerate(header)}
    text_at = position[text_col]
    title_at = position[title_col] if title_col else None
    id_at = position[id_col] if id_col else None
    date_at = position[date_col] if date_col else None
    extra = [(name, i) for i, name in enumerate(header) if name not in {text_col, title_col, id_col, date_col}]
    row_entries: list[IngestEntry] = []
    byte_columns: dict[str, None] = {}
    seen_ids: set[str] = set()
    made = reported = 0
    row_number = 0
    remaining = chain(sample, rows)
    del sample
    while True:
        try:
            raw_row = next(remaining)
        except StopIteration:
            break
        except _TABLE_ERRORS as err:
            report.entries.append(_unreadable(rel, err, after_rows=row_number))
            break
        row_number += 1
        if raw_row is REPORTED_ROW:  # its report line is written; it still counts as a row of the file
            reported += 1
            continue
        where = f"{rel}#row{row_number}"
        try:
            row = _text_cells(raw_row, header, text_at, byte_columns)
        except _BinaryCell as err:
            detail = f"column {err} holds bytes that are not UTF-8"
            row_entries.append(IngestEntry(where, "skipped", "binary cell", detail))
            continue
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
    for name in byte_columns:
        report.note(rel, "binary cells", f"column {name!r} holds bytes; read as UTF-8 text")
    if reported >= _MALFORMED_WARNING[0] and reported >= _MALFORMED_WARNING[1] * row_number:
        report.notes.append(f"{rel}: {reported:,} of {row_number:,} rows do not fit the header; if the separator "
                            "or encoding was guessed wrong, pass --delimiter or --encoding")
    summary = f"{made:,} of {row_number:,} rows became documents (text column {text_col!r})"
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


def _named_columns(header: list[str]) -> list[str]:
    """Header cells with a blank name (a spreadsheet's trailing empty columns) named by position: "column 4"."""
    return [name if name.strip() else f"column {i}" for i, name in enumerate(header, start=1)]


def _check_unique(header: list[str], rel: str) -> None:
    """Refuse repeated column names: which of the two is meant cannot be guessed."""
    counts = Counter(header)
    repeated = [name for name, n in counts.items() if n > 1]
    if not repeated:
        return
    names = ", ".join(repr(name) for name in repeated)
    times = "twice" if all(counts[name] == 2 for name in repeated) else "more than once"
    if len(repeated) == 1:
        message = f"column {names} appears {times} in {rel}; rename one of them"
    else:
        message = f"columns {names} appear {times} in {rel}; rename them"
    raise _Unusable("repeated columns", f"{message} in the file so that every column name is unique")


def _text_cells(row: Sequence[Cell], header: list[str], text_at: int, byte_columns: dict[str, None]) -> list[str]:
    """The row's cells as text; the names of columns whose bytes were read as UTF-8 go into `byte_columns`."""
    if all(type(value) is str for value in row):  # every CSV row, most JSON rows: nothing to convert
        return cast("list[str]", row)
    cells = []
    for i, value in enumerate(row):
        if isinstance(value, bytes | bytearray | memoryview):
            byte_columns[header[i]] = None
        try:
            cells.append(_cell(value, lines=i == text_at))
        except _BinaryCell:
            raise _BinaryCell(repr(header[i])) from None
    return cells


def _cell(value: Cell, *, lines: bool = False) -> str:
    """A cell as text: nested values as JSON text (never a Python repr); `lines` joins a list of strings."""
    if isinstance(value, str):
        return value
    if value is None:
        return ""
    if isinstance(value, bytes | bytearray | memoryview):
        return _utf8(bytes(value))
    if isinstance(value, np.ndarray):
        value = value.tolist()
    if isinstance(value, list | tuple):
        if lines and all(isinstance(item, str) for item in value):
            return "\n".join(value)  # paragraphs or messages of one text, one per line
        return _json_text(value)
    if isinstance(value, dict):
        return _json_text(value)
    if isinstance(value, bool | np.bool_):
        return "true" if value else "false"  # as JSON writes them
    try:
        if pd.isna(value):
            return ""
    except (TypeError, ValueError):
        pass
    if isinstance(value, np.generic):
        return str(value.item())
    return str(value)


def _utf8(raw: bytes) -> str:
    try:
        return raw.decode("utf-8")
    except UnicodeDecodeError:
        raise _BinaryCell from None


def _json_text(value: object) -> str:
    return json.dumps(value, ensure_ascii=False, default=_json_default)


def _json_default(value: object) -> Any:
    """JSON for what Arrow and NumPy put inside nested cells."""
    if isinstance(value, np.ndarray):
        return value.tolist()
    if isinstance(value, np.generic):
        return value.item()
    if isinstance(value, bytes | bytearray | memoryview):
        return _utf8(bytes(value))
    return str(value)  # dates, times, decimals: their usual text form


def _table_rows(path: Path, rel: str, choice: ColumnChoice, report: TableReport) -> Iterator[Sequence[Cell]]:
    """The header, then the rows, of one table, as cells."""
    suffix = path.suffix.lower()
    if suffix == ".parquet":
        return _parquet_rows(path, report)
    if suffix in {".csv", ".tsv"}:
        return _delimited_rows(path, suffix, rel, choice, report)
    if suffix in {".jsonl", ".ndjson"}:
        return _json_lines_rows(path, rel, choice, report)
    return _json_rows(path, rel, choice, report)


def _parquet_rows(path: Path, report: TableReport) -> Iterator[Sequence[Cell]]:
    """Rows of a parquet file, a batch at a time, as Python values (lists, dicts and bytes kept as such).

    Arrow's own conversion (`to_pylist`) rather than pandas': pandas turns integers beside a
    missing value into floats, also inside nested cells. The index pandas stored is left out,
    as pandas.read_parquet leaves it out of the columns.
    """
    import pyarrow.parquet as pq  # an ImportError makes the table unreadable, not the run

    size = path.stat().st_size
    with pq.ParquetFile(path) as parquet:
        schema = parquet.schema_arrow
        index = {name for name in (schema.pandas_metadata or {}).get("index_columns", []) if isinstance(name, str)}
        keep = [i for i, name in enumerate(schema.names) if name not in index]
        yield [schema.names[i] for i in keep]
        total = max(parquet.metadata.num_rows, 1)
        done = 0
        for batch in parquet.iter_batches(batch_size=_PARQUET_BATCH):
            done += batch.num_rows
            report.bytes_read = size * done // total
            yield from (list(record) for record in zip(*(batch.column(i).to_pylist() for i in keep), strict=True))


FLATTEN_DEPTH = 3  # levels of nested objects spread into dotted columns; deeper ones stay one JSON cell


def _json_rows(path: Path, rel: str, choice: ColumnChoice, report: TableReport) -> Iterator[Sequence[Cell]]:
    """Rows of a JSON array of records, of arrays, or of an object holding records (see `_find_records`)."""
    # One JSON value has to be parsed whole, so this format is not streamed; JSON Lines is.
    raw = path.read_bytes()
    report.bytes_read = len(raw)
    encoding = _table_encoding(raw[:_SNIFF_BYTES], rel, choice.encoding, report, complete=len(raw) <= _SNIFF_BYTES)
    text = raw.decode(encoding, errors="replace")
    del raw
    data = json.loads(text[1:] if text.startswith("\ufeff") else text)
    del text
    records = _find_records(data, rel, choice.records_key, report)
    if records and all(isinstance(r, list) for r in records):
        yield from _array_rows(records, rel, report)
        return
    dicts = [flat_record(r) if isinstance(r, dict) else {"text": r} for r in records]
    header = list(dict.fromkeys(key for record in dicts for key in record))
    yield header
    for record in dicts:
        yield [record.get(key) for key in header]


def _find_records(data: object, rel: str, records_key: str | None, report: TableReport) -> list[Any]:
    """The list of records in parsed JSON: the top-level list, or the one list of objects inside an object.

    An object holding one list of objects (an API response: ``{"meta": ..., "results": [...]}``)
    gives that list, searched to depth _RECORDS_DEPTH; several such lists need --records-key
    (a dotted path). An object without one is a single record, or its only list when it has one.
    """
    if isinstance(data, list):
        if records_key is not None:
            report.note(rel, "records", f"--records-key {records_key!r} not used: the top level is already a list")
        return data
    if not isinstance(data, dict):
        raise ValueError("top level is neither a list of records nor an object holding one")
    candidates = _record_lists(data, "", _RECORDS_DEPTH)
    if records_key is not None:
        found: object = data
        for part in records_key.split("."):
            found = found.get(part) if isinstance(found, dict) else None
        if not isinstance(found, list):
            listing = ", ".join(candidates) or "none found"
            raise _Unusable(
                "no records",
                f"--records-key {records_key!r} is not a list in {rel}; pass the key of a list of records ({listing})",
            )
        report.note(rel, "records", f"records from key {records_key!r} (given)")
        return found
    if len(candidates) == 1:
        key = candidates[0]
        report.note(rel, "records", f"records from key {key!r}")
        found = data
        for part in key.split("."):
            found = found[part]  # type: ignore[index]
        return found  # type: ignore[return-value]
    dominant = _dominant_list(data, candidates)
    if dominant is not None:
        others = ", ".join(repr(key) for key in candidates if key != dominant)
        report.note(rel, "records", f"records from key {dominant!r}, the longest list of objects (also: {others})")
        return _at_key(data, dominant)  # type: ignore[return-value]
    if len(candidates) > 1:
        names = ", ".join(repr(key) for key in candidates)
        raise _Unusable(
            "several record lists",
            f"{rel} holds several lists of records ({names}); pass --records-key KEY with one of them",
        )
    lists = [value for value in data.values() if isinstance(value, list)]
    return lists[0] if len(lists) == 1 else [data]


def _at_key(data: object, dotted: str) -> object:
    for part in dotted.split("."):
        data = data[part]  # type: ignore[index]
    return data


def _dominant_list(data: dict[str, Any], candidates: list[str]) -> str | None:
    """Among several lists of objects, the one with at least twice the items of every other (an API
    response's records beside a list of one link), else None: then the choice is the user's."""
    if len(candidates) < 2:
        return None
    sizes = sorted(((len(_at_key(data, key)), key) for key in candidates), reverse=True)  # type: ignore[arg-type]
    (largest, key), (runner_up, _) = sizes[0], sizes[1]
    return key if largest >= 2 and largest >= 2 * runner_up else None


def _record_lists(data: dict[str, Any], prefix: str, depth: int) -> list[str]:
    """Dotted keys of the non-empty lists of objects inside `data`, looking `depth` levels down."""
    found: list[str] = []
    for key, value in data.items():
        path = f"{prefix}{key}"
        if isinstance(value, list) and value and all(isinstance(item, dict) for item in value):
            found.append(path)
        elif isinstance(value, dict) and depth > 1:
            found.extend(_record_lists(value, f"{path}.", depth - 1))
    return found


def _array_rows(arrays: list[list[Any]], rel: str, report: TableReport) -> Iterator[Sequence[Cell]]:
    """Rows of a JSON array of arrays: the first array is the header when it holds only strings."""
    first = arrays[0]
    if first and all(isinstance(name, str) for name in first):
        header, body, start = [str(name) for name in first], arrays[1:], 2
        report.note(rel, "arrays", "arrays of arrays; the first array is the header")
    else:
        header, body, start = [f"col{i}" for i in range(1, len(first) + 1)], arrays, 1
        report.note(rel, "arrays", f"arrays of arrays without a header; columns named col1..col{len(first)}")
    yield header
    for number, values in enumerate(body, start=start):
        if len(values) != len(header):
            detail = f"{len(values)} fields where the header has {len(header)}"
            report.entries.append(IngestEntry(f"{rel}#array{number}", "skipped", "malformed row", detail))
            yield REPORTED_ROW
            continue
        yield values


def _delimited_rows(
    path: Path, suffix: str, rel: str, choice: ColumnChoice, report: TableReport
) -> Iterator[Sequence[Cell]]:
    """CSV/TSV rows with the csv module (quotes, embedded newlines) in the sniffed dialect.

    A leading ``sep=X`` line (a spreadsheet convention) sets the separator and is not a row.
    A row of the wrong width is reported; so is a quote that never closes (see `_runaway`).
    """
    csv.field_size_limit(2**31 - 1)  # documents may be long; --max-doc-chars truncates them later
    with path.open("rb") as handle:
        lines = _text_lines(handle, rel, choice.encoding, report, undetected="not UTF-8; decoded as latin-1")
        head, cut = _first_lines(lines)
        skipped = 0
        from_line = None
        if head and (match := _SEP_LINE.fullmatch(head[0].rstrip("\r\n"))):
            from_line = match.group(1)
            del head[0]
            skipped = 1
        sep, quoting, note = _choose_dialect(head, suffix, choice.delimiter, from_line, cut=cut)
        if note:
            report.note(rel, "separator", note)
        yield from _dialect_rows(chain(head, lines), sep, quoting, rel, report, skipped)


def _first_lines(lines: Iterator[str]) -> tuple[list[str], bool]:
    """Whole lines from the start, up to about _DIALECT_CHARS characters, to sniff the dialect from.

    Also whether the file may go on past them (then the last line may end in the middle of a row).
    """
    head: list[str] = []
    size = 0
    for line in lines:
        head.append(line)
        size += len(line)
        if size >= _DIALECT_CHARS or len(head) >= _DIALECT_LINES:
            return head, True
    return head, False


def _choose_dialect(
    head: list[str], suffix: str, given: str | None, from_line: str | None, *, cut: bool
) -> tuple[str, bool, str]:
    """(separator, whether quotes are read, note): given, else from the sep= line, else sniffed.

    Quotes are always read in CSV: RFC 4180 (§2.5-2.7) encloses fields in double quotes. The
    IANA text/tab-separated-values registration has no quoting at all (fields simply hold no
    tab or line end), so in a TSV a double quote is ordinary text unless the sample shows a
    field quoted as a whole, as spreadsheets and Python's excel-tab dialect write them; read as
    quotes, a stray one in a TSV would swallow the rows after it.
    """
    default = "\t" if suffix == ".tsv" else ","
    if given is not None:
        sep, note = given, f"separator {given!r} (given)"
    elif from_line is not None:
        sep, note = from_line, f"separator {from_line!r} from the sep= line"
    else:
        sep = _sniff_separator(head, default, cut=cut)
        note = f"separator {sep!r} (sniffed)" if sep != default else ""
    quoting = suffix != ".tsv" or sep != "\t" or bool(_QUOTED_TAB_FIELD.search("".join(head)))
    return sep, quoting, note


def _sniff_separator(head: list[str], default: str, *, cut: bool) -> str:
    """The separator of a CSV/TSV sample: csv.Sniffer's, when it splits the rows as evenly as any.

    Candidates are _SEPARATORS. Each is scored by the share of sample rows (read with quotes)
    as wide as the header, a header of one field scoring 0. The Sniffer's answer is kept when
    it scores best; otherwise the best scorer, the suffix's own separator winning ties, which
    also keeps a one-column file as it was.
    """
    sample = head[:-1] if cut and len(head) > 1 else head  # the last line may end mid-row
    scores = {sep: _evenness(sample, sep) for sep in _SEPARATORS}
    best = max(scores.values())
    if best == 0:
        return default
    if scores[default] == best and default == "\t":
        return default  # a .tsv that tabs split evenly is a TSV, whatever else the lines hold
    try:
        sniffed = csv.Sniffer().sniff(_leading(sample, _SNIFFER_CHARS), delimiters=_SEPARATORS).delimiter
    except csv.Error:
        sniffed = ""
    if sniffed in scores and scores[sniffed] == best:
        return sniffed
    return default if scores[default] == best else max(_SEPARATORS, key=lambda sep: scores[sep])


def _leading(lines: list[str], chars: int) -> str:
    """The first whole lines of `lines` up to about `chars` characters (a long first line is cut)."""
    taken: list[str] = []
    size = 0
    for line in lines:
        if size + len(line) > chars:
            if not taken:
                return line[:chars]
            break
        taken.append(line)
        size += len(line)
    return "".join(taken)


def _evenness(lines: list[str], sep: str) -> float:
    """Share of the rows after the header that have the header's width; 0 for a one-field header."""
    try:
        widths = [len(row) for row in csv.reader(lines, delimiter=sep) if row]
    except csv.Error:
        return 0.0
    if not widths or widths[0] < 2:
        return 0.0
    rest = widths[1:]
    return sum(1 for w in rest if w == widths[0]) / len(rest) if rest else 1.0


class _Tape:
    """The decoded lines fed to csv.reader, keeping those of the current record and counting them all."""

    def __init__(self, lines: Iterator[str]) -> None:
        self._lines = lines
        self.taken: list[str] = []
        self.count = 0

    def __iter__(self) -> _Tape:
        return self

    def __next__(self) -> str:
        line = next(self._lines)
        self.taken.append(line)
        self.count += 1
        return line


def _dialect_rows(
    lines: Iterator[str], sep: str, quoting: bool, rel: str, report: TableReport, skipped: int
) -> Iterator[Sequence[Cell]]:
    """Rows of a delimited text; `skipped` lines (a sep= line) came before `lines`, for line numbers."""
    dialect: dict[str, Any] = {"delimiter": sep, "quoting": csv.QUOTE_MINIMAL if quoting else csv.QUOTE_NONE}
    tape = _Tape(lines)
    reader = csv.reader(tape, **dialect)
    header = next(reader, None)
    if not header:
        raise ValueError("no header row")
    yield header
    width = len(header)
    runaways = 0
    while True:
        first = tape.count + 1 + skipped
        tape.taken.clear()
        row = next(reader, None)
        if row is None:
            break
        if quoting and len(tape.taken) > 1 and _runaway(tape.taken, dialect, width):
            last = first + len(tape.taken) - 1
            detail = f"quote opened on line {first} never closes; lines {first}-{last} read without quoting"
            report.entries.append(IngestEntry(f"{rel}#line{first}", "note", "unclosed quote", detail))
            runaways += 1
            rows = [(first + i, _line_cells(line, dialect)) for i, line in enumerate(tape.taken)]
        else:
            rows = [(tape.count + skipped, row)]
        for line_number, cells in rows:
            if not cells:
                continue
            if len(cells) != width:
                detail = f"{len(cells)} fields where the header has {width}"
                report.entries.append(IngestEntry(f"{rel}#line{line_number}", "skipped", "malformed row", detail))
                yield REPORTED_ROW
                continue
            yield list(cells)
    if runaways:  # one line for the user; the report lists every span
        report.notes.append(f"{rel}: {runaways:,} quote(s) never close; their lines were read one row per line "
                            "without quoting (see the unclosed quote lines of the ingest report)")


def _runaway(lines: list[str], dialect: dict[str, Any], width: int) -> bool:
    """Whether a record over several lines is a quote that never closed rather than a quoted line break.

    A record with a quoted line break (RFC 4180 §2.6) reads the same under the csv module's
    strict mode. A quote that opens and never closes either reaches the end of the file inside
    the quotes, or "closes" on the opening quote of a later field, which text then follows:
    strict mode rejects both. A quote that happens to close cleanly much further down is
    caught when the record's lines after the first (at least three) each read alone as a full
    row of a table of three or more columns; a narrower table would take prose with one comma
    per line for rows. A doubled quote on those lines is an escaped quote (RFC 4180 §2.7), which
    writers put only inside quoted fields: such a record is one quoted field, however its lines split
    at commas (prose with two commas a line, seen in a quotation file).
    """
    try:
        if len(list(csv.reader(lines, strict=True, **dialect))) != 1:
            return True
    except csv.Error:
        return True
    rest = lines[1:]
    if any('""' in line for line in rest):
        return False
    return width >= 3 and len(rest) >= 3 and all(len(_line_cells(line, dialect)) == width for line in rest)


def _line_cells(line: str, dialect: dict[str, Any]) -> list[str]:
    """One physical line as a row: with quotes when they close on the line, else quotes as plain text."""
    try:
        rows = list(csv.reader([line], strict=True, **dialect))
        if len(rows) == 1:
            return rows[0]
    except csv.Error:
        pass
    rows = list(csv.reader([line], delimiter=dialect["delimiter"], quoting=csv.QUOTE_NONE))
    return rows[0] if rows else []


def _json_lines_rows(path: Path, rel: str, choice: ColumnChoice, report: TableReport) -> Iterator[Sequence[Cell]]:
    """Rows of a JSON Lines file; its columns are the keys of the first SAMPLE_ROWS records, in first-seen order."""
    with path.open("rb") as handle:
        lines = _text_lines(handle, rel, choice.encoding, report,
                            undetected="not UTF-8 and no encoding detected; decoded as latin-1")
        records = _json_records(lines, rel, report)
        sample = list(islice(records, SAMPLE_ROWS))
        header = list(dict.fromkeys(key for _, record in sample if record is not None for key in record))
        yield header
        for _, record in sample:
            yield REPORTED_ROW if record is None else [record.get(key) for key in header]
        del sample
        known = set(header)
        for line_number, record in records:
            if record is None:
                yield REPORTED_ROW
                continue
            if not known.issuperset(record):
                for key in record:
                    if key not in known:
                        known.add(key)
                        report.notes.append(
                            f"{rel}: key {key!r} first appears on line {line_number:,}, after the first "
                            f"{SAMPLE_ROWS:,} records, so it is not read"
                        )
            yield [record.get(key) for key in header]


def _json_records(
    lines: Iterator[str], rel: str, report: TableReport
) -> Iterator[tuple[int, dict[str, object] | None]]:
    """(line number, record) for each JSON object line; other non-blank lines are reported, and give None."""
    # splitlines on each piece numbers the lines exactly as splitlines on the whole text would
    numbered = enumerate((line for piece in lines for line in piece.splitlines()), start=1)
    for line_number, line in numbered:
        if not line.strip():
            continue
        try:
            value = json.loads(line)
        except json.JSONDecodeError as err:
            report.entries.append(IngestEntry(f"{rel}#line{line_number}", "skipped", "invalid JSON", err.msg))
            yield line_number, None
            continue
        except RecursionError:
            detail = "nested too deeply"
            report.entries.append(IngestEntry(f"{rel}#line{line_number}", "skipped", "invalid JSON", detail))
            yield line_number, None
            continue
        if not isinstance(value, dict):
            report.entries.append(IngestEntry(f"{rel}#line{line_number}", "skipped", "invalid JSON", "not an object"))
            yield line_number, None
            continue
        yield line_number, flat_record(value)


def flat_record(record: dict[str, Any], depth: int = FLATTEN_DEPTH) -> dict[str, Any]:
    """A JSON record with its nested objects spread into dotted columns: {"a": {"b": 1}} -> {"a.b": 1}.

    API exports nest the fields of a record ("attributes": {"subject": ..., "body": ...}); each nested field
    becomes a column of its own (as pandas.json_normalize names them), so that the text, title and date columns
    can be found and chosen by name ("--text-column attributes.body"). Lists stay one cell. An object whose
    dotted names would clash with a key already present, or one nested deeper than `depth`, stays one cell.
    """
    flat: dict[str, Any] = {}
    for key, value in record.items():
        inner = flat_record(value, depth - 1) if isinstance(value, dict) and value and depth > 0 else None
        dotted = {f"{key}.{k}": v for k, v in inner.items()} if inner is not None else None
        if dotted is None or any(k in record or k in flat for k in dotted):
            flat[key] = value
        else:
            flat.update(dotted)
    return flat


def _text_lines(
    handle: BinaryIO, rel: str, given: str | None, report: TableReport, *, undetected: str
) -> Iterator[str]:
    """Lines of a table file, split as open(newline="") splits them, decoded as they are read.

    The encoding is `given` (--encoding), else chosen from the first _SNIFF_BYTES (see
    `_table_encoding`), else Latin-1 (noted as `undetected`). Rows already given cannot be taken
    back, so a UTF-8 file with bad bytes further on stays UTF-8: those lines read with U+FFFD,
    and a note says how many.
    """
    head = handle.read(_SNIFF_BYTES)
    handle.seek(0)
    encoding = _table_encoding(head, rel, given, report, complete=len(head) < _SNIFF_BYTES, undetected=undetected)
    del head
    if encoding != "utf-8":
        # rare; any codec, including UTF-16 whose line ends are not single bytes
        start = True
        for line in io.TextIOWrapper(handle, encoding=encoding, errors="replace", newline=""):
            report.bytes_read = handle.tell()
            if start and line.startswith("\ufeff"):  # a byte-order mark the codec kept
                line = line[1:]
            start = False
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


_BOMS = (  # UTF-32 first: its little-endian mark begins with UTF-16's
    (codecs.BOM_UTF32_LE, "utf-32"), (codecs.BOM_UTF32_BE, "utf-32"),
    (codecs.BOM_UTF16_LE, "utf-16"), (codecs.BOM_UTF16_BE, "utf-16"),
)


def _table_encoding(
    head: bytes, rel: str, given: str | None, report: TableReport, *, complete: bool,
    undetected: str = "not UTF-8 and no encoding detected; decoded as latin-1",
) -> str:
    """The codec of a table starting with `head`: given, else by byte-order mark, UTF-8, detected or Latin-1.

    Every choice but plain UTF-8 is noted; a UTF-8 byte-order mark is dropped by the UTF-8 reading.
    """
    if given is not None:
        report.note(rel, "encoding", f"encoding {given} (given)")
        return given
    for mark, codec in _BOMS:
        if head.startswith(mark):
            report.note(rel, "encoding", f"not UTF-8; decoded as {codec} (byte-order mark)")
            return codec
    encoding = _choose_encoding(head, complete=complete)
    if encoding is None:
        report.note(rel, "encoding", undetected)
        return "latin-1"
    if encoding != "utf-8":
        report.note(rel, "encoding", f"not UTF-8; decoded as {encoding}")
    return encoding


def _choose_encoding(head: bytes, *, complete: bool) -> str | None:
    """"utf-8" when a file starting with `head` is UTF-8, else the encoding detected, if any."""
    try:
        codecs.getincrementaldecoder("utf-8-sig")().decode(head, final=complete)
        return "utf-8"
    except UnicodeDecodeError:
        pass
    return detect_encoding(head)


def _choose_columns(
    header: list[str], rows: list[Sequence[Cell]], rel: str, choice: ColumnChoice
) -> tuple[str, str | None, str | None, str | None, list[str]]:
    columns = header
    listing = ", ".join(columns) or "none"
    for flag, name in (("--text-column", choice.text), ("--title-column", choice.title),
                       ("--id-column", choice.id), ("--date-column", choice.date)):
        if name is not None and name not in columns:
            raise PilewiseError(f"{flag} {name!r} is not a column of {rel}; pass one of: {listing}")
    notes: list[str] = []
    lower = _names_for_guessing(columns)
    text_col = choice.text
    if text_col is None:
        named = [lower[n] for n in TEXT_NAMES if n in lower]
        text_col = named[0] if len(named) == 1 else _longest_text_column(header, rows, named or columns)
        if text_col is None:
            raise _Unusable("no text column", f"no text column found in {rel}; pass --text-column (columns: {listing})")
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


def _names_for_guessing(columns: list[str]) -> dict[str, str]:
    """Lower-cased column names to columns; a nested field ("attributes.subject") also answers to its last part
    ("subject") when no other column has that name or that last part."""
    lower = {c.lower(): c for c in columns}
    leaves: dict[str, list[str]] = {}
    for column in columns:
        if "." in column:
            leaves.setdefault(column.lower().rsplit(".", 1)[1], []).append(column)
    lower.update({leaf: found[0] for leaf, found in leaves.items() if len(found) == 1 and leaf not in lower})
    return lower


def _cell_length(value: Cell) -> int:
    try:
        return len(_cell(value, lines=True))
    except _BinaryCell:
        return 0


def _longest_text_column(header: list[str], rows: list[Sequence[Cell]], candidates: list[str]) -> str | None:
    """The column whose cells are clearly the longest text (twice the runner-up), else None."""
    sample = rows[:2000]
    lengths: list[tuple[float, str]] = []
    for col in candidates:
        i = header.index(col)
        cells = [n for n in (_cell_length(row[i]) for row in sample) if n]
        if cells:
            lengths.append((sum(cells) / len(cells), col))
    lengths.sort(reverse=True)
    if not lengths or lengths[0][0] < 20:
        return None
    if len(lengths) == 1 or lengths[0][0] >= 2 * lengths[1][0]:
        return lengths[0][1]
    return None
