"""Describing stage: what each cluster is, with evidence.

Per cluster: size and share, the member nearest the centroid as headline plus the next four,
discriminating terms by chi-square and by log-odds with an informative Dirichlet prior, and
keyword-in-context lines for the top terms.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp

from pilewise.clustering import Clustering
from pilewise.kwic import kwic_line
from pilewise.model import ClusterSummary, Document, KwicLine, Neighbour, QualityScores, TermScore
from pilewise.stability import StabilityResult
from pilewise.stats import chi_square_2x2, informative_prior, log_odds_dirichlet
from pilewise.text import Analyzer
from pilewise.vectors import Vectorized

NEAREST_SHOWN = 5
KWIC_TERMS = 5
KWIC_LINES_PER_TERM = 5
NEAREST_KEPT = 200  # nearest members kept per cluster: headline, next four, keyword-in-context candidates
SAMPLE_KEPT = 200  # members sampled per cluster for keyword-in-context lines beyond the nearest
ROW_BLOCK = 65_536  # rows per block in passes over all rows
PRIOR_MASS = 1000.0  # Dirichlet pseudo-counts in all; our choice, see docs/method.md


@dataclass(frozen=True)
class Collection:
    """Documents and how they map onto the distinct texts that were clustered."""

    documents: Sequence[Document]
    text_of_doc: np.ndarray  # (n_docs,) index of each document's distinct text
    first_doc_of_text: np.ndarray  # (n_texts,) the first document holding each distinct text
    copies: np.ndarray  # (n_texts,) how many documents hold each distinct text


def describe_clusters(
    collection: Collection,
    vectors: Vectorized,
    clustering: Clustering,
    quality: QualityScores,
    analyzer: Analyzer,
    *,
    top_terms: int,
    stability: StabilityResult | None = None,
    seed: int = 0,
) -> tuple[ClusterSummary, ...]:
    """Summaries of every cluster, numbered as in `clustering`, largest first.

    Term statistics use exact per-cluster document frequencies and counts of every term; the
    documents shown (nearest to the centroid, keyword-in-context lines) come from a bounded digest
    of each cluster, so describing needs memory for k x terms figures, not for the documents.
    """
    labels = clustering.labels
    weights = collection.copies.astype(float)
    k = clustering.centroids.shape[0]
    total = float(weights.sum())
    df_by_cluster, counts_by_cluster = cluster_term_totals(vectors.counts, labels, weights, k)
    df_all = np.asarray(df_by_cluster.sum(axis=0)).ravel()
    counts_all = np.asarray(counts_by_cluster.sum(axis=0)).ravel()
    prior = informative_prior(counts_all, PRIOR_MASS)
    shown = tuple(analyzer.surface(t) for t in vectors.terms)
    column_of = {key: i for i, key in enumerate(vectors.terms)}
    digest = ClusterDigest(k, nearest=NEAREST_KEPT, sample=SAMPLE_KEPT, seed=seed)
    for begin in range(0, labels.size, ROW_BLOCK):
        rows = np.arange(begin, min(begin + ROW_BLOCK, labels.size))
        digest.update(rows, labels[rows], clustering.distances[rows])
    sizes = np.bincount(labels, weights=weights, minlength=k)
    members_per_cluster = np.bincount(labels, minlength=k)
    mean_distance = np.bincount(labels, weights=weights * clustering.distances, minlength=k) / np.maximum(sizes, 1e-12)
    summaries = []
    for c in range(k):
        size = float(sizes[c])
        near_rows, near_distances = digest.nearest(c)
        nearest = tuple(
            Neighbour(int(collection.first_doc_of_text[t]), float(d))
            for t, d in zip(near_rows[:NEAREST_SHOWN], near_distances[:NEAREST_SHOWN], strict=True)
        )
        df_in = df_by_cluster[c].toarray().ravel()
        chi2_terms = _chi2_terms(df_in, df_all, size, total, shown, vectors.terms, top_terms)
        counts_in = counts_by_cluster[c].toarray().ravel()
        log_odds_terms = _log_odds_terms(
            counts_in, counts_all - counts_in, prior, df_in, df_all, size, total, shown, vectors.terms, top_terms
        )
        kwic = _kwic_for(chi2_terms[:KWIC_TERMS], digest.candidates(c, clustering.distances), vectors.counts,
                         column_of, collection, analyzer)
        headline_doc = collection.documents[nearest[0].doc_index]
        silhouette = quality.per_cluster_silhouette[c] if c < len(quality.per_cluster_silhouette) else None
        summaries.append(
            ClusterSummary(
                cluster_id=c,
                size=int(round(size)),
                share=size / total,
                distinct_texts=int(members_per_cluster[c]),
                headline=headline_doc.title,
                nearest=nearest,
                chi2_terms=chi2_terms,
                log_odds_terms=log_odds_terms,
                kwic=kwic,
                mean_distance=float(mean_distance[c]),
                silhouette=None if silhouette is None or np.isnan(silhouette) else float(silhouette),
                stability=_stability_value(stability, c),
                stability_reading=stability.clusters[c].reading if stability else "",
            )
        )
    return tuple(summaries)


def cluster_term_totals(
    counts: sp.csr_matrix, labels: np.ndarray, weights: np.ndarray, k: int
) -> tuple[sp.csr_matrix, sp.csr_matrix]:
    """Weighted document frequency and weighted count of every term in every cluster (k x terms, sparse).

    Computed block by block of rows, so no copy of the count matrix is made.
    """
    df = sp.csr_matrix((k, counts.shape[1]))
    totals = sp.csr_matrix((k, counts.shape[1]))
    for begin in range(0, counts.shape[0], ROW_BLOCK):
        block = counts[begin : begin + ROW_BLOCK]
        rows = np.arange(block.shape[0])
        block_labels = labels[begin : begin + ROW_BLOCK]
        indicator = sp.csr_matrix((weights[begin : begin + ROW_BLOCK], (block_labels, rows)),
                                  shape=(k, block.shape[0]))
        present = sp.csr_matrix((np.ones(block.nnz), block.indices, block.indptr), shape=block.shape)
        df = df + indicator @ present
        totals = totals + indicator @ sp.csr_matrix(block, dtype=np.float64)
    return sp.csr_matrix(df), sp.csr_matrix(totals)


class ClusterDigest:
    """Bounded per-cluster summaries built in one pass over the rows, block by block.

    For every cluster it keeps the `nearest` members closest to the centroid (a running top-N; ties
    go to the earlier row) and a uniform random sample of at most `sample` members (reservoir
    sampling, Vitter's algorithm R). Memory is O(k x (nearest + sample)) whatever the number of rows.
    """

    def __init__(self, k: int, *, nearest: int, sample: int, seed: int = 0) -> None:
        self.k = k
        self.nearest_cap = nearest
        self.sample_cap = sample
        self._rng = np.random.default_rng(seed)
        self._near_rows = [np.zeros(0, dtype=np.int64) for _ in range(k)]
        self._near_dist = [np.zeros(0) for _ in range(k)]
        self._sample = [np.zeros(0, dtype=np.int64) for _ in range(k)]
        self._seen = np.zeros(k, dtype=np.int64)

    def update(self, rows: np.ndarray, labels: np.ndarray, distances: np.ndarray) -> None:
        """Take in a block of rows (their global indices), their clusters and distances to the centroid."""
        for c in np.unique(labels).tolist():
            mine = labels == c
            self._keep_nearest(c, rows[mine], distances[mine])
            self._keep_sample(c, rows[mine])

    def _keep_nearest(self, c: int, rows: np.ndarray, distances: np.ndarray) -> None:
        all_rows = np.concatenate([self._near_rows[c], rows])
        all_dist = np.concatenate([self._near_dist[c], distances])
        order = np.lexsort((all_rows, all_dist))[: self.nearest_cap]
        self._near_rows[c], self._near_dist[c] = all_rows[order], all_dist[order]

    def _keep_sample(self, c: int, rows: np.ndarray) -> None:
        held = self._sample[c]
        seen = int(self._seen[c])
        room = max(0, self.sample_cap - held.size)
        held = np.concatenate([held, rows[:room]])
        rest = rows[room:]
        if rest.size:
            position = seen + room + np.arange(rest.size)  # 0-based index of each row among the cluster's rows
            slot = np.floor(self._rng.random(rest.size) * (position + 1)).astype(np.int64)
            taken = slot < self.sample_cap
            for s, r in zip(slot[taken].tolist(), rest[taken].tolist(), strict=True):  # in order: later rows win
                held[s] = r
        self._sample[c] = held
        self._seen[c] = seen + rows.size

    def nearest(self, c: int) -> tuple[np.ndarray, np.ndarray]:
        """Rows nearest the centroid first, with their distances."""
        return self._near_rows[c], self._near_dist[c]

    def sample(self, c: int) -> np.ndarray:
        return self._sample[c]

    def held(self) -> tuple[int, int]:
        """The largest number of nearest rows and of sampled rows held for any cluster."""
        return (max((r.size for r in self._near_rows), default=0), max((r.size for r in self._sample), default=0))

    def candidates(self, c: int, distances: np.ndarray) -> np.ndarray:
        """Rows to look in for keyword-in-context lines: the nearest, then the sample nearest first."""
        sample = self._sample[c]
        sample = sample[np.lexsort((sample, distances[sample]))]
        rows = np.concatenate([self._near_rows[c], sample])
        _, first = np.unique(rows, return_index=True)
        return rows[np.sort(first)]


def _stability_value(stability: StabilityResult | None, c: int) -> float | None:
    if stability is None or np.isnan(stability.clusters[c].mean_jaccard):
        return None
    return float(stability.clusters[c].mean_jaccard)


def _chi2_terms(
    df_in: np.ndarray, df_all: np.ndarray, size: float, total: float,
    shown: Sequence[str], keys: Sequence[str], top: int,
) -> tuple[TermScore, ...]:
    df_out = df_all - df_in
    rest = total - size
    scores = chi_square_2x2(df_in, df_out, size - df_in, rest - df_out)
    share_in = df_in / size
    share_out = df_out / rest if rest > 0 else np.zeros_like(df_out)
    over = share_in > share_out
    candidates = np.flatnonzero(over & (scores > 0))
    ranked = candidates[np.lexsort((candidates, -scores[candidates]))][:top]
    return tuple(
        TermScore(shown[i], keys[i], float(scores[i]), int(round(df_in[i])), int(round(df_out[i])),
                  float(share_in[i]), float(share_out[i]))
        for i in ranked
    )


def _log_odds_terms(
    counts_in: np.ndarray, counts_out: np.ndarray, prior: np.ndarray, df_in: np.ndarray, df_all: np.ndarray,
    size: float, total: float, shown: Sequence[str], keys: Sequence[str], top: int,
) -> tuple[TermScore, ...]:
    delta, z = log_odds_dirichlet(counts_in, counts_out, prior)
    rest = total - size
    df_out = df_all - df_in
    candidates = np.flatnonzero((delta > 0) & (counts_in > 0))
    ranked = candidates[np.lexsort((candidates, -z[candidates]))][:top]
    return tuple(
        TermScore(shown[i], keys[i], float(delta[i]), int(round(df_in[i])), int(round(df_out[i])),
                  float(df_in[i] / size), float(df_out[i] / rest) if rest > 0 else 0.0, z=float(z[i]))
        for i in ranked
    )


def _kwic_for(
    terms: Sequence[TermScore], candidates: np.ndarray, counts: sp.csr_matrix,
    column_of: dict[str, int], collection: Collection, analyzer: Analyzer,
) -> tuple[KwicLine, ...]:
    """Up to KWIC_LINES_PER_TERM lines per term, from distinct member texts among `candidates`, in order."""
    lines: list[KwicLine] = []
    for term in terms:
        column = column_of[term.key]
        found = 0
        for text_index in candidates.tolist():
            if not np.any(counts.indices[counts.indptr[text_index] : counts.indptr[text_index + 1]] == column):
                continue
            doc_index = int(collection.first_doc_of_text[text_index])
            doc = collection.documents[doc_index]
            line = kwic_line(doc.text, analyzer, term.key)
            if line is None:
                continue
            lines.append(KwicLine(term.term, line[0], line[1], line[2], doc.doc_id, doc_index))
            found += 1
            if found == KWIC_LINES_PER_TERM:
                break
    return tuple(lines)
