"""The one reader of finished folders under OUT: runs (OUT/runs/NAME), sweeps (OUT/sweeps/NAME) and
assignments (OUT/assigned/NAME).

Name carry-over (`describe.names`), comparisons (`describe.compare`) and the root index all read earlier
runs through this module. It lives in describe/ (not output/) because describe/ may not import output/,
while output/ and the pipeline may import describe/. CSV columns are found by their header name, and
every cell goes through `csvcells.read_spreadsheet_cell`, which undoes the formula quote that the
exports add. A file that cannot be read raises `DamagedRun`; callers turn it into a skipped note
(names, root index) or a one-line error (`pilewise compare`).
"""

from __future__ import annotations

import csv
import json
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from pilewise.csvcells import read_spreadsheet_cell, read_spreadsheet_row
from pilewise.errors import PilewiseError

RUN_FILES = ("assignments.csv", "clusters.json", "manifest.json")
NAME_COLUMNS = ("cluster", "suggested_name", "name", "note")
REWRITE = "re-run pilewise run to rewrite the folder"


class DamagedRun(PilewiseError):
    """A file of a finished run folder that cannot be read.

    ``path`` is the file; ``problem`` says what is wrong in words that follow the file's name
    ("is not UTF-8 (saved from a spreadsheet?)").
    """

    def __init__(self, path: Path, problem: str) -> None:
        super().__init__(f"{path} {problem}; {REWRITE}")
        self.path = path
        self.problem = problem


@dataclass(frozen=True)
class ClusterRecord:
    """One cluster as clusters.json records it."""

    cluster_id: int
    headline: str
    name: str  # the name a person gave, "" when none

    @property
    def shown(self) -> str:
        """The name a person gave, else the exemplar's title."""
        return self.name or self.headline


@dataclass(frozen=True)
class FinishedRun:
    """What manifest.json and clusters.json of one finished run folder record."""

    folder: Path
    name: str  # the run's recorded name (manifest, else clusters.json, else the folder's name)
    created: str
    source: str  # the SOURCE it read, as given
    fingerprint: str  # SHA-256 of the input; "" when not recorded
    documents: int | None  # documents read, from the manifest (assignments.csv has one row each)
    k: int | None
    clustered: float | int | None  # clusters.json "documents"
    silhouette: float | int | None
    silhouette_reading: str
    clusters: tuple[ClusterRecord, ...]


@dataclass(frozen=True)
class Assignments:
    """assignments.csv: every document's id and cluster, in the run's reading order."""

    ids: list[str]
    labels: list[int]
    titles: list[str] = field(default_factory=list)  # empty when the file has no title column


@dataclass(frozen=True)
class FinishedSweep:
    """What sweep.json of one finished sweep folder records."""

    folder: Path
    recommended_k: object
    reason: str


@dataclass(frozen=True)
class FinishedAssignment:
    """What assigned.json of one `pilewise assign` folder records (empty fields where it is missing)."""

    folder: Path
    run: str  # the name of the run the documents were placed in
    run_href: str  # that run's index page, relative to the assignment's folder
    source: str
    created: str
    documents: int | None
    fits: dict[str, int]  # good, weak, none -> documents


def finished_folders(folder: Path) -> list[Path]:
    """Sub-folders of OUT/runs (or sweeps), without pilewise's hidden staging folders and locks."""
    try:
        return [f for f in sorted(folder.iterdir()) if f.is_dir() and not f.name.startswith(".")]
    except OSError:  # not there yet
        return []


def read_run(folder: Path) -> FinishedRun:
    """manifest.json and clusters.json of a run folder; `DamagedRun` when either cannot be read."""
    manifest = read_json_object(folder / "manifest.json")
    clusters = read_json_object(folder / "clusters.json")
    records = clusters.get("clusters")
    quality = _part(clusters, "quality")
    found = [
        ClusterRecord(r["id"] if isinstance(r.get("id"), int) else -1, str(r.get("headline", "")),
                      str(r.get("name") or ""))
        for r in (records if isinstance(records, list) else []) if isinstance(r, dict)
    ]
    documents = _part(manifest, "input").get("documents")
    k = clusters.get("k")
    return FinishedRun(
        folder=folder,
        name=str(manifest.get("run") or clusters.get("run") or folder.name),
        created=str(manifest.get("created", "")),
        source=str(_part(manifest, "parameters").get("source", "")),
        fingerprint=str(_part(manifest, "input").get("fingerprint", "")),
        documents=documents if isinstance(documents, int) and not isinstance(documents, bool) else None,
        k=k if isinstance(k, int) and not isinstance(k, bool) else None,
        clustered=_number(clusters.get("documents")),
        silhouette=_number(quality.get("silhouette_cosine")),
        silhouette_reading=str(quality.get("silhouette_reading", "")),
        clusters=tuple(found),
    )


def open_run(folder: Path) -> FinishedRun:
    """`read_run` for a folder a person named (`pilewise compare`): a wrong folder gets a hint."""
    if not folder.is_dir():
        raise PilewiseError(f"run folder {folder} not found; pass a run folder such as OUT/runs/k5")
    missing = [name for name in RUN_FILES if not (folder / name).is_file()]
    if missing:
        runs = [p.name for p in finished_folders(folder / "runs")]
        hint = (f"it looks like a site; pass one of its runs: {', '.join(str(folder / 'runs' / r) for r in runs)}"
                if runs else "pass a run folder written by pilewise run, such as OUT/runs/k5")
        raise PilewiseError(f"{folder} is not a pilewise run folder (no {', '.join(missing)}); {hint}")
    return read_run(folder)


def read_assignments(run: FinishedRun) -> Assignments:
    """doc_id and cluster of every row of assignments.csv, by column name (tables may add columns).

    Raises `DamagedRun` when the file is not UTF-8, lacks either column, has a row without a cluster
    number, lists no documents, or lists another number of documents than the manifest records.
    """
    path = run.folder / "assignments.csv"
    ids: list[str] = []
    labels: list[int] = []
    titles: list[str] = []
    try:
        with path.open(encoding="utf-8", newline="") as handle:
            reader = csv.reader(handle)
            header = read_spreadsheet_row(next(reader, []))
            if "doc_id" not in header or "cluster" not in header:
                raise DamagedRun(path, "has no doc_id and cluster columns")
            id_col, cluster_col = header.index("doc_id"), header.index("cluster")
            width = max(id_col, cluster_col) + 1
            title_col = header.index("title") if "title" in header else None
            for line_number, row in enumerate(reader, start=2):
                if len(row) < width or not row[cluster_col].lstrip("-").isdigit():
                    raise DamagedRun(path, f"has no cluster number on line {line_number}")
                ids.append(read_spreadsheet_cell(row[id_col]))
                labels.append(int(row[cluster_col]))
                if title_col is not None:
                    titles.append(read_spreadsheet_cell(row[title_col]) if title_col < len(row) else "")
    except UnicodeDecodeError:
        raise DamagedRun(path, "is not UTF-8 (saved from a spreadsheet?)") from None
    except (OSError, csv.Error) as err:
        raise DamagedRun(path, f"cannot be read ({err})") from None
    if not ids:
        raise DamagedRun(path, "lists no documents")
    if run.documents is not None and run.documents != len(ids):
        raise DamagedRun(path, f"lists {len(ids):,} documents where manifest.json says {run.documents:,} "
                               "(cut short or edited)")
    return Assignments(ids, labels, titles)


def read_names(path: Path) -> tuple[dict[int, tuple[str, str]], str | None]:
    """The clusters of a names.csv that a person named, with their notes, and why it cannot be read (or None).

    names.csv is edited by people, so it is read leniently: rows without a cluster number or a name are
    passed over, and the columns may come in any order.
    """
    found: dict[int, tuple[str, str]] = {}
    try:
        with path.open(encoding="utf-8-sig", newline="") as handle:
            reader = csv.reader(handle)
            header = read_spreadsheet_row(next(reader, []))
            if "cluster" not in header or "name" not in header:
                return {}, "it has no cluster and name columns"
            column = {name: header.index(name) for name in NAME_COLUMNS if name in header}
            for row in reader:
                cells = read_spreadsheet_row(row)

                def cell(name: str, cells: list[str] = cells) -> str:
                    i = column.get(name)
                    return cells[i].strip() if i is not None and i < len(cells) else ""

                if cell("name") and cell("cluster").isdigit():
                    found[int(cell("cluster"))] = (cell("name"), cell("note"))
    except UnicodeDecodeError:
        return {}, "it is not UTF-8 (saved from a spreadsheet?); save it again as CSV UTF-8"
    except (OSError, csv.Error) as err:
        return {}, f"cannot read it ({err})"
    return found, None


def read_site_runs(runs_folder: Path, ours: Callable[[Path], bool]) -> tuple[list[FinishedRun], list[str]]:
    """Every run folder of OUT/runs that pilewise wrote (`ours`) and that can be read, and a note for each other."""
    runs: list[FinishedRun] = []
    notes: list[str] = []
    for folder in finished_folders(runs_folder):
        where = f"{runs_folder.name}/{folder.name}"
        if not ours(folder):
            notes.append(f"{where} is not listed: pilewise did not write it (no .pilewise marker or manifest.json)")
            continue
        try:
            runs.append(read_run(folder))
        except DamagedRun as err:
            notes.append(f"{where}/{err.path.name} {err.problem}; that run is not listed or compared; re-run it "
                         "or delete it")
    return runs, notes


def read_site_sweeps(sweeps_folder: Path) -> tuple[list[FinishedSweep], list[str]]:
    """Every sweep folder of OUT/sweeps whose sweep.json can be read, and a note for each other."""
    sweeps: list[FinishedSweep] = []
    notes: list[str] = []
    for folder in finished_folders(sweeps_folder):
        try:
            found = read_json_object(folder / "sweep.json")
        except DamagedRun as err:
            notes.append(f"{sweeps_folder.name}/{folder.name} is not listed: its sweep.json {err.problem}")
            continue
        sweeps.append(FinishedSweep(folder, found.get("recommended_k"), str(found.get("reason", ""))))
    return sweeps, notes


def read_site_assigned(
    assigned_folder: Path, ours: Callable[[Path], bool]
) -> tuple[list[FinishedAssignment], list[str]]:
    """Every folder of OUT/assigned that pilewise wrote (`ours`), and a note for each that cannot be read.

    A folder written before assigned.json existed is listed with its name only.
    """
    found: list[FinishedAssignment] = []
    notes: list[str] = []
    for folder in finished_folders(assigned_folder):
        where = f"{assigned_folder.name}/{folder.name}"
        if not ours(folder):
            notes.append(f"{where} is not listed: pilewise did not write it (no .pilewise marker)")
            continue
        try:
            record = read_json_object(folder / "assigned.json") if (folder / "assigned.json").exists() else {}
        except DamagedRun as err:
            notes.append(f"{where} is not listed: its assigned.json {err.problem}")
            continue
        documents, fits = _number(record.get("documents")), record.get("fits")
        found.append(FinishedAssignment(
            folder, str(record.get("run", "")), str(record.get("run_href", "")), str(record.get("source", "")),
            str(record.get("created", "")), documents if isinstance(documents, int) else None,
            {str(k): v for k, v in fits.items() if isinstance(v, int)} if isinstance(fits, dict) else {}))
    return found, notes


def read_json_object(path: Path) -> dict[str, Any]:
    """A JSON object from an export; `DamagedRun` when it cannot be read or holds something else."""
    try:
        document = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError) as err:  # UnicodeDecodeError and JSONDecodeError are ValueErrors
        raise DamagedRun(path, f"cannot be read ({err})") from None
    if not isinstance(document, dict):
        raise DamagedRun(path, "cannot be read (not a JSON object)")
    return document


def _part(document: dict[str, Any], key: str) -> dict[str, Any]:
    value = document.get(key)
    return value if isinstance(value, dict) else {}


def _number(value: object) -> float | int | None:
    """A figure read from an export, or None when the file holds something else there."""
    return value if isinstance(value, int | float) and not isinstance(value, bool) else None
