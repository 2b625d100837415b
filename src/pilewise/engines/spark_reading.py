"""Reading SOURCE on Spark: a table (CSV, JSON Lines, Parquet; one file or a folder of parts) or a folder
of text, HTML and mail files, from any path Spark reads (local, hdfs://, s3a://).

Rows and files become the same `Document`s as the local reader makes (the text, HTML and mail decoding is
`reading.document_from_bytes`; columns are guessed by `tables._choose_columns` on the first rows), numbered
in reading order. What is not a document is an `IngestEntry`; entries come back to the driver (they are
few: skipped files and rows, notes), documents stay on Spark.
"""

from __future__ import annotations

import io
import json
import os
import posixpath
import tempfile
from collections.abc import Iterable, Iterator, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any
from urllib.parse import urlparse

from pilewise.errors import PilewiseError
from pilewise.ingest.plaintext import first_line_title
from pilewise.ingest.reading import (
    _MBOX_FROM_LINE,
    GZIP_SUFFIX,
    MBOX_SUFFIXES,
    UNSUPPORTED_SUFFIXES,
    ReadLimits,
    _Planned,
    _Progress,
    _read_mbox,
    document_from_bytes,
    gunzipped_document,
    gzip_inner_suffix,
    not_text_of,
    read_gzip,
)
from pilewise.ingest.tables import FLATTEN_DEPTH, SAMPLE_ROWS, ColumnChoice, _choose_columns, _Unusable
from pilewise.model import Document, IngestEntry

TABLE_KINDS = {".csv": "csv", ".tsv": "csv", ".jsonl": "json", ".ndjson": "json", ".json": "json",
               ".parquet": "parquet"}
ENTRIES_UP_TO = 100_000  # report entries brought back to the driver; above this the rest are counted in a note
TITLE_CHARS = 200  # as the local table reader
PER_FILE = 1 << 32  # a file's documents are numbered file * PER_FILE + message (mailboxes hold many)


@dataclass(frozen=True)
class SparkSource:
    """Documents on Spark as (number in reading order, Document) pairs, and what reading found."""

    documents: Any  # pyspark RDD of (int, Document)
    entries: tuple[IngestEntry, ...]
    notes: tuple[str, ...]
    files_found: int
    count: int | None = None  # documents, when reading counted them (a table); None: not counted
    kept: Any = None  # an RDD reading persisted so that its jobs parse the files once; None: nothing kept

    def release(self) -> None:
        """Drop what reading kept, once the documents are kept elsewhere (the engine's redacted copy)."""
        if self.kept is not None:
            self.kept.unpersist()


def read_on_spark(spark: Any, source: str, columns: ColumnChoice, limits: ReadLimits) -> SparkSource:
    """Read SOURCE on Spark as a table or as a folder of files, chosen by its name or its files' names."""
    check_file_system(spark, source)
    check_reachable(spark, source)
    kind = _table_kind(source)
    if kind is not None:
        return _read_table(spark, source, kind, columns, limits)
    return _read_files(spark, source, limits, columns.encoding)


CONNECTORS = {  # schemes whose Hadoop file system is not in PySpark's own jars: where it comes from
    "s3a": "the S3A connector (hadoop-aws of Spark's Hadoop version and the AWS SDK bundle it was built with)",
    "gs": "the Cloud Storage connector (gcs-connector, shaded)",
    "abfs": "the Azure connector (hadoop-azure)", "abfss": "the Azure connector (hadoop-azure)",
    "wasb": "the Azure connector (hadoop-azure)", "wasbs": "the Azure connector (hadoop-azure)",
}


MISSING_FILE_SYSTEM = ("UnsupportedFileSystemException", "ClassNotFoundException", "NoClassDefFoundError")


def check_file_system(spark: Any, source: str) -> None:
    """One line naming the fix when Spark has no Hadoop file system for SOURCE's scheme (PySpark ships HDFS and
    local files, not the object-store connectors); checked before reading, on the driver."""
    scheme = urlparse(source).scheme.lower() if "://" in source else ""
    if not scheme or scheme == "file":
        return
    jvm = spark.sparkContext._jvm
    try:
        jvm.org.apache.hadoop.fs.FileSystem.getFileSystemClass(scheme, spark.sparkContext._jsc.hadoopConfiguration())
    except Exception as err:  # Py4J wraps Hadoop's error: no class named for the scheme, or the class missing
        if not any(sign in str(err) for sign in MISSING_FILE_SYSTEM):
            raise
        what = CONNECTORS.get(scheme, f"a Hadoop file system for {scheme}://")
        raise PilewiseError(
            f"Spark cannot read {scheme}:// paths here: {what} is not on its class path; add its jars with "
            f"PYSPARK_SUBMIT_ARGS='--jars A.jar,B.jar pyspark-shell' (or spark-submit --jars), or copy SOURCE "
            "to a local path") from None


# Hadoop's IPC client retries a refused connection ipc.client.connect.max.retries (10) times, a second apart,
# and a timed-out one 45 times (core-default.xml): the probe below asks once, so that a namenode that is not
# there is one line within seconds; the reading itself keeps the configured retries
PROBE_SETTINGS = {"ipc.client.connect.max.retries": "0", "ipc.client.connect.max.retries.on.timeouts": "0",
                  "ipc.client.connect.timeout": "10000"}


def check_reachable(spark: Any, source: str) -> None:
    """One line naming the fix when SOURCE's file system server (an HDFS namenode, a WebHDFS endpoint) cannot be
    reached: asked once on the driver, before Spark reads with its retries, which would take minutes and end in
    a Java stack trace."""
    scheme = urlparse(source).scheme.lower() if "://" in source else ""
    if not scheme or scheme == "file":
        return
    context = spark.sparkContext
    jvm = context._jvm
    settings = jvm.org.apache.hadoop.conf.Configuration(context._jsc.hadoopConfiguration())
    for key, value in PROBE_SETTINGS.items():
        settings.set(key, value)
    try:
        system = jvm.org.apache.hadoop.fs.FileSystem.newInstance(jvm.java.net.URI(source), settings)
        try:
            system.exists(jvm.org.apache.hadoop.fs.Path(source))
        finally:
            system.close()
    except Exception as err:  # Py4J wraps Hadoop's ConnectException, UnknownHostException, ...
        cause = java_cause(err)
        if not any(sign in cause for sign in UNREACHABLE):
            return  # not a connection failure (permissions, a missing file): the reading says it in its words
        server = urlparse(source).netloc or "the default file system"
        raise PilewiseError(
            f"Spark cannot reach {scheme}://{server} ({cause}); check the host and port in SOURCE and that the "
            "namenode (or other server) is running and reachable from this machine") from None


UNREACHABLE = ("ConnectException", "UnknownHostException", "NoRouteToHostException", "SocketTimeoutException",
               "ConnectTimeoutException", "Connection refused")


def java_cause(err: BaseException) -> str:
    """The Java exception behind a Py4J error, shortened to its first clause ("java.net.ConnectException: Call
    From a to b failed on connection exception"), instead of Py4J's "An error occurred while calling o41.csv"."""
    lines = [line.strip() for line in str(err).splitlines() if line.strip()]
    if not lines:
        return type(err).__name__
    if lines[0].startswith("An error occurred while calling") and len(lines) > 1:
        lines = lines[1:]
    first = lines[0].removeprefix(": ")
    return first.split("; For more details see")[0][:300]


def _table_kind(source: str) -> str | None:
    """"csv", "json" or "parquet" when SOURCE is a table file or a local folder of one kind of table parts."""
    suffix = posixpath.splitext(urlparse(source).path if "://" in source else source)[1].lower()
    if suffix in TABLE_KINDS:
        return TABLE_KINDS[suffix]
    if "://" in source or not Path(source).is_dir():
        return None
    parts = {p.suffix.lower() for p in Path(source).rglob("*")
             if p.is_file() and not p.name.startswith((".", "_"))}
    kinds = {TABLE_KINDS.get(s) for s in parts}
    return kinds.pop() if len(kinds) == 1 and None not in kinds else None


def _load_table(spark: Any, source: str, kind: str, columns: ColumnChoice) -> Any:
    reader = spark.read
    if kind == "csv":
        separator = columns.delimiter or ("\t" if source.lower().endswith(".tsv") else ",")
        return (reader.option("header", True).option("multiLine", True).option("escape", '"')
                .option("sep", separator).option("encoding", columns.encoding or "UTF-8").csv(source))
    if kind == "json":
        return reader.option("encoding", columns.encoding or "UTF-8").json(source)
    return reader.parquet(source)


def _read_table(spark: Any, source: str, kind: str, choice: ColumnChoice, limits: ReadLimits) -> SparkSource:
    rel = posixpath.basename(source.rstrip("/")) or source
    try:
        frame = _load_table(spark, source, kind, choice)
    except Exception as err:  # Spark's analysis errors: a path that does not exist, a file it cannot parse
        raise PilewiseError(f"Spark could not read {source!r} ({java_cause(err)}); check the path and its "
                            "format") from None
    frame = flat_frame(frame)
    corrupt = "_corrupt_record" in frame.columns
    header = [c for c in frame.columns if c != "_corrupt_record"]
    first_rows = frame.select(*(_quoted(c) for c in header)).limit(SAMPLE_ROWS).collect()
    sample: list[Sequence[object]] = [[_cell(row[c]) for c in header] for row in first_rows]
    try:
        text_col, title_col, id_col, date_col, guesses = _choose_columns(header, sample, rel, choice)
    except _Unusable as err:
        raise PilewiseError(err.message) from None
    wanted = [text_col, title_col, id_col, date_col]
    extra = [c for c in header if c not in wanted]
    picked = [c for c in wanted if c is not None] + extra + (["_corrupt_record"] if corrupt else [])
    rows = frame.select(*(_quoted(c) for c in picked)).rdd.zipWithIndex()
    layout = _Layout(rel, text_col, title_col, id_col, date_col, tuple(extra), corrupt, limits.max_doc_chars)
    made = rows.mapPartitions(layout.documents)
    documents, n_docs = _unique_ids(made.filter(lambda item: item[0] == "doc").map(lambda item: item[1]))
    entries, more = _bounded_entries(made.filter(lambda item: item[0] == "entry").map(lambda item: item[1]))
    summary = IngestEntry(rel, "document", "table", f"{n_docs:,} rows became documents (text column {text_col!r})")
    notes = [f"{rel}: {note}" for note in guesses] + more
    return SparkSource(documents, (summary, *entries), tuple(notes), 1, n_docs)


def flat_frame(frame: Any, depth: int = FLATTEN_DEPTH) -> Any:
    """The frame with its struct columns spread into dotted columns ("attributes.body"), as the local reader
    spreads nested JSON objects (`tables.flat_record`), so that both engines see the same columns."""
    from pyspark.sql import functions as F  # noqa: N812 (Spark's own convention)
    from pyspark.sql.types import StructType

    def leaves(path: list[str], kind: Any, left: int) -> list[list[str]]:
        if isinstance(kind, StructType) and kind.fields and left > 0:
            return [leaf for field in kind.fields for leaf in leaves([*path, field.name], field.dataType, left - 1)]
        return [path]

    paths = [leaf for field in frame.schema.fields for leaf in leaves([field.name], field.dataType, depth)]
    names = [".".join(path) for path in paths]
    if len(set(names)) < len(names) or len(paths) == len(frame.columns):
        return frame  # nothing nested, or dotted names that would clash: columns stay as they are
    return frame.select(*(F.col(".".join(f"`{part}`" for part in path)).alias(name)
                          for path, name in zip(paths, names, strict=True)))


def _quoted(column: str) -> str:
    """A column name as Spark's select takes it literally (a dot would otherwise mean a struct field)."""
    return f"`{column}`"


def _cell(value: Any) -> str:
    """A cell as text, as the local table reader shows it: None empty, nested values as their text."""
    if value is None:
        return ""
    if isinstance(value, bytes | bytearray):
        return bytes(value).decode("utf-8", errors="replace")
    if isinstance(value, list | tuple | dict):  # arrays, deeper structs (Row is a tuple), maps: JSON, never a repr
        return json.dumps(_plain(value), ensure_ascii=False, default=str)
    return str(value)


def _plain(value: Any) -> Any:
    """Spark's nested values as plain JSON-ready Python: a Row as a dict, arrays as lists."""
    if hasattr(value, "asDict"):
        return {k: _plain(v) for k, v in value.asDict().items()}
    if isinstance(value, dict):
        return {str(k): _plain(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_plain(v) for v in value]
    return value


@dataclass(frozen=True)
class _Layout:
    """Which selected column is which; turns numbered rows into documents or report entries (on executors)."""

    rel: str
    text: str
    title: str | None
    id: str | None
    date: str | None
    extra: tuple[str, ...]
    corrupt: bool
    max_doc_chars: int

    def documents(self, rows: Iterable[tuple[Any, int]]) -> Iterator[tuple[str, Any]]:
        for row, number in rows:
            where = f"{self.rel}#row{number + 1}"
            if self.corrupt and row["_corrupt_record"] is not None:
                yield "entry", IngestEntry(where, "skipped", "invalid JSON", "the line is not a JSON object")
                continue
            text = _cell(row[self.text]).strip()
            if not text:
                yield "entry", IngestEntry(where, "skipped", "empty", f"column {self.text!r} is empty")
                continue
            if len(text) > self.max_doc_chars:
                kept = f"kept the first {self.max_doc_chars:,} characters"
                yield "entry", IngestEntry(where, "note", "truncated", kept)
                text = text[: self.max_doc_chars]
            title = " ".join(_cell(row[self.title]).split())[:TITLE_CHARS] if self.title else ""
            yield "doc", (number, Document(
                doc_id=_cell(row[self.id]).strip() if self.id else "",
                source=where,
                title=title or first_line_title(text),
                text=text,
                date=_cell(row[self.date]).strip() if self.date else "",
                metadata=tuple((name, _cell(row[name])) for name in self.extra),
            ))


def _unique_ids(documents: Any) -> tuple[Any, int]:
    """Documents whose id is empty or repeated get their row's place as id (as the local reader does); and
    how many documents there are, summed from the same id counts (Spark reuses their shuffle: the table is
    not parsed again to count its rows)."""
    per_id = documents.map(lambda item: (item[1].doc_id, 1)).reduceByKey(lambda a, b: a + b)
    repeated = set(per_id.filter(lambda pair: pair[0] != "" and pair[1] > 1).keys().take(ENTRIES_UP_TO + 1))
    if len(repeated) > ENTRIES_UP_TO:
        raise PilewiseError(f"more than {ENTRIES_UP_TO:,} ids repeat in the id column; pass another --id-column")

    def own_id(item: tuple[int, Document]) -> tuple[int, Document]:
        number, doc = item
        if doc.doc_id and doc.doc_id not in repeated:
            return item
        return number, Document(doc.source, doc.source, doc.title, doc.text, doc.date, doc.metadata)

    return documents.map(own_id), int(per_id.values().sum())


def _bounded_entries(entries: Any) -> tuple[list[IngestEntry], list[str]]:
    """Up to ENTRIES_UP_TO report entries in reading order, and a note counting the rest."""
    taken = entries.take(ENTRIES_UP_TO + 1)
    if len(taken) <= ENTRIES_UP_TO:
        return taken, []
    total = entries.count()
    return taken[:ENTRIES_UP_TO], [f"{total:,} report lines; the first {ENTRIES_UP_TO:,} are in ingest-report.csv"]


def _read_files(spark: Any, source: str, limits: ReadLimits, encoding: str | None) -> SparkSource:
    from pyspark import StorageLevel

    try:
        frame = spark.read.format("binaryFile").option("recursiveFileLookup", "true").load(source)
    except Exception as err:
        first = str(err).strip().splitlines()[0] if str(err).strip() else type(err).__name__
        raise PilewiseError(f"Spark could not read {source!r} ({first}); check the path") from None
    base = (urlparse(source).path if "://" in source else str(Path(source).resolve())).rstrip("/")
    files = frame.select("path", "length", "content").rdd.sortBy(lambda row: row["path"]).zipWithIndex()
    reader = _FileReader(base, limits, encoding)
    # kept: counting, the report lines and the documents would each read and decode every file again (a
    # partition of files is at most Spark's 128 MB split; a table, one partition per CSV file, is not kept)
    made = files.mapPartitions(reader.documents).persist(StorageLevel.MEMORY_AND_DISK)
    documents = made.filter(lambda item: item[0] == "doc").map(lambda item: item[1])
    entries, more = _bounded_entries(made.filter(lambda item: item[0] == "entry").map(lambda item: item[1]))
    # Spark's file sources leave out files of 0 bytes; they are listed here so that each is a report line
    listed = _listed_files(spark, source)
    empty = [IngestEntry(reader.relative(path), "skipped", "empty", "0 bytes") for path, size in listed if size == 0]
    if not listed:
        raise PilewiseError(f"no files found under {source!r}; pass a folder of text files or a table")
    return SparkSource(documents, (*entries, *empty[:ENTRIES_UP_TO]), tuple(more), len(listed), kept=made)


def _listed_files(spark: Any, source: str) -> list[tuple[str, int]]:
    """Every file under SOURCE with its size, through Hadoop's file system API (any scheme Spark reads);
    hidden files (names starting with '.' or '_') are left out, as Spark's file sources leave them out."""
    jvm = spark.sparkContext._jvm
    path = jvm.org.apache.hadoop.fs.Path(source)
    system = path.getFileSystem(spark.sparkContext._jsc.hadoopConfiguration())
    found = []
    files = system.listFiles(path, True)
    while files.hasNext():
        status = files.next()
        name = status.getPath().getName()
        if not name.startswith((".", "_")):
            found.append((status.getPath().toString(), int(status.getLen())))
    return found


@dataclass(frozen=True)
class _FileReader:
    base: str
    limits: ReadLimits
    encoding: str | None

    def relative(self, path: str) -> str:
        inner = urlparse(path).path if "://" in path or path.startswith("file:") else path
        return posixpath.relpath(inner, self.base) if inner.startswith(self.base + "/") else inner

    def documents(self, rows: Iterable[tuple[Any, int]]) -> Iterator[tuple[str, Any]]:
        for row, number in rows:
            rel = self.relative(row["path"])
            suffix = posixpath.splitext(rel)[1].lower()
            if suffix == GZIP_SUFFIX and gzip_inner_suffix(rel) is not None:  # as the local reader
                yield from self.gunzipped(bytes(row["content"]), rel, number)
                continue
            if suffix in TABLE_KINDS or suffix in UNSUPPORTED_SUFFIXES:
                detail = ("the spark engine reads one table at a time; pass this table as SOURCE"
                          if suffix in TABLE_KINDS else f"file type {suffix}")
                yield "entry", IngestEntry(rel, "skipped", "unsupported", detail)
                continue
            if row["length"] == 0:
                yield "entry", IngestEntry(rel, "skipped", "empty", "0 bytes")
                continue
            head = bytes(row["content"][:1024]).split(b"\n", 1)[0]
            if suffix in MBOX_SUFFIXES or (suffix == "" and _MBOX_FROM_LINE.match(head)):  # as the local reader
                yield from self.messages(bytes(row["content"]), rel, number)
                continue
            if row["length"] > self.limits.max_file_bytes:
                yield "entry", IngestEntry(rel, "skipped", "too large", f"{row['length']:,} bytes; raise --max-file-mb")
                continue
            content = bytes(row["content"])
            not_text = not_text_of(suffix, content, self.encoding)  # a file of no known type: text? (as locally)
            if not_text:
                yield "entry", IngestEntry(rel, "skipped", "binary", f"binary content ({not_text}); no known file type")
                continue
            yield from self.found(*document_from_bytes(content, rel, suffix, self.limits, self.encoding), number)

    def gunzipped(self, content: bytes, rel: str, number: int) -> Iterator[tuple[str, Any]]:
        """A gzip file holding one text, HTML or mail file, read as the local reader reads it."""
        if not content:  # as the local reader: an empty file is "empty" before it is anything else
            yield "entry", IngestEntry(rel, "skipped", "empty", "0 bytes")
            return
        unpacked, reason, detail = read_gzip(io.BytesIO(content), self.limits.max_file_bytes)
        if unpacked is None:
            yield "entry", IngestEntry(rel, "skipped", reason, detail)
            return
        not_text = not_text_of(gzip_inner_suffix(rel) or "", unpacked, self.encoding)
        if not_text:
            yield "entry", IngestEntry(rel, "skipped", "binary", f"binary content ({not_text}); no known file type")
            return
        yield from self.found(*gunzipped_document(unpacked, rel, self.limits, self.encoding), number)

    @staticmethod
    def found(doc: Document | None, entries: list[IngestEntry], number: int) -> Iterator[tuple[str, Any]]:
        for entry in entries:
            if entry.status != "document" or entry.detail:  # plain "read" lines would repeat assignments.csv
                yield "entry", entry
        if doc is not None:
            yield "doc", (number * PER_FILE, doc)

    def messages(self, content: bytes, rel: str, number: int) -> Iterator[tuple[str, Any]]:
        """An mbox file's messages as documents (``file#msgN``), split by the local reader's own code: it reads
        a path (the standard library's mailbox), so the bytes go to a temporary file on the executor first.
        No --max-file-mb limit, as locally: a mailbox is read one message at a time."""
        handle, name = tempfile.mkstemp(prefix="pilewise-mbox-")
        entries: list[IngestEntry] = []
        try:
            with os.fdopen(handle, "wb") as scratch:
                scratch.write(content)
            planned = _Planned(Path(name), rel, len(content), kind="mbox")
            for message, doc in enumerate(_read_mbox(planned, self.limits, self.encoding, entries, _Progress())):
                yield "doc", (number * PER_FILE + message, doc)
        finally:
            os.unlink(name)
        for entry in entries:  # the mailbox's summary line comes first, as locally
            yield "entry", entry
