"""The assembled packet: logistics totals, performance figures and sheet content."""

from __future__ import annotations

import math

import pytest
from pypdf import PdfReader

from buildsheet.calc.logistics import CORD
from buildsheet.constants import C0


def test_demo_spool_plan_within_one_of_bound(demo_packet):
    # Issue 5: on the demo day the plan opens at most one spool more than the lower bound
    # ceil(total needed / spool length) for each material.
    plan = demo_packet.packet.spool_plan
    assert not plan.unassigned
    for m in plan.materials:
        assert m.lower_bound <= m.spools_used <= m.lower_bound + 1


def test_day_wire_total_equals_sum_of_every_leg(demo_packet):
    # BOM totals equal the sum over kits (issue 5): every leg of every kit, plus the stated
    # cutting tolerance per cut.
    packet = demo_packet.packet
    legs = [e.cut.cut_leg_m for e in packet.entries for _ in e.leg_ids]
    wire = [line for line in packet.day_bom if line.category == "wire"]
    assert len(wire) == 1
    assert wire[0].quantity == pytest.approx(math.fsum(legs) + 0.01 * len(legs), abs=1e-4)
    per_kit = [line.quantity for bom in packet.kit_boms.values() for line in bom
               if line.category == "wire"]
    assert math.fsum(per_kit) == pytest.approx(wire[0].quantity)


def test_every_leg_and_cord_is_cut_once(demo_packet):
    plan = demo_packet.packet.spool_plan
    ids = [pc.cut.cut_id for spool in plan.spools for pc in spool.cuts]
    assert len(ids) == len(set(ids))
    legs = {leg for e in demo_packet.packet.entries for leg in e.leg_ids}
    kits = {e.kit.kit_id for e in demo_packet.packet.entries}
    loops = {f"{k}-{name}" for k in kits for name in ("hang", "balun", "spare")}
    assert legs | {f"{leg}-T" for leg in legs} | loops == set(ids)  # every piece on the bill
    assert {spool.material for spool in plan.spools} == {"awg16-pvc", CORD}


def test_nvis_height_advice_in_common_practice_range(demo_packet):
    # Common practice: a transmitting NVIS antenna about 0.2 wavelength high; the model's best
    # zenith height for every demo band lies in 0.1-0.3 wavelength over medium dry ground.
    for perf in demo_packet.packet.performance:
        for band in perf.bands:
            assert 0.1 <= band.height.best_height_m / band.height.wavelength_m <= 0.3
            assert band.nvis.main_lobe_elevation_deg >= 60  # low antenna: high-angle lobe


def test_exposure_screen_follows_oet65_formula(demo_packet):
    # FCC OET Bulletin 65: S = 2.56 EIRP / (4 pi R^2); 47 CFR 1.1310 uncontrolled limit
    # 180/f^2 mW/cm^2 (f in MHz) = 1800/f^2 W/m^2.
    for perf in demo_packet.packet.performance:
        for band in perf.bands:
            x = band.exposure
            f_mhz = x.frequency_hz / 1e6
            unc = next(d for d in x.distances if "uncontrolled" in d.limit.name)
            expected = math.sqrt(2.56 * x.eirp_w / (4 * math.pi * 1800 / f_mhz**2))
            assert unc.distance_m == pytest.approx(expected, rel=1e-6)
            assert x.near_field_m == pytest.approx(C0 / x.frequency_hz / (2 * math.pi))


def test_sheets_carry_coverage_swr_and_exposure(demo_packet):
    text = " ".join(" ".join(p.extract_text().split()) for p in
                    PdfReader(demo_packet.out_dir / "sheets.pdf").pages)
    for words in ("Coverage and exposure", "RF exposure screen", "SWR on 50 ohm",
                  "Height advice", "Measurement log: kit K13", "Cutting station", "Spool cut plan",
                  "Bill of materials for the day", "What to bring", "Local regulations", "Screening estimate"):
        assert words in text, words


def test_per_design_layout_imperial_and_icnirp(tmp_path, demo_spec):
    from buildsheet.build import build
    from buildsheet.spec.units import format_imperial

    text = (demo_spec.read_text().replace('layout = "per_kit"', 'layout = "per_design"')
            .replace('units = "metric"', 'units = "imperial"')
            .replace('regime = "fcc"', 'regime = "both"'))
    spec = tmp_path / "club.toml"
    spec.write_text(text)
    result = build(spec, tmp_path / "out", built_at="2027-01-01T00:00:00Z", model="closed_form")
    text = " ".join(" ".join(p.extract_text().split())
                    for p in PdfReader(result.out_dir / "sheets.pdf").pages)
    assert "Design phonefan" in text and "Kit roster" in text and "Kit K01:" not in text
    assert "ICNIRP" in text and "FCC uncontrolled" in text
    cut = result.packet.entries[0].cut.cut_leg_m
    assert f"{format_imperial(cut)} (" in text  # imperial first, metric in brackets


def test_calibrated_packet_cuts_and_batch_trims(tmp_path, demo_spec):
    from buildsheet.records import ElementHistory, ElementRow, LegCut, Trim

    """With a stored site calibration the packet prints calibrated cuts, a smaller trim
    allowance, and batch trims that bring cut legs to the calibrated prediction (issue 7:
    consistent to within a millimetre)."""
    from buildsheet.calc import calibrate as cal
    from buildsheet.em.ground import GROUND_CLASSES
    from buildsheet.packet import build_packet
    from buildsheet.render.sheets import render_sheets
    from buildsheet.spec.reader import load_spec

    spec = load_spec(demo_spec)
    fan = spec.design("phonefan")
    plain = build_packet(spec, built_at="t")
    # A calibration as the store would hand it over: the site behaves like wet ground.
    calibration = cal.Calibration(
        "phonefan", cal.design_fingerprint(fan), GROUND_CLASSES["wet"], "wet", (), "medium dry",
        (), (), 0.004, ("K01-75m", "K01-40m"), ())
    k01 = [e for e in plain.entries if e.kit.kit_id == "K01"]
    # K01 was cut to the uncalibrated sheet and leg B already trimmed by 20 mm.
    t0 = "2027-03-01T09:00:00+00:00"
    histories = {e.element_id: ElementHistory(
        ElementRow(e.element_id, "K01", "phonefan", e.cut.element.key, e.cut.element.frequency_hz,
                   e.cut.element.low_hz, e.cut.element.high_hz, e.cut.predicted_leg_m,
                   e.cut.cut_leg_m, e.cut.prediction.slope_m_per_hz),
        trims=(Trim(1, e.element_id, "B", 0.02, t0, ""),),
        cuts=tuple(LegCut(i, e.element_id, s, e.cut.cut_leg_m, 1, "confirmed", t0, "")
                   for i, s in enumerate("AB"))) for e in k01}
    packet = build_packet(spec, built_at="t", calibrations={"phonefan": calibration},
                          histories=histories)
    fan_cuts = packet.cuts_for("phonefan")
    assert fan_cuts.prediction.calibrated_from == ("K01-75m", "K01-40m")
    for c, before in zip(fan_cuts.elements, plain.cuts_for("phonefan").elements):
        assert c.calibrated and c.trim_fraction == pytest.approx(max(0.01, 0.004))
        # the honest prediction band (issue 10) may already put the uncalibrated trim at the
        # min_trim floor, so calibration can only keep or lower it
        assert c.trim_fraction <= before.trim_fraction
        assert c.predicted_leg_m != pytest.approx(before.predicted_leg_m, abs=1e-3)
    a = fan.allowances
    assert {e.element_id for e in packet.batch_trims} == {e.element_id for e in k01}
    for entry, c in zip(packet.batch_trims, fan_cuts.elements):
        leg_a, leg_b = entry.state.legs
        assert (leg_a.cut_m, leg_b.cut_m) == (k01[0 if c.element.key == "75m" else 1].cut.cut_leg_m,) * 2
        assert leg_a.action.amount_m - leg_b.action.amount_m == pytest.approx(0.02, abs=1e-9)
        # Following the advice lands each electrical leg on the calibrated prediction (1 mm).
        for leg in (leg_a, leg_b):
            assert leg.action.kind == "shorten"
            after = leg.current_m - leg.action.amount_m - a.termination_m - a.feed_m
            assert after == pytest.approx(c.predicted_leg_m, abs=1e-3)
    # The sixty design has no calibration and keeps its cuts.
    assert packet.cuts_for("sixty").elements[0].cut_leg_m == plain.cuts_for("sixty").elements[0].cut_leg_m
    out = tmp_path / "s.pdf"
    render_sheets(packet, out)
    text = " ".join(" ".join(p.extract_text().split()) for p in PdfReader(out).pages)
    assert "CALIBRATED" in text and "Batch trims for kits already cut" in text
    assert "shorten this leg by" in text  # the batch trims in words


def test_stale_calibration_is_not_applied(demo_spec):
    from buildsheet.calc import calibrate as cal
    from buildsheet.em.ground import GROUND_CLASSES
    from buildsheet.packet import build_packet
    from buildsheet.spec.reader import load_spec

    spec = load_spec(demo_spec)
    stale = cal.Calibration("phonefan", "0" * 64, GROUND_CLASSES["wet"], "wet", (), "medium dry",
                            (), (), 0.004, ("K01-75m",), ())
    packet = build_packet(spec, built_at="t", calibrations={"phonefan": stale})
    assert not packet.cuts_for("phonefan").prediction.calibrated_from
    assert any("no longer applies" in w for w in packet.warnings)


def test_no_blank_pages(demo_packet):
    # Every page of the sheets carries more than its footer (a blank last page wastes paper).
    reader = PdfReader(demo_packet.out_dir / "sheets.pdf")
    footer_only = [i for i, p in enumerate(reader.pages)
                   if len(" ".join(p.extract_text().split())) < 200]
    assert footer_only == []
