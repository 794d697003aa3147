"""Benchmark (issue 11): 500 readings from 50 concurrent clients against the station on loopback.

Builds the demo packet (closed-form model, to keep set-up short) in a temporary folder, starts
``buildsheet serve`` there as a separate process bound to 127.0.0.1, lets 50 client threads
(each its own browser: cookie, form token) post 10 dips each to the element pages, and prints
p50/p95 latency of a reading (the POST and the element page it redirects to, as a phone sees
it) and the rows stored. Target on the 2-core machine: p95 under 100 ms, 500 rows.
Run: ``python bench/station.py``. Traffic goes to 127.0.0.1 only; every loop is bounded.
"""

from __future__ import annotations

import http.client
import math
import os
import re
import socket
import sqlite3
import statistics
import subprocess
import sys
import tempfile
import threading
import time
import urllib.parse
import urllib.request
from pathlib import Path

CLIENTS = 50
PER_CLIENT = 10
START_TIMEOUT_S = 120.0


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


def wait_up(url: str, proc: subprocess.Popen[bytes]) -> None:
    deadline = time.monotonic() + START_TIMEOUT_S
    while time.monotonic() < deadline:
        if proc.poll() is not None:
            raise SystemExit(f"the station exited with code {proc.returncode}")
        try:
            with urllib.request.urlopen(url + "/board", timeout=2):
                return
        except OSError:
            time.sleep(0.2)
    raise SystemExit("the station did not start in time")


def client(host: str, port: int, elements: list[tuple[str, float]], index: int,
           latencies: list[tuple[float, float]], failures: list[str]) -> None:
    """One phone: a kept-alive connection and its cookie; 10 dips, each followed by the element
    page the POST redirects to. Records (POST latency, POST + page latency), seconds."""
    conn = http.client.HTTPConnection(host, port, timeout=30)
    first = elements[index % len(elements)][0]
    conn.request("GET", f"/e/{first}")
    r = conn.getresponse()
    cookie = (r.getheader("Set-Cookie") or "").split(";")[0]
    token = re.search(r'name="csrf" value="([0-9a-f]+)"', r.read().decode()).group(1)
    for k in range(PER_CLIENT):
        element_id, f0 = elements[(index + k * CLIENTS) % len(elements)]
        body = urllib.parse.urlencode({"csrf": token, "dip": f"{f0 * 0.99 / 1e3:.1f} kHz",
                                       "swr": "1.5", "note": f"bench {index}.{k}"})
        start = time.perf_counter()
        try:
            conn.request("POST", f"/e/{element_id}/dip", body,
                         {"Content-Type": "application/x-www-form-urlencoded",
                          "Cookie": cookie})
            r = conn.getresponse()
            r.read()
            posted = time.perf_counter()
            where = r.getheader("Location") or ""
            if r.status != 303 or "reading=" not in where:
                failures.append(f"{element_id}: HTTP {r.status}, no reading recorded")
                continue
            conn.request("GET", where, headers={"Cookie": cookie})
            page = conn.getresponse()
            page.read()
            if page.status != 200:
                failures.append(f"{element_id}: page HTTP {page.status}")
        except OSError as exc:
            failures.append(str(exc))
            continue
        latencies.append((posted - start, time.perf_counter() - start))
    conn.close()


def percentiles(values: list[float]) -> tuple[float, float, float]:
    """p50, p95 and max, milliseconds (nearest-rank)."""
    ms = sorted(v * 1000 for v in values)
    return (statistics.median(ms), ms[max(0, math.ceil(0.95 * len(ms)) - 1)], ms[-1])


def main() -> None:
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        spec = folder / "demo.toml"
        from buildsheet.cli.main import demo_spec_text

        spec.write_text(demo_spec_text(), encoding="utf-8")
        subprocess.run([sys.executable, "-m", "buildsheet", "packet", str(spec), "-o",
                        str(folder / "out"), "--model", "closed_form"], check=True,
                       stdout=subprocess.DEVNULL)
        store = folder / "demo.records.sqlite"
        with sqlite3.connect(store) as conn:
            elements = [(r[0], r[1]) for r in conn.execute(
                "SELECT id, design_frequency_hz FROM elements ORDER BY id")]
        port = free_port()
        base = f"http://127.0.0.1:{port}"
        proc = subprocess.Popen([sys.executable, "-m", "buildsheet", "serve", str(spec),
                                 "--port", str(port), "--model", "closed_form"],
                                stdout=subprocess.DEVNULL)
        try:
            wait_up(base, proc)
            latencies: list[tuple[float, float]] = []
            failures: list[str] = []
            threads = [threading.Thread(target=client, args=("127.0.0.1", port, elements, i,
                                                             latencies, failures))
                       for i in range(CLIENTS)]
            load = os.getloadavg()
            wall = time.perf_counter()
            for t in threads:
                t.start()
            for t in threads:
                t.join(timeout=300)
            wall = time.perf_counter() - wall
        finally:
            proc.terminate()
            proc.wait(timeout=30)
        with sqlite3.connect(store) as conn:
            stored = conn.execute("SELECT count(*) FROM measurements").fetchone()[0]
            check = conn.execute("PRAGMA integrity_check").fetchone()[0]
    post = percentiles([a for a, _b in latencies])
    full = percentiles([b for _a, b in latencies])
    print(f"machine: {os.cpu_count()} cores, load average {load[0]:.1f} when the readings "
          "started (other work on the machine stretches the figures)")
    print(f"station on loopback: {CLIENTS} clients x {PER_CLIENT} readings, "
          f"{len(elements)} elements, wall {wall:.2f} s ({len(latencies) / wall:.0f} readings/s)")
    print(f"reading stored (POST to 303): p50 {post[0]:.1f} ms, p95 {post[1]:.1f} ms, "
          f"max {post[2]:.1f} ms (target p95 < 100 ms)")
    print(f"reading and its page shown (POST + GET): p50 {full[0]:.1f} ms, p95 {full[1]:.1f} ms, "
          f"max {full[2]:.1f} ms")
    print(f"rows stored: {stored} of {CLIENTS * PER_CLIENT} (target {CLIENTS * PER_CLIENT}); "
          f"integrity_check {check}; errors {len(failures)}"
          + (f" (first: {failures[0]})" if failures else ""))


if __name__ == "__main__":
    main()
