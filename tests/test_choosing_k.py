"""Choosing k, Ward runs, levels and comparisons end to end through the CLI on well-separated topics."""

from __future__ import annotations

from pathlib import Path

import pytest

from helpers import read_assignments, read_clusters, read_csv, read_json, read_manifest, runner, write_topic_folder
from pilewise.cli import app


def invoke(*args: str):  # type: ignore[no-untyped-def]
    result = runner.invoke(app, list(args))
    assert result.exit_code == 0, result.stderr
    return result


@pytest.fixture(scope="module")
def site(tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, Path]:
    base = tmp_path_factory.mktemp("choose")
    folder = base / "notes"
    write_topic_folder(folder, per_topic=20)
    return folder, base / "site"


def test_auto_k_recovers_three_planted_topics(site: tuple[Path, Path]) -> None:
    # Three invented topics with disjoint vocabularies: the recommendation rule must find k = 3 and the
    # clusters must read highly stable (Hennig's >= 0.85 band; common practice for separated groups).
    folder, out = site
    result = invoke("run", str(folder), "--k", "auto", "--k-range", "2:8", "--out", str(out), "--quiet")
    run = out / "runs" / "k3"
    assert result.stdout.strip() == str(run / "index.html")
    sweep = read_json(run / "sweep.json")
    assert sweep["recommended_k"] == 3 and [p["k"] for p in sweep["points"]] == list(range(2, 9))
    clusters = read_clusters(run)
    assert [c["stability"]["reading"] for c in clusters["clusters"]] == ["highly stable"] * 3
    manifest = read_manifest(run)
    assert manifest["k_chosen_by"] == "sweep"


def test_ward_run_stores_every_cut_and_one_split_per_step(site: tuple[Path, Path]) -> None:
    folder, out = site
    invoke("run", str(folder), "--k", "3", "--method", "ward", "--k-range", "2:10", "--out", str(out), "--quiet")
    run = out / "runs" / "ward-k3"
    levels = read_json(run / "levels.json")
    assert levels["tree"] == "full Ward" and levels["k_range"] == [2, 10]
    assert [s["k"] for s in levels["splits"]] == list(range(2, 10))
    rows = read_csv(run / "cuts.csv")
    assert len(rows) == 60 and list(rows[0]) == ["doc_id", *(f"k{k}" for k in range(2, 11))]
    for split in levels["splits"]:
        before = [r[f"k{split['k']}"] for r in rows]
        after = [r[f"k{split['k'] + 1}"] for r in rows]
        # every document of the parent moves to one of the two children; nobody else changes group
        for b, a in zip(before, after, strict=True):
            if int(b) == split["parent"]:
                assert int(a) in {c["id"] for c in split["children"]}
        assert sum(c["size"] for c in split["children"]) == split["parent_size"]
    assignments = read_assignments(run)
    assert [r["cluster"] for r in assignments] == [r["k3"] for r in rows]


def test_sweep_command_writes_curves_table_and_figures(site: tuple[Path, Path]) -> None:
    folder, out = site
    result = invoke("sweep", str(folder), "--k", "2:6", "--out", str(out), "--quiet")
    page = out / "sweeps" / "k2-6" / "index.html"
    assert result.stdout.strip() == str(page)
    figures = read_json(page.parent / "sweep.json")
    assert figures["recommended_k"] == 3
    assert all(p["silhouette_cosine"] is not None for p in figures["points"])
    assert (page.parent / "sweep-curves.svg").read_text(encoding="utf-8").startswith(("<?xml", "<svg"))
    assert 'href="sweeps/k2-6/index.html"' in (out / "index.html").read_text(encoding="utf-8")


def test_compare_reads_a_known_split(site: tuple[Path, Path]) -> None:
    folder, out = site
    invoke("run", str(folder), "--k", "2", "--method", "ward", "--name", "w2", "--out", str(out), "--quiet")
    invoke("run", str(folder), "--k", "3", "--method", "ward", "--name", "w3", "--out", str(out), "--quiet")
    result = invoke("compare", str(out / "runs" / "w2"), str(out / "runs" / "w3"))
    page = Path(result.stdout.strip())
    document = read_json(page.parent / "compare.json")
    # Three equal topics: the cut at 2 holds two of them together (40 documents), the cut at 3 parts
    # them 20/20, so that cluster reads "split" and the other "kept"; in the other direction, "formed by
    # a split of" twice and "kept" once.
    assert [(f["size"], f["reading"]) for f in document["fates_a"]] == [(40, "split"), (20, "kept")]
    assert sorted(f["reading"] for f in document["fates_b"]) == ["formed by a split of"] * 2 + ["kept"]
    levels = read_json(out / "runs" / "w2" / "levels.json")
    assert next(s for s in levels["splits"] if s["k"] == 2)["parent"] == 0


def test_a_run_compared_with_itself_keeps_everything(site: tuple[Path, Path]) -> None:
    folder, out = site
    invoke("run", str(folder), "--k", "3", "--name", "again", "--out", str(out), "--quiet")
    invoke("run", str(folder), "--k", "3", "--name", "again2", "--out", str(out), "--quiet")
    document = read_json(out / "compare" / "again--again2" / "compare.json")
    assert document["agreement"]["adjusted_rand_index"] == 1.0
    assert {f["reading"] for f in document["fates_a"]} == {"kept"} and document["moved"]["total"] == 0
    listing = (out / "runs" / "again" / "comparisons.html").read_text(encoding="utf-8")
    assert "compare/again--again2/index.html" in listing


def test_bad_k_values_are_one_line_errors(site: tuple[Path, Path]) -> None:
    folder, out = site
    result = runner.invoke(app, ["run", str(folder), "--k", "many", "--out", str(out)])
    assert result.exit_code == 1
    assert result.stderr.strip() == (
        "pilewise: error: --k 'many' is neither a number of clusters nor 'auto'; pass --k 8 or --k auto"
    )
    result = runner.invoke(app, ["sweep", str(folder), "--k", "5:3", "--out", str(out)])
    assert result.stderr.strip() == "pilewise: error: --k '5:3' must have 2 <= LOW < HIGH, for example 2:20"


def test_k_beyond_the_groups_of_identical_word_sets_is_a_user_error(tmp_path: Path) -> None:
    """Regression: texts that differ only in numbers have one vector; k-means then left clusters empty."""
    folder = tmp_path / "same-words"
    folder.mkdir()
    for i in range(5):
        (folder / f"a{i}.txt").write_text(f"soil compost {i}", encoding="utf-8")
        (folder / f"b{i}.txt").write_text(f"chain pedal {i}", encoding="utf-8")
    out = tmp_path / "site"
    result = runner.invoke(app, ["run", str(folder), "--k", "3", "--out", str(out), "--quiet", "--near-duplicate", "1"])
    assert result.exit_code == 1
    assert result.stderr.strip() == ("pilewise: error: k=3 is more than the 2 groups of texts that differ in their "
                                     "counted words; pass a smaller --k (at most 2)")
    sweep = runner.invoke(app, ["sweep", str(folder), "--k", "2:6", "--out", str(out), "--quiet",
                                "--near-duplicate", "1"])
    assert sweep.exit_code == 0, sweep.stderr
    figures = read_json(out / "sweeps" / "k2-6" / "sweep.json")
    assert [p["k"] for p in figures["points"]] == [2]
