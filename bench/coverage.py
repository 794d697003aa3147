"""Benchmark: NVIS height sweep for three bands (3.6 / 5.36 / 7.1 MHz) over one ground class.

Target (issue 4): under 1 s for the sweep. Prints the time and the results.
Run: python bench/coverage.py [ground_key]
"""

from __future__ import annotations

import sys
import time

from buildsheet.calc.coverage import (
    compromise_height,
    height_advice,
    nvis_figures,
    sinusoidal_currents,
)
from buildsheet.constants import C0
from buildsheet.em.ground import real_ground

FREQS = (3.6e6, 5.36e6, 7.1e6)


def source(f: float, ground):
    """Flat half-wave dipole at apex height h, input power referred over ``ground``."""
    leg = 0.95 * C0 / f / 4
    return lambda h: sinusoidal_currents(h, leg, h, 0.0, f, 1e-3, 21, ground)


def main() -> None:
    ground = real_ground(sys.argv[1] if len(sys.argv) > 1 else "medium_dry")
    t0 = time.perf_counter()
    advice = [height_advice(source(f, ground), ground, f) for f in FREQS]
    t1 = time.perf_counter()
    print(f"height sweep, 3 bands x 31 heights over {ground.title}: {t1 - t0:.3f} s (target < 1 s)")
    for a in advice:
        lam = a.wavelength_m
        print(
            f"  {a.frequency_hz / 1e6:5.2f} MHz  best {a.best_height_m:5.1f} m "
            f"({a.best_height_m / lam:.2f} wl, {a.best_gain_dbi:+.2f} dBi)  within 1 dB "
            f"{a.range_low_m:5.1f}-{a.range_high_m:5.1f} m"
        )
    t2 = time.perf_counter()
    comp = compromise_height([source(f, ground) for f in FREQS], ground, FREQS)
    t3 = time.perf_counter()
    print(
        f"compromise {comp.height_m:.2f} m (minimax {comp.minimax_height_m:.2f} m), shortfalls "
        + ", ".join(f"{s:.2f}" for s in comp.shortfall_db)
        + f" dB; {len(comp.heights_m)} heights in {t3 - t2:.3f} s"
    )
    t4 = time.perf_counter()
    for f in FREQS:
        fig = nvis_figures(source(f, ground)(comp.height_m), ground)
        print(
            f"  {f / 1e6:5.2f} MHz at {comp.height_m:.2f} m: zenith {fig.zenith_gain_dbi:+.2f} dBi,"
            f" >60 deg {fig.share_above_60:.0%}, >45 deg {fig.share_above_45:.0%}, lobe "
            f"{fig.main_lobe_elevation_deg:.0f} deg, ground loss {fig.ground_loss_share:.0%}"
        )
    print(f"NVIS figures for 3 bands: {time.perf_counter() - t4:.3f} s")


if __name__ == "__main__":
    main()
