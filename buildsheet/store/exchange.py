"""Export and import of the element record store as JSON (a readable backup and restore).

The export holds every table; importing merges, skipping exact duplicates, in one transaction.
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


# --------------------------------------------------------------------------- export / import

_TABLES: dict[str, tuple[str, ...]] = {
    "measurements": ("element_id", "time", "dip_hz", "swr", "note"),
    "trims": ("element_id", "leg", "delta_m", "time", "note"),
    "prints": ("revision", "element_id", "kind", "hash", "file", "time"),
    "calibrations": ("design", "fingerprint", "data", "sources", "created"),
    "cuts": ("element_id", "leg", "length_m", "revision", "how", "time", "note"),
    "voids": ("kind", "element_id", "target", "reason", "time"),
}


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
                out[table] = [dict(zip(cols, r)) for r in conn.execute(
                    f"SELECT {', '.join(cols)} FROM {table} ORDER BY id")]
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


def _row_problems(table: str, item: Mapping[str, Any],
                  legs: Mapping[str, float]) -> list[str]:
    """What is wrong with one exported row, as the record commands would judge it: types,
    finite numbers, plausible ranges, known elements, ISO 8601 times."""
    out = []
    for key, allowed in _CHOICES.items():
        if key[0] == table and item.get(key[1]) not in allowed:
            out.append(f"{key[1]} {item.get(key[1])!r} is not one of {', '.join(allowed)}")
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
    leg = legs.get(item.get("element_id")) if isinstance(item.get("element_id"), str) else None
    low, high = HF_RANGE_HZ
    if table == "measurements":
        if not (_finite(item["dip_hz"]) and low <= item["dip_hz"] <= high):
            out.append(f"dip_hz {item['dip_hz']!r} is not a frequency from 1 to 30 MHz in Hz")
        if item["swr"] is not None and not (_finite(item["swr"]) and 1.0 <= item["swr"] <= 100):
            out.append(f"swr {item['swr']!r} is not an SWR from 1 to 100 (or null)")
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
    for table, cols in _TABLES.items():
        for i, item in enumerate(data.get(table, [])):
            if not isinstance(item, Mapping) or set(item) != set(cols):
                problems.append(f"{table}[{i}] must have exactly the keys {', '.join(cols)}")
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
              "cuts": 0, "voids": 0, "skipped": 0}
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
                if not isinstance(item, Mapping) or set(item) != set(cols):
                    raise RecordError(f"export: {table}[{i}] must have exactly the keys "
                                      f"{', '.join(cols)}")
                values = [item[c] for c in cols]
                if not all(v is None or isinstance(v, (str, int, float)) for v in values):
                    raise RecordError(f"export: {table}[{i}] values must be text or numbers")
                match = " AND ".join(f"{c} IS ?" for c in cols)
                if conn.execute(f"SELECT 1 FROM {table} WHERE {match}", values).fetchone():
                    counts["skipped"] += 1
                    continue
                conn.execute(f"INSERT INTO {table} ({', '.join(cols)}) VALUES "
                             f"({', '.join('?' * len(cols))})", values)
                counts[table] += 1
    return ImportReport(counts["elements"], counts["measurements"], counts["trims"],
                        counts["prints"], counts["skipped"], tuple(conflicts),
                        counts["calibrations"], counts["cuts"], counts["voids"])
