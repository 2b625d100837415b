"""The command line through typer's test runner: results, and one-line errors for user mistakes."""

from __future__ import annotations

from pathlib import Path

from helpers import assert_one_line_error, invoke, read_assignments, read_manifest
from pilewise.cli import app


def test_run_writes_the_site_and_prints_the_index_path(topic_folder: Path, tmp_path: Path) -> None:
    out = tmp_path / "site"
    result = invoke("run", str(topic_folder), "--k", "3", "--out", str(out), "--quiet")
    assert result.exit_code == 0, result.output
    index = out / "runs" / "k3" / "index.html"
    assert result.stdout.strip() == str(index)
    assert index.is_file() and (out / "index.html").is_file()
    rows = read_assignments(out / "runs" / "k3")
    assert len(rows) == 60
    # well-separated invented topics: every file of a topic lands in one cluster
    by_topic: dict[str, set[str]] = {}
    for row in rows:
        by_topic.setdefault(row["doc_id"].split("-")[0], set()).add(row["cluster"])
    assert all(len(clusters) == 1 for clusters in by_topic.values())
    assert len({c for clusters in by_topic.values() for c in clusters}) == 3


def test_rerun_with_another_k_keeps_the_earlier_run(topic_folder: Path, tmp_path: Path) -> None:
    out = tmp_path / "site"
    assert invoke("run", str(topic_folder), "--k", "3", "--out", str(out), "--quiet").exit_code == 0
    assert invoke("run", str(topic_folder), "--k", "4", "--out", str(out), "--quiet").exit_code == 0
    assert sorted(p.name for p in (out / "runs").iterdir()) == ["k3", "k4"]
    root = (out / "index.html").read_text(encoding="utf-8")
    assert 'href="runs/k3/index.html"' in root and 'href="runs/k4/index.html"' in root


def test_missing_source(tmp_path: Path) -> None:
    missing = tmp_path / "nowhere"
    result = invoke("run", str(missing), "--k", "3", "--out", str(tmp_path / "site"))
    assert_one_line_error(result, f"source {str(missing)!r} does not exist; pass a folder or a table file")


def test_no_documents_found(tmp_path: Path) -> None:
    folder = tmp_path / "empty"
    folder.mkdir()
    result = invoke("run", str(folder), "--k", "3", "--out", str(tmp_path / "site"))
    assert_one_line_error(
        result,
        f"no documents found in 0 file(s) in {str(folder)!r} (nothing readable); point SOURCE at a folder of "
        ".txt/.md/.html/.eml files or a .csv/.tsv/.json/.jsonl/.parquet table",
    )


def test_k_not_less_than_distinct_documents(topic_folder: Path, tmp_path: Path) -> None:
    result = invoke("run", str(topic_folder), "--k", "60", "--out", str(tmp_path / "site"))
    assert_one_line_error(
        result, "k=60 must be at least 2 and less than the 60 distinct documents found; pass --k between 2 and 59"
    )


def test_k_below_two_is_refused_before_reading(topic_folder: Path, tmp_path: Path) -> None:
    result = invoke("run", str(topic_folder), "--k", "1", "--out", str(tmp_path / "site"))
    assert_one_line_error(result, "--k=1 is out of range; use a value from 2 to 1000")


def test_every_problem_is_reported_at_once(tmp_path: Path) -> None:
    result = invoke("run", str(tmp_path / "x"), "--k", "1", "--max-df", "2", "--out", str(tmp_path / "s"))
    message = result.stderr.strip()
    assert "--k=1 is out of range" in message and "--max-df=2.0 is out of range" in message
    assert "does not exist" in message


def test_unknown_column(tmp_path: Path) -> None:
    table = tmp_path / "t.csv"
    table.write_text("id,text\n1,soil and water\n2,chain and pedal\n3,oven and flour\n", encoding="utf-8")
    result = invoke("run", str(table), "--k", "2", "--text-column", "body", "--out", str(tmp_path / "s"))
    assert_one_line_error(result, "--text-column 'body' is not a column of t.csv; pass one of: id, text")


def test_output_inside_the_source_is_refused(topic_folder: Path) -> None:
    result = invoke("run", str(topic_folder), "--k", "3", "--out", str(topic_folder / "site"))
    assert_one_line_error(
        result,
        f"--out {str(topic_folder / 'site')!r} lies inside the source folder, so the next run would read its own "
        "pages; choose an output folder outside the source",
    )


def test_table_run_keeps_metadata_columns_in_assignments(tmp_path: Path) -> None:
    rows = ["message_id,subject,body,channel"]
    for i in range(30):
        topic = ["soil compost seedling", "chain saddle pedal", "oven flour dough"][i % 3]
        extra = ["monday", "tuesday", "friday", "urgent", "thanks", "again", "please", "today", "later", "soon"]
        rows.append(f"M{i},S{i},{topic} {extra[i % 10]} {extra[(i * 3) % 7]} {topic},{'web' if i % 2 else 'chat'}")
    table = tmp_path / "export.csv"
    table.write_text("\n".join(rows) + "\n", encoding="utf-8")
    out = tmp_path / "site"
    result = invoke("run", str(table), "--k", "3", "--out", str(out), "--quiet")
    assert result.exit_code == 0, result.stderr
    header = (out / "runs" / "k3" / "assignments.csv").read_text(encoding="utf-8").splitlines()[0]
    assert header == "doc_id,source,title,cluster,cluster_name,distance,date,copies,channel"
    manifest = read_manifest(out / "runs" / "k3")
    assert any("guessed text column 'body'" in note for note in manifest["input"]["notes"])


def test_every_command_has_help_text() -> None:
    for command in ("run", "demo"):
        result = invoke(command, "--help")
        assert result.exit_code == 0
        assert "Usage" in result.output
    for info in app.registered_commands:
        assert info.callback is not None and info.callback.__doc__
