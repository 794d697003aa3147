"""Site calibration from measured kits: fit the ground so the model reproduces the dips.

Every kit of a design goes up over the same ground, so the first dips measured on the analyzer
say how the site behaves. For each candidate ground the model's resonant frequency of each
observed element (with its actual electrical leg lengths, the other elements of its kit present)
is the zero crossing of the method-of-moments feed reactance over the exact (Sommerfeld)
half-space; the ground constants (eps_r, sigma) are fitted within the ITU-R P.527 range by least
squares of the fractional frequency error and, where an SWR at the dip was recorded, of the
fractional SWR error (the feed resistance there carries the ground loss, which the dips alone
hardly see).
A per-band ratio (measured / model over the fitted ground) is kept as the residual correction.

Guard rails: a dip outside what any ground in the range explains (the envelope of free space,
perfect ground and the P.527 extremes, widened by a margin), or a robust outlier among three or
more observations (modified z-score on the median absolute deviation, Iglewicz & Hoaglin 1993),
is flagged as a probable mis-cut, wrong wire or wrong element and excluded, not averaged in.

Pure: no files, no database, no clock (the CLI in :mod:`buildsheet.cli.calibrate` does I/O).
"""

from __future__ import annotations

import hashlib
import json
import math
from collections.abc import Mapping, Sequence
from dataclasses import asdict, dataclass, replace
from typing import Any

import numpy as np

from buildsheet.em.context import Solver, solver_or_new
from buildsheet.em.deployed import DeployedAntenna
from buildsheet.em.ground import (
    FREE_SPACE,
    GROUND_CLASSES,
    PERFECT_GROUND,
    Ground,
    GroundClass,
    real_ground,
)
from buildsheet.em.mom import Mesh, mesh_for, with_ground
from buildsheet.em.prediction import DesignPrediction
from buildsheet.em.solve import deployed_antenna, predict_mom
from buildsheet.errors import BuildError
from buildsheet.spec.design import AntennaDesign

#: Fitted range of the ground constants: the span of the ITU-R P.527 classes (REFERENCES 7.1).
EPS_RANGE: tuple[float, float] = (3.0, 80.0)
SIGMA_RANGE_S_PER_M: tuple[float, float] = (1e-4, 5.0)
#: Fractional uncertainty of one dip reading (a few kHz on an analyzer sweep; from memory).
#: Residuals are scaled by it in the fit.
DIP_FRACTION: float = 1e-3
#: Width of the weak prior toward the assumed site ground, in units of the whole normalised
#: (log eps_r, log sigma) range: it only decides along directions the dips do not constrain.
PRIOR_WIDTH: float = 1.0
#: A dip this far (fraction) outside the envelope of model resonances over free space, perfect
#: ground and the P.527 extremes is beyond what the ground explains.
ENVELOPE_MARGIN: float = 0.01
#: Modified z-score above which an observation is an outlier (Iglewicz & Hoaglin 1993: 3.5).
OUTLIER_Z: float = 3.5
#: Floor on the median absolute deviation of residuals (fraction): kit-to-kit cutting and
#: placement scatter that is not a fault (from memory), so exact synthetic data flags nothing.
MAD_FLOOR: float = 0.0015
#: Floor on the residual uncertainty of a calibration (fraction; from memory: reading and
#: cutting scatter plus what one ground model cannot capture across the field).
UNCERTAINTY_FLOOR: float = 0.003
#: Fractional uncertainty of an SWR reading at the dip on the analyzer (from memory: readings
#: and a short feed line scatter by about a tenth); SWR residuals are scaled by it.
SWR_FRACTION: float = 0.1
#: Reference impedance of recorded SWR readings, ohm (the analyzer's and the coax's).
SWR_Z0_OHM: float = 50.0
#: Newton iterations for a model resonance (each: two MoM solves).
RESONANCE_ITERATIONS: int = 4
#: Relative frequency step for dX/df.
DF_REL: float = 1e-4


# --------------------------------------------------------------------------- data


@dataclass(frozen=True)
class Observation:
    """A measured dip of one element as it stands.

    ``electrical_leg_m``: mean of legs A and B, each as cut minus trims minus the termination
    and feed allowances, m. ``kit``: defaults to the element ID without ``-<element_key>``.
    ``swr``: the SWR read at the dip on SWR_Z0_OHM at the feed point, when recorded.
    """

    element_id: str
    element_key: str
    electrical_leg_m: float
    dip_hz: float
    kit: str = ""
    swr: float | None = None

    @property
    def kit_id(self) -> str:
        if self.kit:
            return self.kit
        suffix = "-" + self.element_key
        return self.element_id.removesuffix(suffix)


@dataclass(frozen=True)
class Residual:
    """Model resonance over the fitted ground vs the dip. ``fraction`` = dip / model - 1."""

    element_id: str
    element_key: str
    dip_hz: float
    model_hz: float
    fraction: float


@dataclass(frozen=True)
class Outlier:
    """An observation excluded from the fit, with the reason."""

    element_id: str
    element_key: str
    dip_hz: float
    reason: str


@dataclass(frozen=True)
class Calibration:
    """How a site behaves for one design, from measured dips (SI units, fractions)."""

    design_key: str
    fingerprint: str                 # design_fingerprint(design) it was fitted for
    ground: GroundClass              # fitted eps_r, sigma (S/m)
    site_like: str                   # nearest P.527 class key (in predicted-resonance terms)
    class_rms: tuple[tuple[str, float], ...]  # rms fractional dip error per P.527 class
    assumed_ground: str              # title of the ground the spec assumed
    residuals: tuple[Residual, ...]  # accepted observations, over the fitted ground
    band_ratios: tuple[tuple[str, float], ...]  # element key -> mean dip / model (fitted ground)
    uncertainty: float               # residual uncertainty of a calibrated leg, fraction
    source_ids: tuple[str, ...]      # element IDs whose dips were used
    outliers: tuple[Outlier, ...]
    notes: tuple[str, ...] = ()

    @property
    def site_like_title(self) -> str:
        return GROUND_CLASSES[self.site_like].title

    def fitted_ground(self) -> Ground:
        return Ground("real", self.ground)


def design_fingerprint(design: AntennaDesign) -> str:
    """sha256 (hex) of the design's geometry and wire: mount, kind, apex, tie-off, the wire's
    every field, and each element's key, bearing and end height (not its frequency)."""
    data = {
        "kind": design.kind, "mount": design.mount, "apex_m": design.apex_height_m,
        "tie_off_deg": design.tie_off_angle_deg, "wire": asdict(design.wire),
        "elements": [[e.key, e.bearing_deg, e.end_height_m] for e in design.elements],
    }
    return hashlib.sha256(json.dumps(data, sort_keys=True).encode()).hexdigest()


def electrical_leg_m(design: AntennaDesign, leg_a_m: float, leg_b_m: float) -> float:
    """Mean electrical leg of a cut element, m: physical legs minus termination and feed wire."""
    a = design.allowances
    return (leg_a_m + leg_b_m) / 2.0 - a.termination_m - a.feed_m


def fitted_class(eps_r: float, sigma: float, like: str = "") -> GroundClass:
    """A GroundClass holding fitted constants (title names the nearest class when known)."""
    title = f"fitted ground, like {GROUND_CLASSES[like].title}" if like else "fitted ground"
    return GroundClass("fitted", title, float(eps_r), float(sigma))


def _with_ground(mesh: Mesh, ground: Ground) -> Mesh:
    """The same mesh over another ground (geometry integrals are ground-independent; a
    Sommerfeld mesh keeps its kernel-table store, which holds one table per ground and
    frequency met during the fit)."""
    return with_ground(mesh, ground)


def _impedance_and_slope(solver: Solver, mesh: Mesh, f: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Feed impedance Z (ohm) at f and dX/df (ohm/Hz) by a forward difference."""
    z = solver.port_impedances(mesh, np.concatenate([f, f * (1 + DF_REL)]))[:, 0, 0]
    n = f.size
    return z[:n], (z[n:].imag - z[:n].imag) / (f * DF_REL)


def _linear_resonance(solver: Solver, mesh: Mesh, f: np.ndarray) -> np.ndarray:
    """Model resonance near each f by one Newton step on X(f) = 0, Hz (error ~ second order)."""
    return _linear_model(solver, mesh, f)[0]


def _linear_model(solver: Solver, mesh: Mesh, f: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Model resonance (Hz, one Newton step from f) and feed resistance at f (ohm)."""
    z, dx = _impedance_and_slope(solver, mesh, f)
    step = np.clip(-z.imag / np.where(dx > 0, dx, np.nan), -0.1 * f, 0.1 * f)
    return f + step, z.real


def resonance_near(mesh: Mesh, f_start: float, solver: Solver | None = None) -> float:
    """Zero crossing of the feed reactance (rising with f) nearest ``f_start``, Hz.

    Newton's method with dX/df from the model; BuildError when it does not settle.
    """
    solver = solver_or_new(solver)
    f = np.array([f_start])
    for _ in range(RESONANCE_ITERATIONS):
        new = _linear_resonance(solver, mesh, f)
        if not np.all(np.isfinite(new)):
            break
        if abs(new[0] - f[0]) <= 1e-7 * f[0]:
            return float(new[0])
        f = new
    else:
        return float(f[0])
    raise BuildError(f"no resonance of the model near {f_start / 1e6:.4f} MHz")


# --------------------------------------------------------------------------- model of a kit

#: Ground the kit meshes are built over (any Sommerfeld real ground: only the geometry is kept).
_MESH_GROUND = real_ground("medium_dry")


@dataclass(frozen=True)
class _Case:
    """One observation with the mesh of its kit as it stands (ground set per evaluation)."""

    obs: Observation
    mesh: Mesh


def _kit_meshes(design: AntennaDesign, site_ground: Ground, observations: Sequence[Observation],
                kit_legs: Mapping[str, Mapping[str, float]], solver: Solver) -> tuple[list[_Case], list[Outlier]]:
    """Mesh of each observed kit: observed legs, else kit_legs, else the site prediction."""
    keys = [e.key for e in design.elements]
    predicted: dict[str, float] | None = None
    cases: list[_Case] = []
    bad: list[Outlier] = []
    meshes: dict[tuple[float, ...], Mesh] = {}
    for o in observations:
        if o.element_key not in keys:
            raise BuildError(f"{o.element_id}: element {o.element_key!r} is not in design "
                             f"{design.key!r} (elements: {', '.join(keys)})")
        legs = dict(kit_legs.get(o.kit_id, {}))
        legs.update({p.element_key: p.electrical_leg_m for p in observations
                     if p.kit_id == o.kit_id})
        legs[o.element_key] = o.electrical_leg_m
        if any(k not in legs for k in keys):
            if predicted is None:
                predicted = {e.key: e.leg_length_m for e in predict_mom(design, site_ground, solver).elements}
            legs = {**predicted, **legs}
        lengths = tuple(float(legs[k]) for k in keys)
        if lengths not in meshes:
            try:
                # built over a half-space ground (images, Sommerfeld pairs); the ground itself
                # is set per evaluation
                ant: DeployedAntenna = deployed_antenna(design, _MESH_GROUND, lengths)
                if any(abs(e.leg_length_m - l) > 1e-9 for e, l in zip(ant.elements, lengths)):
                    raise BuildError("a leg is too short to reach its end height")
                meshes[lengths] = mesh_for(ant, tables=solver.tables)
            except BuildError as exc:
                bad.append(Outlier(o.element_id, o.element_key, o.dip_hz,
                                   f"probable mis-cut or wrong element: its kit cannot be "
                                   f"modelled ({exc})"))
                continue
        cases.append(_Case(o, meshes[lengths]))
    return cases, bad


def _model_hz(solver: Solver, cases: Sequence[_Case], ground: Ground) -> np.ndarray:
    """Linearised model resonance of every case over ``ground``, Hz (one Newton step from the
    dip, so it is exact where the fit matters: where model and dip agree)."""
    return _model(solver, cases, ground)[0]


def _model(solver: Solver, cases: Sequence[_Case], ground: Ground) -> tuple[np.ndarray, np.ndarray]:
    """Model resonance (Hz, as :func:`_model_hz`) and feed resistance at the dip (ohm) of every
    case over ``ground`` (the resistance varies slowly, so at the dip is at resonance)."""
    out, res = np.empty(len(cases)), np.empty(len(cases))
    groups: dict[int, list[int]] = {}
    for i, c in enumerate(cases):
        groups.setdefault(id(c.mesh), []).append(i)
    for idx in groups.values():
        mesh = _with_ground(cases[idx[0]].mesh, ground)
        f = np.array([cases[i].obs.dip_hz for i in idx])
        out[idx], res[idx] = _linear_model(solver, mesh, f)
    return out, res


def _swr_of_resistance(r: np.ndarray) -> np.ndarray:
    """SWR of a resistive load r (ohm) on SWR_Z0_OHM (Pozar, Microwave Engineering, sec. 2.3)."""
    return np.maximum(r / SWR_Z0_OHM, SWR_Z0_OHM / r)


def _envelope_outliers(solver: Solver, cases: Sequence[_Case]) -> list[int]:
    """Indices whose dip lies outside every ground's resonance by more than the margin."""
    grounds = (FREE_SPACE, PERFECT_GROUND,
               Ground("real", fitted_class(EPS_RANGE[0], SIGMA_RANGE_S_PER_M[0])),
               Ground("real", fitted_class(EPS_RANGE[1], SIGMA_RANGE_S_PER_M[1])))
    f = np.array([_model_hz(solver, cases, g) for g in grounds])
    dip = np.array([c.obs.dip_hz for c in cases])
    lo, hi = np.nanmin(f, axis=0), np.nanmax(f, axis=0)
    bad = ~np.isfinite(lo) | (dip < lo * (1 - ENVELOPE_MARGIN)) | (dip > hi * (1 + ENVELOPE_MARGIN))
    return [int(i) for i in np.flatnonzero(bad)]


def _mad_outliers(r: np.ndarray) -> list[int]:
    """Modified z-score 0.6745 |r - median| / MAD > OUTLIER_Z (Iglewicz & Hoaglin 1993), with
    MAD floored at MAD_FLOOR; needs three or more residuals."""
    if r.size < 3:
        return []
    med = np.median(r)
    mad = max(float(np.median(np.abs(r - med))), MAD_FLOOR)
    return [int(i) for i in np.flatnonzero(0.6745 * np.abs(r - med) / mad > OUTLIER_Z)]


_LO = np.log([EPS_RANGE[0], SIGMA_RANGE_S_PER_M[0]])
_HI = np.log([EPS_RANGE[1], SIGMA_RANGE_S_PER_M[1]])


def _to_ground(p: np.ndarray) -> Ground:
    eps, sigma = np.exp(_LO + np.clip(p, 0.0, 1.0) * (_HI - _LO))
    return Ground("real", fitted_class(eps, sigma))


def _from_constants(eps_r: float, sigma: float) -> np.ndarray:
    u = np.log([np.clip(eps_r, *EPS_RANGE), np.clip(sigma, *SIGMA_RANGE_S_PER_M)])
    return (u - _LO) / (_HI - _LO)


def _fit(solver: Solver, cases: Sequence[_Case], p0: np.ndarray, robust: bool) -> np.ndarray:
    """Least squares of the fractional dip errors (scaled by DIP_FRACTION) plus the weak prior,
    over normalised (log eps_r, log sigma) in [0, 1]^2 (scipy trust-region reflective).

    Over the exact (Sommerfeld) ground the resonance is not monotonic in the constants, so the
    search starts from the best of the assumed ground and the P.527 classes (lowest objective).
    """
    from scipy.optimize import least_squares  # a calibration needs it, a packet does not

    dip = np.array([c.obs.dip_hz for c in cases])
    has_swr = np.array([c.obs.swr is not None for c in cases])
    swr = np.array([c.obs.swr or 1.0 for c in cases])[has_swr]

    def fun(p: np.ndarray) -> np.ndarray:
        f_model, r_model = _model(solver, cases, _to_ground(p))
        r = dip / f_model - 1.0
        s = _swr_of_resistance(r_model[has_swr]) / swr - 1.0
        return np.concatenate([r / DIP_FRACTION, s / SWR_FRACTION, (p - p0) / PRIOR_WIDTH])

    starts = [p0] + [_from_constants(g.eps_r, g.sigma) for g in GROUND_CLASSES.values()]
    start = min(starts, key=lambda p: float(np.sum(fun(p) ** 2)))
    res = least_squares(fun, start, bounds=(0.0, 1.0), diff_step=1e-3, x_scale=0.1,
                        loss="soft_l1" if robust else "linear", f_scale=3.0, xtol=1e-6)
    return np.asarray(res.x)


def fit_site(design: AntennaDesign, site_ground: Ground, observations: Sequence[Observation],
             kit_legs: Mapping[str, Mapping[str, float]] | None = None,
             solver: Solver | None = None) -> Calibration:
    """Fit the ground constants so the model reproduces the measured dips.

    ``site_ground``: the spec's assumed ground (the fit starts there and leans on it only where
    the dips say nothing). ``kit_legs``: electrical legs (m) of kit elements not observed,
    ``{kit: {element_key: leg}}``; elements of unknown length take the site-ground prediction.
    Raises BuildError when no observation is usable.
    """
    if not observations:
        raise BuildError(f"design {design.key!r}: no measurements to calibrate from")
    solver = solver_or_new(solver)
    cases, outliers = _kit_meshes(design, site_ground, observations, kit_legs or {}, solver)
    for i in _envelope_outliers(solver, cases):
        o = cases[i].obs
        outliers.append(Outlier(o.element_id, o.element_key, o.dip_hz,
                                "probable mis-cut, wrong wire or wrong element: the dip is "
                                f"more than {ENVELOPE_MARGIN:.0%} outside the resonance of the "
                                "model over any ground (free space to perfect)"))
    keep = [c for c in cases if not any(x.element_id == c.obs.element_id
                                        and x.dip_hz == c.obs.dip_hz for x in outliers)]
    if not keep:
        raise BuildError(f"design {design.key!r}: every measurement was flagged: "
                         + "; ".join(f"{o.element_id}: {o.reason}" for o in outliers))
    gc = site_ground.ground_class
    p0 = (_from_constants(gc.eps_r, gc.sigma) if site_ground.kind == "real" and gc else
          _from_constants(*np.exp((_LO + _HI) / 2)))
    p = _fit(solver, keep, p0, robust=len(keep) >= 3)
    r = np.array([c.obs.dip_hz for c in keep]) / _model_hz(solver, keep, _to_ground(p)) - 1.0
    flagged = _mad_outliers(r)
    if flagged:
        for i in flagged:
            o = keep[i].obs
            outliers.append(Outlier(o.element_id, o.element_key, o.dip_hz,
                                    f"probable mis-cut, wrong wire or wrong element: "
                                    f"{r[i]:+.2%} from the fitted model while the others agree "
                                    f"within {np.median(np.abs(np.delete(r, flagged))):.2%}"))
        keep = [c for i, c in enumerate(keep) if i not in flagged]
        p = _fit(solver, keep, p0, robust=False)
    return _summarise(solver, design, site_ground, keep, outliers, p)


def _summarise(solver: Solver, design: AntennaDesign, site_ground: Ground, keep: Sequence[_Case],
               outliers: Sequence[Outlier], p: np.ndarray) -> Calibration:
    """Exact residuals, nearest class, band ratios and uncertainty of a fitted ground."""
    fitted = _to_ground(p)
    assert fitted.ground_class is not None
    dip = np.array([c.obs.dip_hz for c in keep])
    rms = {k: float(np.sqrt(np.mean((dip / _model_hz(solver, keep, Ground("real", g)) - 1.0) ** 2)))
           for k, g in GROUND_CLASSES.items()}
    like = min(rms, key=lambda k: rms[k])
    model = np.array([resonance_near(_with_ground(c.mesh, fitted), c.obs.dip_hz, solver) for c in keep])
    frac = dip / model - 1.0
    residuals = tuple(Residual(c.obs.element_id, c.obs.element_key, c.obs.dip_hz, float(m),
                               float(x)) for c, m, x in zip(keep, model, frac))
    ratios = tuple((e.key, float(np.mean([1.0 + x for c, x in zip(keep, frac)
                                          if c.obs.element_key == e.key])))
                   for e in design.elements if any(c.obs.element_key == e.key for c in keep))
    n = frac.size
    u = math.sqrt(float(np.sum(frac**2)) / max(n - 1, 1) + UNCERTAINTY_FLOOR**2)
    notes = []
    edge = [name for name, v in zip(("eps_r", "sigma"), p) if v <= 1e-3 or v >= 1 - 1e-3]
    if edge:
        notes.append(f"the fit reached the end of the P.527 range in {', '.join(edge)}; the "
                     "per-band ratios carry the rest")
    if len({c.obs.element_key for c in keep}) < 2 and all(c.obs.swr is None for c in keep):
        notes.append("every dip is on one band and none has an SWR: they fix one combination "
                     "of eps_r and sigma, not each; the fit keeps the spec's ground for the "
                     "rest. A dip on a second band, or the SWR at the dip, pins both")
    g = fitted.ground_class
    return Calibration(
        design.key, design_fingerprint(design), fitted_class(g.eps_r, g.sigma, like), like,
        tuple(sorted(rms.items(), key=lambda kv: kv[1])), site_ground.title, residuals, ratios,
        u, tuple(c.obs.element_id for c in keep), tuple(outliers), tuple(notes))


# --------------------------------------------------------------------------- using it


def check_applies(design: AntennaDesign, calibration: Calibration) -> None:
    """BuildError unless ``calibration`` was made for this design's geometry and wire."""
    if calibration.design_key != design.key or calibration.fingerprint != design_fingerprint(design):
        raise BuildError(f"the calibration of design {calibration.design_key!r} was made for "
                         f"another geometry or wire than design {design.key!r} has now; "
                         "calibrate again from measurements of kits built to it")


def calibrated_prediction(design: AntennaDesign, calibration: Calibration,
                          solver: Solver | None = None) -> DesignPrediction:
    """The design's prediction over the fitted ground, with per-band ratio corrections.

    Observed bands: leg + slope * (f0 / ratio - f0) (the real element dips at ratio x the model,
    so the model must resonate at f0 / ratio; first order in ratio - 1). Spread (the trim
    allowance) = the calibration's residual uncertainty.
    """
    check_applies(design, calibration)
    base = predict_mom(design, calibration.fitted_ground(), solver)
    ratios = dict(calibration.band_ratios)
    elements = []
    for e, spec in zip(base.elements, design.elements, strict=True):
        rho = ratios.get(e.key, 1.0)
        f0 = spec.frequency_hz
        elements.append(replace(e, leg_length_m=e.leg_length_m + e.slope_m_per_hz * (f0 / rho - f0)))
    u = calibration.uncertainty
    note = (f"calibrated from {', '.join(calibration.source_ids)}: site behaves like "
            f"{calibration.site_like_title} (fitted eps_r {calibration.ground.eps_r:.1f}, sigma "
            f"{calibration.ground.sigma:.2g} S/m; residual {u:.1%}); {base.model_note}")
    return DesignPrediction(
        "mom", tuple(elements), note, calibration.ground.title,
        spread=tuple(u for _ in elements),
        band_legs_m=tuple((e.leg_length_m * (1 - u), e.leg_length_m * (1 + u)) for e in elements),
        notes=base.notes + tuple(f"excluded {o.element_id}: {o.reason}" for o in calibration.outliers),
        calibrated_from=calibration.source_ids,
        ground_model=base.ground_model,
    )


# --------------------------------------------------------------------------- JSON


def calibration_to_json(c: Calibration) -> dict[str, Any]:
    """Plain JSON-ready data of a calibration (round-trips through calibration_from_json)."""
    return asdict(c)


def calibration_from_json(data: Mapping[str, Any]) -> Calibration:
    """A Calibration from :func:`calibration_to_json` data; BuildError when malformed."""
    try:
        return Calibration(
            data["design_key"], data["fingerprint"], GroundClass(**data["ground"]),
            data["site_like"], tuple((k, float(v)) for k, v in data["class_rms"]),
            data["assumed_ground"], tuple(Residual(**r) for r in data["residuals"]),
            tuple((k, float(v)) for k, v in data["band_ratios"]), float(data["uncertainty"]),
            tuple(data["source_ids"]), tuple(Outlier(**o) for o in data["outliers"]),
            tuple(data.get("notes", ())))
    except (KeyError, TypeError, ValueError) as exc:
        raise BuildError(f"a stored calibration is malformed ({exc})") from exc
