"""Joint resonance of every element on one feed, by the thin-wire method of moments.

All leg lengths are moved together until the feed reactance is zero at each element's design
frequency, every element seeing the others (a multi-dimensional root of X_e(L_1..L_M) = 0).
Iteration: a Newton step per element whose first slope dX/dL comes from the model's own
dX/df on the same mesh (electrical length ~ f L, so dX/dL ~ (f/L) dX/df), then secant slopes
from the model's successive iterates. The segment counts are held fixed while lengths move and
checked against the segmentation rule at the end (re-solving if the counts change), so the
answer equals what :func:`buildsheet.em.mom.feed_impedance` gives for the solved antenna. The
solved lengths are the last iterate evaluated (its Newton step is below the tolerance), so its
mesh and feed impedances are the answer's, with no further fill.

Cost (issue 3 targets, bench/em.py): every direct solve is one impedance-matrix fill, so the
SWR curve uses a Chebyshev interpolant with as few nodes as its coefficient tail allows, the
2:1 edges start from the interpolant (extrapolated a little beyond the band) and are polished
by secant steps on direct solves, and dX/df for the tuning slope is the interpolant's
derivative.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from numpy.polynomial.chebyshev import chebder, chebfit, chebval

from buildsheet.em.closed_form import swr
from buildsheet.em.context import Solver, solver_or_new
from buildsheet.em.deployed import (
    DeployedAntenna,
    build_structure,
    element_segment_counts,
    highest_frequency,
    wavelength,
    with_leg_lengths,
)
from buildsheet.em.ground import Ground, ground_range
from buildsheet.em.mom import Mesh, build_mesh, describe, with_ground
from buildsheet.em.roots import brent_root
from buildsheet.errors import BuildError

#: Search range of a leg, in wavelengths at its design frequency (the half-wave resonance of a
#: dipole in any deployment of interest lies well inside; a leg of a half-wave dipole is ~0.24).
LEG_RANGE_WAVELENGTHS: tuple[float, float] = (0.12, 0.32)
#: Relative length tolerance of the resonance solve.
LENGTH_TOL: float = 1e-6
MAX_ITERATIONS: int = 40
#: Most direct solves per band for the SWR curve (Chebyshev-Lobatto nodes, nested 5 -> 9; the
#: curve is interpolated).
CURVE_NODES: int = 9
#: Fewest nodes tried first; the node count doubles (less one) while the error estimate (the
#: next Chebyshev coefficient, extrapolated geometrically from the last two) exceeds CURVE_TOL
#: times the largest |Z|.
CURVE_NODES_FIRST: int = 5
CURVE_TOL: float = 1e-6
#: The 2:1 edges are looked for on the interpolant up to this fraction of the band width beyond
#: each band edge (a start for the direct solves, which decide).
EDGE_EXTRAPOLATION: float = 0.5
#: Secant steps on direct solves for a 2:1 edge, and the step that ends them, Hz.
EDGE_ITERATIONS: int = 8
EDGE_XTOL_HZ: float = 1.0


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
    dx_dl_ohm_per_m: float = float("nan")  # d(feed reactance)/d(this leg), ohm/m, at design f


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
    mesh: Mesh | None = None             # the solved antenna's mesh

    def element(self, key: str) -> ElementSolution:
        return next(e for e in self.elements if e.key == key)


#: Stated model uncertainty of a resonant leg, fraction: the thin-wire delta-gap model against
#: independent references (about 0.1 %, REFERENCES 5.3 suggested tolerance), plus for insulated
#: wire the coating model and jacket permittivity (PVC 3-4.5 moves the shortening by about
#: +-0.12 %, REFERENCES 6.3).
MODEL_UNCERTAINTY_BARE: float = 0.001
MODEL_UNCERTAINTY_COATED: float = 0.002
#: Richardson order of the resonant leg in the segment length (observed: the delta-gap drift
#: makes the error about proportional to the segment length; bench/em.py prints the table).
RICHARDSON_ORDER: float = 1.0


@dataclass(frozen=True, eq=False)
class ElementBand:
    """Resonant leg of one element with its uncertainty parts (half-widths, fractions of it).

    leg_m: Richardson-extrapolated leg (mesh error removed); leg_mesh_m: on the default mesh.
    ground: the class's documented range (neighbouring P.527 curves); mesh: Richardson
    estimate of what remains; model: the stated figure. total: their root sum of squares.
    """

    key: str
    leg_m: float
    leg_mesh_m: float
    ground: float
    mesh: float
    model: float

    @property
    def total(self) -> float:
        return float(np.sqrt(self.ground**2 + self.mesh**2 + self.model**2))

    @property
    def min_leg_m(self) -> float:
        return self.leg_m * (1.0 - self.total)

    @property
    def max_leg_m(self) -> float:
        return self.leg_m * (1.0 + self.total)


@dataclass(frozen=True, eq=False)
class PredictionBand:
    """The site-ground solution and every element's leg with its uncertainty parts."""

    elements: tuple[ElementBand, ...]
    own: AntennaSolution
    ground_range: tuple[Ground, Ground] | None


def _mesh(antenna: DeployedAntenna, lengths: np.ndarray, f_seg: float,
          counts: tuple[int, ...], solver: Solver) -> Mesh:
    """Mesh of ``antenna`` with ``lengths`` on ``counts`` segments per leg; every mesh of a
    build reads Sommerfeld kernel tables from the solver's store (one per frequency and grid)."""
    return build_mesh(build_structure(with_leg_lengths(antenna, lengths), f_seg,
                                      segment_counts=counts), solver.tables)


def _no_resonance(antenna: DeployedAntenna, e: int, lo: float, hi: float, x: float) -> BuildError:
    el = antenna.elements[e]
    return BuildError(
        f"element {el.key!r}: no resonance at {el.design_frequency_hz / 1e6:.4f} MHz for leg "
        f"lengths {lo:.3f}-{hi:.3f} m (feed reactance stays {'above' if x > 0 else 'below'} "
        "zero); check the design frequency, the end height and the wire")


def _solve_lengths(antenna: DeployedAntenna, start: np.ndarray, f_seg: float,
                   counts: tuple[int, ...],
                   solver: Solver) -> tuple[np.ndarray, int, Mesh, np.ndarray]:
    """Leg lengths giving X = 0 at every design frequency, on a fixed segmentation.

    Returns the lengths, the iterations, and the mesh and feed impedances (ohm, one per element
    at its design frequency) of those lengths: the last iterate, whose Newton step to the root
    is within LENGTH_TOL of its length.
    """
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
        mesh = _mesh(antenna, L, f_seg, counts, solver)
        z = solver.port_impedances(mesh, f)[:, 0, 0]
        x = z.imag
        if slope is None:
            dxdf = (solver.port_impedances(mesh, f * (1 + 1e-4))[:, 0, 0].imag - x) / (f * 1e-4)
            slope = np.where(dxdf > 0, dxdf * f / L, np.nan)
            slope = np.where(np.isnan(slope), np.nanmax(np.append(slope, 1.0)), slope)
        else:
            assert x_prev is not None and l_prev is not None
            dl = L - l_prev
            sec = np.divide(x - x_prev, dl, out=np.zeros_like(x), where=np.abs(dl) > 1e-12 * L)
            slope = np.where(sec > 0, sec, slope)
        step = np.clip(-x / slope, -0.1 * L, 0.1 * L)
        new = np.clip(L + step, lo, hi)
        if np.all(np.abs(new - L) <= LENGTH_TOL * L):
            return L, it, mesh, z
        at_bound = (new == lo) & (x > 0) & (L == lo) | (new == hi) & (x < 0) & (L == hi)
        pinned = np.where(at_bound, pinned + 1, 0)
        if np.any(pinned >= 2):
            stuck = int(np.argmax(pinned))
            raise _no_resonance(antenna, stuck, lo[stuck], hi[stuck], x[stuck])
        x_prev, l_prev, L = x, L, new
    worst = int(np.argmax(np.abs(x)))
    raise BuildError(f"element {antenna.elements[worst].key!r}: the resonance solve did not "
                     f"converge in {MAX_ITERATIONS} iterations (leg {lo[worst]:.3f}-"
                     f"{hi[worst]:.3f} m tried)")


@dataclass(frozen=True, eq=False)
class _Curve:
    """Chebyshev interpolant of the feed impedance on [lo, hi] (Hz) through direct MoM solves."""

    lo: float
    hi: float
    coef: np.ndarray          # complex Chebyshev coefficients in u = (2f - lo - hi)/(hi - lo)
    nodes: int                # direct solves used

    def z(self, f: np.ndarray | float) -> np.ndarray:
        """Interpolated feed impedance at f (Hz), ohm; a short extrapolation outside is allowed."""
        return chebval((2 * np.asarray(f, dtype=float) - self.lo - self.hi) / (self.hi - self.lo),
                       self.coef)

    def dz_df(self, f: np.ndarray | float) -> np.ndarray:
        """Derivative of the interpolant, ohm/Hz."""
        u = (2 * np.asarray(f, dtype=float) - self.lo - self.hi) / (self.hi - self.lo)
        return chebval(u, chebder(self.coef)) * 2.0 / (self.hi - self.lo)


def _interpolant(solver: Solver, mesh: Mesh, lo: float, hi: float, n_max: int) -> _Curve:
    """Feed impedance on [lo, hi] interpolated through Chebyshev-Lobatto nodes (direct solves).

    Z(f) of a dipole is smooth across one band: its Chebyshev coefficients fall geometrically,
    faster the narrower the band. Start with CURVE_NODES_FIRST nodes and refine on the nested
    grid (n -> 2n - 1, the old nodes kept) while the next coefficient, extrapolated from the last
    two (|c_n| ~ |c_{n-1}|^2 / |c_{n-2}|), exceeds CURVE_TOL times max |Z|, up to n_max nodes (Trefethen, Approximation Theory and Approximation Practice,
    ch. 3-4 and 8: Chebyshev-Lobatto interpolation, coefficient decay as error estimate).
    Tests check the curve against direct solves between the nodes.
    """
    n = min(CURVE_NODES_FIRST, n_max)
    u = np.cos(np.pi * np.arange(n) / (n - 1))
    z = solver.port_impedances(mesh, (lo + hi) / 2 + (hi - lo) / 2 * u)[:, 0, 0]
    while True:
        coef = chebfit(u, z.real, n - 1) + 1j * chebfit(u, z.imag, n - 1)
        last, before = np.abs(coef[-1]), np.abs(coef[-2])
        tail = last * last / max(last, before)       # the next coefficient, extrapolated
        if tail <= CURVE_TOL * np.abs(z).max() or 2 * n - 1 > n_max:
            return _Curve(lo, hi, coef, n)
        n = 2 * n - 1
        fine = np.cos(np.pi * np.arange(n) / (n - 1))
        z_new = solver.port_impedances(mesh, (lo + hi) / 2 + (hi - lo) / 2 * fine[1::2])[:, 0, 0]
        z_all = np.empty(n, dtype=complex)
        z_all[0::2], z_all[1::2] = z, z_new
        u, z = fine, z_all


def _edge_by_bracket(direct: Callable[[float], float], f0: float, end: float, side: int) -> float:
    """A 2:1 edge beyond ``end`` (side -1 below f0, +1 above) by stepping outward with direct
    solves, then Brent's method, Hz."""
    a, step = end, (end - f0) if end != f0 else side * f0 * 1e-3
    b = a + step
    while direct(b) < 0:
        a, b = b, b + step
        if abs(b - f0) > 0.3 * f0:
            raise BuildError(f"2:1 SWR edge not found within 30 % of {f0 / 1e6:.4f} MHz")
    if direct(a) >= 0:
        a = f0
    return float(brent_root(direct, min(a, b), max(a, b), xtol=EDGE_XTOL_HZ))


def _polish(direct: Callable[[float], float], f: float, slope: float) -> float | None:
    """Root of SWR - 2 near ``f`` by secant steps on direct solves (first slope given), Hz.

    None when it does not settle within EDGE_ITERATIONS solves (the caller then brackets).
    """
    s = direct(f)
    for _ in range(EDGE_ITERATIONS):
        if not (np.isfinite(slope) and slope != 0.0):
            return None
        step = -s / slope
        if abs(step) <= EDGE_XTOL_HZ:
            return f + step
        f_new = f + step
        s_new = direct(f_new)
        slope = (s_new - s) / (f_new - f)
        f, s = f_new, s_new
    return None


def _bandwidth(solver: Solver, mesh: Mesh, f0: float, lo: float, hi: float, curve: _Curve, z0: float,
               s0: float) -> tuple[float, float] | None:
    """Frequencies where SWR = 2 on each side of f0, Hz; None if SWR >= 2 at f0.

    Each edge is first found on the interpolated curve (extended EDGE_EXTRAPOLATION band widths
    beyond the band), then settled by secant steps on direct solves starting with the curve's
    slope: one solve when the curve was right, a few when it was extrapolated. Where the curve
    shows no edge (an edge well beyond a narrow band), the secant steps start from the edge of
    a resistance held at its design-frequency value and a reactance rising at the curve's
    dX/df there (SWR = 2 where 8 X^2 = (R + Z0)^2 - 9 (R - Z0)^2, from |Gamma| = 1/3). Where the
    steps do not settle, the edge is bracketed by direct solves.
    """
    if not s0 < 2.0:
        return None

    def direct(fr: float) -> float:
        return float(swr(solver.port_impedances(mesh, fr)[0, 0, 0], z0)) - 2.0

    def fitted(fr: float | np.ndarray) -> np.ndarray:
        return swr(curve.z(fr), z0) - 2.0

    z_f0 = complex(curve.z(f0))
    dxdf = float(curve.dz_df(f0).imag)

    def linear(fr: float | np.ndarray) -> np.ndarray:
        return swr(z_f0.real + 1j * (z_f0.imag + dxdf * (np.asarray(fr) - f0)), z0) - 2.0

    x_edge2 = ((z_f0.real + z0) ** 2 - 9.0 * (z_f0.real - z0) ** 2) / 8.0
    edges = []
    for end, side in ((lo, -1), (hi, 1)):
        grid = np.linspace(f0, end + side * EDGE_EXTRAPOLATION * (hi - lo), 801)
        over = np.flatnonzero(fitted(grid) >= 0.0)
        edge = None
        h = 1e-6 * f0
        if over.size and over[0] > 0:
            a, b = grid[over[0] - 1], grid[over[0]]
            guess = float(brent_root(lambda fr: float(fitted(fr)), min(a, b), max(a, b), xtol=0.5))
            slope = float(fitted(guess + h) - fitted(guess - h)) / (2 * h)
            edge = _polish(direct, guess, slope)
        elif x_edge2 > 0 and dxdf > 0:
            guess = f0 + (side * np.sqrt(x_edge2) - z_f0.imag) / dxdf
            slope = float(linear(guess + h) - linear(guess - h)) / (2 * h)
            edge = _polish(direct, float(guess), slope)
        if edge is not None and not 0 < side * (edge - f0) <= 0.3 * f0:
            edge = None
        edges.append(edge if edge is not None else _edge_by_bracket(direct, f0, end, side))
    return edges[0], edges[1]


def solve_resonance(antenna: DeployedAntenna, solver: Solver | None = None, *, z0: float = 50.0,
                    n_swr_points: int = 41) -> AntennaSolution:
    """Solve every element's leg length jointly for zero feed reactance at its design frequency.

    Returns the antenna with solved lengths, the feed impedance, the SWR curve on ``z0`` across
    each band, the 2:1 SWR bandwidth and the model's own tuning slope per element.
    Raises BuildError naming the element and the leg range tried when no resonance is found.
    ``solver``: the build's solver context (a fresh one if None); the solution is kept there,
    so asking again for the same antenna solves nothing.
    """
    solver = solver_or_new(solver)
    return solver.kept(("resonance", antenna, z0, n_swr_points),
                       lambda: _solve_resonance(antenna, solver, z0, n_swr_points))


def _solve_resonance(antenna: DeployedAntenna, solver: Solver, z0: float,
                     n_swr_points: int) -> AntennaSolution:
    """:func:`solve_resonance` without the context's memory."""
    f_seg = highest_frequency(antenna)
    L = np.array([e.leg_length_m for e in antenna.elements])
    counts = element_segment_counts(antenna, f_seg)
    iterations = 0
    for _ in range(4):
        L, it, mesh, z_design = _solve_lengths(antenna, L, f_seg, counts, solver)
        iterations += it
        new_counts = element_segment_counts(with_leg_lengths(antenna, L), f_seg)
        if new_counts == counts:
            break
        counts = new_counts
    else:
        mesh = _mesh(antenna, L, f_seg, element_segment_counts(with_leg_lengths(antenna, L), f_seg),
                     solver)
        z_design = solver.port_impedances(mesh, np.array([e.design_frequency_hz
                                                   for e in antenna.elements]))[:, 0, 0]
    solved = with_leg_lengths(antenna, L)
    f = np.array([e.design_frequency_hz for e in antenna.elements])
    # Model tuning slope dL/df_r = -(dX/df)/(dX/dL): dX/df from the band's interpolant (below),
    # dX/dL by a forward difference of the model moving that element alone.
    dxdl = np.empty_like(f)
    for e in range(f.size):
        dl = np.zeros_like(L)
        dl[e] = 1e-5 * L[e]
        x = solver.port_impedances(_mesh(antenna, L + dl, f_seg, counts, solver),
                            f[e])[0, 0, 0].imag
        dxdl[e] = (x - z_design[e].imag) / dl[e]
    results = []
    notes = list(mesh.structure.notes)
    for e, el in enumerate(solved.elements):
        freqs = np.linspace(el.band_low_hz, el.band_high_hz, n_swr_points)
        lo, hi = min(el.band_low_hz, f[e]), max(el.band_high_hz, f[e])
        curve = _interpolant(solver, mesh, lo, hi, min(n_swr_points, CURVE_NODES))
        s = swr(curve.z(freqs), z0)
        s0 = float(swr(z_design[e], z0))
        dxdf = float(curve.dz_df(f[e]).imag)
        if s0 > 2.0:
            notes.append(f"element {el.key!r}: SWR {s0:.1f}:1 on {z0:.0f} ohm at resonance "
                         f"(feed resistance {z_design[e].real:.1f} ohm)")
        results.append(ElementSolution(
            key=el.key, leg_length_m=float(L[e]), z_feed=complex(z_design[e]),
            frequencies_hz=freqs, swr=s,
            bandwidth_2to1_hz=_bandwidth(solver, mesh, f[e], lo, hi, curve, z0, s0),
            slope_m_per_hz=float(-dxdf / dxdl[e]), swr_at_design=s0,
            dx_dl_ohm_per_m=float(dxdl[e])))
    return AntennaSolution(solved, tuple(results), antenna.ground, tuple(notes), describe(mesh),
                           z0, iterations, mesh)


def _leg_shift(solver: Solver, mesh: Mesh, sol: AntennaSolution) -> np.ndarray:
    """Linearised change of each resonant leg when ``mesh`` replaces the solved one, m:
    -X_e(f_e) / (dX_e/dL_e), X on ``mesh`` at each design frequency (zero on the solved mesh)."""
    f = np.array([e.design_frequency_hz for e in sol.antenna.elements])
    x = solver.port_impedances(mesh, f)[:, 0, 0].imag
    return -x / np.array([e.dx_dl_ohm_per_m for e in sol.elements])


def prediction_band(antenna: DeployedAntenna, solver: Solver | None = None) -> PredictionBand:
    """Resonant legs over the antenna's own ground with their uncertainty parts.

    Ground: the legs over the poorer and the better end of the ground class's range
    (:func:`buildsheet.em.ground.ground_range`), each by one linearised step from the solved
    antenna. Mesh: the same step on a mesh of half the segment length, then Richardson
    extrapolation (order RICHARDSON_ORDER) to zero segment length; what remains is estimated as
    the extrapolation's own step. Model: MODEL_UNCERTAINTY_* (coated if any leg is insulated).
    """
    solver = solver_or_new(solver)
    sol = solve_resonance(antenna, solver)
    assert sol.mesh is not None
    L = np.array([e.leg_length_m for e in sol.elements])
    f_seg = highest_frequency(antenna)
    fine = build_mesh(build_structure(sol.antenna, f_seg,
                                      segment_wavelengths=antenna.segment_wavelengths / 2.0),
                      solver.tables)
    d_fine = _leg_shift(solver, fine, sol)
    step = d_fine / (1.0 - 0.5**RICHARDSON_ORDER)          # L* - L = (L_h/2 - L_h) / (1 - 2^-p)
    extrapolated = L + step
    mesh_part = np.abs(step - d_fine) / extrapolated       # |L* - L_h/2|
    grounds = ground_range(antenna.ground)
    ground_part = np.zeros_like(L)
    if grounds is not None:
        shifts = np.stack([_leg_shift(solver, with_ground(sol.mesh, g), sol) for g in grounds])
        ground_part = np.max(np.abs(shifts), axis=0) / extrapolated
    coated = any(e.wire.insulated for e in antenna.elements)
    model = MODEL_UNCERTAINTY_COATED if coated else MODEL_UNCERTAINTY_BARE
    bands = tuple(ElementBand(el.key, float(extrapolated[i]), float(L[i]), float(ground_part[i]),
                              float(mesh_part[i]), model)
                  for i, el in enumerate(antenna.elements))
    return PredictionBand(bands, sol, grounds)
