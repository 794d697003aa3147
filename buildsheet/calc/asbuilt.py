"""As built against as designed: the one home of every per-leg number a build day acts on.

For each leg: the *prescribed cut* (what the current design would have you cut: from
:mod:`buildsheet.calc.cuts`), the length *as cut* (from the ledger, or None), the *trims* since,
the *current* length, the *target* (the length at which the element resonates on its design
frequency) and the *action* that takes the current length to the target. For an element: the
*expected dip* of the wire as it is now. The CLI, the packet (sheets, labels, log forms, record
pages, batch trims), the export and the station all read these functions; nothing else
computes them.

Target. An element with a reading taken since its last cut is its own best evidence: its
target is the mean leg length at that reading moved by the tuning slope,
L_target = L_read + s (f_design - f_dip), s = dL/df < 0 (first order; REFERENCES 11, common
practice: f L = const gives s = -L/f). Otherwise the target is the design's resonant leg
(calibrated where a site calibration applies) plus termination and feed allowances.
Expected dip of a leg of mean length L: f = f_design + (L - L_target) / s.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Literal

from buildsheet.calc.cuts import ElementCut
from buildsheet.records import SIDES, ElementHistory, Measurement
from buildsheet.spec.units import UnitSystem, format_both

ActionKind = Literal["cut", "measure", "shorten", "lengthen", "re-cut", "none"]
TargetSource = Literal["reading", "calibration", "model"]
Status = Literal["not cut", "cut", "measured", "tuned"]

#: Differences below this leave a leg alone, m (2 mm: below what a builder can trim reliably).
NONE_BELOW_M: float = 0.002
#: A dip within this fraction of the design frequency is on frequency (0.1 %: 7 kHz at 7 MHz).
ON_FREQUENCY_FRACTION: float = 0.001
#: Trim in steps of this part of the computed amount, staying long (common practice).
STEP_FRACTION: float = 0.5
#: A change larger than this many trim allowances suggests a mis-cut or a misread analyzer.
IMPLAUSIBLE_ALLOWANCES: float = 2.0


@dataclass(frozen=True)
class Action:
    """What to do to one leg (or both): ``amount_m`` >= 0, metres."""

    kind: ActionKind
    amount_m: float

    def words(self, units: UnitSystem, *, both: bool = True) -> str:
        """The instruction in words: "shorten each leg by 45 mm"."""
        each = "each leg" if both else "this leg"
        amount = format_both(self.amount_m, units)
        if self.kind == "none":
            return "leave it: on target"
        if self.kind == "cut":
            return f"cut {each} to {amount}"
        if self.kind == "measure":
            return (f"measure the dip before trimming (the model puts {each} {amount} long)"
                    if self.amount_m >= 0 else
                    f"measure the dip before trimming (the model puts {each} "
                    f"{format_both(-self.amount_m, units)} short)")
        if self.kind == "re-cut":
            return f"re-cut {each} (it is {amount} short)"
        return f"{self.kind} {each} by {amount}"


@dataclass(frozen=True)
class LegState:
    """One leg, metres. ``cut_m`` None: not cut yet (``current_m`` is then the prescribed cut)."""

    leg_id: str
    prescribed_cut_m: float
    cut_m: float | None
    trims_m: float
    current_m: float
    target_m: float
    action: Action


@dataclass(frozen=True)
class ElementState:
    """One element as built: both legs, where its target comes from, the expected dip (Hz)."""

    element_id: str
    legs: tuple[LegState, LegState]
    target_source: TargetSource
    expected_dip_hz: float
    latest_dip_hz: float | None
    status: Status

    @property
    def is_cut(self) -> bool:
        return all(leg.cut_m is not None for leg in self.legs)


def design_target_m(cut: ElementCut, *, uncalibrated: bool = False) -> float:
    """Target leg from the design: resonant leg + termination + feed allowances, m.
    ``uncalibrated`` uses the model's leg before any site calibration."""
    leg = (cut.uncalibrated_leg_m if uncalibrated and cut.uncalibrated_leg_m is not None
           else cut.predicted_leg_m)
    return leg + cut.termination_m + cut.feed_m


def reading_target_m(leg_at_reading_m: float, dip_hz: float, design_hz: float,
                     slope_m_per_hz: float) -> float:
    """Target leg from a reading: L + s (f_design - f_dip), m (s = dL/df, negative)."""
    return leg_at_reading_m + slope_m_per_hz * (design_hz - dip_hz)


def expected_dip_hz(leg_m: float, target_m: float, design_hz: float,
                    slope_m_per_hz: float) -> float:
    """Where an element of mean leg ``leg_m`` should dip, Hz: f0 + (L - L_target) / s."""
    return design_hz + (leg_m - target_m) / slope_m_per_hz


def leg_action(current_m: float, target_m: float, *, is_cut: bool,
               termination_m: float, measured_or_calibrated: bool = True) -> Action:
    """The action for one leg: cut (not cut yet); measure (cut, but the target is the model's
    alone: common practice is to find the dip before trimming); else shorten, lengthen (by
    letting out the termination fold, up to the termination allowance), re-cut (shorter than
    that) or none."""
    if not is_cut:
        return Action("cut", current_m)
    d = current_m - target_m
    if not measured_or_calibrated:
        return Action("measure", d)
    if abs(d) < NONE_BELOW_M:
        return Action("none", 0.0)
    if d > 0:
        return Action("shorten", d)
    return Action("lengthen" if -d <= termination_m else "re-cut", -d)


def _latest_reading(history: ElementHistory) -> Measurement | None:
    """The latest reading taken since both legs were last cut (older ones describe other wire)."""
    cuts = [history.leg_cut(s) for s in SIDES]
    if any(c is None for c in cuts):
        return None
    since = max(c.time for c in cuts if c is not None)
    valid = [m for m in history.measurements if m.time >= since]
    return valid[-1] if valid else None


def element_state(element_id: str, cut: ElementCut, history: ElementHistory | None) -> ElementState:
    """Both legs of one element as built against the design ``cut`` (from the packet)."""
    f0, slope = cut.element.frequency_hz, cut.prediction.slope_m_per_hz
    reading = _latest_reading(history) if history is not None else None
    if reading is not None and history is not None:
        at = [history.current_leg_m(s, until=reading.time) for s in SIDES]
        target = reading_target_m(sum(a for a in at if a is not None) / 2.0, reading.dip_hz,
                                  f0, slope)
        source: TargetSource = "reading"
    else:
        target = design_target_m(cut)
        source = "calibration" if cut.calibrated else "model"
    legs = []
    for side in SIDES:
        leg_cut = history.leg_cut(side) if history is not None else None
        now = history.current_leg_m(side) if history is not None else None
        current = now if now is not None else cut.cut_leg_m
        trims = (leg_cut.length_m - current) if leg_cut is not None else 0.0
        legs.append(LegState(f"{element_id}-{side}", cut.cut_leg_m,
                             leg_cut.length_m if leg_cut is not None else None, trims, current,
                             target, leg_action(current, target, is_cut=leg_cut is not None,
                                                termination_m=cut.termination_m,
                                                measured_or_calibrated=source != "model")))
    mean = (legs[0].current_m + legs[1].current_m) / 2.0
    latest = history.measurements[-1].dip_hz if history is not None and history.measurements else None
    any_cut = any(leg.cut_m is not None for leg in legs)
    status: Status = "not cut" if not any_cut else "cut"
    if reading is not None and history is not None:  # a reading comes from a history
        status = "measured"
        untouched = all(not history.leg_trims(s) or
                        history.leg_trims(s)[-1].time <= reading.time for s in SIDES)
        if untouched and abs(reading.dip_hz - f0) <= ON_FREQUENCY_FRACTION * f0:
            status = "tuned"
    return ElementState(element_id, (legs[0], legs[1]), source,
                        expected_dip_hz(mean, target, f0, slope), latest, status)


def advice_lines(state: ElementState, cut: ElementCut, units: UnitSystem,
                 partners: tuple[str, ...] = ()) -> tuple[str, ...]:
    """The trim instruction in words for an element, with its cautions (plain text lines)."""
    a, b = state.legs
    f0 = cut.element.frequency_hz
    lines: list[str] = []
    if state.latest_dip_hz is not None and state.target_source == "reading":
        khz = (state.latest_dip_hz - f0) / 1e3
        where = "low" if khz < 0 else "high"
        lines.append(f"Dip {abs(khz):.0f} kHz {where} of the design frequency "
                     f"({f0 / 1e6:.4f} MHz).")
    if a.action == b.action:
        lines.append(a.action.words(units).capitalize() + ".")
    else:
        lines += [f"Leg A: {a.action.words(units, both=False)}.",
                  f"Leg B: {b.action.words(units, both=False)}."]
    biggest = max((leg.action.amount_m for leg in state.legs
                   if leg.action.kind in ("shorten", "lengthen", "re-cut")), default=0.0)
    if biggest > 0 and a.action.kind == "shorten" == b.action.kind:
        lines.append(f"Cut in steps (first about "
                     f"{format_both(biggest * STEP_FRACTION, units)}), re-measure, "
                     "and stay long.")
    if biggest > 0 and biggest > IMPLAUSIBLE_ALLOWANCES * max(cut.trim_m, NONE_BELOW_M):
        lines.append(f"That is more than {IMPLAUSIBLE_ALLOWANCES:.0f} times the trim allowance "
                     f"({format_both(cut.trim_m, units)}): the element was "
                     "probably mis-cut or mis-measured. Re-check the element ID, the analyzer "
                     "reading and both leg lengths before cutting.")
    if partners and biggest > 0:
        lines.append("After trimming, re-check the other elements on this feed: "
                     + ", ".join(partners) + ".")
    return tuple(lines)


def finite_or_none(x: float | None) -> float | None:
    """JSON-safe number (None for missing or non-finite)."""
    return x if x is not None and math.isfinite(x) else None
