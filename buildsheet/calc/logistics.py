"""Build-day logistics from the solved designs: per-kit needs, bills of materials, the list of
every cut of the day and the spool cut plan (buildsheet.calc.stock does the packing)."""

from __future__ import annotations

from collections.abc import Iterable, Mapping
from collections.abc import Set as AbstractSet

from buildsheet.calc.bom import BomLine, KitNeeds, WireNeed, catalogue_title, day_bom, kit_bom
from buildsheet.calc.cuts import DesignCuts
from buildsheet.calc.feedline import coax
from buildsheet.calc.geometry import SUPPORT_GUYS
from buildsheet.calc.stock import DEFAULT_TOLERANCE_M, Cut, SpoolPlan, StockItem, plan_spools
from buildsheet.spec.design import Design, Kit
from buildsheet.spec.units import UnitSystem

#: Material key for tie-off cord in the spec's [[stock]] tables.
CORD = "cord"
#: Generic cord description by unit system (common practice: 3-5 mm braided polyester).
CORD_TITLES = {"metric": "braided polyester cord, 3-5 mm",
               "imperial": "braided polyester cord, 1/8-3/16 in (3-5 mm)"}
#: Cord for the hang loop at the apex and the balun strain loop, m per kit (common practice).
HANG_LOOP_CORD_M = 1.0
BALUN_LOOP_CORD_M = 0.5


def kit_needs(kit: Kit, cuts: DesignCuts, units: UnitSystem = "metric") -> KitNeeds:
    """Plain quantities for one kit of a design: legs, cords, hardware (notes in ``units``)."""
    d = cuts.design
    legs = [c.cut_leg_m for c in cuts.elements for _ in c.legs]
    geo = [leg for c in cuts.elements for leg in c.legs]
    cords = [leg.cord_cut_m for leg in geo]
    supported = [leg for leg in geo if leg.has_support]
    n_legs = len(legs)
    return KitNeeds(
        kit_id=kit.kit_id, wires=(WireNeed(d.wire.title, tuple(legs)),),
        tie_off_cords_m=tuple(cords), elements=len(cuts.elements), legs=n_legs,
        end_insulators=n_legs,
        stakes=(n_legs - len(supported)) + SUPPORT_GUYS * len(supported),
        winders=n_legs, coax_length_m=d.coax_length_m,
        coax_type=coax(d.coax_type).title, coax_connectors=2,
        crimp_ring_terminals=n_legs, quick_disconnects=n_legs,
        hang_loop_cord_m=HANG_LOOP_CORD_M, balun_loop_cord_m=BALUN_LOOP_CORD_M,
        end_supports=len(supported),
        support_height_m=max((leg.support_height_m or 0.0 for leg in supported), default=0.0),
        pulleys=len(supported), halyards_m=tuple(leg.halyard_m for leg in supported),
        support_guys_m=tuple(leg.support_guy_m for leg in supported for _ in range(SUPPORT_GUYS)),
        units=units, cord_title=CORD_TITLES[units],
    )


def day_cuts(spec: Design, cuts_by_design: dict[str, DesignCuts],
             already_cut: AbstractSet[str] = frozenset()) -> tuple[Cut, ...]:
    """Every wire and cord piece on the day's bill still to cut, with stable IDs: legs
    (K03-40m-A), tie-off cords (K03-40m-A-T), halyards (-H) and support guys (-G1..) of end
    supports, the kit's hang loop (K03-hang), balun loop (K03-balun) and spare cord (K03-spare).
    Legs in ``already_cut`` (with their cords) were cut before and are left out, and so are the
    loops and spare of a kit whose legs were all cut."""
    out: list[Cut] = []
    for kit in spec.kits:
        dc = cuts_by_design[kit.design_key]
        kit_legs = [f"{kit.kit_id}-{c.element.key}-{leg.leg_id}" for c in dc.elements
                    for leg in c.legs]
        for c in dc.elements:
            for leg in c.legs:
                leg_id = f"{kit.kit_id}-{c.element.key}-{leg.leg_id}"
                if leg_id in already_cut:
                    continue
                out.append(Cut(leg_id, dc.design.wire.key, c.cut_leg_m, leg_id))
                out.append(Cut(f"{leg_id}-T", CORD, leg.cord_cut_m, f"tie-off for {leg_id}"))
                if leg.has_support:
                    out.append(Cut(f"{leg_id}-H", CORD, leg.halyard_m, f"halyard for {leg_id}"))
                    out += [Cut(f"{leg_id}-G{g}", CORD, leg.support_guy_m,
                                f"support guy for {leg_id}") for g in range(1, SUPPORT_GUYS + 1)]
        if kit_legs and all(x in already_cut for x in kit_legs):
            continue
        needs = kit_needs(kit, dc)
        for name, length in (("hang", needs.hang_loop_cord_m), ("balun", needs.balun_loop_cord_m),
                             ("spare", needs.spare_cord_m)):
            if length > 0:
                out.append(Cut(f"{kit.kit_id}-{name}", CORD, length, f"{name} cord"))
    return tuple(out)


def stock_items(spec: Design, used_m: Mapping[str, float] | None = None,
                units: UnitSystem = "metric") -> tuple[StockItem, ...]:
    """The spec's stock on hand, less ``used_m`` (metres per material already cut from it,
    taken from the spools in the order the spec lists them; a part-used spool is its own item)."""
    titles = {k: catalogue_title(w.title, units) for k, w in spec.wires.items()}
    titles[CORD] = CORD_TITLES[units]
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


def logistics(spec: Design, cuts: Iterable[DesignCuts], already_cut: AbstractSet[str] = frozenset()
              ) -> tuple[dict[str, tuple[BomLine, ...]], tuple[BomLine, ...], SpoolPlan]:
    """Per-kit BOMs and the day's BOM (every kit, cut or not) and the spool cut plan for the
    pieces still to cut, against the stock left after the pieces already cut."""
    by_design = {c.design.key: c for c in cuts}
    units = spec.event.units
    kit_boms = {k.kit_id: kit_bom(kit_needs(k, by_design[k.design_key], units)) for k in spec.kits}
    every = day_cuts(spec, by_design)
    left = {c.cut_id for c in day_cuts(spec, by_design, already_cut)}
    used: dict[str, float] = {}
    for c in every:
        if c.cut_id not in left:
            used[c.material] = used.get(c.material, 0.0) + c.length_m + DEFAULT_TOLERANCE_M
    plan = plan_spools([c for c in every if c.cut_id in left], stock_items(spec, used, units))
    return kit_boms, day_bom(list(kit_boms.values())), plan
