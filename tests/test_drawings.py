"""Drawings without overlaps (issue 14 part 9): label boxes against other labels, lines and
symbols, read back from the PDF by pdfium (PyPI pypdfium2, a general-purpose PDF library: text
object bounds and path segments), over 1-4 elements at many bearings, on A4 and US Letter."""

from __future__ import annotations

import ctypes
import io
import math
from dataclasses import replace

import pypdfium2 as pdfium
import pypdfium2.raw as pdfium_c
import pytest
from reportlab.graphics import renderPDF
from test_sheet_advice import element, packet_of, spec_text

from buildsheet.calc.geometry import footprint, leg_geometry
from buildsheet.render import drawings
from buildsheet.render.sheets import content_width

BANDS = ("75m", "60m-us", "40m", "30m")
TOL = 0.25  # points: pdfium's glyph bounds vs reportlab's metrics


def pdf_of(d) -> bytes:
    buf = io.BytesIO()
    renderPDF.drawToFile(d, buf)
    return buf.getvalue()


def boxes_and_segments(data: bytes):
    """Text object bounds and path segments (control polygons for curves), page coordinates."""
    page = pdfium.PdfDocument(data)[0]
    texts, segments = [], []
    for obj in page.get_objects():
        kind = pdfium_c.FPDFPageObj_GetType(obj.raw)
        if kind == pdfium_c.FPDF_PAGEOBJ_TEXT:
            texts.append(obj.get_bounds())
        elif kind == pdfium_c.FPDF_PAGEOBJ_PATH:
            m = obj.get_matrix()
            pts, start = [], None
            for i in range(pdfium_c.FPDFPath_CountSegments(obj.raw)):
                seg = pdfium_c.FPDFPath_GetPathSegment(obj.raw, i)
                x, y = ctypes.c_float(), ctypes.c_float()
                pdfium_c.FPDFPathSegment_GetPoint(seg, ctypes.byref(x), ctypes.byref(y))
                p = (m.a * x.value + m.c * y.value + m.e, m.b * x.value + m.d * y.value + m.f)
                if pdfium_c.FPDFPathSegment_GetType(seg) == pdfium_c.FPDF_SEGMENT_MOVETO:
                    start = p
                elif pts:
                    segments.append((*pts[-1], *p))
                pts.append(p)
                if pdfium_c.FPDFPathSegment_GetClose(seg) and start is not None:
                    segments.append((*p, *start))
    return texts, segments


def overlaps(texts, segments):
    """Every (label, other) pair that meets; text boxes shrunk by TOL on each side."""
    bad = []
    shrunk = [(a + TOL, b + TOL, c - TOL, d - TOL) for a, b, c, d in texts]
    for i, t in enumerate(shrunk):
        for j in range(i + 1, len(shrunk)):
            u = shrunk[j]
            if t[0] < u[2] and u[0] < t[2] and t[1] < u[3] and u[1] < t[3]:
                bad.append(("text", t, u))
        bad += [("line", t, s) for s in segments if drawings.segment_meets_box(s, t)]
    return bad


@pytest.fixture(scope="module")
def base_cuts(tmp_path_factory):
    """One solved design per element count (closed-form model, quick)."""
    out = {}
    for n in range(1, 5):
        els = [element(band=b, bearing=0) for b in BANDS[:n]]
        p = packet_of(tmp_path_factory.mktemp(f"n{n}"), spec_text(els, apex="9 m", end="2.5 m"))
        out[n] = p.cuts[0]
    return out


def turned(cuts, bearings):
    """The same design with its elements at other bearings (geometry recomputed)."""
    d = cuts.design
    a = d.allowances
    els = []
    for c, b in zip(cuts.elements, bearings):
        legs = tuple(leg_geometry(s, b + (0 if s == "A" else 180), c.predicted_leg_m,
                                  d.apex_height_m, c.element.end_height_m, knot_m=a.cord_knot_m,
                                  hitch_m=a.cord_stake_m) for s in ("A", "B"))
        els.append(replace(c, legs=legs, element=replace(c.element, bearing_deg=b)))
    return replace(cuts, elements=tuple(els),
                   footprint=footprint([g for c in els for g in c.legs]))


CASES = [(n, start, step) for n in range(1, 5) for start in (0, 17, 45, 90, 133)
         for step in ((90 if n == 2 else 180 / n), 35)]


@pytest.mark.parametrize("paper", ["a4", "letter"])
def test_no_label_meets_anything(base_cuts, paper):
    width = content_width(paper)
    failures = []
    for n, start, step in CASES:
        cuts = turned(base_cuts[n], [(start + k * step) % 360 for k in range(n)])
        for name, d in (("side", drawings.side_view(cuts, width, 165, "metric")),
                        ("plan", drawings.plan_view(cuts, drawings.plan_size(width), "imperial"))):
            texts, segments = boxes_and_segments(pdf_of(d))
            assert len(texts) == len(drawings.drawing_labels(d))  # every text line read back
            bad = overlaps(texts, segments)
            if bad:
                failures.append((name, n, start, step, bad[0]))
    assert not failures, failures[:5]


def test_overlap_check_can_fail():
    # The checker itself: two labels on top of each other, and a label across a line, are found.
    from reportlab.graphics.shapes import Drawing, Line, String
    d = Drawing(200, 100)
    d.add(String(10, 50, "75mA 0 deg"))
    d.add(String(12, 51, "40mB 270 deg"))
    d.add(Line(0, 20, 200, 22))
    d.add(String(50, 19, "crossed"))
    texts, segments = boxes_and_segments(pdf_of(d))
    kinds = {k for k, *_ in overlaps(texts, segments)}
    assert kinds == {"text", "line"}
    assert math.isfinite(sum(t[0] for t in texts))
