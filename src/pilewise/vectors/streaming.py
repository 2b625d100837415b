"""Streaming preparation: read, de-duplicate and vectorize a collection chunk by chunk.

For collections too large for the in-memory path. Raw texts never stay in memory: worker processes
(one per core) redact, serialize, key and tokenize each chunk of documents while the main process
reads the next; the main process writes the chunk to a disk-backed shelf (in the run's work folder),
looks its texts up among those seen (exact duplicates), and keeps only the term counts of new texts.
Terms are counted in a fixed-size hashed vocabulary (a word's column is its MurmurHash3 modulo
HASH_BUCKETS, as scikit-learn's HashingVectorizer does), so memory does not depend on how many distinct
words the collection holds; the word shown for a column is the most frequent word that fell into it.
Document frequencies from the same pass choose the kept columns. Tokenizing (`tfidf.chunk_words`) and
the weighting and reduction (`tfidf.weigh_and_reduce`, here with LSA fitted on a seeded sample of rows and
applied block by block) are those of memory mode; only the vocabulary differs.
"""

from __future__ import annotations

import hashlib
import itertools
import multiprocessing
import os
from array import array
from collections import Counter, deque
from collections.abc import Callable, Iterable, Iterator
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
import scipy.sparse as sp
from sklearn.utils import murmurhash3_32

from pilewise.errors import PilewiseError
from pilewise.ingest.dedup import NO_BOILERPLATE, Boilerplate, distinct_key, find_boilerplate, strip_boilerplate
from pilewise.ingest.redact import redact_document
from pilewise.ingest.shelf import DocumentShelf, fields_record, shelf_record
from pilewise.model import Collection, Document, fingerprint_record
from pilewise.progress import Reporter
from pilewise.vectors.text import Analyzer
from pilewise.vectors.tfidf import (
    LSA_FIT_ROWS,
    TermCounts,
    Vectorized,
    VectorSettings,
    alphabetical,
    chunk_words,
    no_terms_left,
    term_limits,
    weigh_and_reduce,
    within_limits,
)

HASH_BUCKETS = 2**20  # columns of the hashed vocabulary; collisions are rare below ~100,000 kept words
CHUNK_DOCUMENTS = 20_000  # documents read, redacted and tokenized per step
SVD_FIT_ROWS = LSA_FIT_ROWS  # rows of the seeded sample the LSA is fitted on (as in memory mode)
WORD_COUNT_CAP = 2_000_000  # words whose counts are kept to name the columns (least frequent pruned)
TRANSFORM_ROWS = 50_000  # rows weighted and projected per step


@dataclass(frozen=True)
class StreamedCollection:
    """What the streaming preparation hands to the clustering stages."""

    collection: Collection
    vectors: Vectorized
    boilerplate: Boilerplate
    redacted: dict[str, int]
    fingerprint: str
    shelf: DocumentShelf


@dataclass
class _Tally:
    """Running state of the first pass."""

    text_of_doc: array[int]
    first_doc_of_text: array[int]
    copies: array[int]
    index_of: dict[bytes, int]
    blocks: list[Path]  # hashed count blocks of the distinct texts in order, saved in the work folder
    words: Counter[str]


def prepare_streamed(
    documents: Iterable[Document],
    work: Path,
    analyzer: Analyzer,
    settings: VectorSettings,
    *,
    redact: bool,
    workers: int,
    reporter: Reporter,
    progress: Callable[[], int] = lambda: 0,
    total_bytes: int = 0,
    boilerplate: bool = True,
) -> StreamedCollection:
    """First pass over `documents` (read lazily), then the kept columns, TF-IDF and LSA, as two timed stages.

    `progress` tells how many bytes of the `total_bytes` to read have been read so far (for the progress
    display). `boilerplate` False leaves every line in (no boilerplate lines are looked for).
    """
    with reporter.stage("reading and counting terms"), \
            reporter.meter(total=total_bytes, label="reading") as meter:
        tally, shelf, digest, found, redacted = _first_pass(
            documents, work, analyzer, redact=redact, workers=workers,
            advance=lambda n: meter(progress(), n), boilerplate=boilerplate)
    with reporter.stage("weighting and reducing"):
        collection = Collection(
            shelf,
            np.asarray(tally.text_of_doc, dtype=np.int64),
            np.asarray(tally.first_doc_of_text, dtype=np.int64),
            np.asarray(tally.copies, dtype=np.int64),
        )
        tally.index_of.clear()
        vectors = _vectorize_blocks(tally, settings, reporter)
    return StreamedCollection(collection, vectors, found, redacted, "sha256:" + digest.hexdigest(),
                              shelf)


def _first_pass(
    documents: Iterable[Document], work: Path, analyzer: Analyzer, *, redact: bool, workers: int,
    advance: Callable[[int], None], boilerplate: bool = True,
) -> tuple[_Tally, DocumentShelf, Any, Boilerplate, dict[str, int]]:
    shelf = DocumentShelf(work / "documents.jsonl")
    digest = hashlib.sha256()
    redacted: dict[str, int] = {}
    tally = _Tally(array("q"), array("q"), array("q"), {}, [], Counter())
    chunks = _chunks(documents, CHUNK_DOCUMENTS)
    first = next(chunks, [])
    # boilerplate lines are found on the first chunk's distinct (redacted) texts: a sample of 20,000
    found = NO_BOILERPLATE
    if boilerplate:
        sample = [redact_document(doc, {}) for doc in first] if redact else first
        found = find_boilerplate(list({" ".join(doc.text.split()): doc.text for doc in sample}.values()))
    pool = _pool(workers, analyzer)
    pending: deque[Any] = deque()
    try:
        for chunk in itertools.chain([first] if first else [], chunks):
            pending.append(_submit(pool, analyzer, chunk, redact, found))
            advance(len(chunk))
            while len(pending) > max(1, workers):  # keep every worker busy while this process reads on
                _absorb(pending.popleft(), tally, shelf, digest, redacted, work)
        while pending:
            _absorb(pending.popleft(), tally, shelf, digest, redacted, work)
    finally:
        if pool is not None:
            pool.terminate()
    shelf.close_writing()
    if len(shelf) == 0:
        raise PilewiseError("no documents found; point SOURCE at a folder of text files or a table")
    return tally, shelf, digest, found, redacted


def _chunks(documents: Iterable[Document], size: int) -> Iterator[list[Document]]:
    chunk: list[Document] = []
    for doc in documents:
        chunk.append(doc)
        if len(chunk) == size:
            yield chunk
            chunk = []
    if chunk:
        yield chunk


@dataclass(frozen=True)
class ChunkWork:
    """What a worker makes of one chunk of documents: everything but the collection-wide bookkeeping."""

    shelf_lines: bytes  # the redacted documents as shelf records
    line_lengths: np.ndarray
    field_lines: bytes  # the same documents' fields without their text (`shelf.fields_record`)
    fingerprint_bytes: bytes  # id NUL text NUL of every document, in order
    keys: list[bytes]  # 128-bit digest of each whitespace-collapsed text: exact duplicates share it
    counts: sp.csr_matrix  # hashed term counts of every document (boilerplate lines stripped)
    words: Counter[str]
    redacted: dict[str, int]
    metadata_names: frozenset[str]


_worker_analyzer: Analyzer | None = None


class _Buckets(dict[str, int]):
    """word -> hashed column, computed once per word."""

    def __missing__(self, word: str) -> int:
        column = abs(murmurhash3_32(word, seed=0)) % HASH_BUCKETS  # scikit-learn's FeatureHasher rule
        self[word] = column
        return column


_buckets = _Buckets()


def process_chunk(
    documents: list[Document], redact: bool, boilerplate: Boilerplate, analyzer: Analyzer | None = None
) -> ChunkWork:
    """Redact, serialize, key and count one chunk; runs in a worker process (or inline with one worker)."""
    redacted: dict[str, int] = {}
    if redact:
        documents = [redact_document(doc, redacted) for doc in documents]
    lines = [shelf_record(doc) for doc in documents]
    fingerprint = b"".join(map(fingerprint_record, documents))
    keys = [hashlib.blake2b(distinct_key(doc.text).encode("utf-8", "surrogatepass"), digest_size=16).digest()
            for doc in documents]
    texts = [doc.text for doc in documents]
    if boilerplate.lines:
        texts = [strip_boilerplate(text, boilerplate) for text in texts]
    counts, words = hashed_counts(texts, analyzer)
    names = frozenset(name for doc in documents for name, _ in doc.metadata)
    return ChunkWork(b"".join(lines), np.fromiter(map(len, lines), dtype=np.int64, count=len(lines)),
                     b"".join(map(fields_record, documents)), fingerprint, keys, counts, words, redacted, names)


def hashed_counts(texts: list[str], analyzer: Analyzer | None = None) -> tuple[sp.csr_matrix, Counter[str]]:
    """Term counts of `texts` in the hashed vocabulary, and how often each term occurred.

    Tokenized by the core of memory mode (`tfidf.chunk_words`); each distinct word of the chunk is turned
    into its term and hashed column once, as `Analyzer.terms` and scikit-learn's FeatureHasher would.
    """
    analyzer = analyzer or _worker_analyzer
    assert analyzer is not None
    if len(_buckets) > WORD_COUNT_CAP:
        _buckets.clear()
    local_words, raw, lengths = chunk_words(texts, analyzer)
    term_of = [analyzer.normalize(word) for word in local_words]
    column_of = np.fromiter((-1 if t is None else _buckets[t] for t in term_of), dtype=np.int64,
                            count=len(term_of))
    occurrences = np.bincount(raw, minlength=len(local_words))
    analyzer.count_surfaces(local_words, occurrences.tolist())  # the stems' surface words, as `terms` records
    words: Counter[str] = Counter()
    for term, count in zip(term_of, occurrences.tolist(), strict=True):
        if term is not None and count:
            words[term] += count
    columns = column_of[raw] if raw.size else np.zeros(0, dtype=np.int64)
    kept = columns >= 0
    kept_before = np.concatenate([[0], np.cumsum(kept)])  # kept tokens before each token
    indptr = kept_before[np.concatenate([[0], np.cumsum(lengths)])]
    matrix = sp.csr_matrix(
        (np.ones(int(kept_before[-1]), dtype=np.int32), columns[kept].astype(np.int32), indptr),
        shape=(len(texts), HASH_BUCKETS),
    )
    matrix.sum_duplicates()
    return matrix, words


def _start_worker(analyzer: Analyzer) -> None:
    global _worker_analyzer
    _worker_analyzer = analyzer


def _pool(workers: int, analyzer: Analyzer) -> Any:
    if workers <= 1:
        return None
    method = "fork" if "fork" in multiprocessing.get_all_start_methods() else "spawn"
    return multiprocessing.get_context(method).Pool(workers, initializer=_start_worker, initargs=(analyzer,))


def _submit(pool: Any, analyzer: Analyzer, chunk: list[Document], redact: bool, boilerplate: Boilerplate) -> Any:
    if pool is None:
        return process_chunk(chunk, redact, boilerplate, analyzer)
    return pool.apply_async(process_chunk, (chunk, redact, boilerplate))


def _absorb(job: Any, tally: _Tally, shelf: DocumentShelf, digest: Any, redacted: dict[str, int], work: Path) -> None:
    """Take in a chunk's work in reading order: shelf, fingerprint, exact duplicates, counts of new texts."""
    done: ChunkWork = job if isinstance(job, ChunkWork) else job.get()
    start = len(shelf)
    shelf.extend_records(done.shelf_lines, done.line_lengths, done.field_lines)
    shelf.metadata_names.update(done.metadata_names)
    digest.update(done.fingerprint_bytes)
    for kind, n in done.redacted.items():
        redacted[kind] = redacted.get(kind, 0) + n
    new_rows = []
    for offset, key in enumerate(done.keys):
        t = tally.index_of.setdefault(key, len(tally.copies))
        if t == len(tally.copies):
            tally.first_doc_of_text.append(start + offset)
            tally.copies.append(0)
            new_rows.append(offset)
        tally.copies[t] += 1
        tally.text_of_doc.append(t)
    counts = done.counts if len(new_rows) == len(done.keys) else done.counts[new_rows]
    path = work / f"hashed-{len(tally.blocks):05d}.npz"
    np.savez(path, indices=counts.indices, indptr=counts.indptr, data=counts.data)
    tally.blocks.append(path)
    tally.words.update(done.words)
    if len(tally.words) > WORD_COUNT_CAP:  # keep the most frequent words; rare ones cannot name a column
        tally.words = Counter(dict(tally.words.most_common(WORD_COUNT_CAP // 2)))


# ---- kept columns, TF-IDF and LSA --------------------------------------------------------------


def column_names(words: Counter[str], columns: np.ndarray) -> list[str]:
    """The most frequent word of every hashed column in `columns` (ties: alphabetical)."""
    best: dict[int, tuple[int, str]] = {}
    wanted = set(columns.tolist())
    for word, count in words.items():
        column = _buckets[word]
        if column in wanted:
            held = best.get(column)
            if held is None or (count, held[1]) > (held[0], word):
                best[column] = (count, word)
    return [best[c][1] if c in best else f"(column {c})" for c in columns.tolist()]


def document_frequency_of_blocks(blocks: list[Path], copies: np.ndarray) -> np.ndarray:
    """Documents holding each hashed column: every distinct text counts as often as it has copies.

    The copies of a text are only known once the whole collection has been read (a copy may come last),
    so this is a pass over the saved blocks after reading, not a running tally.
    """
    df = np.zeros(HASH_BUCKETS, dtype=np.float64)
    row = 0
    for path in blocks:
        with np.load(path) as block:
            lengths = np.diff(block["indptr"])
            weights = np.repeat(copies[row : row + lengths.size].astype(np.float64), lengths)
            df += np.bincount(block["indices"], weights=weights, minlength=HASH_BUCKETS)
            row += lengths.size
    return df


def hashed_term_counts(tally: _Tally, settings: VectorSettings) -> TermCounts:
    """The kept hashed columns of the saved blocks, named and in alphabetical order, with their counts."""
    n = len(tally.copies)
    copies = np.asarray(tally.copies, dtype=np.int64)
    n_documents = float(copies.sum())  # figures that count documents count copies (docs/method.md)
    all_df = document_frequency_of_blocks(tally.blocks, copies)
    min_df, max_df = term_limits(settings, n_documents)
    kept = within_limits(all_df, min_df, max_df, n_documents)
    if kept.size < 2:
        raise no_terms_left(min_df, max_df)
    names = column_names(tally.words, kept)
    order = alphabetical(names)
    column_of = np.full(HASH_BUCKETS, -1, dtype=np.int64)
    column_of[kept[order]] = np.arange(kept.size)
    df = all_df[kept[order]]
    del all_df
    return TermCounts(
        counts=_kept_counts(tally.blocks, column_of, kept.size, n), terms=tuple(names[i] for i in order),
        is_phrase=np.zeros(kept.size, dtype=bool), df=df, n_documents=n_documents, min_df=min_df, max_df=max_df,
        facts={"hashed_columns": HASH_BUCKETS, "streamed": True},
    )


def _vectorize_blocks(tally: _Tally, settings: VectorSettings, reporter: Reporter) -> Vectorized:
    """The hashed counts through the one weighting and reduction step: LSA fitted on a sample, blocks projected."""
    return weigh_and_reduce(
        hashed_term_counts(tally, settings), settings, fit_rows=SVD_FIT_ROWS, block_rows=TRANSFORM_ROWS,
        space_dtype=np.float32, say=reporter.say,
        track=lambda starts: reporter.track(starts, total=len(starts), label="projecting", unit="block"),
    )


def _kept_counts(blocks: list[Path], column_of: np.ndarray, n_columns: int, n_rows: int) -> sp.csr_matrix:
    """The count matrix over the kept columns, filled block by block into arrays allocated once."""
    kept_per_block = []
    for path in blocks:
        with np.load(path) as block:
            kept_per_block.append(int(np.count_nonzero(column_of[block["indices"]] >= 0)))
    indices = np.empty(sum(kept_per_block), dtype=np.int32)
    data = np.empty(indices.size, dtype=np.int32)
    indptr = np.zeros(n_rows + 1, dtype=np.int64)
    row = at = 0
    for path in blocks:
        with np.load(path) as block:
            columns = column_of[block["indices"]]
            keep = columns >= 0
            lengths = np.diff(block["indptr"])
            row_of = np.repeat(np.arange(lengths.size), lengths)[keep]
            taken = int(keep.sum())
            indices[at : at + taken] = columns[keep]
            data[at : at + taken] = block["data"][keep]
            indptr[row + 1 : row + 1 + lengths.size] = at + np.cumsum(np.bincount(row_of, minlength=lengths.size))
            row += lengths.size
            at += taken
        path.unlink()
    counts = sp.csr_matrix((data, indices, indptr), shape=(n_rows, n_columns))
    counts.sort_indices()
    return counts


def default_workers() -> int:
    """One tokenizing process per core this process may use."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # not on Linux
        return max(1, os.cpu_count() or 1)
