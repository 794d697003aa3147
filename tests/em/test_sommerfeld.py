"""Sommerfeld half-space kernels against independent evaluations (sources named per check).

The independent evaluation here integrates along a different path: a detour into the first
quadrant of the complex krho plane (allowed for exp(+j omega t): the branch points and poles lie
in the fourth quadrant), then the real axis, with scipy.integrate.quad, point by point and
without a table. Errors are stated relative to the image kernel exp(-j k0 R')/(4 pi R')
(R' the distance to the image point), the natural size of a reflected kernel.
"""

import math

import numpy as np
import pytest
from scipy.integrate import quad
from scipy.special import jv

from buildsheet.constants import EPS0
from buildsheet.em import sommerfeld as sf
from buildsheet.em.ground import GROUND_CLASSES, fresnel_horizontal

LAM = 80.0
K0 = 2 * math.pi / LAM


def eps_c(key, lam=LAM):
    g = GROUND_CLASSES[key]
    return complex(g.eps_r, -g.sigma / (2 * math.pi * 299_792_458.0 / lam * EPS0))


def detour(eps, k0, rho, zeta, k):
    """Kernel k at (rho, zeta) by quad on krho = x + j b sin(pi x/X), 0 <= x <= X, then x > X."""
    big = 1.3 * max(1.0, abs(np.sqrt(eps).real)) * k0 + k0
    b = min(0.5 * k0, 1.0 / max(rho, 1e-9))

    def f(kr, dkr):
        kr = np.atleast_1d(kr)
        kz0 = np.sqrt(k0 * k0 - kr * kr + 0j)
        kz0 = np.where(kz0.imag > 0, -kz0, kz0)
        F = sf.spectral_functions(kr, kz0, eps, k0)[k]
        jr = (jv(1, kr * rho) / rho if rho > 0 else kr / 2) if k == 3 else jv(0, kr * rho)
        return (F * np.exp(-1j * kz0 * zeta) * jr * kr / (1j * kz0) * dkr)[0] / (4 * math.pi)

    def on_detour(x, part):
        kr = x + 1j * b * math.sin(math.pi * x / big)
        v = f(kr, 1 + 1j * b * math.pi / big * math.cos(math.pi * x / big))
        return v.imag if part else v.real

    def on_axis(x, part):
        v = f(x, 1.0)
        return v.imag if part else v.real

    total = 0j
    for part, unit in ((0, 1), (1, 1j)):
        a = quad(on_detour, 0, big, args=(part,), limit=400, epsabs=1e-13, epsrel=1e-11)[0]
        c = quad(on_axis, big, big + 40.0 / zeta, args=(part,), limit=4000, epsabs=1e-13,
                 epsrel=1e-11)[0]
        total += unit * (a + c)
    return total


def image_scale(rho, zeta):
    """4 pi R' (and 4 pi R' (R' + zeta) for G_x / rho): the kernels relative to the image."""
    r = np.hypot(rho, zeta)
    return np.stack([4 * math.pi * r] * 3 + [4 * math.pi * r * (r + zeta)])


def test_sommerfeld_identity_on_the_path():
    # Sommerfeld (1909) identity, shared REFERENCES.md section 12: with F = 1 and nu = 0 the
    # integral is exp(-j k0 R')/(4 pi R'). Checks the path, its weights and the tail.
    path = sf.spectral_path(eps_c("medium_dry"), K0, 2.0, 45.0)
    for rho, zeta in ((0.0, 2.0), (5.0, 2.0), (45.0, 2.0), (10.0, 20.0), (0.3, 40.0)):
        got = np.sum(path.weight * np.exp(-1j * path.kz0 * zeta) * sf.j0(path.krho * rho))
        r = math.hypot(rho, zeta)
        want = np.exp(-1j * K0 * r) / r
        assert abs(got / (4 * math.pi) - want / (4 * math.pi)) * 4 * math.pi * r < 1e-6


@pytest.mark.parametrize("key", ["medium_dry", "very_dry", "sea"])
def test_direct_kernels_against_detour_path(key):
    # Independent evaluation (another path, adaptive quad, no table) to 1e-4 (issue 10).
    eps = eps_c(key)
    pts = np.array([(0.0, 2.1), (3.0, 2.5), (44.0, 2.2), (10.0, 15.0)])
    got = sf.direct_kernels(eps, K0, pts[:, 0], pts[:, 1])
    for p, (rho, zeta) in enumerate(pts):
        want = np.array([detour(eps, K0, rho, zeta, k) for k in range(4)])
        err = np.abs(got[:, p] - want) * image_scale(rho, zeta)
        assert err.max() < 1e-4, (key, rho, zeta, err)


@pytest.mark.parametrize("key,lam", [("medium_dry", 80.0), ("wet", 42.0), ("very_dry", 56.0),
                                     ("sea", 80.0)])
def test_table_reads_the_direct_kernels(key, lam):
    # The tabulated, interpolated kernels against the direct path at random off-grid points,
    # 1e-4 relative to the image kernel (issue 10); the direct path is itself checked above.
    k0 = 2 * math.pi / lam
    rng = np.random.default_rng(7)
    rho = rng.uniform(0.0, 42.0, 300)
    zeta = np.exp(rng.uniform(math.log(2.1), math.log(19.0), 300))
    grid = sf.table_grid(sf.covering_domain(42.0, 2.1, 19.0))
    table = sf.build_table(eps_c(key, lam), k0, grid)
    got = sf.table_kernels(table, rho, zeta)
    want = sf.direct_kernels(eps_c(key, lam), k0, rho, zeta)
    assert (np.abs(got - want) * image_scale(rho, zeta)).max() < 1e-4


def test_perfect_conductor_limit_is_the_image():
    # Shared REFERENCES.md section 12: sigma -> infinity gives R_TE -> -1, R_TM -> +1, the
    # perfect-ground image (horizontal current and charge reversed, vertical current kept):
    # G_te = -G_img, G_zz = +G_img, G_phi = -G_img, G_x = 0.
    eps = complex(15.0, -1e9 / (2 * math.pi * 3.75e6 * EPS0))
    rho = np.array([0.0, 4.0, 30.0])
    zeta = np.array([3.0, 6.0, 12.0])
    got = sf.direct_kernels(eps, K0, rho, zeta) * image_scale(rho, zeta)
    phase = np.exp(-1j * K0 * np.hypot(rho, zeta))
    for k, sign in enumerate((-1.0, 1.0, -1.0, 0.0)):
        assert np.abs(got[k] - sign * phase).max() < 1e-3


def test_no_contrast_gives_no_reflection():
    # Shared REFERENCES.md section 12: eps_c = 1 gives no reflected field.
    got = sf.direct_kernels(1.0 + 0j, K0, np.array([0.0, 5.0]), np.array([3.0, 9.0]))
    assert np.abs(got).max() < 1e-15
    kr = np.array([0.5 * K0, 3 * K0])
    spec = sf.spectral_functions(kr, sf._kz(K0 * K0, kr), 1.0 + 0j, K0)
    assert np.abs(spec).max() == 0.0


@pytest.mark.parametrize("psi_deg", [90.0, 30.0])
def test_far_field_is_the_fresnel_image(psi_deg):
    # Far from the source the reflected horizontal-current kernel tends to the plane-wave
    # reflection at the specular angle: G_te -> Gamma_h(psi) exp(-j k0 R')/(4 pi R')
    # (Balanis, Antenna Theory, sec. 4.8, Fresnel coefficient; error O(1/(k0 R'))).
    eps = eps_c("medium_dry")
    r = 100.0 * LAM
    psi = math.radians(psi_deg)
    rho, zeta = np.array([r * math.cos(psi)]), np.array([r * math.sin(psi)])
    got = sf.direct_kernels(eps, K0, rho, zeta)[0, 0] * 4 * math.pi * r * np.exp(1j * K0 * r)
    want = complex(fresnel_horizontal(eps, psi))
    assert abs(got - want) < 5e-3 * abs(want)


def test_domain_rounding_covers_and_is_stable():
    d = sf.covering_domain(40.0, 2.3, 17.0)
    assert d.rho_max >= 40.0 and d.zeta_min <= 2.3 and d.zeta_max >= 17.0
    assert sf.covering_domain(40.5, 2.25, 17.2) == d  # a small move reuses the table
    grid = sf.table_grid(d)
    with pytest.raises(ValueError):
        sf.interpolation_matrix(grid, np.array([0.0]), np.array([d.zeta_min / 2]))


def test_store_builds_each_table_once():
    store = sf.TableStore()
    grid = sf.table_grid(sf.covering_domain(20.0, 4.0, 12.0))
    a = store.table(eps_c("wet"), K0, grid)
    assert store.table(eps_c("wet"), K0, grid) is a and store.built == 1
    store.table(eps_c("wet"), K0 * 1.01, grid)
    assert store.built == 2
