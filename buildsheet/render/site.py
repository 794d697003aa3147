"""Record pages: a static, self-contained HTML site of kits and elements (jinja2 templates).

One index page and one page per element (file name from the element ID, see :func:`page_name`).
Pages carry inline CSS only: no scripts, fonts, images or other external assets, so they open
from file://, from a phone, or on paper. The context builders are pure (record data in, typed
page contexts out); :func:`write_site` is the only function that touches files.
"""

from __future__ import annotations

import re
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass
from importlib.resources import files
from pathlib import Path
from typing import TYPE_CHECKING

import jinja2

from buildsheet.errors import BuildError
from buildsheet.records import SIDES, ElementHistory
from buildsheet.spec.units import UnitSystem, format_frequency, format_length
from buildsheet.store.files import write_atomic

if TYPE_CHECKING:
    from buildsheet.packet import ElementEntry

INDEX_NAME = "index.html"
#: The caution line on every element page; it defers to local rules.
CAUTION = ("Caution: element ends carry high RF voltage; keep people away from low ends while "
           "transmitting. Keep masts and wires well clear of power lines. Local rules and site "
           "safety officers take precedence over these notes.")


@dataclass(frozen=True)
class LengthText:
    """A length (metres) with its metric and feet-inches texts; ``units`` says which is
    printed first (the packet's primary unit system)."""

    metres: float
    metric: str
    imperial: str
    units: UnitSystem = "metric"

    @property
    def primary(self) -> str:
        return self.imperial if self.units == "imperial" else self.metric

    @property
    def secondary(self) -> str:
        return self.metric if self.units == "imperial" else self.imperial


@dataclass(frozen=True)
class MeasurementView:
    time: str
    dip: str
    offset: str  # dip minus design frequency, kHz with sign
    swr: str
    note: str


@dataclass(frozen=True)
class TrimView:
    time: str
    leg: str
    action: str  # "removed" or "added back"
    amount: LengthText
    note: str


@dataclass(frozen=True)
class PrintView:
    revision: int
    kind: str
    file: str
    hash: str  # first 12 hex digits
    time: str


@dataclass(frozen=True)
class LegView:
    """One leg's lengths as built against as designed, formatted."""

    leg_id: str
    prescribed: LengthText
    as_cut: LengthText | None
    current: LengthText
    target: LengthText | None
    action: str


@dataclass(frozen=True)
class PartnerLink:
    element_id: str
    href: str


@dataclass(frozen=True)
class ElementPage:
    """Context of templates/element.html."""

    element_id: str
    kit: str
    design: str
    band: str
    status: str
    design_frequency: str
    band_edges: str
    spec_revision: int
    predicted: LengthText
    leg_views: tuple[LegView, ...]
    advice: tuple[str, ...]
    legs: tuple[str, str]
    measurements: tuple[MeasurementView, ...]
    trims: tuple[TrimView, ...]
    prints: tuple[PrintView, ...]
    partners: tuple[PartnerLink, ...]
    sheet_file: str
    sheet_href: str
    caution: str
    built_at: str
    index_href: str
    comparison: tuple[tuple[str, str], ...] = ()  # predicted / calibrated / measured, side by side


@dataclass(frozen=True)
class IndexRow:
    element_id: str
    href: str
    design: str
    band: str
    design_frequency: str
    cut: str
    current: str
    last_dip: str
    status: str


@dataclass(frozen=True)
class KitSection:
    kit: str
    rows: tuple[IndexRow, ...]


@dataclass(frozen=True)
class IndexPage:
    """Context of templates/index.html."""

    title: str
    kits: tuple[KitSection, ...]
    element_count: int
    archived_count: int
    built_at: str


# --------------------------------------------------------------------------- pure


def page_name(element_id: str) -> str:
    """File name of an element's page: the ID with anything but letters, digits, '-', '.', '_'
    replaced by '_', plus ".html" ("K03-40m" -> "K03-40m.html")."""
    safe = re.sub(r"[^A-Za-z0-9._-]", "_", element_id).lstrip(".") or "_"
    return f"{safe}.html"


def length_text(metres: float, units: UnitSystem = "metric") -> LengthText:
    """Metric and feet-inches texts of a length in metres, ``units`` first."""
    return LengthText(metres, format_length(metres, "metric"), format_length(metres, "imperial"),
                      units)


def _precise(metres: float, units: UnitSystem) -> LengthText:
    """Cut and current lengths: metric to the millimetre (a tape reads that), ``units`` first."""
    return LengthText(metres, f"{metres:.3f} m", format_length(metres, "imperial"), units)


def _time(iso: str) -> str:
    """"2024-05-01T12:03:09+00:00" -> "2024-05-01 12:03 +00:00" (readable, still exact)."""
    m = re.fullmatch(r"(\d{4}-\d\d-\d\d)T(\d\d:\d\d)(?::\d\d(?:\.\d+)?)?(Z|[+-]\d\d:\d\d)?", iso)
    if not m:
        return iso
    zone = m.group(3) or ""
    return f"{m.group(1)} {m.group(2)} {'UTC' if zone in ('Z', '+00:00') else zone}".strip()


def leg_views(h: ElementHistory, entry: ElementEntry | None,
              units: UnitSystem) -> tuple[LegView, ...]:
    """Formatted legs: from the packet's as-built state when the element is in the packet,
    else (archived) from the ledger alone."""
    if entry is not None:
        return tuple(LegView(leg.leg_id, _precise(leg.prescribed_cut_m, units),
                             None if leg.cut_m is None else _precise(leg.cut_m, units),
                             _precise(leg.current_m, units), _precise(leg.target_m, units),
                             leg.action.words(units, both=False))
                     for leg in entry.state.legs)
    out = []
    for side in SIDES:
        cut, now = h.leg_cut(side), h.current_leg_m(side)
        out.append(LegView(f"{h.element.id}-{side}", _precise(h.element.cut_leg_m, units),
                           None if cut is None else _precise(cut.length_m, units),
                           _precise(now if now is not None else h.element.cut_leg_m, units),
                           None,
                           "archived: no target"))
    return tuple(out)


def element_page(h: ElementHistory, built_at: str, sheet_file: str = "",
                 sheet_href: str = "", entry: ElementEntry | None = None,
                 units: UnitSystem = "metric") -> ElementPage:
    """The typed context of one element page."""
    e = h.element
    f0 = e.design_frequency_hz
    ms = tuple(MeasurementView(_time(m.time), format_frequency(m.dip_hz),
                               f"{(m.dip_hz - f0) / 1e3:+.1f} kHz",
                               "" if m.swr is None else f"{m.swr:.2f}", m.note)
               for m in h.measurements)
    ts = tuple(TrimView(_time(t.time), "A and B" if t.leg == "both" else t.leg,
                        "removed" if t.delta_m > 0 else "added back",
                        length_text(abs(t.delta_m), units), t.note) for t in h.trims)
    ps = tuple(PrintView(p.revision, p.kind, p.file, p.hash[:12], _time(p.time))
               for p in h.prints)
    if not sheet_file:
        sheets = [p.file for p in h.prints if p.kind == "sheet" and p.file]
        sheet_file = sheets[-1] if sheets else ""
    return ElementPage(
        element_id=e.id, kit=e.kit, design=e.design, band=e.key, status=e.status,
        design_frequency=format_frequency(f0),
        band_edges=f"{format_frequency(e.band_low_hz)} to {format_frequency(e.band_high_hz)}",
        spec_revision=e.spec_revision, predicted=_precise(e.predicted_leg_m, units),
        leg_views=leg_views(h, entry, units), advice=entry.advice if entry else (),
        legs=(f"{e.id}-A", f"{e.id}-B"),
        measurements=ms, trims=ts, prints=ps,
        partners=tuple(PartnerLink(p, page_name(p)) for p in e.partners),
        sheet_file=sheet_file, sheet_href=sheet_href, caution=CAUTION, built_at=built_at,
        index_href=INDEX_NAME, comparison=entry.record_rows if entry else ())


def index_page(histories: Sequence[ElementHistory], built_at: str,
               title: str = "Element records",
               entries: Mapping[str, ElementEntry] | None = None) -> IndexPage:
    """The typed context of the index: kits in order, elements by ID within each kit."""
    kits: dict[str, list[IndexRow]] = {}
    for h in sorted(histories, key=lambda h: (h.element.kit, h.element.id)):
        e = h.element
        last = h.measurements[-1] if h.measurements else None
        cuts = [c.length_m for c in (h.leg_cut(s) for s in SIDES) if c is not None]
        nows = [x for x in (h.current_leg_m(s) for s in SIDES) if x is not None]
        entry = (entries or {}).get(e.id)
        state = entry.state.status if entry is not None else e.status
        kits.setdefault(e.kit, []).append(IndexRow(
            e.id, page_name(e.id), e.design, e.key, format_frequency(e.design_frequency_hz),
            f"{min(cuts):.3f} m" if cuts else f"not cut ({e.cut_leg_m:.3f} m)",
            f"{min(nows):.3f} m" if nows else "",
            format_frequency(last.dip_hz) if last else "", state))
    archived = sum(1 for h in histories if h.element.status == "archived")
    return IndexPage(title, tuple(KitSection(k, tuple(v)) for k, v in kits.items()),
                     len(histories), archived, built_at)


def environment() -> jinja2.Environment:
    """The one jinja2 environment: templates shipped as ``buildsheet.templates``, autoescape on,
    undefined names are errors."""
    folder = files("buildsheet.templates")
    return jinja2.Environment(
        loader=jinja2.FileSystemLoader(str(folder)),
        autoescape=True, undefined=jinja2.StrictUndefined, trim_blocks=True, lstrip_blocks=True,
        keep_trailing_newline=True)


def render_site(histories: Sequence[ElementHistory], built_at: str,
                sheet_files: Mapping[str, str] | None = None,
                sheet_hrefs: Mapping[str, str] | None = None,
                title: str = "Element records",
                env: jinja2.Environment | None = None,
                entries: Mapping[str, ElementEntry] | None = None,
                units: UnitSystem = "metric") -> dict[str, str]:
    """All pages as {file name: HTML text}. ``sheet_files`` / ``sheet_hrefs`` map element IDs to
    the build sheet's name and a relative link to it (optional); ``entries`` are the packet's
    elements (as-built state, advice, record rows) by ID."""
    entries = entries or {}
    env = env or environment()
    sheet_files = sheet_files or {}
    sheet_hrefs = sheet_hrefs or {}
    element_t = env.get_template("element.html")
    pages = {INDEX_NAME: env.get_template("index.html").render(
        page=index_page(histories, built_at, title, entries))}
    for h in histories:
        eid = h.element.id
        name = page_name(eid)
        if name in pages:
            raise BuildError(f"element IDs {eid!r} and another give the same page name {name}")
        pages[name] = element_t.render(page=element_page(
            h, built_at, sheet_files.get(eid, ""), sheet_hrefs.get(eid, ""),
            entries.get(eid), units))
    return pages


# --------------------------------------------------------------------------- files


def write_site(out_dir: str | Path, histories: Iterable[ElementHistory], built_at: str,
               sheet_files: Mapping[str, str] | None = None,
               sheet_hrefs: Mapping[str, str] | None = None,
               title: str = "Element records") -> list[Path]:
    """Render every page, then write them into ``out_dir`` (created if needed), each file
    atomically. Returns the written paths, index first."""
    pages = render_site(list(histories), built_at, sheet_files, sheet_hrefs, title)
    folder = Path(out_dir)
    try:
        folder.mkdir(parents=True, exist_ok=True)
        written = []
        for name, text in pages.items():
            write_atomic(folder / name, text.encode("utf-8"))
            written.append(folder / name)
    except OSError as exc:
        raise BuildError(f"{folder}: cannot write the record pages ({exc.strerror or exc})") \
            from exc
    return written
