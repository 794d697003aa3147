"""Printed advice per design, worded once from the solved numbers: the exposure box lines,
the keep-out, reach warnings and the other notes an experienced builder expects on a sheet.

Pure: (design, cuts, performance, unit system) in, text lines out; renderers only lay them out.
Lengths in metres inside, formatted for the packet's unit system.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, replace
from typing import TYPE_CHECKING

import numpy as np

from buildsheet.calc import safety
from buildsheet.calc.asbuilt import design_target_m, expected_dip_hz
from buildsheet.calc.cuts import DesignCuts, ElementCut, printed_parts
from buildsheet.calc.exposure import ExposureScreen
from buildsheet.calc.feedline import coax
from buildsheet.calc.geometry import Footprint, footprint, included_angle_deg, leg_geometry
from buildsheet.calc.logistics import BALUN_LOOP_CORD_M
from buildsheet.calc.performance import DesignPerformance
from buildsheet.spec import bands
from buildsheet.spec.units import (
    UnitSystem,
    format_both,
    format_distance,
    format_frequency,
    format_length,
)

if TYPE_CHECKING:
    from buildsheet.em.context import Solver
    from buildsheet.em.ground import Ground
    from buildsheet.em.prediction import ModelName


@dataclass(frozen=True)
class DesignAdvice:
    """Everything worded for one design (each a tuple of printable lines)."""

    exposure_head: str
    exposure_bands: tuple[str, ...]
    keep_out: str
    exposure_cautions: tuple[str, ...]
    warnings: tuple[str, ...] = ()
    band_rules: tuple[str, ...] = ()  # channel plan and power limits (60 m)
    height: tuple[str, ...] = ()  # height advice in words (coverage page)
    dips: tuple[str, ...] = ()  # where the first dip lands as cut (kit sheets)
    assembly: tuple[str, ...] = ()  # numbered steps; "{kit}" stands for the kit ID
    feed_line: tuple[str, ...] = ()  # feed-line notes (common practice)
    site_fit: tuple[str, ...] = ()  # how the stakes fit the site, and what would
    spacing: tuple[str, ...] = ()  # fan elements too close in bearing: length change, spreaders
    cautions: tuple[str, ...] = ()  # the kit sheet's safety cautions, in the packet's units
    station_cautions: tuple[str, ...] = ()  # the short list, in the packet's units


def tuning_words(cut: ElementCut, units: UnitSystem) -> str:
    """The tuning line in words, from the model's slope (length per 100 kHz, each leg)."""
    step = format_both(cut.tuning_m_per_100khz, units)
    return (f"to raise the resonance by 100 kHz shorten each leg by {step}; to lower it, "
            f"lengthen each leg by the same. Trim both legs equally, part of the amount per step.")


def _pct(x: float) -> str:
    return f"{x * 100:.0f} %"


def exposure_head(x: ExposureScreen) -> str:
    """The exposure box's first line: power, mode, duty, window fractions, gain."""
    windows = (f"transmitting {_pct(x.transmit_fraction)} of any 30 minutes"
               if x.transmit_fraction_6min == x.transmit_fraction else
               f"transmitting {_pct(x.transmit_fraction_6min)} of any 6 minutes and "
               f"{_pct(x.transmit_fraction)} of any 30 minutes")
    if x.transmit_fraction_6min == x.transmit_fraction:
        windows += " and of any 6 minutes"
    mode = x.mode.upper().replace("-PROCESSED", " with speech processing")
    return (f"RF exposure screen ({x.pep_w:.0f} W PEP, {mode} duty {_pct(x.duty_factor)}, "
            f"{windows}; antenna gain {x.gain_dbi:.2f} dBi with the ground-reflection "
            "factor 2.56)")


def exposure_band_line(label: str, x: ExposureScreen, units: UnitSystem) -> str:
    """One band: powers at the antenna, each limit's distance, the governing distance."""
    if x.transmit_fraction_6min == x.transmit_fraction:
        avg = f"{x.average_power_w:.1f} W average"
    else:
        avg = (f"{x.average_power_6min_w:.1f} W average over 6 min, {x.average_power_w:.1f} W "
               "over 30 min")
    dist = "; ".join(f"{d.limit.name} {format_distance(d.distance_m, units)}"
                     for d in x.distances)
    line = (f"{label}: {avg}, {x.peak_power_w:.0f} W PEP at the antenna after "
            f"{x.feedline_loss_db:.1f} dB feed-line loss. Limits met beyond: {dist}.")
    if x.governing is not None:
        line += (f" Governing for bystanders: {format_distance(x.governing.distance_m, units)}, "
                 f"set by the {x.governing.limit.name} level.")
    return line


def low_end_labels(cuts: DesignCuts) -> tuple[str, ...]:
    """Band labels of the elements whose ends are within reach."""
    return tuple(c.element.band_label for c in cuts.elements
                 if c.element.end_height_m < safety.REACH_HEIGHT_M)


def _khz(hz: float) -> str:
    return f"{hz / 1e3:.1f} kHz"


def sixty_metre_advice(cuts: DesignCuts, screens: list[ExposureScreen]) -> tuple[
        tuple[str, ...], tuple[str, ...]]:
    """(lines, warnings) for the 60 m elements: channel list with USB dial frequencies, the
    channel width and the power limits; warnings for an off-channel design frequency and for
    exposure power above the limits (ERP with the dipole as 0 dBd, EIRP = ERP x 1.64)."""
    lines: list[str] = []
    warnings: list[str] = []
    for c, x in zip(cuts.elements, screens):
        band = c.element.band
        if band is None or not band.name.startswith("60m"):
            continue
        label = f"{cuts.design.key} {c.element.key}"
        erp = x.peak_power_w * 10.0 ** ((x.gain_dbi - 2.15) / 10.0)
        eirp = x.peak_power_w * 10.0 ** (x.gain_dbi / 10.0)
        wrc = (f"WRC-15 allocation {_khz(5351.5e3)}-{_khz(5366.5e3)}: "
               f"{bands.WRC15_60M_MAX_EIRP_W:.0f} W EIRP")
        if band.name == "60m-us":
            chans = "; ".join(f"ch {ch.number} {_khz(ch.centre_hz)} (USB dial {_khz(ch.dial_hz)})"
                              for ch in bands.us_60m_channels())
            lines.append(
                f"{c.element.band_label} channels (US, centre frequency, USB dial 1.5 kHz lower): "
                f"{chans}; each {bands.US_60M_CHANNEL_WIDTH_HZ / 1e3:.1f} kHz wide: stay inside "
                f"it. Power limits: US {bands.US_60M_MAX_ERP_W:.0f} W PEP ERP (a half-wave dipole "
                f"counts as 0 dBd); {wrc}. This dipole is cut for "
                f"{_khz(c.element.frequency_hz)}. Check the current national rules before "
                "transmitting.")
            problem = bands.us_60m_frequency_problem(c.element.frequency_hz)
            if problem:
                warnings.append(f"{label}: {problem}")
            if erp > bands.US_60M_MAX_ERP_W:
                warnings.append(f"{label}: the exposure power gives {erp:.0f} W PEP ERP at the "
                                f"antenna, above the US 60 m limit of "
                                f"{bands.US_60M_MAX_ERP_W:.0f} W PEP ERP")
        else:
            lines.append(f"{c.element.band_label}: {wrc} (check the national rules: some "
                         f"administrations differ). This dipole is cut for "
                         f"{_khz(c.element.frequency_hz)}.")
            if eirp > bands.WRC15_60M_MAX_EIRP_W:
                warnings.append(f"{label}: the exposure power gives {eirp:.0f} W EIRP at the "
                                f"antenna, above the {bands.WRC15_60M_MAX_EIRP_W:.0f} W EIRP of "
                                "the WRC-15 60 m allocation; reduce power to about "
                                f"{bands.WRC15_60M_MAX_EIRP_W / eirp * x.pep_w:.0f} W PEP")
    return tuple(lines), tuple(warnings)


def height_lines(cuts: DesignCuts, perf: DesignPerformance, units: UnitSystem) -> tuple[str, ...]:
    """Height advice in words: where the apex sits against each band's 1 dB window, what that
    costs at the zenith (from the band's height sweep), and the multi-band compromise."""
    apex = cuts.design.apex_height_m
    lines = [f"The apex is at {format_both(apex, units)}."]
    for b in perf.bands:
        h = b.height
        window = f"{format_length(h.range_low_m, units)} to {format_length(h.range_high_m, units)}"
        best = format_both(h.best_height_m, units)
        lo, hi = float(h.heights_m[0]), float(h.heights_m[-1])
        loss = (h.best_gain_dbi - float(np.interp(apex, h.heights_m, h.zenith_gain_dbi))
                if lo <= apex <= hi else None)
        cost = (f"about {loss:.1f} dB less zenith gain than at the best height" if loss is not None
                else "more than the sweep shows")
        if apex < h.range_low_m:
            lines.append(
                f"{b.band_label}: the apex is BELOW the 1 dB window ({window}; best {best}): "
                f"expect {cost}. Raising the apex to {format_length(h.range_low_m, units)} "
                "brings it within 1 dB. A low NVIS antenna still works, with a weaker signal.")
        elif apex > h.range_high_m:
            lines.append(
                f"{b.band_label}: the apex is ABOVE the 1 dB window ({window}; best {best}): "
                f"expect {cost} and more radiation at low angles (less NVIS).")
        else:
            lines.append(f"{b.band_label}: the apex is within the 1 dB window ({window}; best "
                         f"{best}).")
    if perf.compromise is not None:
        c = perf.compromise
        lines.append(f"Compromise for all bands (lowest apex within 1 dB of each band's best): "
                     f"{format_both(c.height_m, units)}; worst shortfall there "
                     f"{c.worst_shortfall_db:.1f} dB.")
    lines.append("Common practice: about 0.2 wavelength for a transmitting NVIS antenna, about 0.1 "
                 "wavelength for a separate receiving one; moist farmland beats dry sand or rock.")
    return tuple(lines)


def dip_lines(cuts: DesignCuts) -> tuple[str, ...]:
    """Where each element's first dip should land as cut, in words, with a plain note when it
    falls outside the band (normal for a leg cut long)."""
    out = []
    for c in cuts.elements:
        f = expected_dip_hz(c.cut_leg_m, design_target_m(c), c.element.frequency_hz,
                            c.prediction.slope_m_per_hz)  # as prescribed
        e = c.element
        text = (f"{e.band_label}: as cut (long by the trim allowance) the first dip should be "
                f"near {format_frequency(f)}")
        if f < e.low_hz:
            text += (f", below the band edge ({format_frequency(e.low_hz)}). That is normal for a "
                     "leg cut long. Find the dip with an antenna analyzer, not by transmitting "
                     f"(that would be outside the band), then trim toward "
                     f"{format_frequency(e.frequency_hz)}.")
        elif f > e.high_hz:
            text += (f", ABOVE the band edge ({format_frequency(e.high_hz)}): the legs are short "
                     "for this site. Check the cut against the cut list before anything else; "
                     "lengthen both legs equally if they match.")
        else:
            text += (f", inside the band; find it with an antenna analyzer and trim toward "
                     f"{format_frequency(e.frequency_hz)}.")
        out.append(text)
    return tuple(out)


#: Insulation stripped for a crimp ring terminal, m (common practice: about 10 mm, 3/8 in).
STRIP_M: float = 0.01


def assembly_steps(cuts: DesignCuts, units: UnitSystem) -> tuple[str, ...]:
    """Numbered assembly steps with this design's numbers (common practice). "{kit}" in the
    text stands for the kit ID (the sheet fills it in)."""
    d = cuts.design
    a = d.allowances
    per = "; ".join(f"{c.element.band_label} {format_both(c.cut_leg_m, units)}"
                    for c in cuts.elements)
    tags = ", ".join(f"{{kit}}-{c.element.key}-A/B" for c in cuts.elements)
    trims = "; ".join(f"{c.element.band_label} {format_length(printed_parts(c, units).trim_m, units)}"
                      for c in cuts.elements)
    cords = "; ".join(f"{c.element.band_label} {format_length(c.legs[0].cord_cut_m, units)}"
                      for c in cuts.elements)
    strip = (f"strip {format_both(STRIP_M, units)} of insulation and crimp" if d.wire.insulated
             else "crimp")
    flat = d.mount == "flat"
    steps = [
        f"Check each leg against the cut list ({per}) and tag it with its ID ({tags}).",
        (f"At the feed end of each leg {strip} a ring terminal; the feed allowance "
         f"({format_both(a.feed_m, units)}) is the pigtail from the terminal to the balun."),
        (f"At the far end pass the wire through the end insulator, fold back the termination "
         f"allowance ({format_both(a.termination_m, units)}) and wrap it tightly round the leg; "
         f"tape the tail. Keep the trim allowance in the leg ({trims}): it is the tuning reserve."),
        (f"Tie the cord to each end insulator with a bowline (cord to cut: {cords}); "
         + ("it runs to the pulley or ring at the top of the end support, and the halyard "
            "lowers the end for tuning." if flat else
            "it runs to the stake, with a taut-line hitch there.")),
        (f"Bolt the terminals to the balun studs (all A legs on one, all B legs on the other), "
         f"leaving slack in each pigtail; tie the balun loop "
         f"({format_both(BALUN_LOOP_CORD_M, units)} of cord) so the cord, not the terminal, "
         "takes the pull."),
        ("Wind each leg on its winder from the insulator end, so that the feed end comes off first "
         "at the mast."),
        "Fit each leg's label to its winder and check that it matches the tag on the wire.",
    ]
    return tuple(f"{n}. {s}" for n, s in enumerate(steps, start=1))


def feed_line_notes(cuts: DesignCuts, perf: DesignPerformance) -> tuple[str, ...]:
    """Feed-line notes of common practice: matched loss, common-mode choke, tuner limits."""
    d = cuts.design
    loss = ", ".join(f"{b.band_label} {b.feedline_loss_db:.1f} dB" for b in perf.bands)
    return (
        f"Feed line: {coax(d.coax_type).title}, matched loss {loss}; more with a high SWR.",
        ("The 1:1 current balun at the feed is the first common-mode choke. If the coax still "
         "shows RF (an SWR that changes when you touch or move the coax, RF on the microphone or "
         "a warm rig), add a choke at the rig end: several turns of the coax through a ferrite "
         "core suited to HF."),
        ("A tuner at the rig makes the radio see 50 ohm; it cannot fix the antenna. The SWR on "
         "the coax and its extra loss stay, and a leg cut wrong still resonates in the wrong "
         "place. On the day, trim for a dip inside the band; leave the tuner for the last bit "
         "towards the band edges."),
    )


def _layout(cuts: DesignCuts, *, apex_m: float | None = None, end_m: float | None = None,
            supports: bool | None = None) -> Footprint:
    """Footprint of the design's legs (as modelled) with a different apex, end height or end
    supports (same leg lengths and bearings)."""
    d = cuts.design
    a = d.allowances
    apex = d.apex_height_m if apex_m is None else apex_m
    legs = [leg_geometry(leg.leg_id, leg.bearing_deg, c.predicted_leg_m, apex,
                         c.element.end_height_m if end_m is None else min(end_m, c.element.end_height_m),
                         knot_m=a.cord_knot_m, hitch_m=a.cord_stake_m, end_supports=supports)
            for c in cuts.elements for leg in c.legs]
    return footprint(legs)


def _span(fp: Footprint, units: UnitSystem) -> str:
    return (f"{format_distance(fp.width_m, units)} E-W x {format_distance(fp.depth_m, units)} "
            "N-S")


def _fit_words(fp: Footprint, w: float, d: float) -> str:
    o = fp.orientation(w, d)
    return {"as drawn": "fits as drawn", "turned": "fits turned 90 degrees",
            None: "does not fit"}[o]


def _bisect(fits: Callable[[float], bool], lo: float, hi: float, want_high: bool,
            steps: int = 30) -> float | None:
    """The extreme value in [lo, hi] where ``fits`` holds, assuming it holds on one side only:
    the largest (``want_high``) or the smallest value; None if it holds nowhere."""
    good = hi if not want_high else lo
    if not fits(good):
        return None
    bad = lo if not want_high else hi
    if fits(bad):
        return bad
    for _ in range(steps):
        mid = (good + bad) / 2
        if fits(mid):
            good = mid
        else:
            bad = mid
    return good


def site_fit_lines(cuts: DesignCuts, width_m: float | None, depth_m: float | None,
                   units: UnitSystem) -> tuple[str, ...]:
    """Which orientation of the layout fits the site (width taken as E-W), and when none does,
    what would: lower ends, end supports with short cords, or a higher apex (a narrower
    included angle), each with its figures. Leg lengths as modelled."""
    fp = cuts.footprint
    span = f"Stakes span {_span(fp, units)}"
    if not width_m or not depth_m:
        return (span + ".",)
    site = f"the site of {format_distance(width_m, units)} (E-W) x {format_distance(depth_m, units)} (N-S)"
    o = fp.orientation(width_m, depth_m)
    if o == "as drawn":
        return (f"{span}: fits {site} as drawn (bearings as given).",)
    if o == "turned":
        return ((f"{span}: does not fit {site} as drawn, but fits turned 90 degrees: add 90 "
                 "degrees to every bearing (or lay the long axis along the site's longer side); "
                 f"the stakes then span {format_distance(fp.depth_m, units)} E-W x "
                 f"{format_distance(fp.width_m, units)} N-S."),)
    lines = [f"{span}: DOES NOT FIT {site} in either orientation. What would:"]
    d = cuts.design
    if d.mount == "flat":
        lines.append("- a flat dipole needs its full length plus the end supports and their "
                     "guys; an inverted V (ends lower than the apex) takes less room.")
        return tuple(lines)

    def fits(*, apex_m: float | None = None, end_m: float | None = None) -> bool:
        try:
            return _layout(cuts, apex_m=apex_m, end_m=end_m).fits(width_m, depth_m)
        except ValueError:  # a leg too short for that drop
            return False

    top_end = max(c.element.end_height_m for c in cuts.elements)
    shortest = min(c.predicted_leg_m for c in cuts.elements)
    low_end = max(0.3, d.apex_height_m - shortest + 0.05)
    h = _bisect(lambda x: fits(end_m=x), low_end, top_end, want_high=True) \
        if low_end < top_end else None
    if h is not None:
        f = _layout(cuts, end_m=h)
        lines.append(f"- lower ends (a shorter reach): ends at {format_distance(h, units, round_up=False)} "
                     f"give stakes over {_span(f, units)}, {_fit_words(f, width_m, depth_m)}"
                     + ("; ends that low are within reach and need the keep-out."
                        if h < safety.REACH_HEIGHT_M else "."))
    else:
        lines.append("- lower ends alone are not enough.")
    f = _layout(cuts, supports=True)
    lines.append(f"- end supports at the end insulators (their own height, {format_distance(1.5, units)} "
                 f"cords, guys half their height out): {_span(f, units)}, "
                 f"{_fit_words(f, width_m, depth_m)}.")

    top_apex = min(3.0 * d.apex_height_m,
                   min(c.element.end_height_m + c.predicted_leg_m for c in cuts.elements) - 0.05)
    apex = (_bisect(lambda x: fits(apex_m=x), d.apex_height_m, top_apex, want_high=False)
            if top_apex > d.apex_height_m else None)
    if apex is not None:
        f = _layout(cuts, apex_m=apex)
        c0 = max(cuts.elements, key=lambda c: c.predicted_leg_m)
        angle = included_angle_deg(c0.predicted_leg_m, apex - c0.element.end_height_m)
        lines.append(f"- a narrower included angle: apex at {format_distance(apex, units)} "
                     f"({c0.element.band_label} {angle:.0f} deg included) gives "
                     f"{_span(f, units)}, {_fit_words(f, width_m, depth_m)}.")
    return tuple(lines)


#: Fan elements closer than this in bearing (between their wire axes) get a warning, degrees
#: (common practice: elements about 30 degrees or more apart interact little; 90 is usual).
FAN_SEPARATION_WARN_DEG: float = 45.0
FAN_SEPARATION_STRONG_DEG: float = 30.0


def axis_separation_deg(a_deg: float, b_deg: float) -> float:
    """Angle between two dipole axes, degrees (0-90): a dipole runs both ways from the feed."""
    d = abs(a_deg - b_deg) % 180.0
    return min(d, 180.0 - d)


def crossed_bearings(bearings: list[float]) -> list[float]:
    """The same elements spread evenly over 180 degrees from the first bearing (two: crossed)."""
    n = len(bearings)
    return [(bearings[0] + k * 180.0 / n) % 360.0 for k in range(n)]


def fan_spacing_advice(cuts: DesignCuts, ground: Ground | None, model: ModelName,
                       units: UnitSystem, solver: Solver | None = None
                       ) -> tuple[tuple[str, ...], tuple[str, ...]]:
    """(lines, warnings) for fan elements closer than about 30-45 degrees: which pairs, how far
    each modelled leg moves against the same elements spread evenly (crossed, for two), and
    spreader guidance (common practice). ``ground``/``model`` re-solve the spread layout (through
    ``solver``, the build's solver context)."""
    els = cuts.elements
    d = cuts.design
    close = [(a, b, axis_separation_deg(a.element.bearing_deg, b.element.bearing_deg))
             for i, a in enumerate(els) for b in els[i + 1:]]
    close = [x for x in close if x[2] < FAN_SEPARATION_WARN_DEG]
    if not close:
        return (), ()
    warnings = []
    for a, b, sep in close:
        how = "strongly" if sep < FAN_SEPARATION_STRONG_DEG else "noticeably"
        warnings.append(f"{d.key}: elements {a.element.key} and {b.element.key} are only "
                        f"{sep:.0f} deg apart on one feed; they interact {how} (below about "
                        "30-45 deg). See the spacing note on the sheet.")
    lines = []
    if ground is not None:
        from buildsheet.em.solve import predict

        spread = crossed_bearings([c.element.bearing_deg for c in els])
        variant = replace(d, elements=tuple(replace(c.element, bearing_deg=b)
                                            for c, b in zip(els, spread)))
        ref = predict(variant, ground, model, solver)
        what = "crossed at 90 deg" if len(els) == 2 else f"spread {180 / len(els):.0f} deg apart"
        moves = []
        for c in els:
            here = c.uncalibrated_leg_m if c.calibrated and c.uncalibrated_leg_m else c.predicted_leg_m
            other = ref.element(c.element.key).leg_length_m
            delta = here - other
            moves.append(f"{c.element.band_label} {format_both(here, units)} against "
                         f"{format_both(other, units)} ({'+' if delta >= 0 else '-'}"
                         f"{format_length(abs(delta), units)})")
        lines.append(f"Element spacing: modelled legs at these bearings against the same "
                     f"elements {what}: " + "; ".join(moves)
                     + ". The cut list is for the bearings as given.")
    lines.append("If the elements must share a bearing, hold them apart with non-conductive "
                 "spreaders every 1-2 m (about 15-30 cm apart, common practice), tie the "
                 "shorter element's end off separately, tune the longest element first, then the "
                 "next, and repeat once: the shorter elements move most.")
    return tuple(lines), tuple(warnings)


def design_advice(cuts: DesignCuts, perf: DesignPerformance, units: UnitSystem,
                  site_m: tuple[float | None, float | None] = (None, None), *,
                  ground: Ground | None = None, model: ModelName = "closed_form",
                  solver: Solver | None = None) -> DesignAdvice:
    """Word the advice for one solved design (``site_m``: site width E-W and depth N-S, m;
    ``ground`` and ``model`` let the fan-spacing note re-solve an evenly spread layout)."""
    d = cuts.design
    screens = [b.exposure for b in perf.bands]
    keep = max(x.keep_out_m for x in screens)
    warnings = [w for c in cuts.elements
                if (w := safety.end_reach_warning(d.key, c.element.key, c.element.end_height_m,
                                                  units)) is not None]
    rules, sixty_warnings = sixty_metre_advice(cuts, screens)
    warnings += sixty_warnings
    spacing, spacing_warnings = fan_spacing_advice(cuts, ground, model, units, solver)
    warnings += spacing_warnings
    if d.mount == "flat" and d.tie_off_angle_deg != 45.0:
        warnings.append(f"{d.key}: tie_off_angle is not used: a flat dipole hangs from end "
                        "supports with horizontal cords and halyards")
    return DesignAdvice(
        exposure_head=exposure_head(screens[0]),
        exposure_bands=tuple(exposure_band_line(b.band_label, b.exposure, units)
                             for b in perf.bands),
        keep_out=safety.keep_out_text(keep, low_end_labels(cuts), units),
        exposure_cautions=safety.exposure_cautions(screens[0].near_field_m, units),
        cautions=safety.site_cautions(units),
        station_cautions=safety.station_cautions(units),
        warnings=tuple(warnings),
        band_rules=rules,
        height=height_lines(cuts, perf, units),
        dips=dip_lines(cuts),
        assembly=assembly_steps(cuts, units),
        feed_line=feed_line_notes(cuts, perf),
        site_fit=site_fit_lines(cuts, site_m[0], site_m[1], units),
        spacing=spacing,
    )

