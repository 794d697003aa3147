"""Predicted resonances (the types every model returns) and the closed-form model.

``closed_form``: each element as a straight dipole in free space by the induced-EMF method
(insulation and conductor loss included as distributed loading), ignoring ground, droop and the
other elements. ``mom``: the thin-wire method of moments on the deployed geometry over the
site's ground, all elements solved jointly (buildsheet.em.resonance).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

import numpy as np

from buildsheet.em import closed_form
from buildsheet.spec.design import AntennaDesign

ModelName = Literal["closed_form", "mom"]


@dataclass(frozen=True)
class ElementPrediction:
    """Resonance of one element predicted by one model (SI units)."""

    key: str
    model: ModelName
    leg_length_m: float  # resonant leg length, feed point to end insulator
    z_feed: complex  # feed impedance at the design frequency, ohm
    slope_m_per_hz: float  # d(leg length)/d(resonant frequency), m/Hz, negative
    frequencies_hz: tuple[float, ...]  # SWR curve abscissa across the band
    swr: tuple[float, ...]  # SWR on 50 ohm at those frequencies
    bandwidth_2to1_hz: tuple[float, float] | None  # SWR <= 2 edges around the design frequency
    swr_at_design: float


@dataclass(frozen=True)
class Uncertainty:
    """Resonant-leg uncertainty of one element: half-widths as fractions of the leg.

    ground: the site ground class's documented range; mesh: Richardson estimate of the
    remaining discretisation error; model: stated thin-wire and coating figure; total: root
    sum of squares (the prediction band is leg * (1 -+ total)).
    """

    ground: float
    mesh: float
    model: float

    @property
    def total(self) -> float:
        return float(np.sqrt(self.ground**2 + self.mesh**2 + self.model**2))


@dataclass(frozen=True)
class DesignPrediction:
    """Predicted resonances of all elements of one design, with the model's own notes."""

    model: ModelName
    elements: tuple[ElementPrediction, ...]
    model_note: str
    ground_title: str
    spread: tuple[float, ...] = ()  # per element, band half-width (fraction) the trim covers
    band_legs_m: tuple[tuple[float, float], ...] = ()  # per element, (min, max) leg length
    notes: tuple[str, ...] = ()
    calibrated_from: tuple[str, ...] = ()  # element IDs of the site calibration, if any
    uncertainty: tuple[Uncertainty, ...] = ()  # per element, the parts of the band
    ground_model: str = ""  # how the ground entered the model (Ground.model_title)

    def element(self, key: str) -> ElementPrediction:
        return next(e for e in self.elements if e.key == key)


def bandwidth_2to1(freqs: np.ndarray, swr: np.ndarray, design_hz: float) -> tuple[float, float] | None:
    """Edges (Hz) of the SWR <= 2 region containing the design frequency, by linear
    interpolation; an edge that runs past the sweep is reported at the sweep end. None if the
    SWR at the design frequency exceeds 2."""
    i0 = int(np.argmin(np.abs(freqs - design_hz)))
    if swr[i0] > 2.0:
        return None
    lo_i, hi_i = i0, i0
    while lo_i > 0 and swr[lo_i - 1] <= 2.0:
        lo_i -= 1
    while hi_i < len(freqs) - 1 and swr[hi_i + 1] <= 2.0:
        hi_i += 1

    def cross(i: int, j: int) -> float:
        return float(freqs[i] + (2.0 - swr[i]) * (freqs[j] - freqs[i]) / (swr[j] - swr[i]))

    lo = cross(lo_i - 1, lo_i) if lo_i > 0 else float(freqs[0])
    hi = cross(hi_i, hi_i + 1) if hi_i < len(freqs) - 1 else float(freqs[-1])
    return lo, hi


def sweep_frequencies(low_hz: float, high_hz: float, design_hz: float, n: int = 41) -> np.ndarray:
    """Sweep covering the band and the design frequency with 10 % margin each side, Hz."""
    lo, hi = min(low_hz, design_hz), max(high_hz, design_hz)
    pad = max(0.1 * (hi - lo), 0.01 * design_hz)
    return np.linspace(lo - pad, hi + pad, n)


def closed_form_prediction(design: AntennaDesign) -> DesignPrediction:
    wire = design.wire
    out = []
    for e in design.elements:
        f = e.frequency_hz
        total = closed_form.resonant_length(f, wire.radius_m, wire)
        slope = closed_form.resonance_slope(f, wire.radius_m, wire) / 2.0
        freqs = sweep_frequencies(e.low_hz, e.high_hz, f)
        z = np.array([closed_form.self_impedance(total, wire.radius_m, fx, wire) for fx in freqs])
        s = closed_form.swr(z)
        z0 = closed_form.self_impedance(total, wire.radius_m, f, wire)
        out.append(ElementPrediction(e.key, "closed_form", total / 2.0, z0, slope,
                                     tuple(freqs.tolist()), tuple(s.tolist()),
                                     bandwidth_2to1(freqs, s, f), float(closed_form.swr(z0))))
    return DesignPrediction("closed_form", tuple(out),
                            "induced-EMF closed form: straight dipole in free space", "free space",
                            ground_model="none (free-space closed form)")
