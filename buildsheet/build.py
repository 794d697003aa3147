"""``build``: spec file -> packet folder. Gather and compute everything first, then write.

The output folder is replaced as a whole (built aside, swapped in at the end), so an
interrupted build leaves the previous packet intact.
"""

from __future__ import annotations

import io
import json
from dataclasses import dataclass
from pathlib import Path

from buildsheet.em.predict import ModelName
from buildsheet.outdir import discard, prepare_staging, swap_in, write_atomic
from buildsheet.packet import Packet, build_packet, entry_fingerprint
from buildsheet.render import sheets
from buildsheet.spec import load_spec

SHEETS_PDF = "sheets.pdf"
LABELS_PDF = "labels.pdf"
MANIFEST_JSON = "manifest.json"


@dataclass(frozen=True)
class BuildResult:
    """What a build wrote and what it found."""

    out_dir: Path
    files: tuple[str, ...]
    packet: Packet


def label_contents(packet: Packet) -> list:
    """One LabelContent per leg, sorted by kit then element then leg."""
    from buildsheet.labels import LabelContent, offline_record, record_url
    from buildsheet.units import format_both, format_frequency

    ev = packet.design.event
    out = []
    for entry in packet.entries:
        cut = entry.cut
        freq = format_frequency(cut.element.frequency_hz)
        length = format_both(cut.cut_leg_m, ev.units).replace(" (", " / ").rstrip(")")
        for leg_id, leg in zip(entry.leg_ids, ("A", "B")):
            if ev.record_url:
                payload = record_url(ev.record_url, entry.kit.kit_id, entry.element_id, leg_id)
            else:
                payload = offline_record(leg_id, cut.element.band_label, freq, length,
                                         entry.kit.kit_id, packet.revision)
            out.append(LabelContent(entry.kit.kit_id, entry.element_id, leg_id, leg,
                                    cut.element.band_label, freq, length, payload))
    return out


def render_labels_bytes(packet: Packet) -> bytes:
    from buildsheet.render.labels import render_labels

    buf = io.BytesIO()
    render_labels(label_contents(packet), packet.design.labels.stock, buf,
                  start_cell=packet.design.labels.start_cell,
                  title=f"{packet.design.event.name} winder labels")
    return buf.getvalue()


def manifest_data(packet: Packet, files: dict[str, str]) -> dict:
    """The manifest: spec hash, revision and a fingerprint per element."""
    return {
        "format": "buildsheet-manifest/1",
        "spec": packet.design.source,
        "spec_hash": packet.design.spec_hash,
        "revision": packet.revision,
        "built_at": packet.built_at,
        "model": packet.model,
        "files": files,
        "elements": {
            e.element_id: {
                "hash": entry_fingerprint(packet, e),
                "kit": e.kit.kit_id,
                "design": e.kit.design_key,
                "band": e.cut.element.band_label,
                "design_frequency_hz": e.cut.element.frequency_hz,
                "predicted_leg_m": e.cut.predicted_leg_m,
                "cut_leg_m": e.cut.cut_leg_m,
            }
            for e in packet.entries
        },
    }


def build(spec_path: str | Path, out_dir: str | Path, *, built_at: str,
          model: ModelName = "mom") -> BuildResult:
    """Build the packet for the spec at ``spec_path`` into ``out_dir``."""
    spec = load_spec(spec_path)
    out = Path(out_dir)
    packet = build_packet(spec, built_at=built_at, model=model)
    sheets_buf = io.BytesIO()
    sheets.render_sheets(packet, sheets_buf)
    documents = {SHEETS_PDF: sheets_buf.getvalue(), LABELS_PDF: render_labels_bytes(packet)}
    staging = prepare_staging(out)
    try:
        for name, data in documents.items():
            write_atomic(staging / name, data)
        manifest = manifest_data(packet, {name: "written" for name in documents})
        write_atomic(staging / MANIFEST_JSON,
                     json.dumps(manifest, indent=2, sort_keys=True).encode())
        swap_in(staging, out)
    except BaseException:
        discard(staging)
        raise
    return BuildResult(out, (*documents, MANIFEST_JSON), packet)
