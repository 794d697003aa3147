"""The packet build with element records: current lengths on labels, revisions, changed-only
builds and QR codes that lead to generated record pages.

External checks: QR codes are decoded with zxing-cpp from pages rasterised by pypdfium2; PDF
text is extracted with pypdf; the record store is checked with SQLite's own integrity_check.
"""

from __future__ import annotations

import json
import re
import urllib.parse
from datetime import UTC, datetime
from pathlib import Path

import pypdfium2 as pdfium
import pytest
import zxingcpp
from pypdf import PdfReader

from buildsheet.build import build, default_store
from buildsheet.cli.main import demo_spec_text, main
from buildsheet.render.site import page_name
from buildsheet.spec.units import format_frequency, format_length
from buildsheet.store import exchange
from buildsheet.store import ledger as rec
from buildsheet.store.manifest import read_manifest
from tests.label_reading import label_codes

T1, T2, T3 = "2027-03-01T09:00:00Z", "2027-03-02T09:00:00Z", "2027-03-03T09:00:00Z"

SIXTY_IN_FAN = '''
  [[designs.phonefan.elements]]
  band = "60m-us"
  bearing = 45
'''


def small_spec(folder: Path, *, record_url: str | None = None, sixty_in_fan: bool = False,
               start_cell: int | None = None) -> Path:
    """The demo spec cut down to two fan kits and one 60 m kit (same designs, fewer kits)."""
    text = demo_spec_text()
    text = re.sub(r"count = 10\nbuilders = \[.*?\]", 'count = 2\nbuilders = ["Ada", "Ben"]',
                  text, flags=re.DOTALL)
    text = re.sub(r"count = 3\nbuilders = \[.*?\]", 'count = 1\nbuilders = ["Kim"]',
                  text, flags=re.DOTALL)
    assert 'builders = ["Ada", "Ben"]' in text and 'builders = ["Kim"]' in text
    if record_url:  # labels lead to the record pages
        text = text.replace("# record_url = ", "record_url = ", 1)
        text = re.sub(r'record_url = ".*?"', f'record_url = "{record_url}"', text, count=1)
        text = re.sub(r'^code = "id" .*$', 'code = "link"', text, count=1, flags=re.MULTILINE)
        assert 'code = "link"' in text
    if sixty_in_fan:
        head, sep, tail = text.partition("  bearing = 90")
        text = head + sep + tail.replace("\n", "\n" + SIXTY_IN_FAN.strip("\n") + "\n", 1)
    if start_cell is not None:
        line = "# start_cell = 0   # unset: labels continue where the last packet left the sheet"
        assert line in text
        text = text.replace(line, f"start_cell = {start_cell}")
    folder.mkdir(parents=True, exist_ok=True)
    path = folder / "club.toml"
    path.write_text(text, encoding="utf-8")
    return path


def qr_texts(pdf: Path) -> list[str]:
    """The QR code of every label on every page, decoded by zxing-cpp from a 6 px/pt pypdfium2
    raster, once per label (a label may carry its code twice; tests/label_reading.py)."""
    return label_codes(pdf)


def pdf_text(pdf: Path) -> str:
    """All text of a PDF (pypdf), whitespace collapsed."""
    reader = PdfReader(pdf)
    return " ".join(" ".join(p.extract_text() for p in reader.pages).split())


# --------------------------------------------------------------------------- round trip


def test_measure_trim_rebuild_shows_current_length(tmp_path: Path, capsys) -> None:
    """Round trip (issue 6): packet -> measure -> trim -> packet. Current length = cut minus
    trims (issue 6 definition); expected texts from units.format_length, checked on the label
    through zxing-cpp and pypdf and on the record page."""
    spec = small_spec(tmp_path / "club")
    out = tmp_path / "club" / "out"
    first = build(spec, out, built_at=T1, model="closed_form")
    store = default_store(spec)
    assert store == tmp_path / "club" / "club.records.sqlite" and store.is_file()
    assert not list(out.glob("*.sqlite"))  # the store is beside the spec, not in out/
    assert first.manifest is not None and first.manifest.revision == 1
    cut = first.manifest.elements["K01-40m"].cut_leg_m
    assert cut is not None

    s = ["--store", str(store)]
    assert main(["measure", "K01-40m", "--dip", "6.98MHz", "--swr", "1.7", "--note", "gusty",
                 *s]) == 0
    assert main(["trim", "K01-40m", "--removed", "35mm", *s]) == 0
    assert main(["trim", "K01-40m-B", "--removed", "10mm", *s]) == 0
    capsys.readouterr()

    assert main(["packet", str(spec), "-o", str(out), "--model", "closed_form"]) == 0
    report = capsys.readouterr().out
    assert re.search(r"K01-40m\s+changed", report) and "revision 2 (previous 1)" in report
    now_a, now_b = cut - 0.035, cut - 0.045
    units = "metric"
    payloads = [p for p in qr_texts(out / "labels.pdf") if p.startswith("K01-40M-")]
    assert sorted(payloads) == ["K01-40M-A", "K01-40M-B"]  # the leg ID alone, in capitals
    text = pdf_text(out / "labels.pdf")
    for now in (now_a, now_b):
        assert f"NOW {format_length(now, units)}" in text.replace("\n", " ")
    page = (out / "site" / page_name("K01-40m")).read_text(encoding="utf-8")
    assert format_frequency(6.98e6) in page and "gusty" in page and "1.70" in page
    assert page.count("<td>removed</td>") == 2
    assert f'id="K01-40m-A-now">{now_a:.3f} m<' in page
    assert f'id="K01-40m-B-now">{now_b:.3f} m<' in page
    with rec.open_store(store) as st:
        assert rec.integrity_check(st) == ["ok"]  # SQLite's own check
        prints = rec.element_history(st, "K01-40m").prints
    assert {(p.revision, p.kind) for p in prints} == {(1, "sheet"), (1, "label"),
                                                       (2, "sheet"), (2, "label")}


def test_unchanged_rebuild_keeps_the_revision(tmp_path: Path) -> None:
    """Revision rule of issue 6 item 3 (common practice for document control)."""
    spec = small_spec(tmp_path)
    out = tmp_path / "out"
    a = build(spec, out, built_at=T1, model="closed_form")
    b = build(spec, out, built_at=T2, model="closed_form")
    assert a.manifest and b.manifest and a.manifest.revision == b.manifest.revision == 1
    assert b.diff is not None and b.diff.to_print == ()
    with rec.open_store(default_store(spec)) as st:
        n = len(rec.element_history(st, "K01-40m").prints)
    assert n == 2  # sheet and label once, not again for the identical rebuild


# --------------------------------------------------------------------------- adding a band


def test_adding_60m_to_the_fan_flags_others_and_changed_only_writes_them(tmp_path: Path) -> None:
    """Adding a 60 m element to the 75/40 fan (issue 6 validation). The shift reported for the
    existing wire follows the proportional rule f*L = const (common practice), recomputed here
    from the two packets' predicted lengths; the method of moments models the interaction."""
    folder = tmp_path / "club"
    out = folder / "out"
    spec = small_spec(folder)
    first = build(spec, out, built_at=T1)
    with rec.open_store(default_store(spec)) as st:  # the fan kits are cut already
        for eid in ("K01-40m", "K01-75m", "K02-40m", "K02-75m"):
            rec.confirm_cut(st, eid, ("A", "B"), datetime(2027, 3, 1, 12, tzinfo=UTC))
    spec = small_spec(folder, sixty_in_fan=True, start_cell=3)
    second = build(spec, out, built_at=T2, changed_only=True)
    diff, m = second.diff, second.manifest
    assert diff is not None and m is not None and m.revision == 2
    assert diff.new == ("K01-60m-us", "K02-60m-us")
    fan_old = {"K01-40m", "K01-75m", "K02-40m", "K02-75m"}
    assert set(diff.changed) == fan_old and diff.unchanged == ("K03-60m-us",)
    old = {e.element_id: e.cut for e in first.packet.entries}
    new = {e.element_id: e.cut for e in second.packet.entries}
    moved = {r.element_id: r for r in diff.recheck}
    for eid in fan_old:
        expected = new[eid].predicted_leg_m / old[eid].predicted_leg_m - 1.0
        if abs(expected) > 0.003:
            assert moved[eid].fraction == pytest.approx(expected, rel=1e-9)
            assert moved[eid].shift_hz == pytest.approx(expected * 7.15e6 if "40m" in eid
                                                        else expected * 3.9e6, rel=1e-9)
        else:
            assert eid not in moved
    assert moved, "the interaction should move at least one existing element by > 0.3 %"
    assert "re-check on the analyzer" in second.report

    written = {p.name for p in out.iterdir()}
    assert (out / "bom" / "day.csv").is_file()  # the day's CSV bill, rewritten with every build
    assert {"sheets-r2-changed.pdf", "labels-r2-changed.pdf", "sheets.pdf", "labels.pdf",
            "manifest.json", "site", "bom"} == written
    # Labels: only the new elements' (the cut fan legs keep their labels: as cut, unchanged).
    legs = set(qr_texts(out / "labels-r2-changed.pdf"))
    assert legs == {f"{e}-{leg}".upper() for e in diff.new for leg in "AB"}
    sheets = pdf_text(out / "sheets-r2-changed.pdf")
    assert "Kit K01" in sheets and "Kit K02" in sheets and "Kit K03" not in sheets
    assert "Kit K03" in pdf_text(out / "sheets.pdf")  # the earlier full file, kept
    stored = read_manifest(out / "manifest.json")
    assert stored is not None and any("changed-only" in n for n in stored.notes)
    (note,) = [n for n in stored.notes if n.startswith("changed-only")]
    assert note == ("changed-only build: sheets-r2-changed.pdf and labels-r2-changed.pdf hold "
                    "only what changed (see 'reprinted'); bom/ rewritten in full")
    assert stored.elements["K03-60m-us"].files == ("sheets.pdf", "labels.pdf")
    assert stored.elements["K01-60m-us"].files == ("sheets-r2-changed.pdf",
                                                   "labels-r2-changed.pdf")
    # Labels start at the spec's start_cell: count cells by QR position on page 1 (pypdfium2).
    assert _first_label_cell(out / "labels-r2-changed.pdf") == 3


def _first_label_cell(pdf: Path) -> int:
    """Index of the first used cell on page 1 (cells numbered across, then down), from the
    decoded QR positions and the label stock's cell grid."""
    from buildsheet.calc.labels import resolve_stock

    stock = resolve_stock("sheet-letter", "labels.stock")
    doc = pdfium.PdfDocument(str(pdf))
    try:
        page = doc[0]
        scale = 6
        img = page.render(scale=scale).to_pil().convert("L")
    finally:
        doc.close()
    px_per_mm = scale * 72 / 25.4
    cells = []
    for r in zxingcpp.read_barcodes(img, formats=zxingcpp.BarcodeFormat.QRCode):
        x = (r.position.top_left.x + r.position.bottom_right.x) / 2 / px_per_mm
        y = (r.position.top_left.y + r.position.bottom_right.y) / 2 / px_per_mm
        for i in range(stock.cells_per_page):
            left, top = stock.cell_origin(i)
            if left <= x <= left + stock.label_width and top <= y <= top + stock.label_height:
                cells.append(i)
    return min(cells)


# --------------------------------------------------------------------------- QR -> pages


@pytest.mark.parametrize("template", [
    None,
    "https://club.example.org/antennas/{element}.html",
    "https://club.example.org/{kit}/{leg}.html",
])
def test_every_label_qr_leads_to_a_generated_page(tmp_path: Path, template: str | None) -> None:
    """Every QR code on the labels pages (zxing-cpp) resolves to a page in site/: for a URL the
    path's file name exists (RFC 3986 path, percent-decoded); without a URL the code is a leg ID
    (in capitals) whose element page exists and shows the band and frequency."""
    spec = small_spec(tmp_path, record_url=template)
    result = build(spec, tmp_path / "out", built_at=T1, model="closed_form")
    site = tmp_path / "out" / "site"
    found = qr_texts(tmp_path / "out" / "labels.pdf")
    assert len(found) == 2 * len(result.packet.entries)
    entries = {e.element_id: e for e in result.packet.entries}
    for text in found:
        if template:
            url = urllib.parse.urlsplit(text)
            assert url.scheme == "https" and url.netloc == "club.example.org"
            name = urllib.parse.unquote(url.path.rsplit("/", 1)[-1])
            assert (site / name).is_file(), name
            eid = name.removesuffix(".html").removesuffix("-A").removesuffix("-B")
            assert eid in (site / name).read_text(encoding="utf-8")
        else:
            # the leg ID in capitals (QR alphanumeric mode); IDs are read in any case
            by_case = {e.upper(): e for e in entries}
            eid = by_case[text.removesuffix("-A").removesuffix("-B")]
            assert text in (f"{eid}-A".upper(), f"{eid}-B".upper())
            page = (site / page_name(eid)).read_text(encoding="utf-8")
            cut = entries[eid].cut
            assert format_frequency(cut.element.frequency_hz) in page
            assert f"{cut.cut_leg_m:.3f} m" in page  # the prescribed cut (not cut yet)


# --------------------------------------------------------------------------- bad input


def _snapshot(store: Path) -> str:
    with rec.open_store(store, create=False) as st:
        return json.dumps(exchange.export_json(st), sort_keys=True)


@pytest.mark.parametrize("argv, words", [
    (["measure", "K09-40m", "--dip", "7.1MHz"], "unknown element 'K09-40m'; nearest: K02-40m, K01-40m"),
    (["measure", "K01-40m", "--dip", "7.1"], "expected a number with a unit"),
    (["measure", "K01-40m", "--dip", "14.2MHz"], "far outside the 40m band"),
    (["measure", "K01-40m", "--dip", "7.1MHz", "--swr", "0.8"], "SWR is 1 or more"),
    (["trim", "K01-40m", "--removed=-5mm"], "must be positive"),
    (["trim", "K01-40m", "--removed", "30m"], "cannot remove 30000 mm"),
    (["trim", "K01-40m", "--removed", "5 furlongs"], "--removed"),
    (["trim", "K01-40m", "--removed", "5mm", "--added", "5mm"], "exactly one of"),
    (["import", "{nowhere}/missing.json"], "cannot read"),
])
def test_bad_record_input_exits_1_and_changes_nothing(tmp_path: Path, capsys, argv, words):
    """Messages name the problem (issue 6 bad-input list); the store is compared before and
    after through its JSON export."""
    spec = small_spec(tmp_path)
    build(spec, tmp_path / "out", built_at=T1, model="closed_form")
    store = default_store(spec)
    before = _snapshot(store)
    capsys.readouterr()
    argv = [a.replace("{nowhere}", str(tmp_path)) for a in argv]
    usage = words == "exactly one of"  # conflicting options: a usage error (exit 2)
    assert main([*argv, "--store", str(store)]) == (2 if usage else 1)
    err = capsys.readouterr().err
    assert words in err and "Traceback" not in err and err.count("\n") <= 2
    assert _snapshot(store) == before


def test_corrupt_store_stops_the_packet_and_changes_nothing(tmp_path: Path, capsys) -> None:
    """A damaged database file (common practice: overwrite the header page) is refused by the
    packet build and the record commands; the file and the previous packet stay as they were."""
    spec = small_spec(tmp_path)
    out = tmp_path / "out"
    build(spec, out, built_at=T1, model="closed_form")
    store = default_store(spec)
    for extra in store.parent.glob(store.name + "-*"):  # WAL side files of a closed store
        assert extra.stat().st_size == 0 or extra.name.endswith("-wal")
    data = bytearray(store.read_bytes())
    data[:100] = b"not a database, " * 6 + b"xxxx"
    store.write_bytes(bytes(data))
    packet_before = {p.name: p.read_bytes() for p in out.iterdir() if p.is_file()}
    capsys.readouterr()
    assert main(["packet", str(spec), "-o", str(out), "--model", "closed_form"]) == 1
    assert main(["measure", "K01-40m", "--dip", "7.1MHz", "--store", str(store)]) == 1
    err = capsys.readouterr().err
    assert "not a readable record store" in err and "Traceback" not in err
    assert store.read_bytes() == bytes(data)
    assert {p.name: p.read_bytes() for p in out.iterdir() if p.is_file()} == packet_before


def test_record_commands_through_the_main_cli(tmp_path: Path, capsys) -> None:
    """export -> import into a new file restores the same records (round trip)."""
    spec = small_spec(tmp_path)
    build(spec, tmp_path / "out", built_at=T1, model="closed_form")
    store = default_store(spec)
    assert main(["measure", "K03-60m-us", "--dip", "5.33MHz", "--store", str(store)]) == 0
    backup = tmp_path / "backup.json"
    assert main(["export", "-o", str(backup), "--store", str(store)]) == 0
    fresh = tmp_path / "restored.records.sqlite"
    assert main(["import", str(backup), "--store", str(fresh)]) == 0
    assert "1 measurements" in capsys.readouterr().out
    a, b = json.loads(_snapshot(store)), json.loads(_snapshot(fresh))
    assert a == b
