"""Plate drawings to scale, as small self-contained SVG strings.

The look is our own: the plate is drawn as squared paper (a 10 mm grid, darker
every 50 mm) with a scale bar under it; the margin is a sand-coloured band
along the edge, keep-out zones are cross-hatched in rust with their name, and
every copy carries a short tag keyed to the plate's copy table.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from html import escape
from typing import Sequence

from shapely.geometry import MultiPolygon, Polygon

__all__ = ["PALETTE", "colour_of", "Drawn", "plate_svg", "svg_path"]

# our own palette: muted workshop colours, readable on white and in grey print
PALETTE = ("#3b6e8f", "#c2703d", "#5c8a4a", "#8a5a9e", "#b8495b", "#4f8f8a",
           "#a08a3c", "#6a6f7c", "#d08c9a", "#7fa7c9", "#8c6d4f", "#9bb55d")

_PAPER, _GRID, _GRID50 = "#fbfaf6", "#e6e2d6", "#c8c1ad"
_MARGIN, _RUST, _INK = "#ecd9b8", "#a24a2a", "#2b2b2b"


def colour_of(key: str, keys: Sequence[str]) -> str:
    """The palette colour of ``key`` by its position in ``keys`` (grey-blue when absent)."""
    return PALETTE[list(keys).index(key) % len(PALETTE)] if key in keys else PALETTE[-1]


@dataclass(frozen=True)
class Drawn:
    """One copy in a drawing: its outline (mm, drawing frame), fill, tag and hover title."""

    shape: Polygon
    fill: str
    tag: str
    title: str


def _ring(coords, flip) -> str:
    pts = [f"{x:.2f},{flip - y:.2f}" for x, y in coords]
    return ("M" + " L".join(pts) + "Z") if pts else ""


def svg_path(geom, flip: float) -> str:
    """SVG path data of a polygon or multipolygon, y flipped about ``flip / 2``."""
    polys = geom.geoms if isinstance(geom, MultiPolygon) else [geom]
    parts = []
    for p in polys:
        if p.is_empty:
            continue
        parts.append(_ring(p.exterior.coords, flip))
        parts.extend(_ring(h.coords, flip) for h in p.interiors)
    return " ".join(parts)


def _grid(x0, y0, x1, y1, flip, stroke) -> list[str]:
    out = []
    for step, colour, width in ((10.0, _GRID, stroke), (50.0, _GRID50, stroke * 1.6)):
        xs = [k * step for k in range(math.ceil(x0 / step), math.floor(x1 / step) + 1)]
        ys = [k * step for k in range(math.ceil(y0 / step), math.floor(y1 / step) + 1)]
        d = " ".join(f"M{x:.2f},{flip - y0:.2f} V{flip - y1:.2f}" for x in xs)
        d += " " + " ".join(f"M{x0:.2f},{flip - y:.2f} H{x1:.2f}" for y in ys)
        out.append(f'<path d="{d}" stroke="{colour}" stroke-width="{width:.3f}" fill="none"/>')
    return out


def _scale_bar(x0, y, extent, stroke, font) -> list[str]:
    """A bar of 5 alternating segments under the drawing, 50 or 100 mm long."""
    length = 100.0 if extent >= 300 else (50.0 if extent >= 120 else 20.0)
    seg, h = length / 5, font * 0.6
    out = []
    for k in range(5):
        out.append(f'<rect x="{x0 + k * seg:.2f}" y="{y:.2f}" width="{seg:.2f}" height="{h:.2f}" '
                   f'fill="{_INK if k % 2 == 0 else "#fff"}" stroke="{_INK}" stroke-width="{stroke:.3f}"/>')
    out.append(f'<text x="{x0 + length + font * 0.5:.2f}" y="{y + h:.2f}" font-size="{font:.2f}" '
               f'fill="{_INK}">{length:g} mm (grid 10 mm)</text>')
    return out


def _tags(copies: Sequence[Drawn], extent: float, flip: float, *, crowded: bool, least: float) -> list[str]:
    """Tag texts; when ``crowded`` (projections that overlap), a tag that would cover another is left out."""
    out, taken = [], []
    for d in copies:
        pt = d.shape.representative_point()
        size = max(min(math.sqrt(max(d.shape.area, 1e-9)) * 0.42, 0.05 * extent), least)
        half = 0.3 * size * len(d.tag) + 0.1 * size
        box_ = (pt.x - half, pt.y - 0.5 * size, pt.x + half, pt.y + 0.5 * size)
        if crowded and any(box_[0] < b[2] and b[0] < box_[2] and box_[1] < b[3] and b[1] < box_[3] for b in taken):
            continue
        taken.append(box_)
        out.append(f'<text x="{pt.x:.2f}" y="{flip - pt.y + size * 0.35:.2f}" font-size="{size:.2f}" '
                   f'text-anchor="middle" font-weight="700" fill="#fff" stroke="{_INK}" '
                   f'stroke-width="{size * 0.16:.2f}" paint-order="stroke">{escape(d.tag)}</text>')
    return out


def plate_svg(outline: Polygon, inner: Polygon | None, zones: Sequence[Polygon],
              copies: Sequence[Drawn], *, uid: str, width_px: int = 560,
              axes: tuple[str, str] = ("x", "y"), margin_mm: float = 0.0, crowded: bool = False) -> str:
    """A plate (or one view of a powder volume) drawn to scale.

    Parameters
    ----------
    outline
        Plate or volume outline in mm, drawing frame (x right, second axis up).
    inner
        The area inside the margin, or None; the band between is the margin.
    zones
        Keep-out zones (mm), cross-hatched.
    copies
        The copies, drawn in order (later ones on top).
    uid
        Unique id prefix of this drawing (several drawings share one HTML page).
    width_px
        Width on screen; the height follows the aspect ratio.
    axes
        Names of the two drawing axes.
    margin_mm
        The margin width, for its label.
    crowded
        Copies may overlap (side views of a volume): tags that would cover
        one another are left out; every copy keeps its tag in the top view.
    """
    x0, y0, x1, y1 = outline.bounds
    w, h = x1 - x0, y1 - y0
    extent = max(w, h)
    pad = 0.03 * extent
    vw = w + 2 * pad
    px = width_px / vw                      # screen pixels per mm
    font = 11.0 / px                        # text about 11 px high on screen
    stroke = extent / 500.0
    foot = 2.4 * font                       # room for the scale bar and axis names
    flip = y1 + y0
    vh = h + 2 * pad + foot
    height_px = int(round(width_px * vh / vw))
    hatch, clip = f"{uid}-hatch", f"{uid}-clip"
    out = [f'<svg xmlns="http://www.w3.org/2000/svg" class="plate-drawing" viewBox="{x0 - pad:.2f} '
           f'{y0 - pad:.2f} {vw:.2f} {vh:.2f}" width="{width_px}" height="{height_px}" '
           f'font-family="sans-serif" role="img" aria-label="plate drawing, {axes[0]}-{axes[1]}">',
           f'<defs><pattern id="{hatch}" width="{font:.2f}" height="{font:.2f}" patternUnits="userSpaceOnUse" '
           f'patternTransform="rotate(45)"><rect width="{font:.2f}" height="{font:.2f}" fill="#f6e3da"/>'
           f'<path d="M0,0 V{font:.2f} M0,0 H{font:.2f}" stroke="{_RUST}" stroke-width="{stroke * 1.5:.3f}"/>'
           f'</pattern><clipPath id="{clip}"><path d="{svg_path(outline, flip)}"/></clipPath></defs>',
           f'<path d="{svg_path(outline, flip)}" fill="{_PAPER}"/>']
    if inner is not None and not inner.is_empty and margin_mm > 0:
        band = outline.difference(inner)
        out.append(f'<path d="{svg_path(band, flip)}" fill="{_MARGIN}" fill-rule="evenodd">'
                   f'<title>margin {margin_mm:g} mm</title></path>')
    out.append(f'<g clip-path="url(#{clip})">' + "".join(_grid(x0, y0, x1, y1, flip, stroke)) + "</g>")
    out.append(f'<path d="{svg_path(outline, flip)}" fill="none" stroke="{_INK}" stroke-width="{stroke * 2.5:.3f}"/>')
    for z in zones:
        out.append(f'<path d="{svg_path(z, flip)}" fill="url(#{hatch})" stroke="{_RUST}" '
                   f'stroke-width="{stroke * 2:.3f}"><title>keep-out zone</title></path>')
        c = z.representative_point()
        out.append(f'<text x="{c.x:.2f}" y="{flip - c.y + font * 0.3:.2f}" font-size="{font * 0.8:.2f}" '
                   f'text-anchor="middle" fill="{_RUST}" font-weight="700">keep out</text>')
    for d in copies:
        out.append(f'<path d="{svg_path(d.shape, flip)}" fill="{d.fill}" fill-opacity="0.85" fill-rule="evenodd" '
                   f'stroke="{_INK}" stroke-width="{stroke:.3f}"><title>{escape(d.title)}</title></path>')
    out += _tags(copies, extent, flip, crowded=crowded, least=8.0 / px)
    base = y1 + pad + 0.5 * font
    out += _scale_bar(x0, base, extent, stroke, font)
    note = f"{axes[0]} to the right, {axes[1]} up, origin lower left"
    if margin_mm > 0:
        note += f"; sand band: margin {margin_mm:g} mm"
    out.append(f'<text x="{x0:.2f}" y="{base + 1.75 * font:.2f}" font-size="{font * 0.85:.2f}" '
               f'fill="#555">{escape(note)}</text>')
    out.append("</svg>")
    return "\n".join(out)
