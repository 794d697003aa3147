"""Units: exact conversions (NIST SP 811: 1 ft = 0.3048 m, 1 in = 25.4 mm) and round trips."""

import pytest
from hypothesis import given
from hypothesis import strategies as st

from buildsheet.spec.units import (
    feet_inches_eighths,
    format_both,
    format_frequency,
    format_imperial,
    format_metric,
    format_tape,
    parse_frequency,
    parse_length,
)


@pytest.mark.parametrize("text, metres", [
    ("7.5 m", 7.5), ("230 mm", 0.230), ("25 ft", 25 * 0.3048), ("6 ft 3 in", 75 * 0.0254),
    ("9 in", 9 * 0.0254), ("2.5 cm", 0.025), ("6'3\"", 75 * 0.0254), ("1 ft 2 3/8 in", 14.375 * 0.0254),
    ("3/8 in", 0.375 * 0.0254),
])
def test_parse_length_exact_definitions(text, metres):
    # NIST SP 811 appendix B: international foot 0.3048 m and inch 25.4 mm, both exact.
    assert parse_length(text) == pytest.approx(metres, rel=1e-12)


@pytest.mark.parametrize("bad", ["7.5", "seven m", "7.5 furlongs", "", "5 m x", 7.5])
def test_parse_length_refuses_unitless_or_unknown(bad):
    with pytest.raises(ValueError, match="m, cm, mm, ft, in|needs a unit"):
        parse_length(bad)


@pytest.mark.parametrize("text, hz", [("7.15 MHz", 7.15e6), ("7150 kHz", 7.15e6),
                                      ("5358.5kHz", 5.3585e6), ("3900000 Hz", 3.9e6)])
def test_parse_frequency(text, hz):
    assert parse_frequency(text) == pytest.approx(hz)


@pytest.mark.parametrize("bad", ["7.15", "7.15 MHZZ", "MHz", 7.15])
def test_parse_frequency_refuses(bad):
    with pytest.raises(ValueError):
        parse_frequency(bad)


def test_imperial_formatting_eighths():
    assert format_imperial(9 * 0.0254) == "9 in"
    assert format_imperial(60 * 0.3048) == "60 ft"
    assert format_imperial((66 * 12 + 9.625) * 0.0254) == "66 ft 9 5/8 in"
    assert format_imperial(0.375 * 0.0254) == "3/8 in"
    assert format_metric(20.3649) == "20.36 m"
    assert format_metric(0.235) == "235 mm"
    assert format_both(0.2286, "imperial") == "9 in (229 mm)"
    # A tape length: 1 in = 25.4 mm exactly (international yard and pound, 1959), so
    # 10.432 m = 410.709 in = 34 ft 2.709 in, nearest eighth 2 3/4 in.
    assert format_tape(10.432) == "10.432 m (34 ft 2 3/4 in)"
    assert format_tape(10.432, "imperial") == "34 ft 2 3/4 in (10.432 m)"
    assert format_frequency(7.15e6) == "7.150 MHz"
    assert format_frequency(5.3585e6) == "5.3585 MHz"


@given(st.integers(min_value=0, max_value=8 * 12 * 200))
def test_fraction_formatting_round_trips(eighths):
    """Any length on the 1/8 in grid formats and parses back to itself exactly."""
    metres = eighths * 0.0254 / 8
    text = format_imperial(metres)
    assert parse_length(text) == pytest.approx(metres, abs=1e-9)
    sign, feet, inches, eighth = feet_inches_eighths(metres)
    assert sign == 1  # the grid starts at zero: no negative lengths here
    assert (feet * 96 + inches * 8 + eighth) == eighths
