"""Conductor and insulation data for antenna wire: AWG sizes and a table of common wires.

All dimensions in metres. AWG diameters come from the defining formula of ASTM B258:
d(n) = 0.127 mm * 92 ** ((36 - n) / 39).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

Material = Literal["copper", "copper_clad_steel"]
MATERIALS: tuple[str, ...] = ("copper", "copper_clad_steel")


def awg_diameter(gauge: int) -> float:
    """Diameter of solid wire of AWG ``gauge`` in metres (ASTM B258 defining formula).

    Gauges 0000..0 are written -3..0.
    """
    return 0.127e-3 * 92.0 ** ((36 - gauge) / 39.0)


@dataclass(frozen=True)
class WireType:
    """One kind of antenna wire.

    conductor_diameter_m: diameter of the conductor (the equivalent solid diameter for stranded
    wire), m; insulation_thickness_m: radial jacket thickness, m (0 for bare wire);
    insulation_eps_r: relative permittivity of the jacket at HF (1 for bare wire);
    cladding_fraction: for copper-clad steel, copper layer thickness as a fraction of the radius.
    """

    key: str
    title: str
    conductor_diameter_m: float
    material: Material = "copper"
    stranding: str = "solid"
    insulation_thickness_m: float = 0.0
    insulation_eps_r: float = 1.0
    cladding_fraction: float = 0.0

    @property
    def radius_m(self) -> float:
        """Conductor radius, m."""
        return self.conductor_diameter_m / 2.0

    @property
    def outer_radius_m(self) -> float:
        """Radius over the insulation, m (equal to the conductor radius for bare wire)."""
        return self.radius_m + self.insulation_thickness_m

    @property
    def insulated(self) -> bool:
        return self.insulation_thickness_m > 0.0 and self.insulation_eps_r > 1.0


# Permittivities at HF: PVC about 3-4.5, polyethylene about 2.3, PTFE 2.1 (von Hippel,
# Dielectric Materials and Applications, from memory). Jacket thicknesses are typical values
# for the wire class (from memory), not any one maker's product.
BUILTIN_WIRES: dict[str, WireType] = {
    w.key: w
    for w in (
        WireType("awg14-bare", "14 AWG bare copper, 7-strand", awg_diameter(14), "copper",
                 "7 strands"),
        WireType("awg14-pvc", "14 AWG copper, PVC jacket 0.8 mm", awg_diameter(14), "copper",
                 "19 strands", 0.8e-3, 3.5),
        WireType("awg16-pvc", "16 AWG copper hook-up wire, PVC jacket 0.4 mm", awg_diameter(16),
                 "copper", "19 strands", 0.4e-3, 3.5),
        WireType("awg18-pvc", "18 AWG copper hook-up wire, PVC jacket 0.4 mm", awg_diameter(18),
                 "copper", "16 strands", 0.4e-3, 3.5),
        WireType("awg20-pvc", "20 AWG copper hook-up wire, PVC jacket 0.4 mm", awg_diameter(20),
                 "copper", "7 strands", 0.4e-3, 3.5),
        WireType("awg18-pe", "18 AWG copper, polyethylene jacket 0.5 mm", awg_diameter(18),
                 "copper", "7 strands", 0.5e-3, 2.3),
        WireType("awg13-ccs-bare", "13 AWG copper-clad steel, bare", awg_diameter(13),
                 "copper_clad_steel", "solid", 0.0, 1.0, 0.10),
        WireType("awg14-ccs-pe", "14 AWG copper-clad steel, polyethylene jacket 1 mm",
                 awg_diameter(14), "copper_clad_steel", "solid", 1.0e-3, 2.3, 0.10),
        WireType("metric-1mm2-pvc", "1.0 mm2 copper, PVC jacket 0.6 mm", 1.13e-3, "copper",
                 "32 strands", 0.6e-3, 3.5),
        WireType("metric-1.5mm2-pvc", "1.5 mm2 copper, PVC jacket 0.7 mm", 1.38e-3, "copper",
                 "30 strands", 0.7e-3, 3.5),
    )
}
