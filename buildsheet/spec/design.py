"""The Design: the validated spec as frozen dataclasses in SI units (spec -> Design -> core)."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Literal

from buildsheet.em.ground import Ground
from buildsheet.spec.bands import Band
from buildsheet.spec.units import UnitSystem
from buildsheet.spec.wires import WireType

Paper = Literal["a4", "letter"]
Mount = Literal["inverted_v", "flat"]
AntennaKind = Literal["dipole", "fan"]
Layout = Literal["per_kit", "per_design"]
ExposureRegime = Literal["fcc", "icnirp2020", "both"]


@dataclass(frozen=True)
class Event:
    """The build day: who, when, where, and how documents are printed."""

    name: str
    club: str
    date: str  # ISO date, as written in the spec
    region: int  # ITU region 1, 2 or 3
    units: UnitSystem  # primary unit system on sheets
    paper: Paper
    record_url: str | None  # template with {kit}, {element}, {leg}
    layout: Layout
    station_url: str | None = None  # the build-day station's address: labels lead to /e/<ID>


@dataclass(frozen=True)
class Site:
    """Where the antennas go up: ground class and (optionally) the usable area, m."""

    ground: Ground
    width_m: float | None = None
    depth_m: float | None = None


@dataclass(frozen=True)
class Allowances:
    """Extra wire per leg beyond the model's resonant leg length, m (or a fraction)."""

    trim_fraction: float | None  # trim allowance as a fraction of the leg (e.g. 0.03)
    trim_m: float | None  # or as a fixed length; exactly one of the two is set
    min_trim_fraction: float  # the floor when the trim is sized from the model spread
    termination_m: float  # wire consumed at the end insulator (knot or wrap)
    feed_m: float  # wire consumed at the feed end (pigtail and terminal)
    cord_knot_m: float  # cord consumed by the knot at the insulator
    cord_stake_m: float  # cord consumed by the adjustable hitch at the stake
    trim_explicit: bool = False  # True when the spec set trim_allowance itself


@dataclass(frozen=True)
class ElementSpec:
    """One dipole element of an antenna design."""

    key: str  # "40m" or "7150k": unique within the design, part of every ID
    band: Band | None  # None for a frequency outside every band (warned)
    frequency_hz: float  # design frequency
    bearing_deg: float  # compass bearing of leg A; leg B points the opposite way
    end_height_m: float  # height of this element's end insulators

    @property
    def band_label(self) -> str:
        return self.band.name if self.band else self.key

    @property
    def low_hz(self) -> float:
        return self.band.low_hz if self.band else self.frequency_hz * 0.98

    @property
    def high_hz(self) -> float:
        return self.band.high_hz if self.band else self.frequency_hz * 1.02


@dataclass(frozen=True)
class AntennaDesign:
    """One antenna design, built by one or more kits."""

    key: str
    title: str
    kind: AntennaKind
    mount: Mount
    apex_height_m: float
    wire: WireType
    elements: tuple[ElementSpec, ...]
    allowances: Allowances
    coax_type: str
    coax_length_m: float
    tie_off_angle_deg: float = 45.0  # cord angle below horizontal for a flat dipole


@dataclass(frozen=True)
class Kit:
    """One kit built on the day."""

    kit_id: str  # "K03"
    design_key: str
    builder: str = ""


@dataclass(frozen=True)
class LabelSettings:
    """Winder label stock, where to start on the first sheet, and what the QR codes hold."""

    stock: object  # buildsheet.calc.labels.LabelStock (kept generic to avoid an import cycle)
    start_cell: int | None = None  # None: continue where the store says the last sheet ended
    code: str = "id"  # what the QR codes hold: "id" (the leg ID) or "link" (the record's address)


@dataclass(frozen=True)
class ExposureSettings:
    """Transmitter and feedline for the RF-exposure screen."""

    power_w: float = 100.0
    mode: str = "ssb"
    transmit_fraction: float = 0.5
    regime: ExposureRegime = "fcc"
    transmit_fraction_6min: float | None = None  # own fraction for the 6-minute window
    transmit_fraction_30min: float | None = None  # own fraction for the 30-minute window


@dataclass(frozen=True)
class SpoolSpec:
    """Wire or cord on hand: material key, length per spool/hank (m), count."""

    material: str
    length_m: float
    count: int


@dataclass(frozen=True)
class Design:
    """The whole validated spec."""

    source: str  # file name the spec came from (for messages and footers)
    spec_hash: str  # sha256 of the spec bytes, hex
    event: Event
    site: Site
    wires: dict[str, WireType]
    designs: tuple[AntennaDesign, ...]
    kits: tuple[Kit, ...]
    labels: LabelSettings
    exposure: ExposureSettings
    stock: tuple[SpoolSpec, ...] = ()
    warnings: tuple[str, ...] = field(default=())

    def design(self, key: str) -> AntennaDesign:
        return next(d for d in self.designs if d.key == key)
