"""Describing stage: what each cluster is, with evidence.

Per cluster: size and share, the five members nearest the centroid, a headline (`describe.headlines`:
the title or sentence of a near member that carries the cluster's terms), discriminating terms by
chi-square and by log-odds with an informative Dirichlet prior, keyword-in-context lines for the top
terms, a suggested name from terms common among the members, and a flag when the cluster has no
common theme (`mixed_reason`).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp

from pilewise.clustering.kmeans import Clustering, cluster_sums
from pilewise.clustering.levels import Levels
from pilewise.clustering.stability import StabilityResult, mixed_stability_reading
from pilewise.describe.headlines import HEADLINE_CANDIDATES, choose_headlines
from pilewise.describe.kwic import kwic_line
from pilewise.describe.names import suggested_name_from
from pilewise.describe.stats import best_first, chi_square_2x2, informative_prior, log_odds_dirichlet
from pilewise.model import ClusterSummary, Collection, KwicLine, Neighbour, QualityScores, TermScore
from pilewise.vectors.text import Analyzer
from pilewise.vectors.tfidf import Vectorized

NEAREST_SHOWN = 5
KWIC_TERMS = 5
KWIC_LINES_PER_TERM = 5
KWIC_HOLDERS_KEPT = 20  # members holding a top term kept per cluster and term, nearest first
ROW_BLOCK = 65_536  # rows per block in passes over all rows
# rows per block in `term_holders`, whose per-entry temporaries (int64 rows, codes, the membership test's sort)
# came to about 160 MB for one block of 65,536 rows at 50,000 documents (5.4 million entries), the run's peak;
# the digest keeps the same rows whatever the blocks (it orders by key, distance, then row)
HOLDER_BLOCK = 8_192
PRIOR_MASS = 1000.0  # Dirichlet pseudo-counts in all; our choice, see docs/method.md
THEME_TERMS = 30  # distinguishing terms searched for a common one (and for the name), whatever --top-terms
# A cluster is mixed when none of its THEME_TERMS best chi-square terms occurs in this share of its members,
# or when its members' mean cosine similarity to the centroid is below COHESION_RATIO times the median of
# the other clusters'. Our choices, measured on open collections: see docs/method.md.
THEME_MIN_SHARE = 0.25
COHESION_RATIO = 0.5


@dataclass(frozen=True)
class ClusterTotals:
    """Per-cluster figures of a whole collection whose rows are not all at hand (the Spark engine).

    df and counts are (k, n_terms): documents holding each term and its occurrences, every text counted
    with its copies; sizes are documents, members distinct texts, mean_distance the documents' mean
    cosine distance to their centroid.
    """

    df: sp.csr_matrix
    counts: sp.csr_matrix
    sizes: np.ndarray
    members: np.ndarray
    mean_distance: np.ndarray


def describe_clusters(
    collection: Collection,
    vectors: Vectorized,
    clustering: Clustering,
    quality: QualityScores,
    analyzer: Analyzer,
    *,
    top_terms: int,
    stability: StabilityResult | None = None,
    totals: ClusterTotals | None = None,
    term_totals: tuple[sp.csr_matrix, sp.csr_matrix] | None = None,
) -> tuple[ClusterSummary, ...]:
    """Summaries of every cluster, numbered as in `clustering`, largest first.

    Term statistics use exact per-cluster document frequencies and counts of every term. The
    documents shown come from bounded digests filled in passes over the rows in blocks: the members
    nearest each centroid, and for each cluster's top terms the members holding the term nearest the
    centroid. Describing needs memory for k x terms figures, not for the documents. `totals`, when
    given, replaces the figures counted from the rows at hand (sizes, term statistics, mean distances);
    `term_totals`, when given, is `cluster_term_totals` of these rows, already counted by the caller.
    """
    labels = clustering.labels
    weights = collection.copies.astype(float)
    k = clustering.centroids.shape[0]
    if totals is not None:
        df_by_cluster, counts_by_cluster = totals.df, totals.counts
    elif term_totals is not None:
        df_by_cluster, counts_by_cluster = term_totals
    else:
        df_by_cluster, counts_by_cluster = cluster_term_totals(vectors.counts, labels, weights, k)
    df_all = np.asarray(df_by_cluster.sum(axis=0)).ravel()
    counts_all = np.asarray(counts_by_cluster.sum(axis=0)).ravel()
    prior = informative_prior(counts_all, PRIOR_MASS)
    shown = tuple(analyzer.surface(t) for t in vectors.terms)
    column_of = {key: i for i, key in enumerate(vectors.terms)}
    digest = NearestDigest(max(NEAREST_SHOWN, HEADLINE_CANDIDATES))
    for begin in range(0, labels.size, ROW_BLOCK):
        rows = np.arange(begin, min(begin + ROW_BLOCK, labels.size))
        digest.update(rows, labels[rows], clustering.distances[rows])
    sizes = np.bincount(labels, weights=weights, minlength=k) if totals is None else totals.sizes
    total = float(sizes.sum())
    members_per_cluster = np.bincount(labels, minlength=k) if totals is None else totals.members
    mean_distance = (np.bincount(labels, weights=weights * clustering.distances, minlength=k) / np.maximum(sizes, 1e-12)
                     if totals is None else totals.mean_distance)
    terms_of: list[tuple[tuple[TermScore, ...], tuple[TermScore, ...]]] = []
    for c in range(k):
        size = float(sizes[c])
        df_in = df_by_cluster[c].toarray().ravel()
        counts_in = counts_by_cluster[c].toarray().ravel()
        terms_of.append((
            _chi2_terms(df_in, df_all, size, total, shown, vectors.terms, max(top_terms, THEME_TERMS)),
            _log_odds_terms(counts_in, counts_all - counts_in, prior, df_in, df_all, size, total, shown,
                            vectors.terms, top_terms),
        ))
    pairs = [(c, column_of[t.key]) for c, (chi2, _) in enumerate(terms_of) for t in chi2[:KWIC_TERMS]]
    holders = term_holders(vectors.counts, labels, clustering.distances, pairs, KWIC_HOLDERS_KEPT)
    key_of = {pair: i for i, pair in enumerate(pairs)}
    near_docs = [[int(collection.first_doc_of_text[t]) for t in digest.nearest(c)[0]] for c in range(k)]
    headlines = choose_headlines(
        near_docs, [chi2 for chi2, _ in terms_of],
        title_of=lambda d: collection.documents[d].title, text_of=lambda d: collection.documents[d].text,
        keys_of=lambda text: [key for _, _, key in analyzer.spans(text)],
    )
    similarity = 1.0 - mean_distance
    summaries = []
    for c in range(k):
        size = float(sizes[c])
        near_rows, near_distances = digest.nearest(c)
        nearest = tuple(Neighbour(int(collection.first_doc_of_text[t]), float(d))
                        for t, d in zip(near_rows[:NEAREST_SHOWN], near_distances[:NEAREST_SHOWN], strict=True))
        theme_terms, log_odds_terms = terms_of[c]
        chi2_terms = theme_terms[:top_terms]
        others = np.delete(similarity, c)
        reason = mixed_reason(theme_terms, float(similarity[c]), float(np.median(others)) if others.size else None)
        name = suggested_name_from(theme_terms, mixed=bool(reason))
        kwic = _kwic_for(
            [(t, holders.nearest(key_of[c, column_of[t.key]])[0]) for t in chi2_terms[:KWIC_TERMS]],
            collection, analyzer,
        )
        silhouette = quality.per_cluster_silhouette[c] if c < len(quality.per_cluster_silhouette) else None
        summaries.append(
            ClusterSummary(
                cluster_id=c,
                size=int(round(size)),
                share=size / total,
                distinct_texts=int(members_per_cluster[c]),
                headline=headlines[c].text,
                nearest=nearest,
                chi2_terms=chi2_terms,
                log_odds_terms=log_odds_terms,
                kwic=kwic,
                mean_distance=float(mean_distance[c]),
                silhouette=None if silhouette is None or np.isnan(silhouette) else float(silhouette),
                stability=_stability_value(stability, c),
                stability_reading=_stability_reading(stability, c, mixed=bool(reason)),
                headline_source=headlines[c].source,
                headline_doc=headlines[c].doc_index,
                mixed=bool(reason),
                mixed_reason=reason,
                suggested_name=name.text,
                name_terms=name.terms,
            )
        )
    return tuple(summaries)


LEVEL_TERMS = 5  # terms that describe a cluster of a coarser or finer cut


def level_terms(
    levels: Levels, counts: sp.csr_matrix, weights: np.ndarray, shown: Sequence[str], top: int = LEVEL_TERMS,
    *, run: tuple[np.ndarray, sp.csr_matrix] | None = None,
) -> dict[int, tuple[tuple[str, ...], ...]]:
    """For every cut of `levels`, each cluster's `top` terms by chi-square (as in `describe_clusters`).

    The cuts of one tree nest, so the document frequencies of the finest cut (one pass over the rows)
    are summed into those of every coarser cut. `run`, the run's labels and its clusters' weighted document
    frequencies (k x terms), saves that pass when every run cluster lies inside one cluster of the finest
    cut (a tree over the run's own clusters) and the weights are whole numbers (copies: their sums are
    then exact in any order, so the figures are the same).
    """
    if not levels.cuts:
        return {}
    finest_k = max(levels.cuts)
    finest = levels.cuts[finest_k]
    df_fine = _merged_run_frequencies(run, finest, finest_k, weights) if run is not None else None
    if df_fine is None:
        df_fine, _ = cluster_term_totals(counts, finest, weights, finest_k)
    size_fine = np.bincount(finest, weights=weights, minlength=finest_k)
    df_all = np.asarray(df_fine.sum(axis=0)).ravel()
    total = float(weights.sum())
    first_row = np.full(finest_k, -1)
    first_row[finest[::-1]] = np.arange(finest.size)[::-1]  # a row of every fine cluster (the first)
    out: dict[int, tuple[tuple[str, ...], ...]] = {}
    for k, cut in sorted(levels.cuts.items()):
        present = first_row >= 0
        coarse_of_fine = np.zeros(finest_k, dtype=np.int64)
        coarse_of_fine[present] = cut[first_row[present]]
        merge = sp.csr_matrix((np.ones(finest_k), (coarse_of_fine, np.arange(finest_k))), shape=(k, finest_k))
        df_k = sp.csr_matrix(merge @ df_fine)
        sizes = merge @ size_fine
        out[k] = tuple(
            tuple(t.term for t in _chi2_terms(df_k[c].toarray().ravel(), df_all, float(sizes[c]), total, shown,
                                              shown, top))
            for c in range(k)
        )
    return out


def _merged_run_frequencies(
    run: tuple[np.ndarray, sp.csr_matrix], cut: np.ndarray, cut_k: int, weights: np.ndarray
) -> sp.csr_matrix | None:
    """The cut's clusters' document frequencies summed from the run clusters', or None when they cannot be."""
    run_labels, run_df = run
    if not np.all(weights == np.round(weights)):
        return None
    cut_of_run = np.full(run_df.shape[0], -1)
    cut_of_run[run_labels] = cut
    if not np.array_equal(cut_of_run[run_labels], cut):  # a run cluster split between two cut clusters
        return None
    present = cut_of_run >= 0
    merge = sp.csr_matrix((np.ones(int(present.sum())), (cut_of_run[present], np.flatnonzero(present))),
                          shape=(cut_k, run_df.shape[0]))
    return sp.csr_matrix(merge @ run_df)


def mixed_reason(theme_terms: Sequence[TermScore], similarity: float, others_median: float | None) -> str:
    """Why a cluster has no common theme, in plain words; "" when it has one.

    Two signs, either enough: none of the cluster's best distinguishing terms (`theme_terms`, chi-square)
    occurs in THEME_MIN_SHARE of its members; or the members' mean cosine similarity to the centroid is
    below COHESION_RATIO times the median of the other clusters' (`others_median`; None with one cluster).
    """
    reasons = []
    top = max(theme_terms, key=lambda t: t.share_in, default=None)
    if top is None:
        reasons.append("no term is more common in it than outside")
    elif top.share_in < THEME_MIN_SHARE:
        reasons.append(f"no distinguishing term occurs in {THEME_MIN_SHARE:.0%} of its documents "
                       f"(the most common, \"{top.term}\", in {top.share_in:.0%})")
    if others_median is not None and others_median > 0 and similarity < COHESION_RATIO * others_median:
        reasons.append(f"its documents' mean similarity to the centroid, {similarity:.2f}, is under "
                       f"{COHESION_RATIO:g} times the other clusters' median ({others_median:.2f})")
    return "; ".join(reasons)


def cluster_term_totals(
    counts: sp.csr_matrix, labels: np.ndarray, weights: np.ndarray, k: int
) -> tuple[sp.csr_matrix, sp.csr_matrix]:
    """Weighted document frequency and weighted count of every term in every cluster (k x terms, sparse).

    Computed block by block of rows, so no copy of the count matrix is made.
    """
    df, totals = cluster_sums(counts, weights, labels, k, _presence, lambda block: sp.csr_matrix(block, dtype=float))
    return df, totals


def _presence(block: sp.csr_matrix) -> sp.csr_matrix:
    return sp.csr_matrix((np.ones(block.nnz), block.indices, block.indptr), shape=block.shape)


class NearestDigest:
    """For every key (a cluster, or a cluster and a term), the rows nearest the centroid seen so far.

    Fed block by block, it keeps at most `cap` rows per key (ties go to the earlier row), so its memory
    is O(keys x cap) whatever the number of rows.
    """

    def __init__(self, cap: int) -> None:
        self.cap = cap
        self._keys = np.zeros(0, dtype=np.int64)
        self._rows = np.zeros(0, dtype=np.int64)
        self._distances = np.zeros(0)

    def update(self, rows: np.ndarray, keys: np.ndarray, distances: np.ndarray) -> None:
        """Take in rows (global indices), each with its key and its distance to the centroid."""
        all_keys = np.concatenate([self._keys, keys.astype(np.int64)])
        all_rows = np.concatenate([self._rows, rows.astype(np.int64)])
        all_distances = np.concatenate([self._distances, distances])
        order = np.lexsort((all_rows, all_distances, all_keys))
        sorted_keys = all_keys[order]
        starts = np.flatnonzero(np.r_[True, sorted_keys[1:] != sorted_keys[:-1]])
        rank = np.arange(order.size) - np.repeat(starts, np.diff(np.r_[starts, order.size]))
        kept = order[rank < self.cap]
        self._keys, self._rows, self._distances = all_keys[kept], all_rows[kept], all_distances[kept]

    def nearest(self, key: int) -> tuple[np.ndarray, np.ndarray]:
        """Rows of `key`, nearest first, with their distances."""
        low, high = np.searchsorted(self._keys, [key, key + 1])  # held rows are sorted by key
        return self._rows[low:high], self._distances[low:high]

    def largest_held(self) -> int:
        """The most rows held for any one key."""
        return int(np.bincount(self._keys).max()) if self._keys.size else 0


def term_holders(
    counts: sp.csr_matrix, labels: np.ndarray, distances: np.ndarray, pairs: Sequence[tuple[int, int]], cap: int
) -> NearestDigest:
    """For each (cluster, column) pair, the `cap` members of the cluster holding the term nearest the centroid.

    Keys of the digest are positions in `pairs`. One pass over the count matrix in blocks of rows.
    """
    holders = NearestDigest(cap)
    if not pairs:
        return holders
    n_columns = counts.shape[1]
    codes = np.array([c * n_columns + j for c, j in pairs], dtype=np.int64)
    order = np.argsort(codes, kind="stable")
    for begin in range(0, counts.shape[0], HOLDER_BLOCK):
        block = counts[begin : begin + HOLDER_BLOCK]
        row_of = begin + np.repeat(np.arange(block.shape[0]), np.diff(block.indptr))
        found = labels[row_of].astype(np.int64) * n_columns + block.indices
        hit = np.isin(found, codes)
        at = order[np.searchsorted(codes[order], found[hit])]
        holders.update(row_of[hit], at, distances[row_of[hit]])
    return holders


def _stability_reading(stability: StabilityResult | None, c: int, *, mixed: bool) -> str:
    """The reading of cluster c's stability; a mixed cluster is never read "stable" (see mixed_stability_reading)."""
    if stability is None:
        return ""
    cluster = stability.clusters[c]
    return mixed_stability_reading(cluster.mean_jaccard) if mixed else cluster.reading


def _stability_value(stability: StabilityResult | None, c: int) -> float | None:
    if stability is None or np.isnan(stability.clusters[c].mean_jaccard):
        return None
    return float(stability.clusters[c].mean_jaccard)


def _chi2_terms(
    df_in: np.ndarray, df_all: np.ndarray, size: float, total: float,
    shown: Sequence[str], keys: Sequence[str], top: int,
) -> tuple[TermScore, ...]:
    # only terms held in the cluster can score (an absent term's share in it, 0, is never above its share
    # outside); elementwise arithmetic on the held ones gives the same numbers as on all terms
    held = np.flatnonzero(df_in > 0)
    df_in = df_in[held]
    df_out = df_all[held] - df_in
    rest = total - size
    scores = chi_square_2x2(df_in, df_out, size - df_in, rest - df_out)
    share_in = df_in / size
    share_out = df_out / rest if rest > 0 else np.zeros_like(df_out)
    over = share_in > share_out
    candidates = np.flatnonzero(over & (scores > 0))
    ranked = best_first(candidates, scores, top)  # positions in `held`, which ascends: ties by the lower term
    return tuple(
        TermScore(shown[held[i]], keys[held[i]], float(scores[i]), int(round(df_in[i])), int(round(df_out[i])),
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
    ranked = best_first(candidates, z, top)
    return tuple(
        TermScore(shown[i], keys[i], float(delta[i]), int(round(df_in[i])), int(round(df_out[i])),
                  float(df_in[i] / size), float(df_out[i] / rest) if rest > 0 else 0.0, z=float(z[i]))
        for i in ranked
    )


def _kwic_for(
    terms: Sequence[tuple[TermScore, np.ndarray]], collection: Collection, analyzer: Analyzer,
) -> tuple[KwicLine, ...]:
    """Up to KWIC_LINES_PER_TERM lines per term, from the distinct member texts holding it, nearest first."""
    lines: list[KwicLine] = []
    spans_of: dict[int, list[tuple[int, int, str]]] = {}  # the near members hold several of the cluster's terms
    for term, holders in terms:
        found = 0
        for text_index in holders.tolist():
            doc_index = int(collection.first_doc_of_text[text_index])
            doc = collection.documents[doc_index]
            if doc_index not in spans_of:
                spans_of[doc_index] = analyzer.spans(doc.text)
            line = kwic_line(doc.text, analyzer, term.key, spans=spans_of[doc_index])
            if line is None:
                continue
            lines.append(KwicLine(term.term, line[0], line[1], line[2], doc.doc_id, doc_index))
            found += 1
            if found == KWIC_LINES_PER_TERM:
                break
    return tuple(lines)
