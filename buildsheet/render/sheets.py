"""The sheets PDF: cover, build sheets (per kit or per design), cautions. reportlab platypus.

Renderers compute nothing physical: every number comes from the Packet.
"""

from __future__ import annotations

import io
from collections.abc import Callable, Collection
from pathlib import Path
from typing import BinaryIO

from reportlab.graphics.shapes import Drawing
from reportlab.lib import colors
from reportlab.lib.enums import TA_LEFT
from reportlab.lib.pagesizes import A4, LETTER
from reportlab.lib.styles import ParagraphStyle, getSampleStyleSheet
from reportlab.lib.units import mm
from reportlab.pdfbase.pdfmetrics import stringWidth
from reportlab.platypus import (
    BaseDocTemplate,
    CondPageBreak,
    Flowable,
    Frame,
    KeepTogether,
    PageBreak,
    PageTemplate,
    Paragraph,
    Spacer,
    Table,
    TableStyle,
)

from buildsheet.calc.bom import DAY_BOM_CSV, catalogue_title, kit_bom_csv_name, shop_length_text
from buildsheet.calc.cuts import TRIM_BAND_MARGIN, DesignCuts, ElementCut, printed_parts
from buildsheet.calc.performance import DesignPerformance
from buildsheet.calc.safety import SITE_CAUTIONS
from buildsheet.packet import ElementEntry, Packet
from buildsheet.render import buildday, charts, drawings
from buildsheet.render.cells import (
    CachedParagraph,
    SharedDrawing,
    SharedFlowable,
    clear_paragraph_caches,
)
from buildsheet.render.markup import plain, shorten
from buildsheet.spec.design import Kit
from buildsheet.spec.units import UnitSystem, format_both, format_frequency, format_length
from buildsheet.store.files import write_output

_BASE = getSampleStyleSheet()
STYLES = {
    "title": ParagraphStyle("title", parent=_BASE["Title"], fontSize=18, leading=22, alignment=TA_LEFT),
    "h1": ParagraphStyle("h1", parent=_BASE["Heading1"], fontSize=15, leading=18, spaceAfter=4),
    "h2": ParagraphStyle("h2", parent=_BASE["Heading2"], fontSize=11.5, leading=14, spaceBefore=6,
                         spaceAfter=3),
    "body": ParagraphStyle("body", parent=_BASE["BodyText"], fontSize=9, leading=11.5),
    "small": ParagraphStyle("small", parent=_BASE["BodyText"], fontSize=8, leading=10),
    "cell": ParagraphStyle("cell", parent=_BASE["BodyText"], fontSize=8, leading=9.5),
    "caution": ParagraphStyle("caution", parent=_BASE["BodyText"], fontSize=8.5, leading=10.5,
                              leftIndent=8, bulletIndent=0),
}
GRID = TableStyle([
    ("FONT", (0, 0), (-1, -1), "Helvetica", 8),
    ("FONT", (0, 0), (-1, 0), "Helvetica-Bold", 8),
    ("LINEBELOW", (0, 0), (-1, 0), 0.8, colors.black),
    ("LINEBELOW", (0, 1), (-1, -1), 0.3, colors.grey),
    ("VALIGN", (0, 0), (-1, -1), "TOP"),
    ("LEFTPADDING", (0, 0), (-1, -1), 3),
    ("RIGHTPADDING", (0, 0), (-1, -1), 3),
])


#: Paragraph styles that become bookmarks and contents entries, with their outline level.
_OUTLINE_LEVELS = {"title": 0, "h1": 0, "bd-h1": 0, "h2": 1}


class SheetDoc(BaseDocTemplate):
    """Doc template that turns h1/h2 paragraphs into PDF bookmarks and contents entries."""

    def __init__(self, out: BinaryIO, *, pagesize: tuple[float, float], footer: str, title: str):
        super().__init__(out, pagesize=pagesize, leftMargin=MARGIN_X, rightMargin=MARGIN_X,
                         topMargin=13 * mm, bottomMargin=16 * mm, title=title,
                         author="buildsheet", invariant=1)
        frame = Frame(self.leftMargin, self.bottomMargin, self.width, self.height, id="body")
        self.addPageTemplates([PageTemplate("page", [frame], onPage=self._footer)])
        self._footer_text = footer
        self._mark = 0

    def beforeDocument(self) -> None:
        self._mark = 0
        self.headings: list[tuple[int, str, int]] = []

    def _footer(self, canvas, doc) -> None:
        canvas.saveState()
        room = self.pagesize[0] - self.leftMargin - self.rightMargin - 40
        size = 7.5
        while size > 5.5 and stringWidth(self._footer_text, "Helvetica", size) > room:
            size -= 0.25  # a long event name must not run into the page number
        canvas.setFont("Helvetica", size)
        canvas.drawString(self.leftMargin, 8 * mm, self._footer_text)
        canvas.setFont("Helvetica", 7.5)
        canvas.drawRightString(self.pagesize[0] - self.rightMargin, 8 * mm, f"page {doc.page}")
        canvas.restoreState()

    def afterFlowable(self, flowable: Flowable) -> None:
        if isinstance(flowable, Paragraph) and flowable.style.name in _OUTLINE_LEVELS:
            level = _OUTLINE_LEVELS[flowable.style.name]
            text = flowable.getPlainText()
            key = f"m{self._mark}"
            self._mark += 1
            self.canv.bookmarkPage(key)
            self.canv.addOutlineEntry(text, key, level=level, closed=level > 0)
            self.headings.append((level, text, self.page))


#: Page margins, points (left and right).
MARGIN_X = 14 * mm


def content_width(paper: str) -> float:
    """Width of the text frame on ``paper`` ("a4" or "letter"), points."""
    return (LETTER if paper == "letter" else A4)[0] - 2 * MARGIN_X


def _p(text: str, style: str = "cell") -> Paragraph:
    return CachedParagraph(text, STYLES[style])


def _two_line(metres: float, units: UnitSystem) -> str:
    """Primary unit on the first line, the other in brackets below (plain table cell text)."""
    return format_both(metres, units).replace(" (", "\n(")


def _parts_cell(printed_m: float, exact_m: float, units: UnitSystem) -> str:
    """A cut-list cell: the primary unit from the parts that add up, the other unit in brackets
    from the exact length (so it matches the labels)."""
    other = "imperial" if units == "metric" else "metric"
    return f"{format_length(printed_m, units)}\n({format_length(exact_m, other)})"  # type: ignore[arg-type]


def _table(rows: list[list[str]], widths: list[float], bold_cols: tuple[int, ...] = ()) -> Table:
    """A ruled table of plain-text cells (faster to lay out than paragraphs)."""
    t = Table(rows, colWidths=widths, repeatRows=1)
    t.setStyle(GRID)
    for col in bold_cols:
        t.setStyle(TableStyle([("FONT", (col, 1), (col, -1), "Helvetica-Bold", 8)]))
    return t


def element_table(cuts: DesignCuts, units: UnitSystem) -> Table:
    """The cut table: per element the model lengths, allowances and the cut length per leg."""
    rows = [["Band", "Design\nfreq.", "468/f leg", "Closed-form\nleg", "Model leg", "Trim",
             "Termi-\nnation", "Feed", "CUT EACH LEG"]]
    for c in cuts.elements:
        parts = printed_parts(c, units)
        rows.append([
            c.element.band_label, format_frequency(c.element.frequency_hz),
            _two_line(c.rule468_leg_m, units), _two_line(c.closed_form_leg_m, units),
            _parts_cell(parts.model_leg_m, c.predicted_leg_m, units),
            f"{format_length(parts.trim_m, units)}\n({c.trim_fraction:.1%})",
            _parts_cell(parts.termination_m, c.termination_m, units),
            _parts_cell(parts.feed_m, c.feed_m, units),
            _parts_cell(parts.cut_m, c.cut_leg_m, units),
        ])
    return _table(rows, [40, 54, 60, 60, 62, 50, 50, 46, 82], bold_cols=(0, 8))


def tuning_lines(cuts: DesignCuts, units: UnitSystem) -> list[Flowable]:
    out = []
    for c in cuts.elements:
        out.append(_p(
            f"<b>{c.element.band_label} tuning:</b> to raise resonance by 100 kHz cut "
            f"<b>{format_both(c.tuning_m_per_100khz, units)}</b> from EACH leg (lower: add back "
            "the same). Trim both legs equally, in steps of part of the computed amount, and "
            "stay on the long side.", "body"))
    return out


def _pct(fraction: float) -> str:
    """A small share of the leg as printed in the prediction band: "0.32 %"."""
    return f"{100 * fraction:.2f} %"


def trim_words(c: ElementCut, min_trim_fraction: float) -> str:
    """How the trim allowance of ``c`` was set, two plain lines (the rule is in calc.cuts)."""
    trim, minimum = _pct(c.trim_fraction), _pct(min_trim_fraction)
    if c.trim_rule == "band" and c.band_fraction is not None:
        return f"{trim} = {TRIM_BAND_MARGIN:g} x combined band\n(more than min_trim {minimum})"
    cover = c.band_cover_fraction
    if c.trim_rule == "minimum" and cover is not None:
        return (f"{trim} = min_trim\n({TRIM_BAND_MARGIN:g} x combined band is only "
                f"{_pct(cover)})")
    if c.trim_rule == "calibrated":
        return f"{trim} = calibration residual\n(at least min_trim {minimum})"
    if c.trim_rule == "spec":
        return f"{trim}\nset in the spec (trim_allowance)"
    return f"{trim}: the default\n(at least min_trim {minimum})"


def band_flowables(cuts: DesignCuts, units: UnitSystem) -> list[Flowable]:
    """The prediction band of every resonant leg: its parts (ground class range, mesh, model),
    the combined half-width, the leg range it spans, and how the trim allowance covers it."""
    els = cuts.elements
    if all(c.band_fraction is None for c in els):
        return [_p("No prediction band with this model (the closed form has none): the trim "
                   "allowance is the spec's or the default, never less than min_trim.", "small")]
    head = ["Band", "Ground class\nrange", "Mesh\n(Richardson)", "Model (thin\nwire, coating)",
            "Combined\n(RSS)", "Resonant leg\nwithin", "Trim allowance"]
    rows = [head]
    for c in els:
        u = c.uncertainty
        parts = ([_pct(u.ground), _pct(u.mesh), _pct(u.model)] if u is not None
                 else ["-", "-", "-"])
        within = ("-" if c.band_legs_m is None else
                  f"{format_length(c.band_legs_m[0], units)} to\n"
                  f"{format_length(c.band_legs_m[1], units)}")
        rows.append([c.element.band_label, *parts,
                     "-" if c.band_fraction is None else _pct(c.band_fraction), within,
                     trim_words(c, cuts.design.allowances.min_trim_fraction)])
    table = _table(rows, [38, 56, 58, 66, 50, 66, 174], bold_cols=(4,))
    calibrated = any(c.trim_rule == "calibrated" for c in els)
    text = ("<b>Prediction band</b> of each resonant leg, as half-widths (share of the leg). "
            + ("Calibrated: the band is the site calibration's residual uncertainty. "
               if calibrated else
               "Ground: the documented range of the site's ground class (a measured ground: "
               "its stated tolerance); mesh: the Richardson estimate from two meshes of what "
               "remains of the discretisation error; model: a stated figure for the thin-wire "
               "model and the wire's coating. ")
            + "Combined: the root sum of squares of the parts. Unless the spec sets "
            f"trim_allowance, the trim allowance is {TRIM_BAND_MARGIN:g} times the combined band "
            "and never less than min_trim, so the wire is cut long enough to trim to resonance "
            "wherever in the band the site puts it.")
    return [_p(text, "small"), Spacer(1, 2), table, Spacer(1, 3)]


def feed_lines(cuts: DesignCuts) -> list[Flowable]:
    """Feed impedance, SWR and 2:1 bandwidth per element, with plain advice above 2:1."""
    out = []
    for c in cuts.elements:
        p = c.prediction
        bw = (f"2:1 bandwidth {p.bandwidth_2to1_hz[0] / 1e6:.3f}-{p.bandwidth_2to1_hz[1] / 1e6:.3f} MHz"
              if p.bandwidth_2to1_hz else "SWR stays above 2:1")
        text = (f"<b>{c.element.band_label}:</b> feed impedance at {format_frequency(c.element.frequency_hz)} "
                f"{p.z_feed.real:.1f} {'+' if p.z_feed.imag >= 0 else '-'} j{abs(p.z_feed.imag):.1f} ohm, "
                f"SWR {p.swr_at_design:.2f}:1 on 50 ohm; {bw}.")
        if p.swr_at_design > 2.0:
            text += (" <b>SWR above 2:1 at resonance</b>: a low antenna's feed resistance falls "
                     "well below 50 ohm. A higher apex, a wider included angle, or a matching "
                     "unit at the feed helps.")
        out.append(_p(text, "body"))
    return out


def geometry_table(cuts: DesignCuts, units: UnitSystem) -> Table:
    if any(leg.has_support for c in cuts.elements for leg in c.legs):
        return support_table(cuts, units)
    rows = [["Leg", "Bearing", "Reach", "Slope", "End height", "Cord line", "Cord to cut",
             "Stake from mast"]]
    for c in cuts.elements:
        for leg in c.legs:
            rows.append([
                f"{c.element.band_label} {leg.leg_id}", f"{leg.bearing_deg:.0f} deg",
                _two_line(leg.reach_m, units), f"{leg.slope_deg:.0f} deg",
                _two_line(leg.end_height_m, units), _two_line(leg.cord_line_m, units),
                _two_line(leg.cord_cut_m, units), _two_line(leg.stake_distance_m, units),
            ])
    return _table(rows, [50, 44, 66, 36, 66, 70, 74, 78], bold_cols=(6,))


def support_table(cuts: DesignCuts, units: UnitSystem) -> Table:
    """Flat mount: end supports, the cord to each, halyards and the guy anchors."""
    rows = [["Leg", "Bearing", "Reach", "Support\nfrom mast", "Support\nheight",
             "Cord to\nsupport", "Halyard", "Guys (3),\neach", "Guy anchors\nfrom mast"]]
    for c in cuts.elements:
        for leg in c.legs:
            rows.append([
                f"{c.element.band_label} {leg.leg_id}", f"{leg.bearing_deg:.0f} deg",
                _two_line(leg.reach_m, units), _two_line(leg.support_distance_m or 0.0, units),
                _two_line(leg.support_height_m or 0.0, units), _two_line(leg.cord_cut_m, units),
                _two_line(leg.halyard_m, units), _two_line(leg.support_guy_m, units),
                _two_line(leg.stake_distance_m, units)])
    return _table(rows, [44, 40, 58, 60, 58, 58, 58, 58, 62], bold_cols=(5, 6))


def cautions_box(cautions: tuple[str, ...] = SITE_CAUTIONS) -> Table:
    paras = [_p("<b>Safety cautions</b>", "body")] + [
        CachedParagraph(plain(text), STYLES["caution"], bulletText="\u2022") for text in cautions]
    t = Table([[paras]], colWidths=[500])
    t.setStyle(TableStyle([("BOX", (0, 0), (-1, -1), 1.2, colors.black),
                           ("LEFTPADDING", (0, 0), (-1, -1), 6),
                           ("TOPPADDING", (0, 0), (-1, -1), 4)]))
    return t


#: Drawings and tables shared by every sheet of one design within one document, by (kind,
#: content key).
SharedDrawings = dict[tuple[object, ...], "Flowable | list[Flowable]"]


def _shared(shared: SharedDrawings | None, kind: str, design_key: str,
            make: Callable[[], Drawing]) -> Flowable:
    """The drawing ``kind`` of a design, built once per document and placed as a PDF form on
    every later sheet (``shared`` None: a fresh drawing each time)."""
    if shared is None:
        return make()
    key = (kind, design_key)
    if key not in shared:
        shared[key] = SharedDrawing(make(), f"shared-drawing-{len(shared)}")
    found = shared[key]
    assert isinstance(found, SharedDrawing)
    return SharedDrawing(found.drawing, found.name)  # one placement each


def _same_all(shared: SharedDrawings | None, key: tuple[object, ...],
              make: Callable[[], list[Flowable]]) -> list[Flowable]:
    """:func:`_same` for a run of flowables (none of them a heading: headings stay plain
    paragraphs so that they become bookmarks and contents entries)."""
    if shared is None:
        return make()
    if key not in shared:
        shared[key] = [SharedFlowable(f, f"shared-block-{len(shared)}-{i}")
                       for i, f in enumerate(make())]
    found = shared[key]
    assert isinstance(found, list)
    return [f.again() if isinstance(f, SharedFlowable) else f for f in found]


def swr_row(cuts: DesignCuts, width: float = 500, shared: SharedDrawings | None = None) -> Table:
    """The SWR-vs-frequency plot of every band, side by side."""
    n = len(cuts.elements)
    w = width / n - 6

    def plot(c: ElementCut) -> Callable[[], Drawing]:
        return lambda: charts.swr_drawing(
            c.prediction.frequencies_hz, c.prediction.swr, c.element.frequency_hz,
            c.element.low_hz, c.element.high_hz, w, 120, f"{c.element.band_label} SWR on 50 ohm",
            c.element.band.channels_hz if c.element.band else ())

    plots = [_shared(shared, f"swr-{c.element.key}-{width:g}", cuts.design.key, plot(c))
             for c in cuts.elements]
    return Table([plots], colWidths=[width / n] * n)


def exposure_box(packet: Packet, design_key: str, width: float = 500) -> Table:
    """The RF-exposure caution box: distances per band and limit, the keep-out, the cautions."""
    a = packet.advice[design_key]
    paras: list[Flowable] = [_p(f"<b>{a.exposure_head}</b>:", "body")]
    paras += [_p(text, "caution") for text in a.exposure_bands]
    paras.append(_p(f"<b>{a.keep_out}</b>", "caution"))
    paras += [CachedParagraph(text, STYLES["caution"], bulletText="\u2022")
              for text in a.exposure_cautions]
    t = Table([[paras]], colWidths=[width])
    t.setStyle(TableStyle([("BOX", (0, 0), (-1, -1), 1.6, colors.black),
                           ("LEFTPADDING", (0, 0), (-1, -1), 6),
                           ("TOPPADDING", (0, 0), (-1, -1), 4)]))
    return t


def nvis_table(perf: DesignPerformance, units: UnitSystem) -> Table:
    """Per band: zenith gain, high-angle shares, main lobe, ground loss, efficiency (radiated
    over input power) and the best height with its 1 dB window."""
    rows = [["Band", "Zenith gain", "Power above\n60 deg", "Power above\n45 deg",
             "Main lobe\nelevation", "Ground loss\nshare", "Efficiency\n(radiated/in)",
             "Best height\n(zenith)", "Within 1 dB\nof best"]]
    for b in perf.bands:
        n, h = b.nvis, b.height
        rows.append([b.band_label, f"{n.zenith_gain_dbi:.1f} dBi", f"{n.share_above_60:.0%}",
                     f"{n.share_above_45:.0%}", f"{n.main_lobe_elevation_deg:.0f} deg",
                     f"{n.ground_loss_share:.0%}", f"{n.efficiency:.0%}",
                     (f"{format_length(h.best_height_m, units)}\n"
                      f"({h.best_height_m / h.wavelength_m:.2f} wl)"),
                     f"{format_length(h.range_low_m, units)} to\n{format_length(h.range_high_m, units)}"])
    return _table(rows, [40, 50, 54, 54, 52, 56, 60, 62, 82])


def coverage_page(packet: Packet, cuts: DesignCuts) -> list[Flowable]:
    """Once per design: NVIS table, elevation patterns, height advice, band guidance, exposure."""
    units = packet.design.event.units
    perf = packet.performance_for(cuts.design.key)
    d = cuts.design
    story: list[Flowable] = [_p(f"Coverage and exposure: {plain(d.title)}", "h1"),
                             _p(perf.method_note, "small"), Spacer(1, 3), nvis_table(perf, units),
                             Spacer(1, 2),
                             _p("Ground loss share: the input power, after conductor loss, that is "
                                "not radiated upward (it heats the ground). Efficiency: the power "
                                "radiated into the sky over the input power. The best height and "
                                "the 1 dB window come from the zenith gain over the input power, "
                                "so ground loss is in them.", "small"), Spacer(1, 4)]
    n = len(perf.bands)
    w = min(250, 500 / n) - 6
    polar = [charts.elevation_polar_drawing(b.cuts.angle_deg, b.cuts.broadside_dbi,
                                            b.cuts.endfire_dbi, w, f"{b.band_label} elevation")
             for b in perf.bands]
    story.append(Table([polar], colWidths=[w + 6] * n))
    story += [_p("Height advice", "h2")] + [_p(t, "body") for t in packet.advice[d.key].height]
    story += [_p("Band by time of day", "h2")] + [_p(t, "body") for t in perf.guidance]
    story += [Spacer(1, 6), exposure_box(packet, d.key), PageBreak()]
    return story


def build_sheet(packet: Packet, cuts: DesignCuts, kits: tuple[Kit, ...],
                shared: SharedDrawings | None = None) -> list[Flowable]:
    """Flowables of one build sheet for ``kits`` (one kit, or a roster for per-design layout);
    with ``shared`` the design's drawings are built once for all its sheets."""
    ev = packet.design.event
    units = ev.units
    width = content_width(ev.paper)
    d = cuts.design
    if len(kits) == 1:
        k = kits[0]
        heading = f"Kit {k.kit_id}: {plain(d.title)}" + (f" ({plain(k.builder)})" if k.builder
                                                         else "")
    else:
        heading = f"Design {d.key}: {plain(d.title)} ({len(kits)} kits)"
    story: list[Flowable] = [_p(heading, "h1")]
    if cuts.prediction.calibrated_from:
        story.append(_p(f"<b>CALIBRATED</b> cut lengths: {plain(cuts.prediction.model_note)}",
                        "body"))
    story.append(_p(
        f"{plain(ev.name)} - {plain(ev.date)}. {d.kind} ({len(d.elements)} element"
        f"{'s' if len(d.elements) > 1 else ''}) on one 1:1 balun, {d.mount.replace('_', ' ')}, "
        f"apex {format_both(d.apex_height_m, units)}. Wire: "
        f"{plain(catalogue_title(d.wire.title, units))}. "
        f"Ground: {plain(packet.design.site.ground.title)}, ground model: "
        f"{plain(cuts.prediction.ground_model or cuts.prediction.ground_title)}.", "body"))
    if len(kits) > 1:
        roster = ", ".join(f"{k.kit_id}{' ' + plain(k.builder) if k.builder else ''}"
                           for k in kits)
        story.append(_p(f"<b>Kit roster:</b> {roster}", "body"))
    ids = []
    for k in kits[:1] if len(kits) == 1 else ():
        ids = [f"{k.kit_id}-{c.element.key}" for c in cuts.elements]
    if ids:
        story.append(_p("<b>Element IDs:</b> " + ", ".join(f"{i} (legs {i}-A, {i}-B)" for i in ids),
                        "body"))
    key = (d.key, units)
    story += [_p("Cut list", "h2")]
    story += _same_all(shared, ("cut-list", *key), lambda: [
        element_table(cuts, units), Spacer(1, 3),
        _p(f"Cut = model leg + trim allowance + termination at the end insulator + feed "
           f"allowance (pigtail to the balun terminal). Model: "
           f"{plain(cuts.prediction.model_note)}. The 468/f rule and the straight-dipole "
           "closed form are shown for comparison.", "small"),
        *band_flowables(cuts, units), *tuning_lines(cuts, units),
        *[_p(t, "body") for t in packet.advice[d.key].dips],
        *[_p(plain(t), "body") for t in packet.advice[d.key].spacing],
        *[_p(t, "body") for t in packet.advice[d.key].band_rules]])
    story += [_p("Feed point", "h2")]
    story += _same_all(shared, ("feed-point", *key),
                       lambda: [*feed_lines(cuts), swr_row(cuts)])
    story += [CondPageBreak(120 * mm), _p("Deployment", "h2"),
              _shared(shared, "side", d.key, lambda: drawings.side_view(cuts, width, 165, units)),
              Spacer(1, 4)]
    size = drawings.plan_size(width)

    def geometry() -> list[Flowable]:
        plan = drawings.plan_view(cuts, size, units)
        fit = [_p(plain(t), "small") for t in packet.advice[d.key].site_fit]
        return [geometry_table(cuts, units), Spacer(1, 4),
                Table([[plan, fit]], colWidths=[size + 8, width - size - 14],
                      style=[("VALIGN", (0, 0), (-1, -1), "TOP")])]

    story += [KeepTogether(_same_all(shared, ("geometry", *key), geometry))]
    story += _same_all(shared, ("notes", *key), lambda: [
        _p(f"<b>Note:</b> {plain(w)}", "small") for w in cuts.warnings])
    advice = packet.advice[d.key]
    kit_name = kits[0].kit_id if len(kits) == 1 else "K.."
    story += [CondPageBreak(50 * mm), _p("Assembly", "h2")]
    story += [_p(plain(t.replace("{kit}", kit_name)), "body") for t in advice.assembly]
    story += [_p("Feed line", "h2")]
    story += _same_all(shared, ("feed-line", *key),
                       lambda: [_p(plain(t), "body") for t in advice.feed_line])
    if len(kits) == 1:
        story += as_built_flowables(packet.kit_entries(kits[0].kit_id), units)
    if len(kits) == 1:
        story += [CondPageBreak(60 * mm), _p("Kit bill of materials", "h2")]
        lines = packet.kit_boms[kits[0].kit_id]
        story += _same_all(shared, ("kit-bom", units, *lines), lambda: buildday.bom_flowables(
            lines, title="", fmt=_fmt(units), safety=False)[1:])
    # The boxes are one-row tables, which never split: each moves whole to the next page.
    story += [Spacer(1, 6), *_same_all(shared, ("boxes", *key), lambda: [
        exposure_box(packet, d.key), Spacer(1, 6), cautions_box(advice.cautions)]), PageBreak()]
    return story


#: Placeholder in the story where the table of contents goes (filled by render_sheets).
CONTENTS_MARK = Spacer(0, 0)


def outline_entries(story: list[Flowable]) -> list[tuple[int, str]]:
    """(level, text) of every heading that becomes a bookmark, in story order."""
    return [(_OUTLINE_LEVELS[f.style.name], f.getPlainText()) for f in story
            if isinstance(f, Paragraph) and f.style.name in _OUTLINE_LEVELS]


class _PageNumber(Flowable):
    """A contents page number that is not known yet: drawn as a PDF form XObject that
    :class:`_PageNumberForms` defines once the heading has been placed (single pass)."""

    def __init__(self, index: int):
        super().__init__()
        self.name = f"contents-page-{index}"

    def wrap(self, available_width: float, available_height: float) -> tuple[float, float]:
        self.width = available_width
        return available_width, 8

    def draw(self) -> None:
        self.canv.doForm(self.name)


class _PageNumberForms(Flowable):
    """Last flowable of the document: defines the page-number forms from the headings placed."""

    def wrap(self, available_width: float, available_height: float) -> tuple[float, float]:
        return 0, 0

    def draw(self) -> None:
        doc = self.canv._doctemplate
        for i, (_, _, page) in enumerate(doc.headings):
            self.canv.beginForm(f"contents-page-{i}", 0, 0, 50, 8)
            self.canv.setFont("Helvetica", 8)
            self.canv.drawRightString(48, 1, str(page))
            self.canv.endForm()


def contents_table(entries: list[tuple[int, str]]) -> Table:
    """Contents with one row per heading; the page numbers are filled in at the end."""
    rows = [[shorten(("    " * level) + text, 430, "Helvetica-Bold", 8), _PageNumber(i)]
            for i, (level, text) in enumerate(entries)]
    t = Table(rows, colWidths=[440, 50], rowHeights=11)
    t.setStyle(TableStyle([("FONT", (0, 0), (-1, -1), "Helvetica", 8),
                           ("ALIGN", (1, 0), (1, -1), "RIGHT"),
                           ("LINEBELOW", (0, 0), (-1, -1), 0.25, colors.lightgrey),
                           ("TOPPADDING", (0, 0), (-1, -1), 1),
                           ("BOTTOMPADDING", (0, 0), (-1, -1), 1)]))
    for i, (level, _) in enumerate(entries):
        if level == 0:
            t.setStyle(TableStyle([("FONT", (0, i), (-1, i), "Helvetica-Bold", 8)]))
    return t


def _qty(line: buildday.BomLine, units: UnitSystem) -> str:
    return (shop_length_text(line.quantity, units).split(" (")[0] if line.unit == "m"
            else f"{line.quantity:g}")


def cover(packet: Packet) -> list[Flowable]:
    ev = packet.design.event
    units = ev.units
    story: list[Flowable] = [_p(plain(ev.name), "title"),
                             _p(f"{plain(ev.club)} - {plain(ev.date)} - ITU region {ev.region}",
                                "body"),
                             Spacer(1, 6)]
    if packet.organiser_pin:
        story += [_p(f"<b>Organiser PIN for the build-day station:</b> {packet.organiser_pin} "
                     f"(at {plain(ev.station_url or '')}/organiser). For the organiser only: "
                     "keep this page, do not copy the PIN onto labels.", "body"), Spacer(1, 4)]
    rows = [[_p("<b>Design</b>"), _p("<b>Kits</b>"), _p("<b>Elements</b>"), _p("<b>Cut per leg</b>")]]
    for c in packet.cuts:
        kits = packet.kits_of(c.design.key)
        rows.append([_p(plain(c.design.title)), _p(str(len(kits))),
                     _p(", ".join(e.element.band_label for e in c.elements)),
                     _p("<br/>".join(f"{e.element.band_label}: {format_both(e.cut_leg_m, units)}"
                                     for e in c.elements))])
    t = Table(rows, colWidths=[180, 40, 90, 190])
    t.setStyle(GRID)
    n_elements = sum(len(packet.kit_entries(k.kit_id)) for k in packet.design.kits)
    story += [t, Spacer(1, 4), _p(
        f"<b>Totals:</b> {len(packet.design.kits)} kits, {n_elements} elements, "
        f"{2 * n_elements} legs and labels. <b>What to bring:</b> "
        + "; ".join(f"{_qty(line, units)} {plain(line.item)}" for line in packet.day_bom)
        + ". Details in the bill of materials and the spool cut plan.", "body"), Spacer(1, 6)]
    if packet.warnings:
        story.append(_p("Warnings", "h2"))
        story += [_p(plain(w), "small") for w in packet.warnings]
    story += [_p("Contents", "h2"), CONTENTS_MARK, PageBreak()]
    return story


def _fmt(units: UnitSystem) -> Callable[[float], str]:
    return lambda m: _two_line(m, units)


def logistics_pages(packet: Packet, only: Collection[str] | None = None) -> list[Flowable]:
    """Day bill of materials (every kit), the spool cut plan and one cutting-station list per
    spool (for the pieces still to cut), each only when wanted."""
    units = packet.design.event.units
    story: list[Flowable] = []
    if only is None or "day:bom" in only:
        first = packet.advice[packet.cuts[0].design.key] if packet.cuts else None
        bom = buildday.bom_flowables(
            packet.day_bom, title="Bill of materials for the day",
            fmt=lambda m: shop_length_text(m, units).replace(" (", "\n("),
            cautions=first.station_cautions if first else buildday.SAFETY_LINES)
        bom[1:1] = [_p(f"Lengths to buy, rounded up to whole "
                       f"{'metres' if units == 'metric' else 'feet'}. Also in the packet folder "
                       f"as CSV (exact lengths in metres): {DAY_BOM_CSV} for the day and "
                       f"{kit_bom_csv_name('KIT')} per kit (e.g. "
                       f"{kit_bom_csv_name(packet.design.kits[0].kit_id) if packet.design.kits else ''}).",
                       "small"), Spacer(1, 4)]
        story += bom + [PageBreak()]
    if only is None or "day:spool-plan" in only:
        if packet.already_cut:
            story.append(_p(f"{len(packet.already_cut)} legs already cut (recorded in the "
                            "ledger) are not cut again: this plan covers the rest, from the "
                            "stock left.", "body"))
        story += buildday.spool_plan_flowables(
            packet.spool_plan, fmt=lambda m: format_length(m, units))
        story.append(PageBreak())
    if packet.spool_plan.spools and (only is None or "day:stations" in only):
        story += buildday.station_lists_flowables(
            packet.spool_plan, metric=lambda m: format_length(m, "metric"),
            imperial=lambda m: format_length(m, "imperial"), primary=units)
        story.append(PageBreak())
    return story


def as_built_table(entries: tuple[ElementEntry, ...], units: UnitSystem) -> Table:
    """Per leg: prescribed cut, length as cut, current length, target and the action."""
    rows = [["Leg", "Prescribed cut", "As cut", "Now", "Target", "Do"]]
    for e in entries:
        for leg in e.state.legs:
            rows.append([leg.leg_id, _two_line(leg.prescribed_cut_m, units),
                         "not cut" if leg.cut_m is None else _two_line(leg.cut_m, units),
                         _two_line(leg.current_m, units), _two_line(leg.target_m, units),
                         leg.action.words(units, both=False)])
    return _table(rows, [70, 72, 72, 72, 72, 142], bold_cols=(5,))


def as_built_flowables(entries: tuple[ElementEntry, ...], units: UnitSystem) -> list[Flowable]:
    """The kit's legs as built, with the instruction for each element (only once cut)."""
    if not any(leg.cut_m is not None for e in entries for leg in e.state.legs):
        return []
    story: list[Flowable] = [CondPageBreak(50 * mm), _p("This kit as built", "h2"),
                             as_built_table(entries, units), Spacer(1, 3)]
    for e in entries:
        if e.state.is_cut:
            story.append(_p(f"<b>{e.element_id}:</b> " + plain(" ".join(e.advice)), "small"))
    return story


def batch_trim_pages(packet: Packet) -> list[Flowable]:
    """For kits already cut when a site calibration exists: what to do to each leg."""
    entries = packet.batch_trims
    if not entries:
        return []
    units = packet.design.event.units
    sources = "; ".join(f"{k}: calibrated from {plain(', '.join(c.source_ids))}, site like "
                        f"{plain(c.site_like_title)}, residual {c.uncertainty:.1%}"
                        for k, c in packet.calibrations.items())
    return [_p("Batch trims for kits already cut", "h1"),
            _p("The site calibration moves the target of every element of its design that has "
               "no reading of its own since it was cut; an element with a reading is trimmed "
               f"to its own reading ({sources}). Before raising a kit already cut, do what the "
               "last column says to each leg, then re-check on the analyzer.", "body"),
            Spacer(1, 4), as_built_table(entries, units), PageBreak()]


def log_forms(packet: Packet, kits: Collection[str] | None = None) -> list[Flowable]:
    """One measurement log form per kit, a row per element, to fill in by hand; the expected
    dip is that of the wire as it is now (as cut, or as prescribed)."""
    story: list[Flowable] = []
    for kit in packet.design.kits:
        if kits is not None and kit.kit_id not in kits:
            continue
        rows = [buildday.LogRow(e.element_id, e.cut.element.band_label, e.cut.element.frequency_hz,
                                e.state.expected_dip_hz)
                for e in packet.kit_entries(kit.kit_id)]
        story += buildday.log_form_flowables(kit.kit_id, kit.builder, rows, passes=3,
                                             fmt_freq=format_frequency, safety=False)
        story.append(PageBreak())
    return story


def sheet_story(packet: Packet, only: Collection[str] | None = None, *,
                share_blocks: bool = True) -> list[Flowable]:
    """The whole sheets document (cover, logistics, build sheets, then the log forms), or the
    printable items named in ``only`` (``kit:K01``, ``design:KEY``, ``nvis:KEY``, ``day:PAGE``).
    With ``share_blocks`` what every sheet of a design repeats is laid out and drawn once."""
    def wanted(item: str) -> bool:
        return only is None or item in only

    story: list[Flowable] = []
    shared: SharedDrawings | None = {} if share_blocks else None
    if wanted("day:cover"):
        story += cover(packet)
    story += logistics_pages(packet, only)
    if wanted("day:batch-trims"):
        story += batch_trim_pages(packet)
    for c in packet.cuts:
        kits = packet.kits_of(c.design.key)
        if wanted(f"nvis:{c.design.key}"):
            story += coverage_page(packet, c)
        if packet.design.event.layout == "per_design":
            if wanted(f"design:{c.design.key}"):
                story += build_sheet(packet, c, kits, shared)
        else:
            for k in kits:
                if wanted(f"kit:{k.kit_id}"):
                    story += build_sheet(packet, c, (k,), shared)
    kit_ids = [k.kit_id for k in packet.design.kits if wanted(packet.sheet_item(k))]
    return story + log_forms(packet, kit_ids)


def footer_text(packet: Packet) -> str:
    d = packet.design
    return (f"{shorten(d.event.name, 200, 'Helvetica', 7.5)} | spec "
            f"{shorten(d.source, 100, 'Helvetica', 7.5)} sha256 {d.spec_hash[:12]} | revision "
            f"{packet.revision} | built {packet.built_at} | buildsheet")


def _with_contents(story: list[Flowable], contents: Table) -> list[Flowable]:
    return [contents if f is CONTENTS_MARK else f for f in story]


def render_sheets(packet: Packet, out: str | Path | BinaryIO, story: list[Flowable] | None = None,
                  *, only: Collection[str] | None = None) -> None:
    """Write the sheets PDF (all of it, or the printable items in ``only``) to a path or a
    binary stream."""
    clear_paragraph_caches()
    pagesize = LETTER if packet.design.event.paper == "letter" else A4
    buf = io.BytesIO()
    doc = SheetDoc(buf, pagesize=pagesize, footer=footer_text(packet),
                   title=f"{packet.design.event.name} build sheets")
    flowables = list(story) if story is not None else sheet_story(packet, only)
    while flowables and isinstance(flowables[-1], PageBreak):
        flowables.pop()  # no blank last page
    contents = contents_table(outline_entries(flowables))
    doc.build(_with_contents(flowables, contents) + [_PageNumberForms()])
    write_output(buf.getvalue(), out)
