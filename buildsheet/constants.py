"""Physical constants and exact unit conversions (SI). The one home for named constants."""

from __future__ import annotations

import math

#: Speed of light in vacuum, m/s (exact by the SI definition of the metre, 1983).
C0: float = 299_792_458.0
#: Vacuum permeability, H/m (CODATA 2018; 4e-7*pi to 1e-10 relative).
MU0: float = 1.25663706212e-6
#: Vacuum permittivity, F/m (from 1/(mu0 c^2)).
EPS0: float = 1.0 / (MU0 * C0 * C0)
#: Free-space wave impedance mu0*c, ohm (376.730 ohm).
ETA0: float = MU0 * C0
#: Euler-Mascheroni constant (used by the induced-EMF closed forms, Balanis ch. 8).
EULER_GAMMA: float = 0.5772156649015329
#: International foot, m (exact, 1959 agreement; NIST SP 811).
FOOT: float = 0.3048
#: International inch, m (exact).
INCH: float = 0.0254
#: Conductivity of annealed copper, S/m (IACS 100 %: 58.0 MS/m).
SIGMA_COPPER: float = 5.8e7
#: Conductivity of the steel core of copper-clad steel wire, S/m (typical, from memory).
SIGMA_STEEL: float = 5.0e6
#: Free-space half wavelength constant, m*Hz: lambda/2 = HALF_WAVE_M_HZ / f.
HALF_WAVE_M_HZ: float = C0 / 2.0
#: The traditional "468/f" rule: dipole length in feet = 468 / f[MHz] (common practice).
RULE_468_FT_MHZ: float = 468.0
#: 1/(2 pi c eps0) = 59.9585 ohm, the "60" in eps_c = eps_r - j 60 sigma lambda.
SIXTY: float = 1.0 / (2.0 * math.pi * C0 * EPS0)

#: Where the build-day station listens unless told otherwise (loopback only: the organiser
#: opens it to the club network with --host).
STATION_HOST = "127.0.0.1"
STATION_PORT = 8080
