"""Reflected-field kernels of the mixed-potential EFIE over a homogeneous lossy half-space.

Air z > 0 (wavenumber k0), ground z < 0 with relative complex permittivity
eps_c = eps_r - j sigma/(omega eps0), time dependence exp(+j omega t). Our derivation, in the
spectral-domain (transmission-line) picture of Michalski & Mosig, "Multilayered media Green's
functions in integral equation formulations", IEEE Trans. Antennas Propag. 45(3):508-519, 1997,
with a single scalar-potential kernel for every charge as in their formulation C:

    kz0 = sqrt(k0^2 - krho^2), kz1 = sqrt(eps_c k0^2 - krho^2), Im kz <= 0,
    R_TE = (kz0 - kz1)/(kz0 + kz1),  R_TM = (eps_c kz0 - kz1)/(eps_c kz0 + kz1),
    W = (R_TE + R_TM)/krho^2 = 2 (1 - eps_c) / ((kz0 + kz1)(eps_c kz0 + kz1))   (no cancellation)

and the Sommerfeld integral (REFERENCES section 12), rho the horizontal distance observation
minus source, zeta = z + z' > 0:

    S[F, nu](rho, zeta) = 1/(4 pi) int_0^inf F(krho) exp(-j kz0 zeta) J_nu(krho rho) krho/(j kz0) dkrho.

Matching the exact TE/TM plane-wave reflection of every spectral component of a current element
(test direction t, source direction s, horizontal parts t_h, s_h) to E = -j omega A - grad phi
gives the reflected Galerkin reaction (the free-space form of REFERENCES 5.1 with the kernels)

    Z_mn^r = j k0 eta0 int int f_m f_n [ (t_h . s_h) G_te + t_z s_z G_zz
                                          - j ((t_z s_h - s_z t_h) . rho_vec) G_x / rho ]
             - j (eta0/k0) int int (div f_m)(div' f_n) G_phi,
    G_te = S[R_TE, 0],  G_zz = S[R_TM - kz0^2 W, 0],  G_phi = S[k0^2 W - R_TM, 0],
    G_x = S[kz0 krho W, 1].

Limits (checked in tests): sigma -> infinity gives W = 0, R_TE = -1, R_TM = +1, i.e. the
perfect-ground image (horizontal current and charge reversed, vertical current kept); eps_c = 1
gives no reflection. For large krho the spectral functions tend to 0, 2 r, -r and -j r with
r = (eps_c - 1)/(eps_c + 1) (quasi-static image); for the nu = 0 kernels that part is integrated
analytically (S[1, 0] = exp(-j k0 R')/(4 pi R'), the Sommerfeld identity, R' the distance to
the image point) and only the decaying rest numerically.

Numerics: the real axis split at the branch point k0 (krho = k0 sin t on [0, k0], krho = k0
cosh u just beyond, which removes the 1/kz0 singularity), then Gauss-Legendre panels no wider
than a period of J_nu at the largest rho, with extra panels near the TM near-pole
(kz0 ~ k0/sqrt|eps_c|) and near the ground branch point Re(k0 sqrt eps_c); the factor
exp(-j kz0 zeta) decays beyond k0 and the path ends where it is 1e-8 at the smallest zeta.
The integrand separates into J_nu(krho rho) x exp(-j kz0 zeta), so a whole (rho, zeta) table is
one matrix product per kernel. The table holds the kernels relative to the image,
4 pi R' exp(j k0 R') G (and 4 pi R' (R' + zeta) exp(j k0 R') G_x / rho), smooth in
u = asinh(rho/s0) and v = ln(zeta), and is read by 4 x 4-point Lagrange interpolation.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import sparse
from scipy.special import j0, j1

#: Kernel order in every table and array: G_te, G_zz, G_phi, G_x / rho.
KERNELS: tuple[str, ...] = ("te", "zz", "phi", "x")
#: Gauss-Legendre points per panel of the spectral integral.
PANEL_POINTS: int = 10
#: The path ends where exp(-krho zeta_min) falls to exp(-TAIL_DECAY).
TAIL_DECAY: float = 16.0
#: Table steps in u = asinh(rho/s0) and v = ln(zeta).
U_STEP: float = 0.15
V_STEP: float = 0.1
#: The far-field scale of the rho grid is rho_max / RHO_SCALE.
RHO_SCALE: float = 5.0


@dataclass(frozen=True)
class TableDomain:
    """Region a table covers: 0 <= rho <= rho_max, zeta_min <= zeta <= zeta_max, m."""

    rho_max: float
    zeta_min: float
    zeta_max: float
    rho_scale: float      # far-field step scale of the rho grid, m


def covering_domain(rho_max: float, zeta_min: float, zeta_max: float) -> TableDomain:
    """A domain containing the given one (m), rounded outward to a ladder of ratio 2^(1/4).

    Rounding lets small geometry changes (a resonance solve moving the legs) reuse one table.
    The far-field scale is a fifth of rho_max (about 1/k0 for a half-wave dipole's span).
    """
    step = 2.0 ** 0.25

    def up(x: float) -> float:
        return step ** math.ceil(math.log(x, step) + 1e-9)

    def down(x: float) -> float:
        return step ** math.floor(math.log(x, step) - 1e-9)

    lo, r = down(zeta_min), up(max(rho_max, zeta_min, 1e-3))
    return TableDomain(r, lo, max(up(zeta_max * 1.0001), lo * 1.5), max(r / RHO_SCALE, lo))


def _kz(k2: complex, krho: np.ndarray) -> np.ndarray:
    """sqrt(k2 - krho^2) on the proper sheet (Im <= 0) for real or first-quadrant krho."""
    s = np.sqrt(k2 - krho * krho + 0j)
    return np.where(s.imag > 0, -s, s)


def spectral_functions(krho: np.ndarray, kz0: np.ndarray, eps_c: complex,
                       k0: float) -> np.ndarray:
    """The four spectral functions (R_TE, R_TM - kz0^2 W, k0^2 W - R_TM, kz0 krho W), (4, n)."""
    kz1 = _kz(eps_c * k0 * k0, krho)
    rte = (kz0 - kz1) / (kz0 + kz1)
    rtm = (eps_c * kz0 - kz1) / (eps_c * kz0 + kz1)
    w = 2.0 * (1.0 - eps_c) / ((kz0 + kz1) * (eps_c * kz0 + kz1))
    return np.stack([rte, rtm - kz0 * kz0 * w, k0 * k0 * w - rtm, kz0 * krho * w])


def quasi_static(eps_c: complex) -> np.ndarray:
    """Large-krho limits of the four spectral functions: 0, 2 r, -r, -j r; r = (eps_c-1)/(eps_c+1)."""
    r = (eps_c - 1.0) / (eps_c + 1.0)
    return np.array([0.0, 2.0 * r, -r, -1j * r])


@dataclass(frozen=True)
class SpectralPath:
    """Quadrature nodes of the Sommerfeld integral: krho, kz0 and weights w with
    sum_n w_n f(krho_n) ~ int_0^inf f(krho) krho/(j kz0) dkrho (rad/m, rad/m, 1/m)."""

    krho: np.ndarray
    kz0: np.ndarray
    weight: np.ndarray


#: Gauss-Legendre nodes and weights on [-1, 1] (constants of the rule, not solver state).
_GL_X, _GL_W = np.polynomial.legendre.leggauss(PANEL_POINTS)


def _gauss_panels(edges: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Gauss-Legendre nodes and weights on consecutive panels [edges[i], edges[i+1]]."""
    x, w = _GL_X, _GL_W
    a, b = edges[:-1, None], edges[1:, None]
    return ((a + b) / 2 + (b - a) / 2 * x).ravel(), ((b - a) / 2 * w).ravel()


def _split(edges: list[float], width: float) -> np.ndarray:
    """Breakpoints ``edges`` with every interval cut into equal panels no wider than ``width``."""
    e = np.asarray(edges, dtype=float)
    n = np.maximum(1, np.ceil(np.diff(e) / width - 1e-9).astype(int))
    start = np.repeat(e[:-1], n)
    step = np.repeat(np.diff(e) / n, n)
    within = np.arange(n.sum()) - np.repeat(np.cumsum(n) - n, n)
    return np.append(start + step * within, e[-1])


def spectral_path(eps_c: complex, k0: float, zeta_min: float, rho_max: float,
                  zeta_max: float | None = None) -> SpectralPath:
    """Nodes on the real krho axis for zeta_min <= zeta <= zeta_max, rho <= rho_max (module
    docstring); on [0, k0] the panels also follow the phase k0 (rho sin t + zeta cos t)."""
    root = np.sqrt(complex(eps_c))
    delta = float(np.clip(3.0 / abs(root), 0.01, 0.5))        # TM near-pole scale in t and u
    # [0, k0]: krho = k0 sin t, krho/(j kz0) dkrho = -j k0 sin t dt
    reach = k0 * (max(rho_max, 0.0) + max(zeta_max or zeta_min, zeta_min))
    t, wt = _gauss_panels(_split([0.0, math.pi / 2 - delta, math.pi / 2],
                                 min(0.4, 3.0 / max(reach, 1e-9))))
    nodes = [(k0 * np.sin(t), k0 * np.cos(t) + 0j, -1j * k0 * np.sin(t) * wt)]
    # just beyond k0: krho = k0 cosh u, kz0 = -j k0 sinh u, krho/(j kz0) dkrho = k0 cosh u du
    u1 = math.acosh(1.5)
    u, wu = _gauss_panels(_split([0.0, min(delta, u1 / 2), u1], min(0.25, 2.0 / (k0 * zeta_min))))
    nodes.append((k0 * np.cosh(u), -1j * k0 * np.sinh(u) + 0j, k0 * np.cosh(u) * wu))
    # the rest in krho, panels no wider than a period of J at rho_max or 1/zeta_min
    k_start = k0 * math.cosh(u1)
    k_end = max(TAIL_DECAY / zeta_min, 4.0 * k_start)
    breaks = [k_start, k_end]
    k1 = k0 * root.real
    if k_start * 1.05 < k1 < k_end * 0.95:                     # ground branch point near the axis
        grade = [k1 * (1 + s * 2.0 ** -m) for s in (-1, 1) for m in range(1, 9)]
        breaks = sorted({k_start, k_end, k1, *[g for g in grade if k_start < g < k_end]})
    width = min(2.0 * math.pi / max(rho_max, 1e-6), 2.0 / zeta_min)
    kr, wk = _gauss_panels(_split(breaks, width))
    kz = -1j * np.sqrt(kr * kr - k0 * k0)
    nodes.append((kr, kz, kr / (1j * kz) * wk))
    krho, kz0, weight = (np.concatenate(v) for v in zip(*nodes, strict=True))
    return SpectralPath(krho.astype(float), kz0, weight)


def _bessel_rows(krho: np.ndarray, rho: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """J0(krho rho) and J1(krho rho)/rho (-> krho/2 at rho = 0), shape (len(rho), len(krho))."""
    x = np.abs(rho)[:, None] * krho[None, :]
    small = np.abs(rho)[:, None] < 1e-9
    safe = np.where(small, 1.0, np.abs(rho)[:, None])
    return j0(x), np.where(small, krho[None, :] / 2.0, j1(x) / safe)


def _scaled(values: np.ndarray, rho: np.ndarray, zeta: np.ndarray, k0: float) -> np.ndarray:
    """Kernels (4, ...) relative to the image: x 4 pi R' e^{j k0 R'} (and (R' + zeta) for G_x)."""
    r = np.hypot(rho, zeta)
    f = 4.0 * math.pi * r * np.exp(1j * k0 * r)
    return values * np.stack([f, f, f, f * (r + zeta)])


def _unscale(values: np.ndarray, rho: np.ndarray, zeta: np.ndarray, k0: float) -> np.ndarray:
    """Inverse of :func:`_scaled`: kernels (4, ...) in 1/m (G_x / rho in 1/m^2)."""
    r = np.hypot(rho, zeta)
    kr = k0 * r
    f = (np.cos(kr) - 1j * np.sin(kr)) / (4.0 * math.pi * r)
    out = values * f
    out[3] /= r + zeta
    return out


#: Rows per block of the table products: small enough that a threaded BLAS runs each block on
#: one thread (on a busy machine its thread start-up costs far more than these products).
PRODUCT_ROWS: int = 8


def _blocked(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """a @ b in blocks of PRODUCT_ROWS rows of a."""
    return np.concatenate([a[i:i + PRODUCT_ROWS] @ b for i in range(0, a.shape[0], PRODUCT_ROWS)])


def _integrate(path: SpectralPath, eps_c: complex, k0: float, jrows: tuple[np.ndarray, np.ndarray],
               expo: np.ndarray, pairwise: bool) -> np.ndarray:
    """Sum over the path of F_k e^{-j kz0 zeta} J_nu(krho rho) weights, (4, ...), 1/m (x: 1/m^2).

    ``jrows``: J0 and J1/rho, (R, n); ``expo``: exp(-j kz0 zeta), (Z, n). ``pairwise`` pairs the
    rows (R = Z, one value per point) instead of the full R x Z product (a table).
    """
    spec = spectral_functions(path.krho, path.kz0, eps_c, k0)
    spec[:3] -= quasi_static(eps_c)[:3, None]
    a = spec * path.weight[None, :] / (4.0 * math.pi)
    if pairwise:
        return np.stack([np.einsum("pn,pn,n->p", jrows[1] if k == 3 else jrows[0], expo, a[k])
                         for k in range(4)])
    # real Bessel rows times complex columns as one real product: (R, n) @ (n, 2 Z K)
    z = expo.shape[0]
    m0 = np.ascontiguousarray((a[:3, :, None] * expo.T[None]).transpose(1, 0, 2))
    m0 = m0.reshape(m0.shape[0], -1).view(float)
    m1 = np.ascontiguousarray(a[3][:, None] * expo.T).view(float)
    out0 = _blocked(jrows[0], m0).view(complex).reshape(-1, 3, z).transpose(1, 0, 2)
    out1 = _blocked(jrows[1], m1).view(complex)
    return np.concatenate([out0, out1[None]])


def _add_quasi_static(values: np.ndarray, eps_c: complex, k0: float, rho: np.ndarray,
                      zeta: np.ndarray) -> np.ndarray:
    """Add back r_k S[1, 0] = r_k exp(-j k0 R')/(4 pi R') to the nu = 0 kernels."""
    r = np.hypot(rho, zeta)
    image = np.exp(-1j * k0 * r) / (4.0 * math.pi * r)
    c = quasi_static(eps_c)
    out = values.copy()
    for k in range(3):
        out[k] = out[k] + c[k] * image
    return out


def direct_kernels(eps_c: complex, k0: float, rho: np.ndarray, zeta: np.ndarray) -> np.ndarray:
    """Kernels G_te, G_zz, G_phi (1/m) and G_x/rho (1/m^2) at points (rho, zeta), no table, (4, P).

    The slow direct path: the same spectral integral at every point (cost points x nodes).
    """
    rho, zeta = np.broadcast_arrays(np.abs(np.asarray(rho, float)), np.asarray(zeta, float))
    shape = rho.shape
    rho, zeta = rho.ravel(), zeta.ravel()
    path = spectral_path(eps_c, k0, float(zeta.min()), float(rho.max()), float(zeta.max()))
    expo = np.exp(-1j * zeta[:, None] * path.kz0[None, :])
    vals = _integrate(path, eps_c, k0, _bessel_rows(path.krho, rho), expo, pairwise=True)
    return _add_quasi_static(vals, eps_c, k0, rho, zeta).reshape((4, *shape))


@dataclass(frozen=True)
class TableGrid:
    """Nodes of a kernel table: u = asinh(rho/s0) + rho/s1 from -u_step (a mirror row: the
    kernels are even in rho) in n_u steps, v = ln(zeta) from v0 in n_v steps.

    s0 = zeta_min resolves the near field, s1 = rho_scale the far field (m). Frequency
    independent, so one mesh reads tables of every frequency with the same weights.
    """

    domain: TableDomain
    s0: float
    s1: float
    u_step: float
    n_u: int
    v0: float
    v_step: float
    n_v: int

    def nodes(self) -> tuple[np.ndarray, np.ndarray]:
        """rho (n_u,) and zeta (n_v,) of the grid nodes, m (the first rho is the mirror row)."""
        u = (np.arange(self.n_u) - 1) * self.u_step
        return _rho_of(u, self.s0, self.s1), np.exp(self.v0 + np.arange(self.n_v) * self.v_step)


@dataclass(frozen=True, eq=False)
class KernelTable:
    """The four kernels relative to the image on ``grid`` for one frequency and ground.

    values (4, n_u, n_v), dimensionless: 4 pi R' e^{j k0 R'} G_k, and 4 pi R' (R' + zeta)
    e^{j k0 R'} G_x / rho (module docstring).
    """

    eps_c: complex
    k0: float
    grid: TableGrid
    values: np.ndarray

    def image_coefficients(self) -> np.ndarray:
        """Coefficients c_k of the static image c_k/(4 pi R') matching G_te, G_zz, G_phi at the
        nearest tabulated point (rho = 0, zeta_min): the quasi-static image over a weak ground,
        the perfect-ground one over a good conductor. (3,) complex."""
        zeta = math.exp(self.grid.v0)
        return self.values[:3, 1, 0] * np.exp(-1j * self.k0 * zeta)


def _u_of(rho: np.ndarray | float, s0: float, s1: float) -> np.ndarray:
    """Grid coordinate u = asinh(rho/s0) + rho/s1 of a horizontal distance rho (m)."""
    return np.arcsinh(np.asarray(rho) / s0) + np.asarray(rho) / s1


def _rho_of(u: np.ndarray, s0: float, s1: float) -> np.ndarray:
    """Inverse of :func:`_u_of` (odd in u) by Newton steps from below, m."""
    rho = np.minimum(s0 * np.sinh(np.minimum(np.abs(u), 30.0)), np.abs(u) * s1)
    for _ in range(60):
        f = _u_of(rho, s0, s1) - np.abs(u)
        rho = np.maximum(rho - f / (1.0 / np.sqrt(rho * rho + s0 * s0) + 1.0 / s1), 0.0)
        if np.all(np.abs(f) < 1e-13):
            break
    return np.sign(u) * rho


def table_grid(domain: TableDomain) -> TableGrid:
    """The grid covering ``domain`` (at least 4 nodes each way)."""
    s0, s1 = domain.zeta_min, domain.rho_scale
    n_u = max(4, math.ceil(float(_u_of(domain.rho_max, s0, s1)) / U_STEP) + 3)
    v_span = math.log(domain.zeta_max / domain.zeta_min)
    n_v = max(4, math.ceil(v_span / V_STEP) + 1)
    return TableGrid(domain, s0, s1, U_STEP, n_u, math.log(domain.zeta_min),
                     v_span / (n_v - 1), n_v)


def build_table(eps_c: complex, k0: float, grid: TableGrid) -> KernelTable:
    """Tabulate the kernels on ``grid`` for ground ``eps_c`` at wavenumber ``k0`` (rad/m)."""
    rho, zeta = grid.nodes()
    path = spectral_path(eps_c, k0, float(zeta[0]), float(np.abs(rho).max()), float(zeta[-1]))
    expo = np.exp(-1j * zeta[:, None] * path.kz0[None, :])
    vals = _integrate(path, eps_c, k0, _bessel_rows(path.krho, rho), expo, pairwise=False)
    rr, zz = np.meshgrid(np.abs(rho), zeta, indexing="ij")
    vals = _add_quasi_static(vals, eps_c, k0, rr, zz)
    return KernelTable(complex(eps_c), float(k0), grid, _scaled(vals, rr, zz, k0))


class TableStore:
    """Kernel tables built so far, by (eps_c, k0, grid): explicit solver state, one per build
    (or per resonance solve), never module level. Tables are immutable once built."""

    def __init__(self) -> None:
        self._tables: dict[tuple[complex, float, TableGrid], KernelTable] = {}
        self.built = 0

    def table(self, eps_c: complex, k0: float, grid: TableGrid) -> KernelTable:
        """The table for this ground, wavenumber and grid, built on first use."""
        key = (complex(eps_c), float(k0), grid)
        if key not in self._tables:
            self._tables[key] = build_table(eps_c, k0, grid)
            self.built += 1
        return self._tables[key]


def _lagrange4(x: np.ndarray, n: int) -> tuple[np.ndarray, np.ndarray]:
    """First node and the four cubic Lagrange weights at grid coordinate x (nodes 0..n-1)."""
    i0 = np.clip(np.floor(x).astype(int) - 1, 0, n - 4)
    s = x - i0
    w = np.stack([-(s - 1) * (s - 2) * (s - 3) / 6, s * (s - 2) * (s - 3) / 2,
                  -s * (s - 1) * (s - 3) / 2, s * (s - 1) * (s - 2) / 6], axis=-1)
    return i0, w


def interpolation_matrix(grid: TableGrid, rho: np.ndarray, zeta: np.ndarray) -> sparse.csr_matrix:
    """Sparse (P, n_u n_v) matrix of bicubic weights reading a table on ``grid`` at the points.

    Frequency independent: built once per mesh, applied to the table of every frequency.
    Points must lie in the grid's domain (raises ValueError otherwise).
    """
    rho, zeta = np.abs(np.ravel(rho)), np.ravel(zeta)
    d = grid.domain
    if rho.size and (rho.max() > d.rho_max * (1 + 1e-9) or zeta.min() < d.zeta_min * (1 - 1e-9)
                     or zeta.max() > d.zeta_max * (1 + 1e-9)):
        raise ValueError("points outside the kernel table's domain")
    x = _u_of(rho, grid.s0, grid.s1) / grid.u_step + 1.0
    y = (np.log(zeta) - grid.v0) / grid.v_step
    iu, wu = _lagrange4(x, grid.n_u)
    iv, wv = _lagrange4(y, grid.n_v)
    cols = ((iu[:, None] + np.arange(4)[None, :])[:, :, None] * grid.n_v
            + (iv[:, None] + np.arange(4)[None, :])[:, None, :])
    weights = wu[:, :, None] * wv[:, None, :]
    p = rho.size
    return sparse.csr_matrix((weights.reshape(p, 16).ravel(), cols.reshape(p, 16).ravel(),
                              np.arange(0, 16 * p + 1, 16)), shape=(p, grid.n_u * grid.n_v))


def table_scaled(table: KernelTable, weights: sparse.csr_matrix) -> np.ndarray:
    """The table's scaled kernels (4, P) read at the points of ``weights`` (dimensionless)."""
    flat = np.ascontiguousarray(table.values.reshape(4, -1).T).view(float)   # (n, 8) real
    return (weights @ flat).view(complex).T


def table_kernels(table: KernelTable, rho: np.ndarray, zeta: np.ndarray,
                  weights: sparse.csr_matrix | None = None) -> np.ndarray:
    """Kernels G_te, G_zz, G_phi (1/m) and G_x/rho (1/m^2) read from ``table``, (4, P).

    ``weights``: a matrix from :func:`interpolation_matrix` for these points (built if None).
    """
    rho, zeta = np.abs(np.ravel(rho)), np.ravel(zeta)
    w = interpolation_matrix(table.grid, rho, zeta) if weights is None else weights
    return _unscale(table_scaled(table, w), rho, zeta, table.k0)
