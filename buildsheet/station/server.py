"""Start-up of the station: load the spec and store, print the address, run uvicorn."""

from __future__ import annotations

from pathlib import Path
from typing import TextIO

from buildsheet.constants import STATION_HOST, STATION_PORT
from buildsheet.em.prediction import ModelName

DEFAULT_HOST, DEFAULT_PORT = STATION_HOST, STATION_PORT


def address_lines(host: str, port: int, pin: str, spec_url: str | None) -> list[str]:
    """What ``serve`` prints: where it listens, what to put in the spec, the organiser PIN."""
    local = host in ("127.0.0.1", "localhost", "::1")
    shown = "<this computer's address on the club network>" if host in ("0.0.0.0", "::") else host
    lines = [f"station: listening on http://{host}:{port} (day board at /board)"]
    if local:
        lines.append("  this computer only; for phones on the club network start it with "
                     "--host 0.0.0.0 (or this computer's address)")
    else:
        lines.append(f'  put station_url = "http://{shown}:{port}" in [event] and rebuild the '
                     "packet, so the winder labels' QR codes open the element pages here")
    if spec_url:
        lines.append(f"  the spec's station_url is {spec_url}")
    lines.append(f"  organiser PIN: {pin} (also on the organiser's cover page of the sheets)")
    lines.append("  stop with Ctrl+C")
    return lines


def serve(spec: str | Path, *, host: str = DEFAULT_HOST, port: int = DEFAULT_PORT,
          store: str | Path | None = None, model: ModelName = "mom",
          out: TextIO | None = None) -> int:
    """Run the station until interrupted. BuildsheetError for a bad spec or a missing store."""
    import sys

    import uvicorn

    from buildsheet.station.app import make_app
    from buildsheet.station.ledger_api import load_station

    out = out or sys.stdout
    station = load_station(spec, store, model)
    for line in address_lines(host, port, station.pin, station.spec.event.station_url):
        print(line, file=out, flush=True)
    uvicorn.run(make_app(station), host=host, port=port, log_level="warning",
                access_log=False, server_header=False)
    return 0

