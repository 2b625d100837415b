"""`pilewise assign`: read new documents as `run` reads them, place them in a saved run, write OUT/assigned/NAME."""

from __future__ import annotations

import os
import time
from dataclasses import dataclass, replace
from pathlib import Path

import numpy as np

from pilewise.assign.placing import (
    GOOD_QUANTILE,
    NONE_SHARE_WARNING,
    NONE_WARNING,
    WEAK_QUANTILE,
    Placement,
    place,
)
from pilewise.assign.saved import SavedModel, load_model
from pilewise.errors import PilewiseError
from pilewise.ingest.dedup import strip_boilerplate
from pilewise.ingest.reading import read_source
from pilewise.ingest.redact import display_text, redact_document
from pilewise.model import Ingested
from pilewise.options import RunOptions, reading_settings, validate
from pilewise.output.assigned_site import AssignedCluster, AssignedRow, Assignment, write_assigned_folder
from pilewise.output.exports import build_time
from pilewise.output.outfolder import claim_site, inside, name_lock, safe_name, writing_to
from pilewise.output.writing import _write_atomically
from pilewise.pipeline import refresh_site
from pilewise.progress import Reporter

FIT_RULE = (f"Fit compares a document's cosine distance with the run's own members: good when it is no farther "
            f"from its cluster's centroid than {GOOD_QUANTILE:.0%} of that cluster's members; none when it is "
            f"farther from every centroid than {WEAK_QUANTILE:.0%} of each cluster's members; weak in between. "
            "A document with no word the run knows fits none.")


@dataclass(frozen=True)
class AssignOutcome:
    """Where the assignment was written and what it found."""

    folder: Path
    index_page: Path
    documents: int
    none_share: float
    warning: str


def find_run(run: Path, out: Path | None) -> tuple[Path, Path]:
    """The run folder and the site folder OUT: RUN is a run folder (OUT: the site holding it unless given), or
    a run's name under OUT/runs (OUT default pilewise-site)."""
    if run.is_dir():
        folder = run
        if out is None:
            if folder.resolve().parent.name != "runs":
                raise PilewiseError(f"{str(run)!r} is not in a site's runs folder; pass --out for the assignment")
            out = folder.resolve().parent.parent
        return folder, out
    out = out if out is not None else Path("pilewise-site")
    named = out / "runs" / safe_name(str(run))
    if str(run) == safe_name(str(run)) and named.is_dir():
        return named, out
    raise PilewiseError(f"run {str(run)!r} is neither a run folder nor a run under {out / 'runs'}; pass a run's "
                        "folder, e.g. pilewise-site/runs/k5")


def assign_source(run: Path, reading: RunOptions, *, out: Path | None, name: str,
                  reporter: Reporter | None = None) -> AssignOutcome:
    """Place every document of `reading.source` in the nearest cluster of the saved run RUN; write
    OUT/assigned/NAME/. `reading` carries the reading options (columns, separator, encoding, limits)."""
    reporter = reporter or Reporter(quiet=reading.quiet)
    folder, out = find_run(run, out)
    model = load_model(folder)
    validate(replace(reading, out=out, redact=model.redact))
    name = name or f"{safe_name(reading.source.name or 'source')}-{build_time().replace(':', '')}"
    if not (safe_name(name) == name):
        raise PilewiseError(f"--name {name!r} is not a safe folder name; use letters, digits, '-', '_' or '.'")
    target = inside(out, out / "assigned" / name)
    with writing_to(out):
        claim_site(out)
        with name_lock(target, what="--name"):
            if target.exists() or target.is_symlink():
                raise PilewiseError(f"{target} already exists; pass another --name")
            with reporter.stage("reading"):
                ingested = _read(reading, model)
            with reporter.stage("assigning"):
                start = time.perf_counter()
                texts = [strip_boilerplate(doc.text, model.boilerplate) if model.boilerplate.lines else doc.text
                         for doc in ingested.documents]
                placement = place(texts, model)
                reporter.say(f"{len(texts):,} documents placed in {time.perf_counter() - start:.1f} s")
            assignment = _assignment(name, folder, target, reading, model, ingested, placement)
            if assignment.warning:
                reporter.warn(assignment.warning)
            _write_atomically(target, lambda staging: write_assigned_folder(staging, assignment))
        refresh_site(out, warn=reporter.warn)  # the root index links every assignment, as it links runs
    return AssignOutcome(target, target / "index.html", len(assignment.rows), assignment.none_share,
                         assignment.warning)


def _read(reading: RunOptions, model: SavedModel) -> Ingested:
    """SOURCE read as `run` reads it, redacted when the run was (the run's own setting)."""
    limits, columns = reading_settings(reading)
    ingested = read_source(reading.source, columns, limits)
    if len(ingested.documents) > reading.max_documents:
        raise PilewiseError(f"found {len(ingested.documents):,} documents, more than --max-documents "
                            f"{reading.max_documents:,}; raise --max-documents or point SOURCE at fewer files")
    if model.redact:
        counts: dict[str, int] = {}
        ingested = replace(ingested, documents=tuple(redact_document(doc, counts) for doc in ingested.documents))
    return ingested


def _assignment(name: str, run_folder: Path, target: Path, reading: RunOptions, model: SavedModel,
                ingested: Ingested, placement: Placement) -> Assignment:
    """The display-ready records of the folder."""
    k = len(model.cluster_names)
    rows = tuple(
        AssignedRow(doc.doc_id, doc.source, display_text(doc.title), int(c), model.cluster_names[c] if c >= 0 else "",
                    None if np.isnan(d) else float(d), fit)
        for doc, c, d, fit in zip(ingested.documents, placement.clusters, placement.distances, placement.fit,
                                  strict=True))
    grouped: list[list[AssignedRow]] = [[] for _ in range(k)]
    for row in rows:
        if row.cluster >= 0:
            grouped[row.cluster].append(row)
    clusters = []
    for c in range(k):
        members = sorted(grouped[c], key=lambda row: (row.distance or 0.0, row.doc_id))
        clusters.append(AssignedCluster(c, model.cluster_names[c], model.headlines[c], int(model.members[c]),
                                        tuple(members), _fits(members)))
    share = placement.none_share()
    warning = NONE_WARNING.format(share=share, run=model.run) if share > NONE_SHARE_WARNING else ""
    return Assignment(
        name=name, run=model.run,
        run_href=os.path.relpath(run_folder.resolve() / "index.html", target.resolve()),
        source=str(reading.source), created=build_time(), rows=rows, clusters=tuple(clusters),
        without_terms=int((placement.clusters < 0).sum()), fits=_fits(rows), none_share=share, warning=warning,
        fit_rule=FIT_RULE, skipped=len(ingested.skipped()), entries=ingested.entries,
    )


def _fits(rows: list[AssignedRow] | tuple[AssignedRow, ...]) -> dict[str, int]:
    found = {"good": 0, "weak": 0, "none": 0}
    for row in rows:
        found[row.fit] += 1
    return found
