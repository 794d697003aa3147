"""The station's one door to the record store and the packet (the same functions as the CLI).

Every number the station shows or stores comes through here from the core: the packet
(:func:`buildsheet.packet.build_packet`, computed once at start-up and again after a
calibration), the ledger (:mod:`buildsheet.store.ledger`) and the CLI's own input parsers
(:mod:`buildsheet.cli.records`), so a reading typed on a phone is checked exactly as
``buildsheet measure`` checks it. Pages get plain frozen records (:class:`ElementFacts`,
:class:`BoardFacts`) in SI units; :mod:`buildsheet.station.views` formats them.
"""

from __future__ import annotations

import math
import sqlite3
import threading
from collections.abc import Iterator, Sequence
from contextlib import contextmanager
from dataclasses import dataclass, field, replace
from datetime import UTC, datetime
from pathlib import Path
from typing import Any, Literal

from buildsheet.calc.sweep import Sweep, SweepFit, analyse, read_sweep, sweep_to_csv
from buildsheet.em.prediction import ModelName
from buildsheet.errors import Problem, RecordError
from buildsheet.packet import ElementEntry, Packet, build_packet
from buildsheet.spec.design import Design
from buildsheet.store import ledger as rec

State = Literal["not cut", "cut", "measured", "tuned"]
STATES: tuple[State, ...] = ("not cut", "cut", "measured", "tuned")


#: SQLite sync level of the station's connections. In WAL mode NORMAL syncs at checkpoints
#: instead of at every commit: the store stays consistent after a crash or power cut, and a
#: commit survives the station being killed; only a power cut may roll back the last
#: commits (SQLite documentation, "PRAGMA synchronous" and "Write-Ahead Logging"). It keeps
#: fifty phones' readings from queueing behind one disk flush each (bench/station.py).
SYNCHRONOUS = "NORMAL"


class StorePool:
    """One open record store per worker thread, kept open for the station's run.

    Opening and closing a connection per request would make every close of the last
    connection checkpoint the WAL (about 15 ms); a connection kept per thread avoids that.
    SQLite connections stay in the thread that opened them; :meth:`close_all` ends them.
    """

    def __init__(self, path: Path):
        self.path = path
        self._local = threading.local()
        self._lock = threading.Lock()
        self._write_lock = threading.Lock()
        self._opened: list[rec.RecordStore] = []

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
        CLI, still meet the store's busy timeout)."""
        store = self.get()
        with self._write_lock:
            yield store

    def close_all(self) -> None:
        with self._lock:
            opened, self._opened = self._opened, []
        for store in opened:
            try:
                store.conn.close()
            except sqlite3.ProgrammingError:  # opened in another thread: it ends with it
                pass


@dataclass(frozen=True)
class Station:
    """What one run of the station serves: the spec, its store, and the packet computed from
    both (prescribed cuts, calibrations, batch trims)."""

    spec_path: Path
    store_path: Path
    spec: Design
    packet: Packet
    model: ModelName
    pin: str
    stores: StorePool = field(compare=False, repr=False, default=None)  # type: ignore[assignment]


@dataclass(frozen=True)
class LegFacts:
    """One leg, metres: prescribed by the current design, as cut (None: not recorded as cut),
    current (after trims) and the target it should end at."""

    leg_id: str
    prescribed_cut_m: float
    cut_m: float | None
    current_m: float
    target_m: float


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
class TrimDone:
    """A recorded trim: ``delta_m`` > 0 removed, < 0 added back, on leg A, B or both."""

    id: int
    time: str
    leg: str
    delta_m: float
    note: str
    voided: bool = False


@dataclass(frozen=True)
class Instruction:
    """What to do after a reading: ``action`` shorten / lengthen / none, ``amount_m`` per leg
    (>= 0), the advice lines of the core and the partner elements to re-check."""

    reading_id: int
    dip_hz: float
    action: Literal["shorten", "lengthen", "none"]
    amount_m: float
    first_step_m: float
    lines: tuple[str, ...]


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
    legs: tuple[LegFacts, LegFacts]
    tuning_m_per_100khz: float
    partners: tuple[str, ...]
    state: State
    readings: tuple[Reading, ...]
    trims: tuple[TrimDone, ...]
    instruction: Instruction | None
    archived: bool = False


@dataclass(frozen=True)
class DesignOffer:
    """Per design on the day board: measured elements that could calibrate it, whether a
    calibration applies, and the batch trims (element ID, remove A, remove B, metres)."""

    design_key: str
    title: str
    measured: tuple[str, ...]
    calibrated: bool
    batch: tuple[tuple[str, float, float, str], ...]


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


def _writing(station: Station) -> Any:
    """This thread's open store under the station's write lock."""
    return station.stores.writing()


def compute_packet(spec: Design, store: rec.RecordStore, model: ModelName) -> Packet:
    """The packet the build would compute from this spec and store (same functions)."""
    from buildsheet.build import cut_elements, stored_calibrations

    histories = rec.load_histories(store)
    return build_packet(spec, built_at=now().strftime("%Y-%m-%dT%H:%M:%SZ"), model=model,
                        calibrations=stored_calibrations(store, spec),
                        cut_elements=cut_elements(histories))


def organiser_pin(store_path: Path) -> str:
    """The organiser PIN kept with the record store (created on first use)."""
    from buildsheet.station.security import new_pin
    from buildsheet.store.files import write_atomic

    path = store_path.with_name(store_path.name + ".pin")
    if path.is_file():
        text = path.read_text(encoding="utf-8").strip()
        if text.isdigit():
            return text
    pin = new_pin()
    write_atomic(path, pin.encode())
    return pin


def load_station(spec_path: str | Path, store_path: str | Path | None = None,
                 model: ModelName = "mom") -> Station:
    """Read the spec, open its record store (made by ``buildsheet packet``) and compute the
    packet. RecordError / SpecError for a bad spec or a missing store."""
    from buildsheet.spec.reader import load_spec

    spec = load_spec(spec_path)
    store_file = Path(store_path) if store_path else rec.default_store(spec_path)
    with rec.open_store(store_file, create=False, verify=True) as store:
        _ensure_extras(store)
        packet = compute_packet(spec, store, model)
    return Station(Path(spec_path), store_file, spec, packet, model, organiser_pin(store_file),
                   StorePool(store_file))


def refreshed(station: Station) -> Station:
    """The station with its packet recomputed (after a calibration)."""
    with _open(station) as store:
        return replace(station, packet=compute_packet(station.spec, store, station.model))


# --------------------------------------------------------------------------- sweeps and R, X

_EXTRAS = ("CREATE TABLE IF NOT EXISTS station_readings (measurement_id INTEGER PRIMARY KEY "
           "REFERENCES measurements(id), r_ohm REAL, x_ohm REAL, sweep_name TEXT, "
           "sweep_csv TEXT, resonance_hz REAL, bw_low_hz REAL, bw_high_hz REAL)")


def _ensure_extras(store: rec.RecordStore) -> None:
    store.conn.execute(_EXTRAS)


def _extras(store: rec.RecordStore) -> dict[int, tuple[float | None, float | None, bool]]:
    rows = store.conn.execute(
        "SELECT measurement_id, r_ohm, x_ohm, sweep_csv IS NOT NULL FROM station_readings")
    return {r[0]: (r[1], r[2], bool(r[3])) for r in rows}


def stored_sweep(station: Station, measurement_id: int) -> tuple[Sweep, SweepFit] | None:
    """The sweep stored with a reading, re-read and analysed, or None."""
    with _open(station) as store:
        row = store.conn.execute("SELECT sweep_name, sweep_csv FROM station_readings WHERE "
                                 "measurement_id = ?", (measurement_id,)).fetchone()
    if row is None or row[1] is None:
        return None
    sweep = read_sweep(row[1].encode(), "stored.csv")
    sweep = replace(sweep, name=row[0] or "sweep")
    return sweep, analyse(sweep)


# --------------------------------------------------------------------------- reading


def _entry(station: Station, element_id: str) -> ElementEntry | None:
    return next((e for e in station.packet.entries if e.element_id == element_id), None)


def _state(history: rec.ElementHistory, design_hz: float) -> State:
    if not (history.measurements or history.trims):
        return "not cut"
    if not history.measurements:
        return "cut"
    last = history.measurements[-1]
    later_trim = any(t.time > last.time for t in history.trims)
    if not later_trim and abs(last.dip_hz - design_hz) <= rec.ON_FREQUENCY_FRACTION * design_hz:
        return "tuned"
    return "measured"


def instruction(history: rec.ElementHistory, reading: rec.Measurement) -> Instruction:
    """The core's trim advice for a reading, given the trims recorded before it."""
    before = [t for t in history.trims if t.time <= reading.time]
    advice = rec.trim_advice(history.element, reading.dip_hz, before)
    action: Literal["shorten", "lengthen", "none"] = (
        "shorten" if advice.action == "remove" else
        "lengthen" if advice.action == "add back" else "none")
    return Instruction(reading.id, reading.dip_hz, action, abs(advice.per_leg_m),
                       advice.first_step_m, advice.lines)


def _facts(station: Station, history: rec.ElementHistory,
           extras: dict[int, tuple[float | None, float | None, bool]]) -> ElementFacts:
    row = history.element
    entry = _entry(station, row.id)
    touched = bool(history.measurements or history.trims)
    if entry is not None:
        cut = entry.cut
        prescribed, builder = cut.cut_leg_m, entry.kit.builder
        target = cut.predicted_leg_m + cut.termination_m + cut.feed_m
        tuning = cut.tuning_m_per_100khz
    else:  # archived: dropped from the spec, records kept
        prescribed, builder, target = row.cut_leg_m, "", row.predicted_leg_m
        tuning = -row.slope_m_per_hz * 100e3
    legs = tuple(LegFacts(f"{row.id}-{s}", prescribed, row.cut_leg_m if touched else None,
                          history.current_leg_m(s) if touched else prescribed, target)
                 for s in ("A", "B"))
    none: tuple[float | None, float | None, bool] = (None, None, False)
    readings = tuple(Reading(m.id, m.time, m.dip_hz, m.swr, extras.get(m.id, none)[0],
                             extras.get(m.id, none)[1], m.note, extras.get(m.id, none)[2])
                     for m in history.measurements)
    trims = tuple(TrimDone(t.id, t.time, t.leg, t.delta_m, t.note) for t in history.trims)
    latest = history.measurements[-1] if history.measurements else None
    return ElementFacts(row.id, row.kit, builder, row.design, row.key, row.design_frequency_hz,
                        row.band_low_hz, row.band_high_hz, (legs[0], legs[1]), tuning,
                        row.partners, _state(history, row.design_frequency_hz), readings, trims,
                        instruction(history, latest) if latest else None,
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
        extras = _extras(store)
    return _facts(station, history, extras)


def board_facts(station: Station) -> BoardFacts:
    """Every active element's facts and, per design, the calibration offer and batch trims."""
    with _open(station) as store:
        histories = [h for h in rec.load_histories(store) if h.element.status == "active"]
        extras = _extras(store)
    facts = tuple(_facts(station, h, extras) for h in histories)
    offers = []
    for c in station.packet.cuts:
        key = c.design.key
        measured = tuple(f.element_id for f in facts if f.design_key == key and f.readings)
        batch = tuple((t.element_id, t.remove_a_m, t.remove_b_m, t.action)
                      for t in station.packet.batch_trims
                      if any(f.element_id == t.element_id and f.design_key == key
                             for f in facts))
        offers.append(DesignOffer(key, c.design.title, measured,
                                  key in station.packet.calibrations, batch))
    counts = tuple((s, sum(f.state == s for f in facts)) for s in STATES)
    return BoardFacts(facts, tuple(offers), counts)


# --------------------------------------------------------------------------- writing


def _optional_float(option: str, text: str | None, *, minimum: float | None = None,
                    what: str = "a number") -> float | None:
    """An optional numeric form field, checked like argparse's ``type=float`` would read it."""
    if text is None or not text.strip():
        return None
    try:
        value = float(text)
    except ValueError:
        raise RecordError(f"{option}: invalid float value: {text.strip()!r}") from None
    if not math.isfinite(value) or (minimum is not None and value < minimum):
        raise RecordError(f"{option}: {what}, got {text.strip()}")
    return value


def record_dip(station: Station, element_id: str, dip_text: str, swr_text: str | None = None,
               r_text: str | None = None, x_text: str | None = None, note: str = "") -> int:
    """Record a dip typed on the element page; validated as ``buildsheet measure`` validates
    it (same parsers, same ledger checks, same messages). Returns the reading's number."""
    from buildsheet.cli.records import _frequency

    dip = _frequency(dip_text)
    swr = _optional_float("--swr", swr_text, minimum=1.0, what="an SWR is 1 or more")
    r = _optional_float("--r", r_text, minimum=0.0, what="R is 0 ohm or more")
    x = _optional_float("--x", x_text)
    return _store_reading(station, element_id, dip, swr, r, x, note, None)


def record_sweep(station: Station, element_id: str, file_name: str, data: bytes,
                 note: str = "") -> int:
    """Record the resonance of an uploaded sweep file (with the sweep itself)."""
    sweep = read_sweep(data, file_name)
    fit = analyse(sweep)
    text = f"sweep {file_name}: {fit.method}" + (f"; {note}" if note else "")
    return _store_reading(station, element_id, fit.resonance_hz, fit.swr, fit.r_ohm,
                          0.0 if fit.r_ohm is not None else None, text, (sweep, fit))


def _store_reading(station: Station, element_id: str, dip: float, swr: float | None,
                   r: float | None, x: float | None, note: str,
                   sweep: tuple[Sweep, SweepFit] | None) -> int:
    with _writing(station) as store:
        m = rec.add_measurement(store, element_id, dip, swr, note, now())
        if r is not None or x is not None or sweep is not None:
            s, fit = sweep if sweep else (None, None)
            bw = fit.bandwidth_hz if fit and fit.bandwidth_hz else (None, None)
            try:
                store.conn.execute(
                    "INSERT INTO station_readings VALUES (?, ?, ?, ?, ?, ?, ?, ?)",
                    (m.id, r, x, s.name if s else None, sweep_to_csv(s) if s else None,
                     fit.resonance_hz if fit else None, bw[0], bw[1]))
            except sqlite3.Error as exc:
                raise RecordError(f"{station.store_path}: reading {m.id} stored, its sweep "
                                  f"not ({exc})") from exc
    return m.id


def record_trim(station: Station, element_id: str, amount_text: str,
                direction: Literal["removed", "added"], leg: str, note: str = "") -> int:
    """Record a trim typed on the element page, validated as ``buildsheet trim`` does."""
    from buildsheet.cli.records import _length

    if direction not in ("removed", "added"):
        raise RecordError("trim: give exactly one of --removed LENGTH or --added LENGTH")
    if leg not in rec.LEGS:
        raise RecordError(f"--leg: invalid choice: {leg!r} (choose from 'A', 'B', 'both')")
    amount = _length(f"--{direction}", amount_text)
    delta = amount if direction == "removed" else -amount
    with _writing(station) as store:
        return rec.add_trim(store, element_id, leg, delta, note, now()).id  # type: ignore[arg-type]


def calibrate(station: Station, design_key: str, sources: Sequence[str]) -> Station:
    """Fit the site from the given measured elements (as ``buildsheet calibrate`` does), store
    the calibration and return the station with its packet recomputed."""
    from buildsheet.calc import calibrate as cal
    from buildsheet.cli.calibrate import read_observations

    designs = {d.key: d for d in station.spec.designs}
    if design_key not in designs:
        raise RecordError([Problem("calibrate", f"no design {design_key!r} (designs: "
                                   f"{', '.join(designs)})")])
    if not sources:
        raise RecordError("calibrate: no measured element of that design yet")
    design = designs[design_key]
    with _open(station) as store:
        obs, kit_legs = read_observations(store, design, list(sources))
    calibration = cal.fit_site(design, station.spec.site.ground, obs, kit_legs)  # seconds
    with _writing(station) as store:
        rec.save_calibration(store, design.key, calibration.fingerprint,
                             cal.calibration_to_json(calibration), calibration.source_ids, now())
    return refreshed(station)


def labels_to_reprint(station: Station) -> tuple[str, ...]:
    """Element IDs whose printed label no longer matches what the packet would print now."""
    from buildsheet.build import current_legs, element_hashes

    with _open(station) as store:
        histories = rec.load_histories(store)
    hashes = element_hashes(station.packet, current_legs(station.packet, histories))
    out = []
    for h in histories:
        labels = [p for p in h.prints if p.kind == "label"]
        if h.element.id in hashes and labels and labels[-1].hash != hashes[h.element.id]:
            out.append(h.element.id)
    return tuple(out)
