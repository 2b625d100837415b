"""Choosing k: one vectorizing, many cluster counts, quality and stability for each, one recommendation."""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp

from pilewise.clustering import Clustering, farthest_row, kmeans_clusters
from pilewise.quality import assess
from pilewise.stability import bootstrap_stability, kmeans_cluster_fn, stability_rows

STABLE = 0.75  # Hennig's clusterboot documentation: ">= 0.75 valid, stable"
PATTERN = 0.6  # same source: "0.6-0.75 indicates a pattern"


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


@dataclass(frozen=True)
class Sweep:
    """Figures for every k of a range and the recommended k with its reason."""

    points: tuple[SweepPoint, ...]
    recommended_k: int
    reason: str
    resamples: int
    stability_rows: int


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
    """k-means for each k, warm-started from the previous k's centroids plus its farthest row.

    The first k gets `n_init` k-means++ starts; every next k starts once from the previous
    solution with one centre added at the row farthest from its centroid (weighted), which costs
    one run instead of `n_init`. Stability is Hennig's bootstrap on at most STABILITY_ROWS rows
    (a seeded sample).
    """
    sample = stability_rows(weights.size, seed)
    points: list[SweepPoint] = []
    clusterings: dict[int, Clustering] = {}
    previous: Clustering | None = None
    for k in ks:
        if on_k:
            on_k(k)
        init = None
        if previous is not None and previous.centroids.shape[0] == k - 1:
            new_row = farthest_row(space, previous, weights)
            extra = space[new_row].toarray() if sp.issparse(space) else np.asarray(space[new_row : new_row + 1])
            init = np.vstack([previous.centroids, extra.reshape(1, -1)])
        clustering = kmeans_clusters(space, weights, k=k, seed=seed, n_init=n_init, init=init)
        clusterings[k] = clustering
        quality = assess(space, clustering.labels, k=k, seed=seed)
        stability = bootstrap_stability(
            space[sample], weights[sample], clustering.labels[sample], k=k, resamples=resamples, seed=seed,
            cluster_fn=kmeans_cluster_fn(k),
        )
        values = [c.mean_jaccard for c in stability.clusters]
        points.append(SweepPoint(k, quality.silhouette, quality.calinski_harabasz, quality.davies_bouldin,
                                 float(np.mean(values)), float(np.min(values)), clustering.inertia))
        previous = clustering
    k_best, reason = recommend_k(points)
    return Sweep(tuple(points), k_best, reason, resamples, int(sample.size)), clusterings


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
