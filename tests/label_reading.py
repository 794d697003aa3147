"""Reading printed winder labels back: one decoded QR payload per label.

A label carries its QR code up to six times (buildsheet.calc.labels), so reading a labels PDF
counts codes per label cell, not per symbol: each cell of the stock's grid is cut from a
pypdfium2 raster and decoded by zxing-cpp on its own, as a phone reads one label, and the
copies on one label must agree.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pypdfium2 as pdfium
import zxingcpp
from PIL import Image

from buildsheet.calc.labels import resolve_stock


def label_codes(pdf: Path, stock_name: str = "sheet-letter", scale: float = 6) -> list[str]:
    """The QR payload of every label, page by page and cell by cell (scale in px per pt)."""
    stock = resolve_stock(stock_name, "labels.stock")
    doc = pdfium.PdfDocument(str(pdf))
    try:
        pages = [np.asarray(page.render(scale=scale).to_pil().convert("L")) for page in doc]
    finally:
        doc.close()
    px_per_mm = scale * 72 / 25.4
    out: list[str] = []
    for px in pages:
        for cell in range(stock.cells_per_page):  # one label at a time, as a phone reads them
            left, top = stock.cell_origin(cell)
            x0, y0 = round(left * px_per_mm), round(top * px_per_mm)
            crop = px[y0:y0 + round(stock.label_height * px_per_mm),
                      x0:x0 + round(stock.label_width * px_per_mm)]
            found = {r.text for r in zxingcpp.read_barcodes(
                Image.fromarray(crop), formats=zxingcpp.BarcodeFormat.QRCode)}
            if found:
                (text,) = found  # the copies on one label agree
                out.append(text)
    return out
