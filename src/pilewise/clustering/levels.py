"""Cutting one tree at several levels: clusters, exemplars and splits for a range of k.

A Ward run cuts its tree over the documents; a k-means run builds a small Ward tree over its own
centroids (weighted by cluster sizes), so both get the same "how it splits" view.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import scipy.sparse as sp
from sklearn.preprocessing import normalize

from pilewise.clustering.hierarchy import Split, Tree, cuts_for_range, dendrogram_svg, split_table, weighted_ward
from pilewise.clustering.kmeans import Clustering, weighted_sums

DENDROGRAM_LEAVES = 30

# rows per block when finding every cut cluster's nearest member: each block's similarities to all cuts'
# centroids (rows x the sum of k over the cuts, 209 columns for k 2-20) were 84 MB at 50,000 texts in one
# block of 65,536 rows, with a 40 MB normalized copy of the space, the run's peak; rows are taken in order,
# so the nearest member (ties to the earlier row) is the same with any block size
NEAREST_BLOCK = 8_192


@dataclass(frozen=True)
class LevelCluster:
    """One cluster of one cut: its size, the text nearest its centroid and the run's clusters it overlaps."""

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
    # k -> per cluster of the cut, its distinguishing terms (filled by describe.summaries.level_terms)
    terms: dict[int, tuple[tuple[str, ...], ...]] = field(default_factory=dict)


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
    cuts = {k: labels.astype(np.int32) for k, labels in cuts_for_range(tree, k_min, k_max).items()}
    ks = sorted(cuts)
    # every cut's centroids from the leaves' weighted sums (one pass over the rows), then one more pass in
    # blocks finds each cut cluster's member nearest its centroid, for all cuts at once
    leaf_sums = weighted_sums(space, weights, tree.leaf_of_row, tree.n_leaves)
    centroids = []
    for k in ks:
        leaf_label = np.zeros(tree.n_leaves, dtype=np.int64)
        leaf_label[tree.leaf_of_row] = cuts[k]
        centroids.append(normalize(weighted_sums(leaf_sums, np.ones(tree.n_leaves), leaf_label, k)))
    offsets = np.cumsum([0] + ks[:-1])
    stacked = np.vstack(centroids)
    best_distance = {k: np.full(k, np.inf) for k in ks}
    best_row = {k: np.zeros(k, dtype=np.int64) for k in ks}
    for begin in range(0, weights.size, NEAREST_BLOCK):
        block = space[begin : begin + NEAREST_BLOCK]
        block = normalize(block) if sp.issparse(block) else normalize(np.asarray(block, dtype=np.float64))
        similarity = np.asarray(block @ stacked.T)
        leaves = _LeafGroups(tree.leaf_of_row[begin : begin + NEAREST_BLOCK])
        rows = np.arange(similarity.shape[0])
        for k, offset in zip(ks, offsets, strict=True):
            labels = cuts[k][begin : begin + NEAREST_BLOCK]
            distance = np.clip(1.0 - similarity[rows, offset + labels], 0.0, 2.0)
            present, candidate, candidate_distance = leaves.nearest(distance, labels)
            better = candidate_distance < best_distance[k][present]  # strict: ties keep the earlier row
            best_distance[k][present[better]] = candidate_distance[better]
            best_row[k][present[better]] = begin + candidate[better]
    run_k_of = int(run_labels.max()) + 1
    clusters: dict[int, tuple[LevelCluster, ...]] = {}
    for k in ks:
        sizes = np.bincount(cuts[k], weights=weights, minlength=k)
        pairs = np.unique(cuts[k].astype(np.int64) * run_k_of + run_labels)
        overlap = {c: tuple(int(p % run_k_of) for p in pairs[pairs // run_k_of == c]) for c in range(k)}
        clusters[k] = tuple(LevelCluster(c, int(round(sizes[c])), int(best_row[k][c]), overlap[c]) for c in range(k))
    splits = tuple(split_table(cuts, weights)) if k_max > k_min else ()
    leaf_names = None
    if tree.n_leaves == run_k:  # a tree over the run's own clusters: name the leaves after them
        leaf_names = [f"{c} ({round(w):,})" for c, w in enumerate(tree.leaf_weights)]
    drawing = dendrogram_svg(tree, top=min(DENDROGRAM_LEAVES, tree.n_leaves), labels=leaf_names,
                             cut_k=run_k if run_k <= tree.n_leaves else None)
    return Levels(tree.method, k_min, k_max, cuts, clusters, splits, drawing)


class _LeafGroups:
    """A block's rows grouped by their leaf of the tree, in row order: every cut gives all rows of a leaf one
    cluster, so a cluster's nearest row is the nearest of its leaves' nearest rows (k x leaves, not k x rows,
    sorted)."""

    def __init__(self, leaf_of_row: np.ndarray) -> None:
        self.order = np.argsort(leaf_of_row, kind="stable")  # rows of one leaf together, earlier rows first
        leaf = leaf_of_row[self.order]
        self.starts = np.flatnonzero(np.r_[True, leaf[1:] != leaf[:-1]])
        self.lengths = np.diff(np.r_[self.starts, leaf.size])
        self.positions = np.arange(leaf.size)

    def nearest(self, distance: np.ndarray, labels: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Per cluster present in `labels`: the cluster, its row of least distance (ties: the earlier row), that
        distance."""
        by_leaf = distance[self.order]
        leaf_min = np.minimum.reduceat(by_leaf, self.starts)
        at_min = by_leaf == np.repeat(leaf_min, self.lengths)
        first = np.minimum.reduceat(np.where(at_min, self.positions, self.positions.size), self.starts)
        leaf_row = self.order[first]  # each leaf's earliest row at its least distance
        cluster = labels[leaf_row]
        order = np.lexsort((leaf_row, leaf_min, cluster))
        present, first_of = np.unique(cluster[order], return_index=True)
        chosen = order[first_of]
        return present, leaf_row[chosen], leaf_min[chosen]
