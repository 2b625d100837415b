"""Reading stage: turn a folder or a table file into documents and an ingest report.

Every file found is either a document or an entry of the report with its reason; nothing is
dropped silently.
"""

from __future__ import annotations

import email
import email.policy
import os
import re
import stat
from collections.abc import Callable, Iterable, Iterator
from dataclasses import dataclass
from email.message import EmailMessage
from pathlib import Path

from bs4 import BeautifulSoup

from pilewise.errors import PilewiseError
from pilewise.model import Document, Ingested, IngestEntry
from pilewise.plaintext import decode_bytes, first_line_title
from pilewise.tables import TABLE_SUFFIXES, ColumnChoice, TableReport, iter_table

TEXT_SUFFIXES = {".txt", ".md", ".markdown", ".text"}
HTML_SUFFIXES = {".html", ".htm", ".xhtml"}
MAIL_SUFFIXES = {".eml"}
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
        paths = [(planned.path, planned.rel) for planned in self._planned]
        for planned, _ in zip(self._planned, track(paths) if track else paths, strict=True):
            start = self.bytes_done
            if planned.skipped is not None:
                self.entries.append(planned.skipped)
            elif planned.path.suffix.lower() in TABLE_SUFFIXES:
                report = TableReport()
                for doc in iter_table(planned.path, planned.rel, self._columns, self._limits.max_doc_chars, report,
                                      single=self._source.is_file()):
                    found += 1
                    self.bytes_done = start + min(report.bytes_read, planned.size)
                    yield doc
                self.entries.extend(report.entries)
                self.notes.extend(report.notes)
            else:
                read, file_entries = _read_file(planned.path, planned.rel, self._limits)
                self.entries.extend(file_entries)
                self.bytes_done = start + planned.size
                if read is not None:
                    found += 1
                    yield read
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
        paths, entries = _discover(source)
    planned = [_plan(path, rel, limits, single=source.is_file()) for path, rel in paths]
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


def _discover(folder: Path) -> tuple[list[tuple[Path, str]], list[IngestEntry]]:
    """List files under `folder`, sorted; symbolic links to folders are reported, not followed."""
    found: list[tuple[Path, str]] = []
    entries: list[IngestEntry] = []

    def onerror(err: OSError) -> None:
        where = _relative(Path(err.filename or folder), folder)
        entries.append(IngestEntry(where, "skipped", "unreadable", f"folder cannot be listed: {err.strerror}"))

    for root, dirs, files in os.walk(folder, onerror=onerror, followlinks=False):
        root_path = Path(root)
        dirs.sort()
        for d in list(dirs):
            if (root_path / d).is_symlink():
                rel = _relative(root_path / d, folder)
                entries.append(IngestEntry(rel, "skipped", "link to a folder", "not followed"))
        for name in sorted(files):
            path = root_path / name
            found.append((path, _relative(path, folder)))
    return found, entries


def _relative(path: Path, folder: Path) -> str:
    try:
        return path.relative_to(folder).as_posix()
    except ValueError:
        return path.as_posix()


@dataclass(frozen=True)
class _Planned:
    """A file found: the bytes it will be read for, or why it is skipped without reading it."""

    path: Path
    rel: str
    size: int
    skipped: IngestEntry | None = None


def _plan(path: Path, rel: str, limits: ReadLimits, *, single: bool) -> _Planned:
    suffix = path.suffix.lower()
    try:
        info = path.stat()
    except OSError as err:
        return _Planned(path, rel, 0, IngestEntry(rel, "skipped", "unreadable", err.strerror or str(err)))
    if not stat.S_ISREG(info.st_mode):  # pipes, sockets, devices: reading could block or never end
        return _Planned(path, rel, 0, IngestEntry(rel, "skipped", "not a regular file", "a pipe, socket or device"))
    size = info.st_size
    if suffix not in TEXT_SUFFIXES | HTML_SUFFIXES | MAIL_SUFFIXES | TABLE_SUFFIXES:
        if single:
            raise PilewiseError(
                f"{rel!r} is not a supported file type; pass a folder, or a .csv/.tsv/.json/.jsonl/.parquet table"
            )
        return _Planned(path, rel, 0, IngestEntry(rel, "skipped", "unsupported", f"file type {suffix or '(none)'}"))
    if size == 0:
        return _Planned(path, rel, 0, IngestEntry(rel, "skipped", "empty", "0 bytes"))
    if size > limits.max_file_bytes:
        limit_mb = limits.max_file_bytes / 1024 / 1024
        detail = f"{size / 1024 / 1024:.1f} MB; raise --max-file-mb (now {limit_mb:g}) to read it"
        return _Planned(path, rel, 0, IngestEntry(rel, "skipped", "too large", detail))
    return _Planned(path, rel, size)


def _read_file(path: Path, rel: str, limits: ReadLimits) -> tuple[Document | None, list[IngestEntry]]:
    """One text, HTML or mail file: its document, if any, and its report entries."""
    suffix = path.suffix.lower()
    try:
        raw = path.read_bytes()
    except OSError as err:
        return None, [IngestEntry(rel, "skipped", "unreadable", err.strerror or str(err))]
    if suffix in MAIL_SUFFIXES:
        title, text, note = _read_mail(raw)
    else:
        if _looks_binary(raw):
            return None, [IngestEntry(rel, "skipped", "binary", "holds NUL bytes or mostly control bytes")]
        decoded, note = decode_bytes(raw)
        if suffix in HTML_SUFFIXES:
            title, text = html_to_text(decoded)
        else:
            title, text = "", decoded
    text = text.strip()
    if not text:
        return None, [IngestEntry(rel, "skipped", "empty", "no visible text")]
    entries = []
    text, cut = _truncate(text, limits.max_doc_chars)
    if cut:
        entries.append(IngestEntry(rel, "note", "truncated", cut))
    doc = Document(doc_id=rel, source=rel, title=title.strip() or first_line_title(text), text=text)
    entries.insert(0, IngestEntry(rel, "document", "read", note))
    return doc, entries


def _truncate(text: str, max_chars: int) -> tuple[str, str]:
    if len(text) <= max_chars:
        return text, ""
    return text[:max_chars], f"kept the first {max_chars:,} of {len(text):,} characters; raise --max-doc-chars"


def _looks_binary(raw: bytes) -> bool:
    head = raw[:8192]
    if head.startswith((b"\xff\xfe", b"\xfe\xff", b"\xef\xbb\xbf")):
        return False
    if b"\x00" in head:
        return True
    control = sum(1 for b in head if b < 9 or 13 < b < 32)
    return control > len(head) * 0.1



def html_to_text(markup: str) -> tuple[str, str]:
    """Visible text of an HTML page and its title (<title>, else the first heading)."""
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


def _read_mail(raw: bytes) -> tuple[str, str, str]:
    msg = email.message_from_bytes(raw, policy=email.policy.default)
    assert isinstance(msg, EmailMessage)
    subject = str(msg.get("subject", "") or "")
    body_part = msg.get_body(preferencelist=("plain", "html"))
    note = ""
    if body_part is None:
        return subject, "", "no text part"
    try:
        content = body_part.get_content()
    except (LookupError, UnicodeDecodeError, AssertionError):
        payload = body_part.get_payload(decode=True)
        content, note = decode_bytes(payload if isinstance(payload, bytes) else b"")
    if not isinstance(content, str):
        content, note = decode_bytes(bytes(content))
    if body_part.get_content_type() == "text/html":
        _, content = html_to_text(content)
    return subject, strip_mail_quotes(content), note


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
