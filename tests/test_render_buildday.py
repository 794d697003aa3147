"""Tests for buildsheet.render.buildday: render the flowables into a PDF in memory and read the
IDs and marks back with pypdf (an independent PDF reader); one page is rasterised with
pypdfium2 to check it is not blank."""

from __future__ import annotations

import io
import re

import pypdfium2
import pytest
from pypdf import PdfReader
from reportlab.lib.pagesizes import A4, LETTER
from reportlab.platypus import PageBreak, SimpleDocTemplate

from buildsheet.calc.bom import KitNeeds, WireNeed, day_bom, kit_bom
from buildsheet.calc.stock import Cut, StockItem, plan_spools
from buildsheet.render.buildday import (
    LogRow,
    bom_flowables,
    default_feet_inches,
    default_metric,
    default_mhz,
    log_form_flowables,
    spool_plan_flowables,
    station_list_flowables,
    station_lists_flowables,
)


def render(flowables, pagesize=A4) -> bytes:
    buf = io.BytesIO()
    doc = SimpleDocTemplate(buf, pagesize=pagesize, invariant=1, title="test")
    doc.build(list(flowables))
    return buf.getvalue()


def pdf_pages_text(data: bytes) -> list[str]:
    return [page.extract_text() for page in PdfReader(io.BytesIO(data)).pages]


def norm(text: str) -> str:
    return re.sub(r"\s+", " ", text)


def demo_cuts() -> list[Cut]:
    cuts = []
    for k in range(1, 4):
        for band, length in (("80m", 19.81), ("40m", 10.06)):
            for leg in "AB":
                cuts.append(Cut(f"K{k:02d}-{band}-{leg}", "awg14-pvc", length,
                                f"{band} leg {leg}"))
    return cuts


def test_default_metric():
    assert default_metric(20.364) == "20.36 m"
    assert default_metric(0.235) == "235 mm"


def test_default_feet_inches():
    # 1 ft = 0.3048 m and 1 in = 25.4 mm exactly (1959 international yard and pound agreement).
    assert default_feet_inches(0.3048) == "1 ft 0 in"
    assert default_feet_inches(20 * 0.3048 + 9.125 * 0.0254) == "20 ft 9 1/8 in"
    assert default_feet_inches(66 * 0.3048 + 9.5 * 0.0254) == "66 ft 9 1/2 in"
    assert default_feet_inches(3.75 * 0.0254) == "3 3/4 in"
    assert default_feet_inches(11.97 * 0.0254) == "1 ft 0 in"  # rounds up to the next foot
    assert default_mhz(7.15e6) == "7.150 MHz"


def test_station_list_pdf_has_ids_and_marks(tmp_path):
    cuts = demo_cuts()
    plan = plan_spools(cuts, [StockItem("awg14-pvc", 60.0, 4, "14 AWG PVC, 60 m spool")])
    spool = plan.spools[0]
    data = render(station_list_flowables(spool))
    texts = pdf_pages_text(data)
    assert len(texts) == 1  # one page per spool
    text = norm(texts[0])
    assert spool.spool_id in text
    for pc in spool.cuts:
        assert pc.cut.cut_id in text
        assert default_metric(pc.mark_m) in text
        assert default_feet_inches(pc.mark_m) in text
    assert "10 mm cutting tolerance" in text
    # Rasterise the page for a look (written to tmp_path, also to /tmp for a human check).
    pdf = pypdfium2.PdfDocument(data)
    image = pdf[0].render(scale=1.5).to_pil()
    pdf.close()
    image.save(tmp_path / "station.png")
    gray = image.convert("L")
    dark = sum(gray.histogram()[:128])
    assert dark > 1000  # something is drawn
    assert gray.getpixel((2, 2)) > 250  # white paper


def test_all_station_lists_one_page_each():
    plan = plan_spools(demo_cuts(), [StockItem("awg14-pvc", 45.0, 4, "45 m hank")])
    data = render(station_lists_flowables(plan), pagesize=LETTER)
    texts = pdf_pages_text(data)
    assert len(texts) == len(plan.spools) >= 2
    for spool, text in zip(plan.spools, texts):
        assert spool.spool_id in text
        assert all(pc.cut.cut_id in text for pc in spool.cuts)


def test_spool_plan_pdf_shows_spools_unassigned_and_to_buy():
    cuts = demo_cuts() + [Cut("K01-cord-1", "cord", 5.5, "tie-off")]
    plan = plan_spools(cuts, [StockItem("awg14-pvc", 45.0, 2, "45 m hank")])
    assert plan.unassigned
    text = norm(" ".join(pdf_pages_text(render(spool_plan_flowables(plan)))))
    for s in plan.spools:
        assert s.spool_id in text
    for c in plan.unassigned:
        assert c.cut_id in text
    assert "To buy" in text
    for m in plan.materials:
        assert m.material in text
    assert "10 mm" in text


def test_bom_pdf_lists_items_and_safety():
    needs = KitNeeds(kit_id="K03", wires=(WireNeed("14 AWG copper, PVC jacket", (10.06,) * 2),),
                     tie_off_cords_m=(5.5, 5.5), elements=1, legs=2, end_insulators=2, stakes=2,
                     winders=1, coax_length_m=15.0, crimp_ring_terminals=2, quick_disconnects=2)
    lines = day_bom([kit_bom(needs), kit_bom(needs)])
    text = norm(" ".join(pdf_pages_text(render(bom_flowables(lines)))))
    assert "14 AWG copper, PVC jacket" in text
    assert default_metric(2 * (2 * 10.06 + 2 * 0.01)) in text
    assert "4 pcs" in text  # stakes or insulators over two kits
    assert "power line" in text and "local codes" in text.lower()


def test_log_form_pdf():
    rows = [LogRow("K03-80m", "80 m", 3.6e6, 3.52e6), LogRow("K03-40m", "40 m", 7.15e6, 7.05e6)]
    data = render(log_form_flowables("K03", "A. Builder & Co", rows, passes=2))
    text = norm(" ".join(pdf_pages_text(data)))
    assert "K03-80m" in text and "K03-40m" in text
    assert "7.150 MHz" in text and "3.600 MHz" in text
    assert "A. Builder & Co" in text  # escaped for the paragraph parser, shown verbatim
    for head in ("Measured dip", "Expected dip", "SWR", "Trim made", "Initials"):
        assert head in text
    assert "3.520 MHz" in text and "7.050 MHz" in text


@pytest.mark.parametrize("pagesize", [A4, LETTER])
def test_packet_fragment_renders(pagesize):
    plan = plan_spools(demo_cuts(), [StockItem("awg14-pvc", 45.0, 4, "45 m hank")])
    story = spool_plan_flowables(plan) + [PageBreak()] + station_lists_flowables(plan)
    assert render(story, pagesize).startswith(b"%PDF")
