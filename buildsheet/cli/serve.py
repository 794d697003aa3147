"""The ``serve`` subcommand: run the build-day station (argument parsing only)."""

from __future__ import annotations

import argparse
from typing import Any

from buildsheet.constants import STATION_HOST as DEFAULT_HOST
from buildsheet.constants import STATION_PORT as DEFAULT_PORT


def handle_serve(args: argparse.Namespace) -> int:
    """Run the station for a spec until Ctrl+C."""
    from buildsheet.station.server import serve

    return serve(args.spec, host=args.host, port=args.port, store=args.store, model=args.model)


def _port(text: str) -> int:
    try:
        port = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"not a port number: {text!r}") from None
    if not 1 <= port <= 65535:
        raise argparse.ArgumentTypeError(f"a port is 1-65535, got {port}")
    return port


def register(subparsers: Any) -> None:
    """Add ``serve`` to an ``add_subparsers()`` object (sets ``handler``)."""
    p = subparsers.add_parser(
        "serve", help="run the build-day station: element pages, readings, day board",
        description="Serve the element pages (the winder labels' QR codes lead there when the "
        "spec sets station_url), the day board and the organiser actions, over the spec's "
        "record store. Binds to 127.0.0.1 unless --host is given.")
    p.add_argument("spec", help="the TOML spec")
    p.add_argument("--host", default=DEFAULT_HOST,
                   help=f"address to listen on (default {DEFAULT_HOST}; 0.0.0.0 for the club "
                   "network)")
    p.add_argument("--port", type=_port, default=DEFAULT_PORT,
                   help=f"port (default {DEFAULT_PORT})")
    p.add_argument("--store", metavar="PATH",
                   help="record store (default: <spec stem>.records.sqlite beside the spec)")
    p.add_argument("--model", choices=("mom", "closed_form"), default="mom",
                   help="model behind the cut lengths, as for `packet` (default: mom)")
    p.set_defaults(handler=handle_serve)
