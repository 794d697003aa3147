"""Inverted-V geometry on hand-worked cases (Pythagoras and similar triangles)."""

import math

import pytest

from buildsheet.calc.geometry import footprint, included_angle_deg, leg_geometry, leg_reach


def test_three_four_five_leg():
    # Hand-worked: apex 5 m, end 2 m (drop 3 m), leg 5 m -> reach 4 m (Pythagoras).
    leg = leg_geometry("A", 90.0, 5.0, 5.0, 2.0, knot_m=0.3, hitch_m=0.5)
    assert leg.reach_m == pytest.approx(4.0)
    assert leg.slope_deg == pytest.approx(math.degrees(math.atan2(3, 4)))
    # Similar triangles: the cord continues the leg's line 2 m further down: 2 * 5/3 m long,
    # reaching the ground 2 * 4/3 m beyond the end insulator.
    assert leg.cord_line_m == pytest.approx(10 / 3)
    assert leg.stake_distance_m == pytest.approx(4 + 8 / 3)
    assert leg.cord_cut_m == pytest.approx(10 / 3 + 0.8)
    assert leg.stake_xy == pytest.approx((4 + 8 / 3, 0.0), abs=1e-12)  # due east
    assert included_angle_deg(5.0, 3.0) == pytest.approx(2 * math.degrees(math.atan2(4, 3)))


def test_flat_leg_cord_at_45_degrees():
    leg = leg_geometry("B", 180.0, 10.0, 6.0, 6.0, knot_m=0.0, hitch_m=0.0)
    assert leg.reach_m == pytest.approx(10.0)
    assert leg.cord_line_m == pytest.approx(6 * math.sqrt(2))
    assert leg.stake_distance_m == pytest.approx(16.0)
    assert leg.stake_xy == pytest.approx((0.0, -16.0), abs=1e-9)
    assert included_angle_deg(10.0, 0.0) == pytest.approx(180.0)


def test_leg_too_short_to_reach_end_height():
    with pytest.raises(ValueError, match="cannot fall"):
        leg_reach(4.0, 5.0)


def test_footprint_and_site_fit():
    legs = [leg_geometry(s, b, 5.0, 5.0, 2.0, knot_m=0, hitch_m=0)
            for s, b in (("A", 0.0), ("B", 180.0), ("A", 90.0), ("B", 270.0))]
    fp = footprint(legs)
    span = 2 * (4 + 8 / 3)
    assert fp.width_m == pytest.approx(span) and fp.depth_m == pytest.approx(span)
    assert fp.fits(14.0, 14.0) and not fp.fits(13.0, 20.0)


def test_crossed_pair_cords_near_common_practice():
    # Common practice: a two-band crossed inverted V on a ~7.5 m (25 ft) mast is tied off with
    # cords of about 5.5 m (18 ft). With 75 m and 40 m legs (about 19 and 10 m) and ends at 2 m,
    # the four cord lines average within a metre or so of that.
    cords = [leg_geometry("A", 0, L, 7.5, 2.0, knot_m=0, hitch_m=0).cord_line_m for L in (19.0, 10.0)]
    assert sum(cords) / 2 == pytest.approx(5.5, abs=1.2)
