"""Bills of materials per kit and for the whole build day, with a CSV round trip.

Materials are described generically (no brand names); quantities in pieces or metres.
"""

from __future__ import annotations

import csv
import io
import math
import re
from collections.abc import Iterable, Sequence
from dataclasses import dataclass

from buildsheet.calc.stock import DEFAULT_TOLERANCE_M
from buildsheet.constants import FOOT
from buildsheet.errors import Problem, SpecError
from buildsheet.spec.units import UnitSystem, format_distance, format_length

_MM = re.compile(r"(?<![(\w.])(\d+(?:\.\d+)?(?:-\d+(?:\.\d+)?)? mm2?)(?![\w)])")


def catalogue_title(text: str, units: UnitSystem) -> str:
    """A catalogue description for the packet's units: in an imperial packet its metric sizes
    go in brackets ("PVC jacket 0.4 mm" -> "PVC jacket (0.4 mm)"); metric text is unchanged."""
    return text if units == "metric" else _MM.sub(r"(\1)", text)


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
    end_supports: int = 0  # flat mount: one per leg end
    support_height_m: float = 0.0
    pulleys: int = 0  # one per end support, for the halyard
    halyards_m: tuple[float, ...] = ()
    support_guys_m: tuple[float, ...] = ()
    units: UnitSystem = "metric"  # primary unit system of the packet (for notes)

    @property
    def cord_pieces_m(self) -> tuple[float, ...]:
        """Every cord piece of the kit except the spare, m (tie-offs, halyards, guys, loops)."""
        loops = tuple(x for x in (self.hang_loop_cord_m, self.balun_loop_cord_m) if x > 0)
        return (*self.tie_off_cords_m, *self.halyards_m, *self.support_guys_m, *loops)

    @property
    def spare_cord_m(self) -> float:
        """Spare cord, m: ``spare_cord_fraction`` of all the other cord."""
        return math.fsum(self.cord_pieces_m) * self.spare_cord_fraction


_STAKE_NOTE = ("drive leaning 45-60 degrees away from the load; double-stake in soft ground; "
               "follow site rules and local practice")


def kit_bom(needs: KitNeeds) -> tuple[BomLine, ...]:
    """Bill of materials for one kit; lines with zero quantity are left out."""
    tol = needs.cutting_tolerance_m
    tol_text = format_length(tol, needs.units)
    lines: list[BomLine] = []
    for w in needs.wires:
        total = math.fsum(x + tol for x in w.leg_lengths_m)
        lines.append(BomLine("wire", catalogue_title(w.title, needs.units), round(total, 6), "m",
                             f"antenna legs; each cut includes {tol_text} cutting tolerance"))
    cord = catalogue_title(needs.cord_title, needs.units)
    tie = math.fsum(needs.tie_off_cords_m)
    spare = needs.spare_cord_m
    flat = needs.end_supports > 0
    support = (f"end support, at least {format_distance(needs.support_height_m, needs.units)} "
               "high (mast, pole or tree)")
    lines += [
        BomLine("cord", f"{cord}, tie-offs", round(tie, 6), "m",
                "insulator to the halyard ring at the end support; bowline at the insulator"
                if flat else
                "insulator to stake; bowline at the insulator, taut-line hitch at the stake"),
        BomLine("cord", f"{cord}, halyards", round(math.fsum(needs.halyards_m), 6), "m",
                "up through the pulley and down to the support foot"),
        BomLine("cord", f"{cord}, support guys", round(math.fsum(needs.support_guys_m), 6), "m",
                "three per end support, anchors at least half its height out"),
        BomLine("cord", f"{cord}, hang loop", round(needs.hang_loop_cord_m, 6), "m", "at the feed"),
        BomLine("cord", f"{cord}, balun loops", round(needs.balun_loop_cord_m, 6), "m",
                "strain relief at the balun"),
        BomLine("cord", f"{cord}, spare", round(spare, 6), "m",
                f"{needs.spare_cord_fraction * 100:.0f} % of the cord above"),
        BomLine("hardware", "end insulator, plastic or ceramic", needs.end_insulators, "pcs",
                "one per leg end"),
        BomLine("hardware", needs.quick_disconnect_item, needs.quick_disconnects, "pcs",
                "quick disconnect, one per leg"),
        BomLine("hardware", support, needs.end_supports, "pcs",
                "one per leg end; guy it as its maker directs"),
        BomLine("hardware", "pulley or ring for the halyard", needs.pulleys, "pcs",
                "at the top of each end support"),
        BomLine("hardware", "ground stake, steel", needs.stakes, "pcs", _STAKE_NOTE),
        BomLine("hardware", "wire winder", needs.winders, "pcs", "one per leg (quick-detach legs)"),
        BomLine("connectors", "crimp ring terminal to suit the wire and balun studs",
                needs.crimp_ring_terminals, "pcs", "one per leg"),
        BomLine("feed", "1:1 current balun, leg terminals and coax socket", needs.baluns, "pcs",
                "at the feed point"),
        BomLine("feed", f"{catalogue_title(needs.coax_type, needs.units)} coaxial cable",
                round(needs.coax_length_m, 6), "m", "feed line"),
        BomLine("connectors", f"coax plug for {catalogue_title(needs.coax_type, needs.units)}",
                needs.coax_connectors, "pcs",
                "type to suit the radio and the balun"),
    ]
    return tuple(line for line in lines if line.quantity > 0)


def shop_length_text(metres: float, units: str) -> str:
    """A length to buy, rounded up to what a shop sells: whole metres ("673 m (2209 ft)") or
    whole feet ("2206 ft (673 m)"), each figure rounded up in its own unit."""
    m = math.ceil(metres - 1e-9)
    ft = math.ceil(metres / FOOT - 1e-9)
    return f"{m} m ({ft} ft)" if units == "metric" else f"{ft} ft ({m} m)"


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


#: Folder of the CSV bills of materials in the packet, and the day's file in it.
BOM_DIR = "bom"
DAY_BOM_CSV = f"{BOM_DIR}/day.csv"


def kit_bom_csv_name(kit_id: str) -> str:
    """Packet path of one kit's bill of materials as CSV ("bom/K03.csv")."""
    return f"{BOM_DIR}/{kit_id}.csv"


def bom_csv_files(kit_boms: dict[str, tuple[BomLine, ...]],
                  day: Sequence[BomLine]) -> dict[str, bytes]:
    """The packet's CSV bills of materials: one per kit and one for the day (UTF-8, SI units:
    lengths in m, counts in pcs)."""
    out = {kit_bom_csv_name(k): bom_to_csv(lines).encode() for k, lines in kit_boms.items()}
    out[DAY_BOM_CSV] = bom_to_csv(day).encode()
    return out


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
