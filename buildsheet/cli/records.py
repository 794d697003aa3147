"""Record subcommands: ``cut``, ``measure``, ``trim``, ``void``, ``history``, ``export``,
``import``.

Every command finds its record store the same way (:func:`locate_store`) and says which one it
used. Numbers it prints (current lengths, targets, actions, expected dips) come from the same
functions as the packet's (buildsheet.build.entries_from_store -> buildsheet.calc.asbuilt).
Handlers raise BuildsheetError subclasses for user mistakes (cli.main prints those as one line).
"""

from __future__ import annotations

import argparse
import json
import sys
from dataclasses import dataclass
from datetime import UTC, datetime
from pathlib import Path
from typing import TYPE_CHECKING, Any, TextIO

from buildsheet.errors import Problem, RecordError, UsageError
from buildsheet.store.ledger import STORE_SUFFIX

if TYPE_CHECKING:
    from buildsheet.records import VoidKind
    from buildsheet.spec.units import UnitSystem

#: Where a record command looks, in order, when no option names the store.
SEARCH_NOTE = ("--store PATH, --spec SPEC (its store beside it), --packet DIR (the store named in "
               "its manifest.json), else this folder: a manifest.json, or the one "
               f"*{STORE_SUFFIX}, or the one spec whose store is beside it")


@dataclass(frozen=True)
class StoreChoice:
    """The store a command uses and how it was found (printed for the user)."""

    path: Path
    how: str


def _from_manifest(folder: Path) -> Path | None:
    from buildsheet.store.manifest import read_manifest

    manifest = read_manifest(folder / "manifest.json")
    if manifest is None or not manifest.store:
        return None
    return (folder / manifest.store).resolve()


def find_store(folder: Path) -> Path:
    """The store for ``folder``: its packet manifest's store, the single ``*.records.sqlite``,
    or the store beside the single spec there; RecordError naming what to pass."""
    from buildsheet.store.ledger import default_store

    named = _from_manifest(folder) if (folder / "manifest.json").is_file() else None
    if named is not None:
        return named
    found = sorted(folder.glob("*" + STORE_SUFFIX))
    if len(found) == 1:
        return found[0]
    if len(found) > 1:
        names = ", ".join(p.name for p in found)
        raise RecordError(f"several record stores in {folder} ({names}): choose one with --store")
    specs = [s for s in sorted(folder.glob("*.toml")) if default_store(s).is_file()]
    if len(specs) == 1:
        return default_store(specs[0])
    raise RecordError(f"no record store found from {folder}: give {SEARCH_NOTE}")


def locate_store(args: argparse.Namespace) -> StoreChoice:
    """The record store named by the options, else found from the current folder."""
    from buildsheet.store.ledger import default_store

    if getattr(args, "store", None):
        return StoreChoice(Path(args.store), "--store")
    if getattr(args, "spec", None):
        return StoreChoice(default_store(args.spec), f"beside {args.spec}")
    if getattr(args, "packet", None):
        folder = Path(args.packet)
        named = _from_manifest(folder)
        if named is None:
            raise RecordError(f"--packet {folder}: no manifest.json naming a record store there")
        return StoreChoice(named, f"named by {folder / 'manifest.json'}")
    return StoreChoice(find_store(Path.cwd()), "found from this folder")


NO_SPEC = ("(what to do next needs the spec, and no packet has been built with this store: "
           "give --spec SPEC)")


def spec_of_store(store: Any, path: Path, args: argparse.Namespace,
                  required: bool = True) -> Path | None:
    """The spec behind a store: --spec, else the spec its latest packet was built from; None
    (or RecordError when ``required``) when neither is known."""
    from buildsheet.build import SPEC_KEY
    from buildsheet.store.ledger import get_state

    if getattr(args, "spec", None):
        return Path(args.spec)
    named = get_state(store, SPEC_KEY)
    if named is None:
        if not required:
            return None
        raise RecordError(f"{path}: no packet has been built with this store yet; give --spec SPEC")
    spec = (path.parent / named).resolve()
    if not spec.is_file():
        raise RecordError(f"{path}: its spec {spec} is missing; give --spec SPEC")
    return spec


def _units(store: Any, choice: StoreChoice, args: argparse.Namespace) -> UnitSystem:
    """The unit system of the store's spec (metric when the spec is not known)."""
    from buildsheet.spec.reader import load_spec

    path = spec_of_store(store, choice.path, args, required=False)
    return load_spec(path).event.units if path is not None else "metric"


def _now() -> datetime:
    """The one clock read for a record command (UTC)."""
    return datetime.now(UTC)


def _frequency(text: str) -> float:
    from buildsheet.spec.units import parse_frequency

    try:
        return parse_frequency(text)
    except ValueError as exc:
        raise RecordError(f"--dip: {exc}") from exc


def _length(option: str, text: str) -> float:
    from buildsheet.spec.units import parse_length

    negative = text.strip().startswith("-")
    try:
        value = parse_length(text.strip().lstrip("-"))
    except ValueError as exc:
        raise RecordError(f"{option}: {exc}") from exc
    if value <= 0 or negative:
        raise RecordError(f"{option}: the amount must be positive, got {text!r} "
                          "(use --removed for wire cut off, --added for wire added back)")
    return value


def _number(option: str, text: str | None, minimum: float | None = None,
            rule: str = "") -> float | None:
    """An optional number typed after ``option`` (blank: None); RecordError naming the rule."""
    import math

    if text is None or not str(text).strip():
        return None
    try:
        value = float(text)
    except ValueError:
        raise RecordError(f"{option}: not a number: {str(text).strip()!r}") from None
    if not math.isfinite(value) or (minimum is not None and value < minimum):
        raise RecordError(f"{option}: {rule or 'a finite number'}, got {str(text).strip()}")
    return value


def parse_reading(dip: str, swr: str | None = None, r: str | None = None,
                  x: str | None = None) -> tuple[float, float | None, Any]:
    """A typed reading (``measure`` and the station): dip (Hz), SWR and the ledger's extras
    (R, X in ohm). RecordError with the option's name for a bad value."""
    from buildsheet.store.ledger import ReadingExtras

    return (_frequency(dip), _number("--swr", swr, 1.0, "an SWR is 1 or more"),
            ReadingExtras(_number("--r", r, 0.0, "R is 0 ohm or more"), _number("--x", x)))


def sweep_reading(name: str, data: bytes) -> tuple[float, float, Any, Any]:
    """A reading from a sweep file's bytes (``measure --sweep`` and the station's upload):
    resonance (Hz), SWR there, the extras (R there, X = 0 at a reactance zero, the sweep) and
    the fit. RecordError naming the file for a bad one."""
    from buildsheet.calc.sweep import analyse, read_sweep, sweep_to_csv
    from buildsheet.store.ledger import ReadingExtras

    sweep = read_sweep(data, name)
    fit = analyse(sweep)
    extras = ReadingExtras(fit.r_ohm, 0.0 if fit.r_ohm is not None else None, name,
                           sweep_to_csv(sweep))
    return fit.resonance_hz, fit.swr, extras, fit


def _entry(store: Any, choice: StoreChoice, args: argparse.Namespace,
           element_id: str) -> tuple[Any, UnitSystem] | None:
    """The packet entry of one element, computed over the store's ledger now (None when the
    store's spec is not known)."""
    from buildsheet.build import entries_from_store
    from buildsheet.spec.reader import load_spec

    path = spec_of_store(store, choice.path, args, required=False)
    if path is None:
        return None
    spec = load_spec(path)
    kit_id = element_id.split("-", 1)[0]
    designs = {k.design_key for k in spec.kits if k.kit_id == kit_id}
    entries, _ = entries_from_store(spec, store, designs=designs)  # solve its design only
    found = [e for e in entries if e.element_id == element_id]
    if not found:
        raise RecordError(f"{element_id} is not in the spec any more (archived)")
    return found[0], spec.event.units


def print_state(found: tuple[Any, UnitSystem] | None, out: TextIO) -> None:
    """Both legs and the instruction, as the sheets print them."""
    from buildsheet.spec.units import format_tape

    if found is None:
        print("  " + NO_SPEC, file=out)
        return
    entry, units = found
    for leg in entry.state.legs:
        cut = "not cut" if leg.cut_m is None else f"cut {format_tape(leg.cut_m, units)}"
        print(f"  {leg.leg_id}: {cut}, now {format_tape(leg.current_m, units)}, target "
              f"{format_tape(leg.target_m, units)}: {leg.action.words(units, both=False)}",
              file=out)
    for line in entry.advice:
        print("  " + line, file=out)


def _open(args: argparse.Namespace, err: TextIO) -> tuple[Any, StoreChoice]:
    from buildsheet.store import ledger as rec

    choice = locate_store(args)
    print(f"record store: {choice.path} ({choice.how})", file=err)
    return rec.open_store(choice.path, create=False, verify=True), choice


def handle_cut(args: argparse.Namespace, out: TextIO | None = None) -> int:
    """Confirm the cut of legs (element IDs: both legs) at their printed length or --length."""
    from buildsheet.spec.units import format_tape
    from buildsheet.store import ledger as rec

    out = out or sys.stdout
    length = _length("--length", args.length) if args.length else None
    store, choice = _open(args, sys.stderr)
    with store:
        units = _units(store, choice, args)
        for text in args.ids:
            row, leg = rec.resolve_id(store, text)
            done = rec.confirm_cut(store, row.id, (leg,) if leg else ("A", "B"), _now(),
                                   length_m=length, note=args.note or "")
            if not done:
                named = f"{row.id}-{leg}" if leg else row.id  # as the spec writes it
                print(f"{named}: already confirmed as cut", file=out)
            for c in done:
                print(f"{c.element_id}-{c.leg}: {c.how} at {format_tape(c.length_m, units)}",
                      file=out)
    return 0


def handle_measure(args: argparse.Namespace, out: TextIO | None = None) -> int:
    """Record an analyzer dip and print what to do to each leg."""
    from buildsheet.spec.units import format_frequency
    from buildsheet.store import ledger as rec

    out = out or sys.stdout
    if (args.dip is None) == (args.sweep is None):
        raise RecordError("measure: give exactly one of --dip FREQ or --sweep FILE")
    fit = None
    swr_value: float | None
    note = args.note or ""
    if args.sweep is not None:
        path = Path(args.sweep)
        try:
            data = path.read_bytes()
        except OSError as exc:
            raise RecordError(f"--sweep {path}: cannot read ({exc.strerror or exc})") from exc
        dip, swr_value, extras, fit = sweep_reading(path.name, data)
        note = f"sweep {path.name}: {fit.method}" + (f"; {note}" if note else "")
    else:
        dip, swr_value, extras = parse_reading(args.dip, args.swr, args.r, args.x)
    store, choice = _open(args, sys.stderr)
    with store:
        row, _leg = rec.resolve_id(store, args.id)
        m = rec.add_measurement(store, row.id, dip, swr_value, note, _now(), extras)
        entry = _entry(store, choice, args, row.id)
    swr = f", SWR {m.swr:g}" if m.swr is not None else ""
    if fit is not None:
        r = f", R {fit.r_ohm:.1f} ohm" if fit.r_ohm is not None else ""
        band = (f"; 2:1 band {format_frequency(fit.bandwidth_hz[0])} to "
                f"{format_frequency(fit.bandwidth_hz[1])}"
                + (" or wider" if fit.bandwidth_clipped else "") if fit.bandwidth_hz else
                "; SWR never below 2")
        print(f"{row.id}: sweep {args.sweep}: resonance {format_frequency(dip)} "
              f"({fit.method}){r}{swr}{band}.", file=out)
        for line in fit.notes:
            print(f"  Note: {line}", file=out)
    print(f"{row.id}: dip {format_frequency(dip)}{swr} recorded "
          f"(design {format_frequency(row.design_frequency_hz)}).", file=out)
    print_state(entry, out)
    return 0


def handle_trim(args: argparse.Namespace, out: TextIO | None = None) -> int:
    """Record wire removed from (or added back to) one or both legs."""
    from buildsheet.spec.units import format_both
    from buildsheet.store import ledger as rec

    out = out or sys.stdout
    if (args.removed is None) == (args.added is None):
        raise UsageError("trim: give exactly one of --removed LENGTH or --added LENGTH")
    delta = (_length("--removed", args.removed) if args.removed is not None
             else -_length("--added", args.added))
    store, choice = _open(args, sys.stderr)
    with store:
        row, id_leg = rec.resolve_id(store, args.id)
        leg = args.leg or id_leg or "both"
        if id_leg and args.leg and args.leg != id_leg:
            raise RecordError(f"{args.id} names leg {id_leg} but --leg says {args.leg}")
        trim = rec.add_trim(store, row.id, leg, delta, args.note or "", _now())
        entry = _entry(store, choice, args, row.id)
    verb = "removed from" if trim.delta_m > 0 else "added back to"
    which = "each leg" if leg == "both" else f"leg {leg}"
    units = entry[1] if entry is not None else "metric"
    print(f"{row.id}: {format_both(abs(trim.delta_m), units)} {verb} {which} recorded.",
          file=out)
    print_state(entry, out)
    return 0


def handle_void(args: argparse.Namespace, out: TextIO | None = None) -> int:
    """Withdraw a wrong measurement, trim or cut (the row number from ``history``)."""
    from buildsheet.store import ledger as rec

    out = out or sys.stdout
    given: tuple[tuple[VoidKind, int | None], ...] = (
        ("measurement", args.measurement), ("trim", args.trim), ("cut", args.cut))
    chosen = [(k, n) for k, n in given if n is not None]
    if len(chosen) != 1:
        raise RecordError("void: give exactly one of --measurement N, --trim N or --cut N")
    kind, number = chosen[0]
    store, _choice = _open(args, sys.stderr)
    with store:
        row, _leg = rec.resolve_id(store, args.id)
        history = rec.element_history(store, row.id)
        mine = {r.id for r in (*history.measurements, *history.trims, *history.cuts,
                               *history.voided)}
        if number not in mine:
            raise RecordError(f"void: {kind} {number} does not belong to {row.id}; "
                              f"`buildsheet history {row.id}` lists its numbers")
        rec.void_record(store, kind, number, args.reason or "", _now())
    print(f"{row.id}: {kind} {number} is void (kept in the history, ignored from now on).",
          file=out)
    return 0


def handle_history(args: argparse.Namespace, out: TextIO | None = None) -> int:
    """List an element's cuts, trims and readings with their numbers (for ``void``)."""
    from buildsheet.store import ledger as rec

    out = out or sys.stdout
    store, _choice = _open(args, sys.stderr)
    with store:
        row, _leg = rec.resolve_id(store, args.id)
        h = rec.element_history(store, row.id)
    print(f"{row.id} ({row.key}, design {row.design}; prescribed cut {row.cut_leg_m:.3f} m)",
          file=out)
    for c in h.cuts:
        print(f"  cut {c.id}: leg {c.leg} {c.length_m:.3f} m ({c.how}) {c.time}", file=out)
    for t in h.trims:
        verb = "removed" if t.delta_m > 0 else "added back"
        print(f"  trim {t.id}: leg {t.leg} {verb} {abs(t.delta_m) * 1000:.0f} mm {t.time}",
              file=out)
    for m in h.measurements:
        print(f"  measurement {m.id}: dip {m.dip_hz / 1e6:.4f} MHz {m.time}", file=out)
    for v in h.voided:
        print(f"  (void) {type(v).__name__.lower()} {v.id} {v.time}", file=out)
    return 0


def as_built_export(entries: Any) -> list[dict[str, Any]]:
    """Per element and leg, the numbers the packet prints (export's ``as_built`` section)."""
    from buildsheet.calc.asbuilt import finite_or_none

    return [{"element_id": e.element_id, "expected_dip_hz": finite_or_none(e.state.expected_dip_hz),
             "status": e.state.status, "target_source": e.state.target_source,
             "legs": [{"leg_id": leg.leg_id, "prescribed_cut_m": leg.prescribed_cut_m,
                       "cut_m": leg.cut_m, "trims_m": leg.trims_m, "current_m": leg.current_m,
                       "target_m": leg.target_m, "action": leg.action.kind,
                       "action_m": leg.action.amount_m} for leg in e.state.legs]}
            for e in entries]


def refuse_overwrite(target: Path, data: dict[str, Any], force: bool) -> None:
    """RecordError unless ``target`` may be replaced by the export ``data``: it must be absent
    or an export itself, and an export without elements never replaces one with elements
    unless ``force``."""
    from buildsheet.store.exchange import EXPORT_FORMAT

    if not target.exists():
        return
    try:
        old = json.loads(target.read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError, ValueError):
        old = None
    if not isinstance(old, dict) or old.get("format") != EXPORT_FORMAT:
        raise RecordError(f"-o {target}: the file exists and is not a records export; it is "
                          "left untouched: choose another file name")
    if not data.get("elements") and old.get("elements") and not force:
        raise RecordError(f"-o {target}: this store has no elements but {target} holds "
                          f"{len(old['elements'])}; keeping it (pass --force to replace it)")


def handle_export(args: argparse.Namespace, out: TextIO | None = None) -> int:
    """Write the whole store as JSON, with the as-built numbers, to -o FILE or stdout."""
    from buildsheet.build import entries_from_store
    from buildsheet.spec.reader import load_spec
    from buildsheet.store import exchange
    from buildsheet.store.manifest import write_json_atomic

    out = out or sys.stdout
    store, choice = _open(args, sys.stderr)
    with store:
        data = exchange.export_json(store)
        spec_path = spec_of_store(store, choice.path, args, required=False)
        if spec_path is not None:
            entries, _ = entries_from_store(load_spec(spec_path), store)
            data["as_built"] = as_built_export(entries)
        else:
            print("note: no as_built section " + NO_SPEC, file=sys.stderr)
    if args.output and args.output != "-":
        target = Path(args.output)
        if target.resolve() == choice.path.resolve():
            raise RecordError(f"-o {target}: that is the record store itself; choose another file")
        refuse_overwrite(target, data, getattr(args, "force", False))
        try:
            write_json_atomic(target, data)
        except OSError as exc:
            raise RecordError(f"-o {target}: cannot write ({exc.strerror or exc})") from exc
        print(f"Exported {len(data['elements'])} elements, {len(data['measurements'])} "
              f"measurements, {len(data['trims'])} trims, {len(data['cuts'])} cuts from "
              f"{choice.path} to {target}.", file=out)
    else:
        json.dump(data, out, indent=1, ensure_ascii=False)
        out.write("\n")
    return 0


def handle_import(args: argparse.Namespace, out: TextIO | None = None) -> int:
    """Restore a JSON export into the store (created when --store names a new file)."""
    from buildsheet.store import exchange
    from buildsheet.store import ledger as rec

    out = out or sys.stdout
    source = Path(args.file)
    try:
        data = json.loads(source.read_text(encoding="utf-8"))
    except OSError as exc:
        raise RecordError(f"{source}: cannot read ({exc.strerror or exc})") from exc
    except (UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise RecordError(f"{source}: not valid JSON ({exc})") from exc
    choice = locate_store(args)
    path = choice.path
    print(f"record store: {path} ({choice.how})", file=sys.stderr)
    fresh = not path.exists()
    try:
        with rec.open_store(path, create=True, verify=not fresh) as store:
            try:
                report = exchange.import_json(store, data)
            except RecordError as exc:  # name the file the bad rows are in
                raise RecordError([Problem(str(source), p.message) if p.where == "buildsheet"
                                   else p for p in exc.problems]) from exc
    except BaseException:
        if fresh:  # a refused import leaves no new, empty store behind
            from buildsheet.store.files import remove_new_store

            remove_new_store(path)
        raise
    print(f"Imported into {path}: {report.elements} elements, {report.measurements} "
          f"measurements, {report.trims} trims, {report.cuts} cuts, {report.prints} prints "
          f"({report.skipped} already present).", file=out)
    if report.extras:
        print(f"  Added R, X or the sweep to {report.extras} readings already in the store.",
              file=out)
    if report.conflicts:
        print("  Kept the store's values for elements that differ from the file: "
              + ", ".join(report.conflicts), file=out)
    return 0


def add_store_options(p: argparse.ArgumentParser, spec: bool = True) -> None:
    """The options every record command finds its store by."""
    p.add_argument("--store", metavar="PATH", help="the record store")
    if spec:
        p.add_argument("--spec", metavar="SPEC", help="the spec (its store sits beside it)")
    p.add_argument("--packet", metavar="DIR", help="a packet folder (its manifest names the store)")


def register(subparsers: Any) -> None:
    """Add the record subcommands to an ``add_subparsers()`` object (sets ``handler``)."""
    epilog = f"The record store: {SEARCH_NOTE}."
    p = subparsers.add_parser("cut", help="confirm that legs were cut", epilog=epilog,
                              description="Record that legs were cut: at the length their labels "
                              "print, or at --length (a re-cut of a leg already cut).")
    p.add_argument("ids", nargs="+", metavar="ID",
                   help='element IDs ("K03-40m": both legs) or leg IDs ("K03-40m-A")')
    p.add_argument("--length", metavar="LENGTH", help='the length actually cut, e.g. "10.55 m"')
    p.add_argument("--note", help="free text kept with the cut")
    add_store_options(p)
    p.set_defaults(handler=handle_cut)

    p = subparsers.add_parser("measure", help="record an analyzer dip and get trim advice",
                              epilog=epilog, description="Record the SWR dip of an element and "
                              "print what to do to each leg.")
    p.add_argument("id", help='element ID, e.g. "K03-40m"')
    p.add_argument("--dip", metavar="FREQ",
                   help='dip frequency with unit, e.g. "7.08MHz" or "7080kHz"')
    p.add_argument("--sweep", metavar="FILE",
                   help="an analyzer sweep instead of --dip: Touchstone .s1p, or CSV of "
                   "frequency and SWR (or R and X); the resonance is taken from it")
    p.add_argument("--swr", help="SWR at the dip, e.g. 1.4")
    p.add_argument("--r", metavar="OHM", help="resistance at the dip, ohm")
    p.add_argument("--x", metavar="OHM", help="reactance at the dip, ohm")
    p.add_argument("--note", help="free text kept with the reading")
    add_store_options(p)
    p.set_defaults(handler=handle_measure)

    p = subparsers.add_parser("trim", help="record wire removed from or added back to a leg",
                              epilog=epilog, description="Record a trim; the current length is "
                              "the length as cut minus the trims since.")
    p.add_argument("id", help='element ID ("K03-40m") or leg ID ("K03-40m-A")')
    p.add_argument("--removed", metavar="LENGTH", help='wire cut off, e.g. "35mm"')
    p.add_argument("--added", metavar="LENGTH", help='wire added back, e.g. "20mm"')
    p.add_argument("--leg", choices=("A", "B", "both"), help="which leg (default: both)")
    p.add_argument("--note", help="free text kept with the trim")
    add_store_options(p)
    p.set_defaults(handler=handle_trim)

    p = subparsers.add_parser("void", help="withdraw a wrong reading, trim or cut", epilog=epilog,
                              description="Mark one entry void: it stays in the history and "
                              "every number ignores it from then on.")
    p.add_argument("id", help="the element ID")
    p.add_argument("--measurement", type=int, metavar="N", help="measurement number")
    p.add_argument("--trim", type=int, metavar="N", help="trim number")
    p.add_argument("--cut", type=int, metavar="N", help="cut number")
    p.add_argument("--reason", help="why (kept with the void)")
    add_store_options(p)
    p.set_defaults(handler=handle_void)

    p = subparsers.add_parser("history", help="list an element's cuts, trims and readings",
                              epilog=epilog)
    p.add_argument("id", help="the element ID")
    add_store_options(p)
    p.set_defaults(handler=handle_history)

    p = subparsers.add_parser("export", help="write the whole record store as JSON",
                              epilog=epilog)
    p.add_argument("-o", "--output", metavar="FILE", help="output file (default: stdout)")
    p.add_argument("--force", action="store_true",
                   help="replace an export holding elements with one that holds none")
    add_store_options(p)
    p.set_defaults(handler=handle_export)

    p = subparsers.add_parser("import", help="restore a JSON export into the record store",
                              epilog=epilog)
    p.add_argument("file", help="a file written by `buildsheet export`")
    add_store_options(p)
    p.set_defaults(handler=handle_import)
