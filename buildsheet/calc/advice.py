"""Printed advice per design, worded once from the solved numbers: the exposure box lines,
the keep-out, reach warnings and the other notes an experienced builder expects on a sheet.

Pure: (design, cuts, performance, unit system) in, text lines out; renderers only lay them out.
Lengths in metres inside, formatted for the packet's unit system.
"""

from __future__ import annotations

from dataclasses import dataclass

from buildsheet.calc import safety
from buildsheet.spec import bands
from buildsheet.calc.cuts import DesignCuts
from buildsheet.calc.exposure import ExposureScreen
from buildsheet.calc.performance import DesignPerformance
from buildsheet.spec.units import UnitSystem, format_distance


@dataclass(frozen=True)
class DesignAdvice:
    """Everything worded for one design (each a tuple of printable lines)."""

    exposure_head: str
    exposure_bands: tuple[str, ...]
    keep_out: str
    exposure_cautions: tuple[str, ...]
    warnings: tuple[str, ...] = ()
    band_rules: tuple[str, ...] = ()  # channel plan and power limits (60 m)


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


def design_advice(cuts: DesignCuts, perf: DesignPerformance, units: UnitSystem) -> DesignAdvice:
    """Word the advice for one solved design."""
    d = cuts.design
    screens = [b.exposure for b in perf.bands]
    keep = max(x.keep_out_m for x in screens)
    warnings = [w for c in cuts.elements
                if (w := safety.end_reach_warning(d.key, c.element.key, c.element.end_height_m,
                                                  units)) is not None]
    rules, sixty_warnings = sixty_metre_advice(cuts, screens)
    warnings += sixty_warnings
    return DesignAdvice(
        exposure_head=exposure_head(screens[0]),
        exposure_bands=tuple(exposure_band_line(b.band_label, b.exposure, units)
                             for b in perf.bands),
        keep_out=safety.keep_out_text(keep, low_end_labels(cuts), units),
        exposure_cautions=screens[0].cautions,
        warnings=tuple(warnings),
        band_rules=rules,
    )

