"""The one reader of finished run folders, the atomic refresh of a site's pages, and the table of option checks.

Run folders are written by hand in each test (a manifest, clusters.json and an assignments.csv written
with the standard library's csv module), so these tests need no clustering.
"""

from __future__ import annotations

import csv
import json
import os
from pathlib import Path

import pytest
from sklearn.metrics import adjusted_rand_score

from pilewise import pipeline
from pilewise.csvcells import spreadsheet_cell
from pilewise.describe.runfolders import DamagedRun, open_run, read_assignments, read_run
from pilewise.errors import PilewiseError
from pilewise.options import RunOptions, validate
from pilewise.output.outfolder import mark


def write_run(folder: Path, ids: list[str], labels: list[int], *, fingerprint: str = "sha256:same",
              header: tuple[str, ...] = ("doc_id", "cluster", "title")) -> Path:
    """A run folder as `pilewise run` leaves it, reduced to the files that readers use."""
    folder.mkdir(parents=True)
    mark(folder)
    k = len(set(labels))
    manifest = {"tool": "pilewise", "run": folder.name, "created": "2023-11-14T22:13:20Z",
                "parameters": {"source": "/data/notes"}, "input": {"documents": len(ids), "fingerprint": fingerprint}}
    clusters = {"run": folder.name, "k": k, "documents": len(ids),
                "quality": {"silhouette_cosine": 0.25, "silhouette_reading": "weak structure"},
                "clusters": [{"id": c, "headline": f"headline {c}", "name": ""} for c in range(k)]}
    (folder / "manifest.json").write_text(json.dumps(manifest), encoding="utf-8")
    (folder / "clusters.json").write_text(json.dumps(clusters), encoding="utf-8")
    with (folder / "assignments.csv").open("w", encoding="utf-8", newline="") as handle:
        writer = csv.writer(handle, lineterminator="\n")
        writer.writerow(header)
        for doc_id, label in zip(ids, labels, strict=True):
            cells = {"doc_id": spreadsheet_cell(doc_id), "cluster": label, "title": f"title of {doc_id}"}
            writer.writerow([cells[name] for name in header])
    return folder


def test_assignments_are_read_by_column_name_and_the_formula_quote_is_undone(tmp_path: Path) -> None:
    # ids that a spreadsheet would run as formulas are exported with a leading quote (OWASP "CSV
    # Injection"); the reader must give back the ids as the run read them, whatever the column order
    ids = ["=SUM(A1)", "+44 20", "-note", "@home", "plain", "'quoted"]
    labels = [0, 1, 0, 1, 2, 2]
    run = read_run(write_run(tmp_path / "runs" / "k3", ids, labels, header=("title", "cluster", "doc_id")))
    rows = read_assignments(run)
    assert rows.ids == ids and rows.labels == labels
    assert run.k == 3 and run.documents == 6 and run.fingerprint == "sha256:same"
    assert [c.headline for c in run.clusters] == ["headline 0", "headline 1", "headline 2"]


@pytest.mark.parametrize("damage, problem", [
    ("no columns", "has no doc_id and cluster columns"),
    ("cp1252", "is not UTF-8 (saved from a spreadsheet?)"),
    ("cut short", "lists 3 documents where manifest.json says 4 (cut short or edited)"),
    ("no cluster", "has no cluster number on line 3"),
])
def test_a_damaged_assignments_file_is_a_typed_error_naming_the_file(tmp_path: Path, damage: str,
                                                                      problem: str) -> None:
    folder = write_run(tmp_path / "runs" / "k2", ["a", "b", "c", "d"], [0, 0, 1, 1])
    path = folder / "assignments.csv"
    lines = path.read_text(encoding="utf-8").splitlines()
    if damage == "no columns":
        lines[0] = "id,group,title"
    elif damage == "cp1252":
        lines[1] = lines[1].replace("title of a", "título")
    elif damage == "cut short":
        lines = lines[:-1]
    else:
        lines[2] = "b,,title of b"
    path.write_bytes(("\n".join(lines) + "\n").encode("cp1252" if damage == "cp1252" else "utf-8"))
    with pytest.raises(DamagedRun) as err:
        read_assignments(read_run(folder))
    assert err.value.path == path and err.value.problem == problem
    assert str(err.value) == f"{path} {problem}; re-run pilewise run to rewrite the folder"
    assert isinstance(err.value, PilewiseError)  # `pilewise compare` shows it as one line


def test_a_folder_that_is_no_run_gets_a_hint(tmp_path: Path) -> None:
    write_run(tmp_path / "site" / "runs" / "k2", ["a", "b", "c"], [0, 1, 1])
    with pytest.raises(PilewiseError) as err:
        open_run(tmp_path / "site")
    assert str(err.value) == (f"{tmp_path / 'site'} is not a pilewise run folder (no assignments.csv, clusters.json, "
                              f"manifest.json); it looks like a site; pass one of its runs: "
                              f"{tmp_path / 'site' / 'runs' / 'k2'}")


def test_refreshing_a_site_replaces_files_in_finished_run_folders_only_atomically(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    out = tmp_path / "site"
    ids = [f"d{i}" for i in range(12)]
    labels_a = [i % 2 for i in range(12)]
    labels_b = [i % 3 for i in range(12)]
    write_run(out / "runs" / "k2", ids, labels_a)
    write_run(out / "runs" / "k3", ids, labels_b)
    pipeline.refresh_site(out)  # first pass: creates comparisons.html in both runs
    before = {p: p.stat().st_ino for p in (out / "runs").rglob("*") if p.is_file()}
    replaced: list[Path] = []
    real_replace = os.replace

    def recording(src: str | Path, dst: str | Path) -> None:
        replaced.append(Path(dst))
        real_replace(src, dst)

    monkeypatch.setattr(os, "replace", recording)
    pipeline.refresh_site(out)
    after = {p: p.stat().st_ino for p in (out / "runs").rglob("*") if p.is_file()}
    changed = {p for p in after if before.get(p) != after[p]}
    # a rewrite in place keeps the inode; os.replace of a temporary sibling gives a new one (POSIX rename)
    assert changed == {out / "runs" / "k2" / "comparisons.html", out / "runs" / "k3" / "comparisons.html"}
    assert changed <= set(replaced)
    document = json.loads((out / "compare" / "k2--k3" / "compare.json").read_text(encoding="utf-8"))
    # the figure on the pages is scikit-learn's ARI of the two labelings (rounded as compare.json rounds)
    assert document["agreement"]["adjusted_rand_index"] == round(adjusted_rand_score(labels_a, labels_b), 6)
    root = (out / "index.html").read_text(encoding="utf-8")
    assert 'href="runs/k2/index.html"' in root and 'href="compare/k2--k3/index.html"' in root


def test_a_damaged_run_is_left_out_of_the_root_index_with_a_note(tmp_path: Path) -> None:
    out = tmp_path / "site"
    write_run(out / "runs" / "k2", ["a", "b", "c"], [0, 1, 1])
    (out / "runs" / "k2" / "clusters.json").write_text("[1, 2]", encoding="utf-8")
    notes: list[str] = []
    pipeline.refresh_site(out, warn=notes.append)
    assert notes == ["runs/k2/clusters.json cannot be read (not a JSON object); that run is not listed or compared; "
                     "re-run it or delete it"]


def test_every_option_problem_is_reported_at_once_before_reading(tmp_path: Path) -> None:
    # the source does not exist, so any reading would fail with another message first
    options = RunOptions(source=tmp_path / "missing", k=0, k_auto=True, mode="stream", method="ward",
                         lsa_components=0, max_df=1.5)
    with pytest.raises(PilewiseError) as err:
        validate(options)
    assert str(err.value) == (
        "--max-df=1.5 is out of range; use a share above 0 and at most 1; "
        "streaming mode clusters with mini-batch k-means at one given k; pass --k N without --method ward, "
        "or --mode memory (choose k with `pilewise sweep` on a sample of the collection); "
        "--method ward needs the LSA space; do not pass --lsa-components 0 with it; "
        f"source {str(tmp_path / 'missing')!r} does not exist; pass a folder or a table file"
    )


@pytest.mark.parametrize("mode, method, k_auto, fine", [
    ("stream", "kmeans", False, True),
    ("auto", "ward", False, True),  # auto streams only above 100 MB; the streaming path checks then
    ("memory", "kmeans", True, True),
    ("stream", "kmeans", True, False),
    ("stream", "ward", False, False),
])
def test_streaming_combinations(tmp_path: Path, mode: str, method: str, k_auto: bool, fine: bool) -> None:
    options = RunOptions(source=tmp_path, k=0 if k_auto else 3, k_auto=k_auto, mode=mode, method=method,
                         out=tmp_path.parent / "out")
    if fine:
        validate(options)
    else:
        with pytest.raises(PilewiseError, match="^streaming mode clusters with mini-batch k-means"):
            validate(options)
