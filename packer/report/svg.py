"""Plate pictures and the timeline, as small self-contained SVG strings."""

from __future__ import annotations

from datetime import datetime, timedelta
from html import escape
from typing import Sequence

from shapely.geometry import MultiPolygon, Polygon

__all__ = ["PALETTE", "colour_of", "plate_svg", "timeline_svg"]

# our own palette: muted workshop colours, readable on white and in grey print
PALETTE = ("#3b6e8f", "#c2703d", "#5c8a4a", "#8a5a9e", "#b8495b", "#4f8f8a",
           "#a08a3c", "#6a6f7c", "#d08c9a", "#7fa7c9", "#8c6d4f", "#9bb55d")


def colour_of(key: str, keys: Sequence[str]) -> str:
    return PALETTE[list(keys).index(key) % len(PALETTE)] if key in keys else PALETTE[-1]


def _ring(coords, flip) -> str:
    pts = " ".join(f"{x:.2f},{flip - y:.2f}" for x, y in coords)
    return f"M{pts.replace(' ', ' L', )}Z" if pts else ""


def _path(geom, flip) -> str:
    polys = geom.geoms if isinstance(geom, MultiPolygon) else [geom]
    parts = []
    for p in polys:
        if p.is_empty:
            continue
        parts.append(_ring(p.exterior.coords, flip))
        parts.extend(_ring(h.coords, flip) for h in p.interiors)
    return " ".join(parts)


def plate_svg(outline: Polygon, inner: Polygon | None, zones: Sequence[Polygon],
              shapes: Sequence[tuple[Polygon, str, str]], *, width_px: int = 420,
              axes: tuple[str, str] = ("x", "y")) -> str:
    """Top (or side) view of a plate.

    Parameters
    ----------
    outline
        Plate or volume outline in mm (drawn in plate coordinates, y up).
    inner
        The area inside the margin (dashed), or None.
    zones
        Keep-out zones (hatched grey).
    shapes
        (polygon, fill colour, label) per copy.
    """
    x0, y0, x1, y1 = outline.bounds
    w, h = x1 - x0, y1 - y0
    pad = 0.02 * max(w, h)
    flip = y1 + y0
    view = f"{x0 - pad:.2f} {y0 - pad:.2f} {w + 2 * pad:.2f} {h + 2 * pad:.2f}"
    height_px = int(width_px * (h + 2 * pad) / (w + 2 * pad))
    stroke = max(w, h) / 400
    out = [f'<svg xmlns="http://www.w3.org/2000/svg" viewBox="{view}" width="{width_px}" height="{height_px}" '
           f'role="img" aria-label="plate view {axes[0]}-{axes[1]}">',
           f'<path d="{_path(outline, flip)}" fill="#f4f1ea" stroke="#444" stroke-width="{stroke * 2:.3f}"/>']
    if inner is not None and not inner.is_empty:
        out.append(f'<path d="{_path(inner, flip)}" fill="none" stroke="#999" stroke-width="{stroke:.3f}" '
                   f'stroke-dasharray="{stroke * 6:.2f},{stroke * 4:.2f}"/>')
    for z in zones:
        out.append(f'<path d="{_path(z, flip)}" fill="#bbb" fill-opacity="0.6" stroke="#777" '
                   f'stroke-width="{stroke:.3f}"><title>keep-out zone</title></path>')
    for poly, fill, label in shapes:
        out.append(f'<path d="{_path(poly, flip)}" fill="{fill}" fill-opacity="0.8" fill-rule="evenodd" '
                   f'stroke="#222" stroke-width="{stroke:.3f}"><title>{escape(label)}</title></path>')
    out.append("</svg>")
    return "\n".join(out)


def timeline_svg(rows: Sequence[str], bars: Sequence[tuple[str, datetime, datetime, str, str]],
                 shifts: Sequence[tuple[datetime, datetime]], *, start: datetime, end: datetime,
                 width_px: int = 900, now: datetime | None = None, legend: dict | None = None) -> str:
    """One row per printer, plates as bars, operator shifts shaded.

    bars: (row, start, end, colour, label). ``now``: a line at the moment of a replan;
    ``legend``: {name: colour} drawn under the rows.
    """
    label_w, row_h, top = 120, 26, 22
    span = max((end - start).total_seconds(), 1.0)
    scale = (width_px - label_w - 10) / span
    x_of = lambda t: label_w + (t - start).total_seconds() * scale  # noqa: E731
    height = top + row_h * len(rows) + 8 + (16 if legend else 0)
    out = [f'<svg xmlns="http://www.w3.org/2000/svg" width="{width_px}" height="{height}" '
           f'font-family="sans-serif" font-size="11" role="img" aria-label="timeline">']
    for a, b in shifts:
        a, b = max(a, start), min(b, end)
        if b > a:
            out.append(f'<rect x="{x_of(a):.1f}" y="{top}" width="{x_of(b) - x_of(a):.1f}" '
                       f'height="{row_h * len(rows)}" fill="#fdf3d0"><title>operators present</title></rect>')
    t = start.replace(minute=0, second=0, microsecond=0)
    step = timedelta(hours=6 if span > 2 * 86400 else 3)
    while t <= end:
        if t >= start:
            out.append(f'<line x1="{x_of(t):.1f}" y1="{top - 4}" x2="{x_of(t):.1f}" y2="{height - 8}" '
                       f'stroke="#ddd"/><text x="{x_of(t) + 2:.1f}" y="{top - 8}" fill="#555">'
                       f'{t:%a %H:%M}</text>')
        t += step
    for i, row in enumerate(rows):
        y = top + i * row_h
        out.append(f'<text x="4" y="{y + row_h / 2 + 4:.1f}">{escape(row)}</text>')
        out.append(f'<line x1="{label_w}" y1="{y + row_h}" x2="{width_px - 10}" y2="{y + row_h}" stroke="#eee"/>')
    for row, a, b, colour, label in bars:
        i = list(rows).index(row)
        y = top + i * row_h + 4
        w = max(x_of(b) - x_of(a), 1.5)
        out.append(f'<rect x="{x_of(a):.1f}" y="{y}" width="{w:.1f}" height="{row_h - 8}" rx="3" '
                   f'fill="{colour}" stroke="#222" stroke-width="0.5"><title>{escape(label)}</title></rect>')
        if w > 34:
            out.append(f'<text x="{x_of(a) + 3:.1f}" y="{y + row_h / 2 + 1:.1f}" fill="#fff">'
                       f'{escape(label.split(" ")[0])}</text>')
    if now is not None and start <= now <= end:
        x = x_of(now)
        out.append(f'<line x1="{x:.1f}" y1="{top - 4}" x2="{x:.1f}" y2="{top + row_h * len(rows)}" '
                   f'stroke="#d62828" stroke-width="2"><title>now: {now:%a %H:%M}</title></line>'
                   f'<text x="{x + 3:.1f}" y="{top + 10}" fill="#d62828" font-weight="bold">now</text>')
    if legend:
        y = top + row_h * len(rows) + 6
        for k, (name, colour) in enumerate(legend.items()):
            out.append(f'<rect x="{label_w + k * 110}" y="{y}" width="12" height="10" fill="{colour}"/>'
                       f'<text x="{label_w + k * 110 + 16}" y="{y + 9}">{escape(name)}</text>')
        out.append(f'<text x="{label_w + len(legend) * 110}" y="{y + 9}">planned: colour of its order</text>')
    out.append("</svg>")
    return "\n".join(out)
