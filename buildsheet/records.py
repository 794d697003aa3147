"""The record types of the as-built ledger: plain frozen data shared by the store (which reads
and writes them) and the calculation core (which derives lengths, targets and actions from them).
Lengths are metres, frequencies hertz, times ISO 8601 text. No I/O here."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

Status = Literal["active", "archived"]
Leg = Literal["A", "B", "both"]
Side = Literal["A", "B"]
PrintKind = Literal["sheet", "label"]
VoidKind = Literal["measurement", "trim", "cut"]
LEGS: tuple[str, ...] = ("A", "B", "both")
SIDES: tuple[Side, Side] = ("A", "B")
PRINT_KINDS: tuple[str, ...] = ("sheet", "label")
VOID_KINDS: tuple[str, ...] = ("measurement", "trim", "cut")


@dataclass(frozen=True)
class ElementRow:
    """One element (a dipole on one band of a kit). Lengths are per leg in metres.

    As designed, from the latest packet: ``cut_leg_m`` is the prescribed cut its labels print,
    ``predicted_leg_m`` the resonant leg (calibrated where a calibration applies) and
    ``slope_m_per_hz`` d(leg length)/d(resonant frequency), negative (longer wire, lower dip).
    ``partners`` are the other element IDs on the same feed point. The last four fields are kept
    by the store; callers of :func:`sync_elements` may leave them at their defaults.
    """

    id: str
    kit: str
    design: str
    key: str
    design_frequency_hz: float
    band_low_hz: float
    band_high_hz: float
    predicted_leg_m: float
    cut_leg_m: float
    slope_m_per_hz: float
    partners: tuple[str, ...] = ()
    spec_revision: int = 0
    status: Status = "active"
    created: str = ""
    updated: str = ""


@dataclass(frozen=True)
class Measurement:
    """An analyzer reading: the frequency of the SWR dip (Hz) and the SWR there."""

    id: int
    element_id: str
    time: str
    dip_hz: float
    swr: float | None
    note: str


@dataclass(frozen=True)
class Trim:
    """Wire removed from a leg (``delta_m`` > 0) or added back (< 0), metres."""

    id: int
    element_id: str
    leg: Leg
    delta_m: float
    time: str
    note: str


@dataclass(frozen=True)
class PrintRecord:
    """A sheet or label printed for an element by packet revision ``revision``."""

    id: int
    revision: int
    element_id: str
    kind: PrintKind
    hash: str
    file: str
    time: str


@dataclass(frozen=True)
class LegCut:
    """The length one leg was actually cut to, metres (as built; never rewritten).

    ``how``: "confirmed" (``buildsheet cut``), "first reading" or "first trim" (confirmed
    implicitly at the length its label printed), "before the ledger" (migrated).
    """

    id: int
    element_id: str
    leg: Side
    length_m: float
    revision: int
    how: str
    time: str
    note: str


@dataclass(frozen=True)
class Void:
    """A withdrawn entry: ``target`` names the voided row by content (JSON of its key fields)."""

    id: int
    kind: VoidKind
    element_id: str
    target: str
    reason: str
    time: str


@dataclass(frozen=True)
class ElementHistory:
    """An element with everything recorded for it, oldest first; voided entries are left out
    of ``measurements``, ``trims`` and ``cuts`` and listed in ``voided``."""

    element: ElementRow
    measurements: tuple[Measurement, ...] = ()
    trims: tuple[Trim, ...] = ()
    prints: tuple[PrintRecord, ...] = ()
    cuts: tuple[LegCut, ...] = ()
    voided: tuple[Measurement | Trim | LegCut, ...] = ()

    def leg_cut(self, leg: Side) -> LegCut | None:
        """The latest cut of one leg, or None while it is not cut."""
        mine = [c for c in self.cuts if c.leg == leg]
        return mine[-1] if mine else None

    def leg_trims(self, leg: Side, until: str | None = None) -> tuple[Trim, ...]:
        """Trims on one leg since its latest cut (and up to time ``until``, if given)."""
        cut = self.leg_cut(leg)
        return tuple(t for t in self.trims if t.leg in (leg, "both")
                     and (cut is None or t.time >= cut.time)
                     and (until is None or t.time <= until))

    def current_leg_m(self, leg: Side, until: str | None = None) -> float | None:
        """As-built length of one leg now (or at time ``until``), metres; None when not cut."""
        cut = self.leg_cut(leg)
        if cut is None:
            return None
        return cut.length_m - sum(t.delta_m for t in self.leg_trims(leg, until))

    @property
    def is_cut(self) -> bool:
        """Both legs have a recorded cut."""
        return all(self.leg_cut(s) is not None for s in SIDES)
