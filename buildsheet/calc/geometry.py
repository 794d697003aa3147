"""Deployed geometry of an inverted V or flat dipole: legs, tie-off cords, stakes, footprint.

Site frame: x east, y north, z up, origin at the mast foot; bearings are compass degrees
(0 = north, clockwise). Lengths in metres, angles in degrees. Pythagoras and similar triangles.
"""

from __future__ import annotations

import math
from dataclasses import dataclass


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
    stake_distance_m: float  # horizontal distance from the mast foot to the stake
    end_height_m: float

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
        w, d = self.width_m, self.depth_m
        return (w <= width_m and d <= depth_m) or (w <= depth_m and d <= width_m)


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
                 flat_cord_angle_deg: float = 45.0) -> LegGeometry:
    """Geometry of one leg and its tie-off cord.

    For a sloping leg the cord continues the leg's line down to the ground (similar triangles:
    horizontal run = end height * reach / drop, cord = end height * leg / drop). For a flat leg
    (no drop) the cord runs down at ``flat_cord_angle_deg`` below horizontal.
    """
    drop = apex_height_m - end_height_m
    reach = leg_reach(leg_length_m, drop)
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
    """The rectangle spanned by the mast foot and every stake."""
    xs = [0.0] + [leg.stake_xy[0] for leg in legs]
    ys = [0.0] + [leg.stake_xy[1] for leg in legs]
    return Footprint(min(xs), max(xs), min(ys), max(ys))
