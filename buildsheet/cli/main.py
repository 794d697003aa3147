"""Command line: argument parsing and exit codes only (0 ok, 1 spec/build problem, 2 usage)."""

from __future__ import annotations

import argparse
import os
import sys
from datetime import UTC, datetime
from importlib import resources
from pathlib import Path

from buildsheet.errors import BuildsheetError, UsageError


def build_timestamp() -> str:
    """One build time for the whole packet: SOURCE_DATE_EPOCH if set (reproducible), else now."""
    epoch = os.environ.get("SOURCE_DATE_EPOCH")
    moment = (datetime.fromtimestamp(int(epoch), UTC) if epoch and epoch.isdigit()
              else datetime.now(UTC))
    return moment.strftime("%Y-%m-%dT%H:%M:%SZ")


def demo_spec_text() -> str:
    """The bundled demo spec (an invented club build day)."""
    return resources.files("buildsheet").joinpath("data/demo.toml").read_text(encoding="utf-8")


def _cmd_packet(args: argparse.Namespace) -> int:
    from buildsheet.build import build

    result = build(args.spec, args.output, built_at=build_timestamp(), model=args.model,
                   store_path=args.store, changed_only=args.changed_only,
                   new_store=args.new_store)
    for w in result.packet.warnings:
        print(f"warning: {w}", file=sys.stderr)
    print(result.report)
    print(f"records: {result.store}")
    print(f"wrote {', '.join(result.files)} to {result.out_dir}")
    return 0


def preflight(packet) -> str:
    """What ``packet`` would refuse beyond the spec and the model: every label's QR payload,
    stock fit, start cell and text, planned exactly as the labels are rendered. Returns a line
    saying what the labels will carry."""
    from buildsheet.render.labels import label_summary, plan_labels

    settings = packet.design.labels
    plans = plan_labels(packet.labels, settings.stock, start_cell=settings.start_cell or 0,
                        where=f"{packet.design.source}: labels.stock")
    return label_summary(plans, settings.stock, settings.code)


def _cmd_check(args: argparse.Namespace) -> int:
    from buildsheet.packet import build_packet
    from buildsheet.render.report import cut_table
    from buildsheet.spec.reader import load_spec

    spec = load_spec(args.spec)
    packet = build_packet(spec, built_at=build_timestamp(), model=args.model)
    labels = preflight(packet)
    print(cut_table(packet))
    print(labels)
    for w in packet.warnings:
        print(f"warning: {w}", file=sys.stderr)
    return 0


def _cmd_demo(args: argparse.Namespace) -> int:
    """Write the demo spec into --spec-dir (its record store beside it, not in the disposable
    packet folder) and build its packet into -o."""
    from buildsheet.build import build
    from buildsheet.store.files import write_atomic

    folder = Path(args.spec_dir)
    folder.mkdir(parents=True, exist_ok=True)
    spec_path = folder / "demo.toml"
    text = demo_spec_text()
    if spec_path.is_file() and spec_path.read_text(encoding="utf-8") != text:
        print(f"demo spec: keeping your edited {spec_path}", file=sys.stderr)
    else:
        write_atomic(spec_path, text.encode())
    result = build(spec_path, args.output, built_at=build_timestamp(), model=args.model)
    print(f"demo spec: {spec_path}")
    print(f"records: {result.store}")
    print(f"wrote {', '.join(result.files)} to {result.out_dir}")
    return 0


def make_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="buildsheet",
        description="Build packets for club HF wire-antenna build days.")
    sub = parser.add_subparsers(dest="command", required=True)

    def model_option(p: argparse.ArgumentParser) -> None:
        p.add_argument("--model", choices=("mom", "closed_form"), default="mom",
                       help="model behind the cut lengths (default: method of moments)")

    p = sub.add_parser("packet", help="build the packet (sheets, labels, record pages, "
                       "manifest) for a spec and update its element records")
    p.add_argument("spec", help="the TOML spec")
    p.add_argument("-o", "--output", required=True, help="output folder")
    p.add_argument("--store", metavar="PATH",
                   help="element record store (default: <spec stem>.records.sqlite beside the "
                   "spec)")
    p.add_argument("--new-store", action="store_true",
                   help="start a new, empty record store although the previous packet in the "
                   "output folder was built with one that is now missing")
    p.add_argument("--changed-only", action="store_true",
                   help="print only the kit sheets, labels and day pages whose content changed "
                   "since the last packet (labels continue on the current label sheet unless "
                   "labels.start_cell is set); earlier files stay alongside")
    model_option(p)
    p.set_defaults(handler=_cmd_packet)

    p = sub.add_parser("check", help="validate a spec and print the cut table")
    p.add_argument("spec")
    model_option(p)
    p.set_defaults(handler=_cmd_check)

    p = sub.add_parser("demo", help="write the bundled demo spec and build its packet")
    p.add_argument("-o", "--output", default="out/demo",
                   help="packet folder (default out/demo)")
    p.add_argument("--spec-dir", default=".", metavar="DIR",
                   help="where the demo spec and its record store go (default: this folder)")
    model_option(p)
    p.set_defaults(handler=_cmd_demo)

    from buildsheet.cli.calibrate import register as register_calibrate
    from buildsheet.cli.records import register
    from buildsheet.cli.serve import register as register_serve

    register(sub)  # cut, measure, trim, void, history, export, import
    register_calibrate(sub)  # calibrate
    register_serve(sub)  # serve (the build-day station)
    return parser


def report(exc: BuildsheetError, stream=None) -> None:
    """Print each problem of ``exc`` once, one line each, in order."""
    stream = stream or sys.stderr
    for line in dict.fromkeys(str(p) for p in exc.problems):
        print(f"error: {line}", file=stream)


def main(argv: list[str] | None = None) -> int:
    """Entry point. Exit 0 on success, 1 for a problem in the spec, build or records, 2 for
    usage; a closed output pipe (``| head``) ends quietly with 141 (128 + SIGPIPE)."""
    try:
        parser = make_parser()
        args = parser.parse_args(argv)
        try:
            return int(args.handler(args))
        except UsageError as exc:
            report(exc)  # one line, like the other errors; the exit code says "usage"
            return 2
        except BuildsheetError as exc:
            report(exc)
            return 1
        finally:
            sys.stdout.flush()
    except BrokenPipeError:
        # The reader went away: send further output nowhere so the exit flush stays quiet.
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        return 141
    except KeyboardInterrupt:
        print("interrupted", file=sys.stderr)
        return 130


if __name__ == "__main__":
    sys.exit(main())
