"""Profiling clusters: their strongest and weakest terms, and how table metadata is spread across them.

Two analyses, pure computation (no I/O):

- `term_profiles`: per cluster, the terms whose mean TF-IDF weight is highest (and lowest) inside the
  cluster compared with outside it, with both means.
- `analyse_metadata`: for every extra column of a table, either a contingency table of clusters by
  values with Pearson's chi-square test, Cramér's V and adjusted standardized residuals (categorical
  columns), or quartiles per cluster against the rest with a Mann-Whitney U test (numeric columns), or
  the reason the column was left out.

Duplicate texts are clustered once and counted as often as they occur: every statistic here is weighted
by the copies of each distinct text. The tests therefore treat copies as independent observations, which
overstates the evidence when a collection holds many copies.
"""

from __future__ import annotations

import math
import re
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
from scipy.stats import chi2_contingency, mannwhitneyu

from pilewise.clustering.kmeans import cluster_sums
from pilewise.describe.stats import best_first
from pilewise.vectors.tfidf import document_frequency, smooth_idf, tfidf_rows

# Column typing (our choices; see analyse_metadata).
NUMERIC_SHARE_MIN = 0.95  # share of non-empty cells that must parse as numbers (or be ISO dates)
CATEGORY_MAX = 50  # at most this many distinct values for a text column to count as categorical
NUMERIC_CATEGORY_MAX = 10  # a numeric column with at most this many distinct values is categorical
ID_MIN_ROWS = 20  # whole numbers, all different, over at least this many rows, in a dense run: an id
ID_SPAN_FACTOR = 2.0  # "dense run": max - min + 1 is at most this many times the number of rows

# Categorical tests (common practice, see CategoricalColumn).
RESIDUAL_FLAG = 1.96  # |adjusted residual| above this is reported as over- or under-represented
SPARSE_EXPECTED = 5.0  # Cochran's rule: expected counts below 5 ...
SPARSE_SHARE_MAX = 0.2  # ... in more than 20% of the cells (or any below 1) make the test unreliable

BLANK = "(blank)"
SKIP_REASONS = ("empty", "one value", "date", "id", "free text", "too many values")
"""Every reason a column can be skipped for, in the order the rules are tried."""

_ISO_DATE = re.compile(
    r"\d{4}[-/](0[1-9]|1[0-2])[-/](0[1-9]|[12]\d|3[01])"
    r"([T ]([01]\d|2[0-3]):[0-5]\d(:[0-5]\d(\.\d+)?)?(Z|[+-]\d{2}:?\d{2})?)?"
)
# Plain decimal numbers; a leading zero before another digit ("007", "02139") marks a code, not a number.
_NUMBER = re.compile(r"[+-]?(0|[1-9]\d*)(\.\d*)?([eE][+-]?\d+)?|[+-]?\.\d+([eE][+-]?\d+)?")


@dataclass(frozen=True)
class TermProfile:
    """A term's mean TF-IDF weight over the documents inside a cluster and over those outside it."""

    term: str
    mean_in: float
    mean_out: float


@dataclass(frozen=True)
class ClusterProfile:
    """The terms most over-represented (`stronger`) and most under-represented (`weaker`) in a cluster."""

    cluster_id: int
    stronger: tuple[TermProfile, ...]
    weaker: tuple[TermProfile, ...]


@dataclass(frozen=True)
class CellResidual:
    """One cell of a cluster-by-value table: documents counted, expected under independence, residual."""

    value: str
    count: int
    expected: float
    residual: float


@dataclass(frozen=True)
class CategoricalColumn:
    """A categorical column against the clusters.

    Attributes
    ----------
    column : str
    values : tuple of str
        The column's values, most frequent first; empty cells are the value "(blank)", always last.
    table : ndarray of int, shape (k, m)
        Documents per cluster (rows, numbered as the clusters) and value (columns, as `values`).
    chi2, dof, p_value : float, int, float
        Pearson's chi-square test of independence without continuity correction.
    cramers_v : float
        sqrt(chi2 / (n (min(k, m) - 1))), from 0 (no association) to 1.
    sparse_warning : bool
        True when more than 20% of the expected counts are below 5, or any is below 1 (Cochran's rule):
        the chi-square approximation, p-value and residuals are then unreliable.
    over, under : tuple (one per cluster) of tuples of CellResidual
        Cells with adjusted standardized residual above 1.96 (largest first) and below -1.96 (most
        negative first).
    """

    column: str
    values: tuple[str, ...]
    table: np.ndarray
    chi2: float
    dof: int
    p_value: float
    cramers_v: float
    sparse_warning: bool
    over: tuple[tuple[CellResidual, ...], ...]
    under: tuple[tuple[CellResidual, ...], ...]


@dataclass(frozen=True)
class NumericSummary:
    """Quartiles of a numeric column in one cluster and in all the other clusters together.

    Counts are documents with a number in the column. A side without numbers has count 0 and NaN
    quartiles; `p_value` (two-sided Mann-Whitney U, cluster against the rest) is None when either side
    is empty or every value is the same.
    """

    cluster_id: int
    count: int
    q1: float
    median: float
    q3: float
    rest_count: int
    rest_q1: float
    rest_median: float
    rest_q3: float
    p_value: float | None


@dataclass(frozen=True)
class NumericColumn:
    """A numeric column summarized per cluster, clusters in order."""

    column: str
    clusters: tuple[NumericSummary, ...]


@dataclass(frozen=True)
class SkippedColumn:
    """A column left out, with its reason: one of SKIP_REASONS."""

    column: str
    reason: str


@dataclass(frozen=True)
class MetadataAnalysis:
    """Every extra column of a table, each in exactly one of the three groups, in input order."""

    categorical: tuple[CategoricalColumn, ...]
    numeric: tuple[NumericColumn, ...]
    skipped: tuple[SkippedColumn, ...]


def term_profiles(
    tfidf: sp.csr_matrix,
    labels: np.ndarray,
    weights: np.ndarray,
    term_labels: Sequence[str],
    *,
    k: int,
    top: int = 10,
    bottom: int = 5,
) -> tuple[ClusterProfile, ...]:
    """Strongest and weakest terms of every cluster by difference of mean TF-IDF weight, in and out.

    For cluster c and term t, mean_in = sum_d w_d x_dt / sum_d w_d over the documents in c, and mean_out
    the same over the documents of every other cluster, where x_dt is the TF-IDF weight and w_d the
    number of copies of distinct text d. Terms are ranked by mean_in - mean_out: the `top` largest
    positive differences are `stronger`, the `bottom` most negative are `weaker`; ties go to the lower
    column index. The weighted mean of the TF-IDF rows is the cluster's centroid, so this ranks the terms
    of the centroid against the centroid of the rest: it crosses the two kinds of cluster labeling of
    Manning, Raghavan & Schütze, Introduction to Information Retrieval (2008), §17.7 (the most highly
    weighted terms of the centroid; differential labeling, comparing a cluster with the others). The
    difference itself is our choice, not the book's.

    Parameters
    ----------
    tfidf : scipy.sparse.csr_matrix, shape (n_texts, n_terms)
        Row-normalized TF-IDF weights of the distinct texts.
    labels : ndarray of int, shape (n_texts,)
        Cluster of each distinct text, 0 to k - 1; every cluster must have a member.
    weights : ndarray, shape (n_texts,)
        Positive weight of each distinct text (its number of copies).
    term_labels : sequence of str, length n_terms
        What to show for each column (surface words).
    k : int
        Number of clusters, at least 2.
    top, bottom : int, default 10 and 5
        How many stronger and weaker terms to keep per cluster.

    Returns
    -------
    tuple of ClusterProfile, one per cluster in order
    """
    matrix = sp.csr_matrix(tfidf, dtype=float)
    w = np.asarray(weights, dtype=float)
    lab = _check_clusters(labels, w, k, matrix.shape[0])
    (sums,) = cluster_sums(matrix, w, lab, k)
    return profiles_from_sums(sums, np.bincount(lab, weights=w, minlength=k), term_labels, top=top, bottom=bottom)


def term_profiles_from_counts(
    counts: sp.csr_matrix, labels: np.ndarray, weights: np.ndarray, term_labels: Sequence[str], *, k: int
) -> tuple[ClusterProfile, ...]:
    """`term_profiles` of the sublinear TF-IDF of `counts` (the weighting of `vectors.tfidf_weights`), summed
    block by block of rows, so that large collections need no copy of their TF-IDF matrix. The idf counts
    every document: each row as often as its weight (its copies)."""
    idf = smooth_idf(document_frequency(counts, weights), float(np.sum(weights)))
    (sums,) = cluster_sums(counts, weights, labels, k, lambda block: tfidf_rows(block, idf))
    return profiles_from_sums(sums, np.bincount(labels, weights=weights, minlength=k), term_labels)


def profiles_from_sums(
    sums: sp.csr_matrix, sizes: np.ndarray, term_labels: Sequence[str], *, top: int = 10, bottom: int = 5
) -> tuple[ClusterProfile, ...]:
    """`term_profiles` from each cluster's weighted sum of TF-IDF rows (k x terms) and weighted size.

    This is what a pass over the rows in blocks can accumulate (`term_profiles_from_counts`).
    """
    if sums.shape[1] != len(term_labels):
        raise ValueError(f"{len(term_labels)} term labels for a matrix of {sums.shape[1]} terms")
    if top < 0 or bottom < 0:
        raise ValueError(f"top={top} and bottom={bottom} must not be negative")
    total_weight = float(sizes.sum())
    sums_all = np.asarray(sums.sum(axis=0)).ravel()
    profiles = []
    for c in range(sums.shape[0]):
        size = float(sizes[c])
        sums_in = sums[c].toarray().ravel()
        mean_in = sums_in / size
        mean_out = (sums_all - sums_in) / (total_weight - size)
        diff = mean_in - mean_out
        up = best_first(np.flatnonzero(diff > 0), diff, top)
        down = best_first(np.flatnonzero(diff < 0), -diff, bottom)
        profiles.append(
            ClusterProfile(
                cluster_id=c,
                stronger=tuple(TermProfile(term_labels[i], float(mean_in[i]), float(mean_out[i])) for i in up.tolist()),
                weaker=tuple(TermProfile(term_labels[i], float(mean_in[i]), float(mean_out[i])) for i in down.tolist()),
            )
        )
    return tuple(profiles)


def analyse_metadata(
    columns: Mapping[str, Sequence[str]], labels: np.ndarray, weights: np.ndarray, *, k: int
) -> MetadataAnalysis:
    """Type every extra column of a table and set it against the clusters.

    Typing rule, tried in this order on the cells (stripped of surrounding white space; weights play
    no part):

    1. no non-empty cell: skipped, "empty";
    2. at least 95% of the non-empty cells are ISO-like dates (YYYY-MM-DD or YYYY/MM/DD, optionally
       followed by a time hh:mm[:ss[.fff]] and a zone): skipped, "date" (dates are left to a later analysis);
    3. a single distinct value, either in every cell or in only one: skipped, "one value";
    4. at least 95% of the non-empty cells are plain decimal numbers ("12", "-0.5", "1e3"; not "007",
       "1,200" or "nan"):
       - at most 10 distinct values, each appearing twice on average (distinct <= non-empty / 2):
         categorical (ratings, flags, small codes);
       - whole numbers, all different, at least 20 of them, spanning at most twice their count
         (max - min + 1 <= 2n): skipped, "id" (row numbers, ticket numbers);
       - otherwise numeric; the few cells that are not numbers count as missing, like empty ones;
    5. at most 50 distinct values, each appearing twice on average: categorical;
    6. otherwise skipped: "id" when every value is different and none holds white space, "free text" when
       at least half the values hold white space, else "too many values".

    Categorical columns get a cluster-by-value table of documents (empty cells are the value
    "(blank)"), Pearson's chi-square test of independence (scipy.stats.chi2_contingency without
    continuity correction), Cramér's V (Cramér, Mathematical Methods of Statistics (1946), §21.9; section
    from memory) and the adjusted standardized residuals
    r_ij = (n_ij - e_ij) / sqrt(e_ij (1 - n_i+ / n)(1 - n_+j / n)), e_ij = n_i+ n_+j / n,
    which are approximately standard normal under independence (Agresti, An Introduction to Categorical
    Data Analysis, 2nd ed. (2007), §2.4.5, p. 38, where they are called standardized residuals;
    Agresti, Categorical Data Analysis, 2nd ed. (2002), §3.3.1, from memory). Cells with |r| > 1.96 are
    reported (common practice). Numeric columns get the quartiles of each cluster against all other
    clusters (numpy's default linear interpolation, Hyndman & Fan's definition 7) and a two-sided
    Mann-Whitney U test (scipy.stats.mannwhitneyu), every document counted as often as it occurs.

    Parameters
    ----------
    columns : mapping of column name to sequence of str, each of length n_texts
        The cells of each extra column, one per row of `labels`; the pipeline passes one per document,
        copies included, with weights of 1, so that every document counts with its own cells.
    labels : ndarray of int, shape (n_texts,)
        Cluster of each distinct text, 0 to k - 1; every cluster must have a member.
    weights : ndarray, shape (n_texts,)
        Copies of each distinct text: whole numbers, at least 1.
    k : int
        Number of clusters, at least 2.

    Returns
    -------
    MetadataAnalysis
    """
    w = np.asarray(weights, dtype=float)
    lab = _check_clusters(labels, w, k, w.size)
    if np.any(w != np.round(w)):
        raise ValueError("weights must be whole numbers of copies")
    copies = w.astype(np.int64)
    categorical: list[CategoricalColumn] = []
    numeric: list[NumericColumn] = []
    skipped: list[SkippedColumn] = []
    for name, raw in columns.items():
        if len(raw) != lab.size:
            raise ValueError(f"column {name!r} has {len(raw)} cells for {lab.size} texts")
        cells = [str(cell).strip() for cell in raw]
        kind = _column_kind(cells)
        if kind == "categorical":
            categorical.append(_categorical_column(name, cells, lab, copies, k))
        elif kind == "numeric":
            numeric.append(_numeric_column(name, cells, lab, copies, k))
        else:
            skipped.append(SkippedColumn(name, kind))
    return MetadataAnalysis(tuple(categorical), tuple(numeric), tuple(skipped))


def _check_clusters(labels: np.ndarray, weights: np.ndarray, k: int, n_texts: int) -> np.ndarray:
    """Labels as int array after checking them and the weights against k and the number of texts."""
    lab = np.asarray(labels)
    if lab.shape != (n_texts,) or weights.shape != (n_texts,):
        raise ValueError(f"labels {lab.shape} and weights {weights.shape} must both have shape ({n_texts},)")
    if k < 2:
        raise ValueError(f"k={k}: profiles compare a cluster with the rest and need at least 2 clusters")
    if lab.size and (lab.min() < 0 or lab.max() >= k):
        raise ValueError(f"labels must lie in 0..{k - 1}; found {lab.min()}..{lab.max()}")
    if np.any(weights <= 0):
        raise ValueError("weights must be positive")
    empty = np.flatnonzero(np.bincount(lab.astype(np.int64), minlength=k) == 0)
    if empty.size:
        raise ValueError(f"cluster(s) {', '.join(map(str, empty))} of k={k} have no member")
    return lab.astype(np.int64)


def _is_number(cell: str) -> bool:
    return _NUMBER.fullmatch(cell) is not None


def _column_kind(cells: Sequence[str]) -> str:
    """The kind of a column: categorical, numeric, or the reason to skip it (see analyse_metadata)."""
    filled = [cell for cell in cells if cell]
    if not filled:
        return "empty"
    n = len(filled)
    if sum(_ISO_DATE.fullmatch(cell) is not None for cell in filled) >= NUMERIC_SHARE_MIN * n:
        return "date"
    distinct = set(filled)
    if len(distinct) == 1 and (n == len(cells) or n == 1):
        return "one value"
    repeats = len(distinct) <= n / 2
    numbers = [float(cell) for cell in filled if _is_number(cell)]
    if len(numbers) >= NUMERIC_SHARE_MIN * n:
        if len(distinct) <= NUMERIC_CATEGORY_MAX and repeats:
            return "categorical"
        values = np.array(numbers)
        whole = bool(np.all(values == np.round(values)))
        span = float(values.max() - values.min() + 1)
        if whole and len(numbers) >= ID_MIN_ROWS and np.unique(values).size == len(numbers) \
                and span <= ID_SPAN_FACTOR * len(numbers):
            return "id"
        return "numeric"
    if len(distinct) <= CATEGORY_MAX and repeats:
        return "categorical"
    spaced = sum(any(ch.isspace() for ch in value) for value in distinct)
    if len(distinct) == n and spaced == 0:
        return "id"
    if spaced >= len(distinct) / 2:
        return "free text"
    return "too many values"


def _categorical_column(name: str, cells: Sequence[str], labels: np.ndarray, copies: np.ndarray,
                        k: int) -> CategoricalColumn:
    shown = [cell or BLANK for cell in cells]
    totals: dict[str, int] = {}
    for value, count in zip(shown, copies, strict=True):
        totals[value] = totals.get(value, 0) + int(count)
    values = sorted(totals, key=lambda v: (v == BLANK, -totals[v], v))
    column_of = {value: j for j, value in enumerate(values)}
    index = np.array([column_of[value] for value in shown], dtype=np.int64)
    table = np.zeros((k, len(values)), dtype=np.int64)
    np.add.at(table, (labels, index), copies)
    chi2, p_value, dof, expected = chi2_contingency(table, correction=False)
    residuals = adjusted_residuals(table)
    n = float(table.sum())
    cramers_v = math.sqrt(float(chi2) / (n * (min(table.shape) - 1)))
    sparse = bool(np.mean(expected < SPARSE_EXPECTED) > SPARSE_SHARE_MAX or np.any(expected < 1.0))
    over: list[tuple[CellResidual, ...]] = []
    under: list[tuple[CellResidual, ...]] = []
    for c in range(k):
        cells_c = [CellResidual(values[j], int(table[c, j]), float(expected[c, j]), float(residuals[c, j]))
                   for j in range(len(values))]
        over.append(tuple(sorted((x for x in cells_c if x.residual > RESIDUAL_FLAG), key=lambda x: -x.residual)))
        under.append(tuple(sorted((x for x in cells_c if x.residual < -RESIDUAL_FLAG), key=lambda x: x.residual)))
    return CategoricalColumn(
        column=name, values=tuple(values), table=table, chi2=float(chi2), dof=int(dof), p_value=float(p_value),
        cramers_v=cramers_v, sparse_warning=sparse, over=tuple(over), under=tuple(under),
    )


def adjusted_residuals(table: np.ndarray) -> np.ndarray:
    """Adjusted standardized residuals of a two-way table under independence.

    r_ij = (n_ij - e_ij) / sqrt(e_ij (1 - n_i+ / n)(1 - n_+j / n)) with e_ij = n_i+ n_+j / n; Agresti,
    An Introduction to Categorical Data Analysis, 2nd ed. (2007), §2.4.5. The table must have no empty
    row or column and at least two rows and two columns.

    Parameters
    ----------
    table : ndarray of shape (k, m)

    Returns
    -------
    ndarray of shape (k, m)
    """
    counts = np.asarray(table, dtype=float)
    n = counts.sum()
    rows = counts.sum(axis=1, keepdims=True)
    cols = counts.sum(axis=0, keepdims=True)
    expected = rows @ cols / n
    result: np.ndarray = (counts - expected) / np.sqrt(expected * (1 - rows / n) * (1 - cols / n))
    return result


def _numeric_column(name: str, cells: Sequence[str], labels: np.ndarray, copies: np.ndarray,
                    k: int) -> NumericColumn:
    has_number = np.array([_is_number(cell) for cell in cells], dtype=bool)
    values = np.array([float(cell) if ok else 0.0 for cell, ok in zip(cells, has_number, strict=True)])
    summaries = []
    for c in range(k):
        inside = has_number & (labels == c)
        outside = has_number & (labels != c)
        sample_in = np.repeat(values[inside], copies[inside])
        sample_out = np.repeat(values[outside], copies[outside])
        q_in, q_out = _quartiles(sample_in), _quartiles(sample_out)
        p_value: float | None = None
        if sample_in.size and sample_out.size and np.ptp(np.concatenate([sample_in, sample_out])) > 0:
            p_value = float(mannwhitneyu(sample_in, sample_out, alternative="two-sided").pvalue)
        summaries.append(
            NumericSummary(
                cluster_id=c, count=int(sample_in.size), q1=q_in[0], median=q_in[1], q3=q_in[2],
                rest_count=int(sample_out.size), rest_q1=q_out[0], rest_median=q_out[1], rest_q3=q_out[2],
                p_value=p_value,
            )
        )
    return NumericColumn(name, tuple(summaries))


def _quartiles(sample: np.ndarray) -> tuple[float, float, float]:
    """Q1, median, Q3 (numpy's linear interpolation); NaN for an empty sample."""
    if sample.size == 0:
        return math.nan, math.nan, math.nan
    q1, median, q3 = np.percentile(sample, [25, 50, 75])
    return float(q1), float(median), float(q3)


def metadata_columns(rows: Sequence[tuple[tuple[str, str], ...]]) -> dict[str, list[str]]:
    """Extra table columns from every document's (name, cell) pairs, one cell per document ("" where a document
    lacks the column); one pass in reading order."""
    cells: dict[str, list[str]] = {}
    for i, metadata in enumerate(rows):
        row = dict(metadata)
        for name, column in cells.items():
            column.append(row.pop(name, ""))
        for name, value in row.items():  # a column first seen here: earlier documents lack it
            cells[name] = [""] * i + [value]
    return {name: cells[name] for name in sorted(cells)}
