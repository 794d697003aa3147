"""The element record store: elements, analyzer measurements, trims and print history (SQLite).

One durable record per element, kept beside the spec (``<spec stem>.records.sqlite``). The store
uses the standard library's sqlite3 with a versioned schema (``PRAGMA user_version`` and the
``MIGRATIONS`` list), foreign keys on, WAL journal, and a busy timeout so that concurrent
writers wait for each other instead of failing. Every write is one ``BEGIN IMMEDIATE``
transaction. Nothing is ever deleted (triggers refuse DELETE): elements dropped from the spec are
archived. Lengths are metres, frequencies hertz, times ISO 8601 text passed in by the caller.

The ledger keeps two kinds of truth apart. *As designed*: the ``elements`` row holds what the
latest packet printed for an element (its prescribed cut per leg, target, model slope), rewritten
by every packet. *As built*: ``cuts`` (the length each leg was actually cut to, recorded when the
cut is confirmed, or implicitly at the printed length by the leg's first reading or trim),
``trims`` and ``measurements`` are append-only and never rewritten by a spec revision or a
calibration; ``voids`` withdraw a wrong entry without deleting it. The numbers derived from both
(current length, target, action, expected dip) are computed in :mod:`buildsheet.calc.asbuilt`.
Export and import live in :mod:`buildsheet.store.exchange`.
"""

from __future__ import annotations

import difflib
import json
import math
import os
import sqlite3
from collections.abc import Iterable, Iterator, Mapping, Sequence
from contextlib import contextmanager
from dataclasses import dataclass, replace
from datetime import datetime
from pathlib import Path
from typing import Any, Literal, Self

from buildsheet.errors import RecordError
from buildsheet.records import (
    LEGS,
    PRINT_KINDS,
    SIDES,
    VOID_KINDS,
    ElementHistory,
    ElementRow,
    Leg,
    LegCut,
    Measurement,
    PrintKind,
    PrintRecord,
    Side,
    Status,
    Trim,
    Void,
    VoidKind,
)

#: How long a writer waits for another writer's lock before giving up, milliseconds.
BUSY_TIMEOUT_MS = 30_000
#: A dip this far outside the band edges (fraction of the edge) is refused as a probable unit
#: slip or wrong element. An element cut 3-5 % long dips a few % below the band (common practice).
DIP_WINDOW_FRACTION = 0.15

# Schema migrations: (version, statements). Append only; never edit a released migration.
_NO_DELETE = ("CREATE TRIGGER {t}_keep BEFORE DELETE ON {t} BEGIN "
              "SELECT RAISE(ABORT, 'records are never deleted; archive instead'); END")
_CHILD_TABLES = ("measurements", "trims", "prints")
MIGRATIONS: tuple[tuple[int, tuple[str, ...]], ...] = (
    (1, (
        ("CREATE TABLE elements (id TEXT PRIMARY KEY, kit TEXT NOT NULL, design TEXT NOT NULL, "
        " element_key TEXT NOT NULL,"
        " design_frequency_hz REAL NOT NULL CHECK (design_frequency_hz > 0),"
        " band_low_hz REAL NOT NULL CHECK (band_low_hz > 0),"
        " band_high_hz REAL NOT NULL CHECK (band_high_hz >= band_low_hz),"
        " predicted_leg_m REAL NOT NULL CHECK (predicted_leg_m > 0),"
        " cut_leg_m REAL NOT NULL CHECK (cut_leg_m > 0), slope_m_per_hz REAL NOT NULL,"
        " partners TEXT NOT NULL DEFAULT '[]', spec_revision INTEGER NOT NULL,"
        " status TEXT NOT NULL CHECK (status IN ('active', 'archived')),"
        " created TEXT NOT NULL, updated TEXT NOT NULL)"),
        ("CREATE TABLE measurements (id INTEGER PRIMARY KEY,"
        " element_id TEXT NOT NULL REFERENCES elements(id), time TEXT NOT NULL,"
        " dip_hz REAL NOT NULL CHECK (dip_hz > 0), swr REAL CHECK (swr IS NULL OR swr >= 1),"
        " note TEXT NOT NULL DEFAULT '')"),
        ("CREATE TABLE trims (id INTEGER PRIMARY KEY,"
        " element_id TEXT NOT NULL REFERENCES elements(id),"
        " leg TEXT NOT NULL CHECK (leg IN ('A', 'B', 'both')), delta_m REAL NOT NULL,"
        " time TEXT NOT NULL, note TEXT NOT NULL DEFAULT '')"),
        ("CREATE TABLE prints (id INTEGER PRIMARY KEY, revision INTEGER NOT NULL,"
        " element_id TEXT NOT NULL REFERENCES elements(id),"
        " kind TEXT NOT NULL CHECK (kind IN ('sheet', 'label')), hash TEXT NOT NULL,"
        " file TEXT NOT NULL DEFAULT '', time TEXT NOT NULL)"),
        *(f"CREATE INDEX {t}element_from_row ON {t} (element_id)" for t in _CHILD_TABLES),
        *(_NO_DELETE.format(t=t) for t in ("elements", *_CHILD_TABLES)),
    )),
    (2, (  # site calibrations per design (issue 7); ``data`` is the calibration as JSON
        ("CREATE TABLE calibrations (id INTEGER PRIMARY KEY, design TEXT NOT NULL,"
         " fingerprint TEXT NOT NULL, data TEXT NOT NULL, sources TEXT NOT NULL DEFAULT '[]',"
         " created TEXT NOT NULL)"),
        "CREATE INDEX calibrations_design ON calibrations (design, fingerprint)",
        _NO_DELETE.format(t="calibrations"),
    )),
)
MIGRATIONS += (
    (3, (  # the as-built ledger: one row per leg cut; voids; small key-value state
        ("CREATE TABLE cuts (id INTEGER PRIMARY KEY,"
         " element_id TEXT NOT NULL REFERENCES elements(id),"
         " leg TEXT NOT NULL CHECK (leg IN ('A', 'B')),"
         " length_m REAL NOT NULL CHECK (length_m > 0), revision INTEGER NOT NULL,"
         " how TEXT NOT NULL, time TEXT NOT NULL, note TEXT NOT NULL DEFAULT '')"),
        "CREATE INDEX cuts_element ON cuts (element_id)",
        _NO_DELETE.format(t="cuts"),
        ("CREATE TABLE voids (id INTEGER PRIMARY KEY,"
         " kind TEXT NOT NULL CHECK (kind IN ('measurement', 'trim', 'cut')),"
         " element_id TEXT NOT NULL REFERENCES elements(id), target TEXT NOT NULL,"
         " reason TEXT NOT NULL DEFAULT '', time TEXT NOT NULL)"),
        _NO_DELETE.format(t="voids"),
        "CREATE TABLE state (key TEXT PRIMARY KEY, value TEXT NOT NULL)",
        # Stores that predate the ledger: wire with readings or trims was cut at the length the
        # store held for it (what its label printed).
        ("INSERT INTO cuts (element_id, leg, length_m, revision, how, time, note) "
         "SELECT e.id, l.leg, e.cut_leg_m, e.spec_revision, 'before the ledger', e.updated, '' "
         "FROM elements e, (SELECT 'A' AS leg UNION SELECT 'B') l WHERE e.id IN "
         "(SELECT element_id FROM measurements UNION SELECT element_id FROM trims)"),
    )),
)
MIGRATIONS += (
    (4, (  # the station (issue 11): R and X at the dip, and the analyzer sweep, per reading
        ("CREATE TABLE reading_extras (measurement_id INTEGER PRIMARY KEY"
         " REFERENCES measurements(id), r_ohm REAL CHECK (r_ohm IS NULL OR r_ohm >= 0),"
         " x_ohm REAL, sweep_name TEXT, sweep_csv TEXT)"),
        _NO_DELETE.format(t="reading_extras"),
    )),
)
SCHEMA_VERSION: int = MIGRATIONS[-1][0]


# --------------------------------------------------------------------------- data


#: File name suffix of a record store: ``club.toml`` keeps its records in ``club.records.sqlite``.
STORE_SUFFIX = ".records.sqlite"


def default_store(spec_path: str | Path) -> Path:
    """The record store beside the spec: ``club.toml`` -> ``club.records.sqlite``."""
    spec = Path(spec_path)
    return spec.with_name(spec.stem + STORE_SUFFIX)


@dataclass(frozen=True)
class SyncReport:
    """Outcome of :func:`sync_elements`, element IDs sorted."""

    new: tuple[str, ...] = ()
    changed: tuple[str, ...] = ()
    unchanged: tuple[str, ...] = ()
    archived: tuple[str, ...] = ()
    restored: tuple[str, ...] = ()


@dataclass(frozen=True)
class RecordStore:
    """An open store. Use :func:`open_store` / :func:`close_store` or ``with open_store(p) as s``."""

    path: Path
    conn: sqlite3.Connection

    def __enter__(self) -> Self:
        return self

    def __exit__(self, *exc: object) -> None:
        close_store(self)


# --------------------------------------------------------------------------- pure helpers


def iso_time(moment: datetime) -> str:
    """ISO 8601 text for a timezone-aware moment, to the microsecond (entries of one element
    are ordered by it: a trim and the reading after it must not share a stamp)."""
    if moment.tzinfo is None:
        raise ValueError("times must be timezone-aware (e.g. datetime.now(timezone.utc))")
    return moment.isoformat(timespec="microseconds")


def nearest_ids(wanted: str, existing: Iterable[str], n: int = 3) -> list[str]:
    """The existing IDs closest to ``wanted`` (case-insensitive difflib ratio)."""
    by_upper = {e.upper(): e for e in existing}
    hits = difflib.get_close_matches(wanted.upper(), list(by_upper), n=n, cutoff=0.5)
    return [by_upper[h] for h in hits]


def dip_window_hz(row: ElementRow) -> tuple[float, float]:
    """Range of dip frequencies accepted for an element, Hz (band edges widened by the window)."""
    return row.band_low_hz / (1.0 + DIP_WINDOW_FRACTION), row.band_high_hz * (1.0 + DIP_WINDOW_FRACTION)


# --------------------------------------------------------------------------- open / close


def _connect(path: Path) -> sqlite3.Connection:
    conn = sqlite3.connect(str(path), timeout=BUSY_TIMEOUT_MS / 1000, isolation_level=None)
    conn.execute(f"PRAGMA busy_timeout = {BUSY_TIMEOUT_MS}")
    return conn


def corrupt_error(path: Path, exc: Exception) -> RecordError:
    return RecordError(f"{path}: not a readable record store ({exc}). Nothing was changed; "
                       "restore it from a JSON export with `buildsheet import` into a new file.")


def open_store(path: str | Path, *, create: bool = True, verify: bool = False) -> RecordStore:
    """Open (and create or migrate) the store at ``path``.

    ``create=False`` refuses a missing file; ``verify=True`` runs ``PRAGMA quick_check`` first.
    Raises RecordError for a missing, corrupt, foreign or newer-version file.
    """
    path = Path(path)
    if not create and not path.is_file():
        raise RecordError(f"{path}: no record store there (it is created by `buildsheet packet`)")
    existed = path.exists()
    if existed and path.is_file() and path.stat().st_size == 0:
        raise RecordError(f"{path}: the record store is empty (0 bytes), so its records are "
                          "lost or were never written. Restore it from a JSON export (`buildsheet "
                          f"import BACKUP.json --store {path}` after moving this file away), or "
                          "remove the empty file to start a new store.")
    if existed and not os.access(path, os.R_OK | os.W_OK):
        raise RecordError(f"{path}: the record store is read-only (no permission to read and "
                          f"write it); make it writable, e.g. `chmod u+rw {path}`")
    try:
        conn = _connect(path)
    except sqlite3.Error as exc:
        raise RecordError(f"{path}: cannot open the record store ({exc})") from exc
    try:
        if verify:
            problems = [r[0] for r in conn.execute("PRAGMA quick_check")]
            if problems != ["ok"]:
                raise corrupt_error(path, sqlite3.DatabaseError("; ".join(problems[:3])))
        version = conn.execute("PRAGMA user_version").fetchone()[0]
        if version > SCHEMA_VERSION:
            raise RecordError(f"{path}: made by a newer buildsheet (schema {version}, this "
                              f"version reads up to {SCHEMA_VERSION}); upgrade buildsheet")
        if conn.execute("PRAGMA journal_mode").fetchone()[0].lower() != "wal":
            conn.execute("PRAGMA journal_mode = WAL")
        conn.execute("PRAGMA foreign_keys = ON")
        if version < SCHEMA_VERSION:
            _migrate(conn, path, existed)
    except sqlite3.OperationalError as exc:
        conn.close()
        if "readonly" in str(exc) or "read-only" in str(exc):
            raise RecordError(f"{path}: the record store is read-only ({exc}); make it and its "
                              "folder writable") from exc
        raise corrupt_error(path, exc) from exc
    except sqlite3.DatabaseError as exc:
        conn.close()
        raise corrupt_error(path, exc) from exc
    except BaseException:
        conn.close()
        raise
    return RecordStore(path, conn)


def _migrate(conn: sqlite3.Connection, path: Path, existed: bool = False) -> None:
    conn.execute("BEGIN IMMEDIATE")
    try:
        version = conn.execute("PRAGMA user_version").fetchone()[0]  # re-read under the lock
        if version == 0:
            names = [r[0] for r in conn.execute(
                "SELECT name FROM sqlite_master WHERE name NOT LIKE 'sqlite_%'")]
            if names:
                raise RecordError(f"{path}: an SQLite file but not a buildsheet record store "
                                  f"(tables: {', '.join(sorted(names)[:5])})")
            if existed:  # a file was there but held no store: never recreate it silently
                raise RecordError(f"{path}: the record store holds no records tables (empty "
                                  "or truncated). Restore it from a JSON export (`buildsheet "
                                  "import`) into a new file, or remove it to start over.")
        for target, statements in MIGRATIONS:
            if target > version:
                for sql in statements:
                    conn.execute(sql)
                conn.execute(f"PRAGMA user_version = {target}")
        conn.execute("COMMIT")
    except BaseException:
        conn.execute("ROLLBACK")
        raise


def close_store(store: RecordStore) -> None:
    """Close the store's connection (safe to call twice)."""
    store.conn.close()


def integrity_check(store: RecordStore) -> list[str]:
    """SQLite's own ``PRAGMA integrity_check`` plus foreign keys: ``["ok"]`` when healthy."""
    rows = [r[0] for r in store.conn.execute("PRAGMA integrity_check")]
    bad = store.conn.execute("PRAGMA foreign_key_check").fetchall()
    return rows + [f"foreign key: {tuple(b)}" for b in bad]


@contextmanager
def write_transaction(store: RecordStore) -> Iterator[sqlite3.Connection]:
    """One write transaction; waits for other writers; sqlite errors become RecordError."""
    conn = store.conn
    try:
        conn.execute("BEGIN IMMEDIATE")
    except sqlite3.DatabaseError as exc:
        raise corrupt_error(store.path, exc) from exc
    try:
        yield conn
        conn.execute("COMMIT")
    except BaseException as exc:
        if conn.in_transaction:
            conn.execute("ROLLBACK")
        if isinstance(exc, sqlite3.IntegrityError):
            raise RecordError(f"{store.path}: rejected by the record store ({exc}); "
                              "nothing was changed") from exc
        if isinstance(exc, sqlite3.DatabaseError):
            raise corrupt_error(store.path, exc) from exc
        raise


def _read(store: RecordStore, sql: str, params: Sequence[Any] = ()) -> list[tuple[Any, ...]]:
    try:
        return store.conn.execute(sql, params).fetchall()
    except sqlite3.DatabaseError as exc:
        raise corrupt_error(store.path, exc) from exc


# --------------------------------------------------------------------------- elements

ELEMENT_COLS = ("id, kit, design, element_key, design_frequency_hz, band_low_hz, band_high_hz, "
                 "predicted_leg_m, cut_leg_m, slope_m_per_hz, partners, spec_revision, status, "
                 "created, updated")


def element_from_row(r: Sequence[Any]) -> ElementRow:
    return ElementRow(r[0], r[1], r[2], r[3], r[4], r[5], r[6], r[7], r[8], r[9],
                      tuple(json.loads(r[10])), r[11], r[12], r[13], r[14])


def element_params(e: ElementRow) -> tuple[Any, ...]:
    return (e.id, e.kit, e.design, e.key, e.design_frequency_hz, e.band_low_hz, e.band_high_hz,
            e.predicted_leg_m, e.cut_leg_m, e.slope_m_per_hz, json.dumps(list(e.partners)),
            e.spec_revision, e.status, e.created, e.updated)


def list_elements(store: RecordStore, status: Status | None = None) -> list[ElementRow]:
    """All elements (or those with one status), sorted by ID."""
    where = "" if status is None else " WHERE status = ?"
    rows = _read(store, f"SELECT {ELEMENT_COLS} FROM elements{where} ORDER BY id",
                 () if status is None else (status,))
    return [element_from_row(r) for r in rows]


def _unknown(store: RecordStore, wanted: str) -> RecordError:
    ids = [r[0] for r in _read(store, "SELECT id FROM elements ORDER BY id")]
    if not ids:
        return RecordError(f"unknown element {wanted!r}: the record store {store.path} is empty")
    near = nearest_ids(wanted, ids) or ids[:5]
    return RecordError(f"unknown element {wanted!r}; nearest: {', '.join(near)}")


def get_element(store: RecordStore, element_id: str) -> ElementRow:
    """The element with this ID; RecordError naming the nearest IDs when unknown."""
    rows = _read(store, f"SELECT {ELEMENT_COLS} FROM elements WHERE id = ?", (element_id,))
    if not rows:
        raise _unknown(store, element_id)
    return element_from_row(rows[0])


def resolve_id(store: RecordStore, text: str) -> tuple[ElementRow, Literal["A", "B"] | None]:
    """Element for an element ID ("K03-40m") or a leg ID ("K03-40m-A": also returns the leg).

    Case does not matter ("K03-40M-A" as a label's QR code holds it): element IDs are a kit
    number and a band name, which no two elements share in any case."""
    text = text.strip()
    row = _element_by_id(store, text)
    if row is not None:
        return row, None
    base, _, leg = text.rpartition("-")
    if base and leg.upper() in ("A", "B"):
        row = _element_by_id(store, base)
        if row is not None:
            return row, "A" if leg.upper() == "A" else "B"
    raise _unknown(store, text)


def _element_by_id(store: RecordStore, element_id: str) -> ElementRow | None:
    """The element row of ``element_id``: the exact ID (the key's index), else one equal but
    for case (a scan of the few hundred rows a build day has)."""
    query = f"SELECT {ELEMENT_COLS} FROM elements WHERE id = ?"
    rows = (_read(store, query, (element_id,))
            or _read(store, query + " COLLATE NOCASE", (element_id,)))
    return element_from_row(rows[0]) if rows else None


def _same_design(a: ElementRow, b: ElementRow) -> bool:
    keys = ("kit", "design", "key", "design_frequency_hz", "band_low_hz", "band_high_hz",
            "predicted_leg_m", "cut_leg_m", "slope_m_per_hz", "partners")
    return all(getattr(a, k) == getattr(b, k) for k in keys)


def sync_elements(store: RecordStore, rows: Iterable[ElementRow], revision: int,
                  now: datetime) -> SyncReport:
    """Bring the store's as-designed rows in line with a packet, in one transaction.

    Inserts new elements, updates changed ones (prescribed cut, predicted leg, slope,
    partners...), re-activates archived ones that are back, and archives active ones no longer
    present. As-built rows (cuts, trims, measurements) are never touched.
    """
    stamp = iso_time(now)
    rows = list(rows)
    wanted = {r.id: r for r in rows}
    if len(wanted) != len(rows):
        dupes = sorted({r.id for r in rows if sum(o.id == r.id for o in rows) > 1})
        raise RecordError(f"element IDs repeated in the spec: {', '.join(dupes)}")
    new: list[str] = []
    changed: list[str] = []
    unchanged: list[str] = []
    restored: list[str] = []
    with write_transaction(store) as conn:
        existing = {e.id: e for e in map(element_from_row, conn.execute(
            f"SELECT {ELEMENT_COLS} FROM elements"))}
        for eid, row in sorted(wanted.items()):
            old = existing.get(eid)
            if old is None:
                fresh = replace(row, partners=tuple(row.partners), spec_revision=revision,
                                status="active", created=stamp, updated=stamp)
                conn.execute(f"INSERT INTO elements ({ELEMENT_COLS}) VALUES "
                             f"({', '.join('?' * 15)})", element_params(fresh))
                new.append(eid)
                continue
            candidate = replace(row, partners=tuple(row.partners))
            was_archived = old.status == "archived"
            if _same_design(candidate, old) and not was_archived:
                unchanged.append(eid)
                continue
            rev = old.spec_revision if _same_design(candidate, old) else revision
            conn.execute(
                "UPDATE elements SET kit=?, design=?, element_key=?, design_frequency_hz=?, "
                "band_low_hz=?, band_high_hz=?, predicted_leg_m=?, cut_leg_m=?, slope_m_per_hz=?, "
                "partners=?, spec_revision=?, status='active', updated=? WHERE id=?",
                (row.kit, row.design, row.key, row.design_frequency_hz, row.band_low_hz,
                 row.band_high_hz, row.predicted_leg_m, row.cut_leg_m, row.slope_m_per_hz,
                 json.dumps(list(row.partners)), rev, stamp, eid))
            (restored if was_archived else changed).append(eid)
        archived = sorted(e.id for e in existing.values()
                          if e.status == "active" and e.id not in wanted)
        conn.executemany("UPDATE elements SET status='archived', updated=? WHERE id=?",
                         [(stamp, eid) for eid in archived])
    return SyncReport(tuple(new), tuple(changed), tuple(unchanged), tuple(archived),
                      tuple(restored))


# --------------------------------------------------------------------------- as built

_CUT_COLS = "id, element_id, leg, length_m, revision, how, time, note"
_VOID_COLS = "id, kind, element_id, target, reason, time"


def _active(row: ElementRow) -> None:
    if row.status != "active":
        raise RecordError(f"{row.id} is archived (dropped from the spec); nothing recorded")


def _void_key(record: Measurement | Trim | LegCut) -> str:
    """The content key a void names its target by (stable across export and import)."""
    if isinstance(record, Measurement):
        return json.dumps(["measurement", record.element_id, record.time, record.dip_hz])
    if isinstance(record, Trim):
        return json.dumps(["trim", record.element_id, record.time, record.leg, record.delta_m])
    return json.dumps(["cut", record.element_id, record.time, record.leg, record.length_m])


def _history_rows(conn: sqlite3.Connection, element_id: str) -> ElementHistory:
    """One element's history read inside the caller's transaction."""
    row = element_from_row(conn.execute(f"SELECT {ELEMENT_COLS} FROM elements WHERE id = ?",
                                        (element_id,)).fetchone())
    return _assemble([row], conn, element_id)[0]


def _insert_cut(conn: sqlite3.Connection, row: ElementRow, leg: Side, length_m: float,
                how: str, stamp: str, note: str = "") -> LegCut:
    cur = conn.execute("INSERT INTO cuts (element_id, leg, length_m, revision, how, time, note) "
                       "VALUES (?, ?, ?, ?, ?, ?, ?)",
                       (row.id, leg, length_m, row.spec_revision, how, stamp, note))
    return LegCut(int(cur.lastrowid or 0), row.id, leg, length_m, row.spec_revision, how,
                  stamp, note)


def _confirm_uncut(conn: sqlite3.Connection, row: ElementRow, how: str, stamp: str) -> None:
    """Implicit confirmation: a leg's first reading or trim confirms it at its printed cut."""
    history = _history_rows(conn, row.id)
    for side in SIDES:
        if history.leg_cut(side) is None:
            _insert_cut(conn, row, side, row.cut_leg_m, how, stamp)


def confirm_cut(store: RecordStore, element_id: str, legs: Sequence[Side], now: datetime, *,
                length_m: float | None = None, note: str = "") -> tuple[LegCut, ...]:
    """Record that ``legs`` of an element were cut: at ``length_m`` (metres) or, by default, at
    the prescribed cut its label prints. A leg already cut is cut again only with an explicit
    length (a re-cut). RecordError for an unknown or archived element or a bad length."""
    row = get_element(store, element_id)
    _active(row)
    if length_m is not None and not (math.isfinite(length_m) and 0.0 < length_m <= 1000.0):
        raise RecordError(f"{element_id}: a cut length must be between 0 and 1000 m, got "
                          f"{length_m} m. Nothing recorded.")
    stamp = iso_time(now)
    out = []
    with write_transaction(store) as conn:
        history = _history_rows(conn, element_id)
        for side in dict.fromkeys(legs):
            if history.leg_cut(side) is not None and length_m is None:
                continue  # already confirmed: nothing to do
            out.append(_insert_cut(conn, row, side, length_m or row.cut_leg_m,
                                   "confirmed" if history.leg_cut(side) is None else "re-cut",
                                   stamp, note))
    return tuple(out)


@dataclass(frozen=True)
class ReadingExtras:
    """What an analyzer gave beside the dip: R and X there (ohm), and the sweep (CSV text of
    ``buildsheet.calc.sweep.sweep_to_csv``, with the uploaded file's name)."""

    r_ohm: float | None = None
    x_ohm: float | None = None
    sweep_name: str | None = None
    sweep_csv: str | None = None

    @property
    def empty(self) -> bool:
        return self == ReadingExtras()


def reading_extras(store: RecordStore, element_id: str | None = None,
                   *, with_sweeps: bool = False) -> dict[int, ReadingExtras]:
    """R, X and sweeps by measurement number (all, or one element's); sweep text only when
    ``with_sweeps`` (it can be large)."""
    sweep = "e.sweep_csv" if with_sweeps else "NULL"
    where, params = ("WHERE m.element_id = ?", (element_id,)) if element_id else ("", ())
    return {r[0]: ReadingExtras(r[1], r[2], r[3], r[4]) for r in _read(
        store, f"SELECT e.measurement_id, e.r_ohm, e.x_ohm, e.sweep_name, {sweep} FROM "
        f"reading_extras e JOIN measurements m ON m.id = e.measurement_id {where}", params)}


def add_measurement(store: RecordStore, element_id: str, dip_hz: float, swr: float | None,
                    note: str, now: datetime,
                    extras: ReadingExtras | None = None) -> Measurement:
    """Record an analyzer dip (Hz) for an element, confirming uncut legs at their printed cut,
    with R, X and the sweep (``extras``) in the same transaction. RecordError for an unknown
    ID, an archived element, a dip far outside the element's band, an SWR below 1 or a
    negative R."""
    row = get_element(store, element_id)
    lo, hi = dip_window_hz(row)
    if not (math.isfinite(dip_hz) and lo <= dip_hz <= hi):
        raise RecordError(
            f"{element_id}: dip {dip_hz / 1e6:.4f} MHz is far outside the {row.key} band "
            f"({row.band_low_hz / 1e6:.4f}-{row.band_high_hz / 1e6:.4f} MHz); check the unit "
            "and the element ID. Nothing recorded.")
    if swr is not None and not (math.isfinite(swr) and swr >= 1.0):
        raise RecordError(f"{element_id}: SWR must be 1 or more, got {swr}. Nothing recorded.")
    if extras is not None and extras.r_ohm is not None and not (
            math.isfinite(extras.r_ohm) and extras.r_ohm >= 0):
        raise RecordError(f"{element_id}: R must be 0 ohm or more, got {extras.r_ohm}. "
                          "Nothing recorded.")
    _active(row)
    stamp = iso_time(now)
    with write_transaction(store) as conn:
        _confirm_uncut(conn, row, "first reading", stamp)
        cur = conn.execute("INSERT INTO measurements (element_id, time, dip_hz, swr, note) "
                           "VALUES (?, ?, ?, ?, ?)", (element_id, stamp, dip_hz, swr, note))
        number = int(cur.lastrowid or 0)
        if extras is not None and not extras.empty:
            conn.execute("INSERT INTO reading_extras VALUES (?, ?, ?, ?, ?)",
                         (number, extras.r_ohm, extras.x_ohm, extras.sweep_name,
                          extras.sweep_csv))
        return Measurement(number, element_id, stamp, dip_hz, swr, note)


def add_trim(store: RecordStore, element_id: str, leg: Leg, delta_m: float, note: str,
             now: datetime) -> Trim:
    """Record wire removed (``delta_m`` > 0) or added back (< 0), metres, on leg A, B or both,
    confirming uncut legs at their printed cut first.

    Refuses a zero or non-finite amount, an unknown leg, a removal that leaves no wire and an
    addition of more than was trimmed since the cut. The check and the insert run in one
    transaction, so concurrent trims cannot overshoot.
    """
    if leg not in LEGS:
        raise RecordError(f"leg must be one of {', '.join(LEGS)}, got {leg!r}")
    if not math.isfinite(delta_m) or delta_m == 0.0:
        raise RecordError(f"{element_id}: trim amount must be a non-zero length, got {delta_m} m")
    row = get_element(store, element_id)
    _active(row)
    stamp = iso_time(now)
    with write_transaction(store) as conn:
        _confirm_uncut(conn, row, "first trim", stamp)
        history = _history_rows(conn, element_id)
        for side in (SIDES if leg == "both" else (leg,)):
            cut = history.leg_cut(side)
            left = history.current_leg_m(side)
            assert cut is not None and left is not None
            if delta_m >= left:
                raise RecordError(
                    f"{element_id}-{side}: cannot remove {delta_m * 1000:.0f} mm, the leg is "
                    f"only {left * 1000:.0f} mm long now. Nothing recorded.")
            if delta_m < 0 and left - delta_m > cut.length_m + 1e-9:
                raise RecordError(
                    f"{element_id}-{side}: cannot add back {-delta_m * 1000:.0f} mm, only "
                    f"{(cut.length_m - left) * 1000:.0f} mm were trimmed since it was cut; "
                    "for a longer leg record a re-cut (`buildsheet cut ID --length L`). "
                    "Nothing recorded.")
        cur = conn.execute("INSERT INTO trims (element_id, leg, delta_m, time, note) "
                           "VALUES (?, ?, ?, ?, ?)", (element_id, leg, delta_m, stamp, note))
        return Trim(int(cur.lastrowid or 0), element_id, leg, delta_m, stamp, note)


def void_record(store: RecordStore, kind: VoidKind, record_id: int, reason: str,
                now: datetime) -> Void:
    """Withdraw a wrong measurement, trim or cut (by its row number) without deleting it: the
    ledger then ignores it. RecordError for an unknown row or one already voided."""
    if kind not in VOID_KINDS:
        raise RecordError(f"void: kind must be one of {', '.join(VOID_KINDS)}, got {kind!r}")
    table = {"measurement": "measurements", "trim": "trims", "cut": "cuts"}[kind]
    stamp = iso_time(now)
    with write_transaction(store) as conn:
        found = conn.execute(f"SELECT element_id FROM {table} WHERE id = ?",
                             (record_id,)).fetchone()
        if found is None:
            raise RecordError(f"void: there is no {kind} number {record_id}; `buildsheet "
                              "history ID` lists the numbers")
        history = _history_rows(conn, found[0])
        records: tuple[Measurement | Trim | LegCut, ...] = (
            *history.measurements, *history.trims, *history.cuts)
        record = next((r for r in records if r.id == record_id and _kind(r) == kind), None)
        if record is None:
            raise RecordError(f"void: {kind} {record_id} of {found[0]} is already void")
        key = _void_key(record)
        cur = conn.execute("INSERT INTO voids (kind, element_id, target, reason, time) VALUES "
                           "(?, ?, ?, ?, ?)", (kind, found[0], key, reason, stamp))
        return Void(int(cur.lastrowid or 0), kind, found[0], key, reason, stamp)


def _kind(record: Measurement | Trim | LegCut) -> VoidKind:
    return ("measurement" if isinstance(record, Measurement)
            else "trim" if isinstance(record, Trim) else "cut")


def record_print(store: RecordStore, revision: int, element_id: str, kind: PrintKind,
                 digest: str, file: str, now: datetime) -> PrintRecord:
    """Note that packet ``revision`` printed a sheet or label (content hash, file name)."""
    if kind not in PRINT_KINDS:
        raise RecordError(f"print kind must be one of {', '.join(PRINT_KINDS)}, got {kind!r}")
    get_element(store, element_id)
    stamp = iso_time(now)
    with write_transaction(store) as conn:
        cur = conn.execute("INSERT INTO prints (revision, element_id, kind, hash, file, time) "
                           "VALUES (?, ?, ?, ?, ?, ?)",
                           (revision, element_id, kind, digest, file, stamp))
        return PrintRecord(int(cur.lastrowid or 0), revision, element_id, kind, digest, file, stamp)


def get_state(store: RecordStore, key: str) -> str | None:
    """A value of the store's small key-value state (e.g. used label cells), or None."""
    rows = _read(store, "SELECT value FROM state WHERE key = ?", (key,))
    return rows[0][0] if rows else None


def set_state(store: RecordStore, key: str, value: str) -> None:
    """Set a key of the store's state (one transaction)."""
    with write_transaction(store) as conn:
        conn.execute("INSERT INTO state (key, value) VALUES (?, ?) ON CONFLICT(key) DO UPDATE "
                     "SET value = excluded.value", (key, value))


def setdefault_state(store: RecordStore, key: str, value: str) -> str:
    """The value of ``key``, first setting it to ``value`` if absent (one transaction, so two
    processes agree on the first value)."""
    with write_transaction(store) as conn:
        conn.execute("INSERT INTO state (key, value) VALUES (?, ?) ON CONFLICT(key) DO NOTHING",
                     (key, value))
        return str(conn.execute("SELECT value FROM state WHERE key = ?", (key,)).fetchone()[0])


def _assemble(elements: Sequence[ElementRow], conn: sqlite3.Connection,
              only: str | None = None) -> list[ElementHistory]:
    where, params = ("WHERE element_id = ? ", (only,)) if only else ("", ())
    by_id: dict[str, dict[str, list[Any]]] = {
        e.id: {"m": [], "t": [], "p": [], "c": []} for e in elements}
    for r in conn.execute("SELECT id, element_id, time, dip_hz, swr, note FROM measurements "
                          f"{where}ORDER BY time, id", params):
        if r[1] in by_id:
            by_id[r[1]]["m"].append(Measurement(*r))
    for r in conn.execute("SELECT id, element_id, leg, delta_m, time, note FROM trims "
                          f"{where}ORDER BY time, id", params):
        if r[1] in by_id:
            by_id[r[1]]["t"].append(Trim(*r))
    for r in conn.execute("SELECT id, revision, element_id, kind, hash, file, time FROM prints "
                          f"{where}ORDER BY revision, time, id", params):
        if r[2] in by_id:
            by_id[r[2]]["p"].append(PrintRecord(*r))
    for r in conn.execute(f"SELECT {_CUT_COLS} FROM cuts {where}ORDER BY time, id", params):
        if r[1] in by_id:
            by_id[r[1]]["c"].append(LegCut(*r))
    voided = {r[0] for r in conn.execute(f"SELECT target FROM voids {where}", params)}
    out = []
    for e in elements:
        rec = by_id[e.id]
        if not voided:  # the usual case: no content keys to build
            gone: tuple[Measurement | Trim | LegCut, ...] = ()
            keep = [tuple(rec[k]) for k in ("m", "t", "c")]
        else:
            gone = tuple(x for x in (*rec["c"], *rec["t"], *rec["m"]) if _void_key(x) in voided)
            keep = [tuple(x for x in rec[k] if _void_key(x) not in voided)
                    for k in ("m", "t", "c")]
        out.append(ElementHistory(e, keep[0], keep[1], tuple(rec["p"]), keep[2], gone))
    return out


def load_histories(store: RecordStore, ids: Iterable[str] | None = None) -> list[ElementHistory]:
    """Every element (or the given IDs) with its as-built records and prints, in one snapshot."""
    try:
        store.conn.execute("BEGIN")
        try:
            elements = list_elements(store)
            only = None
            if ids is not None:
                keep = set(ids)
                elements = [e for e in elements if e.id in keep]
                only = next(iter(keep)) if len(keep) == 1 else None  # one element: its rows
            return _assemble(elements, store.conn, only)
        finally:
            store.conn.execute("COMMIT")
    except sqlite3.DatabaseError as exc:
        raise corrupt_error(store.path, exc) from exc


def element_history(store: RecordStore, element_id: str) -> ElementHistory:
    """One element's history; RecordError naming the nearest IDs when unknown."""
    get_element(store, element_id)
    return load_histories(store, [element_id])[0]


# --------------------------------------------------------------------------- calibrations


@dataclass(frozen=True)
class CalibrationRecord:
    """A stored site calibration of one design (``data``: the calibration as JSON data)."""

    id: int
    design: str
    fingerprint: str
    data: dict[str, Any]
    sources: tuple[str, ...]
    created: str


def _calibration(r: Sequence[Any]) -> CalibrationRecord:
    return CalibrationRecord(r[0], r[1], r[2], json.loads(r[3]), tuple(json.loads(r[4])), r[5])


def save_calibration(store: RecordStore, design_key: str, fingerprint: str,
                     data: Mapping[str, Any], source_ids: Sequence[str],
                     now: datetime) -> CalibrationRecord:
    """Store a calibration of ``design_key`` fitted for geometry ``fingerprint`` (kept forever;
    the latest one per design and fingerprint applies)."""
    if not design_key or not fingerprint:
        raise RecordError("a calibration needs a design key and a geometry fingerprint")
    stamp = iso_time(now)
    text, sources = json.dumps(dict(data), sort_keys=True), json.dumps(list(source_ids))
    with write_transaction(store) as conn:
        cur = conn.execute("INSERT INTO calibrations (design, fingerprint, data, sources, created)"
                           " VALUES (?, ?, ?, ?, ?)", (design_key, fingerprint, text, sources, stamp))
        return CalibrationRecord(int(cur.lastrowid or 0), design_key, fingerprint,
                                 json.loads(text), tuple(source_ids), stamp)


def latest_calibration(store: RecordStore, design_key: str,
                       fingerprint: str) -> CalibrationRecord | None:
    """The newest calibration of ``design_key`` made for this exact geometry fingerprint, or
    None (a calibration of another geometry or wire never applies)."""
    rows = _read(store, "SELECT id, design, fingerprint, data, sources, created FROM calibrations"
                 " WHERE design = ? AND fingerprint = ? ORDER BY created DESC, id DESC LIMIT 1",
                 (design_key, fingerprint))
    return _calibration(rows[0]) if rows else None


def list_calibrations(store: RecordStore, design_key: str | None = None) -> list[CalibrationRecord]:
    """Every stored calibration (or those of one design), oldest first."""
    where = "" if design_key is None else " WHERE design = ?"
    return [_calibration(r) for r in _read(
        store, f"SELECT id, design, fingerprint, data, sources, created FROM calibrations{where}"
        " ORDER BY created, id", () if design_key is None else (design_key,))]
