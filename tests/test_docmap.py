"""The map of the documents (output.docmap) and the chart of all clusters over time (output.plots)."""

from __future__ import annotations

import re
import xml.etree.ElementTree as ET

import numpy as np
from sklearn.manifold import trustworthiness

from pilewise.output import docmap
from pilewise.output.plots import trend_rows_svg

SVG = "{http://www.w3.org/2000/svg}"


def _planted(groups: int = 3, per_group: int = 40, dims: int = 20, seed: int = 1) -> tuple[np.ndarray, np.ndarray]:
    """Unit vectors around `groups` orthogonal directions, as LSA rows of well-separated topics are."""
    rng = np.random.default_rng(seed)
    labels = np.repeat(np.arange(groups), per_group)
    rows = np.eye(dims)[labels] + 0.15 * rng.standard_normal((labels.size, dims))
    return rows / np.linalg.norm(rows, axis=1, keepdims=True), labels


def test_sample_is_everything_up_to_the_cap_then_seeded() -> None:
    assert np.array_equal(docmap.sample_rows(50, 50, seed=3), np.arange(50))
    sample = docmap.sample_rows(1_000, 100, seed=3)
    assert sample.size == 100 and np.unique(sample).size == 100 and np.all(np.diff(sample) > 0)
    assert np.array_equal(sample, docmap.sample_rows(1_000, 100, seed=3))  # same seed, same marks
    assert not np.array_equal(sample, docmap.sample_rows(1_000, 100, seed=4))


def test_layout_keeps_neighbourhoods_is_seeded_and_fits_the_box() -> None:
    rows, _ = _planted()
    first = docmap.layout(rows, seed=0)
    assert np.array_equal(first, docmap.layout(rows, seed=0))  # deterministic for a seed
    assert first.shape == (rows.shape[0], 2)
    assert first[:, 0].min() >= 0 and first[:, 0].max() <= docmap.WIDTH
    assert first[:, 1].min() >= 0 and first[:, 1].max() <= docmap.HEIGHT
    # trustworthiness (Venna and Kaski 2001; scikit-learn's implementation): 1 when every 2-D neighbour
    # is a neighbour in the space; planted well-separated groups must keep their neighbourhoods
    assert trustworthiness(rows, first, n_neighbors=5) > 0.9


def test_layout_of_a_handful_of_rows_and_of_empty_texts() -> None:
    for n in (1, 2, 3):
        points = docmap.layout(np.eye(4)[:n], seed=0)
        assert points.shape == (n, 2) and np.isfinite(points).all()
    rows, _ = _planted(per_group=10)
    rows[0] = 0.0  # a text with no kept term is a zero row of the space
    assert np.isfinite(docmap.layout(rows, seed=0)).all()


def test_svg_has_one_titled_mark_per_row_links_and_numbers_at_the_centres() -> None:
    marks = [docmap.Mark(10.0, 20.0, 0, 'soil <b>"mix"</b> & more', "docs/d0000000.html"),
             docmap.Mark(30.0, 40.0, 0, "", "docs/d0000001.html"),
             docmap.Mark(100.0, 100.0, 13, "pedal", None)]
    clusters = docmap.cluster_labels(marks, {0: "soil", 13: "bikes"}, {0: 2, 13: 1})
    assert [(c.cluster, c.x, c.y) for c in clusters] == [(0, 20.0, 30.0), (13, 100.0, 100.0)]  # means of marks
    assert clusters[1].colour == docmap.PALETTE[13 % len(docmap.PALETTE)]
    svg = docmap.map_svg(marks, clusters, label="Map of 3 texts")
    root = ET.fromstring(svg)  # well-formed XML: the hostile title is escaped
    assert root.get("role") == "img" and root.get("aria-label") == "Map of 3 texts"
    circles = root.findall(f".//{SVG}circle")
    assert len(circles) == 3
    assert [c.find(f"{SVG}title").text for c in circles] == [  # type: ignore[union-attr]
        'soil <b>"mix"</b> & more (cluster 0)', "(untitled) (cluster 0)", "pedal (cluster 13)"]
    assert [a.get("href") for a in root.findall(f"{SVG}a")] == ["docs/d0000000.html", "docs/d0000001.html"]
    assert [t.text for t in root.findall(f"{SVG}text")] == ["0", "13"]


def _relative_luminance(colour: str) -> float:
    """WCAG 2.1, definition of relative luminance (sRGB; 0.03928 threshold as the definition states)."""
    channels = [int(colour[i:i + 2], 16) / 255 for i in (1, 3, 5)]
    r, g, b = (c / 12.92 if c <= 0.03928 else ((c + 0.055) / 1.055) ** 2.4 for c in channels)
    return 0.2126 * r + 0.7152 * g + 0.0722 * b


def test_map_colours_stand_out_from_the_white_ground() -> None:
    # WCAG 2.1 §1.4.11 (non-text contrast): graphical objects need 3:1 against adjacent colours
    white = _relative_luminance("#ffffff")
    for colour in docmap.PALETTE:
        assert (white + 0.05) / (_relative_luminance(colour) + 0.05) >= 3.0, colour
    assert len(set(docmap.PALETTE)) == len(docmap.PALETTE)


def test_chart_of_all_clusters_over_time() -> None:
    starts = ["2024-01-01", "2024-02-01", "2024-03-01"]
    rows = [("0 soil & <compost>", [1, 2, 3], [0.1, 0.2, 0.3], "rising"),
            ("1 pedals", [5, 5, 0], [0.5, 0.5, 0.0], "steady")]
    svg = trend_rows_svg(starts, rows, label="Share per month")
    assert svg == trend_rows_svg(starts, rows, label="Share per month")  # byte-stable
    root = ET.fromstring(svg)
    assert root.get("role") == "img" and root.find(f"{SVG}title").text == "Share per month"  # type: ignore[union-attr]
    bars = root.findall(f"{SVG}rect")
    assert len(bars) == 6  # one bar per cluster and period
    tips = [b.find(f"{SVG}title").text for b in bars]  # type: ignore[union-attr]
    assert tips[2] == "0 soil & <compost>, 2024-03-01: 3 (30% of the period)"
    # each row is scaled to its own peak: the highest bar of every row has the same height
    heights = [float(b.get("height", "0")) for b in bars]
    assert heights[2] == heights[0 + 3] == max(heights) and heights[5] == 0.0
    texts = [t.text for t in root.findall(f"{SVG}text")]
    assert "rising" in texts and "steady" in texts and starts[0] in texts and starts[-1] in texts
    assert not re.search(r"(href|src)=", svg)


def test_row_label_keeps_the_start_of_a_long_first_word() -> None:
    # seen on a mail folder of package change logs: a headline starting with a long file path read "11…"
    name = "11 debian/patches/hurd-i386/local-mach_print.diff: Keep mach_print@GLIBC_2.21 for now"
    svg = trend_rows_svg(["2024-01-01"], [(name, [1], [1.0], "steady")], label="Share per year")
    labels = [t.text for t in ET.fromstring(svg).findall(f"{SVG}text")]
    assert labels[0] == "11 debian/patches/hurd-i386/local…"  # the same cut as every clipped title (clip_text)
    assert len(labels[0]) <= 34
