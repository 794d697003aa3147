"""Mutual impedance of parallel thin dipoles by the induced-EMF method (Carter 1932).

Used to validate the method of moments. Both forms assume sinusoidal currents (the induced-EMF
assumption) and are referred to the feed (input) currents. Sources: Carter, "Circuit relations
in radiating systems and applications to antenna problems", Proc. IRE 20 (1932); Balanis,
Antenna Theory 3rd ed., section 8.6 (eqs. 8-68, 8-71a,b; numbering edition-dependent).
"""

from __future__ import annotations

import math

import numpy as np
from scipy.integrate import quad
from scipy.special import sici

from buildsheet.constants import C0, ETA0


def side_by_side_half_wave(spacing_m: float, frequency_hz: float) -> complex:
    """Z21 of two parallel side-by-side half-wave dipoles at centre spacing d, ohm.

    u0 = kd, u1 = k(sqrt(d^2 + l^2) + l), u2 = k(sqrt(d^2 + l^2) - l), l = lambda/2:
    R21 = eta/(4 pi) [2 Ci(u0) - Ci(u1) - Ci(u2)], X21 = -eta/(4 pi) [2 Si(u0) - Si(u1) - Si(u2)]
    (Balanis eqs. 8-71a,b; shared REFERENCES.md section 2.1).
    """
    k = 2.0 * math.pi * frequency_hz / C0
    l = C0 / frequency_hz / 2.0
    root = math.hypot(spacing_m, l)
    si, ci = sici(np.array([k * spacing_m, k * (root + l), k * (root - l)]))
    r = ETA0 / (4 * math.pi) * (2 * ci[0] - ci[1] - ci[2])
    x = -ETA0 / (4 * math.pi) * (2 * si[0] - si[1] - si[2])
    return complex(r, x)


def parallel_mutual(length1_m: float, length2_m: float, spacing_m: float, stagger_m: float,
                    frequency_hz: float) -> complex:
    """Z21 (input-referred) of parallel dipoles of any lengths, spacing d and axial stagger b, ohm.

    Induced EMF with Schelkunoff's exact near field of a sinusoidal filament (Balanis
    section 8.5-8.6; shared REFERENCES.md section 2.1):
    E_z1(rho, z) = -j eta I0/(4 pi) [e^{-jkR1}/R1 + e^{-jkR2}/R2 - 2 cos(k h1) e^{-jkr}/r],
    Z21(max) = -(1/I0^2) int E_z1(d, z) I0 sin(k(h2 - |z - b|)) dz,
    Z21(in) = Z21(max) / (sin(k h1) sin(k h2)). Integrated with scipy.integrate.quad.
    """
    k = 2.0 * math.pi * frequency_hz / C0
    h1, h2 = length1_m / 2.0, length2_m / 2.0

    def ez(z: float) -> complex:
        r1 = math.hypot(spacing_m, z - h1)
        r2 = math.hypot(spacing_m, z + h1)
        r = math.hypot(spacing_m, z)
        e = (np.exp(-1j * k * r1) / r1 + np.exp(-1j * k * r2) / r2
             - 2 * math.cos(k * h1) * np.exp(-1j * k * r) / r)
        return complex(-1j * ETA0 / (4 * math.pi) * e)

    def integrand(z: float, part: int) -> float:
        v = -ez(z) * math.sin(k * (h2 - abs(z - stagger_m)))
        return v.real if part == 0 else v.imag

    pts = sorted({stagger_m, h1, -h1, 0.0})
    lo, hi = stagger_m - h2, stagger_m + h2
    pts = [p for p in pts if lo < p < hi]
    re = quad(integrand, lo, hi, args=(0,), points=pts or None, limit=200)[0]
    im = quad(integrand, lo, hi, args=(1,), points=pts or None, limit=200)[0]
    return complex(re, im) / (math.sin(k * h1) * math.sin(k * h2))
