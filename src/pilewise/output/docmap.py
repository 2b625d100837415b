"""A map of the documents: a 2-D layout of the clustering space and its SVG, one mark per distinct text.

The layout is t-SNE (van der Maaten and Hinton 2008, "Visualizing Data using t-SNE", JMLR 9; scikit-learn's
Barnes-Hut `TSNE` with cosine distances, started from the principal components, seeded). A linear projection
(principal components) was measured first: on the 1,464 texts of the demo collection at k=19 its 2-D
silhouette of the cluster labels was -0.004, i.e. every cluster drawn on top of every other, against 0.34 for
t-SNE at perplexity 30 and 0.31 at the settings used here (perplexity 20, 400 iterations), which took 16 s on
one thread instead of 26 s (perplexity 30, 500 iterations) under a load average of 12 on 2 cores. t-SNE costs
seconds, so it runs on a seeded sample of at most `MAP_CAP` distinct texts, on one thread: its OpenMP threads,
on a busy machine, took 26 s for 100 texts that one thread placed in 0.9 s, and one thread makes the result
independent of the number of cores. Copies of one text share one mark (they would sit on one spot). t-SNE
keeps neighbourhoods, not distances: the gaps between clusters and their drawn sizes mean little, which the
page says.
"""

from __future__ import annotations

import inspect
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp

MAP_CAP = 1_500  # marks drawn at most: a seeded sample of distinct texts above it (t-SNE time grows with it)
TSNE_ITERATIONS = 400  # scikit-learn's default is 1,000; 250 of them are the early exaggeration
PERPLEXITY = 20.0  # scikit-learn's default is 30; 20 looks at fewer neighbours (measured above)
WIDTH, HEIGHT, MARGIN = 760, 520, 16
# twelve colours chosen for this site: each at least 3:1 against the white panel (WCAG 2.1 §1.4.11,
# checked in tests/test_docmap.py), and every two of them far apart in CIELAB (delta E*ab of 28 or more,
# checked in tests/test_speed_back2.py; the former palette's closest pair, clusters 0 and 7, was 16). Picked
# by farthest-point selection among the sRGB colours (steps of 8) of contrast 3.4 to 6 and chroma 30 to 62,
# from an orange; beyond twelve clusters colours repeat and the numbers at the centres and the legend tell
# clusters apart
PALETTE = ("#b86820", "#0088f0", "#00a058", "#b83080", "#008898", "#889010",
           "#786090", "#e85860", "#b070d8", "#985850", "#507040", "#0070a8")


@dataclass(frozen=True)
class Mark:
    """One distinct text on the map."""

    x: float
    y: float
    cluster: int
    title: str  # as pages show it (redacted)
    href: str | None  # its document page, when pages were written


@dataclass(frozen=True)
class MapCluster:
    """A cluster's label on the map, drawn at the mean position of its marks."""

    cluster: int
    label: str
    size: int  # documents
    x: float
    y: float
    colour: str


def sample_rows(n_rows: int, cap: int, seed: int) -> np.ndarray:
    """All row indices when `n_rows` <= `cap`, else a seeded sample of `cap` of them, in ascending order."""
    if n_rows <= cap:
        return np.arange(n_rows)
    return np.sort(np.random.default_rng(seed).choice(n_rows, size=cap, replace=False))


def layout(space: np.ndarray | sp.spmatrix, seed: int) -> np.ndarray:
    """2-D positions of the rows of `space`, scaled into the drawing box.

    Parameters
    ----------
    space : ndarray or sparse matrix of shape (n_rows, n_dims)
        The rows to place (already sampled).
    seed : int
        Seeds t-SNE; the same rows and seed give the same positions.

    Returns
    -------
    ndarray of shape (n_rows, 2)
        Pixel positions inside WIDTH x HEIGHT, rounded to 0.1 px.
    """
    from sklearn.manifold import TSNE
    from threadpoolctl import threadpool_limits  # a dependency of scikit-learn

    n = space.shape[0]
    if n < 4:  # t-SNE needs a few neighbours; a handful of marks are spread on a line
        points = np.column_stack([np.arange(n, dtype=float), np.zeros(n)])
    else:
        dense = _dense_rows(space, seed)
        # scikit-learn 1.5 renamed n_iter to max_iter; pyproject allows 1.4
        renamed = "max_iter" in inspect.signature(TSNE).parameters
        iterations = {"max_iter" if renamed else "n_iter": TSNE_ITERATIONS}
        with threadpool_limits(limits=1):
            points = TSNE(n_components=2, perplexity=min(PERPLEXITY, (n - 1) / 3), metric="cosine", init="pca",
                          random_state=seed % 2**32, **iterations).fit_transform(dense)
    return _scaled(points)


def _dense_rows(space: np.ndarray | sp.spmatrix, seed: int) -> np.ndarray:
    """The rows as a dense array; a sparse TF-IDF space is reduced to 50 dimensions first."""
    if not sp.issparse(space):
        return np.asarray(space, dtype=np.float64)
    from sklearn.decomposition import TruncatedSVD

    dims = min(50, space.shape[1] - 1, space.shape[0] - 1)
    return TruncatedSVD(n_components=max(dims, 1), random_state=seed % 2**32).fit_transform(space)


def _scaled(points: np.ndarray) -> np.ndarray:
    """Fit the points into the drawing box keeping their aspect ratio."""
    low, high = points.min(axis=0), points.max(axis=0)
    span = np.where(high - low > 0, high - low, 1.0)
    scale = min((WIDTH - 2 * MARGIN) / span[0], (HEIGHT - 2 * MARGIN) / span[1])
    offset = (np.array([WIDTH, HEIGHT]) - span * scale) / 2
    return np.round((points - low) * scale + offset, 1)


def cluster_labels(marks: Sequence[Mark], labels: dict[int, str], sizes: dict[int, int]) -> list[MapCluster]:
    """One label per cluster with marks, at the mean position of its marks."""
    found: dict[int, list[Mark]] = {}
    for mark in marks:
        found.setdefault(mark.cluster, []).append(mark)
    return [MapCluster(c, labels[c], sizes[c], round(sum(m.x for m in ms) / len(ms), 1),
                       round(sum(m.y for m in ms) / len(ms), 1), colour(c))
            for c, ms in sorted(found.items())]


def colour(cluster: int) -> str:
    """The cluster's colour (the palette repeats after twelve clusters)."""
    return PALETTE[cluster % len(PALETTE)]


def map_svg(marks: Sequence[Mark], clusters: Sequence[MapCluster], *, label: str) -> str:
    """The map as SVG, written by hand: a circle per mark with a tooltip (and a link), numbers at the centres.

    Every mark carries a ``<title>`` (title and cluster); the figure is labelled for screen readers with
    `label`. Cluster numbers are drawn last with a light halo so that marks never hide them.
    """
    parts = [f'<svg xmlns="http://www.w3.org/2000/svg" class="docmap" width="{WIDTH}" height="{HEIGHT}" '
             f'viewBox="0 0 {WIDTH} {HEIGHT}" role="img" aria-label="{_escape(label)}">',
             f"<title>{_escape(label)}</title>",
             f'<rect class="docmap-ground" width="{WIDTH}" height="{HEIGHT}" fill="#ffffff"/>']
    for mark in marks:
        circle = (f'<circle cx="{mark.x:.1f}" cy="{mark.y:.1f}" r="3" fill="{colour(mark.cluster)}">'
                  f"<title>{_escape(mark.title or '(untitled)')} (cluster {mark.cluster})</title></circle>")
        parts.append(f'<a href="{_escape(mark.href)}">{circle}</a>' if mark.href else circle)
    text = 'font-family="DejaVu Sans, sans-serif" font-size="13" font-weight="700" text-anchor="middle"'
    for c in clusters:
        parts.append(f'<text class="docmap-label" x="{c.x:.1f}" y="{c.y + 4:.1f}" {text} fill="#1d2327" '
                     f'stroke="#ffffff" stroke-width="3" paint-order="stroke">{c.cluster}</text>')
    parts.append("</svg>")
    return "".join(parts)


def _escape(text: str) -> str:
    return text.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;").replace('"', "&quot;")
