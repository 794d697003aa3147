"""Tests for buildsheet.calc.coverage against image theory, optics and REFERENCES.md section 7."""

from __future__ import annotations

import math

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import integrate, optimize

from buildsheet.calc.coverage import (
    band_guidance,
    compromise_height,
    elevation_cuts,
    feed_resistance_ohm,
    free_space_radiated_power,
    gain_dbi,
    height_advice,
    nvis_figures,
    power_budget,
    sinusoidal_currents,
    zenith_gain_dbi,
)
from buildsheet.constants import C0, ETA0
from buildsheet.em.ground import (
    FREE_SPACE,
    GROUND_CLASSES,
    PERFECT_GROUND,
    complex_permittivity,
    fresnel_horizontal,
    fresnel_vertical,
    real_ground,
)
from buildsheet.errors import BuildError

F40 = 7.1e6
LAM40 = C0 / F40
MEDIUM = real_ground("medium_dry")


def flat_dipole(h_over_lam: float, f: float = F40, ground=None, n: int = 41):
    """Flat half-wave dipole (l = lambda/2) at h/lambda, bearing 0 (north-south)."""
    lam = C0 / f
    return sinusoidal_currents(h_over_lam * lam, lam / 4, h_over_lam * lam, 0.0, f, 1e-3, n, ground)


# --- Fresnel limits (standard optics; Balanis, Antenna Theory, section 4.8) --------------------


def test_fresnel_limits():
    psi = np.radians(np.linspace(1.0, 90.0, 90))
    # Perfect conductor (eps_c -> infinity): Gamma_h = -1 at all angles (standard optics).
    assert_allclose(fresnel_horizontal(complex(1.0, -1e12), psi), -1.0, atol=1e-5)
    # Grazing incidence: -1 for both polarisations over any ground (standard optics).
    for g in GROUND_CLASSES.values():
        eps = complex_permittivity(g, F40)
        assert_allclose(fresnel_horizontal(eps, 0.0), -1.0, atol=1e-12)
        assert_allclose(fresnel_vertical(eps, 0.0), -1.0, atol=1e-12)


@pytest.mark.parametrize("eps_r", [3.0, 15.0, 80.0])
def test_brewster_angle_lossless(eps_r):
    # |Gamma_v| minimum (zero) of a lossless dielectric at psi = atan(1/sqrt(er)) above the
    # horizon, i.e. the Brewster angle atan(sqrt(er)) from the normal (standard optics).
    res = optimize.minimize_scalar(
        lambda p: abs(fresnel_vertical(complex(eps_r, 0.0), p)),
        bounds=(1e-3, math.pi / 2),
        method="bounded",
        options={"xatol": 1e-10},
    )
    assert_allclose(math.pi / 2 - res.x, math.atan(math.sqrt(eps_r)), atol=1e-5)
    assert abs(fresnel_vertical(complex(eps_r, 0.0), res.x)) < 1e-4


# --- Free space -------------------------------------------------------------------------------


def test_half_wave_radiation_resistance():
    # R = eta/(4 pi) Cin(2 pi) = 73.08 ohm (Balanis section 4.6; REFERENCES 1.3, computed).
    sc = flat_dipole(0.25)
    assert_allclose(feed_resistance_ohm(sc), 73.08, rtol=2e-3)


def test_half_wave_directivity_free_space():
    # Half-wave dipole directivity 1.643 = 2.15 dBi broadside (Balanis eq. 4-91).
    sc = flat_dipole(0.25)
    g = gain_dbi(sc, FREE_SPACE, np.array([0.0, 0.0]), np.array([90.0, 270.0]))
    assert_allclose(g, 2.15, atol=0.02)


def test_hertzian_pattern_against_scipy_integral():
    # A short dipole's radiated power against the closed form eta k^2 (I l)^2 / (12 pi)
    # (Balanis eq. 4-16), and our quadrature against scipy.integrate of the same pattern.
    f, lgth = 7.1e6, 0.5
    k = 2 * math.pi * f / C0
    sc = sinusoidal_currents(10.0, lgth / 2, 10.0, 0.0, f, 1e-4, 5)
    i_avg = np.sum(sc.currents * np.linalg.norm(sc.vectors, axis=1)) / lgth
    p = free_space_radiated_power(sc)
    p_closed = ETA0 * k**2 * (abs(i_avg) * lgth) ** 2 / (12 * math.pi)
    assert_allclose(p, p_closed, rtol=1e-3)
    u0 = ETA0 * k**2 * (abs(i_avg) * lgth) ** 2 / (32 * math.pi**2)
    p_quad, _ = integrate.quad(lambda t: 2 * math.pi * u0 * math.sin(t) ** 3, 0, math.pi)
    assert_allclose(p, p_quad, rtol=1e-3)


# --- Over ground: image theory and REFERENCES 7.3 ---------------------------------------------


def test_quarter_wave_over_pec_zenith_gain():
    # Image theory: zenith field doubles, 2.15 + 6.02 = 8.17 dBi under the free-space
    # normalisation (Balanis section 4.7.5; REFERENCES 7.3 PEC row, computed); issue asks 0.5 dB.
    g = zenith_gain_dbi(flat_dipole(0.25), PERFECT_GROUND)
    assert abs(g - (2.15 + 20 * math.log10(2))) < 0.5
    assert_allclose(g, 8.17, atol=0.02)


# shared REFERENCES.md section 7.3, computed: zenith gain vs h/lambda, free-space normalisation.
_TABLE_73 = {
    (7.1e6, "perfect"): [-2.03, 3.56, 6.33, 7.74, 8.17, 7.74, 3.56],
    (7.1e6, "sea"): [-1.92, 3.58, 6.32, 7.70, 8.12, 7.66, 3.43],
    (7.1e6, "fresh_water"): [-2.34, 2.80, 5.47, 6.84, 7.25, 6.81, 2.68],
    (7.1e6, "wet"): [-1.27, 3.12, 5.49, 6.68, 6.95, 6.37, 1.86],
    (7.1e6, "medium_dry"): [-1.56, 2.31, 4.63, 5.85, 6.19, 5.73, 1.85],
    (7.1e6, "very_dry"): [0.35, 1.90, 3.21, 4.00, 4.22, 3.87, 1.54],
    (3.6e6, "wet"): [-1.05, 3.43, 5.80, 6.97, 7.22, 6.61, 1.92],
    (3.6e6, "medium_dry"): [-1.30, 2.53, 4.78, 5.95, 6.24, 5.72, 1.66],
    (3.6e6, "very_dry"): [0.48, 2.06, 3.34, 4.08, 4.24, 3.82, 1.37],
}
_HEIGHTS = [0.05, 0.10, 0.15, 0.20, 0.25, 0.30, 0.40]


@pytest.mark.parametrize("key", list(_TABLE_73))
def test_zenith_gain_table(key):
    f, gk = key
    ground = PERFECT_GROUND if gk == "perfect" else real_ground(gk)
    got = [zenith_gain_dbi(flat_dipole(h, f), ground) for h in _HEIGHTS]
    assert_allclose(got, _TABLE_73[key], atol=0.03)


def test_pec_gain_with_ground_referred_input_power():
    # shared REFERENCES.md section 7.3 (computed): PEC zenith gain normalised to R_in(h)
    # = R11 - R21(2h) (section 4), and R_in itself from the section 4 table (induced EMF).
    gains = [8.98, 8.83, 8.55, 8.12, 7.48, 6.53, 2.58]
    r_in = [5.79, 21.72, 43.84, 66.87, 85.60, 96.38, 91.56]
    scs = [flat_dipole(h, ground=PERFECT_GROUND) for h in _HEIGHTS]
    assert_allclose([zenith_gain_dbi(s, PERFECT_GROUND) for s in scs], gains, atol=0.03)
    assert_allclose([feed_resistance_ohm(s) for s in scs], r_in, rtol=3e-3)


def test_broadside_lobe_table():
    # shared REFERENCES.md section 7.3 (computed), broadside lobe data at 7.1 MHz.
    for gk, h, gmax, elev in [
        ("medium_dry", 0.25, 6.29, 64.7),
        ("medium_dry", 0.5, 7.13, 28.2),
        ("wet", 0.25, 7.03, 66.3),
    ]:
        cuts = elevation_cuts(flat_dipole(h), real_ground(gk), 0.0, step_deg=0.1)
        half = cuts.angle_deg <= 90.0
        i = int(np.argmax(cuts.broadside_dbi[half]))
        assert_allclose(cuts.broadside_dbi[half][i], gmax, atol=0.03)
        assert_allclose(cuts.angle_deg[half][i], elev, atol=0.3)


def test_endfire_pec_lobes():
    # Over PEC the end-fire (in-plane) field of a horizontal dipole at h = lambda/2 vanishes at
    # 2 k h sin(psi) = 2 pi, i.e. psi = 90 (Balanis section 4.7.5, image theory).
    cuts = elevation_cuts(flat_dipole(0.5), PERFECT_GROUND, 0.0)
    assert cuts.endfire_dbi[90] < -40.0
    # the cuts are symmetric about the zenith for a symmetric flat dipole
    assert_allclose(cuts.broadside_dbi, cuts.broadside_dbi[::-1], atol=1e-9)


def test_power_budget_pec_balances():
    # Over PEC no power is absorbed, and the upward power equals I^2 R_in(h) / 2 with
    # R_in(0.25 lambda) = 85.60 ohm (REFERENCES section 4, induced EMF, computed).
    b = power_budget(flat_dipole(0.25), PERFECT_GROUND)
    assert b.absorbed_w == 0.0
    assert_allclose(2 * b.up_w, 85.60, rtol=3e-3)


def test_nvis_figures_shares():
    # Lossy ground absorbs part of the power; shares are ordered and within 0..1 (definition).
    fig = nvis_figures(flat_dipole(0.2), MEDIUM)
    assert 0.0 < fig.share_above_60 < fig.share_above_45 < 1.0
    assert 0.0 < fig.ground_loss_share < 1.0
    # Broadside lobe is at the zenith at h = 0.2 (REFERENCES 7.3 lobe table, computed).
    assert fig.main_lobe_elevation_deg >= 80.0
    assert_allclose(fig.zenith_gain_dbi, 5.85, atol=0.03)
    pec = nvis_figures(flat_dipole(0.2), PERFECT_GROUND)
    assert pec.ground_loss_share == 0.0


def test_share_above_matches_scipy_dblquad():
    # Share above 60 degrees against scipy.integrate.dblquad of the same intensity.
    from buildsheet.calc.coverage import intensity

    sc = flat_dipole(0.15, n=11)
    fig = nvis_figures(sc, MEDIUM)

    def u(theta, phi):
        return float(
            intensity(
                sc, MEDIUM, np.array([90 - math.degrees(theta)]), np.array([math.degrees(phi)])
            )[0]
        ) * math.sin(theta)

    top, _ = integrate.dblquad(u, 0, 2 * math.pi, 0, math.pi / 6, epsabs=1e-6)
    allup, _ = integrate.dblquad(u, 0, 2 * math.pi, 0, math.pi / 2, epsabs=1e-6)
    assert_allclose(fig.share_above_60, top / allup, rtol=2e-3)


def test_good_ground_beats_very_dry():
    # Common practice: moist farmland beats dry desert ground (REFERENCES section 11), also
    # shown by the REFERENCES 7.3 tables; both normalisations.
    for h in (0.15, 0.2, 0.25):
        wet, dry = real_ground("wet"), real_ground("very_dry")
        assert zenith_gain_dbi(flat_dipole(h), wet) > zenith_gain_dbi(flat_dipole(h), dry) + 1.5
        assert zenith_gain_dbi(flat_dipole(h, ground=wet), wet) > zenith_gain_dbi(
            flat_dipole(h, ground=dry), dry
        )
        assert (
            nvis_figures(flat_dipole(h), wet).ground_loss_share
            < nvis_figures(flat_dipole(h), dry).ground_loss_share
        )


# --- Inverted V -------------------------------------------------------------------------------


def test_inverted_v_geometry_and_symmetry():
    f = 5.36e6
    sc = sinusoidal_currents(7.5, 13.0, 2.0, 45.0, f, 1e-3, 21)
    ends = sc.centres[[20, 41]]
    assert_allclose(ends[:, 2], 2.0 + (7.5 - 2.0) / 21 / 2, atol=1e-9)  # last segment centres
    assert_allclose(np.sum(np.linalg.norm(sc.vectors, axis=1)), 26.0, rtol=1e-12)
    # bearing 45: the two ends lie NE and SW
    assert ends[0, 0] > 0 and ends[0, 1] > 0 and ends[1, 0] < 0 and ends[1, 1] < 0
    # Drooping the legs reduces the free-space radiation resistance below the flat value
    # (common practice: inverted V feed resistance falls with included angle).
    flat = sinusoidal_currents(7.5, 13.0, 7.5, 45.0, f, 1e-3, 21)
    assert sc.input_power_w < flat.input_power_w


def test_bad_geometry_raises():
    with pytest.raises(BuildError):
        sinusoidal_currents(5.0, 3.0, 1.0, 0.0, F40, 1e-3)  # 3 m leg cannot drop 4 m
    with pytest.raises(BuildError):
        sinusoidal_currents(5.0, 10.0, 6.0, 0.0, F40, 1e-3)  # end above feed


# --- Height advice ----------------------------------------------------------------------------


def test_height_advice_40m_medium_dry():
    # Common practice (REFERENCES section 11): about 0.2 wavelength for transmitting and 0.1
    # for receiving NVIS antennas, so advice should fall in about 0.1-0.25 wavelength. Uses the
    # ground-referred input power (feed resistance change included, REFERENCES 7.2 caveat 1).
    adv = height_advice(
        lambda h: sinusoidal_currents(h, LAM40 / 4, h, 0.0, F40, 1e-3, 21, MEDIUM), MEDIUM, F40
    )
    assert 0.1 <= adv.best_height_m / LAM40 <= 0.25
    assert 0.08 <= adv.recommended_height_m / LAM40 <= 0.25
    assert adv.range_low_m < adv.best_height_m < adv.range_high_m
    # Free-space normalisation peaks at a quarter wave (REFERENCES 7.3 tables, computed).
    adv_fs = height_advice(
        lambda h: sinusoidal_currents(h, LAM40 / 4, h, 0.0, F40, 1e-3, 21), MEDIUM, F40
    )
    assert_allclose(adv_fs.best_height_m / LAM40, 0.25, atol=0.011)
    assert_allclose(adv_fs.best_gain_dbi, 6.19, atol=0.05)
    # edges are where the gain is 1 dB below the best (definition, checked on the sweep)
    g_lo = np.interp(adv_fs.range_low_m, adv_fs.heights_m, adv_fs.zenith_gain_dbi)
    assert_allclose(g_lo, adv_fs.best_gain_dbi - 1.0, atol=0.05)


def test_compromise_75_60_40_near_7_5_m():
    # Common practice (REFERENCES section 11): one 75/60/40 m antenna at about 25 ft (7.5 m).
    # Accepted tolerance 5.5-10 m: the rule is a round figure partly set by 25-ft push-up masts,
    # the shortfall curves are flat near their best (a 0.25 dB change in the 1 dB criterion
    # moves the answer by about 1 m), and the model omits near-field ground loss.
    freqs = (3.9e6, 5.36e6, 7.2e6)

    def source(f):
        leg = C0 / f / 4
        return lambda h: sinusoidal_currents(h, leg, h, 0.0, f, 1e-3, 15, MEDIUM)

    res = compromise_height([source(f) for f in freqs], MEDIUM, freqs)
    assert 5.5 <= res.height_m <= 10.0
    assert res.worst_shortfall_db <= 1.0
    assert res.minimax_height_m >= res.height_m


def test_band_guidance_text():
    lines = band_guidance([3.9e6, 5.36e6, 7.2e6])
    text = " ".join(lines)
    # Common practice: 40 m by day, 75/80 m at night, 60 m in between; no forecast claimed.
    assert "40 m" in text and "daytime" in text
    assert "night" in lines[0]
    assert "not a propagation forecast" in text
