"""Tests for buildsheet.render.charts: drawings render to PDF and PNG, text and rules hold."""

from __future__ import annotations

import io

import numpy as np
import pypdf
import pypdfium2 as pdfium
import pytest
from reportlab.graphics import renderPDF
from reportlab.graphics.shapes import Drawing, Group, Line, PolyLine, String, Wedge

from buildsheet.render.charts import elevation_polar_drawing, swr_drawing


def _polar() -> Drawing:
    ang = np.linspace(0.0, 180.0, 181)
    broad = 6.0 - 20.0 * np.cos(np.radians(ang)) ** 2
    end = 5.0 - 25.0 * np.cos(np.radians(ang)) ** 2
    return elevation_polar_drawing(ang, broad, end, 220.0, "40 m elevation pattern")


def _swr() -> Drawing:
    f = np.linspace(6.9e6, 7.4e6, 101)
    s = 1.0 + ((f - 7.15e6) / 0.12e6) ** 2
    return swr_drawing(f, s, 7.15e6, 7.0e6, 7.3e6, 260.0, 150.0, "40 m SWR")


def _walk(node):
    for item in getattr(node, "contents", []):
        yield item
        if isinstance(item, Group):
            yield from _walk(item)


def _pdf_text(d: Drawing) -> str:
    buf = io.BytesIO()
    renderPDF.drawToFile(d, buf)
    reader = pypdf.PdfReader(io.BytesIO(buf.getvalue()))
    assert len(reader.pages) == 1
    return reader.pages[0].extract_text()


def test_polar_pdf_text():
    text = _pdf_text(_polar())
    for s in ("40 m elevation pattern", "90°", "30°", "dBi", "broadside", "end-fire"):
        assert s in text
    # rings: top 10 dBi (peak 6 rounded up to 5 dB), then 0, -10, floor -20 dBi
    for s in ("10", "-10", "-20 dBi"):
        assert s in text


def test_swr_pdf_text():
    text = _pdf_text(_swr())
    for s in ("40 m SWR", "2:1", "MHz", "6.900", "7.400", "SWR"):
        assert s in text


@pytest.mark.parametrize("make", [_polar, _swr])
def test_style_rules(make):
    # House style (DESIGN.md / brief): text >= 7 pt, no line under 0.5 pt, black/grey only.
    d = make()
    for item in _walk(d):
        if isinstance(item, String):
            assert item.fontSize >= 7.0
        if isinstance(item, (Line, PolyLine, Wedge)):
            assert item.strokeWidth >= 0.5
            c = item.strokeColor
            assert c.red == c.green == c.blue


def test_swr_clipped_to_plot():
    d = _swr()
    lines = [i for i in _walk(d) if isinstance(i, PolyLine)]
    ys = np.asarray(lines[-1].points[1::2])
    assert ys.max() <= d.height and ys.min() >= 0.0


def test_png_render(tmp_path):
    # Render through PDF to PNG with pypdfium2 (written to /tmp for a visual check).
    for name, make in (("polar", _polar), ("swr", _swr)):
        buf = io.BytesIO()
        renderPDF.drawToFile(make(), buf)
        img = pdfium.PdfDocument(buf.getvalue())[0].render(scale=3).to_pil()
        path = tmp_path / f"{name}.png"
        img.save(path)
        arr = np.asarray(img.convert("L"))
        assert arr.min() < 50 and arr.max() > 200  # ink on paper
