"""Deployed geometry of an inverted V or flat dipole: legs, tie-off cords, stakes, footprint.

Site frame: x east, y north, z up, origin at the mast foot; bearings are compass degrees
(0 = north, clockwise). Lengths in metres, angles in degrees. Pythagoras and similar triangles.
A flat dipole hangs between end supports (common practice): a short cord from each end
insulator to a pulley or ring at the top of a support of the apex height, a halyard down the
support to its foot, and the support guyed with anchors at least half its height out.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Literal

#: Cord from a flat dipole's end insulator to its end support, m (common practice: 1-2 m keeps
#: the high-voltage wire end clear of the support or tree).
END_SUPPORT_CORD_M: float = 1.5
#: Halyard beyond twice the support height, m (common practice: up, down and a tie-off).
HALYARD_SPARE_M: float = 2.0
#: Guy anchors of an end support, as a fraction of its height out from its foot (common
#: practice: at least half the guyed height).
SUPPORT_GUY_FRACTION: float = 0.5
#: Guys per end support (common practice: three at 120 degrees for short use).
SUPPORT_GUYS: int = 3


@dataclass(frozen=True)
class LegGeometry:
    """One leg from the apex down to its end insulator, and its tie-off cord to a stake."""

    leg_id: str  # "A" or "B"
    bearing_deg: float
    leg_length_m: float  # along the wire, apex to end insulator
    drop_m: float  # apex height minus end height
    reach_m: float  # horizontal distance from the mast to the end insulator
    slope_deg: float  # angle of the leg below horizontal
    cord_line_m: float  # straight cord length from end insulator to the stake
    cord_cut_m: float  # cord to cut: line plus knot and hitch allowances
    stake_distance_m: float  # horizontal distance from the mast foot to the stake (flat: the
    # outermost guy anchor of the end support)
    end_height_m: float
    support_distance_m: float | None = None  # flat: mast foot to the end support, m
    support_height_m: float | None = None  # flat: height of the end support, m
    halyard_m: float = 0.0  # flat: halyard to cut, m
    support_guy_m: float = 0.0  # flat: one guy of the end support to cut, m

    @property
    def has_support(self) -> bool:
        return self.support_distance_m is not None

    @property
    def anchors_xy(self) -> tuple[tuple[float, float], ...]:
        """Ground anchors (east, north), m: the stake, or an end support's three guy anchors
        (outward and at 120 degrees either side, half the support height out)."""
        if self.support_distance_m is None:
            return (self.stake_xy,)
        b = math.radians(self.bearing_deg)
        px, py = self.support_distance_m * math.sin(b), self.support_distance_m * math.cos(b)
        r = self.stake_distance_m - self.support_distance_m
        return tuple((px + r * math.sin(b + math.radians(a)), py + r * math.cos(b + math.radians(a)))
                     for a in (0.0, 120.0, -120.0))

    @property
    def stake_xy(self) -> tuple[float, float]:
        """Stake position (east, north), m."""
        b = math.radians(self.bearing_deg)
        return self.stake_distance_m * math.sin(b), self.stake_distance_m * math.cos(b)


@dataclass(frozen=True)
class Footprint:
    """Axis-aligned rectangle (east-west width x north-south depth, m) spanned by the stakes."""

    min_x: float
    max_x: float
    min_y: float
    max_y: float

    @property
    def width_m(self) -> float:
        return self.max_x - self.min_x

    @property
    def depth_m(self) -> float:
        return self.max_y - self.min_y

    def fits(self, width_m: float, depth_m: float) -> bool:
        """True when the footprint fits a site of ``width_m`` x ``depth_m`` in either orientation."""
        return self.orientation(width_m, depth_m) is not None

    def orientation(self, width_m: float, depth_m: float) -> Orientation | None:
        """How the layout fits a site ``width_m`` (E-W) x ``depth_m`` (N-S): "as drawn" (bearings
        as given), "turned" (every bearing plus 90 degrees), or None."""
        w, d = self.width_m, self.depth_m
        if w <= width_m and d <= depth_m:
            return "as drawn"
        if d <= width_m and w <= depth_m:
            return "turned"
        return None


Orientation = Literal["as drawn", "turned"]


def leg_reach(leg_length_m: float, drop_m: float) -> float:
    """Horizontal reach of a straight leg of ``leg_length_m`` falling ``drop_m``, m (Pythagoras).

    Raises ValueError when the leg is too short to reach its end height.
    """
    if drop_m < 0:
        raise ValueError(f"the end is {-drop_m:.2f} m above the apex")
    if leg_length_m <= drop_m:
        raise ValueError(f"a leg of {leg_length_m:.2f} m cannot fall {drop_m:.2f} m from the apex "
                         "to its end height")
    return math.sqrt(leg_length_m**2 - drop_m**2)


def included_angle_deg(leg_length_m: float, drop_m: float) -> float:
    """Included angle between the two legs at the apex, degrees (180 for a flat dipole)."""
    return 2.0 * math.degrees(math.atan2(leg_reach(leg_length_m, drop_m), drop_m))


def leg_geometry(leg_id: str, bearing_deg: float, leg_length_m: float, apex_height_m: float,
                 end_height_m: float, *, knot_m: float, hitch_m: float,
                 flat_cord_angle_deg: float = 45.0, end_supports: bool | None = None,
                 support_cord_m: float = END_SUPPORT_CORD_M) -> LegGeometry:
    """Geometry of one leg and its tie-off cord.

    For a sloping leg the cord continues the leg's line down to the ground (similar triangles:
    horizontal run = end height * reach / drop, cord = end height * leg / drop). A flat leg (no
    drop) hangs from an end support (``end_supports`` defaults to True for a flat leg): a
    horizontal cord of ``support_cord_m`` to the support, which stands at the end height; the
    halyard is twice that height plus a spare; the support's guys reach half its height out
    (their anchors bound the footprint). With ``end_supports`` False a flat leg's cord runs
    down at ``flat_cord_angle_deg`` below horizontal to a stake.
    """
    drop = apex_height_m - end_height_m
    reach = leg_reach(leg_length_m, drop)
    supports = drop <= 1e-9 if end_supports is None else end_supports
    if supports:
        slope = math.degrees(math.atan2(drop, reach)) if drop > 1e-9 else 0.0
        h = end_height_m
        at = reach + support_cord_m
        guy_out = SUPPORT_GUY_FRACTION * h
        return LegGeometry(leg_id, bearing_deg % 360.0, leg_length_m, drop, reach, slope,
                           support_cord_m, support_cord_m + knot_m + hitch_m, at + guy_out, h,
                           at, h, 2.0 * h + HALYARD_SPARE_M,
                           math.hypot(h, guy_out) + knot_m + hitch_m)
    if drop > 1e-9:
        slope = math.degrees(math.atan2(drop, reach))
        cord_line = end_height_m * leg_length_m / drop
        run = end_height_m * reach / drop
    else:
        slope = 0.0
        a = math.radians(flat_cord_angle_deg)
        cord_line = end_height_m / math.sin(a)
        run = end_height_m / math.tan(a)
    return LegGeometry(leg_id, bearing_deg % 360.0, leg_length_m, drop, reach, slope, cord_line,
                       cord_line + knot_m + hitch_m, reach + run, end_height_m)


def footprint(legs: list[LegGeometry] | tuple[LegGeometry, ...]) -> Footprint:
    """The rectangle spanned by the mast foot and every stake or guy anchor."""
    xs = [0.0] + [p[0] for leg in legs for p in leg.anchors_xy]
    ys = [0.0] + [p[1] for leg in legs for p in leg.anchors_xy]
    return Footprint(min(xs), max(xs), min(ys), max(ys))
