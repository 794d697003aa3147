"""Closed forms for a straight centre-fed thin dipole: the induced-EMF method and the 468/f rule.

The induced-EMF self impedance assumes a sinusoidal current on a thin wire (Carter 1932;
Balanis, Antenna Theory, 3rd ed., section 8.5, eqs. 8-60a,b referred to the input by eq. 8-61).
Insulation and conductor loss enter as distributed series impedance z' (buildsheet.em.loading)
weighted by the same sinusoidal current (the reaction integral), which is the closed-form
counterpart of the loading term of the method of moments.
"""

from __future__ import annotations

import math

import numpy as np
from scipy.special import sici

from buildsheet.constants import C0, ETA0, EULER_GAMMA, FOOT, RULE_468_FT_MHZ
from buildsheet.em.loading import series_impedance_per_m
from buildsheet.em.roots import brent_root
from buildsheet.spec.wires import WireType


def _si(x: float) -> float:
    return float(sici(x)[0])


def _ci(x: float) -> float:
    return float(sici(x)[1])


def impedance_at_current_maximum(length_m: float, radius_m: float, frequency_hz: float) -> complex:
    """Induced-EMF impedance of a bare dipole of total length l referred to the current maximum.

    Balanis, Antenna Theory 3rd ed., eqs. 8-60a (R_m) and 8-60b (X_m); ohm.
    """
    k = 2.0 * math.pi * frequency_hz / C0
    kl = k * length_m
    c = EULER_GAMMA
    r = ETA0 / (2 * math.pi) * (
        c + math.log(kl) - _ci(kl)
        + 0.5 * math.sin(kl) * (_si(2 * kl) - 2 * _si(kl))
        + 0.5 * math.cos(kl) * (c + math.log(kl / 2) + _ci(2 * kl) - 2 * _ci(kl))
    )
    x = ETA0 / (4 * math.pi) * (
        2 * _si(kl) + math.cos(kl) * (2 * _si(kl) - _si(2 * kl))
        - math.sin(kl) * (2 * _ci(kl) - _ci(2 * kl) - _ci(2 * k * radius_m**2 / length_m))
    )
    return complex(r, x)


def loading_weight(length_m: float, frequency_hz: float) -> float:
    """Reaction weight of a uniform series load on a sinusoidal current, referred to the feed, m.

    integral over the wire of sin^2(k(h-|z|)) dz / sin^2(kh) = (h - sin(2kh)/(2k)) / sin^2(kh),
    with h = l/2; multiply by z' (ohm/m) to get the added input impedance.
    """
    k = 2.0 * math.pi * frequency_hz / C0
    h = length_m / 2.0
    return (h - math.sin(2 * k * h) / (2 * k)) / math.sin(k * h) ** 2


def self_impedance(length_m: float, radius_m: float, frequency_hz: float,
                   wire: WireType | None = None, *, loss: bool = True) -> complex:
    """Input impedance of a straight centre-fed dipole in free space, ohm (induced EMF).

    ``length_m`` is the total length, ``radius_m`` the conductor radius. With ``wire`` given, its
    insulation (Richmond & Newman coating inductance) and, if ``loss``, its skin-effect resistance
    are added through :func:`loading_weight`.
    """
    k = 2.0 * math.pi * frequency_hz / C0
    z = impedance_at_current_maximum(length_m, radius_m, frequency_hz) / math.sin(k * length_m / 2) ** 2
    if wire is not None:
        z += series_impedance_per_m(wire, frequency_hz, loss=loss) * loading_weight(length_m, frequency_hz)
    return z


def resonant_length(frequency_hz: float, radius_m: float, wire: WireType | None = None) -> float:
    """Total length of the first series resonance (X_in = 0) of a straight dipole, m.

    Induced-EMF model in free space; with ``wire`` the insulation shortens it. The root is
    bracketed between 0.38 and 0.505 wavelength.
    """
    lam = C0 / frequency_hz

    def reactance(l_over_lambda: float) -> float:
        return self_impedance(l_over_lambda * lam, radius_m, frequency_hz, wire).imag

    return brent_root(reactance, 0.38, 0.505, xtol=1e-10) * lam


def rule_468_length(frequency_hz: float) -> float:
    """The traditional dipole length 468/f (feet, MHz) in metres (common practice)."""
    return RULE_468_FT_MHZ / (frequency_hz / 1e6) * FOOT


def resonance_slope(frequency_hz: float, radius_m: float, wire: WireType | None = None) -> float:
    """d(total resonant length)/d(frequency) by central difference, m/Hz (negative)."""
    df = frequency_hz * 1e-3
    up = resonant_length(frequency_hz + df, radius_m, wire)
    down = resonant_length(frequency_hz - df, radius_m, wire)
    return (up - down) / (2 * df)


def swr(z: np.ndarray | complex, z0: float = 50.0) -> np.ndarray:
    """Voltage standing-wave ratio of load ``z`` (ohm) on a line of real impedance ``z0`` (ohm).

    |Gamma| = |z - z0| / |z + z0|, SWR = (1 + |Gamma|) / (1 - |Gamma|) (standard
    transmission-line result, e.g. Pozar, Microwave Engineering, sec. 2.3).
    """
    g = np.abs((np.asarray(z) - z0) / (np.asarray(z) + z0))
    with np.errstate(divide="ignore"):
        return np.where(g < 1.0, (1.0 + g) / np.maximum(1.0 - g, 1e-300), np.inf)
