"""The fleet timeline: one row per printer, a bar per plate, shifts, states and "now".

Bars are coloured by material (what the operator loads), a thin tail after a
bar is the clearing time, a diamond marks a material change on the printer,
and plates that carry a state (planned, printing, finished, failed) show it by
pattern. A bar too short for its label is listed under the chart instead.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import datetime, timedelta
from html import escape
from typing import Sequence

from packer.output.report.fmt import clock
from packer.output.report.svg import PALETTE

__all__ = ["Bar", "timeline_svg", "STATES"]

#: Plate states a plan may carry, and how the timeline draws them.
STATES = ("planned", "printing", "finished", "failed")

_LABEL_W, _ROW_H, _TOP, _RIGHT = 118, 28, 30, 46


@dataclass(frozen=True)
class Bar:
    """One plate on the timeline."""

    row: str              # printer
    start: datetime
    end: datetime         # print done
    free: datetime        # cleared
    label: str            # plate id
    material: str
    title: str            # hover text
    state: str | None = None


def _step(span_s: float) -> timedelta:
    for hours in (1, 2, 3, 6, 12, 24, 48):
        if span_s / (hours * 3600) <= 14:
            return timedelta(hours=hours)
    return timedelta(days=7)


def _ticks(start: datetime, end: datetime, x_of, chart_h: float) -> list[str]:
    """Hour lines and their labels; the weekday on the first label of each day."""
    out, last_day = [], None
    step = _step((end - start).total_seconds())
    t = start.replace(minute=0, second=0, microsecond=0)
    while t <= end:
        if t >= start:
            x = x_of(t)
            text = f"{t:%a} {clock(t)}" if t.date() != last_day else clock(t)
            last_day = t.date()
            out.append(f'<line x1="{x:.1f}" y1="{_TOP - 3}" x2="{x:.1f}" y2="{_TOP + chart_h}" stroke="#d5d5d5"/>'
                       f'<text x="{x:.1f}" y="{_TOP - 8}" text-anchor="middle" fill="#444">{text}</text>')
        t += step
    return out


def _defs() -> str:
    return ('<defs><pattern id="tl-printing" width="6" height="6" patternUnits="userSpaceOnUse" '
            'patternTransform="rotate(45)"><rect width="6" height="6" fill="none"/>'
            '<path d="M0,0 V6" stroke="#fff" stroke-width="2.2" stroke-opacity="0.8"/></pattern>'
            '<pattern id="tl-failed" width="5" height="5" patternUnits="userSpaceOnUse">'
            '<path d="M0,0 L5,5 M5,0 L0,5" stroke="#b3261e" stroke-width="1.2"/></pattern></defs>')


def _bar(x, y, w, h, colour, bar: Bar) -> list[str]:
    opacity = "0.45" if bar.state == "finished" else "1"
    edge = "#b3261e" if bar.state == "failed" else "#222"
    out = [f'<rect x="{x:.1f}" y="{y:.1f}" width="{w:.1f}" height="{h}" rx="2" fill="{colour}" '
           f'fill-opacity="{opacity}" stroke="{edge}" stroke-width="{1.6 if bar.state == "failed" else 0.6}">'
           f'<title>{escape(bar.title)}</title></rect>']
    if bar.state in ("printing", "failed"):
        out.append(f'<rect x="{x:.1f}" y="{y:.1f}" width="{w:.1f}" height="{h}" rx="2" '
                   f'fill="url(#tl-{bar.state})" pointer-events="none"/>')
    return out


def timeline_svg(rows: Sequence[str], bars: Sequence[Bar], shifts: Sequence[tuple[datetime, datetime]], *,
                 start: datetime, end: datetime, now: datetime | None = None,
                 width_px: int = 940) -> tuple[str, list[Bar]]:
    """The timeline SVG and the bars too short to carry their label (to list beside it).

    Parameters
    ----------
    rows
        Printer names, top to bottom.
    bars
        The plates.
    shifts
        (start, end) of each operator shift, shaded.
    start, end
        Time span of the chart.
    now
        Drawn as a red line when given (a replanned version).
    """
    materials = sorted({b.material for b in bars})
    colour = {m: PALETTE[k % len(PALETTE)] for k, m in enumerate(materials)}
    span = max((end - start).total_seconds(), 1.0)
    scale = (width_px - _LABEL_W - _RIGHT) / span
    x_of = lambda t: _LABEL_W + (min(max(t, start), end) - start).total_seconds() * scale  # noqa: E731
    chart_h = _ROW_H * len(rows)
    height = _TOP + chart_h + 18
    out = [f'<svg xmlns="http://www.w3.org/2000/svg" class="timeline" width="{width_px}" height="{height}" '
           f'viewBox="0 0 {width_px} {height}" font-family="sans-serif" font-size="11" role="img" '
           f'aria-label="fleet timeline">', _defs()]
    for a, b in shifts:
        if min(b, end) > max(a, start):
            out.append(f'<rect x="{x_of(a):.1f}" y="{_TOP}" width="{x_of(b) - x_of(a):.1f}" height="{chart_h}" '
                       f'fill="#eaf2e3"><title>shift: operators present {clock(a)} to {clock(b)}</title></rect>')
    out += _ticks(start, end, x_of, chart_h)
    for i, row in enumerate(rows):
        y = _TOP + i * _ROW_H
        out.append(f'<text x="6" y="{y + _ROW_H / 2 + 4:.1f}" font-weight="600">{escape(row)}</text>'
                   f'<line x1="{_LABEL_W}" y1="{y + _ROW_H}" x2="{width_px - _RIGHT}" y2="{y + _ROW_H}" '
                   f'stroke="#e4e4e4"/>')
    unlabelled: list[Bar] = []
    previous: dict[str, str] = {}
    for bar in sorted(bars, key=lambda b: (b.row, b.start)):
        y = _TOP + list(rows).index(bar.row) * _ROW_H + 5
        h = _ROW_H - 10
        xa, xb, xf = x_of(bar.start), x_of(bar.end), x_of(bar.free)
        w = max(xb - xa, 2.0)
        if xf > xb:
            out.append(f'<rect x="{xb:.1f}" y="{y + h / 2 - 2:.1f}" width="{xf - xb:.1f}" height="4" fill="#777">'
                       f'<title>{escape(bar.label)}: clearing until {clock(bar.free)}</title></rect>')
        out += _bar(xa, y, w, h, colour[bar.material], bar)
        if previous.get(bar.row) not in (None, bar.material):
            out.append(f'<path d="M{xa:.1f},{y - 5:.1f} l4,4 l-4,4 l-4,-4 z" fill="#f2b705" stroke="#222" '
                       f'stroke-width="0.6"><title>material change to {escape(bar.material)}</title></path>')
        previous[bar.row] = bar.material
        if w >= 7.0 * len(bar.label) + 6:
            out.append(f'<text x="{xa + 3:.1f}" y="{y + h / 2 + 4:.1f}" fill="#fff" font-weight="600" '
                       f'pointer-events="none">{escape(bar.label)}</text>')
        else:
            unlabelled.append(bar)
    if now is not None and start <= now <= end:
        out.append(f'<line x1="{x_of(now):.1f}" y1="{_TOP - 3}" x2="{x_of(now):.1f}" y2="{_TOP + chart_h}" '
                   f'stroke="#b3261e" stroke-width="2"/><text x="{x_of(now):.1f}" y="{_TOP + chart_h + 13}" '
                   f'text-anchor="middle" '
                   f'fill="#b3261e" font-weight="700">now</text>')
    legend, legend_h = _legend_svg(bars, now=now, top=height + 2, width=width_px)
    out += legend
    out[0] = out[0].replace(f'height="{height}" viewBox="0 0 {width_px} {height}"',
                            f'height="{height + legend_h}" viewBox="0 0 {width_px} {height + legend_h}"')
    out.append("</svg>")
    return "\n".join(out), unlabelled


def _legend_svg(bars: Sequence[Bar], *, now, top: float, width: int) -> tuple[list[str], int]:
    """The legend drawn inside the SVG (so views/timeline.svg stands alone): materials, marks, states."""
    materials = sorted({b.material for b in bars})
    items = [("rect", PALETTE[k % len(PALETTE)], f"printing {m}") for k, m in enumerate(materials)]
    items += [("tail", "#777", "clearing"), ("rect", "#eaf2e3", "shift (operators present)"),
              ("diamond", "#f2b705", "material change")]
    states = sorted({b.state for b in bars if b.state}, key=lambda s: STATES.index(s) if s in STATES else 99)
    items += [(f"state-{s}", "#3b6e8f", f"state: {s}") for s in states]
    if now is not None:
        items.append(("now", "#b3261e", "now"))
    out, x, y = [], float(_LABEL_W), top + 4
    for kind, colour, text in items:
        w = 22 + 6.4 * len(text)
        if x + w > width - 10:
            x, y = float(_LABEL_W), y + 18
        if kind == "tail":
            out.append(f'<rect x="{x:.1f}" y="{y + 4:.1f}" width="14" height="4" fill="{colour}"/>')
        elif kind == "diamond":
            out.append(f'<path d="M{x + 7:.1f},{y:.1f} l5,6 l-5,6 l-5,-6 z" fill="{colour}" stroke="#222" '
                       'stroke-width="0.6"/>')
        elif kind == "now":
            out.append(f'<rect x="{x + 6:.1f}" y="{y:.1f}" width="2.5" height="12" fill="{colour}"/>')
        else:
            fill = {"state-printing": "url(#tl-printing)", "state-failed": "url(#tl-failed)"}.get(kind)
            opacity = "0.45" if kind == "state-finished" else "1"
            out.append(f'<rect x="{x:.1f}" y="{y:.1f}" width="14" height="12" fill="{colour}" '
                       f'fill-opacity="{opacity}" stroke="#333" stroke-width="0.6"/>')
            if fill:
                out.append(f'<rect x="{x:.1f}" y="{y:.1f}" width="14" height="12" fill="{fill}"/>')
        out.append(f'<text x="{x + 19:.1f}" y="{y + 10:.1f}" fill="#333">{escape(text)}</text>')
        x += w
    return out, int(y - top + 20)
