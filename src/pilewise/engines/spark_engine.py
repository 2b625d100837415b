"""The Spark engine: the work that grows with the collection runs on Apache Spark; bounded summaries return.

On Spark: reading, redaction, exact-duplicate grouping, tokenizing with pilewise's own `Analyzer` (terms
and two-word phrases as in the other modes), document frequencies and the vocabulary limits, sublinear
TF-IDF, the LSA projection (fitted on a seeded sample of LSA_FIT_ROWS texts brought to the driver, as the
other modes fit it), k-means (Spark ML, k-means|| initialisation, seeded, weighted by copies), every
cluster's term document frequencies and counts, the members nearest each centroid, and the assignments.

Back on the driver: the vocabulary (bounded by --min-df, which grows with the collection), the k x terms
totals, the nearest members, and a seeded sample of SAMPLE_TEXTS texts with their counts and vectors.
The sample is described, assessed, explained and paged by the same code as the other modes; sizes, term
statistics and nearest members are those of the whole collection (`summaries.ClusterTotals`).
"""

from __future__ import annotations

import contextlib
import csv
import hashlib
import heapq
import itertools
from collections import Counter
from collections.abc import Callable, Iterable, Iterator
from dataclasses import dataclass
from pathlib import Path
from typing import Any, TypeVar

import numpy as np
import scipy.sparse as sp
from sklearn.decomposition import TruncatedSVD
from sklearn.preprocessing import normalize

from pilewise.clustering.kmeans import Clustering
from pilewise.csvcells import spreadsheet_cell, spreadsheet_row
from pilewise.describe.summaries import ClusterTotals
from pilewise.describe.trends import DatedCounts, day_counts
from pilewise.engines.spark_reading import read_on_spark
from pilewise.engines.spark_session import is_url
from pilewise.errors import PilewiseError
from pilewise.ingest.dedup import NO_BOILERPLATE, Boilerplate, distinct_key, find_boilerplate, strip_texts
from pilewise.ingest.redact import redact_document
from pilewise.model import Collection, Document, Ingested, Population
from pilewise.options import RunOptions, check_k, kmeans_starts, reading_settings
from pilewise.output.exports import MemberFiles
from pilewise.progress import Reporter
from pilewise.vectors.languages import detect_languages, present_languages, shares
from pilewise.vectors.text import Analyzer, load_stop_words
from pilewise.vectors.tfidf import (
    LSA_FIT_ROWS,
    MAX_PHRASES,
    Vectorized,
    VectorSettings,
    alphabetical,
    fit_sampled,
    lsa_size,
    no_terms_left,
    smooth_idf,
    term_limits,
    tfidf_rows,
)

T = TypeVar("T")
SAMPLE_TEXTS = 20_000  # distinct texts brought back to describe, assess, explain and page (seeded)
NEAREST_KEPT = 50  # members nearest each centroid brought back, from the whole collection
BOILERPLATE_SAMPLE = 20_000  # texts boilerplate lines are looked for in (the streaming mode's first chunk)
SINGLE_CSV_UP_TO = 2_000_000  # documents up to which assignments.csv is also written as one file
BATCH_ROWS = 10_000  # texts an executor's Python worker tokenizes or projects at once
DOCS_PER_PARTITION = 50_000  # documents per partition of the distinct texts at most (1,000,000: 20 partitions)
DEFAULT_MASTER = RunOptions.spark_master  # --spark-master when not given
KMEANS_MAX_ITER = 100  # Spark ML's default is 20; the local engine runs to convergence (scikit-learn: 300)


@dataclass(frozen=True)
class SparkPrepared:
    """What the Spark engine hands to the describing stages."""

    ingested: Ingested  # documents: the sample's
    collection: Collection  # the sample's texts, one document each
    analyzer: Analyzer
    vectors: Vectorized  # the sample's counts and vectors; terms and facts of the whole collection
    clustering: Clustering  # the sample's labels and distances; centroids of the whole collection
    totals: ClusterTotals
    boilerplate: Boilerplate
    redacted: dict[str, int]
    fingerprint: str
    population: Population


def spark_source(options: RunOptions) -> str:
    """SOURCE as Spark reads it: a URL keeps its '//' (a Path folds it), a local path is made absolute."""
    text = str(options.source)
    for scheme in ("hdfs:", "s3a:", "s3:", "gs:", "abfs:", "abfss:", "wasb:", "wasbs:", "viewfs:",
                   "webhdfs:", "swebhdfs:"):
        if text.startswith(scheme) and not text.startswith(scheme + "//"):
            return scheme + "//" + text[len(scheme):].lstrip("/")
    return text if is_url(text) else str(options.source.resolve())


def text_key(text: str) -> bytes:
    """The key exact duplicates share: SHA-1 of the text with white space collapsed (`distinct_key`)."""
    return hashlib.sha1(distinct_key(text).encode("utf-8", "surrogatepass")).digest()


Bag = tuple[bytes, int, int, dict[str, int]]  # text key, first document's number, copies, term -> count


@dataclass(frozen=True)
class _Tokenize:
    """Terms and phrases of each distinct text as the other modes count them (executor side)."""

    stop_words: frozenset[str]
    stem: bool
    languages: tuple[str, ...]
    boilerplate: Boilerplate

    def bags(self, rows: Iterable[tuple[bytes, tuple[int, str, int]]]) -> Iterator[Bag]:
        analyzer = Analyzer(stop_words=self.stop_words, stem=self.stem, languages=self.languages)
        for batch in batches(rows):
            texts = [text for _, (_, text, _) in batch]
            if self.boilerplate.lines:
                texts = strip_texts(texts, self.boilerplate).texts
            for (key, (seq, _, copies)), text in zip(batch, texts, strict=True):
                bag = Counter(analyzer.terms(text))
                bag.update(analyzer.phrases(text))
                yield key, seq, copies, dict(bag)


@dataclass(frozen=True)
class _Project:
    """Counts in vocabulary columns, sublinear TF-IDF over the space's columns, LSA, unit length (executor side)."""

    column_of: dict[str, int]
    space_position: np.ndarray  # column -> its position in the space, -1 when not in it (phrases)
    idf: np.ndarray
    svd: TruncatedSVD

    def rows(self, bags: Iterable[tuple[bytes, int, int, dict[str, int]]]) -> Iterator[tuple[Any, ...]]:
        for chunk in batches(bags):
            batch = [(key, seq, copies, *_counted(bag, self.column_of)) for key, seq, copies, bag in chunk]
            vectors = self.vectors([(cols, counts) for _, _, _, cols, counts in batch])
            for (key, seq, copies, cols, counts), vector in zip(batch, vectors, strict=True):
                yield key, seq, copies, cols, counts, vector

    def vectors(self, rows: list[tuple[np.ndarray, np.ndarray]]) -> np.ndarray:
        in_space = space_matrix(rows, self.space_position, int(self.idf.size))
        return normalize(self.svd.transform(tfidf_rows(in_space, self.idf)))


def batches(rows: Iterable[T]) -> Iterator[list[T]]:
    """A partition's rows in lists of BATCH_ROWS: an executor's Python worker holds one batch, not a partition."""
    iterator = iter(rows)
    while batch := list(itertools.islice(iterator, BATCH_ROWS)):
        yield batch


def data_partitions(n_docs: int, default: int) -> int:
    """Partitions of the distinct texts: at least Spark's default parallelism, and no more than
    DOCS_PER_PARTITION documents in one (a task's memory stays bounded as the collection grows)."""
    return max(default, -(-n_docs // DOCS_PER_PARTITION))


def space_matrix(rows: list[tuple[np.ndarray, np.ndarray]], space_position: np.ndarray, width: int) -> sp.csr_matrix:
    """The rows' counts in the space's columns (phrases dropped unless they are in the space)."""
    indptr, indices, data = [0], [], []
    for cols, counts in rows:
        at = space_position[cols]
        keep = at >= 0
        indices.append(at[keep])
        data.append(counts[keep])
        indptr.append(indptr[-1] + int(keep.sum()))
    return sp.csr_matrix((np.concatenate(data) if data else np.zeros(0, np.int32),
                          np.concatenate(indices) if indices else np.zeros(0, np.int64), np.array(indptr)),
                         shape=(len(rows), width))


def prepare_on_spark(spark: Any, options: RunOptions, reporter: Reporter) -> SparkPrepared:
    """Read, vectorize and cluster SOURCE on `spark` at options.k; bring back bounded summaries."""
    from pyspark import StorageLevel

    keep = StorageLevel.MEMORY_AND_DISK
    source = spark_source(options)
    limits, columns = reading_settings(options)  # links are Spark's to follow (follow_links unused)
    with reporter.stage("reading on Spark"):
        read = read_on_spark(spark, source, columns, limits)
        redact = options.redact
        n_docs = read.count if read.count is not None else read.documents.count()
        # a CSV with quoted line breaks is one partition per file (Spark cannot split it): spread the documents
        # before anything is kept, so that no task or cached block holds the whole file
        marked = (read.documents.repartition(data_partitions(n_docs, spark.sparkContext.defaultParallelism))
                  .map(lambda item: _redacted(item, redact)).persist(keep))
        documents = marked.map(lambda row: (row[0], row[1]))
        redacted = marked.map(lambda row: row[2]).filter(bool).fold({}, _add_counts)
        read.release()  # `marked` holds the documents now
        if n_docs > options.max_documents:
            raise PilewiseError(f"found {n_docs:,} documents, more than --max-documents {options.max_documents:,}; "
                                "raise --max-documents or point SOURCE at fewer files")
        if n_docs == 0:
            raise PilewiseError(f"no documents found in {source!r}; see the ingest report, or pass --text-column")
        texts = (documents.map(lambda item: (text_key(item[1].text), (item[0], item[1].text, 1)))
                 .reduceByKey(_first_text, data_partitions(n_docs, spark.sparkContext.defaultParallelism))
                 .persist(keep))
        n_texts = texts.count()
        reporter.say(f"{n_docs:,} documents ({n_texts:,} distinct texts) read on Spark; "
                     f"{sum(1 for e in read.entries if e.status == 'skipped'):,} files or rows skipped")
    check_k(options.k, n_texts)
    settings = VectorSettings(min_df=options.min_df, max_df=options.max_df, bigrams_in_space=options.bigrams_in_space,
                              lsa_components=options.lsa_components, seed=options.seed)
    with reporter.stage("vectorizing on Spark"):
        sample_texts = [row[1][1] for row in texts.takeSample(False, BOILERPLATE_SAMPLE, options.seed)]
        # stop words and stemmers must be known before tokenizing: languages are detected on the sample (as
        # streaming mode detects them on its first documents), or named by --language
        sampled_languages = detect_languages(sample_texts, options.language)
        present = present_languages(sampled_languages, np.ones(len(sample_texts))) or ("en",)
        language_note = f"languages of a sample of {len(sample_texts):,} texts: " + ", ".join(
            f"{code} {share:.0%}" for code, share in shares(sampled_languages, np.ones(len(sample_texts))))
        reporter.say(language_note)
        boilerplate = NO_BOILERPLATE
        if options.boilerplate:
            boilerplate = find_boilerplate(sample_texts)
            if boilerplate.lines:
                reporter.say(f"{len(boilerplate.lines)} boilerplate line(s) found in a sample of "
                             f"{min(n_texts, BOILERPLATE_SAMPLE):,} texts; removed before vectorizing")
        stop_words = load_stop_words(options.stop_words_file, present)
        bags = texts.mapPartitions(_Tokenize(stop_words, options.stem, present, boilerplate).bags).persist(keep)
        min_df, max_df = term_limits(settings, float(n_docs))
        kept = (bags.flatMap(lambda row: ((term, row[2]) for term in row[3]))
                .reduceByKey(lambda a, b: a + b)
                .filter(lambda pair: min_df <= pair[1] <= max_df * n_docs).collect())
        terms, df, within = _vocabulary(kept)
        if not any(" " not in t for t in terms):
            raise no_terms_left(min_df, max_df)
        is_phrase = np.fromiter((" " in t for t in terms), dtype=bool, count=len(terms))
        space_columns = np.arange(len(terms)) if settings.bigrams_in_space else np.flatnonzero(~is_phrase)
        components = lsa_size(settings, n_texts, int(space_columns.size))
        if settings.lsa_components <= 0 or components < 2:
            raise PilewiseError("the spark engine clusters in the LSA space; do not pass --lsa-components 0 "
                                "with --engine spark")
        space_position = np.full(len(terms), -1, dtype=np.int64)
        space_position[space_columns] = np.arange(space_columns.size)
        idf = smooth_idf(df[space_columns], float(n_docs))
        column_of = {term: i for i, term in enumerate(terms)}
        reporter.say(f"{len(terms):,} terms kept ({int(is_phrase.sum()):,} two-word phrases); min_df {min_df}")
        fit_sample = [_counted(bag, column_of) for *_, bag in bags.takeSample(False, LSA_FIT_ROWS, options.seed)]
        svd = TruncatedSVD(n_components=components, random_state=settings.seed, algorithm="randomized")
        fit_sampled(svd, tfidf_rows(space_matrix(fit_sample, space_position, int(space_columns.size)), idf))
        project = _Project(column_of, space_position, idf, svd)
        placed = bags.mapPartitions(project.rows).persist(keep)
        without_terms = placed.filter(lambda row: not np.any(space_position[row[3]] >= 0)).count()
        bags.unpersist()
    with reporter.stage("clustering on Spark"):
        centroids, cost = _kmeans(spark, placed, options.k, options.seed, kmeans_starts(options, n_texts))
        raw_sizes = dict(placed.map(lambda row: (_nearest(row[5], centroids), float(row[2])))
                         .reduceByKey(lambda a, b: a + b).collect())
        order = sorted(range(options.k), key=lambda c: (-raw_sizes.get(c, 0.0), c))  # largest first, as locally
        renumber = np.empty(options.k, dtype=np.int64)
        renumber[order] = np.arange(options.k)
        unit = normalize(centroids[order])
        labelled = placed.map(lambda row: (*row, *_place(row[5], centroids, renumber, unit))).persist(keep)
    with reporter.stage("summarizing on Spark"):
        totals = _totals(labelled, options.k, len(terms))
        # only now is `labelled` kept: released earlier, `placed` was computed again (every text tokenized and
        # projected a second time) by this first job on `labelled`
        placed.unpersist()
        nearest = _nearest_keys(labelled, options.k)
        sample_rows = {row[0]: row for row in labelled.takeSample(False, SAMPLE_TEXTS, options.seed)}
        wanted_nearest = spark.sparkContext.broadcast(nearest - set(sample_rows))
        for row in labelled.filter(lambda row: row[0] in wanted_nearest.value).collect():
            sample_rows[row[0]] = row
        rows = sorted(sample_rows.values(), key=lambda row: row[1])  # reading order of each text's first document
        firsts = spark.sparkContext.broadcast({row[1] for row in rows})
        doc_of = dict(documents.filter(lambda item: item[0] in firsts.value).collect())
        placed_docs = _placed_documents(documents, labelled).persist(keep)
        dated = _dated_counts(placed_docs)
    sample_docs = tuple(doc_of[row[1]] for row in rows)
    copies = np.array([row[2] for row in rows], dtype=np.int64)
    n = len(rows)
    counts = sp.csr_matrix(
        (np.concatenate([row[4] for row in rows]), np.concatenate([row[3] for row in rows]),
         np.concatenate([[0], np.cumsum([row[3].size for row in rows])])), shape=(n, len(terms)), dtype=np.int32)
    analyzer = Analyzer(stop_words=stop_words, stem=options.stem, languages=present)
    if options.stem:  # surface forms for stems, from the sample (executors' analyzers are not brought back)
        for doc in sample_docs:
            analyzer.terms(doc.text)
    facts: dict[str, float | int | str | bool] = {
        "min_df": min_df, "max_df": float(max_df), "terms": len(terms), "phrases": int(is_phrase.sum()),
        "phrases_within_df": within, "space_terms": int(space_columns.size), "texts_without_terms": without_terms,
        "bigrams_in_space": settings.bigrams_in_space, "lsa_components": components,
        "lsa_explained_variance": round(float(svd.explained_variance_ratio_.sum()), 4),
        "lsa_fitted_on_rows": len(fit_sample), "engine": "spark", "described_texts": n,
    }
    vectors = Vectorized(counts=counts, terms=terms, is_phrase=is_phrase,
                         space=np.vstack([row[5] for row in rows]), facts=facts, space_columns=space_columns,
                         idf=idf, lsa=svd.components_)
    clustering = Clustering(labels=np.array([row[6] for row in rows], dtype=np.int64), centroids=unit,
                            distances=np.array([row[7] for row in rows]), inertia=cost)
    collection = Collection(sample_docs, np.arange(n), np.arange(n), copies)
    sample_note = (f"spark engine: {n_docs:,} documents clustered on Spark; pages describe a seeded sample of "
                   f"{n:,} distinct texts (with the {NEAREST_KEPT} nearest each centroid); sizes, terms, trends "
                   "and assignments are of every document")
    ingested = Ingested(sample_docs, read.entries, (*read.notes, sample_note, language_note), read.files_found)
    reporter.say(sample_note)
    population = Population(
        documents=n_docs, texts=n_texts, skipped=sum(1 for e in read.entries if e.status == "skipped"),
        write_assignments=lambda folder, names, groups: _write_assignments(spark, placed_docs, folder, names, groups,
                                                                           n_docs, reporter),
        dated=dated,
    )
    return SparkPrepared(ingested, collection, analyzer, vectors, clustering, totals, boilerplate, redacted,
                         _fingerprint(documents), population)


def _redacted(item: tuple[int, Document], redact: bool) -> tuple[int, Document, dict[str, int]]:
    if not redact:
        return item[0], item[1], {}
    counts: dict[str, int] = {}
    return item[0], redact_document(item[1], counts), counts


def _add_counts(a: dict[str, int], b: dict[str, int]) -> dict[str, int]:
    merged = dict(a)
    for kind, n in b.items():
        merged[kind] = merged.get(kind, 0) + n
    return merged


def _first_text(a: tuple[int, str, int], b: tuple[int, str, int]) -> tuple[int, str, int]:
    """Two documents of one text: the text of the one read first, and their copies added."""
    first = a if a[0] <= b[0] else b
    return first[0], first[1], a[2] + b[2]


def _vocabulary(kept: list[tuple[str, int]]) -> tuple[tuple[str, ...], np.ndarray, int]:
    """The kept terms in alphabetical order with their document frequencies; phrases capped at MAX_PHRASES,
    the most widespread first (ties alphabetically), as `tfidf.exact_counts`. Also the phrases within limits."""
    words = [pair for pair in kept if " " not in pair[0]]
    phrases = [pair for pair in kept if " " in pair[0]]
    within = len(phrases)
    if len(phrases) > MAX_PHRASES:
        phrases = sorted(phrases, key=lambda pair: (-pair[1], pair[0]))[:MAX_PHRASES]
    every = words + phrases
    order = alphabetical([term for term, _ in every])
    return (tuple(every[i][0] for i in order), np.array([every[i][1] for i in order], dtype=np.float64), within)


def _counted(bag: dict[str, int], column_of: dict[str, int]) -> tuple[np.ndarray, np.ndarray]:
    pairs = sorted((column_of[t], n) for t, n in bag.items() if t in column_of)
    return np.array([c for c, _ in pairs], dtype=np.int32), np.array([n for _, n in pairs], dtype=np.int32)


def _kmeans(spark: Any, placed: Any, k: int, seed: int, starts: int) -> tuple[np.ndarray, float]:
    """Spark ML's k-means (k-means|| initialisation) on the unit-length LSA vectors, weighted by copies: `starts`
    fits seeded seed, seed+1, ..., the one of least cost kept (as the local engine keeps the best of its starts)."""
    from pyspark import StorageLevel
    from pyspark.ml.clustering import KMeans
    from pyspark.ml.linalg import Vectors, VectorUDT
    from pyspark.sql.types import DoubleType, StructField, StructType

    # the schema given, not inferred: inferring runs a Spark job on the first rows
    schema = StructType([StructField("copies", DoubleType()), StructField("features", VectorUDT())])
    frame = spark.createDataFrame(placed.map(lambda row: (float(row[2]), Vectors.dense(row[5]))),
                                  schema).persist(StorageLevel.MEMORY_AND_DISK)
    best: tuple[float, np.ndarray] | None = None
    for start in range(starts):
        model = KMeans(k=k, seed=seed + start, initMode="k-means||", maxIter=KMEANS_MAX_ITER, tol=1e-6,
                       weightCol="copies").fit(frame)
        centroids = np.array(model.clusterCenters())
        cost = float(model.summary.trainingCost)
        if centroids.shape[0] == k and (best is None or cost < best[0]):
            best = (cost, centroids)
    frame.unpersist()
    if best is None:
        raise PilewiseError(f"Spark's k-means found fewer than {k} clusters; pass a smaller --k")
    return best[1], best[0]


def _nearest(vector: np.ndarray, centroids: np.ndarray) -> int:
    """The nearest centroid (Euclidean, as Spark ML's k-means assigns)."""
    return int(np.argmin(((centroids - vector) ** 2).sum(axis=1)))


def _place(vector: np.ndarray, centroids: np.ndarray, renumber: np.ndarray, unit: np.ndarray) -> tuple[int, float]:
    """(cluster numbered by size, cosine distance to its unit-length centroid), as `kmeans.Clustering`."""
    label = int(renumber[_nearest(vector, centroids)])
    return label, float(np.clip(1.0 - vector @ unit[label], 0.0, 2.0))


def _totals(labelled: Any, k: int, n_terms: int) -> ClusterTotals:
    """Every cluster's term document frequencies and counts, sizes and mean distance, over the whole collection."""
    cells = (labelled.flatMap(lambda row: (((row[6], int(c)), (row[2], row[2] * int(v)))
                                           for c, v in zip(row[3], row[4], strict=True)))
             .reduceByKey(lambda a, b: (a[0] + b[0], a[1] + b[1])).collect())
    rows = np.array([c for (c, _), _ in cells], dtype=np.int64)
    cols = np.array([t for (_, t), _ in cells], dtype=np.int64)
    df = sp.csr_matrix((np.array([v[0] for _, v in cells], dtype=np.float64), (rows, cols)), shape=(k, n_terms))
    counts = sp.csr_matrix((np.array([v[1] for _, v in cells], dtype=np.float64), (rows, cols)), shape=(k, n_terms))
    per = dict(labelled.map(lambda row: (row[6], (float(row[2]), 1, row[2] * row[7])))
               .reduceByKey(lambda a, b: (a[0] + b[0], a[1] + b[1], a[2] + b[2])).collect())
    sizes = np.array([per.get(c, (0.0, 0, 0.0))[0] for c in range(k)])
    members = np.array([per.get(c, (0.0, 0, 0.0))[1] for c in range(k)], dtype=np.int64)
    mean_distance = np.array([per.get(c, (0.0, 0, 0.0))[2] for c in range(k)]) / np.maximum(sizes, 1e-12)
    return ClusterTotals(df, counts, sizes, members, mean_distance)


def _nearest_keys(labelled: Any, k: int) -> set[bytes]:
    """The keys of the NEAREST_KEPT texts nearest each centroid (ties by reading order)."""
    def smallest(rows: Iterable[tuple[float, int, bytes]]) -> list[tuple[float, int, bytes]]:
        return heapq.nsmallest(NEAREST_KEPT, rows)

    heads = (labelled.map(lambda row: (row[6], (row[7], row[1], row[0])))
             .aggregateByKey([], lambda acc, v: smallest([*acc, v]), lambda a, b: smallest(a + b)).collect())
    return {key for _, rows in heads for _, _, key in rows}


def _fingerprint(documents: Any) -> str:
    """SHA-256 over the documents' fingerprint records in reading order (as the other modes), streamed."""
    from pilewise.model import fingerprint_record

    digest = hashlib.sha256()
    for _, doc in documents.sortByKey().toLocalIterator():
        digest.update(fingerprint_record(doc))
    return "sha256:" + digest.hexdigest()


ASSIGNMENT_COLUMNS = ["doc_id", "source", "title", "cluster", "cluster_name", "distance", "date", "copies"]
Placed = tuple[int, tuple[str, str, str, int, float, str, int, tuple[tuple[str, str], ...]]]


def _placed_documents(documents: Any, labelled: Any) -> Any:
    """Every document with its text's cluster, distance and copies, without the text: (number, (doc_id, source,
    title, cluster, distance, date, copies, metadata)); kept for the trends and the assignments."""
    placement = labelled.map(lambda row: (row[0], (row[6], row[7], row[2])))
    return (documents.map(lambda item: (text_key(item[1].text), (item[0], item[1])))
            .join(placement)
            .map(lambda pair: _placed(pair[1][0], pair[1][1])))


def _placed(item: tuple[int, Document], place: tuple[int, float, int]) -> Placed:
    number, doc = item
    label, distance, copies = place
    return number, (doc.doc_id, doc.source, doc.title, label, distance, doc.date, copies, tuple(doc.metadata))


def _dated_counts(placed_docs: Any) -> DatedCounts | None:
    """Every document counted per (day, cluster) on Spark, each partition's dates read by `trends.day_counts`
    (the parsing of the other modes); None when no document carries a date (as the other modes)."""
    def partition_counts(rows: Iterable[Placed]) -> Iterator[DatedCounts]:
        batch = [(fields[5], fields[3]) for _, fields in rows]
        if any(date for date, _ in batch):
            yield day_counts([date for date, _ in batch], np.array([label for _, label in batch], dtype=np.int64))
        else:
            yield DatedCounts(np.zeros(0, "datetime64[D]"), np.zeros(0, np.int64), np.zeros(0, np.int64), len(batch), 0)

    parts = placed_docs.mapPartitions(partition_counts).collect()
    if not any(part.counts.size or part.unreadable for part in parts):
        return None
    return DatedCounts(np.concatenate([part.days for part in parts]), np.concatenate([part.labels for part in parts]),
                       np.concatenate([part.counts for part in parts]), sum(part.undated for part in parts),
                       sum(part.unreadable for part in parts))


def _write_assignments(
    spark: Any, placed_docs: Any, folder: Path, names: list[str], groups: dict[int, list[int]], n_docs: int,
    reporter: Reporter
) -> list[str]:
    """Every document's cluster, written by Spark: CSV parts (cells escaped as every pilewise CSV) and Parquet
    parts, and assignments.csv in reading order up to SINGLE_CSV_UP_TO documents. When the levels map the run's
    clusters to coarser groups (`groups`: k -> group of each cluster), every document's group at each cut too:
    cuts-parts/ (CSV parts) and cuts.csv with assignments.csv. Returns the names written."""
    extra = sorted({name for _, fields in placed_docs.take(1000) for name, _ in fields[7]})
    ks = sorted(groups)
    joined = placed_docs.map(lambda item: (item[0], _assignment_row(item[1], names, extra),
                                           [spreadsheet_cell(item[1][0]), *(groups[k][item[1][3]] for k in ks)]))
    columns = [*ASSIGNMENT_COLUMNS, *extra]
    # by place: a metadata column may share a name with one of ASSIGNMENT_COLUMNS
    typed = _schema(columns, whole={ASSIGNMENT_COLUMNS.index("cluster"), ASSIGNMENT_COLUMNS.index("copies")})
    spark.createDataFrame(joined.map(lambda row: row[1]), typed).write.parquet(str(folder / "assignments-parquet"))
    escaped = spark.createDataFrame(joined.map(lambda row: [str(c) for c in spreadsheet_row(row[1])]),
                                    _schema(columns))
    escaped.write.option("header", True).option("escape", '"').csv(str(folder / "assignments-parts"))
    written = ["assignments-parquet", "assignments-parts"]
    cut_header = ["doc_id", *(f"k{k}" for k in ks)]
    if not ks:  # a Ward tree over the texts cuts across the run's clusters; the sample cannot say how
        reporter.say("the levels do not map the run's clusters to coarser groups: cuts.csv is not written")
    else:
        cut_frame = spark.createDataFrame(joined.map(lambda row: [str(c) for c in row[2]]), _schema(cut_header))
        cut_frame.write.option("header", True).option("escape", '"').csv(str(folder / "cuts-parts"))
        written.append("cuts-parts")
    if n_docs <= SINGLE_CSV_UP_TO:  # also every cluster's members/cluster-NN.csv, as the other modes write
        header = spreadsheet_row(columns)
        members = MemberFiles(folder, header, list(range(len(names))))
        with contextlib.ExitStack() as files:
            writer = _csv_writer(files, folder / "assignments.csv", header)
            cuts_writer = _csv_writer(files, folder / "cuts.csv", cut_header) if ks else None
            for _, row, cut in joined.sortBy(lambda row: row[0]).toLocalIterator():
                escaped_row = spreadsheet_row(row)
                writer.writerow(escaped_row)
                if cuts_writer is not None:
                    cuts_writer.writerow(cut)
                members.add(int(row[3]), escaped_row)
        members.flush()
        written += ["assignments.csv", "members", *(["cuts.csv"] if ks else [])]
    else:
        reporter.say(f"{n_docs:,} documents: assignments are in assignments-parts/ and assignments-parquet/ only "
                     f"(one assignments.csv, cuts.csv and the per-cluster members/ files up to {SINGLE_CSV_UP_TO:,})")
    placed_docs.unpersist()
    return written


def _schema(columns: list[str], whole: frozenset[int] | set[int] = frozenset()) -> Any:
    """The frame's columns as Spark would infer them from the rows (text, and 64-bit integers at the places in
    `whole`), given instead of inferred: inferring runs a Spark job over the first rows."""
    from pyspark.sql.types import LongType, StringType, StructField, StructType

    return StructType([StructField(name, LongType() if at in whole else StringType())
                       for at, name in enumerate(columns)])


def _csv_writer(files: contextlib.ExitStack, path: Path, header: list[Any]) -> Any:
    """A CSV writer on `path` (closed with `files`), its header written."""
    writer = csv.writer(files.enter_context(path.open("w", encoding="utf-8", newline="")), lineterminator="\n")
    writer.writerow(header)
    return writer


def _assignment_row(fields: tuple[Any, ...], names: list[str], extra: list[str]) -> list[Any]:
    doc_id, source, title, label, distance, date, copies, metadata = fields
    meta = dict(metadata)
    return [doc_id, source, title, label, names[label], f"{distance:.6f}", date, copies,
            *(meta.get(name, "") for name in extra)]


def run_on_spark(options: RunOptions, reporter: Reporter, compute: Callable[[SparkPrepared], Any]) -> Any:
    """Start Spark for the run, prepare on it, and call `compute` (which describes and writes) while it runs."""
    from pilewise.engines.spark_session import check_spark_available, spark_session, submitted_master

    check_spark_available()
    master = options.spark_master
    if master == DEFAULT_MASTER:  # under spark-submit its --master counts unless --spark-master says otherwise
        master = submitted_master() or master
    with spark_session(master, quiet=options.quiet, partitions=_partitions(master), say=reporter.say) as spark:
        prepared = prepare_on_spark(spark, options, reporter)
        return compute(prepared)


def _partitions(master: str) -> int | None:
    """Shuffle partitions of a session started here: two per local core (Spark's 200 are made for clusters);
    None for a cluster's master, whose executors' cores set them once they have registered."""
    import os

    if master == "local":
        return 2
    if master.startswith("local["):
        inner = master[6:-1]
        cores = os.cpu_count() or 2 if inner in ("*", "") else int(inner) if inner.isdigit() else 2
        return max(2, 2 * cores)
    return None
