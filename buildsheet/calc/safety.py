"""The one home of the safety and caution text printed on the sheets (common practice).

Everything here is wording around numbers computed elsewhere; every list ends by deferring to
local codes, site rules and licensed practice. Lengths in metres, formatted for the packet's
unit system through buildsheet.spec.units.
"""

from __future__ import annotations

from buildsheet.spec.units import UnitSystem, format_distance


def _pair(metric: str, imperial: str, units: UnitSystem) -> str:
    """A common-practice round figure in the packet's primary unit, the other in brackets."""
    return f"{metric} ({imperial})" if units == "metric" else f"{imperial} ({metric})"

#: Ends below this height, m, are within reach of a standing adult with a raised arm (common
#: practice: about 2.5 m / 8 ft).
REACH_HEIGHT_M: float = 2.5
#: Distance a fallen mast or antenna must keep from a power line, m (common practice, 10 ft).
POWER_LINE_CLEARANCE_M: float = 3.0
#: Distance to keep from anything touching a power line, m (common utility advice, from
#: memory: at least 10 m / 33 ft).
POWER_LINE_CONTACT_M: float = 10.0

DEFER = ("These notes are general guidance. Local codes, site rules, the mast maker's "
         "instructions and licensed practice take precedence.")

def site_cautions(units: UnitSystem = "metric") -> tuple[str, ...]:
    """Cautions on every kit sheet (common practice), figures in the packet's units."""
    three, ten = _pair("3 m", "10 ft", units), _pair("10 m", "33 ft", units)
    return (
        ("Overhead power lines: look up before raising anything. If the mast or antenna fell, no "
         f"part may come within {three} of a power line; utilities advise 1.5-2 times the "
         "mast-plus-antenna height. Never raise a mast near lines."),
        ("If anything touches a power line: do not touch it, the mast, the wire, the cords or "
         f"anyone in contact with them; keep everyone at least {ten} away; call the utility and "
         "the emergency services; do not try to free it."),
        ("Mast handling: raise and lower push-up masts with helpers, tape or pin the joints, guy "
         "before extending, and keep clear of the fall zone. Keep within the mast maker's wind "
         "rating: lower the mast when the wind rises above it."),
        ("Eye protection when cutting or unspooling wire (a springing wire end whips) and when "
         "driving stakes; gloves for handling cord and wire."),
        ("Stakes: cap or flag every stake head; drive them leaning 45-60 degrees away from the "
         "load and double-stake in soft ground."),
        ("Guy lines, tie-off cords and coax are trip hazards: flag them and route them away from "
         "paths."),
        ("No transmitting, tune-up included, while anyone is handling an element, a cord or the "
         "feed; say so aloud before keying and use an antenna analyzer for finding dips."),
        ("RF exposure: element ends carry high RF voltage; keep everyone outside the keep-out "
         "around low ends and the feed while transmitting. See the exposure screen."),
        ("Lightning and static: do not operate in thunderstorms; disconnect and ground the feed "
         "line when not in use; a bleed resistor (about 1 megohm) across the feed drains static "
         "charge."),
        DEFER,
    )


def station_cautions(units: UnitSystem = "metric") -> tuple[str, ...]:
    """The short list on the day's bill of materials and the log forms (common practice)."""
    three, ten = _pair("3 m", "10 ft", units), _pair("10 m", "33 ft", units)
    return (
        (f"Look up before raising anything: no part of a mast or antenna may come within about "
         f"{three} of a power line if it falls. If anything touches a line, keep everyone {ten} "
         "away and call the utility."),
        ("Eye protection when cutting or unspooling wire and driving stakes; gloves for cord and "
         "wire."),
        ("Raise masts with helpers, within the mast maker's wind rating; flag guy lines, tie-off "
         "cords and feed lines (trip hazards); cap or flag stake heads."),
        "No transmitting, tune-up included, while anyone handles an element.",
        DEFER,
    )


#: The metric texts (kept for callers without a unit system).
SITE_CAUTIONS: tuple[str, ...] = site_cautions()
STATION_CAUTIONS: tuple[str, ...] = station_cautions()


def exposure_cautions(near_field_m: float, units: UnitSystem = "metric") -> tuple[str, ...]:
    """Caution lines for the exposure box (FCC OET Bulletin 65; ICNIRP 2020 and 2010)."""
    near = format_distance(near_field_m, units, round_up=False)
    return (
        "Screening estimate only (far-field formula with ground-reflection factor 2.56).",
        (f"Not valid in the reactive near field, within about {near} (lambda/2pi) "
         "of the antenna, where it may be conservative or not: the E-field near the wire ends "
         "and the H-field near the feed can exceed it."),
        ("Local regulations and licensed practice govern; where an evaluation is required, "
         "do a full one."),
    )


def _reach(units: UnitSystem) -> str:
    """The reach height as the round common-practice figure: "2.5 m" or "8 ft"."""
    return "2.5 m" if units == "metric" else "8 ft"


def keep_out_text(keep_out_m: float, low_ends: tuple[str, ...], units: UnitSystem) -> str:
    """The concrete keep-out line: radius around low ends (element labels) and the feed."""
    r = format_distance(keep_out_m, units)
    if low_ends:
        where = (f"each end of {', '.join(low_ends)} (below "
                 f"{_reach(units)}, within reach)")
        return (f"Keep-out while transmitting: rope off a circle of {r} radius around {where}; "
                "nobody inside it, and nobody touching the feed line or balun.")
    return (f"Keep-out while transmitting: nobody within {r} of any part of the antenna they can "
            "reach, and nobody touching the feed line or balun.")


def end_reach_warning(design_key: str, element_key: str, end_height_m: float,
                      units: UnitSystem) -> str | None:
    """Warning for element ends below reach height (None when they are above it)."""
    if end_height_m >= REACH_HEIGHT_M:
        return None
    return (f"{design_key} {element_key}: ends at {format_distance(end_height_m, units)} are "
            f"within reach (below {_reach(units)}); rope them off "
            "while transmitting (high RF voltage) or raise them")
