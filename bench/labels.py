"""Benchmark: winder labels in the field. Decode rates of the demo labels, clean and with
synthetic damage, on every built-in stock; plus the time to plan and render the labels.

Damage (tests/damage.py, fixed seeds): round blots of 1-2 mm radius, dark or light at random,
centred anywhere on the label until the given share of the label's area is covered; either no
blot touches a finder pattern of any copy of the symbol ("finders spared") or blots may land
anywhere. Pages are rasterised at 150 dpi with pypdfium2 and decoded with zxing-cpp; a label
counts as read when a code on it decodes to its payload (any copy). Issue 13 asks for
decoding with 10 % blotted (finders spared) and with 5 % anywhere, on the smallest stock; the
bar we set is 95 % of the trials. Each stock line shows the shapes the labels got (copies x
symbol side in modules, error correction level) and the smallest module.
Run: python bench/labels.py  (needs the test extras)
"""

from __future__ import annotations

import io
import sys
import tempfile
import time
from dataclasses import replace
from pathlib import Path

import numpy as np
import pypdfium2 as pdfium
import zxingcpp
from PIL import Image

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))
from damage import blot, label_finder_zones

DPI = 150
SEEDS = (1, 2, 3)
CONDITIONS = (("clean", 0.0, True), ("10 % finders spared", 0.10, True),
              ("15 % finders spared", 0.15, True), ("5 % anywhere", 0.05, False))


#: The QR contents benched: (labels.code, event.record_url, event.station_url).
VARIANTS = (("id", None, None),
            ("link", "http://buildsheet.local:8000/{element}.html", None),
            ("link", None, "http://buildsheet.local:8080"))


def demo_labels(code: str, record: str | None, station: str | None):
    """The demo's labels with QR code ``code``: "id" (the leg ID) or "link" (the address of
    the record site ``record`` or of the station ``station``)."""
    from buildsheet.cli.main import demo_spec_text
    from buildsheet.packet import build_packet
    from buildsheet.spec.reader import read_spec_text

    spec = read_spec_text(demo_spec_text(), "demo.toml")
    spec = replace(spec, event=replace(spec.event, record_url=record, station_url=station),
                   labels=replace(spec.labels, code=code))
    packet = build_packet(spec, built_at="2027-03-01T00:00:00Z", model="closed_form")
    return list(packet.labels)


def rates(labels, stock) -> dict[str, tuple[int, int]]:
    """(read, trials) per damage condition for ``labels`` printed on ``stock``."""
    from buildsheet.calc.labels import MM_PER_PT
    from buildsheet.render.labels import plan_labels, render_labels

    plans = plan_labels(labels, stock)
    buf = io.BytesIO()
    render_labels(labels, stock, buf)
    scale = DPI / 72.0
    doc = pdfium.PdfDocument(buf.getvalue())
    pages = [np.asarray(p.render(scale=scale).to_pil().convert("L")) for p in doc]
    doc.close()
    px = scale / MM_PER_PT
    out = {}
    for name, share, spare in CONDITIONS:
        ok = total = 0
        for i, (label, plan) in enumerate(zip(labels, plans, strict=True)):
            page, cell = divmod(i, stock.cells_per_page)
            left, top = stock.cell_origin(cell)
            x0, y0 = round(left * px), round(top * px)
            pixels = pages[page][y0:y0 + round(stock.label_height * px),
                                 x0:x0 + round(stock.label_width * px)]
            spared = label_finder_zones(plan.layout, px) if spare else []
            whole = (0, 0, pixels.shape[1], pixels.shape[0])
            for seed in SEEDS if share else (0,):
                cut = (blot(pixels, share, seed * 1000 + i, px_per_mm=px, spare=spared,
                            region=whole) if share else pixels)
                found = zxingcpp.read_barcodes(Image.fromarray(cut),
                                               formats=zxingcpp.BarcodeFormat.QRCode)
                ok += label.payload in {r.text for r in found}
                total += 1
        out[name] = (ok, total)
    return out


def symbol_ms(labels, repeat: int = 5) -> str:
    """CPU time per symbol of the demo payloads: ours (one encoding, numpy-scored masks) and
    segno's own mask search, at the same level and version."""
    import segno

    from buildsheet.calc.label_qr import build_symbol

    payloads = sorted({lb.payload for lb in labels})
    symbols = [build_symbol(p, "q") for p in payloads]
    t0 = time.process_time()
    for _ in range(repeat):
        for p, s in zip(payloads, symbols, strict=True):
            build_symbol(p, "q", s.version)
    ours = (time.process_time() - t0) / (repeat * len(payloads)) * 1e3
    t0 = time.process_time()
    for _ in range(repeat):
        for p, s in zip(payloads, symbols, strict=True):
            segno.make_qr(p, error="q", version=s.version, boost_error=False)
    theirs = (time.process_time() - t0) / (repeat * len(payloads)) * 1e3
    return f"{ours:.1f} ms CPU (segno's own mask search: {theirs:.1f} ms)"


def main() -> None:
    from buildsheet.calc.labels import STOCKS
    from buildsheet.render.labels import plan_labels, render_labels

    for code, record, station in VARIANTS:
        labels = demo_labels(code, record, station)
        print(f"{len(labels)} demo labels, labels.code = {code!r} (e.g. {labels[0].payload!r})")
        for name in sorted(STOCKS, key=lambda n: STOCKS[n].label_width * STOCKS[n].label_height):
            stock = STOCKS[name]
            plans = plan_labels(labels, stock)
            shapes = sorted({(p.layout.copies, len(p.matrix), p.error) for p in plans})
            shown = ", ".join(f"{c} x {m} modules {e}" for c, m, e in shapes)
            mm = min(p.layout.module for p in plans)
            line = ", ".join(f"{c} {ok}/{n}" for c, (ok, n) in rates(labels, stock).items())
            print(f"  {name:12s} {stock.label_width:g} x {stock.label_height:g} mm, {shown}, "
                  f"module >= {mm:.2f} mm: {line}")
        print(f"  QR symbol of one label: {symbol_ms(labels)}")
        t0 = time.perf_counter()
        with tempfile.TemporaryDirectory() as tmp:
            render_labels(labels, STOCKS["sheet-a4"], Path(tmp) / "labels.pdf")
        print(f"  plan + render {len(labels)} labels: {time.perf_counter() - t0:.2f} s")
    sys.stdout.flush()


if __name__ == "__main__":
    main()
