"""Typed page contexts for the station's templates: the facts of :mod:`ledger_api` as text.

Formatting only (both unit systems, the spec's primary first; frequencies in MHz); no numbers
are computed here.
"""

from __future__ import annotations

import urllib.parse
from collections.abc import Mapping
from dataclasses import dataclass, field

from buildsheet.spec.units import UnitSystem, format_both, format_frequency, format_tape
from buildsheet.station.ledger_api import BoardFacts, ElementFacts


def element_url(element_id: str) -> str:
    """The station path of an element page: /e/<element ID> (percent-encoded)."""
    return "/e/" + urllib.parse.quote(element_id, safe="")


@dataclass(frozen=True)
class LegRow:
    leg_id: str
    prescribed: str
    as_cut: str
    current: str
    target: str
    action: str


@dataclass(frozen=True)
class HistoryRow:
    number: str
    time: str
    what: str
    detail: str
    plot_url: str = ""
    voided: bool = False


@dataclass(frozen=True)
class Advice:
    """The instruction in large type (``headline``) and the core's advice lines under it."""

    headline: str
    lines: tuple[str, ...]
    reading: str


@dataclass(frozen=True)
class ElementPage:
    event: str
    element_id: str
    kit: str
    builder: str
    band: str
    design_frequency: str
    band_edges: str
    state: str
    legs: tuple[LegRow, ...]
    tuning: str
    partners: tuple[tuple[str, str], ...]  # (ID, URL)
    advice: Advice | None
    history: tuple[HistoryRow, ...]
    csrf: str
    error: str = ""
    notice: str = ""
    form: Mapping[str, str] = field(default_factory=dict)
    archived: bool = False
    latest_plot: str = ""
    url: str = ""


def _reading_text(dip_hz: float, swr: float | None, r: float | None, x: float | None) -> str:
    parts = [f"dip {format_frequency(dip_hz)}"]
    if swr is not None:
        parts.append(f"SWR {swr:.2f}")
    if r is not None:
        parts.append(f"R {r:.1f} ohm")
    if x is not None:
        parts.append(f"X {x:+.1f} ohm")
    return ", ".join(parts)


def element_page(facts: ElementFacts, units: UnitSystem, event: str, csrf: str, *,
                 error: str = "", notice: str = "", form: Mapping[str, str] | None = None,
                 ) -> ElementPage:
    """The element page context."""
    legs = tuple(LegRow(leg.leg_id, format_tape(leg.prescribed_cut_m, units),
                        format_tape(leg.cut_m, units) if leg.cut_m is not None else "not cut yet",
                        format_tape(leg.current_m, units), format_tape(leg.target_m, units), leg.action)
                 for leg in facts.legs)
    tuning = (facts.tuning[:1].upper() + facts.tuning[1:]) if facts.tuning else ""
    rows: list[tuple[tuple[str, int], HistoryRow]] = []
    base = element_url(facts.element_id)
    for m in facts.readings:
        detail = _reading_text(m.dip_hz, m.swr, m.r_ohm, m.x_ohm)
        rows.append(((m.time, m.id), HistoryRow(
            f"reading {m.id}", m.time, "reading", detail + (f" ({m.note})" if m.note else ""),
            f"{base}/sweep/{m.id}.svg" if m.sweep else "", m.voided)))
    for t in facts.entries:
        which = "each leg" if t.leg == "both" else f"leg {t.leg}"
        if t.kind == "cut":
            text = f"{which} cut at {format_tape(t.length_m, units)}"
        else:
            verb = "removed from" if t.length_m > 0 else "added back to"
            text = f"{format_both(abs(t.length_m), units)} {verb} {which}"
        rows.append(((t.time, t.id), HistoryRow(f"{t.kind} {t.id}", t.time, t.kind,
                                                text + (f" ({t.note})" if t.note else ""), "",
                                                t.voided)))
    rows.sort(key=lambda r: r[0], reverse=True)
    advice = None
    if facts.instruction is not None and not facts.archived:
        ins = facts.instruction
        latest = next((m for m in facts.readings if m.id == ins.reading_id), None)
        advice = Advice(ins.headline, ins.lines,
                        f"After reading {latest.id}: " + _reading_text(
                            latest.dip_hz, latest.swr, latest.r_ohm, latest.x_ohm)
                        if latest else "No reading yet.")
    latest_plot = next((r.plot_url for _, r in rows if r.plot_url and not r.voided), "")
    return ElementPage(event, facts.element_id, facts.kit, facts.builder, facts.band,
                       format_frequency(facts.design_hz),
                       f"{format_frequency(facts.band_low_hz)} to "
                       f"{format_frequency(facts.band_high_hz)}", facts.state, legs, tuning,
                       tuple((p, element_url(p)) for p in facts.partners), advice,
                       tuple(r for _, r in rows), csrf, error, notice, dict(form or {}),
                       facts.archived, latest_plot, base)


@dataclass(frozen=True)
class BoardRow:
    element_id: str
    url: str
    kit: str
    builder: str
    band: str
    state: str
    latest: str


@dataclass(frozen=True)
class OfferRow:
    design_key: str
    title: str
    measured: tuple[str, ...]
    calibrated: bool
    batch: tuple[tuple[str, str, str], ...]  # (ID, leg A action, leg B action) in words


@dataclass(frozen=True)
class BoardPage:
    event: str
    rows: tuple[BoardRow, ...]
    offers: tuple[OfferRow, ...]
    counts: tuple[tuple[str, int], ...]
    csrf: str
    organiser: bool = False


def board_page(facts: BoardFacts, units: UnitSystem, event: str, csrf: str,
               organiser: bool = False) -> BoardPage:
    """The day board context."""
    rows = []
    for f in facts.elements:
        last = f.readings[-1] if f.readings else None
        latest = (_reading_text(last.dip_hz, last.swr, last.r_ohm, last.x_ohm) + f" at {last.time}"
                  if last else "")
        rows.append(BoardRow(f.element_id, element_url(f.element_id), f.kit, f.builder, f.band,
                             f.state, latest))
    offers = tuple(OfferRow(o.design_key, o.title, o.measured, o.calibrated, o.batch)
                   for o in facts.offers)
    return BoardPage(event, tuple(rows), offers, facts.counts, csrf, organiser)


@dataclass(frozen=True)
class OrganiserPage:
    event: str
    csrf: str
    signed_in: bool
    offers: tuple[OfferRow, ...] = ()
    reprint: tuple[tuple[str, str], ...] | None = ()  # (leg ID, URL); None: no packet known
    error: str = ""
    notice: str = ""
