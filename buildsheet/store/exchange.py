"""Export and import of the element record store as JSON (a readable backup and restore).

The export holds every table; importing merges, skipping exact duplicates, in one transaction.
"""

from __future__ import annotations

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


def import_json(store: RecordStore, data: Any) -> ImportReport:
    """Restore an :func:`export_json` backup into the store, in one transaction.

    Merges: missing elements and rows are added, exact duplicates skipped, so importing the same
    backup twice changes nothing. An element that exists with different values keeps the store's
    values and is listed in ``conflicts``. Bad data raises RecordError and changes nothing.
    """
    data = _check_export(data)
    counts = {"elements": 0, "measurements": 0, "trims": 0, "prints": 0, "calibrations": 0,
              "cuts": 0, "voids": 0, "skipped": 0}
    conflicts: list[str] = []
    with write_transaction(store) as conn:
        for i, item in enumerate(data.get("elements", [])):
            row = _element_from_export(item, i)
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
