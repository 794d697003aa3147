"""Reading printed winder labels back: one decoded QR payload per label.

A label carries its QR code twice where two copies fit (buildsheet.calc.labels), so reading a
labels PDF counts codes per label cell, not per symbol: every code found is decoded by
zxing-cpp from a pypdfium2 raster, placed in its cell of the stock's grid by its position,
and the copies on one label must agree.
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
        cells: dict[int, set[str]] = {}
        for r in zxingcpp.read_barcodes(Image.fromarray(px), formats=zxingcpp.BarcodeFormat.QRCode):
            x = (r.position.top_left.x + r.position.bottom_right.x) / 2 / px_per_mm
            y = (r.position.top_left.y + r.position.bottom_right.y) / 2 / px_per_mm
            cell = next(i for i in range(stock.cells_per_page)
                        if stock.cell_origin(i)[0] <= x <= stock.cell_origin(i)[0] + stock.label_width
                        and stock.cell_origin(i)[1] <= y <= stock.cell_origin(i)[1] + stock.label_height)
            cells.setdefault(cell, set()).add(r.text)
        for cell in sorted(cells):
            (text,) = cells[cell]  # the copies on one label agree
            out.append(text)
    return out
