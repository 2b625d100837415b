"""The run's clustering method (k-means, mini-batch k-means, or a Ward tree cut) at one k or a range of k.

Plain arguments only: the method, the seed and the number of k-means starts come from the run's options,
which the pipeline resolves.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
import scipy.sparse as sp

from pilewise.clustering.hierarchy import Tree, cut_tree, ward_tree
from pilewise.clustering.kmeans import Clustering, clustering_from_labels, kmeans_clusters, minibatch_clusters
from pilewise.clustering.stability import ClusterFn, kmeans_cluster_fn
from pilewise.clustering.sweep import SWEEP_RESAMPLES, Sweep, sweep_clusterings, sweep_kmeans
from pilewise.errors import PilewiseError
from pilewise.progress import Reporter


def _dense(space: np.ndarray | sp.csr_matrix) -> np.ndarray:
    if sp.issparse(space):
        raise PilewiseError("--method ward needs the LSA space; do not pass --lsa-components 0 with it")
    return np.asarray(space)


def _cluster_at(
    space: np.ndarray | sp.csr_matrix, weights: np.ndarray, k: int, tree: Tree | None, *, seed: int, starts: int,
    streamed: bool = False, reporter: Reporter | None = None, workers: int = 1,
) -> Clustering:
    """One clustering at k: a cut of the Ward tree, mini-batch k-means (streamed), or k-means (its starts on
    two processes with `workers` > 1, the same clustering)."""
    if tree is not None:
        return clustering_from_labels(space, weights, cut_tree(tree, k), k=k)
    if streamed:
        track = (lambda steps, total: reporter.track(steps, total=total, label="mini-batches", unit="batch")) \
            if reporter is not None else None
        return minibatch_clusters(space, weights, k=k, seed=seed, track=track)
    return kmeans_clusters(space, weights, k=k, seed=seed, n_init=starts, workers=workers)


def _stability_fn(method: str, k: int, cache: dict[int, Tree] | None = None) -> ClusterFn:
    """Re-clustering of a resample with the run's own method; Ward trees are cached per resample seed."""
    if method != "ward":
        return kmeans_cluster_fn(k)
    trees = cache if cache is not None else {}

    def ward_cut(rows: np.ndarray | sp.csr_matrix, weights: np.ndarray, seed: int) -> np.ndarray:
        if seed not in trees:
            trees[seed] = ward_tree(np.asarray(rows), weights, seed=seed)
        return cut_tree(trees[seed], min(k, trees[seed].n_leaves))

    return ward_cut


def sweep_k(
    space: np.ndarray | sp.csr_matrix, weights: np.ndarray, k_min: int, k_max: int, tree: Tree | None, *,
    method: str, seed: int, starts: int, resamples: int, say: Callable[[int], None] | None = None,
) -> tuple[Sweep, dict[int, Clustering]]:
    """Quality and stability for every k of the range, sharing the vectors (and the tree, for Ward)."""
    ks = list(range(k_min, k_max + 1))
    if tree is None:
        return sweep_kmeans(space, weights, ks, seed=seed, n_init=starts,
                            resamples=min(resamples, SWEEP_RESAMPLES), on_k=say)
    cache: dict[int, Tree] = {}
    null_cache: dict[int, Tree] = {}  # trees of the shuffled rows, never mixed with the data's
    k_max = min(k_max, tree.n_leaves)
    clusterings = {k: _cluster_at(space, weights, k, tree, seed=seed, starts=starts)
                   for k in range(k_min, k_max + 1)}
    return sweep_clusterings(space, weights, clusterings, seed=seed, resamples=min(resamples, SWEEP_RESAMPLES),
                             cluster_fn_for=lambda k: _stability_fn(method, k, cache), on_k=say,
                             null_cluster_fn_for=lambda k: _stability_fn(method, k, null_cache)), clusterings
