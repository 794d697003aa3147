"""NVIS coverage: far field of segment currents over ground, NVIS figures and height advice.

Method: the reflection-coefficient ("image weighted by Fresnel Gamma") far-field method
(Balanis, Antenna Theory, 3rd ed., sections 4.7-4.8; shared REFERENCES.md section 7.2). The
field of every straight segment of uniform current is summed in the far zone; over ground the
image currents (PEC image: horizontal components reversed, vertical kept) are added with their
theta (vertical-polarisation) part weighted by Gamma_v(psi) and their phi (horizontal-
polarisation) part weighted by -Gamma_h(psi), so that perfect ground (Gamma_v = +1,
Gamma_h = -1) gives exact image theory. eps_c = eps_r - j 60 sigma lambda.

Angles: elevation psi above the horizon, compass azimuth alpha clockwise from north; the site
frame is x east, y north, z up (buildsheet.em.currents). Units SI throughout.

Gain normalisation: G = 4 pi U / P_in with P_in = SegmentCurrents.input_power_w. For
``sinusoidal_currents(..., ground=None)`` that is the free-space radiation resistance referred
to the feed, which reproduces the tables of REFERENCES 7.3 but ignores the change of feed
resistance near ground (REFERENCES 7.2 caveat 1) and all near-field ground loss (caveat 2):
at NVIS heights below about 0.1-0.15 wavelength over real ground the true gain is lower.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np

from buildsheet.constants import C0, ETA0
from buildsheet.em.currents import SegmentCurrents
from buildsheet.em.ground import Ground, complex_permittivity, fresnel_horizontal, fresnel_vertical
from buildsheet.errors import BuildError

#: Gain floor for logarithms, dBi (patterns are clipped here instead of -inf).
GAIN_FLOOR_DBI: float = -60.0


# ---------------------------------------------------------------------------------------------
# Far field
# ---------------------------------------------------------------------------------------------


def _basis(elev_rad: np.ndarray, az_rad: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Unit vectors r, theta, phi (each (M, 3)) for elevation/compass azimuth arrays."""
    ce, se = np.cos(elev_rad), np.sin(elev_rad)
    ca, sa = np.cos(az_rad), np.sin(az_rad)
    r = np.stack([ce * sa, ce * ca, se], axis=-1)
    theta = np.stack([se * sa, se * ca, -ce], axis=-1)
    phi = np.stack([-ca, sa, np.zeros_like(ca)], axis=-1)
    return r, theta, phi


def _radiation_vector(
    k: float, centres: np.ndarray, vectors: np.ndarray, currents: np.ndarray, r: np.ndarray
) -> np.ndarray:
    """N(r) = sum_n I_n l_n sinc(k l_n.r / 2) exp(j k r.r_n), A m, shape (M, 3).

    Far field of a uniform-current segment (Balanis eq. 4-58 generalised; e^{+j omega t}).
    """
    phase = np.exp(1j * k * (r @ centres.T))
    u = k * (r @ vectors.T) / 2.0
    weights = phase * np.sinc(u / np.pi) * currents[np.newaxis, :]
    return weights @ vectors


def _field_components(
    sc: SegmentCurrents, ground: Ground, elev_rad: np.ndarray, az_rad: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Radiation-vector components (N_theta, N_phi), A m, direct plus weighted image.

    Upper hemisphere only when ``ground`` is not free space (elev_rad >= 0).
    """
    k = 2.0 * math.pi * sc.frequency_hz / C0
    r, t_hat, p_hat = _basis(elev_rad, az_rad)
    n_dir = _radiation_vector(k, sc.centres, sc.vectors, sc.currents, r)
    n_t = np.sum(n_dir * t_hat, axis=1)
    n_p = np.sum(n_dir * p_hat, axis=1)
    if ground.kind == "free_space":
        return n_t, n_p
    flip = np.array([1.0, 1.0, -1.0])
    img_c = sc.centres * flip
    img_v = sc.vectors * -flip  # PEC image: horizontal parts reversed, vertical kept
    n_img = _radiation_vector(k, img_c, img_v, sc.currents, r)
    gv, gh = _gammas(ground, sc.frequency_hz, elev_rad)
    n_t = n_t + gv * np.sum(n_img * t_hat, axis=1)
    n_p = n_p - gh * np.sum(n_img * p_hat, axis=1)
    return n_t, n_p


def _gammas(ground: Ground, frequency_hz: float, psi: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(Gamma_v, Gamma_h) at grazing angles psi (rad); +1/-1 for perfect ground."""
    if ground.kind == "perfect":
        one = np.ones_like(psi, dtype=complex)
        return one, -one
    assert ground.ground_class is not None
    eps_c = complex_permittivity(ground.ground_class, frequency_hz)
    return fresnel_vertical(eps_c, psi), fresnel_horizontal(eps_c, psi)


def _intensity_factor(frequency_hz: float) -> float:
    """U = factor * |N_transverse|^2, W/sr per (A m)^2: eta k^2 / (32 pi^2)."""
    k = 2.0 * math.pi * frequency_hz / C0
    return ETA0 * k * k / (32.0 * math.pi**2)


def intensity(
    sc: SegmentCurrents, ground: Ground, elevation_deg: np.ndarray, azimuth_deg: np.ndarray
) -> np.ndarray:
    """Radiation intensity U, W/sr, in the given directions (degrees; arrays broadcast).

    U = eta k^2 |N_t|^2 / (32 pi^2) (Balanis eqs. 4-58, 2-12a).
    """
    e, a = np.broadcast_arrays(np.radians(elevation_deg), np.radians(azimuth_deg))
    n_t, n_p = _field_components(sc, ground, e.ravel(), a.ravel())
    u = _intensity_factor(sc.frequency_hz) * (np.abs(n_t) ** 2 + np.abs(n_p) ** 2)
    return u.reshape(e.shape)


def gain_dbi(
    sc: SegmentCurrents, ground: Ground, elevation_deg: np.ndarray, azimuth_deg: np.ndarray
) -> np.ndarray:
    """Gain 10 log10(4 pi U / P_in), dBi, P_in = sc.input_power_w (module docstring)."""
    g = 4.0 * math.pi * intensity(sc, ground, elevation_deg, azimuth_deg) / sc.input_power_w
    return 10.0 * np.log10(np.maximum(g, 10.0 ** (GAIN_FLOOR_DBI / 10.0)))


@dataclass(frozen=True)
class ElevationCuts:
    """Elevation-plane gain cuts through the zenith, dBi.

    angle_deg runs 0..180: 0 is the horizon towards azimuth a0, 90 the zenith, 180 the horizon
    towards a0 + 180. Broadside: a0 = bearing + 90; end-fire: a0 = bearing.
    """

    frequency_hz: float
    bearing_deg: float
    angle_deg: np.ndarray
    broadside_dbi: np.ndarray
    endfire_dbi: np.ndarray


def elevation_cuts(
    sc: SegmentCurrents, ground: Ground, bearing_deg: float, step_deg: float = 1.0
) -> ElevationCuts:
    """Broadside and end-fire elevation cuts for an element along compass ``bearing_deg``."""
    t = np.linspace(0.0, 180.0, round(180.0 / step_deg) + 1)
    elev = np.where(t <= 90.0, t, 180.0 - t)
    side = np.where(t <= 90.0, 0.0, 180.0)
    broad = gain_dbi(sc, ground, elev, bearing_deg + 90.0 + side)
    end = gain_dbi(sc, ground, elev, bearing_deg + side)
    return ElevationCuts(sc.frequency_hz, bearing_deg, t, broad, end)


# ---------------------------------------------------------------------------------------------
# Power integrals (Gauss-Legendre in cos(theta), trapezoid in azimuth)
# ---------------------------------------------------------------------------------------------


def _nodes(sc: SegmentCurrents) -> tuple[int, int]:
    """Quadrature orders (per theta interval, azimuth) scaled to the electrical size."""
    k = 2.0 * math.pi * sc.frequency_hz / C0
    ends = np.concatenate([sc.centres - sc.vectors / 2, sc.centres + sc.vectors / 2])
    extent = 2.0 * float(np.max(np.linalg.norm(ends, axis=1)))  # image included
    n = int(min(96, max(12, math.ceil(1.5 * k * extent / 2.0) + 8)))
    return n, 2 * n + 8


def _band_power(
    sc: SegmentCurrents, ground: Ground, zen_lo_deg: float, zen_hi_deg: float, absorbed: bool
) -> float:
    """Power, W, through zenith angles [lo, hi] (deg) integrated over all azimuths.

    absorbed=False: total field (direct + image) U integrated. absorbed=True (lower hemisphere,
    zenith angles > 90): direct U weighted by the transmitted fractions 1 - |Gamma|^2 of each
    polarisation, i.e. the power the ground absorbs in the far-field (plane-wave) estimate.
    """
    n_t, n_a = _nodes(sc)
    x, w = np.polynomial.legendre.leggauss(n_t)
    c_lo, c_hi = math.cos(math.radians(zen_hi_deg)), math.cos(math.radians(zen_lo_deg))
    cos_t = 0.5 * (c_hi - c_lo) * x + 0.5 * (c_hi + c_lo)
    w_t = 0.5 * (c_hi - c_lo) * w
    az = np.linspace(0.0, 2.0 * math.pi, n_a, endpoint=False)
    elev = np.arcsin(np.clip(cos_t, -1.0, 1.0))
    e2, a2 = np.meshgrid(elev, az, indexing="ij")
    fac = _intensity_factor(sc.frequency_hz)
    if absorbed:
        n_t_c, n_p_c = _field_components(sc, Ground("free_space"), e2.ravel(), a2.ravel())
        gv, gh = _gammas(ground, sc.frequency_hz, np.abs(e2.ravel()))
        u = fac * (
            np.abs(n_t_c) ** 2 * (1.0 - np.abs(gv) ** 2)
            + np.abs(n_p_c) ** 2 * (1.0 - np.abs(gh) ** 2)
        )
    else:
        n_t_c, n_p_c = _field_components(sc, ground, e2.ravel(), a2.ravel())
        u = fac * (np.abs(n_t_c) ** 2 + np.abs(n_p_c) ** 2)
    u = u.reshape(e2.shape)
    return float(np.sum(w_t[:, np.newaxis] * u) * (2.0 * math.pi / n_a))


def free_space_radiated_power(sc: SegmentCurrents) -> float:
    """Total power the currents radiate in free space, W (numerical integral of U over 4 pi)."""
    fs = Ground("free_space")
    return _band_power(sc, fs, 0.0, 90.0, False) + _band_power(sc, fs, 90.0, 180.0, False)


@dataclass(frozen=True)
class PowerBudget:
    """Far-field power budget over ground, W.

    up_w: radiated into the upper half space (total field); absorbed_w: direct downward power
    not reflected (plane-wave estimate, excludes near-field ground loss); up_above_60_w and
    up_above_45_w: parts of up_w above 60 and 45 degrees elevation.
    """

    up_w: float
    absorbed_w: float
    up_above_60_w: float
    up_above_45_w: float


def power_budget(sc: SegmentCurrents, ground: Ground) -> PowerBudget:
    """Integrate the far field over the upper half space and the ground's absorption."""
    p0_30 = _band_power(sc, ground, 0.0, 30.0, False)
    p30_45 = _band_power(sc, ground, 30.0, 45.0, False)
    p45_90 = _band_power(sc, ground, 45.0, 90.0, False)
    if ground.kind == "free_space":
        absorbed = 0.0  # nothing below is absorbed; lower half radiates freely
        below = _band_power(sc, ground, 90.0, 180.0, False)
        return PowerBudget(p0_30 + p30_45 + p45_90 + below, absorbed, p0_30, p0_30 + p30_45)
    absorbed = 0.0 if ground.kind == "perfect" else _band_power(sc, ground, 90.0, 180.0, True)
    return PowerBudget(p0_30 + p30_45 + p45_90, absorbed, p0_30, p0_30 + p30_45)


# ---------------------------------------------------------------------------------------------
# Closed-form source: sinusoidal current on a (possibly inverted-V) dipole
# ---------------------------------------------------------------------------------------------


def sinusoidal_currents(
    feed_height_m: float,
    leg_length_m: float,
    end_height_m: float,
    bearing_deg: float,
    frequency_hz: float,
    radius_m: float,
    n_per_leg: int = 41,
    ground: Ground | None = None,
) -> SegmentCurrents:
    """Sinusoidal current I(s) = sin(k (L - |s|)) / sin(k L_ref) on a centre-fed dipole.

    Two straight legs of length L = ``leg_length_m`` run from the feed at ``feed_height_m``
    down to ``end_height_m`` (equal heights: flat dipole) along compass ``bearing_deg`` and
    bearing + 180. The feed current is 1 A unless sin(kL) is near zero (a full-wave leg pair),
    then the loop current is 1 A. The thin-wire sinusoidal-current assumption of the
    induced-EMF method (Balanis section 4.6, 8.5; Carter 1932); ``radius_m`` only bounds the
    thin-wire validity (the far field of a thin wire does not depend on it).

    input_power_w: with ``ground`` None, the free-space radiated power obtained by integrating
    the free-space pattern (= I_feed^2 R_rad/2 referred to the feed; 73.08 ohm for a half-wave);
    with a ground, the far-field power balance over it (upward power + plane-wave ground
    absorption), which over perfect ground equals the induced-EMF R_in = R11 - R21(2h)
    (REFERENCES section 4) and over real ground omits near-field ground loss.
    """
    if not (0.0 <= end_height_m <= feed_height_m):
        raise BuildError(f"end height {end_height_m} m must lie between 0 and the feed height")
    drop = feed_height_m - end_height_m
    if leg_length_m <= drop or leg_length_m <= 0.0:
        raise BuildError(f"leg of {leg_length_m} m cannot drop {drop} m")
    if not (0.0 < radius_m < leg_length_m / 10.0):
        raise BuildError(f"wire radius {radius_m} m must be positive and thin against the leg")
    k = 2.0 * math.pi * frequency_hz / C0
    horiz = math.sqrt(leg_length_m**2 - drop**2)
    b = math.radians(bearing_deg)
    out = np.array([math.sin(b), math.cos(b), 0.0])
    leg_dir = (out * horiz + np.array([0.0, 0.0, -drop])) / leg_length_m  # feed -> end, leg 1
    leg2_dir = leg_dir * np.array([-1.0, -1.0, 1.0])  # feed -> end, leg 2
    feed = np.array([0.0, 0.0, feed_height_m])
    ds = leg_length_m / n_per_leg
    s = (np.arange(n_per_leg) + 0.5) * ds
    c1 = feed + s[:, np.newaxis] * leg_dir
    c2 = feed + s[:, np.newaxis] * leg2_dir
    # positive current flows from end 2 through the feed to end 1
    v1 = np.tile(leg_dir * ds, (n_per_leg, 1))
    v2 = np.tile(-leg2_dir * ds, (n_per_leg, 1))
    ref = math.sin(k * leg_length_m)
    scale = 1.0 / ref if abs(ref) > 0.05 else 1.0
    # segment-average of sin(k(L - s)) over each segment (exact integral)
    avg = (np.cos(k * (leg_length_m - s - ds / 2)) - np.cos(k * (leg_length_m - s + ds / 2))) / (
        k * ds
    )
    i_leg = avg * scale
    sc = SegmentCurrents(
        frequency_hz=frequency_hz,
        centres=np.concatenate([c1, c2]),
        vectors=np.concatenate([v1, v2]),
        currents=np.concatenate([i_leg, i_leg]).astype(complex),
        input_power_w=1.0,
    )
    if ground is None or ground.kind == "free_space":
        p = free_space_radiated_power(sc)
    else:
        budget = power_budget(sc, ground)
        p = budget.up_w + budget.absorbed_w
    return SegmentCurrents(sc.frequency_hz, sc.centres, sc.vectors, sc.currents, p, 0.0)


def feed_resistance_ohm(sc: SegmentCurrents, feed_current_a: complex = 1.0) -> float:
    """Input resistance 2 P_in / |I_feed|^2, ohm, for a source driven with ``feed_current_a``."""
    return 2.0 * sc.input_power_w / abs(feed_current_a) ** 2


# ---------------------------------------------------------------------------------------------
# NVIS figures
# ---------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class NvisFigures:
    """NVIS figures of one band over one ground.

    zenith_gain_dbi: gain straight up (normalisation: module docstring);
    share_above_60 / share_above_45: fractions of the power radiated into the upper half space
    that leave above 60 / 45 degrees elevation; main_lobe_elevation_deg and main_lobe_gain_dbi:
    the strongest direction in the upper half space (elevation 0-90); ground_loss_share: share
    of the input power, after conductor loss, not radiated into the upper half space
    ((P_in - P_conductor - P_up) / (P_in - P_conductor)); efficiency: P_up / P_in. With currents
    and input power from an exact-ground (Sommerfeld) solve both include the near-field ground
    loss; with sinusoidal currents the input power is the far-field balance (up + plane-wave
    absorption), a lower bound on the loss at NVIS heights (REFERENCES 7.2 caveat 2).
    """

    frequency_hz: float
    ground_title: str
    zenith_gain_dbi: float
    share_above_60: float
    share_above_45: float
    main_lobe_elevation_deg: float
    main_lobe_gain_dbi: float
    ground_loss_share: float
    efficiency: float = 1.0


def nvis_figures(sc: SegmentCurrents, ground: Ground, az_step_deg: float = 5.0) -> NvisFigures:
    """Zenith gain, high-angle power shares, main lobe, ground loss and efficiency for one band."""
    budget = power_budget(sc, ground)
    elev = np.arange(0.0, 90.0 + 0.5, 1.0)
    az = np.arange(0.0, 360.0, az_step_deg)
    e2, a2 = np.meshgrid(elev, az, indexing="ij")
    g = gain_dbi(sc, ground, e2, a2)
    i_best = np.unravel_index(int(np.argmax(g)), g.shape)
    zenith = float(gain_dbi(sc, ground, np.array([90.0]), np.array([0.0]))[0])
    net = sc.input_power_w - sc.conductor_loss_w
    lost = 0.0 if ground.kind != "real" else min(max(net - budget.up_w, 0.0), net)
    return NvisFigures(
        frequency_hz=sc.frequency_hz,
        ground_title=ground.title,
        zenith_gain_dbi=zenith,
        share_above_60=budget.up_above_60_w / budget.up_w,
        share_above_45=budget.up_above_45_w / budget.up_w,
        main_lobe_elevation_deg=float(elev[i_best[0]]),
        main_lobe_gain_dbi=float(g[i_best]),
        ground_loss_share=lost / net,
        efficiency=min(budget.up_w / sc.input_power_w, 1.0),
    )


def zenith_gain_dbi(sc: SegmentCurrents, ground: Ground) -> float:
    """Gain straight up, dBi (normalised to sc.input_power_w)."""
    return float(gain_dbi(sc, ground, np.array([90.0]), np.array([0.0]))[0])


# ---------------------------------------------------------------------------------------------
# Height advice
# ---------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class HeightAdvice:
    """Zenith gain vs apex height for one band.

    heights_m / zenith_gain_dbi: the sweep; best_height_m: highest zenith gain; range_low_m ..
    range_high_m: the contiguous heights around the best within ``tolerance_db`` of it (edges
    interpolated linearly); recommended_height_m = range_low_m, the lowest mast that stays
    within the tolerance.
    """

    frequency_hz: float
    wavelength_m: float
    heights_m: np.ndarray
    zenith_gain_dbi: np.ndarray
    best_height_m: float
    best_gain_dbi: float
    range_low_m: float
    range_high_m: float
    tolerance_db: float

    @property
    def recommended_height_m(self) -> float:
        return self.range_low_m


def zenith_sweep(
    currents_at_height: Callable[[float], SegmentCurrents], ground: Ground, heights_m: np.ndarray
) -> np.ndarray:
    """Zenith gain, dBi, of the source built at each apex height (m)."""
    return np.array([zenith_gain_dbi(currents_at_height(float(h)), ground) for h in heights_m])


def _range_within(h: np.ndarray, g: np.ndarray, i_best: int, tol: float) -> tuple[float, float]:
    """Contiguous interval around index i_best where g >= g[i_best] - tol, interpolated edges."""
    ok = g >= g[i_best] - tol
    lo = i_best
    while lo > 0 and ok[lo - 1]:
        lo -= 1
    hi = i_best
    while hi < len(h) - 1 and ok[hi + 1]:
        hi += 1
    level = g[i_best] - tol

    def edge(i_in: int, i_out: int) -> float:
        t = (g[i_in] - level) / (g[i_in] - g[i_out])
        return float(h[i_in] + t * (h[i_out] - h[i_in]))

    h_lo = edge(lo, lo - 1) if lo > 0 else float(h[0])
    h_hi = edge(hi, hi + 1) if hi < len(h) - 1 else float(h[-1])
    return h_lo, h_hi


def height_advice(
    currents_at_height: Callable[[float], SegmentCurrents],
    ground: Ground,
    frequency_hz: float,
    low_wavelengths: float = 0.05,
    high_wavelengths: float = 0.35,
    steps: int = 31,
    tolerance_db: float = 1.0,
) -> HeightAdvice:
    """Sweep the apex height from low to high wavelengths and report the best zenith gain.

    The sweep is over ``steps`` evenly spaced heights (default 0.01 wavelength apart).
    """
    lam = C0 / frequency_hz
    h = np.linspace(low_wavelengths * lam, high_wavelengths * lam, steps)
    return advice_from_sweep(h, zenith_sweep(currents_at_height, ground, h), frequency_hz,
                             tolerance_db)


def advice_from_sweep(heights_m: np.ndarray, gains_dbi: np.ndarray, frequency_hz: float,
                      tolerance_db: float = 1.0) -> HeightAdvice:
    """Best height and the ``tolerance_db`` window from a zenith-gain sweep already computed
    (heights in m ascending, gains in dBi)."""
    h, g = np.asarray(heights_m, dtype=float), np.asarray(gains_dbi, dtype=float)
    i = int(np.argmax(g))
    lo, hi = _range_within(h, g, i, tolerance_db)
    return HeightAdvice(frequency_hz, C0 / frequency_hz, h, g, float(h[i]), float(g[i]), lo, hi,
                        tolerance_db)


@dataclass(frozen=True)
class CompromiseHeight:
    """One apex height for several bands of one antenna.

    Shortfall of a band at a height: its best zenith gain on the common sweep minus its zenith
    gain there, dB. height_m (the compromise) is the LOWEST height at which every band's
    shortfall is within ``tolerance_db``, the same rule as HeightAdvice.recommended_height_m
    (the shortest mast that gives every band nearly its best); if no height qualifies it is the
    minimax height. minimax_height_m maximises the worst band's gain relative to its own best.
    shortfall_db: each band's shortfall at height_m; worst_shortfall_db: their maximum.
    """

    height_m: float
    minimax_height_m: float
    tolerance_db: float
    frequencies_hz: tuple[float, ...]
    shortfall_db: tuple[float, ...]
    worst_shortfall_db: float
    heights_m: np.ndarray
    zenith_gain_dbi: np.ndarray  # (bands, heights)


def compromise_height(
    sources: Sequence[Callable[[float], SegmentCurrents]],
    ground: Ground,
    frequencies_hz: Sequence[float],
    low_m: float | None = None,
    high_m: float | None = None,
    step_m: float = 0.25,
    tolerance_db: float = 1.0,
) -> CompromiseHeight:
    """Compromise apex height for one antenna's bands (one source per band; see the class).

    The default sweep runs from 0.05 wavelength of the highest band to 0.35 wavelength of the
    lowest, so that every band's own 0.05-0.35 wavelength range is covered.
    """
    lams = [C0 / f for f in frequencies_hz]
    lo = 0.05 * min(lams) if low_m is None else low_m
    hi = 0.35 * max(lams) if high_m is None else high_m
    h = np.arange(lo, hi + step_m / 2, step_m)
    g = np.stack([zenith_sweep(src, ground, h) for src in sources])
    return compromise_from_sweeps(h, g, frequencies_hz, tolerance_db)


def compromise_from_sweeps(heights_m: np.ndarray, gains_dbi: np.ndarray,
                           frequencies_hz: Sequence[float], tolerance_db: float = 1.0) -> CompromiseHeight:
    """The compromise rule of :func:`compromise_height` applied to zenith-gain sweeps already
    computed on one common grid: ``gains_dbi`` has one row per band over ``heights_m``."""
    h, g = np.asarray(heights_m, dtype=float), np.asarray(gains_dbi, dtype=float)
    short = np.max(g, axis=1, keepdims=True) - g
    worst = np.max(short, axis=0)
    i_mm = int(np.argmin(worst))
    ok = np.flatnonzero(worst <= tolerance_db)
    i = int(ok[0]) if ok.size else i_mm
    return CompromiseHeight(
        float(h[i]),
        float(h[i_mm]),
        tolerance_db,
        tuple(float(f) for f in frequencies_hz),
        tuple(float(x) for x in short[:, i]),
        float(worst[i]),
        h,
        g,
    )


# ---------------------------------------------------------------------------------------------
# Band guidance (common practice; no forecasting)
# ---------------------------------------------------------------------------------------------

_NVIS_ADVICE: tuple[tuple[float, float, str], ...] = (
    (1.8e6, 2.0e6, ("160 m: night only, and mostly in winter and at solar minimum, when 75/80 m "
                    "goes above the critical frequency; absorbed by day (common practice).")),
    (3.3e6, 4.1e6, "75/80 m: the night and early-morning NVIS band (common practice)."),
    (5.2e6, 5.5e6, "60 m: the steadiest between day and night, dusk and dawn (common practice)."),
    (6.9e6, 7.4e6, "40 m: the daytime NVIS band (common practice)."),
)


def band_guidance(frequencies_hz: Sequence[float]) -> tuple[str, ...]:
    """General day/night guidance lines for the given bands (mid-latitude common practice).

    Not a forecast: the usable frequency must stay below the ionosphere's critical frequency,
    which changes with time of day, season and the solar cycle.
    """
    lines = [text for lo, hi, text in _NVIS_ADVICE if any(lo <= f <= hi for f in frequencies_hz)]
    if any(f > 10e6 for f in frequencies_hz):
        lines.append("Bands above about 10 MHz seldom support NVIS (common practice).")
    lines.append(
        "General guidance only, not a propagation forecast: NVIS needs a frequency below the "
        "ionosphere's critical frequency, which varies with time of day, season and solar cycle."
    )
    return tuple(lines)
