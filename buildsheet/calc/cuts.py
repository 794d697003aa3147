"""Cut lengths per leg: model resonant length plus trim, termination and feed allowances,
the tuning line, and the deployed geometry of each element (one design, all kits alike)."""

from __future__ import annotations

from dataclasses import dataclass

from buildsheet.calc.geometry import (
    Footprint,
    LegGeometry,
    footprint,
    included_angle_deg,
    leg_geometry,
)
from buildsheet.em import closed_form
from buildsheet.em.prediction import DesignPrediction, ElementPrediction, Uncertainty
from buildsheet.spec.design import AntennaDesign, ElementSpec

#: Frequency step of the printed tuning line, Hz.
TUNING_STEP_HZ = 100e3
#: Included angle below which the sheet warns (common practice: 90-120 degrees).
MIN_INCLUDED_ANGLE_DEG = 90.0

#: The default trim allowance covers the prediction band (its half-width, the combined
#: ground, mesh and model uncertainty) with this margin.
TRIM_BAND_MARGIN: float = 1.5


@dataclass(frozen=True)
class ElementCut:
    """Everything printed for one element: model lengths, allowances, cut length, geometry."""

    element: ElementSpec
    rule468_leg_m: float  # half of 468/f, m (common practice, for comparison)
    closed_form_leg_m: float  # induced-EMF straight dipole, m
    predicted_leg_m: float  # the length the cut is based on, m
    model: str  # which model gave predicted_leg_m
    trim_fraction: float  # trim allowance as a fraction of the predicted leg
    trim_m: float
    termination_m: float
    feed_m: float
    cut_leg_m: float  # predicted + trim + termination + feed, m
    prediction: ElementPrediction
    band_fraction: float | None  # prediction-band half-width, fraction of the leg (None: no band)
    legs: tuple[LegGeometry, LegGeometry]
    included_angle_deg: float
    calibrated: bool = False  # predicted_leg_m comes from a site calibration
    uncalibrated_leg_m: float | None = None  # the model's leg before calibration, if calibrated
    uncertainty: Uncertainty | None = None  # the parts of the band (ground, mesh, model)
    band_legs_m: tuple[float, float] | None = None  # the band as leg lengths (low, high), m
    trim_rule: str = "default"  # which rule set the trim (TRIM_RULES)

    @property
    def band_cover_fraction(self) -> float | None:
        """The trim that covers the prediction band with the stated margin (TRIM_BAND_MARGIN
        times the band), fraction of the leg; None without a band."""
        return None if self.band_fraction is None else TRIM_BAND_MARGIN * self.band_fraction

    @property
    def tuning_m_per_100khz(self) -> float:
        """Length to cut from EACH leg to raise resonance by 100 kHz, m (positive)."""
        return -self.prediction.slope_m_per_hz * TUNING_STEP_HZ


@dataclass(frozen=True)
class DesignCuts:
    """Cut list and geometry of one antenna design."""

    design: AntennaDesign
    elements: tuple[ElementCut, ...]
    footprint: Footprint
    prediction: DesignPrediction
    closed_form: DesignPrediction
    warnings: tuple[str, ...]


#: How the trim allowance of an element was set: "spec" (trim_allowance in the spec), "band"
#: (TRIM_BAND_MARGIN times the prediction band), "minimum" (min_trim, larger than that),
#: "calibrated" (the calibration's residual, at least min_trim), "default" (no band: the
#: spec default, at least min_trim).
TRIM_RULES: tuple[str, ...] = ("spec", "band", "minimum", "calibrated", "default")


def trim_rule_for(design: AntennaDesign, band: float | None, calibrated: bool = False
                  ) -> tuple[float, str]:
    """Trim allowance as a fraction of the leg, and the rule that set it (TRIM_RULES).

    A calibrated design's allowance is its residual uncertainty ``band`` (never below the
    spec's minimum). Otherwise an explicit spec value wins; then the prediction band ``band``
    (the half-width of the resonant-leg uncertainty) times TRIM_BAND_MARGIN, never below the
    minimum; without a band the default (3 %), never below the minimum.
    """
    a = design.allowances
    if calibrated and band is not None:
        return max(a.min_trim_fraction, band), "calibrated"
    if a.trim_explicit:
        return (a.trim_fraction if a.trim_fraction is not None else 0.0), "spec"
    if band is None:
        return max(a.min_trim_fraction, a.trim_fraction or 0.0), "default"
    covered = TRIM_BAND_MARGIN * band  # ElementCut.band_cover_fraction
    if covered >= a.min_trim_fraction:
        return covered, "band"
    return a.min_trim_fraction, "minimum"


def trim_fraction_for(design: AntennaDesign, band: float | None, calibrated: bool = False) -> float:
    """Trim allowance as a fraction of the leg (:func:`trim_rule_for` without the rule)."""
    return trim_rule_for(design, band, calibrated)[0]


def element_cut(design: AntennaDesign, element: ElementSpec, prediction: ElementPrediction,
                closed: ElementPrediction, band: float | None, model: str,
                calibrated: bool = False, uncalibrated_leg_m: float | None = None,
                uncertainty: Uncertainty | None = None,
                band_legs_m: tuple[float, float] | None = None) -> ElementCut:
    """Cut length and geometry of one element from its predicted resonant leg length and its
    prediction band (half-width ``band``, a fraction of the leg; its parts ``uncertainty``)."""
    a = design.allowances
    leg = prediction.leg_length_m
    fraction, rule = trim_rule_for(design, band, calibrated)
    trim = (a.trim_m if (a.trim_explicit and a.trim_m is not None and not calibrated)
            else fraction * leg)
    cut = leg + trim + a.termination_m + a.feed_m
    legs = tuple(
        leg_geometry(side, element.bearing_deg + (0.0 if side == "A" else 180.0), leg,
                     design.apex_height_m, element.end_height_m, knot_m=a.cord_knot_m,
                     hitch_m=a.cord_stake_m, flat_cord_angle_deg=design.tie_off_angle_deg)
        for side in ("A", "B")
    )
    angle = included_angle_deg(leg, design.apex_height_m - element.end_height_m)
    return ElementCut(element, closed_form.rule_468_length(element.frequency_hz) / 2.0,
                      closed.leg_length_m, leg, model, trim / leg, trim, a.termination_m, a.feed_m,
                      cut, prediction, band, legs, angle,  # type: ignore[arg-type]
                      calibrated, uncalibrated_leg_m, uncertainty, band_legs_m, rule)


#: Printed resolution of lengths: 1 cm (metric) and 1/8 in (imperial), m.
PRINT_QUANTUM_M = {"metric": 0.01, "imperial": 0.0254 / 8}


@dataclass(frozen=True)
class PrintedParts:
    """The cut and its parts as printed (m, each a whole number of print quanta), adding up."""

    model_leg_m: float
    trim_m: float
    termination_m: float
    feed_m: float
    cut_m: float


def printed_parts(cut: ElementCut, units: str) -> PrintedParts:
    """Round the parts of a cut to the printed resolution so that they add up to the printed
    cut: the cut, the model leg and the fixed allowances round to the nearest quantum and the
    trim allowance takes the difference (it is the least exact part)."""
    q = PRINT_QUANTUM_M["imperial" if units == "imperial" else "metric"]
    n = {k: round(v / q) for k, v in (("leg", cut.predicted_leg_m), ("term", cut.termination_m),
                                      ("feed", cut.feed_m), ("cut", cut.cut_leg_m))}
    trim = n["cut"] - n["leg"] - n["term"] - n["feed"]
    return PrintedParts(n["leg"] * q, trim * q, n["term"] * q, n["feed"] * q, n["cut"] * q)


def design_cuts(design: AntennaDesign, prediction: DesignPrediction,
                closed: DesignPrediction, uncalibrated: DesignPrediction | None = None) -> DesignCuts:
    """All element cuts of ``design``; geometry problems raise ValueError with the element.

    ``uncalibrated`` is the model's prediction before a site calibration (when ``prediction``
    is calibrated), kept for the expected dips on the log forms.
    """
    cuts, warnings = [], list(prediction.notes)
    for i, e in enumerate(design.elements):
        p = prediction.element(e.key)
        band = prediction.spread[i] if prediction.spread else None
        try:
            cut = element_cut(design, e, p, closed.element(e.key), band, prediction.model,
                              bool(prediction.calibrated_from),
                              uncalibrated.element(e.key).leg_length_m if uncalibrated else None,
                              prediction.uncertainty[i] if prediction.uncertainty else None,
                              prediction.band_legs_m[i] if prediction.band_legs_m else None)
        except ValueError as exc:
            raise ValueError(f"designs.{design.key}.elements[{i}] ({e.key}): {exc}; allowed: a "
                             "drop from apex_height to end_height shorter than the leg (lower "
                             "the apex, raise the ends or choose a lower frequency)") from None
        cuts.append(cut)
        if design.mount == "inverted_v" and cut.included_angle_deg < MIN_INCLUDED_ANGLE_DEG:
            warnings.append(f"{design.key} {e.key}: included angle {cut.included_angle_deg:.0f} deg "
                            "is below 90 deg: bandwidth narrows and feed resistance falls; "
                            "raise the apex or lower the ends less")
        if a_trim_short(design, cut):
            warnings.append(f"{design.key} {e.key}: the trim allowance {cut.trim_fraction:.1%} "
                            f"is less than the prediction band {cut.band_fraction:.1%} of the leg "
                            "(ground class range, mesh and model combined): the wire may come "
                            "out short; leave trim_allowance unset to size it from the band")
    legs = [leg for c in cuts for leg in c.legs]
    return DesignCuts(design, tuple(cuts), footprint(legs), prediction, closed, tuple(warnings))


def a_trim_short(design: AntennaDesign, cut: ElementCut) -> bool:
    """True when an explicit trim allowance does not cover the prediction band."""
    return (design.allowances.trim_explicit and cut.band_fraction is not None
            and cut.trim_fraction < cut.band_fraction)
