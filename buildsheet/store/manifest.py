"""Packet manifests: what each packet printed, and what changed since the last one.

A manifest is plain JSON::

    {"format": "buildsheet-manifest/1", "spec_hash": "...", "revision": 3,
     "built_at": "2024-05-01T12:00:00+00:00",
     "elements": {"K03-40m": {"hash": "...", "predicted_leg_m": 10.02,
                              "design_frequency_hz": 7.1e6, "cut_leg_m": 10.32,
                              "files": ["sheets/K03-40m.pdf"]}},
     "files": {"sheets/K03-40m.pdf": "<sha256>"}}

``diff_manifests`` is pure; ``read_manifest`` / ``write_manifest`` do the file work (atomic
writes: a temporary file in the same folder, then ``os.replace``). Lengths in metres, Hz.
"""

from __future__ import annotations

import hashlib
import json
import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from buildsheet.errors import BuildError
from buildsheet.store.files import write_atomic

MANIFEST_FORMAT = "buildsheet-manifest/1"
#: Default re-check tolerance: fractional move of an element's predicted resonance (0.3 %).
RECHECK_TOLERANCE = 0.003


@dataclass(frozen=True)
class ManifestElement:
    """What a packet printed for one element: a hash of all of it and the key numbers."""

    hash: str
    predicted_leg_m: float
    design_frequency_hz: float
    cut_leg_m: float | None = None
    files: tuple[str, ...] = ()


@dataclass(frozen=True)
class Manifest:
    """One packet: spec hash, revision number, build time (ISO 8601), elements, file hashes."""

    spec_hash: str
    revision: int
    built_at: str
    elements: Mapping[str, ManifestElement]
    files: Mapping[str, str] = field(default_factory=dict)
    format: str = MANIFEST_FORMAT
    spec: str = ""  # the spec's file name, for people reading the manifest
    notes: tuple[str, ...] = ()  # what this packet wrote (e.g. a changed-only build), plain text
    items: Mapping[str, str] = field(default_factory=dict)  # printable item -> content hash
    reprinted: Mapping[str, Any] = field(default_factory=dict)  # kit_sheets, labels, day_pages
    store: str = ""  # the record store, relative to the packet folder where possible


@dataclass(frozen=True)
class Recheck:
    """An element whose predicted resonance moved by more than the tolerance.

    ``fraction``: (f_new - f_old) / f_old for the wire already cut, where f_new = f_design_new *
    L_new / L_old by the proportional rule f*L = const (REFERENCES 11, common practice).
    ``shift_hz``: f_new - f_old (negative: the existing wire now dips lower).
    """

    element_id: str
    old_predicted_leg_m: float
    new_predicted_leg_m: float
    fraction: float
    shift_hz: float


@dataclass(frozen=True)
class ManifestDiff:
    """Element IDs sorted in each class; ``recheck`` lists the analyzer re-checks."""

    new: tuple[str, ...]
    changed: tuple[str, ...]
    unchanged: tuple[str, ...]
    archived: tuple[str, ...]
    recheck: tuple[Recheck, ...]

    @property
    def to_print(self) -> tuple[str, ...]:
        """Elements whose sheets and labels must be (re)printed: new and changed."""
        return tuple(sorted(self.new + self.changed))


# --------------------------------------------------------------------------- pure


def content_hash(payload: Any) -> str:
    """SHA-256 (hex) of a JSON-able payload in canonical form (sorted keys, no spaces).

    Floats are written with repr, so any change of a printed number changes the hash.
    """
    text = json.dumps(payload, sort_keys=True, separators=(",", ":"), ensure_ascii=False,
                      allow_nan=False)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def resonance_shift(old: ManifestElement, new: ManifestElement) -> tuple[float, float]:
    """(fraction, shift_hz) by which the already-cut wire's predicted resonance moves.

    The wire was cut for ``old``: it resonates at f_old = old.design_frequency_hz by the old
    model. The new model puts a leg of L_new at f_design_new, so the same wire (L_old) now
    resonates at f_design_new * L_new / L_old (f*L constant, proportional rule, common practice).
    """
    f_old = old.design_frequency_hz
    f_new = new.design_frequency_hz * new.predicted_leg_m / old.predicted_leg_m
    return (f_new - f_old) / f_old, f_new - f_old


def diff_manifests(old: Manifest | None, new: Manifest,
                   tolerance: float = RECHECK_TOLERANCE) -> ManifestDiff:
    """Classify the new manifest's elements against the old one (``None``: all new).

    new: not in old; archived: in old only; changed / unchanged: by the element hash. Every
    element in both whose predicted resonance moves by more than ``tolerance`` (fraction) is a
    re-check, whether or not its hash changed.
    """
    if not (math.isfinite(tolerance) and tolerance >= 0):
        raise ValueError(f"tolerance must be a fraction >= 0, got {tolerance}")
    old_elements: Mapping[str, ManifestElement] = old.elements if old else {}
    new_ids: list[str] = []
    changed: list[str] = []
    unchanged: list[str] = []
    rechecks: list[Recheck] = []
    for eid in sorted(new.elements):
        entry = new.elements[eid]
        before = old_elements.get(eid)
        if before is None:
            new_ids.append(eid)
            continue
        (unchanged if before.hash == entry.hash else changed).append(eid)
        fraction, shift = resonance_shift(before, entry)
        if abs(fraction) > tolerance:
            rechecks.append(Recheck(eid, before.predicted_leg_m, entry.predicted_leg_m,
                                    fraction, shift))
    archived = sorted(set(old_elements) - set(new.elements))
    return ManifestDiff(tuple(new_ids), tuple(changed), tuple(unchanged), tuple(archived),
                        tuple(rechecks))


def format_diff(diff: ManifestDiff) -> str:
    """A plain-text table of the diff for the terminal (one line per element)."""
    lines = [f"{'element':<16} status"]
    shifts = {r.element_id: r for r in diff.recheck}
    for label, ids in (("new", diff.new), ("changed", diff.changed),
                       ("unchanged", diff.unchanged), ("archived", diff.archived)):
        for eid in ids:
            text = f"{eid:<16} {label}"
            if eid in shifts:
                r = shifts[eid]
                text += (f"; re-check on the analyzer: predicted resonance "
                         f"{r.shift_hz / 1e3:+.1f} kHz ({r.fraction * 100:+.2f} %)")
            lines.append(text)
    return "\n".join(lines)


def recheck_lines(diff: ManifestDiff) -> list[str]:
    """One "re-check on the analyzer" line per element whose predicted resonance moved."""
    return [f"re-check on the analyzer: {r.element_id} (the wire already cut now predicts "
            f"{r.shift_hz / 1e3:+.1f} kHz, {r.fraction * 100:+.2f} %; predicted leg "
            f"{r.old_predicted_leg_m:.3f} m -> {r.new_predicted_leg_m:.3f} m)"
            for r in diff.recheck]


def manifest_to_dict(m: Manifest) -> dict[str, Any]:
    """The JSON form of a manifest (elements and files in sorted order)."""
    return {
        "format": m.format, "spec_hash": m.spec_hash, "revision": m.revision,
        "built_at": m.built_at,
        "elements": {eid: {"hash": e.hash, "predicted_leg_m": e.predicted_leg_m,
                           "design_frequency_hz": e.design_frequency_hz,
                           "cut_leg_m": e.cut_leg_m, "files": list(e.files)}
                     for eid, e in sorted(m.elements.items())},
        "files": dict(sorted(m.files.items())),
        "spec": m.spec, "notes": list(m.notes), "store": m.store,
        "items": dict(sorted(m.items.items())),
        "reprinted": {k: list(v) for k, v in sorted(m.reprinted.items())},
    }


def _number(value: Any, where: str, positive: bool = True) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        raise ValueError(f"{where} must be a number, got {value!r}")
    if positive and value <= 0:
        raise ValueError(f"{where} must be positive, got {value!r}")
    return float(value)


def manifest_from_dict(data: Any) -> Manifest:
    """Parse the JSON form; ValueError or TypeError naming the first bad field."""
    if not isinstance(data, Mapping):
        raise TypeError("a manifest is a JSON object")
    if data.get("format") != MANIFEST_FORMAT:
        raise ValueError(f"format must be {MANIFEST_FORMAT!r}, got {data.get('format')!r}")
    for key, kind in (("spec_hash", str), ("revision", int), ("built_at", str),
                      ("elements", Mapping), ("files", Mapping)):
        if not isinstance(data.get(key), kind) or isinstance(data.get(key), bool):
            raise TypeError(f"{key} is missing or has the wrong type")
    elements: dict[str, ManifestElement] = {}
    for eid, e in data["elements"].items():
        where = f"elements.{eid}"
        if not isinstance(e, Mapping) or not isinstance(e.get("hash"), str):
            raise TypeError(f"{where}.hash must be text")
        cut = e.get("cut_leg_m")
        files = e.get("files", [])
        if not isinstance(files, list) or not all(isinstance(f, str) for f in files):
            raise ValueError(f"{where}.files must be a list of file names")
        elements[eid] = ManifestElement(
            e["hash"], _number(e.get("predicted_leg_m"), f"{where}.predicted_leg_m"),
            _number(e.get("design_frequency_hz"), f"{where}.design_frequency_hz"),
            None if cut is None else _number(cut, f"{where}.cut_leg_m"), tuple(files))
    files_map = {str(k): str(v) for k, v in data["files"].items()}
    notes = data.get("notes", [])
    if not isinstance(notes, list) or not all(isinstance(n, str) for n in notes):
        raise TypeError("notes must be a list of text lines")
    items = data.get("items", {})
    if not isinstance(items, Mapping) or not all(isinstance(v, str) for v in items.values()):
        raise TypeError("items must map item names to content hashes")
    reprinted = data.get("reprinted", {})
    if not isinstance(reprinted, Mapping) or not all(
            isinstance(v, list) and all(isinstance(x, str) for x in v) for v in reprinted.values()):
        raise TypeError("reprinted must map kit_sheets, labels and day_pages to lists of names")
    store = data.get("store", "")
    if not isinstance(store, str):
        raise TypeError("store must be a path (text)")
    return Manifest(data["spec_hash"], data["revision"], data["built_at"], elements, files_map,
                    spec=str(data.get("spec", "")), notes=tuple(notes), items=dict(items),
                    reprinted={k: list(v) for k, v in reprinted.items()}, store=store)


# --------------------------------------------------------------------------- files


def file_sha256(path: str | Path) -> str:
    """SHA-256 (hex) of a file's bytes."""
    digest = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 16), b""):
            digest.update(block)
    return digest.hexdigest()


def json_bytes(data: Any) -> bytes:
    """The JSON text every manifest and export is written as (UTF-8, indent 1, no NaN)."""
    return (json.dumps(data, indent=1, ensure_ascii=False, allow_nan=False) + "\n").encode()


def write_json_atomic(path: str | Path, data: Any) -> None:
    """Write JSON to ``path`` atomically (temporary file in the same folder, then replace)."""
    write_atomic(Path(path), json_bytes(data))


def write_manifest(path: str | Path, manifest: Manifest) -> None:
    """Write a manifest atomically (BuildError if the folder is not writable)."""
    try:
        write_json_atomic(path, manifest_to_dict(manifest))
    except OSError as exc:
        raise BuildError(f"{path}: cannot write the manifest ({exc.strerror or exc})") from exc


def read_manifest(path: str | Path, missing_ok: bool = True) -> Manifest | None:
    """Read a manifest; ``None`` when absent and ``missing_ok``; BuildError when unreadable."""
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        if missing_ok:
            return None
        raise BuildError(f"{path}: no manifest there") from None
    except OSError as exc:
        raise BuildError(f"{path}: cannot read the manifest ({exc.strerror or exc})") from exc
    try:
        return manifest_from_dict(json.loads(text))
    except (ValueError, TypeError) as exc:
        raise BuildError(f"{path}: not a valid manifest ({exc}); delete or restore it") from exc
