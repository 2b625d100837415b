"""The folder of one assignment (OUT/assigned/NAME): assigned.csv, assigned.json, ingest-report.csv and the pages.

Renders finished, display-ready records only (the assign command computes them); autoescape is on, as on
every page, since titles are the documents' own text.
"""

from __future__ import annotations

import csv
import json
from dataclasses import dataclass
from importlib.resources import files
from pathlib import Path

from jinja2 import Environment, PackageLoader, StrictUndefined

from pilewise.csvcells import spreadsheet_row
from pilewise.model import IngestEntry
from pilewise.output.site import CAUTION, STYLESHEET

ASSIGNED_COLUMNS = ("doc_id", "source", "title", "cluster", "cluster_name", "distance", "fit")
LISTED_PER_CLUSTER = 5_000  # new members listed on a cluster's page (nearest first); assigned.csv has them all


@dataclass(frozen=True)
class AssignedRow:
    """One new document and where it went (cluster -1 and distance None: no term of the run's vocabulary)."""

    doc_id: str
    source: str
    title: str  # for display (redaction labels, not placeholders)
    cluster: int
    cluster_name: str
    distance: float | None
    fit: str


@dataclass(frozen=True)
class AssignedCluster:
    """A cluster of the run with its new members, nearest first."""

    cluster_id: int
    name: str
    headline: str
    run_members: int
    members: tuple[AssignedRow, ...]
    fits: dict[str, int]  # good, weak, none -> new members

    @property
    def page(self) -> str:
        return f"cluster-{self.cluster_id:02d}.html"


@dataclass(frozen=True)
class Assignment:
    """Everything the folder shows: the run, the source, every row, the clusters and the warning."""

    name: str
    run: str
    run_href: str  # the run's index page, relative to this folder
    source: str
    created: str
    rows: tuple[AssignedRow, ...]  # in reading order
    clusters: tuple[AssignedCluster, ...]
    without_terms: int
    fits: dict[str, int]
    none_share: float
    warning: str  # "" when the share of `none` is below the threshold
    fit_rule: str
    skipped: int
    entries: tuple[IngestEntry, ...]


def write_assigned_folder(folder: Path, assignment: Assignment) -> None:
    """assigned.csv, assigned.json, ingest-report.csv, index.html and one page per cluster into `folder` (a staging
    folder)."""
    with (folder / "assigned.csv").open("w", encoding="utf-8", newline="") as handle:
        writer = csv.writer(handle, lineterminator="\n")
        writer.writerow(ASSIGNED_COLUMNS)
        for row in assignment.rows:
            writer.writerow(spreadsheet_row([
                row.doc_id, row.source, row.title, "" if row.cluster < 0 else row.cluster, row.cluster_name,
                "" if row.distance is None else f"{row.distance:.6f}", row.fit]))
    with (folder / "ingest-report.csv").open("w", encoding="utf-8", newline="") as handle:
        writer = csv.writer(handle, lineterminator="\n")
        writer.writerow(["source", "status", "reason", "detail"])
        for entry in assignment.entries:
            writer.writerow(spreadsheet_row([entry.source, entry.status, entry.reason, entry.detail]))
    # what the site's root index lists (describe.runfolders.read_site_assigned reads it back)
    record = {"name": assignment.name, "run": assignment.run, "run_href": assignment.run_href,
              "source": assignment.source, "created": assignment.created, "documents": len(assignment.rows),
              "skipped": assignment.skipped, "fits": assignment.fits, "none_share": round(assignment.none_share, 4)}
    (folder / "assigned.json").write_text(json.dumps(record, indent=2, ensure_ascii=False) + "\n", encoding="utf-8")
    env = Environment(loader=PackageLoader("pilewise.output.site", "templates"), autoescape=True,
                      undefined=StrictUndefined, trim_blocks=True, lstrip_blocks=True, keep_trailing_newline=True)
    env.filters["dist"] = lambda v: "–" if v is None else f"{v:.3f}"
    env.filters["pct"] = lambda v: f"{100 * v:.1f}%"
    (folder / STYLESHEET).write_bytes(files("pilewise.output.site").joinpath("static", STYLESHEET).read_bytes())
    common = {"caution": CAUTION, "css": STYLESHEET, "up": "", "a": assignment, "listed": LISTED_PER_CLUSTER}
    (folder / "index.html").write_text(env.get_template("assigned_index.html").render(common), encoding="utf-8")
    page = env.get_template("assigned_cluster.html")
    for cluster in assignment.clusters:
        (folder / cluster.page).write_text(
            page.render(common, cluster=cluster, members=cluster.members[:LISTED_PER_CLUSTER]), encoding="utf-8")
