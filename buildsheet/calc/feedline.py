"""Common 50-ohm coaxial cables and their matched loss at HF.

Attenuation model: A(f) = k1 sqrt(f) + k2 f, dB per 100 m with f in MHz; the sqrt term is the
conductor (skin-effect) loss and the linear term the dielectric loss (the usual two-term fit of
a coaxial line's attenuation, e.g. Pozar, Microwave Engineering, section 2.7). Coefficients are
fitted to typical published matched attenuation at 10 and 100 MHz for each cable class (from
memory, typical published attenuation; individual makes differ by 10-20 %). Matched loss only:
mismatch (SWR) adds loss that this table does not include.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from buildsheet.errors import BuildError


@dataclass(frozen=True)
class CoaxType:
    """One class of 50-ohm coax.

    k1_db_per_100m: conductor-loss coefficient, dB/100 m at 1 MHz (scales as sqrt(f));
    k2_db_per_100m: dielectric-loss coefficient, dB/100 m at 1 MHz (scales as f);
    velocity_factor: phase velocity / c (from memory, typical).
    """

    key: str
    title: str
    k1_db_per_100m: float
    k2_db_per_100m: float
    velocity_factor: float
    impedance_ohm: float = 50.0


#: Typical cable classes (from memory, typical published attenuation; fitted anchors, dB/100 m:
#: RG-58 4.6 @ 10 MHz, 16 @ 100 MHz; RG-8X 3.3, 12; RG-213 2.0, 7.0; 10 mm foam 1.3, 4.3).
COAX_TYPES: dict[str, CoaxType] = {
    c.key: c
    for c in (
        CoaxType("rg58", "RG-58 (5 mm, solid PE)", 1.39, 0.021, 0.66),
        CoaxType("rg8x", "RG-8X (6 mm, foam PE)", 0.97, 0.023, 0.80),
        CoaxType("rg213", "RG-213 (10 mm, solid PE)", 0.60, 0.010, 0.66),
        CoaxType("foam10", "10 mm low-loss foam-dielectric coax", 0.40, 0.003, 0.85),
    )
}


def coax(key: str) -> CoaxType:
    """The cable class ``key``; BuildError naming the allowed keys otherwise."""
    try:
        return COAX_TYPES[key]
    except KeyError:
        allowed = ", ".join(COAX_TYPES)
        raise BuildError(f"unknown coax type {key!r}; allowed: {allowed}") from None


def attenuation_db_per_m(cable: CoaxType, frequency_hz: float) -> float:
    """Matched attenuation, dB/m, at ``frequency_hz`` (model in the module docstring)."""
    f_mhz = frequency_hz / 1e6
    return (cable.k1_db_per_100m * math.sqrt(f_mhz) + cable.k2_db_per_100m * f_mhz) / 100.0


def matched_loss_db(cable: CoaxType, length_m: float, frequency_hz: float) -> float:
    """Matched loss, dB, of ``length_m`` metres of ``cable`` at ``frequency_hz``."""
    if length_m < 0.0:
        raise BuildError(f"feedline length {length_m} m must not be negative")
    return attenuation_db_per_m(cable, frequency_hz) * length_m


def power_after_loss(power_w: float, loss_db: float) -> float:
    """Power, W, left after a loss of ``loss_db`` dB: P 10^(-loss/10)."""
    return power_w * 10.0 ** (-loss_db / 10.0)
