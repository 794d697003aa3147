"""Amateur HF band edges (160 m to 20 m) by ITU region, channelised 60 m, design frequencies.

Edges are the ITU Radio Regulations amateur allocations as commonly published (from memory;
verify against current national rules before relying on them). They live in this one table so
that a rule change is a one-line edit. Frequencies in Hz.
"""

from __future__ import annotations

from dataclasses import dataclass

REGIONS: tuple[int, ...] = (1, 2, 3)

#: US 60 m channel centre frequencies, Hz (47 CFR 97.303(h), from memory; US rules for 60 m
#: have been under review: this table is the one place to update).
US_60M_CHANNELS_HZ: tuple[float, ...] = (5332.0e3, 5348.0e3, 5358.5e3, 5373.0e3, 5405.0e3)
#: Occupied bandwidth of one US 60 m channel, Hz (2.8 kHz, 47 CFR 97.303(h), from memory).
US_60M_CHANNEL_WIDTH_HZ: float = 2.8e3
#: USB dial (suppressed carrier) sits this far below the channel centre, Hz (common practice).
USB_DIAL_OFFSET_HZ: float = 1.5e3
#: US 60 m power limit: 100 W PEP ERP, a half-wave dipole counted as 0 dBd (from memory).
US_60M_MAX_ERP_W: float = 100.0
#: WRC-15 secondary allocation 5351.5-5366.5 kHz: 15 W EIRP in most of the world (from memory;
#: some administrations allow less or more).
WRC15_60M_MAX_EIRP_W: float = 15.0
#: The usual cut for all five US channels: the middle of their span, Hz (common practice).
US_60M_MID_SPAN_HZ: float = (US_60M_CHANNELS_HZ[0] + US_60M_CHANNELS_HZ[-1]) / 2
#: A design frequency within this of a channel centre or the mid-span counts as on it, Hz.
US_60M_MATCH_HZ: float = 0.5e3


@dataclass(frozen=True)
class Channel:
    """One channel: its number, centre and USB dial frequency, Hz."""

    number: int
    centre_hz: float
    dial_hz: float
    width_hz: float


def us_60m_channels() -> tuple[Channel, ...]:
    """The US 60 m channels with their USB dial frequencies (centre minus 1.5 kHz)."""
    return tuple(Channel(n, f, f - USB_DIAL_OFFSET_HZ, US_60M_CHANNEL_WIDTH_HZ)
                 for n, f in enumerate(US_60M_CHANNELS_HZ, start=1))


def us_60m_frequency_problem(frequency_hz: float) -> str | None:
    """Why a 60 m design frequency is unusual for the US channels, or None when it is a channel
    centre or the mid-span compromise (frequencies in Hz, text in kHz)."""
    near = [c for c in US_60M_CHANNELS_HZ if abs(c - frequency_hz) <= US_60M_MATCH_HZ]
    if near or abs(frequency_hz - US_60M_MID_SPAN_HZ) <= US_60M_MATCH_HZ:
        return None
    listed = ", ".join(f"{c / 1e3:g}" for c in US_60M_CHANNELS_HZ)
    return (f"{frequency_hz / 1e3:g} kHz is neither a US 60 m channel centre ({listed} kHz) nor "
            f"the usual mid-span cut for all five ({US_60M_MID_SPAN_HZ / 1e3:g} kHz); US channels "
            "are set by their centre frequency: design for one channel or for the mid-span")


@dataclass(frozen=True)
class Band:
    """One amateur band in one ITU region: edges and the default design frequency, Hz."""

    name: str
    region: int
    low_hz: float
    high_hz: float
    design_hz: float
    channels_hz: tuple[float, ...] = ()
    note: str = ""

    def contains(self, frequency_hz: float) -> bool:
        """True when ``frequency_hz`` lies within the band edges."""
        return self.low_hz <= frequency_hz <= self.high_hz


def _k(khz: float) -> float:
    return khz * 1e3


# name -> {region: (low kHz, high kHz, default design kHz)}
_EDGES: dict[str, dict[int, tuple[float, float, float]]] = {
    "160m": {1: (1810, 2000, 1900), 2: (1800, 2000, 1900), 3: (1800, 2000, 1900)},
    "80m": {1: (3500, 3800, 3650), 2: (3500, 4000, 3750), 3: (3500, 3900, 3700)},
    # Region 2's upper 80 m segment, used for voice, is called 75 m in the US.
    "75m": {2: (3600, 4000, 3900)},
    "60m": {r: (5351.5, 5366.5, 5359.0) for r in REGIONS},
    "40m": {1: (7000, 7200, 7100), 2: (7000, 7300, 7150), 3: (7000, 7200, 7100)},
    "30m": {r: (10100, 10150, 10125) for r in REGIONS},
    "20m": {r: (14000, 14350, 14175) for r in REGIONS},
}

_NOTES = {
    "60m": "WRC-15 secondary allocation 5351.5-5366.5 kHz (mostly 15 W EIRP)",
    "60m-us": "US channels 5332, 5348, 5358.5, 5373, 5405 kHz centre, 2.8 kHz wide",
}


def band_names(region: int) -> tuple[str, ...]:
    """The band names known in ``region``, lowest frequency first."""
    names = [n for n, by_region in _EDGES.items() if region in by_region]
    if region == 2:
        names.insert(names.index("60m") + 1, "60m-us")
    return tuple(names)


def get_band(name: str, region: int) -> Band:
    """The band ``name`` ("40m", "60m-us", ...) in ITU ``region``. Raises KeyError if unknown."""
    if name == "60m-us" and region == 2:
        half = US_60M_CHANNEL_WIDTH_HZ / 2
        return Band(name, region, US_60M_CHANNELS_HZ[0] - half, US_60M_CHANNELS_HZ[-1] + half,
                    5358.5e3, US_60M_CHANNELS_HZ, _NOTES[name])
    low, high, design = _EDGES[name][region]
    return Band(name, region, _k(low), _k(high), _k(design), note=_NOTES.get(name, ""))


def band_containing(frequency_hz: float, region: int) -> Band | None:
    """The band of ``region`` that contains ``frequency_hz``, or None."""
    for name in band_names(region):
        band = get_band(name, region)
        if band.contains(frequency_hz):
            return band
    return None
