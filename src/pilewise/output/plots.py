"""Figures as deterministic SVG (matplotlib, Agg): the same figures give byte-identical files."""

from __future__ import annotations

import io
from collections.abc import Sequence
from typing import Any

from pilewise.describe.snippets import clip_text

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


def trend_bars_svg(
    starts: Sequence[str], counts: Sequence[int], shares: Sequence[float], *, width: int, height: int,
    label: str, axis: bool = False,
) -> str:
    """A cluster's documents per period as a row of bars, written by hand (fast, byte-stable, no fonts needed).

    Each bar carries a tooltip (``<title>``: period start, count, share of the period's dated documents);
    the figure is labelled for screen readers with `label`. ``axis`` adds the first and last period and the
    highest count as text, for the larger chart of a cluster's page.
    """
    top = max(max(counts, default=0), 1)
    pad_top, pad_bottom, pad_left = (14, 16, 30) if axis else (1, 1, 0)
    plot_w, plot_h = width - pad_left, height - pad_top - pad_bottom
    step = plot_w / max(len(counts), 1)
    bar = max(step - (1.0 if step > 3 else 0.0), 0.6)
    parts = [f'<svg xmlns="http://www.w3.org/2000/svg" class="trend" width="{width}" height="{height}" '
             f'viewBox="0 0 {width} {height}" role="img" aria-label="{_escape(label)}">',
             f"<title>{_escape(label)}</title>",
             f'<line x1="{pad_left}" y1="{pad_top + plot_h:.1f}" x2="{width}" y2="{pad_top + plot_h:.1f}" '
             f'stroke="{GRID}" stroke-width="1"/>']
    for i, (start, count, share) in enumerate(zip(starts, counts, shares, strict=True)):
        h = plot_h * count / top
        x = pad_left + i * step
        parts.append(f'<rect x="{x:.1f}" y="{pad_top + plot_h - h:.1f}" width="{bar:.1f}" height="{h:.1f}" '
                     f'fill="{ACCENT}"><title>{_escape(start)}: {count:,} ({share:.0%} of the period)</title></rect>')
    if axis and starts:
        text = f'font-family="DejaVu Sans, sans-serif" font-size="10" fill="{INK}"'
        parts.append(f'<text x="{pad_left}" y="{height - 3}" {text}>{_escape(starts[0])}</text>')
        parts.append(f'<text x="{width}" y="{height - 3}" text-anchor="end" {text}>{_escape(starts[-1])}</text>')
        parts.append(f'<text x="{pad_left - 4}" y="{pad_top + 4}" text-anchor="end" {text}>{top:,}</text>')
        parts.append(f'<text x="{pad_left - 4}" y="{pad_top + plot_h}" text-anchor="end" {text}>0</text>')
    parts.append("</svg>")
    return "".join(parts)


def _escape(text: str) -> str:
    return text.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;").replace('"', "&quot;")


def trend_rows_svg(
    starts: Sequence[str], rows: Sequence[tuple[str, Sequence[int], Sequence[float], str]], *, label: str,
    width: int = 760, row_height: int = 26,
) -> str:
    """Small multiples: one row of bars per cluster (its share of each period's dated documents), one figure.

    `rows` holds (name, counts, shares, reading) per cluster. Each row is scaled to its own highest share,
    so that its shape reads (the tooltips give the numbers). Written by hand like `trend_bars_svg`: the same
    rows give the same bytes.
    """
    name_w, reading_w, pad = 230, 70, 4
    plot_w = width - name_w - reading_w
    height = row_height * len(rows) + 18
    step = plot_w / max(len(starts), 1)
    bar = max(step - (1.0 if step > 3 else 0.0), 0.6)
    text = f'font-family="DejaVu Sans, sans-serif" font-size="11" fill="{INK}"'
    parts = [f'<svg xmlns="http://www.w3.org/2000/svg" class="trend-rows" width="{width}" height="{height}" '
             f'viewBox="0 0 {width} {height}" role="img" aria-label="{_escape(label)}">',
             f"<title>{_escape(label)}</title>"]
    for r, (name, counts, shares, reading) in enumerate(rows):
        top_y = r * row_height
        base_y = top_y + row_height - pad
        peak = max(max(shares, default=0.0), 1e-12)
        parts.append(f'<text x="0" y="{base_y - 3}" {text}>{_escape(clip_text(name, 34))}</text>')
        parts.append(f'<line x1="{name_w}" y1="{base_y}" x2="{name_w + plot_w:.1f}" y2="{base_y}" stroke="{GRID}" '
                     'stroke-width="1"/>')
        for i, (start, count, share) in enumerate(zip(starts, counts, shares, strict=True)):
            h = (row_height - 2 * pad) * share / peak
            parts.append(f'<rect x="{name_w + i * step:.1f}" y="{base_y - h:.1f}" width="{bar:.1f}" height="{h:.1f}" '
                         f'fill="{ACCENT}"><title>{_escape(name)}, {_escape(start)}: {count:,} '
                         f"({share:.0%} of the period)</title></rect>")
        parts.append(f'<text x="{width}" y="{base_y - 3}" text-anchor="end" {text}>{_escape(reading)}</text>')
    if starts:
        axis_y = height - 4
        parts.append(f'<text x="{name_w}" y="{axis_y}" {text}>{_escape(starts[0])}</text>')
        parts.append(f'<text x="{name_w + plot_w:.1f}" y="{axis_y}" text-anchor="end" {text}>'
                     f"{_escape(starts[-1])}</text>")
    parts.append("</svg>")
    return "".join(parts)


