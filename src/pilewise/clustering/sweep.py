"""Choosing k: one vectorizing, many cluster counts, quality and stability for each, one recommendation."""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass, replace

import numpy as np
import scipy.sparse as sp

from pilewise.clustering.kmeans import Clustering, farthest_row, kmeans_clusters
from pilewise.clustering.quality import assess, null_space
from pilewise.clustering.stability import ClusterFn, bootstrap_stability, kmeans_cluster_fn, stability_rows
from pilewise.errors import PilewiseError

SWEEP_RESAMPLES = 10  # bootstrap resamples per k inside a sweep (a run's own stability uses --resamples)
STABLE = 0.75  # Hennig's clusterboot documentation: ">= 0.75 valid, stable"
PATTERN = 0.6  # same source: "0.6-0.75 indicates a pattern"


MIN_CLUSTER_TEXTS = 15  # at most (distinct texts / 15) clusters: beyond that, silhouettes of tiny groups only grow
PLATEAU = 0.75  # the smallest k that reaches this share of the best excess over the null reference

RECOMMENDATION_RULE = (
    f"keep the k whose clusters hold {MIN_CLUSTER_TEXTS} distinct texts on average and, when some k of the range "
    f"reaches mean cluster stability {STABLE} (Hennig's 'stable'), whose mean stability is at least {PATTERN} "
    "(Hennig's 'pattern'); when none does, whose mean stability is above that of the same clustering of the "
    "vectors with each dimension shuffled (a structureless null of the same data); score each by its silhouette "
    "minus the silhouette of the same "
    f"vectors with each dimension shuffled; take the best k when the score falls below {PLATEAU:.0%} of its best "
    f"by the end of the range (a peak), else the smallest k reaching {PLATEAU:.0%} of the best (the score still "
    "rises, as it does on most text); the runner-up is the next best score"
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
    null_stability: float | None = None  # measured only when no k of the range reaches STABLE


@dataclass(frozen=True)
class Sweep:
    """Figures for every k of a range and the recommended k with its reason."""

    points: tuple[SweepPoint, ...]
    recommended_k: int
    reason: str
    resamples: int
    stability_rows: int
    warm_start_kept: tuple[int, ...] = ()
    runner_up_k: int | None = None


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
    null_cluster_fn_for: Callable[[int], ClusterFn] | None = None,
) -> Sweep:
    """Silhouette, Calinski-Harabasz, Davies-Bouldin and mean stability of each clustering; recommend one k.

    Stability is Hennig's bootstrap on at most STABILITY_ROWS rows (a seeded sample), re-clustering
    each resample with ``cluster_fn_for(k)``. When no k reaches STABLE, the same is measured on the null
    reference of those rows (`null_stability`), clustered with ``null_cluster_fn_for(k)`` (default:
    `cluster_fn_for`; pass a separate one when the function caches per resample seed, as Ward's does).
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
                                 float(np.mean(values)), float(np.min(values)), clustering.inertia,
                                 quality.null_silhouette))
    if points and max(p.stability_mean for p in points) < STABLE:
        points = with_null_stability(space[sample], weights[sample], points, seed=seed, resamples=resamples,
                                     cluster_fn_for=null_cluster_fn_for or cluster_fn_for)
    k_best, runner_up, reason = recommend_k(points, int(weights.size))
    return Sweep(tuple(points), k_best, reason, resamples, int(sample.size), runner_up_k=runner_up)


def null_stability(
    rows: np.ndarray | sp.csr_matrix, weights: np.ndarray, k: int, *, seed: int, resamples: int, cluster_fn: ClusterFn,
) -> float:
    """Mean cluster stability at k of `rows` with each dimension shuffled (`quality.null_space`).

    The null is clustered once with `cluster_fn` (the run's method), then bootstrapped like the data: what
    stability chance gives at this k with these columns. k-means cuts even structureless data the same way
    in most resamples at small k (on FOLDOC's null 0.98 at k = 2, 0.31 at k = 20), so a fixed bar favours
    the smallest k; this figure is the bar each k has to pass when no k reads "stable".
    """
    null = null_space(rows, seed=seed)
    _, labels = np.unique(np.asarray(cluster_fn(null, weights, seed)), return_inverse=True)
    labels = labels.ravel().astype(np.int64)
    result = bootstrap_stability(null, weights, labels, k=int(labels.max()) + 1, resamples=resamples, seed=seed,
                                 cluster_fn=cluster_fn)
    return result.mean


def with_null_stability(
    rows: np.ndarray | sp.csr_matrix, weights: np.ndarray, points: Sequence[SweepPoint], *, seed: int,
    resamples: int, cluster_fn_for: Callable[[int], ClusterFn],
) -> list[SweepPoint]:
    """The points with `null_stability` measured at each k (on the rows the data's stability used)."""
    return [replace(p, null_stability=null_stability(rows, weights, p.k, seed=seed, resamples=resamples,
                                                     cluster_fn=cluster_fn_for(p.k)))
            for p in points]


def excess(point: SweepPoint) -> float:
    """Silhouette minus its null reference (the silhouette alone when no reference was computed); -2 if undefined."""
    if point.silhouette is None:
        return -2.0
    return point.silhouette - (point.null_silhouette or 0.0)


def recommend_k(points: Sequence[SweepPoint], texts: int) -> tuple[int, int | None, str]:
    """The recommended k, the runner-up k and the reason, by RECOMMENDATION_RULE.

    On text, the silhouette and its excess over the null reference keep growing slowly with k (docs/method.md,
    "Choosing k"), so the highest score sits at the top of the range; the smallest k reaching PLATEAU of it
    is where most of the gain has been made. When the score peaks instead (it falls below PLATEAU of its best
    by the largest k kept), the peak is taken. The size bound keeps k whose clusters are more than a handful
    of texts. Stability keeps k whose clusters reappear in resamples: against Hennig's fixed PATTERN bar when
    some k of the range reads STABLE (stability then tells partitions apart), else against the stability of
    a structureless null at the same k (`null_stability`): with many moderately separated themes no k reads
    stable, and a fixed bar would leave only the smallest k, which k-means cuts repeatably in any data.

    Parameters
    ----------
    points : sequence of SweepPoint
        One per k, in increasing k; `null_stability` set when no k reaches STABLE.
    texts : int
        Distinct texts clustered.

    Returns
    -------
    k, runner_up, reason : int, int or None, str
    """
    sized = [p for p in points if texts / p.k >= MIN_CLUSTER_TEXTS] or list(points[:1])
    kept, level = stability_filter(points, sized)
    best = max(kept, key=lambda p: (excess(p), -p.k))
    top = max(kept, key=lambda p: p.k)
    peaked = top.k != best.k and excess(top) < PLATEAU * excess(best)
    if peaked or excess(best) <= 0:
        chosen, how = best, "the best excess, a peak"
    else:
        chosen = min((p for p in kept if excess(p) >= PLATEAU * excess(best)), key=lambda p: p.k)
        how = f"the smallest k reaching {PLATEAU:.0%} of the best excess (k={best.k}; still rising)"
    others = sorted((p for p in kept if p.k != chosen.k), key=lambda p: (-excess(p), p.k))
    runner_up = others[0].k if others else None
    null = "undefined" if chosen.null_silhouette is None else f"{chosen.null_silhouette:.3f}"
    silhouette = "undefined" if chosen.silhouette is None else f"{chosen.silhouette:.3f}"
    null_stab = "" if chosen.null_stability is None else f" (shuffled vectors {chosen.null_stability:.2f})"
    reason = (f"k={chosen.k}: silhouette {silhouette} against {null} for shuffled vectors, {how}, among the k with "
              f"{level}; mean stability {chosen.stability_mean:.2f}{null_stab}; runner-up "
              f"k={runner_up if runner_up is not None else 'none'}")
    return chosen.k, runner_up, reason


def stability_filter(points: Sequence[SweepPoint], sized: list[SweepPoint]) -> tuple[list[SweepPoint], str]:
    """The sized points that pass the stability bar of RECOMMENDATION_RULE, and the bar in words."""
    size = f"at least {MIN_CLUSTER_TEXTS} texts a cluster"
    if any(p.stability_mean >= STABLE for p in points):
        kept = [p for p in sized if p.stability_mean >= PATTERN]
        if kept:
            return kept, f"mean stability at least {PATTERN} (some k reaches {STABLE}), {size}"
        return sized, f"{size} (no such k reached mean stability {PATTERN})"
    kept = [p for p in sized if p.null_stability is not None and p.stability_mean > p.null_stability]
    if kept:
        return kept, f"mean stability above the shuffled vectors' (no k reaches {STABLE}), {size}"
    return sized, f"{size} (no k reached {STABLE}, and none beat the shuffled vectors' stability)"
