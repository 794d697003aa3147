"""Winder labels: label stock, label content, QR payloads and the fit check (pure core).

Every length in this module is in millimetres, because label stock is sold and specified in
mm; font sizes are in points (1 pt = 25.4/72 mm). Positions on a label are measured from its
top-left corner, y downwards. The renderer (``buildsheet.render.labels``) converts to PDF points.
No file, clock or network access here.
"""

from __future__ import annotations

import difflib
import math
import string
import urllib.parse
from collections.abc import Iterable, Iterator, Mapping
from dataclasses import dataclass
from typing import Literal, TypeGuard

import segno

from buildsheet.calc.label_qr import Symbol, build_symbol
from buildsheet.errors import Problem, SpecError

#: Millimetres per typographic point (1 pt = 1/72 in, 1 in = 25.4 mm exactly).
MM_PER_PT: float = 25.4 / 72.0

# --- Weatherproof design rules (issue 2 item 7) -------------------------------------------
#: Smallest QR module printed, mm (project rule: 0.5 mm survives outdoor wear and phone cameras).
MIN_MODULE_MM: float = 0.5
#: Quiet zone on every side of the symbol, in modules (ISO/IEC 18004:2015 clause 9.1: 4X).
QUIET_ZONE_MODULES: int = 4
#: Smallest text on a label, pt (project rule).
MIN_TEXT_PT: float = 7.0
#: Smallest size of the band name, which is set in large type, pt (project rule).
MIN_BAND_PT: float = 14.0
#: Thinnest stroke allowed on a label, pt (project rule: no hairlines).
MIN_LINE_PT: float = 0.5
#: Content is kept this far inside the label edge, mm (print registration; common practice).
INSET_MM: float = 1.5
#: Gap between the text block and the QR symbol's quiet zone, mm.
GAP_MM: float = 1.0
#: Line pitch as a multiple of the font size (common typographic practice: 1.2).
LEADING: float = 1.2
#: Text lines below the band name at minimum: leg, frequency, cut length, element ID, kit.
MIN_TEXT_LINES: int = 5
#: Narrowest text block that holds an element ID and a short length at 7 pt, mm.
MIN_TEXT_WIDTH_MM: float = 22.0
#: Text block width the layout prefers when the QR can stay at or above the minimum module, mm.
PREFERRED_TEXT_WIDTH_MM: float = 30.0
#: Lowest text block: band name at MIN_BAND_PT plus MIN_TEXT_LINES lines at MIN_TEXT_PT, mm.
MIN_TEXT_HEIGHT_MM: float = (MIN_BAND_PT + MIN_TEXT_LINES * MIN_TEXT_PT) * LEADING * MM_PER_PT

#: QR error correction levels allowed on labels: Q (25 %) or better (ISO/IEC 18004 clause 4.10).
EC_LEVELS: tuple[str, ...] = ("q", "h")
#: Levels tried for each label, best first: H (30 %) wherever the symbol still fits the label.
EC_PREFERENCE: tuple[str, ...] = ("h", "q")
#: Smallest module of the chosen symbol (mm): the version is raised as long as the
#: modules stay at least this large (0.6 mm: 3.5 px at 150 dpi; bench/labels.py).
ROBUST_MODULE_MM: float = 0.6
#: Placeholders allowed in a record URL template.
URL_PLACEHOLDERS: tuple[str, ...] = ("kit", "element", "leg")
#: Page sizes by name, (width, height) mm (ISO 216 A4; ANSI Letter 8.5 x 11 in).
PAGE_SIZES: Mapping[str, tuple[float, float]] = {"a4": (210.0, 297.0), "letter": (215.9, 279.4)}

Leg = Literal["A", "B"]


@dataclass(frozen=True)
class LabelStock:
    """Label stock geometry, all lengths in mm; cells are numbered row by row from top-left."""

    name: str
    page_width: float
    page_height: float
    rows: int
    columns: int
    label_width: float
    label_height: float
    left_margin: float  # page left edge to the first column's left edge
    top_margin: float  # page top edge to the first row's top edge
    h_pitch: float  # left edge to left edge of neighbouring columns
    v_pitch: float  # top edge to top edge of neighbouring rows

    @property
    def cells_per_page(self) -> int:
        """Number of labels on one page."""
        return self.rows * self.columns

    def cell_origin(self, cell: int) -> tuple[float, float]:
        """Top-left corner of cell ``cell`` (0-based, row-major) from the page's top-left, mm."""
        if not 0 <= cell < self.cells_per_page:
            raise IndexError(f"cell {cell} outside 0..{self.cells_per_page - 1}")
        row, col = divmod(cell, self.columns)
        return self.left_margin + col * self.h_pitch, self.top_margin + row * self.v_pitch


#: Built-in stocks under our own generic names.
STOCKS: Mapping[str, LabelStock] = {
    # 3 x 8 labels of 66 x 35 mm on A4, 6 mm side margins (clear of most printers' dead band).
    "sheet-a4": LabelStock("sheet-a4", 210.0, 297.0, 8, 3, 66.0, 35.0, 6.0, 8.5, 66.0, 35.0),
    # 3 x 7 labels of 68 x 36 mm on Letter.
    "sheet-letter": LabelStock(
        "sheet-letter", 215.9, 279.4, 7, 3, 68.0, 36.0, 5.95, 13.7, 68.0, 36.0
    ),
    # Continuous roll 62 mm wide, cut every 40 mm: one label per page.
    "roll": LabelStock("roll", 62.0, 40.0, 1, 1, 62.0, 40.0, 0.0, 0.0, 62.0, 40.0),
}


@dataclass(frozen=True)
class LabelContent:
    """What one winder label shows; the caller passes pre-formatted frequency and length."""

    kit_id: str  # "K03"
    element_id: str  # "K03-40m"
    leg_id: str  # "K03-40m-A"
    leg: Leg  # "A" or "B"
    band_name: str  # "40m"
    frequency_text: str  # "7.150 MHz"
    cut_length_text: str  # "10.43 m / 34 ft 2 5/8 in"
    payload: str  # what the QR code holds (record URL or offline record)
    extra: tuple[str, ...] = ()  # further small lines, e.g. the club name
    current_length_text: str = ""  # after recorded trims, when it differs from the cut

    def __post_init__(self) -> None:
        if self.leg not in ("A", "B"):
            raise ValueError(f"leg must be 'A' or 'B', got {self.leg!r}")
        if not self.payload:
            raise ValueError(f"label {self.leg_id}: empty QR payload")


@dataclass(frozen=True)
class Box:
    """A rectangle on a label: left, top (from the label's top-left, y down), width, height; mm."""

    x: float
    y: float
    width: float
    height: float


#: How the QR symbol copies and the text share a label: "beside" (the text at the left, the
#: copies to its right in a grid of columns x rows whose neighbours share one quiet zone),
#: "above" (the grid above the text) or "flank" (one copy at each end, the text between).
Arrangement = Literal["flank", "beside", "above"]
#: Most copies of the symbol on one label. A blot on any of a symbol's three finder patterns
#: spoils that copy (zxing-cpp reads none with a 1.5 mm blot there; tests/test_labels.py), so
#: a scuffed label is read when any copy escaped: with 5 % of a 66 x 35 mm label blotted
#: anywhere, six small copies are read in about 98 % of trials, two larger ones in about 70 %
#: (bench/labels.py).
MAX_COPIES: int = 6
#: Grids of copies tried, (columns, rows).
GRIDS: tuple[tuple[int, int], ...] = tuple(
    (c, r) for c in range(1, MAX_COPIES + 1) for r in range(1, MAX_COPIES + 1)
    if c * r <= MAX_COPIES)


@dataclass(frozen=True)
class LabelLayout:
    """Where the QR symbol copies and the text block go on one label; lengths in mm.

    Neighbouring copies are turned half round (``turns`` 2) against each other, so the finder
    patterns along an edge they share sit at opposite ends of it and one blot does not reach
    a finder of both.
    """

    arrangement: Arrangement
    symbols: tuple[Box, ...]  # each copy including its quiet zone (squares), row by row
    modules: int  # symbol side in modules, quiet zone excluded
    module: float  # module size, mm
    text: Box
    turns: tuple[int, ...] = ()  # quarter turns clockwise of each copy (default: none)

    @property
    def qr(self) -> Box:
        """The first (top-left) copy of the symbol, quiet zone included."""
        return self.symbols[0]

    @property
    def copies(self) -> int:
        """Copies of the symbol on the label."""
        return len(self.symbols)

    def turn(self, copy: int) -> int:
        """Quarter turns clockwise (0-3) of copy ``copy``."""
        return self.turns[copy] % 4 if self.turns else 0

    @property
    def quiet_zone(self) -> float:
        """Quiet zone width on each side of the symbol, mm."""
        return QUIET_ZONE_MODULES * self.module

    @property
    def fits(self) -> bool:
        """True when the layout meets the module and text-area minimums."""
        return (
            self.module >= MIN_MODULE_MM - 1e-9
            and self.text.width >= MIN_TEXT_WIDTH_MM - 1e-9
            and self.text.height >= MIN_TEXT_HEIGHT_MM - 1e-9
        )


# --- QR payloads ---------------------------------------------------------------------------


def record_url(
    template: str, kit: str, element: str, leg: str, *, where: str = "record_url"
) -> str:
    """Fill a record URL template's {kit}, {element} and {leg}; values are percent-encoded."""
    allowed = ", ".join("{" + p + "}" for p in URL_PLACEHOLDERS)
    try:
        parts = [
            (f, spec, conv)
            for _, f, spec, conv in string.Formatter().parse(template)
            if f is not None
        ]
    except ValueError as exc:
        raise SpecError(
            [Problem(where, f"bad URL template {template!r} ({exc}); use {allowed}")]
        ) from None
    bad = sorted({f for f, _, _ in parts if f not in URL_PLACEHOLDERS})
    if bad or any(spec or conv for _, spec, conv in parts):
        shown = ", ".join("{" + f + "}" for f in bad) or "a format spec or conversion"
        raise SpecError(
            [Problem(where, f"URL template {template!r} uses {shown}; allowed: {allowed}")]
        )
    values = {
        "kit": urllib.parse.quote(kit, safe=""),
        "element": urllib.parse.quote(element, safe=""),
        "leg": urllib.parse.quote(leg, safe=""),
    }
    return template.format(**values)


def check_station_url(value: object, where: str = "station_url") -> str:
    """A build-day station address, ``http(s)://host[:port][/prefix]`` with no query, fragment
    or placeholders; returned without a trailing slash. SpecError naming ``where`` otherwise."""
    text = value.strip() if isinstance(value, str) else ""
    parts = urllib.parse.urlsplit(text)
    if (parts.scheme not in ("http", "https") or not parts.hostname or parts.query
            or parts.fragment or "{" in text or "}" in text or " " in text):
        raise SpecError([Problem(where, f"{value!r} is not a station address; write it like "
                                 '"http://192.168.4.10:8080" (http or https, host, optional port'
                                 " and path; no query or placeholders)")])
    try:
        parts.port  # noqa: B018 - raises ValueError for a bad port
    except ValueError:
        raise SpecError([Problem(where, f"{value!r}: the port must be 1-65535")]) from None
    return text.rstrip("/")


def station_record_url(station_url: str, element: str) -> str:
    """The element page of the build-day station: ``<station_url>/e/<element ID>``."""
    return station_url.rstrip("/") + "/e/" + urllib.parse.quote(element, safe="")


#: The characters of the QR alphanumeric mode (ISO/IEC 18004:2015 clause 7.4.4, Table 5). A
#: text of these alone takes 5.5 bits a character instead of the byte mode's 8, so it fits a
#: smaller symbol: "K01-60M-US-A" a version 1 symbol at level Q, "K01-60m-us-A" only version 2.
QR_ALPHANUMERIC: frozenset[str] = frozenset("0123456789ABCDEFGHIJKLMNOPQRSTUVWXYZ $%*+-./:")


def station_label_link(station_url: str, element: str) -> str:
    """The station's element page as a label's QR code holds it: in capitals, so that it fits
    the QR alphanumeric mode, when the station's address has no path of its own (scheme and
    host do not depend on case, RFC 3986 sections 3.1 and 3.2.2, and the station answers
    ``/E/<ID>`` in any case); the ordinary :func:`station_record_url` otherwise."""
    url = station_record_url(station_url, element)
    if urllib.parse.urlsplit(station_url).path.strip("/"):
        return url  # a path prefix belongs to whatever serves it, in its own case
    compact = url.upper()
    return compact if set(compact) <= QR_ALPHANUMERIC else url


#: What a label's QR code holds (spec ``labels.code``): "id" is the leg ID ("K03-40M-A"; a
#: version 1 symbol, printed six times on the smallest stock, that the station's lookup, the
#: commands and any scanner read) and "link" the record's address from ``event.record_url`` or
#: ``event.station_url`` (a phone opens it; a larger symbol, so fewer copies fit).
CODE_KINDS: tuple[str, ...] = ("id", "link")


def label_payload(code: str, leg_id: str, link: str | None) -> str:
    """The QR payload of one leg's label: for ``code`` "id" its leg ID in capitals (QR
    alphanumeric mode; IDs are read in any case), else ``link``."""
    if code == "id" or not link:
        return leg_id.upper()
    return link


# --- QR symbols and the fit check ----------------------------------------------------------


def check_ec(ec: str, where: str = "labels.ec") -> str:
    """Return the lower-case error correction level, or raise SpecError if below Q."""
    level = ec.lower() if isinstance(ec, str) else ec
    if level not in EC_LEVELS:
        raise SpecError(
            [
                Problem(
                    where,
                    f"error correction level {ec!r} is not allowed on weatherproof "
                    f"labels; allowed: {', '.join(EC_LEVELS)} (Q or better)",
                )
            ]
        )
    return level


def version_room(stock: LabelStock) -> Mapping[int, int]:
    """Per QR version (1-40): the most copies of its symbol that fit the stock's label by the
    weatherproof rules (0 when not even one fits)."""
    return {version: _most_copies(stock, symbol_modules(version)) for version in range(1, 41)}


def _most_copies(stock: LabelStock, modules: int) -> int:
    """Most copies (up to MAX_COPIES) of a ``modules``-wide symbol that fit the stock's label."""
    return next((k for k in range(MAX_COPIES, 0, -1)
                 if layout_label(stock.label_width, stock.label_height, modules, k).fits), 0)


def robust_version(stock: LabelStock, room: Mapping[int, int] | None = None) -> int:
    """Version whose single symbol best survives scuffs on ``stock``: the largest that keeps
    modules of at least ROBUST_MODULE_MM in the label's one-copy layout (0 if none).

    Scuffs are millimetres across whatever the module size; the more (and smaller) codewords
    a symbol has, the fewer of them one scuff spoils (bench/labels.py measures this).
    """
    room = version_room(stock) if room is None else room
    for version in range(40, 0, -1):
        layout = layout_label(stock.label_width, stock.label_height, symbol_modules(version))
        if room[version] and layout.fits and layout.module >= ROBUST_MODULE_MM - 1e-9:
            return version
    return 0


def smallest_version(payload: str, level: str) -> int | None:
    """Smallest QR version that holds ``payload`` at error correction ``level`` (segno's
    choice of modes), or None when no version holds it."""
    try:
        # A fixed mask skips the mask evaluation; the version does not depend on it.
        return int(segno.make_qr(payload, error=level, mask=0, boost_error=False).version)
    except segno.DataOverflowError:
        return None


def label_options(payload: str, stock: LabelStock, ec: str = "q",
                  room: Mapping[int, int] | None = None,
                  built: dict[tuple[str, str, int], Symbol] | None = None
                  ) -> Iterator[tuple[LabelLayout, Symbol]]:
    """Layouts of one label with their QR symbol, most robust first (none when no symbol fits).

    Most copies first; for as many copies, the best level of EC_PREFERENCE (never below
    ``ec``). Each level uses the smallest version that holds the payload, raised for a single
    copy to the stock's :func:`robust_version`. Each (level, version) symbol is built once; the
    caller takes the first option whose text fits. ``room`` is :func:`version_room`; ``built``
    keeps the symbols by (payload, level, version) across the labels of one build.
    """
    level_floor = check_ec(ec)
    levels = EC_PREFERENCE[: EC_PREFERENCE.index(level_floor) + 1]
    room = version_room(stock) if room is None else room
    built = {} if built is None else built
    robust = robust_version(stock, room)
    options: list[tuple[int, int, str, int]] = []  # (-copies, level rank, level, version)
    for rank, level in enumerate(levels):
        smallest = smallest_version(payload, level)
        if smallest is None or not room[smallest]:
            continue
        for copies in range(room[smallest], 0, -1):
            version = max(smallest, robust) if copies == 1 else smallest
            options.append((-copies, rank, level, version))
    for minus_copies, _, level, version in sorted(options):
        key = (payload, level, version)
        if key not in built:
            built[key] = build_symbol(payload, level, version)
        symbol = built[key]
        yield (layout_label(stock.label_width, stock.label_height, len(symbol.matrix),
                            -minus_copies), symbol)


def symbol_modules(version: int) -> int:
    """Side of a QR symbol in modules, quiet zone excluded (ISO/IEC 18004 clause 6.3.1)."""
    return 17 + 4 * version


def _checker(columns: int, rows: int) -> tuple[int, ...]:
    """Quarter turns of a grid's copies, row by row: every neighbour turned half round."""
    return tuple(2 * ((r + c) % 2) for r in range(rows) for c in range(columns))


def _grid_boxes(left: float, top: float, columns: int, rows: int, modules: int,
                module: float) -> tuple[Box, ...]:
    """Boxes (quiet zone included) of a grid of copies whose neighbours share one quiet
    zone, row by row, from the grid's top-left corner (mm)."""
    side = (modules + 2 * QUIET_ZONE_MODULES) * module
    pitch = (modules + QUIET_ZONE_MODULES) * module
    return tuple(Box(left + c * pitch, top + r * pitch, side, side)
                 for r in range(rows) for c in range(columns))


def _grid_span(count: int, modules: int) -> int:
    """Width in modules of ``count`` copies side by side sharing quiet zones."""
    return count * (modules + QUIET_ZONE_MODULES) + QUIET_ZONE_MODULES


def _beside(width: float, height: float, modules: int, columns: int, rows: int
            ) -> LabelLayout:
    """The text at the left, a grid of copies to its right.

    The text block narrows from PREFERRED_TEXT_WIDTH_MM toward MIN_TEXT_WIDTH_MM while that
    brings the module up to ROBUST_MODULE_MM; the symbols take the rest, up to the height.
    """
    group_w, group_h = _grid_span(columns, modules), _grid_span(rows, modules)
    avail_w, avail_h = width - 2 * INSET_MM - GAP_MM, height - 2 * INSET_MM
    text_w = min(PREFERRED_TEXT_WIDTH_MM,
                 max(MIN_TEXT_WIDTH_MM, avail_w - ROBUST_MODULE_MM * group_w))
    module = max(min(avail_h / group_h, (avail_w - text_w) / group_w), 0.0)
    text_w = avail_w - module * group_w
    boxes = _grid_boxes(width - INSET_MM - module * group_w,
                        INSET_MM + (avail_h - module * group_h) / 2, columns, rows, modules,
                        module)
    return LabelLayout("beside", boxes, modules, module, Box(INSET_MM, INSET_MM, text_w, avail_h),
                       _checker(columns, rows))


def _above(width: float, height: float, modules: int, columns: int, rows: int) -> LabelLayout:
    """A grid of copies at the top, centred, the text below it across the label."""
    group_w, group_h = _grid_span(columns, modules), _grid_span(rows, modules)
    avail_w, avail_h = width - 2 * INSET_MM, height - 2 * INSET_MM - GAP_MM
    module = max(min(avail_w / group_w, (avail_h - MIN_TEXT_HEIGHT_MM) / group_h), 0.0)
    boxes = _grid_boxes(INSET_MM + (avail_w - module * group_w) / 2, INSET_MM, columns, rows,
                        modules, module)
    text_top = INSET_MM + module * group_h + GAP_MM
    return LabelLayout("above", boxes, modules, module,
                       Box(INSET_MM, text_top, avail_w, height - INSET_MM - text_top),
                       _checker(columns, rows))


def _flank(width: float, height: float, modules: int) -> LabelLayout:
    """A copy at each end of the label, the text between them."""
    span = modules + 2 * QUIET_ZONE_MODULES
    avail_w, avail_h = width - 2 * INSET_MM - 2 * GAP_MM, height - 2 * INSET_MM
    text_w = min(PREFERRED_TEXT_WIDTH_MM,
                 max(MIN_TEXT_WIDTH_MM, avail_w - ROBUST_MODULE_MM * 2 * span))
    module = max(min(avail_h / span, (avail_w - text_w) / (2 * span)), 0.0)
    side = span * module
    top = INSET_MM + (avail_h - side) / 2
    return LabelLayout("flank", (Box(INSET_MM, top, side, side),
                                 Box(width - INSET_MM - side, top, side, side)), modules, module,
                       Box(INSET_MM + side + GAP_MM, INSET_MM, avail_w - 2 * side, avail_h),
                       (0, 2))


def layout_label(width: float, height: float, modules: int, copies: int = 1) -> LabelLayout:
    """Best layout of ``copies`` ``modules``-wide symbols and the text block on a width x
    height mm label.

    Candidates: for two copies a copy at each end with the text between (preferred: the
    copies lie farthest apart); then every grid of exactly ``copies`` copies beside the text
    or above it. Returns the fitting candidate with the largest module, modules above
    ROBUST_MODULE_MM counting as equal when there are several copies (the first candidate
    when none fits).
    """
    candidates = [_flank(width, height, modules)] if copies == 2 else []
    for columns, rows in GRIDS:
        if columns * rows == copies:
            candidates += [_beside(width, height, modules, columns, rows),
                           _above(width, height, modules, columns, rows)]
    if not candidates:
        raise ValueError(f"copies must be 1 to {MAX_COPIES}, got {copies}")
    fitting = [c for c in candidates if c.fits]
    if not fitting:
        return candidates[0]
    cap = ROBUST_MODULE_MM if copies > 1 else math.inf
    return max(fitting, key=lambda c: min(c.module, cap))  # max() keeps the first of equals


def _minimum_labels(modules: int) -> tuple[tuple[float, float], tuple[float, float]]:
    """Smallest label (width, height) mm for QR beside and above the text, at the minimums."""
    qr = (modules + 2 * QUIET_ZONE_MODULES) * MIN_MODULE_MM
    beside = (
        2 * INSET_MM + GAP_MM + qr + MIN_TEXT_WIDTH_MM,
        2 * INSET_MM + max(qr, MIN_TEXT_HEIGHT_MM),
    )
    above = (
        2 * INSET_MM + max(qr, MIN_TEXT_WIDTH_MM),
        2 * INSET_MM + GAP_MM + qr + MIN_TEXT_HEIGHT_MM,
    )
    return beside, above


def _ceil_tenth(value: float) -> float:
    """Round a length up to the next 0.1 mm, so a suggested size really fits."""
    return math.ceil(value * 10.0 - 1e-9) / 10.0


def _largest_version(stock: LabelStock) -> int:
    """Largest QR version of which one copy fits the stock's label by the weatherproof rules
    (0 if none)."""
    return next((v for v in range(40, 0, -1) if _most_copies(stock, symbol_modules(v))), 0)


def _longest_prefix(payload: str, version: int, ec: str) -> int:
    """Characters of ``payload`` that fit a symbol of at most ``version`` at level ``ec``."""
    lo, hi = 0, len(payload)
    while lo < hi:
        mid = (lo + hi + 1) // 2
        try:
            segno.make_qr(
                payload[:mid] or " ", error=ec, version=version, mask=0, boost_error=False
            )
            lo = mid
        except segno.DataOverflowError:
            hi = mid - 1
    return lo


def check_fit(
    stock: LabelStock,
    payloads: Iterable[str],
    *,
    ec: str = "q",
    where: str = "labels.stock",
) -> None:
    """Raise SpecError saying what would fit when a payload's QR and the text cannot fit.

    Rules: level Q or better, 4-module quiet zone, module >= 0.5 mm, text >= 7 pt and the
    band name >= 14 pt. The symbol version comes from segno for the longest payload.
    """
    level = check_ec(ec)
    problems: list[Problem] = []
    worst: tuple[int, str] | None = None
    for payload in payloads:
        version = smallest_version(payload, level)
        if version is None:
            problems.append(
                Problem(
                    where,
                    f"QR payload of {len(payload)} characters is too "
                    f"long for any QR symbol at level {level.upper()}: "
                    f"{payload[:40]!r}...",
                )
            )
            continue
        if worst is None or version > worst[0]:
            worst = (version, payload)
    if problems:
        raise SpecError(problems)
    if worst is None:
        return
    version, payload = worst
    modules = symbol_modules(version)
    if layout_label(stock.label_width, stock.label_height, modules).fits:
        return
    (bw, bh), (aw, ah) = (tuple(_ceil_tenth(v) for v in size) for size in _minimum_labels(modules))
    span = modules + 2 * QUIET_ZONE_MODULES
    largest = _largest_version(stock)
    if largest:
        room = (
            f"this label holds at most QR version {largest} "
            f"({_longest_prefix(payload, largest, level)} characters of this payload)"
        )
    else:
        room = "this label cannot hold even the smallest QR symbol with its text"
    raise SpecError(
        [
            Problem(
                where,
                (
                    f"label {stock.label_width:g} x {stock.label_height:g} mm of stock {stock.name!r} is too "
                    f"small: the longest QR payload ({len(payload)} characters) needs version {version} at "
                    f"level {level.upper()}, {modules} modules + {QUIET_ZONE_MODULES}-module quiet zones = "
                    f"{span} x {MIN_MODULE_MM:g} mm = {span * MIN_MODULE_MM:.1f} mm square, plus text of at "
                    f"least {MIN_TEXT_WIDTH_MM:g} x {MIN_TEXT_HEIGHT_MM:.1f} mm (band {MIN_BAND_PT:g} pt, "
                    f"lines {MIN_TEXT_PT:g} pt); a label of at least {bw:.1f} x {bh:.1f} mm (QR beside "
                    f"the text) or {aw:.1f} x {ah:.1f} mm (QR above) would fit; {room}"
                ),
            )
        ]
    )


# --- Stock from the spec -------------------------------------------------------------------

_NUMBER_FIELDS: tuple[str, ...] = (
    "page_width_mm",
    "page_height_mm",
    "label_width_mm",
    "label_height_mm",
    "left_margin_mm",
    "top_margin_mm",
    "h_pitch_mm",
    "v_pitch_mm",
)
_ALLOWED_KEYS: tuple[str, ...] = ("name", "page", "rows", "columns", *_NUMBER_FIELDS)


def _is_number(value: object) -> TypeGuard[int | float]:
    return isinstance(value, int | float) and not isinstance(value, bool) and math.isfinite(value)


def stock_from_mapping(d: Mapping[str, object], where: str) -> LabelStock:
    """Validate a custom label stock from the spec; every length is a number in mm.

    Keys: name; page ("A4"/"Letter") or page_width_mm and page_height_mm; rows; columns;
    label_width_mm; label_height_mm; left_margin_mm and top_margin_mm (default 0);
    h_pitch_mm and v_pitch_mm (default: the label size). Reports every problem at once.
    """
    problems: list[Problem] = []

    def bad(key: str, message: str) -> None:
        problems.append(Problem(f"{where}.{key}", message))

    for key in d:
        if key not in _ALLOWED_KEYS:
            hint = difflib.get_close_matches(str(key), _ALLOWED_KEYS, n=1)
            tip = f" (did you mean {hint[0]!r}?)" if hint else ""
            bad(str(key), f"unknown key {key!r}{tip}; allowed: {', '.join(_ALLOWED_KEYS)}")

    name = d.get("name", "custom")
    if not isinstance(name, str) or not name.strip():
        bad("name", f"name must be a non-empty string, got {name!r}")
        name = "custom"

    nums: dict[str, float] = {}
    page = d.get("page")
    if page is not None:
        if not isinstance(page, str) or page.lower() not in PAGE_SIZES:
            bad(
                "page",
                f"page {page!r} is not known; allowed: A4, Letter "
                "(or give page_width_mm and page_height_mm)",
            )
        elif "page_width_mm" in d or "page_height_mm" in d:
            bad("page", "give either page or page_width_mm/page_height_mm, not both")
        else:
            nums["page_width_mm"], nums["page_height_mm"] = PAGE_SIZES[page.lower()]

    defaults = {"left_margin_mm": 0.0, "top_margin_mm": 0.0}
    for key in _NUMBER_FIELDS:
        if key in nums:
            continue
        value = d.get(key, defaults.get(key))
        if value is None:
            if key in ("h_pitch_mm", "v_pitch_mm"):
                continue  # defaults to the label size below
            if key.startswith("page_") and page is not None:
                continue  # the bad page name is already reported
            bad(key, f"{key} is missing; give a number of millimetres")
            continue
        if not _is_number(value):
            bad(key, f"{key} must be a number of millimetres, got {value!r}")
            continue
        lower_ok = value >= 0 if "margin" in key else value > 0
        if not lower_ok:
            need = ">= 0" if "margin" in key else "> 0"
            bad(key, f"{key} must be {need} mm, got {value!r}")
            continue
        nums[key] = float(value)

    counts: dict[str, int] = {}
    for key in ("rows", "columns"):
        value = d.get(key)
        if value is None:
            bad(key, f"{key} is missing; give a whole number >= 1")
        elif not isinstance(value, int) or isinstance(value, bool) or not 1 <= value <= 200:
            bad(key, f"{key} must be a whole number from 1 to 200, got {value!r}")
        else:
            counts[key] = value

    have = set(nums) | set(counts)
    if {"label_width_mm", "h_pitch_mm"} <= have and nums["h_pitch_mm"] < nums["label_width_mm"]:
        bad(
            "h_pitch_mm",
            f"h_pitch_mm {nums['h_pitch_mm']:g} is less than label_width_mm "
            f"{nums['label_width_mm']:g}; labels would overlap",
        )
    if {"label_height_mm", "v_pitch_mm"} <= have and nums["v_pitch_mm"] < nums["label_height_mm"]:
        bad(
            "v_pitch_mm",
            f"v_pitch_mm {nums['v_pitch_mm']:g} is less than label_height_mm "
            f"{nums['label_height_mm']:g}; labels would overlap",
        )
    if "label_width_mm" in nums and "h_pitch_mm" not in nums and "h_pitch_mm" not in d:
        nums["h_pitch_mm"] = nums["label_width_mm"]
    if "label_height_mm" in nums and "v_pitch_mm" not in nums and "v_pitch_mm" not in d:
        nums["v_pitch_mm"] = nums["label_height_mm"]

    for across, count, pitch, size, margin, pagedim, word in (
        (
            "columns",
            "columns",
            "h_pitch_mm",
            "label_width_mm",
            "left_margin_mm",
            "page_width_mm",
            "wide",
        ),
        (
            "rows",
            "rows",
            "v_pitch_mm",
            "label_height_mm",
            "top_margin_mm",
            "page_height_mm",
            "high",
        ),
    ):
        if not {count, pitch, size, margin, pagedim} <= set(nums) | set(counts):
            continue
        extent = nums[margin] + (counts[count] - 1) * nums[pitch] + nums[size]
        if extent > nums[pagedim] + 1e-6:
            bad(
                across,
                f"{counts[count]} {across} of labels reach {extent:g} mm but the page "
                f"is {nums[pagedim]:g} mm {word}; reduce {across}, {pitch}, {size} "
                f"or {margin}",
            )
    if problems:
        raise SpecError(problems)
    return LabelStock(
        name=str(name),
        page_width=nums["page_width_mm"],
        page_height=nums["page_height_mm"],
        rows=counts["rows"],
        columns=counts["columns"],
        label_width=nums["label_width_mm"],
        label_height=nums["label_height_mm"],
        left_margin=nums["left_margin_mm"],
        top_margin=nums["top_margin_mm"],
        h_pitch=nums["h_pitch_mm"],
        v_pitch=nums["v_pitch_mm"],
    )


def resolve_stock(value: str | Mapping[str, object], where: str) -> LabelStock:
    """A built-in stock by name, or a custom stock from a spec table."""
    if isinstance(value, Mapping):
        return stock_from_mapping(value, where)
    if isinstance(value, str) and value in STOCKS:
        return STOCKS[value]
    hint = difflib.get_close_matches(str(value), list(STOCKS), n=1)
    tip = f" (did you mean {hint[0]!r}?)" if hint else ""
    raise SpecError(
        [
            Problem(
                where,
                f"unknown label stock {value!r}{tip}; allowed: "
                f"{', '.join(STOCKS)} or a table of geometry in mm",
            )
        ]
    )


def pages_needed(stock: LabelStock, count: int, start_cell: int = 0) -> int:
    """Pages needed for ``count`` labels starting at ``start_cell`` of the first page."""
    return math.ceil((start_cell + count) / stock.cells_per_page) if count else 0


def check_start_cell(stock: LabelStock, start_cell: int, where: str = "start_cell") -> None:
    """Raise SpecError unless 0 <= start_cell < cells per page."""
    if (
        isinstance(start_cell, bool)
        or not isinstance(start_cell, int)
        or not (0 <= start_cell < stock.cells_per_page)
    ):
        raise SpecError(
            [
                Problem(
                    where,
                    f"start cell {start_cell!r} is not on a "
                    f"{stock.name!r} page; allowed: 0 to "
                    f"{stock.cells_per_page - 1} (row by row from top-left)",
                )
            ]
        )
