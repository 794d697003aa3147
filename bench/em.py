"""Benchmarks for the electromagnetic core (issue 3): prints figures, asserts nothing.

Run: python bench/em.py
"""

from __future__ import annotations

import time
from dataclasses import replace

import numpy as np

from buildsheet.em import mom
from buildsheet.em.deployed import DeployedAntenna, ElementGeometry, Port, Structure, WireSpec
from buildsheet.em.ground import FREE_SPACE, real_ground
from buildsheet.em.resonance import prediction_band, solve_resonance
from buildsheet.spec.wires import BUILTIN_WIRES


def best(fn, repeat=5):
    """Best wall time of ``repeat`` calls, s (the mesh cache cleared before each: cold solves)."""
    times = []
    for _ in range(repeat):
        mom.mesh_for.cache_clear()
        solve_resonance.cache_clear()
        t = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t)
    return min(times)


def solves(fn):
    """Impedance-matrix fills and direct solves made by ``fn()`` (counted, not timed)."""
    counter = {"fills": 0}
    fill = mom.impedance_matrix

    def counting(mesh, frequency_hz):
        counter["fills"] += 1
        return fill(mesh, frequency_hz)

    mom.impedance_matrix = counting
    try:
        mom.mesh_for.cache_clear()
        fn()
    finally:
        mom.impedance_matrix = fill
    return counter["fills"]


def fan(sw=None):
    w = BUILTIN_WIRES["awg14-pvc"]
    els = (ElementGeometry("75m", 3.8e6, 3.6e6, 4.0e6, 0.0, 2.0, 18.5, w),
           ElementGeometry("60m", 5.357e6, 5.33e6, 5.41e6, 60.0, 2.0, 13.1, w),
           ElementGeometry("40m", 7.15e6, 7.0e6, 7.3e6, 120.0, 2.0, 9.9, w))
    ant = DeployedAntenna(7.5, els, real_ground("medium_dry"))
    return replace(ant, segment_wavelengths=sw) if sw else ant


def main() -> None:
    ant = fan()
    t = best(lambda: solve_resonance.__wrapped__(ant), 5)
    sol = solve_resonance(ant)
    fills = solves(lambda: solve_resonance.__wrapped__(ant))
    print(f"joint resonance, 3-element fan over medium dry ground: {t * 1e3:.0f} ms "
          f"(target < 300 ms); {sol.model_note}; {sol.iterations} iterations, {fills} fills")
    t = best(lambda: prediction_band(ant), 3)
    print(f"prediction band (three joint solves: free space, perfect and real ground, as every "
          f"packet does): {t * 1e3:.0f} ms")
    for e in sol.elements:
        print(f"  {e.key}: leg {e.leg_length_m:.3f} m, Z {e.z_feed.real:.1f}{e.z_feed.imag:+.2f}j, "
              f"SWR {e.swr_at_design:.2f}, slope {e.slope_m_per_hz * 1e5 * 100:.1f} cm/100 kHz")

    n = 150
    s = Structure((WireSpec((0, 0, 10), (0, 10.3, 10), 0.8e-3, n // 2, "a"),
                   WireSpec((0, 0, 10), (0, -10.3, 10), 0.8e-3, n // 2 + 1, "b")),
                  (Port("a", "b"),), real_ground("medium_dry"))
    mesh = mom.build_mesh(s)
    t_fill = best(lambda: mom.build_mesh(s))
    t_solve = best(lambda: mom.port_impedances(mesh, 7.1e6))
    print(f"{mesh.n_unknowns} unknowns over real ground: geometry {t_fill * 1e3:.1f} ms, "
          f"one impedance solve {t_solve * 1e3:.1f} ms (target < 20 ms)")
    sf = Structure(s.wires, s.ports, FREE_SPACE)
    mf = mom.build_mesh(sf)
    print(f"same in free space: one impedance solve "
          f"{best(lambda: mom.port_impedances(mf, 7.1e6)) * 1e3:.1f} ms")

    print("convergence (fan, resonant leg in m vs segment size in wavelengths at 7.3 MHz):")
    print("  seg/lambda  segments   75m       60m       40m      time/solve")
    ref = None
    for sw in (0.05, 0.025, 0.0125, 0.00625):
        a = fan(sw)
        mom.mesh_for.cache_clear()
        t = time.perf_counter()
        so = solve_resonance.__wrapped__(a)
        dt = time.perf_counter() - t
        legs = np.array([e.leg_length_m for e in so.elements])
        ref = legs if ref is None else ref
        nseg = mom.mesh_for(so.antenna).n_segments
        print(f"  {sw:<10} {nseg:>8}  " + "  ".join(f"{v:8.4f}" for v in legs)
              + f"  {dt * 1e3:7.0f} ms")


if __name__ == "__main__":
    main()
