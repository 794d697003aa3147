"""Distributed series loading of a wire: dielectric coating and conductor (skin-effect) loss.

Both return a series impedance per unit length z' (ohm/m) that a wire model adds along the wire.
"""

from __future__ import annotations

import math

import numpy as np

from buildsheet.constants import MU0, SIGMA_COPPER, SIGMA_STEEL
from buildsheet.spec.wires import WireType


def coating_inductance_per_m(a: float, b: float, eps_r: float) -> float:
    """Series inductance per metre that models a dielectric coating, H/m.

    L' = (mu0 / 2 pi) (1 - 1/eps_r) ln(b/a) for a conductor of radius ``a`` (m) inside a
    coating of outer radius ``b`` (m) and relative permittivity ``eps_r`` (Richmond & Newman,
    "Dielectric coated wire antennas", Radio Science 11(1), 1976). Zero for bare wire.
    """
    if b <= a or eps_r <= 1.0:
        return 0.0
    return MU0 / (2.0 * math.pi) * (1.0 - 1.0 / eps_r) * math.log(b / a)


def skin_depth(frequency_hz: float, sigma: float) -> float:
    """Skin depth delta = 1/sqrt(pi f mu0 sigma), m."""
    return 1.0 / math.sqrt(math.pi * frequency_hz * MU0 * sigma)


def conductor_impedance_per_m(wire: WireType, frequency_hz: float) -> complex:
    """Internal (skin-effect) impedance per metre of the conductor, ohm/m.

    Thick-wire limit (radius >> skin depth): z' = Z_s / (2 pi a) with the surface impedance
    Z_s = (1 + j) R_s (Ramo, Whinnery & Van Duzer, Fields and Waves, section on skin effect).
    Copper-clad steel is treated as a copper layer of thickness t over a steel half-space, by the
    transmission-line formula for layered surface impedance
    Z_s = eta1 (eta2 + eta1 tanh(gamma1 t)) / (eta1 + eta2 tanh(gamma1 t)), eta = (1+j)/(sigma delta),
    gamma = (1+j)/delta; the steel's permeability is taken as mu0 (an optimistic simplification).
    """
    a = wire.radius_m
    eta_cu = (1 + 1j) / (SIGMA_COPPER * skin_depth(frequency_hz, SIGMA_COPPER))
    if wire.material == "copper_clad_steel" and wire.cladding_fraction > 0:
        t = wire.cladding_fraction * a
        delta_cu = skin_depth(frequency_hz, SIGMA_COPPER)
        eta_st = (1 + 1j) / (SIGMA_STEEL * skin_depth(frequency_hz, SIGMA_STEEL))
        th = np.tanh((1 + 1j) * t / delta_cu)
        z_s = eta_cu * (eta_st + eta_cu * th) / (eta_cu + eta_st * th)
    else:
        z_s = eta_cu
    return complex(z_s) / (2.0 * math.pi * a)


def coating_impedance_per_m(wire: WireType, frequency_hz: float) -> complex:
    """Series impedance per metre j omega L' of the wire's insulation, ohm/m."""
    lp = coating_inductance_per_m(wire.radius_m, wire.outer_radius_m, wire.insulation_eps_r)
    return 1j * 2.0 * math.pi * frequency_hz * lp


def series_impedance_per_m(wire: WireType, frequency_hz: float, *, loss: bool = True) -> complex:
    """Total distributed series loading of ``wire`` at ``frequency_hz``, ohm/m."""
    z = coating_impedance_per_m(wire, frequency_hz)
    if loss:
        z += conductor_impedance_per_m(wire, frequency_hz)
    return z
