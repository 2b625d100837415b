"""Ward trees, their cuts and splits, and the dendrogram, against SciPy, scikit-learn and expanded data."""

from __future__ import annotations

import re
import subprocess
import sys
import xml.etree.ElementTree as ET

import numpy as np
import pytest
from scipy.cluster import hierarchy as sch
from sklearn.cluster import AgglomerativeClustering
from sklearn.metrics import adjusted_rand_score

from pilewise.clustering.hierarchy import (
    CUT_COLOUR,
    LINK_COLOUR,
    Split,
    Tree,
    cut_tree,
    cuts_for_range,
    dendrogram_svg,
    node_weights,
    split_table,
    ward_tree,
    weighted_ward,
)
from pilewise.errors import PilewiseError

# SciPy documentation of scipy.cluster.hierarchy.ward (and fcluster, is_valid_linkage): twelve points in four
# groups of three. Confirmed in the installed SciPy's docstrings; see shared/CHECKS.md.
SCIPY_EXAMPLE = np.array(
    [[0, 0], [0, 1], [1, 0], [0, 4], [0, 3], [1, 4], [4, 0], [3, 0], [4, 1], [4, 4], [3, 4], [4, 3]], dtype=float
)
SCIPY_EXAMPLE_HEIGHTS = [1, 1, 1, 1, 1.29099445, 1.29099445, 1.29099445, 1.29099445, 5.77350269, 5.77350269, 8.16496581]
SCIPY_EXAMPLE_GROUPS = [1, 1, 1, 2, 2, 2, 3, 3, 3, 4, 4, 4]


def random_unit_rows(n: int, dims: int, seed: int) -> np.ndarray:
    rows = np.random.default_rng(seed).normal(size=(n, dims))
    return rows / np.linalg.norm(rows, axis=1, keepdims=True)


def blobs_on_sphere(n_per: int, centres: int, dims: int, seed: int) -> np.ndarray:
    """Unit rows around `centres` random directions: structure, and no tied distances."""
    rng = np.random.default_rng(seed)
    rows = np.repeat(rng.normal(size=(centres, dims)) * 3, n_per, axis=0) + rng.normal(size=(centres * n_per, dims))
    return rows / np.linalg.norm(rows, axis=1, keepdims=True)


def same_partition(a: np.ndarray, b: np.ndarray) -> bool:
    return bool(adjusted_rand_score(a, b) == 1.0)


# --- full Ward against SciPy's documented example -------------------------------------------------------------


def test_full_tree_reproduces_scipy_ward_documentation_heights() -> None:
    # SciPy docs, scipy.cluster.hierarchy.ward example: heights 1, 1.29099445 (= sqrt(5/3)), 5.77350269, 8.16496581.
    tree = ward_tree(SCIPY_EXAMPLE, np.ones(12), seed=0)
    assert tree.method == "full Ward"
    assert tree.n_leaves == 12
    np.testing.assert_allclose(tree.linkage[:, 2], SCIPY_EXAMPLE_HEIGHTS, atol=5e-9)
    assert tree.linkage[4, 2] == pytest.approx(np.sqrt(5 / 3))
    np.testing.assert_array_equal(tree.leaf_of_row, np.arange(12))


def test_scipy_example_cut_into_four_is_the_four_groups_of_three() -> None:
    # SciPy docs: fcluster(Z, 3, 'distance') -> [1,1,1,2,2,2,3,3,3,4,4,4]; our cut into 4 equals it up to relabelling.
    tree = ward_tree(SCIPY_EXAMPLE, np.ones(12), seed=0)
    np.testing.assert_array_equal(sch.fcluster(tree.linkage, 3, "distance"), SCIPY_EXAMPLE_GROUPS)
    labels = cut_tree(tree, 4)
    assert same_partition(labels, np.array(SCIPY_EXAMPLE_GROUPS))
    assert sorted(set(labels.tolist())) == [0, 1, 2, 3]


def test_scipy_example_agrees_with_scikit_learn_agglomerative_ward() -> None:
    # shared/CHECKS.md: scikit-learn's AgglomerativeClustering(4, linkage="ward") agrees with SciPy (ARI 1).
    reference = AgglomerativeClustering(n_clusters=4, linkage="ward").fit_predict(SCIPY_EXAMPLE)
    assert adjusted_rand_score(cut_tree(ward_tree(SCIPY_EXAMPLE, np.ones(12), seed=0), 4), reference) == 1.0


@pytest.mark.parametrize("k", [2, 3, 5, 8, 13])
def test_cuts_agree_with_scikit_learn_agglomerative_ward_on_blobs(k: int) -> None:
    # Independent implementation: scikit-learn's own Ward tree, cut at k clusters.
    space = blobs_on_sphere(25, 6, 8, seed=4)
    reference = AgglomerativeClustering(n_clusters=k, linkage="ward").fit_predict(space)
    assert same_partition(cut_tree(ward_tree(space, np.ones(len(space)), seed=0), k), reference)


# --- weighted Ward ---------------------------------------------------------------------------------------------


def test_weighted_ward_with_unit_weights_is_scipy_ward() -> None:
    # Müllner's convention as implemented by scipy.cluster.hierarchy.linkage(method="ward").
    points = np.random.default_rng(7).normal(size=(150, 6))
    ours = weighted_ward(points, np.ones(150))
    scipy_z = sch.linkage(points, method="ward")
    np.testing.assert_allclose(ours[:, 2], scipy_z[:, 2], rtol=1e-12, atol=0)
    np.testing.assert_array_equal(ours[:, [0, 1, 3]], scipy_z[:, [0, 1, 3]])


def test_weighted_ward_with_unit_weights_matches_scipy_example_including_ties() -> None:
    np.testing.assert_allclose(weighted_ward(SCIPY_EXAMPLE, np.ones(12))[:, 2], SCIPY_EXAMPLE_HEIGHTS, atol=5e-9)


def test_weight_w_equals_w_copies_of_the_point() -> None:
    # Independent check: SciPy's unweighted Ward on the data with each point repeated w times.
    rng = np.random.default_rng(11)
    points = rng.normal(size=(40, 5))
    weights = rng.integers(1, 5, size=40)
    expanded = np.repeat(points, weights, axis=0)
    scipy_z = sch.linkage(expanded, method="ward")
    copies_merged = int((weights - 1).sum())
    assert np.all(scipy_z[:copies_merged, 2] == 0)  # the copies merge first, at height 0
    ours = weighted_ward(points, weights)
    np.testing.assert_allclose(ours[:, 2], scipy_z[copies_merged:, 2], rtol=1e-10)
    tree = Tree(linkage=ours, leaf_of_row=np.arange(40), leaf_weights=weights.astype(float), method="test", n_leaves=40)
    for k in range(2, 15):
        expanded_labels = sch.cut_tree(scipy_z, n_clusters=k).ravel()
        assert same_partition(np.repeat(cut_tree(tree, k), weights), expanded_labels)


# --- the two-stage tree ----------------------------------------------------------------------------------------


def test_two_stage_tree_is_ward_over_the_weighted_groups() -> None:
    space = blobs_on_sphere(60, 5, 10, seed=2)
    weights = np.random.default_rng(5).integers(1, 4, size=len(space)).astype(float)
    tree = ward_tree(space, weights, seed=3, full_limit=100, groups=25)
    assert tree.method == "two-stage: k-means into 25 groups, then weighted Ward"
    assert tree.n_leaves == 25
    assert sch.is_valid_linkage(tree.linkage)
    assert tree.leaf_of_row.shape == (300,)
    np.testing.assert_allclose(tree.leaf_weights, np.bincount(tree.leaf_of_row, weights=weights))
    assert node_weights(tree)[-1] == weights.sum()
    # Independent check: SciPy's Ward on each group's weighted centroid repeated once per document.
    centroids = np.array([np.average(space[tree.leaf_of_row == g], axis=0, weights=weights[tree.leaf_of_row == g])
                          for g in range(25)])  # fmt: skip
    counts = tree.leaf_weights.astype(int)
    scipy_z = sch.linkage(np.repeat(centroids, counts, axis=0), method="ward")
    np.testing.assert_allclose(tree.linkage[:, 2], scipy_z[int((counts - 1).sum()) :, 2], rtol=1e-9)


def test_two_stage_tree_is_seeded() -> None:
    space = random_unit_rows(400, 12, seed=1)
    first = ward_tree(space, np.ones(400), seed=9, full_limit=50)
    second = ward_tree(space, np.ones(400), seed=9, full_limit=50)
    np.testing.assert_array_equal(first.linkage, second.linkage)
    np.testing.assert_array_equal(first.leaf_of_row, second.leaf_of_row)


def test_two_stage_uses_at_most_half_as_many_groups_as_rows() -> None:
    tree = ward_tree(random_unit_rows(60, 5, seed=0), np.ones(60), seed=0, full_limit=10, groups=300)
    assert tree.n_leaves == 30


# --- cuts ------------------------------------------------------------------------------------------------------


def test_cut_numbers_clusters_by_weight_largest_first() -> None:
    space = blobs_on_sphere(30, 4, 6, seed=8)
    weights = np.random.default_rng(1).integers(1, 6, size=len(space)).astype(float)
    tree = ward_tree(space, weights, seed=0)
    for k in range(1, 10):
        labels = cut_tree(tree, k)
        assert set(labels.tolist()) == set(range(k))
        sizes = np.bincount(labels, weights=weights)
        assert np.all(np.diff(sizes) <= 0)


@pytest.mark.parametrize("k", [2, 4, 7, 19])
def test_cut_matches_scipy_fcluster_and_cut_tree_without_ties(k: int) -> None:
    space = random_unit_rows(120, 10, seed=6)
    tree = ward_tree(space, np.ones(120), seed=0)
    ours = cut_tree(tree, k)
    assert same_partition(ours, sch.fcluster(tree.linkage, k, "maxclust"))
    assert same_partition(ours, sch.cut_tree(tree.linkage, n_clusters=k).ravel())


def test_cut_of_two_stage_tree_keeps_each_group_whole() -> None:
    space = random_unit_rows(500, 8, seed=3)
    tree = ward_tree(space, np.ones(500), seed=0, full_limit=100, groups=40)
    labels = cut_tree(tree, 6)
    for group in range(tree.n_leaves):
        assert len(set(labels[tree.leaf_of_row == group].tolist())) == 1


def test_k_beyond_the_leaves_of_a_two_stage_tree_is_a_user_error() -> None:
    tree = ward_tree(random_unit_rows(200, 5, seed=0), np.ones(200), seed=0, full_limit=50, groups=20)
    with pytest.raises(PilewiseError) as raised:
        cut_tree(tree, 21)
    assert str(raised.value) == (
        "k=21 must be between 1 and the 20 leaves of the hierarchy "
        "(two-stage: k-means into 20 groups, then weighted Ward); pass --k of at most 20"
    )


def test_bad_input_is_a_value_error() -> None:
    with pytest.raises(ValueError, match="weights has shape"):
        ward_tree(np.ones((4, 2)), np.ones(3), seed=0)
    with pytest.raises(ValueError, match="positive"):
        ward_tree(random_unit_rows(4, 2, seed=0), np.array([1.0, 0.0, 1.0, 1.0]), seed=0)


# --- splits ----------------------------------------------------------------------------------------------------


def assert_one_split_apart(before: np.ndarray, after: np.ndarray, k: int) -> None:
    """Contingency of the cuts at k and k+1: every new cluster has one parent; one old cluster has two parts."""
    table = np.zeros((k, k + 1), dtype=int)
    np.add.at(table, (before, after), 1)
    assert np.all((table > 0).sum(axis=0) == 1)
    parts = (table > 0).sum(axis=1)
    assert sorted(parts.tolist()) == [1] * (k - 1) + [2]


@pytest.mark.parametrize("two_stage", [False, True])
def test_consecutive_cuts_differ_by_exactly_one_split(two_stage: bool) -> None:
    space = blobs_on_sphere(40, 5, 8, seed=12)
    weights = np.random.default_rng(2).integers(1, 4, size=len(space)).astype(float)
    tree = ward_tree(space, weights, seed=0, full_limit=50 if two_stage else 1000, groups=30)
    cuts = cuts_for_range(tree, 2, 12)
    assert sorted(cuts) == list(range(2, 13))
    splits = split_table(cuts, weights)
    assert [split.k for split in splits] == list(range(2, 12))
    for split in splits:
        before, after = cuts[split.k], cuts[split.k + 1]
        assert_one_split_apart(before, after, split.k)
        assert split.parent_size == round(weights[before == split.parent].sum())
        for child, size in split.children:
            assert size == round(weights[after == child].sum())
            assert set(before[after == child].tolist()) == {split.parent}
        assert sum(size for _, size in split.children) == split.parent_size
        assert len(split.carried) == split.k - 1
        for old, new in split.carried:
            np.testing.assert_array_equal(before == old, after == new)


def test_cuts_with_tied_heights_still_split_one_cluster_at_a_time() -> None:
    """Regression guard: the SciPy example has tied heights, where fcluster "maxclust" returns too few clusters."""
    tree = ward_tree(SCIPY_EXAMPLE, np.ones(12), seed=0)
    assert len(set(sch.fcluster(tree.linkage, 3, "maxclust").tolist())) == 2  # the reason we cut by merge order
    cuts = cuts_for_range(tree, 1, 12)
    for k in range(1, 12):
        assert_one_split_apart(cuts[k], cuts[k + 1], k)


def test_split_table_names_the_split_and_the_carry_over() -> None:
    # Five points on a line: the pairs {0, 1} and {10, 11.5} join before 30 (weight 5) joins them, so k=2 -> 3
    # splits the four into its two pairs; the pairs tie on weight, and the one with the lower leaf comes first.
    space = np.array([[0.0], [1.0], [10.0], [11.5], [30.0]])
    tree = ward_tree(space, np.array([1.0, 1.0, 1.0, 1.0, 5.0]), seed=0)
    cuts = cuts_for_range(tree, 2, 3)
    np.testing.assert_array_equal(cuts[2], [1, 1, 1, 1, 0])
    np.testing.assert_array_equal(cuts[3], [1, 1, 2, 2, 0])
    assert split_table(cuts, np.array([1.0, 1.0, 1.0, 1.0, 5.0])) == [
        Split(k=2, parent=1, parent_size=4, children=((1, 2), (2, 2)), carried=((0, 0),))
    ]


def test_split_table_refuses_cuts_that_are_not_nested() -> None:
    cuts = {2: np.array([0, 0, 1, 1]), 3: np.array([0, 1, 1, 2])}
    with pytest.raises(ValueError, match="not one split apart"):
        split_table(cuts, np.ones(4))


# --- dendrogram ------------------------------------------------------------------------------------------------


@pytest.fixture(scope="module")
def small_tree() -> Tree:
    return ward_tree(blobs_on_sphere(10, 4, 6, seed=1), np.arange(1, 41, dtype=float), seed=0)


def test_dendrogram_svg_is_deterministic_and_self_contained(small_tree: Tree) -> None:
    svg = dendrogram_svg(small_tree, top=12, cut_k=4)
    assert svg == dendrogram_svg(small_tree, top=12, cut_k=4)
    assert svg.startswith("<svg")
    ET.fromstring(svg)  # well-formed XML
    assert "<script" not in svg.lower()
    assert "<metadata" not in svg and "dc:date" not in svg
    # Every reference stays inside the document; the only URLs are the SVG and XLink namespaces.
    assert all(ref.startswith("#") for ref in re.findall(r'(?:href|src)="([^"]*)"', svg))
    assert set(re.findall(r"https?://[^\s\"')]+", svg)) <= {
        "http://www.w3.org/2000/svg",
        "http://www.w3.org/1999/xlink",
    }
    assert "url(http" not in svg and "@import" not in svg
    assert LINK_COLOUR in svg and CUT_COLOUR in svg
    assert CUT_COLOUR not in dendrogram_svg(small_tree, top=12)


def test_dendrogram_svg_is_the_same_in_a_fresh_process(small_tree: Tree) -> None:
    code = (
        "import numpy as np, sys; from pilewise.clustering.hierarchy import Tree, dendrogram_svg; "
        "z = np.array(eval(sys.argv[1])); w = np.arange(1, 41, dtype=float); "
        "t = Tree(linkage=z, leaf_of_row=np.arange(40), leaf_weights=w, method='full Ward', n_leaves=40); "
        "sys.stdout.write(dendrogram_svg(t, top=12, cut_k=4))"
    )
    fresh = subprocess.run(
        [sys.executable, "-c", code, repr(small_tree.linkage.tolist())], capture_output=True, text=True, check=True
    )
    assert fresh.stdout == dendrogram_svg(small_tree, top=12, cut_k=4)


def test_dendrogram_labels_are_inert_text(small_tree: Tree) -> None:
    names = [f"<script>alert({i})</script> costs $5 & $6 http://example.com/{i}" for i in range(40)]
    svg = dendrogram_svg(small_tree, top=40, labels=names)
    assert "<script" not in svg
    assert "&lt;script&gt;alert(0)&lt;/script&gt; costs $5 &amp; $6" in svg  # shown as written, no mathtext
    assert all(ref.startswith("#") for ref in re.findall(r'(?:href|src)="([^"]*)"', svg))


def test_dendrogram_shows_documents_under_collapsed_nodes(small_tree: Tree) -> None:
    svg = dendrogram_svg(small_tree, top=4)
    weights = node_weights(small_tree)
    top_nodes = [int(n) for n in small_tree.linkage[-3:, :2].ravel() if n < len(weights) - 3]
    for node in top_nodes:
        assert f"({round(weights[node])})" in svg


def test_dendrogram_leaves_matplotlib_settings_alone(small_tree: Tree) -> None:
    import matplotlib as mpl

    backend = mpl.get_backend()
    before = dict(mpl.rcParams)
    dendrogram_svg(small_tree, cut_k=3)
    assert mpl.get_backend() == backend
    assert dict(mpl.rcParams) == before
