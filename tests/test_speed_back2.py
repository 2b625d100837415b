"""The faster back half, second pass (issue 15): shared tree fits, bounded rankings, the map's colours.

No test here times anything; each checks that a faster path gives what the plain one gives (the plain path,
or scikit-learn, is the reference).
"""

from __future__ import annotations

import itertools

import numpy as np
import pytest
import scipy.sparse as sp
from sklearn.metrics import accuracy_score
from sklearn.model_selection import StratifiedKFold, cross_val_predict

from pilewise.clustering.levels import Levels
from pilewise.describe.rules import ChiSquareTreeClassifier, _Fits, explain_clusters
from pilewise.describe.stats import best_first
from pilewise.output import docmap


def _presence(n: int, terms: int, k: int, seed: int) -> tuple[sp.csr_matrix, np.ndarray]:
    """Binary term presence of `n` texts in `k` groups, each group favouring its own block of terms."""
    rng = np.random.default_rng(seed)
    labels = rng.integers(0, k, size=n)
    density = np.full((n, terms), 0.04)
    block = terms // k
    for c in range(k):
        density[labels == c, c * block : (c + 1) * block] = 0.35
    return sp.csr_matrix((rng.random((n, terms)) < density).astype(np.float32)), labels


def _same_tree(a: ChiSquareTreeClassifier, b: ChiSquareTreeClassifier) -> bool:
    ta, tb = a.estimator_.tree_, b.estimator_.tree_
    return (np.array_equal(a.columns_, b.columns_) and np.array_equal(a.classes_, b.classes_)
            and all(np.array_equal(getattr(ta, f), getattr(tb, f))
                    for f in ("feature", "threshold", "children_left", "children_right", "value",
                              "weighted_n_node_samples")))


@pytest.mark.parametrize("whole_weights", [True, False])
def test_shared_fits_equal_the_estimators_own_fit_on_the_same_rows(whole_weights: bool) -> None:
    """`_Fits.fit(model, rows, ...)` must give the tree of ``model.fit(X[rows], y[rows], w[rows])``: with copies
    as weights (training part's frequencies = all rows' less the held-out part's) and with fractional
    weights (the direct product)."""
    X, labels = _presence(240, 50, 4, seed=1)
    extra = sp.csr_matrix((labels[:, None] == np.arange(2)).astype(np.float32))  # two indicator columns after
    X = sp.csr_matrix(sp.hstack([X, extra]))
    rng = np.random.default_rng(2)
    weights = rng.integers(1, 5, size=240).astype(float) if whole_weights else rng.uniform(0.5, 3.0, size=240)
    fits = _Fits(X, weights, n_terms=50)
    assert fits.whole_weights is whole_weights
    model = ChiSquareTreeClassifier(n_terms=50, max_features=12, max_depth=3, min_samples_leaf=5, random_state=3)
    # the whole tree's labelling and one cluster against the rest, as explain_clusters makes them
    for y in (labels, labels == 2):
        classes, codes = np.unique(y, return_inverse=True)
        totals = fits.class_totals(codes, classes.size)
        subsets = [np.arange(240)] + [train for train, _ in StratifiedKFold(5, shuffle=True, random_state=0).split(
            np.zeros(240), y)] + [np.arange(0, 240, 3), np.flatnonzero(labels != 1)]  # small parts: direct product
        for rows in subsets:
            expected = ChiSquareTreeClassifier(**model.get_params()).fit(X[rows], y[rows], sample_weight=weights[rows])
            got = fits.fit(model, rows, codes, totals, classes)
            assert _same_tree(got, expected)
            assert np.array_equal(got.predict(X), expected.predict(X))


def test_whole_tree_fidelity_equals_scikit_learns_cross_val_predict() -> None:
    """The whole tree's held-out predictions are made fold by fold with the shared fits; the reference is
    scikit-learn's cross_val_predict over the estimator (what explain_clusters called before)."""
    X, labels = _presence(300, 60, 3, seed=4)
    weights = np.random.default_rng(5).integers(1, 4, size=300).astype(float)
    vocab = [f"t{j}" for j in range(60)]
    result = explain_clusters(X, labels, weights, vocab, k=3, seed=6)
    model = ChiSquareTreeClassifier(n_terms=60, max_features=300, max_depth=4, min_samples_leaf=5, random_state=6)
    predicted = cross_val_predict(model, X, labels, cv=StratifiedKFold(result.folds, shuffle=True, random_state=6),
                                  params={"sample_weight": weights})
    assert result.fidelity_accuracy == accuracy_score(labels, predicted, sample_weight=weights)
    whole = ChiSquareTreeClassifier(**model.get_params()).fit(X, labels, sample_weight=weights)
    assert result.features == whole.columns_.size


def test_best_first_equals_a_full_sort_with_ties_and_nan() -> None:
    """The bounded ranking must equal ``candidates[np.lexsort((candidates, -scores[candidates]))][:top]``
    (numpy lexsort: last key primary, stable), ties to the lower index, NaN last."""
    rng = np.random.default_rng(7)
    for trial in range(40):
        scores = rng.integers(0, 30, size=500).astype(float)  # many ties
        if trial % 5 == 0:
            scores[rng.integers(0, 500, size=4)] = np.nan
        candidates = np.flatnonzero(rng.random(500) < 0.7)
        for top in (0, 1, 7, 30, 120, 600):
            expected = candidates[np.lexsort((candidates, -scores[candidates]))][:top]
            assert np.array_equal(best_first(candidates, scores, top), expected)


def _cielab(colour: str) -> np.ndarray:
    """CIE 1976 L*a*b* of an sRGB colour, D65 white: IEC 61966-2-1 (sRGB) and CIE 15:2004 formulas."""
    channels = np.array([int(colour[i : i + 2], 16) / 255 for i in (1, 3, 5)])
    linear = np.where(channels <= 0.04045, channels / 12.92, ((channels + 0.055) / 1.055) ** 2.4)
    to_xyz = np.array([[0.4124, 0.3576, 0.1805], [0.2126, 0.7152, 0.0722], [0.0193, 0.1192, 0.9505]])
    xyz = to_xyz @ linear / np.array([0.95047, 1.0, 1.08883])
    f = np.where(xyz > (6 / 29) ** 3, np.cbrt(xyz), xyz / (3 * (6 / 29) ** 2) + 4 / 29)
    return np.array([116 * f[1] - 16, 500 * (f[0] - f[1]), 200 * (f[1] - f[2])])


def test_cielab_conversion_of_known_colours() -> None:
    # white is L*=100, a*=b*=0 and black L*=0 by definition (CIE 15:2004); sRGB red is about
    # L*53.2, a*80.1, b*67.2 (from memory, the commonly quoted figures)
    assert np.allclose(_cielab("#ffffff"), [100, 0, 0], atol=0.05)
    assert np.allclose(_cielab("#000000"), [0, 0, 0], atol=0.05)
    assert np.allclose(_cielab("#ff0000"), [53.2, 80.1, 67.2], atol=0.3)


def test_every_two_map_colours_are_far_apart() -> None:
    """Clusters 0 and 7 were hard to tell apart on the map (delta E*ab 16 in the former palette). Every two
    colours must now differ by 25 or more (CIE 1976 delta E*ab; about 2.3 is a just noticeable difference,
    Sharma 2003, "Digital Color Imaging Handbook", from memory; 25 is our choice for marks side by side)."""
    labs = [_cielab(c) for c in docmap.PALETTE]
    closest = min(float(np.linalg.norm(a - b)) for a, b in itertools.combinations(labs, 2))
    assert closest >= 25.0
    assert float(np.linalg.norm(_cielab(docmap.colour(0)) - _cielab(docmap.colour(7)))) >= 25.0


def _levels_case(tree_kind: str) -> tuple[Levels, sp.csr_matrix, np.ndarray, np.ndarray, int]:
    """Levels of a small collection cut from a tree over the run's clusters, or from Ward's tree of the rows."""
    from pilewise.clustering.hierarchy import ward_tree
    from pilewise.clustering.kmeans import kmeans_clusters
    from pilewise.clustering.levels import build_levels, centroid_tree

    counts, groups = _presence(150, 40, 5, seed=8)
    rng = np.random.default_rng(9)
    weights = rng.integers(1, 4, size=150).astype(float)
    space = np.asarray(counts.todense()) + 0.01
    space /= np.linalg.norm(space, axis=1, keepdims=True)
    k = 5
    clustering = kmeans_clusters(space, weights, k=k, seed=0, n_init=2)
    if tree_kind == "centroids":
        tree, k_max = centroid_tree(clustering, weights), k
    else:  # Ward's tree of the rows: its finer cuts split the run's clusters
        tree, k_max = ward_tree(space, weights, seed=0), 9
    levels = build_levels(tree, space, weights, clustering.labels, k_min=2, k_max=k_max, run_k=k)
    return levels, counts, weights, clustering.labels, k


@pytest.mark.parametrize("tree_kind", ["centroids", "ward"])
def test_level_terms_from_the_run_clusters_frequencies_equal_a_fresh_count(tree_kind: str) -> None:
    """level_terms may sum the finest cut's document frequencies from the run clusters' (counted once for the
    summaries); the reference is its own pass over the rows (no `run`)."""
    from pilewise.describe.summaries import _merged_run_frequencies, cluster_term_totals, level_terms

    levels, counts, weights, labels, k = _levels_case(tree_kind)
    shown = [f"t{j}" for j in range(counts.shape[1])]
    run_df, _ = cluster_term_totals(counts, labels, weights, k)
    expected = level_terms(levels, counts, weights, shown)
    assert level_terms(levels, counts, weights, shown, run=(labels, run_df)) == expected
    finest_k = max(levels.cuts)
    merged = _merged_run_frequencies((labels, run_df), levels.cuts[finest_k], finest_k, weights)
    if tree_kind == "centroids":  # the same figures as counting the finest cut's rows
        direct, _ = cluster_term_totals(counts, levels.cuts[finest_k], weights, finest_k)
        assert merged is not None and np.array_equal(merged.toarray(), direct.toarray())
    else:  # a run cluster split between two cut clusters: no shortcut
        assert merged is None
    # fractional weights: sums in another order could differ in the last bit, so no shortcut either
    assert _merged_run_frequencies((labels, run_df), levels.cuts[finest_k], finest_k, weights + 0.5) is None


@pytest.mark.parametrize("tree_kind", ["centroids", "ward"])
def test_levels_nearest_members_do_not_depend_on_the_row_blocks(tree_kind: str, monkeypatch: pytest.MonkeyPatch
                                                                 ) -> None:
    """build_levels finds each cut cluster's nearest member block by block (ties to the earlier row); blocks of 7
    rows give the same exemplars as one block (the default is 8,192 rows)."""
    from pilewise.clustering import levels as levels_module

    whole = _levels_case(tree_kind)[0]
    monkeypatch.setattr(levels_module, "NEAREST_BLOCK", 7)
    blocked = _levels_case(tree_kind)[0]
    assert whole.clusters == blocked.clusters
    assert any(c.exemplar_text > 7 for cut in whole.clusters.values() for c in cut)  # past the first block
