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
from pilewise.describe.rules import chi_square_columns
from pilewise.options import RunOptions
from pilewise.output import docmap
from pilewise.pipeline import run_collection


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


def test_layout_in_a_worker_process_equals_the_layout_in_place() -> None:
    """The map is laid out in a forked worker beside describing; the positions must not depend on that."""
    space, _ = _blobs(200, 3, 12, seed=1)
    with docmap.layout_started(space, 200, 4, background=True) as beside:
        in_worker = beside()
    with docmap.layout_started(space, 200, 4, background=False) as here:
        in_place = here()
    assert np.array_equal(in_worker, in_place)
    assert np.array_equal(in_place, docmap.layout(space[docmap.sample_rows(200, docmap.MAP_CAP, 4)], 4))


def test_layout_above_the_cap_draws_the_seeded_sample() -> None:
    n = docmap.MAP_CAP + 50
    space, _ = _blobs(n, 3, 6, seed=2)
    with docmap.layout_started(space, n, 9, background=False) as here:
        points = here()
    assert points.shape == (docmap.MAP_CAP, 2)


def _files(run: Path) -> dict[str, bytes]:
    return {str(p.relative_to(run)): p.read_bytes() for p in sorted(run.rglob("*")) if p.is_file()}


def test_a_run_with_the_map_beside_gives_the_files_of_the_serial_run(
    topic_folder: Path, tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    """--workers 2 lays the map out in a worker process, --workers 1 in place: the same files either way."""
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1767225600")
    beside = run_collection(RunOptions(source=topic_folder, k=3, out=tmp_path / "a", seed=7, quiet=True, workers=2))
    serial = run_collection(RunOptions(source=topic_folder, k=3, out=tmp_path / "b", seed=7, quiet=True, workers=1))
    files_a, files_b = _files(beside.run_folder), _files(serial.run_folder)
    assert files_a.keys() == files_b.keys()
    differing = sorted(name for name in files_a if files_a[name] != files_b[name])
    assert differing in ([], ["manifest.json"])  # its timings, its output path and the workers option


def test_every_stage_of_a_run_has_a_timing(topic_folder: Path, tmp_path: Path) -> None:
    """The benchmark's time outside the recorded stages was language detection, saving the model and the map."""
    outcome = run_collection(RunOptions(source=topic_folder, k=3, out=tmp_path / "site", seed=1, quiet=True))
    timings = read_manifest(outcome.run_folder)["timings_seconds"]
    assert list(timings) == ["reading", "grouping near-duplicates", "detecting languages", "vectorizing",
                             "clustering", "assessing", "describing", "explaining", "laying out the map",
                             "saving the model", "writing site"]


_PARENT = os.getpid()
_REAL_LAYOUT = docmap.layout


def _layout_dying_in_a_worker(space: np.ndarray, seed: int) -> np.ndarray:
    """docmap.layout, except that a worker process running it dies at once (as one killed for memory would)."""
    if os.getpid() != _PARENT:
        os._exit(1)
    return _REAL_LAYOUT(space, seed)


def test_a_worker_that_dies_leaves_the_map_to_the_main_process(monkeypatch: pytest.MonkeyPatch) -> None:
    space, _ = _blobs(120, 3, 8, seed=6)
    monkeypatch.setattr(docmap, "layout", _layout_dying_in_a_worker)
    with docmap.layout_started(space, 120, 2, background=True) as beside:
        points = beside()
    assert np.array_equal(points, _REAL_LAYOUT(space, 2))
