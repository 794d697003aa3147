"""To-scale side and plan views of a deployed antenna (reportlab graphics; no physics here)."""

from __future__ import annotations

import math

from reportlab.graphics.shapes import Circle, Drawing, Line, Polygon, Rect, String
from reportlab.lib import colors

from buildsheet.calc.cuts import DesignCuts
from buildsheet.spec.units import UnitSystem, format_length

_NICE = (1, 2, 5)
FONT = "Helvetica"
GREY = colors.Color(0.45, 0.45, 0.45)


def nice_length(target: float) -> float:
    """The largest 1-2-5 x 10^n length not above ``target`` (for scale bars), same unit."""
    exp = math.floor(math.log10(target))
    best = 10.0**exp
    for n in _NICE:
        if n * 10.0**exp <= target:
            best = n * 10.0**exp
    return best


def _scale_bar(d: Drawing, x: float, y: float, scale: float, max_pt: float, system: UnitSystem) -> None:
    """Scale bar of a round length (metres, or feet for imperial) at (x, y) in points."""
    unit = 1.0 if system == "metric" else 0.3048
    length_units = nice_length(max_pt / scale / unit)
    w = length_units * unit * scale
    d.add(Rect(x, y, w, 3, fillColor=colors.black, strokeColor=colors.black, strokeWidth=0.5))
    d.add(Rect(x + w / 2, y, w / 2, 3, fillColor=colors.white, strokeColor=colors.black,
               strokeWidth=0.5))
    label = f"{length_units:g} m" if system == "metric" else f"{length_units:g} ft"
    d.add(String(x + w + 4, y, f"{label}  (scale 1:{round(72 / 0.0254 / scale):,})",
                 fontName=FONT, fontSize=7))


def side_view(cuts: DesignCuts, width: float, height: float, system: UnitSystem) -> Drawing:
    """Unfolded side view: each element drawn in its own vertical plane, mast in the middle,
    legs at true length and slope, tie-off cords dashed to the stakes. Sizes in points."""
    apex = cuts.design.apex_height_m
    span = max(leg.stake_distance_m for c in cuts.elements for leg in c.legs)
    margin_x, base_y, top_pad = 20.0, 30.0, 16.0 + 9.0 * len(cuts.elements)
    scale = min((width - 2 * margin_x) / (2 * span), (height - base_y - top_pad) / apex)
    d = Drawing(width, base_y + apex * scale + top_pad)
    cx = width / 2
    d.add(Line(margin_x / 2, base_y, width - margin_x / 2, base_y, strokeWidth=1.0))
    d.add(Rect(cx - 1.5, base_y, 3, apex * scale, fillColor=colors.black, strokeWidth=0))
    top = base_y + apex * scale
    d.add(String(cx + 5, top + 2, f"apex {format_length(apex, system)}", fontName=FONT, fontSize=7))
    for i, c in enumerate(cuts.elements):
        dash = None if i % 2 == 0 else [4, 2]
        for leg in c.legs:
            sign = 1 if leg.leg_id == "A" else -1
            ex, ey = cx + sign * leg.reach_m * scale, base_y + leg.end_height_m * scale
            sx = cx + sign * leg.stake_distance_m * scale
            d.add(Line(cx, top, ex, ey, strokeWidth=1.6, strokeDashArray=dash))
            d.add(Line(ex, ey, sx, base_y, strokeWidth=0.6, strokeColor=GREY, strokeDashArray=[2, 2]))
            d.add(Circle(ex, ey, 2.2, fillColor=colors.white, strokeWidth=0.8))
            d.add(Polygon([sx - 3, base_y, sx + 3, base_y, sx, base_y - 6], fillColor=colors.black,
                          strokeWidth=0))
            lab = f"{c.element.band_label} {leg.leg_id}"
            d.add(String(ex + (4 if sign > 0 else -4), ey + 4, lab, fontName=FONT, fontSize=7,
                         textAnchor="start" if sign > 0 else "end"))
        e0 = c.legs[0]
        d.add(String(margin_x / 2, d.height - 9 - 9 * i,
                     f"{c.element.band_label}: {c.included_angle_deg:.0f} deg included, "
                     f"ends {format_length(e0.end_height_m, system)}",
                     fontName=FONT, fontSize=7))
    _scale_bar(d, margin_x, 8, scale, width / 4, system)
    return d


def plan_view(cuts: DesignCuts, size: float, system: UnitSystem,
              site: tuple[float, float] | None = None) -> Drawing:
    """Plan view from above, north up: legs to the end insulators, cords to the stakes, stake
    distances and bearings, the footprint rectangle and a north arrow. ``size`` in points."""
    d = Drawing(size, size)
    fp = cuts.footprint
    half = max(abs(fp.min_x), abs(fp.max_x), abs(fp.min_y), abs(fp.max_y), 1.0)
    scale = (size / 2 - 34) / half
    cx = cy = size / 2

    def xy(e: float, n: float) -> tuple[float, float]:
        return cx + e * scale, cy + n * scale

    x0, y0 = xy(fp.min_x, fp.min_y)
    d.add(Rect(x0, y0, fp.width_m * scale, fp.depth_m * scale, fillColor=None,
               strokeColor=GREY, strokeWidth=0.5, strokeDashArray=[1, 2]))
    for i, c in enumerate(cuts.elements):
        dash = None if i % 2 == 0 else [4, 2]
        for leg in c.legs:
            b = math.radians(leg.bearing_deg)
            ex, ey = xy(leg.reach_m * math.sin(b), leg.reach_m * math.cos(b))
            sx, sy = xy(*leg.stake_xy)
            d.add(Line(cx, cy, ex, ey, strokeWidth=1.6, strokeDashArray=dash))
            d.add(Line(ex, ey, sx, sy, strokeWidth=0.6, strokeColor=GREY, strokeDashArray=[2, 2]))
            d.add(Rect(sx - 2.5, sy - 2.5, 5, 5, fillColor=colors.black, strokeWidth=0))
            if abs(math.sin(b)) < 0.2:  # near north/south: label beside the stake, not on the line
                tx, ty, anchor = sx + 6, sy + (2 if math.cos(b) > 0 else -6), "start"
            else:
                tx, ty = sx + 6 * math.sin(b), sy + 6 * math.cos(b) - 3
                anchor = "start" if math.sin(b) > 0 else "end"
            d.add(String(tx, ty, f"{c.element.band_label}{leg.leg_id} {leg.bearing_deg:.0f} deg",
                         fontName=FONT, fontSize=7, textAnchor=anchor))
            d.add(String(tx, ty - 8, format_length(leg.stake_distance_m, system), fontName=FONT,
                         fontSize=7, textAnchor=anchor))
    d.add(Circle(cx, cy, 3, fillColor=colors.black))
    # North arrow, top right.
    ax, ay = size - 14, size - 30
    d.add(Polygon([ax - 5, ay, ax + 5, ay, ax, ay + 16], fillColor=colors.black, strokeWidth=0))
    d.add(String(ax, ay + 19, "N", fontName="Helvetica-Bold", fontSize=9, textAnchor="middle"))
    _scale_bar(d, 6, 6, scale, size / 3, system)
    caption = f"stakes span {format_length(fp.width_m, system)} E-W x {format_length(fp.depth_m, system)} N-S"
    if site:
        fits = fp.fits(*site)
        caption += f"; site {format_length(site[0], system)} x {format_length(site[1], system)}: " + (
            "fits" if fits else "DOES NOT FIT")
    d.add(String(6, size - 10, caption, fontName=FONT, fontSize=7))
    return d
