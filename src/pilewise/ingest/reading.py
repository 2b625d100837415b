"""Reading stage: turn a folder or a table file into documents and an ingest report.

Every file found is either a document or an entry of the report with its reason; nothing is
dropped silently.
"""

from __future__ import annotations

import email
import email.policy
import email.utils
import gzip
import mailbox
import os
import re
import stat
import zlib
from collections.abc import Callable, Iterable, Iterator
from dataclasses import dataclass, replace
from email.message import EmailMessage
from pathlib import Path
from typing import BinaryIO

from pilewise.errors import PilewiseError
from pilewise.ingest.plaintext import (
    VOTE_SAMPLE_BYTES,
    EncodingVote,
    clean_text,
    decode_bytes,
    decodes_cleanly,
    first_line_title,
    vote_encoding,
)
from pilewise.ingest.tables import TABLE_SUFFIXES, ColumnChoice, TableReport, iter_table
from pilewise.model import Document, Ingested, IngestEntry

TEXT_SUFFIXES = {".txt", ".md", ".markdown", ".text"}
HTML_SUFFIXES = {".html", ".htm", ".xhtml"}
MAIL_SUFFIXES = {".eml"}
MBOX_SUFFIXES = {".mbox", ".mbx"}
# Files of other types are read as plain text when their first SNIFF_BYTES read as text (README, LICENSE,
# Makefile, GPL-3, notes.log); these types are listed as unsupported without that test: binary formats, and
# formats whose text needs a converter (PDF, office files, images drawn as SVG or PostScript).
UNSUPPORTED_SUFFIXES = {
    ".png", ".jpg", ".jpeg", ".gif", ".bmp", ".tif", ".tiff", ".webp", ".ico", ".heic", ".psd", ".svg", ".svgz",
    ".eps", ".ps", ".mp3", ".wav", ".flac", ".ogg", ".m4a", ".aac", ".mp4", ".m4v", ".mov", ".avi", ".mkv",
    ".webm", ".wmv", ".zip", ".gz", ".tgz", ".bz2", ".xz", ".zst", ".7z", ".rar", ".tar", ".jar", ".whl", ".deb",
    ".rpm", ".dmg", ".iso", ".pdf", ".doc", ".docx", ".xls", ".xlsx", ".ppt", ".pptx", ".odt", ".ods", ".odp",
    ".rtf", ".epub", ".exe", ".dll", ".so", ".dylib", ".o", ".a", ".class", ".pyc", ".wasm", ".ttf", ".otf",
    ".woff", ".woff2", ".sqlite", ".sqlite3", ".db", ".mdb", ".npy", ".npz", ".pkl", ".pickle", ".h5", ".hdf5",
    ".feather", ".avro", ".orc",
}
# what the report line of a skipped archive or document tells the user to do (the fix, not only the type)
UNPACK_SUFFIXES = {".zip", ".gz", ".tgz", ".bz2", ".xz", ".zst", ".7z", ".rar", ".tar"}
CONVERT_SUFFIXES = {".pdf", ".doc", ".docx", ".xls", ".xlsx", ".ppt", ".pptx", ".odt", ".ods", ".odp", ".rtf",
                    ".epub"}
SNIFF_BYTES = 8192  # the first bytes of a file of no known type that decide whether it is read as text
# A gzip file holding one text, HTML or mail file (notes.txt.gz, a manual page such as ls.1.gz) is read in place,
# as the file it holds; a gzipped table, mailbox or tar archive is still to be unpacked (they are read by path).
GZIP_SUFFIX = ".gz"
_BINARY = "binary content"
# Read row by row or message by message, so --max-file-mb does not apply to them; .json is parsed whole.
STREAMED_SUFFIXES = {".csv", ".tsv", ".jsonl", ".ndjson", ".parquet"} | MBOX_SUFFIXES
# The "From " line that starts a message in an mbox file: a sender (or "-", as Thunderbird writes), then a
# date that starts with the day of the week and holds a time of day ("From MAILER-DAEMON Wed Dec  2 20:08:09
# 2026"), so that a note starting "From here ..." is not taken for a mailbox.
_MBOX_FROM_LINE = re.compile(rb"From \S+ +(?:Mon|Tue|Wed|Thu|Fri|Sat|Sun)\b.*\d{1,2}:\d{2}")
_MBOXO_ESCAPED = re.compile(rb"^>(>*From )", re.MULTILINE)
_INVISIBLE_TAGS = ("script", "style", "noscript", "template", "nav", "head", "svg", "iframe", "object")


@dataclass(frozen=True)
class ReadLimits:
    """Size limits applied while reading."""

    max_file_bytes: int = 100 * 1024 * 1024
    max_doc_chars: int = 1_000_000
    follow_links: bool = False  # --follow-links: read links whose target lies outside SOURCE


class SourceStream:
    """Documents of SOURCE in reading order, read lazily; the report fills in as iteration goes.

    Made by `stream_source`. Iterate it once; ``entries`` and ``notes`` are complete when the
    iteration has finished (a table's entries are added when its last row has been read).

    Attributes
    ----------
    entries : list of IngestEntry
        What became of every file, and of every table row without a document.
    notes : list of str
        Column guesses and other remarks to show the user.
    files_found : int
        Files found in SOURCE, including links to folders that were not followed.
    total_bytes : int
        Sum of the sizes of the files that will be read; known before iterating.
    bytes_done : int
        About how many of those bytes have been read so far, for a progress bar.
    """

    def __init__(
        self,
        planned: list[_Planned],
        entries: list[IngestEntry],
        files_found: int,
        total_bytes: int,
        source: Path,
        columns: ColumnChoice,
        limits: ReadLimits,
        track: Callable[[list[tuple[Path, str]]], Iterable[tuple[Path, str]]] | None,
    ) -> None:
        self.entries = entries
        self.notes: list[str] = []
        self.files_found = files_found
        self.total_bytes = total_bytes
        self.bytes_done = 0
        self._planned = planned
        self._source = source
        self._columns = columns
        self._limits = limits
        self._track = track
        self._state = "new"

    def __iter__(self) -> Iterator[Document]:
        """The documents, read as they are asked for.

        Raises
        ------
        PilewiseError
            At the end, when no file or row held a document.
        """
        return self.read(self._track)

    def read(
        self, track: Callable[[list[tuple[Path, str]]], Iterable[tuple[Path, str]]] | None = None
    ) -> Iterator[Document]:
        """The documents, as iterating does, with `track` wrapping the list of files (e.g. a progress bar).

        For a caller that lists SOURCE first (to learn its size) and only then knows how to show progress.
        """
        if self._state != "new":
            raise RuntimeError("a SourceStream can be iterated once; call stream_source again")
        self._state = "reading"
        return self._documents(track)

    def ingested(self, documents: Iterable[Document]) -> Ingested:
        """The report of a finished iteration, with `documents` (those it gave, or what became of them)."""
        if self._state != "done":
            raise RuntimeError("the ingest report is complete only once the SourceStream has been iterated")
        return Ingested(tuple(documents), tuple(self.entries), tuple(self.notes), self.files_found)

    def _documents(
        self, track: Callable[[list[tuple[Path, str]]], Iterable[tuple[Path, str]]] | None
    ) -> Iterator[Document]:
        found = 0
        ids = _UniqueIds()
        paths = [(planned.path, planned.rel) for planned in self._planned]
        vote = vote_encoding(self._vote_samples()) if self._columns.encoding is None else EncodingVote(None, ())
        if vote.encoding is not None:
            self.notes.append(vote.note())
        for planned, _ in zip(self._planned, track(paths) if track else paths, strict=True):
            start = self.bytes_done
            ids.start_file(planned.rel)
            if planned.skipped is not None:
                self.entries.append(planned.skipped)
            elif planned.kind == "table":
                report = TableReport()
                for doc in iter_table(planned.path, planned.rel, self._columns, self._limits.max_doc_chars, report,
                                      single=self._source.is_file()):
                    found += 1
                    self.bytes_done = start + min(report.bytes_read, planned.size)
                    yield ids.unique(doc)
                self.entries.extend(report.entries)
                self.notes.extend(report.notes)
            elif planned.kind == "mbox":
                progress = _Progress()
                for doc in _read_mbox(planned, self._limits, self._columns.encoding, self.entries, progress):
                    found += 1
                    self.bytes_done = start + min(progress.bytes_read, planned.size)
                    yield ids.unique(doc)
            else:
                read, file_entries = _read_file(planned.path, planned.rel, self._limits, self._columns.encoding,
                                                voted=vote.of_file.get(planned.rel))
                self.entries.extend(file_entries)
                self.bytes_done = start + planned.size
                if read is not None:
                    found += 1
                    yield ids.unique(read)
            self.entries.extend(ids.end_file())
            self.bytes_done = start + planned.size
        self._state = "done"
        if not found:
            reasons = _reason_counts(self.entries)
            where = repr(str(self._source))
            if self._source.is_dir():
                where = f"{len(paths)} file(s) in {where}"
            raise PilewiseError(
                f"no documents found in {where} ({reasons or 'nothing readable'}); point SOURCE at "
                "a folder of .txt/.md/.html/.eml files or a .csv/.tsv/.json/.jsonl/.parquet table"
            )


    def _vote_samples(self) -> Iterator[tuple[str, bytes]]:
        """The first bytes of every text and HTML file, for the folder's encoding vote (mail declares its own)."""
        for planned in self._planned:
            if planned.skipped is not None or planned.kind in ("table", "mbox") \
                    or planned.path.suffix.lower() in MAIL_SUFFIXES:
                continue
            try:
                with planned.path.open("rb") as handle:
                    raw = handle.read(VOTE_SAMPLE_BYTES)
            except OSError:
                continue  # reading the file itself reports it
            if not _looks_binary(raw):
                yield planned.rel, raw


class _UniqueIds:
    """Makes every doc_id of a run unique, in reading order: a later document whose id was already given is renamed.

    The new id is the file's path and the old id (``exports/2024-02.csv:17``), else the document's
    source (``exports/2024-02.csv#row17``), else the source with a number (``notes/a.txt~2``). Only
    the ids are kept (a set of strings, about 150 bytes per document), so this works for a streamed
    collection too. One note per file counts its renamed ids.
    """

    def __init__(self) -> None:
        self._seen: set[str] = set()
        self._rel = ""
        self._renamed = 0
        self._example = ""

    def start_file(self, rel: str) -> None:
        self._rel, self._renamed, self._example = rel, 0, ""

    def unique(self, doc: Document) -> Document:
        if doc.doc_id not in self._seen:
            self._seen.add(doc.doc_id)
            return doc
        # a file's own path as its id (a text file) gains nothing from the prefix
        candidates = [f"{self._rel}:{doc.doc_id}", doc.source] if doc.doc_id != doc.source else []
        new_id = next((c for c in candidates if c not in self._seen), "")
        number = 1
        while not new_id or new_id in self._seen:
            number += 1
            new_id = f"{doc.source}~{number}"
        self._seen.add(new_id)
        self._renamed += 1
        if not self._example:
            self._example = f"{doc.doc_id!r} became {new_id!r}"
        return replace(doc, doc_id=new_id)

    def end_file(self) -> list[IngestEntry]:
        """The note of the file just read, if any of its ids were renamed."""
        if not self._renamed:
            return []
        detail = (f"{self._renamed:,} id(s) repeat ids of earlier documents; renamed with the file name, "
                  f"e.g. {self._example}")
        return [IngestEntry(self._rel, "note", "repeated id", detail)]


def stream_source(
    source: Path,
    columns: ColumnChoice,
    limits: ReadLimits,
    *,
    track: Callable[[list[tuple[Path, str]]], Iterable[tuple[Path, str]]] | None = None,
) -> SourceStream:
    """Read SOURCE (a folder, read recursively, or one file) lazily, document by document.

    The files are listed and checked (type, size) now; their contents are read while the
    stream is iterated, a table row by row, so no more than one file (or a table's first
    rows) is held in memory. `track` may wrap the list of files, e.g. in a progress bar.

    Raises
    ------
    PilewiseError
        When SOURCE is missing or is one file of an unsupported type; iterating raises it when
        SOURCE holds no readable document at all.
    """
    if not source.exists():
        raise PilewiseError(f"source {str(source)!r} does not exist; pass a folder or a table file")
    entries: list[IngestEntry] = []
    if source.is_file():
        paths = [(source, source.name)]
    else:
        paths, entries = _discover(source, follow_links=limits.follow_links)
    shown_paths = []
    for path, rel in paths:
        shown, changed = _shown_name(rel)
        if changed:
            entries.append(IngestEntry(shown, "note", "file name", _NAME_NOTE))
        shown_paths.append((path, shown))
    planned = [_plan(path, rel, limits, single=source.is_file(), encoding=columns.encoding)
               for path, rel in shown_paths]
    files_found = len(paths) + sum(1 for e in entries if e.status == "skipped" and e.reason.startswith("link"))
    total_bytes = sum(p.size for p in planned)
    return SourceStream(planned, entries, files_found, total_bytes, source, columns, limits, track)


def read_source(
    source: Path,
    columns: ColumnChoice,
    limits: ReadLimits,
    track: Callable[[list[tuple[Path, str]]], Iterable[tuple[Path, str]]] | None = None,
) -> Ingested:
    """Read SOURCE (a folder, read recursively, or one file) into documents, all at once.

    Raises
    ------
    PilewiseError
        When SOURCE is missing or holds no readable document at all.
    """
    stream = stream_source(source, columns, limits, track=track)
    documents = list(stream)
    return stream.ingested(documents)


def _reason_counts(entries: list[IngestEntry]) -> str:
    counts: dict[str, int] = {}
    for entry in entries:
        if entry.status == "skipped":
            counts[entry.reason] = counts.get(entry.reason, 0) + 1
    return ", ".join(f"{n} {reason}" for reason, n in sorted(counts.items()))


VERSION_CONTROL_FOLDERS = frozenset({".git", ".hg", ".svn", ".bzr"})  # skipped, one report line each


def _discover(folder: Path, *, follow_links: bool) -> tuple[list[tuple[Path, str]], list[IngestEntry]]:
    """List files under `folder`, sorted; links to folders, and links to files outside it, are reported, not read.

    With `follow_links`, links to files outside `folder` are listed as files. A dangling link or a
    loop of links is listed too: reading it fails, and that failure is its report line.
    """
    found: list[tuple[Path, str]] = []
    entries: list[IngestEntry] = []
    inside = os.path.realpath(folder)

    def onerror(err: OSError) -> None:
        where = _shown_name(_relative(Path(err.filename or folder), folder))[0]
        entries.append(IngestEntry(where, "skipped", "unreadable", f"folder cannot be listed: {err.strerror}"))

    for root, dirs, files in os.walk(folder, onerror=onerror, followlinks=False):
        root_path = Path(root)
        dirs.sort()
        for d in list(dirs):
            if (root_path / d).is_symlink():
                rel = _shown_name(_relative(root_path / d, folder))[0]
                entries.append(IngestEntry(rel, "skipped", "link to a folder", "not followed"))
            elif d in VERSION_CONTROL_FOLDERS:
                dirs.remove(d)  # a repository's own history and settings, not the collection's documents
                rel = _shown_name(_relative(root_path / d, folder))[0]
                n_files = sum(len(names) for _, _, names in os.walk(root_path / d))
                files_word = "file" if n_files == 1 else "files"
                entries.append(IngestEntry(rel + "/", "skipped", "version control",
                                           f"{n_files:,} {files_word} of version-control data not read"))
        for name in sorted(files):
            path = root_path / name
            if not follow_links and path.is_symlink() and _leaves(path, inside):
                rel = _shown_name(_relative(path, folder))[0]
                entries.append(IngestEntry(rel, "skipped", "link outside the source",
                                           "its target lies outside SOURCE; pass --follow-links to read it"))
                continue
            found.append((path, _relative(path, folder)))
    return found, entries


def _leaves(link: Path, inside: str) -> bool:
    """Whether a link's final target exists and lies outside the folder whose real path is `inside`."""
    target = os.path.realpath(link)  # never raises on loops (strict=False); then the target does not exist
    if not os.path.exists(target):
        return False
    return os.path.commonpath([inside, target]) != inside


def _relative(path: Path, folder: Path) -> str:
    try:
        return path.relative_to(folder).as_posix()
    except ValueError:
        return path.as_posix()


_NAME_NOTE = "the file name is not valid UTF-8; its invalid bytes are shown as \\xNN"


def _shown_name(rel: str) -> tuple[str, bool]:
    """A relative path as valid text, and whether it had to change.

    A name that is not valid UTF-8 comes from os.walk with its bad bytes as lone surrogates, which
    cannot be written to a UTF-8 file; those bytes are shown as ``\\xNN`` instead. The real Path is
    kept for reading.
    """
    try:
        rel.encode("utf-8")
        return rel, False
    except UnicodeEncodeError:
        pass
    try:
        raw = os.fsencode(rel)
    except UnicodeEncodeError:  # a surrogate that no file name produced; not expected on POSIX
        raw = rel.encode("utf-8", "replace")
    return raw.decode("utf-8", "backslashreplace"), True


@dataclass(frozen=True)
class _Planned:
    """A file found: the bytes it will be read for and how ("file", "table", "mbox"), or why it is skipped."""

    path: Path
    rel: str
    size: int
    skipped: IngestEntry | None = None
    kind: str = "file"


def _plan(path: Path, rel: str, limits: ReadLimits, *, single: bool, encoding: str | None = None) -> _Planned:
    suffix = path.suffix.lower()
    try:
        info = path.stat()
    except OSError as err:
        return _Planned(path, rel, 0, IngestEntry(rel, "skipped", "unreadable", err.strerror or str(err)))
    if not stat.S_ISREG(info.st_mode):  # pipes, sockets, devices: reading could block or never end
        return _Planned(path, rel, 0, IngestEntry(rel, "skipped", "not a regular file", "a pipe, socket or device"))
    size = info.st_size
    kind = _kind(path, suffix, encoding)
    if kind.startswith(_BINARY):
        if single:
            raise PilewiseError(f"{rel!r} holds {kind} and no known file type; pass a folder, a text file, or a "
                                ".csv/.tsv/.json/.jsonl/.parquet table")
        return _Planned(path, rel, 0, IngestEntry(rel, "skipped", "binary", f"{kind}; no known file type"))
    if kind == "":
        if single:
            raise PilewiseError(
                f"{rel!r} is not a supported file type{_what_to_do(suffix, '; ')}; pass a folder, or a "
                ".csv/.tsv/.json/.jsonl/.parquet table"
            )
        return _Planned(path, rel, 0, IngestEntry(rel, "skipped", "unsupported",
                                                  f"file type {suffix or '(none)'}{_what_to_do(suffix, ': ')}"))
    if size == 0:
        return _Planned(path, rel, 0, IngestEntry(rel, "skipped", "empty", "0 bytes"))
    # tables and mailboxes are read a row or a message at a time, so their size is no risk to memory
    if size > limits.max_file_bytes and suffix not in STREAMED_SUFFIXES and kind != "mbox":
        limit_mb = limits.max_file_bytes / 1024 / 1024
        detail = f"{size / 1024 / 1024:.1f} MB; raise --max-file-mb (now {limit_mb:g}) to read it"
        return _Planned(path, rel, 0, IngestEntry(rel, "skipped", "too large", detail))
    return _Planned(path, rel, size, kind=kind)


def _what_to_do(suffix: str, lead: str) -> str:
    """What makes a skipped archive or document readable, after `lead`; "" for other types."""
    if suffix in UNPACK_SUFFIXES:
        return f"{lead}an archive or compressed file; unpack it and point SOURCE at what it holds"
    if suffix in CONVERT_SUFFIXES:
        return f"{lead}its text needs a converter; save it as plain text or as a .csv table first"
    return ""


def gzip_inner_suffix(name: str) -> str | None:
    """The suffix of the file a gzip file of this name holds (``notes.txt.gz`` -> ``.txt``, ``ls.1.gz`` -> ``.1``,
    ``README.gz`` -> ``""``), or None when it is not read in place: a table, a mailbox or a tar archive."""
    inner = os.path.splitext(os.path.splitext(name)[0])[1].lower()
    if inner in TABLE_SUFFIXES or inner in MBOX_SUFFIXES or inner == ".tar":
        return None
    return inner


def read_gzip(handle: BinaryIO, max_bytes: int) -> tuple[bytes | None, str, str]:
    """The bytes a gzip stream holds, at most `max_bytes` of them: (bytes, "", ""), or (None, reason, detail) for
    the ingest report when the stream is damaged or holds more (a small file can hold gigabytes)."""
    try:
        raw = gzip.GzipFile(fileobj=handle, mode="rb").read(max_bytes + 1)
    except (OSError, EOFError, zlib.error) as err:  # BadGzipFile is an OSError; a cut-off stream an EOFError
        return None, "unreadable", f"damaged gzip data ({err or type(err).__name__}); unpack it to see what is left"
    if len(raw) > max_bytes:
        limit_mb = max_bytes / 1024 / 1024
        return None, "too large", f"more than {limit_mb:g} MB once decompressed; raise --max-file-mb to read it"
    return raw, "", ""


def _kind(path: Path, suffix: str, encoding: str | None = None) -> str:
    """How a file is read: "table", "mbox" or "file"; "" for a type pilewise does not read; for a file of
    no known type whose first bytes are not text, "binary content (...)" saying why."""
    if suffix == GZIP_SUFFIX:
        inner = gzip_inner_suffix(path.name)
        if inner is None:
            return ""
        if inner in TEXT_SUFFIXES | HTML_SUFFIXES | MAIL_SUFFIXES:
            return "file"
        try:
            with gzip.open(path, "rb") as stream:
                head = stream.read(SNIFF_BYTES)
        except (OSError, EOFError, zlib.error):
            return "file"  # reading the file itself reports why it cannot be read
        not_text = head_not_text(head, encoding)
        return f"{_BINARY} ({not_text})" if not_text else "file"
    if suffix in TABLE_SUFFIXES:
        return "table"
    if suffix in MBOX_SUFFIXES:
        return "mbox"
    if suffix in TEXT_SUFFIXES | HTML_SUFFIXES | MAIL_SUFFIXES:
        return "file"
    if suffix == "" and _starts_like_mbox(path):  # mail programs' folders, e.g. Thunderbird's "Inbox"
        return "mbox"
    if suffix in UNSUPPORTED_SUFFIXES:
        return ""
    not_text = _not_text(path, encoding)
    return f"{_BINARY} ({not_text})" if not_text else "file"


def _not_text(path: Path, encoding: str | None) -> str:
    """Why the first SNIFF_BYTES of a file of no known type are not text; "" when they are (or cannot be
    read: reading the file then reports why)."""
    try:
        with path.open("rb") as handle:
            head = handle.read(SNIFF_BYTES)
    except OSError:
        return ""
    return head_not_text(head, encoding)


def not_text_of(suffix: str, head: bytes, encoding: str | None) -> str:
    """Why a file of this suffix whose first bytes are `head` is not read: "" for the text, HTML and mail types,
    read as they are, else `head_not_text` (a file of no known type is read when it starts as text). The Spark
    reader's rule for the bytes it holds; the local reader's `_kind` decides the same from the file."""
    return "" if suffix in TEXT_SUFFIXES | HTML_SUFFIXES | MAIL_SUFFIXES else head_not_text(head, encoding)


def head_not_text(head: bytes, encoding: str | None) -> str:
    """Why a file's first SNIFF_BYTES are not text, or "" when they are (shared with the Spark reader)."""
    head = head[:SNIFF_BYTES]
    if _looks_binary(head):
        return f"NUL or control bytes in its first {SNIFF_BYTES // 1024} KB"
    if not decodes_cleanly(head, encoding):
        how = f"as --encoding {encoding}" if encoding else "as UTF-8 or a detected encoding"
        return f"its first {SNIFF_BYTES // 1024} KB do not decode {how}"
    return ""


def _starts_like_mbox(path: Path) -> bool:
    try:
        with path.open("rb") as handle:
            first = handle.readline(1024)
    except OSError:
        return False
    return _MBOX_FROM_LINE.match(first) is not None


def _read_file(
    path: Path, rel: str, limits: ReadLimits, encoding: str | None = None, voted: str | None = None
) -> tuple[Document | None, list[IngestEntry]]:
    """One text, HTML or mail file: its document, if any, and its report entries; `encoding` is --encoding,
    `voted` the encoding the folder's vote chose for this file (`plaintext.vote_encoding`)."""
    suffix = path.suffix.lower()
    try:
        if suffix != GZIP_SUFFIX:
            raw = path.read_bytes()
        else:
            with path.open("rb") as handle:
                unpacked, reason, detail = read_gzip(handle, limits.max_file_bytes)
            if unpacked is None:
                return None, [IngestEntry(rel, "skipped", reason, detail)]
            return gunzipped_document(unpacked, rel, limits, encoding)
    except OSError as err:
        return None, [IngestEntry(rel, "skipped", "unreadable", err.strerror or str(err))]
    return document_from_bytes(raw, rel, suffix, limits, encoding, voted)


def gunzipped_document(
    unpacked: bytes, rel: str, limits: ReadLimits, encoding: str | None
) -> tuple[Document | None, list[IngestEntry]]:
    """`document_from_bytes` of what a gzip file held, read as its inner suffix says; its report line says so."""
    doc, entries = document_from_bytes(unpacked, rel, gzip_inner_suffix(rel) or "", limits, encoding)
    return doc, [replace(e, detail="; ".join(filter(None, ["decompressed from gzip", e.detail])))
                 if e.status == "document" else e for e in entries]


def document_from_bytes(
    raw: bytes, rel: str, suffix: str, limits: ReadLimits, encoding: str | None = None, voted: str | None = None
) -> tuple[Document | None, list[IngestEntry]]:
    """The document of one text, HTML or mail file's bytes (`suffix` lower-case, with its dot), if any, and
    its report entries; shared by the local reader and the Spark engine's reader of file folders."""
    if suffix in MAIL_SUFFIXES:
        title, text, note, date = _read_mail(raw, encoding)
    else:
        date = ""
        if _looks_binary(raw):
            return None, [IngestEntry(rel, "skipped", "binary", "holds NUL bytes or mostly control bytes")]
        decoded, note = decode_bytes(raw, encoding=encoding, voted=voted)
        if suffix in HTML_SUFFIXES:
            title, text = html_to_text(decoded)
        else:
            title, text = "", decoded
        if suffix not in TEXT_SUFFIXES | HTML_SUFFIXES:  # sniffed as text (`_kind`): say how it was read
            note = "; ".join(filter(None, [f"file type {suffix or '(none)'} read as plain text", note]))
    text = clean_text(text).strip()
    if not text:
        return None, [IngestEntry(rel, "skipped", "empty", "no visible text")]
    entries = []
    text, cut = _truncate(text, limits.max_doc_chars)
    if cut:
        entries.append(IngestEntry(rel, "note", "truncated", cut))
    doc = Document(doc_id=rel, source=rel, title=title.strip() or first_line_title(text), text=text, date=date)
    entries.insert(0, IngestEntry(rel, "document", "read", note))
    return doc, entries


@dataclass
class _Progress:
    """About how many bytes of a file reading has got through."""

    bytes_read: int = 0


def _read_mbox(
    planned: _Planned, limits: ReadLimits, encoding: str | None, entries: list[IngestEntry], progress: _Progress
) -> Iterator[Document]:
    """Documents of an mbox file, message by message (``file#msgN``); `entries` gets its report lines.

    The standard library's mailbox.mbox finds the "From " lines in one pass and keeps only their
    offsets, so one message at a time is held in memory. Body lines that the writer escaped as
    ">From " (the mboxo/mboxrd convention) lose one ">" again; otherwise they would read as quotes.
    """
    rel = planned.rel
    summary_at = len(entries)
    made = total = 0
    try:
        box = mailbox.mbox(planned.path, create=False)
    except OSError as err:
        entries.append(IngestEntry(rel, "skipped", "unreadable", err.strerror or str(err)))
        return
    try:
        for key in box.iterkeys():
            raw = _MBOXO_ESCAPED.sub(rb"\1", box.get_bytes(key))
            total += 1
            progress.bytes_read += len(raw)
            doc = _mbox_message(raw, f"{rel}#msg{total}", total, limits, encoding, entries)
            if doc is not None:
                made += 1
                yield doc
    except OSError as err:
        entries.append(IngestEntry(rel, "skipped", "unreadable",
                                   f"reading stopped after message {total:,}: {err.strerror or err}"))
    finally:
        box.close()
    if total == 0:
        entries.insert(summary_at, IngestEntry(rel, "skipped", "empty", "no messages: no line starts with 'From '"))
    else:
        entries.insert(summary_at, IngestEntry(rel, "document", "mailbox",
                                               f"{made:,} of {total:,} messages became documents"))


def _mbox_message(
    raw: bytes, where: str, number: int, limits: ReadLimits, encoding: str | None, entries: list[IngestEntry]
) -> Document | None:
    """One message of an mbox file as a document, or None with a report line saying why not."""
    title, text, note, date = _read_mail(raw, encoding)
    text = clean_text(text).strip()
    if not text:
        entries.append(IngestEntry(where, "skipped", "empty", f"message {number:,} has no text ({note or 'blank'})"))
        return None
    if note:
        entries.append(IngestEntry(where, "note", "encoding", note))
    text, cut = _truncate(text, limits.max_doc_chars)
    if cut:
        entries.append(IngestEntry(where, "note", "truncated", cut))
    return Document(doc_id=where, source=where, title=title.strip() or first_line_title(text), text=text, date=date)


def _truncate(text: str, max_chars: int) -> tuple[str, str]:
    if len(text) <= max_chars:
        return text, ""
    return text[:max_chars], f"kept the first {max_chars:,} of {len(text):,} characters; raise --max-doc-chars"


_OVERSTRIKE_BYTES = re.compile(rb"[^\x00-\x1f]\x08(?=[^\x00-\x1f])")


def _looks_binary(raw: bytes) -> bool:
    head = raw[:8192]
    if head.startswith((b"\xff\xfe", b"\xfe\xff", b"\xef\xbb\xbf")):
        return False
    if b"\x00" in head:
        return True
    # backspaces of terminal overstrike (bold and underline in saved manual pages) are text, cleaned later
    head = _OVERSTRIKE_BYTES.sub(b"", head)
    control = sum(1 for b in head if b < 9 or 13 < b < 32)
    return control > len(head) * 0.1



def html_to_text(markup: str) -> tuple[str, str]:
    """Visible text of an HTML page and its title (<title>, else the first heading)."""
    from bs4 import BeautifulSoup  # here: bs4, soupsieve and lxml take about 0.1 s to import, for HTML only

    soup = BeautifulSoup(markup, "lxml")
    title_tag = soup.find("title")
    title = title_tag.get_text(" ", strip=True) if title_tag else ""
    for tag in soup.find_all(_INVISIBLE_TAGS):
        tag.decompose()
    if not title:
        heading = soup.find(re.compile(r"^h[1-6]$"))
        title = heading.get_text(" ", strip=True) if heading else ""
    text = soup.get_text("\n")
    lines = [re.sub(r"[ \t\r\f\v]+", " ", line).strip() for line in text.splitlines()]
    return title, "\n".join(line for line in lines if line)


_REPLY_INTRO = re.compile(r"^\s*(on .{3,200} wrote:|-+\s*original message\s*-+)\s*$", re.IGNORECASE)


def _read_mail(raw: bytes, encoding: str | None = None) -> tuple[str, str, str, str]:
    """Subject, body text (quotes and signature dropped), a decoding note and the Date header (ISO 8601)."""
    msg = email.message_from_bytes(raw, policy=email.policy.default)
    assert isinstance(msg, EmailMessage)
    subject = str(msg.get("subject", "") or "")
    if "\ufffd" in subject:  # 8-bit bytes in the header: decode them as the body's text would be
        subject = _raw_subject(raw, encoding) or subject
    date = mail_date(msg)
    body_part = msg.get_body(preferencelist=("plain", "html"))
    note = ""
    if body_part is None:
        return subject, "", "no text part", date
    payload = body_part.get_payload(decode=True)
    undeclared = body_part.get_content_charset() is None and isinstance(payload, bytes) and not payload.isascii()
    try:
        if undeclared:  # RFC 2045 §5.2 would read it as US-ASCII and lose every other letter; detect instead
            raise LookupError("no charset declared for 8-bit text")
        content = body_part.get_content()
    except (LookupError, UnicodeDecodeError, AssertionError):
        payload = body_part.get_payload(decode=True)
        content, note = decode_bytes(payload if isinstance(payload, bytes) else b"", encoding=encoding)
    if not isinstance(content, str):
        content, note = decode_bytes(bytes(content), encoding=encoding)
    if body_part.get_content_type() == "text/html":
        _, content = html_to_text(content)
    return subject, strip_mail_quotes(content), note, date


_SUBJECT_LINE = re.compile(rb"^subject:[ \t]*(.*(?:\r?\n[ \t].*)*)", re.IGNORECASE | re.MULTILINE)


def _raw_subject(raw: bytes, encoding: str | None) -> str:
    """The Subject header's own bytes, decoded as `decode_bytes` decodes a text ("" when not found)."""
    head = raw.split(b"\r\n\r\n", 1)[0].split(b"\n\n", 1)[0]
    match = _SUBJECT_LINE.search(head)
    if match is None:
        return ""
    text, _ = decode_bytes(match.group(1), encoding=encoding)
    return " ".join(text.split())


def mail_date(msg: EmailMessage) -> str:
    """The Date header as ISO 8601 (RFC 5322 §3.3 date-time), or "" when missing or unparseable."""
    try:
        value = msg.get("date")
        if value is None:
            return ""
        return email.utils.parsedate_to_datetime(str(value)).isoformat()
    except (TypeError, ValueError, IndexError):
        return ""


def strip_mail_quotes(body: str) -> str:
    """Drop quoted reply lines, the line introducing them, and everything after a '-- ' signature line."""
    kept: list[str] = []
    for line in body.splitlines():
        if line.rstrip("\r") == "-- ":
            break
        if line.lstrip().startswith(">") or _REPLY_INTRO.match(line):
            continue
        kept.append(line)
    return "\n".join(kept).strip()
