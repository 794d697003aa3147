"""The station over HTTP on loopback: forms, CSRF, escaping, limits, concurrency, sweeps.

Outside references: the series RLC resonance f0 = 1/(2 pi sqrt(LC)) (see test_sweep.py), SQLite's
own row count and integrity_check, and the HTML escaping rules of the HTML standard (``<`` must
never come back raw from user text).
"""

from __future__ import annotations

import http.client
import re
import sqlite3
import urllib.parse
from concurrent.futures import ThreadPoolExecutor

import pytest

from buildsheet.cli.main import main
from buildsheet.station.app import MAX_BODY_BYTES

from .conftest import HOSTILE_BUILDER, Browser, LiveStation, error_text
from .test_sweep import F0_HZ, R_OHM, touchstone_text

HOSTILE = '<script>alert("x")</script>&"\'<img src=x onerror=alert(1)>'


def rows(store, element_id: str) -> int:
    with sqlite3.connect(store) as conn:
        return conn.execute("SELECT count(*) FROM measurements WHERE element_id = ?",
                            (element_id,)).fetchone()[0]


def test_leg_id_redirects_and_unknown_names_nearest(live_station: LiveStation) -> None:
    b = Browser(live_station.url)
    status, _text, url = b.get("/e/K02-75m-A")
    assert status == 200 and url.endswith("/e/K02-75m")
    status, text, _url = b.get("/e/K02-57m")
    assert status == 404 and "K02-75m" in error_text(text)


def test_lookup_box_opens_the_element_of_a_scanned_label(live_station: LiveStation) -> None:
    """A barcode scanner types what it reads: a leg ID ("id" labels) or a whole link."""
    b = Browser(live_station.url)
    status, text, _url = b.get("/board")
    assert status == 200 and 'action="/find"' in text
    for typed in ("K02-75m-A", " K02-75m ", "http://192.0.2.7:8080/e/K02-75m",
                  "http://buildsheet.local:8000/K02-75m.html",
                  "K02-75M-A", "HTTP://192.0.2.7:8080/E/K02-75M"):  # as the QR codes hold them
        status, _text, url = b.get("/find?id=" + urllib.parse.quote(typed))
        assert status == 200 and url.endswith("/e/K02-75m"), typed
    # A phone opening a link label's capitals lands on the element page under its own name.
    status, text, url = b.get("/E/K02-75M")
    assert status == 200 and url == live_station.url + "/e/K02-75m" and "K02-75m" in text
    status, text, _url = b.get("/find?id=K02-57m-A")
    assert status == 404 and "K02-75m" in error_text(text)
    status, _text, url = b.get("/find?id=")
    assert status == 200 and url.endswith("/board")


def test_posts_without_the_token_are_refused(live_station: LiveStation) -> None:
    b = Browser(live_station.url)
    before = rows(live_station.store, "K02-40m")
    for path, fields in (("/e/K02-40m/dip", {"dip": "7.1 MHz"}),
                         ("/e/K02-40m/dip", {"dip": "7.1 MHz", "csrf": "0" * 40}),
                         ("/e/K02-40m/trim", {"amount": "5 mm"}),
                         ("/organiser/pin", {"pin": live_station.pin})):
        status, _text, _url = b.post(path, fields)
        assert status == 403, path
    # a token from another browser does not carry over
    other = Browser(live_station.url).token("/e/K02-40m")
    status, _text, _url = b.post("/e/K02-40m/dip", {"dip": "7.1 MHz", "csrf": other})
    assert status == 403
    assert rows(live_station.store, "K02-40m") == before


def test_validation_matches_the_cli(live_station: LiveStation, capsys) -> None:
    b = Browser(live_station.url)
    token = b.token("/e/K02-40m")
    cases = [(["--dip", "7.1"], {"dip": "7.1"}),
             (["--dip", "71 MHz"], {"dip": "71 MHz"}),
             (["--dip", "7.1 MHz", "--swr", "0.5"], {"dip": "7.1 MHz", "swr": "0.5"})]
    for argv, fields in cases:
        code = main(["measure", "K02-40m", *argv, "--store", str(live_station.store)])
        err = capsys.readouterr().err
        cli = [ln for ln in err.splitlines() if ln.startswith("error: ")][-1]
        status, text, _url = b.post("/e/K02-40m/dip", {"csrf": token, **fields})
        assert code == 1 and status == 400
        assert error_text(text) == cli.removeprefix("error: ").removeprefix("buildsheet: ")


def test_hostile_text_comes_back_escaped(live_station: LiveStation) -> None:
    b = Browser(live_station.url)
    token = b.token("/e/K01-75m")
    fields = {"csrf": token, "dip": HOSTILE, "swr": HOSTILE, "r": HOSTILE, "x": HOSTILE,
              "note": HOSTILE}
    status, text, _url = b.post("/e/K01-75m/dip", fields)
    assert status == 400 and "<script>alert" not in text and "onerror=alert(1)>" not in text
    assert "&lt;script&gt;" in text
    status, text, _url = b.post("/e/K01-75m/trim", {"csrf": token, "amount": HOSTILE,
                                                    "direction": HOSTILE, "leg": HOSTILE,
                                                    "note": HOSTILE})
    assert status == 400 and "<script>alert" not in text
    # a note that is recorded comes back escaped in the history, and so does the spec's text
    status, text, _url = b.post("/e/K01-75m/dip", {"csrf": token, "dip": "3.85 MHz",
                                                   "note": HOSTILE})
    assert status == 200 and "<script>alert" not in text and "&lt;img src=x" in text
    status, text, _url = b.get("/board")
    assert "<script>alert" not in text and HOSTILE_BUILDER.split("<")[0] in text


def test_upload_limits_and_types(live_station: LiveStation) -> None:
    b = Browser(live_station.url)
    token = b.token("/e/K02-40m")
    status, text, _url = b.post_file("/e/K02-40m/sweep", {"csrf": token}, "sweep",
                                     b"MZ\x90\x00" * 10, "tool.exe")
    assert status == 400 and "not a sweep file type" in error_text(text)
    # a body declared larger than the limit is refused before it is read
    host, port = live_station.url.removeprefix("http://").split(":")
    conn = http.client.HTTPConnection(host, int(port), timeout=30)
    conn.putrequest("POST", "/e/K02-40m/sweep")
    conn.putheader("Content-Type", "multipart/form-data; boundary=x")
    conn.putheader("Content-Length", str(MAX_BODY_BYTES + 1))
    conn.endheaders()
    response = conn.getresponse()
    assert response.status == 413 and b"at most" in response.read()
    conn.close()


def test_sweep_upload_finds_the_rlc_resonance(live_station: LiveStation) -> None:
    b = Browser(live_station.url)
    token = b.token("/e/K01-40m")
    status, text, url = b.post_file("/e/K01-40m/sweep", {"csrf": token, "note": "rlc"},
                                    "sweep", touchstone_text().encode(), "k01.s1p")
    assert status == 200, error_text(text)
    number = re.search(r"reading=(\d+)", url).group(1)
    with sqlite3.connect(live_station.store) as conn:
        dip = conn.execute("SELECT dip_hz FROM measurements WHERE id = ?", (number,)).fetchone()
        r = conn.execute("SELECT r_ohm FROM reading_extras WHERE measurement_id = ?",
                         (number,)).fetchone()
    assert abs(dip[0] - F0_HZ) < 1e3  # f0 = 1/(2 pi sqrt(LC))
    assert r[0] == pytest.approx(R_OHM, rel=0.01)
    status, svg, _url = b.get(f"/e/K01-40m/sweep/{number}.svg")
    assert status == 200 and svg.lstrip().startswith("<svg") and "polyline" in svg


def test_fifty_concurrent_readings_lose_nothing(live_station: LiveStation) -> None:
    browsers = [Browser(live_station.url) for _ in range(50)]
    tokens = [b.token("/e/K03-60m-us") for b in browsers]
    before = rows(live_station.store, "K03-60m-us")

    def send(i: int) -> int:
        dip = f"{5.33 + 0.0001 * i:.4f} MHz"
        return browsers[i].post("/e/K03-60m-us/dip", {"csrf": tokens[i], "dip": dip})[0]

    with ThreadPoolExecutor(max_workers=50) as pool:
        statuses = list(pool.map(send, range(50)))
    assert statuses == [200] * 50
    assert rows(live_station.store, "K03-60m-us") == before + 50
    with sqlite3.connect(live_station.store) as conn:
        assert conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
        assert conn.execute("PRAGMA journal_mode").fetchone()[0] == "wal"


def test_organiser_needs_the_pin(live_station: LiveStation) -> None:
    b = Browser(live_station.url)
    token = b.token("/organiser")
    status, text, _url = b.post("/organiser/pin", {"csrf": token, "pin": "not it"})
    assert status == 403 and "Wrong PIN" in error_text(text)
    status, _text, _url = b.post("/organiser/calibrate", {"csrf": token, "design": "phonefan",
                                                          "source": "K01-40m"})
    assert status == 403
    status, text, _url = b.post("/organiser/pin", {"csrf": token, "pin": live_station.pin})
    assert status == 200 and "Labels to reprint" in text
    # void a wrong reading: it stays in the history, struck through
    status, text, url = b.post("/e/K03-60m-us/dip", {"csrf": token, "dip": "5.35 MHz",
                                                     "note": "wrong element"})
    number = re.search(r"reading=(\d+)", url).group(1)
    status, text, _url = b.post("/organiser/void", {"csrf": token, "element": "K03-60m-us",
                                                    "number": number, "reason": "mix-up"})
    assert status == 200 and "Reading voided" in text
    status, text, _url = b.get("/e/K03-60m-us")
    assert re.search(rf'<tr class="void"><td>reading {number}</td>', text)
    status, text, _url = b.post("/organiser/void", {"csrf": token, "element": "K03-60m-us",
                                                    "number": number, "reason": "again"})
    assert status == 400 and f"no valid reading {number}" in error_text(text)


def test_pin_on_the_cover_never_on_labels(live_station: LiveStation) -> None:
    from pypdf import PdfReader

    cover = PdfReader(live_station.out / "sheets.pdf").pages[0].extract_text()
    labels = " ".join(p.extract_text() for p in PdfReader(live_station.out / "labels.pdf").pages)
    assert f"Organiser PIN for the build-day station: {live_station.pin}" in " ".join(
        cover.split())
    assert live_station.pin not in labels


def test_killed_mid_write_keeps_every_acknowledged_reading(live_station: LiveStation) -> None:
    """A second station process on the same store is killed (SIGKILL, as a laptop that dies)
    while readings stream in: SQLite's integrity_check passes and every reading that was
    answered is there."""
    import http.client
    import signal
    import socket
    import subprocess
    import sys
    import threading
    import time

    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]
    proc = subprocess.Popen([sys.executable, "-m", "buildsheet", "serve", str(live_station.spec),
                             "--port", str(port), "--model", "closed_form"],
                            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    base = f"http://127.0.0.1:{port}"
    try:
        deadline = time.monotonic() + 60
        while True:
            try:
                Browser(base).get("/board")
                break
            except OSError:
                assert time.monotonic() < deadline and proc.poll() is None, "no station"
                time.sleep(0.1)
        before = rows(live_station.store, "K02-40m")
        acked: list[int] = []
        stop = threading.Event()

        browsers = [Browser(base) for _ in range(8)]
        tokens = [b.token("/e/K02-40m") for b in browsers]

        def phone(b: Browser, token: str) -> None:
            while not stop.is_set() and len(acked) < 400:
                try:
                    status, _text, url = b.post("/e/K02-40m/dip",
                                                {"csrf": token, "dip": "7.05 MHz"})
                except (OSError, http.client.HTTPException):  # killed mid-answer: not acked
                    return
                if status == 200 and "reading=" in url:
                    acked.append(1)

        phones = [threading.Thread(target=phone, args=bt) for bt in zip(browsers, tokens)]
        for t in phones:
            t.start()
        while len(acked) < 40 and time.monotonic() < deadline:
            time.sleep(0.01)
        proc.send_signal(signal.SIGKILL)
        proc.wait(timeout=30)
        stop.set()
        for t in phones:
            t.join(timeout=30)
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait(timeout=30)
    with sqlite3.connect(live_station.store) as conn:
        assert conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
    assert len(acked) >= 40
    assert rows(live_station.store, "K02-40m") - before >= len(acked)


def test_cli_measure_sweep_records_the_rlc_resonance(live_station: LiveStation, tmp_path,
                                                     capsys) -> None:
    """``buildsheet measure ID --sweep FILE``: series RLC at 3.8537 MHz, R 55 ohm (outside
    reference: f0 = 1/(2 pi sqrt(LC)), Z(f0) = R)."""
    import math

    import numpy as np

    f0, r_ohm, inductance = 3.8537e6, 55.0, 20e-6
    capacitance = 1 / ((2 * math.pi * f0) ** 2 * inductance)
    f = np.linspace(3.6e6, 4.1e6, 251)
    w = 2 * math.pi * f
    x = w * inductance - 1 / (w * capacitance)
    sweep = tmp_path / "k01-75m.csv"
    sweep.write_text("freq_MHz,R,X\n" + "".join(f"{a / 1e6:.6f},{r_ohm:.3f},{b:.4f}\n"
                                                for a, b in zip(f, x)), encoding="utf-8")
    before = rows(live_station.store, "K01-75m")
    assert main(["measure", "K01-75m", "--sweep", str(sweep),
                 "--store", str(live_station.store)]) == 0
    out = capsys.readouterr().out
    assert "reactance zero crossing" in out and "R 55.0 ohm" in out
    with sqlite3.connect(live_station.store) as conn:
        dip, r = conn.execute(
            "SELECT m.dip_hz, e.r_ohm FROM measurements m JOIN reading_extras e ON "
            "e.measurement_id = m.id WHERE m.element_id = 'K01-75m' ORDER BY m.id DESC"
        ).fetchone()
    assert rows(live_station.store, "K01-75m") == before + 1
    assert abs(dip - f0) < 1e3 and r == pytest.approx(r_ohm, rel=0.01)
    assert main(["measure", "K01-75m", "--store", str(live_station.store)]) == 1
    assert "exactly one of --dip FREQ or --sweep FILE" in capsys.readouterr().err
