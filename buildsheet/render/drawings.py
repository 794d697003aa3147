"""To-scale side and plan views of a deployed antenna (reportlab graphics; no physics here).

Labels are placed by collision avoidance: every line, symbol and label already drawn is kept as
an obstacle, and each new label takes the first free spot around its anchor (rings of growing
offset, preferred directions first).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field

from reportlab.graphics.shapes import Circle, Drawing, Line, Polygon, Rect, String
from reportlab.lib import colors
from reportlab.pdfbase.pdfmetrics import stringWidth

from buildsheet.calc.cuts import DesignCuts
from buildsheet.spec.units import UnitSystem, format_length

_NICE = (1, 2, 5)
FONT = "Helvetica"
FONT_BOLD = "Helvetica-Bold"
LABEL_PT = 7.0
GREY = colors.Color(0.45, 0.45, 0.45)
#: Clear space kept around every label, points.
PAD = 1.5

Box = tuple[float, float, float, float]  # x0, y0, x1, y1 in points
Segment = tuple[float, float, float, float]


def nice_length(target: float) -> float:
    """The largest 1-2-5 x 10^n length not above ``target`` (for scale bars), same unit."""
    exp = math.floor(math.log10(target))
    best = 10.0**exp
    for n in _NICE:
        if n * 10.0**exp <= target:
            best = n * 10.0**exp
    return best


def _boxes_meet(a: Box, b: Box) -> bool:
    return a[0] < b[2] and b[0] < a[2] and a[1] < b[3] and b[1] < a[3]


def segment_meets_box(s: Segment, b: Box) -> bool:
    """True when the segment ``s`` crosses or lies in the box ``b`` (Liang-Barsky clipping)."""
    x0, y0, x1, y1 = s
    dx, dy = x1 - x0, y1 - y0
    t0, t1 = 0.0, 1.0
    for p, q in ((-dx, x0 - b[0]), (dx, b[2] - x0), (-dy, y0 - b[1]), (dy, b[3] - y0)):
        if p == 0:
            if q < 0:
                return False
            continue
        t = q / p
        if p < 0:
            t0 = max(t0, t)
        else:
            t1 = min(t1, t)
        if t0 > t1:
            return False
    return True


@dataclass
class Sketch:
    """A Drawing plus the obstacles drawn so far, for placing labels clear of everything."""

    drawing: Drawing
    boxes: list[Box] = field(default_factory=list)
    segments: list[Segment] = field(default_factory=list)

    def line(self, x0: float, y0: float, x1: float, y1: float, **style: object) -> None:
        self.drawing.add(Line(x0, y0, x1, y1, **style))
        self.segments.append((x0, y0, x1, y1))

    def rect(self, x: float, y: float, w: float, h: float, **style: object) -> None:
        self.drawing.add(Rect(x, y, w, h, **style))
        self.segments += [(x, y, x + w, y), (x + w, y, x + w, y + h), (x + w, y + h, x, y + h),
                          (x, y + h, x, y)]

    def symbol(self, shape: object, box: Box) -> None:
        """A filled mark (stake, insulator, arrow) that labels keep clear of."""
        self.drawing.add(shape)
        self.boxes.append(box)

    def free(self, box: Box) -> bool:
        w, h = self.drawing.width, self.drawing.height
        if box[0] < 0 or box[1] < 0 or box[2] > w or box[3] > h:
            return False
        grown = (box[0] - PAD, box[1] - PAD, box[2] + PAD, box[3] + PAD)
        return (not any(_boxes_meet(grown, b) for b in self.boxes)
                and not any(segment_meets_box(s, grown) for s in self.segments))

    def label(self, text: str, x: float, y: float, *, size: float = LABEL_PT,
              font: str = FONT, prefer: float | None = None, fixed: bool = False) -> Box:
        """Place ``text`` (lines split at "\n") near the anchor (x, y), clear of everything
        drawn; ``prefer`` is the preferred direction in degrees (0 = right, 90 = up). ``fixed``
        puts the first baseline exactly at (x, y). Returns the box used."""
        lines = text.split("\n")
        w = max(stringWidth(t, font, size) for t in lines)
        lead = 1.15 * size
        asc, desc = 0.75 * size, 0.22 * size + lead * (len(lines) - 1)

        def box_at(bx: float, by: float) -> Box:
            return (bx, by - desc, bx + w, by + asc)

        best: tuple[float, float] | None = (x, y) if fixed else None
        if best is None:
            start = 0.0 if prefer is None else prefer
            angles = [start + k * sign for k in range(0, 181, 15) for sign in (1, -1)][1:]
            for r in (3.0, 6.0, 10.0, 16.0, 24.0, 34.0, 46.0, 60.0, 80.0):
                for a_deg in angles:
                    a = math.radians(a_deg)
                    cx, cy = x + r * math.cos(a), y + r * math.sin(a)
                    # the box touches the ring point on the side facing the anchor
                    bx = cx if math.cos(a) > 0.3 else (cx - w if math.cos(a) < -0.3 else cx - w / 2)
                    by = cy + desc if math.sin(a) > 0.3 else (
                        cy - asc if math.sin(a) < -0.3 else cy - (asc - desc) / 2)
                    if self.free(box_at(bx, by)):
                        best = (bx, by)
                        break
                if best is not None:
                    break
        if best is None:  # nowhere free: keep it by its anchor (the layout test reports it)
            best = (x + 3.0, y + 3.0)
        for k, t in enumerate(lines):
            self.drawing.add(String(best[0], best[1] - k * lead, t, fontName=font, fontSize=size))
        box = box_at(*best)
        self.boxes.append(box)
        return box


def _scale_bar(s: Sketch, x: float, y: float, scale: float, max_pt: float,
               system: UnitSystem) -> None:
    """Scale bar of a round length (metres, or feet for imperial) at (x, y) in points."""
    unit = 1.0 if system == "metric" else 0.3048
    length_units = nice_length(max_pt / scale / unit)
    w = length_units * unit * scale
    s.rect(x, y, w, 3, fillColor=colors.black, strokeColor=colors.black, strokeWidth=0.5)
    s.rect(x + w / 2, y, w / 2, 3, fillColor=colors.white, strokeColor=colors.black,
           strokeWidth=0.5)
    label = f"{length_units:g} m" if system == "metric" else f"{length_units:g} ft"
    s.label(f"{label}  (scale 1:{round(72 / 0.0254 / scale):,})", x + w + 4, y, fixed=True)


def _stake(s: Sketch, x: float, y: float) -> None:
    s.symbol(Polygon([x - 3, y, x + 3, y, x, y - 6], fillColor=colors.black, strokeWidth=0),
             (x - 3, y - 6, x + 3, y))


def side_view(cuts: DesignCuts, width: float, height: float, system: UnitSystem) -> Drawing:
    """Unfolded side view: each element drawn in its own vertical plane, mast in the middle,
    legs at true length and slope, tie-off cords dashed to the stakes (or, for a flat dipole,
    to end supports with their guys). Sizes in points."""
    apex = cuts.design.apex_height_m
    span = max(leg.stake_distance_m for c in cuts.elements for leg in c.legs)
    margin_x, base_y = 20.0, 30.0
    top_pad = 16.0 + 9.0 * len(cuts.elements)
    scale = min((width - 2 * margin_x) / (2 * span), (height - base_y - top_pad) / apex)
    s = Sketch(Drawing(width, base_y + apex * scale + top_pad))
    d = s.drawing
    cx = width / 2
    for i, c in enumerate(cuts.elements):  # header lines first: they own the top strip
        e0 = c.legs[0]
        s.label(f"{c.element.band_label}: {c.included_angle_deg:.0f} deg included, "
                f"ends {format_length(e0.end_height_m, system)}", margin_x / 2,
                d.height - 9 - 9 * i, fixed=True)
    s.line(margin_x / 2, base_y, width - margin_x / 2, base_y, strokeWidth=1.0)
    top = base_y + apex * scale
    s.rect(cx - 1.5, base_y, 3, apex * scale, fillColor=colors.black, strokeWidth=0)
    anchors = []
    for i, c in enumerate(cuts.elements):
        dash = None if i % 2 == 0 else [4, 2]
        for leg in c.legs:
            sign = 1 if leg.leg_id == "A" else -1
            ex, ey = cx + sign * leg.reach_m * scale, base_y + leg.end_height_m * scale
            s.line(cx, top, ex, ey, strokeWidth=1.6, strokeDashArray=dash)
            if leg.has_support:
                px = cx + sign * (leg.support_distance_m or 0.0) * scale
                gx = cx + sign * leg.stake_distance_m * scale
                s.line(ex, ey, px, ey, strokeWidth=0.6, strokeColor=GREY, strokeDashArray=[2, 2])
                s.rect(px - 1.0, base_y, 2.0, ey - base_y, fillColor=GREY, strokeWidth=0)
                s.line(px, ey, gx, base_y, strokeWidth=0.5, strokeColor=GREY,
                       strokeDashArray=[1, 2])
                _stake(s, gx, base_y)
            else:
                sx = cx + sign * leg.stake_distance_m * scale
                s.line(ex, ey, sx, base_y, strokeWidth=0.6, strokeColor=GREY,
                       strokeDashArray=[2, 2])
                _stake(s, sx, base_y)
            s.symbol(Circle(ex, ey, 2.2, fillColor=colors.white, strokeWidth=0.8),
                     (ex - 3, ey - 3, ex + 3, ey + 3))
            anchors.append((f"{c.element.band_label} {leg.leg_id}", ex, ey, 90.0 - sign * 45.0))
    s.label(f"apex {format_length(apex, system)}", cx, top, prefer=30.0)
    for text, x, y, prefer in anchors:
        s.label(text, x, y, prefer=prefer)
    _scale_bar(s, margin_x, 8, scale, width / 4, system)
    return d


def plan_view(cuts: DesignCuts, size: float, system: UnitSystem) -> Drawing:
    """Plan view from above, north up: legs to the end insulators, cords to the stakes (or end
    supports), stake distances and bearings, the footprint rectangle and a north arrow.
    ``size`` in points; the site-fit sentence is printed beside it, not in the drawing."""
    s = Sketch(Drawing(size, size))
    fp = cuts.footprint
    half = max(abs(fp.min_x), abs(fp.max_x), abs(fp.min_y), abs(fp.max_y), 1.0)
    scale = (size / 2 - 46) / half
    cx = cy = size / 2

    def xy(e: float, n: float) -> tuple[float, float]:
        return cx + e * scale, cy + n * scale

    # North arrow, top right, drawn first so labels keep clear of it.
    ax, ay = size - 12, size - 26
    s.symbol(Polygon([ax - 5, ay, ax + 5, ay, ax, ay + 14], fillColor=colors.black,
                     strokeWidth=0), (ax - 5, ay, ax + 5, ay + 14))
    s.label("N", ax - 3.2, ay + 16, font=FONT_BOLD, size=9, fixed=True)
    x0, y0 = xy(fp.min_x, fp.min_y)
    s.rect(x0, y0, fp.width_m * scale, fp.depth_m * scale, fillColor=None,
           strokeColor=GREY, strokeWidth=0.5, strokeDashArray=[1, 2])
    stakes = []
    for i, c in enumerate(cuts.elements):
        dash = None if i % 2 == 0 else [4, 2]
        for leg in c.legs:
            b = math.radians(leg.bearing_deg)
            ex, ey = xy(leg.reach_m * math.sin(b), leg.reach_m * math.cos(b))
            sx, sy = xy(*leg.stake_xy)
            s.line(cx, cy, ex, ey, strokeWidth=1.6, strokeDashArray=dash)
            s.line(ex, ey, sx, sy, strokeWidth=0.6, strokeColor=GREY, strokeDashArray=[2, 2])
            if leg.has_support:
                px, py = xy((leg.support_distance_m or 0.0) * math.sin(b),
                            (leg.support_distance_m or 0.0) * math.cos(b))
                for gx, gy in leg.anchors_xy[1:]:
                    qx, qy = xy(gx, gy)
                    s.line(px, py, qx, qy, strokeWidth=0.5, strokeColor=GREY,
                           strokeDashArray=[1, 2])
                    s.symbol(Rect(qx - 2, qy - 2, 4, 4, fillColor=colors.black, strokeWidth=0),
                             (qx - 2, qy - 2, qx + 2, qy + 2))
                s.symbol(Circle(px, py, 2.5, fillColor=GREY, strokeWidth=0),
                         (px - 2.5, py - 2.5, px + 2.5, py + 2.5))
            s.symbol(Rect(sx - 2.5, sy - 2.5, 5, 5, fillColor=colors.black, strokeWidth=0),
                     (sx - 2.5, sy - 2.5, sx + 2.5, sy + 2.5))
            stakes.append(((f"{c.element.band_label} {leg.leg_id} {leg.bearing_deg:.0f} deg\n"
                            f"{format_length(leg.stake_distance_m, system)}"), sx, sy,
                           90.0 - leg.bearing_deg))
    s.symbol(Circle(cx, cy, 3, fillColor=colors.black), (cx - 3, cy - 3, cx + 3, cy + 3))
    _scale_bar(s, 6, 6, scale, size / 3, system)
    for text, x, y, prefer in stakes:
        s.label(text, x, y, prefer=prefer)
    return s.drawing


def plan_size(width: float) -> float:
    """Side of the square plan view for a content ``width``, points (the rest holds its notes)."""
    return min(300.0, 0.56 * width)


def drawing_labels(d: Drawing) -> Sequence[str]:
    """The texts drawn in ``d`` (for tests and checks)."""
    return [c.text for c in d.contents if isinstance(c, String)]
