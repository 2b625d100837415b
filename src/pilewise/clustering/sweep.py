"""Choosing k: one vectorizing, many cluster counts, quality and stability for each, one recommendation."""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass, replace

import numpy as np
import scipy.sparse as sp

from pilewise.clustering.kmeans import Clustering, farthest_row, kmeans_clusters
from pilewise.clustering.quality import assess
from pilewise.clustering.stability import ClusterFn, bootstrap_stability, kmeans_cluster_fn, stability_rows
from pilewise.errors import PilewiseError

SWEEP_RESAMPLES = 10  # bootstrap resamples per k inside a sweep (a run's own stability uses --resamples)
STABLE = 0.75  # Hennig's clusterboot documentation: ">= 0.75 valid, stable"
PATTERN = 0.6  # same source: "0.6-0.75 indicates a pattern"


RECOMMENDATION_RULE = (
    "keep the k whose mean cluster stability is at least 0.75 (Hennig's 'stable'); if none, those at least 0.6; "
    "if none, all; among them take the highest cosine silhouette, ties to the smaller k"
)


@dataclass(frozen=True)
class SweepPoint:
    """Figures of one k."""

    k: int
    silhouette: float | None
    calinski_harabasz: float | None
    davies_bouldin: float | None
    stability_mean: float
    stability_min: float
    inertia: float
    null_silhouette: float | None = None


@dataclass(frozen=True)
class Sweep:
    """Figures for every k of a range and the recommended k with its reason."""

    points: tuple[SweepPoint, ...]
    recommended_k: int
    reason: str
    resamples: int
    stability_rows: int
    warm_start_kept: tuple[int, ...] = ()


def parse_k_range(text: str) -> tuple[int, int]:
    """'2:20' -> (2, 20); raises ValueError with the expected form."""
    parts = text.split(":")
    if len(parts) != 2 or not all(p.strip().isdigit() for p in parts):
        raise ValueError(f"k range {text!r} is not of the form LOW:HIGH, for example 2:20")
    low, high = int(parts[0]), int(parts[1])
    if not 2 <= low < high:
        raise ValueError(f"k range {text!r} must have 2 <= LOW < HIGH, for example 2:20")
    return low, high


def sweep_kmeans(
    space: np.ndarray | sp.csr_matrix,
    weights: np.ndarray,
    ks: Sequence[int],
    *,
    seed: int,
    n_init: int,
    resamples: int,
    on_k: Callable[[int], None] | None = None,
) -> tuple[Sweep, dict[int, Clustering]]:
    """k-means for each k: `n_init` k-means++ starts, plus one warm start from the previous k.

    The warm start takes the previous k's centroids and adds a centre at the row farthest from its
    centroid (weighted); it is kept only when its inertia is lower than the best fresh start's, so
    it can help and never hurts (on the demo collection it rarely wins: see docs/performance.md).
    """
    clusterings: dict[int, Clustering] = {}
    previous: Clustering | None = None
    warm_wins: dict[int, bool] = {}
    for k in ks:
        try:
            fresh = kmeans_clusters(space, weights, k=k, seed=seed, n_init=n_init)
        except PilewiseError:
            if not clusterings:
                raise
            break  # fewer distinct groups of texts than k: the range ends here
        best, warm_wins[k] = fresh, False
        if previous is not None and previous.centroids.shape[0] == k - 1:
            new_row = farthest_row(space, previous, weights)
            extra = space[new_row].toarray() if sp.issparse(space) else np.asarray(space[new_row : new_row + 1])
            init = np.vstack([previous.centroids, extra.reshape(1, -1)])
            try:
                warm = kmeans_clusters(space, weights, k=k, seed=seed, n_init=1, init=init)
            except PilewiseError:
                warm = fresh
            if warm.inertia < fresh.inertia:
                best, warm_wins[k] = warm, True
        previous = clusterings[k] = best
    sweep = sweep_clusterings(space, weights, clusterings, seed=seed, resamples=resamples,
                              cluster_fn_for=kmeans_cluster_fn, on_k=on_k)
    return replace(sweep, warm_start_kept=tuple(k for k, won in warm_wins.items() if won)), clusterings


def sweep_clusterings(
    space: np.ndarray | sp.csr_matrix,
    weights: np.ndarray,
    clusterings: dict[int, Clustering],
    *,
    seed: int,
    resamples: int,
    cluster_fn_for: Callable[[int], ClusterFn],
    on_k: Callable[[int], None] | None = None,
) -> Sweep:
    """Silhouette, Calinski-Harabasz, Davies-Bouldin and mean stability of each clustering; recommend one k.

    Stability is Hennig's bootstrap on at most STABILITY_ROWS rows (a seeded sample), re-clustering
    each resample with ``cluster_fn_for(k)``.
    """
    sample = stability_rows(weights.size, seed)
    points: list[SweepPoint] = []
    for k, clustering in sorted(clusterings.items()):
        if on_k:
            on_k(k)
        quality = assess(space, clustering.labels, k=k, seed=seed)
        stability = bootstrap_stability(
            space[sample], weights[sample], clustering.labels[sample], k=k, resamples=resamples, seed=seed,
            cluster_fn=cluster_fn_for(k),
        )
        values = [c.mean_jaccard for c in stability.clusters if not np.isnan(c.mean_jaccard)]
        points.append(SweepPoint(k, quality.silhouette, quality.calinski_harabasz, quality.davies_bouldin,
                                 float(np.mean(values)), float(np.min(values)), clustering.inertia))
    k_best, reason = recommend_k(points)
    return Sweep(tuple(points), k_best, reason, resamples, int(sample.size))


def recommend_k(points: Sequence[SweepPoint]) -> tuple[int, str]:
    """The k with the highest silhouette among those whose clusters are stable on average.

    Rule: keep the k whose mean cluster stability is at least 0.75 (Hennig's "stable"); if none,
    those at least 0.6 ("a pattern"); if none, all. Among them take the highest cosine
    silhouette; ties go to the smaller k.
    """
    candidates = [p for p in points if p.stability_mean >= STABLE]
    level = f"among the k whose mean cluster stability is at least {STABLE}"
    if not candidates:
        candidates = [p for p in points if p.stability_mean >= PATTERN]
        level = f"among the k whose mean stability is at least {PATTERN} (none reached {STABLE})"
    if not candidates:
        candidates = list(points)
        level = f"among all k (none reached mean stability {PATTERN})"
    best = max(candidates, key=lambda p: (p.silhouette if p.silhouette is not None else -2.0, -p.k))
    silhouette = "undefined" if best.silhouette is None else f"{best.silhouette:.3f}"
    reason = f"k={best.k} has the highest silhouette ({silhouette}) {level}; its mean stability is " \
        f"{best.stability_mean:.2f}"
    return best.k, reason
