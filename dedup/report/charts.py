"""Charts for the report, drawn as inline SVG by our own code (no library, works offline).

Every chart has axis labels, a title and a one-line reading aid. Only numbers and our own
fixed words go into the SVG, and all text is XML-escaped anyway.
"""

from __future__ import annotations

from collections import Counter
from collections.abc import Sequence
from html import escape

from ..candidates.banding import catch_probability

__all__ = ["similarity_histogram", "s_curve", "cluster_sizes"]

WIDTH, HEIGHT = 340, 220
LEFT, RIGHT, TOP, BOTTOM = 48, 12, 28, 44
INK, MUTED, BAR, LINE, ACCENT = "#1f2a33", "#6b7780", "#7fa3b8", "#b4541e", "#2f5d7c"


def _frame(title: str, x_label: str, y_label: str, body: list[str], aid: str) -> str:
    plot_w, plot_h = WIDTH - LEFT - RIGHT, HEIGHT - TOP - BOTTOM
    parts = [
        f'<svg class="chart" viewBox="0 0 {WIDTH} {HEIGHT}" width="{WIDTH}" height="{HEIGHT}" role="img" '
        f'aria-label="{escape(title)}" xmlns="http://www.w3.org/2000/svg">',
        f"<title>{escape(title)}</title>",
        f'<text x="{LEFT}" y="16" font-size="13" font-weight="600" fill="{INK}">{escape(title)}</text>',
        f'<line x1="{LEFT}" y1="{TOP + plot_h}" x2="{LEFT + plot_w}" y2="{TOP + plot_h}" stroke="{MUTED}"/>',
        f'<line x1="{LEFT}" y1="{TOP}" x2="{LEFT}" y2="{TOP + plot_h}" stroke="{MUTED}"/>',
        f'<text x="{LEFT + plot_w / 2}" y="{HEIGHT - 8}" font-size="11" text-anchor="middle" fill="{INK}">{escape(x_label)}</text>',
        f'<text transform="translate(12 {TOP + plot_h / 2}) rotate(-90)" font-size="11" text-anchor="middle" fill="{INK}">{escape(y_label)}</text>',
        *body,
        "</svg>",
    ]
    return f'<figure class="chart-box">{"".join(parts)}<figcaption>{escape(aid)}</figcaption></figure>'


def _x(value: float, low: float, high: float) -> float:
    span = high - low or 1.0
    return LEFT + (value - low) / span * (WIDTH - LEFT - RIGHT)


def _y(value: float, top_value: float) -> float:
    plot_h = HEIGHT - TOP - BOTTOM
    return TOP + plot_h - (value / (top_value or 1.0)) * plot_h


def _x_ticks(low: float, high: float, ticks: Sequence[float], fmt: str = "{:.1f}") -> list[str]:
    base = HEIGHT - BOTTOM
    return [
        f'<line x1="{_x(t, low, high):.1f}" y1="{base}" x2="{_x(t, low, high):.1f}" y2="{base + 4}" stroke="{MUTED}"/>'
        f'<text x="{_x(t, low, high):.1f}" y="{base + 15}" font-size="10" text-anchor="middle" fill="{MUTED}">{fmt.format(t)}</text>'
        for t in ticks
    ]


def _y_ticks(top_value: float, fmt: str = "{:g}") -> list[str]:
    out = []
    for frac in (0.0, 0.5, 1.0):
        v = top_value * frac
        y = _y(v, top_value)
        out.append(
            f'<text x="{LEFT - 6}" y="{y + 3:.1f}" font-size="10" text-anchor="end" fill="{MUTED}">{fmt.format(round(v, 2))}</text>'
        )
    return out


def similarity_histogram(values: Sequence[float], threshold: float, measure: str) -> str:
    """Histogram of the deciding score of confirmed near pairs, with the threshold line."""
    bins = 20
    low = max(0.0, min([threshold, *values]) - 0.05) if values else threshold - 0.05
    low = round(low * 20) / 20
    width = (1.0 - low) / bins
    counts = [0] * bins
    for v in values:
        counts[min(int((v - low) / width), bins - 1)] += 1
    top = max(counts) if values else 1
    body = _x_ticks(low, 1.0, [low + (1.0 - low) * i / 4 for i in range(5)], "{:.2f}") + _y_ticks(top)
    for i, c in enumerate(counts):
        if c:
            x0, x1 = _x(low + i * width, low, 1.0), _x(low + (i + 1) * width, low, 1.0)
            body.append(
                f'<rect x="{x0 + 0.5:.1f}" y="{_y(c, top):.1f}" width="{max(x1 - x0 - 1, 1):.1f}" '
                f'height="{_y(0, top) - _y(c, top):.1f}" fill="{BAR}"><title>{c} pairs</title></rect>'
            )
    tx = _x(threshold, low, 1.0)
    body.append(
        f'<line x1="{tx:.1f}" y1="{TOP}" x2="{tx:.1f}" y2="{HEIGHT - BOTTOM}" stroke="{LINE}" stroke-dasharray="4 3"/>'
    )
    body.append(
        f'<text x="{tx + 3:.1f}" y="{TOP + 10}" font-size="10" fill="{LINE}">threshold {threshold:g}</text>'
    )
    return _frame(
        "Similarity of confirmed pairs",
        f"{measure} score",
        "pairs",
        body,
        "Pairs far right of the dashed line are near-copies; pairs just right of it deserve the closest look.",
    )


def s_curve(bands: int, rows: int, threshold: float) -> str:
    """Probability that LSH makes a pair of Jaccard s a candidate, with the threshold line."""
    points = []
    for i in range(101):
        s = i / 100
        points.append(f"{_x(s, 0, 1):.1f},{_y(float(catch_probability(s, bands, rows)), 1.0):.1f}")
    body = _x_ticks(0, 1, [0, 0.2, 0.4, 0.6, 0.8, 1.0]) + _y_ticks(1.0)
    body.append(f'<polyline points="{" ".join(points)}" fill="none" stroke="{ACCENT}" stroke-width="2"/>')
    tx = _x(threshold, 0, 1)
    body.append(
        f'<line x1="{tx:.1f}" y1="{TOP}" x2="{tx:.1f}" y2="{HEIGHT - BOTTOM}" stroke="{LINE}" stroke-dasharray="4 3"/>'
    )
    p = float(catch_probability(threshold, bands, rows))
    body.append(
        f'<text x="{tx + 3:.1f}" y="{_y(p, 1.0) + 12:.1f}" font-size="10" fill="{LINE}">{p:.1%} at {threshold:g}</text>'
    )
    return _frame(
        "Chance a pair is compared",
        "Jaccard similarity of a pair",
        "probability",
        body,
        f"LSH with {bands} bands x {rows} rows. The curve should be near 1 at and right of the dashed line: "
        "pairs there are almost never missed.",
    )


def cluster_sizes(sizes: Sequence[int]) -> str:
    """How many clusters have 2, 3, … members."""
    counter = Counter(sizes)
    keys = sorted(counter) or [2]
    top = max(counter.values()) if counter else 1
    n = len(keys)
    plot_w = WIDTH - LEFT - RIGHT
    slot = plot_w / max(n, 1)
    body = _y_ticks(top)
    for i, k in enumerate(keys[:40]):
        c = counter.get(k, 0)
        x = LEFT + i * slot
        body.append(
            f'<rect x="{x + 1:.1f}" y="{_y(c, top):.1f}" width="{max(slot - 2, 1):.1f}" height="{_y(0, top) - _y(c, top):.1f}" '
            f'fill="{BAR}"><title>{c} clusters of {k}</title></rect>'
        )
        if n <= 12 or i % max(n // 8, 1) == 0:
            body.append(
                f'<text x="{x + slot / 2:.1f}" y="{HEIGHT - BOTTOM + 15}" font-size="10" text-anchor="middle" fill="{MUTED}">{k}</text>'
            )
    return _frame(
        "Cluster sizes",
        "documents in the cluster",
        "clusters",
        body,
        "Large clusters often come from shared templates: open them first and check the keeper.",
    )
