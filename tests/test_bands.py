"""Band table: edges by ITU region (common practice; ITU Radio Regulations as commonly published)."""

import pytest

from buildsheet.spec.bands import US_60M_CHANNELS_HZ, band_containing, band_names, get_band


@pytest.mark.parametrize("name, region, low_khz, high_khz", [
    ("160m", 1, 1810, 2000), ("160m", 2, 1800, 2000), ("80m", 1, 3500, 3800),
    ("80m", 2, 3500, 4000), ("40m", 1, 7000, 7200), ("40m", 2, 7000, 7300),
    ("30m", 3, 10100, 10150), ("20m", 2, 14000, 14350), ("60m", 1, 5351.5, 5366.5),
])
def test_band_edges(name, region, low_khz, high_khz):
    # Common practice (shared REFERENCES.md section 11, band edges by ITU region).
    band = get_band(name, region)
    assert band.low_hz == pytest.approx(low_khz * 1e3)
    assert band.high_hz == pytest.approx(high_khz * 1e3)
    assert band.contains(band.design_hz)


def test_us_60m_channels():
    # Common practice: the five US channel centres 5332, 5348, 5358.5, 5373, 5405 kHz.
    assert US_60M_CHANNELS_HZ == (5332e3, 5348e3, 5358.5e3, 5373e3, 5405e3)
    band = get_band("60m-us", 2)
    assert all(band.contains(f) for f in US_60M_CHANNELS_HZ)
    assert "60m-us" not in band_names(1)


def test_75m_only_in_region_2():
    assert "75m" in band_names(2) and "75m" not in band_names(1)
    with pytest.raises(KeyError):
        get_band("75m", 1)


def test_band_containing():
    assert band_containing(7.15e6, 2).name == "40m"
    assert band_containing(7.25e6, 1) is None
    assert band_containing(6.0e6, 2) is None


def test_us_60m_channel_table_with_dial_frequencies():
    # 47 CFR 97.303(h) (from memory): channel centres 5332, 5348, 5358.5, 5373, 5405 kHz, 2.8 kHz
    # wide; USB dial 1.5 kHz below the centre (common practice); 100 W PEP ERP; WRC-15 15 W EIRP.
    from buildsheet.spec.bands import (
        US_60M_MAX_ERP_W,
        WRC15_60M_MAX_EIRP_W,
        us_60m_channels,
    )
    chans = us_60m_channels()
    assert [c.dial_hz / 1e3 for c in chans] == [5330.5, 5346.5, 5357.0, 5371.5, 5403.5]
    assert {c.width_hz for c in chans} == {2.8e3}
    assert (US_60M_MAX_ERP_W, WRC15_60M_MAX_EIRP_W) == (100.0, 15.0)


def test_us_60m_design_frequency_checked():
    # A channel centre or the mid-span of the five channels (common practice) passes; 5380 kHz,
    # between channels 4 and 5, does not (issue 14, part 2).
    from buildsheet.spec.bands import us_60m_frequency_problem
    assert us_60m_frequency_problem(5358.5e3) is None
    assert us_60m_frequency_problem(5405e3) is None
    assert us_60m_frequency_problem((5332e3 + 5405e3) / 2) is None
    assert "5380 kHz" in us_60m_frequency_problem(5380e3)
