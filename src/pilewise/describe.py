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
) -> tuple[ClusterSummary, ...]:
    """Summaries of every cluster, numbered as in `clustering`, largest first."""
    labels = clustering.labels
    weights = collection.copies.astype(float)
    k = clustering.centroids.shape[0]
    total = float(weights.sum())
    present = vectors.counts.copy()
    present.data = np.ones_like(present.data)
    df_all = np.asarray(present.T @ weights).ravel()
    counts_all = np.asarray(vectors.counts.T @ weights).ravel()
    prior = informative_prior(counts_all, PRIOR_MASS)
    shown = tuple(analyzer.surface(t) for t in vectors.terms)
    present_csc = present.tocsc()
    column_of = {key: i for i, key in enumerate(vectors.terms)}
    summaries = []
    for c in range(k):
        members = np.flatnonzero(labels == c)
        w = weights[members]
        size = float(w.sum())
        order = members[np.argsort(clustering.distances[members], kind="stable")]
        nearest = tuple(
            Neighbour(int(collection.first_doc_of_text[t]), float(clustering.distances[t]))
            for t in order[:NEAREST_SHOWN]
        )
        df_in = np.asarray(present[members].T @ w).ravel()
        chi2_terms = _chi2_terms(df_in, df_all, size, total, shown, vectors.terms, top_terms)
        counts_in = np.asarray(vectors.counts[members].T @ w).ravel()
        log_odds_terms = _log_odds_terms(
            counts_in, counts_all - counts_in, prior, df_in, df_all, size, total, shown, vectors.terms, top_terms
        )
        kwic = _kwic_for(chi2_terms[:KWIC_TERMS], members, clustering.distances, present_csc, column_of, collection,
                         analyzer)
        headline_doc = collection.documents[nearest[0].doc_index]
        silhouette = quality.per_cluster_silhouette[c] if c < len(quality.per_cluster_silhouette) else None
        summaries.append(
            ClusterSummary(
                cluster_id=c,
                size=int(round(size)),
                share=size / total,
                distinct_texts=int(members.size),
                headline=headline_doc.title,
                nearest=nearest,
                chi2_terms=chi2_terms,
                log_odds_terms=log_odds_terms,
                kwic=kwic,
                mean_distance=float(np.average(clustering.distances[members], weights=w)),
                silhouette=None if silhouette is None or np.isnan(silhouette) else float(silhouette),
                stability=_stability_value(stability, c),
                stability_reading=stability.clusters[c].reading if stability else "",
            )
        )
    return tuple(summaries)


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
    terms: Sequence[TermScore], members: np.ndarray, distances: np.ndarray, present_csc: sp.csc_matrix,
    column_of: dict[str, int], collection: Collection, analyzer: Analyzer,
) -> tuple[KwicLine, ...]:
    """Up to KWIC_LINES_PER_TERM lines per term, from distinct member texts, nearest first."""
    lines: list[KwicLine] = []
    is_member = np.zeros(present_csc.shape[0], dtype=bool)
    is_member[members] = True
    for term in terms:
        column = column_of[term.key]
        rows = present_csc.indices[present_csc.indptr[column] : present_csc.indptr[column + 1]]
        holders = rows[is_member[rows]]
        holders = holders[np.argsort(distances[holders], kind="stable")]
        found = 0
        for text_index in holders:
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
