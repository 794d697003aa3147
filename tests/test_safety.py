"""Caution text and reach warnings (common practice, listed in shared REFERENCES.md section 11)."""

from __future__ import annotations

from buildsheet.calc.safety import (
    SITE_CAUTIONS,
    STATION_CAUTIONS,
    end_reach_warning,
    keep_out_text,
)


def test_site_cautions_cover_the_usual_hazards():
    # common practice: eye protection, gloves, capped stakes, mast wind rating, no transmitting
    # while an element is handled, what to do on power-line contact, deferral to local codes.
    text = " ".join(SITE_CAUTIONS).lower()
    for phrase in ("eye protection", "gloves", "stake head", "wind rating", "tune-up included",
                   "touches a power line", "local codes", "licensed practice"):
        assert phrase in text, phrase
    assert "licensed practice" in STATION_CAUTIONS[-1]


def test_ends_within_reach_below_2_5_m():
    # common practice: a raised hand reaches about 2.5 m (8 ft); 2.2 m is within reach.
    assert end_reach_warning("fan", "40m", 2.2, "metric") is not None
    assert "7 ft 3 in" in end_reach_warning("fan", "40m", 2.2, "imperial")
    assert end_reach_warning("fan", "40m", 2.5, "metric") is None
    assert "1.5 m radius" in keep_out_text(1.5, ("75m",), "metric")
