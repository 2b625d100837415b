"""Themes over time: the trend test, the multiple-testing adjustment, periods, and readings on a planted run."""

from __future__ import annotations

import csv
import random
from pathlib import Path

import numpy as np
import pytest

from helpers import invoke, read_clusters
from pilewise.describe.trends import (
    MAX_PERIODS,
    MIN_RELATIVE_CHANGE,
    MIXED_CAUTION,
    adjust_p_values,
    choose_period,
    cluster_trends,
    cochran_armitage,
    fitted_share_change,
    parse_dates,
    period_starts,
)

# Agresti, Categorical Data Analysis (2nd ed., 2002), the infant malformation and maternal alcohol
# consumption table with scores 0, 0.5, 1.5, 4.0, 7.0; the book reports M^2 = 6.57 (P = 0.01) for the
# linear trend. Values from memory of that worked example.
MALFORMED = np.array([48, 38, 5, 1, 1])
HEALTHY = np.array([17066, 14464, 788, 126, 37])
SCORES = np.array([0.0, 0.5, 1.5, 4.0, 7.0])


def test_cochran_armitage_matches_agresti_worked_example() -> None:
    z, p = cochran_armitage(MALFORMED, MALFORMED + HEALTHY, SCORES)
    n = (MALFORMED + HEALTHY).sum()
    # Agresti's M^2 = (n - 1) r^2, the Cochran-Armitage z^2 = n r^2
    assert z * z * (n - 1) / n == pytest.approx(6.57, abs=0.005)
    assert p == pytest.approx(0.0104, abs=0.0005)
    assert z > 0  # malformations grow with consumption


def test_cochran_armitage_equals_n_times_squared_correlation() -> None:
    # independent computation: z^2 = N r^2, r the Pearson correlation of score and outcome over all N cases
    rng = np.random.default_rng(0)
    totals = rng.integers(20, 60, size=8)
    counts = np.array([rng.integers(0, t + 1) for t in totals])
    scores = np.arange(8, dtype=float)
    outcome = np.concatenate([np.r_[np.ones(c), np.zeros(t - c)] for c, t in zip(counts, totals, strict=True)])
    score_of_case = np.repeat(scores, totals)
    r = np.corrcoef(score_of_case, outcome)[0, 1]
    z, _ = cochran_armitage(counts, totals)
    assert z * z == pytest.approx(totals.sum() * r * r, rel=1e-9)
    assert np.sign(z) == np.sign(r)


def test_cochran_armitage_without_variance_reads_no_trend() -> None:
    assert cochran_armitage(np.array([5, 5, 5]), np.array([5, 5, 5])) == (0.0, 1.0)
    assert cochran_armitage(np.array([0, 0]), np.array([0, 0])) == (0.0, 1.0)


def test_benjamini_hochberg_rejects_four_of_the_papers_fifteen() -> None:
    # Benjamini and Hochberg (1995), J. R. Statist. Soc. B 57(1), the worked example of 15 p-values: at
    # q = 0.05 the procedure rejects the four smallest (Bonferroni only three). Values from memory.
    p = [0.0001, 0.0004, 0.0019, 0.0095, 0.0201, 0.0278, 0.0298, 0.0344, 0.0459, 0.3240, 0.4262, 0.5719,
         0.6528, 0.7590, 1.000]
    adjusted = adjust_p_values(p)
    assert int((adjusted <= 0.05).sum()) == 4
    assert int((np.array(p) <= 0.05 / len(p)).sum()) == 3
    assert np.all(adjusted >= np.array(p))


def test_dates_read_iso_8601_with_offsets_and_count_what_is_missing() -> None:
    # ISO 8601: an offset is converted to UTC before the day is taken (23:30 at -05:00 is 04:30 next day UTC)
    days, empty, unreadable = parse_dates(["2026-03-01", "", "soon", "2026-03-02T23:30:00-05:00", "  "])
    assert [str(d) for d in days] == ["2026-03-01", "NaT", "NaT", "2026-03-03", "NaT"]
    assert (empty, unreadable) == (2, 1)


def test_weeks_start_on_monday_and_months_on_the_first() -> None:
    # ISO 8601 weeks start on Monday; 2026-11-30 was a Monday (Python's date.isoweekday agrees)
    import datetime

    assert datetime.date(2026, 11, 30).isoweekday() == 1
    days = np.array(["2026-11-30", "2026-12-03", "2026-12-06", "2026-12-07"], dtype="datetime64[D]")
    assert [str(d) for d in period_starts(days, "week")] == ["2026-11-30"] * 3 + ["2026-12-07"]
    assert [str(d) for d in period_starts(days, "month")] == ["2026-11-01"] + ["2026-12-01"] * 3


def test_period_follows_the_span() -> None:
    day = np.datetime64("2026-01-01")
    assert choose_period(day, day + np.timedelta64(30, "D")) == "day"
    assert choose_period(day, day + np.timedelta64(200, "D")) == "week"
    assert choose_period(day, day + np.timedelta64(900, "D")) == "month"


def _planted(months: int = 12) -> tuple[list[str], np.ndarray]:
    """Cluster 0 grows, 1 fades, 2 stays, 3 appears in the last two months (planted, so the truth is known)."""
    rng = random.Random(5)
    dates: list[str] = []
    labels: list[int] = []
    for m in range(1, months + 1):
        for cluster, n in enumerate((4 + 3 * m, 40 - 3 * m, 20, 25 if m > months - 2 else 0)):
            dates += [f"2025-{m:02d}-{rng.randint(1, 28):02d}" for _ in range(n)]
            labels += [cluster] * n
    return dates, np.array(labels)


def test_planted_readings_are_rising_falling_steady_and_new() -> None:
    dates, labels = _planted()
    trends = cluster_trends(dates, labels, 4, period="month")
    assert trends is not None
    assert [t.reading for t in trends.clusters] == ["rising", "falling", "steady", "new"]
    assert trends.first() == (3, 0)  # new first, then rising
    assert trends.starts[0] == "2025-01-01" and len(trends.starts) == 12
    # every dated document is in exactly one period of one cluster
    assert sum(p.count for t in trends.clusters for p in t.periods) == len(dates) == sum(trends.totals)
    shares = [sum(t.periods[i].share for t in trends.clusters) for i in range(12)]
    assert shares == pytest.approx([1.0] * 12)


def test_small_clusters_read_too_few_and_undated_documents_are_counted() -> None:
    dates, labels = _planted()
    dates += ["", "", "not a date"]
    labels = np.r_[labels, 4, 4, 4]
    dates += ["2025-06-01"] * 3
    labels = np.r_[labels, 4, 4, 4]
    trends = cluster_trends(dates, labels, 5)
    assert trends is not None
    assert trends.clusters[4].reading == "too few" and trends.clusters[4].dated == 3
    assert (trends.undated, trends.unreadable) == (2, 1)
    assert trends.dated == len(dates) - 3


def test_no_dates_no_trends() -> None:
    assert cluster_trends(["", "x"], np.array([0, 1]), 2) is None


def test_run_writes_trend_readings_for_a_dated_table(tmp_path: Path) -> None:
    words = {0: "soil compost seedling watering spade mulch greenhouse pruning",
             1: "chain saddle pedal spoke brake gear puncture handlebar",
             2: "oven flour dough whisk simmer saucepan recipe butter"}
    rng = random.Random(2)
    rows = []
    for m in range(1, 13):
        for topic, n in ((0, 3 * m), (1, 36 - 3 * m), (2, 15)):
            for i in range(n):
                text = " ".join(rng.choice(words[topic].split()) for _ in range(20))
                rows.append([f"{topic}-{m}-{i}", text, f"2025-{m:02d}-{rng.randint(1, 28):02d}"])
    rows.append(["undated", "soil compost spade mulch soil compost", ""])
    path = tmp_path / "notes.csv"
    with path.open("w", newline="", encoding="utf-8") as handle:
        csv.writer(handle).writerows([["id", "text", "date"], *rows])
    result = invoke("run", str(path), "--k", "3", "--out", str(tmp_path / "site"), "--period", "month", "--quiet")
    assert result.exit_code == 0, result.output
    clusters = read_clusters(tmp_path / "site" / "runs" / "k3")
    assert clusters["trends"]["period"] == "month" and clusters["trends"]["period_chosen_by"] == "--period"
    assert clusters["trends"]["undated"] == 1 and clusters["trends"]["dated"] == len(rows) - 1
    readings = sorted(c["trend"]["reading"] for c in clusters["clusters"])
    assert readings == ["falling", "rising", "steady"]
    # the pages draw the counts: one labelled bar chart per card, a larger one per cluster page, one bar
    # per period (12 months) holding the count in its tooltip
    run = tmp_path / "site" / "runs" / "k3"
    index = (run / "index.html").read_text(encoding="utf-8")
    assert index.count('<svg xmlns="http://www.w3.org/2000/svg" class="trend"') == 3
    assert 'role="img" aria-label="' in index and "per month from 2025-01-01 to 2025-12-01" in index
    page = (run / "cluster-00.html").read_text(encoding="utf-8")
    assert page.count("<rect ") >= 12 and "<figcaption>Documents per month" in page
    first = clusters["clusters"][0]["trend"]["periods"][0]
    assert f"<title>{first['start']}: {first['count']:,} (" in page


def test_unknown_period_is_one_line(tmp_path: Path) -> None:
    (tmp_path / "a.txt").write_text("one text", encoding="utf-8")
    result = invoke("run", str(tmp_path), "--k", "2", "--period", "decade", "--out", str(tmp_path / "o"))
    assert result.exit_code == 1
    assert "--period 'decade' is not known; use one of: auto, day, week, month, quarter, year" in result.stderr


def test_quarters_start_in_january_april_july_october_and_years_on_january_first() -> None:
    # the calendar quarters (ISO 8601 has no quarter; common practice: Q1 = January to March)
    days = np.array(["2026-02-14", "2026-03-31", "2026-04-01", "2026-12-31"], dtype="datetime64[D]")
    assert [str(d) for d in period_starts(days, "quarter")] == ["2026-01-01", "2026-01-01", "2026-04-01",
                                                                "2026-10-01"]
    assert [str(d) for d in period_starts(days, "year")] == ["2026-01-01"] * 4


def test_a_31_year_monthly_span_gets_a_coarser_period_within_the_cap() -> None:
    """Regression: 31 years of monthly dates gave 372 monthly bars, too many to read."""
    dates = [f"{year}-{month:02d}-15" for year in range(1995, 2026) for month in range(1, 13)]
    labels = np.array([i % 2 for i in range(len(dates))])
    trends = cluster_trends(dates, labels, 2)
    assert trends is not None
    assert len(trends.starts) <= MAX_PERIODS
    # 31 years: 124 quarters are over the cap, so years; independent count with Python's datetime years
    assert trends.period == "year" and len(trends.starts) == len({d[:4] for d in dates}) == 31
    # the finest period under the cap: 5 years of dates make 20 quarters (months would be 60 + 1 over 61 months)
    first, last = np.datetime64("2020-01-01"), np.datetime64("2025-01-31")
    assert choose_period(first, last) == "quarter"


def test_fitted_share_change_is_the_weighted_least_squares_slope_over_the_span() -> None:
    # independent computation: numpy's polyfit of the shares on the period index, weighted by the totals
    # (np.polyfit weights multiply the residuals, so sqrt of the totals), times the span, over the pooled share
    counts, totals = np.array([10, 14, 15, 22, 30]), np.array([100, 110, 90, 120, 130])
    slope = np.polyfit(np.arange(5), counts / totals, 1, w=np.sqrt(totals))[0]
    expected = slope * 4 / (counts.sum() / totals.sum())
    assert fitted_share_change(counts, totals) == pytest.approx(expected, rel=1e-9)


def test_a_tiny_drift_in_a_large_collection_reads_steady() -> None:
    """Regression: with 18,000 dated documents, 6 of 8 clusters read rising or falling on small drifts."""
    rng = np.random.default_rng(3)
    dates: list[str] = []
    labels: list[np.ndarray] = []
    for m in range(1, 25):  # two years, 10,000 documents a month; cluster 0 drifts from 20.0% to 21.5%
        share = 0.20 + 0.015 * (m - 1) / 23
        n = 10_000
        year, month = 2024 + (m - 1) // 12, (m - 1) % 12 + 1
        dates += [f"{year}-{month:02d}-10"] * n
        labels.append(np.where(rng.random(n) < share, 0, rng.integers(1, 4, n)))
    trends = cluster_trends(dates, np.concatenate(labels), 4, period="month")
    assert trends is not None
    drifting = trends.clusters[0]
    assert drifting.q_value is not None and drifting.q_value < 0.05  # the test alone finds the drift ...
    assert drifting.share_change is not None and abs(drifting.share_change) < MIN_RELATIVE_CHANGE
    assert drifting.reading == "steady"  # ... the floor says it is too small to report
    assert "below the 25% that a trend needs" in drifting.evidence
    # the planted large changes still read as before (the floor does not hide them)
    planted_dates, planted_labels = _planted()
    planted = cluster_trends(planted_dates, planted_labels, 4, period="month")
    assert planted is not None
    assert [t.reading for t in planted.clusters] == ["rising", "falling", "steady", "new"]


def test_a_mixed_cluster_trend_carries_the_caution() -> None:
    dates, labels = _planted()
    trends = cluster_trends(dates, labels, 4, period="month", mixed=[False, True, False, False])
    assert trends is not None
    assert [t.caution for t in trends.clusters] == ["", MIXED_CAUTION, "", ""]
