"""Discriminating-term statistics: Pearson chi-square on 2x2 tables and Dirichlet-prior log-odds."""

from __future__ import annotations

import numpy as np


def chi_square_2x2(n11: np.ndarray, n10: np.ndarray, n01: np.ndarray, n00: np.ndarray) -> np.ndarray:
    """Pearson chi-square of 2x2 term/class tables, vectorized over terms.

    n11: documents in the class with the term; n10: outside the class with the term;
    n01: in the class without it; n00: outside without it. Formula (13.19) in Manning,
    Raghavan & Schütze, Introduction to Information Retrieval (2008), §13.5.2. A table with an
    empty row or column scores 0.
    """
    n11, n10, n01, n00 = (np.asarray(a, dtype=float) for a in (n11, n10, n01, n00))
    n = n11 + n10 + n01 + n00
    numerator = n * (n11 * n00 - n10 * n01) ** 2
    denominator = (n11 + n01) * (n11 + n10) * (n10 + n00) * (n01 + n00)
    with np.errstate(divide="ignore", invalid="ignore"):
        result = np.where(denominator > 0, numerator / np.where(denominator > 0, denominator, 1), 0.0)
    return result


def log_odds_dirichlet(
    counts_in: np.ndarray, counts_out: np.ndarray, prior: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Log-odds ratio with an informative Dirichlet prior, and its z-score, per term.

    Monroe, Colaresi & Quinn (2008), "Fightin' Words", Political Analysis 16(4), §3:
    delta_w = log[(y_i + a_w) / (n_i + a0 - y_i - a_w)] - log[(y_j + a_w) / (n_j + a0 - y_j - a_w)],
    var(delta_w) ~ 1/(y_i + a_w) + 1/(y_j + a_w), z = delta_w / sqrt(var).

    Parameters
    ----------
    counts_in, counts_out : ndarray of shape (n_terms,)
        Term occurrence counts in the group and in the rest.
    prior : ndarray of shape (n_terms,)
        Dirichlet pseudo-counts a_w (all positive).

    Returns
    -------
    delta, z : ndarrays of shape (n_terms,)
    """
    y_i = np.asarray(counts_in, dtype=float)
    y_j = np.asarray(counts_out, dtype=float)
    a = np.asarray(prior, dtype=float)
    a0 = a.sum()
    n_i, n_j = y_i.sum(), y_j.sum()
    delta = np.log((y_i + a) / (n_i + a0 - y_i - a)) - np.log((y_j + a) / (n_j + a0 - y_j - a))
    z = delta / np.sqrt(1.0 / (y_i + a) + 1.0 / (y_j + a))
    return delta, z


def informative_prior(total_counts: np.ndarray, prior_mass: float) -> np.ndarray:
    """Pseudo-counts proportional to each term's share of the whole collection, summing to `prior_mass`."""
    totals = np.asarray(total_counts, dtype=float)
    return prior_mass * totals / totals.sum()


def best_first(candidates: np.ndarray, scores: np.ndarray, top: int) -> np.ndarray:
    """The `top` best of `candidates` (indexes into `scores`): highest score first, ties by lower index.

    The same as ``candidates[np.lexsort((candidates, -scores[candidates]))][:top]``, the ranking every term
    table uses, but only the candidates scoring at least the `top`-th highest score are sorted (a term table
    ranks up to 80,000 terms for its first 30 to 300): any candidate below that score has `top` others ahead
    of it, so the first `top` are the same.
    """
    candidates = np.asarray(candidates)
    keys = scores[candidates]
    if top <= 0:
        return candidates[:0]
    if candidates.size > 4 * top and not np.isnan(keys).any():  # NaN would sort last in lexsort, not here
        cutoff = np.partition(keys, keys.size - top)[keys.size - top]  # the top-th highest score
        kept = keys >= cutoff
        candidates, keys = candidates[kept], keys[kept]
    return candidates[np.lexsort((candidates, -keys))][:top]
