"""Clusterwise bootstrap stability: mean Jaccard similarity of each cluster to its best match in resamples.

Hennig, C. (2007), "Cluster-wise assessment of cluster stability", Computational Statistics & Data
Analysis 52(1):258-271; the readings are the rules of thumb in the author's R package fpc (clusterboot).
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Callable, Iterable
from dataclasses import dataclass
from typing import TypeAlias

import numpy as np
import scipy.sparse as sp
from sklearn.cluster import KMeans
from sklearn.exceptions import ConvergenceWarning

ClusterFn: TypeAlias = Callable[[np.ndarray | sp.csr_matrix, np.ndarray, int], np.ndarray]
"""(space rows, weights, seed) -> one label per row; any integers serve as labels."""

# Rules of thumb for the mean bootstrap Jaccard similarity, from the clusterboot documentation of the
# R package fpc by Hennig (Details section; see shared/CHECKS.md): <= 0.5 dissolved (the `dissolution`
# default), below 0.6 not to be trusted, 0.6 to 0.75 a pattern whose members are doubtful, 0.75 or more
# stable, 0.85 and above highly stable. A value reads as the first row whose lower bound it reaches.
# "Dissolved" includes 0.5 itself, so the row above it starts at the next float after 0.5.
STABILITY_READINGS: tuple[tuple[float, str], ...] = (
    (0.85, "highly stable"),
    (0.75, "stable"),
    (0.6, "a pattern, but which points belong is doubtful"),
    (math.nextafter(0.5, 1.0), "should not be trusted"),
    (-math.inf, "dissolved"),
)
NOT_DEFINED = "not defined"


@dataclass(frozen=True)
class ClusterStability:
    """Bootstrap stability of one original cluster.

    Attributes
    ----------
    cluster_id : int
        The original cluster label.
    mean_jaccard : float
        Mean over the counted resamples of the best Jaccard similarity; NaN if none counted.
    std_jaccard : float
        Population standard deviation (ddof=0) over the counted resamples; NaN if none counted.
    resamples_counted : int
        Resamples that contained at least one point of the cluster.
    reading : str
        `stability_reading(mean_jaccard)`.
    """

    cluster_id: int
    mean_jaccard: float
    std_jaccard: float
    resamples_counted: int
    reading: str


@dataclass(frozen=True)
class StabilityResult:
    """Clusterwise stability of a whole clustering.

    Attributes
    ----------
    clusters : tuple of ClusterStability
        One entry per original cluster, in label order 0..k-1.
    resamples : int
        Bootstrap resamples drawn (B).
    seed : int
        The seed every resample was derived from.
    mean : float
        Mean of `mean_jaccard` over the clusters counted in at least one resample.
    """

    clusters: tuple[ClusterStability, ...]
    resamples: int
    seed: int
    mean: float


STABILITY_ROWS = 5_000  # rows re-clustered per resample at most; a seeded sample above that


def stability_rows(n: int, seed: int, cap: int = STABILITY_ROWS) -> np.ndarray:
    """Indexes of the rows used for stability: all of them up to `cap`, else a seeded sample, sorted."""
    if n <= cap:
        return np.arange(n)
    return np.sort(np.random.default_rng(seed).choice(n, cap, replace=False))


def stability_reading(value: float) -> str:
    """Reading of a mean bootstrap Jaccard similarity by fpc's clusterboot rules of thumb (Hennig)."""
    if math.isnan(value):
        return NOT_DEFINED
    for lower, reading in STABILITY_READINGS:
        if value >= lower:
            return reading
    return NOT_DEFINED  # unreachable: the last lower bound is -inf


def mixed_stability_reading(value: float) -> str:
    """Reading of a mixed cluster's stability (one with no common theme, `describe.summaries.mixed_reason`).

    Stability measures whether k-means finds the same group again, not whether the group is one theme: a
    grab-bag of leftovers can come back in every resample (on the chat categories, mixed clusters read 0.64
    to 0.91). So a mixed cluster is never read "stable": from 0.6 up its reading says that the same mix
    reappears; below 0.6 the usual reading already warns.
    """
    reading = stability_reading(value)
    if math.isnan(value) or value < PATTERN_FLOOR:
        return reading
    return "mixed, yet it reappears in resamples: a repeatable grab-bag, not one theme"


PATTERN_FLOOR = 0.6  # the lower bound of "a pattern" in STABILITY_READINGS


def bootstrap_stability(
    space: np.ndarray | sp.csr_matrix,
    weights: np.ndarray,
    labels: np.ndarray,
    *,
    k: int,
    resamples: int,
    seed: int,
    cluster_fn: ClusterFn,
    track: Callable[[range], Iterable[int]] | None = None,
    subsample: float | None = None,
) -> StabilityResult:
    """Clusterwise bootstrap stability (Hennig 2007): mean Jaccard similarity to the best-matching cluster.

    For each of `resamples` bootstrap draws of n rows with replacement, the distinct drawn rows are
    re-clustered with `cluster_fn` (each drawn row used once, weighted by its duplicate count, as fpc's
    clusterboot does by default with ``multipleboot=FALSE``). For each original cluster C, with C* the
    drawn rows of C, the resample's value is max over resample clusters D of |C* ∩ D| / |C* ∪ D|, all
    over distinct rows. A resample without any row of C is skipped for C. Stability is the mean over the
    resamples counted.

    Parameters
    ----------
    space : ndarray or csr_matrix, shape (n_rows, n_dims)
        The clustering space, one row per distinct text.
    weights : ndarray, shape (n_rows,)
        Duplicate count of each row (positive); passed on as sample weights.
    labels : ndarray of int, shape (n_rows,)
        The original cluster of each row, in 0..k-1.
    k : int
        Number of original clusters.
    resamples : int
        Number of bootstrap resamples B (at least 1; fpc's default is 100).
    seed : int
        Non-negative. Resample i draws from ``default_rng(SeedSequence(seed, spawn_key=(i,)))``, so it
        depends only on `seed` and i, not on B, and never coincides with ``default_rng(seed)``.
    cluster_fn : ClusterFn
        Called as ``cluster_fn(rows, row_weights, resample_seed)``; returns one integer label per row.
    track : callable, optional
        Wraps the loop over the resamples (a progress bar).
    subsample : float, optional
        Draw this share of the rows without replacement instead of a bootstrap draw (Hennig's "subsetting"
        scheme); measured against the bootstrap in docs/method.md, not used by runs.

    Returns
    -------
    StabilityResult

    Raises
    ------
    ValueError
        If `resamples` < 1, `k` < 1, `seed` < 0, shapes disagree, a weight is not positive, a label is
        outside 0..k-1, or `cluster_fn` returns the wrong number of labels.
    """
    n = _check_inputs(space, weights, labels, k=k, resamples=resamples, seed=seed)
    labels = np.asarray(labels, dtype=np.int64)
    weights = np.asarray(weights, dtype=float)
    values = np.full((resamples, k), np.nan)
    for i in track(range(resamples)) if track else range(resamples):
        rng = np.random.default_rng(np.random.SeedSequence(seed, spawn_key=(i,)))
        rows = (np.unique(rng.integers(0, n, size=n)) if subsample is None
                else np.sort(rng.choice(n, max(1, round(subsample * n)), replace=False)))
        resample_seed = int(rng.integers(0, 2**31 - 1))
        new_labels = np.asarray(cluster_fn(space[rows], weights[rows], resample_seed))
        if new_labels.shape != (rows.size,):
            raise ValueError(
                f"cluster_fn returned labels of shape {new_labels.shape} for {rows.size} rows; "
                "it must return one label per row"
            )
        values[i] = best_jaccard(labels[rows], new_labels, k=k)
    counted = np.sum(~np.isnan(values), axis=0)
    clusters = []
    for c in range(k):
        column = values[:, c][~np.isnan(values[:, c])]
        mean = float(column.mean()) if column.size else math.nan
        std = float(column.std()) if column.size else math.nan
        clusters.append(ClusterStability(c, mean, std, int(counted[c]), stability_reading(mean)))
    means = [cluster.mean_jaccard for cluster in clusters if cluster.resamples_counted]
    # Every resample holds a row of some cluster, so at least one cluster is counted and `means` is not empty.
    return StabilityResult(clusters=tuple(clusters), resamples=resamples, seed=seed, mean=float(np.mean(means)))


def best_jaccard(original: np.ndarray, new: np.ndarray, *, k: int) -> np.ndarray:
    """Per original cluster 0..k-1, the largest Jaccard similarity to a cluster of `new`; NaN if absent.

    Both label arrays cover the same distinct points. Jaccard(C, D) = |C ∩ D| / |C ∪ D|
    = n_cd / (n_c + n_d - n_cd) from the contingency table n of the two labelings.
    """
    new_values, new_index = np.unique(new, return_inverse=True)
    m = new_values.size
    table = np.bincount(original * m + new_index.ravel(), minlength=k * m).reshape(k, m).astype(float)
    size_c = table.sum(axis=1)
    size_d = table.sum(axis=0)
    union = size_c[:, None] + size_d[None, :] - table
    jaccard = np.divide(table, union, out=np.zeros_like(table), where=union > 0)
    return np.where(size_c > 0, jaccard.max(axis=1, initial=0.0), np.nan)


RESAMPLE_STARTS = 4
"""k-means++ starts per resample, as many as the run's own k-means above 1,000 texts. With one start, k-means on
a resample often lands in another local optimum than the run's best-of-several clustering, and a cluster that is
nearly pure in the gold labels then reads "dissolved" (docs/method.md, "Stability of each cluster")."""


def kmeans_cluster_fn(k: int, n_init: int = RESAMPLE_STARTS) -> ClusterFn:
    """A ClusterFn running seeded scikit-learn k-means (`n_init` k-means++ starts) with sample weights.

    The re-clustering of a resample should be the run's own method, restarts included (Hennig 2007 re-runs
    the whole method); hence RESAMPLE_STARTS starts by default. With fewer rows than `k` in a resample, it
    asks for as many clusters as there are rows.
    """
    if k < 1:
        raise ValueError(f"k={k} must be at least 1")
    if n_init < 1:
        raise ValueError(f"n_init={n_init} must be at least 1")

    def cluster(rows: np.ndarray | sp.csr_matrix, row_weights: np.ndarray, seed: int) -> np.ndarray:
        model = KMeans(n_clusters=min(k, rows.shape[0]), n_init=n_init, random_state=seed)
        with warnings.catch_warnings():
            # a resample may hold fewer distinct points than k; the Jaccard matching copes with that
            warnings.simplefilter("ignore", ConvergenceWarning)
            return np.asarray(model.fit_predict(rows, sample_weight=row_weights))

    return cluster


def _check_inputs(
    space: np.ndarray | sp.csr_matrix, weights: np.ndarray, labels: np.ndarray, *, k: int, resamples: int, seed: int
) -> int:
    """Validate the arguments of `bootstrap_stability`, reporting every problem at once; return n."""
    problems: list[str] = []
    if resamples < 1:
        problems.append(f"resamples={resamples} must be at least 1")
    if k < 1:
        problems.append(f"k={k} must be at least 1")
    if seed < 0:
        problems.append(f"seed={seed} must be non-negative")
    n = space.shape[0]
    weights = np.asarray(weights)
    labels = np.asarray(labels)
    if n < 1:
        problems.append("space has no rows")
    if weights.shape != (n,):
        problems.append(f"weights has shape {weights.shape}, expected ({n},) like the rows of space")
    elif np.any(~(weights > 0)):
        problems.append("every weight must be positive")
    if labels.shape != (n,):
        problems.append(f"labels has shape {labels.shape}, expected ({n},) like the rows of space")
    elif not np.issubdtype(labels.dtype, np.integer):
        problems.append(f"labels must be integers, got {labels.dtype}")
    elif labels.size and (labels.min() < 0 or labels.max() >= k):
        problems.append(f"labels must lie in 0..{k - 1}, found {labels.min()}..{labels.max()}")
    if problems:
        raise ValueError("; ".join(problems))
    return int(n)
