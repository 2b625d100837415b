"""The collection-level reading against a null reference measured on the same data (issue 11, "Readings")."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
import scipy.sparse as sp

from helpers import invoke, write_topic_folder
from pilewise.clustering.quality import NULL_READINGS, assess, null_silhouette, null_space, silhouette_reading


def planted(k: int = 4, per: int = 60, dims: int = 20, spread: float = 0.15, seed: int = 0) -> np.ndarray:
    """`k` tight groups around random unit directions, rows scaled to unit length (planted structure)."""
    rng = np.random.default_rng(seed)
    centres = rng.standard_normal((k, dims))
    rows = np.repeat(centres, per, axis=0) + spread * rng.standard_normal((k * per, dims)) * np.linalg.norm(
        centres, axis=1).repeat(per)[:, None]
    return rows / np.linalg.norm(rows, axis=1, keepdims=True)


def test_dense_null_keeps_each_columns_values_up_to_the_row_scaling() -> None:
    # Definition of a permutation null (each column shuffled on its own): before the rows are scaled back to
    # unit length, every column holds the same multiset of values. Rows of equal norm make the scaling a
    # constant, so sorted columns must agree after it too: with |column 0| = 0.6 and |column 1| = 0.8 in every
    # row, any shuffle leaves rows of length 1.
    space = np.array([[0.6, 0.8], [0.6, -0.8], [-0.6, 0.8], [0.6, 0.8], [-0.6, -0.8], [0.6, 0.8]])
    shuffled = null_space(space, seed=3)
    np.testing.assert_allclose(np.sort(shuffled, axis=0), np.sort(space, axis=0))
    assert not np.array_equal(shuffled, space)


def test_sparse_null_keeps_the_number_of_values_in_each_column_and_is_seeded() -> None:
    # The sparse null moves each column's stored values to other rows: the count per column is unchanged
    # (definition in null_space's docstring); the same seed gives the same matrix (RunOptions.seed rule).
    space = sp.random(40, 15, density=0.2, random_state=1, format="csr")
    shuffled = null_space(space, seed=0)
    assert sp.issparse(shuffled)
    np.testing.assert_array_equal(np.diff(sp.csc_matrix(shuffled).indptr), np.diff(sp.csc_matrix(space).indptr))
    assert (null_space(space, seed=0) != shuffled).nnz == 0


def test_planted_groups_read_far_better_than_their_shuffled_vectors() -> None:
    # Independent computation: the null reference is k-means on the column-shuffled rows; on tight planted
    # groups it must be far below the real silhouette, and the reading must say so in its top band.
    space = planted()
    labels = np.repeat(np.arange(4), 60)
    scores = assess(space, labels, k=4, seed=0)
    assert scores.null_silhouette is not None and scores.silhouette is not None
    assert scores.null_silhouette < scores.silhouette / NULL_READINGS[0][0]
    assert scores.silhouette_reading.endswith(NULL_READINGS[0][1])
    reference = f"{scores.null_silhouette:.3f} for the same vectors with each dimension shuffled"
    assert reference in scores.silhouette_reading


def test_structureless_vectors_do_not_read_clearly_better_than_chance() -> None:
    # Rows drawn from one isotropic Gaussian have no groups (common practice: the reference case of gap
    # statistics); k-means still cuts them, and the reading must not claim clear structure (ratio < 1.5).
    rng = np.random.default_rng(5)
    rows = rng.standard_normal((400, 10))
    rows /= np.linalg.norm(rows, axis=1, keepdims=True)
    from sklearn.cluster import KMeans

    labels = KMeans(4, n_init=4, random_state=0).fit_predict(rows)
    scores = assess(rows, labels, k=4, seed=0)
    assert scores.silhouette is not None and scores.null_silhouette is not None
    assert scores.silhouette / scores.null_silhouette < 1.5
    assert not scores.silhouette_reading.endswith(("far better separated than chance",
                                                   "clearly better separated than chance"))


@pytest.mark.parametrize(
    ("value", "null", "band"),
    [(0.30, 0.10, "far better separated than chance"), (0.25, 0.10, "far better separated than chance"),
     (0.24, 0.10, "clearly better separated than chance"), (0.16, 0.10, "clearly better separated than chance"),
     (0.12, 0.10, "somewhat better separated than chance"),
     (0.105, 0.10, "no better separated than chance; judge the clusters by their stability and terms"),
     (0.05, 0.10, "no better separated than chance; judge the clusters by their stability and terms")],
)
def test_bands_follow_the_ratio_to_the_null(value: float, null: float, band: str) -> None:
    # docs/method.md, "Quality of the whole clustering": ratio >= 2.5 far, >= 1.5 clearly, >= 1.1 somewhat better.
    assert silhouette_reading(value, null) == f"{value:.3f} against {null:.3f} for the same vectors with each " \
        f"dimension shuffled: {band}"


def test_undefined_silhouette_and_missing_reference_read_plainly() -> None:
    # A value never appears without saying what it is compared with (issue 11: say what the figure means).
    assert silhouette_reading(None, None) == "not defined"
    assert silhouette_reading(0.2, None) == "0.200; no null reference could be computed"


def test_null_silhouette_is_none_when_the_rows_cannot_form_two_clusters() -> None:
    # scikit-learn docs: silhouette needs 2 <= labels <= n - 1; two identical rows give one cluster.
    assert null_silhouette(np.ones((2, 3)) / np.sqrt(3), 2, seed=0) is None


def test_clusters_json_records_the_null_reference(tmp_path: Path) -> None:
    # docs/outputs.md: quality.silhouette_null_reference beside quality.silhouette_cosine, and the reading
    # quotes both; three invented topics with disjoint words are far better separated than chance.
    folder = tmp_path / "notes"
    write_topic_folder(folder, per_topic=15)
    out = tmp_path / "site"
    result = invoke("run", str(folder), "--k", "3", "--out", str(out), "--quiet")
    assert result.exit_code == 0, result.stderr
    quality = json.loads((out / "runs" / "k3" / "clusters.json").read_text(encoding="utf-8"))["quality"]
    assert quality["silhouette_null_reference"] < quality["silhouette_cosine"]
    assert quality["silhouette_reading"].startswith(
        f"{quality['silhouette_cosine']:.3f} against {quality['silhouette_null_reference']:.3f}")
