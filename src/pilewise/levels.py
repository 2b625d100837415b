"""Cutting one tree at several levels: clusters, headlines and splits for a range of k.

A Ward run cuts its tree over the documents; a k-means run builds a small Ward tree over its own
centroids (weighted by cluster sizes), so both get the same "how it splits" view.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp

from pilewise.clustering import Clustering, clustering_from_labels
from pilewise.hierarchy import Split, Tree, cuts_for_range, dendrogram_svg, split_table, weighted_ward

DENDROGRAM_LEAVES = 30


@dataclass(frozen=True)
class LevelCluster:
    """One cluster of one cut: its size, its headline document and the run's clusters it overlaps."""

    cluster_id: int
    size: int
    exemplar_text: int  # index of the distinct text nearest the centroid
    run_clusters: tuple[int, ...]


@dataclass(frozen=True)
class Levels:
    """Cuts of one tree for every k of a range, with the split from each k to the next."""

    tree_method: str
    k_min: int
    k_max: int
    cuts: dict[int, np.ndarray]  # k -> cluster of every distinct text
    clusters: dict[int, tuple[LevelCluster, ...]]
    splits: tuple[Split, ...]
    dendrogram: str  # SVG


def centroid_tree(clustering: Clustering, weights: np.ndarray) -> Tree:
    """A Ward tree whose leaves are the clusters of a flat clustering, weighted by their sizes."""
    k = clustering.centroids.shape[0]
    sizes = np.bincount(clustering.labels, weights=weights, minlength=k)
    return Tree(
        linkage=weighted_ward(clustering.centroids, sizes),
        leaf_of_row=clustering.labels.copy(),
        leaf_weights=sizes,
        method=f"weighted Ward over the {k} k-means centroids",
        n_leaves=k,
    )


def build_levels(
    tree: Tree,
    space: np.ndarray | sp.csr_matrix,
    weights: np.ndarray,
    run_labels: np.ndarray,
    *,
    k_min: int,
    k_max: int,
    run_k: int,
) -> Levels:
    """Cut `tree` at every k from `k_min` to `k_max` and describe each cut's clusters."""
    k_max = min(k_max, tree.n_leaves)
    k_min = min(k_min, k_max)
    cuts = cuts_for_range(tree, k_min, k_max)
    clusters: dict[int, tuple[LevelCluster, ...]] = {}
    for k, labels in cuts.items():
        cut = clustering_from_labels(space, weights, labels, k=k)
        level = []
        for c in range(k):
            members = np.flatnonzero(cut.labels == c)
            nearest = members[int(np.argmin(cut.distances[members]))]
            overlap = tuple(int(r) for r in np.unique(run_labels[members]))
            level.append(LevelCluster(c, int(round(weights[members].sum())), int(nearest), overlap))
        clusters[k] = tuple(level)
        cuts[k] = cut.labels  # numbered by size, the same rule as the run's own clusters
    splits = tuple(split_table(cuts, weights)) if k_max > k_min else ()
    leaf_names = None
    if tree.n_leaves == run_k:  # a tree over the run's own clusters: name the leaves after them
        leaf_names = [f"{c} ({round(w):,})" for c, w in enumerate(tree.leaf_weights)]
    drawing = dendrogram_svg(tree, top=min(DENDROGRAM_LEAVES, tree.n_leaves), labels=leaf_names,
                             cut_k=run_k if run_k <= tree.n_leaves else None)
    return Levels(tree.method, k_min, k_max, cuts, clusters, splits, drawing)
