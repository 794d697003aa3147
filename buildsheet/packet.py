"""Assemble the Packet: one plain data model of everything the renderers print, computed once.

``build_packet`` takes the spec (as designed) and the ledger (as built) and computes the physics
once per design (shared by every kit of it), each element's as-built state (buildsheet.calc.
asbuilt), the label contents, the record-page rows, the batch trims and a content fingerprint of
every printable item (a kit sheet, a label, each day-level page), so a changed-only build
reprints exactly the items whose content changed. The writers in buildsheet.render only format
the Packet. Nothing here touches the file system.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

from buildsheet.calc.advice import DesignAdvice, design_advice, tuning_words
from buildsheet.calc.asbuilt import (
    ElementState,
    advice_lines,
    design_target_m,
    element_state,
    expected_dip_hz,
)
from buildsheet.calc.bom import BomLine
from buildsheet.calc.calibrate import Calibration, calibrated_prediction, design_fingerprint
from buildsheet.calc.cuts import DesignCuts, ElementCut, design_cuts
from buildsheet.calc.labels import (
    LabelContent,
    Leg,
    label_payload,
    record_url,
    station_label_link,
)
from buildsheet.calc.logistics import logistics
from buildsheet.calc.performance import DesignPerformance, design_performance
from buildsheet.calc.safety import SITE_CAUTIONS
from buildsheet.calc.stock import SpoolPlan
from buildsheet.em.context import Solver, solver_or_new
from buildsheet.em.prediction import ModelName
from buildsheet.em.solve import predict
from buildsheet.errors import BuildError, Problem
from buildsheet.records import ElementHistory
from buildsheet.spec.design import AntennaDesign, Design, Kit
from buildsheet.spec.units import UnitSystem, format_both, format_frequency, format_length
from buildsheet.store.manifest import content_hash

#: The kit-sheet cautions (their one home is buildsheet.calc.safety).
SAFETY_CAUTIONS: tuple[str, ...] = SITE_CAUTIONS

#: Day-level pages of the sheets, each reprinted only when its own content changes.
DAY_PAGES: tuple[str, ...] = ("cover", "bom", "spool-plan", "stations", "batch-trims")


@dataclass(frozen=True)
class ElementEntry:
    """One element of one kit: stable IDs, the design's cut, its as-built state and advice."""

    element_id: str  # "K03-40m"
    kit: Kit
    cut: ElementCut
    state: ElementState
    partners: tuple[str, ...] = ()
    advice: tuple[str, ...] = ()  # the instruction in words (buildsheet.calc.asbuilt)
    record_rows: tuple[tuple[str, str], ...] = ()  # model / calibrated / measured, side by side

    @property
    def leg_ids(self) -> tuple[str, str]:
        return f"{self.element_id}-A", f"{self.element_id}-B"


@dataclass(frozen=True)
class Packet:
    """Everything to print for one build day."""

    design: Design
    built_at: str  # ISO 8601 UTC timestamp of the build
    revision: int
    model: ModelName
    cuts: tuple[DesignCuts, ...]  # per antenna design, in spec order
    entries: tuple[ElementEntry, ...]  # per kit element, sorted by kit then element order
    warnings: tuple[str, ...]
    kit_boms: dict[str, tuple[BomLine, ...]]  # per kit ID
    day_bom: tuple[BomLine, ...]  # totals over all kits (the whole day, cut or not)
    spool_plan: SpoolPlan  # legs not cut yet only
    performance: tuple[DesignPerformance, ...]  # per design, same order as cuts
    calibrations: dict[str, Calibration] = field(default_factory=dict)  # by design key
    labels: tuple[LabelContent, ...] = ()  # one per leg, kit then element then leg
    items: dict[str, str] = field(default_factory=dict)  # printable item -> content hash
    already_cut: tuple[str, ...] = ()  # leg IDs left out of the spool plan (cut before)
    advice: dict[str, DesignAdvice] = field(default_factory=dict)  # worded notes by design key
    organiser_pin: str = ""  # the station's organiser PIN, for the cover page only (not labels)

    def performance_for(self, design_key: str) -> DesignPerformance:
        return next(p for c, p in zip(self.cuts, self.performance) if c.design.key == design_key)

    def cuts_for(self, design_key: str) -> DesignCuts:
        return next(c for c in self.cuts if c.design.key == design_key)

    def kit_entries(self, kit_id: str) -> tuple[ElementEntry, ...]:
        return tuple(e for e in self.entries if e.kit.kit_id == kit_id)

    def kits_of(self, design_key: str) -> tuple[Kit, ...]:
        return tuple(k for k in self.design.kits if k.design_key == design_key)

    @property
    def batch_trims(self) -> tuple[ElementEntry, ...]:
        """Elements of calibrated designs with wire already cut: what to do to each leg."""
        return batch_entries(self.entries, self.calibrations)

    def sheet_item(self, kit: Kit) -> str:
        """The printable item holding a kit's build sheet and log form."""
        if self.design.event.layout == "per_design":
            return f"design:{kit.design_key}"
        return f"kit:{kit.kit_id}"


def batch_entries(entries: Sequence[ElementEntry],
                  calibrations: Mapping[str, Calibration]) -> tuple[ElementEntry, ...]:
    """The batch-trim list: elements of calibrated designs whose wire is already cut."""
    return tuple(e for e in entries if e.kit.design_key in calibrations and e.state.is_cut)


def element_id(kit: Kit, element_key: str) -> str:
    """Stable element ID: kit ID plus the element key, e.g. "K03-40m"."""
    return f"{kit.kit_id}-{element_key}"


def solve_design(design: AntennaDesign, spec: Design, model: ModelName,
                 calibration: Calibration | None = None,
                 solver: Solver | None = None) -> DesignCuts:
    """Predict and cut one design: the one home of the prescribed cut length.

    With a site calibration for the design, the calibrated prediction replaces the model's
    and the trim allowance shrinks to the calibration's residual uncertainty.
    """
    closed = predict(design, spec.site.ground, "closed_form")
    model_prediction = (closed if model == "closed_form" else
                        predict(design, spec.site.ground, model, solver))
    prediction = (calibrated_prediction(design, calibration, solver) if calibration is not None
                  else model_prediction)
    try:
        return design_cuts(design, prediction, closed,
                           model_prediction if calibration is not None else None)
    except ValueError as exc:
        raise BuildError([Problem(spec.source, str(exc))]) from None


def usable_calibrations(spec: Design, calibrations: Mapping[str, Calibration]) -> dict[str, Calibration]:
    """The calibrations that apply: same design key and the same geometry and wire."""
    return {d.key: calibrations[d.key] for d in spec.designs
            if d.key in calibrations and calibrations[d.key].fingerprint == design_fingerprint(d)}


def record_rows(cut: ElementCut, state: ElementState,
                units: UnitSystem = "metric") -> tuple[tuple[str, str], ...]:
    """The record page's model / calibrated / measured rows of one element."""
    f0, slope = cut.element.frequency_hz, cut.prediction.slope_m_per_hz
    mean = (state.legs[0].current_m + state.legs[1].current_m) / 2.0
    model_target = design_target_m(cut, uncalibrated=True)
    rows = [("Resonant leg, model" + (" before calibration" if cut.calibrated else ""),
             format_both(cut.uncalibrated_leg_m if cut.calibrated and cut.uncalibrated_leg_m
                         else cut.predicted_leg_m, units)),
            ("Dip expected now, model", format_frequency(
                expected_dip_hz(mean, model_target, f0, slope)))]
    if cut.calibrated:
        rows += [("Resonant leg, calibrated", format_both(cut.predicted_leg_m, units)),
                 ("Dip expected now, calibrated", format_frequency(
                     expected_dip_hz(mean, design_target_m(cut), f0, slope)))]
    if state.latest_dip_hz is not None:
        rows.append(("Latest measured dip", format_frequency(state.latest_dip_hz)))
    rows.append(("Target leg (" + state.target_source + ")",
                 format_both(state.legs[0].target_m, units)))
    rows.append(("Tuning", tuning_words(cut, units)))
    return tuple(rows)


def _length_text(metres: float, units: UnitSystem) -> str:
    """A label length, primary unit first: "10.43 m / 34 ft 2 5/8 in"."""
    return format_both(metres, units).replace(" (", " / ").rstrip(")")


def label_contents(spec: Design, entries: Sequence[ElementEntry]) -> tuple[LabelContent, ...]:
    """One label per leg. A leg not cut shows its prescribed cut; a leg cut shows the length
    it was cut to and, when trimmed since, "now" its current length."""
    ev = spec.event
    out = []
    for entry in entries:
        cut = entry.cut
        freq = format_frequency(cut.element.frequency_hz)
        sides: tuple[Leg, Leg] = ("A", "B")
        for leg_id, side, leg in zip(entry.leg_ids, sides, entry.state.legs):
            as_cut = leg.cut_m if leg.cut_m is not None else leg.prescribed_cut_m
            length = _length_text(as_cut, ev.units)
            trimmed = leg.cut_m is not None and abs(leg.current_m - leg.cut_m) > 1e-9
            now_text = _length_text(leg.current_m, ev.units) if trimmed else ""
            link = (record_url(ev.record_url, entry.kit.kit_id, entry.element_id, leg_id)
                    if ev.record_url else
                    station_label_link(ev.station_url, entry.element_id) if ev.station_url
                    else None)
            payload = label_payload(spec.labels.code, leg_id, link)
            out.append(LabelContent(entry.kit.kit_id, entry.element_id, leg_id, side,
                                    cut.element.band_label, freq, length, payload,
                                    current_length_text=now_text))
    return tuple(out)


def _plain(value: Any) -> Any:
    """JSON-ready canonical form of frozen data (dataclasses, numpy arrays, complex)."""
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        return {f.name: _plain(getattr(value, f.name)) for f in dataclasses.fields(value)}
    if isinstance(value, Mapping):
        return {str(k): _plain(v) for k, v in sorted(value.items(), key=lambda kv: str(kv[0]))}
    if isinstance(value, (list, tuple)):
        return [_plain(v) for v in value]
    if hasattr(value, "tolist"):
        return _plain(value.tolist())
    if isinstance(value, complex):
        return [value.real, value.imag]
    if isinstance(value, float) and not math.isfinite(value):
        return repr(value)  # "nan", "inf": the canonical JSON of content_hash allows no NaN
    if value is None or isinstance(value, (str, int, float, bool)):
        return value
    return repr(value)


def fingerprint(*parts: Any) -> str:
    """Content hash of printable data (buildsheet.store.manifest.content_hash of its canonical
    plain form), hex sha256[:16]."""
    return content_hash(_plain(parts))[:16]


def item_fingerprints(spec: Design, cuts: Sequence[DesignCuts],
                      performance: Sequence[DesignPerformance], entries: Sequence[ElementEntry],
                      labels: Sequence[LabelContent], kit_boms: Mapping[str, Any],
                      day_bom: Any, plan: SpoolPlan, warnings: Sequence[str],
                      calibrations: Mapping[str, Calibration],
                      advice: Mapping[str, Any] | None = None) -> dict[str, str]:
    """Content hash of every printable item: ``kit:K01`` (or ``design:KEY`` in the per-design
    layout: build sheet and log form), ``label:K01-40m-A``, ``nvis:KEY`` and ``day:PAGE``."""
    ev = spec.event
    common = (ev.name, ev.date, ev.club, ev.units, ev.paper, ev.layout, ev.record_url,
              spec.site)
    advice = advice or {}
    by_design = {c.design.key: (c, (p, advice.get(c.design.key))) for c, p in zip(cuts, performance)}
    items: dict[str, str] = {}
    for key, (c, p) in by_design.items():
        items[f"nvis:{key}"] = fingerprint(common, c, p)
    for kit in spec.kits:
        c, p = by_design[kit.design_key]
        mine = [e for e in entries if e.kit.kit_id == kit.kit_id]
        name = f"design:{kit.design_key}" if ev.layout == "per_design" else f"kit:{kit.kit_id}"
        items[name] = fingerprint(items.get(name, ""), common, c, p, kit, mine,
                                  kit_boms[kit.kit_id], calibrations.get(kit.design_key))
    for label in labels:
        items[f"label:{label.leg_id}"] = fingerprint(spec.labels.stock, label)
    batch = batch_entries(entries, calibrations)
    items["day:cover"] = fingerprint(common, [k for k in spec.kits], warnings, SAFETY_CAUTIONS)
    items["day:bom"] = fingerprint(common, day_bom)
    items["day:spool-plan"] = fingerprint(common, plan)
    items["day:stations"] = fingerprint(common, plan.spools)
    items["day:batch-trims"] = fingerprint(common, batch, calibrations)
    return items


def solve_designs(spec: Design, model: ModelName, calibrations: Mapping[str, Calibration],
                  solver: Solver | None = None) -> tuple[DesignCuts, ...]:
    """Every design predicted and cut (calibrated where a calibration applies), spec order."""
    solver = solver_or_new(solver)
    return tuple(solve_design(d, spec, model, calibrations.get(d.key), solver)
                 for d in spec.designs)


def element_entries(spec: Design, cuts: Sequence[DesignCuts],
                    histories: Mapping[str, ElementHistory]) -> tuple[ElementEntry, ...]:
    """Every kit element with its as-built state, advice and record rows (kit order)."""
    by_key = {c.design.key: c for c in cuts}
    entries = []
    for kit in spec.kits:
        ids = [element_id(kit, c.element.key) for c in by_key[kit.design_key].elements]
        for eid, cut in zip(ids, by_key[kit.design_key].elements):
            state = element_state(eid, cut, histories.get(eid))
            partners = tuple(i for i in ids if i != eid)
            entries.append(ElementEntry(eid, kit, cut, state, partners,
                                        advice_lines(state, cut, spec.event.units, partners),
                                        record_rows(cut, state, spec.event.units)))
    return tuple(entries)


def build_packet(spec: Design, *, built_at: str, revision: int = 1, model: ModelName = "mom",
                 calibrations: Mapping[str, Calibration] | None = None,
                 histories: Mapping[str, ElementHistory] | None = None,
                 organiser_pin: str = "", solver: Solver | None = None) -> Packet:
    """Compute everything to print for ``spec`` and the ledger ``histories`` (by element ID);
    ``organiser_pin`` goes on the cover page only; ``solver``: the build's solver context (a
    fresh one if None: every matrix of the build is filled once there). Raises BuildError for
    an unbuildable design."""
    solver = solver_or_new(solver)
    histories = histories or {}
    cals = usable_calibrations(spec, calibrations or {})
    cuts = solve_designs(spec, model, cals, solver)
    entries = element_entries(spec, cuts, histories)
    already_cut = tuple(leg.leg_id for e in entries for leg in e.state.legs if leg.cut_m is not None)
    warnings = list(spec.warnings) + [w for c in cuts for w in c.warnings]
    kit_boms, day_bom, plan = logistics(spec, cuts, already_cut=set(already_cut))
    for buy in plan.to_buy:
        units = spec.event.units
        what = (f"buy {buy.spools} more of {format_length(buy.spool_length_m, units)}"
                if buy.spools and buy.spool_length_m else buy.note)
        warnings.append(f"not enough {buy.material} on hand: "
                        f"{format_length(buy.short_m, units)} short ({what}); "
                        "see the spool cut plan")
    performance = tuple(design_performance(c, spec.site.ground, spec.exposure, solver)
                        for c in cuts)
    site_m = (spec.site.width_m, spec.site.depth_m)
    advice = {c.design.key: design_advice(c, p, spec.event.units, site_m,
                                          ground=spec.site.ground, model=model, solver=solver)
              for c, p in zip(cuts, performance)}
    warnings += [w for a in advice.values() for w in a.warnings]
    for key in sorted(set(calibrations or {}) - set(cals)):
        warnings.append(f"the stored calibration of design {key} no longer applies (its geometry "
                        "or wire changed); cut lengths are uncalibrated")
    labels = label_contents(spec, entries)
    items = item_fingerprints(spec, cuts, performance, entries, labels, kit_boms, day_bom, plan,
                              warnings, cals, advice)
    if organiser_pin:
        items["day:cover"] = fingerprint(items["day:cover"], organiser_pin)
    return Packet(spec, built_at, revision, model, cuts, entries, tuple(warnings),
                  kit_boms, day_bom, plan, performance, cals, labels, items, already_cut, advice,
                  organiser_pin)


def entry_fingerprint(packet: Packet, entry: ElementEntry) -> str:
    """Hash of everything printed for one element (its sheet rows, state and labels)."""
    labels = [lb for lb in packet.labels if lb.element_id == entry.element_id]
    return fingerprint(entry, labels, packet.design.event.units, packet.design.event.record_url)
