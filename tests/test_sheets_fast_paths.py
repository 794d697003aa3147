"""The sheets' fast paths print the same thing as the slow ones (issue 12).

Pre-wrapped table cells break where reportlab's own Paragraph breaks them; paragraphs laid
out once per document and split across a page keep every word; design blocks placed as PDF
forms leave each page's text as it was and make the file smaller.
"""

from __future__ import annotations

import io

import pytest
from hypothesis import given
from hypothesis import strategies as st
from pypdf import PdfReader
from reportlab.lib.styles import ParagraphStyle
from reportlab.pdfbase.pdfmetrics import stringWidth
from reportlab.platypus import Paragraph, SimpleDocTemplate

from buildsheet.render.cells import CELL_PADDING, CachedParagraph, wrap_cell

WORDS = st.text(alphabet="abcdefghijklmnopqrstuvwxyz0123456789-.,()", min_size=1, max_size=12)


def _paragraph_lines(text: str, font: str, size: float, width: float) -> list[str]:
    """Lines as reportlab's Paragraph breaks plain text (the reference)."""
    p = Paragraph(text, ParagraphStyle("t", fontName=font, fontSize=size, leading=size * 1.2,
                                       splitLongWords=0))
    p.wrap(width, 10_000)
    return [" ".join(words) for _, words in p.blPara.lines]


@given(st.lists(WORDS, min_size=1, max_size=30), st.sampled_from([8.0, 8.5, 10.0, 11.0]),
       st.floats(min_value=60, max_value=300), st.sampled_from(["Helvetica", "Helvetica-Bold"]))
def test_cell_lines_match_reportlab_paragraph_breaks(words, size, width, font):
    text = " ".join(words)
    if max(stringWidth(w, font, size) for w in words) > width:
        return  # long words: the next test
    got = wrap_cell(text, font, size, width + CELL_PADDING).split("\n")
    assert got == _paragraph_lines(text, font, size, width)


@given(st.text(alphabet="abcdefghij", min_size=30, max_size=80))
def test_long_word_is_split_to_fit_and_kept_whole(word):
    lines = wrap_cell(word, "Helvetica", 8, 40 + CELL_PADDING).split("\n")
    assert "".join(lines) == word
    assert all(stringWidth(line, "Helvetica", 8) <= 40 for line in lines)
    assert len(lines) > 1


def test_cell_drops_control_characters_and_keeps_newlines():
    assert wrap_cell("a\x07b\nc", "Helvetica", 8, 200) == "ab\nc"


def _text(pdf: bytes) -> list[str]:
    return [" ".join(p.extract_text().split()) for p in PdfReader(io.BytesIO(pdf)).pages]


@pytest.mark.parametrize("cls", [Paragraph, CachedParagraph])
def test_split_paragraphs_keep_every_word(cls):
    """The same long paragraph three times, split across pages: every word printed once per
    copy, in order, with the cached layout as with reportlab's own."""
    words = [f"w{i:03d}" for i in range(900)]
    style = ParagraphStyle("b", fontName="Helvetica", fontSize=9, leading=11)
    out = io.BytesIO()
    SimpleDocTemplate(out, invariant=1).build([cls(" ".join(words), style) for _ in range(3)])
    printed = " ".join(_text(out.getvalue())).split()
    assert printed == words * 3


def test_shared_design_blocks_keep_each_page_and_shrink_the_file(demo_packet):
    from buildsheet.render.sheets import render_sheets, sheet_story

    packet = demo_packet.packet
    plain, shared = io.BytesIO(), io.BytesIO()
    render_sheets(packet, plain, sheet_story(packet, share_blocks=False))
    render_sheets(packet, shared, sheet_story(packet))
    assert _text(plain.getvalue()) == _text(shared.getvalue())
    assert len(shared.getvalue()) < 0.9 * len(plain.getvalue())
