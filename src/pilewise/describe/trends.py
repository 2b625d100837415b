"""Themes over time: every cluster's documents counted per period, and a tested reading of its trend.

The reading of a cluster compares its share of each period's dated documents across periods with the
Cochran-Armitage test for trend in proportions (Armitage 1955; Agresti, *Categorical Data Analysis*,
section on trend tests), with the period's position as score. The p-values of all tested clusters are
adjusted together by the Benjamini-Hochberg procedure (Benjamini and Hochberg 1995; scipy's
`false_discovery_control`), so that "rising" on a run of 20 clusters is not just the luck of 20 tests.
docs/method.md, "Themes over time", states the rules and thresholds.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd
from scipy import stats

PERIODS = ("day", "week", "month", "quarter", "year")
MAX_PERIODS = 60  # auto picks the finest period giving at most this many bars (a chart stays readable)
MIN_DATED = 10  # fewer dated members than this: "too few" (common practice: a trend needs some counts)
MIN_PERIODS = 3  # a trend needs at least three periods holding documents
SIGNIFICANCE = 0.05  # on the Benjamini-Hochberg adjusted p-value (the false discovery rate)
NEW_SHARE = 0.75  # "new": at least this share of the cluster's dated documents in the latest quarter ...
NEW_BACKGROUND = 0.5  # ... while the collection holds at most this share of its dated documents there
# effect-size floor: "rising" or "falling" also needs the fitted share to change over the whole span by at least
# this fraction of the cluster's mean share; with tens of thousands of documents the test finds drifts too small
# to matter (docs/method.md, "Themes over time")
MIN_RELATIVE_CHANGE = 0.25
MIXED_CAUTION = ("this cluster is mixed (no common theme), so its counts add up several themes; read its trend as "
                 "the sum of those themes, not as one theme growing or fading")


@dataclass(frozen=True)
class PeriodCount:
    """A cluster's documents in one period, and their share of that period's dated documents."""

    start: str  # ISO date of the period's first day
    count: int
    share: float


@dataclass(frozen=True)
class ClusterTrend:
    """The trend reading of one cluster, with the statistic behind it."""

    reading: str  # "new", "rising", "falling", "steady" or "too few"
    periods: tuple[PeriodCount, ...]
    dated: int  # members with a readable date
    latest_share: float  # share of the dated members in the latest quarter of the periods
    z: float | None  # Cochran-Armitage statistic; positive when the share grows
    p_value: float | None
    q_value: float | None  # Benjamini-Hochberg adjusted p-value across the tested clusters
    share_change: float | None = None  # fitted change of the share over the span, relative to the mean share
    caution: str = ""  # a note on reading the trend (a mixed cluster's counts mix several themes)
    # the fitted line's share at the first and the last period holding documents (may lie below 0 or above 1)
    fitted_shares: tuple[float, float] | None = None

    @property
    def evidence(self) -> str:
        """One line saying why the reading was given."""
        if self.reading == "too few":
            return f"{self.dated} dated documents: too few to read a trend"
        tested = f"Cochran-Armitage z = {self.z:+.2f}, adjusted p = {self.q_value:.3g}" if self.z is not None else ""
        if self.share_change is not None:
            tested += f"; {self._fitted_change()}"
            if self.reading == "steady" and self.q_value is not None and self.q_value < SIGNIFICANCE:
                tested += f", below the {MIN_RELATIVE_CHANGE:.0%} that a trend needs"
        if self.reading == "new":
            return f"{self.latest_share:.0%} of its dated documents fall in the latest quarter of the span; {tested}"
        return tested


    def _fitted_change(self) -> str:
        """The fitted line's change in words that stay true where the line leaves 0..1.

        A straight line fitted to a share that drops to nothing (a theme that stops halfway) ends below
        zero, and its change can exceed the mean share ("-311% of its mean share"); shares themselves stay
        between 0 and 1, so such an end is stated as "about zero" (or "about 100%") and the relative change
        is left out.
        """
        if self.fitted_shares is None:
            return f"fitted share change over the span {self.share_change:+.0%} of its mean share"
        first, last = (_share_words(share) for share in self.fitted_shares)
        line = f"fitted share from {first} to {last} over the span"
        if min(self.fitted_shares) < 0 or max(self.fitted_shares) > 1:
            return line
        return f"{line} ({self.share_change:+.0%} of its mean share)"


def _share_words(share: float) -> str:
    """A fitted share as a percentage, or "about zero" / "about 100%" where the line leaves 0..1."""
    if share < 0.0005:
        return "about zero"
    if share > 0.9995:
        return "about 100%"
    return f"{share:.1%}"


@dataclass(frozen=True)
class Trends:
    """Counts per period for the collection and every cluster."""

    period: str  # "day", "week" or "month"
    period_chosen_by: str  # "span" or "--period"
    starts: tuple[str, ...]
    totals: tuple[int, ...]  # dated documents of the collection per period
    clusters: tuple[ClusterTrend, ...]
    dated: int
    undated: int  # documents without a date
    unreadable: int  # documents whose date could not be read

    def first(self) -> tuple[int, ...]:
        """Cluster ids to list first: new, then rising (strongest first)."""
        order = {"new": 0, "rising": 1}
        chosen = [c for c, t in enumerate(self.clusters) if t.reading in order]
        return tuple(sorted(chosen, key=lambda c: (order[self.clusters[c].reading], -(self.clusters[c].z or 0.0))))


def parse_dates(values: Sequence[str]) -> tuple[np.ndarray, int, int]:
    """Days (numpy datetime64[D], NaT where missing) of ISO 8601 or other common date strings.

    Returns the days, the number of empty values and the number of values that could not be read.
    Time zones are converted to UTC before the day is taken.
    """
    raw = pd.Series(list(values), dtype="string").str.strip()
    empty = raw.isna() | (raw == "")
    parsed = pd.to_datetime(raw.where(~empty), errors="coerce", utc=True, format="ISO8601")
    retry = parsed.isna() & ~empty
    if retry.any():  # 03/01/2026, "1 Mar 2026", ...: pandas' element-wise parser (month first when ambiguous)
        parsed[retry] = pd.to_datetime(raw[retry], errors="coerce", utc=True, format="mixed")
    days = parsed.dt.tz_localize(None).to_numpy(dtype="datetime64[D]")
    unreadable = int((parsed.isna() & ~empty).sum())
    return days, int(empty.sum()), unreadable


def choose_period(first: np.datetime64, last: np.datetime64) -> str:
    """The finest of day, week, month, quarter and year that splits the span into at most MAX_PERIODS periods."""
    for period in PERIODS[:-1]:
        ends = period_starts(np.array([first, last], dtype="datetime64[D]"), period)
        if _all_starts(ends[0], ends[1], period).size <= MAX_PERIODS:
            return period
    return PERIODS[-1]


def period_starts(days: np.ndarray, period: str) -> np.ndarray:
    """The first day of each day's period (ISO weeks start on Monday; months, quarters (January, April, July,
    October) and years on their first day)."""
    if period == "day":
        return days
    if period == "week":
        # 1970-01-01 was a Thursday: days since the epoch + 3 count from a Monday
        offset = (days.astype("datetime64[D]").astype(np.int64) + 3) % 7
        return days - offset.astype("timedelta64[D]")
    if period == "year":
        return days.astype("datetime64[Y]").astype("datetime64[D]")
    months = days.astype("datetime64[M]")
    if period == "quarter":  # months since 1970-01, a quarter's first month: a multiple of 3
        months = months - (months.astype(np.int64) % 3).astype("timedelta64[M]")
    return months.astype("datetime64[D]")


def _all_starts(first: np.datetime64, last: np.datetime64, period: str) -> np.ndarray:
    """Every period start from the first to the last, empty periods included."""
    if period in ("month", "quarter"):
        step = 3 if period == "quarter" else 1
        return np.arange(first.astype("datetime64[M]"), last.astype("datetime64[M]") + 1, step).astype("datetime64[D]")
    if period == "year":
        return np.arange(first.astype("datetime64[Y]"), last.astype("datetime64[Y]") + 1).astype("datetime64[D]")
    step = 7 if period == "week" else 1
    return np.arange(first, last + 1, step, dtype="datetime64[D]")


def cochran_armitage(counts: np.ndarray, totals: np.ndarray, scores: np.ndarray | None = None) -> tuple[float, float]:
    """The Cochran-Armitage test for a linear trend in proportions: (z, two-sided p).

    ``counts[i]`` of ``totals[i]`` are "successes" in ordered group i with score ``scores[i]``
    (default 0, 1, 2, ...). T = sum s_i (x_i - n_i p) and Var T = p (1 - p) (sum n_i s_i^2 - (sum n_i s_i)^2 / N),
    with p the pooled proportion (Armitage 1955; Agresti, Categorical Data Analysis). z is 0 and p 1 when
    the variance is 0 (every group all successes or none, or one group only).
    """
    x = np.asarray(counts, dtype=float)
    n = np.asarray(totals, dtype=float)
    s = np.arange(x.size, dtype=float) if scores is None else np.asarray(scores, dtype=float)
    total = n.sum()
    if total <= 0:
        return 0.0, 1.0
    pooled = x.sum() / total
    statistic = float((s * (x - n * pooled)).sum())
    variance = pooled * (1 - pooled) * float((n * s * s).sum() - (n * s).sum() ** 2 / total)
    if variance <= 0:
        return 0.0, 1.0
    z = statistic / math.sqrt(variance)
    return z, float(2 * stats.norm.sf(abs(z)))


def adjust_p_values(p_values: Sequence[float]) -> np.ndarray:
    """Benjamini-Hochberg adjusted p-values (scipy.stats.false_discovery_control)."""
    if not p_values:
        return np.zeros(0)
    return np.asarray(stats.false_discovery_control(np.asarray(p_values, dtype=float), method="bh"))


def fitted_share_change(counts: np.ndarray, totals: np.ndarray) -> float:
    """The change of the share over the span on the least-squares line fitted to the period shares (weighted
    by the period totals, the line the Cochran-Armitage statistic tests), relative to the pooled share.

    0 when the share cannot be fitted (one period holding documents, or no member at all).
    """
    line = _fitted_line(counts, totals)
    if line is None:
        return 0.0
    pooled, slope, _, held = line
    return slope * float(held[-1] - held[0]) / pooled


def _fitted_line(counts: np.ndarray, totals: np.ndarray) -> tuple[float, float, float, np.ndarray] | None:
    """(pooled share, slope per period, mean period, periods holding documents) of the least-squares line
    fitted to the period shares, weighted by the period totals; None when it cannot be fitted."""
    n, x = np.asarray(totals, dtype=float), np.asarray(counts, dtype=float)
    held = np.flatnonzero(n > 0)
    if held.size < 2 or x.sum() <= 0:
        return None
    s = np.arange(n.size, dtype=float)
    mean_s, pooled = (n * s).sum() / n.sum(), x.sum() / n.sum()
    slope = float((s - mean_s) @ (x - n * pooled)) / float((n * (s - mean_s) ** 2).sum())
    return float(pooled), slope, float(mean_s), held


@dataclass(frozen=True)
class DatedCounts:
    """Documents counted per (day, cluster), as an engine that holds the documents elsewhere counts them.

    ``counts[i]`` documents of cluster ``labels[i]`` carry the day ``days[i]`` (numpy datetime64[D]); a
    (day, cluster) pair may appear more than once (the counts are added).
    """

    days: np.ndarray
    labels: np.ndarray
    counts: np.ndarray
    undated: int  # documents without a date
    unreadable: int  # documents whose date could not be read


def day_counts(dates: Sequence[str], labels: np.ndarray) -> DatedCounts:
    """The dated documents of `dates` (with `labels`) counted per (day, cluster) by `parse_dates`; the Spark
    engine runs this on each partition and adds the counts (the same parsing as `cluster_trends`)."""
    days, undated, unreadable = parse_dates(dates)
    known = ~np.isnat(days)
    pairs = np.column_stack([days[known].astype(np.int64), np.asarray(labels, dtype=np.int64)[known]])
    cells, counts = np.unique(pairs.reshape(-1, 2), axis=0, return_counts=True)
    return DatedCounts(cells[:, 0].astype("datetime64[D]"), cells[:, 1], counts.astype(np.int64), undated, unreadable)


def fitted_share_ends(counts: np.ndarray, totals: np.ndarray) -> tuple[float, float] | None:
    """The shares on the line of `fitted_share_change` at the first and the last period holding documents.

    None when the share cannot be fitted. The ends are the line's values, not clipped: a share that
    drops to nothing gives a line ending below zero.
    """
    line = _fitted_line(counts, totals)
    if line is None:
        return None
    pooled, slope, mean_s, held = line
    return pooled + slope * (held[0] - mean_s), pooled + slope * (held[-1] - mean_s)


def cluster_trends(dates: Sequence[str], labels: np.ndarray, k: int, period: str | None = None,
                   mixed: Sequence[bool] = ()) -> Trends | None:
    """Counts per period and a trend reading for each of the k clusters; None when no date can be read.

    ``dates[i]`` and ``labels[i]`` belong to document i (every copy of a text counts, as everywhere).
    ``mixed[c]`` marks a cluster without a common theme, whose trend gets a caution.
    """
    days, undated, unreadable = parse_dates(dates)
    known = ~np.isnat(days)
    dated = DatedCounts(days[known], np.asarray(labels)[known], np.ones(int(known.sum()), dtype=np.int64),
                        undated, unreadable)
    return counted_trends(dated, k, period, mixed)


def counted_trends(dated: DatedCounts, k: int, period: str | None = None,
                   mixed: Sequence[bool] = ()) -> Trends | None:
    """`cluster_trends` from documents already counted per (day, cluster); None when none is dated."""
    held = np.asarray(dated.counts) > 0
    days, cluster_of, weight = dated.days[held], np.asarray(dated.labels)[held], np.asarray(dated.counts)[held]
    if not held.any():
        return None
    chosen_by = "--period" if period else "span"
    period = period or choose_period(days.min(), days.max())
    starts_of_docs = period_starts(days, period)
    starts = _all_starts(starts_of_docs.min(), starts_of_docs.max(), period)
    position = np.searchsorted(starts, starts_of_docs)
    table = np.zeros((k, starts.size), dtype=np.int64)
    np.add.at(table, (cluster_of, position), weight)
    totals = table.sum(axis=0)
    latest = slice(starts.size - max(1, math.ceil(starts.size / 4)), None)
    background = totals[latest].sum() / max(1, totals.sum())
    tests: dict[int, tuple[float, float]] = {}
    for c in range(k):
        if table[c].sum() >= MIN_DATED and np.count_nonzero(totals) >= MIN_PERIODS:
            tests[c] = cochran_armitage(table[c], totals)
    adjusted = dict(zip(tests, adjust_p_values([p for _, p in tests.values()]), strict=True))
    clusters = []
    for c in range(k):
        members = int(table[c].sum())
        latest_share = float(table[c, latest].sum() / members) if members else 0.0
        z, p = tests.get(c, (None, None))
        q = float(adjusted[c]) if c in adjusted else None
        change = fitted_share_change(table[c], totals) if c in tests else None
        clusters.append(ClusterTrend(
            reading=_reading(z, q, latest_share, background, tested=c in tests, change=change),
            periods=tuple(PeriodCount(str(start), int(count), float(count / total) if total else 0.0)
                          for start, count, total in zip(starts, table[c], totals, strict=True)),
            dated=members, latest_share=latest_share, z=z, p_value=p, q_value=q, share_change=change,
            caution=MIXED_CAUTION if c < len(mixed) and mixed[c] else "",
            fitted_shares=fitted_share_ends(table[c], totals) if c in tests else None,
        ))
    return Trends(period, chosen_by, tuple(str(s) for s in starts), tuple(int(t) for t in totals), tuple(clusters),
                  dated=int(weight.sum()), undated=dated.undated, unreadable=dated.unreadable)


def _reading(z: float | None, q: float | None, latest_share: float, background: float, *, tested: bool,
             change: float | None = None) -> str:
    if not tested or z is None or q is None:
        return "too few"
    if latest_share >= NEW_SHARE and background <= NEW_BACKGROUND:
        return "new"
    if q < SIGNIFICANCE and (change is None or abs(change) >= MIN_RELATIVE_CHANGE):
        return "rising" if z > 0 else "falling"
    return "steady"
