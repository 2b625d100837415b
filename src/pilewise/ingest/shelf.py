"""A disk-backed list of documents, for collections too large to hold in memory.

The streaming path writes every document once, as one JSON Lines record, into the run's work
folder; afterwards the shelf reads any document by its position (one seek and one line) or all of
them in order. Only the byte offsets (8 bytes per document) stay in memory.
"""

from __future__ import annotations

import json
from collections.abc import Iterable, Iterator, Sequence
from pathlib import Path
from typing import BinaryIO, overload

import numpy as np

from pilewise.model import Document


class DocumentShelf(Sequence[Document]):
    """Documents appended in order to one file; readable by position once `close_writing` was called."""

    def __init__(self, path: Path) -> None:
        self.path = path
        self._writer = path.open("wb")
        self._offsets: list[int] = []
        self._end = 0
        self._starts: np.ndarray | None = None
        self._reader: BinaryIO | None = None
        self.metadata_names: set[str] = set()  # names of the table columns carried by any document

    def extend(self, documents: Iterable[Document]) -> None:
        documents = list(documents)
        self.metadata_names.update(name for doc in documents for name, _ in doc.metadata)
        lines = [shelf_record(doc) for doc in documents]
        self.extend_records(b"".join(lines), np.fromiter(map(len, lines), dtype=np.int64, count=len(lines)))

    def extend_records(self, records: bytes, lengths: np.ndarray) -> None:
        """Append records made by `shelf_record` (concatenated), given the length of each."""
        starts = self._end + np.concatenate([[0], np.cumsum(lengths)[:-1]]) if lengths.size else lengths
        self._offsets.extend(starts.tolist())
        self._end += len(records)
        self._writer.write(records)

    def close_writing(self) -> None:
        self._writer.close()
        self._starts = np.asarray(self._offsets, dtype=np.int64)
        self._offsets = []

    def close(self) -> None:
        if not self._writer.closed:
            self._writer.close()
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


def shelf_record(doc: Document) -> bytes:
    """One document as one line of JSON (a list of its fields)."""
    return json.dumps([doc.doc_id, doc.source, doc.title, doc.text, doc.date, doc.metadata],
                      ensure_ascii=False).encode("utf-8", "surrogatepass") + b"\n"


def _document(line: bytes) -> Document:
    doc_id, source, title, text, date, metadata = json.loads(line.decode("utf-8", "surrogatepass"))
    return Document(doc_id, source, title, text, date, tuple((str(a), str(b)) for a, b in metadata))
