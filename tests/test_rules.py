"""Decision rules per cluster: exact decision paths, held-out figures and fidelity recomputed independently.

The fitted trees are walked here through scikit-learn's documented tree structure (`tree_.children_left`,
`children_right`, `feature`, `threshold`; "Understanding the decision tree structure" in the scikit-learn
examples), rules are applied to rows by hand, and the fold loop is written out again. The estimator fitted
in each fold is `ChiSquareTreeClassifier` with the parameters the docstring of `explain_clusters` states.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence

import numpy as np
import pytest
import scipy.sparse as sp
from sklearn.metrics import accuracy_score, f1_score
from sklearn.model_selection import StratifiedKFold, cross_val_predict

from pilewise.describe.rules import (
    MIN_COVERAGE,
    MIN_PRECISION,
    ChiSquareTreeClassifier,
    ClusterRule,
    RuleSet,
    TreeNode,
    explain_clusters,
)

Conditions = tuple[tuple[str, bool], ...]  # (word or "field = value", present?) root first
ColumnPath = tuple[tuple[int, bool], ...]  # (column of X, present?) root first


def _matrix(docs: Sequence[Sequence[str]]) -> tuple[sp.csr_matrix, list[str]]:
    """Binary presence of every word of every document, columns in sorted word order."""
    vocab = sorted({w for doc in docs for w in doc})
    column = {w: j for j, w in enumerate(vocab)}
    rows = [i for i, doc in enumerate(docs) for _ in set(doc)]
    cols = [column[w] for doc in docs for w in sorted(set(doc))]
    return sp.csr_matrix((np.ones(len(rows)), (rows, cols)), shape=(len(docs), len(vocab))), vocab


def _topics(
    seed: int, per_topic: int, topics: Sequence[Mapping[str, float]], noise: int = 40, noise_words: int = 6
) -> tuple[list[list[str]], np.ndarray]:
    """Documents of several topics: each topic word appears with its probability, plus shared noise words."""
    rng = np.random.default_rng(seed)
    docs, labels = [], []
    for label, words in enumerate(topics):
        for _ in range(per_topic):
            doc = [w for w, p in words.items() if rng.random() < p]
            doc += [f"noise{j}" for j in rng.choice(noise, noise_words, replace=False)]
            docs.append(doc)
            labels.append(label)
    return docs, np.array(labels)


NOISY_TOPICS = (
    {"refund": 0.7, "money": 0.5, "charge": 0.3, "late": 0.15},
    {"delivery": 0.7, "late": 0.5, "courier": 0.4, "money": 0.1},
    {"login": 0.6, "password": 0.5, "refund": 0.15, "delivery": 0.15},
)


def _cluster_leaf(n: int, members: int) -> int:
    """The per-cluster leaf minimum as documented: max(5, min(1% of rows, 10% of the cluster's texts))."""
    return max(5, min(math.ceil(0.01 * n), math.ceil(0.1 * members)))


def _best_paths(model: ChiSquareTreeClassifier, X: sp.csr_matrix, y: np.ndarray, w: np.ndarray) -> list[ColumnPath]:
    """Walk the fitted tree; keep the paths whose leaf predicts True, best by (precision, coverage); top 2.

    Written independently of pilewise: the leaf's prediction comes from `predict` on a row that lands in it,
    its precision and coverage from the rows themselves. Conditions hold column indexes of X.
    """
    tree = model.estimator_.tree_
    view = sp.csc_matrix(X[:, model.columns_], dtype=np.float32)
    leaf_of_row = model.estimator_.apply(view)
    paths: dict[int, ColumnPath] = {}

    def visit(node: int, conditions: ColumnPath) -> None:
        if tree.children_left[node] == tree.children_right[node]:  # both -1 at a leaf
            paths[node] = conditions
            return
        assert tree.threshold[node] == 0.5  # midpoint between 0 and 1 on a binary column
        column = int(model.columns_[tree.feature[node]])
        visit(int(tree.children_left[node]), (*conditions, (column, False)))  # x <= 0.5: absent
        visit(int(tree.children_right[node]), (*conditions, (column, True)))

    visit(0, ())
    ranked = []
    for leaf, conditions in paths.items():
        rows = np.flatnonzero(leaf_of_row == leaf)
        if not model.estimator_.predict(view[rows[:1]])[0]:
            continue
        precision = w[rows][y[rows]].sum() / w[rows].sum()
        coverage = w[rows][y[rows]].sum() / w[y].sum()
        ranked.append((-precision, -coverage, leaf, conditions))
    return [conditions for *_, conditions in sorted(ranked)[:2]]


def _labelled(paths: Sequence[ColumnPath], vocab: list[str]) -> tuple[Conditions, ...]:
    return tuple(tuple((vocab[j], present) for j, present in path) for path in paths)


def _apply_by_hand(rule: tuple[Conditions, ...], rows: Sequence[set[str]]) -> np.ndarray:
    """Rows that satisfy every condition of at least one path; conditions name words (or "field = value")."""
    return np.array([any(all((label in row) == present for label, present in path) for path in rule) for row in rows])


def _rule_text_of(rule: tuple[Conditions, ...]) -> str:
    """The documented wording: mentions / does not mention, "and" within a path, "or" between paths."""
    texts = [" and ".join(f'mentions "{w}"' if p else f'does not mention "{w}"' for w, p in path) for path in rule]
    if len(rule) > 1:
        texts = [f"({t})" if len(path) > 1 else t for t, path in zip(texts, rule, strict=True)]
    return " or ".join(texts)


@pytest.fixture(scope="module")
def noisy() -> tuple[sp.csr_matrix, list[str], np.ndarray, np.ndarray, RuleSet]:
    docs, labels = _topics(seed=3, per_topic=120, topics=NOISY_TOPICS)
    present, vocab = _matrix(docs)
    weights = np.random.default_rng(4).integers(1, 4, len(docs)).astype(float)  # duplicate counts 1-3
    result = explain_clusters(present, labels, weights, vocab, k=3, seed=7)
    return present, vocab, labels, weights, result


def test_rule_reproduces_the_decision_path_of_the_fitted_tree(
    noisy: tuple[sp.csr_matrix, list[str], np.ndarray, np.ndarray, RuleSet],
) -> None:
    # Source for the tree structure: scikit-learn's "Understanding the decision tree structure" example.
    present, vocab, labels, weights, result = noisy
    X = sp.csr_matrix(present, dtype=np.float32)
    rows = _row_sets(present, vocab)
    n = len(labels)
    multi_condition_paths = 0
    for rule in result.rules:
        y = labels == rule.cluster_id
        model = ChiSquareTreeClassifier(
            n_terms=len(vocab), max_features=300, max_depth=3,
            min_samples_leaf=_cluster_leaf(n, int(y.sum())), random_state=7,
        ).fit(X, y, sample_weight=weights)
        paths = _best_paths(model, X, y, weights)
        assert rule.rule_text, rule.no_rule_reason  # every planted topic has a rule
        # the rule shown is the paths' "or", simplified (tests/test_rule_simplify.py checks the simplifier
        # on truth tables): it matches exactly the rows the paths match
        tree_paths = _labelled(paths, vocab)
        assert np.array_equal(_apply_by_hand(rule.conditions, rows), _apply_by_hand(tree_paths, rows))
        assert sum(map(len, rule.conditions)) <= sum(map(len, tree_paths))
        assert rule.rule_text == _rule_text_of(rule.conditions)
        # each path's conditions select exactly the rows the tree sends to one leaf
        leaf_of_row = model.estimator_.apply(sp.csc_matrix(X[:, model.columns_]))
        for path in tree_paths:
            matched = _apply_by_hand((path,), rows)
            assert np.unique(leaf_of_row[matched]).size == 1
            assert np.array_equal(matched, leaf_of_row == leaf_of_row[matched][0])
        multi_condition_paths += sum(len(p) > 1 for p in tree_paths)
    assert multi_condition_paths > 0  # the check covers conjunctions, not only single words


def _row_sets(present: sp.csr_matrix, vocab: list[str]) -> list[set[str]]:
    csr = sp.csr_matrix(present)
    return [{vocab[j] for j in csr.indices[csr.indptr[i]:csr.indptr[i + 1]]} for i in range(csr.shape[0])]


def test_held_out_precision_and_coverage_recomputed_fold_by_fold(
    noisy: tuple[sp.csr_matrix, list[str], np.ndarray, np.ndarray, RuleSet],
) -> None:
    # Common practice (stratified k-fold, Kohavi 1995), the procedure as the docstring states it: in each
    # fold fit on the training part, take its rule, apply the rule by hand to the held-out rows.
    present, vocab, labels, weights, result = noisy
    X = sp.csr_matrix(present, dtype=np.float32)
    rows = _row_sets(present, vocab)
    n = len(labels)
    for rule in result.rules:
        y = labels == rule.cluster_id
        members = int(y.sum())
        tp = fp = fn = 0.0
        folds = StratifiedKFold(min(5, members, n - members), shuffle=True, random_state=7)
        for train, test in folds.split(np.zeros(n), y):
            model = ChiSquareTreeClassifier(
                n_terms=len(vocab), max_features=300, max_depth=3,
                min_samples_leaf=_cluster_leaf(n, members), random_state=7,
            ).fit(X[train], y[train], sample_weight=weights[train])
            fold_rule = _labelled(_best_paths(model, X[train], y[train], weights[train]), vocab)
            matched = _apply_by_hand(fold_rule, [rows[i] for i in test])
            w, truth = weights[test], y[test]
            tp += w[matched & truth].sum()
            fp += w[matched & ~truth].sum()
            fn += w[~matched & truth].sum()
        assert rule.precision == pytest.approx(tp / (tp + fp), abs=1e-12)
        assert rule.coverage == pytest.approx(tp / (tp + fn), abs=1e-12)
        assert rule.precision is not None and rule.precision >= MIN_PRECISION
        assert rule.coverage is not None and rule.coverage >= MIN_COVERAGE


def test_planted_cluster_defined_by_one_word_gets_that_rule_exactly() -> None:
    # Construction: cluster 0 is exactly the texts that mention "alpha"; no other word separates it.
    docs, labels = _topics(seed=1, per_topic=40, topics=({"alpha": 1.0}, {"beta": 0.5}, {"gamma": 0.5}))
    present, vocab = _matrix(docs)
    result = explain_clusters(present, labels, np.ones(len(docs)), vocab, k=3, seed=0)
    rule = result.rules[0]
    assert rule == ClusterRule(0, 'mentions "alpha"', ((("alpha", True),),), 1.0, 1.0, "",
                               'Documents that mention "alpha".')
    assert result.whole_tree.children[0].condition == 'mentions "alpha"'
    assert result.whole_tree.children[1].condition == 'does not mention "alpha"'
    assert (result.whole_tree.children[0].majority, result.whole_tree.children[0].majority_share) == (0, 1.0)


def test_cluster_without_a_separating_term_reports_no_rule_and_why() -> None:
    # Construction: every text of cluster 2 has a twin in cluster 1 with the same words and the same weight,
    # so no leaf can hold more of cluster 1 (or 2) than of the other: no path predicts either of them.
    docs, labels = _topics(seed=2, per_topic=40, topics=({"alpha": 0.9}, {"beta": 0.9}))
    twins = [doc for doc, label in zip(docs, labels, strict=True) if label == 1]
    present, vocab = _matrix(docs + twins)
    labels = np.concatenate([labels, np.full(len(twins), 2)])
    result = explain_clusters(present, labels, np.ones(len(labels)), vocab, k=3, seed=0)
    assert result.rules[0].rule_text == 'mentions "alpha"'
    for cluster in (1, 2):
        rule = result.rules[cluster]
        assert (rule.rule_text, rule.conditions) == ("", ())
        assert rule.no_rule_reason == "no path of the depth-3 tree ends in a leaf where this cluster is the majority"


def test_cluster_of_one_text_is_too_small_to_test_a_rule() -> None:
    docs, labels = _topics(seed=5, per_topic=30, topics=({"alpha": 0.9}, {"beta": 0.9}))
    docs.append(["omega", "noise1"])
    labels = np.append(labels, 2)
    present, vocab = _matrix(docs)
    rule = explain_clusters(present, labels, np.ones(len(docs)), vocab, k=3, seed=0).rules[2]
    assert rule == ClusterRule(
        2, "", (), None, None, "too few texts to test a rule on held-out folds (1 in the cluster, 60 outside)"
    )


def test_metadata_category_that_defines_a_cluster_becomes_the_rule() -> None:
    # Construction: the words are drawn alike for every cluster; only the channel tells cluster 1 apart.
    docs, labels = _topics(seed=6, per_topic=40, topics=({"alpha": 0.5}, {"alpha": 0.5}, {"alpha": 0.5}))
    present, vocab = _matrix(docs)
    rng = np.random.default_rng(0)
    channel = ["chat" if label == 1 else str(rng.choice(["email", "phone", ""])) for label in labels]
    result = explain_clusters(present, labels, np.ones(len(docs)), vocab, k=3, seed=0, metadata={"channel": channel})
    assert result.rules[1] == ClusterRule(1, 'channel is "chat"', ((("channel = chat", True),),), 1.0, 1.0, "",
                                          'Documents whose channel is "chat".')
    assert result.whole_tree.children[0].condition == 'channel is "chat"'
    assert result.whole_tree.children[1].condition == 'channel is not "chat"'
    assert result.features == len(vocab) + 3  # chat, email, phone; "" is missing, not a category


def test_fidelity_equals_cross_val_predict_recomputed(
    noisy: tuple[sp.csr_matrix, list[str], np.ndarray, np.ndarray, RuleSet],
) -> None:
    # scikit-learn's cross_val_predict with the documented folds and tree, scored with sample weights.
    present, vocab, labels, weights, result = noisy
    n = len(labels)
    folds = min(5, max(2, int(np.bincount(labels).min())))
    model = ChiSquareTreeClassifier(
        n_terms=len(vocab), max_features=300, max_depth=4, min_samples_leaf=max(5, math.ceil(0.01 * n)),
        random_state=7,
    )
    predicted = cross_val_predict(
        model, sp.csr_matrix(present, dtype=np.float32), labels,
        cv=StratifiedKFold(folds, shuffle=True, random_state=7), params={"sample_weight": weights},
    )
    assert result.folds == folds == 5
    assert result.fidelity_accuracy == pytest.approx(accuracy_score(labels, predicted, sample_weight=weights))
    assert result.fidelity_macro_f1 == pytest.approx(
        f1_score(labels, predicted, average="macro", sample_weight=weights)
    )
    assert 0.5 < result.fidelity_accuracy < 1.0  # noisy topics: well above chance (1/3), not perfect


def test_whole_tree_nodes_add_up(noisy: tuple[sp.csr_matrix, list[str], np.ndarray, np.ndarray, RuleSet]) -> None:
    _, _, labels, weights, result = noisy
    assert result.whole_tree.condition == ""
    assert result.whole_tree.weight == pytest.approx(weights.sum())

    def check(node: TreeNode, depth: int) -> int:
        assert 0 < node.majority_share <= 1 and 0 <= node.majority < 3
        if not node.children:
            return depth
        holds, other = node.children
        assert other.condition == holds.condition.replace("mentions", "does not mention", 1)
        assert holds.weight + other.weight == pytest.approx(node.weight)
        return max(check(holds, depth + 1), check(other, depth + 1))

    assert check(result.whole_tree, 0) == 4  # depth 3 + 1 for the whole tree


def test_pure_noise_gets_no_rules() -> None:
    # Hastie, Tibshirani & Friedman (2009), ESL §7.10.2: with the term screening inside every fold, a rule
    # found in noise must fail on held-out texts. Four random clusters over 300 texts of random words;
    # measured for seeds 0-4: held-out precision 0.00-0.45, coverage 0.00-0.07 (base rate 0.25).
    rng = np.random.default_rng(0)
    docs = [[f"w{j}" for j in rng.choice(500, 8, replace=False)] for _ in range(300)]
    present, vocab = _matrix(docs)
    labels = rng.integers(0, 4, 300)
    result = explain_clusters(present, labels, np.ones(300), vocab, k=4, seed=0)
    assert all(rule.rule_text == "" for rule in result.rules)
    assert all(rule.no_rule_reason for rule in result.rules)


def test_inconsistent_arguments_are_listed_together() -> None:
    present = sp.csr_matrix(np.eye(3))
    with pytest.raises(ValueError, match=r"^labels must lie in 0\.\.1; 2 term labels for 3 term columns; "
                                         r"metadata field 'channel' has 1 values for 3 rows$"):
        explain_clusters(present, np.array([0, 1, 2]), np.ones(3), ["a", "b"], k=2, seed=0,
                         metadata={"channel": ["chat"]})
