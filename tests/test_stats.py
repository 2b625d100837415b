"""Discriminating-term statistics against published values and independent computations."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.stats import chi2_contingency

from pilewise.describe.stats import chi_square_2x2, informative_prior, log_odds_dirichlet


def test_chi_square_matches_iir_export_poultry_example() -> None:
    # Manning, Raghavan & Schütze, Introduction to Information Retrieval (2008), §13.5.2:
    # term "export", class "poultry": N11=49, N10=27,652, N01=141, N00=774,106; chi-square ≈ 284
    # (284.29 recomputed; the four counts are from memory, also in third-party copies of the book).
    value = chi_square_2x2(np.array([49]), np.array([27652]), np.array([141]), np.array([774106]))[0]
    assert value == pytest.approx(284.29, abs=0.5)


def test_chi_square_equals_scipy_without_continuity_correction() -> None:
    # Reference library: scipy.stats.chi2_contingency(correction=False) is Pearson's statistic.
    tables = [(49, 27652, 141, 774106), (10, 5, 3, 40), (1, 0, 0, 1), (7, 7, 7, 7)]
    ours = chi_square_2x2(*(np.array(col) for col in zip(*tables, strict=True)))
    for value, (n11, n10, n01, n00) in zip(ours, tables, strict=True):
        expected = chi2_contingency([[n11, n10], [n01, n00]], correction=False)[0]
        assert value == pytest.approx(expected, rel=1e-9)


def test_chi_square_of_a_table_with_an_empty_margin_is_zero() -> None:
    # A term present in every document has no 2x2 association (common practice: score 0).
    assert chi_square_2x2(np.array([5]), np.array([7]), np.array([0]), np.array([0]))[0] == 0.0


def _log_odds_by_hand(y_i: list[float], y_j: list[float], alpha: list[float]) -> list[float]:
    """Monroe, Colaresi & Quinn (2008), §3, written out term by term, independently of pilewise."""
    a0 = sum(alpha)
    n_i, n_j = sum(y_i), sum(y_j)
    out = []
    for yi, yj, a in zip(y_i, y_j, alpha, strict=True):
        delta = math.log((yi + a) / (n_i + a0 - yi - a)) - math.log((yj + a) / (n_j + a0 - yj - a))
        out.append(delta / math.sqrt(1 / (yi + a) + 1 / (yj + a)))
    return out


@pytest.mark.parametrize(
    ("alpha", "published"),
    [
        # shared/CHECKS.md, derived from the paper's formula (the paper prints no worked numbers).
        ([0.01] * 4, [3.096971, 0.411173, -0.554339, -5.934905]),
        ([0.4, 0.4333333333, 0.1666666667, 9.0], [3.073233, 0.393838, -1.129414, -5.765606]),
    ],
)
def test_log_odds_z_scores_match_the_formula(alpha: list[float], published: list[float]) -> None:
    y_i, y_j = [10.0, 5.0, 0.0, 85.0], [2.0, 8.0, 5.0, 185.0]
    _, z = log_odds_dirichlet(np.array(y_i), np.array(y_j), np.array(alpha))
    assert z == pytest.approx(_log_odds_by_hand(y_i, y_j, alpha), rel=1e-9)
    assert z == pytest.approx(published, abs=1e-5)


def test_informative_prior_is_proportional_to_pooled_counts() -> None:
    # shared/CHECKS.md: alpha_w = 10 x pooled share gives (0.4, 0.4333, 0.1667, 9).
    prior = informative_prior(np.array([12.0, 13.0, 5.0, 270.0]), 10.0)
    assert prior == pytest.approx([0.4, 0.43333333, 0.16666667, 9.0])
