"""Benchmark for site calibration (issue 7): prints figures, asserts nothing.

A three-band design (75/60/40 m inverted-V fan, 7.5 m apex, 2 m ends, awg14-pvc) calibrated
from three measurements of one kit. The measurements are synthetic: dips of the model over wet
ground (scipy brentq on the feed reactance) for legs cut to the medium-dry prediction.
Target: fit under 2 s. Run: python bench/calibrate.py
"""

from __future__ import annotations

import time

from scipy.optimize import brentq

from buildsheet.calc import calibrate as cal
from buildsheet.em import mom
from buildsheet.em.ground import real_ground
from buildsheet.em.solve import deployed_antenna, predict_mom
from buildsheet.spec.design import Allowances, AntennaDesign, ElementSpec
from buildsheet.spec.wires import BUILTIN_WIRES

TARGET_S = 2.0


def design() -> AntennaDesign:
    """The benchmark design, built directly (no spec file)."""
    elements = (ElementSpec("75m", None, 3.9e6, 0.0, 2.0),
                ElementSpec("60m", None, 5.3585e6, 60.0, 2.0),
                ElementSpec("40m", None, 7.15e6, 120.0, 2.0))
    allowances = Allowances(0.03, None, 0.01, 0.23, 0.10, 0.3, 0.5)
    return AntennaDesign("nvis3", "75/60/40 m fan", "fan", "inverted_v", 7.5,
                         BUILTIN_WIRES["awg14-pvc"], elements, allowances, "rg8x", 15.0)


def main() -> None:
    d = design()
    assumed, true = real_ground("medium_dry"), real_ground("wet")
    legs = tuple(e.leg_length_m for e in predict_mom(d, assumed).elements)
    ant = deployed_antenna(d, true, legs)
    obs = [cal.Observation(f"K01-{e.key}", e.key, leg, brentq(
        lambda f: mom.feed_impedance(ant, f)[0].imag, e.frequency_hz * 0.96,
        e.frequency_hz * 1.04, xtol=1.0)) for e, leg in zip(d.elements, legs)]
    kit = {"K01": {e.key: leg for e, leg in zip(d.elements, legs)}}
    runs = []
    for _ in range(3):
        t = time.perf_counter()
        c = cal.fit_site(d, assumed, obs, kit)
        t_fit = time.perf_counter() - t
        t = time.perf_counter()
        cal.calibrated_prediction(d, c)
        runs.append((t_fit, time.perf_counter() - t))
    fit, pred = min(r[0] for r in runs), min(r[1] for r in runs)
    print(f"fit_site, 3 bands from 3 measurements (cold caches): {fit:.2f} s "
          f"(target < {TARGET_S:.0f} s: {'met' if fit < TARGET_S else 'MISSED'})")
    print(f"calibrated_prediction (MoM resonance over the fitted ground): {pred:.2f} s")
    print(f"site behaves like {c.site_like_title}: eps_r {c.ground.eps_r:.1f}, "
          f"sigma {c.ground.sigma:.3g} S/m; max residual "
          f"{max(abs(r.fraction) for r in c.residuals):.1e}; uncertainty {c.uncertainty:.2%}")


if __name__ == "__main__":
    main()
