"""The element record store: elements, analyzer measurements, trims and print history (SQLite).

One durable record per element, kept beside the spec (``<spec stem>.records.sqlite``). The store
uses the standard library's sqlite3 with a versioned schema (``PRAGMA user_version`` and the
``MIGRATIONS`` list), foreign keys on, WAL journal, and a busy timeout so that concurrent
writers wait for each other instead of failing. Every write is one ``BEGIN IMMEDIATE``
transaction. Nothing is ever deleted (triggers refuse DELETE): elements dropped from the spec are
archived. Lengths are metres, frequencies hertz, times ISO 8601 text passed in by the caller.

Pure helpers (no I/O): :func:`trim_advice`, :func:`current_leg_m`, :func:`nearest_ids`.
Export and import live in :mod:`buildsheet.store.exchange` (re-exported here).
"""

from __future__ import annotations

import difflib
import json
import math
import sqlite3
from collections.abc import Iterable, Iterator, Mapping, Sequence
from contextlib import contextmanager
from dataclasses import dataclass, replace
from datetime import datetime
from pathlib import Path
from typing import Any, Literal, Self

from buildsheet.errors import RecordError

Status = Literal["active", "archived"]
Leg = Literal["A", "B", "both"]
PrintKind = Literal["sheet", "label"]
LEGS: tuple[str, ...] = ("A", "B", "both")
PRINT_KINDS: tuple[str, ...] = ("sheet", "label")

#: How long a writer waits for another writer's lock before giving up, milliseconds.
BUSY_TIMEOUT_MS = 30_000
#: A dip this far outside the band edges (fraction of the edge) is refused as a probable unit
#: slip or wrong element. An element cut 3-5 % long dips a few % below the band (common practice).
DIP_WINDOW_FRACTION = 0.15
#: Within this fraction of the design frequency the advice is "leave it" (0.1 %: 7 kHz at 7 MHz).
ON_FREQUENCY_FRACTION = 0.001
#: Trim in steps of this part of the computed amount, staying long (common practice).
STEP_FRACTION = 0.5
#: Legs differing by more than this get an "even up the legs" reminder, metres.
LEG_MISMATCH_M = 0.005

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
        *(f"CREATE INDEX {t}_element ON {t} (element_id)" for t in _CHILD_TABLES),
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
SCHEMA_VERSION: int = MIGRATIONS[-1][0]


# --------------------------------------------------------------------------- data


#: File name suffix of a record store: ``club.toml`` keeps its records in ``club.records.sqlite``.
STORE_SUFFIX = ".records.sqlite"


def default_store(spec_path: str | Path) -> Path:
    """The record store beside the spec: ``club.toml`` -> ``club.records.sqlite``."""
    spec = Path(spec_path)
    return spec.with_name(spec.stem + STORE_SUFFIX)


@dataclass(frozen=True)
class ElementRow:
    """One element (a dipole on one band of a kit). Lengths are per leg in metres.

    ``slope_m_per_hz`` is d(leg length)/d(resonant frequency), negative (longer wire, lower dip).
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
class ElementHistory:
    """An element with everything recorded for it, oldest first."""

    element: ElementRow
    measurements: tuple[Measurement, ...] = ()
    trims: tuple[Trim, ...] = ()
    prints: tuple[PrintRecord, ...] = ()

    def current_leg_m(self, leg: Literal["A", "B"]) -> float:
        """Current length of one leg, metres (cut length minus trims)."""
        return current_leg_m(self.element.cut_leg_m, self.trims, leg)


@dataclass(frozen=True)
class TrimAdvice:
    """What to do after a dip reading. ``per_leg_m`` > 0: remove that much from each leg;
    < 0: add that much back to each leg. ``first_step_m`` is the suggested first cut."""

    element_id: str
    dip_hz: float
    design_frequency_hz: float
    action: Literal["remove", "add back", "none"]
    per_leg_m: float
    first_step_m: float
    recheck: tuple[str, ...]
    lines: tuple[str, ...]


@dataclass(frozen=True)
class SyncReport:
    """Outcome of :func:`sync_elements`, element IDs sorted.

    ``kept_cut``: elements whose predicted length changed but which already have measurements or
    trims, so their recorded cut length (the wire that exists) was kept.
    """

    new: tuple[str, ...] = ()
    changed: tuple[str, ...] = ()
    unchanged: tuple[str, ...] = ()
    archived: tuple[str, ...] = ()
    restored: tuple[str, ...] = ()
    kept_cut: tuple[str, ...] = ()


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
    """ISO 8601 text for a timezone-aware moment (stored as given, to the second)."""
    if moment.tzinfo is None:
        raise ValueError("times must be timezone-aware (e.g. datetime.now(timezone.utc))")
    return moment.isoformat(timespec="seconds")


def current_leg_m(cut_leg_m: float, trims: Iterable[Trim], leg: Literal["A", "B"]) -> float:
    """Current length of leg A or B, metres: the cut length minus the trims on that leg."""
    return cut_leg_m - sum(t.delta_m for t in trims if t.leg in (leg, "both"))


def nearest_ids(wanted: str, existing: Iterable[str], n: int = 3) -> list[str]:
    """The existing IDs closest to ``wanted`` (case-insensitive difflib ratio)."""
    by_upper = {e.upper(): e for e in existing}
    hits = difflib.get_close_matches(wanted.upper(), list(by_upper), n=n, cutoff=0.5)
    return [by_upper[h] for h in hits]


def dip_window_hz(row: ElementRow) -> tuple[float, float]:
    """Range of dip frequencies accepted for an element, Hz (band edges widened by the window)."""
    return row.band_low_hz / (1.0 + DIP_WINDOW_FRACTION), row.band_high_hz * (1.0 + DIP_WINDOW_FRACTION)


def trim_advice(row: ElementRow, dip_hz: float, trims: Sequence[Trim] = ()) -> TrimAdvice:
    """Per-leg change that moves the dip to the design frequency.

    dL = slope * (f_design - f_dip), with slope = dL/df < 0 from the model; when the slope is
    missing or not negative the proportional rule dL = -L * df / f is used (REFERENCES 11,
    common practice). Advice: trim both legs the same, in steps, staying long (common practice).
    """
    f0 = row.design_frequency_hz
    a, b = current_leg_m(row.cut_leg_m, trims, "A"), current_leg_m(row.cut_leg_m, trims, "B")
    slope = row.slope_m_per_hz
    lines: list[str] = []
    if not (math.isfinite(slope) and slope < 0):
        slope = -((a + b) / 2.0) / dip_hz
        lines.append("No model slope recorded: using the proportional rule dL = L*df/f.")
    change = slope * (f0 - dip_hz)  # new leg minus current leg, metres
    per_leg = -change  # positive: remove
    khz = (dip_hz - f0) / 1e3
    where = "low" if khz < 0 else "high"
    recheck = row.partners
    if abs(dip_hz - f0) <= ON_FREQUENCY_FRACTION * f0:
        action: Literal["remove", "add back", "none"] = "none"
        per_leg, step = 0.0, 0.0
        lines.append(f"Dip is {abs(khz):.0f} kHz {where} of the design frequency: on frequency, "
                     "leave it.")
    elif per_leg > 0:
        action, step = "remove", per_leg * STEP_FRACTION
        lines.append(f"Dip is {abs(khz):.0f} kHz {where}: the element is long. Remove about "
                     f"{per_leg * 1000:.0f} mm from EACH leg (both legs the same).")
        lines.append(f"Cut in steps, part of the computed amount each time (first about "
                     f"{step * 1000:.0f} mm), re-measure, and stay long.")
        if per_leg >= min(a, b):
            lines.append("That is more than the leg: check the element ID and the reading.")
    else:
        action, step = "add back", -per_leg * STEP_FRACTION
        lines.append(f"Dip is {abs(khz):.0f} kHz {where}: the element is short. Add back about "
                     f"{-per_leg * 1000:.0f} mm to EACH leg (unfold wire at the end insulator "
                     "or splice).")
    if abs(a - b) > LEG_MISMATCH_M:
        lines.append(f"Legs differ by {abs(a - b) * 1000:.0f} mm (A {a:.3f} m, B {b:.3f} m): "
                     "even them up.")
    if recheck and action != "none":
        lines.append("After trimming, re-check the other elements on this feed: "
                     + ", ".join(recheck) + ".")
    return TrimAdvice(row.id, dip_hz, f0, action, per_leg, step, recheck, tuple(lines))


# --------------------------------------------------------------------------- open / close


def _connect(path: Path) -> sqlite3.Connection:
    conn = sqlite3.connect(str(path), timeout=BUSY_TIMEOUT_MS / 1000, isolation_level=None)
    conn.execute(f"PRAGMA busy_timeout = {BUSY_TIMEOUT_MS}")
    return conn


def _corrupt(path: Path, exc: Exception) -> RecordError:
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
    try:
        conn = _connect(path)
    except sqlite3.Error as exc:
        raise RecordError(f"{path}: cannot open the record store ({exc})") from exc
    try:
        if verify:
            problems = [r[0] for r in conn.execute("PRAGMA quick_check")]
            if problems != ["ok"]:
                raise _corrupt(path, sqlite3.DatabaseError("; ".join(problems[:3])))
        version = conn.execute("PRAGMA user_version").fetchone()[0]
        if version > SCHEMA_VERSION:
            raise RecordError(f"{path}: made by a newer buildsheet (schema {version}, this "
                              f"version reads up to {SCHEMA_VERSION}); upgrade buildsheet")
        if conn.execute("PRAGMA journal_mode").fetchone()[0].lower() != "wal":
            conn.execute("PRAGMA journal_mode = WAL")
        conn.execute("PRAGMA foreign_keys = ON")
        if version < SCHEMA_VERSION:
            _migrate(conn, path)
    except sqlite3.DatabaseError as exc:
        conn.close()
        raise _corrupt(path, exc) from exc
    except BaseException:
        conn.close()
        raise
    return RecordStore(path, conn)


def _migrate(conn: sqlite3.Connection, path: Path) -> None:
    conn.execute("BEGIN IMMEDIATE")
    try:
        version = conn.execute("PRAGMA user_version").fetchone()[0]  # re-read under the lock
        if version == 0:
            names = [r[0] for r in conn.execute(
                "SELECT name FROM sqlite_master WHERE name NOT LIKE 'sqlite_%'")]
            if names:
                raise RecordError(f"{path}: an SQLite file but not a buildsheet record store "
                                  f"(tables: {', '.join(sorted(names)[:5])})")
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
def _write(store: RecordStore) -> Iterator[sqlite3.Connection]:
    """One write transaction; waits for other writers; sqlite errors become RecordError."""
    conn = store.conn
    try:
        conn.execute("BEGIN IMMEDIATE")
    except sqlite3.DatabaseError as exc:
        raise _corrupt(store.path, exc) from exc
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
            raise _corrupt(store.path, exc) from exc
        raise


def _read(store: RecordStore, sql: str, params: Sequence[Any] = ()) -> list[tuple[Any, ...]]:
    try:
        return store.conn.execute(sql, params).fetchall()
    except sqlite3.DatabaseError as exc:
        raise _corrupt(store.path, exc) from exc


# --------------------------------------------------------------------------- elements

_ELEMENT_COLS = ("id, kit, design, element_key, design_frequency_hz, band_low_hz, band_high_hz, "
                 "predicted_leg_m, cut_leg_m, slope_m_per_hz, partners, spec_revision, status, "
                 "created, updated")


def _element(r: Sequence[Any]) -> ElementRow:
    return ElementRow(r[0], r[1], r[2], r[3], r[4], r[5], r[6], r[7], r[8], r[9],
                      tuple(json.loads(r[10])), r[11], r[12], r[13], r[14])


def _element_params(e: ElementRow) -> tuple[Any, ...]:
    return (e.id, e.kit, e.design, e.key, e.design_frequency_hz, e.band_low_hz, e.band_high_hz,
            e.predicted_leg_m, e.cut_leg_m, e.slope_m_per_hz, json.dumps(list(e.partners)),
            e.spec_revision, e.status, e.created, e.updated)


def list_elements(store: RecordStore, status: Status | None = None) -> list[ElementRow]:
    """All elements (or those with one status), sorted by ID."""
    where = "" if status is None else " WHERE status = ?"
    rows = _read(store, f"SELECT {_ELEMENT_COLS} FROM elements{where} ORDER BY id",
                 () if status is None else (status,))
    return [_element(r) for r in rows]


def _unknown(store: RecordStore, wanted: str) -> RecordError:
    ids = [r[0] for r in _read(store, "SELECT id FROM elements ORDER BY id")]
    if not ids:
        return RecordError(f"unknown element {wanted!r}: the record store {store.path} is empty")
    near = nearest_ids(wanted, ids) or ids[:5]
    return RecordError(f"unknown element {wanted!r}; nearest: {', '.join(near)}")


def get_element(store: RecordStore, element_id: str) -> ElementRow:
    """The element with this ID; RecordError naming the nearest IDs when unknown."""
    rows = _read(store, f"SELECT {_ELEMENT_COLS} FROM elements WHERE id = ?", (element_id,))
    if not rows:
        raise _unknown(store, element_id)
    return _element(rows[0])


def resolve_id(store: RecordStore, text: str) -> tuple[ElementRow, Literal["A", "B"] | None]:
    """Element for an element ID ("K03-40m") or a leg ID ("K03-40m-A": also returns the leg)."""
    text = text.strip()
    rows = _read(store, f"SELECT {_ELEMENT_COLS} FROM elements WHERE id = ?", (text,))
    if rows:
        return _element(rows[0]), None
    base, _, leg = text.rpartition("-")
    if base and leg.upper() in ("A", "B"):
        rows = _read(store, f"SELECT {_ELEMENT_COLS} FROM elements WHERE id = ?", (base,))
        if rows:
            return _element(rows[0]), "A" if leg.upper() == "A" else "B"
    raise _unknown(store, text)


def _same_design(a: ElementRow, b: ElementRow) -> bool:
    keys = ("kit", "design", "key", "design_frequency_hz", "band_low_hz", "band_high_hz",
            "predicted_leg_m", "cut_leg_m", "slope_m_per_hz", "partners")
    return all(getattr(a, k) == getattr(b, k) for k in keys)


def sync_elements(store: RecordStore, rows: Iterable[ElementRow], revision: int,
                  now: datetime) -> SyncReport:
    """Bring the store in line with a spec revision, in one transaction.

    Inserts new elements, updates changed ones (predicted length, slope, partners...; the cut
    length too unless the element already has measurements or trims, since that wire exists),
    re-activates archived ones that are back, and archives active ones no longer present.
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
    kept: list[str] = []
    with _write(store) as conn:
        existing = {e.id: e for e in map(_element, conn.execute(
            f"SELECT {_ELEMENT_COLS} FROM elements"))}
        touched = {r[0] for r in conn.execute(
            "SELECT element_id FROM measurements UNION SELECT element_id FROM trims")}
        for eid, row in sorted(wanted.items()):
            old = existing.get(eid)
            if old is None:
                fresh = replace(row, partners=tuple(row.partners), spec_revision=revision,
                                status="active", created=stamp, updated=stamp)
                conn.execute(f"INSERT INTO elements ({_ELEMENT_COLS}) VALUES "
                             f"({', '.join('?' * 15)})", _element_params(fresh))
                new.append(eid)
                continue
            cut = old.cut_leg_m if eid in touched else row.cut_leg_m
            if eid in touched and row.cut_leg_m != old.cut_leg_m:
                kept.append(eid)
            candidate = replace(row, partners=tuple(row.partners), cut_leg_m=cut)
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
                 row.band_high_hz, row.predicted_leg_m, cut, row.slope_m_per_hz,
                 json.dumps(list(row.partners)), rev, stamp, eid))
            (restored if was_archived else changed).append(eid)
        archived = sorted(e.id for e in existing.values()
                          if e.status == "active" and e.id not in wanted)
        conn.executemany("UPDATE elements SET status='archived', updated=? WHERE id=?",
                         [(stamp, eid) for eid in archived])
    return SyncReport(tuple(new), tuple(changed), tuple(unchanged), tuple(archived),
                      tuple(restored), tuple(kept))


# --------------------------------------------------------------------------- measurements, trims


def _trims(store: RecordStore, element_id: str) -> list[Trim]:
    return [Trim(*r) for r in _read(
        store, "SELECT id, element_id, leg, delta_m, time, note FROM trims "
        "WHERE element_id = ? ORDER BY time, id", (element_id,))]


def add_measurement(store: RecordStore, element_id: str, dip_hz: float, swr: float | None,
                    note: str, now: datetime) -> Measurement:
    """Record an analyzer dip (Hz) for an element. RecordError for an unknown ID, an archived
    element, a dip far outside the element's band or an SWR below 1."""
    row = get_element(store, element_id)
    lo, hi = dip_window_hz(row)
    if not (math.isfinite(dip_hz) and lo <= dip_hz <= hi):
        raise RecordError(
            f"{element_id}: dip {dip_hz / 1e6:.4f} MHz is far outside the {row.key} band "
            f"({row.band_low_hz / 1e6:.4f}-{row.band_high_hz / 1e6:.4f} MHz); check the unit "
            "and the element ID. Nothing recorded.")
    if swr is not None and not (math.isfinite(swr) and swr >= 1.0):
        raise RecordError(f"{element_id}: SWR must be 1 or more, got {swr}. Nothing recorded.")
    if row.status != "active":
        raise RecordError(f"{element_id} is archived (dropped from the spec); nothing recorded")
    stamp = iso_time(now)
    with _write(store) as conn:
        cur = conn.execute("INSERT INTO measurements (element_id, time, dip_hz, swr, note) "
                           "VALUES (?, ?, ?, ?, ?)", (element_id, stamp, dip_hz, swr, note))
        return Measurement(int(cur.lastrowid or 0), element_id, stamp, dip_hz, swr, note)


def add_trim(store: RecordStore, element_id: str, leg: Leg, delta_m: float, note: str,
             now: datetime) -> Trim:
    """Record wire removed (``delta_m`` > 0) or added back (< 0), metres, on leg A, B or both.

    Refuses a zero or non-finite amount, an unknown leg, and a removal that leaves no wire.
    The check and the insert run in one transaction, so concurrent trims cannot overshoot.
    """
    if leg not in LEGS:
        raise RecordError(f"leg must be one of {', '.join(LEGS)}, got {leg!r}")
    if not math.isfinite(delta_m) or delta_m == 0.0:
        raise RecordError(f"{element_id}: trim amount must be a non-zero length, got {delta_m} m")
    row = get_element(store, element_id)
    if row.status != "active":
        raise RecordError(f"{element_id} is archived (dropped from the spec); nothing recorded")
    stamp = iso_time(now)
    with _write(store) as conn:
        trims = _trims(store, element_id)
        for side in (("A", "B") if leg == "both" else (leg,)):
            left = current_leg_m(row.cut_leg_m, trims, side)  # type: ignore[arg-type]
            if delta_m >= left:
                raise RecordError(
                    f"{element_id}-{side}: cannot remove {delta_m * 1000:.0f} mm, the leg is "
                    f"only {left * 1000:.0f} mm long now. Nothing recorded.")
        cur = conn.execute("INSERT INTO trims (element_id, leg, delta_m, time, note) "
                           "VALUES (?, ?, ?, ?, ?)", (element_id, leg, delta_m, stamp, note))
        return Trim(int(cur.lastrowid or 0), element_id, leg, delta_m, stamp, note)


def record_print(store: RecordStore, revision: int, element_id: str, kind: PrintKind,
                 digest: str, file: str, now: datetime) -> PrintRecord:
    """Note that packet ``revision`` printed a sheet or label (content hash, file name)."""
    if kind not in PRINT_KINDS:
        raise RecordError(f"print kind must be one of {', '.join(PRINT_KINDS)}, got {kind!r}")
    get_element(store, element_id)
    stamp = iso_time(now)
    with _write(store) as conn:
        cur = conn.execute("INSERT INTO prints (revision, element_id, kind, hash, file, time) "
                           "VALUES (?, ?, ?, ?, ?, ?)",
                           (revision, element_id, kind, digest, file, stamp))
        return PrintRecord(int(cur.lastrowid or 0), revision, element_id, kind, digest, file, stamp)


def load_histories(store: RecordStore, ids: Iterable[str] | None = None) -> list[ElementHistory]:
    """Every element (or the given IDs) with its measurements, trims and prints (4 queries)."""
    elements = list_elements(store)
    if ids is not None:
        keep = set(ids)
        elements = [e for e in elements if e.id in keep]
    by_id: dict[str, dict[str, list[Any]]] = {e.id: {"m": [], "t": [], "p": []} for e in elements}
    for r in _read(store, "SELECT id, element_id, time, dip_hz, swr, note FROM measurements "
                   "ORDER BY time, id"):
        if r[1] in by_id:
            by_id[r[1]]["m"].append(Measurement(*r))
    for r in _read(store, "SELECT id, element_id, leg, delta_m, time, note FROM trims "
                   "ORDER BY time, id"):
        if r[1] in by_id:
            by_id[r[1]]["t"].append(Trim(*r))
    for r in _read(store, "SELECT id, revision, element_id, kind, hash, file, time FROM prints "
                   "ORDER BY revision, time, id"):
        if r[2] in by_id:
            by_id[r[2]]["p"].append(PrintRecord(*r))
    return [ElementHistory(e, tuple(by_id[e.id]["m"]), tuple(by_id[e.id]["t"]),
                           tuple(by_id[e.id]["p"])) for e in elements]


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
    with _write(store) as conn:
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


_IO_NAMES = frozenset({"EXPORT_FORMAT", "ImportReport", "export_json", "import_json"})


def __getattr__(name: str) -> Any:
    """Export/import names, moved to :mod:`buildsheet.store.exchange`, still reachable from here."""
    if name in _IO_NAMES:
        from buildsheet.store import exchange as records_io

        return getattr(records_io, name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
