"""Decision rules per cluster, with held-out honesty figures, and one readable tree for the whole clustering.

Each cluster gets a one-vs-rest CART tree (Breiman, Friedman, Olshen & Stone 1984, "Classification and
Regression Trees"; scikit-learn's `DecisionTreeClassifier`) on the presence of vocabulary terms and optional
metadata categories. The root-to-leaf paths whose leaf predicts the cluster become plain rules, the way
C4.5 turns a tree into production rules (Quinlan 1993, "C4.5: Programs for Machine Learning", ch. 5; from
memory), but without pruning conditions, so that a rule reproduces the tree's decision path exactly.

Precision and coverage of a rule are measured on held-out folds: in every fold the term selection, the tree
and the rule are all made from the training part only and the rule is applied to the held-out part, the
"right way" to cross-validate a procedure that screens features (Hastie, Tibshirani & Friedman 2009, "The
Elements of Statistical Learning", 2nd ed., §7.10.2). The rule shown is the one from the tree fitted on all
rows. The whole clustering gets one multi-class tree, rendered as nested nodes, whose fidelity (agreement
with the cluster labels, as in Craven & Shavlik 1996 for surrogate trees) is cross-validated the same way.
"""

from __future__ import annotations

import itertools
import math
import warnings
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
from sklearn.base import BaseEstimator, ClassifierMixin, clone
from sklearn.metrics import accuracy_score, f1_score
from sklearn.model_selection import StratifiedKFold
from sklearn.tree import DecisionTreeClassifier

from pilewise.clustering.stability import stability_rows
from pilewise.describe.profiles import MetadataAnalysis
from pilewise.describe.stats import best_first, chi_square_2x2

RULES_ROWS = 20_000  # distinct texts the pipeline fits and cross-validates rules on (a seeded sample above)
MAX_FOLDS = 5  # held-out folds; fewer when a cluster (or the rest) has fewer distinct texts
MAX_RULES = 2  # paths joined by "or" in one cluster's rule
# A rule is shown only if, on held-out texts, at least half of what it matches is in the cluster and it
# finds at least a fifth of the cluster. Our choice: below these a reader would be misled more than helped.
MIN_PRECISION = 0.5
MIN_COVERAGE = 0.2
# Leaf minimum, in distinct texts: at least 5 and 1% of all rows (whole tree); for a cluster's own tree
# never more than a tenth of the cluster, so that clusters under 1% of the rows can still have a rule.
MIN_LEAF_TEXTS = 5
LEAF_SHARE_OF_ROWS = 0.01
LEAF_SHARE_OF_CLUSTER = 0.1
WHOLE_TREE_EXTRA_DEPTH = 1  # the whole tree separates k clusters at once, so it gets one more level
MAX_VALUES_PER_FIELD = 20  # most frequent values of a metadata field that become indicator columns


@dataclass(frozen=True)
class ClusterRule:
    """The decision rule of one cluster, or why there is none.

    Attributes
    ----------
    cluster_id : int
        The cluster's label.
    rule_text : str
        The rule as shown, e.g. ``mentions "refund" and does not mention "delivery"``; two paths are
        joined by "or" (a path of several conditions in parentheses). "" when there is no rule.
    conditions : tuple of tuple of (str, bool)
        Per path, its conditions root first: (feature label, present?). A feature label is the shown term,
        or ``"name = value"`` for a metadata category. Empty when there is no rule.
    precision : float or None
        Held-out: weight of matched cluster texts / weight of all matched texts, summed over the folds.
        None when no rule from a training part matched any held-out text, or there were too few texts to
        fold. Reported even when no rule is shown.
    coverage : float or None
        Held-out recall: weight of matched cluster texts / weight of all cluster texts. None when there
        were too few texts to fold.
    no_rule_reason : str
        Why no rule is shown; "" when there is one.
    rule_words : str
        The rule as a sentence ("Documents that mention "refund" but not "delivery"."); "" when none.
    """

    cluster_id: int
    rule_text: str
    conditions: tuple[tuple[tuple[str, bool], ...], ...]
    precision: float | None
    coverage: float | None
    no_rule_reason: str
    rule_words: str = ""


@dataclass(frozen=True)
class TreeNode:
    """One node of the whole tree, ready to render as a nested list.

    Attributes
    ----------
    condition : str
        The condition that leads here from the parent (``mentions "refund"``); "" for the root.
    weight : float
        Documents reaching the node (duplicate texts counted).
    majority : int
        The cluster holding most of the node's weight (the tree's prediction at a leaf).
    majority_share : float
        That cluster's share of the node's weight.
    children : tuple of TreeNode
        The branch where the condition holds first (``mentions``/``is``), then the other; () for a leaf.
    """

    condition: str
    weight: float
    majority: int
    majority_share: float
    children: tuple[TreeNode, ...]


@dataclass(frozen=True)
class RuleSet:
    """Rules of every cluster and the whole tree.

    Attributes
    ----------
    rules : tuple of ClusterRule
        One per cluster, in label order 0..k-1.
    fidelity_accuracy : float
        Cross-validated accuracy of the whole tree against the cluster labels, weighted by duplicates.
    fidelity_macro_f1 : float
        Cross-validated F1 averaged over the non-empty clusters (a cluster never predicted counts 0).
    whole_tree : TreeNode
        The whole tree fitted on all rows.
    features : int
        Columns the whole tree (fitted on all rows) could split on: selected terms plus metadata categories.
    folds : int
        Folds used for the whole tree's fidelity; each cluster's rule uses min(5, its texts, other texts).
    """

    rules: tuple[ClusterRule, ...]
    fidelity_accuracy: float
    fidelity_macro_f1: float
    whole_tree: TreeNode
    features: int
    folds: int


class ChiSquareTreeClassifier(ClassifierMixin, BaseEstimator):
    """A CART decision tree on the term columns that chi-square ranks highest on the training rows.

    Selection happens inside `fit`, so that cross-validation repeats it on every training part
    (Hastie et al. 2009, §7.10.2). For each class, the terms whose document share is higher in the class
    than outside it are ranked by the Pearson chi-square of their 2x2 table (`stats.chi_square_2x2`,
    weighted by `sample_weight`); the columns are taken round-robin over the classes (every class's best,
    then every class's second, ...) up to `max_features`. For two classes this alternates between terms
    over- and under-represented in the positive class.

    Parameters
    ----------
    n_terms : int, default=0
        The first `n_terms` columns of X are binary term presences to select from; the columns after them
        (metadata category indicators) are always kept.
    max_features : int, default=300
        Term columns kept at most.
    max_depth : int, default=3
    min_samples_leaf : int, default=5
    random_state : int, default=0
        Passed to the tree (it breaks ties between equally good splits).

    Attributes
    ----------
    columns_ : ndarray of int
        Columns of X the tree sees, in the tree's feature order (`estimator_.tree_.feature` indexes it).
    estimator_ : DecisionTreeClassifier
        The fitted tree.
    classes_ : ndarray
        The class labels, as in `estimator_`.
    """

    def __init__(
        self, *, n_terms: int = 0, max_features: int = 300, max_depth: int = 3, min_samples_leaf: int = 5,
        random_state: int = 0,
    ) -> None:
        self.n_terms = n_terms
        self.max_features = max_features
        self.max_depth = max_depth
        self.min_samples_leaf = min_samples_leaf
        self.random_state = random_state

    def fit(
        self, X: sp.spmatrix | np.ndarray, y: np.ndarray, sample_weight: np.ndarray | None = None
    ) -> ChiSquareTreeClassifier:
        """Select term columns on these rows and fit the tree; X of shape (n_rows, n_columns), binary."""
        X = sp.csr_matrix(X)
        y = np.asarray(y)
        weights = np.ones(X.shape[0]) if sample_weight is None else np.asarray(sample_weight, dtype=float)
        if not 0 <= self.n_terms <= X.shape[1]:
            raise ValueError(f"n_terms={self.n_terms} must be between 0 and the {X.shape[1]} columns of X")
        if y.shape != (X.shape[0],) or weights.shape != (X.shape[0],):
            raise ValueError(f"y and sample_weight need one value per row of X ({X.shape[0]})")
        terms = chi_square_columns(X, y, weights, self.max_features, term_columns=self.n_terms)
        self._set_columns(terms, X.shape[1])
        return self._fit_tree(self._view(X), y, weights)

    def _set_columns(self, terms: np.ndarray, n_columns: int) -> None:
        """The chosen term columns, then every metadata column."""
        self.columns_ = np.concatenate([terms, np.arange(self.n_terms, n_columns)]).astype(np.intp)

    def _fit_tree(self, view: sp.csc_matrix, y: np.ndarray, weights: np.ndarray) -> ChiSquareTreeClassifier:
        """Fit the tree on `view`, the rows' selected columns (`columns_`)."""
        self.estimator_ = DecisionTreeClassifier(
            max_depth=self.max_depth, min_samples_leaf=self.min_samples_leaf, random_state=self.random_state
        ).fit(view, y, sample_weight=weights)
        self.classes_ = self.estimator_.classes_
        return self

    def predict(self, X: sp.spmatrix | np.ndarray) -> np.ndarray:
        """The tree's class for every row of X."""
        return np.asarray(self.estimator_.predict(self._view(sp.csr_matrix(X))))

    def _view(self, X: sp.csr_matrix) -> sp.csc_matrix:
        """The selected columns as float32 CSC (the tree's fast sparse path); a zero column when none."""
        if self.columns_.size == 0:
            return sp.csc_matrix((X.shape[0], 1), dtype=np.float32)
        return sp.csc_matrix(X[:, self.columns_], dtype=np.float32)


def chi_square_columns(
    present: sp.csr_matrix, y: np.ndarray, weights: np.ndarray, top: int, *, term_columns: int | None = None
) -> np.ndarray:
    """Up to `top` columns of `present`, each class's over-represented terms by chi-square, round-robin.

    Parameters
    ----------
    present : csr_matrix of shape (n_rows, n_terms)
        Binary term presence.
    y : ndarray of shape (n_rows,)
        Class of every row.
    weights : ndarray of shape (n_rows,)
        Duplicate counts.
    top : int
        Columns kept at most.
    term_columns : int, optional
        Consider only the first `term_columns` columns (the terms before the metadata indicators); all by default.

    Returns
    -------
    ndarray of int
        Column indexes, best first: rank 1 of every class in class order, then rank 2, ...
    """
    n_columns = present.shape[1] if term_columns is None else term_columns
    classes, codes = np.unique(y, return_inverse=True)
    if n_columns == 0 or classes.size < 2 or top <= 0:
        return np.zeros(0, dtype=np.intp)
    in_class = np.zeros((present.shape[0], classes.size))
    in_class[np.arange(present.shape[0]), codes] = weights
    # (n_columns, n_classes) weighted document frequencies; the product over every column and then the first
    # n_columns rows of it, rather than a copy of the first columns (a tree fit repeats this 126 times)
    df_in = np.asarray(present.T @ in_class)[:n_columns]
    return _ranked_columns(df_in, in_class.sum(axis=0), float(weights.sum()), top)


def _ranked_columns(df_in: np.ndarray, sizes: np.ndarray, total: float, top: int) -> np.ndarray:
    """`chi_square_columns` from the weighted document frequencies (n_columns, n_classes) and class sizes."""
    df_all = df_in.sum(axis=1)
    by_class = np.ascontiguousarray(df_in.T)  # one class's column, read 2 to 20 times, as a contiguous row
    ranks, columns, order_in_rank = [], [], []
    for c in range(sizes.size):
        size, rest = sizes[c], total - sizes[c]
        # only columns present in the class can be over-represented in it (df_out = df_all there, so
        # `over` fails); the scores of the others are never read, and elementwise arithmetic on the rest
        # gives the same numbers as on all columns
        held = np.flatnonzero(by_class[c] > 0)
        df_c = by_class[c][held]
        df_out = df_all[held] - df_c
        scores = chi_square_2x2(df_c, df_out, size - df_c, rest - df_out)
        over = df_c * rest > df_out * size  # share in the class above the share outside
        candidates = np.flatnonzero(over & (scores > 0))
        best = held[best_first(candidates, scores, top)]  # `held` ascends: ties still go to the lower column
        ranks.append(np.arange(best.size))
        columns.append(best)
        order_in_rank.append(np.full(best.size, c))
    rank, column, klass = np.concatenate(ranks), np.concatenate(columns), np.concatenate(order_in_rank)
    column = column[np.lexsort((klass, rank))]
    _, first = np.unique(column, return_index=True)
    return column[np.sort(first)][:top].astype(np.intp)


@dataclass(frozen=True)
class _Columns:
    """What every column of the feature matrix is called and how its conditions read."""

    labels: tuple[str, ...]
    present_text: tuple[str, ...]
    absent_text: tuple[str, ...]
    field: tuple[str, ...]  # the metadata field of a category column ("" for a term): one value per text
    shown: tuple[str, ...]  # the term, or the category's value, as quoted in plain words


@dataclass(frozen=True)
class _Path:
    """A root-to-leaf path whose leaf predicts the class, with the leaf's in-sample figures."""

    conditions: tuple[tuple[int, bool], ...]  # (column of the feature matrix, present?)
    precision: float
    coverage: float


def explain_clusters(
    present: sp.csr_matrix,
    labels: np.ndarray,
    weights: np.ndarray,
    term_labels: Sequence[str],
    *,
    k: int,
    seed: int,
    metadata: Mapping[str, Sequence[str]] | None = None,
    max_features: int = 300,
    depth: int = 3,
) -> RuleSet:
    """A decision rule per cluster with held-out precision and coverage, and the whole tree with its fidelity.

    Features are term presences, selected by chi-square inside every fit (`ChiSquareTreeClassifier`), plus
    one indicator per metadata category (``channel = chat``: the `MAX_VALUES_PER_FIELD` most frequent
    non-empty values of each field; "" counts as missing). Every tree is scikit-learn's CART with
    ``random_state=seed`` and ``sample_weight=weights``.

    Per cluster c, a one-vs-rest tree of depth `depth` with leaf minimum max(5, min(1% of the rows, 10% of
    c's texts)) distinct texts. Its rule is the best `MAX_RULES` root-to-leaf paths whose leaf predicts c
    (c's weight in the leaf above half), ordered by the leaf's precision, then coverage, joined by "or";
    every path's conditions are exactly the tree's tests (threshold 0.5 on a binary column: the left branch
    is "absent"). Held-out figures: ``StratifiedKFold(min(5, c's texts, other texts), shuffle=True,
    random_state=seed)`` on ``labels == c``; in each fold the tree is fitted on the training part, its rule
    extracted and the RULE applied to the held-out part; true and false positives and false negatives are
    summed (by weight) over the folds. The rule returned is the one from the tree fitted on all rows. It is
    withheld (``rule_text=""`` with `no_rule_reason`) when there are too few texts to fold, when no path of
    that tree predicts c, or when held-out precision < `MIN_PRECISION` or coverage < `MIN_COVERAGE`.

    The whole tree has depth ``depth + 1`` and leaf minimum max(5, 1% of the rows); its fidelity is the
    weighted accuracy and macro-F1 of held-out predictions (made as scikit-learn's ``cross_val_predict``
    makes them) with ``StratifiedKFold(min(5, max(2, smallest cluster's texts)), shuffle=True,
    random_state=seed)`` on the cluster labels.

    Parameters
    ----------
    present : csr_matrix of shape (n_texts, n_terms)
        Occurrence of every term in every distinct text (any non-zero counts as present).
    labels : ndarray of shape (n_texts,)
        Cluster of every distinct text, in 0..k-1.
    weights : ndarray of shape (n_texts,)
        Duplicate counts (documents holding each distinct text), positive.
    term_labels : sequence of str, length n_terms
        The word or phrase to show for every column.
    k : int
        Number of clusters.
    seed : int
        The run's seed: folds and every tree.
    metadata : mapping of str to sequence of str, optional
        Field name -> one categorical value per distinct text.
    max_features : int, default=300
        Term columns each tree may choose from.
    depth : int, default=3
        Depth of the per-cluster trees.

    Returns
    -------
    RuleSet
    """
    n = present.shape[0]
    _check_inputs(present, labels, weights, term_labels, k, metadata, max_features, depth)
    labels = np.asarray(labels).astype(np.intp)
    weights = np.asarray(weights, dtype=float)
    X, columns = _feature_matrix(present, weights, term_labels, metadata or {})
    n_terms = present.shape[1]
    column_present = _column_presence(X)
    counts = np.bincount(labels, minlength=k)
    fits = _Fits(X, weights, n_terms)
    classes, codes = np.unique(labels, return_inverse=True)
    totals = fits.class_totals(codes, classes.size)  # (n_terms, clusters present): shared by every fit
    exclusive = exclusive_groups(columns.field)
    rules = []
    for c in range(k):
        model = ChiSquareTreeClassifier(
            n_terms=n_terms, max_features=max_features, max_depth=depth,
            min_samples_leaf=_cluster_leaf_minimum(n, int(counts[c])), random_state=seed,
        )
        rules.append(_cluster_rule(c, labels == c, fits, _one_against_rest(fits, totals, classes, c, labels),
                                   model, column_present, columns, exclusive, seed))
    whole_model = ChiSquareTreeClassifier(
        n_terms=n_terms, max_features=max_features, max_depth=depth + WHOLE_TREE_EXTRA_DEPTH,
        min_samples_leaf=max(MIN_LEAF_TEXTS, math.ceil(LEAF_SHARE_OF_ROWS * n)), random_state=seed,
    )
    whole = fits.fit(whole_model, np.arange(n), codes, totals, classes)
    folds = min(MAX_FOLDS, max(2, int(counts[counts > 0].min())))
    # held-out predictions as scikit-learn's cross_val_predict makes them (fit on each training part, predict
    # its held-out part), with the fits sharing their work
    predicted = np.empty_like(labels)
    with warnings.catch_warnings():  # a one-text cluster cannot be in every fold; sklearn says so, we know
        warnings.filterwarnings("ignore", message="The least populated class", category=UserWarning)
        for train, test in StratifiedKFold(folds, shuffle=True, random_state=seed).split(np.zeros(n), labels):
            predicted[test] = fits.fit(whole_model, train, codes, totals, classes).predict(X[test])
    return RuleSet(
        rules=tuple(rules),
        fidelity_accuracy=float(accuracy_score(labels, predicted, sample_weight=weights)),
        fidelity_macro_f1=float(
            f1_score(labels, predicted, labels=np.flatnonzero(counts), average="macro", sample_weight=weights,
                     zero_division=0)
        ),
        whole_tree=_tree_node(whole, 0, "", columns),
        features=int(whole.columns_.size),
        folds=folds,
    )


def _cluster_leaf_minimum(n: int, members: int) -> int:
    """Distinct texts per leaf of a cluster's tree: max(5, min(1% of the rows, 10% of the cluster))."""
    return max(MIN_LEAF_TEXTS, min(math.ceil(LEAF_SHARE_OF_ROWS * n), math.ceil(LEAF_SHARE_OF_CLUSTER * members)))


def _check_inputs(
    present: sp.spmatrix, labels: np.ndarray, weights: np.ndarray, term_labels: Sequence[str], k: int,
    metadata: Mapping[str, Sequence[str]] | None, max_features: int, depth: int,
) -> None:
    """Raise one ValueError listing every inconsistency of the arguments (these are bugs, not user errors)."""
    n = present.shape[0]
    labels = np.asarray(labels)
    weights = np.asarray(weights)
    problems = []
    if labels.shape != (n,) or weights.shape != (n,):
        problems.append(f"labels {labels.shape} and weights {weights.shape} need one value per row ({n})")
    elif n and (labels.min() < 0 or labels.max() >= k):
        problems.append(f"labels must lie in 0..{k - 1}")
    elif n and np.bincount(labels.astype(np.intp), minlength=k).max() < 2:
        problems.append("every cluster holds one text; rules need a cluster of two texts or more")
    if weights.shape == (n,) and n and not np.all(weights > 0):
        problems.append("weights must be positive")
    if len(term_labels) != present.shape[1]:
        problems.append(f"{len(term_labels)} term labels for {present.shape[1]} term columns")
    for name, values in (metadata or {}).items():
        if len(values) != n:
            problems.append(f"metadata field {name!r} has {len(values)} values for {n} rows")
    if n < 2:
        problems.append(f"rules need two texts or more, not {n}")
    if max_features < 1 or depth < 1:
        problems.append(f"max_features ({max_features}) and depth ({depth}) must be at least 1")
    if problems:
        raise ValueError("; ".join(problems))


def _feature_matrix(
    present: sp.csr_matrix, weights: np.ndarray, term_labels: Sequence[str], metadata: Mapping[str, Sequence[str]]
) -> tuple[sp.csr_matrix, _Columns]:
    """Binary term columns followed by one indicator per kept metadata category, and how they read."""
    terms = sp.csr_matrix(present, dtype=np.float32, copy=True)
    terms.eliminate_zeros()
    terms.data[:] = 1.0
    labels = [str(t) for t in term_labels]
    present_text = [f'mentions "{t}"' for t in labels]
    absent_text = [f'does not mention "{t}"' for t in labels]
    fields = [""] * len(labels)
    shown = list(labels)
    blocks = [terms]
    for name, values in metadata.items():
        values_array = np.asarray([str(v) for v in values], dtype=object)
        kinds, codes = np.unique(values_array, return_inverse=True)
        totals = np.bincount(codes, weights=weights, minlength=kinds.size)
        keep = [i for i in np.lexsort((kinds, -totals)) if kinds[i] != ""][:MAX_VALUES_PER_FIELD]
        for i in keep:
            rows = np.flatnonzero(codes == i)
            if rows.size == present.shape[0]:
                continue  # a value every text has cannot separate anything
            blocks.append(sp.csr_matrix(
                (np.ones(rows.size, dtype=np.float32), (rows, np.zeros(rows.size, dtype=np.intp))),
                shape=(present.shape[0], 1),
            ))
            labels.append(f"{name} = {kinds[i]}")
            present_text.append(f'{name} is "{kinds[i]}"')
            absent_text.append(f'{name} is not "{kinds[i]}"')
            fields.append(name)
            shown.append(str(kinds[i]))
    X = sp.csr_matrix(sp.hstack(blocks, format="csr", dtype=np.float32))
    return X, _Columns(tuple(labels), tuple(present_text), tuple(absent_text), tuple(fields), tuple(shown))


def _column_presence(X: sp.csr_matrix) -> list[np.ndarray]:
    """Per column, the sorted row indexes where it is present (for applying rules by their conditions)."""
    csc = X.tocsc()
    csc.sort_indices()
    return [csc.indices[csc.indptr[j]:csc.indptr[j + 1]] for j in range(csc.shape[1])]


class _Fits:
    """Tree fits on subsets of the rows of one feature matrix, sharing the work every fit would repeat.

    A `ChiSquareTreeClassifier` fit on the rows `rows` gives the same tree as ``fit(X[rows], y[rows],
    weights[rows])``: the same term columns (the same chi-square figures from the same document frequencies)
    and the same matrix for the tree. What differs is the arithmetic. The weighted document frequencies of a
    training part are those of all rows (one product per labelling, made once) less those of the held-out
    part, which is a quarter of its size; this is exact when the weights are whole numbers (copies), as
    their sums are then exact in floating point in any order, so other weights take the direct product.
    The tree's matrix is cut from a column-major copy made once: the chosen columns first, then the rows,
    instead of the rows of every column first.
    """

    def __init__(self, X: sp.csr_matrix, weights: np.ndarray, n_terms: int) -> None:
        self.X = X
        self.by_column = X.tocsc()
        self.by_column.sort_indices()
        self.weights = weights
        self.n_terms = n_terms
        self.whole_weights = bool(np.all(weights == np.round(weights)))

    def class_totals(self, codes: np.ndarray, n_classes: int) -> np.ndarray:
        """Weighted document frequency of every term column in every class over all rows: (n_terms, n_classes)."""
        return self._document_frequencies(np.arange(codes.size), codes, n_classes)

    def _document_frequencies(self, rows: np.ndarray, codes: np.ndarray, n_classes: int) -> np.ndarray:
        in_class = np.zeros((rows.size, n_classes))
        in_class[np.arange(rows.size), codes[rows]] = self.weights[rows]
        return np.asarray(self.X[rows].T @ in_class)[: self.n_terms]

    def fit(
        self, model: ChiSquareTreeClassifier, rows: np.ndarray, codes: np.ndarray, totals: np.ndarray,
        classes: np.ndarray,
    ) -> ChiSquareTreeClassifier:
        """`model` fitted on `rows` with labels ``classes[codes]``; `totals` is `class_totals(codes, ...)`."""
        n = codes.size
        fitted = clone(model)
        present = np.bincount(codes[rows], minlength=classes.size) > 0
        terms = np.zeros(0, dtype=np.intp)
        if self.n_terms > 0 and present.sum() >= 2 and model.max_features > 0:
            if rows.size == n:
                df = totals
            elif self.whole_weights and 2 * rows.size > n:
                held = np.setdiff1d(np.arange(n), rows, assume_unique=True)
                df = totals - self._document_frequencies(held, codes, classes.size)
            else:
                df = self._document_frequencies(rows, codes, classes.size)
            sizes = np.bincount(codes[rows], weights=self.weights[rows], minlength=classes.size)
            terms = _ranked_columns(df[:, present], sizes[present], float(self.weights[rows].sum()),
                                    model.max_features)
        fitted._set_columns(terms, self.X.shape[1])
        if fitted.columns_.size == 0:
            view = sp.csc_matrix((rows.size, 1), dtype=np.float32)
        else:
            view = sp.csc_matrix(self.by_column[:, fitted.columns_][rows], dtype=np.float32)
        return fitted._fit_tree(view, classes[codes[rows]], self.weights[rows])


def _one_against_rest(fits: _Fits, totals: np.ndarray, classes: np.ndarray, c: int, labels: np.ndarray) -> np.ndarray:
    """Weighted document frequencies outside and inside cluster c over all rows: (n_terms, 2)."""
    where = np.flatnonzero(classes == c)
    if fits.whole_weights and where.size:  # sums of whole numbers: the rest's is all less the cluster's, exactly
        inside = totals[:, where[0]]
        return np.column_stack([totals.sum(axis=1) - inside, inside])
    return fits.class_totals((labels == c).astype(np.intp), 2)


def _cluster_rule(
    c: int, y: np.ndarray, fits: _Fits, totals: np.ndarray, model: ChiSquareTreeClassifier,
    column_present: list[np.ndarray], columns: _Columns, exclusive: Sequence[frozenset[int]], seed: int,
) -> ClusterRule:
    """Rule of cluster c from the tree fitted on all rows; precision and coverage from held-out folds.

    `y` marks the cluster's rows and `totals` holds the term columns' weighted document frequencies outside
    and inside it over all rows.
    """
    members = int(y.sum())
    n_splits = min(MAX_FOLDS, members, y.size - members)
    if n_splits < 2:
        return ClusterRule(c, "", (), None, None,
                           f"too few texts to test a rule on held-out folds ({members} in the cluster, "
                           f"{y.size - members} outside)")
    weights, codes, sides = fits.weights, y.astype(np.intp), np.array([False, True])
    paths = _leaf_paths(fits.fit(model, np.arange(y.size), codes, totals, sides), True)[:MAX_RULES]
    tp = fp = fn = 0.0
    for train, test in StratifiedKFold(n_splits, shuffle=True, random_state=seed).split(np.zeros(y.size), y):
        fold_paths = _leaf_paths(fits.fit(model, train, codes, totals, sides), True)
        matched = _matches(fold_paths[:MAX_RULES], column_present, y.size)[test]
        w, truth = weights[test], y[test]
        tp += float(w[matched & truth].sum())
        fp += float(w[matched & ~truth].sum())
        fn += float(w[~matched & truth].sum())
    precision = tp / (tp + fp) if tp + fp > 0 else None
    coverage = tp / (tp + fn)
    simple = simplify_paths([p.conditions for p in paths], exclusive)
    text = rule_text(simple, columns)
    reason = ""
    if not paths:
        reason = f"no path of the depth-{model.max_depth} tree ends in a leaf where this cluster is the majority"
    else:
        shortfalls = []
        if precision is None:
            shortfalls.append("the rules fitted on the training folds matched no held-out text")
        elif precision < MIN_PRECISION:
            shortfalls.append(f"held-out precision {precision:.2f} is below {MIN_PRECISION:g}")
        if coverage < MIN_COVERAGE:
            shortfalls.append(f"held-out coverage {coverage:.2f} is below {MIN_COVERAGE:g}")
        if shortfalls:
            reason = " and ".join(shortfalls) + f" (best rule: {text})"
    if reason:
        return ClusterRule(c, "", (), precision, coverage, reason)
    conditions = tuple(tuple((columns.labels[j], is_present) for j, is_present in term) for term in simple)
    return ClusterRule(c, text, conditions, precision, coverage, "", rule_words(simple, columns))


def _leaf_paths(model: ChiSquareTreeClassifier, positive: object) -> list[_Path]:
    """Root-to-leaf paths whose leaf predicts `positive`, best first by (precision, coverage), then node id."""
    tree = model.estimator_.tree_
    classes = model.classes_
    where = np.flatnonzero(classes == positive)
    if where.size == 0:
        return []
    pos = int(where[0])
    value = tree.value[:, 0, :]
    share = value / value.sum(axis=1, keepdims=True)
    positive_weight = share[:, pos] * tree.weighted_n_node_samples
    found: list[tuple[int, _Path]] = []
    stack: list[tuple[int, tuple[tuple[int, bool], ...]]] = [(0, ())]
    while stack:
        node, conditions = stack.pop()
        left, right = int(tree.children_left[node]), int(tree.children_right[node])
        if left == -1:  # sklearn's TREE_LEAF; the prediction is classes_[argmax(value)], first on ties
            if int(np.argmax(value[node])) == pos:
                found.append((node, _Path(conditions, float(share[node, pos]),
                                          float(positive_weight[node] / positive_weight[0]))))
            continue
        column = int(model.columns_[tree.feature[node]])
        threshold = float(tree.threshold[node])
        if not 0.0 < threshold < 1.0:
            raise ValueError(f"split threshold {threshold} on column {column} is not between 0 and 1; "
                             "the features must be binary")
        stack.append((right, (*conditions, (column, True))))
        stack.append((left, (*conditions, (column, False))))
    found.sort(key=lambda item: (-item[1].precision, -item[1].coverage, item[0]))
    return [path for _, path in found]


def _matches(paths: Sequence[_Path], column_present: list[np.ndarray], n: int) -> np.ndarray:
    """Rows matched by any of the paths, applying their conditions to the columns (not the tree)."""
    matched = np.zeros(n, dtype=bool)
    for path in paths:
        ok = np.ones(n, dtype=bool)
        for column, is_present in path.conditions:
            has = np.zeros(n, dtype=bool)
            has[column_present[column]] = True
            ok &= has if is_present else ~has
        matched |= ok
    return matched


def rule_text(terms: Sequence[Sequence[Literal]], columns: _Columns) -> str:
    """Conditions joined by "and", terms by "or"; a term of several conditions in parentheses when two."""
    texts = [
        " and ".join(columns.present_text[j] if present else columns.absent_text[j] for j, present in term)
        for term in terms
    ]
    if len(terms) > 1:
        texts = [f"({t})" if len(term) > 1 else t for t, term in zip(texts, terms, strict=True)]
    if terms and not any(terms):
        return "every document"
    return " or ".join(texts)


def _tree_node(model: ChiSquareTreeClassifier, node: int, condition: str, columns: _Columns) -> TreeNode:
    """The subtree under `node` as nested TreeNodes, the branch where the condition holds first."""
    tree = model.estimator_.tree_
    value = tree.value[node, 0, :]
    top = int(np.argmax(value))
    children: tuple[TreeNode, ...] = ()
    left = int(tree.children_left[node])
    if left != -1:
        column = int(model.columns_[tree.feature[node]])
        children = (
            _tree_node(model, int(tree.children_right[node]), columns.present_text[column], columns),
            _tree_node(model, left, columns.absent_text[column], columns),
        )
    return TreeNode(
        condition=condition,
        weight=float(tree.weighted_n_node_samples[node]),
        majority=int(model.classes_[top]),
        majority_share=float(value[top] / value.sum()),
        children=children,
    )


def explain_run(
    counts: sp.csr_matrix, weights: np.ndarray, labels: np.ndarray, shown: list[str],
    metadata: MetadataAnalysis | None, columns: dict[str, list[str]], *, k: int, seed: int,
) -> RuleSet:
    """Decision rules per cluster on term presence and the categorical table columns.

    `counts` holds the term counts of the distinct texts (one row each), `weights` their copies, and
    `columns` the table columns' cells of each distinct text.
    """
    rows = stability_rows(labels.size, seed, cap=RULES_ROWS)
    present = counts[rows]
    present = sp.csr_matrix((np.ones_like(present.data), present.indices, present.indptr), shape=present.shape)
    categorical = [c.column for c in metadata.categorical] if metadata is not None else []
    fields = {name: [columns[name][i] for i in rows] for name in categorical} or None
    return explain_clusters(present, labels[rows], weights[rows], shown, k=k, seed=seed, metadata=fields)


Literal = tuple[int, bool]  # (column, present?)
MAX_EXACT_VARIABLES = 8  # above this many columns in one rule, paths are only de-duplicated (2 paths of depth 3: 6)


def exclusive_groups(fields: Sequence[str]) -> list[frozenset[int]]:
    """Columns that cannot hold together: the category columns of one metadata field (a text has one value)."""
    by_field: dict[str, set[int]] = {}
    for column, name in enumerate(fields):
        if name:
            by_field.setdefault(name, set()).add(column)
    return [frozenset(columns) for columns in by_field.values() if len(columns) > 1]


def simplify_paths(
    paths: Sequence[Sequence[Literal]], exclusive: Sequence[frozenset[int]] = ()
) -> tuple[tuple[Literal, ...], ...]:
    """The shortest "or" of "and"s that is true exactly where one of `paths` is, on every possible input.

    Exact two-level minimization (Quine 1952, "The problem of simplifying truth functions"; McCluskey 1956):
    every assignment of the columns the paths mention is enumerated; assignments in which two columns of
    one `exclusive` group hold together cannot occur (two values of one field) and are "don't care". The
    prime implicants are found by enumerating every conjunction of the columns, and the smallest cover
    of the true assignments is chosen by trying covers of 1, 2, ... terms. Among covers of equal size,
    fewer conditions win, then more positive conditions ("mentions" rather than "does not mention"),
    then the earliest columns. This merges alternatives that differ in one condition ((A and x) or
    (A and not x) -> A), drops conditions another implies (``field is "a"`` implies ``field is not "b"``),
    and drops a path that another contains.

    Parameters
    ----------
    paths : sequence of sequence of (int, bool)
        Each path is a conjunction of (column, present?) conditions; the rule is their disjunction.
    exclusive : sequence of frozenset of int
        Groups of columns of which at most one is present in any row.

    Returns
    -------
    tuple of tuple of (int, bool)
        The simplified terms, positive conditions first within a term; terms in the order of the first
        path each overlaps. () when the paths can never hold; ((),) when they always hold.
    """
    order: dict[int, int] = {}
    for path in paths:
        for column, _ in path:
            order.setdefault(column, len(order))
    columns = sorted(order, key=order.__getitem__)
    if len(columns) > MAX_EXACT_VARIABLES:
        return tuple(dict.fromkeys(tuple(p) for p in paths))
    n = len(columns)
    position = {c: i for i, c in enumerate(columns)}
    groups = [[position[c] for c in g if c in position] for g in exclusive]
    groups = [g for g in groups if len(g) > 1]

    def possible(bits: int) -> bool:
        return all(sum((bits >> i) & 1 for i in g) <= 1 for g in groups)

    def holds(term: Sequence[Literal], bits: int) -> bool:
        return all(bool((bits >> position[c]) & 1) == present for c, present in term)

    on = [b for b in range(1 << n) if possible(b) and any(holds(p, b) for p in paths)]
    off = [b for b in range(1 << n) if possible(b) and not any(holds(p, b) for p in paths)]
    if not on:
        return ()
    if not off:
        return ((),)
    implicants = []
    for code in itertools.product((None, True, False), repeat=n):
        term = tuple((columns[i], v) for i, v in enumerate(code) if v is not None)
        if not any(holds(term, b) for b in off):
            covered = frozenset(b for b in on if holds(term, b))
            if covered:
                implicants.append((term, covered))
    known = {frozenset(t) for t, _ in implicants}
    # prime: dropping any one condition lets a false assignment in (any shorter implicant would be known)
    primes = [(t, cov) for t, cov in implicants if not any(frozenset(t) - {lit} in known for lit in t)]
    everything = frozenset(on)
    for size in range(1, len(primes) + 1):
        covers = [combo for combo in itertools.combinations(primes, size)
                  if frozenset().union(*(cov for _, cov in combo)) == everything]
        if covers:
            best = min(covers, key=lambda combo: _cover_cost([t for t, _ in combo], order))
            return _ordered([t for t, _ in best], paths, order, position)
    raise AssertionError("the primes always cover the true assignments")  # pragma: no cover


def _cover_cost(terms: Sequence[Sequence[Literal]], order: Mapping[int, int]) -> tuple[int, int, list[int]]:
    """Fewer conditions, then fewer negations, then earlier columns."""
    literals = [lit for term in terms for lit in term]
    return (len(literals), sum(1 for _, present in literals if not present), sorted(order[c] for c, _ in literals))


def _ordered(
    terms: Sequence[Sequence[Literal]], paths: Sequence[Sequence[Literal]], order: Mapping[int, int],
    position: Mapping[int, int],
) -> tuple[tuple[Literal, ...], ...]:
    """Positive conditions first in each term (then column order); terms by the first path each overlaps."""

    def overlaps(term: Sequence[Literal], path: Sequence[Literal]) -> bool:
        wanted = dict(term)
        return all(wanted.get(c, present) == present for c, present in path)

    def first_path(term: Sequence[Literal]) -> int:
        return next((i for i, p in enumerate(paths) if overlaps(term, p)), len(paths))

    tidy = [tuple(sorted(term, key=lambda lit: (not lit[1], order[lit[0]]))) for term in terms]
    return tuple(sorted(tidy, key=lambda t: (first_path(t), [order[c] for c, _ in t])))


def rule_words(terms: Sequence[Sequence[Literal]], columns: _Columns) -> str:
    """The rule as one sentence: "Documents that mention "a" and "b" but not "c", whose channel is "chat"."."""
    if not terms:
        return ""
    if len(terms) > 1:
        common = [lit for lit in terms[0] if all(lit in term for term in terms[1:])]
        rest = [[lit for lit in term if lit not in common] for term in terms]
        if all(len(r) == 1 and _is_word(r[0], columns) for r in rest) and all(_is_word(c, columns) for c in common):
            either = _joined([f'"{columns.shown[r[0][0]]}"' for r in rest], "or")
            if not common:  # "a" or "b" or "c"
                return f"Documents that mention {either}."
            said = _joined([f'"{columns.shown[j]}"' for j, _ in common], "and")
            return f"Documents that mention {said} and either {either}."
    clauses = [_clause(term, columns) for term in terms]
    return "Documents " + "; or documents ".join(clauses) + "."


def _is_word(literal: Literal, columns: _Columns) -> bool:
    """A "mentions" condition on a term (not a negation, not a table column)."""
    return literal[1] and not columns.field[literal[0]]


def _clause(term: Sequence[Literal], columns: _Columns) -> str:
    """One term in words: what the documents mention and what their fields hold."""
    if not term:
        return "of any kind"
    said = [f'"{columns.shown[j]}"' for j, present in term if present and not columns.field[j]]
    unsaid = [f'"{columns.shown[j]}"' for j, present in term if not present and not columns.field[j]]
    fields = [f'{columns.field[j]} is{"" if present else " not"} "{columns.shown[j]}"'
              for j, present in term if columns.field[j]]
    parts = []
    if said:
        parts.append("that mention " + _joined(said, "and") + (" but not " + _joined(unsaid, "or") if unsaid else ""))
    elif unsaid:
        parts.append("that mention neither " + _joined(unsaid, "nor") if len(unsaid) > 1
                     else "that do not mention " + unsaid[0])
    if fields:
        parts.append("whose " + _joined(fields, "and"))
    return ", ".join(parts)


def _joined(items: Sequence[str], word: str) -> str:
    """"a", "a and b", "a, b and c"."""
    return items[0] if len(items) == 1 else ", ".join(items[:-1]) + f" {word} " + items[-1]
