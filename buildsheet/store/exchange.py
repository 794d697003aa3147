"""Export and import of the element record store as JSON (a readable backup and restore).

The export holds every table; importing merges, skipping exact duplicates, in one transaction.
Each measurement row carries what the station (and ``measure --sweep``) records beside the dip
(schema 4): R and X at the dip, ohm, and the analyzer sweep (file name and the stored CSV
text); rows of older exports without them are still read.
"""

from __future__ import annotations

import json
import math
import sqlite3
from collections.abc import Mapping
from dataclasses import asdict, dataclass, field, fields
from typing import Any

from buildsheet.errors import RecordError
from buildsheet.store import ledger as _rec
from buildsheet.store.ledger import (
    ELEMENT_COLS,
    ElementRow,
    RecordStore,
    corrupt_error,
    element_from_row,
    element_params,
    write_transaction,
)

#: Export file format tag (``export_json``); bump the number on incompatible changes.
EXPORT_FORMAT = "buildsheet-records"


@dataclass(frozen=True)
class ImportReport:
    """Counts of rows added by :func:`import_json`; exact duplicates are skipped."""

    elements: int = 0
    measurements: int = 0
    trims: int = 0
    prints: int = 0
    skipped: int = 0
    conflicts: tuple[str, ...] = field(default_factory=tuple)
    calibrations: int = 0
    cuts: int = 0
    voids: int = 0
    extras: int = 0  # R/X/sweep added to a reading already in the store without them


# --------------------------------------------------------------------------- export / import

_TABLES: dict[str, tuple[str, ...]] = {
    "measurements": ("element_id", "time", "dip_hz", "swr", "note"),
    "trims": ("element_id", "leg", "delta_m", "time", "note"),
    "prints": ("revision", "element_id", "kind", "hash", "file", "time"),
    "calibrations": ("design", "fingerprint", "data", "sources", "created"),
    "cuts": ("element_id", "leg", "length_m", "revision", "how", "time", "note"),
    "voids": ("kind", "element_id", "target", "reason", "time"),
}


#: The reading extras (schema 4) in each exported measurement row, after ``_TABLES``' columns.
EXTRA_COLS: tuple[str, ...] = ("r_ohm", "x_ohm", "sweep_name", "sweep_csv")
_MEASUREMENTS_SQL = ("SELECT m.element_id, m.time, m.dip_hz, m.swr, m.note, e.r_ohm, e.x_ohm, "
                     "e.sweep_name, e.sweep_csv FROM measurements m LEFT JOIN reading_extras e "
                     "ON e.measurement_id = m.id ORDER BY m.id")


def _keys_ok(table: str, item: Any) -> bool:
    """True when an exported row has exactly its table's keys (a measurement: with or without
    the four extras, all of them or none)."""
    if not isinstance(item, Mapping):
        return False
    keys, cols = set(item), set(_TABLES[table])
    return keys == cols or (table == "measurements" and keys == cols | set(EXTRA_COLS))


def _keys_rule(table: str) -> str:
    rule = f"{table} rows must have exactly the keys {', '.join(_TABLES[table])}"
    return rule + (f" (and optionally all of {', '.join(EXTRA_COLS)})"
                   if table == "measurements" else "")


def export_json(store: RecordStore) -> dict[str, Any]:
    """The whole store as plain JSON-ready data (a readable backup), read in one snapshot."""
    conn = store.conn
    try:
        conn.execute("BEGIN")
        try:
            out: dict[str, Any] = {"format": EXPORT_FORMAT, "schema_version": _rec.SCHEMA_VERSION}
            out["elements"] = [{**asdict(e), "partners": list(e.partners)} for e in map(
                element_from_row, conn.execute(f"SELECT {ELEMENT_COLS} FROM elements ORDER BY id"))]
            for table, cols in _TABLES.items():
                sql = (_MEASUREMENTS_SQL if table == "measurements"
                       else f"SELECT {', '.join(cols)} FROM {table} ORDER BY id")
                names = (*cols, *EXTRA_COLS) if table == "measurements" else cols
                out[table] = [dict(zip(names, r)) for r in conn.execute(sql)]
        finally:
            conn.execute("COMMIT")
    except sqlite3.DatabaseError as exc:
        raise corrupt_error(store.path, exc) from exc
    return out


def _check_export(data: Any) -> Mapping[str, Any]:
    if not isinstance(data, Mapping) or data.get("format") != EXPORT_FORMAT:
        raise RecordError(f"not a buildsheet records export (expected format {EXPORT_FORMAT!r})")
    version = data.get("schema_version")
    if not isinstance(version, int) or version > _rec.SCHEMA_VERSION:
        raise RecordError(f"export schema_version {version!r} is not readable by this buildsheet "
                          f"(reads up to {_rec.SCHEMA_VERSION})")
    for table in ("elements", *_TABLES):
        if not isinstance(data.get(table, []), list):
            raise RecordError(f"export: {table!r} must be a list")
    return data


_NUMBER_FIELDS = ("design_frequency_hz", "band_low_hz", "band_high_hz", "predicted_leg_m",
                  "cut_leg_m", "slope_m_per_hz")


def _element_from_export(item: Any, i: int) -> ElementRow:
    names = {f.name for f in fields(ElementRow)}
    if not isinstance(item, Mapping) or set(item) != names:
        raise RecordError(f"export: elements[{i}] must have exactly the keys "
                          f"{', '.join(sorted(names))}")
    bad = [k for k in _NUMBER_FIELDS if isinstance(item[k], bool)
           or not isinstance(item[k], (int, float)) or not math.isfinite(item[k])]
    bad += [k for k in ("id", "kit", "design", "key", "status", "created", "updated")
            if not isinstance(item[k], str)]
    if not isinstance(item["partners"], list) or not all(isinstance(p, str)
                                                          for p in item["partners"]):
        bad.append("partners")
    if bad:
        raise RecordError(f"export: elements[{i}] has bad values for {', '.join(bad)}")
    return ElementRow(**{**item, "partners": tuple(item["partners"])})


# --------------------------------------------------------------------------- row checks

#: Dips and design frequencies an import accepts, Hz (HF: what the packet builds for).
HF_RANGE_HZ: tuple[float, float] = (1.0e6, 30.0e6)
#: Longest leg, cut or trim an import accepts, m (far beyond any HF wire leg).
MAX_LEG_M: float = 200.0
#: Longest note an import accepts, characters.
MAX_NOTE: int = 2000
_TIME_KEYS = ("time", "created", "updated")
_CHOICES: dict[tuple[str, str], tuple[str, ...]] = {
    ("trims", "leg"): ("A", "B", "both"), ("cuts", "leg"): ("A", "B"),
    ("prints", "kind"): ("sheet", "label"), ("voids", "kind"): ("measurement", "trim", "cut"),
    ("elements", "status"): ("active", "archived"),
}


def _finite(value: Any) -> bool:
    return isinstance(value, (int, float)) and not isinstance(value, bool) and math.isfinite(value)


def _iso_time(value: Any) -> bool:
    from datetime import datetime

    if not isinstance(value, str) or not 10 <= len(value) <= 40:
        return False
    try:
        datetime.fromisoformat(value)
    except ValueError:
        return False
    return True


def _all_finite(value: Any) -> bool:
    """True when every number inside JSON data is finite."""
    if isinstance(value, float):
        return math.isfinite(value)
    if isinstance(value, dict):
        return all(_all_finite(v) for v in value.values())
    if isinstance(value, list):
        return all(_all_finite(v) for v in value)
    return True


def _calibration_problem(item: Mapping[str, Any]) -> str | None:
    """Why a calibrations row would break a later packet, or None."""
    from buildsheet.calc.calibrate import calibration_from_json
    from buildsheet.errors import BuildsheetError

    try:
        parsed = json.loads(item["data"]) if isinstance(item["data"], str) else None
        sources = json.loads(item["sources"]) if isinstance(item["sources"], str) else None
    except ValueError:
        return "data and sources must be JSON text"
    if not isinstance(parsed, dict) or not isinstance(sources, list):
        return "data must be a JSON object and sources a JSON list"
    if not _all_finite(parsed):
        return "data holds a number that is not finite"
    if "design_key" not in parsed:
        return None  # not written by `calibrate`: kept, never read as a calibration
    try:
        cal = calibration_from_json(parsed)
    except BuildsheetError as exc:
        return str(exc)
    if not (_finite(cal.uncertainty) and cal.uncertainty >= 0
            and all(_finite(v) and v > 0 for _, v in cal.band_ratios)):
        return "its uncertainty and band ratios must be finite (band ratios above zero)"
    return None


def _extras_problems(item: Mapping[str, Any]) -> list[str]:
    """What is wrong with a measurement row's R, X and sweep, judged as ``measure`` and the
    station judge them (R 0 ohm or more, X finite, the sweep text read back as the station
    reads a stored sweep)."""
    from buildsheet.calc.sweep import read_sweep

    out = []
    r, x = item.get("r_ohm"), item.get("x_ohm")
    if r is not None and not (_finite(r) and r >= 0):
        out.append(f"r_ohm {r!r} is not a resistance of 0 ohm or more (or null)")
    if x is not None and not _finite(x):
        out.append(f"x_ohm {x!r} is not a finite reactance in ohm (or null)")
    name, csv = item.get("sweep_name"), item.get("sweep_csv")
    if (name is None) != (csv is None):
        out.append("sweep_name and sweep_csv go together: both text or both null")
    elif name is not None:
        if not isinstance(name, str) or not 0 < len(name) <= MAX_NOTE:
            out.append(f"sweep_name must be text of 1 to {MAX_NOTE} characters")
        if not isinstance(csv, str):
            out.append("sweep_csv must be the sweep as CSV text")
        else:
            try:
                read_sweep(csv.encode("utf-8"), "sweep_csv.csv")
            except RecordError as exc:
                out.append(str(exc))
    return out


def _row_problems(table: str, item: Mapping[str, Any],
                  legs: Mapping[str, float]) -> list[str]:
    """What is wrong with one exported row, as the record commands would judge it: types,
    finite numbers, plausible ranges, known elements, ISO 8601 times."""
    out = []
    for (of, name), allowed in _CHOICES.items():
        if of == table and item.get(name) not in allowed:
            out.append(f"{name} {item.get(name)!r} is not one of {', '.join(allowed)}")
    for key in _TIME_KEYS:
        if key in item and not _iso_time(item[key]):
            out.append(f"{key} {item[key]!r} is not an ISO 8601 time (e.g. "
                       "2027-03-13T10:15:00+00:00)")
    for key in ("note", "reason", "how", "hash", "file", "target", "design", "fingerprint"):
        if key in item and (not isinstance(item[key], str) or len(item[key]) > MAX_NOTE):
            out.append(f"{key} must be text of at most {MAX_NOTE} characters")
    if "revision" in item and (not isinstance(item["revision"], int)
                               or isinstance(item["revision"], bool) or item["revision"] < 0):
        out.append(f"revision {item['revision']!r} is not a whole number >= 0")
    if table != "elements" and "element_id" in item and item["element_id"] not in legs:
        out.append(f"element_id {item['element_id']!r} is neither in the file nor in the store")
    element_id = item.get("element_id")
    leg = legs.get(element_id) if isinstance(element_id, str) else None
    low, high = HF_RANGE_HZ
    if table == "measurements":
        if not (_finite(item["dip_hz"]) and low <= item["dip_hz"] <= high):
            out.append(f"dip_hz {item['dip_hz']!r} is not a frequency from 1 to 30 MHz in Hz")
        if item["swr"] is not None and not (_finite(item["swr"]) and 1.0 <= item["swr"] <= 100):
            out.append(f"swr {item['swr']!r} is not an SWR from 1 to 100 (or null)")
        out += _extras_problems(item)
    elif table == "trims":
        delta = item["delta_m"]
        if not (_finite(delta) and delta != 0):
            out.append(f"delta_m {delta!r} is not a non-zero length in m")
        elif leg is not None and abs(delta) >= leg:
            out.append(f"delta_m {delta!r} m is not shorter than its leg ({leg:.3f} m)")
    elif table == "cuts":
        if not (_finite(item["length_m"]) and 0 < item["length_m"] <= MAX_LEG_M):
            out.append(f"length_m {item['length_m']!r} is not a length above 0 and at most "
                       f"{MAX_LEG_M:g} m")
    elif table == "calibrations":
        problem = _calibration_problem(item)
        if problem:
            out.append(f"calibration data: {problem}")
    elif table == "elements":
        if not (_finite(item["design_frequency_hz"]) and low <= item["design_frequency_hz"] <= high):
            out.append(f"design_frequency_hz {item['design_frequency_hz']!r} is not from 1 to 30 MHz")
        for key in ("predicted_leg_m", "cut_leg_m"):
            if _finite(item[key]) and not 0 < item[key] <= MAX_LEG_M:
                out.append(f"{key} {item[key]!r} is not above 0 and at most {MAX_LEG_M:g} m")
    return out


def check_import(store: RecordStore, data: Mapping[str, Any]) -> list[ElementRow]:
    """Every row of an export checked before anything is written; RecordError listing the bad
    rows (table[index]: field, value, what is allowed) refuses the whole file."""
    problems: list[str] = []
    rows: list[ElementRow] = []
    for i, item in enumerate(data.get("elements", [])):
        try:
            rows.append(_element_from_export(item, i))
        except RecordError as exc:
            problems.append(str(exc).removeprefix("export: "))
            continue
        problems += [f"elements[{i}]: {p}" for p in _row_problems("elements", item, {})]
    try:
        stored = {e.id: e.cut_leg_m for e in _rec.list_elements(store)}
    except sqlite3.DatabaseError as exc:
        raise corrupt_error(store.path, exc) from exc
    legs = {**stored, **{r.id: r.cut_leg_m for r in rows}}
    for table in _TABLES:
        for i, item in enumerate(data.get(table, [])):
            if not _keys_ok(table, item):
                problems.append(f"{table}[{i}]: {_keys_rule(table)}")
                continue
            problems += [f"{table}[{i}]: {p}" for p in _row_problems(table, item, legs)]
    if problems:
        shown = "; ".join(problems[:5]) + (f"; and {len(problems) - 5} more"
                                           if len(problems) > 5 else "")
        raise RecordError(f"export: {len(problems)} bad row{'s' if len(problems) > 1 else ''}, "
                          f"nothing was changed: {shown}")
    return rows


def import_json(store: RecordStore, data: Any) -> ImportReport:
    """Restore an :func:`export_json` backup into the store, in one transaction.

    Merges: missing elements and rows are added, exact duplicates skipped, so importing the same
    backup twice changes nothing. An element that exists with different values keeps the store's
    values and is listed in ``conflicts``. Bad data raises RecordError and changes nothing.
    """
    data = _check_export(data)
    rows = check_import(store, data)
    counts = {"elements": 0, "measurements": 0, "trims": 0, "prints": 0, "calibrations": 0,
              "cuts": 0, "voids": 0, "skipped": 0, "extras": 0}
    conflicts: list[str] = []
    with write_transaction(store) as conn:
        for row in rows:
            found = conn.execute(f"SELECT {ELEMENT_COLS} FROM elements WHERE id = ?",
                                 (row.id,)).fetchone()
            if found is None:
                conn.execute(f"INSERT INTO elements ({ELEMENT_COLS}) VALUES "
                             f"({', '.join('?' * 15)})", element_params(row))
                counts["elements"] += 1
            elif element_from_row(found) == row:
                counts["skipped"] += 1
            else:
                conflicts.append(row.id)
        for table, cols in _TABLES.items():
            for i, item in enumerate(data.get(table, [])):
                if not _keys_ok(table, item):
                    raise RecordError(f"export: {table}[{i}]: {_keys_rule(table)}")
                values = [item[c] for c in cols]
                if not all(v is None or isinstance(v, (str, int, float)) for v in values):
                    raise RecordError(f"export: {table}[{i}] values must be text or numbers")
                match = " AND ".join(f"{c} IS ?" for c in cols)
                found = conn.execute(f"SELECT id FROM {table} WHERE {match} ORDER BY id",
                                     values).fetchone()
                if found is None:
                    cur = conn.execute(f"INSERT INTO {table} ({', '.join(cols)}) VALUES "
                                       f"({', '.join('?' * len(cols))})", values)
                    counts[table] += 1
                if table == "measurements":
                    extras = tuple(item.get(c) for c in EXTRA_COLS)
                    number = int(found[0]) if found else int(cur.lastrowid or 0)
                    outcome = _merge_extras(conn, number, extras, fresh=found is None)
                    if outcome == "conflict":
                        conflicts.append(f"{item['element_id']} (reading at {item['time']})")
                    elif outcome == "added":
                        counts["extras"] += 1
                if found is not None:
                    counts["skipped"] += 1
    return ImportReport(counts["elements"], counts["measurements"], counts["trims"],
                        counts["prints"], counts["skipped"], tuple(conflicts),
                        counts["calibrations"], counts["cuts"], counts["voids"],
                        counts["extras"])


def _merge_extras(conn: sqlite3.Connection, measurement_id: int, extras: tuple[Any, ...], *,
                  fresh: bool) -> str:
    """Store a reading's R, X and sweep from the file: "added" (new, or missing beside a
    reading already stored), "same", "none" (the file has none) or "conflict" (the store
    keeps its own)."""
    if all(v is None for v in extras):
        return "none"
    stored = None if fresh else conn.execute(
        f"SELECT {', '.join(EXTRA_COLS)} FROM reading_extras WHERE measurement_id = ?",
        (measurement_id,)).fetchone()
    if stored is None:
        conn.execute(f"INSERT INTO reading_extras (measurement_id, {', '.join(EXTRA_COLS)}) "
                     "VALUES (?, ?, ?, ?, ?)", (measurement_id, *extras))
        return "none" if fresh else "added"
    return "same" if tuple(stored) == extras else "conflict"
