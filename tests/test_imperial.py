"""An imperial packet prints every length primary in feet and inches (issue 14 part 10): the
demo spec switched to imperial, its sheets read back by text extraction (pypdf), with no metric
figure outside parentheses."""

from __future__ import annotations

import io
import re

from pypdf import PdfReader

from buildsheet.cli.main import demo_spec_text
from buildsheet.packet import build_packet
from buildsheet.render.sheets import render_sheets
from buildsheet.spec.reader import load_spec

#: A metric length: a decimal number of metres, or millimetres/centimetres, or whole metres other
#: than an amateur band's name ("40 m", "75/80 m": ITU band names, common practice).
BANDS = "160|80|75|60|40|30|20|17|15|12|10|6"
METRIC = re.compile(rf"\d\.\d+\s?m\b|\d\s?(?:mm|cm|km)\b|(?<![\d./])(?!(?:{BANDS})\s?m\b)\d+\s?m\b")


def outside_parentheses(text: str) -> str:
    """The text with every (possibly nested) bracketed part removed."""
    out, depth = [], 0
    for ch in text:
        if ch == "(":
            depth += 1
        elif ch == ")":
            depth = max(0, depth - 1)
        elif depth == 0:
            out.append(ch)
    return "".join(out)


def test_imperial_packet_has_no_bare_metric_length(tmp_path):
    text = demo_spec_text().replace('units = "metric"', 'units = "imperial"')
    assert 'units = "imperial"' in text
    path = tmp_path / "demo.toml"
    path.write_text(text, encoding="utf-8")
    packet = build_packet(load_spec(path), built_at="2027-03-01T00:00:00Z", model="closed_form")
    buf = io.BytesIO()
    render_sheets(packet, buf)
    found = []
    for n, page in enumerate(PdfReader(io.BytesIO(buf.getvalue())).pages, start=1):
        for line in page.extract_text().splitlines():
            bare = outside_parentheses(line)
            found += [(n, m.group(0), line) for m in METRIC.finditer(bare)]
    assert not found, found[:10]
    # shopping lengths in whole feet on the day's bill (common practice: wire by the foot)
    bill = next(" ".join(p.extract_text().split()) for p in PdfReader(io.BytesIO(buf.getvalue())).pages
                if "Bill of materials for the day" in p.extract_text() and "Category" in p.extract_text())
    assert re.search(r"\b\d+ ft \(\d+ m\)", bill)


def test_imperial_record_page_and_commands_put_feet_first(tmp_path, capsys):
    # The record page and the record commands follow the packet's primary unit system too:
    # every length cell of the page reads feet and inches first, metric after it; the `cut` and
    # `trim` answers likewise (a bare metric length only inside parentheses).
    import html

    from buildsheet.cli.main import main

    text = demo_spec_text().replace('units = "metric"', 'units = "imperial"')
    spec = tmp_path / "demo.toml"
    spec.write_text(text, encoding="utf-8")
    out = tmp_path / "out"
    assert main(["packet", str(spec), "-o", str(out), "--model", "closed_form"]) == 0
    capsys.readouterr()
    assert main(["cut", "K01-40m", "--spec", str(spec)]) == 0
    assert main(["trim", "K01-40m", "--removed", "20mm", "--spec", str(spec)]) == 0
    assert main(["cut", "k01-40M-a", "--spec", str(spec)]) == 0  # typed in any case
    said = capsys.readouterr().out
    assert "K01-40m-A: already confirmed as cut" in said  # named as the spec writes it
    assert "ft" in said
    bare = [(m.group(0), line) for line in said.splitlines()
            for m in METRIC.finditer(outside_parentheses(line))]
    assert not bare, bare
    assert main(["packet", str(spec), "-o", str(out), "--model", "closed_form"]) == 0
    page = html.unescape((out / "site" / "K01-40m.html").read_text(encoding="utf-8"))
    cells = re.findall(r'<td class="num[^"]*">(.*?)</td>', page, flags=re.DOTALL)
    lengths = [re.sub(r"<[^>]+>", "|", c) for c in cells if re.search(r"\d (?:ft|in)\b", c)]
    assert lengths
    for cell in lengths:
        first = next(part for part in cell.split("|") if part.strip())
        assert "ft" in first or "in" in first, cell
        assert not METRIC.search(outside_parentheses(first)), cell
