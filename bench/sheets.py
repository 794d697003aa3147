"""Benchmark: lay out the sheets PDF of the demo day and of a large day; print the figures.

Targets (issue 12): the whole demo packet under 2 s (bench/packet.py prints that; this script
shows the sheets' share of it), and a 192-kit day under 10 s in total, of which sheet layout was
the largest part. The packet is built once per day (physics included), then only
``render_sheets`` is timed, several runs, median and max.
Run: python bench/sheets.py [kits ...]   (default: the demo, then 192 fan kits)
"""

from __future__ import annotations

import io
import statistics
import sys
import time
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from buildsheet.packet import Packet


def day_packet(kits: int | None) -> Packet:
    """The demo's packet, or the demo designs with ``kits`` fan kits (and the 3 dipoles)."""
    from buildsheet.cli.main import demo_spec_text
    from buildsheet.packet import build_packet
    from buildsheet.spec.reader import read_spec_text

    text = demo_spec_text()
    if kits is not None:
        text = text.replace("count = 10", f"count = {kits}").replace(
            "count = 5", f"count = {max(5, kits // 2)}").replace(
            "count = 12", f"count = {kits + 4}")
    return build_packet(read_spec_text(text, "day.toml"), built_at="2027-03-01T00:00:00Z")


def time_sheets(packet: Packet, runs: int) -> tuple[float, float, float, int, int]:
    """Seconds of the first render_sheets (as in a fresh process), the median wall and CPU
    seconds of ``runs`` more (CPU time is steadier on a busy machine), pages and bytes."""
    from pypdf import PdfReader

    from buildsheet.render.sheets import render_sheets

    times, cpu, data = [], [], b""
    for _ in range(runs + 1):  # the first run also pays for fonts and lazy imports
        buf = io.BytesIO()
        t0, c0 = time.perf_counter(), time.process_time()
        render_sheets(packet, buf)
        times.append(time.perf_counter() - t0)
        cpu.append(time.process_time() - c0)
        data = buf.getvalue()
    pages = len(PdfReader(io.BytesIO(data)).pages)
    return times[0], statistics.median(times[1:]), statistics.median(cpu[1:]), pages, len(data)


def main(argv: list[str]) -> None:
    days: list[int | None] = [int(a) for a in argv] if argv else [None, 192]
    for kits in days:
        t0 = time.perf_counter()
        packet = day_packet(kits)
        t_packet = time.perf_counter() - t0
        runs = 5 if kits is None or kits <= 24 else 2
        first, med, cpu, pages, size = time_sheets(packet, runs)
        name = "demo day" if kits is None else f"{kits} fan kits + 3 dipoles"
        print(f"{name}: {len(packet.design.kits)} kits, {pages} pages, {size / 1024:.0f} KiB")
        print(f"  packet (physics, once)  {t_packet:6.2f} s")
        print(f"  sheets layout           first {first:6.2f} s, then median {med:6.2f} s wall, "
              f"{cpu:6.2f} s CPU ({runs} runs; {cpu / pages * 1000:.1f} ms CPU per page)")
        sys.stdout.flush()


if __name__ == "__main__":
    main(sys.argv[1:])
