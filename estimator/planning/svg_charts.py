"""Charts of the printable reports as inline SVG text: bars and time courses, no library, no script.

The reports (audit, case plan) are single HTML files that load nothing; their charts are drawn here as
SVG markup with every label escaped. Numbers on the charts follow :mod:`estimator.display`.

Examples
--------
>>> svg = svg_bars(["a<b"], [1.0], "mL", "t")
>>> svg.startswith("<svg") and "a&lt;b" in svg
True
"""

from __future__ import annotations

import html
import math
from collections.abc import Sequence

from ..display import text

#: Series colours of the report charts (the app's palette, estimator_app.charts.PALETTE).
SERIES = ("#0f6e6e", "#d08c1b", "#51607a", "#c8553d", "#6a994e")


def luminance(colour: str) -> float:
    """Relative luminance (0 black - 1 white) of a ``#rrggbb`` colour (WCAG 2.1 definition).

    >>> round(luminance("#ffffff"), 3), round(luminance("#000000"), 3)
    (1.0, 0.0)
    """
    channels = [int(colour[i : i + 2], 16) / 255 for i in (1, 3, 5)]
    lin = [c / 12.92 if c <= 0.04045 else ((c + 0.055) / 1.055) ** 2.4 for c in channels]
    return 0.2126 * lin[0] + 0.7152 * lin[1] + 0.0722 * lin[2]


def ink(fill: str) -> str:
    """Text colour readable on ``fill``: near-black on light fills, white on dark ones."""
    return "#1d2a33" if luminance(fill) > 0.3 else "#ffffff"


def svg_bars(
    labels: Sequence[str],
    values: Sequence[float | None],
    unit: str,
    title: str,
    *,
    width: int = 640,
    colours: Sequence[str] = ("#3b6e8f",),
    on_bar: Sequence[str] | None = None,
) -> str:
    """A horizontal bar chart as an inline SVG string (labels escaped).

    ``on_bar`` writes a text on each bar (a class name, say), in a colour readable on its fill;
    negative values draw to the left of a zero line.
    """
    vals = [0.0 if v is None or not math.isfinite(v) else float(v) for v in values]
    top = max([abs(v) for v in vals] + [1e-12])
    neg = any(v < 0 for v in vals)
    bar_h, gap, left, right = 18, 6, 170, 110
    height = 28 + len(vals) * (bar_h + gap)
    span = width - left - right
    zero = left + (span / 2 if neg else 0)
    scale = (span / 2 if neg else span) / top
    parts = [
        f'<svg xmlns="http://www.w3.org/2000/svg" width="{width}" height="{height}" role="img" '
        f'aria-label="{html.escape(title)}">',
        f'<text x="0" y="16" class="t">{html.escape(title)}</text>',
    ]
    for i, (lab, v) in enumerate(zip(labels, vals, strict=True)):
        y = 28 + i * (bar_h + gap)
        w = scale * abs(v)
        x = zero - w if v < 0 else zero
        fill = colours[i % len(colours)]
        parts.append(f'<text x="{left - 6}" y="{y + 13}" text-anchor="end">{html.escape(str(lab)[:28])}</text>')
        parts.append(f'<rect x="{x:.1f}" y="{y}" width="{w:.1f}" height="{bar_h}" fill="{fill}"/>')
        label = text(v, unit)
        if on_bar is not None and w > 7 * len(str(on_bar[i])) + 8:  # the name fits on the bar
            parts.append(f'<text x="{x + 4:.1f}" y="{y + 13}" fill="{ink(fill)}">{html.escape(str(on_bar[i]))}</text>')
        elif on_bar is not None:  # a short bar: the name follows its value
            label = f"{label}  {on_bar[i]}"
        end = max(zero + (scale * v if v > 0 else 0), zero)
        parts.append(f'<text x="{end + 4:.1f}" y="{y + 13}">{html.escape(label)}</text>')
    if neg:
        parts.append(f'<line x1="{zero:.1f}" x2="{zero:.1f}" y1="24" y2="{height}" stroke="#8a8f98"/>')
    parts.append("</svg>")
    return "".join(parts)


def svg_lines(
    x: Sequence[float],
    series: dict[str, Sequence[float]],
    x_title: str,
    y_title: str,
    title: str,
    *,
    width: int = 640,
    height: int = 220,
) -> str:
    """A time-course line chart (one polyline a series, a legend, axes with end values) as SVG text.

    >>> svg = svg_lines([0, 10, 20], {"dial [%]": [3.0, 2.0, 1.5]}, "time [min]", "%", "Dial")
    >>> svg.count("<polyline"), "time [min]" in svg
    (1, True)
    """
    left, right, top, bottom = 52, 12, 48, 34
    xs = [float(v) for v in x]
    ys_all = [float(v) for vals in series.values() for v in vals if v is not None and math.isfinite(float(v))]
    x0, x1 = (min(xs), max(xs)) if xs else (0.0, 1.0)
    y1 = max(ys_all + [1e-12])
    y0 = min(ys_all + [0.0])
    x1 = x1 if x1 > x0 else x0 + 1.0
    y1 = y1 if y1 > y0 else y0 + 1.0
    pw, ph = width - left - right, height - top - bottom

    def px(v: float) -> float:
        return left + pw * (v - x0) / (x1 - x0)

    def py(v: float) -> float:
        return top + ph * (1 - (v - y0) / (y1 - y0))

    esc = html.escape
    parts = [
        f'<svg xmlns="http://www.w3.org/2000/svg" width="{width}" height="{height}" role="img" '
        f'aria-label="{esc(title)}">',
        f'<text x="0" y="14" class="t">{esc(title)}</text>',
        f'<line x1="{left}" x2="{left}" y1="{top}" y2="{top + ph}" stroke="#8a8f98"/>',
        f'<line x1="{left}" x2="{left + pw}" y1="{top + ph}" y2="{top + ph}" stroke="#8a8f98"/>',
        f'<text x="{left - 4}" y="{top + 4}" text-anchor="end">{esc(text(y1))}</text>',
        f'<text x="{left - 4}" y="{top + ph}" text-anchor="end">{esc(text(y0))}</text>',
        f'<text x="{left}" y="{top + ph + 14}">{esc(text(x0))}</text>',
        f'<text x="{left + pw}" y="{top + ph + 14}" text-anchor="end">{esc(text(x1))}</text>',
        f'<text x="{left + pw / 2:.0f}" y="{height - 4}" text-anchor="middle">{esc(x_title)}</text>',
        f'<text x="4" y="{top - 10}">{esc(y_title)}</text>',
    ]
    for i, (name, vals) in enumerate(series.items()):
        colour = SERIES[i % len(SERIES)]
        points = " ".join(
            f"{px(a):.1f},{py(float(b)):.1f}"
            for a, b in zip(xs, vals, strict=True)
            if b is not None and math.isfinite(float(b))
        )
        parts.append(f'<polyline fill="none" stroke="{colour}" stroke-width="2" points="{points}"/>')
        lx = left + 110 + 130 * i
        parts.append(f'<rect x="{lx}" y="{top - 15}" width="12" height="3" fill="{colour}"/>')
        parts.append(f'<text x="{lx + 16}" y="{top - 10}">{esc(name)}</text>')
    parts.append("</svg>")
    return "".join(parts)


__all__ = ["SERIES", "ink", "luminance", "svg_bars", "svg_lines"]
