"""The antenna as deployed: input model and geometry builder (antenna -> wires -> segments).

Site frame: x east, y north, z up, metres, origin on the ground directly below the feed point.
Each element is two straight legs from the shared feed point: leg A toward ``bearing_deg``
(compass, 0 = north, clockwise), leg B toward ``bearing_deg + 180``, each running from the feed
height down (or up) to ``end_height_m``; horizontal reach = sqrt(L^2 - drop^2).

Feed model: the feed point is a delta gap between two coincident terminal nodes, ``feed_a``
(where every A leg starts) and ``feed_b`` (every B leg). Kirchhoff's current law holds at each
terminal through the junction basis functions of :mod:`buildsheet.em.mom`; the gap current is
the current through the balun. No feed wire is modelled (a balun's terminals are a few cm apart,
much less than a segment), which avoids very short segments next to long ones.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from buildsheet.constants import C0
from buildsheet.em.ground import Ground
from buildsheet.errors import BuildError
from buildsheet.spec.wires import WireType

#: Default largest segment, in wavelengths at the highest frequency analysed (issue 3 allows at
#: most 0.05; 0.025 keeps the delta-gap drift of the resonant length near 0.1 %).
SEGMENT_WAVELENGTHS: float = 0.025
#: Never fewer segments than this on one leg (issue 3: at least 5).
MIN_SEGMENTS_PER_LEG: int = 8
#: Thin-wire limit: a segment should be at least this many wire radii long (common practice).
MIN_SEGMENT_RADII: float = 8.0


@dataclass(frozen=True)
class ElementGeometry:
    """One dipole element of a (possibly multi-band) antenna; SI units, angles in degrees."""

    key: str                    # unique within the antenna, e.g. "40m"
    design_frequency_hz: float  # the element is resonated here
    band_low_hz: float          # band edges, for the SWR curve and 2:1 bandwidth
    band_high_hz: float
    bearing_deg: float          # compass bearing of leg A (0 = north, clockwise); leg B at +180
    end_height_m: float         # height of the leg ends (equal to feed height for a flat dipole)
    leg_length_m: float         # along the wire, feed point to end; a start value for the solver
    wire: WireType              # from buildsheet.spec.wires


@dataclass(frozen=True)
class DeployedAntenna:
    """All elements of one antenna on one shared feed point over one ground."""

    feed_height_m: float        # apex / feed-point height above ground
    elements: tuple[ElementGeometry, ...]
    ground: Ground              # from buildsheet.em.ground
    #: largest segment in wavelengths at the highest frequency analysed (at most 0.05)
    segment_wavelengths: float = SEGMENT_WAVELENGTHS


@dataclass(frozen=True)
class WireSpec:
    """One straight wire for the method of moments.

    start/end: (x, y, z) in m; radius_m: conductor radius, m; n_segments: equal segments;
    start_node/end_node: junction names ("" for a free end); wire: for distributed loading
    (insulation, skin effect), None for a lossless bare conductor; label: for reports.
    """

    start: tuple[float, float, float]
    end: tuple[float, float, float]
    radius_m: float
    n_segments: int
    start_node: str = ""
    end_node: str = ""
    wire: WireType | None = None
    label: str = ""


@dataclass(frozen=True)
class Port:
    """A delta-gap source between two coincident junction nodes; current flows a -> b."""

    node_a: str
    node_b: str


@dataclass(frozen=True)
class Structure:
    """Wires, ports and ground: everything the method of moments needs."""

    wires: tuple[WireSpec, ...]
    ports: tuple[Port, ...]
    ground: Ground
    notes: tuple[str, ...] = ()


def wavelength(frequency_hz: float) -> float:
    """Free-space wavelength, m."""
    return C0 / frequency_hz


def segments_for(length_m: float, max_frequency_hz: float, *,
                 segment_wavelengths: float = SEGMENT_WAVELENGTHS,
                 min_segments: int = MIN_SEGMENTS_PER_LEG) -> int:
    """Segments for a wire: at most ``segment_wavelengths`` wavelength each, at least the minimum."""
    n = math.ceil(length_m / (segment_wavelengths * wavelength(max_frequency_hz)) - 1e-9)
    return max(int(n), int(min_segments), 1)


def leg_direction(bearing_deg: float, drop_m: float, leg_length_m: float) -> np.ndarray:
    """Unit vector from the feed along a leg at compass ``bearing_deg`` descending ``drop_m``."""
    reach = math.sqrt(max(leg_length_m**2 - drop_m**2, 0.0))
    b = math.radians(bearing_deg)
    return np.array([reach * math.sin(b), reach * math.cos(b), -drop_m]) / leg_length_m


def highest_frequency(antenna: DeployedAntenna) -> float:
    """Highest frequency analysed for ``antenna``: the top band edge or design frequency, Hz."""
    return max(max(e.band_high_hz, e.design_frequency_hz) for e in antenna.elements)


def _check_elements(antenna: DeployedAntenna) -> None:
    """Raise BuildError for inputs no geometry can be built from."""
    if not antenna.elements:
        raise BuildError("antenna has no elements")
    keys = [e.key for e in antenna.elements]
    if len(set(keys)) != len(keys):
        raise BuildError(f"element keys must be unique, got {keys}")
    for e in antenna.elements:
        if e.leg_length_m <= 0 or e.wire.radius_m <= 0:
            raise BuildError(f"element {e.key!r}: leg length and wire radius must be positive")
        drop = antenna.feed_height_m - e.end_height_m
        if e.leg_length_m <= abs(drop):
            raise BuildError(
                f"element {e.key!r}: a leg of {e.leg_length_m:.3f} m is too short to reach from "
                f"the feed at {antenna.feed_height_m:.2f} m to the end height "
                f"{e.end_height_m:.2f} m (needs more than {abs(drop):.3f} m)")
        if antenna.ground.kind != "free_space":
            low = min(antenna.feed_height_m, e.end_height_m)
            if low <= e.wire.outer_radius_m:
                raise BuildError(
                    f"element {e.key!r}: the wire touches or crosses the ground (lowest point "
                    f"{low:.3f} m); raise the feed and the ends above ground")


def _check_legs_apart(antenna: DeployedAntenna, legs: list[WireSpec]) -> None:
    """Raise BuildError where two legs from the feed touch (run together) along their length.

    Straight legs from one point meet nowhere else unless they overlap, so the test is the
    separation one segment out from the feed against the sum of the outer radii.
    """
    dirs = np.array([np.subtract(w.end, w.start) / np.linalg.norm(np.subtract(w.end, w.start))
                     for w in legs])
    lens = np.array([np.linalg.norm(np.subtract(w.end, w.start)) for w in legs])
    seg = lens / np.array([w.n_segments for w in legs])
    outer = np.array([w.wire.outer_radius_m if w.wire else w.radius_m for w in legs])
    cos = np.clip(dirs @ dirs.T, -1.0, 1.0)
    sin = np.sqrt(1.0 - cos**2)
    reach = np.minimum(seg[:, None], seg[None, :])
    gap = np.where(cos > 0, sin * reach, reach)  # legs in opposite half-spaces cannot touch
    touch = (gap <= outer[:, None] + outer[None, :]) & ~np.eye(len(legs), dtype=bool)
    if touch.any():
        i, j = (int(v) for v in np.argwhere(touch)[0])
        raise BuildError(
            f"legs {legs[i].label} and {legs[j].label} touch: they leave the feed "
            f"{math.degrees(math.acos(cos[i, j])):.2f} degrees apart; spread the bearings or "
            "end heights")


def element_segment_counts(antenna: DeployedAntenna, max_frequency_hz: float | None = None, *,
                           segment_wavelengths: float | None = None,
                           min_segments: int = MIN_SEGMENTS_PER_LEG) -> tuple[int, ...]:
    """Segments per leg for each element by the segmentation rule.

    The rule is applied to the longer of the leg and a quarter wavelength at the element's
    design frequency, so that the mesh does not change while a resonance solve moves a leg
    that is shorter than a quarter wave (the usual case).
    """
    f_max = max_frequency_hz or highest_frequency(antenna)
    segment_wavelengths = segment_wavelengths or antenna.segment_wavelengths
    return tuple(segments_for(max(e.leg_length_m, wavelength(e.design_frequency_hz) / 4.0), f_max,
                              segment_wavelengths=segment_wavelengths, min_segments=min_segments)
                 for e in antenna.elements)


def build_structure(antenna: DeployedAntenna, max_frequency_hz: float | None = None, *,
                    segment_wavelengths: float | None = None,
                    min_segments: int = MIN_SEGMENTS_PER_LEG,
                    segment_counts: tuple[int, ...] | None = None) -> Structure:
    """Wires of ``antenna`` segmented for ``max_frequency_hz`` (default: its highest band edge).

    ``segment_counts`` (one per element, per leg) overrides the segmentation rule; the resonance
    solver uses it to keep the mesh fixed while it moves the lengths.

    Raises BuildError for geometry touching the ground, legs too short for their end height and
    legs that touch each other. Thin-wire limits become notes, not errors.
    """
    _check_elements(antenna)
    if not 0 < antenna.segment_wavelengths <= 0.05:
        raise BuildError("segment_wavelengths must be in (0, 0.05]")
    f_max = max_frequency_hz or highest_frequency(antenna)
    feed = (0.0, 0.0, float(antenna.feed_height_m))
    legs: list[WireSpec] = []
    counts = segment_counts or element_segment_counts(
        antenna, f_max, segment_wavelengths=segment_wavelengths, min_segments=min_segments)
    for e, n in zip(antenna.elements, counts, strict=True):
        drop = antenna.feed_height_m - e.end_height_m
        for side, bearing in (("A", e.bearing_deg), ("B", e.bearing_deg + 180.0)):
            end = np.asarray(feed) + e.leg_length_m * leg_direction(bearing, drop, e.leg_length_m)
            legs.append(WireSpec(feed, (float(end[0]), float(end[1]), float(end[2])),
                                 e.wire.radius_m, n, start_node=f"feed_{side.lower()}",
                                 wire=e.wire, label=f"{e.key}/{side}"))
    _check_legs_apart(antenna, legs)
    return Structure(tuple(legs), (Port("feed_a", "feed_b"),), antenna.ground,
                     thin_wire_notes(legs, f_max))


def thin_wire_notes(wires: list[WireSpec] | tuple[WireSpec, ...], max_frequency_hz: float) -> tuple[str, ...]:
    """Warnings (as text) where the thin-wire model is stretched: short segments, thick wire."""
    notes = []
    lam = wavelength(max_frequency_hz)
    for w in wires:
        seg = float(np.linalg.norm(np.subtract(w.end, w.start))) / w.n_segments
        if seg < MIN_SEGMENT_RADII * w.radius_m:
            notes.append(f"{w.label or 'wire'}: segments of {seg * 1000:.1f} mm are shorter than "
                         f"{MIN_SEGMENT_RADII:.0f} wire radii; the thin-wire model is unreliable")
        if w.radius_m > 0.01 * lam:
            notes.append(f"{w.label or 'wire'}: wire radius {w.radius_m * 1000:.1f} mm exceeds "
                         "0.01 wavelength; too thick for the thin-wire model")
    return tuple(dict.fromkeys(notes))


def with_leg_lengths(antenna: DeployedAntenna, lengths_m: np.ndarray | tuple[float, ...]) -> DeployedAntenna:
    """Copy of ``antenna`` with every element's leg length replaced (same order), m."""
    return replace(antenna, elements=tuple(
        replace(e, leg_length_m=float(l)) for e, l in zip(antenna.elements, lengths_m, strict=True)))
