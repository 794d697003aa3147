"""Benchmarks for the electromagnetic core (issues 3 and 10): prints figures, asserts nothing.

Run: python bench/em.py   (OPENBLAS_NUM_THREADS=1 avoids BLAS thread overhead on the small
matrices of these solves when the machine is shared)
"""

from __future__ import annotations

import os
import time
from dataclasses import replace

import numpy as np

from buildsheet.calc import coverage, performance
from buildsheet.em import mom
from buildsheet.em.context import Solver
from buildsheet.em.deployed import DeployedAntenna, ElementGeometry, build_structure
from buildsheet.em.ground import real_ground
from buildsheet.em.resonance import RICHARDSON_ORDER, prediction_band, solve_resonance
from buildsheet.em.sommerfeld import TableStore
from buildsheet.spec.wires import BUILTIN_WIRES


def best(fn, repeat=5):
    """Best wall time of ``repeat`` calls, s (each call makes its own solver context)."""
    times = []
    for _ in range(repeat):
        t = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t)
    return min(times)




def fan(sw=None, model="sommerfeld"):
    """The issue's three-element 80/60/40 m inverted-V fan over medium dry ground."""
    w = BUILTIN_WIRES["awg14-pvc"]
    els = (ElementGeometry("75m", 3.8e6, 3.6e6, 4.0e6, 0.0, 2.0, 18.5, w),
           ElementGeometry("60m", 5.357e6, 5.33e6, 5.41e6, 60.0, 2.0, 13.1, w),
           ElementGeometry("40m", 7.15e6, 7.0e6, 7.3e6, 120.0, 2.0, 9.9, w))
    ant = DeployedAntenna(7.5, els, real_ground("medium_dry", model))
    return replace(ant, segment_wavelengths=sw) if sw else ant


def joint_resonance() -> None:
    ant = fan()
    cold = best(lambda: solve_resonance(ant, Solver()))
    first = Solver()
    sol = solve_resonance(ant, first)
    store, n = first.tables, first.fills
    warm = best(lambda: solve_resonance(ant, Solver(tables=store)))
    print(f"joint resonance, 3-element fan, medium dry, Sommerfeld ground: {cold * 1e3:.0f} ms "
          f"including {store.built} kernel tables (target < 1000 ms), {warm * 1e3:.0f} ms with "
          f"the tables built (target < 300 ms); {sol.iterations} iterations, {n} fills "
          f"(BLAS threads: {os.environ.get('OPENBLAS_NUM_THREADS', 'default')}, "
          f"{os.cpu_count()} cores)")
    print(f"  {sol.model_note}")
    for model in ("fresnel-image", "normal-image"):
        t = best(lambda m=model: solve_resonance(fan(model=m)), 3)
        print(f"  same with the {model} model: {t * 1e3:.0f} ms")
    band_t = best(lambda: prediction_band(ant), 3)
    band = prediction_band(ant)
    print(f"prediction band (solve + Richardson half-mesh step + two ground-range steps): "
          f"{band_t * 1e3:.0f} ms")
    others = {m: solve_resonance(fan(model=m)) for m in ("fresnel-image", "normal-image")}
    for e, b in zip(sol.elements, band.elements, strict=True):
        img = "; ".join(f"{m}: leg {o.element(e.key).leg_length_m:.3f} m, R "
                        f"{o.element(e.key).z_feed.real:.1f}" for m, o in others.items())
        print(f"  {e.key}: leg {e.leg_length_m:.4f} m (extrapolated {b.leg_m:.4f}), R "
              f"{e.z_feed.real:.1f} ohm, SWR {e.swr_at_design:.2f}, band +-{b.total:.2%} "
              f"(ground {b.ground:.2%}, mesh {b.mesh:.3%}, model {b.model:.2%}); {img}")


def convergence() -> None:
    print("convergence (fan, Sommerfeld ground): resonant leg (m) vs segment size in "
          "wavelengths at 7.3 MHz; Richardson (order "
          f"{RICHARDSON_ORDER:g}) from each row and the one before")
    print("  seg/lambda  segments   75m       60m       40m      | Richardson 75m 60m 40m   "
          "time/solve")
    prev = None
    rows = []
    for sw in (0.05, 0.025, 0.0125, 0.00625):
        a = fan(sw)
        t = time.perf_counter()
        so = solve_resonance(a)
        dt = time.perf_counter() - t
        legs = np.array([e.leg_length_m for e in so.elements])
        rich = "" if prev is None else "  ".join(
            f"{v:8.4f}" for v in legs + (legs - prev) / (2**RICHARDSON_ORDER - 1))
        rows.append(legs + (legs - prev) / (2**RICHARDSON_ORDER - 1) if prev is not None else None)
        print(f"  {sw:<10} {so.mesh.n_segments:>8}  " + "  ".join(f"{v:8.4f}" for v in legs)
              + f"  | {rich:<30} {dt * 1e3:7.0f} ms")
        prev = legs
    ref = rows[-1]
    band = prediction_band(fan())
    default = np.array([b.leg_m for b in band.elements])
    err = (default - ref) / ref
    print("  default (0.025 with its half-mesh step, extrapolated) against the finest "
          "Richardson estimate: " + ", ".join(f"{x:+.4%}" for x in err) + " (issue: < 0.02 %)")


def sweep_error() -> None:
    """The packet's height sweep (coarse mesh, whole antenna) against the full solve."""
    ant = fan()
    sol = solve_resonance(ant)
    solved = sol.antenna
    h = np.array([solved.feed_height_m])
    t = time.perf_counter()
    heights = performance.sweep_heights(tuple(e.design_frequency_hz for e in solved.elements))
    performance.zenith_sweep_mom(solved, heights)
    dt = time.perf_counter() - t
    quick = performance.zenith_sweep_mom(solved, h)[:, 0]
    full = np.array([coverage.zenith_gain_dbi(mom.segment_currents(solved, e.design_frequency_hz),
                                              solved.ground) for e in solved.elements])
    print(f"height sweep: {heights.size} apex heights x {len(solved.elements)} bands in "
          f"{dt * 1e3:.0f} ms; zenith gain at the design apex, sweep mesh vs full solve: "
          + ", ".join(f"{e.key} {q:.2f} vs {f:.2f} dBi ({q - f:+.2f} dB)"
                      for e, q, f in zip(solved.elements, quick, full, strict=True))
          + " (issue: within 0.3 dB)")


def mesh_and_fill() -> None:
    structure = build_structure(fan())
    store = TableStore()
    t_mesh = best(lambda: mom.build_mesh(structure, store))
    m = mom.build_mesh(structure, store)
    mom.port_impedances(m, 7.15e6)
    t_fill = best(lambda: mom.port_impedances(m, 7.15e6))
    t_direct = best(lambda: mom.port_impedances(m, 7.15e6, direct=True), 1)
    print(f"{m.n_unknowns} unknowns over the Sommerfeld ground: geometry {t_mesh * 1e3:.1f} ms, "
          f"one fill + solve {t_fill * 1e3:.1f} ms with the table, {t_direct * 1e3:.0f} ms "
          "by the direct path (no table)")


def main() -> None:
    joint_resonance()
    mesh_and_fill()
    sweep_error()
    convergence()


if __name__ == "__main__":
    main()
