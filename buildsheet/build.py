"""``build``: spec file -> packet folder, top to bottom.

1. load the spec into a Design; 2. read the ledger (as built) from the record store;
3. compute the Packet once (every printed value and a content hash of every printable item);
4. decide what to print (everything, or with ``changed_only`` the items whose content changed
since the previous packet); 5. render in memory; 6. record the prints in the store and write
the folder (built aside, swapped in at the end, so an interrupted build leaves the previous
packet intact). Renderers only format; nothing below computes a number twice.
"""

from __future__ import annotations

import hashlib
import io
from collections.abc import Collection, Mapping
from dataclasses import dataclass, replace
from datetime import datetime
from pathlib import Path
from typing import Any, Literal

from buildsheet.em.context import Solver
from buildsheet.em.prediction import ModelName
from buildsheet.errors import BuildError, Problem
from buildsheet.packet import DAY_PAGES, ElementEntry, Packet, build_packet, entry_fingerprint
from buildsheet.records import ElementHistory, ElementRow, PrintRecord
from buildsheet.spec.design import Design
from buildsheet.spec.reader import load_spec
from buildsheet.store.files import (
    check_output_folder,
    discard,
    prepare_staging,
    recover,
    remove_new_store,
    swap_in,
    write_atomic,
)
from buildsheet.store.ledger import RecordStore, SyncReport, default_store
from buildsheet.store.manifest import (
    RECHECK_TOLERANCE,
    Manifest,
    ManifestDiff,
    ManifestElement,
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
    matrix_fills: int = 0  # impedance matrices filled by this build's solver context


@dataclass(frozen=True)
class Selection:
    """What one build prints: item names of the packet (``kit:K01``, ``label:K01-40m-A``,
    ``day:bom``, ``nvis:KEY``...); ``full`` for a whole packet."""

    items: frozenset[str]
    full: bool

    def kit_sheets(self, packet: Packet) -> tuple[str, ...]:
        return tuple(sorted({i.split(":", 1)[1] for i in self.items
                             if i.startswith(("kit:", "design:"))}))

    def labels(self) -> tuple[str, ...]:
        return tuple(sorted(i.split(":", 1)[1] for i in self.items if i.startswith("label:")))

    def day_pages(self, packet: Packet | None = None) -> tuple[str, ...]:
        """Day-level pages printed: "bom", "spool-plan"... and "nvis-KEY" per design; pages
        with nothing to show (no batch trims, no spools) are left out when ``packet`` is given."""
        empty = set()
        if packet is not None and not packet.batch_trims:
            empty.add("day:batch-trims")
        if packet is not None and not packet.spool_plan.spools:
            empty.add("day:stations")
        return tuple(sorted(i.split(":", 1)[1] if i.startswith("day:") else
                            "nvis-" + i.split(":", 1)[1] for i in self.items
                            if i.startswith(("day:", "nvis:")) and i not in empty))


@dataclass(frozen=True)
class Documents:
    """The PDFs of one build (name -> bytes) and which of them hold each element's prints."""

    files: Mapping[str, bytes]
    sheet_of: Mapping[str, str]  # element ID -> sheets file
    label_of: Mapping[str, str]  # element ID -> labels file
    next_cell: int | None = None  # first free label cell after this build's labels


# --------------------------------------------------------------------------- pure


def select(packet: Packet, previous: Manifest | None, changed_only: bool) -> Selection:
    """Everything, or the items whose content hash differs from the previous packet's."""
    if not changed_only or previous is None or not previous.items:
        return Selection(frozenset(packet.items), True)
    old = previous.items
    return Selection(frozenset(k for k, v in packet.items.items() if old.get(k) != v), False)


def only_cut_rechecks(diff: ManifestDiff, packet: Packet) -> ManifestDiff:
    """Analyzer re-checks only for elements with wire already cut (the others get new labels)."""
    cut = {e.element_id for e in packet.entries if e.state.is_cut}
    return replace(diff, recheck=tuple(r for r in diff.recheck if r.element_id in cut))


def element_hashes(packet: Packet) -> dict[str, str]:
    """Per element: hash of everything printed for it (sheet rows, state, labels)."""
    return {e.element_id: entry_fingerprint(packet, e) for e in packet.entries}


def next_revision(previous: Manifest | None, spec_hash: str, items: Mapping[str, str]) -> int:
    """1 for a first packet; the previous revision + 1 when the spec or any printed item changed."""
    if previous is None:
        return 1
    same = previous.spec_hash == spec_hash and dict(previous.items) == dict(items)
    return previous.revision if same else previous.revision + 1


def element_rows(packet: Packet) -> list[ElementRow]:
    """The store's as-designed rows for the packet's elements."""
    return [ElementRow(e.element_id, e.kit.kit_id, e.kit.design_key, e.cut.element.key,
                       e.cut.element.frequency_hz, e.cut.element.low_hz, e.cut.element.high_hz,
                       e.cut.predicted_leg_m, e.cut.cut_leg_m, e.cut.prediction.slope_m_per_hz,
                       e.partners) for e in packet.entries]


def manifest_of(packet: Packet, hashes: Mapping[str, str],
                element_files: Mapping[str, tuple[str, ...]] | None = None,
                files: Mapping[str, str] | None = None, notes: tuple[str, ...] = (),
                reprinted: Mapping[str, Any] | None = None, store: str = "") -> Manifest:
    """The packet's manifest (one home for its shape: buildsheet.store.manifest)."""
    element_files = element_files or {}
    elements = {e.element_id: ManifestElement(hashes[e.element_id], e.cut.predicted_leg_m,
                                              e.cut.element.frequency_hz, e.cut.cut_leg_m,
                                              element_files.get(e.element_id, ()))
                for e in packet.entries}
    return Manifest(packet.design.spec_hash, packet.revision, packet.built_at, elements,
                    dict(files or {}), spec=packet.design.source, notes=notes,
                    items=dict(packet.items), reprinted=dict(reprinted or {}), store=store)


def change_report(diff: ManifestDiff, previous: Manifest | None, manifest: Manifest,
                  sync: SyncReport, store: Path) -> str:
    """The terminal report: revision, store, table of new/changed/unchanged/archived, re-checks,
    what was printed."""
    head = (f"packet revision {manifest.revision}" if previous is None else
            f"packet revision {manifest.revision} (previous {previous.revision})")
    lines = [head, f"record store: {store}", format_diff(diff), *recheck_lines(diff)]
    lines += [f"archived in the record store (dropped from the spec, records kept): {eid}"
              for eid in sync.archived if eid not in diff.archived]
    r = manifest.reprinted
    lines.append(f"printed: {len(r.get('kit_sheets', []))} kit sheet(s), "
                 f"{len(r.get('labels', []))} label(s), day pages: "
                 f"{', '.join(r.get('day_pages', [])) or 'none'}")
    lines += list(manifest.notes)
    return "\n".join(lines)


def _sha256(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


def label_start(spec: Design, stored: str | None) -> int:
    """First label cell: the spec's ``labels.start_cell`` when given, else where the last
    build's labels left the current sheet (tracked in the store)."""
    if spec.labels.start_cell is not None:
        return int(spec.labels.start_cell)
    stock = spec.labels.stock
    if stored is None or stock.cells_per_page <= 1:  # type: ignore[attr-defined]
        return 0
    try:
        return int(stored) % stock.cells_per_page  # type: ignore[attr-defined]
    except ValueError:
        return 0


def cells_key(spec: Design) -> str:
    return f"label-cells:{spec.labels.stock.name}"  # type: ignore[attr-defined]


# --------------------------------------------------------------------------- rendering (memory)


def render_documents(packet: Packet, selection: Selection, start_cell: int) -> Documents:
    """The sheets and labels PDFs of the selection (names carry the revision for a
    changed-only build, so earlier files can stay alongside)."""
    from buildsheet.render import sheets
    from buildsheet.render.labels import render_labels

    if selection.full:
        sheets_name, labels_name = SHEETS_PDF, LABELS_PDF
    else:
        sheets_name = f"sheets-r{packet.revision}-changed.pdf"
        labels_name = f"labels-r{packet.revision}-changed.pdf"
    files: dict[str, bytes] = {}
    sheet_of: dict[str, str] = {}
    label_of: dict[str, str] = {}
    next_cell = None
    if selection.full or selection.kit_sheets(packet) or selection.day_pages(packet):
        buf = io.BytesIO()
        sheets.render_sheets(packet, buf, only=None if selection.full else selection.items)
        files[sheets_name] = buf.getvalue()
        for e in packet.entries:
            if selection.full or packet.sheet_item(e.kit) in selection.items:
                sheet_of[e.element_id] = sheets_name
    wanted = set(selection.labels())
    labels = [lb for lb in packet.labels if selection.full or lb.leg_id in wanted]
    if labels:
        buf = io.BytesIO()
        stock = packet.design.labels.stock
        render_labels(labels, stock, buf, start_cell=start_cell,  # type: ignore[arg-type]
                      title=f"{packet.design.event.name} winder labels",
                      where=f"{packet.design.source}: labels.stock")
        files[labels_name] = buf.getvalue()
        for lb in labels:
            label_of[lb.element_id] = labels_name
        next_cell = (start_cell + len(labels)) % stock.cells_per_page  # type: ignore[attr-defined]
    if files:  # the day's and every kit's bill as CSV, always fresh (bom/)
        from buildsheet.calc.bom import bom_csv_files

        files.update(bom_csv_files(packet.kit_boms, packet.day_bom))
    return Documents(files, sheet_of, label_of, next_cell)


def page_histories(packet: Packet, histories: Mapping[str, ElementHistory],
                   docs: Documents, hashes: Mapping[str, str]) -> list[ElementHistory]:
    """The ledger as the record pages show it after this build: the packet's as-designed rows
    (new elements included), archived elements as stored, and this build's prints added
    (``hashes``: :func:`element_hashes` of the packet)."""
    active = {r.id: r for r in element_rows(packet)}
    out = []
    for eid in sorted(set(histories) | set(active)):
        h = histories.get(eid)
        row = active.get(eid)
        if row is not None:
            old = h.element if h is not None else None
            row = replace(row, spec_revision=old.spec_revision if old else packet.revision,
                          status="active", created=old.created if old else packet.built_at,
                          updated=packet.built_at)
        else:
            row = replace(h.element, status="archived")  # type: ignore[union-attr]
        prints = list(h.prints) if h is not None else []
        for kind, where in (("sheet", docs.sheet_of), ("label", docs.label_of)):
            if eid in where:
                prints.append(PrintRecord(0, packet.revision, eid, kind, hashes[eid],  # type: ignore[arg-type]
                                          where[eid], packet.built_at))
        base = h if h is not None else ElementHistory(row)
        out.append(replace(base, element=row, prints=tuple(prints)))
    return out


def site_pages(packet: Packet, histories: Mapping[str, ElementHistory], docs: Documents,
               hashes: Mapping[str, str],
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
    pages = render_site(page_histories(packet, histories, docs, hashes), packet.built_at, sheet_files,
                        hrefs, title=f"{packet.design.event.name}: element records",
                        entries={e.element_id: e for e in packet.entries},
                        units=packet.design.event.units)
    url = packet.design.event.record_url or ""
    if "{leg}" in url:
        for entry in packet.entries:
            for leg_id in entry.leg_ids:
                pages.setdefault(page_name(leg_id), pages[page_name(entry.element_id)])
    return pages


# --------------------------------------------------------------------------- the build


def _moment(built_at: str) -> datetime:
    moment = datetime.fromisoformat(built_at)
    return moment if moment.tzinfo else moment.astimezone()


def stored_calibrations(store: RecordStore, spec: Design) -> dict[str, Any]:
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


def packet_from_store(spec: Design, store: RecordStore, *, built_at: str,
                      model: ModelName = "mom", solver: Solver | None = None,
                      ) -> tuple[Packet, dict[str, ElementHistory]]:
    """Read the ledger once and compute the packet over it (used by ``build`` and by every
    record command that prints a number from the design)."""
    from buildsheet.store.ledger import load_histories

    histories = {h.element.id: h for h in load_histories(store)}
    pin = ""
    if spec.event.station_url:  # the station's organiser PIN goes on the cover page
        from buildsheet.station.security import organiser_pin

        pin = organiser_pin(store)
    packet = build_packet(spec, built_at=built_at, model=model,
                          calibrations=stored_calibrations(store, spec), histories=histories,
                          organiser_pin=pin, solver=solver)
    return packet, histories


def entries_from_store(spec: Design, store: RecordStore, *, model: ModelName = "mom",
                       solver: Solver | None = None, designs: Collection[str] | None = None,
                       ) -> tuple[tuple[ElementEntry, ...], dict[str, ElementHistory]]:
    """The packet's element entries (as-built state, advice) over the ledger, without the
    day-level logistics and coverage: what the record commands print from. ``designs``: only
    the kits of these design keys (a command about one element solves only its design)."""
    from buildsheet.packet import element_entries, solve_designs, usable_calibrations
    from buildsheet.store.ledger import load_histories

    if designs is not None:
        spec = replace(spec, designs=tuple(d for d in spec.designs if d.key in designs),
                       kits=tuple(k for k in spec.kits if k.design_key in designs))
    histories = {h.element.id: h for h in load_histories(store)}
    cals = usable_calibrations(spec, stored_calibrations(store, spec))
    return element_entries(spec, solve_designs(spec, model, cals, solver), histories), histories


#: Store state key holding the spec of the latest packet (relative to the store's folder).
SPEC_KEY = "spec"
#: Store state key holding the folder of the latest packet (relative to the store's folder).
PACKET_KEY = "packet"


def _record_prints(store: RecordStore, packet: Packet, hashes: Mapping[str, str],
                   docs: Documents, histories: Mapping[str, ElementHistory],
                   now: datetime) -> None:
    from buildsheet.store.ledger import record_print

    printed: tuple[tuple[Literal["sheet", "label"], Mapping[str, str]], ...] = (
        ("sheet", docs.sheet_of), ("label", docs.label_of))
    for kind, where in printed:
        for eid in sorted(where):
            done = {(p.revision, p.kind, p.hash, p.file)
                    for p in (histories[eid].prints if eid in histories else ())}
            if (packet.revision, kind, hashes[eid], where[eid]) not in done:
                record_print(store, packet.revision, eid, kind, hashes[eid], where[eid], now)


def build(spec_path: str | Path, out_dir: str | Path, *, built_at: str,
          model: ModelName = "mom", store_path: str | Path | None = None,
          changed_only: bool = False, tolerance: float = RECHECK_TOLERANCE,
          new_store: bool = False) -> BuildResult:
    """Build the packet for the spec at ``spec_path`` into ``out_dir``.

    A build that creates the record store and then fails removes it again. A store missing
    where the previous packet was built with one is an error unless ``new_store``.
    """
    store_file = Path(store_path) if store_path is not None else default_store(spec_path)
    fresh = not store_file.exists()
    try:
        return _build(spec_path, out_dir, built_at=built_at, model=model, store_file=store_file,
                      changed_only=changed_only, tolerance=tolerance, new_store=new_store)
    except BaseException:
        if fresh:
            remove_new_store(store_file)
        raise


def missing_store(store_file: Path, out: Path, previous: Manifest | None,
                  new_store: bool) -> None:
    """BuildError when the store is gone but the previous packet in ``out`` had records."""
    if new_store or store_file.exists() or previous is None or not previous.elements:
        return
    named = Path(previous.store) if previous.store else None
    if named is not None and not named.is_absolute():
        named = out / named
    if named is None or named.resolve() != store_file.resolve():
        return  # another store than the previous packet's was chosen (--store)
    raise BuildError([Problem(str(store_file), (
        f"the record store is missing, but the packet in {out} (revision {previous.revision}, "
        f"{len(previous.elements)} elements) was built with one. Restore it from a JSON export "
        f"with `buildsheet import BACKUP.json --store {store_file}`, or start a new, empty "
        "store with `buildsheet packet ... --new-store` (its cuts, readings and trims are then "
        "gone)"))])


def _build(spec_path: str | Path, out_dir: str | Path, *, built_at: str, model: ModelName,
           store_file: Path, changed_only: bool, tolerance: float,
           new_store: bool) -> BuildResult:
    from buildsheet.store.ledger import get_state, open_store, set_state, sync_elements

    spec = load_spec(spec_path)                                              # 1. the design
    out = check_output_folder(out_dir, (("spec", spec_path), ("record store", store_file)))
    now = _moment(built_at)
    try:
        recover(out)
    except OSError:
        pass  # prepare_staging reports an unwritable folder with its location
    previous = read_manifest(out / MANIFEST_JSON) if out.is_dir() else None
    missing_store(store_file, out, previous, new_store)
    solver = Solver()  # every impedance matrix of this build is filled once, here
    with open_store(store_file, verify=True) as store:
        draft, histories = packet_from_store(spec, store, built_at=built_at,    # 2-3. ledger,
                                             model=model, solver=solver)          # packet
        packet = replace(draft, revision=next_revision(previous, spec.spec_hash, draft.items))
        hashes = element_hashes(packet)
        diff = only_cut_rechecks(diff_manifests(previous, manifest_of(packet, hashes), tolerance),
                                 packet)
        selection = select(packet, previous, changed_only)                   # 4. what to print
        docs = render_documents(packet, selection,                           # 5. render
                                label_start(spec, get_state(store, cells_key(spec))))
        sync = sync_elements(store, element_rows(packet), packet.revision, now)  # 6. record
        _record_prints(store, packet, hashes, docs, histories, now)
        if docs.next_cell is not None:
            set_state(store, cells_key(spec), str(docs.next_cell))
        set_state(store, SPEC_KEY, _relative(Path(spec_path), store_file.parent))
        set_state(store, PACKET_KEY, _relative(out, store_file.parent))
    pages = site_pages(packet, histories, docs, hashes, previous if not selection.full else None)

    carried: dict[str, str] = {}
    element_files: dict[str, tuple[str, ...]] = {}
    if not selection.full and previous is not None:
        carried = {name: digest for name, digest in previous.files.items()
                   if name not in docs.files and not name.startswith(SITE_DIR + "/")
                   and (out / name).is_file()}
        element_files = {eid: tuple(f for f in e.files if f in carried)
                         for eid, e in previous.elements.items()}
    for eid in set(docs.sheet_of) | set(docs.label_of):
        mine = tuple(f for f in (docs.sheet_of.get(eid), docs.label_of.get(eid)) if f)
        kept = tuple(f for f in element_files.get(eid, ()) if f not in mine
                     and not (f.startswith("sheets") and docs.sheet_of.get(eid))
                     and not (f.startswith("labels") and docs.label_of.get(eid)))
        element_files[eid] = mine + kept
    files = {**carried, **{n: _sha256(d) for n, d in docs.files.items()},
             **{f"{SITE_DIR}/{n}": _sha256(t.encode()) for n, t in pages.items()}}
    reprinted = {"kit_sheets": list(selection.kit_sheets(packet)),
                 "labels": list(selection.labels()),
                 "day_pages": list(selection.day_pages(packet))}
    manifest = manifest_of(packet, hashes, element_files, files,
                           _notes(selection, docs, carried), reprinted,
                           store=_relative(store_file, out))
    staging = prepare_staging(out)
    try:
        for name, data in docs.files.items():
            (staging / name).parent.mkdir(parents=True, exist_ok=True)  # bom/ holds the CSVs
            write_atomic(staging / name, data)
        (staging / SITE_DIR).mkdir()
        for name, text in pages.items():
            write_atomic(staging / SITE_DIR / name, text.encode())
        write_atomic(staging / MANIFEST_JSON, json_bytes(manifest_to_dict(manifest)))
        swap_in(staging, out, keep=tuple(carried))
    except BaseException:
        discard(staging)
        raise
    report = change_report(diff, previous, manifest, sync, store_file)
    listed = [n for n in docs.files if "/" not in n]
    listed += sorted({n.split("/")[0] + "/" for n in docs.files if "/" in n})
    return BuildResult(out, (*listed, f"{SITE_DIR}/", MANIFEST_JSON), packet, manifest,
                       diff, store_file, sync, report, solver.fills)


def _relative(path: Path, folder: Path) -> str:
    """``path`` as the manifest records it: relative to the packet folder where possible."""
    import os

    try:
        return os.path.relpath(path.resolve(), folder.resolve())
    except ValueError:
        return str(path.resolve())


def _notes(selection: Selection, docs: Documents, carried: Mapping[str, str]) -> tuple[str, ...]:
    if selection.full:
        return (f"full build: {SHEETS_PDF} and {LABELS_PDF} hold every kit, label and day page",)
    if not docs.files:
        notes = ["changed-only build: nothing changed, no sheets or labels written"]
    else:
        printed = [n for n in docs.files if "/" not in n]
        folders = sorted({n.split("/")[0] + "/" for n in docs.files if "/" in n})
        notes = [f"changed-only build: {' and '.join(printed)} hold only what changed "
                 "(see 'reprinted')" + (f"; {', '.join(folders)} rewritten in full"
                                        if folders else "")]
    if carried:
        notes.append("earlier files kept alongside unchanged: " + ", ".join(sorted(carried)))
    return tuple(notes)


__all__ = ["DAY_PAGES", "BuildResult", "Selection", "build", "packet_from_store", "select"]
