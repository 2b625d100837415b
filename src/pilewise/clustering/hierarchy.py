"""Hierarchy stage: a Ward tree over the clustering space, its cuts, how clusters split, and a dendrogram.

Small collections get the full Ward tree over their distinct texts. Above ``full_limit`` texts the condensed
distance matrix (n(n-1)/2 doubles) outgrows memory and time, so the tree is built in two stages: seeded
mini-batch k-means into a few hundred small groups, then Ward over the group centroids weighted by the
number of documents in each group. Ward's criterion depends on clusters only through their weights and
centroids, so the second stage is exactly Ward's agglomeration continued from the k-means partition.
"""

from __future__ import annotations

import io
import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from scipy.cluster.hierarchy import dendrogram, linkage
from scipy.spatial.distance import pdist, squareform
from sklearn.cluster import MiniBatchKMeans

from pilewise.errors import PilewiseError

FULL_WARD_LIMIT = 20_000
"""Largest number of distinct texts that get the full Ward tree (benchmarks/measure_ward.py)."""

TWO_STAGE_GROUPS = 300
"""Number of k-means groups, the leaves of the two-stage tree."""

LINK_COLOUR = "#2f5d62"
CUT_COLOUR = "#b5651d"
# No <metadata> block at all: no date, and no creator or type URIs.
_SVG_METADATA: dict[str, str | None] = {"Date": None, "Creator": None, "Format": None, "Type": None}


@dataclass(frozen=True)
class Tree:
    """A Ward tree over the rows of the clustering space.

    Attributes
    ----------
    linkage : ndarray, shape (n_leaves - 1, 4)
        SciPy-format linkage matrix over the leaves: the two merged nodes, the Ward merge height and the
        number of leaves under the new node (SciPy checks that this count never exceeds n_leaves, so it
        cannot hold document weights; `node_weights` gives those).
    leaf_of_row : ndarray of int, shape (n_rows,)
        Leaf of each row of the space: the row itself for the full tree, its k-means group otherwise.
    leaf_weights : ndarray, shape (n_leaves,)
        Total weight (number of documents) of each leaf.
    method : str
        ``"full Ward"`` or ``"two-stage: k-means into M groups, then weighted Ward"`` with M filled in.
    n_leaves : int
        Number of leaves of the tree.
    """

    linkage: np.ndarray
    leaf_of_row: np.ndarray
    leaf_weights: np.ndarray
    method: str
    n_leaves: int


@dataclass(frozen=True)
class Split:
    """How the clusters of the cut into k become the clusters of the cut into k + 1.

    Attributes
    ----------
    k : int
        Number of clusters before the split.
    parent : int
        The cluster at k that splits in two.
    parent_size : int
        Its number of documents (sum of the row weights).
    children : tuple of two (cluster at k + 1, size) pairs
        The two parts, in order of their cluster numbers at k + 1 (largest first).
    carried : tuple of (cluster at k, cluster at k + 1) pairs
        Every other cluster, which carries over unchanged but may be renumbered, in order of the first number.
    """

    k: int
    parent: int
    parent_size: int
    children: tuple[tuple[int, int], tuple[int, int]]
    carried: tuple[tuple[int, int], ...]


def ward_tree(
    space: np.ndarray,
    weights: np.ndarray,
    *,
    seed: int,
    full_limit: int = FULL_WARD_LIMIT,
    groups: int = TWO_STAGE_GROUPS,
) -> Tree:
    """Ward's minimum-variance tree: full up to `full_limit` rows, two-stage above.

    Parameters
    ----------
    space : ndarray, shape (n_rows, n_dims)
        Dense clustering space, one unit-length row per distinct text (the LSA vectors).
    weights : ndarray, shape (n_rows,)
        Positive weight of each row: its number of copies among the documents.
    seed : int
        Seed of the k-means step of the two-stage tree (unused by the full tree).
    full_limit : int, default FULL_WARD_LIMIT
        Largest number of rows for the full tree.
    groups : int, default TWO_STAGE_GROUPS
        Number of k-means groups of the two-stage tree; at most ``n_rows // 2`` (and at least 2) are used.

    Returns
    -------
    Tree

    Notes
    -----
    Full tree (``n_rows <= full_limit``): ``scipy.cluster.hierarchy.linkage(space, method="ward")``, whose
    heights follow Müllner's convention ``d(A, B) = sqrt(2 |A| |B| / (|A| + |B|)) * ||c_A - c_B||``. SciPy's
    Ward takes no weights, so every distinct text counts once in the merges whatever its number of copies;
    the weights only enter the leaf weights (and so the sizes of clusters).

    Two-stage tree (``n_rows > full_limit``): seeded mini-batch k-means (Sculley 2010) with the weights as
    sample weights puts the rows into ``min(groups, n_rows // 2)`` groups (at least 2; empty ones are dropped), then
    `weighted_ward` merges the weighted group centroids. This is the "mixed" or hybrid strategy of
    k-means preclustering followed by Ward on the cluster centres (Wong 1982; the ``kk`` argument of
    FactoMineR's ``HCPC``, documented there). Ward's merge cost depends on clusters only through their
    weights and centroids, so the top of this tree is exactly Ward's agglomeration started from the k-means
    partition; only the partition into groups differs from the full tree.

    References
    ----------
    Ward, J. H. (1963). Hierarchical grouping to optimize an objective function. JASA 58(301), 236-244.
    Müllner, D. (2011). Modern hierarchical, agglomerative clustering algorithms. arXiv:1109.2378.
    Sculley, D. (2010). Web-scale k-means clustering. Proceedings of WWW 2010, 1177-1178.
    Wong, M. A. (1982). A hybrid clustering method for identifying high-density clusters. JASA 77(380),
    841-847 (citation from memory).
    """
    space = np.asarray(space, dtype=float)
    weights = np.asarray(weights, dtype=float)
    _check_space(space, weights)
    n_rows = space.shape[0]
    if full_limit < 2:
        raise ValueError(f"full_limit={full_limit} must be at least 2")
    if n_rows <= full_limit:
        merges = linkage(space, method="ward")
        return Tree(
            linkage=merges,
            leaf_of_row=np.arange(n_rows),
            leaf_weights=weights.copy(),
            method="full Ward",
            n_leaves=n_rows,
        )
    if groups < 2:
        raise ValueError(f"groups={groups} must be at least 2")
    n_groups = max(2, min(groups, n_rows // 2))
    model = MiniBatchKMeans(n_clusters=n_groups, n_init=1, batch_size=4096, random_state=seed)
    raw_groups = model.fit_predict(space, sample_weight=weights)
    # Groups k-means left empty have no centroid of their own; renumber the rest 0..M-1 in order.
    used, leaf_of_row = np.unique(raw_groups, return_inverse=True)
    n_leaves = len(used)
    if n_leaves < 2:
        raise PilewiseError(
            f"the {n_rows} distinct documents fall into a single k-means group, so there is no hierarchy; "
            "check that the documents differ in their words"
        )
    leaf_weights = np.bincount(leaf_of_row, weights=weights, minlength=n_leaves)
    # Weighted means of the member rows (not model.cluster_centers_, which predate the last assignment).
    sums = np.zeros((n_leaves, space.shape[1]))
    np.add.at(sums, leaf_of_row, space * weights[:, None])
    centroids = sums / leaf_weights[:, None]
    return Tree(
        linkage=weighted_ward(centroids, leaf_weights),
        leaf_of_row=leaf_of_row,
        leaf_weights=leaf_weights,
        method=f"two-stage: k-means into {n_leaves} groups, then weighted Ward",
        n_leaves=n_leaves,
    )


def weighted_ward(points: np.ndarray, weights: np.ndarray) -> np.ndarray:
    """Ward's agglomeration of weighted points, as a SciPy-format linkage matrix.

    Parameters
    ----------
    points : ndarray, shape (m, n_dims)
        The points (here: group centroids).
    weights : ndarray, shape (m,)
        Positive weight of each point (here: documents in the group).

    Returns
    -------
    ndarray, shape (m - 1, 4)
        Rows ``[node_a, node_b, height, number of points]`` in merge order, ``node_a < node_b``; node ``m + i`` is the
        cluster made by row ``i``. Heights are ``sqrt(2 w_A w_B / (w_A + w_B)) * ||c_A - c_B||``, SciPy's
        convention (Müllner 2011), so unit weights give ``linkage(points, "ward")`` and a weight w gives the
        same tree as w copies of the point.

    Notes
    -----
    Works on the squared cost ``D(A, B) = 2 w_A w_B / (w_A + w_B) * ||c_A - c_B||^2`` and updates it after
    merging A and B by the Lance-Williams recurrence with Ward's coefficients (Lance & Williams 1967; Ward's
    method shown to fit it by Wishart 1969), for every other cluster K::

        D(K, A+B) = ((w_K + w_A) D(K, A) + (w_K + w_B) D(K, B) - w_K D(A, B)) / (w_K + w_A + w_B)

    Each step merges the globally closest pair (ties: lowest slot numbers), in O(m^2) per step and O(m^3)
    in all: meant for m up to a few thousand.

    References
    ----------
    Lance, G. N. & Williams, W. T. (1967). A general theory of classificatory sorting strategies: 1.
    Hierarchical systems. The Computer Journal 9(4), 373-380.
    Wishart, D. (1969). An algorithm for hierarchical classifications. Biometrics 25(1), 165-170.
    Müllner, D. (2011). Modern hierarchical, agglomerative clustering algorithms. arXiv:1109.2378.
    """
    points = np.asarray(points, dtype=float)
    size = np.array(weights, dtype=float)
    _check_space(points, size)
    m = points.shape[0]
    cost = squareform(pdist(points, "sqeuclidean")) * (2.0 * np.outer(size, size) / np.add.outer(size, size))
    np.fill_diagonal(cost, np.inf)
    alive = np.ones(m, dtype=bool)
    node = np.arange(m)
    count = np.ones(m)
    merges = np.empty((m - 1, 4))
    for step in range(m - 1):
        a, b = divmod(int(np.argmin(cost)), m)
        a, b = min(a, b), max(a, b)
        cost_ab = cost[a, b]
        merged = size[a] + size[b]
        merges[step] = (min(node[a], node[b]), max(node[a], node[b]), math.sqrt(cost_ab), count[a] + count[b])
        updated = ((size + size[a]) * cost[a] + (size + size[b]) * cost[b] - size * cost_ab) / (size + merged)
        alive[b] = False
        updated[~alive] = np.inf
        updated[a] = np.inf
        cost[a, :] = updated
        cost[:, a] = updated
        cost[b, :] = np.inf
        cost[:, b] = np.inf
        size[a] = merged
        count[a] += count[b]
        node[a] = m + step
    return merges


def cut_tree(tree: Tree, k: int) -> np.ndarray:
    """Cut the tree into k clusters by undoing its last k - 1 merges; returns the cluster of each row.

    Parameters
    ----------
    tree : Tree
    k : int
        Number of clusters, 1 <= k <= ``tree.n_leaves``.

    Returns
    -------
    ndarray of int, shape (n_rows,)
        Cluster of each row of the space, numbered 0..k-1 by weight (number of documents), largest first;
        ties go to the cluster holding the lowest-numbered leaf.

    Notes
    -----
    Cutting by merge order always gives exactly k clusters, and the cuts at k and k + 1 differ by one
    split. ``fcluster(Z, k, "maxclust")`` cuts by height instead and gives fewer than k clusters when merge
    heights tie; without ties the two agree.
    """
    _check_k(tree, k)
    leaf_cluster = _leaf_clusters(tree.linkage, tree.n_leaves, k)
    sizes = np.bincount(leaf_cluster, weights=tree.leaf_weights, minlength=k)
    first_leaf = np.full(k, tree.n_leaves)
    np.minimum.at(first_leaf, leaf_cluster, np.arange(tree.n_leaves))
    order = sorted(range(k), key=lambda c: (-sizes[c], first_leaf[c]))
    number = np.empty(k, dtype=int)
    number[order] = np.arange(k)
    return number[leaf_cluster][tree.leaf_of_row]


def cuts_for_range(tree: Tree, k_min: int, k_max: int) -> dict[int, np.ndarray]:
    """`cut_tree` for every k from `k_min` to `k_max`, both included: ``{k: labels per row}``."""
    if k_min > k_max:
        raise ValueError(f"k_min={k_min} must not exceed k_max={k_max}")
    _check_k(tree, k_min)
    _check_k(tree, k_max)
    return {k: cut_tree(tree, k) for k in range(k_min, k_max + 1)}


def split_table(cuts: dict[int, np.ndarray], weights: np.ndarray) -> list[Split]:
    """Which cluster splits, into which two, from each cut to the next one.

    Parameters
    ----------
    cuts : dict of int to ndarray of int, shape (n_rows,)
        Labels per row for consecutive k, as from `cuts_for_range`.
    weights : ndarray, shape (n_rows,)
        Weight (number of documents) of each row; sizes are their sums, rounded to whole documents.

    Returns
    -------
    list of Split
        One per k in ``range(min(cuts), max(cuts))``.
    """
    ks = sorted(cuts)
    if not ks or ks != list(range(ks[0], ks[-1] + 1)):
        raise ValueError(f"cuts must be for consecutive k, got {ks}")
    weights = np.asarray(weights, dtype=float)
    splits = []
    for k in ks[:-1]:
        before, after = cuts[k], cuts[k + 1]
        codes, inverse = np.unique(before.astype(np.int64) * (k + 1) + after, return_inverse=True)  # (before, after)
        pairs = np.column_stack([codes // (k + 1), codes % (k + 1)])
        pair_sizes = np.bincount(inverse.ravel(), weights=weights, minlength=len(pairs))
        parents = pairs[:, 0]
        splitting = [int(c) for c in np.unique(parents) if np.count_nonzero(parents == c) > 1]
        if (
            len(pairs) != k + 1
            or len(np.unique(pairs[:, 1])) != k + 1
            or len(np.unique(parents)) != k
            or len(splitting) != 1
        ):
            raise ValueError(f"the cuts at k={k} and k={k + 1} are not one split apart")
        parent = splitting[0]
        part_of = parents == parent
        first, second = ((int(c), round(s)) for c, s in zip(pairs[part_of, 1], pair_sizes[part_of], strict=True))
        splits.append(
            Split(
                k=k,
                parent=parent,
                parent_size=round(pair_sizes[part_of].sum()),
                children=(first, second),
                carried=tuple((int(a), int(b)) for a, b in pairs[~part_of]),
            )
        )
    return splits


def dendrogram_svg(tree: Tree, *, top: int = 30, labels: Sequence[str] | None = None, cut_k: int | None = None) -> str:
    """The top of the tree as a dendrogram, as a self-contained SVG string.

    Parameters
    ----------
    tree : Tree
    top : int, default 30
        Number of nodes drawn at the bottom (SciPy's ``truncate_mode="lastp"``, ``p=top``).
    labels : sequence of str, length ``tree.n_leaves``, optional
        Names of the leaves, shown literally (no mathtext) for leaves that are not collapsed. Collapsed
        nodes, and leaves when no names are given, show their number of documents in parentheses.
    cut_k : int, optional
        Draw a dashed line at the height where the tree is cut into this many clusters.

    Returns
    -------
    str
        The ``<svg>`` element, without XML declaration or DOCTYPE, so that it can be written as a file or
        placed inside a page. No script, no links, no metadata; the same tree gives the same bytes.

    Notes
    -----
    Drawn with Matplotlib's object-oriented ``Figure`` and never through pyplot, so no backend is chosen
    and no global figure state is touched; style settings are Matplotlib's defaults plus ours, applied in an
    ``rc_context`` that restores the caller's settings afterwards.
    """
    import matplotlib as mpl
    from matplotlib.figure import Figure

    if top < 1:
        raise ValueError(f"top={top} must be at least 1")
    if labels is not None and len(labels) != tree.n_leaves:
        raise ValueError(f"labels has {len(labels)} names for the {tree.n_leaves} leaves of the tree")
    if cut_k is not None:
        _check_k(tree, cut_k)
    documents = node_weights(tree)
    names = None if labels is None else [str(name) for name in labels]

    def leaf_label(node: int) -> str:
        # Collapsed nodes, and leaves without a name, show their number of documents.
        if names is not None and node < tree.n_leaves:
            return names[node]
        return f"({round(documents[node])})"

    def link_colour(_node: int) -> str:
        return LINK_COLOUR

    with mpl.rc_context():
        mpl.rcdefaults()
        mpl.rcParams["svg.hashsalt"] = "pilewise"  # element ids from a fixed salt, not random uuids
        mpl.rcParams["svg.fonttype"] = "none"  # text as <text>, not glyph paths
        mpl.rcParams["text.parse_math"] = False  # a "$" in a label is a dollar sign, not mathtext
        figure = Figure(figsize=(9.0, 4.5), layout="constrained")
        axes = figure.add_subplot()
        dendrogram(
            tree.linkage,
            p=top,
            truncate_mode="lastp",
            leaf_label_func=leaf_label,
            link_color_func=link_colour,
            leaf_rotation=90.0,
            leaf_font_size=8.0,
            ax=axes,
        )
        if cut_k is not None:
            axes.axhline(_cut_height(tree, cut_k), color=CUT_COLOUR, linestyle="--", linewidth=1.2)
        axes.set_ylabel("Ward merge height")
        if labels is None or top < tree.n_leaves:
            axes.set_xlabel("(n): documents under the node")
        for side in ("top", "right"):
            axes.spines[side].set_visible(False)
        buffer = io.StringIO()
        figure.savefig(buffer, format="svg", metadata=_SVG_METADATA)
    text = buffer.getvalue()
    return text[text.index("<svg") :]


def _check_space(space: np.ndarray, weights: np.ndarray) -> None:
    """Shapes and values a tree can be built from (the pipeline's own invariants, so ValueError)."""
    if space.ndim != 2 or space.shape[0] < 2:
        raise ValueError(f"need a 2-D array of at least 2 rows, got shape {space.shape}")
    if weights.shape != (space.shape[0],):
        raise ValueError(f"weights has shape {weights.shape}, expected ({space.shape[0]},)")
    if not (np.all(np.isfinite(space)) and np.all(np.isfinite(weights)) and np.all(weights > 0)):
        raise ValueError("rows must be finite and weights finite and positive")


def _check_k(tree: Tree, k: int) -> None:
    """k must name a cut the tree has; the two-stage tree has only as many leaves as groups."""
    if not 1 <= k <= tree.n_leaves:
        raise PilewiseError(
            f"k={k} must be between 1 and the {tree.n_leaves} leaves of the hierarchy ({tree.method}); "
            f"pass --k of at most {tree.n_leaves}"
        )


def node_weights(tree: Tree) -> np.ndarray:
    """Number of documents under every node: leaves ``0..n_leaves-1``, then one per merge; shape (2L - 1,)."""
    n = tree.n_leaves
    total = np.concatenate([tree.leaf_weights, np.zeros(n - 1)])
    for i, (a, b) in enumerate(tree.linkage[:, :2].astype(int)):
        total[n + i] = total[a] + total[b]
    return total


def _leaf_clusters(merges: np.ndarray, n_leaves: int, k: int) -> np.ndarray:
    """Cluster of each leaf after the first ``n_leaves - k`` merges, as 0..k-1 in no particular order."""
    kept = n_leaves - k  # merges applied; the rest are undone
    label = np.full(2 * n_leaves - 1, -1)
    children = merges[kept:, :2].astype(int).ravel()
    roots = children[children < n_leaves + kept]
    label[roots] = np.arange(len(roots))
    if k == 1:
        label[2 * n_leaves - 2] = 0
    # Parents have higher node numbers than their children, so one downward pass labels every leaf.
    for i in range(kept - 1, -1, -1):
        a, b = int(merges[i, 0]), int(merges[i, 1])
        label[a] = label[b] = label[n_leaves + i]
    return label[:n_leaves]


def _cut_height(tree: Tree, k: int) -> float:
    """A height between the last merge kept and the first undone by the cut into k."""
    heights = tree.linkage[:, 2]
    kept = tree.n_leaves - k
    below = heights[kept - 1] if kept > 0 else 0.0
    above = heights[kept] if kept < len(heights) else 1.05 * below
    return float((below + above) / 2.0)
