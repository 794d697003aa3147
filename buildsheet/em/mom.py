"""Thin-wire method of moments: mixed-potential EFIE, triangle basis, Galerkin testing.

Our implementation of the published method (Harrington, *Field Computation by Moment Methods*,
1968, ch. 4; formulation as in shared REFERENCES.md section 5.1):

    Z_mn = jk eta  sum int int (f_m . f_n) G dl dl'  -  j (eta/k) int int (div f_m)(div' f_n) G dl dl'
           + int z'(l) f_m . f_n dl,                 V_m = int f_m . E_inc dl,

G = exp(-jkR) / (4 pi R) with the reduced (thin-wire) kernel R = sqrt(|r - r'|^2 + a^2): source
on the wire axis, observation on its surface. The triangle ("rooftop") basis spans two segments
sharing a node; a junction of M wire ends gets M - 1 functions pairing the first end with each of
the others (Kirchhoff's current law); a delta-gap port between two coincident terminal nodes is
one function pairing their first ends, excited with V_m = V. Free ends carry no basis (I = 0).

Integrals: the static part 1/(4 pi R) of each source segment is done analytically,
int ds / sqrt((s - u)^2 + b^2) = asinh((D - u)/b) + asinh(u/b) and its linear-weighted companion,
with Gauss-Legendre over the test segment; the smooth rest (exp(-jkR) - 1)/(4 pi R) by
Gauss-Legendre on both segments. Frequency-independent geometry is computed once per structure.

Ground: perfect ground by image theory (horizontal currents reversed, vertical kept, charge
negated). Real ground, by ``Ground.model``: "sommerfeld" (default), the exact half-space from
the Sommerfeld-integral kernels of :mod:`buildsheet.em.sommerfeld`; their static image part
c_k / (4 pi R') is integrated analytically like the perfect-ground image, the smooth rest read
from a table at segment midpoints (second order, like the pulse pairs the triangles' Galerkin
sums reduce to); "fresnel-image", the image weighted by the Fresnel coefficients at the
specular angle between each pair of segments (Gamma_h on horizontal current components and on
charge, Gamma_v on vertical ones); "normal-image", the same at normal incidence. The two image
models are approximations, unreliable below about 0.1-0.2 wavelength (Miller, Poggio, Burke &
Selden, Canadian J. Phys. 50, 1972).
Distributed loading z' (insulation after Richmond & Newman 1976, skin effect) comes from
:func:`buildsheet.em.loading.series_impedance_per_m`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from buildsheet.constants import C0, ETA0
from buildsheet.em import sommerfeld
from buildsheet.em.currents import SegmentCurrents
from buildsheet.em.deployed import DeployedAntenna, Structure, build_structure, highest_frequency
from buildsheet.em.ground import Ground, complex_permittivity
from buildsheet.em.loading import conductor_impedance_per_m, series_impedance_per_m
from buildsheet.errors import BuildError

#: Gauss-Legendre points over the test segment for the static (1/R) part.
STATIC_POINTS: int = 12
#: Fewer test points suffice for the image's static part when no segment comes within
#: IMAGE_FAR_SEGMENTS segment lengths of its image (the integrand is then smooth).
IMAGE_STATIC_POINTS: int = 6
IMAGE_FAR_SEGMENTS: float = 2.0
#: Gauss-Legendre points on each segment for the smooth (exp(-jkR) - 1)/R part.
SMOOTH_POINTS: int = 2


@dataclass(frozen=True, eq=False)
class HalfSpacePairs:
    """Segment-midpoint pairs for the Sommerfeld ground, i test, j source.

    Every per-pair quantity is symmetric in (i, j), so only the M = N (N + 1) / 2 pairs i <= j
    are kept and ``full`` (N, N) maps each pair to its entry. rho, zeta, r: horizontal
    distance, z_i + z_j and distance to the image point, m (M,); beta_r: (t_zi t_hj - t_zj t_hi)
    . rho_vec / (r + zeta) (M,), the cross-kernel weight; grid and weights: the table grid
    covering the pairs and the bicubic read of it (frequency independent); tables: the store
    the tables come from; static_h / static_v: the analytic static image integrals times the
    horizontal and vertical parts of t_i . t_j, and static_sum their shape sum (m).
    """

    full: np.ndarray
    rho: np.ndarray
    zeta: np.ndarray
    r: np.ndarray
    beta_r: np.ndarray
    horiz: np.ndarray
    vert: np.ndarray
    grid: sommerfeld.TableGrid
    weights: object
    tables: sommerfeld.TableStore
    static_h: np.ndarray
    static_v: np.ndarray
    static_sum: np.ndarray


def _half_space_pairs(p0: np.ndarray, p1: np.ndarray, t: np.ndarray, static_img: np.ndarray,
                      tables: sommerfeld.TableStore,
                      domain: sommerfeld.TableDomain | None) -> HalfSpacePairs:
    """Midpoint-pair geometry, the covering table grid (``domain`` if given) and its weights."""
    n = p0.shape[0]
    iu, ju = np.triu_indices(n)
    full = np.empty((n, n), dtype=int)
    full[iu, ju] = full[ju, iu] = np.arange(iu.size)
    c = (p0 + p1) / 2.0
    d = c[iu, :2] - c[ju, :2]                                     # rho_vec, observation - source
    rho = np.hypot(d[:, 0], d[:, 1])
    zeta = c[iu, 2] + c[ju, 2]
    if zeta.min() <= 0.0:
        raise BuildError("a wire touches or crosses the ground (z <= 0); the half-space ground "
                         "needs every wire above it")
    cross = t[iu, 2, None] * t[ju, :2] - t[ju, 2, None] * t[iu, :2]
    r = np.hypot(rho, zeta)
    beta_r = np.einsum("pk,pk->p", cross, d) / (r + zeta)
    horiz = t[iu, 0] * t[ju, 0] + t[iu, 1] * t[ju, 1]
    vert = t[iu, 2] * t[ju, 2]
    grid = sommerfeld.table_grid(domain or sommerfeld.covering_domain(
        float(rho.max()), float(zeta.min()), float(zeta.max())))
    h_full, v_full = horiz[full], vert[full]
    return HalfSpacePairs(full, rho, zeta, r, beta_r, horiz, vert, grid,
                          sommerfeld.interpolation_matrix(grid, rho, zeta), tables,
                          static_img * h_full, static_img * v_full, static_img.sum(axis=(0, 1)))


@dataclass(frozen=True, eq=False)
class Mesh:
    """Segments, basis functions and the frequency-independent integrals of one structure.

    p0, p1: (N, 3) segment ends, m; t: (N, 3) unit directions; length: (N,), m; radius: (N,), m;
    wire_of: (N,) index into ``structure.wires``; T: (Nb, 2N) basis-to-segment-end coefficients
    (column 2i + e is the linear shape of segment i peaking at end e, along t_i); D: (Nb, N)
    divergence of each basis on each segment, 1/m; port_basis: (P,) basis index of each port.
    cols, signs, segs, divs: (Nb, 2) the same as T and D for the two halves of every basis.
    static / static_img: (2, 2, N, N) analytic-static integrals int int w_a w_b / R, m (free
    space / image source); dist / dist_img: (Q, Q, N, N) reduced-kernel distances between the
    smooth quadrature points (p on the test segment i, q on the source segment j), m.
    Ground-independent caches (the fill needs only these and the image arrays per frequency):
    static_galerkin: (2, Nb, Nb) Galerkin sums of the free-space static integrals, vector part
    (with t_i . t_j) and scalar part, divided by 4 pi, m and 1/m; pair: (5, N, N) per segment
    pair t_i . t_j, horizontal and vertical parts of it, sin and cos^2 of the specular elevation
    angle between segment centres; loading_pattern: (rows, cols, weight, segment) of the
    Galerkin sum int z' f_m . f_n dl over the segments two basis functions share.
    half_space: midpoint-pair geometry and table reads for the Sommerfeld ground (else None).
    dist_unique: the distinct values of the symmetric ``dist`` (dist[p, q, i, j] =
    dist[q, p, j, i]) and the (Q, Q, N, N) map back, so the smooth kernel is evaluated once per
    pair of points.
    """

    structure: Structure
    p0: np.ndarray
    p1: np.ndarray
    t: np.ndarray
    length: np.ndarray
    radius: np.ndarray
    wire_of: np.ndarray
    T: np.ndarray
    D: np.ndarray
    port_basis: np.ndarray
    cols: np.ndarray
    signs: np.ndarray
    segs: np.ndarray
    divs: np.ndarray
    static: np.ndarray
    dist: np.ndarray
    static_img: np.ndarray | None
    dist_img: np.ndarray | None
    static_galerkin: np.ndarray
    pair: np.ndarray
    loading_pattern: tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]
    half_space: HalfSpacePairs | None = None
    dist_unique: tuple[np.ndarray, np.ndarray] | None = None

    @property
    def n_segments(self) -> int:
        return int(self.length.size)

    @property
    def n_unknowns(self) -> int:
        return int(self.T.shape[0])


def _segments(structure: Structure) -> tuple[np.ndarray, ...]:
    """Split every wire into equal straight segments (vectorised per wire)."""
    p0s, p1s, rad, owner = [], [], [], []
    for w_i, w in enumerate(structure.wires):
        a, b = np.asarray(w.start, float), np.asarray(w.end, float)
        frac = np.linspace(0.0, 1.0, w.n_segments + 1)[:, None]
        pts = a + frac * (b - a)
        p0s.append(pts[:-1])
        p1s.append(pts[1:])
        rad.append(np.full(w.n_segments, w.radius_m))
        owner.append(np.full(w.n_segments, w_i))
    p0, p1 = np.concatenate(p0s), np.concatenate(p1s)
    vec = p1 - p0
    length = np.linalg.norm(vec, axis=1)
    if np.any(length <= 0):
        raise BuildError("a wire has zero length")
    return p0, p1, vec / length[:, None], length, np.concatenate(rad), np.concatenate(owner)


def _basis(structure: Structure, length: np.ndarray) -> tuple[np.ndarray, ...]:
    """Triangle basis: interior nodes, junctions (M - 1 each) and ports (one each).

    A wire end is (segment, end e, outward sign s): the current leaving the node into the wire
    is s * t along the segment's shape peaking at end e; its divergence is -1/D.
    """
    n_seg = length.size
    first = np.cumsum([0] + [w.n_segments for w in structure.wires])
    pairs: list[tuple[tuple[int, int, int], tuple[int, int, int]]] = []  # (into node, out of node)
    nodes: dict[str, list[tuple[int, int, int]]] = {}
    for w_i, w in enumerate(structure.wires):
        s0, s1 = int(first[w_i]), int(first[w_i + 1])
        pairs += [((s, 1, -1), (s + 1, 0, 1)) for s in range(s0, s1 - 1)]
        if w.start_node:
            nodes.setdefault(w.start_node, []).append((s0, 0, 1))
        if w.end_node:
            nodes.setdefault(w.end_node, []).append((s1 - 1, 1, -1))
    for ends in nodes.values():
        pairs += [(ends[0], e) for e in ends[1:]]
    port_basis = []
    for port in structure.ports:
        if port.node_a not in nodes or port.node_b not in nodes:
            raise BuildError(f"port {port} names a node no wire ends on")
        port_basis.append(len(pairs))
        pairs.append((nodes[port.node_a][0], nodes[port.node_b][0]))
    n_b = len(pairs)
    T = np.zeros((n_b, 2 * n_seg))
    D = np.zeros((n_b, n_seg))
    idx = np.arange(n_b)
    into = np.array([p[0] for p in pairs]).reshape(n_b, 3)
    out = np.array([p[1] for p in pairs]).reshape(n_b, 3)
    np.add.at(T, (idx, 2 * into[:, 0] + into[:, 1]), -into[:, 2])
    np.add.at(T, (idx, 2 * out[:, 0] + out[:, 1]), out[:, 2])
    np.add.at(D, (idx, into[:, 0]), 1.0 / length[into[:, 0]])
    np.add.at(D, (idx, out[:, 0]), -1.0 / length[out[:, 0]])
    cols = np.stack([2 * into[:, 0] + into[:, 1], 2 * out[:, 0] + out[:, 1]], axis=1)
    signs = np.stack([-into[:, 2], out[:, 2]], axis=1).astype(float)
    segs = np.stack([into[:, 0], out[:, 0]], axis=1)
    divs = np.stack([1.0 / length[into[:, 0]], -1.0 / length[out[:, 0]]], axis=1)
    return T, D, np.array(port_basis, dtype=int), cols, signs, segs, divs


def _gauss(n: int) -> tuple[np.ndarray, np.ndarray]:
    """Gauss-Legendre nodes and weights on [0, 1]."""
    x, w = np.polynomial.legendre.leggauss(n)
    return (x + 1.0) / 2.0, w / 2.0


def _static_integrals(p0: np.ndarray, t: np.ndarray, length: np.ndarray, a2: np.ndarray,
                      q0: np.ndarray, qt: np.ndarray, points: int = STATIC_POINTS) -> np.ndarray:
    """int_test int_source w_a(u) w_b(u') / R du' du for all segment pairs, (2, 2, N, N), m.

    Test segments (p0, t, length); source segments (q0, qt, same lengths). The source integral is
    analytic (shared REFERENCES.md section 5.1): with xi the projection of the observation point
    on the source axis and b^2 = rho^2 + a^2, I0 = asinh((D - xi)/b) + asinh(xi/b) and
    I1 = int u'/R = R(D) - R(0) + xi I0. The test integral is Gauss-Legendre.

    The observation point p0_i + u t_i is never formed: with Delta = p0_i - q0_j,
    xi = Delta . t'_j + u t_i . t'_j and rho = |Delta_perp + u t_perp| (components across the
    source axis), so only (N, N) pair quantities and one (Q, N, N) array per term are needed,
    and rho of collinear segments is exactly zero up to rounding of the perpendicular parts.
    """
    x, w = _gauss(points)
    delta = p0[:, None, :] - q0[None, :, :]                        # (N, N, 3)
    along = np.einsum("ijk,jk->ij", delta, qt)                     # Delta . t'_j
    cos = t @ qt.T                                                 # t_i . t'_j
    d_perp = delta - along[:, :, None] * qt[None, :, :]
    t_perp = t[:, None, :] - cos[:, :, None] * qt[None, :, :]
    c0 = np.einsum("ijk,ijk->ij", d_perp, d_perp)
    c1 = 2.0 * np.einsum("ijk,ijk->ij", d_perp, t_perp)
    c2 = np.einsum("ijk,ijk->ij", t_perp, t_perp)
    u = (x[:, None] * length[None, :])[:, :, None]                 # (Q, N, 1): point on test i
    xi = along + u * cos                                           # (Q, N, N)
    b2 = np.maximum(c0 + u * (c1 + u * c2), 0.0) + a2
    b = np.sqrt(b2)
    dj = length[None, None, :]
    i0 = np.arcsinh((dj - xi) / b) + np.arcsinh(xi / b)
    i1 = (np.sqrt((dj - xi) ** 2 + b2) - np.sqrt(xi**2 + b2) + xi * i0) / dj
    outer = np.stack([1.0 - x, x]) * w[None, :]                    # (a, Q): test shape x weight
    q, n = x.size, length.size
    j0 = (outer @ i0.reshape(q, -1)).reshape(2, n, n) * length[:, None]
    j1 = (outer @ i1.reshape(q, -1)).reshape(2, n, n) * length[:, None]
    return np.stack([j0 - j1, j1], axis=1)                         # [a, b]: w_0 = 1 - u'/D, w_1


def _smooth_distances(p0: np.ndarray, t: np.ndarray, length: np.ndarray, a2: np.ndarray,
                      q0: np.ndarray, qt: np.ndarray) -> np.ndarray:
    """Reduced-kernel distances between smooth quadrature points, (Q, Q, N, N), m."""
    x, _ = _gauss(SMOOTH_POINTS)
    obs = p0[:, None, :] + (length[:, None] * x[None, :])[:, :, None] * t[:, None, :]
    src = q0[:, None, :] + (length[:, None] * x[None, :])[:, :, None] * qt[:, None, :]
    diff = obs.transpose(1, 0, 2)[:, None, :, None, :] - src.transpose(1, 0, 2)[None, :, None, :, :]
    return np.sqrt(np.einsum("pqijk,pqijk->pqij", diff, diff) + a2[None, None])


def _galerkin(idx: np.ndarray, coef: np.ndarray, M: np.ndarray) -> np.ndarray:
    """sum over the two halves of m and of n: coef_m coef_n M[idx_m, idx_n] (= T M T^T).

    Rows first, then columns: two gathers of (Nb, 2N) and two of (Nb, Nb) elements.
    """
    rows = coef[:, 0, None] * M[idx[:, 0]] + coef[:, 1, None] * M[idx[:, 1]]
    return rows[:, idx[:, 0]] * coef[None, :, 0] + rows[:, idx[:, 1]] * coef[None, :, 1]


def _by_end(P: np.ndarray) -> np.ndarray:
    """(2, 2, N, N) pair integrals [a, b, i, j] as a (2N, 2N) matrix indexed 2i + a, 2j + b."""
    n = P.shape[-1]
    return P.transpose(2, 0, 3, 1).reshape(2 * n, 2 * n)


def _pair_geometry(p0: np.ndarray, p1: np.ndarray, t: np.ndarray) -> np.ndarray:
    """(5, N, N): t_i . t_j, its horizontal and vertical parts, sin psi and cos^2 psi.

    psi is the elevation angle of the specular ray between segment centres over a flat ground
    at z = 0 (image theory geometry: tan psi = (z_i + z_j) / rho_ij).
    """
    horiz = t[:, None, 0] * t[None, :, 0] + t[:, None, 1] * t[None, :, 1]
    vert = t[:, None, 2] * t[None, :, 2]
    c = (p0 + p1) / 2.0
    rho = np.hypot(c[:, None, 0] - c[None, :, 0], c[:, None, 1] - c[None, :, 1])
    psi = np.arctan2(c[:, None, 2] + c[None, :, 2], rho)
    return np.stack([t @ t.T, horiz, vert, np.sin(psi), np.cos(psi) ** 2])


def _loading_pattern(cols: np.ndarray, signs: np.ndarray,
                     segs: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Entries of int z' f_m . f_n dl: (row, col, weight, segment), Z_mn += weight z'_seg D_seg.

    Two halves on the same segment with shapes peaking at ends e, e' give
    int w_e w_e' du = D (1/3 if e = e' else 1/6) (linear shapes on a segment of length D).
    """
    blk = np.array([[1.0 / 3.0, 1.0 / 6.0], [1.0 / 6.0, 1.0 / 3.0]])
    ends = cols % 2
    parts = []
    for h in (0, 1):
        for g in (0, 1):
            m, n = np.nonzero(segs[:, h, None] == segs[None, :, g])
            parts.append((m, n, signs[m, h] * signs[n, g] * blk[ends[m, h], ends[n, g]],
                          segs[m, h]))
    r, c, w, s = (np.concatenate(v) for v in zip(*parts, strict=True))
    return r, c, w, s


def build_mesh(structure: Structure, tables: sommerfeld.TableStore | None = None,
               domain: sommerfeld.TableDomain | None = None) -> Mesh:
    """Segments, basis and frequency-independent integrals of ``structure``.

    ``tables``: where Sommerfeld kernel tables are kept (share one across the meshes of a
    solve; a fresh store if None). ``domain``: the table domain to use (it must cover the
    structure; several meshes on one domain share their tables), else one fitted to it.
    """
    p0, p1, t, length, radius, owner = _segments(structure)
    T, D, ports, cols, signs, segs, divs = _basis(structure, length)
    a2 = (radius[:, None] ** 2 + radius[None, :] ** 2) / 2.0
    static = _static_integrals(p0, t, length, a2, p0, t)
    dist = _smooth_distances(p0, t, length, a2, p0, t)
    static_img = dist_img = half_space = None
    if structure.ground.kind != "free_space":
        mirror = np.array([1.0, 1.0, -1.0])
        static_img = _image_static(p0, p1, t, length, a2)
        if _is_sommerfeld(structure):
            half_space = _half_space_pairs(p0, p1, t, static_img, tables or sommerfeld.TableStore(),
                                           domain)
        else:
            dist_img = _smooth_distances(p0, t, length, a2, p0 * mirror, t * mirror)
    pair = _pair_geometry(p0, p1, t)
    static_galerkin = np.stack([_galerkin(cols, signs, _by_end(static * pair[0])),
                                _galerkin(segs, divs, static.sum(axis=(0, 1)))]) / (4.0 * math.pi)
    return Mesh(structure, p0, p1, t, length, radius, owner, T, D, ports, cols, signs, segs, divs,
                static, dist, static_img, dist_img, static_galerkin, pair,
                _loading_pattern(cols, signs, segs), half_space, _unique_symmetric(dist))


def _image_static(p0: np.ndarray, p1: np.ndarray, t: np.ndarray, length: np.ndarray,
                  a2: np.ndarray) -> np.ndarray:
    """Static integrals to the mirror-image sources, with IMAGE_STATIC_POINTS test points where
    every segment is far from its image (lowest point above IMAGE_FAR_SEGMENTS / 2 segments)."""
    mirror = np.array([1.0, 1.0, -1.0])
    low = float(np.minimum(p0[:, 2], p1[:, 2]).min())
    far = 2.0 * low >= IMAGE_FAR_SEGMENTS * float(length.max())
    return _static_integrals(p0, t, length, a2, p0 * mirror, t * mirror,
                             IMAGE_STATIC_POINTS if far else STATIC_POINTS)


def _unique_symmetric(dist: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Distinct entries of a (Q, Q, N, N) array symmetric under (p, i) <-> (q, j), and the map."""
    q, n = dist.shape[0], dist.shape[-1]
    m = dist.transpose(0, 2, 1, 3).reshape(q * n, q * n)
    iu, ju = np.triu_indices(q * n)
    index = np.empty((q * n, q * n), dtype=np.intp)
    index[iu, ju] = index[ju, iu] = np.arange(iu.size)
    return m[iu, ju], index.reshape(q, n, q, n).transpose(0, 2, 1, 3)


def with_ground(mesh: Mesh, ground: Ground) -> Mesh:
    """The same mesh over another ground: the geometry integrals are kept, the image parts the
    new ground needs are added (a Sommerfeld mesh keeps its table grid and store)."""
    structure = replace(mesh.structure, ground=ground)
    if ground.kind == "free_space":
        return replace(mesh, structure=structure, static_img=None, dist_img=None, half_space=None)
    a2 = (mesh.radius[:, None] ** 2 + mesh.radius[None, :] ** 2) / 2.0
    mirror = np.array([1.0, 1.0, -1.0])
    static_img = mesh.static_img
    if static_img is None:
        static_img = _image_static(mesh.p0, mesh.p1, mesh.t, mesh.length, a2)
    half_space, dist_img = mesh.half_space, mesh.dist_img
    if _is_sommerfeld(structure):
        if half_space is None:
            half_space = _half_space_pairs(mesh.p0, mesh.p1, mesh.t, static_img,
                                           sommerfeld.TableStore(), None)
    elif dist_img is None:
        dist_img = _smooth_distances(mesh.p0, mesh.t, mesh.length, a2, mesh.p0 * mirror,
                                     mesh.t * mirror)
    return replace(mesh, structure=structure, static_img=static_img, dist_img=dist_img,
                   half_space=half_space if _is_sommerfeld(structure) else None)


def _is_sommerfeld(structure: Structure) -> bool:
    return structure.ground.kind == "real" and structure.ground.model == "sommerfeld"


def _smooth_kernel(dist: np.ndarray, k: float) -> np.ndarray:
    """(exp(-jkR) - 1) / R at the smooth quadrature points, 1/m (cos and sin, no complex exp)."""
    kd = k * dist
    return (np.cos(kd) - 1.0 - 1j * np.sin(kd)) / dist


def _smooth_pairs(g: np.ndarray, w_vec: np.ndarray | float,
                  w_scal: np.ndarray | float) -> tuple[np.ndarray, np.ndarray]:
    """Shape-weighted Gauss-Legendre sums of the pair kernel g (Q, Q, N, N), per unit lengths.

    Returns the four shape pairings sum_pq w_a(p) w_b(q) g (2, 2, N, N) times the per-pair
    weight ``w_vec``, and the plain sum sum_pq w_p w_q g (= the same with w_0 + w_1 = 1) times
    ``w_scal`` (N, N). The callers fold the segment lengths D_i D_j into the weights.
    """
    x, w = _gauss(SMOOTH_POINTS)
    shape = np.stack([1.0 - x, x]) * w[None, :]                    # (2, Q): w_a at each point
    q, n = g.shape[0], g.shape[-1]
    # explicit sums, not BLAS: the inner dimension is Q, where threaded BLAS only adds overhead
    left = np.einsum("ap,pqk->aqk", shape, g.reshape(q, q, n * n))  # [a, q, ij]
    both = np.einsum("bq,aqk->abk", shape, left).reshape(2, 2, n, n)  # [a, b, i, j]
    total = both.sum(axis=(0, 1))                                  # w_0 + w_1 = 1 per point
    return both * w_vec, total * w_scal


def _image_factors(mesh: Mesh, frequency_hz: float) -> tuple[np.ndarray, np.ndarray]:
    """Weights of the image current (per pair) for the vector and scalar potentials.

    Perfect ground: Gamma_h = -1, Gamma_v = +1. Real ground: Fresnel coefficients (Balanis,
    Antenna Theory, section 4.8, as in :func:`buildsheet.em.ground.fresnel_horizontal` and
    :func:`~buildsheet.em.ground.fresnel_vertical`) at the specular elevation angle between
    segment centres: Gamma_h = (sin psi - r) / (sin psi + r),
    Gamma_v = (eps_c sin psi - r) / (eps_c sin psi + r), r = sqrt(eps_c - cos^2 psi);
    the normal-incidence image uses psi = 90 degrees for every pair.
    """
    _, horiz, vert, sin_psi, cos2_psi = mesh.pair
    ground = mesh.structure.ground
    if ground.kind == "perfect":
        return vert - horiz, np.full(horiz.shape, -1.0)
    assert ground.ground_class is not None
    eps_c = complex_permittivity(ground.ground_class, frequency_hz)
    if ground.model == "normal-image":
        sin_psi, cos2_psi = np.ones_like(sin_psi), np.zeros_like(cos2_psi)
    root = np.sqrt(eps_c - cos2_psi + 0j)
    gh = (sin_psi - root) / (sin_psi + root)
    gv = (eps_c * sin_psi - root) / (eps_c * sin_psi + root)
    return gh * horiz + gv * vert, gh


def _loading(mesh: Mesh, frequency_hz: float, *, loss_only: bool = False) -> np.ndarray:
    """Galerkin matrix of the distributed series loading int z' f_m . f_n dl, ohm."""
    zw = np.array([0j if w.wire is None else
                   (conductor_impedance_per_m(w.wire, frequency_hz).real if loss_only
                    else series_impedance_per_m(w.wire, frequency_hz))
                   for w in mesh.structure.wires])
    zs = zw[mesh.wire_of] * mesh.length
    r, c, weight, seg = mesh.loading_pattern
    out = np.zeros((mesh.n_unknowns, mesh.n_unknowns), dtype=complex)
    np.add.at(out, (r, c), weight * zs[seg])
    return out


def _half_space_terms(mesh: Mesh, frequency_hz: float, k: float,
                      direct: bool) -> tuple[np.ndarray, np.ndarray]:
    """Reflected vector (2, 2, N, N) and scalar (N, N) pair integrals of the Sommerfeld ground,
    times 4 pi (the scale of the free-space terms), m.

    G = c_k / (4 pi R') + rest: the static image part analytically (``static_img``), the rest at
    segment midpoints with the pulse weights 1/4 D_i D_j (vector) and D_i D_j (charge).
    ``direct`` evaluates the Sommerfeld integrals at every midpoint pair (slow, no table).
    """
    hs, ground = mesh.half_space, mesh.structure.ground
    assert hs is not None and ground.ground_class is not None
    eps_c = complex_permittivity(ground.ground_class, frequency_hz)
    zeta0 = hs.grid.domain.zeta_min
    if direct:
        g = sommerfeld.direct_kernels(eps_c, k, hs.rho, hs.zeta)
        c = sommerfeld.direct_kernels(eps_c, k, np.zeros(1), np.full(1, zeta0))[:3, 0] * (
            4.0 * math.pi * zeta0)
        scaled = 4.0 * math.pi * hs.r * np.exp(1j * k * hs.r) * g
        scaled[3] *= hs.r + hs.zeta
    else:
        table = hs.tables.table(eps_c, k, hs.grid)
        scaled = sommerfeld.table_scaled(table, hs.weights)
        c = table.image_coefficients()
    # 4 pi G_k = scaled_k exp(-j k R')/R' (and / (R' + zeta) for G_x / rho), per unique pair
    phase = (np.cos(k * hs.r) - 1j * np.sin(k * hs.r)) / hs.r
    rest = scaled[:3] * phase - c[:, None] / hs.r
    vec_rest = hs.horiz * rest[0] + hs.vert * rest[1] - 1j * scaled[3] * phase * hs.beta_r
    ll = mesh.length[:, None] * mesh.length[None, :]
    vec = c[0] * hs.static_h + c[1] * hs.static_v + (0.25 * ll) * vec_rest[hs.full]
    scal = c[2] * hs.static_sum + ll * rest[2][hs.full]
    return vec, scal


def impedance_matrix(mesh: Mesh, frequency_hz: float, *, direct: bool = False) -> np.ndarray:
    """Galerkin impedance matrix Z (Nb x Nb, ohm) of ``mesh`` at ``frequency_hz``.

    Z = j k eta (A_static + A_smooth) - j (eta / k) (S_static + S_smooth) + loading, the free-space
    static parts precomputed per mesh (``static_galerkin``); per frequency only the smooth kernel,
    the ground (Sommerfeld table read, or the image with its frequency-dependent Fresnel weights)
    and the loading are formed. ``direct``: Sommerfeld integrals without a table (slow; tests).
    """
    k = 2.0 * math.pi * frequency_hz / C0
    ll = mesh.length[:, None] * mesh.length[None, :]
    if mesh.dist_unique is not None:
        values, index = mesh.dist_unique
        g = _smooth_kernel(values, k)[index]
    else:
        g = _smooth_kernel(mesh.dist, k)
    vec, scal = _smooth_pairs(g, mesh.pair[0] * ll, ll)
    if mesh.half_space is not None:
        v_r, s_r = _half_space_terms(mesh, frequency_hz, k, direct)
        vec, scal = vec + v_r, scal + s_r
    elif mesh.static_img is not None and mesh.dist_img is not None:
        w_vec, w_scal = _image_factors(mesh, frequency_hz)
        v_img, s_img = _smooth_pairs(_smooth_kernel(mesh.dist_img, k), w_vec * ll, w_scal * ll)
        vec = vec + v_img + mesh.static_img * w_vec
        scal = scal + s_img + mesh.static_img.sum(axis=(0, 1)) * w_scal
    a_static, s_static = mesh.static_galerkin
    c_vec, c_scal = 1j * k * ETA0, -1j * ETA0 / k
    Z = (c_vec * (_galerkin(mesh.cols, mesh.signs, _by_end(vec)) / (4.0 * math.pi) + a_static)
         + c_scal * (_galerkin(mesh.segs, mesh.divs, scal) / (4.0 * math.pi) + s_static))
    return Z + _loading(mesh, frequency_hz)


def _unit_drives(mesh: Mesh) -> np.ndarray:
    """Excitation vectors e_p: 1 V on port p's basis function, (N, P)."""
    V = np.zeros((mesh.n_unknowns, mesh.port_basis.size))
    V[mesh.port_basis, np.arange(mesh.port_basis.size)] = 1.0
    return V


def port_responses(mesh: Mesh, frequency_hz: float, *, direct: bool = False) -> np.ndarray:
    """Basis currents for 1 V on each port in turn, Z^-1 e_p, (N, P) complex, A/V.

    One impedance-matrix fill and solve; port impedances and currents for any drive follow
    (:func:`impedances_from`, :func:`currents_from`). ``direct``: see :func:`impedance_matrix`.
    """
    return np.linalg.solve(impedance_matrix(mesh, frequency_hz, direct=direct),
                           _unit_drives(mesh).astype(complex))


def impedances_from(mesh: Mesh, responses: np.ndarray) -> np.ndarray:
    """Open-circuit port impedance matrix (P, P), ohm, from :func:`port_responses`."""
    return np.linalg.inv(responses[mesh.port_basis])


def currents_from(mesh: Mesh, frequency_hz: float, responses: np.ndarray,
                  drive_v: float | np.ndarray = 1.0) -> SegmentCurrents:
    """Segment currents with the ports driven by ``drive_v`` (V, one value or one per port),
    from :func:`port_responses` at ``frequency_hz`` (by linearity: c = sum_p V_p Z^-1 e_p)."""
    drive = np.broadcast_to(np.asarray(drive_v, dtype=complex), (mesh.port_basis.size,))
    c = responses @ drive
    ends = (mesh.T.T @ c).reshape(-1, 2)                  # current at each segment end, along t
    p_in = 0.5 * float(np.real(np.vdot(c[mesh.port_basis], drive)))
    R = _loading(mesh, frequency_hz, loss_only=True)
    p_loss = 0.5 * float(np.real(np.vdot(c, R @ c)))
    return SegmentCurrents(
        frequency_hz=float(frequency_hz), centres=(mesh.p0 + mesh.p1) / 2.0,
        vectors=mesh.p1 - mesh.p0, currents=ends.mean(axis=1), input_power_w=p_in,
        conductor_loss_w=p_loss)


def port_impedances(mesh: Mesh, frequencies_hz: np.ndarray | float, *,
                    direct: bool = False) -> np.ndarray:
    """Open-circuit impedance matrix of the ports, (F, P, P) complex ohm, one fill per frequency
    and nothing kept (a build asks :class:`buildsheet.em.context.Solver` instead)."""
    f = np.atleast_1d(np.asarray(frequencies_hz, dtype=float))
    return np.stack([impedances_from(mesh, port_responses(mesh, float(fi), direct=direct))
                     for fi in f])


def currents_on(mesh: Mesh, frequency_hz: float, drive_v: float | np.ndarray = 1.0) -> SegmentCurrents:
    """Segment currents of ``mesh`` driven by ``drive_v`` (one fill, nothing kept)."""
    return currents_from(mesh, frequency_hz, port_responses(mesh, frequency_hz), drive_v)


def mesh_for(antenna: DeployedAntenna, max_frequency_hz: float | None = None,
             segment_counts: tuple[int, ...] | None = None,
             tables: sommerfeld.TableStore | None = None) -> Mesh:
    """Mesh of ``antenna`` segmented for ``max_frequency_hz`` (or ``segment_counts``)."""
    return build_mesh(build_structure(antenna, max_frequency_hz, segment_counts=segment_counts),
                      tables)


def segmentation_frequency(antenna: DeployedAntenna, frequencies_hz: np.ndarray) -> float:
    """Highest frequency analysed: the top band edge, or a higher requested frequency, Hz."""
    return float(max(highest_frequency(antenna), float(np.max(frequencies_hz))))


def feed_impedance(antenna: DeployedAntenna, frequencies_hz: np.ndarray | float) -> np.ndarray:
    """Impedance at the shared feed point, complex ohm, one per frequency (a one-off question:
    the mesh is built and filled here and nothing is kept)."""
    f = np.atleast_1d(np.asarray(frequencies_hz, dtype=float))
    return port_impedances(mesh_for(antenna, segmentation_frequency(antenna, f)), f)[:, 0, 0]


def segment_currents(antenna: DeployedAntenna, frequency_hz: float,
                     drive_v: float = 1.0) -> SegmentCurrents:
    """Currents on every segment of ``antenna`` driven by ``drive_v`` volts at the feed (one-off)."""
    mesh = mesh_for(antenna, segmentation_frequency(antenna, np.array([frequency_hz])))
    return currents_on(mesh, frequency_hz, drive_v)


def describe(mesh: Mesh) -> str:
    """One line naming the model, its size and the ground, for the sheet."""
    g = mesh.structure.ground
    ground = g.title + (f" ({g.model_title})" if g.kind == "real" else
                        " (image theory)" if g.kind == "perfect" else "")
    return (f"thin-wire method of moments, {mesh.n_segments} segments, "
            f"{mesh.n_unknowns} unknowns, ground: {ground}")
