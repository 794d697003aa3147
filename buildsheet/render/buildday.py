"""Build-day pages as reportlab platypus flowables: bill of materials, spool cut plan, cutting
station lists (one page per spool) and measurement log forms.

Pure builders: data in, a list of flowables out; the packet assembler adds them to its
document. Nothing physical is computed here. Lengths are shown through a formatter callable
``fmt(m) -> str`` (pass ``buildsheet.spec.units.format_length`` bound to a unit system); the small
defaults below are used when none is given. Black on white, text at least 8 pt.
"""

from __future__ import annotations

from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass
from fractions import Fraction
from functools import lru_cache

from reportlab.lib import colors
from reportlab.lib.enums import TA_LEFT
from reportlab.lib.styles import ParagraphStyle
from reportlab.lib.units import mm
from reportlab.platypus import (
    Flowable,
    KeepTogether,
    PageBreak,
    Paragraph,
    Spacer,
    Table,
    TableStyle,
)

from buildsheet.calc.bom import BomLine
from buildsheet.calc.safety import STATION_CAUTIONS
from buildsheet.calc.stock import SpoolPlan, SpoolUse
from buildsheet.render.cells import CachedParagraph, wrap_cell
from buildsheet.render.markup import plain
from buildsheet.spec.units import feet_inches_eighths, format_metric

LengthFormat = Callable[[float], str]

#: Usable width assumed for tables, points (fits A4 and US Letter with 25 mm margins).
DEFAULT_WIDTH: float = 158 * mm

#: The short caution list (its one home is buildsheet.calc.safety).
SAFETY_LINES: tuple[str, ...] = STATION_CAUTIONS

_BODY = ParagraphStyle("bd-body", fontName="Helvetica", fontSize=9, leading=11,
                       textColor=colors.black, alignment=TA_LEFT)
_SMALL = ParagraphStyle("bd-small", parent=_BODY, fontSize=8, leading=9.6)
_CELL = ParagraphStyle("bd-cell", parent=_BODY, fontSize=8.5, leading=10)
_H1 = ParagraphStyle("bd-h1", parent=_BODY, fontName="Helvetica-Bold", fontSize=15,
                     leading=18, spaceAfter=4)
_H2 = ParagraphStyle("bd-h2", parent=_BODY, fontName="Helvetica-Bold", fontSize=11,
                     leading=14, spaceBefore=6, spaceAfter=3)
_BIG = ParagraphStyle("bd-big", parent=_BODY, fontSize=11, leading=13)
_BIG_BOLD = ParagraphStyle("bd-bigb", parent=_BIG, fontName="Helvetica-Bold")


# --------------------------------------------------------------------------- formatting


#: Metric length, "20.36 m" or "235 mm" (the one formatter in buildsheet.spec.units).
default_metric = format_metric


def default_feet_inches(m: float) -> str:
    """Feet and inches to the nearest 1/8 in, always with an inch part ("1 ft 0 in"), for
    mark columns that read down evenly (input in m; split by buildsheet.spec.units)."""
    sign, feet, inches, eighth = feet_inches_eighths(m)
    frac = str(Fraction(eighth, 8)) if eighth else ""
    inch_text = f"{inches} {frac}" if frac else f"{inches}"
    text = f"{feet} ft {inch_text} in" if feet else f"{inch_text} in"
    return ("-" if sign < 0 and (feet or inches or eighth) else "") + text


def _p(text: str, style: ParagraphStyle = _CELL) -> Paragraph:
    """Paragraph of plain (escaped) text."""
    return CachedParagraph(plain(text), style)


class Cell:
    """Plain text for a table cell in a given style: laid out by :func:`_grid` as pre-wrapped
    lines (much faster than a Paragraph, same look); ``style`` gives font, size and leading."""

    __slots__ = ("style", "text")

    def __init__(self, text: object, style: ParagraphStyle = _CELL):
        self.text = text
        self.style = style


def _count(q: float) -> str:
    return f"{q:.0f}" if float(q).is_integer() else f"{q:g}"


def _pieces(q: float, unit: str) -> str:
    """A count with its unit: "1 pc", "4 pcs" (other units as given)."""
    if unit == "pcs" and q == 1:
        return "1 pc"
    return f"{_count(q)} {unit}"


def _font_runs(fonts: dict[tuple[int, int], tuple[str, float, float]]) -> list[tuple]:
    """FONT commands for cells set in their own font, one per run of rows in a column."""
    out: list[tuple] = []
    for (c, r), font in sorted(fonts.items()):
        last = out[-1] if out else None
        if last and last[1][0] == c and last[2][1] == r - 1 and last[3:] == font:
            out[-1] = ("FONT", last[1], (c, r), *font)
        else:
            out.append(("FONT", (c, r), (c, r), *font))
    return out


@lru_cache(maxsize=64)
def _head_style(font_size: float) -> ParagraphStyle:
    return ParagraphStyle(f"bd-head-{font_size:g}", parent=_CELL, fontName="Helvetica-Bold",
                          fontSize=font_size, leading=font_size * 1.2)


def _grid(data: list[list[object]], widths: Sequence[float], *, header_rows: int = 1,
          font_size: float = 8.5, row_height: float | None = None,
          right_cols: Sequence[int] = ()) -> Table:
    """Table with black rules, bold header (wrapped) repeated on each page. Header strings and
    :class:`Cell` values become pre-wrapped plain text in their style's font."""
    head = _head_style(font_size)
    style = [
        ("FONT", (0, 0), (-1, -1), "Helvetica", font_size),
        ("FONT", (0, 0), (-1, header_rows - 1), "Helvetica-Bold", font_size),
        ("TEXTCOLOR", (0, 0), (-1, -1), colors.black),
        ("GRID", (0, 0), (-1, -1), 0.5, colors.black),
        ("LINEBELOW", (0, header_rows - 1), (-1, header_rows - 1), 1.2, colors.black),
        ("VALIGN", (0, 0), (-1, -1), "MIDDLE"),
        ("TOPPADDING", (0, 0), (-1, -1), 2.5),
        ("BOTTOMPADDING", (0, 0), (-1, -1), 2.5),
    ]
    cells: list[list[object]] = []
    fonts: dict[tuple[int, int], tuple[str, float, float]] = {}  # (col, row) -> cell font
    for r, row in enumerate(data):
        out_row: list[object] = []
        for c, value in enumerate(row):
            if r < header_rows and isinstance(value, str):
                value = Cell(value, head)
            if isinstance(value, Cell):
                st = value.style
                value = wrap_cell(value.text, st.fontName, st.fontSize, widths[c])
                font = (st.fontName, st.fontSize, st.leading)
                if font != ("Helvetica-Bold" if r < header_rows else "Helvetica", font_size,
                            font_size * 1.2):
                    fonts[(c, r)] = font
            out_row.append(value)
        cells.append(out_row)
    style += _font_runs(fonts)
    t = Table(cells, colWidths=list(widths), repeatRows=header_rows,
              rowHeights=None if row_height is None else [None] * header_rows
              + [row_height] * (len(data) - header_rows))
    for c in right_cols:
        style.append(("ALIGN", (c, header_rows), (c, -1), "RIGHT"))
    t.setStyle(TableStyle(style))
    return t


class TickBox(Flowable):
    """An empty square to tick by hand (side in points)."""

    def __init__(self, side: float = 4 * mm):
        super().__init__()
        self.side = side
        self.width = self.height = side

    def wrap(self, availWidth: float, availHeight: float) -> tuple[float, float]:
        return self.side, self.side

    def draw(self) -> None:
        self.canv.setStrokeColor(colors.black)
        self.canv.setLineWidth(0.8)
        self.canv.rect(0, 0, self.side, self.side, stroke=1, fill=0)


def safety_flowables(cautions: Sequence[str] = SAFETY_LINES) -> list[Flowable]:
    """The usual cautions for masts, guy lines and stakes (common practice)."""
    out: list[Flowable] = [_p("Safety", _H2)]
    out += [_p(f"- {line}", _SMALL) for line in cautions]
    return out


# --------------------------------------------------------------------------- bill of materials


def bom_flowables(lines: Iterable[BomLine], *, title: str = "Bill of materials",
                  fmt: LengthFormat = default_metric, width: float = DEFAULT_WIDTH,
                  safety: bool = True, cautions: Sequence[str] = SAFETY_LINES) -> list[Flowable]:
    """BOM table (category, item, quantity, note); lengths through ``fmt``, counts as pcs."""
    rows: list[list[object]] = [["Category", "Item", "Quantity", "Note"]]
    for line in lines:
        qty = fmt(line.quantity) if line.unit == "m" else _pieces(line.quantity, line.unit)
        rows.append([Cell(line.category), Cell(line.item), qty, Cell(line.note, _SMALL)])
    w = [0.13 * width, 0.35 * width, 0.15 * width, 0.37 * width]
    out: list[Flowable] = [_p(title, _H1), _grid(rows, w, right_cols=(2,))]
    if safety:
        out += [Spacer(1, 4 * mm)] + safety_flowables(cautions)
    return out


# --------------------------------------------------------------------------- spool plan


def spool_plan_flowables(plan: SpoolPlan, *, title: str = "Spool cut plan",
                         fmt: LengthFormat = default_metric,
                         width: float = DEFAULT_WIDTH) -> list[Flowable]:
    """Day summary per material, the spools to open, unassigned cuts and what to buy."""
    out: list[Flowable] = [
        _p(title, _H1),
        _p(f"Every cut includes a cutting tolerance of {fmt(plan.tolerance_m)} on top of its "
           f"length. Marks run from the free end of each spool. The plan opens the fewest "
           f"spools and, among plans with as few, the shortest spools that hold the cuts. "
           f"Total remainder on opened spools: {fmt(plan.total_waste_m)}.", _BODY),
        _p("By material", _H2),
    ]
    rows: list[list[object]] = [["Material", "On hand", "Opened", "Lower bound", "Needed",
                                 "Remainder", "Plan"]]
    for m in plan.materials:
        how = {"exact": "exact (optimal)", "heuristic": "heuristic",
               "integer program": "integer program (stopped early)", "none": "-"}[m.method]
        if m.proven_optimal and m.method != "exact":
            how += ", meets bound"
        elif not m.proven_optimal and m.method != "none":
            how += f"; not proven: the bound is {m.lower_bound}"
        rows.append([Cell(m.material), str(m.spools_on_hand), str(m.spools_used),
                     str(m.lower_bound), fmt(m.needed_m), fmt(m.waste_m), Cell(how, _SMALL)])
    out.append(_grid(rows, [w * width for w in (0.2, 0.1, 0.1, 0.12, 0.16, 0.16, 0.16)],
                     right_cols=(1, 2, 3, 4, 5)))
    out.append(_p("Spools to open", _H2))
    rows = [["Spool", "Description", "Length", "Cuts", "Used", "Remainder"]]
    for s in plan.spools:
        rows.append([Cell(s.spool_id), Cell(s.title), fmt(s.length_m), str(len(s.cuts)),
                     fmt(s.used_m), fmt(s.remainder_m)])
    out.append(_grid(rows, [w * width for w in (0.17, 0.35, 0.12, 0.08, 0.14, 0.14)],
                     right_cols=(2, 3, 4, 5)))
    if plan.unassigned:
        out.append(_p("Not enough on hand: cuts without a spool", _H2))
        rows = [["Cut", "Material", "Length", "Label"]]
        for c in plan.unassigned:
            rows.append([Cell(c.cut_id), Cell(c.material), fmt(c.length_m), Cell(c.label)])
        out.append(_grid(rows, [w * width for w in (0.25, 0.2, 0.15, 0.4)], right_cols=(2,)))
        out.append(_p("To buy", _H2))
        rows = [["Material", "Short (with tolerance)", "Whole spools", "Note"]]
        for b in plan.to_buy:
            spools = ("-" if b.spools is None or b.spool_length_m is None
                      else f"{b.spools} x {fmt(b.spool_length_m)}")
            rows.append([Cell(b.material), fmt(b.short_m), spools, Cell(b.note, _SMALL)])
        out.append(_grid(rows, [w * width for w in (0.22, 0.2, 0.22, 0.36)]))
    return out


# --------------------------------------------------------------------------- station lists


def station_list_flowables(spool: SpoolUse, *, metric: LengthFormat = default_metric,
                           imperial: LengthFormat = default_feet_inches,
                           width: float = DEFAULT_WIDTH, station: str = "",
                           primary: str = "metric") -> list[Flowable]:
    """One page for the cutting table: the spool's cuts in order, a tick box each, the cut ID
    (element ID and leg), the length and the running mark in both systems, ``primary`` first."""
    first, second = (metric, imperial) if primary == "metric" else (imperial, metric)
    tol = (spool.cuts[0].mark_m - spool.cuts[0].start_m - spool.cuts[0].cut.length_m
           if spool.cuts else 0.0)
    head = f"Cutting station{(' ' + station) if station else ''}: spool {spool.spool_id}"
    out: list[Flowable] = [
        _p(head, _H1),
        _p(f"{spool.title}, {first(spool.length_m)} ({second(spool.length_m)}) of "
           f"{spool.material}", _BIG),
        Spacer(1, 2 * mm),
        _p("Measure from the free end of the spool. At each mark: check the "
           f"{'cord' if spool.material == 'cord' else 'wire'} for damage, cut, tag the "
           "piece with its ID, tick the box. Each piece includes "
           f"{first(tol)} cutting tolerance. Eye protection on while unspooling and cutting.",
           _BODY),
        Spacer(1, 3 * mm),
    ]
    heads = ("Mark at (m)", "Mark at (ft-in)")
    rows: list[list[object]] = [["Done", "#", "Cut ID", "Label", "Length",
                                 *(heads if primary == "metric" else heads[::-1])]]
    for n, pc in enumerate(spool.cuts, start=1):
        rows.append([TickBox(), str(n), Cell(pc.cut.cut_id, _BIG_BOLD), Cell(pc.cut.label),
                     first(pc.cut.length_m), first(pc.mark_m), f"({second(pc.mark_m)})"])
    table = _grid(rows, [w * width for w in (0.09, 0.05, 0.23, 0.17, 0.12, 0.13, 0.21)],
                  font_size=10, row_height=(9 if len(spool.cuts) <= 9 else 7) * mm,
                  right_cols=(4, 5, 6))
    table.setStyle(TableStyle([("ALIGN", (0, 1), (0, -1), "CENTER"),
                               ("FONT", (5, 1), (5, -1), "Helvetica-Bold", 10)]))
    out.append(table)
    out.append(Spacer(1, 4 * mm))
    out.append(_p(f"Remainder on the spool after the last mark: {first(spool.remainder_m)} "
                  f"({second(spool.remainder_m)}). Write it on the spool.", _BIG))
    out.append(Spacer(1, 6 * mm))
    out.append(_grid([["Cut by", "Checked by", "Date"], ["", "", ""]],
                     [width / 3] * 3, font_size=9, row_height=10 * mm))
    return out


def station_lists_flowables(plan: SpoolPlan, **kwargs: object) -> list[Flowable]:
    """Station lists for every opened spool, one page each (page breaks between)."""
    out: list[Flowable] = []
    for k, spool in enumerate(plan.spools):
        if k:
            out.append(PageBreak())
        out += station_list_flowables(spool, **kwargs)  # type: ignore[arg-type]
    return out


# --------------------------------------------------------------------------- log form


@dataclass(frozen=True)
class LogRow:
    """One element on a measurement log form; ``design_frequency_hz`` in Hz."""

    element_id: str
    band: str
    design_frequency_hz: float
    expected_dip_hz: float | None = None  # where the wire as it is now should dip


def default_mhz(hz: float) -> str:
    """Frequency in MHz to 1 kHz, e.g. "7.150 MHz" (input in Hz)."""
    return f"{hz / 1e6:.3f} MHz"


def log_form_flowables(kit_id: str, builder: str, rows: Sequence[LogRow], *, passes: int = 1,
                       fmt_freq: Callable[[float], str] = default_mhz,
                       width: float = DEFAULT_WIDTH, safety: bool = True) -> list[Flowable]:
    """Measurement log form for one kit: a row per element (``passes`` rows each, for
    re-measuring), with blank boxes for dip frequency, SWR, trim made and initials."""
    out: list[Flowable] = [
        _p(f"Measurement log: kit {kit_id}", _H1),
        _grid([["Builder", "Date", "Site"], [Cell(builder or ""), "", ""]],
              [w * width for w in (0.42, 0.26, 0.32)], header_rows=1,
              font_size=9, row_height=9 * mm),
        Spacer(1, 3 * mm),
        _p("Measure in the deployed shape and height. Tune the longest element first, then the "
           "next, then check once more. Trim both legs of an element by the same amount, part "
           "of the computed amount per step, staying on the long (low-frequency) side.", _BODY),
        Spacer(1, 3 * mm),
    ]
    data: list[list[object]] = [["Element", "Band", "Design freq.", "Expected dip",
                                 "Measured dip (MHz)", "SWR at dip", "Trim made (each leg)",
                                 "Initials"]]
    for r in rows:
        expected = fmt_freq(r.expected_dip_hz) if r.expected_dip_hz else ""
        for k in range(max(1, passes)):
            first = k == 0
            data.append([Cell(r.element_id if first else "", _BIG_BOLD), r.band if first else "",
                         fmt_freq(r.design_frequency_hz) if first else "",
                         expected if first else "", "", "", "", ""])
    out.append(_grid(data, [w * width for w in (0.18, 0.09, 0.13, 0.14, 0.13, 0.09, 0.14, 0.10)],
                     font_size=9, row_height=11 * mm))
    out.append(_p("Expected dip: where the wire as it is now should dip (from the site "
                  "calibration where there is one, from its own last reading once read); a leg "
                  "cut long by the trim allowance dips below the design frequency.", _SMALL))
    out.append(Spacer(1, 3 * mm))
    out.append(_grid([["Notes"], [""]], [width], font_size=9, row_height=25 * mm))
    if safety:
        out.append(KeepTogether(safety_flowables()))
    return out
