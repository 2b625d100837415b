"""End to end through the CLI on real open labeled corpora (fetched by corpora/fetch.sh)."""

from __future__ import annotations

import csv
import os
import subprocess
import sys
from pathlib import Path

import pytest
from sklearn.metrics import normalized_mutual_info_score

from helpers import invoke, read_assignments, read_clusters

open_sets = pytest.importorskip("open_sets")


def _load(loader):  # type: ignore[no-untyped-def]
    try:
        return loader()
    except FileNotFoundError as err:
        pytest.skip(str(err))


def _as_table(collection, path: Path) -> dict[str, str]:  # type: ignore[no-untyped-def]
    truth = {}
    with path.open("w", encoding="utf-8", newline="") as handle:
        writer = csv.writer(handle)
        writer.writerow(["doc_id", "title", "text"])
        for i, (text, title, label) in enumerate(zip(collection.texts, collection.titles, collection.labels,
                                                     strict=True)):
            writer.writerow([f"d{i:04d}", title, text])
            truth[f"d{i:04d}"] = label
    return truth


@pytest.mark.corpus
def test_two_newsgroups_are_recovered_through_the_cli(tmp_path: Path) -> None:
    # Open corpus: 20 Newsgroups sample (alt.atheism, sci.space; 200 posts) from the gensim 4.4.0 wheel.
    # shared/CORPORA.md baseline, plain TF-IDF + k-means: NMI 0.47. pilewise (LSA capped at 20 dimensions for
    # this size, 10 k-means starts) measured 0.67-0.79 over seeds 0-4 (0.673 at seed 0), so 0.6 is a floor
    # the measurements support.
    collection = _load(open_sets.load_mini_newsgroups)
    table = tmp_path / "newsgroups.csv"
    truth = _as_table(collection, table)
    out = tmp_path / "site"
    result = invoke("run", str(table), "--k", "2", "--out", str(out), "--quiet")
    assert result.exit_code == 0, result.stderr
    rows = read_assignments(out / "runs" / "k2")
    assert len(rows) == 200
    nmi = normalized_mutual_info_score([truth[r["doc_id"]] for r in rows], [r["cluster"] for r in rows])
    assert nmi >= 0.6
    clusters = read_clusters(out / "runs" / "k2")["clusters"]
    top_terms = {t["term"] for c in clusters for t in c["terms"]["chi2"][:15]}
    assert top_terms & {"space", "nasa", "orbit", "launch", "moon"}
    assert top_terms & {"god", "atheism", "atheists", "religion", "believe", "bible"}


@pytest.mark.corpus
def test_reuters_sample_runs_end_to_end(tmp_path: Path) -> None:
    # Open corpus: Reuters-21578 sample (acq 50, crude 20) from Debian r-cran-tm; shared/CORPORA.md baseline
    # NMI 0.72. pilewise measured 0.60-0.72 over seeds 0-4 (0.632 at seed 0); the set is small and uneven,
    # so the floor is a loose 0.5.
    collection = _load(open_sets.load_reuters_sample)
    table = tmp_path / "reuters.csv"
    truth = _as_table(collection, table)
    out = tmp_path / "site"
    result = invoke("run", str(table), "--k", "2", "--out", str(out), "--quiet")
    assert result.exit_code == 0, result.stderr
    clusters = read_clusters(out / "runs" / "k2")
    assert sum(c["size"] for c in clusters["clusters"]) == 70
    assert all(c["headline"] and c["terms"]["chi2"] for c in clusters["clusters"])
    rows = read_assignments(out / "runs" / "k2")
    assert normalized_mutual_info_score([truth[r["doc_id"]] for r in rows], [r["cluster"] for r in rows]) >= 0.5


@pytest.mark.corpus
def test_a_run_does_not_depend_on_the_string_hash_seed(tmp_path: Path) -> None:
    """Two runs of the same collection and seed under two hash seeds of Python (which order sets and dicts
    of strings) write the same files, the manifest aside (its timings and paths). Common practice: a seeded
    run is reproducible. A general guard: the one such fault found so far, a headline that followed a set's
    order, is caught by tests/test_headlines.py; this collection has no near tie there and passed before it."""
    collection = _load(open_sets.load_mini_newsgroups)
    table = tmp_path / "newsgroups.csv"
    _as_table(collection, table)
    files = []
    for hash_seed in ("1", "4"):
        out = tmp_path / f"site-{hash_seed}"
        subprocess.run([sys.executable, "-m", "pilewise", "run", str(table), "--k", "4", "--out", str(out),
                        "--quiet"], env={**os.environ, "PYTHONHASHSEED": hash_seed}, check=True, capture_output=True)
        run = out / "runs" / "k4"
        files.append({p.relative_to(run).as_posix(): p.read_bytes() for p in sorted(run.rglob("*"))
                      if p.is_file() and p.name != "manifest.json"})
    assert len(files[0]) > 20 and files[0].keys() == files[1].keys()
    assert [name for name in files[0] if files[0][name] != files[1][name]] == []
