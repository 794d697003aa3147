"""End to end through the CLI: exit codes, messages without tracebacks, no partial files."""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import pytest
from pypdf import PdfReader

from buildsheet.cli.main import main
from buildsheet.spec.units import format_both


def test_sheets_show_every_cut_length(demo_packet):
    text = "\n".join(page.extract_text() for page in PdfReader(demo_packet.out_dir / "sheets.pdf").pages)
    flat = " ".join(text.split())
    units = demo_packet.packet.design.event.units
    for entry in demo_packet.packet.entries:
        assert entry.element_id in flat
        assert format_both(entry.cut.cut_leg_m, units) in flat
    assert "Safety cautions" in flat and "power line" in flat


def test_sheets_have_bookmarks(demo_packet):
    reader = PdfReader(demo_packet.out_dir / "sheets.pdf")
    titles = [o.title for o in reader.outline if not isinstance(o, list)]
    assert any("Kit K01" in t for t in titles)


def test_manifest_lists_every_element(demo_packet):
    import json
    manifest = json.loads((demo_packet.out_dir / "manifest.json").read_text())
    assert set(manifest["elements"]) == {e.element_id for e in demo_packet.packet.entries}
    assert manifest["spec_hash"] == demo_packet.packet.design.spec_hash


def test_check_prints_cut_table(demo_spec, capsys):
    assert main(["check", str(demo_spec), "--model", "closed_form"]) == 0
    out = capsys.readouterr().out
    assert "CUT each leg" in out and "75m" in out and "60m-us" in out
    # the demo: 23 elements, 46 labels on its stock, each code the leg ID: version 1 symbols
    # (alphanumeric mode), six to a label, the shorter IDs at level H
    assert ("labels: 46 on stock sheet-letter; each QR code holds the leg ID (labels.code = "
            "'id'), 6 copies per label, error correction Q/H") in out


def _write(tmp_path: Path, text: str) -> Path:
    p = tmp_path / "club.toml"
    p.write_text(text, encoding="utf-8")
    return p


@pytest.mark.parametrize("edit, words", [
    (lambda t: t + "\n[oops\n", "not valid TOML"),
    (lambda t: t.replace("apex_height =", "apex_heigth =", 1), "did you mean 'apex_height'"),
    (lambda t: t.replace('apex_height = "7 m"', 'apex_height = "0 m"', 1), "greater than zero"),
    (lambda t: t.replace('end_height = "2 m"', 'end_height = "9 m"', 1), "above the apex"),
    (lambda t: t.replace('band = "40m"', 'band = "42m"', 1), "'42m' is not allowed"),
    (lambda t: t.replace('wire = "awg16-pvc"\n', "", 1), "missing"),
])
def test_bad_spec_exits_1_without_partial_files(tmp_path, demo_spec, capsys, edit, words):
    spec = _write(tmp_path, edit(demo_spec.read_text()))
    out = tmp_path / "out"
    assert main(["packet", str(spec), "-o", str(out), "--model", "closed_form"]) == 1
    err = capsys.readouterr().err
    assert "club.toml" in err and words in err and "Traceback" not in err
    assert not out.exists()
    assert [p.name for p in tmp_path.iterdir()] == ["club.toml"]


def test_leg_too_short_for_end_height(tmp_path, demo_spec, capsys):
    # A 40 m leg (about 10 m) cannot fall from a 30 m apex to a 2 m end height.
    text = demo_spec.read_text().replace('apex_height = "7 m"', 'apex_height = "14 m"', 1)
    spec = _write(tmp_path, text)
    assert main(["packet", str(spec), "-o", str(tmp_path / "o"), "--model", "closed_form"]) == 1
    err = capsys.readouterr().err
    assert "cannot fall" in err and "phonefan" in err


def test_unwritable_output_folder(tmp_path, demo_spec, capsys):
    if os.geteuid() == 0:
        target = Path("/proc/buildsheet-out")  # not writable even for root
    else:
        locked = tmp_path / "locked"
        locked.mkdir(mode=0o500)
        target = locked / "out"
    assert main(["packet", str(demo_spec), "-o", str(target), "--model", "closed_form"]) == 1
    err = capsys.readouterr().err
    assert "cannot write the output folder" in err


def test_usage_error_exits_2():
    with pytest.raises(SystemExit) as info:
        main(["packet"])
    assert info.value.code == 2


def test_python_dash_m_demo(tmp_path):
    env = dict(os.environ, SOURCE_DATE_EPOCH="1800000000")
    run = subprocess.run([sys.executable, "-m", "buildsheet", "demo", "-o", "out/demo"],
                         capture_output=True, text=True, env=env, timeout=300, cwd=tmp_path,
                         check=False)
    assert run.returncode == 0, run.stderr
    assert (tmp_path / "out" / "demo" / "sheets.pdf").stat().st_size > 10_000
    assert (tmp_path / "out" / "demo" / "labels.pdf").stat().st_size > 10_000
    # The spec and its record store sit in the working folder, not in the disposable packet.
    assert (tmp_path / "demo.toml").is_file() and (tmp_path / "demo.records.sqlite").is_file()
    assert not list((tmp_path / "out").rglob("*.sqlite"))


def test_same_spec_gives_identical_pdfs(tmp_path, demo_spec):
    from buildsheet.build import build
    # Each from a fresh store: a shared store would rightly continue the label sheet.
    a = build(demo_spec, tmp_path / "a", built_at="2027-01-01T00:00:00Z", model="closed_form",
              store_path=tmp_path / "a.records.sqlite")
    b = build(demo_spec, tmp_path / "b", built_at="2027-01-01T00:00:00Z", model="closed_form",
              store_path=tmp_path / "b.records.sqlite")
    for name in ("sheets.pdf", "labels.pdf"):
        assert (a.out_dir / name).read_bytes() == (b.out_dir / name).read_bytes()


def test_record_commands_are_registered(capsys):
    """measure, trim, export and import are subcommands of the one entry point (argparse)."""
    for command in ("cut", "measure", "trim", "void", "history", "export", "import"):
        with pytest.raises(SystemExit) as info:
            main([command, "--help"])
        assert info.value.code == 0
        assert f"usage: buildsheet {command}" in capsys.readouterr().out


def test_packet_prints_changes_and_keeps_the_store_beside_the_spec(tmp_path, demo_spec, capsys):
    spec = tmp_path / "club.toml"
    spec.write_text(demo_spec.read_text(), encoding="utf-8")
    out = tmp_path / "out"
    assert main(["packet", str(spec), "-o", str(out), "--model", "closed_form"]) == 0
    first = capsys.readouterr().out
    assert "packet revision 1" in first and "K01-40m" in first and "new" in first
    assert (tmp_path / "club.records.sqlite").is_file()
    assert not list(out.rglob("*.sqlite"))
    assert (out / "site" / "index.html").is_file()
    other = tmp_path / "elsewhere.sqlite"
    assert main(["packet", str(spec), "-o", str(out), "--model", "closed_form",
                 "--store", str(other), "--changed-only"]) == 0
    second = capsys.readouterr().out
    assert other.is_file() and "revision 1 (previous 1)" in second
    assert "nothing changed" in second
    assert sorted(p.name for p in out.iterdir()) == ["bom", "labels.pdf", "manifest.json",
                                                     "sheets.pdf", "site"]
