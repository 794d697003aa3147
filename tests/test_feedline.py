"""Tests for buildsheet.calc.feedline (typical published coax attenuation, from memory)."""

from __future__ import annotations

import pytest
from numpy.testing import assert_allclose

from buildsheet.calc.feedline import (
    COAX_TYPES,
    attenuation_db_per_m,
    coax,
    matched_loss_db,
    power_after_loss,
)
from buildsheet.errors import BuildError

# Typical published matched attenuation, dB per 100 ft at 10 MHz (from memory):
# RG-58 1.4, RG-8X 1.0, RG-213 0.6, 10 mm low-loss foam 0.4.
_DB_PER_100FT_10MHZ = {"rg58": 1.4, "rg8x": 1.0, "rg213": 0.6, "foam10": 0.4}


@pytest.mark.parametrize("key", list(_DB_PER_100FT_10MHZ))
def test_attenuation_at_10_mhz(key):
    got = attenuation_db_per_m(coax(key), 10e6) * 30.48
    assert_allclose(got, _DB_PER_100FT_10MHZ[key], rtol=0.1)


def test_ordering_at_hf():
    # Common practice: thinner and solid-dielectric cables lose more (RG-58 > RG-8X > RG-213 >
    # 10 mm foam) at every HF frequency.
    for f in (1.8e6, 3.6e6, 7.1e6, 14.2e6, 29e6):
        a = [attenuation_db_per_m(COAX_TYPES[k], f) for k in ("rg58", "rg8x", "rg213", "foam10")]
        assert a == sorted(a, reverse=True)


def test_length_and_sqrt_scaling():
    # Loss is proportional to length; at HF the conductor term dominates so the loss grows
    # close to sqrt(f) (skin effect; Pozar, Microwave Engineering, section 2.7).
    c = coax("rg213")
    assert_allclose(matched_loss_db(c, 40.0, 7e6), 2 * matched_loss_db(c, 20.0, 7e6))
    ratio = matched_loss_db(c, 30.0, 14e6) / matched_loss_db(c, 30.0, 3.5e6)
    assert 2.0 <= ratio <= 2.2


def test_power_after_loss_and_errors():
    assert_allclose(power_after_loss(100.0, 3.0103), 50.0, rtol=1e-4)  # 3.01 dB = half power
    with pytest.raises(BuildError):
        coax("rg6-75ohm")
    with pytest.raises(BuildError):
        matched_loss_db(coax("rg58"), -1.0, 7e6)
