"""``[event] station_url``: checked in the spec, and leading labels to ``/e/<element ID>``.

Outside reference: URL syntax of RFC 3986 (scheme, authority with an optional port 1-65535, no
query or fragment for a base address), read back with the standard library's urllib.parse.
"""

from __future__ import annotations

import urllib.parse

import pytest

from buildsheet.calc.labels import station_record_url
from buildsheet.cli.main import demo_spec_text
from buildsheet.errors import SpecError
from buildsheet.spec.reader import read_spec_text


def spec_with(url: str) -> str:
    return demo_spec_text().replace('layout = "per_kit"',
                                    f'layout = "per_kit"\nstation_url = "{url}"', 1)


def test_good_address_is_kept_without_trailing_slash() -> None:
    design = read_spec_text(spec_with("http://192.168.4.10:8080/"), "club.toml")
    assert design.event.station_url == "http://192.168.4.10:8080"


@pytest.mark.parametrize("url", ["ftp://host", "192.168.4.10:8080", "http://host/?a=1",
                                 "http://host/{element}", "http://host:99999", "http://"])
def test_bad_address_is_one_clear_line(url: str) -> None:
    with pytest.raises(SpecError) as info:
        read_spec_text(spec_with(url), "club.toml")
    [problem] = [p for p in info.value.problems if "station_url" in p.where]
    assert "club.toml" in problem.where and url in problem.message


def test_element_page_url_round_trips() -> None:
    url = station_record_url("http://10.0.0.2:8080", "K03-40m")
    parts = urllib.parse.urlsplit(url)
    assert (parts.scheme, parts.hostname, parts.port) == ("http", "10.0.0.2", 8080)
    assert urllib.parse.unquote(parts.path) == "/e/K03-40m"


def test_serve_refuses_a_bad_port_and_prints_the_address(capsys) -> None:
    from buildsheet.cli.main import main
    from buildsheet.station.server import address_lines

    with pytest.raises(SystemExit) as info:
        main(["serve", "club.toml", "--port", "70000"])
    assert info.value.code == 2 and "65535" in capsys.readouterr().err
    local = "\n".join(address_lines("127.0.0.1", 8080, "123456", None))
    assert "this computer only" in local and "--host" in local
    lan = "\n".join(address_lines("192.168.4.10", 8080, "123456", None))
    assert 'station_url = "http://192.168.4.10:8080"' in lan
