"""Joint resonance of every element on one feed, by the thin-wire method of moments.

All leg lengths are moved together until the feed reactance is zero at each element's design
frequency, every element seeing the others (a multi-dimensional root of X_e(L_1..L_M) = 0).
Iteration: a Newton step per element whose first slope dX/dL comes from the model's own
dX/df on the same mesh (electrical length ~ f L, so dX/dL ~ (f/L) dX/df), then secant slopes
from the model's successive iterates. The mesh is held fixed while lengths move and rebuilt by
the segmentation rule at the end (re-solving if the counts change), so the answer equals what
:func:`buildsheet.em.mom.feed_impedance` gives for the solved antenna.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, replace
from functools import lru_cache

import numpy as np
from numpy.polynomial.chebyshev import chebval
from scipy.optimize import brentq

from buildsheet.em.deployed import (
    DeployedAntenna,
    build_structure,
    element_segment_counts,
    highest_frequency,
    wavelength,
    with_leg_lengths,
)
from buildsheet.em.ground import FREE_SPACE, PERFECT_GROUND, Ground
from buildsheet.em.mom import Mesh, build_mesh, describe, mesh_for, port_impedances
from buildsheet.errors import BuildError

#: Search range of a leg, in wavelengths at its design frequency (the half-wave resonance of a
#: dipole in any deployment of interest lies well inside; a leg of a half-wave dipole is ~0.24).
LEG_RANGE_WAVELENGTHS: tuple[float, float] = (0.12, 0.32)
#: Relative length tolerance of the resonance solve.
LENGTH_TOL: float = 1e-6
MAX_ITERATIONS: int = 40
#: Direct solves per band for the SWR curve (Chebyshev nodes; the curve is interpolated).
CURVE_NODES: int = 9


def swr(z: np.ndarray | complex, z0: float = 50.0) -> np.ndarray:
    """Voltage standing-wave ratio of load ``z`` (ohm) on a line of real impedance ``z0`` (ohm).

    |Gamma| = |z - z0| / |z + z0|, SWR = (1 + |Gamma|) / (1 - |Gamma|) (standard
    transmission-line result, e.g. Pozar, Microwave Engineering, sec. 2.3).
    """
    g = np.abs((np.asarray(z) - z0) / (np.asarray(z) + z0))
    with np.errstate(divide="ignore"):
        return np.where(g < 1.0, (1.0 + g) / np.maximum(1.0 - g, 1e-300), np.inf)


@dataclass(frozen=True, eq=False)
class ElementSolution:
    """Resonance result of one element (SI units)."""

    key: str
    leg_length_m: float                  # resonant leg length, feed point to end, m
    z_feed: complex                      # feed impedance at the design frequency, ohm
    frequencies_hz: np.ndarray           # SWR curve abscissa across the band, Hz
    swr: np.ndarray                      # SWR on z0 at frequencies_hz
    bandwidth_2to1_hz: tuple[float, float] | None  # SWR = 2 edges around design f, Hz
    slope_m_per_hz: float                # d(leg length)/d(resonant frequency), m/Hz (negative)
    swr_at_design: float


@dataclass(frozen=True, eq=False)
class AntennaSolution:
    """The antenna with solved leg lengths and the per-element results."""

    antenna: DeployedAntenna
    elements: tuple[ElementSolution, ...]
    ground: Ground
    notes: tuple[str, ...]
    model_note: str
    z0: float
    iterations: int

    def element(self, key: str) -> ElementSolution:
        return next(e for e in self.elements if e.key == key)


@dataclass(frozen=True, eq=False)
class ElementBand:
    """Spread of one element's resonant leg length across ground models."""

    key: str
    min_leg_m: float
    max_leg_m: float
    spread: float            # (max - min) / mean of the three solutions, fraction


@dataclass(frozen=True, eq=False)
class PredictionBand:
    """Resonance solved over free space, perfect ground and the antenna's own ground."""

    elements: tuple[ElementBand, ...]
    free_space: AntennaSolution
    perfect: AntennaSolution
    own: AntennaSolution


def _reactances(mesh: Mesh, freqs: np.ndarray) -> np.ndarray:
    """Feed reactance of element e at its own frequency freqs[e], ohm."""
    return port_impedances(mesh, freqs)[:, 0, 0].imag


def _mesh(antenna: DeployedAntenna, lengths: np.ndarray, f_seg: float,
          counts: tuple[int, ...]) -> Mesh:
    return build_mesh(build_structure(with_leg_lengths(antenna, lengths), f_seg,
                                      segment_counts=counts))


def _no_resonance(antenna: DeployedAntenna, e: int, lo: float, hi: float, x: float) -> BuildError:
    el = antenna.elements[e]
    return BuildError(
        f"element {el.key!r}: no resonance at {el.design_frequency_hz / 1e6:.4f} MHz for leg "
        f"lengths {lo:.3f}-{hi:.3f} m (feed reactance stays {'above' if x > 0 else 'below'} "
        "zero); check the design frequency, the end height and the wire")


def _solve_lengths(antenna: DeployedAntenna, start: np.ndarray, f_seg: float,
                   counts: tuple[int, ...]) -> tuple[np.ndarray, int]:
    """Leg lengths giving X = 0 at every design frequency, on a fixed segmentation."""
    f = np.array([e.design_frequency_hz for e in antenna.elements])
    drop = np.array([abs(antenna.feed_height_m - e.end_height_m) for e in antenna.elements])
    lam = wavelength(1.0) / f
    lo = np.maximum(LEG_RANGE_WAVELENGTHS[0] * lam, drop * 1.0005 + 1e-3)
    hi = LEG_RANGE_WAVELENGTHS[1] * lam
    for e in np.flatnonzero(lo >= hi):
        raise _no_resonance(antenna, int(e), lo[e], hi[e], 1.0)
    L = np.clip(start, lo, hi)
    slope = x_prev = l_prev = None
    pinned = np.zeros(f.size, dtype=int)
    for it in range(1, MAX_ITERATIONS + 1):
        mesh = _mesh(antenna, L, f_seg, counts)
        x = _reactances(mesh, f)
        if slope is None:
            dxdf = (_reactances(mesh, f * (1 + 1e-4)) - x) / (f * 1e-4)
            slope = np.where(dxdf > 0, dxdf * f / L, np.nan)
            slope = np.where(np.isnan(slope), np.nanmax(np.append(slope, 1.0)), slope)
        else:
            assert x_prev is not None and l_prev is not None
            dl = L - l_prev
            sec = np.divide(x - x_prev, dl, out=np.zeros_like(x), where=np.abs(dl) > 1e-12 * L)
            slope = np.where(sec > 0, sec, slope)
        step = np.clip(-x / slope, -0.1 * L, 0.1 * L)
        new = np.clip(L + step, lo, hi)
        at_bound = (new == lo) & (x > 0) & (L == lo) | (new == hi) & (x < 0) & (L == hi)
        pinned = np.where(at_bound, pinned + 1, 0)
        if np.any(pinned >= 2):
            e = int(np.argmax(pinned))
            raise _no_resonance(antenna, e, lo[e], hi[e], x[e])
        x_prev, l_prev, L = x, L, new
        if np.all(np.abs(L - l_prev) <= LENGTH_TOL * L):
            return L, it
    e = int(np.argmax(np.abs(x)))
    raise BuildError(f"element {antenna.elements[e].key!r}: the resonance solve did not converge "
                     f"in {MAX_ITERATIONS} iterations (leg {lo[e]:.3f}-{hi[e]:.3f} m tried)")


def _interpolant(mesh: Mesh, lo: float, hi: float, n: int) -> Callable[[np.ndarray], np.ndarray]:
    """Feed impedance on [lo, hi] interpolated through n Chebyshev nodes (direct MoM solves).

    Z(f) of a dipole is smooth across one band; a degree n - 1 Chebyshev interpolant is exact
    at the nodes (tests check it against direct solves between them).
    """
    x = np.cos(np.pi * (np.arange(n) + 0.5) / n)
    z = port_impedances(mesh, (lo + hi) / 2 + (hi - lo) / 2 * x)[:, 0, 0]
    cr = np.polynomial.chebyshev.chebfit(x, z.real, n - 1)
    ci = np.polynomial.chebyshev.chebfit(x, z.imag, n - 1)

    def z_of(f: np.ndarray) -> np.ndarray:
        u = (2 * np.asarray(f, dtype=float) - lo - hi) / (hi - lo)
        return chebval(u, cr) + 1j * chebval(u, ci)
    return z_of


def _bandwidth(mesh: Mesh, f0: float, lo: float, hi: float, z_fit: Callable[[np.ndarray], np.ndarray],
               z0: float, s0: float) -> tuple[float, float] | None:
    """Frequencies where SWR = 2 on each side of f0, Hz; None if SWR >= 2 at f0.

    Each edge is bracketed on the interpolated curve, the bracket confirmed with two direct
    solves, then located on the interpolant (or by direct solves outside the band).
    """
    if not s0 < 2.0:
        return None

    def direct(fr: float) -> float:
        return float(swr(port_impedances(mesh, fr)[0, 0, 0], z0)) - 2.0

    edges = []
    for end in (lo, hi):
        grid = np.linspace(f0, end, 401)
        over = np.flatnonzero(swr(z_fit(grid), z0) >= 2.0)
        if over.size and direct(grid[over[0]]) >= 0 > direct(grid[over[0] - 1]):
            a, b = grid[over[0] - 1], grid[over[0]]
            edges.append(brentq(lambda fr: float(swr(z_fit(fr), z0)) - 2.0,
                                min(a, b), max(a, b), xtol=0.5))
            continue
        a, step = end, (end - f0) if end != f0 else f0 * 1e-3
        b = a + step
        while direct(b) < 0:
            a, b = b, b + step
            if abs(b - f0) > 0.3 * f0:
                raise BuildError(f"2:1 SWR edge not found within 30 % of {f0 / 1e6:.4f} MHz")
        if direct(a) >= 0:
            a = f0
        edges.append(brentq(direct, min(a, b), max(a, b), xtol=1.0))
    return edges[0], edges[1]


@lru_cache(maxsize=32)
def solve_resonance(antenna: DeployedAntenna, *, z0: float = 50.0,
                    n_swr_points: int = 41) -> AntennaSolution:
    """Solve every element's leg length jointly for zero feed reactance at its design frequency.

    Returns the antenna with solved lengths, the feed impedance, the SWR curve on ``z0`` across
    each band, the 2:1 SWR bandwidth and the model's own tuning slope per element.
    Raises BuildError naming the element and the leg range tried when no resonance is found.
    """
    f_seg = highest_frequency(antenna)
    L = np.array([e.leg_length_m for e in antenna.elements])
    counts = element_segment_counts(antenna, f_seg)
    iterations = 0
    for _ in range(4):
        L, it = _solve_lengths(antenna, L, f_seg, counts)
        iterations += it
        new_counts = element_segment_counts(with_leg_lengths(antenna, L), f_seg)
        if new_counts == counts:
            break
        counts = new_counts
    solved = with_leg_lengths(antenna, L)
    mesh = mesh_for(solved, f_seg)
    f = np.array([e.design_frequency_hz for e in antenna.elements])
    z_design = port_impedances(mesh, f)[:, 0, 0]
    # Model tuning slope dL/df_r = -(dX/df)/(dX/dL), both by finite differences of the model.
    dxdf = (port_impedances(mesh, f * (1 + 1e-4))[:, 0, 0].imag - z_design.imag) / (f * 1e-4)
    dxdl = np.empty_like(f)
    for e in range(f.size):
        dl = np.zeros_like(L)
        dl[e] = 1e-3 * L[e]
        x = port_impedances(_mesh(antenna, L + dl, f_seg, counts), f[e])[0, 0, 0].imag
        dxdl[e] = (x - z_design[e].imag) / dl[e]
    results = []
    notes = list(mesh.structure.notes)
    for e, el in enumerate(solved.elements):
        freqs = np.linspace(el.band_low_hz, el.band_high_hz, n_swr_points)
        lo, hi = min(el.band_low_hz, f[e]), max(el.band_high_hz, f[e])
        z_fit = _interpolant(mesh, lo, hi, min(n_swr_points, CURVE_NODES))
        s = swr(z_fit(freqs), z0)
        s0 = float(swr(z_design[e], z0))
        if s0 > 2.0:
            notes.append(f"element {el.key!r}: SWR {s0:.1f}:1 on {z0:.0f} ohm at resonance "
                         f"(feed resistance {z_design[e].real:.1f} ohm)")
        results.append(ElementSolution(
            key=el.key, leg_length_m=float(L[e]), z_feed=complex(z_design[e]),
            frequencies_hz=freqs, swr=s, bandwidth_2to1_hz=_bandwidth(mesh, f[e], lo, hi, z_fit, z0, s0),
            slope_m_per_hz=float(-dxdf[e] / dxdl[e]), swr_at_design=s0))
    return AntennaSolution(solved, tuple(results), antenna.ground, tuple(notes), describe(mesh),
                           z0, iterations)


def prediction_band(antenna: DeployedAntenna) -> PredictionBand:
    """Resonant leg lengths over free space, perfect ground and the antenna's own ground."""
    sols = [solve_resonance(replace(antenna, ground=g))
            for g in (FREE_SPACE, PERFECT_GROUND, antenna.ground)]
    bands = []
    for i, el in enumerate(antenna.elements):
        legs = np.array([s.elements[i].leg_length_m for s in sols])
        bands.append(ElementBand(el.key, float(legs.min()), float(legs.max()),
                                 float((legs.max() - legs.min()) / legs.mean())))
    return PredictionBand(tuple(bands), *sols)

