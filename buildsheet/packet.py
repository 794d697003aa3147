"""Assemble the Packet: one plain data model of everything the renderers print.

``build_packet`` computes (the physics once per design, shared by every kit of it); the writers
in buildsheet.render turn the Packet into files. Nothing here touches the file system.
"""

from __future__ import annotations

import hashlib
import json
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field

from buildsheet.calc.advice import DesignAdvice, design_advice
from buildsheet.calc.bom import BomLine
from buildsheet.calc.calibrate import (
    BatchTrim,
    Calibration,
    CutElement,
    batch_trims,
    calibrated_prediction,
    design_fingerprint,
)
from buildsheet.calc.cuts import DesignCuts, ElementCut, design_cuts
from buildsheet.calc.logistics import logistics
from buildsheet.calc.performance import DesignPerformance, design_performance
from buildsheet.calc.safety import SITE_CAUTIONS
from buildsheet.calc.stock import SpoolPlan
from buildsheet.em.prediction import ModelName
from buildsheet.em.solve import predict
from buildsheet.errors import BuildError, Problem
from buildsheet.spec.design import AntennaDesign, Design, Kit
from buildsheet.spec.units import format_both, format_frequency

#: The kit-sheet cautions (their one home is buildsheet.calc.safety).
SAFETY_CAUTIONS: tuple[str, ...] = SITE_CAUTIONS


@dataclass(frozen=True)
class ElementEntry:
    """One element of one kit, with its stable IDs."""

    element_id: str  # "K03-40m"
    kit: Kit
    cut: ElementCut

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
    day_bom: tuple[BomLine, ...]  # totals over all kits
    spool_plan: SpoolPlan
    performance: tuple[DesignPerformance, ...]  # per design, same order as cuts
    calibrations: dict[str, Calibration] = field(default_factory=dict)  # by design key
    batch_trims: tuple[BatchTrim, ...] = ()  # for elements already cut, when calibrated
    advice: dict[str, DesignAdvice] = field(default_factory=dict)  # worded notes by design key

    def performance_for(self, design_key: str) -> DesignPerformance:
        return next(p for c, p in zip(self.cuts, self.performance) if c.design.key == design_key)

    def cuts_for(self, design_key: str) -> DesignCuts:
        return next(c for c in self.cuts if c.design.key == design_key)

    def kit_entries(self, kit_id: str) -> tuple[ElementEntry, ...]:
        return tuple(e for e in self.entries if e.kit.kit_id == kit_id)

    def kits_of(self, design_key: str) -> tuple[Kit, ...]:
        return tuple(k for k in self.design.kits if k.design_key == design_key)


def element_id(kit: Kit, element_key: str) -> str:
    """Stable element ID: kit ID plus the element key, e.g. "K03-40m"."""
    return f"{kit.kit_id}-{element_key}"


def solve_design(design: AntennaDesign, spec: Design, model: ModelName,
                 calibration: Calibration | None = None) -> DesignCuts:
    """Predict and cut one design (cached by the model layer on the design's geometry).

    With a site calibration for the design, the calibrated prediction replaces the model's
    and the trim allowance shrinks to the calibration's residual uncertainty.
    """
    closed = predict(design, spec.site.ground, "closed_form")
    model_prediction = closed if model == "closed_form" else predict(design, spec.site.ground, model)
    prediction = (calibrated_prediction(design, calibration) if calibration is not None
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


def build_packet(spec: Design, *, built_at: str, revision: int = 1, model: ModelName = "mom",
                 calibrations: Mapping[str, Calibration] | None = None,
                 cut_elements: Sequence[CutElement] = ()) -> Packet:
    """Compute everything to print for ``spec``. Raises BuildError for an unbuildable design.

    ``calibrations`` (by design key) come from the record store; ``cut_elements`` are the
    elements already cut (current physical legs), which get a batch trim list when their
    design is calibrated.
    """
    cals = usable_calibrations(spec, calibrations or {})
    cuts = tuple(solve_design(d, spec, model, cals.get(d.key)) for d in spec.designs)
    by_key = {c.design.key: c for c in cuts}
    entries = tuple(
        ElementEntry(element_id(kit, cut.element.key), kit, cut)
        for kit in spec.kits for cut in by_key[kit.design_key].elements
    )
    warnings = list(spec.warnings) + [w for c in cuts for w in c.warnings]
    kit_boms, day_bom, plan = logistics(spec, cuts)
    for buy in plan.to_buy:
        what = (f"buy {buy.spools} more of {buy.spool_length_m:.0f} m" if buy.spools else buy.note)
        warnings.append(f"not enough {buy.material} on hand: {buy.short_m:.1f} m short ({what}); "
                        "see the spool cut plan")
    performance = tuple(design_performance(c, spec.site.ground, spec.exposure) for c in cuts)
    advice = {c.design.key: design_advice(c, p, spec.event.units) for c, p in zip(cuts, performance)}
    warnings += [w for a in advice.values() for w in a.warnings]
    design_of = {e.element_id: e.kit.design_key for e in entries}
    trims: list[BatchTrim] = []
    for c in cuts:
        if c.design.key in cals:
            mine = [e for e in cut_elements if design_of.get(e.element_id) == c.design.key]
            trims += batch_trims(c.design, c.prediction, mine)
    for key in sorted(set(calibrations or {}) - set(cals)):
        warnings.append(f"the stored calibration of design {key} no longer applies (its geometry "
                        "or wire changed); cut lengths are uncalibrated")
    return Packet(spec, built_at, revision, model, cuts, entries, tuple(warnings), kit_boms,
                  day_bom, plan, performance, cals, tuple(trims), advice)


def entry_fingerprint(packet: Packet, entry: ElementEntry) -> str:
    """Hash of everything printed for one element (sheet row and labels), hex sha256[:16]."""
    cut = entry.cut
    record = {
        "id": entry.element_id, "kit": entry.kit.kit_id, "builder": entry.kit.builder,
        "design": entry.kit.design_key, "band": cut.element.band_label,
        "frequency": format_frequency(cut.element.frequency_hz),
        "cut": format_both(cut.cut_leg_m, packet.design.event.units),
        "predicted": round(cut.predicted_leg_m, 4), "trim": round(cut.trim_m, 4),
        "bearing": cut.element.bearing_deg, "url": packet.design.event.record_url,
    }
    return hashlib.sha256(json.dumps(record, sort_keys=True).encode()).hexdigest()[:16]
