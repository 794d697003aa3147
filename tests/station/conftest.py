"""A live station on loopback for the station tests: a small spec whose labels point at it, its
packet built once, uvicorn serving it from a thread on a port chosen by the OS."""

from __future__ import annotations

import html
import http.cookiejar
import re
import socket
import threading
import time
import urllib.error
import urllib.parse
import urllib.request
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path

import pytest

from buildsheet.cli.main import demo_spec_text, main

HOSTILE_BUILDER = 'Ada <script>alert("b")</script>'


def small_station_spec(folder: Path, station_url: str) -> Path:
    """The demo spec cut to two fan kits and one 60 m kit, labels leading to ``station_url``."""
    text = demo_spec_text()
    text = re.sub(r"count = 10\nbuilders = \[.*?\]",
                  f"count = 2\nbuilders = ['{HOSTILE_BUILDER}', \"Ben\"]", text, flags=re.DOTALL)
    text = re.sub(r"count = 3\nbuilders = \[.*?\]", 'count = 1\nbuilders = ["Kim"]', text,
                  flags=re.DOTALL)
    text = text.replace('layout = "per_kit"',
                        f'layout = "per_kit"\nstation_url = "{station_url}"', 1)
    text = re.sub(r'^code = "id" .*$', 'code = "link"', text, count=1, flags=re.MULTILINE)
    assert 'code = "link"' in text
    folder.mkdir(parents=True, exist_ok=True)
    path = folder / "club.toml"
    path.write_text(text, encoding="utf-8")
    return path


@dataclass(frozen=True)
class LiveStation:
    url: str
    spec: Path
    out: Path
    store: Path
    pin: str


class Browser:
    """A minimal HTTP client with cookies (stdlib), following redirects like a browser."""

    def __init__(self, base: str):
        self.base = base
        self.jar = http.cookiejar.CookieJar()
        self.opener = urllib.request.build_opener(urllib.request.HTTPCookieProcessor(self.jar))

    def request(self, path: str, data: bytes | None = None,
                headers: dict[str, str] | None = None) -> tuple[int, str, str]:
        req = urllib.request.Request(self.base + path, data=data, headers=headers or {})
        try:
            with self.opener.open(req, timeout=60) as r:
                return r.status, r.read().decode("utf-8", "replace"), r.geturl()
        except urllib.error.HTTPError as e:
            return e.code, e.read().decode("utf-8", "replace"), e.geturl()

    def get(self, path: str) -> tuple[int, str, str]:
        return self.request(path)

    def post(self, path: str, fields: dict[str, str]) -> tuple[int, str, str]:
        body = urllib.parse.urlencode(fields).encode()
        return self.request(path, body, {"Content-Type": "application/x-www-form-urlencoded"})

    def post_file(self, path: str, fields: dict[str, str], name: str, data: bytes,
                  filename: str) -> tuple[int, str, str]:
        boundary = "----buildsheet-test-boundary"
        parts = [f"--{boundary}\r\nContent-Disposition: form-data; name=\"{k}\"\r\n\r\n{v}\r\n"
                 .encode() for k, v in fields.items()]
        parts.append(f"--{boundary}\r\nContent-Disposition: form-data; name=\"{name}\"; "
                     f"filename=\"{filename}\"\r\nContent-Type: application/octet-stream\r\n\r\n"
                     .encode() + data + b"\r\n")
        body = b"".join(parts) + f"--{boundary}--\r\n".encode()
        return self.request(path, body,
                            {"Content-Type": f"multipart/form-data; boundary={boundary}"})

    def token(self, path: str) -> str:
        _status, text, _url = self.get(path)
        found = re.search(r'name="csrf" value="([0-9a-f]+)"', text)
        assert found, f"no form token on {path}"
        return found.group(1)


def error_text(page: str) -> str:
    """The error paragraph of a page, unescaped."""
    found = re.search(r'<p class="error"[^>]*>(.*?)</p>', page, flags=re.DOTALL)
    return html.unescape(found.group(1)) if found else ""


def serve_in_thread(app: object, sock: socket.socket) -> tuple[object, threading.Thread]:
    import uvicorn

    server = uvicorn.Server(uvicorn.Config(app, log_level="warning", access_log=False))
    thread = threading.Thread(target=server.run, kwargs={"sockets": [sock]}, daemon=True)
    thread.start()
    deadline = time.monotonic() + 30
    while not server.started:
        if time.monotonic() > deadline or not thread.is_alive():
            raise RuntimeError("the station did not start")
        time.sleep(0.02)
    return server, thread


@pytest.fixture(scope="session")
def live_station(tmp_path_factory: pytest.TempPathFactory) -> Iterator[LiveStation]:
    from buildsheet.station.app import make_app
    from buildsheet.station.ledger_api import load_station

    sock = socket.socket(socket.AF_INET, socket.SOCK_STREAM)
    sock.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)
    sock.bind(("127.0.0.1", 0))
    url = f"http://127.0.0.1:{sock.getsockname()[1]}"
    folder = tmp_path_factory.mktemp("station")
    spec = small_station_spec(folder, url)
    out = folder / "out"
    assert main(["packet", str(spec), "-o", str(out), "--model", "closed_form"]) == 0
    station = load_station(spec, model="closed_form")
    server, thread = serve_in_thread(make_app(station), sock)
    try:
        yield LiveStation(url, spec, out, station.store_path, station.pin)
    finally:
        server.should_exit = True  # type: ignore[attr-defined]
        thread.join(timeout=10)
        sock.close()
