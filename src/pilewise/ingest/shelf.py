"""A disk-backed list of documents, for collections too large to hold in memory.

The streaming path writes every document once, as one JSON Lines record, into the run's work
folder; afterwards the shelf reads any document by its position (one seek and one line) or all of
them in order. Only the byte offsets (8 bytes per document) stay in memory. A second, small file holds
each document's fields without its text (id, date, table cells), for the passes that need only those:
at 200,000 documents reading them from the full records took about 0.8 s per pass, three passes a run.
"""

from __future__ import annotations

import json
from collections.abc import Iterable, Iterator, Sequence
from pathlib import Path
from typing import Any, BinaryIO, overload

import numpy as np
import orjson

from pilewise.model import Document

DocumentFields = tuple[str, str, tuple[tuple[str, str], ...]]  # doc_id, date, metadata: a document without its text


class DocumentShelf(Sequence[Document]):
    """Documents appended in order to one file; readable by position once `close_writing` was called."""

    def __init__(self, path: Path) -> None:
        self.path = path
        self._writer = path.open("wb")
        self.fields_path = path.with_name(f"{path.stem}-fields{path.suffix}")
        self._fields_writer = self.fields_path.open("wb")
        self._offsets: list[int] = []
        self._end = 0
        self._starts: np.ndarray | None = None
        self._reader: BinaryIO | None = None
        self.metadata_names: set[str] = set()  # names of the table columns carried by any document

    def extend(self, documents: Iterable[Document]) -> None:
        documents = list(documents)
        self.metadata_names.update(name for doc in documents for name, _ in doc.metadata)
        lines = [shelf_record(doc) for doc in documents]
        self.extend_records(b"".join(lines), np.fromiter(map(len, lines), dtype=np.int64, count=len(lines)),
                            b"".join(map(fields_record, documents)))

    def extend_records(self, records: bytes, lengths: np.ndarray, fields: bytes) -> None:
        """Append records made by `shelf_record` (concatenated), given the length of each, and the same
        documents' `fields_record` lines (concatenated)."""
        self._fields_writer.write(fields)
        starts = self._end + np.concatenate([[0], np.cumsum(lengths)[:-1]]) if lengths.size else lengths
        self._offsets.extend(starts.tolist())
        self._end += len(records)
        self._writer.write(records)

    def close_writing(self) -> None:
        self._writer.close()
        self._fields_writer.close()
        self._starts = np.asarray(self._offsets, dtype=np.int64)
        self._offsets = []

    def close(self) -> None:
        for writer in (self._writer, self._fields_writer):
            if not writer.closed:
                writer.close()
        if self._reader is not None:
            self._reader.close()
            self._reader = None

    def __len__(self) -> int:
        return len(self._offsets) if self._starts is None else int(self._starts.size)

    @overload
    def __getitem__(self, index: int) -> Document: ...

    @overload
    def __getitem__(self, index: slice) -> Sequence[Document]: ...

    def __getitem__(self, index: int | slice) -> Document | Sequence[Document]:
        if isinstance(index, slice):
            return [self[i] for i in range(*index.indices(len(self)))]
        if self._starts is None:
            raise RuntimeError("the shelf is still being written")
        if self._reader is None:
            self._reader = self.path.open("rb")
        reader = self._reader
        reader.seek(int(self._starts[index]))
        return _document(reader.readline())

    def __iter__(self) -> Iterator[Document]:
        if self._starts is None:
            raise RuntimeError("the shelf is still being written")
        with self.path.open("rb") as handle:
            for line in handle:
                yield _document(line)

    def fields(self) -> Iterator[DocumentFields]:
        """(doc_id, date, metadata) of every document in order, read from the small file of fields."""
        if self._starts is None:
            raise RuntimeError("the shelf is still being written")
        with self.fields_path.open("rb") as handle:
            for line in handle:
                doc_id, date, metadata = _loaded(line)
                yield doc_id, date, tuple((str(a), str(b)) for a, b in metadata) if metadata else ()


def document_fields(documents: Sequence[Document]) -> Iterator[DocumentFields]:
    """(doc_id, date, metadata) of every document in order; from a shelf's small file of fields."""
    if isinstance(documents, DocumentShelf):
        yield from documents.fields()
        return
    for doc in documents:
        yield doc.doc_id, doc.date, doc.metadata


def fields_record(doc: Document) -> bytes:
    """A document's fields without its text (id, date, table cells) as one line of JSON."""
    return _dumped([doc.doc_id, doc.date, doc.metadata])


def shelf_record(doc: Document) -> bytes:
    """One document as one line of JSON (a list of its fields)."""
    return _dumped([doc.doc_id, doc.source, doc.title, doc.text, doc.date, doc.metadata])


# orjson writes a record in about an eighth of the json module's time (0.026 s against 0.216 s per 20,000
# documents; 3.1 s of the 200,000-document run's first pass had gone to json.dumps); reading takes about as long
# either way (building the documents dominates). It refuses lone surrogates (a file name or text that was not
# valid UTF-8 keeps its bytes as such): those records are written by the json module with "surrogatepass",
# which orjson cannot read back, so they are read by the json module as well.
def _dumped(fields: list[Any]) -> bytes:
    try:
        return orjson.dumps(fields) + b"\n"
    except TypeError:  # orjson.JSONEncodeError: a lone surrogate
        return json.dumps(fields, ensure_ascii=False).encode("utf-8", "surrogatepass") + b"\n"


def _loaded(line: bytes) -> Any:
    try:
        return orjson.loads(line)
    except ValueError:  # orjson.JSONDecodeError: a record with lone surrogates, written by the json module
        return json.loads(line.decode("utf-8", "surrogatepass"))


def _document(line: bytes) -> Document:
    doc_id, source, title, text, date, metadata = _loaded(line)
    return Document(doc_id, source, title, text, date, tuple((str(a), str(b)) for a, b in metadata))
