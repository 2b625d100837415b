"""Writing a run's document tables in a forked worker beside the pages, and the tables' one-pass writer.

Every check compares bytes: the worker against the same writer in place, and the writer against the code path
it replaced (each whole row through `spreadsheet_row` and one `csv.writer` per file), which this file keeps.
"""

from __future__ import annotations

import csv
import multiprocessing
import os
import random
import signal
from dataclasses import replace
from pathlib import Path
from typing import Any

import numpy as np
import pytest

from pilewise.csvcells import spreadsheet_row
from pilewise.model import RunResult
from pilewise.options import RunOptions
from pilewise.output import exports, writing
from pilewise.output.exports import DocumentTables, members_csv_name
from pilewise.pipeline import compute_run
from pilewise.progress import Reporter

FORK = "fork" in multiprocessing.get_all_start_methods()
needs_fork = pytest.mark.skipif(not FORK, reason="the worker is forked; without fork the tables are written in place")

# cells a spreadsheet would run as formulas (OWASP "CSV Injection" guidance: = + - @ tab CR), plain numbers
# that stay as they are, and cells the csv module must quote (Python csv module docs: delimiter, quote, line end)
HOSTILE = ["=SUM(A1:A9)", "+41 22", "-3", "@cmd", "'=already", "-0.5", 'say "hi", then', "two\nlines", "plain", ""]
WORDS = {
    "bike": ["chain", "saddle", "pedal", "spoke", "brake", "gear", "puncture", "handlebar"],
    "bake": ["oven", "flour", "dough", "whisk", "simmer", "saucepan", "recipe", "butter"],
    "yard": ["soil", "compost", "seedling", "watering", "spade", "mulch", "greenhouse", "pruning"],
}


def _table(path: Path, rows: int = 90, seed: int = 3) -> Path:
    """A CSV with a text column and two metadata columns whose cells include HOSTILE ones."""
    rng = random.Random(seed)
    with path.open("w", encoding="utf-8", newline="") as handle:
        writer = csv.writer(handle)
        writer.writerow(["id", "text", "team", "note"])
        for i in range(rows):
            topic = list(WORDS)[i % 3]
            text = " ".join(rng.choice(WORDS[topic]) for _ in range(25))
            if i % 7 == 0:  # a title (the first line) that starts like a formula
                text = rng.choice(HOSTILE[:4]) + " " + text
            writer.writerow([f"{rng.choice(HOSTILE)}r{i}", text, rng.choice(HOSTILE), rng.choice(["x", "=1+1", ""])])
    return path


def _result(tmp: Path, mode: str) -> RunResult:
    source = _table(tmp / "notes.csv")
    options = RunOptions(source=source, out=tmp / "out", k=3, mode=mode, workers=1, quiet=True)
    work = tmp / "work"
    work.mkdir()
    return compute_run(options, Reporter(quiet=True), work)


@pytest.fixture(scope="module", params=["memory", "stream"])
def result(request: pytest.FixtureRequest, tmp_path_factory: pytest.TempPathFactory) -> RunResult:
    """One run of the table in each mode (streaming keeps the documents on a disk shelf)."""
    return _result(tmp_path_factory.mktemp(request.param), request.param)


def _replaced_tables(folder: Path, result: RunResult) -> None:
    """The writer this file's checks compare against: the code path before the one-pass writer (each whole row
    through `spreadsheet_row`, a csv.writer per file, member rows through the csv module again)."""
    docs = result.collection.documents
    known = getattr(docs, "metadata_names", None)
    extra = sorted(known if known is not None else {name for doc in docs for name, _ in doc.metadata})
    ks = sorted(result.levels.cuts)
    shown = [c.shown for c in result.naming.clusters]
    header = spreadsheet_row(["doc_id", "source", "title", "cluster", "cluster_name", "distance", "date", "copies",
                              *extra])
    (folder / exports.MEMBERS_FOLDER).mkdir()
    members: dict[int, list[list[object]]] = {c.cluster_id: [] for c in result.clusters}
    with (folder / "assignments.csv").open("w", encoding="utf-8", newline="") as handle, \
            (folder / "cuts.csv").open("w", encoding="utf-8", newline="") as cuts_handle:
        writer, cuts_writer = csv.writer(handle, lineterminator="\n"), csv.writer(cuts_handle, lineterminator="\n")
        writer.writerow(header)
        cuts_writer.writerow(["doc_id", *(f"k{k}" for k in ks)])
        for i, doc in enumerate(docs):
            t = int(result.collection.text_of_doc[i])
            label = int(result.clustering.labels[t])
            meta = dict(doc.metadata)
            row = spreadsheet_row([doc.doc_id, doc.source, doc.title, label, shown[label],
                                   f"{float(result.clustering.distances[t]):.6f}", doc.date,
                                   int(result.collection.copies[t]), *(meta.get(name, "") for name in extra)])
            writer.writerow(row)
            cuts_writer.writerow([row[0], *(int(result.levels.cuts[k][t]) for k in ks)])
            members[label].append(row)
    for c, rows in members.items():
        with (folder / members_csv_name(c)).open("w", encoding="utf-8", newline="") as handle:
            member_writer = csv.writer(handle, lineterminator="\n")
            member_writer.writerow(header)
            member_writer.writerows(rows)


def _files(folder: Path) -> dict[str, bytes]:
    return {p.relative_to(folder).as_posix(): p.read_bytes() for p in sorted(folder.rglob("*")) if p.is_file()}


def _tables(folder: Path) -> dict[str, bytes]:
    return {name: data for name, data in _files(folder).items()
            if name in ("assignments.csv", "cuts.csv") or name.startswith("members/")}


def test_the_input_holds_what_the_checks_need(result: RunResult) -> None:
    """The run's documents carry formula-like ids, metadata cells and titles, and metadata columns."""
    docs = list(result.collection.documents)
    assert {"team", "note"} <= {name for doc in docs for name, _ in doc.metadata}
    assert any(doc.doc_id[:1] in "=+-@" for doc in docs)
    assert any(doc.title[:1] in "=+-@" for doc in docs)
    assert len(set(result.clustering.labels.tolist())) == 3


def test_one_pass_writer_gives_the_bytes_of_the_replaced_one(result: RunResult, tmp_path: Path) -> None:
    ours, theirs = tmp_path / "ours", tmp_path / "theirs"
    ours.mkdir()
    theirs.mkdir()
    DocumentTables(ours, result).write()
    _replaced_tables(theirs, result)
    assert _tables(ours) == _tables(theirs)
    assert len(_tables(ours)) == 2 + 3  # assignments, cuts and one member file per cluster


def test_rows_held_in_batches_give_the_same_bytes(
    result: RunResult, tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    """Lines written every few rows (the batch bound) instead of once at the end."""
    whole, batched = tmp_path / "whole", tmp_path / "batched"
    whole.mkdir()
    batched.mkdir()
    DocumentTables(whole, result).write()
    monkeypatch.setattr(exports, "MEMBER_ROWS_BUFFERED", 7)
    DocumentTables(batched, result).write()
    assert _tables(batched) == _tables(whole)


def test_a_negative_or_infinite_distance_is_escaped_as_before(result: RunResult, tmp_path: Path) -> None:
    """The distance cell skips the escaping unless it starts with "-": the replaced path escaped "-inf" (not a
    plain number, OWASP rule) and left "-0.000001" alone; both paths must agree on such values."""
    distances = np.asarray(result.clustering.distances, dtype=float).copy()
    distances[:3] = [-1e-6, -np.inf, np.nan]
    odd = replace(result, clustering=replace(result.clustering, distances=distances))
    ours, theirs = tmp_path / "ours", tmp_path / "theirs"
    ours.mkdir()
    theirs.mkdir()
    DocumentTables(ours, odd).write()
    _replaced_tables(theirs, odd)
    assert _tables(ours) == _tables(theirs)
    assert b"'-inf" in _tables(ours)["assignments.csv"]


def test_member_files_exist_with_their_header_before_the_rows(result: RunResult, tmp_path: Path) -> None:
    """The cluster pages link members/cluster-NN.csv while the worker fills them: they exist from the start."""
    tables = DocumentTables(tmp_path, result)
    for cluster in result.clusters:
        with (tmp_path / members_csv_name(cluster.cluster_id)).open(encoding="utf-8", newline="") as handle:
            assert list(csv.reader(handle)) == [[str(cell) for cell in tables.header]]


def _write_run(folder: Path, result: RunResult, workers: int) -> dict[str, bytes]:
    folder.mkdir()
    writing._write_run(folder, replace(result, options=replace(result.options, workers=workers),
                                       timings={}), Reporter(quiet=True))
    files = _files(folder)
    files.pop("manifest.json")  # holds the timings and the --workers setting; checked apart
    return files


@needs_fork
def test_worker_beside_the_pages_writes_the_bytes_of_the_sequential_writer(
    result: RunResult, tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setattr(writing, "TABLES_BESIDE_FROM", 0)
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1")
    assert writing.tables_beside(replace(result, options=replace(result.options, workers=2)))
    assert not writing.tables_beside(result)  # --workers 1: in place
    beside = _write_run(tmp_path / "beside", result, workers=2)
    in_place = _write_run(tmp_path / "in-place", result, workers=1)
    assert beside == in_place
    assert {"assignments.csv", "cuts.csv", "index.html", "files.html", "search-index.js"} <= set(beside)


def _failing_in_the_worker(how: str) -> Any:
    parent = os.getpid()
    write = DocumentTables.write

    def failing(self: DocumentTables, track: Any = None) -> None:
        if os.getpid() != parent:  # only in the forked worker
            self.folder.joinpath("assignments.csv").write_text("half a table\n", encoding="utf-8")
            if how == "signal":
                os.kill(os.getpid(), signal.SIGKILL)
            raise OSError("the worker failed")
        write(self, track)

    return failing


@needs_fork
@pytest.mark.parametrize("how", ["error", "signal"])
def test_a_failed_worker_leaves_the_tables_to_the_caller(
    result: RunResult, tmp_path: Path, monkeypatch: pytest.MonkeyPatch, capfd: pytest.CaptureFixture[str], how: str
) -> None:
    """The caller writes the tables again from their start: the same bytes, and no traceback from the worker."""
    monkeypatch.setattr(writing, "TABLES_BESIDE_FROM", 0)
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1")
    in_place = _write_run(tmp_path / "in-place", result, workers=1)
    capfd.readouterr()
    monkeypatch.setattr(DocumentTables, "write", _failing_in_the_worker(how))
    assert _write_run(tmp_path / "beside", result, workers=2) == in_place
    assert "Traceback" not in capfd.readouterr().err


@needs_fork
def test_an_error_in_every_process_is_raised_by_the_caller(
    result: RunResult, tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    """A table that cannot be written (here a folder in its place) fails the worker and then the caller, which
    raises the error as the sequential writer does (the CLI turns OSError into one line)."""
    monkeypatch.setattr(writing, "TABLES_BESIDE_FROM", 0)
    folder = tmp_path / "run"
    folder.mkdir()
    (folder / "cuts.csv").mkdir()
    with pytest.raises(IsADirectoryError):
        writing._write_run(folder, replace(result, options=replace(result.options, workers=2)), Reporter(quiet=True))


@needs_fork
def test_leaving_on_an_error_stops_the_worker(result: RunResult, tmp_path: Path) -> None:
    tables = DocumentTables(tmp_path, result)
    with pytest.raises(RuntimeError), writing._TablesBeside(tables, background=True) as beside:
        process = beside.process
        assert process is not None
        raise RuntimeError("the pages failed")
    assert process.exitcode is not None  # joined: no worker left writing into a staging folder being removed
    assert beside.process is None


@needs_fork
def test_an_interrupted_wait_still_stops_the_worker(result: RunResult, tmp_path: Path) -> None:
    """Ctrl-C while waiting for the worker: leaving the block terminates and joins it all the same."""
    tables = DocumentTables(tmp_path, result)
    with pytest.raises(KeyboardInterrupt), writing._TablesBeside(tables, background=True) as beside:
        process = beside.process
        assert process is not None
        join = process.join
        calls: list[int] = []

        def interrupted(timeout: float | None = None) -> None:
            calls.append(1)
            if len(calls) == 1:
                raise KeyboardInterrupt
            join(timeout)

        process.join = interrupted  # type: ignore[method-assign]
        beside.wait()
    assert len(calls) == 2 and process.exitcode is not None
    assert beside.process is None
