"""Cluster profiles: term means recomputed by hand, metadata tests against scipy and published values."""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.sparse as sp
from scipy.stats import chi2_contingency, mannwhitneyu
from scipy.stats.contingency import association

from pilewise.describe.profiles import (
    BLANK,
    SKIP_REASONS,
    CategoricalColumn,
    analyse_metadata,
    term_profiles,
)

# Agresti, An Introduction to Categorical Data Analysis, 2nd ed. (2007), p. 39: party identification by
# gender. Counts as cited by R's own chisq.test documentation ("From Agresti(2007) p.39"); the residual is
# defined in §2.4.5, p. 38 (section and page as cited by the R packages crunch and chisq.posthoc.test).
PARTIES = ("Democrat", "Independent", "Republican")
PARTY_TABLE = np.array([[762, 327, 468], [484, 239, 477]])  # rows: females (cluster 0), males (cluster 1)
# Standardized (= adjusted) residuals of the females' row, as printed in the example output of the CRAN
# package chisq.posthoc.test's documentation (R's chisq.test()$stdres) for the same table; the book prints
# them rounded as 4.50, 0.70, -5.32 (book values from memory). The males' row is their negative (2 rows).
PARTY_RESIDUALS_FEMALES = (4.502054, 0.6994517, -5.315946)


def _rows_from_table(table: np.ndarray, values: list[str], *, compressed: bool) -> tuple[list[str], np.ndarray,
                                                                                         np.ndarray]:
    """Cells, labels and weights whose cluster-by-value table is `table`: one row per document, or one
    row per non-empty cell weighted by its count."""
    cells: list[str] = []
    labels: list[int] = []
    weights: list[int] = []
    for i, row in enumerate(table):
        for j, count in enumerate(row):
            if count == 0:
                continue
            if compressed:
                cells.append(values[j])
                labels.append(i)
                weights.append(int(count))
            else:
                cells += [values[j]] * int(count)
                labels += [i] * int(count)
                weights += [1] * int(count)
    return cells, np.array(labels), np.array(weights)


def _categorical(table: np.ndarray, values: list[str], *, compressed: bool = False) -> CategoricalColumn:
    cells, labels, weights = _rows_from_table(table, values, compressed=compressed)
    result = analyse_metadata({"col": cells}, labels, weights, k=table.shape[0])
    assert not result.numeric and not result.skipped
    (column,) = result.categorical
    return column


def _adjusted_residuals_by_hand(table: np.ndarray) -> list[list[float]]:
    """Agresti (2007), §2.4.5: (n_ij - e_ij) / sqrt(e_ij (1 - p_i+)(1 - p_+j)), cell by cell."""
    n = float(table.sum())
    out = []
    for i in range(table.shape[0]):
        row_total = float(table[i].sum())
        out_row = []
        for j in range(table.shape[1]):
            col_total = float(table[:, j].sum())
            e = row_total * col_total / n
            out_row.append((table[i, j] - e) / math.sqrt(e * (1 - row_total / n) * (1 - col_total / n)))
        out.append(out_row)
    return out


def _all_cells(column: CategoricalColumn) -> dict[tuple[int, str], tuple[int, float, float]]:
    """Every flagged cell, keyed by (cluster, value)."""
    found = {}
    for flagged in (column.over, column.under):
        for c, cells in enumerate(flagged):
            for cell in cells:
                found[(c, cell.value)] = (cell.count, cell.expected, cell.residual)
    return found


# ----------------------------------------------------------------------------------------------------
# Categorical columns
# ----------------------------------------------------------------------------------------------------
@pytest.mark.parametrize("compressed", [False, True])
def test_party_identification_matches_scipy_and_the_published_residuals(compressed: bool) -> None:
    column = _categorical(PARTY_TABLE, list(PARTIES), compressed=compressed)
    # values most frequent first: Democrat 1246, Republican 945, Independent 566
    assert column.values == ("Democrat", "Republican", "Independent")
    order = [PARTIES.index(v) for v in column.values]
    table = PARTY_TABLE[:, order]
    assert column.table.tolist() == table.tolist()
    # Reference library: scipy.stats.chi2_contingency, Pearson's statistic without continuity correction.
    chi2, p_value, dof, expected = chi2_contingency(table, correction=False)
    assert column.chi2 == pytest.approx(chi2, rel=1e-12)
    assert column.p_value == pytest.approx(p_value, rel=1e-9)
    assert column.dof == dof == 2
    # Agresti (2007), §2.4.3: X^2 = 30.1 with df = 2 (from memory).
    assert column.chi2 == pytest.approx(30.1, abs=0.05)
    assert not column.sparse_warning
    # Published residuals (chisq.posthoc.test documentation, see PARTY_RESIDUALS_FEMALES).
    females = dict(zip(PARTIES, PARTY_RESIDUALS_FEMALES, strict=True))
    (dem_f,) = column.over[0]
    (rep_f,) = column.under[0]
    (rep_m,) = column.over[1]
    (dem_m,) = column.under[1]
    assert (dem_f.value, rep_f.value, rep_m.value, dem_m.value) == ("Democrat", "Republican", "Republican", "Democrat")
    assert dem_f.residual == pytest.approx(females["Democrat"], abs=1e-6)
    assert rep_f.residual == pytest.approx(females["Republican"], abs=1e-6)
    assert rep_m.residual == pytest.approx(-females["Republican"], abs=1e-6)
    assert dem_m.residual == pytest.approx(-females["Democrat"], abs=1e-6)
    # Independents: residual 0.70, below the 1.96 flag, so reported in neither list.
    assert all(cell.value != "Independent" for cells in column.over + column.under for cell in cells)
    # counts and expected counts of the flagged cells against scipy's table of expected counts
    assert (dem_f.count, rep_f.count, rep_m.count, dem_m.count) == (762, 468, 477, 484)
    assert dem_f.expected == pytest.approx(expected[0, 0], rel=1e-12)
    assert rep_f.expected == pytest.approx(expected[0, 1], rel=1e-12)
    assert rep_m.expected == pytest.approx(expected[1, 1], rel=1e-12)
    assert dem_m.expected == pytest.approx(expected[1, 0], rel=1e-12)


def test_three_clusters_with_blanks_match_scipy_and_the_residual_formula() -> None:
    # A 3 x 4 table written here; empty cells become the value "(blank)", listed last.
    values = ["email", "phone", "chat", ""]
    table = np.array([[40, 5, 10, 6], [8, 30, 12, 4], [10, 9, 35, 5]])
    column = _categorical(table, values)
    assert column.values == ("email", "chat", "phone", BLANK)  # 58, 57, 44 documents, blanks last
    ours = column.table
    expected_table = table[:, [0, 2, 1, 3]]
    assert ours.tolist() == expected_table.tolist()
    chi2, p_value, dof, expected = chi2_contingency(expected_table, correction=False)  # reference library
    assert column.chi2 == pytest.approx(chi2, rel=1e-12)
    assert column.p_value == pytest.approx(p_value, rel=1e-9)
    assert column.dof == dof == 6
    by_hand = _adjusted_residuals_by_hand(expected_table)
    flagged = _all_cells(column)
    for c in range(3):
        for j, value in enumerate(column.values):
            r = by_hand[c][j]
            if abs(r) > 1.96:
                count, e, residual = flagged[(c, value)]
                assert (count, e, residual) == (expected_table[c, j], pytest.approx(expected[c, j]), pytest.approx(r))
            else:
                assert (c, value) not in flagged
    # ordering: over largest first, under most negative first
    for cells in column.over:
        assert [x.residual for x in cells] == sorted((x.residual for x in cells), reverse=True)
    for cells in column.under:
        assert [x.residual for x in cells] == sorted(x.residual for x in cells)
    assert column.over[0][0].value == "email" and column.over[2][0].value == "chat"


@pytest.mark.parametrize(
    ("table", "warns"),
    [
        # Cochran's rule (common practice): more than 20% of expected counts below 5, or any below 1.
        ([[40, 5, 10, 6], [8, 30, 12, 4], [10, 9, 35, 5]], False),  # 1 of 12 below 5 (4.66), none below 1
        ([[12, 2, 2], [10, 2, 3], [9, 3, 2]], True),  # 6 of 9 below 5
        ([[40, 30, 2], [35, 38, 3]], True),  # 2 of 6 below 5: 33%
        ([[20, 20, 20, 20, 1], [20, 20, 20, 20, 0]], True),  # 2 of 10 below 5 (20%), both below 1
    ],
)
def test_sparse_tables_are_flagged_by_cochrans_rule(table: list[list[int]], warns: bool) -> None:
    array = np.array(table)
    column = _categorical(array, [f"v{j}" for j in range(array.shape[1])])
    assert column.sparse_warning is warns


def test_cramers_v_matches_its_formula_and_scipy() -> None:
    table = np.array([[40, 5, 10, 6], [8, 30, 12, 4], [10, 9, 35, 5]])
    column = _categorical(table, ["a", "b", "c", "d"])
    # Cramér's V = sqrt(X^2 / (n (min(r, c) - 1))) (Cramér 1946, from memory), and scipy's implementation.
    chi2 = chi2_contingency(table, correction=False)[0]
    assert column.cramers_v == pytest.approx(math.sqrt(chi2 / (table.sum() * (3 - 1))), rel=1e-12)
    assert column.cramers_v == pytest.approx(association(table, method="cramer", correction=False), rel=1e-12)
    party = _categorical(PARTY_TABLE, list(PARTIES))
    assert party.cramers_v == pytest.approx(math.sqrt(party.chi2 / PARTY_TABLE.sum()), rel=1e-12)


def test_independent_table_flags_nothing() -> None:
    column = _categorical(np.array([[10, 20, 30], [20, 40, 60]]), ["x", "y", "z"])
    assert column.chi2 == pytest.approx(0.0, abs=1e-12)
    assert column.p_value == pytest.approx(1.0)
    assert column.cramers_v == pytest.approx(0.0, abs=1e-7)
    assert column.over == ((), ()) and column.under == ((), ())


# ----------------------------------------------------------------------------------------------------
# Column typing
# ----------------------------------------------------------------------------------------------------
def _kinds(columns: dict[str, list[str]]) -> dict[str, str]:
    n = len(next(iter(columns.values())))
    labels = np.arange(n) % 2
    result = analyse_metadata(columns, labels, np.ones(n), k=2)
    kinds = {c.column: "categorical" for c in result.categorical}
    kinds |= {c.column: "numeric" for c in result.numeric}
    kinds |= {c.column: c.reason for c in result.skipped}
    assert list(kinds) == [name for name in columns if name in kinds] and len(kinds) == len(columns)
    return kinds


def test_column_typing() -> None:
    n = 60
    rng = np.random.default_rng(0)
    words = ["printer", "jammed", "again", "after", "the", "update", "screen", "flickers", "badly", "today"]
    columns = {
        "channel": [["email", "phone", "chat"][i % 3] for i in range(n)],
        "priority": [["low", "high", ""][i % 3] for i in range(n)],
        "rating": [str(1 + i % 5) for i in range(n)],  # numbers, few values: categorical
        "flag": [str(i % 2) for i in range(n)],
        "amount": [f"{x:.2f}" for x in rng.gamma(2.0, 30.0, n)],
        "age": [str(20 + (i * 7) % 45) if i % 10 else "" for i in range(n)],  # many values, some blank
        "created": [f"2024-{1 + i % 12:02d}-{1 + i % 28:02d}" for i in range(n)],
        "sent_at": [f"2023-05-{1 + i % 28:02d}T09:{i % 60:02d}:00Z" for i in range(n)],
        "note": [" ".join(rng.choice(words, 6)) for _ in range(n)],
        "ticket": [f"T-{1000 + i}" for i in range(n)],
        "row": [str(500 + i) for i in range(n)],  # dense run of distinct whole numbers
        "zip": [f"{i * 37 % 99999:05d}" for i in range(n)],  # leading zeros: codes, not numbers
        "sku": [f"SKU{i % 40}" for i in range(n)],  # 40 short codes, each about 1.5 times
        "blank": [""] * n,
        "constant": ["yes"] * n,
    }
    assert _kinds(columns) == {
        "channel": "categorical",
        "priority": "categorical",
        "rating": "categorical",
        "flag": "categorical",
        "amount": "numeric",
        "age": "numeric",
        "created": "date",
        "sent_at": "date",
        "note": "free text",
        "ticket": "id",
        "row": "id",
        "zip": "id",
        "sku": "too many values",
        "blank": "empty",
        "constant": "one value",
    }
    assert set(_kinds(columns).values()) - {"categorical", "numeric"} == set(SKIP_REASONS)


def test_column_typing_thresholds() -> None:
    n = 100
    base = [str(10 * i) for i in range(n)]
    # 95% of non-empty cells numeric: numeric (the rest count as missing); 94%: not numeric
    assert _kinds({"x": base[:95] + ["n/a"] * 5})["x"] == "numeric"
    assert _kinds({"x": base[:94] + [f"n/a {i}" for i in range(6)]})["x"] == "too many values"
    # 50 distinct text values, each twice: categorical; 51: too many
    assert _kinds({"x": [f"v{i % 50}" for i in range(n)]})["x"] == "categorical"
    assert _kinds({"x": [f"v{i % 51}" for i in range(102)]})["x"] == "too many values"
    # 10 distinct numbers: categorical; 11: numeric
    assert _kinds({"x": [str(i % 10) for i in range(n)]})["x"] == "categorical"
    assert _kinds({"x": [str(i % 11) for i in range(n)]})["x"] == "numeric"
    # distinct whole numbers spread widely are a measure, not an id
    assert _kinds({"x": [str(i * i) for i in range(n)]})["x"] == "numeric"
    # a few text values on few rows, each unique: an id, not categories
    assert _kinds({"x": ["a1", "b2", "c3", "d4"]})["x"] == "id"
    # dates: ISO-like only; invalid months are not dates
    assert _kinds({"x": [f"2024/03/{1 + i % 28:02d}" for i in range(n)]})["x"] == "date"
    assert _kinds({"x": [f"2024-13-{1 + i % 28:02d}" for i in range(n)]})["x"] != "date"


# ----------------------------------------------------------------------------------------------------
# Numeric columns
# ----------------------------------------------------------------------------------------------------
def test_numeric_quartiles_match_numpy_on_expanded_weights() -> None:
    rng = np.random.default_rng(3)
    n = 40
    values = np.round(rng.normal(50, 15, n), 1)
    labels = np.arange(n) % 3
    weights = rng.integers(1, 4, n)
    cells = [str(v) for v in values]
    cells[5] = ""  # missing
    cells[7] = "unknown"  # not a number: missing (39 of 40 cells, 97.5%, are numbers)
    result = analyse_metadata({"score": cells}, labels, weights, k=3)
    (column,) = result.numeric
    usable = np.ones(n, dtype=bool)
    usable[[5, 7]] = False
    for c, summary in enumerate(column.clusters):
        inside = usable & (labels == c)
        outside = usable & (labels != c)
        # Reference: numpy's percentiles of the values repeated by their number of copies.
        sample_in = np.repeat(values[inside], weights[inside])
        sample_out = np.repeat(values[outside], weights[outside])
        assert summary.cluster_id == c
        assert summary.count == int(weights[inside].sum()) == sample_in.size
        assert summary.rest_count == int(weights[outside].sum())
        assert (summary.q1, summary.median, summary.q3) == pytest.approx(np.percentile(sample_in, [25, 50, 75]))
        assert (summary.rest_q1, summary.rest_median, summary.rest_q3) == pytest.approx(
            np.percentile(sample_out, [25, 50, 75])
        )
        # Reference library: scipy.stats.mannwhitneyu, two-sided, on the same expanded samples.
        expected_p = mannwhitneyu(sample_in, sample_out, alternative="two-sided").pvalue
        assert summary.p_value == pytest.approx(expected_p, rel=1e-12)


def test_numeric_cluster_without_numbers_has_no_quartiles_or_test() -> None:
    cells = [str(v * 1.5) for v in range(30)] + [""] * 10
    labels = np.array([0] * 15 + [1] * 15 + [2] * 10)
    column = analyse_metadata({"x": cells}, labels, np.ones(40), k=3).numeric[0]
    empty = column.clusters[2]
    assert empty.count == 0 and math.isnan(empty.median) and empty.p_value is None
    assert empty.rest_count == 30 and empty.rest_median == pytest.approx(14.5 * 1.5)
    assert column.clusters[0].p_value is not None and column.clusters[0].p_value < 0.001


# ----------------------------------------------------------------------------------------------------
# Term profiles
# ----------------------------------------------------------------------------------------------------
def test_term_profiles_recomputed_by_hand() -> None:
    terms = ["soil", "chain", "oven", "the"]
    rows = np.array(
        [
            [0.8, 0.0, 0.0, 0.6],  # cluster 0, 2 copies
            [0.6, 0.0, 0.0, 0.8],  # cluster 0
            [0.0, 0.6, 0.0, 0.8],  # cluster 1, 3 copies
            [0.0, 0.0, 1.0, 0.0],  # cluster 1
            [0.0, 0.0, 0.6, 0.8],  # cluster 2
        ]
    )
    labels = np.array([0, 0, 1, 1, 2])
    weights = np.array([2, 1, 3, 1, 1])
    profiles = term_profiles(sp.csr_matrix(rows), labels, weights, terms, k=3, top=10, bottom=5)
    # By hand, cluster 0 (weight 3) against the rest (weight 5):
    #   soil  in (2*0.8 + 0.6)/3 = 2.2/3      out 0
    #   chain in 0                            out 3*0.6/5 = 0.36
    #   oven  in 0                            out (1.0 + 0.6)/5 = 0.32
    #   the   in (2*0.6 + 0.8)/3 = 2/3        out (3*0.8 + 0.8)/5 = 0.64
    p0 = profiles[0]
    assert [(t.term, t.mean_in, t.mean_out) for t in p0.stronger] == [
        ("soil", pytest.approx(2.2 / 3), 0.0),
        ("the", pytest.approx(2 / 3), pytest.approx(0.64)),
    ]
    assert [(t.term, t.mean_in, t.mean_out) for t in p0.weaker] == [
        ("chain", 0.0, pytest.approx(0.36)),
        ("oven", 0.0, pytest.approx(0.32)),
    ]
    # cluster 1 (weight 4): chain 1.8/4 = 0.45 vs 0; oven 1/4 = 0.25 vs 0.6/4 = 0.15; the 2.4/4 = 0.6 vs
    # (1.2 + 0.8 + 0.8)/4 = 0.7; soil 0 vs 2.2/4 = 0.55.
    p1 = profiles[1]
    assert [t.term for t in p1.stronger] == ["chain", "oven"]
    assert p1.stronger[1].mean_in == pytest.approx(0.25) and p1.stronger[1].mean_out == pytest.approx(0.15)
    assert [t.term for t in p1.weaker] == ["soil", "the"]
    assert p1.weaker[1].mean_in == pytest.approx(0.6) and p1.weaker[1].mean_out == pytest.approx(0.7)
    # top and bottom cut the lists
    cut = term_profiles(sp.csr_matrix(rows), labels, weights, terms, k=3, top=1, bottom=1)
    assert [t.term for t in cut[0].stronger] == ["soil"] and [t.term for t in cut[0].weaker] == ["chain"]


def test_term_profiles_count_copies_like_repeated_rows() -> None:
    rng = np.random.default_rng(7)
    dense = rng.random((12, 6)) * (rng.random((12, 6)) < 0.5)
    labels = np.arange(12) % 3
    weights = rng.integers(1, 5, 12)
    terms = [f"t{i}" for i in range(6)]
    weighted = term_profiles(sp.csr_matrix(dense), labels, weights, terms, k=3, top=6, bottom=6)
    repeated = term_profiles(
        sp.csr_matrix(np.repeat(dense, weights, axis=0)), np.repeat(labels, weights), np.ones(weights.sum()),
        terms, k=3, top=6, bottom=6,
    )
    for a, b in zip(weighted, repeated, strict=True):
        assert [t.term for t in a.stronger] == [t.term for t in b.stronger]
        assert [t.term for t in a.weaker] == [t.term for t in b.weaker]
        assert [t.mean_in for t in a.stronger + a.weaker] == pytest.approx([t.mean_in for t in b.stronger + b.weaker])


@pytest.mark.parametrize(
    ("labels", "k", "message"),
    [
        (np.array([0, 0, 2]), 3, r"cluster\(s\) 1 of k=3 have no member"),
        (np.array([0, 1, 3]), 3, r"labels must lie in 0..2; found 0..3"),
        (np.array([0, 1]), 2, r"labels \(2,\) and weights \(3,\) must both have shape \(3,\)"),
        (np.array([0, 0, 0]), 1, r"k=1: profiles compare a cluster with the rest and need at least 2 clusters"),
    ],
)
def test_inconsistent_inputs_are_rejected(labels: np.ndarray, k: int, message: str) -> None:
    matrix = sp.csr_matrix(np.eye(3))
    with pytest.raises(ValueError, match=message):
        term_profiles(matrix, labels, np.ones(3), ["a", "b", "c"], k=k)
    with pytest.raises(ValueError, match=message):
        analyse_metadata({"x": ["a", "b", "c"]}, labels, np.ones(3), k=k)
