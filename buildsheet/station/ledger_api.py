"""The station's one door to the record store and the packet (the same functions as the CLI).

Every number the station shows or stores comes from the core through here: the designs are
solved once at start-up (and again after a calibration) with :func:`buildsheet.packet.
solve_designs`; each page reads the ledger and takes each element's as-built state, trim
advice and partners from :func:`buildsheet.packet.element_entries` (prescribed cut, as cut,
current, target and action live in :mod:`buildsheet.calc.asbuilt`); typed readings are parsed
by :func:`buildsheet.cli.records.parse_reading` and sweeps by :func:`buildsheet.cli.records.
sweep_reading`, exactly as ``buildsheet measure`` does. Pages get plain frozen records in SI
units; :mod:`buildsheet.station.views` formats them.
"""

from __future__ import annotations

import sqlite3
import threading
from collections.abc import Iterator, Mapping, Sequence
from contextlib import contextmanager
from dataclasses import dataclass, field, replace
from datetime import UTC, datetime
from pathlib import Path
from typing import Literal

from buildsheet.calc.cuts import DesignCuts
from buildsheet.calc.sweep import Sweep, SweepFit, analyse, read_sweep
from buildsheet.em.prediction import ModelName
from buildsheet.errors import Problem, RecordError
from buildsheet.packet import ElementEntry
from buildsheet.records import ElementHistory, LegCut, Measurement, Trim
from buildsheet.spec.design import Design, Kit
from buildsheet.store import ledger as rec

State = Literal["not cut", "cut", "measured", "tuned"]
STATES: tuple[State, ...] = ("not cut", "cut", "measured", "tuned")

#: SQLite sync level of the station's connections: NORMAL, with WAL.
#:
#: What it guarantees (SQLite documentation, "PRAGMA synchronous" and "Write-Ahead Logging"):
#: every commit is atomic and the store stays consistent whatever stops the laptop (the WAL's
#: checksummed frames are replayed up to the last whole transaction); a commit survives the
#: station or Python being killed, and a lid closed to sleep, because the operating system
#: still holds it. Only a power cut (a battery running flat) can roll back commits not yet
#: synced to the disk; the station syncs them within :data:`DURABLE_WITHIN_S` (see
#: :class:`StorePool`), so that window is about two seconds of readings, not the minutes a WAL
#: can hold between SQLite's own checkpoints.
#:
#: Why not FULL (a disk flush inside every commit): the station's writes are serialised, so
#: fifty phones posting at once queue behind fifty flushes. On the 2-core bench machine a
#: flush takes about 4 ms (p95 8 ms) and bench/station.py measured a reading's p95 at 90-240 ms
#: with FULL against 30-65 ms with NORMAL on the same runs; FULL misses the 100 ms target.
SYNCHRONOUS = "NORMAL"
#: Longest time a committed reading waits for the disk flush that makes it survive a power
#: cut, seconds (the background checkpoint of :class:`StorePool`).
DURABLE_WITHIN_S = 2.0


class StorePool:
    """One open record store per thread, kept open for the station's run, and the background
    sync that makes recent commits durable.

    Opening and closing a connection per request would make every close of the last
    connection checkpoint the WAL (about 15 ms); a connection kept per thread avoids that.
    SQLite connections stay in the thread that opened them; :meth:`close_all` ends them.
    After a write, a daemon thread checkpoints the WAL within :data:`DURABLE_WITHIN_S`
    (PASSIVE: it never blocks a writer or a reader; with NORMAL, SQLite syncs the WAL before a
    checkpoint and the database after it), off the event loop and without the GIL held.
    """

    def __init__(self, path: Path):
        self.path = path
        self._local = threading.local()
        self._lock = threading.Lock()
        self._write_lock = threading.Lock()
        self._opened: list[rec.RecordStore] = []
        self._dirty = threading.Event()
        self._stop = threading.Event()
        self._syncer: threading.Thread | None = None

    def get(self) -> rec.RecordStore:
        store = getattr(self._local, "store", None)
        if store is None:
            store = rec.open_store(self.path, create=False)
            store.conn.execute(f"PRAGMA synchronous = {SYNCHRONOUS}")
            self._local.store = store
            with self._lock:
                self._opened.append(store)
        return store

    @contextmanager
    def writing(self) -> Iterator[rec.RecordStore]:
        """This thread's store, holding the station's write lock: the station's own writers
        queue here in order instead of in SQLite's busy handler, whose growing sleeps would
        leave some waiting far longer than others (writers in other processes, such as the
        CLI, still meet the store's busy timeout). The background sync follows."""
        store = self.get()
        with self._write_lock:
            yield store
        self._dirty.set()
        if self._syncer is None:
            self._start_syncer()

    def _start_syncer(self) -> None:
        with self._lock:
            if self._syncer is None and not self._stop.is_set():
                self._syncer = threading.Thread(target=self._sync_loop, daemon=True,
                                                name="store-sync")
                self._syncer.start()

    def _sync_loop(self) -> None:
        while not self._stop.wait(DURABLE_WITHIN_S):
            if self._dirty.is_set():
                self._dirty.clear()
                if not self.sync():
                    self._dirty.set()  # try again next round

    def sync(self) -> bool:
        """Flush every commit so far to the disk (a PASSIVE WAL checkpoint on this thread's
        connection); False when SQLite could not do it now."""
        try:
            busy, _log, _done = self.get().conn.execute(
                "PRAGMA wal_checkpoint(PASSIVE)").fetchone()
        except (sqlite3.Error, rec.RecordError):
            return False
        return not busy

    def close_all(self) -> None:
        self._stop.set()
        with self._lock:
            opened, self._opened = self._opened, []
        for store in opened:
            try:
                store.conn.close()
            except sqlite3.ProgrammingError:  # opened in another thread: it ends with it
                pass


@dataclass(frozen=True)
class Station:
    """What one run of the station serves: the spec, its store, the solved designs (with the
    calibrations that apply) and the organiser PIN."""

    spec_path: Path
    store_path: Path
    spec: Design
    cuts: tuple[DesignCuts, ...]
    calibrated: frozenset[str]  # design keys with a calibration that applies
    model: ModelName
    pin: str
    stores: StorePool = field(compare=False, repr=False)


@dataclass(frozen=True)
class LegFacts:
    """One leg, metres: prescribed by the current design, as cut (None: not cut), current,
    target, and the action in words (from :mod:`buildsheet.calc.asbuilt`)."""

    leg_id: str
    prescribed_cut_m: float
    cut_m: float | None
    current_m: float
    target_m: float
    action: str


@dataclass(frozen=True)
class Reading:
    """A recorded analyzer reading (Hz, ohm); ``sweep`` True when a sweep is stored with it."""

    id: int
    time: str
    dip_hz: float
    swr: float | None
    r_ohm: float | None
    x_ohm: float | None
    note: str
    sweep: bool = False
    voided: bool = False


@dataclass(frozen=True)
class Entry:
    """A trim or a cut confirmation in the history (``delta_m`` > 0 removed; for a cut, the
    length cut)."""

    id: int
    time: str
    kind: Literal["trim", "cut"]
    leg: str
    length_m: float
    note: str
    voided: bool = False


@dataclass(frozen=True)
class Instruction:
    """What to do now: the instruction in words for both legs, and the core's advice lines."""

    headline: str
    lines: tuple[str, ...]
    reading_id: int | None


@dataclass(frozen=True)
class ElementFacts:
    """Everything the element page shows, SI units."""

    element_id: str
    kit: str
    builder: str
    design_key: str
    band: str
    design_hz: float
    band_low_hz: float
    band_high_hz: float
    legs: tuple[LegFacts, ...]
    tuning: str
    partners: tuple[str, ...]
    state: State
    readings: tuple[Reading, ...]
    entries: tuple[Entry, ...]
    instruction: Instruction | None
    archived: bool = False


@dataclass(frozen=True)
class DesignOffer:
    """Per design on the day board: measured elements that could calibrate it, whether a
    calibration applies, and the batch trims (element ID, leg A words, leg B words)."""

    design_key: str
    title: str
    measured: tuple[str, ...]
    calibrated: bool
    batch: tuple[tuple[str, str, str], ...]


@dataclass(frozen=True)
class BoardFacts:
    """The day board: every element's facts, per-design calibration offers, state counts."""

    elements: tuple[ElementFacts, ...]
    offers: tuple[DesignOffer, ...]
    counts: tuple[tuple[State, int], ...]


# --------------------------------------------------------------------------- set-up


def now() -> datetime:
    """The one clock read for a station write (UTC)."""
    return datetime.now(UTC)


@contextmanager
def _open(station: Station) -> Iterator[rec.RecordStore]:
    """This thread's open store (kept open between requests)."""
    yield station.stores.get()


def _solve(spec: Design, store: rec.RecordStore,
           model: ModelName) -> tuple[tuple[DesignCuts, ...], frozenset[str]]:
    """The designs solved as the packet solves them, with the calibrations that apply."""
    from buildsheet.build import stored_calibrations
    from buildsheet.packet import solve_designs, usable_calibrations

    cals = usable_calibrations(spec, stored_calibrations(store, spec))
    return solve_designs(spec, model, cals), frozenset(cals)


def load_station(spec_path: str | Path, store_path: str | Path | None = None,
                 model: ModelName = "mom") -> Station:
    """Read the spec, open its record store (made by ``buildsheet packet``) and solve the
    designs. RecordError / SpecError for a bad spec or a missing store."""
    from buildsheet.spec.reader import load_spec
    from buildsheet.station.security import organiser_pin

    spec = load_spec(spec_path)
    store_file = Path(store_path) if store_path else rec.default_store(spec_path)
    with rec.open_store(store_file, create=False, verify=True) as store:
        cuts, calibrated = _solve(spec, store, model)
        pin = organiser_pin(store)
    return Station(Path(spec_path), store_file, spec, cuts, calibrated, model, pin,
                   StorePool(store_file))


def refreshed(station: Station) -> Station:
    """The station with its designs solved again (after a calibration)."""
    with _open(station) as store:
        cuts, calibrated = _solve(station.spec, store, station.model)
    return replace(station, cuts=cuts, calibrated=calibrated)


# --------------------------------------------------------------------------- reading


def _entries(station: Station, histories: Mapping[str, ElementHistory],
             kits: tuple[Kit, ...] | None = None) -> dict[str, ElementEntry]:
    """The packet's element entries over these histories (of the given kits only, for one
    element's page: partners are within a kit)."""
    from buildsheet.packet import element_entries

    spec = station.spec if kits is None else replace(station.spec, kits=kits)
    return {e.element_id: e for e in element_entries(spec, station.cuts, histories)}


def _headline(entry: ElementEntry, units: str) -> str:
    """Both legs' action in words, e.g. "Shorten each leg by 45 mm (1 3/4 in)"."""
    a, b = entry.state.legs
    if a.action == b.action:
        return a.action.words(units).capitalize()  # type: ignore[arg-type]
    return (f"Leg A: {a.action.words(units, both=False)}; "  # type: ignore[arg-type]
            f"leg B: {b.action.words(units, both=False)}")  # type: ignore[arg-type]


def _reading(m: Measurement, extras: Mapping[int, rec.ReadingExtras], voided: bool) -> Reading:
    x = extras.get(m.id, rec.ReadingExtras())
    return Reading(m.id, m.time, m.dip_hz, m.swr, x.r_ohm, x.x_ohm, m.note,
                   x.sweep_name is not None, voided)


def _facts(station: Station, history: ElementHistory, entry: ElementEntry | None,
           extras: Mapping[int, rec.ReadingExtras]) -> ElementFacts:
    from buildsheet.calc.advice import tuning_words

    row = history.element
    units = station.spec.event.units
    readings = [_reading(m, extras, False) for m in history.measurements]
    readings += [_reading(v, extras, True) for v in history.voided if isinstance(v, Measurement)]
    entries: list[Entry] = []
    for record, voided in [*((r, False) for r in (*history.trims, *history.cuts)),
                           *((v, True) for v in history.voided
                             if isinstance(v, (Trim, LegCut)))]:
        if isinstance(record, Trim):
            entries.append(Entry(record.id, record.time, "trim", record.leg, record.delta_m,
                                 record.note, voided))
        elif isinstance(record, LegCut):
            entries.append(Entry(record.id, record.time, "cut", record.leg, record.length_m,
                                 record.how + (f"; {record.note}" if record.note else ""),
                                 voided))
    readings.sort(key=lambda r: (r.time, r.id))
    if entry is None:  # archived: dropped from the spec, records kept
        return ElementFacts(row.id, row.kit, "", row.design, row.key, row.design_frequency_hz,
                            row.band_low_hz, row.band_high_hz, (), "", row.partners, "not cut",
                            tuple(readings), tuple(entries), None, True)
    legs = tuple(LegFacts(leg.leg_id, leg.prescribed_cut_m, leg.cut_m, leg.current_m,
                          leg.target_m, leg.action.words(units, both=False))
                 for leg in entry.state.legs)
    latest = history.measurements[-1].id if history.measurements else None
    headline = _headline(entry, units)
    lines = tuple(line for line in entry.advice if line.rstrip(".") != headline)
    return ElementFacts(row.id, row.kit, entry.kit.builder, row.design, row.key,
                        row.design_frequency_hz, row.band_low_hz, row.band_high_hz, legs,
                        tuning_words(entry.cut, units), entry.partners, entry.state.status,
                        tuple(readings), tuple(entries), Instruction(headline, lines, latest),
                        row.status != "active")


def resolve(station: Station, text: str) -> str:
    """The element ID for an element or leg ID typed or scanned; RecordError naming the nearest."""
    with _open(station) as store:
        row, _leg = rec.resolve_id(store, text)
    return row.id


def element_facts(station: Station, element_id: str) -> ElementFacts:
    """The element page's facts; RecordError naming the nearest IDs when unknown."""
    with _open(station) as store:
        history = rec.element_history(store, element_id)
        extras = rec.reading_extras(store, element_id)
    kit = tuple(k for k in station.spec.kits if k.kit_id == history.element.kit)
    entry = _entries(station, {element_id: history}, kit).get(element_id)
    return _facts(station, history, entry, extras)


def board_facts(station: Station) -> BoardFacts:
    """Every element of the spec with its facts and, per design, the calibration offer and the
    batch trims (the packet's: elements of a calibrated design already cut)."""
    with _open(station) as store:
        histories = {h.element.id: h for h in rec.load_histories(store)}
        extras = rec.reading_extras(store)
    entries = _entries(station, histories)
    facts = tuple(_facts(station, histories[eid], e, extras)
                  for eid, e in entries.items() if eid in histories)
    units = station.spec.event.units
    offers = []
    for c in station.cuts:
        key = c.design.key
        mine = [e for e in entries.values() if e.kit.design_key == key]
        measured = tuple(e.element_id for e in mine if e.state.latest_dip_hz is not None)
        calibrated = key in station.calibrated
        batch = tuple((e.element_id, *(leg.action.words(units, both=False)
                                       for leg in e.state.legs))
                      for e in mine if calibrated and e.state.is_cut)
        offers.append(DesignOffer(key, c.design.title, measured, calibrated, batch))  # type: ignore[arg-type]
    counts = tuple((s, sum(f.state == s for f in facts)) for s in STATES)
    return BoardFacts(facts, tuple(offers), counts)


def stored_sweep(station: Station, element_id: str,
                 measurement_id: int) -> tuple[Sweep, SweepFit] | None:
    """The sweep stored with one of an element's readings, re-read and analysed, or None."""
    with _open(station) as store:
        found = rec.reading_extras(store, element_id, with_sweeps=True).get(measurement_id)
    if found is None or found.sweep_csv is None:
        return None
    sweep = replace(read_sweep(found.sweep_csv.encode(), "stored.csv"),
                    name=found.sweep_name or "sweep")
    return sweep, analyse(sweep)


# --------------------------------------------------------------------------- writing


def record_dip(station: Station, element_id: str, dip_text: str, swr_text: str | None = None,
               r_text: str | None = None, x_text: str | None = None, note: str = "") -> int:
    """Record a dip typed on the element page; parsed and checked as ``buildsheet measure``
    does (same functions, same messages). Returns the reading's number."""
    from buildsheet.cli.records import parse_reading

    dip, swr, extras = parse_reading(dip_text, swr_text, r_text, x_text)
    with station.stores.writing() as store:
        return rec.add_measurement(store, element_id, dip, swr, note, now(), extras).id


def record_sweep(station: Station, element_id: str, file_name: str, data: bytes,
                 note: str = "") -> int:
    """Record the resonance of an uploaded sweep file, the sweep stored with the reading (one
    transaction), as ``buildsheet measure --sweep`` does."""
    from buildsheet.cli.records import sweep_reading

    dip, swr, extras, fit = sweep_reading(file_name, data)
    text = f"sweep {file_name}: {fit.method}" + (f"; {note}" if note else "")
    with station.stores.writing() as store:
        return rec.add_measurement(store, element_id, dip, swr, text, now(), extras).id


def record_trim(station: Station, element_id: str, amount_text: str,
                direction: Literal["removed", "added"], leg: str, note: str = "") -> int:
    """Record a trim typed on the element page, checked as ``buildsheet trim`` does."""
    from buildsheet.cli.records import _length

    if direction not in ("removed", "added"):
        raise RecordError("trim: give exactly one of --removed LENGTH or --added LENGTH")
    if leg not in rec.LEGS:
        raise RecordError(f"--leg: invalid choice: {leg!r} (choose from 'A', 'B', 'both')")
    amount = _length(f"--{direction}", amount_text)
    delta = amount if direction == "removed" else -amount
    with station.stores.writing() as store:
        return rec.add_trim(store, element_id, leg, delta, note, now()).id  # type: ignore[arg-type]


def void_reading(station: Station, element_id: str, number_text: str, reason: str) -> int:
    """Void one of an element's readings by its number (as ``buildsheet void --measurement``)."""
    text = number_text.strip().removeprefix("reading").strip()
    if not text.isdigit():
        raise RecordError(f"void: the reading number must be a whole number, got "
                          f"{number_text.strip()!r}")
    number = int(text)
    with station.stores.writing() as store:
        history = rec.element_history(store, element_id)
        if number not in {m.id for m in history.measurements}:
            raise RecordError(f"void: {element_id} has no valid reading {number}")
        rec.void_record(store, "measurement", number, reason, now())
    return number


def calibrate(station: Station, design_key: str, sources: Sequence[str]) -> Station:
    """Fit the site from the given measured elements (as ``buildsheet calibrate`` does), store
    the calibration and return the station with its designs solved again."""
    from buildsheet.calc import calibrate as cal
    from buildsheet.cli.calibrate import read_observations

    designs = {d.key: d for d in station.spec.designs}
    if design_key not in designs:
        raise RecordError([Problem("calibrate", f"no design {design_key!r} (designs: "
                                   f"{', '.join(designs)})")])
    if not sources:
        raise RecordError("calibrate: tick at least one measured element of that design")
    design = designs[design_key]
    with _open(station) as store:
        histories = {h.element.id: h for h in rec.load_histories(store)}
        obs, kit_legs = read_observations(store, design, list(sources), histories)
    calibration = cal.fit_site(design, station.spec.site.ground, obs, kit_legs)  # seconds
    with station.stores.writing() as store:
        rec.save_calibration(store, design.key, calibration.fingerprint,
                             cal.calibration_to_json(calibration), calibration.source_ids, now())
    return refreshed(station)


def labels_to_reprint(station: Station) -> tuple[str, ...] | None:
    """Leg IDs whose label would now print differently from the latest packet's (compared by
    the packet's own item hashes against its manifest); None when no packet is known."""
    from buildsheet.build import MANIFEST_JSON, PACKET_KEY, packet_from_store
    from buildsheet.store.manifest import read_manifest

    with _open(station) as store:
        folder = rec.get_state(store, PACKET_KEY)
        if folder is None:
            return None
        manifest = read_manifest(station.store_path.parent / folder / MANIFEST_JSON)
        if manifest is None:
            return None
        packet, _histories = packet_from_store(station.spec, store, built_at="",
                                               model=station.model)
    return tuple(sorted(name.split(":", 1)[1] for name, digest in packet.items.items()
                        if name.startswith("label:") and manifest.items.get(name) != digest))
