"""The faster back half of a run (issue 15): sampled figures, shared sums, the map beside describing.

No test here times anything; each checks that a faster path gives what the plain one gives.
"""

from __future__ import annotations

import os
from pathlib import Path

import numpy as np
import pytest
import scipy.sparse as sp
from sklearn.metrics import silhouette_score

from helpers import read_manifest
from pilewise.clustering import quality
from pilewise.describe.rules import chi_square_columns, explain_run
from pilewise.options import RunOptions
from pilewise.output import docmap
from pilewise.pipeline import Job, _Beside, run_collection


def _blobs(n: int, k: int, dims: int, seed: int) -> tuple[np.ndarray, np.ndarray]:
    """`n` unit-length rows around `k` random directions, with their labels."""
    rng = np.random.default_rng(seed)
    centres = rng.normal(size=(k, dims))
    labels = rng.integers(0, k, size=n)
    rows = centres[labels] + rng.normal(scale=0.6, size=(n, dims))
    return rows / np.linalg.norm(rows, axis=1, keepdims=True), labels


def test_sampled_silhouette_agrees_with_the_silhouette_of_every_row() -> None:
    """Above SILHOUETTE_SAMPLE rows the silhouette is read on a seeded sample, as scikit-learn's
    silhouette_score(sample_size=) does; it must agree with the figure over all rows within the error
    measured on the 50,000-text benchmark collection (docs/method.md, "Silhouette": 0.018 at most there)."""
    n = quality.SILHOUETTE_SAMPLE + 1_000
    space, labels = _blobs(n, 6, 20, seed=3)
    scores = quality.assess(space, labels, k=6, seed=0)
    assert scores.silhouette_sample == quality.SILHOUETTE_SAMPLE
    # reference: scikit-learn's silhouette over every row, cosine metric (Rousseeuw 1987)
    full = silhouette_score(space, labels, metric="cosine")
    assert scores.silhouette is not None
    assert abs(scores.silhouette - full) < 0.02


def test_sampled_silhouette_is_the_same_for_the_same_seed() -> None:
    space, labels = _blobs(quality.SILHOUETTE_SAMPLE + 500, 4, 10, seed=5)
    first = quality.assess(space, labels, k=4, seed=11)
    assert quality.assess(space, labels, k=4, seed=11) == first


def test_chi_square_columns_on_the_first_columns_equals_it_on_a_copy_of_them() -> None:
    """The tree fits pass the whole feature matrix and the number of term columns; the figures must be those
    of the term columns alone (the slice the fits used to copy)."""
    rng = np.random.default_rng(0)
    present = sp.random(300, 80, density=0.1, format="csr", random_state=rng)
    present.data[:] = 1.0
    y = rng.integers(0, 3, size=300)
    weights = rng.integers(1, 4, size=300).astype(float)
    for top in (5, 40, 300):
        expected = chi_square_columns(sp.csr_matrix(present[:, :60]), y, weights, top)
        got = chi_square_columns(present, y, weights, top, term_columns=60)
        assert np.array_equal(got, expected)
        assert got.size == 0 or got.max() < 60


def test_work_handed_to_the_worker_equals_the_work_done_in_place() -> None:
    """The map and the rules are computed in a forked worker beside assessing and describing; their results
    must not depend on that (the in-place run is the reference)."""
    space, labels = _blobs(200, 3, 12, seed=1)
    rng = np.random.default_rng(2)
    counts = sp.csr_matrix(rng.poisson(0.3, size=(200, 40)).astype(float) + np.eye(200, 40) * (labels[:, None] + 1))
    shown = [f"term{j}" for j in range(40)]
    results = []
    rules_args = (counts, np.ones(200), labels, shown, None, {})
    jobs: dict[str, Job] = {"map": (docmap.layout, (space, 4), {}),
                            "rules": (explain_run, rules_args, {"k": 3, "seed": 4})}
    for background in (True, False):
        with _Beside(jobs, background=background) as beside:
            results.append((beside.result("map"), beside.result("rules")))
    (points_beside, rules_beside), (points_here, rules_here) = results
    assert np.array_equal(points_beside, points_here)
    assert rules_beside == rules_here


def test_layout_above_the_cap_draws_the_seeded_sample() -> None:
    n = docmap.MAP_CAP + 50
    space, _ = _blobs(n, 3, 6, seed=2)
    rows = docmap.sample_rows(n, docmap.MAP_CAP, 9)
    assert rows.size == docmap.MAP_CAP and np.array_equal(rows, docmap.sample_rows(n, docmap.MAP_CAP, 9))
    assert docmap.layout(space[rows], 9).shape == (docmap.MAP_CAP, 2)


def _files(run: Path) -> dict[str, bytes]:
    return {str(p.relative_to(run)): p.read_bytes() for p in sorted(run.rglob("*")) if p.is_file()}


def test_a_run_with_the_map_beside_gives_the_files_of_the_serial_run(
    topic_folder: Path, tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    """--workers 2 hands the map and the rules to a worker process, --workers 1 computes them in place: the
    same files either way."""
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1767225600")
    beside = run_collection(RunOptions(source=topic_folder, k=3, out=tmp_path / "a", seed=7, quiet=True, workers=2))
    serial = run_collection(RunOptions(source=topic_folder, k=3, out=tmp_path / "b", seed=7, quiet=True, workers=1))
    files_a, files_b = _files(beside.run_folder), _files(serial.run_folder)
    assert files_a.keys() == files_b.keys()
    differing = sorted(name for name in files_a if files_a[name] != files_b[name])
    assert differing in ([], ["manifest.json"])  # its timings, its output path and the workers option


def test_the_maps_worker_is_forked_before_clustering_and_the_rules_worker_after_it(
    topic_folder: Path, tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    """The map needs only the space, so its worker starts before clustering (common practice: start independent
    work as early as its inputs exist); the rules need the labels, so theirs starts after."""
    from pilewise import pipeline

    events: list[str] = []
    enter, clustered = pipeline._Beside.__enter__, pipeline._clustered

    def entering(self: _Beside) -> _Beside:
        events.append("worker: " + ", ".join(sorted(self.jobs)))
        return enter(self)

    def clustering(*args: object, **kwargs: object) -> object:
        events.append("clustering")
        return clustered(*args, **kwargs)  # type: ignore[arg-type]

    monkeypatch.setattr(pipeline._Beside, "__enter__", entering)
    monkeypatch.setattr(pipeline, "_clustered", clustering)
    run_collection(RunOptions(source=topic_folder, k=3, out=tmp_path / "site", seed=1, quiet=True, workers=2))
    assert events == ["worker: map", "clustering", "worker: rules"]


def test_every_stage_of_a_run_has_a_timing(topic_folder: Path, tmp_path: Path) -> None:
    """The benchmark's time outside the recorded stages was language detection, the map and saving the model."""
    outcome = run_collection(RunOptions(source=topic_folder, k=3, out=tmp_path / "site", seed=1, quiet=True))
    timings = read_manifest(outcome.run_folder)["timings_seconds"]
    assert list(timings) == ["reading", "grouping near-duplicates", "detecting languages", "vectorizing",
                             "clustering", "table columns", "assessing", "describing", "explaining",
                             "laying out the map", "saving the model", "writing site"]


_PARENT = os.getpid()
_REAL_LAYOUT = docmap.layout


def _layout_dying_in_a_worker(space: np.ndarray, seed: int) -> np.ndarray:
    """docmap.layout, except that a worker process running it dies at once (as one killed for memory would)."""
    if os.getpid() != _PARENT:
        os._exit(1)
    return _REAL_LAYOUT(space, seed)


def test_a_worker_that_dies_leaves_its_work_to_the_main_process() -> None:
    space, _ = _blobs(120, 3, 8, seed=6)
    with _Beside({"map": (_layout_dying_in_a_worker, (space, 2), {})}, background=True) as beside:
        points = beside.result("map")
    assert np.array_equal(points, _REAL_LAYOUT(space, 2))
