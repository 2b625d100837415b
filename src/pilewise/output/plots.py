"""Figures as deterministic SVG (matplotlib, Agg): the same figures give byte-identical files."""

from __future__ import annotations

import io
from collections.abc import Sequence
from typing import Any

INK = "#1d2327"
ACCENT = "#2f5d62"
WARM = "#b5651d"
GRID = "#dcd6cb"


def _pyplot() -> Any:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    return plt


def svg_of(figure: Any) -> str:
    """Serialize a matplotlib figure as SVG with fixed ids and no date, then close it."""
    plt = _pyplot()
    buffer = io.StringIO()
    with plt.rc_context({"svg.hashsalt": "pilewise", "svg.fonttype": "none"}):
        figure.savefig(buffer, format="svg", metadata={"Date": None, "Creator": None})
    plt.close(figure)
    return buffer.getvalue()


def sweep_curves_svg(
    ks: Sequence[int], series: Sequence[tuple[str, Sequence[float | None], str]], recommended: int
) -> str:
    """Small multiples: one panel per figure (title, values per k, reading hint), the recommended k marked."""
    plt = _pyplot()
    with plt.rc_context({"font.size": 9, "axes.edgecolor": GRID, "axes.labelcolor": INK,
                         "xtick.color": INK, "ytick.color": INK, "font.family": "DejaVu Sans"}):
        figure, axes = plt.subplots(1, len(series), figsize=(3.0 * len(series), 2.6))
        for ax, (title, values, hint) in zip(list(axes), series, strict=True):
            xs = [k for k, v in zip(ks, values, strict=True) if v is not None]
            ys = [v for v in values if v is not None]
            ax.plot(xs, ys, color=ACCENT, marker="o", markersize=3, linewidth=1.4)
            ax.axvline(recommended, color=WARM, linestyle="--", linewidth=1)
            ax.set_title(title, fontsize=9, color=INK)
            ax.set_xlabel(f"k ({hint})", fontsize=8)
            ax.grid(True, color=GRID, linewidth=0.5)
            ax.set_xticks(list(ks)[:: max(1, -(-len(ks) // 7))])
        figure.tight_layout()
    return svg_of(figure)
