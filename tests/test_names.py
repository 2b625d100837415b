"""Names that people give carry over to matching clusters of later runs, and changes are flagged."""

from __future__ import annotations

import csv
import json
import shutil
from pathlib import Path

from typer.testing import CliRunner

from pilewise.cli import app
from pilewise.describe.names import suggested_name

runner = CliRunner()


def _run(folder: Path, out: Path, *extra: str) -> None:
    result = runner.invoke(app, ["run", str(folder), "--out", str(out), "--quiet", *extra])
    assert result.exit_code == 0, result.stderr


def _members_by_topic(run: Path) -> dict[str, str]:
    """topic (file name prefix) -> cluster name shown in assignments.csv."""
    found: dict[str, set[str]] = {}
    for row in csv.DictReader((run / "assignments.csv").open(encoding="utf-8")):
        found.setdefault(row["doc_id"].split("-")[0], set()).add(row["cluster_name"])
    assert all(len(names) == 1 for names in found.values())
    return {topic: names.pop() for topic, names in found.items()}


def _name_clusters(run: Path, names_by_topic: dict[str, str]) -> None:
    """Edit names.csv as a person would: a name and a note per cluster, chosen by its topic."""
    topic_of_cluster = {}
    for row in csv.DictReader((run / "assignments.csv").open(encoding="utf-8")):
        topic_of_cluster[row["cluster"]] = row["doc_id"].split("-")[0]
    rows = list(csv.DictReader((run / "names.csv").open(encoding="utf-8")))
    for row in rows:
        row["name"] = names_by_topic[topic_of_cluster[row["cluster"]]]
        row["note"] = "checked by hand"
    with (run / "names.csv").open("w", encoding="utf-8", newline="") as handle:
        writer = csv.DictWriter(handle, fieldnames=list(rows[0]))
        writer.writeheader()
        writer.writerows(rows)


def test_names_carry_over_exactly_when_rerun_with_another_seed(topic_folder: Path, tmp_path: Path) -> None:
    out = tmp_path / "site"
    _run(topic_folder, out, "--k", "3", "--seed", "1", "--name", "first")
    given = {"garden": "Garden work", "bicycle": "Bike repairs", "kitchen": "Baking"}
    _name_clusters(out / "runs" / "first", given)
    _run(topic_folder, out, "--k", "3", "--seed", "2", "--name", "second")
    assert _members_by_topic(out / "runs" / "second") == given
    clusters = json.loads((out / "runs" / "second" / "clusters.json").read_text(encoding="utf-8"))
    assert clusters["names_from_run"] == "first" and clusters["names_not_carried"] == []
    for record in clusters["clusters"]:
        assert record["name_flag"] == "" and record["name_note"] == "checked by hand"
        assert record["name_origin"].startswith("carried from cluster")
        assert "Jaccard of members 1.00" in record["name_origin"]
    page = (out / "runs" / "second" / "index.html").read_text(encoding="utf-8")
    assert all(f"<h2>{name}</h2>" in page for name in given.values())
    document_page = (out / "runs" / "second" / "docs" / "d0000000.html").read_text(encoding="utf-8")
    assert any(f": {name}</a>" in document_page for name in given.values())


def test_a_named_cluster_that_splits_is_flagged(topic_folder: Path, tmp_path: Path) -> None:
    out = tmp_path / "site"
    _run(topic_folder, out, "--k", "2", "--method", "ward", "--name", "coarse")
    by_topic = _members_by_topic(out / "runs" / "coarse")
    merged_topics = [t for t in by_topic if list(by_topic.values()).count(by_topic[t]) == 2]
    assert len(merged_topics) == 2  # two of the three topics share the bigger cluster at k=2
    names = {t: ("Two topics" if t in merged_topics else "One topic") for t in by_topic}
    _name_clusters(out / "runs" / "coarse", names)
    _run(topic_folder, out, "--k", "3", "--method", "ward", "--name", "fine")
    clusters = json.loads((out / "runs" / "fine" / "clusters.json").read_text(encoding="utf-8"))
    flagged = [(r["name"], r["name_flag"]) for r in clusters["clusters"] if r["name"]]
    assert ("Two topics", "split") in flagged and ("One topic", "") in flagged


def test_names_carry_over_when_documents_are_added(topic_folder: Path, tmp_path: Path) -> None:
    # The same folder, re-run after new files arrived: another fingerprint, the same source.
    out = tmp_path / "site"
    grown = tmp_path / "grown"
    shutil.copytree(topic_folder, grown)
    _run(grown, out, "--k", "3", "--name", "before")
    given = {"garden": "Garden work", "bicycle": "Bike repairs", "kitchen": "Baking"}
    _name_clusters(out / "runs" / "before", given)
    for path in sorted(topic_folder.glob("*-0[0-4].txt")):  # five more notes per topic, new ids
        (grown / path.name.replace(".txt", "-more.txt")).write_text(path.read_text(encoding="utf-8") + " again")
    _run(grown, out, "--k", "3", "--name", "after")
    assert _members_by_topic(out / "runs" / "after") == given


def test_suggested_names_skip_words_already_in_a_chosen_phrase() -> None:
    # common practice for readable labels: no "password reset / password / reset"
    assert suggested_name(["password reset", "password", "reset", "link", "email"]) == "password reset / link / email"
