"""Bills of materials per kit and for the whole build day, with a CSV round trip.

Materials are described generically (no brand names); quantities in pieces or metres.
"""

from __future__ import annotations

import csv
import io
import math
from collections.abc import Iterable, Sequence
from dataclasses import dataclass

from buildsheet.calc.stock import DEFAULT_TOLERANCE_M
from buildsheet.errors import Problem, SpecError


@dataclass(frozen=True)
class BomLine:
    """One line of a bill of materials; ``unit`` is "m" (lengths) or "pcs"."""

    category: str
    item: str
    quantity: float
    unit: str
    note: str


@dataclass(frozen=True)
class WireNeed:
    """Leg cut lengths (finished, m) for one wire type, described generically by ``title``."""

    title: str
    leg_lengths_m: tuple[float, ...]


@dataclass(frozen=True)
class KitNeeds:
    """Plain quantities for one kit, filled from the design. Lengths in m."""

    kit_id: str
    wires: tuple[WireNeed, ...]
    tie_off_cords_m: tuple[float, ...]
    elements: int
    legs: int
    end_insulators: int
    stakes: int
    winders: int
    coax_length_m: float
    coax_type: str = "RG-58"
    coax_connectors: int = 2
    crimp_ring_terminals: int = 0  # usually one per leg
    quick_disconnects: int = 0  # usually one per leg
    quick_disconnect_item: str = "snap swivel"
    hang_loop_cord_m: float = 1.0
    balun_loop_cord_m: float = 0.0
    spare_cord_fraction: float = 0.10
    baluns: int = 1
    cord_title: str = "braided polyester cord, 3-5 mm"
    cutting_tolerance_m: float = DEFAULT_TOLERANCE_M


_STAKE_NOTE = ("drive leaning 45-60 degrees away from the load; double-stake in soft ground; "
               "follow site rules and local practice")


def kit_bom(needs: KitNeeds) -> tuple[BomLine, ...]:
    """Bill of materials for one kit; lines with zero quantity are left out."""
    tol = needs.cutting_tolerance_m
    tol_mm = f"{tol * 1000:.0f} mm"
    lines: list[BomLine] = []
    for w in needs.wires:
        total = math.fsum(x + tol for x in w.leg_lengths_m)
        lines.append(BomLine("wire", w.title, round(total, 6), "m",
                             f"antenna legs; each cut includes {tol_mm} cutting tolerance"))
    cord = needs.cord_title
    tie = math.fsum(needs.tie_off_cords_m)
    cord_total = tie + needs.hang_loop_cord_m + needs.balun_loop_cord_m
    spare = cord_total * needs.spare_cord_fraction
    lines += [
        BomLine("cord", f"{cord}, tie-offs", round(tie, 6), "m",
                "insulator to stake; bowline at the insulator, taut-line hitch at the stake"),
        BomLine("cord", f"{cord}, hang loop", round(needs.hang_loop_cord_m, 6), "m", "at the feed"),
        BomLine("cord", f"{cord}, balun loops", round(needs.balun_loop_cord_m, 6), "m",
                "strain relief at the balun"),
        BomLine("cord", f"{cord}, spare", round(spare, 6), "m",
                f"{needs.spare_cord_fraction * 100:.0f} % of the cord above"),
        BomLine("hardware", "end insulator, plastic or ceramic", needs.end_insulators, "pcs",
                "one per leg end"),
        BomLine("hardware", needs.quick_disconnect_item, needs.quick_disconnects, "pcs",
                "quick disconnect, one per leg"),
        BomLine("hardware", "ground stake, steel", needs.stakes, "pcs", _STAKE_NOTE),
        BomLine("hardware", "wire winder", needs.winders, "pcs", "one per leg (quick-detach legs)"),
        BomLine("connectors", "crimp ring terminal to suit the wire and balun studs",
                needs.crimp_ring_terminals, "pcs", "one per leg"),
        BomLine("feed", "1:1 current balun, leg terminals and coax socket", needs.baluns, "pcs",
                "at the feed point"),
        BomLine("feed", f"{needs.coax_type} coaxial cable", round(needs.coax_length_m, 6), "m",
                "feed line"),
        BomLine("connectors", f"coax plug for {needs.coax_type}", needs.coax_connectors, "pcs",
                "type to suit the radio and the balun"),
    ]
    return tuple(line for line in lines if line.quantity > 0)


def day_bom(kit_boms: Iterable[Sequence[BomLine]]) -> tuple[BomLine, ...]:
    """Totals over kits: lines with the same category, item and unit are summed. A note is
    kept when every kit has the same one, else replaced by "summed over kits"."""
    order: list[tuple[str, str, str]] = []
    qty: dict[tuple[str, str, str], list[float]] = {}
    notes: dict[tuple[str, str, str], set[str]] = {}
    for bom in kit_boms:
        for line in bom:
            k = (line.category, line.item, line.unit)
            if k not in qty:
                order.append(k)
                qty[k], notes[k] = [], set()
            qty[k].append(line.quantity)
            notes[k].add(line.note)
    return tuple(
        BomLine(c, i, math.fsum(qty[(c, i, u)]), u,
                next(iter(notes[(c, i, u)])) if len(notes[(c, i, u)]) == 1 else "summed over kits")
        for c, i, u in order)


_CSV_HEADER = ["category", "item", "quantity", "unit", "note"]


def _fmt_qty(q: float) -> str:
    """Shortest text that reads back to the same float (integers without a decimal point)."""
    return str(int(q)) if float(q).is_integer() and abs(q) < 1e15 else repr(float(q))


def bom_to_csv(lines: Iterable[BomLine]) -> str:
    """CSV text (RFC 4180 quoting, header row); quantities written to round-trip exactly."""
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\r\n")
    w.writerow(_CSV_HEADER)
    for line in lines:
        w.writerow([line.category, line.item, _fmt_qty(line.quantity), line.unit, line.note])
    return buf.getvalue()


def bom_from_csv(text: str, *, source: str = "bom.csv") -> tuple[BomLine, ...]:
    """Read CSV written by ``bom_to_csv``; problems raise SpecError with the line number."""
    rows = list(csv.reader(io.StringIO(text, newline="")))
    if not rows or rows[0] != _CSV_HEADER:
        raise SpecError([Problem(f"{source}:1", f"header must be {','.join(_CSV_HEADER)}")])
    out: list[BomLine] = []
    problems: list[Problem] = []
    for n, row in enumerate(rows[1:], start=2):
        if not row:
            continue
        if len(row) != len(_CSV_HEADER):
            problems.append(Problem(f"{source}:{n}", f"{len(row)} fields, expected 5"))
            continue
        try:
            q = float(row[2])
        except ValueError:
            problems.append(Problem(f"{source}:{n}", f"quantity {row[2]!r} is not a number"))
            continue
        out.append(BomLine(row[0], row[1], q, row[3], row[4]))
    if problems:
        raise SpecError(problems)
    return tuple(out)
