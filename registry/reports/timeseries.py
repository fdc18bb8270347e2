"""A mark's position history as a server-drawn SVG: east, north and up against time (pure; no Django).

Three stacked panels share the time axis (decimal years). Each position is drawn at its coordinate
epoch as its offset from a reference position (the mark's current published position), in
millimetres, with an error bar of ±1.96 σ (95 % for one normally distributed component; the usual
one-dimensional factor, e.g. FGDC-STD-007.2-1998's vertical 1.9600·σ). Published values are solid
horizontal steps from each published position's epoch to the next; a known velocity of the current
published position is drawn as a dash-dot line through it. States are told apart by marker shape and
line pattern, not colour, so the drawing reads in black and white and in print.

The drawing is 380 units wide (a phone's width at 1:1; it scales with the page) and uses only
presentation attributes (no ``style`` attributes: the site's content security policy forbids them).
Offsets are computed by the caller in the reference position's frame (``registry.selectors.timeseries``):
frames are never mixed on one plot.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from xml.sax.saxutils import escape

#: One-dimensional 95 % factor (normal distribution; two-sided).
K95_1D = 1.96
WIDTH = 380.0
LEFT = 50.0
RIGHT = 12.0
PANEL_H = 118.0
GAP = 30.0
TOP = 22.0
INK = "#111"
GREY = "#666"
LIGHT = "#bbb"
FONT = "system-ui, -apple-system, 'Segoe UI', Roboto, sans-serif"


@dataclass(frozen=True)
class SeriesPoint:
    """One position: epoch (decimal year), offsets from the reference (mm), 95 % half-widths (mm), state."""

    epoch_yr: float
    e_mm: float
    n_mm: float
    u_mm: float
    e95_mm: float
    n95_mm: float
    u95_mm: float
    state: str  # published, superseded, proposed, rejected, withdrawn
    label: str = ""


def nice_ticks(lo: float, hi: float, target: int = 5) -> list[float]:
    """Round tick values covering [lo, hi] (steps of 1, 2 or 5 × 10^k).

    >>> nice_ticks(-12.0, 31.0)
    [-10.0, 0.0, 10.0, 20.0, 30.0]
    >>> nice_ticks(2019.2, 2025.9)
    [2020.0, 2022.0, 2024.0]
    """
    if not (math.isfinite(lo) and math.isfinite(hi)) or hi <= lo:
        return [lo]
    raw = (hi - lo) / max(target, 1)
    mag = 10 ** math.floor(math.log10(raw))
    step = next(m * mag for m in (1, 2, 5, 10) if m * mag >= raw)
    first = math.ceil(lo / step - 1e-9) * step
    out = []
    value = first
    while value <= hi + 1e-9 * step:
        out.append(round(value, 10) + 0.0)
        value += step
    return out


def _fmt(value: float) -> str:
    return f"{value:.1f}".rstrip("0").rstrip(".")


def _marker(state: str, x: float, y: float) -> str:
    """Shapes by state: ● published, ○ superseded, □ proposed, × rejected or withdrawn."""
    if state == "published":
        return f'<circle cx="{x:.1f}" cy="{y:.1f}" r="3.6" fill="{INK}" stroke="{INK}"/>'
    if state == "superseded":
        return f'<circle cx="{x:.1f}" cy="{y:.1f}" r="3.4" fill="#fff" stroke="{INK}" stroke-width="1.3"/>'
    if state == "proposed":
        return (
            f'<rect x="{x - 3.4:.1f}" y="{y - 3.4:.1f}" width="6.8" height="6.8" fill="#fff" '
            f'stroke="{INK}" stroke-width="1.3"/>'
        )
    d = 3.2
    return (
        f'<path d="M{x - d:.1f},{y - d:.1f}L{x + d:.1f},{y + d:.1f}M{x - d:.1f},{y + d:.1f}L{x + d:.1f},{y - d:.1f}" '
        f'stroke="{INK}" stroke-width="1.4" fill="none"/>'
    )


def timeseries_svg(
    points: Sequence[SeriesPoint],
    *,
    velocity_mm_yr: tuple[float, float, float] | None = None,
    velocity_epoch_yr: float | None = None,
    title: str = "Position history",
    description: str = "",
) -> str:
    """The SVG text (an ``<svg>`` element with ``viewBox``; no width, so it fills its container)."""
    pts = sorted(points, key=lambda p: p.epoch_yr)
    if not pts:
        raise ValueError("nothing to plot")
    t = [p.epoch_yr for p in pts]
    t_lo, t_hi = min(t), max(t)
    span = max(t_hi - t_lo, 1.0)
    t_lo, t_hi = t_lo - 0.08 * span, t_hi + 0.08 * span
    plot_w = WIDTH - LEFT - RIGHT

    def tx(value: float) -> float:
        return LEFT + (value - t_lo) / (t_hi - t_lo) * plot_w

    published = [p for p in pts if p.state in ("published", "superseded")]
    legend_h = 88.0
    height = TOP + 3 * PANEL_H + 2 * GAP + 22 + legend_h
    out = [
        f'<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {WIDTH:.0f} {height:.0f}" role="img" '
        f'class="timeseries" font-family="{escape(FONT)}" font-size="11" aria-labelledby="ts-title ts-desc">',
        f'<title id="ts-title">{escape(title)}</title>',
        f'<desc id="ts-desc">{escape(description)}</desc>',
        f'<rect x="0" y="0" width="{WIDTH:.0f}" height="{height:.0f}" fill="#fff"/>',
    ]
    components = (("East", "e_mm", "e95_mm", 0), ("North", "n_mm", "n95_mm", 1), ("Up", "u_mm", "u95_mm", 2))
    x_ticks = [v for v in nice_ticks(t_lo, t_hi, 4) if t_lo <= v <= t_hi]
    for name, key, key95, index in components:
        top = TOP + index * (PANEL_H + GAP)
        bottom = top + PANEL_H
        values = [getattr(p, key) for p in pts]
        bars = [getattr(p, key95) for p in pts]
        lo = min(v - b for v, b in zip(values, bars, strict=True))
        hi = max(v + b for v, b in zip(values, bars, strict=True))
        if velocity_mm_yr is not None and velocity_epoch_yr is not None:
            rate = velocity_mm_yr[index]
            lo = min(lo, rate * (t_lo - velocity_epoch_yr), rate * (t_hi - velocity_epoch_yr))
            hi = max(hi, rate * (t_lo - velocity_epoch_yr), rate * (t_hi - velocity_epoch_yr))
        lo, hi = min(lo, -5.0), max(hi, 5.0)  # at least ±5 mm, so that noise does not look like movement
        pad = 0.08 * (hi - lo)
        lo, hi = lo - pad, hi + pad

        def ty(value: float, lo=lo, hi=hi, bottom=bottom) -> float:
            return bottom - (value - lo) / (hi - lo) * PANEL_H

        out.append(f'<g class="panel" aria-label="{name} offset in millimetres">')
        out.append(
            f'<rect x="{LEFT:.1f}" y="{top:.1f}" width="{plot_w:.1f}" height="{PANEL_H:.1f}" fill="none" '
            f'stroke="{GREY}" stroke-width="0.8"/>'
        )
        for value in nice_ticks(lo, hi, 4):
            if not lo <= value <= hi:
                continue
            y = ty(value)
            dash = "" if value == 0 else ' stroke-dasharray="2 3"'
            out.append(
                f'<line x1="{LEFT:.1f}" y1="{y:.1f}" x2="{LEFT + plot_w:.1f}" y2="{y:.1f}" stroke="{LIGHT}" '
                f'stroke-width="0.7"{dash}/>'
            )
            out.append(
                f'<text x="{LEFT - 5:.1f}" y="{y + 3.8:.1f}" text-anchor="end" fill="{INK}">{_fmt(value)}</text>'
            )
        for value in x_ticks:
            x = tx(value)
            out.append(
                f'<line x1="{x:.1f}" y1="{top:.1f}" x2="{x:.1f}" y2="{bottom:.1f}" stroke="{LIGHT}" '
                f'stroke-width="0.7" stroke-dasharray="2 3"/>'
            )
        out.append(f'<text x="{LEFT:.1f}" y="{top - 6:.1f}" font-weight="bold" fill="{INK}">{name} (mm)</text>')
        # published values: solid steps from each published position's epoch to the next
        for i, p in enumerate(published):
            x1 = tx(p.epoch_yr)
            x2 = tx(published[i + 1].epoch_yr) if i + 1 < len(published) else LEFT + plot_w
            y = ty(getattr(p, key))
            out.append(
                f'<line x1="{x1:.1f}" y1="{y:.1f}" x2="{x2:.1f}" y2="{y:.1f}" stroke="{INK}" stroke-width="1.6"/>'
            )
        if velocity_mm_yr is not None and velocity_epoch_yr is not None:
            rate = velocity_mm_yr[index]
            out.append(
                f'<line x1="{tx(t_lo):.1f}" y1="{ty(rate * (t_lo - velocity_epoch_yr)):.1f}" '
                f'x2="{tx(t_hi):.1f}" y2="{ty(rate * (t_hi - velocity_epoch_yr)):.1f}" stroke="{INK}" '
                f'stroke-width="1.2" stroke-dasharray="7 3 1.5 3"/>'
            )
        for p, value, bar in zip(pts, values, bars, strict=True):
            x, y = tx(p.epoch_yr), ty(value)
            y1, y2 = ty(value - bar), ty(value + bar)
            out.append(
                f"<g><title>{escape(p.label or p.state)}: {name.lower()} {value:+.1f} ± {bar:.1f} mm (95 %)</title>"
            )
            out.append(f'<line x1="{x:.1f}" y1="{y1:.1f}" x2="{x:.1f}" y2="{y2:.1f}" stroke="{INK}" stroke-width="1"/>')
            for yc in (y1, y2):
                out.append(
                    f'<line x1="{x - 3:.1f}" y1="{yc:.1f}" x2="{x + 3:.1f}" y2="{yc:.1f}" stroke="{INK}" stroke-width="1"/>'
                )
            out.append(_marker(p.state, x, y))
            out.append("</g>")
        out.append("</g>")
    axis_y = TOP + 3 * PANEL_H + 2 * GAP
    step = x_ticks[1] - x_ticks[0] if len(x_ticks) > 1 else 1.0
    decimals = max(0, -math.floor(math.log10(step) + 1e-9)) if step < 1 else 0
    for value in x_ticks:
        out.append(
            f'<text x="{tx(value):.1f}" y="{axis_y + 14:.1f}" text-anchor="middle" fill="{INK}">{value:.{decimals}f}</text>'
        )
    out.append(
        f'<text x="{LEFT + plot_w / 2:.1f}" y="{axis_y + 28:.1f}" text-anchor="middle" fill="{GREY}" font-size="10">'
        "coordinate epoch (decimal year)</text>"
    )
    # legend: shapes and line patterns, in words
    ly = axis_y + 48
    items = [
        ("published", "published (current)"),
        ("superseded", "superseded"),
        ("proposed", "proposed"),
        ("rejected", "rejected or withdrawn"),
    ]
    for i, (state, text) in enumerate(items):
        x = LEFT - 34 + (i % 2) * 180
        y = ly + (i // 2) * 16
        out.append(_marker(state, x + 5, y - 4))
        out.append(f'<text x="{x + 14:.1f}" y="{y:.1f}" fill="{INK}">{escape(text)}</text>')
    y = ly + 32
    x = LEFT - 34
    out.append(
        f'<line x1="{x:.1f}" y1="{y - 4:.1f}" x2="{x + 18:.1f}" y2="{y - 4:.1f}" stroke="{INK}" stroke-width="1.6"/>'
    )
    out.append(f'<text x="{x + 24:.1f}" y="{y:.1f}" fill="{INK}">published value</text>')
    if velocity_mm_yr is not None:
        x2 = LEFT - 34 + 180
        out.append(
            f'<line x1="{x2:.1f}" y1="{y - 4:.1f}" x2="{x2 + 18:.1f}" y2="{y - 4:.1f}" stroke="{INK}" '
            f'stroke-width="1.2" stroke-dasharray="7 3 1.5 3"/>'
        )
        out.append(f'<text x="{x2 + 24:.1f}" y="{y:.1f}" fill="{INK}">velocity</text>')
    y += 16
    out.append(
        f'<line x1="{x + 9:.1f}" y1="{y - 9:.1f}" x2="{x + 9:.1f}" y2="{y + 1:.1f}" stroke="{INK}" stroke-width="1"/>'
    )
    out.append(f'<text x="{x + 24:.1f}" y="{y:.1f}" fill="{INK}">error bar: 95 % (±1.96 σ) per component</text>')
    out.append("</svg>")
    return "\n".join(out)
