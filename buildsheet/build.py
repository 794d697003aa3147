"""``build``: spec file -> packet folder. Gather and compute everything first, then write.

The output folder is replaced as a whole (built aside, swapped in at the end), so an
interrupted build leaves the previous packet intact. The element record store (SQLite, beside
the spec by default) is synced with the packet, and the record pages are written into the same
staged folder (``site/``).
"""

from __future__ import annotations

import hashlib
import io
from collections.abc import Collection, Iterable, Mapping
from dataclasses import dataclass, replace
from datetime import datetime
from pathlib import Path

from buildsheet.em.prediction import ModelName
from buildsheet.packet import Packet, build_packet, entry_fingerprint
from buildsheet.spec.reader import load_spec
from buildsheet.store.files import (
    check_output_folder,
    discard,
    prepare_staging,
    recover,
    swap_in,
    write_atomic,
)
from buildsheet.store.ledger import ElementHistory, ElementRow, SyncReport, default_store
from buildsheet.store.manifest import (
    RECHECK_TOLERANCE,
    Manifest,
    ManifestDiff,
    ManifestElement,
    content_hash,
    diff_manifests,
    format_diff,
    json_bytes,
    manifest_to_dict,
    read_manifest,
    recheck_lines,
)

SHEETS_PDF = "sheets.pdf"
LABELS_PDF = "labels.pdf"
MANIFEST_JSON = "manifest.json"
SITE_DIR = "site"
#: The default record store sits beside the spec: "<spec stem>.records.sqlite".
Legs = tuple[float, float]


@dataclass(frozen=True)
class BuildResult:
    """What a build wrote and what it found."""

    out_dir: Path
    files: tuple[str, ...]
    packet: Packet
    manifest: Manifest | None = None
    diff: ManifestDiff | None = None
    store: Path | None = None
    sync: SyncReport | None = None
    report: str = ""  # the change table and re-check lines, for the terminal


@dataclass(frozen=True)
class Documents:
    """The PDFs of one build (name -> bytes) and which of them hold each element's prints."""

    files: Mapping[str, bytes]
    sheet_of: Mapping[str, str]  # element ID -> sheets file
    label_of: Mapping[str, str]  # element ID -> labels file


# --------------------------------------------------------------------------- pure


def length_text(metres: float, units: str) -> str:
    """A label length, primary unit first: "10.43 m / 34 ft 2 5/8 in"."""
    from buildsheet.spec.units import format_both

    return format_both(metres, units).replace(" (", " / ").rstrip(")")  # type: ignore[arg-type]


def current_legs(packet: Packet, histories: Iterable[ElementHistory]) -> dict[str, Legs]:
    """Current (A, B) leg lengths, metres, of elements whose wire differs from the packet's cut.

    For an element with measurements or trims the wire exists: its length is the recorded cut
    minus the recorded trims (the store keeps that cut across spec changes). Elements whose
    current legs equal the packet's cut length are left out.
    """
    cut = {e.element_id: e.cut.cut_leg_m for e in packet.entries}
    out: dict[str, Legs] = {}
    for h in histories:
        eid = h.element.id
        if eid in cut and (h.measurements or h.trims):
            legs = (h.current_leg_m("A"), h.current_leg_m("B"))
            if any(abs(leg - cut[eid]) > 1e-9 for leg in legs):
                out[eid] = legs
    return out


def stored_calibrations(store, spec) -> dict:
    """The newest stored site calibration per design: one made for the design's current
    geometry and wire if there is one, else the newest of any (build_packet then warns that it
    no longer applies)."""
    from buildsheet.calc.calibrate import calibration_from_json, design_fingerprint
    from buildsheet.store.ledger import latest_calibration, list_calibrations

    out = {}
    for d in spec.designs:
        record = latest_calibration(store, d.key, design_fingerprint(d))
        if record is None:
            older = list_calibrations(store, d.key)
            record = older[-1] if older else None
        if record is not None:
            out[d.key] = calibration_from_json(record.data)
    return out


def cut_elements(histories: Iterable[ElementHistory]) -> list:
    """Elements known to be cut (they have measurements or trims), with their current legs."""
    from buildsheet.calc.calibrate import CutElement

    return [CutElement(h.element.id, h.element.key, h.current_leg_m("A"), h.current_leg_m("B"))
            for h in histories
            if h.element.status == "active" and (h.measurements or h.trims)]


def label_contents(packet: Packet, current: Mapping[str, Legs] | None = None,
                   only: Collection[str] | None = None) -> list:
    """One LabelContent per leg, sorted by kit then element then leg.

    ``current`` (from :func:`current_legs`) gives the legs' lengths after recorded trims: the
    label then shows the cut length and, after "NOW", the current length of its leg.
    ``only`` keeps the labels of those element IDs.
    """
    from buildsheet.calc.labels import LabelContent, offline_record, record_url
    from buildsheet.spec.units import format_frequency, format_length

    ev = packet.design.event
    current = current or {}
    out = []
    for entry in packet.entries:
        if only is not None and entry.element_id not in only:
            continue
        cut = entry.cut
        freq = format_frequency(cut.element.frequency_hz)
        for i, (leg_id, leg) in enumerate(zip(entry.leg_ids, ("A", "B"))):
            length = length_text(cut.cut_leg_m, ev.units)
            short, now_text = length, ""
            if entry.element_id in current:
                now = current[entry.element_id][i]
                now_text = length_text(now, ev.units)
                short = f"{format_length(cut.cut_leg_m, ev.units)} now {now_text}"
            if ev.record_url:
                payload = record_url(ev.record_url, entry.kit.kit_id, entry.element_id, leg_id)
            else:
                payload = offline_record(leg_id, cut.element.band_label, freq, short,
                                         entry.kit.kit_id, packet.revision)
            out.append(LabelContent(entry.kit.kit_id, entry.element_id, leg_id, leg,
                                    cut.element.band_label, freq, length, payload,
                                    current_length_text=now_text))
    return out


def element_hashes(packet: Packet, current: Mapping[str, Legs]) -> dict[str, str]:
    """Per element: hash of everything printed for it (sheet row fingerprint, label texts)."""
    texts: dict[str, list[str]] = {}
    for label in label_contents(packet, current):
        texts.setdefault(label.element_id, []).append(label.cut_length_text + label.current_length_text)
    return {e.element_id: content_hash({"entry": entry_fingerprint(packet, e),
                                        "labels": texts.get(e.element_id, [])})
            for e in packet.entries}


def next_revision(previous: Manifest | None, spec_hash: str, hashes: Mapping[str, str]) -> int:
    """1 for a first packet; the previous revision + 1 when the spec or any element changed."""
    if previous is None:
        return 1
    same = (previous.spec_hash == spec_hash
            and {k: v.hash for k, v in previous.elements.items()} == dict(hashes))
    return previous.revision if same else previous.revision + 1


def element_rows(packet: Packet) -> list[ElementRow]:
    """The store's rows for the packet's elements; partners are the kit's other elements."""
    rows = []
    for e in packet.entries:
        c = e.cut
        partners = tuple(o.element_id for o in packet.kit_entries(e.kit.kit_id)
                         if o.element_id != e.element_id)
        rows.append(ElementRow(e.element_id, e.kit.kit_id, e.kit.design_key, c.element.key,
                               c.element.frequency_hz, c.element.low_hz, c.element.high_hz,
                               c.predicted_leg_m, c.cut_leg_m, c.prediction.slope_m_per_hz,
                               partners))
    return rows


def filtered_packet(packet: Packet, ids: Collection[str]) -> Packet:
    """The packet cut down to the kits holding the given element IDs (for changed-only sheets)."""
    entries = tuple(e for e in packet.entries if e.element_id in ids)
    kit_ids = {e.kit.kit_id for e in entries}
    kits = tuple(k for k in packet.design.kits if k.kit_id in kit_ids)
    keys = {k.design_key for k in kits}
    return replace(packet, design=replace(packet.design, kits=kits), entries=entries,
                   cuts=tuple(c for c in packet.cuts if c.design.key in keys))


def manifest_of(packet: Packet, hashes: Mapping[str, str],
                element_files: Mapping[str, tuple[str, ...]] | None = None,
                files: Mapping[str, str] | None = None, notes: tuple[str, ...] = ()) -> Manifest:
    """The packet's manifest (one home for its shape: buildsheet.store.manifest)."""
    element_files = element_files or {}
    elements = {e.element_id: ManifestElement(hashes[e.element_id], e.cut.predicted_leg_m,
                                              e.cut.element.frequency_hz, e.cut.cut_leg_m,
                                              element_files.get(e.element_id, ()))
                for e in packet.entries}
    return Manifest(packet.design.spec_hash, packet.revision, packet.built_at, elements,
                    dict(files or {}), spec=packet.design.source, notes=notes)


def change_report(diff: ManifestDiff, previous: Manifest | None, manifest: Manifest,
                  sync: SyncReport) -> str:
    """The terminal report: revision, table of new/changed/unchanged/archived, re-checks."""
    head = (f"packet revision {manifest.revision}" if previous is None else
            f"packet revision {manifest.revision} (previous {previous.revision})")
    lines = [head, format_diff(diff), *recheck_lines(diff)]
    lines += [f"archived in the record store (dropped from the spec, records kept): {eid}"
              for eid in sync.archived if eid not in diff.archived]
    lines += [f"{eid}: already measured or trimmed; its record keeps the length actually cut"
              for eid in sync.kept_cut]
    lines += list(manifest.notes)
    return "\n".join(lines)


def _sha256(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


# --------------------------------------------------------------------------- rendering (memory)


def render_labels_bytes(packet: Packet, current: Mapping[str, Legs] | None = None,
                        only: Collection[str] | None = None) -> bytes:
    from buildsheet.render.labels import render_labels

    buf = io.BytesIO()
    render_labels(label_contents(packet, current, only), packet.design.labels.stock, buf,
                  start_cell=packet.design.labels.start_cell,
                  title=f"{packet.design.event.name} winder labels")
    return buf.getvalue()


def render_sheets_bytes(packet: Packet) -> bytes:
    from buildsheet.render import sheets

    buf = io.BytesIO()
    sheets.render_sheets(packet, buf)
    return buf.getvalue()


def render_documents(packet: Packet, current: Mapping[str, Legs],
                     changed: Collection[str] | None) -> Documents:
    """Full sheets and labels (``changed`` None), or only the changed elements' (names carry
    the revision so earlier files can stay alongside)."""
    if changed is None:
        ids = [e.element_id for e in packet.entries]
        files = {SHEETS_PDF: render_sheets_bytes(packet),
                 LABELS_PDF: render_labels_bytes(packet, current)}
        return Documents(files, dict.fromkeys(ids, SHEETS_PDF), dict.fromkeys(ids, LABELS_PDF))
    if not changed:
        return Documents({}, {}, {})
    sheets_name = f"sheets-r{packet.revision}-changed.pdf"
    labels_name = f"labels-r{packet.revision}-changed.pdf"
    files = {sheets_name: render_sheets_bytes(filtered_packet(packet, changed)),
             labels_name: render_labels_bytes(packet, current, changed)}
    return Documents(files, dict.fromkeys(changed, sheets_name),
                     dict.fromkeys(changed, labels_name))


def comparisons(packet: Packet, histories: Iterable[ElementHistory]) -> dict[str, tuple]:
    """Per element, the model's and the calibration's predictions beside the latest measured
    dip: (label, text) rows for the record page."""
    from buildsheet.calc.advice import tuning_words
    from buildsheet.calc.cuts import expected_dip_hz
    from buildsheet.spec.units import format_frequency, format_length

    latest = {h.element.id: h.measurements[-1].dip_hz for h in histories if h.measurements}
    out = {}
    for e in packet.entries:
        c = e.cut
        rows = [("Resonant leg, model" + (" before calibration" if c.calibrated else ""),
                 format_length(c.uncalibrated_leg_m if c.calibrated else c.predicted_leg_m))]
        rows.append(("First dip expected as cut, model", format_frequency(
            expected_dip_hz(c, uncalibrated=True))))
        if c.calibrated:
            rows += [("Resonant leg, calibrated", format_length(c.predicted_leg_m)),
                     ("First dip expected as cut, calibrated", format_frequency(expected_dip_hz(c)))]
        if e.element_id in latest:
            rows.append(("Latest measured dip", format_frequency(latest[e.element_id])))
        rows.append(("Tuning", tuning_words(c, packet.design.event.units)))
        out[e.element_id] = tuple(rows)
    return out


def site_pages(packet: Packet, histories: list[ElementHistory], docs: Documents,
               previous: Manifest | None) -> dict[str, str]:
    """The record pages ({file name: HTML}); with a record URL that names the leg, each leg
    gets a copy of its element's page so every printed address exists."""
    from buildsheet.render.site import page_name, render_site

    sheet_files = dict(docs.sheet_of)
    if previous is not None:
        for eid, e in previous.elements.items():
            old = [f for f in e.files if f.startswith("sheets")]
            if eid not in sheet_files and old:
                sheet_files[eid] = old[0]
    hrefs = {eid: f"../{name}" for eid, name in sheet_files.items()}
    pages = render_site(histories, packet.built_at, sheet_files, hrefs,
                        title=f"{packet.design.event.name}: element records",
                        comparisons=comparisons(packet, histories))
    url = packet.design.event.record_url or ""
    if "{leg}" in url:
        for e in packet.entries:
            for leg_id in e.leg_ids:
                pages.setdefault(page_name(leg_id), pages[page_name(e.element_id)])
    return pages


# --------------------------------------------------------------------------- the build


def _moment(built_at: str) -> datetime:
    moment = datetime.fromisoformat(built_at)
    return moment if moment.tzinfo else moment.astimezone()


def _record_prints(store, packet: Packet, hashes: Mapping[str, str], docs: Documents,
                   before: Mapping[str, ElementHistory], now: datetime) -> None:
    from buildsheet.store.ledger import record_print

    for eid in sorted(docs.sheet_of):
        done = {(p.revision, p.kind, p.hash, p.file)
                for p in (before[eid].prints if eid in before else ())}
        for kind, name in (("sheet", docs.sheet_of[eid]), ("label", docs.label_of[eid])):
            if (packet.revision, kind, hashes[eid], name) not in done:
                record_print(store, packet.revision, eid, kind, hashes[eid], name, now)


def build(spec_path: str | Path, out_dir: str | Path, *, built_at: str,
          model: ModelName = "mom", store_path: str | Path | None = None,
          changed_only: bool = False, tolerance: float = RECHECK_TOLERANCE) -> BuildResult:
    """Build the packet for the spec at ``spec_path`` into ``out_dir``.

    Compares with the manifest already in ``out_dir``, syncs the record store (default: beside
    the spec), renders sheets, labels (current lengths after recorded trims) and record pages,
    then swaps the staged folder in. ``changed_only`` writes only new and changed elements'
    sheets and labels and keeps the earlier files alongside.
    """
    from buildsheet.store.ledger import load_histories, open_store, sync_elements

    spec = load_spec(spec_path)
    store_file = Path(store_path) if store_path is not None else default_store(spec_path)
    out = check_output_folder(out_dir, (("spec", spec_path), ("record store", store_file)))
    now = _moment(built_at)
    try:
        recover(out)
    except OSError:
        pass  # prepare_staging reports an unwritable folder with its location
    previous = read_manifest(out / MANIFEST_JSON) if out.is_dir() else None
    with open_store(store_file, verify=True) as store:
        before = {h.element.id: h for h in load_histories(store)}
        draft = build_packet(spec, built_at=built_at, model=model,
                             calibrations=stored_calibrations(store, spec),
                             cut_elements=cut_elements(before.values()))
        current = current_legs(draft, before.values())
        hashes = element_hashes(draft, current)
        packet = replace(draft, revision=next_revision(previous, spec.spec_hash, hashes))
        diff = diff_manifests(previous, manifest_of(packet, hashes), tolerance)
        docs = render_documents(packet, current, set(diff.to_print) if changed_only else None)
        sync = sync_elements(store, element_rows(packet), packet.revision, now)
        _record_prints(store, packet, hashes, docs, before, now)
        histories = load_histories(store)
    pages = site_pages(packet, histories, docs, previous if changed_only else None)

    carried: dict[str, str] = {}
    element_files: dict[str, tuple[str, ...]] = {}
    if changed_only and previous is not None:
        carried = {name: digest for name, digest in previous.files.items()
                   if name not in docs.files and not name.startswith(SITE_DIR + "/")
                   and (out / name).is_file()}
        element_files = {eid: tuple(f for f in e.files if f in carried)
                         for eid, e in previous.elements.items()}
    for eid in docs.sheet_of:
        element_files[eid] = (docs.sheet_of[eid], docs.label_of[eid])
    files = {**carried, **{n: _sha256(d) for n, d in docs.files.items()},
             **{f"{SITE_DIR}/{n}": _sha256(t.encode()) for n, t in pages.items()}}
    manifest = manifest_of(packet, hashes, element_files, files,
                           _notes(changed_only, docs, carried, diff))

    staging = prepare_staging(out)
    try:
        for name, data in docs.files.items():
            write_atomic(staging / name, data)
        (staging / SITE_DIR).mkdir()
        for name, text in pages.items():
            write_atomic(staging / SITE_DIR / name, text.encode())
        write_atomic(staging / MANIFEST_JSON,
                     json_bytes(manifest_to_dict(manifest)))
        swap_in(staging, out, keep=tuple(carried))
    except BaseException:
        discard(staging)
        raise
    report = change_report(diff, previous, manifest, sync)
    return BuildResult(out, (*docs.files, f"{SITE_DIR}/", MANIFEST_JSON), packet, manifest,
                       diff, store_file, sync, report)


def _notes(changed_only: bool, docs: Documents, carried: Mapping[str, str],
           diff: ManifestDiff) -> tuple[str, ...]:
    if not changed_only:
        return (f"full build: {SHEETS_PDF} and {LABELS_PDF} hold every element",)
    if not docs.files:
        notes = ["changed-only build: nothing new or changed, no sheets or labels written"]
    else:
        names = " and ".join(docs.files)
        notes = [(f"changed-only build: {names} hold only the new and changed elements "
                  f"({', '.join(diff.to_print)}); labels start at the spec's "
                  "labels.start_cell")]
    if carried:
        notes.append("earlier files kept alongside unchanged: " + ", ".join(sorted(carried))
                     + " (each element's current prints are listed under its files)")
    return tuple(notes)
