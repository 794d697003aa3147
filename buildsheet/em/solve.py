"""One entry point for the resonant leg length of every element, whichever model computes it.

``closed_form``: each element as a straight dipole in free space by the induced-EMF method
(buildsheet.em.prediction). ``mom``: the thin-wire method of moments on the deployed geometry over
the site's ground, all elements solved jointly (buildsheet.em.resonance).

The design's elements become ElementGeometry (start lengths from the closed form); the joint
resonance is solved over the site's ground, the legs are extrapolated to zero segment length
(Richardson), and the prediction band combines the ground class's range, the mesh estimate and
the model's stated figure (buildsheet.em.resonance.prediction_band).
"""

from __future__ import annotations

from buildsheet.em import closed_form
from buildsheet.em.context import Solver, solver_or_new
from buildsheet.em.deployed import DeployedAntenna, ElementGeometry
from buildsheet.em.ground import Ground
from buildsheet.em.prediction import (
    DesignPrediction,
    ElementPrediction,
    ModelName,
    Uncertainty,
    closed_form_prediction,
)
from buildsheet.em.resonance import prediction_band
from buildsheet.spec.design import AntennaDesign


def deployed_antenna(design: AntennaDesign, ground: Ground,
                     leg_lengths_m: tuple[float, ...] | None = None) -> DeployedAntenna:
    """The design as deployed over ``ground``; leg lengths default to the closed-form start."""
    wire = design.wire
    elements = []
    for i, e in enumerate(design.elements):
        leg = (leg_lengths_m[i] if leg_lengths_m else
               closed_form.resonant_length(e.frequency_hz, wire.radius_m, wire) / 2.0)
        drop = design.apex_height_m - e.end_height_m
        leg = max(leg, drop * 1.05)  # a start value must reach the end height
        elements.append(ElementGeometry(e.key, e.frequency_hz, e.low_hz, e.high_hz,
                                        e.bearing_deg, e.end_height_m, leg, wire))
    return DeployedAntenna(design.apex_height_m, tuple(elements), ground)


def predict_mom(design: AntennaDesign, ground: Ground,
                solver: Solver | None = None) -> DesignPrediction:
    """Method-of-moments prediction of every element of ``design`` over ``ground``; kept in
    ``solver`` (a fresh context if None), so a build predicts each design once."""
    solver = solver_or_new(solver)
    return solver.kept(("mom", design, ground), lambda: _predict_mom(design, ground, solver))


def _predict_mom(design: AntennaDesign, ground: Ground, solver: Solver) -> DesignPrediction:
    band = prediction_band(deployed_antenna(design, ground), solver)
    own = band.own
    elements = tuple(
        ElementPrediction(s.key, "mom", b.leg_m, s.z_feed, s.slope_m_per_hz,
                          tuple(float(f) for f in s.frequencies_hz), tuple(float(x) for x in s.swr),
                          s.bandwidth_2to1_hz, s.swr_at_design)
        for s, b in zip(own.elements, band.elements, strict=True)
    )
    return DesignPrediction(
        "mom", elements, own.model_note, ground.title,
        spread=tuple(b.total for b in band.elements),
        band_legs_m=tuple((b.min_leg_m, b.max_leg_m) for b in band.elements),
        notes=tuple(dict.fromkeys(own.notes)),
        uncertainty=tuple(Uncertainty(b.ground, b.mesh, b.model) for b in band.elements),
        ground_model=ground.model_title,
    )


def predict(design: AntennaDesign, ground: Ground, model: ModelName = "closed_form",
            solver: Solver | None = None) -> DesignPrediction:
    """Predicted resonant leg lengths of every element of ``design`` by ``model`` (the
    method of moments through ``solver``, the build's context)."""
    if model == "closed_form":
        return closed_form_prediction(design)
    return predict_mom(design, ground, solver)
