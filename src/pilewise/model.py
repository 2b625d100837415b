"""Plain typed records passed between the stages."""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING

if TYPE_CHECKING:  # stage types for annotations only: model stays importable by every stage, without cycles
    import numpy as np

    from pilewise.clustering.kmeans import Clustering
    from pilewise.clustering.levels import Levels
    from pilewise.clustering.stability import StabilityResult
    from pilewise.clustering.sweep import Sweep
    from pilewise.describe.names import Naming
    from pilewise.describe.profiles import ClusterProfile, MetadataAnalysis
    from pilewise.describe.rules import RuleSet
    from pilewise.describe.trends import DatedCounts, Trends
    from pilewise.ingest.dedup import Boilerplate
    from pilewise.options import RunOptions
    from pilewise.vectors.languages import LanguageMix
    from pilewise.vectors.text import Analyzer
    from pilewise.vectors.tfidf import Vectorized


@dataclass(frozen=True)
class Document:
    """One document read from the source.

    ``doc_id`` is the user's id (an id column) or the path relative to SOURCE, with a row
    number for tables. ``source`` says where the text came from.
    """

    doc_id: str
    source: str
    title: str
    text: str
    date: str = ""
    metadata: tuple[tuple[str, str], ...] = ()


def fingerprint_record(doc: Document) -> bytes:
    """What a document adds to a collection's SHA-256 fingerprint: its id and text, each ended by NUL."""
    return f"{doc.doc_id}\0{doc.text}\0".encode("utf-8", "surrogatepass")


@dataclass(frozen=True)
class IngestEntry:
    """One line of the ingest report: a file (or a table row) and what became of it."""

    source: str
    status: str  # "document", "skipped" or "note"
    reason: str
    detail: str = ""


@dataclass(frozen=True)
class Ingested:
    """Everything the reading stage found."""

    documents: Sequence[Document]  # a tuple, or a disk-backed shelf when streaming
    entries: tuple[IngestEntry, ...]
    notes: tuple[str, ...] = ()
    files_found: int = 0

    def skipped(self) -> tuple[IngestEntry, ...]:
        return tuple(e for e in self.entries if e.status == "skipped")


@dataclass(frozen=True)
class TermScore:
    """A discriminating term with its statistic and document counts in and out of the cluster."""

    term: str
    key: str
    score: float
    docs_in: int
    docs_out: int
    share_in: float
    share_out: float
    z: float | None = None


@dataclass(frozen=True)
class KwicLine:
    """A keyword-in-context line: fixed-width left and right context around the match."""

    term: str
    left: str
    match: str
    right: str
    doc_id: str
    doc_index: int


@dataclass(frozen=True)
class Neighbour:
    """A member document and its cosine distance to the cluster centroid."""

    doc_index: int
    distance: float


@dataclass(frozen=True)
class ClusterSummary:
    """Everything pilewise says about one cluster."""

    cluster_id: int
    size: int
    share: float
    distinct_texts: int
    headline: str
    nearest: tuple[Neighbour, ...]
    chi2_terms: tuple[TermScore, ...]
    log_odds_terms: tuple[TermScore, ...]
    kwic: tuple[KwicLine, ...]
    mean_distance: float
    silhouette: float | None
    stability: float | None = None
    stability_reading: str = ""
    headline_source: str = "title"  # "title", "sentence" (of a member's text) or "terms"
    headline_doc: int = -1  # index of the document the headline comes from; -1 when from the terms
    mixed: bool = False  # no common theme: see describe.summaries.mixed_reason
    mixed_reason: str = ""
    suggested_name: str = ""
    name_terms: tuple[tuple[str, float], ...] = ()  # the suggested name's terms, each with its share of members


@dataclass(frozen=True)
class QualityScores:
    """Collection-level figures of a clustering; None when undefined."""

    silhouette: float | None
    silhouette_sample: int
    calinski_harabasz: float | None
    davies_bouldin: float | None
    silhouette_reading: str = ""
    per_cluster_silhouette: tuple[float, ...] = field(default_factory=tuple)
    null_silhouette: float | None = None  # the same silhouette on the column-shuffled space (clustering.quality)


@dataclass(frozen=True)
class Collection:
    """Documents and how they map onto the distinct texts that were clustered."""

    documents: Sequence[Document]
    text_of_doc: np.ndarray  # (n_docs,) index of each document's distinct text
    first_doc_of_text: np.ndarray  # (n_texts,) the first document holding each distinct text
    copies: np.ndarray  # (n_texts,) how many documents hold each distinct text
    exact_texts: int | None = None  # distinct texts before near-duplicates were grouped; None: n_texts

    @property
    def distinct_texts(self) -> int:
        """Exactly distinct texts (after collapsing white space), before near-duplicate grouping."""
        return int(self.copies.size) if self.exact_texts is None else self.exact_texts


@dataclass(frozen=True)
class Population:
    """The whole collection when the pages describe a sample of it (the Spark engine).

    `write_assignments(folder, cluster_names, groups)` writes every document's assignment into the run's
    folder (on the engine that holds the documents), and its cluster at every cut of the levels when
    `groups` maps each cut k to the group of every run cluster; it returns the names of what it wrote.
    `dated` holds every document counted per (day, cluster), for the trends of the whole collection.
    """

    documents: int
    texts: int
    skipped: int
    write_assignments: Callable[[Path, list[str], dict[int, list[int]]], list[str]]
    dated: DatedCounts | None = None


@dataclass(frozen=True)
class RunResult:
    """Everything computed for one run, ready to be written."""

    options: RunOptions
    name: str
    k: int
    ingested: Ingested
    collection: Collection
    vectors: Vectorized
    clustering: Clustering
    quality: QualityScores
    stability: StabilityResult
    clusters: tuple[ClusterSummary, ...]
    analyzer: Analyzer
    levels: Levels
    sweep: Sweep | None
    naming: Naming
    boilerplate: Boilerplate
    redacted: dict[str, int]
    profiles: tuple[ClusterProfile, ...]
    rules: RuleSet
    metadata: MetadataAnalysis | None
    fingerprint: str
    timings: dict[str, float]
    trends: Trends | None = None  # None: no document has a readable date
    population: Population | None = None  # None: the pages describe every document
    languages: LanguageMix | None = None  # None: not detected (streaming mode without --language)
    # the map's positions of output.docmap.sample_rows (n, 2); None: the site computes them when writing
    map_points: np.ndarray | None = None
