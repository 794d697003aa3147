"""Ground models: ITU-R P.527 ground classes, complex permittivity and Fresnel coefficients.

Angles are elevation (grazing) angles psi in radians above the horizon. Time dependence
e^{+j omega t}, so a lossy ground has eps_c = eps_r - j sigma/(omega eps0).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Literal

import numpy as np

from buildsheet.constants import C0, EPS0

GroundKind = Literal["free_space", "perfect", "real"]
#: How a real ground enters the method of moments: the exact half-space by Sommerfeld integrals
#: (buildsheet.em.sommerfeld, the default), or an image weighted by Fresnel reflection
#: coefficients at the specular angle per segment pair, or at normal incidence (approximations).
GroundModel = Literal["sommerfeld", "fresnel-image", "normal-image"]
GROUND_MODELS: tuple[GroundModel, ...] = ("sommerfeld", "fresnel-image", "normal-image")
DEFAULT_GROUND_MODEL: GroundModel = "sommerfeld"


@dataclass(frozen=True)
class GroundClass:
    """Electrical constants of one ground class at HF.

    eps_r: relative permittivity (dimensionless); sigma: conductivity, S/m.
    """

    key: str
    title: str
    eps_r: float
    sigma: float


#: ITU-R Recommendation P.527 ground classes, single HF values as read from the P.527-3 curves
#: and used as curve labels in ITU-R P.368 (from memory; see shared REFERENCES.md section 7.1).
GROUND_CLASSES: dict[str, GroundClass] = {
    g.key: g
    for g in (
        GroundClass("sea", "sea water (average salinity)", 70.0, 5.0),
        GroundClass("fresh_water", "fresh water", 80.0, 3e-3),
        GroundClass("wet", "wet ground", 30.0, 1e-2),
        GroundClass("medium_dry", "medium dry ground", 15.0, 1e-3),
        # not a P.527 class: the "average ground" of amateur practice (common practice)
        GroundClass("average", "average ground", 13.0, 5e-3),
        GroundClass("very_dry", "very dry ground", 3.0, 1e-4),
    )
}


#: The documented range of each class: the poorer and the better neighbouring curve of the
#: ITU-R P.527-3 / P.368 ladder (REFERENCES 7.1, values from memory): very dry 3/0.1 mS/m,
#: dry 7/0.3, medium dry 15/1, land 22/3, wet 30/10, land 40/30 mS/m; fresh water
#: 80 with 1-10 mS/m; sea low salinity 80/1 S/m to average 70/5 S/m. "Average ground" (common
#: practice) spans dry to land-22 in permittivity and medium dry to wet in conductivity.
#: (eps_r, sigma S/m) of the (poorer, better) end.
GROUND_RANGES: dict[str, tuple[tuple[float, float], tuple[float, float]]] = {
    "very_dry": ((3.0, 1e-4), (7.0, 3e-4)),
    "medium_dry": ((7.0, 3e-4), (22.0, 3e-3)),
    "average": ((7.0, 1e-3), (22.0, 1e-2)),
    "wet": ((22.0, 3e-3), (40.0, 3e-2)),
    "fresh_water": ((80.0, 1e-3), (80.0, 1e-2)),
    "sea": ((80.0, 1.0), (70.0, 5.0)),
}
#: A measured ground is taken as known to this fraction in each constant (from memory: a
#: simple probe measurement of soil at HF is good to some tens of percent).
MEASURED_TOLERANCE: float = 0.25


def ground_range(ground: Ground) -> tuple[Ground, Ground] | None:
    """The (poorer, better) grounds bounding ``ground``'s class, or None (free space, perfect).

    Classes: GROUND_RANGES; a measured or fitted ground: +-MEASURED_TOLERANCE in each constant.
    """
    if ground.kind != "real" or ground.ground_class is None:
        return None
    g = ground.ground_class
    if g.key in GROUND_RANGES:
        lo, hi = GROUND_RANGES[g.key]
    else:
        t = MEASURED_TOLERANCE
        lo, hi = (g.eps_r * (1 - t), g.sigma * (1 - t)), (g.eps_r * (1 + t), g.sigma * (1 + t))
    return tuple(Ground("real", GroundClass(f"{g.key}_{end}", f"{g.title} ({end} end)", e, s),
                        ground.model)
                 for end, (e, s) in (("poorer", lo), ("better", hi)))  # type: ignore[return-value]


def measured_class(eps_r: float, sigma: float) -> GroundClass:
    """A ground measured on site: relative permittivity ``eps_r``, conductivity ``sigma`` S/m."""
    return GroundClass("measured", f"measured ground (permittivity {eps_r:g}, "
                       f"conductivity {sigma * 1e3:g} mS/m)", float(eps_r), float(sigma))


def ground_model_title(model: GroundModel) -> str:
    """How the ground model is named on the sheet."""
    return {"sommerfeld": "exact half-space (Sommerfeld integrals)",
            "fresnel-image": "image weighted by Fresnel coefficients at the specular angle "
                             "(an approximation)",
            "normal-image": "image weighted by the normal-incidence reflection coefficient "
                            "(an approximation)"}[model]


@dataclass(frozen=True)
class Ground:
    """The ground under an antenna: free space, a perfect conductor, or a real ground class.

    ``model`` says how a real ground enters the method of moments (ignored otherwise).
    """

    kind: GroundKind
    ground_class: GroundClass | None = None
    model: GroundModel = DEFAULT_GROUND_MODEL

    @property
    def model_title(self) -> str:
        """The ground model as printed: image theory, free space, or the real-ground model."""
        if self.kind == "free_space":
            return "free space (no ground)"
        if self.kind == "perfect":
            return "perfect ground (image theory)"
        return ground_model_title(self.model)

    @property
    def title(self) -> str:
        if self.kind == "free_space":
            return "free space"
        if self.kind == "perfect":
            return "perfect ground"
        assert self.ground_class is not None
        return self.ground_class.title


FREE_SPACE = Ground("free_space")
PERFECT_GROUND = Ground("perfect")


def real_ground(key: str, model: GroundModel = DEFAULT_GROUND_MODEL) -> Ground:
    """Ground for the class ``key`` (one of GROUND_CLASSES), entered by ``model``."""
    return Ground("real", GROUND_CLASSES[key], model)


def complex_permittivity(ground: GroundClass, frequency_hz: float) -> complex:
    """Relative complex permittivity eps_r - j sigma/(omega eps0) (= eps_r - j 60 sigma lambda)."""
    omega = 2.0 * math.pi * frequency_hz
    return complex(ground.eps_r, -ground.sigma / (omega * EPS0))


def fresnel_horizontal(eps_c: complex, psi: np.ndarray | float) -> np.ndarray:
    """Fresnel reflection coefficient for E perpendicular to the plane of incidence.

    Gamma_h = (sin psi - sqrt(eps_c - cos^2 psi)) / (sin psi + sqrt(eps_c - cos^2 psi))
    (Balanis, Antenna Theory, section 4.8; -1 at grazing incidence).
    """
    s = np.sin(psi)
    root = np.sqrt(eps_c - np.cos(psi) ** 2 + 0j)
    return (s - root) / (s + root)


def fresnel_vertical(eps_c: complex, psi: np.ndarray | float) -> np.ndarray:
    """Fresnel reflection coefficient for E in the plane of incidence.

    Gamma_v = (eps_c sin psi - sqrt(eps_c - cos^2 psi)) / (eps_c sin psi + sqrt(...))
    (Balanis section 4.8; -1 at grazing, minimum near the pseudo-Brewster angle).
    """
    s = np.sin(psi)
    root = np.sqrt(eps_c - np.cos(psi) ** 2 + 0j)
    return (eps_c * s - root) / (eps_c * s + root)


def wavelength(frequency_hz: float) -> float:
    """Free-space wavelength, m."""
    return C0 / frequency_hz
