"""Tests for buildsheet.calc.exposure against FCC OET Bulletin 65, 47 CFR 1.1310 and ICNIRP 2020."""

from __future__ import annotations

import math

import pytest
from numpy.testing import assert_allclose

from buildsheet.calc.exposure import (
    DUTY_FACTORS,
    average_power_w,
    distance_for_density,
    fcc_limits,
    icnirp2020_limits,
    power_density_w_m2,
    screen,
)
from buildsheet.calc.feedline import coax, matched_loss_db
from buildsheet.errors import BuildError


def test_fcc_table_3_30_mhz():
    # 47 CFR 1.1310 Table 1: controlled 1842/f V/m, 4.89/f A/m, 900/f^2 mW/cm^2; uncontrolled
    # 824/f V/m, 2.19/f A/m, 180/f^2 mW/cm^2 (f in MHz); 6 and 30 min averaging.
    for f in (3.6, 5.36, 7.2, 14.2, 28.5):
        ctl, unc = fcc_limits(f * 1e6)
        assert_allclose(ctl.s_w_m2, 900 / f**2 * 10, rtol=1e-12)
        assert_allclose(unc.s_w_m2, 180 / f**2 * 10, rtol=1e-12)
        assert_allclose([ctl.e_v_m, ctl.h_a_m], [1842 / f, 4.89 / f], rtol=1e-12)
        assert_allclose([unc.e_v_m, unc.h_a_m], [824 / f, 2.19 / f], rtol=1e-12)
        assert (ctl.averaging_s, unc.averaging_s) == (360.0, 1800.0)


def test_fcc_table_other_rows():
    # 47 CFR 1.1310 Table 1 other rows: 100 mW/cm^2 at 0.3-1.34 (unc.) and 0.3-3 (ctl.) MHz;
    # 0.2 / 1.0 mW/cm^2 at 30-300 MHz; f/1500 and f/300 at 300-1500 MHz; 1 and 5 above.
    ctl, unc = fcc_limits(1.0e6)
    assert (ctl.s_w_m2, unc.s_w_m2, unc.e_v_m) == (1000.0, 1000.0, 614.0)
    ctl, unc = fcc_limits(2.0e6)
    assert_allclose([ctl.s_w_m2, unc.s_w_m2], [1000.0, 1800 / 4.0], rtol=1e-12)
    ctl, unc = fcc_limits(50e6)
    assert_allclose([ctl.s_w_m2, unc.s_w_m2, unc.e_v_m], [10.0, 2.0, 27.5])
    ctl, unc = fcc_limits(450e6)
    assert_allclose([ctl.s_w_m2, unc.s_w_m2], [15.0, 3.0])
    ctl, unc = fcc_limits(2400e6)
    assert_allclose([ctl.s_w_m2, unc.s_w_m2], [50.0, 10.0])
    # E^2/377 of the field limit matches the plane-wave S column (REFERENCES 8.3 sanity check)
    ctl, unc = fcc_limits(7.2e6)
    assert_allclose(unc.e_v_m**2 / 377, unc.s_w_m2, rtol=3e-3)
    assert_allclose(ctl.e_v_m**2 / 377, ctl.s_w_m2, rtol=3e-3)


def test_icnirp_2020_levels():
    # ICNIRP 2020 Table 5 (whole body, from memory) and Table 6 (local), 0.1-30 MHz; values at
    # 7.2 MHz from shared REFERENCES.md section 8.4 (computed).
    lim = {x.name: x for x in icnirp2020_limits(7.2e6)}
    got = [(x.e_v_m, x.h_a_m) for x in lim.values()]
    want = [(165.7, 0.681), (75.3, 0.306), (377.7, 1.500), (168.5, 0.681)]
    assert_allclose(got, want, rtol=2e-3)
    wb_gp = lim["ICNIRP 2020 general public whole body (Table 5)"]
    assert_allclose(wb_gp.s_w_m2, 15.06, rtol=3e-3)
    assert wb_gp.averaging_s == 1800.0
    with pytest.raises(BuildError):
        icnirp2020_limits(50e6)


def test_oet65_worked_example():
    # shared REFERENCES.md section 8.3 (computed from FCC OET Bulletin 65 section 2 equations):
    # 100 W, 2.15 dBi, x2.56, 7.2 MHz -> 0.981 m uncontrolled, 0.439 m controlled.
    res = screen(7.2e6, 100.0, "carrier", 1.0, 2.15, regime="fcc")
    assert_allclose(res.eirp_w, 164.06, rtol=1e-3)
    d = {x.limit.name: x.distance_m for x in res.distances}
    assert_allclose(d["FCC uncontrolled"], 0.981, atol=0.002)
    assert_allclose(d["FCC controlled"], 0.439, atol=0.002)
    # Free space (no 2.56): 0.613 m (same table)
    assert_allclose(
        distance_for_density(res.eirp_w, 34.72, ground_reflection=False), 0.613, atol=0.002
    )
    # Check point S(1 m) = 33.42 W/m^2 (same table)
    assert_allclose(power_density_w_m2(res.eirp_w, 1.0), 33.42, rtol=1e-3)
    # ERP form S(uW/cm^2) = 33.4 ERP / R^2 (REFERENCES 8.2): 100 W ERP at 2 m -> 835 uW/cm^2
    assert_allclose(power_density_w_m2(100 * 1.64, 2.0) * 100, 33.4 * 100 / 4, rtol=2e-3)


def test_duty_factors_and_worked_average():
    # OET Bulletin 65 Supplement B Table 1 (from memory): SSB 20 %, CW 40 %, FM/data 100 %;
    # REFERENCES 8.3: SSB 100 W x 20 % x 50 % = 10 W -> 0.310 m; CW x 40 % x 50 % -> 0.439 m.
    assert (DUTY_FACTORS["ssb"], DUTY_FACTORS["cw"], DUTY_FACTORS["fm"]) == (0.2, 0.4, 1.0)
    ssb = screen(7.2e6, 100.0, "ssb", 0.5, 2.15, regime="fcc")
    assert_allclose(ssb.average_power_w, 10.0)
    assert_allclose(ssb.distances[1].distance_m, 0.310, atol=0.002)
    cw = screen(7.2e6, 100.0, "cw", 0.5, 2.15, regime="fcc")
    assert_allclose(cw.distances[1].distance_m, 0.439, atol=0.002)


def test_icnirp_distances_and_regime_both():
    # shared REFERENCES.md section 8.4 (computed): ICNIRP 2020 GP whole body 1.49 m (100 W),
    # occupational 0.68 m, with S_eq = E^2/377.
    res = screen(7.2e6, 100.0, "data", 1.0, 2.15, regime="both")
    d = {x.limit.name: x.distance_m for x in res.distances}
    assert len(d) == 8  # FCC 2, ICNIRP 2020 4, ICNIRP 2010 nerve stimulation 2 (below 10 MHz)
    assert_allclose(d["ICNIRP 2020 general public whole body (Table 5)"], 1.49, atol=0.01)
    assert_allclose(d["ICNIRP 2020 occupational whole body (Table 5)"], 0.68, atol=0.01)
    assert len(screen(7.2e6, 100.0, "data", 1.0, 2.15, regime="icnirp2020").distances) == 6
    # above 10 MHz the ICNIRP 2010 nerve-stimulation levels no longer apply (ICNIRP 2010 scope)
    assert len(screen(14.2e6, 100.0, "data", 1.0, 2.15, regime="icnirp2020").distances) == 4


def test_icnirp_2010_nerve_stimulation_at_pep_by_hand():
    # ICNIRP (2010) Health Phys. 99(6):818-836, reference levels 3 kHz-10 MHz: 83 V/m general
    # public, 170 V/m occupational, not time-averaged (REFERENCES.md 8.5). By hand: 100 W PEP at
    # 3.9 MHz, 0.3 dB loss -> 93.3 W; E(r) = 1.6 sqrt(30 P G)/r with G = 1.64 (2.15 dBi) and the
    # 1.6 field reflection factor (FCC OET Bulletin 65) -> 108/r V/m: 1.31 m and 0.64 m.
    p = 100.0 * 10 ** (-0.3 / 10)
    e_at_1m = 1.6 * math.sqrt(30.0 * p * 10 ** 0.215)
    assert_allclose(e_at_1m, 108.0, rtol=5e-3)
    # SSB duty and transmit fraction must not reduce it: the limit is met at PEP.
    res = screen(3.9e6, 100.0, "ssb", 0.5, 2.15, 0.3, regime="fcc")
    d = {x.limit.name: x for x in res.distances}
    gp = d["ICNIRP 2010 general public nerve stimulation (at PEP)"]
    occ = d["ICNIRP 2010 occupational nerve stimulation (at PEP)"]
    assert_allclose(gp.distance_m, e_at_1m / 83.0, rtol=2e-3)
    assert_allclose(occ.distance_m, e_at_1m / 170.0, rtol=2e-3)
    assert_allclose(gp.distance_m, 1.3, atol=0.02)  # "about 1.3 m" (REFERENCES.md 8.5)
    assert_allclose(gp.power_w, p, rtol=1e-12)
    # It governs over the time-averaged FCC uncontrolled distance (about 0.16 m here).
    assert res.governing is gp
    assert res.keep_out_m == 1.5  # rounded up to 0.5 m (common practice, our rounding)


def test_ssb_with_speech_processing_and_windows():
    # FCC OET Bulletin 65 Supplement B (from memory): SSB with heavy speech processing 40 %.
    # 47 CFR 1.1310: controlled limits average over 6 min, uncontrolled over 30 min.
    assert DUTY_FACTORS["ssb-processed"] == 0.4
    res = screen(7.2e6, 100.0, "ssb-processed", 0.5, 2.15, regime="fcc",
                 fraction_6min=1.0, fraction_30min=0.25)
    d = {x.limit.name: x for x in res.distances}
    assert_allclose(d["FCC controlled"].power_w, 100 * 0.4 * 1.0, rtol=1e-12)
    assert_allclose(d["FCC uncontrolled"].power_w, 100 * 0.4 * 0.25, rtol=1e-12)
    # REFERENCES.md 8.3 (computed): 40 W average at 7.2 MHz, 2.15 dBi, x2.56 -> the controlled
    # distance scales as sqrt(P): 0.439 m x sqrt(0.4).
    assert_allclose(d["FCC controlled"].distance_m, 0.439 * math.sqrt(0.4), atol=0.002)
    # A 6-minute fraction below the 30-minute one is raised to it (the busiest 6 minutes are
    # never quieter than the 30-minute average).
    low = screen(7.2e6, 100.0, "ssb", 0.5, 2.15, regime="fcc", fraction_6min=0.1)
    assert low.transmit_fraction_6min == 0.5


def test_printed_distances_round_up():
    # Our rounding rule: safety distances print to 0.1 m or the whole inch, never rounded down.
    from buildsheet.spec.units import format_distance
    assert format_distance(0.073) == "0.1 m"
    assert format_distance(1.306) == "1.4 m"
    assert format_distance(1.306, "imperial") == "4 ft 4 in"  # 51.4 in -> 52 in
    assert format_distance(3.048, "imperial") == "10 ft"  # exactly 10 ft (international foot)


def test_feedline_loss_reduces_power():
    # 30 m of RG-58 at 7.2 MHz: loss from the model; average power scales by 10^(-dB/10).
    loss = matched_loss_db(coax("rg58"), 30.0, 7.2e6)
    p = average_power_w(100.0, "fm", 1.0, loss)
    assert_allclose(p, 100.0 * 10 ** (-loss / 10), rtol=1e-12)
    assert 0.5 < loss < 2.0  # typical published ~1.2 dB for 30 m at 7 MHz (from memory)


def test_cautions_and_near_field():
    res = screen(7.2e6, 100.0, "ssb", 0.5, 2.15)
    # lambda/2pi = 6.63 m at 7.2 MHz (REFERENCES 8.3 near-field caveat, computed)
    assert_allclose(res.near_field_m, 6.63, atol=0.01)
    text = " ".join(res.cautions)
    for phrase in ("Screening estimate", "near field", "wire ends", "Local regulations"):
        assert phrase in text


def test_bad_inputs():
    with pytest.raises(BuildError):
        screen(7.2e6, 100.0, "smoke", 1.0, 2.15)
    with pytest.raises(BuildError):
        screen(7.2e6, 100.0, "ssb", 1.5, 2.15)
    with pytest.raises(BuildError):
        screen(7.2e6, 100.0, "ssb", 0.5, 2.15, regime="mars")  # type: ignore[arg-type]  # bad on purpose
    assert math.isfinite(screen(1.9e6, 100.0, "cw", 0.5, 2.15).eirp_w)
