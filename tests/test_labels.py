"""Winder labels: stock validation, QR payloads, fit check, and the rendered PDF.

External references: QR codes are decoded with zxing-cpp, PDF text and content operators are
read with pypdf, pages are rasterised with pypdfium2; QR geometry from ISO/IEC 18004.
"""

from __future__ import annotations

import dataclasses
import io
import itertools
import math
import re
import urllib.parse

import numpy as np
import pypdfium2 as pdfium
import pytest
import segno
import zxingcpp
from pypdf import PdfReader
from pypdf.generic import ContentStream

from buildsheet.calc.labels import (
    MM_PER_PT,
    QR_ALPHANUMERIC,
    STOCKS,
    LabelContent,
    LabelStock,
    check_fit,
    label_payload,
    record_url,
    resolve_stock,
    station_label_link,
    station_record_url,
    stock_from_mapping,
)
from buildsheet.errors import BuildError, SpecError
from buildsheet.render.labels import label_summary, plan_labels, render_labels, symbol_rects

URL_TEMPLATE = "https://club.example.org/records/{kit}/{element}/{leg}.html"
BANDS = (
    ("75m", "3.800 MHz", "19.12 m / 62 ft 8 3/4 in"),
    ("40m", "7.150 MHz", "10.43 m / 34 ft 2 5/8 in"),
)


def make_labels(kits: int = 4, start: int = 1) -> list[LabelContent]:
    """Labels for ``kits`` kits of a 75 m + 40 m fan; odd kits carry the leg ID, even URLs."""
    out = []
    for k in range(start, start + kits):
        kit = f"K{k:02d}"
        for band, freq, cut in BANDS:
            element = f"{kit}-{band}"
            for leg in "AB":
                leg_id = f"{element}-{leg}"
                link = record_url(URL_TEMPLATE, kit, element, leg_id)
                payload = label_payload("id" if k % 2 else "link", leg_id, link)
                out.append(
                    LabelContent(
                        kit, element, leg_id, leg, band, freq, cut, payload, ("Ridge County ARES",)
                    )
                )
    return out


def render_bytes(labels, stock, **kw) -> bytes:
    buf = io.BytesIO()
    render_labels(labels, stock, buf, **kw)
    return buf.getvalue()


def layouts(labels, stock, ec="q"):
    return [plan.layout for plan in plan_labels(labels, stock, ec=ec)]


def raster_scale(labels, stock, ec="q") -> float:
    """pdfium scale (px per pt) giving 5 px per QR module (the brief asks for >= 4)."""
    smallest = min(lay.module for lay in layouts(labels, stock, ec))
    return 5.0 * MM_PER_PT / smallest


def pages_as_gray(pdf: bytes, scale: float) -> list[np.ndarray]:
    doc = pdfium.PdfDocument(pdf)
    try:
        return [np.asarray(page.render(scale=scale).to_pil().convert("L")) for page in doc]
    finally:
        doc.close()


def cell_pixels(img: np.ndarray, stock: LabelStock, cell: int, scale: float) -> np.ndarray:
    px = scale / MM_PER_PT  # px per mm
    left, top = stock.cell_origin(cell)
    x0, y0 = round(left * px), round(top * px)
    return img[y0 : y0 + round(stock.label_height * px), x0 : x0 + round(stock.label_width * px)]


def decode(pixels: np.ndarray) -> list:
    from PIL import Image

    return zxingcpp.read_barcodes(Image.fromarray(pixels))


# --- payload builders ----------------------------------------------------------------------


def test_record_url_fills_placeholders_and_percent_encodes():
    url = record_url(URL_TEMPLATE, "K03", "K03-40m", "K03-40m-A")
    assert url == "https://club.example.org/records/K03/K03-40m/K03-40m-A.html"
    # A space and a slash in an ID must not break the path: RFC 3986 sec. 2.1 percent-encoding.
    url = record_url("https://x.example/{leg}", "K 1", "K 1/40m", "K 1/40m-A")
    assert urllib.parse.urlsplit(url).path == "/K%201%2F40m-A"
    assert urllib.parse.unquote(urllib.parse.urlsplit(url).path[1:]) == "K 1/40m-A"


@pytest.mark.parametrize(
    "template",
    [
        "https://x.example/{kitt}/{leg}",
        "https://x.example/{0}",
        "https://x.example/{leg!r}",
        "https://x.example/{leg:>5}",
        "https://x.example/{leg",
    ],
)
def test_record_url_rejects_unknown_placeholders(template):
    with pytest.raises(SpecError) as info:
        record_url(template, "K03", "K03-40m", "K03-40m-A", where="event.record_url")
    msg = str(info.value)
    assert msg.startswith("event.record_url:")
    assert "{kit}, {element}, {leg}" in msg


def test_leg_id_payload_fits_the_smallest_symbol():
    """The "id" payload is the leg ID alone, in capitals: QR alphanumeric mode (ISO/IEC
    18004:2015 Table 5), in which version 1 holds 16 characters at level Q and 10 at level H
    (Table 7, from memory; byte mode only 11 and 7). Every HF band's leg ID, the US 60 m
    channels' and a four-character kit's included, fits version 1 at level Q; the shorter ones
    level H. Checked with segno, an independent encoder."""
    assert label_payload("id", "K03-40m-A", "https://x.example/K03-40m") == "K03-40M-A"
    assert label_payload("link", "K03-40m-A", "https://x.example/K03-40m") == \
        "https://x.example/K03-40m"
    assert label_payload("link", "K03-40m-A", None) == "K03-40M-A"
    for kit in ("K03", "K100"):
        for band in ("160m", "80m", "75m", "60m", "60m-us", "40m", "30m", "20m", "17m", "10m"):
            payload = label_payload("id", f"{kit}-{band}-B", None)
            assert set(payload) <= QR_ALPHANUMERIC and len(payload) <= 16
            symbol = segno.make_qr(payload, error="q", boost_error=False)
            assert (symbol.version, symbol.mode) == (1, "alphanumeric")
            if len(payload) <= 10:
                assert segno.make_qr(payload, error="h", boost_error=False).version == 1
    # The leg ID as written needs version 2 at level Q in byte mode: 12 bytes > 11.
    assert segno.make_qr("K01-60m-us-A", error="q", boost_error=False).version == 2


def test_station_link_in_capitals_is_the_same_address():
    """A station link label holds the element page's address in capitals: RFC 3986 (sections
    3.1, 3.2.2) makes scheme and host case-insensitive, and urllib.parse reads them back in
    lower case; the path keeps its capitals, which the station answers (tests/station). The
    capitals let segno encode it in alphanumeric mode, a version smaller."""
    link = station_label_link("http://buildsheet.local:8080", "K01-60m-us")
    assert link == "HTTP://BUILDSHEET.LOCAL:8080/E/K01-60M-US"
    plain = urllib.parse.urlsplit(station_record_url("http://buildsheet.local:8080",
                                                     "K01-60m-us"))
    read = urllib.parse.urlsplit(link)
    assert (read.scheme, read.hostname, read.port) == (plain.scheme, plain.hostname, plain.port)
    assert read.path.lower() == plain.path.lower()
    compact = segno.make_qr(link, error="q", boost_error=False)
    ordinary = segno.make_qr(station_record_url("http://buildsheet.local:8080", "K01-60m-us"),
                             error="q", boost_error=False)
    assert compact.mode == "alphanumeric" and compact.version < ordinary.version
    # A path prefix (a proxy in front of the station) keeps its case, so the link stays as is;
    # so does an address with characters outside the alphanumeric set.
    for base in ("http://club.example/station", "http://build_day.local:8080"):
        assert station_label_link(base, "K01-40m") == station_record_url(base, "K01-40m")


# --- stock ---------------------------------------------------------------------------------


def test_builtin_stocks_fit_their_pages_and_validate_as_custom():
    for name, stock in STOCKS.items():
        assert resolve_stock(name, "labels.stock") is stock
        d = {
            "name": name,
            "page_width_mm": stock.page_width,
            "page_height_mm": stock.page_height,
            "rows": stock.rows,
            "columns": stock.columns,
            "label_width_mm": stock.label_width,
            "label_height_mm": stock.label_height,
            "left_margin_mm": stock.left_margin,
            "top_margin_mm": stock.top_margin,
            "h_pitch_mm": stock.h_pitch,
            "v_pitch_mm": stock.v_pitch,
        }
        assert stock_from_mapping(d, "labels.stock") == stock
        last_left, last_top = stock.cell_origin(stock.cells_per_page - 1)
        assert last_left + stock.label_width <= stock.page_width
        assert last_top + stock.label_height <= stock.page_height
    # Paper sizes from memory: A4 210 x 297 mm (ISO 216), Letter 8.5 x 11 in = 215.9 x 279.4 mm.
    assert (STOCKS["sheet-a4"].page_width, STOCKS["sheet-a4"].page_height) == (210, 297)
    assert STOCKS["sheet-letter"].page_width == pytest.approx(8.5 * 25.4)
    assert STOCKS["sheet-letter"].page_height == pytest.approx(11 * 25.4)


def test_custom_stock_defaults_and_named_page():
    stock = stock_from_mapping(
        {"page": "Letter", "rows": 2, "columns": 2, "label_width_mm": 100, "label_height_mm": 60},
        "s",
    )
    assert stock.page_width == pytest.approx(215.9)
    assert (stock.h_pitch, stock.v_pitch, stock.left_margin) == (100, 60, 0)


def test_custom_stock_reports_every_problem_at_once():
    d = {
        "page_width_mm": 210,
        "page_height_mm": -5,
        "rows": 0,
        "columns": 2.5,
        "label_width_mm": "70",
        "label_height_mm": 37,
        "top_margn_mm": 4,
    }
    with pytest.raises(SpecError) as info:
        stock_from_mapping(d, "labels.stock")
    wheres = {p.where for p in info.value.problems}
    assert {
        "labels.stock.page_height_mm",
        "labels.stock.rows",
        "labels.stock.columns",
        "labels.stock.label_width_mm",
        "labels.stock.top_margn_mm",
    } <= wheres
    text = str(info.value)
    assert "-5" in text and "'70'" in text and "did you mean 'top_margin_mm'" in text


def test_custom_stock_must_fit_the_page_and_not_overlap():
    d = {
        "page": "A4",
        "rows": 8,
        "columns": 3,
        "label_width_mm": 70,
        "label_height_mm": 37,
        "left_margin_mm": 5,
        "top_margin_mm": 5,
        "v_pitch_mm": 30,
    }
    with pytest.raises(SpecError) as info:
        stock_from_mapping(d, "labels.stock")
    problems = {p.where: p.message for p in info.value.problems}
    # 5 + 2*70 + 70 = 215 > 210 (arithmetic): columns overflow the page width.
    assert "215" in problems["labels.stock.columns"]
    assert "overlap" in problems["labels.stock.v_pitch_mm"]


def test_unknown_builtin_stock_suggests():
    with pytest.raises(SpecError, match="did you mean 'sheet-a4'"):
        resolve_stock("sheet-A4", "labels.stock")


# --- fit check -----------------------------------------------------------------------------


def test_fit_error_on_small_stock_says_what_would_fit():
    payload = record_url(URL_TEMPLATE, "K03", "K03-40m", "K03-40m-A")
    small = stock_from_mapping(
        {
            "page_width_mm": 40,
            "page_height_mm": 20,
            "rows": 1,
            "columns": 1,
            "label_width_mm": 40,
            "label_height_mm": 20,
        },
        "labels.stock",
    )
    with pytest.raises(SpecError) as info:
        check_fit(small, [payload, "short"])
    msg = str(info.value)
    # Version from an independent encoder (segno follows ISO/IEC 18004 Table 7 capacities).
    version = segno.make_qr(payload, error="q", boost_error=False).version
    span = 17 + 4 * version + 8  # ISO/IEC 18004 clause 6.3.1 size + 2 x 4-module quiet zone
    assert f"version {version}" in msg and f"{span * 0.5:.1f} mm square" in msg
    sizes = re.findall(r"(\d+\.\d) x (\d+\.\d) mm \(QR (beside|above)", msg)
    assert len(sizes) == 2
    for w, h, _ in sizes:  # each suggested label really fits
        ok = stock_from_mapping(
            {
                "page_width_mm": float(w),
                "page_height_mm": float(h),
                "rows": 1,
                "columns": 1,
                "label_width_mm": float(w),
                "label_height_mm": float(h),
            },
            "s",
        )
        check_fit(ok, [payload])
        # ... and 2 mm less in either direction does not.
        for dw, dh in ((2, 0), (0, 2)):
            tight = LabelStock(
                "t",
                300,
                300,
                1,
                1,
                float(w) - dw,
                float(h) - dh,
                0,
                0,
                float(w) - dw,
                float(h) - dh,
            )
            with pytest.raises(SpecError):
                check_fit(tight, [payload])


def test_fit_check_rejects_low_error_correction_and_huge_payloads():
    with pytest.raises(SpecError, match="Q or better"):
        check_fit(STOCKS["roll"], ["x"], ec="m")
    with pytest.raises(SpecError, match="too long for any QR symbol"):
        check_fit(STOCKS["roll"], ["x" * 3000])  # byte capacity at 40-Q is 1663 (ISO/IEC 18004)


def test_render_refuses_too_small_stock_and_leaves_no_file(tmp_path):
    tiny = LabelStock("tiny", 30, 20, 1, 1, 30, 20, 0, 0, 30, 20)
    target = tmp_path / "labels.pdf"
    with pytest.raises(SpecError, match="would fit"):
        render_labels(make_labels(1), tiny, target)
    assert list(tmp_path.iterdir()) == []


# --- rendered PDF --------------------------------------------------------------------------


@pytest.mark.parametrize("name", sorted(STOCKS))
def test_every_qr_decodes_to_its_label(name):
    stock = STOCKS[name]
    labels = make_labels(4)  # 16 labels: 2 pages on the letter sheet, 16 on the roll
    pdf = render_bytes(labels, stock)
    scale = raster_scale(labels, stock)
    pages = pages_as_gray(pdf, scale)
    assert len(pages) == math.ceil(len(labels) / stock.cells_per_page)
    copies = [len(lay.symbols) for lay in layouts(labels, stock)]
    for i, label in enumerate(labels):
        page, cell = divmod(i, stock.cells_per_page)
        found = decode(cell_pixels(pages[page], stock, cell, scale))
        assert [r.text for r in found] == [label.payload] * copies[i]  # zxing-cpp decode
        assert {r.ec_level for r in found} <= {"Q", "H"}  # decoder reports Q or better
    # Cells left empty on the last page hold no code.
    for cell in range(len(labels) % stock.cells_per_page or stock.cells_per_page,
                      stock.cells_per_page):
        assert decode(cell_pixels(pages[-1], stock, cell, scale)) == []


def test_url_payloads_match_generated_record_addresses():
    labels = make_labels(2)
    pdf = render_bytes(labels, STOCKS["sheet-a4"])
    scale = raster_scale(labels, STOCKS["sheet-a4"])
    (img,) = pages_as_gray(pdf, scale)
    urls = {r.text for cell in range(len(labels))
            for r in decode(cell_pixels(img, STOCKS["sheet-a4"], cell, scale))
            if r.text.startswith("https://")}
    assert urls == {
        f"https://club.example.org/records/K02/K02-{b}/K02-{b}-{leg}.html"
        for b in ("75m", "40m")
        for leg in "AB"
    }


def test_text_extracts_with_every_id():
    labels = make_labels(4)
    stock = STOCKS["sheet-letter"]
    reader = PdfReader(io.BytesIO(render_bytes(labels, stock, title="Ridge County build day")))
    assert reader.metadata.title == "Ridge County build day"
    texts = [page.extract_text() for page in reader.pages]  # pypdf text extraction
    for i, label in enumerate(labels):
        text = texts[i // stock.cells_per_page]
        for part in (
            label.leg_id,
            label.band_name,
            label.frequency_text,
            f"LEG {label.leg}",
            f"KIT {label.kit_id}",
            "Ridge County ARES",
        ):
            assert part in text
        metric, imperial = label.cut_length_text.split(" / ")
        assert metric in text and imperial in text


def test_start_cell_skips_cells_of_a_partly_used_sheet():
    stock = STOCKS["sheet-a4"]
    labels = make_labels(1)  # 4 labels
    buf = io.BytesIO()
    assert render_labels(labels, stock, buf, start_cell=22) == 2
    scale = raster_scale(labels, stock)
    pages = pages_as_gray(buf.getvalue(), scale)
    assert len(pages) == 2
    for cell in range(22):
        assert cell_pixels(pages[0], stock, cell, scale).min() > 250  # untouched cells blank
    order = [(0, 22), (0, 23), (1, 0), (1, 1)]
    for label, (page, cell) in zip(labels, order, strict=True):
        assert {r.text for r in decode(cell_pixels(pages[page], stock, cell, scale))} == {
            label.payload
        }
    assert cell_pixels(pages[1], stock, 2, scale).min() > 250
    for bad in (-1, 24):
        with pytest.raises(SpecError, match="start cell"):
            render_labels(labels, stock, io.BytesIO(), start_cell=bad)


@pytest.mark.parametrize("name", sorted(STOCKS))
def test_module_size_and_quiet_zone(name):
    stock = STOCKS[name]
    labels = make_labels(2)
    for lay in layouts(labels, stock):  # from the layout
        assert lay.module >= 0.5
        assert lay.quiet_zone == pytest.approx(4 * lay.module)  # ISO/IEC 18004 cl. 9.1: 4X
        for box in lay.symbols:
            assert box.width == pytest.approx((lay.modules + 8) * lay.module)
            assert box.x >= 0 and box.x + box.width <= stock.label_width
            assert box.y >= 0 and box.y + box.height <= stock.label_height
            assert (lay.text.x + lay.text.width <= box.x or lay.text.x >= box.x + box.width
                    or lay.text.y >= box.y + box.height)  # text clear of the quiet zone
        qz = lay.quiet_zone
        for a, b in itertools.permutations(lay.symbols, 2):
            # Neighbouring copies may share quiet zone; no copy's modules enter another's box.
            assert (a.x + a.width - qz <= b.x + 1e-9 or b.x + b.width <= a.x + qz + 1e-9
                    or a.y + a.height - qz <= b.y + 1e-9 or b.y + b.height <= a.y + qz + 1e-9)
    # ... and measured on the raster: the dark symbol's extent and a white quiet zone.
    scale = raster_scale(labels, stock)
    px = scale / MM_PER_PT
    pages = pages_as_gray(render_bytes(labels, stock), scale)
    for i, (label, lay) in enumerate(zip(labels, layouts(labels, stock), strict=True)):
        page, cell = divmod(i, stock.cells_per_page)
        pixels = cell_pixels(pages[page], stock, cell, scale)
        results = decode(pixels)
        assert len(results) == len(lay.symbols)
        modules = 17 + 4 * int(results[0].extra["Version"])  # ISO/IEC 18004 cl. 6.3.1
        for box in lay.symbols:
            # The symbol alone: its quiet zone without a neighbouring copy's shared part.
            x0, y0 = round(box.x * px), round(box.y * px)
            area = pixels[y0 : y0 + round(box.width * px), x0 : x0 + round(box.width * px)]
            inner = (math.floor(lay.quiet_zone * px) - 2,
                     math.ceil((box.width - lay.quiet_zone) * px) + 2)  # 2 px: grid, smoothing
            ring = np.zeros(area.shape, dtype=bool)
            ring[2:-2, 2:-2] = True
            ring[inner[0] : inner[1], inner[0] : inner[1]] = False
            assert area[ring].min() >= 128  # the whole quiet zone is white (no neighbour)
            ys, xs = np.nonzero(area[inner[0] : inner[1], inner[0] : inner[1]] < 128)
            width_mm = (xs.max() - xs.min() + 1) / px
            height_mm = (ys.max() - ys.min() + 1) / px
            assert width_mm / modules >= 0.5 - 1 / px  # module >= 0.5 mm within a pixel
            assert width_mm == pytest.approx(height_mm, abs=2 / px)
            for start, end in ((xs.min(), xs.max()), (ys.min(), ys.max())):
                quiet_before = (start + inner[0]) / px
                quiet_after = (area.shape[0] - 1 - end - inner[0]) / px
                for q in (quiet_before, quiet_after):  # 4 modules of white, 2 px slack
                    assert q >= 4 * width_mm / modules - 2 / px


def _operations(pdf: bytes):
    reader = PdfReader(io.BytesIO(pdf))
    for page in reader.pages:
        yield from ContentStream(page.get_contents(), reader).operations


def test_weatherproof_drawing_rules_in_the_content_stream():
    labels = make_labels(2)
    sizes, band_sizes, colours = [], [], []
    font_size = None
    # Operators from ISO 32000-1 (PDF 1.7): 8.5.3 painting, 8.6.8 colour, 9.3 text state.
    for operands, op in _operations(render_bytes(labels, STOCKS["sheet-a4"])):
        if op in (b"S", b"s", b"B", b"B*", b"b", b"b*"):
            raise AssertionError(f"stroke operator {op!r} found; labels must use fills only")
        if op == b"w":
            assert float(operands[0]) >= 0.5  # no hairlines
        if op in (b"g", b"G", b"rg", b"RG", b"k", b"K", b"sc", b"scn", b"SC", b"SCN"):
            colours.append((op, tuple(float(v) for v in operands)))
        if op == b"Tf":
            font_size = float(operands[1])
            sizes.append(font_size)
        if op == b"Tj" and str(operands[0]) in ("75m", "40m"):
            band_sizes.append(font_size)
        if op == b"Tm":
            assert [float(v) for v in operands[:4]] == [1, 0, 0, 1]  # text is not scaled
    black_or_white = {
        (b"g", (0.0,)),
        (b"g", (1.0,)),
        (b"rg", (0.0, 0.0, 0.0)),
        (b"rg", (1.0, 1.0, 1.0)),
    }
    assert colours and set(colours) <= black_or_white
    assert min(sizes) >= 7.0  # minimum text 7 pt
    assert len(band_sizes) == len(labels) and min(band_sizes) >= 14.0  # band in large type


def test_output_is_reproducible_and_written_atomically(tmp_path):
    labels = make_labels(3)
    first = render_bytes(labels, STOCKS["sheet-a4"], title="t")
    assert first == render_bytes(labels, STOCKS["sheet-a4"], title="t")
    target = tmp_path / "labels.pdf"
    target.write_bytes(b"old")
    assert render_labels(labels, STOCKS["sheet-a4"], target, title="t") == 1
    assert target.read_bytes() == first
    assert [p.name for p in tmp_path.iterdir()] == ["labels.pdf"]  # no temp file left


def test_unwritable_folder_is_a_build_error(tmp_path):
    with pytest.raises(BuildError, match="cannot write"):
        render_labels(make_labels(1), STOCKS["roll"], tmp_path / "missing" / "labels.pdf")


def test_text_that_cannot_fit_is_reported_per_label():
    label = make_labels(1)[0]
    long = LabelContent(
        label.kit_id,
        label.element_id,
        label.leg_id,
        label.leg,
        label.band_name,
        label.frequency_text,
        label.cut_length_text,
        label.payload,
        ("x" * 80,),
    )
    with pytest.raises(SpecError, match=r"^s.toml: labels.stock \(label 0, K01-75m-A\):"):
        render_labels([long], STOCKS["roll"], io.BytesIO(), where="s.toml: labels.stock")


def test_error_correction_h_renders_and_decodes_as_h():
    labels = make_labels(1)
    pdf = render_bytes(labels, STOCKS["roll"], ec="h")
    scale = raster_scale(labels, STOCKS["roll"], "h")
    for img in pages_as_gray(pdf, scale):
        results = decode(img)
        assert results and {r.ec_level for r in results} == {"H"}  # as zxing-cpp decoded it


def test_symbol_rectangles_cover_exactly_the_dark_modules():
    matrix = segno.make_qr("K03-40m-A", error="q").matrix  # segno's matrix is the reference
    grid = np.zeros((len(matrix), len(matrix)), dtype=int)
    for c, r, w, h in symbol_rects(matrix):
        grid[r : r + h, c : c + w] += 1
    assert grid.max() == 1  # no overlaps
    assert np.array_equal(grid, np.array([[v & 1 for v in row] for row in matrix]))


# --- field damage (tests/damage.py: seeded blots, our own model) ----------------------------


def _damaged_decodes(labels, stock, share: float, spare_finders: bool, seeds=(1, 2)) -> float:
    """Share of (label, seed) trials in which zxing-cpp still reads the label's payload (from
    either copy) from a 150 dpi pypdfium2 raster with blots covering ``share`` of the label."""
    from damage import blot, label_finder_zones

    plans = plan_labels(labels, stock)
    scale = 150 / 72
    px = scale / MM_PER_PT
    pages = pages_as_gray(render_bytes(labels, stock), scale)
    ok = total = 0
    for i, (label, plan) in enumerate(zip(labels, plans, strict=True)):
        page, cell = divmod(i, stock.cells_per_page)
        pixels = cell_pixels(pages[page], stock, cell, scale)
        spare = label_finder_zones(plan.layout, px) if spare_finders else []
        for seed in seeds:
            hurt = blot(pixels, share, 1000 * seed + i, px_per_mm=px, spare=spare,
                        region=(0, 0, pixels.shape[1], pixels.shape[0]))
            ok += label.payload in {r.text for r in decode(hurt)}
            total += 1
    return ok / total


def _smallest_stock():
    return min(STOCKS.values(), key=lambda s: s.label_width * s.label_height)


def field_labels(code: str, kits: int = 4) -> list[LabelContent]:
    """Labels as a packet makes them: the leg ID (``code`` "id") or a record URL like the demo's
    (``code`` "link") in the QR code."""
    return [dataclasses.replace(label, payload=label_payload(
                code, label.leg_id, record_url("http://buildsheet.local:8000/{element}.html",
                                               label.kit_id, label.element_id, label.leg_id)))
            for label in make_labels(kits)]


# Issue 13 asks winder labels on the smallest built-in stock to decode with 10 % of their area
# blotted (finder patterns spared) and with 5 % blotted anywhere; the bar we set is 95 % of
# the trials (at most one label in twenty needs its text read by eye). zxing-cpp reads no
# symbol with a blot on any of its three finder patterns (the test below), and at 5 % about
# sixteen 1-2 mm blots fall on a 66 x 35 mm label, so one symbol of any module size survives
# about a third of the trials; the labels print as many copies as fit, turned against their
# neighbours. bench/labels.py prints the rates on every stock.


def test_id_labels_survive_scuffs_with_the_finders_spared():
    stock = _smallest_stock()
    labels = field_labels("id")  # 16 labels, each the leg ID
    assert {len(p.layout.symbols) for p in plan_labels(labels, stock)} == {6}
    assert _damaged_decodes(labels, stock, 0.10, spare_finders=True, seeds=range(1, 7)) >= 0.95


def test_id_labels_survive_scuffs_anywhere():
    stock = _smallest_stock()
    labels = field_labels("id")
    assert _damaged_decodes(labels, stock, 0.05, spare_finders=False, seeds=range(1, 7)) >= 0.95


def test_link_labels_survive_scuffs_with_the_finders_spared():
    """A record URL of 41 characters needs version 4 at level Q: two copies fit the smallest
    stock. With the finders spared they still reach the bar."""
    stock = _smallest_stock()
    labels = field_labels("link")
    assert {len(p.layout.symbols) for p in plan_labels(labels, stock)} == {2}
    assert _damaged_decodes(labels, stock, 0.10, spare_finders=True, seeds=(1, 2, 3)) >= 0.95


def test_link_labels_fall_short_with_scuffs_anywhere():
    """Two copies, each surviving 5 % blots anywhere about half the time, read about three
    times in four (75 % here, 69 % on the demo's labels in bench/labels.py; one symbol, 33 %):
    the reason the "id" code exists. The bar asserts the gain of the second, turned copy; 95 %
    is out of reach for a symbol this size on this label."""
    stock = _smallest_stock()
    labels = field_labels("link")
    rate = _damaged_decodes(labels, stock, 0.05, spare_finders=False, seeds=(1, 2, 3))
    assert 0.55 <= rate < 0.95


def test_station_links_in_capitals_print_four_copies_on_the_roll():
    """On the 62 x 40 mm roll a station link in capitals (alphanumeric mode: version 3 at level
    Q) prints four copies where the ordinary address (byte mode, version 4) gets one: with 5 %
    blotted anywhere about nine labels in ten read (92 % here, 124 of 138 on the demo's labels
    in bench/labels.py), against four in ten for one copy."""
    stock = STOCKS["roll"]
    labels = [dataclasses.replace(label, payload=label_payload(
                  "link", label.leg_id,
                  station_label_link("http://buildsheet.local:8080", label.element_id)))
              for label in make_labels(4)]
    plain = [dataclasses.replace(label, payload=station_record_url(
                 "http://buildsheet.local:8080", label.element_id)) for label in make_labels(4)]
    assert {len(p.layout.symbols) for p in plan_labels(labels, stock)} == {4}
    assert {len(p.layout.symbols) for p in plan_labels(plain, stock)} == {1}
    assert _damaged_decodes(labels, stock, 0.10, spare_finders=True, seeds=(1, 2, 3)) >= 0.95
    rate = _damaged_decodes(labels, stock, 0.05, spare_finders=False, seeds=(1, 2, 3))
    assert rate >= 0.85
    assert _damaged_decodes(plain, stock, 0.05, spare_finders=False, seeds=(1, 2, 3)) < rate


def test_summary_counts_the_copies_a_reader_finds():
    stock = _smallest_stock()
    for code, copies in (("id", 6), ("link", 2)):
        labels = field_labels(code, 1)
        plans = plan_labels(labels, stock)
        line = label_summary(plans, stock, code)
        assert line.startswith(f"labels: 4 on stock {stock.name}; ") and \
            f"{copies} copies per label" in line
        scale = raster_scale(labels, stock)
        (page,) = pages_as_gray(render_bytes(labels, stock), scale)
        for cell in range(len(labels)):  # zxing-cpp finds every copy, all holding the payload
            found = decode(cell_pixels(page, stock, cell, scale))
            assert [r.text for r in found] == [labels[cell].payload] * copies
    assert "fits more copies" in label_summary(plans, stock, "link")


def test_one_blot_on_a_finder_spoils_one_copy_not_the_label():
    """A single dark 1.5 mm blot on a finder pattern of one copy: zxing-cpp no longer reads
    that copy, yet the label still reads from the others."""
    stock = _smallest_stock()
    for code in ("id", "link"):
        labels = field_labels(code, 1)
        (plan, *_) = plan_labels(labels, stock)
        scale = 150 / 72
        px = scale / MM_PER_PT
        (page,) = pages_as_gray(render_bytes(labels[:1], stock), scale)
        pixels = cell_pixels(page, stock, 0, scale).copy()
        lay = plan.layout
        box = lay.symbols[0]  # upright: a finder at its top-left corner
        assert lay.turn(0) == 0
        cx, cy = ((box.x + lay.quiet_zone + 3.5 * lay.module) * px,
                  (box.y + lay.quiet_zone + 3.5 * lay.module) * px)
        yy, xx = np.mgrid[0 : pixels.shape[0], 0 : pixels.shape[1]]
        assert len(decode(pixels)) == lay.copies
        pixels[(xx - cx) ** 2 + (yy - cy) ** 2 <= (1.5 * px) ** 2] = 0
        found = decode(pixels)
        assert [r.text for r in found] == [labels[0].payload] * (lay.copies - 1)
        for r in found:  # ... and none of them is the blotted copy
            x, y = r.position.top_left.x / px, r.position.top_left.y / px
            assert not (box.x <= x <= box.x + box.width and box.y <= y <= box.y + box.height)
