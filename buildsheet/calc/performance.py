"""What the deployed antenna does: NVIS figures and elevation cuts per band, height advice and
the multi-band compromise height, day/night guidance, and the RF-exposure screen. Pure; one
result per design.

All figures come from method-of-moments currents over the site ground (the Sommerfeld
half-space by default, so feed resistance, efficiency and gain include the near-field ground
loss) and are normalised to the input power. The height sweep raises the whole antenna (every
element, same droop, same leg lengths) through one geometric grid of apex heights and solves
it on a coarser mesh (SWEEP_SEGMENT_WAVELENGTHS) with one kernel table per band for the whole
sweep; bench/em.py prints its error against the full solve at the design height.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from buildsheet.calc import coverage, exposure, feedline
from buildsheet.calc.cuts import DesignCuts
from buildsheet.constants import C0
from buildsheet.em.context import Solver, solver_or_new
from buildsheet.em.deployed import DeployedAntenna, build_structure, highest_frequency
from buildsheet.em.ground import Ground
from buildsheet.em.sommerfeld import covering_domain
from buildsheet.spec.design import ExposureSettings

#: Gain used for the exposure screen: a half-wave dipole, 2.15 dBi, together with the
#: ground-reflection factor 2.56 (FCC OET Bulletin 65 screening practice).
SCREEN_GAIN_DBI = 2.15
#: Lowest end height kept while sweeping the apex height of an inverted V, as a fraction of it.
_MIN_END_FRACTION = 0.3
#: Height sweep: each band's range in wavelengths, points per band range (geometric grid shared
#: by all bands), and the sweep mesh (largest segment in wavelengths at the top band).
SWEEP_RANGE_WAVELENGTHS: tuple[float, float] = (0.05, 0.35)
SWEEP_POINTS_PER_BAND: int = 11
SWEEP_SEGMENT_WAVELENGTHS: float = 0.05
SWEEP_MIN_SEGMENTS: int = 6


@dataclass(frozen=True)
class BandPerformance:
    """One element's band: NVIS figures, elevation cuts, height advice and exposure screen."""

    key: str
    band_label: str
    nvis: coverage.NvisFigures
    cuts: coverage.ElevationCuts
    height: coverage.HeightAdvice
    exposure: exposure.ExposureScreen
    feedline_loss_db: float


@dataclass(frozen=True)
class DesignPerformance:
    """Performance of one design at its site, all bands."""

    bands: tuple[BandPerformance, ...]
    compromise: coverage.CompromiseHeight | None  # only for multi-band designs
    guidance: tuple[str, ...]
    method_note: str


def sweep_heights(frequencies_hz: tuple[float, ...]) -> np.ndarray:
    """Geometric grid of apex heights (m) covering every band's SWEEP_RANGE_WAVELENGTHS range with
    SWEEP_POINTS_PER_BAND points inside each."""
    lo_w, hi_w = SWEEP_RANGE_WAVELENGTHS
    lams = [C0 / f for f in frequencies_hz]
    lo, hi = lo_w * min(lams), hi_w * max(lams)
    ratio = (hi_w / lo_w) ** (1.0 / (SWEEP_POINTS_PER_BAND - 1))
    n = int(np.ceil(np.log(hi / lo) / np.log(ratio) - 1e-9)) + 1
    return lo * ratio ** np.arange(n)


def raised(antenna: DeployedAntenna, apex_m: float) -> DeployedAntenna:
    """``antenna`` with its feed at ``apex_m``: same legs and droop, the ends never lower than
    in proportion to the design (end / apex) nor than _MIN_END_FRACTION of the apex; at the
    design apex it is the design itself."""
    h0 = antenna.feed_height_m
    els = tuple(replace(e, end_height_m=max(apex_m - (h0 - e.end_height_m),
                                            min(e.end_height_m / h0, _MIN_END_FRACTION) * apex_m))
                for e in antenna.elements)
    return replace(antenna, feed_height_m=float(apex_m), elements=els)


def zenith_sweep_mom(antenna: DeployedAntenna, heights_m: np.ndarray,
                     solver: Solver | None = None) -> np.ndarray:
    """Zenith gain (dBi, normalised to input power) of every band (rows) at every apex height.

    One coarse mesh per height serves all bands; one table domain covers the whole sweep, so the
    Sommerfeld tables are built once per band frequency.
    """
    from buildsheet.em import mom

    solver = solver_or_new(solver)
    legs = max(e.leg_length_m for e in antenna.elements)
    low = min(min(e.end_height_m for e in raised(antenna, h).elements) for h in heights_m)
    domain = covering_domain(2.0 * legs, 2.0 * low, 2.0 * float(np.max(heights_m)))
    f_top = highest_frequency(antenna)
    out = np.empty((len(antenna.elements), len(heights_m)))
    for j, h in enumerate(heights_m):
        structure = build_structure(raised(antenna, float(h)), f_top,
                                    segment_wavelengths=SWEEP_SEGMENT_WAVELENGTHS,
                                    min_segments=SWEEP_MIN_SEGMENTS)
        mesh = mom.build_mesh(structure, solver.tables, domain if antenna.ground.kind == "real" else None)
        for i, e in enumerate(antenna.elements):
            sc = solver.currents(mesh, e.design_frequency_hz)
            out[i, j] = coverage.zenith_gain_dbi(sc, antenna.ground)
    return out


def design_performance(cuts: DesignCuts, ground: Ground, settings: ExposureSettings,
                       solver: Solver | None = None) -> DesignPerformance:
    """Coverage, height advice and exposure screen of one solved design over ``ground``
    (currents through ``solver``, the build's context; a fresh one if None)."""
    from buildsheet.em import mom
    from buildsheet.em.solve import deployed_antenna

    solver = solver_or_new(solver)
    d = cuts.design
    legs = tuple(c.predicted_leg_m for c in cuts.elements)
    antenna = deployed_antenna(d, ground, legs)
    cable = feedline.coax(d.coax_type)
    freqs = tuple(c.element.frequency_hz for c in cuts.elements)
    heights = sweep_heights(freqs)
    sweep = zenith_sweep_mom(antenna, heights, solver)
    mesh = mom.mesh_for(antenna, mom.segmentation_frequency(antenna, np.array(freqs)),
                        tables=solver.tables)
    lo_w, hi_w = SWEEP_RANGE_WAVELENGTHS
    bands = []
    for i, c in enumerate(cuts.elements):
        e = c.element
        sc = solver.currents(mesh, e.frequency_hz)
        lam = C0 / e.frequency_hz
        own = (heights >= lo_w * lam * (1 - 1e-9)) & (heights <= hi_w * lam * (1 + 1e-9))
        loss = feedline.matched_loss_db(cable, d.coax_length_m, e.frequency_hz)
        bands.append(BandPerformance(
            e.key, e.band_label, coverage.nvis_figures(sc, ground, az_step_deg=10.0),
            coverage.elevation_cuts(sc, ground, e.bearing_deg, step_deg=2.0),
            coverage.advice_from_sweep(heights[own], sweep[i, own], e.frequency_hz),
            exposure.screen(e.frequency_hz, settings.power_w, settings.mode,
                            settings.transmit_fraction, SCREEN_GAIN_DBI, loss, settings.regime,
                            fraction_6min=settings.transmit_fraction_6min,
                            fraction_30min=settings.transmit_fraction_30min),
            loss))
    compromise = None
    if len(bands) > 1:
        compromise = coverage.compromise_from_sweeps(heights, sweep, freqs)
    note = ("NVIS figures, patterns and the height sweep from method-of-moments currents over "
            f"{ground.title} ({ground.model_title}), normalised to the input power"
            + (", so near-field ground loss is included" if ground.kind == "real"
               and ground.model == "sommerfeld" else "")
            + "; far field by Fresnel reflection of the space wave. The sweep raises the whole "
            "antenna at the same leg lengths.")
    return DesignPerformance(tuple(bands), compromise, coverage.band_guidance(freqs), note)
