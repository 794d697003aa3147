"""Build-day logistics from the solved designs: per-kit needs, bills of materials, the list of
every cut of the day and the spool cut plan (buildsheet.calc.stock does the packing)."""

from __future__ import annotations

from collections.abc import Iterable

from buildsheet.calc.bom import BomLine, KitNeeds, WireNeed, day_bom, kit_bom
from buildsheet.calc.cuts import DesignCuts
from buildsheet.calc.feedline import coax
from buildsheet.calc.stock import Cut, SpoolPlan, StockItem, plan_spools
from buildsheet.spec.design import Design, Kit

#: Material key for tie-off cord in the spec's [[stock]] tables.
CORD = "cord"
#: Cord for the hang loop at the apex and the balun strain loop, m per kit (common practice).
HANG_LOOP_CORD_M = 1.0
BALUN_LOOP_CORD_M = 0.5


def kit_needs(kit: Kit, cuts: DesignCuts) -> KitNeeds:
    """Plain quantities for one kit of a design: legs, cords, hardware."""
    d = cuts.design
    legs = [c.cut_leg_m for c in cuts.elements for _ in c.legs]
    cords = [leg.cord_cut_m for c in cuts.elements for leg in c.legs]
    n_legs = len(legs)
    return KitNeeds(
        kit_id=kit.kit_id, wires=(WireNeed(d.wire.title, tuple(legs)),),
        tie_off_cords_m=tuple(cords), elements=len(cuts.elements), legs=n_legs,
        end_insulators=n_legs, stakes=n_legs, winders=n_legs, coax_length_m=d.coax_length_m,
        coax_type=coax(d.coax_type).title, coax_connectors=2,
        crimp_ring_terminals=n_legs, quick_disconnects=n_legs,
        hang_loop_cord_m=HANG_LOOP_CORD_M, balun_loop_cord_m=BALUN_LOOP_CORD_M,
    )


def day_cuts(spec: Design, cuts_by_design: dict[str, DesignCuts]) -> tuple[Cut, ...]:
    """Every wire leg and tie-off cord cut of the day, with stable IDs (K03-40m-A; its tie-off
    cord K03-40m-A-T)."""
    out: list[Cut] = []
    for kit in spec.kits:
        dc = cuts_by_design[kit.design_key]
        for c in dc.elements:
            for leg in c.legs:
                leg_id = f"{kit.kit_id}-{c.element.key}-{leg.leg_id}"
                out.append(Cut(leg_id, dc.design.wire.key, c.cut_leg_m, leg_id))
                out.append(Cut(f"{leg_id}-T", CORD, leg.cord_cut_m, f"tie-off for {leg_id}"))
    return tuple(out)


def stock_items(spec: Design) -> tuple[StockItem, ...]:
    titles = {k: w.title for k, w in spec.wires.items()}
    titles[CORD] = "tie-off cord"
    return tuple(StockItem(s.material, s.length_m, s.count, titles.get(s.material, s.material))
                 for s in spec.stock)


def logistics(spec: Design, cuts: Iterable[DesignCuts]) -> tuple[
        dict[str, tuple[BomLine, ...]], tuple[BomLine, ...], SpoolPlan]:
    """Per-kit BOMs, the day's BOM and the spool cut plan."""
    by_design = {c.design.key: c for c in cuts}
    kit_boms = {k.kit_id: kit_bom(kit_needs(k, by_design[k.design_key])) for k in spec.kits}
    plan = plan_spools(day_cuts(spec, by_design), stock_items(spec))
    return kit_boms, day_bom(list(kit_boms.values())), plan
