"""Helpers shared by the test files: planted folders, the command line through typer's runner, run exports.

pytest puts this folder on `sys.path` (rootdir conftest, default import mode), so test files import these
names with `from helpers import ...`. Fixtures built on them live in `conftest.py`.
"""

from __future__ import annotations

import csv
import json
import random
from pathlib import Path
from typing import Any

from click.testing import Result
from typer.testing import CliRunner

from pilewise.cli import app
from pilewise.ingest.reading import ReadLimits, read_source
from pilewise.ingest.tables import ColumnChoice
from pilewise.model import Ingested

# --- planted folders ---------------------------------------------------------------------------------

TOPICS = {
    "garden": ["soil", "compost", "seedling", "watering", "spade", "mulch", "greenhouse", "pruning"],
    "bicycle": ["chain", "saddle", "pedal", "spoke", "brake", "gear", "puncture", "handlebar"],
    "kitchen": ["oven", "flour", "dough", "whisk", "simmer", "saucepan", "recipe", "butter"],
}


def write_topic_folder(folder: Path, per_topic: int = 20, seed: int = 1) -> dict[str, str]:
    """Three well-separated invented topics as .txt files; returns file name -> topic."""
    rng = random.Random(seed)
    folder.mkdir(parents=True, exist_ok=True)
    truth = {}
    for topic, words in TOPICS.items():
        for i in range(per_topic):
            body = " ".join(rng.choice(words) for _ in range(30))
            name = f"{topic}-{i:02d}.txt"
            (folder / name).write_text(f"A note on {topic} number {i}\n{body}\n", encoding="utf-8")
            truth[name] = topic
    return truth


def write_texts(folder: Path, texts: list[str]) -> Path:
    """One numbered .txt file per text (000.txt, 001.txt, ...), each ending with a newline."""
    folder.mkdir()
    for i, text in enumerate(texts):
        (folder / f"{i:03d}.txt").write_text(text + "\n", encoding="utf-8")
    return folder


# --- the command line ------------------------------------------------------------------------------------

runner = CliRunner()


def invoke(*args: str) -> Result:
    """`pilewise ARGS...` through typer's test runner (stdout and stderr kept apart)."""
    return runner.invoke(app, list(args), prog_name="pilewise")


def assert_one_line_error(result: Result, expected: str) -> None:
    """Exit status 1 and exactly one `pilewise: error: EXPECTED` line, no traceback."""
    assert result.exit_code == 1, result.output
    lines = [line for line in result.stderr.splitlines() if line.startswith("pilewise: error")]
    assert lines == [f"pilewise: error: {expected}"]
    assert "Traceback" not in result.output + result.stderr


# --- reading -----------------------------------------------------------------------------------------------

LIMITS = ReadLimits(max_file_bytes=1_000_000, max_doc_chars=10_000)


def read(source: Path, columns: ColumnChoice = ColumnChoice(), limits: ReadLimits = LIMITS) -> Ingested:  # noqa: B008
    """`read_source` with limits roomy enough for every small planted input."""
    return read_source(source, columns, limits)


# --- a run's exports ---------------------------------------------------------------------------------------


def read_csv(path: Path) -> list[dict[str, str]]:
    """Rows of a CSV file with a header, read by Python's csv module."""
    with path.open(encoding="utf-8", newline="") as handle:
        return list(csv.DictReader(handle))


def read_json(path: Path) -> Any:
    """A JSON file read by Python's json module."""
    return json.loads(path.read_text(encoding="utf-8"))


def read_assignments(run: Path) -> list[dict[str, str]]:
    """The run folder's assignments.csv, one dict per document."""
    return read_csv(run / "assignments.csv")


def read_ingest_report(run: Path) -> list[dict[str, str]]:
    """The run folder's ingest-report.csv, one dict per entry."""
    return read_csv(run / "ingest-report.csv")


def read_clusters(run: Path) -> Any:
    """The run folder's clusters.json."""
    return read_json(run / "clusters.json")


def read_manifest(run: Path) -> Any:
    """The run folder's manifest.json."""
    return read_json(run / "manifest.json")


def planted_notes_csv(path: Path, *, per_topic: int, seed: int) -> dict[str, str]:
    """Three invented topics (TOPICS), 60 % topic words among shared background words, as an id,title,body CSV;
    returns id -> topic. Shared by the Spark tests that compare a run's clusters with the planted topics."""
    rng = random.Random(seed)
    background = ["today", "later", "often", "small", "large", "quick", "plain", "usual", "again", "around"]
    truth: dict[str, str] = {}
    with path.open("w", encoding="utf-8", newline="") as handle:
        writer = csv.writer(handle)
        writer.writerow(["id", "title", "body"])
        for topic, words in TOPICS.items():
            for i in range(per_topic):
                body = " ".join(rng.choice(words if rng.random() < 0.6 else background) for _ in range(40))
                doc_id = f"{topic[:2]}{i:03d}"
                writer.writerow([doc_id, f"Note {i} on {topic}", body])
                truth[doc_id] = topic
    return truth
