"""reportlab Drawing builders for the build sheet: elevation polar plot and SWR curve.

Pure functions from plain arrays to reportlab Drawings; no physics here. Black and grey line
work only, text at least 7 pt, no line thinner than 0.5 pt.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np
from reportlab.graphics.shapes import Drawing, Line, PolyLine, String, Wedge
from reportlab.lib import colors

FONT = "Helvetica"
FONT_BOLD = "Helvetica-Bold"
TEXT_PT = 7.0
TITLE_PT = 8.5
THIN = 0.5
BOLD = 1.2
GREY = colors.Color(0.55, 0.55, 0.55)
LIGHT = colors.Color(0.78, 0.78, 0.78)


def _ring_levels(peak_dbi: float, span_db: float = 30.0, step_db: float = 10.0) -> np.ndarray:
    """Ring levels, dBi: top = peak rounded up to 5 dB, then every ``step_db`` over ``span_db``."""
    top = 5.0 * math.ceil(peak_dbi / 5.0)
    return top - np.arange(0.0, span_db + step_db / 2, step_db)


def elevation_polar_drawing(
    elevation_deg: Sequence[float] | np.ndarray,
    gain_dbi_broadside: Sequence[float] | np.ndarray,
    gain_dbi_endfire: Sequence[float] | np.ndarray,
    width_pt: float,
    title: str,
) -> Drawing:
    """Half-polar elevation plot (0-180 degrees over the zenith), radius linear in dB.

    The outer ring is the peak gain rounded up to 5 dBi; rings every 10 dB to 30 dB below, the
    centre is the floor. Broadside: solid black; end-fire: dashed grey; legend below.
    """
    ang = np.radians(np.asarray(elevation_deg, dtype=float))
    g_b = np.asarray(gain_dbi_broadside, dtype=float)
    g_e = np.asarray(gain_dbi_endfire, dtype=float)
    levels = _ring_levels(float(max(np.max(g_b), np.max(g_e))))
    top, floor = float(levels[0]), float(levels[-1])
    pad = 18.0
    radius = width_pt / 2.0 - pad
    cx = width_pt / 2.0
    legend_h = 14.0
    cy = legend_h + 12.0
    height = cy + radius + pad + TITLE_PT + 6.0
    d = Drawing(width_pt, height)
    d.add(
        String(
            cx,
            height - TITLE_PT - 2.0,
            title,
            fontName=FONT_BOLD,
            fontSize=TITLE_PT,
            textAnchor="middle",
        )
    )

    def radius_of(g: np.ndarray) -> np.ndarray:
        return radius * np.clip((g - floor) / (top - floor), 0.0, 1.0)

    for i, lev in enumerate(levels[:-1]):
        r = float(radius_of(np.array([lev]))[0])
        d.add(
            Wedge(
                cx,
                cy,
                r,
                0,
                180,
                strokeColor=GREY if i else colors.black,
                strokeWidth=THIN,
                fillColor=None,
            )
        )
        d.add(
            String(
                cx + r + 1.0,
                cy - TEXT_PT - 1.0,
                f"{lev:g}",
                fontName=FONT,
                fontSize=TEXT_PT,
                textAnchor="middle",
            )
        )
    d.add(
        String(
            cx,
            cy - TEXT_PT - 1.0,
            f"{floor:g} dBi",
            fontName=FONT,
            fontSize=TEXT_PT,
            textAnchor="middle",
        )
    )
    for a_deg in range(0, 181, 30):
        a = math.radians(a_deg)
        x, y = cx + radius * math.cos(a), cy + radius * math.sin(a)
        d.add(Line(cx, cy, x, y, strokeColor=LIGHT, strokeWidth=THIN))
        lx, ly = cx + (radius + 7.0) * math.cos(a), cy + (radius + 4.0) * math.sin(a)
        anchor = "middle" if 30 < a_deg < 150 else ("start" if a_deg <= 30 else "end")
        label = f"{a_deg if a_deg <= 90 else 180 - a_deg}\N{DEGREE SIGN}"
        d.add(String(lx, ly - 2.0, label, fontName=FONT, fontSize=TEXT_PT, textAnchor=anchor))

    def trace(g: np.ndarray, color: colors.Color, dash: list[float] | None) -> PolyLine:
        r = radius_of(g)
        pts = np.column_stack([cx + r * np.cos(ang), cy + r * np.sin(ang)]).ravel()
        return PolyLine(pts.tolist(), strokeColor=color, strokeWidth=BOLD, strokeDashArray=dash)

    d.add(trace(g_b, colors.black, None))
    d.add(trace(g_e, GREY, [3, 2]))
    ly = 4.0
    d.add(Line(pad, ly + 3, pad + 16, ly + 3, strokeColor=colors.black, strokeWidth=BOLD))
    d.add(String(pad + 19, ly, "broadside", fontName=FONT, fontSize=TEXT_PT))
    x2 = cx + 4.0
    d.add(
        Line(
            x2, ly + 3, x2 + 16, ly + 3, strokeColor=GREY, strokeWidth=BOLD, strokeDashArray=[3, 2]
        )
    )
    d.add(String(x2 + 19, ly, "end-fire", fontName=FONT, fontSize=TEXT_PT))
    return d


def swr_drawing(
    frequencies_hz: Sequence[float],
    swr: Sequence[float],
    design_hz: float,
    band_low_hz: float,
    band_high_hz: float,
    width_pt: float,
    height_pt: float,
    title: str,
    channels_hz: Sequence[float] = (),
) -> Drawing:
    """SWR vs frequency: 1-5 scale (clipped), dashed 2:1 line, band edges and design frequency,
    and channel centres (thin grey lines numbered 1, 2, ... at the top) when given.

    Frequencies label in MHz.
    """
    f = np.asarray(frequencies_hz, dtype=float) / 1e6
    s = np.clip(np.asarray(swr, dtype=float), 1.0, 5.0)
    left, right, bottom, top_pad = 34.0, 14.0, 22.0, TITLE_PT + 6.0
    pw, ph = width_pt - left - right, height_pt - bottom - top_pad
    f0, f1 = float(np.min(f)), float(np.max(f))
    d = Drawing(width_pt, height_pt)
    d.add(
        String(
            width_pt / 2.0,
            height_pt - TITLE_PT - 2.0,
            title,
            fontName=FONT_BOLD,
            fontSize=TITLE_PT,
            textAnchor="middle",
        )
    )

    def x_of(v: np.ndarray | float) -> np.ndarray | float:
        return left + (np.asarray(v) - f0) / (f1 - f0) * pw

    def y_of(v: np.ndarray | float) -> np.ndarray | float:
        return bottom + (np.asarray(v) - 1.0) / 4.0 * ph

    for k in range(1, 6):
        y = float(y_of(k))
        d.add(Line(left, y, left + pw, y, strokeColor=LIGHT, strokeWidth=THIN))
        d.add(String(left - 3, y - 2.5, f"{k}", fontName=FONT, fontSize=TEXT_PT, textAnchor="end"))
    y2 = float(y_of(2.0))
    d.add(
        Line(
            left,
            y2,
            left + pw,
            y2,
            strokeColor=colors.black,
            strokeWidth=THIN,
            strokeDashArray=[4, 2],
        )
    )
    d.add(String(left + pw - 1, y2 + 2, "2:1", fontName=FONT, fontSize=TEXT_PT, textAnchor="end"))
    for fe in (band_low_hz / 1e6, band_high_hz / 1e6):
        if f0 <= fe <= f1:
            x = float(x_of(fe))
            d.add(Line(x, bottom, x, bottom + ph, strokeColor=GREY, strokeWidth=BOLD))
    if f0 <= design_hz / 1e6 <= f1:
        x = float(x_of(design_hz / 1e6))
        d.add(
            Line(
                x,
                bottom,
                x,
                bottom + ph,
                strokeColor=colors.black,
                strokeWidth=THIN,
                strokeDashArray=[1, 2],
            )
        )
    for n, fc in enumerate(channels_hz, start=1):
        if f0 <= fc / 1e6 <= f1:
            x = float(x_of(fc / 1e6))
            d.add(Line(x, bottom, x, bottom + ph - 9, strokeColor=GREY, strokeWidth=THIN,
                       strokeDashArray=[3, 1, 1, 1]))
            d.add(String(x, bottom + ph - 7, str(n), fontName=FONT_BOLD, fontSize=TEXT_PT,
                         textAnchor="middle"))
    d.add(Line(left, bottom, left + pw, bottom, strokeColor=colors.black, strokeWidth=THIN))
    d.add(Line(left, bottom, left, bottom + ph, strokeColor=colors.black, strokeWidth=THIN))
    for t in np.linspace(f0, f1, 5):
        x = float(x_of(t))
        d.add(Line(x, bottom, x, bottom - 2, strokeColor=colors.black, strokeWidth=THIN))
        d.add(
            String(x, bottom - 10, f"{t:.3f}", fontName=FONT, fontSize=TEXT_PT, textAnchor="middle")
        )
    d.add(
        String(
            left + pw / 2,
            2,
            "frequency, MHz (grey: band edges, dotted: design"
            + (", numbered: channels)" if channels_hz else ")"),
            fontName=FONT,
            fontSize=TEXT_PT,
            textAnchor="middle",
        )
    )
    d.add(String(2, bottom + ph / 2 - 2.5, "SWR", fontName=FONT, fontSize=TEXT_PT))
    pts = np.column_stack([x_of(f), y_of(s)]).ravel()
    d.add(PolyLine(pts.tolist(), strokeColor=colors.black, strokeWidth=BOLD))
    return d
