"""The ground models in the method of moments: Sommerfeld limits, table vs direct, image models at
large height, zenith gain against height (sources named per check; issue 10 tests)."""

import math

import numpy as np
import pytest
from scipy.optimize import brentq

from buildsheet.calc import coverage
from buildsheet.em import mom
from buildsheet.em.deployed import Port, Structure, WireSpec
from buildsheet.em.ground import (
    FREE_SPACE,
    PERFECT_GROUND,
    Ground,
    GroundClass,
    ground_range,
    measured_class,
    real_ground,
)

F = 7.1e6
LAM = 299_792_458.0 / F
A = 1e-3


def dipole(h, length, n=40):
    """Flat bare lossless half-wave dipole along x at height h (m), n segments in all."""
    return (WireSpec((0, 0, h), (length / 2, 0, h), A, n // 2, start_node="pa"),
            WireSpec((0, 0, h), (-length / 2, 0, h), A, n // 2, start_node="pb"))


def mesh(h, length, ground):
    return mom.build_mesh(Structure(dipole(h, length), (Port("pa", "pb"),), ground))


def z_in(h, length, ground, direct=False):
    return mom.port_impedances(mesh(h, length, ground), F, direct=direct)[0, 0, 0]


def resonance(h, ground, direct=False):
    """Resonant total length (m, brentq on X = 0) and R there (ohm)."""
    length = brentq(lambda x: z_in(h, x, ground, direct).imag, 0.44 * LAM, 0.5 * LAM, xtol=1e-6)
    return length, z_in(h, length, ground, direct).real


@pytest.fixture(scope="module")
def free():
    return resonance(10.0, FREE_SPACE)


def test_conducting_limit_is_perfect_ground():
    # Shared REFERENCES.md section 12: sigma -> infinity gives the perfect-ground image; issue 10
    # asks for 0.1 % in resonant length and R at NVIS height (0.1 wavelength).
    pec = resonance(0.1 * LAM, PERFECT_GROUND)
    metal = resonance(0.1 * LAM, Ground("real", GroundClass("metal", "metal", 15.0, 1e7)))
    assert abs(metal[0] / pec[0] - 1) < 1e-3 and abs(metal[1] / pec[1] - 1) < 1e-3


def test_no_contrast_is_free_space(free):
    # Shared REFERENCES.md section 12: eps_c = 1 reflects nothing, so free space is reproduced.
    air = resonance(0.1 * LAM, Ground("real", GroundClass("air", "air", 1.0, 0.0)))
    assert abs(air[0] / free[0] - 1) < 1e-6 and abs(air[1] - free[1]) < 1e-4


def test_table_against_direct_path_at_a_tenth_wavelength():
    # Issue 10: the tabulated fill against the slow direct path (Sommerfeld integrals at every
    # pair, no table) within 0.2 % in resonant length and R, medium dry ground, 0.1 wavelength.
    g = real_ground("medium_dry")
    table = resonance(0.1 * LAM, g)
    direct = resonance(0.1 * LAM, g, direct=True)
    assert abs(table[0] / direct[0] - 1) < 2e-3 and abs(table[1] / direct[1] - 1) < 2e-3


def test_two_wavelengths_high_tends_to_free_space(free):
    # Issue 10: at two wavelengths the result tends to free space (the image coupling falls as
    # 1/(2h); induced-EMF mutual terms at 4 wavelengths are ~1 ohm, REFERENCES 2.2), and the
    # reflection-coefficient images, exact for the far-field coupling (Balanis sec. 4.8), agree
    # with the Sommerfeld ground to within their small error.
    som = resonance(2.0 * LAM, real_ground("medium_dry"))
    low = resonance(0.1 * LAM, real_ground("medium_dry"))
    assert abs(som[0] / free[0] - 1) < 3e-3 and abs(som[1] - free[1]) < 1.5
    assert abs(low[0] / free[0] - 1) > 3 * abs(som[0] / free[0] - 1)
    for model in ("fresnel-image", "normal-image"):
        img = resonance(2.0 * LAM, real_ground("medium_dry", model))
        assert abs(img[0] / som[0] - 1) < 1e-4 and abs(img[1] - som[1]) < 0.1


def test_image_models_underestimate_resistance_at_nvis_height():
    # Shared REFERENCES.md section 12 and 7.2 caveat 2 (from memory): below about 0.1-0.2
    # wavelength the reflection-coefficient images omit near-field ground loss, so they give a
    # lower feed resistance than the exact half-space over lossy soil.
    som = resonance(0.1 * LAM, real_ground("medium_dry"))
    for model in ("fresnel-image", "normal-image"):
        assert resonance(0.1 * LAM, real_ground("medium_dry", model))[1] < som[1] - 5.0


def test_zenith_gain_against_height_over_average_ground(free):
    # Issue 10 trend check (published full-ground studies, from memory): over average ground
    # the zenith gain of a horizontal half-wave dipole falls below about 0.1 wavelength and
    # peaks between about 0.15 and 0.3 wavelength. Gain normalised to the input power, which
    # includes the ground loss of the Sommerfeld solve (common practice: a quarter wave gives
    # the most zenith gain; much lower costs several dB, REFERENCES 11).
    g = real_ground("average")
    heights = np.array([0.05, 0.075, 0.1, 0.15, 0.2, 0.25, 0.3, 0.35])
    gains = np.array([coverage.zenith_gain_dbi(mom.currents_on(mesh(h * LAM, free[0], g), F), g)
                      for h in heights])
    peak = heights[int(np.argmax(gains))]
    assert 0.15 <= peak <= 0.3
    assert gains[0] < gains[2] - 2.0 < gains.max() - 2.0
    assert np.all(np.diff(gains[:4]) > 0)


def test_ground_ranges_and_measured_ground():
    # ITU-R P.527-3 / P.368 ladder (REFERENCES 7.1, from memory): medium dry ground lies between
    # the dry (7, 0.3 mS/m) and the land (22, 3 mS/m) curves.
    lo, hi = ground_range(real_ground("medium_dry"))
    assert (lo.ground_class.eps_r, lo.ground_class.sigma) == (7.0, 3e-4)
    assert (hi.ground_class.eps_r, hi.ground_class.sigma) == (22.0, 3e-3)
    assert ground_range(PERFECT_GROUND) is None and ground_range(FREE_SPACE) is None
    # "Average ground" of amateur practice: permittivity 13, 5 mS/m (common practice).
    avg = real_ground("average").ground_class
    assert (avg.eps_r, avg.sigma) == (13.0, 5e-3)
    m = Ground("real", measured_class(12.0, 8e-3))
    lo, hi = ground_range(m)
    assert lo.ground_class.eps_r < 12.0 < hi.ground_class.eps_r
    assert "measured" in m.title and "Sommerfeld" in m.model_title


def test_wire_in_the_ground_is_an_error():
    from buildsheet.errors import BuildError

    s = Structure((WireSpec((0, 0, 1.0), (0, 0, -1.0), A, 10, start_node="pa"),
                   WireSpec((0, 0, 1.0), (0, 0, 3.0), A, 10, start_node="pb")),
                  (Port("pa", "pb"),), real_ground("wet"))
    with pytest.raises(BuildError, match="ground"):
        mom.build_mesh(s)


def test_model_titles_name_the_model():
    assert "Sommerfeld" in real_ground("wet").model_title
    assert "approximation" in real_ground("wet", "fresnel-image").model_title
    assert "normal-incidence" in real_ground("wet", "normal-image").model_title
    assert math.isfinite(z_in(0.2 * LAM, 0.48 * LAM, real_ground("wet", "normal-image")).real)


def test_power_balance_and_efficiency(free):
    # Conservation of energy (Poynting's theorem): over perfect ground everything the feed
    # delivers, less the conductor loss, is radiated into the upper half space; over lossy soil
    # the Sommerfeld solve's input power also pays the ground loss, so the efficiency
    # (radiated / input) falls, and more so at 0.05 than at 0.2 wavelength (REFERENCES 12).
    pec = mom.currents_on(mesh(0.2 * LAM, free[0], PERFECT_GROUND), F)
    up = coverage.power_budget(pec, PERFECT_GROUND).up_w
    assert abs(up / (pec.input_power_w - pec.conductor_loss_w) - 1) < 0.01
    g = real_ground("average")
    eff = [coverage.nvis_figures(mom.currents_on(mesh(h * LAM, free[0], g), F), g,
                                 az_step_deg=30.0).efficiency for h in (0.05, 0.2)]
    assert 0.0 < eff[0] < eff[1] < 0.99


def test_prediction_names_the_ground_model_and_band_parts():
    # Issue 10 parts 2 and 4: the prediction carries the ground model's name (for the sheet)
    # and the parts of its band; the band is their root sum of squares.
    from importlib.resources import files

    from buildsheet.em.solve import predict_mom
    from buildsheet.spec.reader import load_spec

    spec = load_spec(files("buildsheet") / "data" / "demo.toml")
    p = predict_mom(spec.design("sixty"), spec.site.ground)
    assert "Sommerfeld" in p.ground_model and "Sommerfeld" in p.model_note
    (u,) = p.uncertainty
    assert u.ground > 0 and u.mesh > 0 and u.model > 0
    assert p.spread == (pytest.approx(math.sqrt(u.ground**2 + u.mesh**2 + u.model**2)),)
