"""What the deployed antenna does: NVIS figures and elevation cuts per band (from the method-of-
moments currents), height advice and the multi-band compromise height (sinusoidal currents over
the site ground), day/night guidance, and the RF-exposure screen. Pure; one result per design.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from buildsheet.calc import coverage, exposure, feedline
from buildsheet.calc.cuts import DesignCuts
from buildsheet.em.ground import Ground
from buildsheet.spec.design import ExposureSettings

#: Gain used for the exposure screen: a half-wave dipole, 2.15 dBi, together with the
#: ground-reflection factor 2.56 (FCC OET Bulletin 65 screening practice).
SCREEN_GAIN_DBI = 2.15
#: Lowest end height kept while sweeping the apex height of an inverted V, as a fraction of it.
_MIN_END_FRACTION = 0.3


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


def _sweep_source(apex_m: float, end_m: float, leg_m: float, bearing: float, f: float,
                  radius: float, ground: Ground):
    """Sinusoidal currents for the element raised to a trial apex height, same droop."""
    drop = apex_m - end_m

    def at_height(h: float) -> coverage.SegmentCurrents:  # type: ignore[name-defined]
        end = max(h - drop, _MIN_END_FRACTION * h)
        return coverage.sinusoidal_currents(h, leg_m, end, bearing, f, radius, n_per_leg=21,
                                            ground=ground)

    return at_height


@lru_cache(maxsize=64)
def design_performance(cuts: DesignCuts, ground: Ground, settings: ExposureSettings) -> DesignPerformance:
    """Coverage, height advice and exposure screen of one solved design over ``ground``."""
    from buildsheet.em import mom
    from buildsheet.em.solve import deployed_antenna

    d = cuts.design
    legs = tuple(c.predicted_leg_m for c in cuts.elements)
    antenna = deployed_antenna(d, ground, legs)
    cable = feedline.coax(d.coax_type)
    bands = []
    for c in cuts.elements:
        e = c.element
        sc = mom.segment_currents(antenna, e.frequency_hz)
        source = _sweep_source(d.apex_height_m, e.end_height_m, c.predicted_leg_m, e.bearing_deg,
                               e.frequency_hz, d.wire.radius_m, ground)
        loss = feedline.matched_loss_db(cable, d.coax_length_m, e.frequency_hz)
        bands.append(BandPerformance(
            e.key, e.band_label, coverage.nvis_figures(sc, ground, az_step_deg=10.0),
            coverage.elevation_cuts(sc, ground, e.bearing_deg, step_deg=2.0),
            coverage.height_advice(source, ground, e.frequency_hz, steps=21),
            exposure.screen(e.frequency_hz, settings.power_w, settings.mode,
                            settings.transmit_fraction, SCREEN_GAIN_DBI, loss, settings.regime,
                            fraction_6min=settings.transmit_fraction_6min,
                            fraction_30min=settings.transmit_fraction_30min),
            loss))
    freqs = [c.element.frequency_hz for c in cuts.elements]
    compromise = None
    if len(bands) > 1:
        # Each band's own sweep, interpolated onto one grid where all sweeps overlap (the
        # curves are smooth, so no new field evaluations are needed).
        low = max(b.height.heights_m[0] for b in bands)
        high = min(b.height.heights_m[-1] for b in bands)
        grid = np.linspace(low, high, 81)
        gains = np.stack([np.interp(grid, b.height.heights_m, b.height.zenith_gain_dbi)
                          for b in bands])
        compromise = coverage.compromise_from_sweeps(grid, gains, freqs)
    note = ("NVIS figures and patterns from the method-of-moments currents over "
            f"{ground.title} by the reflection-coefficient method (Fresnel coefficients; an "
            "approximation that omits near-field ground loss). Height sweep with sinusoidal "
            "currents at the same leg lengths.")
    return DesignPerformance(tuple(bands), compromise, coverage.band_guidance(freqs), note)
