"""Render winder labels to PDF (reportlab): black on white, no hairlines, text >= 7 pt.

Each copy of the QR symbol is drawn as filled vector rectangles (one per horizontal run of dark
modules) from the symbol's matrix, so it stays sharp at any printer resolution. Geometry comes from
``buildsheet.calc.labels`` in mm and is converted to PDF points here.
"""

from __future__ import annotations

import io
import os
from collections.abc import Sequence
from dataclasses import dataclass
from typing import BinaryIO

from reportlab.lib.units import mm
from reportlab.pdfbase.pdfmetrics import getFont, stringWidth
from reportlab.pdfgen.canvas import Canvas

from buildsheet.calc.label_qr import Symbol
from buildsheet.calc.labels import (
    LEADING,
    MIN_BAND_PT,
    MIN_TEXT_PT,
    LabelContent,
    LabelLayout,
    LabelStock,
    check_ec,
    check_fit,
    check_start_cell,
    label_options,
    pages_needed,
    version_room,
)
from buildsheet.errors import BuildError, Problem, SpecError
from buildsheet.store.files import write_output

REGULAR = "Helvetica"
BOLD = "Helvetica-Bold"


@dataclass(frozen=True)
class _Line:
    """One line of label text as requested: font, preferred and minimum size (pt)."""

    text: str
    font: str
    size: float
    min_size: float = MIN_TEXT_PT
    wrap: bool = False  # may break at spaces when too wide at min_size


@dataclass(frozen=True)
class SetLine:
    """One line of text as set: font, size (pt) and text."""

    text: str
    font: str
    size: float


def label_lines(label: LabelContent) -> list[_Line]:
    """The text lines of a label, most important first, with preferred sizes (pt)."""
    lines = [
        _Line(label.band_name, BOLD, 24.0, MIN_BAND_PT),
        _Line(f"LEG {label.leg}", BOLD, 12.0),
        _Line(label.frequency_text, REGULAR, 10.0),
        *((_Line(f"NOW {label.current_length_text}", BOLD, 11.0, wrap=True),
           _Line(f"cut {label.cut_length_text.split(' / ')[0]}", REGULAR, 7.0))
          if label.current_length_text else
          (_Line(f"CUT {label.cut_length_text}", BOLD, 11.0, wrap=True),)),
        _Line(label.leg_id, BOLD, 9.0),
        _Line(f"KIT {label.kit_id}", REGULAR, 8.0),
    ]
    lines += [_Line(text, REGULAR, 7.0, wrap=True) for text in label.extra]
    return lines


def _wrap(text: str, font: str, size: float, width: float) -> list[str] | None:
    """Greedy word wrap of each " / " segment; None if a single word is too wide."""
    out: list[str] = []
    for segment in text.split(" / "):
        lines: list[str] = []
        for word in segment.split(" "):
            if stringWidth(word, font, size) > width:
                return None
            if lines and stringWidth(lines[-1] + " " + word, font, size) <= width:
                lines[-1] = lines[-1] + " " + word
            else:
                lines.append(word)
        out += lines
    return out


def _fit_line(line: _Line, scale: float, width: float) -> list[SetLine] | None:
    """Set one line at ``scale`` x its preferred size, shrinking (and for wrap lines breaking
    at " / " first, then at spaces at the minimum size) until it fits ``width`` pt."""
    size = max(line.min_size, line.size * scale)
    while True:
        if stringWidth(line.text, line.font, size) <= width:
            return [SetLine(line.text, line.font, size)]
        segments = line.text.split(" / ")
        if (
            line.wrap
            and len(segments) > 1
            and all(stringWidth(seg, line.font, size) <= width for seg in segments)
        ):
            return [SetLine(seg, line.font, size) for seg in segments]
        if size <= line.min_size:
            break
        size = max(line.min_size, size - 0.5)
    parts = _wrap(line.text, line.font, size, width) if line.wrap else None
    return None if parts is None else [SetLine(p, line.font, size) for p in parts]


def set_text(lines: Sequence[_Line], width: float, height: float) -> list[SetLine] | None:
    """Fit lines into width x height pt, shrinking sizes toward their minimums; None if never."""
    for step in range(21):
        out: list[SetLine] = []
        for line in lines:
            fitted = _fit_line(line, 1.0 - step * 0.05, width)
            if fitted is None:
                return None
            out += fitted
        if sum(s.size * LEADING for s in out) <= height:
            return out
    return None


def symbol_rects(matrix: Sequence[bytes | bytearray]) -> list[tuple[int, int, int, int]]:
    """Dark modules as rectangles (column, row, width, height) in modules, row 0 at the top.

    Horizontal runs of dark modules are merged, then identical runs in consecutive rows.
    """
    done: list[tuple[int, int, int, int]] = []
    open_runs: dict[tuple[int, int], int] = {}  # (start, end) -> first row
    for r, row in enumerate([*matrix, b""]):  # an empty last row closes every run
        runs: set[tuple[int, int]] = set()
        c, n = 0, len(row)
        while c < n:
            if row[c] & 1:
                start = c
                while c < n and row[c] & 1:
                    c += 1
                runs.add((start, c))
            else:
                c += 1
        for run in sorted(set(open_runs) - runs):
            first = open_runs.pop(run)
            done.append((run[0], first, run[1] - run[0], r - first))
        for run in runs - set(open_runs):
            open_runs[run] = r
    return sorted(done, key=lambda t: (t[1], t[0]))


def turned(matrix: Sequence[bytes | bytearray], turns: int) -> tuple[bytes, ...]:
    """The symbol matrix turned ``turns`` quarter turns clockwise (row 0 at the top)."""
    rows = [bytes(row) for row in matrix]
    for _ in range(turns % 4):
        rows = [bytes(col) for col in zip(*reversed(rows), strict=True)]
    return tuple(rows)


def _draw_symbol(
    canvas: Canvas, matrix: Sequence[bytes | bytearray], x: float, top: float, module: float
) -> None:
    """Fill the symbol's dark modules as one path of rectangles (ISO 32000-1 "re" and "f").

    (x, top) is the symbol's top-left corner (quiet zone excluded) and ``module`` its size, pt.
    Written as literal operators: reportlab's path object is ~10x slower for ~400 rectangles.
    """
    ops = [
        f"{x + c * module:.3f} {top - (r + h) * module:.3f} {w * module:.3f} {h * module:.3f} re"
        for c, r, w, h in symbol_rects(matrix)
    ]
    canvas.addLiteral("\n".join([*ops, "f"]))


def _draw_label(canvas: Canvas, plan: LabelPlan, left: float, top: float) -> None:
    """Draw one label whose top-left corner is at (left, top) in PDF points."""
    layout, set_lines = plan.layout, plan.lines
    qz = layout.quiet_zone * mm
    for copy, box in enumerate(layout.symbols):
        _draw_symbol(canvas, turned(plan.matrix, layout.turn(copy)), left + box.x * mm + qz,
                     top - box.y * mm - qz, layout.module * mm)
    block = sum(s.size * LEADING for s in set_lines)
    box_top = top - layout.text.y * mm
    y = box_top - (layout.text.height * mm - block) / 2  # centred vertically
    x = left + layout.text.x * mm
    for s in set_lines:
        ascent = getFont(s.font).face.ascent / 1000.0 * s.size
        gap = (LEADING - 1.0) * s.size / 2
        canvas.setFont(s.font, s.size)
        canvas.drawString(x, y - gap - ascent, s.text)
        y -= s.size * LEADING


@dataclass(frozen=True)
class LabelPlan:
    """Everything needed to draw one label: layout (mm, with every copy of the symbol), set
    text, the QR matrix and its level."""

    layout: LabelLayout
    lines: list[SetLine]
    matrix: tuple[bytearray, ...]
    error: str  # error correction level of the symbol, "H" or "Q"


def plan_labels(labels: Sequence[LabelContent], stock: LabelStock, *, start_cell: int = 0,
                ec: str = "q", where: str = "labels.stock") -> list[LabelPlan]:
    """Layout, QR symbol and set text of every label, exactly as :func:`render_labels` draws
    them; raise SpecError naming each label that cannot fit (``buildsheet check`` runs this).

    Each label takes the first option of :func:`label_options` whose text fits: as many copies
    of the symbol as fit (up to six), level H where it fits, else Q (never below ``ec``); each
    symbol is built once per build. ``where`` locates problems (file and key of the spec's stock).
    """
    level = check_ec(ec)
    check_start_cell(stock, start_cell, where=where.replace("labels.stock", "labels.start_cell"))
    room = version_room(stock)
    built: dict[tuple[str, str, int], Symbol] = {}  # labels sharing a payload share it
    plans: list[LabelPlan] = []
    problems: list[Problem] = []
    for i, label in enumerate(labels):
        layout = None
        for layout, symbol in label_options(label.payload, stock, level, room, built):
            set_lines = set_text(label_lines(label), layout.text.width * mm,
                                 layout.text.height * mm)
            if set_lines is not None:
                break
        if layout is None:
            try:
                check_fit(stock, [label.payload], ec=level, where=f"{where} (label {label.leg_id})")
            except SpecError as exc:
                problems += [p for p in exc.problems if p not in problems]
            continue
        if set_lines is None:
            problems.append(
                Problem(
                    f"{where} (label {i}, {label.leg_id})",
                    f"the text does not fit a {layout.text.width:.1f} x {layout.text.height:.1f} mm "
                    f"text area of stock {stock.name!r} at {MIN_TEXT_PT:g} pt or more (band "
                    f"{MIN_BAND_PT:g} pt); use a larger label or shorter extra lines",
                )
            )
        else:
            plans.append(LabelPlan(layout, set_lines, symbol.matrix, symbol.error))
    if problems:
        raise SpecError(problems)
    return plans


def label_summary(plans: Sequence[LabelPlan], stock: LabelStock, code: str) -> str:
    """One line on what the labels carry: how many, the stock, the QR code's content, copies
    per label and error correction levels."""
    if not plans:
        return f"labels: none (stock {stock.name})"
    copies = sorted({p.layout.copies for p in plans})
    shown = (f"{copies[0]}" if len(copies) == 1 else f"{copies[0]} to {copies[-1]}")
    levels = "/".join(sorted({p.error for p in plans}, reverse=True))
    what = "the leg ID" if code == "id" else "the record's link"
    line = (f"labels: {len(plans)} on stock {stock.name}; each QR code holds {what} "
            f"(labels.code = {code!r}), {shown} "
            f"cop{'y' if copies[-1] == 1 else 'ies'} per label, error correction {levels}")
    if code != "id" and copies[0] < 4:
        line += ('; labels.code = "id" fits more copies, which survive scuffs better '
                 "(README: what the QR codes hold)")
    return line


def render_labels(
    labels: Sequence[LabelContent],
    stock: LabelStock,
    out: str | os.PathLike[str] | BinaryIO,
    *,
    start_cell: int = 0,
    title: str = "",
    ec: str = "q",
    where: str = "labels.stock",
) -> int:
    """Write the labels PDF (labels in the order given) and return the number of pages.

    ``start_cell`` skips that many cells of the first page (a partly used sheet). ``title``
    becomes the PDF document title. ``ec`` is the lowest error correction level allowed (each
    label gets H where it fits). ``where`` locates fit problems in SpecErrors (the spec's file
    and stock key). A path is written atomically; a stream gets the bytes.
    """
    if not labels:
        raise BuildError([Problem("labels", "no labels to render")])
    plans = plan_labels(labels, stock, start_cell=start_cell, ec=ec, where=where)

    buf = io.BytesIO()
    page_size = (stock.page_width * mm, stock.page_height * mm)
    canvas = Canvas(buf, pagesize=page_size, invariant=1, pageCompression=1)
    canvas.setTitle(title or "Winder labels")
    canvas.setCreator("buildsheet")
    canvas.setSubject(f"winder labels on stock {stock.name}")
    canvas.setFillGray(0)
    cell = start_cell
    for plan in plans:
        if cell == stock.cells_per_page:
            canvas.showPage()
            canvas.setFillGray(0)
            cell = 0
        left_mm, top_mm = stock.cell_origin(cell)
        _draw_label(canvas, plan, left_mm * mm, (stock.page_height - top_mm) * mm)
        cell += 1
    canvas.showPage()
    canvas.save()
    write_output(buf.getvalue(), out)
    return pages_needed(stock, len(labels), start_cell)


__all__ = ["LabelPlan", "SetLine", "label_lines", "label_summary", "plan_labels", "render_labels", "set_text",
           "symbol_rects", "turned"]
