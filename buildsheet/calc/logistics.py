"""Build-day logistics from the solved designs: per-kit needs, bills of materials, the list of
every cut of the day and the spool cut plan (buildsheet.calc.stock does the packing)."""

from __future__ import annotations

from collections.abc import Iterable, Mapping, Set

from buildsheet.calc.bom import BomLine, KitNeeds, WireNeed, day_bom, kit_bom
from buildsheet.calc.cuts import DesignCuts
from buildsheet.calc.feedline import coax
from buildsheet.calc.stock import DEFAULT_TOLERANCE_M, Cut, SpoolPlan, StockItem, plan_spools
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


def day_cuts(spec: Design, cuts_by_design: dict[str, DesignCuts],
             already_cut: Set[str] = frozenset()) -> tuple[Cut, ...]:
    """Every wire leg and tie-off cord still to cut, with stable IDs (K03-40m-A; its tie-off
    cord K03-40m-A-T). Legs in ``already_cut`` (and their cords) were cut before: left out."""
    out: list[Cut] = []
    for kit in spec.kits:
        dc = cuts_by_design[kit.design_key]
        for c in dc.elements:
            for leg in c.legs:
                leg_id = f"{kit.kit_id}-{c.element.key}-{leg.leg_id}"
                if leg_id in already_cut:
                    continue
                out.append(Cut(leg_id, dc.design.wire.key, c.cut_leg_m, leg_id))
                out.append(Cut(f"{leg_id}-T", CORD, leg.cord_cut_m, f"tie-off for {leg_id}"))
    return tuple(out)


def stock_items(spec: Design, used_m: Mapping[str, float] | None = None) -> tuple[StockItem, ...]:
    """The spec's stock on hand, less ``used_m`` (metres per material already cut from it,
    taken from the spools in the order the spec lists them; a part-used spool is its own item)."""
    titles = {k: w.title for k, w in spec.wires.items()}
    titles[CORD] = "tie-off cord"
    left = dict(used_m or {})
    out = []
    for s in spec.stock:
        title = titles.get(s.material, s.material)
        for _ in range(s.count):
            take = min(left.get(s.material, 0.0), s.length_m)
            left[s.material] = left.get(s.material, 0.0) - take
            if s.length_m - take > 0.0:
                out.append((s.material, s.length_m - take, title))
    merged: list[StockItem] = []
    for material, length, title in out:
        last = merged[-1] if merged else None
        if last and last.material == material and last.length_m == length:
            merged[-1] = StockItem(material, length, last.count + 1, title)
        else:
            merged.append(StockItem(material, length, 1, title))
    return tuple(merged)


def logistics(spec: Design, cuts: Iterable[DesignCuts], already_cut: Set[str] = frozenset()
              ) -> tuple[dict[str, tuple[BomLine, ...]], tuple[BomLine, ...], SpoolPlan]:
    """Per-kit BOMs and the day's BOM (every kit, cut or not) and the spool cut plan for the
    pieces still to cut, against the stock left after the pieces already cut."""
    by_design = {c.design.key: c for c in cuts}
    kit_boms = {k.kit_id: kit_bom(kit_needs(k, by_design[k.design_key])) for k in spec.kits}
    done = [c for c in day_cuts(spec, by_design) if c.cut_id.removesuffix("-T") in already_cut]
    used: dict[str, float] = {}
    for c in done:
        used[c.material] = used.get(c.material, 0.0) + c.length_m + DEFAULT_TOLERANCE_M
    plan = plan_spools(day_cuts(spec, by_design, already_cut), stock_items(spec, used))
    return kit_boms, day_bom(list(kit_boms.values())), plan
