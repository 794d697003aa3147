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


def test_flat_leg_cord_at_45_degrees_without_supports():
    leg = leg_geometry("B", 180.0, 10.0, 6.0, 6.0, knot_m=0.0, hitch_m=0.0, end_supports=False)
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


def test_flat_top_on_end_supports_by_hand():
    # Hand-worked flat 40 m dipole, leg 10.0 m, at 10 m: common practice puts a 1.5 m cord from
    # the end insulator to a support of the same height (support 11.5 m out), a halyard of
    # twice the height plus 2 m (22 m), three guys with anchors half the height out (5 m), each
    # sqrt(10^2 + 5^2) = 11.18 m plus knots.
    leg = leg_geometry("A", 90.0, 10.0, 10.0, 10.0, knot_m=0.3, hitch_m=0.5)
    assert leg.has_support and leg.slope_deg == 0.0
    assert leg.reach_m == pytest.approx(10.0)
    assert leg.support_distance_m == pytest.approx(11.5)
    assert leg.support_height_m == pytest.approx(10.0)
    assert leg.cord_line_m == pytest.approx(1.5) and leg.cord_cut_m == pytest.approx(2.3)
    assert leg.halyard_m == pytest.approx(22.0)
    assert leg.support_guy_m == pytest.approx(math.hypot(10, 5) + 0.8)
    assert leg.stake_distance_m == pytest.approx(16.5)  # outermost guy anchor
    assert leg.stake_xy == pytest.approx((16.5, 0.0), abs=1e-9)


def test_site_fit_orientation():
    # Hand-worked: stakes over 24 m E-W x 48.9 m N-S fit a 60 x 45 m site only turned 90 degrees.
    from buildsheet.calc.geometry import Footprint
    fp = Footprint(-12.0, 12.0, -24.45, 24.45)
    assert fp.orientation(60.0, 45.0) == "turned"
    assert fp.orientation(45.0, 60.0) == "as drawn"
    assert fp.orientation(40.0, 40.0) is None
