"""Packet manifests: classification of elements between revisions and the re-check rule."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from buildsheet.errors import BuildError
from buildsheet.store.manifest import (
    Manifest,
    ManifestElement,
    content_hash,
    diff_manifests,
    file_sha256,
    format_diff,
    manifest_from_dict,
    manifest_to_dict,
    read_manifest,
    write_manifest,
)


def leg_m(f_hz: float) -> float:
    """Half of the 143/f (m, f in MHz) starting length (REFERENCES 11, common practice)."""
    return 143.0 / (f_hz / 1e6) / 2.0


def entry(f_hz: float, leg: float | None = None, tag: str = "") -> ManifestElement:
    leg = leg_m(f_hz) if leg is None else leg
    payload = {"f": f_hz, "leg": leg, "tag": tag}
    return ManifestElement(content_hash(payload), leg, f_hz, leg * 1.03,
                           (f"sheets/{f_hz:.0f}.pdf",))


def manifest(revision: int, elements: dict[str, ManifestElement]) -> Manifest:
    return Manifest("spec" + str(revision), revision, "2024-05-04T09:30:00+00:00", elements)


OLD = manifest(1, {"K03-40m": entry(7.1e6), "K03-80m": entry(3.6e6)})


def test_first_packet_is_all_new() -> None:
    diff = diff_manifests(None, OLD)
    assert diff.new == ("K03-40m", "K03-80m")
    assert diff.changed == diff.unchanged == diff.archived == diff.recheck == ()


def test_adding_a_60m_band_flags_the_detuned_element() -> None:
    """The 40 m leg predicted 5 cm shorter after a 60 m element joins the feed: the wire already
    cut now dips lower. Published rule (REFERENCES 11, common practice): 28 cm of whole dipole
    (14 cm per leg) per 100 kHz at 7.1 MHz, so 5 cm per leg is about 36 kHz."""
    shorter = leg_m(7.1e6) - 0.05
    new = manifest(2, {"K03-40m": entry(7.1e6, shorter), "K03-60m": entry(5.3585e6),
                       "K03-80m": entry(3.6e6, tag="moved the label text")})
    diff = diff_manifests(OLD, new)
    assert diff.new == ("K03-60m",)
    assert diff.changed == ("K03-40m", "K03-80m")
    assert diff.unchanged == () and diff.archived == ()
    assert [r.element_id for r in diff.recheck] == ["K03-40m"]  # 80 m length did not move
    r = diff.recheck[0]
    assert r.shift_hz < 0
    assert abs(r.shift_hz - (-0.05 / 0.14 * 100e3)) <= 2e3
    assert diff.to_print == ("K03-40m", "K03-60m", "K03-80m")
    table = format_diff(diff)
    assert "K03-60m" in table and "re-check on the analyzer" in table


def test_tolerance_is_a_fraction_of_the_predicted_length() -> None:
    base = leg_m(7.1e6)
    just_under = manifest(2, {"K03-40m": entry(7.1e6, base * (1 - 0.0029)),
                              "K03-80m": OLD.elements["K03-80m"]})
    just_over = manifest(2, {"K03-40m": entry(7.1e6, base * (1 - 0.0031)),
                             "K03-80m": OLD.elements["K03-80m"]})
    assert diff_manifests(OLD, just_under).recheck == ()
    assert [r.element_id for r in diff_manifests(OLD, just_over).recheck] == ["K03-40m"]
    assert diff_manifests(OLD, just_under).unchanged == ("K03-80m",)
    assert [r.element_id for r in diff_manifests(OLD, just_under, tolerance=0.001).recheck] == [
        "K03-40m"]


def test_dropped_elements_are_archived() -> None:
    diff = diff_manifests(OLD, manifest(2, {"K03-40m": OLD.elements["K03-40m"]}))
    assert diff.archived == ("K03-80m",) and diff.unchanged == ("K03-40m",)


def test_content_hash_is_canonical() -> None:
    assert content_hash({"a": 1, "b": [1.5, "x"]}) == content_hash({"b": [1.5, "x"], "a": 1})
    assert content_hash({"leg": 10.071}) != content_hash({"leg": 10.072})


def test_write_read_round_trip_atomic(tmp_path: Path) -> None:
    sheet = tmp_path / "sheet.pdf"
    sheet.write_bytes(b"%PDF-1.4 test")
    m = Manifest("abc", 3, "2024-05-04T09:30:00+00:00", OLD.elements,
                 {"sheet.pdf": file_sha256(sheet)})
    path = tmp_path / "manifest.json"
    write_manifest(path, m)
    assert read_manifest(path) == m
    assert sorted(p.name for p in tmp_path.iterdir()) == ["manifest.json", "sheet.pdf"]  # no temp
    vector = tmp_path / "abc.bin"
    vector.write_bytes(b"abc")
    # SHA-256("abc"): the example message in FIPS 180-2, appendix B.1.
    assert file_sha256(vector) == (
        "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad")
    assert manifest_from_dict(json.loads(path.read_text())) == m
    assert manifest_to_dict(m)["elements"]["K03-40m"]["files"] == ["sheets/7100000.pdf"]


def test_missing_and_bad_manifests(tmp_path: Path) -> None:
    assert read_manifest(tmp_path / "none.json") is None
    with pytest.raises(BuildError, match="no manifest"):
        read_manifest(tmp_path / "none.json", missing_ok=False)
    bad = tmp_path / "bad.json"
    bad.write_text("{not json")
    with pytest.raises(BuildError, match="not a valid manifest"):
        read_manifest(bad)
    data = manifest_to_dict(OLD)
    data["elements"]["K03-40m"]["predicted_leg_m"] = -1
    bad.write_text(json.dumps(data))
    with pytest.raises(BuildError, match="predicted_leg_m must be positive"):
        read_manifest(bad)
