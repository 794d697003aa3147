"""Record subcommands: ``measure``, ``trim``, ``export``, ``import``.

``register(subparsers)`` adds them to the main parser; each handler takes the parsed namespace
and returns an exit code, raising BuildsheetError subclasses for user mistakes (cli.main prints
those as one line). ``python -m buildsheet ...`` runs them too.
"""

from __future__ import annotations

import argparse
import json
import sys
from datetime import UTC, datetime
from pathlib import Path
from typing import Any, TextIO

from buildsheet.errors import RecordError
from buildsheet.store.ledger import STORE_SUFFIX


def find_store(folder: Path) -> Path:
    """The single ``*.records.sqlite`` file in ``folder``; RecordError naming the candidates."""
    found = sorted(folder.glob("*" + STORE_SUFFIX))
    if len(found) == 1:
        return found[0]
    if not found:
        raise RecordError(f"no record store (*{STORE_SUFFIX}) in {folder}: run `buildsheet "
                          "packet` beside the spec first, or pass --store PATH")
    names = ", ".join(p.name for p in found)
    raise RecordError(f"several record stores in {folder} ({names}): choose one with --store")


def _store_path(args: argparse.Namespace) -> Path:
    return Path(args.store) if args.store else find_store(Path.cwd())


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


def _both(metres: float, precise: bool = False) -> str:
    """Metric and feet-inches; ``precise``: metres to the millimetre (tape-measure lengths)."""
    from buildsheet.spec.units import format_both, format_length

    if precise:
        return f"{metres:.3f} m ({format_length(metres, 'imperial')})"
    return format_both(metres)


def handle_measure(args: argparse.Namespace, out: TextIO | None = None) -> int:
    """Record an analyzer dip and print the trim advice."""
    from buildsheet.spec.units import format_frequency
    from buildsheet.store import ledger as rec

    out = out or sys.stdout
    dip = _frequency(args.dip)
    if args.swr is not None and not args.swr >= 1.0:
        raise RecordError(f"--swr: an SWR is 1 or more, got {args.swr}")
    with rec.open_store(_store_path(args), create=False, verify=True) as store:
        row, _leg = rec.resolve_id(store, args.id)
        m = rec.add_measurement(store, row.id, dip, args.swr, args.note or "", _now())
        trims = rec.element_history(store, row.id).trims
    advice = rec.trim_advice(row, dip, trims)
    swr = f", SWR {m.swr:g}" if m.swr is not None else ""
    print(f"{row.id}: dip {format_frequency(dip)}{swr} recorded "
          f"(design {format_frequency(row.design_frequency_hz)}).", file=out)
    for line in advice.lines:
        print("  " + line, file=out)
    if advice.action != "none":
        print(f"  Per leg: {advice.action} {_both(abs(advice.per_leg_m))}; then "
              f"`buildsheet trim {row.id} --{'removed' if advice.action == 'remove' else 'added'}"
              " LENGTH` to record it.", file=out)
    return 0


def handle_trim(args: argparse.Namespace, out: TextIO | None = None) -> int:
    """Record wire removed from (or added back to) one or both legs."""
    from buildsheet.store import ledger as rec

    out = out or sys.stdout
    if (args.removed is None) == (args.added is None):
        raise RecordError("trim: give exactly one of --removed LENGTH or --added LENGTH")
    delta = (_length("--removed", args.removed) if args.removed is not None
             else -_length("--added", args.added))
    with rec.open_store(_store_path(args), create=False, verify=True) as store:
        row, id_leg = rec.resolve_id(store, args.id)
        leg = args.leg or id_leg or "both"
        if id_leg and args.leg and args.leg != id_leg:
            raise RecordError(f"{args.id} names leg {id_leg} but --leg says {args.leg}")
        trim = rec.add_trim(store, row.id, leg, delta, args.note or "", _now())
        history = rec.element_history(store, row.id)
    verb = "removed from" if trim.delta_m > 0 else "added back to"
    which = "each leg" if leg == "both" else f"leg {leg}"
    print(f"{row.id}: {_both(abs(trim.delta_m))} {verb} {which} recorded.", file=out)
    print(f"  Current legs: A {_both(history.current_leg_m('A'), True)}, "
          f"B {_both(history.current_leg_m('B'), True)}.", file=out)
    return 0


def handle_export(args: argparse.Namespace, out: TextIO | None = None) -> int:
    """Write the whole store as JSON to -o FILE (atomically) or to standard output."""
    from buildsheet.store import ledger as rec
    from buildsheet.store.manifest import write_json_atomic

    out = out or sys.stdout
    path = _store_path(args)
    with rec.open_store(path, create=False, verify=True) as store:
        data = rec.export_json(store)
    if args.output and args.output != "-":
        target = Path(args.output)
        try:
            write_json_atomic(target, data)
        except OSError as exc:
            raise RecordError(f"-o {target}: cannot write ({exc.strerror or exc})") from exc
        print(f"Exported {len(data['elements'])} elements, {len(data['measurements'])} "
              f"measurements, {len(data['trims'])} trims from {path} to {target}.", file=out)
    else:
        json.dump(data, out, indent=1, ensure_ascii=False)
        out.write("\n")
    return 0


def handle_import(args: argparse.Namespace, out: TextIO | None = None) -> int:
    """Restore a JSON export into the store (created when --store names a new file)."""
    from buildsheet.store import ledger as rec

    out = out or sys.stdout
    source = Path(args.file)
    try:
        data = json.loads(source.read_text(encoding="utf-8"))
    except OSError as exc:
        raise RecordError(f"{source}: cannot read ({exc.strerror or exc})") from exc
    except (UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise RecordError(f"{source}: not valid JSON ({exc})") from exc
    path = _store_path(args)
    with rec.open_store(path, create=True, verify=path.exists()) as store:
        report = rec.import_json(store, data)
    print(f"Imported into {path}: {report.elements} elements, {report.measurements} "
          f"measurements, {report.trims} trims, {report.prints} prints "
          f"({report.skipped} already present).", file=out)
    if report.conflicts:
        print("  Kept the store's values for elements that differ from the file: "
              + ", ".join(report.conflicts), file=out)
    return 0


def _add_store(p: argparse.ArgumentParser) -> None:
    p.add_argument("--store", metavar="PATH",
                   help=f"record store (default: the single *{STORE_SUFFIX} in this folder)")


def register(subparsers: Any) -> None:
    """Add the record subcommands to an ``add_subparsers()`` object (sets ``handler``)."""
    p = subparsers.add_parser("measure", help="record an analyzer dip and get trim advice",
                              description="Record the SWR dip of an element and print how much "
                              "to trim from (or add back to) each leg.")
    p.add_argument("id", help='element ID, e.g. "K03-40m"')
    p.add_argument("--dip", required=True, metavar="FREQ",
                   help='dip frequency with unit, e.g. "7.08MHz" or "7080kHz"')
    p.add_argument("--swr", type=float, help="SWR at the dip, e.g. 1.4")
    p.add_argument("--note", help="free text kept with the reading")
    _add_store(p)
    p.set_defaults(handler=handle_measure)

    p = subparsers.add_parser("trim", help="record wire removed from or added back to a leg",
                              description="Record a trim; the current length is the cut length "
                              "minus the trims.")
    p.add_argument("id", help='element ID ("K03-40m") or leg ID ("K03-40m-A")')
    p.add_argument("--removed", metavar="LENGTH", help='wire cut off, e.g. "35mm"')
    p.add_argument("--added", metavar="LENGTH", help='wire added back, e.g. "20mm"')
    p.add_argument("--leg", choices=("A", "B", "both"), help="which leg (default: both)")
    p.add_argument("--note", help="free text kept with the trim")
    _add_store(p)
    p.set_defaults(handler=handle_trim)

    p = subparsers.add_parser("export", help="write the whole record store as JSON")
    p.add_argument("-o", "--output", metavar="FILE", help="output file (default: stdout)")
    _add_store(p)
    p.set_defaults(handler=handle_export)

    p = subparsers.add_parser("import", help="restore a JSON export into the record store")
    p.add_argument("file", help="a file written by `buildsheet export`")
    _add_store(p)
    p.set_defaults(handler=handle_import)
