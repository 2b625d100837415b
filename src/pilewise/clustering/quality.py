"""Collection-level quality of a clustering: silhouette, Calinski-Harabasz, Davies-Bouldin."""

from __future__ import annotations

import math
import warnings
from collections.abc import Iterator

import numpy as np
import scipy.sparse as sp
from sklearn import config_context
from sklearn.cluster import KMeans
from sklearn.exceptions import ConvergenceWarning
from sklearn.metrics import silhouette_samples
from sklearn.metrics.pairwise import euclidean_distances
from sklearn.preprocessing import normalize

from pilewise.model import QualityScores

# a seeded sample above it (as scikit-learn's silhouette_score(sample_size=)); on the 50,000-text benchmark
# collection 5,000 rows were as close to the silhouette of all rows as 10,000 (within 0.018 for 5 seeds, 0.002
# for 4 of them; docs/method.md) at a quarter of the distances, for the silhouette and its null reference alike
SILHOUETTE_SAMPLE = 5_000
# CH and DB read the space in row blocks whose float64 working copy stays under BLOCK_BYTES (and at most
# BLOCK_ROWS rows), so a memory-mapped or million-row space is never copied whole
BLOCK_BYTES = 4 * 2**20
BLOCK_ROWS = 50_000
# scikit-learn computes the silhouettes' distances in chunks of `working_memory` MB (1 GB by default). A chunk
# is held about twice over (the similarities and the distances made of them): at 64 MB the 5,000-row sample's
# silhouettes raised the peak memory by 149 MB, at 16 MB by 34 MB, in the same time and with bit-identical
# widths (5,000 x 100 rows, measured); at 50,000 documents the silhouettes had been the run's peak. Rows that fit
# in one chunk of ONE_CHUNK_MB keep it: there scikit-learn sets each row's distance to itself to exactly 0, while
# across chunks a text without terms (a zero row) is at cosine distance 1 from itself, which moved three of the
# demo's silhouettes by 1/245 when its 1,464 rows were split in two.
DISTANCE_CHUNK_MB = 16
ONE_CHUNK_MB = 64


def distance_chunk_mb(n_rows: int) -> int:
    """The `working_memory` for the silhouettes of `n_rows` rows: one chunk up to ONE_CHUNK_MB of distances, as
    before, else chunks of DISTANCE_CHUNK_MB."""
    return ONE_CHUNK_MB if n_rows * n_rows * 8 <= ONE_CHUNK_MB * 2**20 else DISTANCE_CHUNK_MB


NULL_STARTS = 4  # k-means++ starts for the clustering of the null reference

# Bands of the ratio of the silhouette to the null reference's, measured on the open corpora (docs/method.md,
# "Quality of the whole clustering"): at the true number of groups the ratio ran from 1.03 (two newsgroups,
# whose split is no better separated than a split of shuffled vectors) to 2.7 (four sentence sources).
NULL_READINGS: tuple[tuple[float, str], ...] = (
    (2.5, "far better separated than chance"),
    (1.5, "clearly better separated than chance"),
    (1.1, "somewhat better separated than chance"),
    (-math.inf, "no better separated than chance; judge the clusters by their stability and terms"),
)


def silhouette_reading(value: float | None, null: float | None) -> str:
    """One line saying what the silhouette means: it against the same figure on the column-shuffled vectors.

    Parameters
    ----------
    value : float or None
        The clustering's average cosine silhouette.
    null : float or None
        The silhouette of k-means at the same k on `null_space` of the same rows (the null reference).

    Returns
    -------
    str
        ``"<value> against <null> for the same vectors with each dimension shuffled: <band>"``, the band by
        the ratio value / null (NULL_READINGS); ``"not defined"`` without a value, and the value alone
        (``"no null reference"``) when the reference could not be computed.
    """
    if value is None:
        return "not defined"
    if null is None:
        return f"{value:.3f}; no null reference could be computed"
    ratio = value / null if null > 0 else (math.inf if value > null else 1.0)
    band = next(reading for lower, reading in NULL_READINGS if ratio >= lower)
    return f"{value:.3f} against {null:.3f} for the same vectors with each dimension shuffled: {band}"


def null_silhouette(rows: np.ndarray | sp.csr_matrix, k: int, *, seed: int, starts: int = NULL_STARTS) -> float | None:
    """Cosine silhouette of seeded k-means at `k` on `null_space(rows)`: what chance gives with these columns.

    None when the shuffled rows do not fall into at least two clusters (too few distinct rows).
    """
    shuffled = null_space(rows, seed=seed)
    model = KMeans(n_clusters=min(k, shuffled.shape[0]), n_init=starts, random_state=seed)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)  # a null with fewer distinct rows than k
        labels = model.fit_predict(shuffled)
    present = np.unique(labels).size
    if not 2 <= present <= shuffled.shape[0] - 1:
        return None
    with config_context(working_memory=distance_chunk_mb(shuffled.shape[0])):
        return float(silhouette_samples(shuffled, labels, metric="cosine").mean())


def assess(space: np.ndarray | sp.csr_matrix, labels: np.ndarray, *, k: int, seed: int) -> QualityScores:
    """Silhouette (cosine; a seeded sample above SILHOUETTE_SAMPLE texts) with its null reference, CH and DB.

    The null reference is `null_silhouette` on the same sampled rows (k-means at the same k on the rows with
    each column shuffled); the reading compares the two (`silhouette_reading`). CH and DB are Euclidean.

    Scores are over the distinct texts. Silhouette is defined for 2 <= clusters <= n - 1. CH and DB are
    computed in row blocks (see `calinski_harabasz_davies_bouldin`), dense or sparse, at any size.
    """
    n = labels.shape[0]
    present = np.unique(labels).size
    if present < 2 or present > n - 1:
        return QualityScores(None, 0, None, None, silhouette_reading(None, None))
    rows = np.arange(n)
    if n > SILHOUETTE_SAMPLE:
        rows = np.sort(np.random.default_rng(seed).choice(n, SILHOUETTE_SAMPLE, replace=False))
    sample_labels = labels[rows]
    per_cluster: list[float] = []
    silhouette: float | None = None
    null: float | None = None
    if np.unique(sample_labels).size >= 2:
        with config_context(working_memory=distance_chunk_mb(rows.size)):
            widths = silhouette_samples(space[rows], sample_labels, metric="cosine")
        silhouette = float(widths.mean())
        per_cluster = [float(widths[sample_labels == c].mean()) if np.any(sample_labels == c) else float("nan")
                       for c in range(k)]
        null = null_silhouette(space[rows], k, seed=seed)
    ch, db = calinski_harabasz_davies_bouldin(space, labels)
    return QualityScores(
        silhouette=silhouette,
        silhouette_sample=int(rows.size),
        calinski_harabasz=ch,
        davies_bouldin=db,
        silhouette_reading=silhouette_reading(silhouette, null),
        per_cluster_silhouette=tuple(per_cluster),
        null_silhouette=null,
    )


def calinski_harabasz_davies_bouldin(
    space: np.ndarray | sp.csr_matrix, labels: np.ndarray, *, block_rows: int | None = None
) -> tuple[float, float]:
    """Calinski-Harabasz and Davies-Bouldin scores (Euclidean) in two passes over row blocks.

    Calinski, T. & Harabasz, J. (1974), "A dendrite method for cluster analysis", Communications in
    Statistics 3(1); Davies, D. L. & Bouldin, D. W. (1979), "A cluster separation measure", IEEE TPAMI 1(2).
    Same definitions and conventions as scikit-learn's ``calinski_harabasz_score`` and
    ``davies_bouldin_score`` (which copy each cluster's rows and, for sparse input, need it densified).

    Parameters
    ----------
    space : ndarray (any float dtype, memory-mapped or not) or csr_matrix, shape (n, n_dims)
        The clustering space. It is read one block of rows at a time and never copied whole.
    labels : ndarray of int, shape (n,)
        Cluster ids 0..k-1; ids that no row carries are left out, as scikit-learn does. At least two
        clusters must be present, and fewer than n.
    block_rows : int, optional
        Rows per block. Default: as many as keep a float64 block under BLOCK_BYTES, at most BLOCK_ROWS.

    Returns
    -------
    calinski_harabasz, davies_bouldin : float
    """
    data: np.ndarray | sp.csr_matrix = sp.csr_matrix(space) if sp.issparse(space) else np.asarray(space)
    labels = np.asarray(labels)
    n, n_dims = data.shape
    if labels.shape != (n,):
        raise ValueError(f"labels have shape {labels.shape}; expected ({n},), one per row of the space")
    counts = np.bincount(labels).astype(np.float64)
    present = np.flatnonzero(counts)
    if not 1 < present.size < n:
        raise ValueError(f"{present.size} clusters present among {n} rows; need 2 to n - 1")
    ids = counts.size
    if block_rows is None:
        # bytes of float64 working memory per row: a dense row's float64 copy, or for a sparse row its products
        # with the centroids and the copy of its stored values
        per_row = 8 * n_dims if isinstance(data, np.ndarray) else 8 * ids + 16 * data.nnz / max(n, 1)
        block_rows = int(min(BLOCK_ROWS, max(1, BLOCK_BYTES // per_row)))

    # pass 1: per-cluster sums, accumulated in float64, give the centroids
    sums = np.zeros((ids, n_dims))
    for start, stop in _blocks(n, block_rows):
        block_sum = _indicator(labels[start:stop], ids) @ data[start:stop]
        sums += block_sum.toarray() if sp.issparse(block_sum) else block_sum
    centroids = np.zeros_like(sums)
    centroids[present] = sums[present] / counts[present, None]

    # pass 2: each row's distance to its own centroid, summed (DB) and squared (CH's within-cluster dispersion,
    # exact where sum |x|^2 - n |c|^2 would cancel for clusters far from the origin); exact differences for
    # dense rows, the expansion |x|^2 - 2 x.c + |c|^2 for sparse ones (densifying wide rows costs n x n_dims)
    squares = np.zeros(ids)
    distances = np.zeros(ids)
    centroid_norms = np.einsum("ij,ij->i", centroids, centroids)
    for start, stop in _blocks(n, block_rows):
        block_labels = labels[start:stop]
        squared = _squared_distances(data[start:stop], block_labels, centroids, centroid_norms)
        squares += np.bincount(block_labels, weights=squared, minlength=ids)
        distances += np.bincount(block_labels, weights=np.sqrt(squared), minlength=ids)

    size, centres = counts[present], centroids[present]
    n_clusters = present.size
    mean = sums[present].sum(axis=0) / n
    between = float(np.sum(size * np.sum((centres - mean) ** 2, axis=1)))
    within = float(squares[present].sum())
    ch = 1.0 if within == 0.0 else between * (n - n_clusters) / (within * (n_clusters - 1.0))

    spread = distances[present] / size
    separation = euclidean_distances(centres)
    if np.allclose(spread, 0.0) or np.allclose(separation, 0.0):
        return ch, 0.0
    separation[separation == 0] = np.inf
    db = float(np.mean(np.max((spread[:, None] + spread) / separation, axis=1)))
    return ch, db


def _blocks(n: int, block_rows: int) -> Iterator[tuple[int, int]]:
    """Start and stop of consecutive row blocks covering 0..n."""
    for start in range(0, n, block_rows):
        yield start, min(start + block_rows, n)


def _squared_distances(
    rows: np.ndarray | sp.csr_matrix, labels: np.ndarray, centroids: np.ndarray, centroid_norms: np.ndarray
) -> np.ndarray:
    """Squared Euclidean distance of each row to its own cluster's centroid, shape (rows,).

    A function of its own so that a block's (rows x n_dims) temporary is freed before the next block's.
    """
    if isinstance(rows, np.ndarray):
        difference = centroids[labels]
        np.subtract(rows, difference, out=difference)
        return np.einsum("ij,ij->i", difference, difference)
    dots = np.asarray(rows @ centroids.T)[np.arange(rows.shape[0]), labels]
    row_norms = np.asarray(rows.multiply(rows).sum(axis=1)).ravel()
    return np.maximum(row_norms - 2.0 * dots + centroid_norms[labels], 0.0)


def _indicator(labels: np.ndarray, ids: int) -> sp.csc_matrix:
    """Sparse (ids x rows) matrix with a 1.0 at (label, row): its product with the rows sums each cluster."""
    rows = labels.size
    return sp.csc_matrix((np.ones(rows), labels, np.arange(rows + 1)), shape=(ids, rows))


def null_space(space: np.ndarray | sp.csr_matrix, *, seed: int) -> np.ndarray | sp.csr_matrix:
    """A structureless version of the clustering space: each column shuffled on its own, rows back to unit length.

    Every column keeps its values (so the spread along each LSA dimension, or each term's weights, is the
    same), but which values meet in one row is random, so any grouping left is what chance gives with
    these columns: the null reference of a gap-like statistic (Tibshirani, Walther & Hastie 2001 draw
    their reference from a box instead; a permutation reference keeps the data's own marginals).
    Dense: every column permuted independently. Sparse (``--lsa-components 0``): each column's stored
    values moved down by a random number of rows (cyclic), which keeps the matrix sparse.
    """
    rng = np.random.default_rng(np.random.SeedSequence(seed, spawn_key=(0x6E756C6C,)))
    if sp.issparse(space):
        columns = sp.csc_matrix(space, copy=True)
        n = columns.shape[0]
        shift = rng.integers(0, max(n, 1), size=columns.shape[1])
        counts = np.diff(columns.indptr)
        columns.indices = (columns.indices + np.repeat(shift, counts)) % n
        rows = sp.csr_matrix(columns)
        rows.sort_indices()
        shuffled: np.ndarray | sp.csr_matrix = rows
    else:
        shuffled = rng.permuted(np.asarray(space, dtype=np.float64), axis=0)
    return normalize(shuffled)
