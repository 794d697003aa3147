"""Output folder safety: a packet replaces only an absent, empty or previous-packet folder,
never the spec, the record store or the current folder; a kill inside the swap loses nothing."""

from __future__ import annotations

import json
import os
import subprocess
import sys
import textwrap
from pathlib import Path

import pytest
from test_build_records import small_spec  # same small spec (tests/ is on sys.path)

from buildsheet.cli.main import main
from buildsheet.errors import BuildError
from buildsheet.store.files import check_output_folder, exchange, recover

MANIFEST = {"format": "buildsheet-manifest/1", "spec_hash": "0" * 64, "revision": 1,
            "built_at": "2027-03-01T00:00:00Z", "elements": {},
            "files": {"sheets.pdf": "x", "site/index.html": "y"}, "spec": "club.toml",
            "notes": []}


def fake_packet(folder: Path) -> Path:
    """A folder laid out like a previous packet: manifest plus exactly the files it lists."""
    (folder / "site").mkdir(parents=True)
    (folder / "sheets.pdf").write_bytes(b"%PDF old")
    (folder / "site" / "index.html").write_text("old")
    (folder / "manifest.json").write_text(json.dumps(MANIFEST))
    return folder


def snapshot(folder: Path) -> dict[str, bytes]:
    return {p.relative_to(folder).as_posix(): p.read_bytes()
            for p in sorted(folder.rglob("*")) if p.is_file()}


def test_absent_empty_and_previous_packet_folders_are_accepted(tmp_path):
    assert check_output_folder(tmp_path / "new") == tmp_path / "new"
    (tmp_path / "empty").mkdir()
    assert check_output_folder(tmp_path / "empty") == tmp_path / "empty"
    assert check_output_folder(fake_packet(tmp_path / "old")) == tmp_path / "old"


@pytest.mark.parametrize("setup, words", [
    (lambda d: (d / "holiday.jpg").write_bytes(b"x"), "holds no packet"),
    (lambda d: (fake_packet(d), (d / "notes.txt").write_text("mine")), "notes.txt"),
    (lambda d: (fake_packet(d), (d / "mine").mkdir(), (d / "mine" / "a").write_text("a")),
     "mine/"),
    (lambda d: (d / "manifest.json").write_text("{not json"), "holds no packet"),
    (lambda d: (d / "manifest.json").write_text('{"format": "other/1", "files": {}}'),
     "holds no packet"),
])
def test_folders_holding_other_files_are_refused_and_untouched(tmp_path, setup, words):
    out = tmp_path / "out"
    out.mkdir()
    setup(out)
    before = snapshot(out)
    with pytest.raises(BuildError) as info:
        check_output_folder(out)
    assert words in str(info.value)
    assert snapshot(out) == before


def test_a_file_is_not_an_output_folder(tmp_path):
    (tmp_path / "out").write_text("x")
    with pytest.raises(BuildError, match="not a folder"):
        check_output_folder(tmp_path / "out")


def test_spec_folder_its_parent_and_the_store_are_refused(tmp_path):
    spec = small_spec(tmp_path / "club")
    store = tmp_path / "club" / "club.records.sqlite"
    for out in (spec.parent, tmp_path):
        with pytest.raises(BuildError, match="holds the spec"):
            check_output_folder(out, (("spec", spec), ("record store", store)))
    with pytest.raises(BuildError, match="holds the record store"):
        check_output_folder(tmp_path / "elsewhere",
                            (("spec", spec), ("record store", tmp_path / "elsewhere" / "r.db")))


def test_current_folder_is_refused(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    for out in (".", "..", str(tmp_path)):
        with pytest.raises(BuildError, match="current folder"):
            check_output_folder(out)


def test_packet_into_the_spec_folder_keeps_spec_and_store(tmp_path, capsys):
    """Regression: `packet -o DIR` with DIR the spec's folder deleted the spec and its store."""
    spec = small_spec(tmp_path / "club")
    store = spec.parent / "club.records.sqlite"
    store.write_bytes(b"not touched")
    before = snapshot(spec.parent)
    code = main(["packet", str(spec), "-o", str(spec.parent), "--model", "closed_form"])
    err = capsys.readouterr().err
    assert code == 1 and "holds the spec" in err and "Traceback" not in err
    assert err.count("error:") == 1
    assert snapshot(spec.parent) == before


def test_packet_dash_o_dot_is_a_clear_error(tmp_path, monkeypatch, capsys):
    """Regression: `-o .` crashed."""
    spec = small_spec(tmp_path / "club")
    work = tmp_path / "work"
    work.mkdir()
    monkeypatch.chdir(work)
    assert main(["packet", str(spec), "-o", ".", "--model", "closed_form"]) == 1
    err = capsys.readouterr().err
    assert "current folder" in err and "Traceback" not in err
    assert list(work.iterdir()) == []


def test_packet_refuses_a_folder_of_other_files(tmp_path, capsys):
    """Regression: `packet -o DIR` deleted whatever DIR held and exited 0."""
    spec = small_spec(tmp_path / "club")
    out = tmp_path / "photos"
    out.mkdir()
    (out / "field-day.jpg").write_bytes(b"\xff\xd8 a photo")
    assert main(["packet", str(spec), "-o", str(out), "--model", "closed_form"]) == 1
    assert "holds no packet" in capsys.readouterr().err
    assert snapshot(out) == {"field-day.jpg": b"\xff\xd8 a photo"}


def test_previous_packet_is_replaced(tmp_path, capsys):
    spec = small_spec(tmp_path / "club")
    out = tmp_path / "out"
    for _ in range(2):
        assert main(["packet", str(spec), "-o", str(out), "--model", "closed_form"]) == 0
    capsys.readouterr()
    assert (out / "manifest.json").is_file() and (out / "labels.pdf").is_file()
    assert [p.name for p in tmp_path.iterdir() if p.name.startswith(".out")] == []


# --------------------------------------------------------------------------- kills in the swap

CHILD = textwrap.dedent("""
    import os, shutil, signal, sys
    from pathlib import Path
    from buildsheet.store import files

    out, moment = Path(sys.argv[1]), sys.argv[2]
    staging = files.prepare_staging(out)
    (staging / "new.txt").write_text("new")

    def die(*args, **kwargs):
        os.kill(os.getpid(), signal.SIGKILL)

    if moment == "after_exchange":
        files.shutil = type("S", (), {"rmtree": staticmethod(die),
                                      "copytree": shutil.copytree, "copy2": shutil.copy2})
    else:  # the fallback path without an atomic exchange: die between its two renames
        files.exchange = lambda a, b: False
        real = os.replace
        calls = []
        def replace(a, b):
            calls.append(a)
            real(a, b)
            if len(calls) == 1:
                die()
        files.os = type("O", (), {"replace": staticmethod(replace)})
    files.swap_in(staging, out)
""")


@pytest.mark.parametrize("moment", ["after_exchange", "between_renames"])
def test_a_kill_inside_the_swap_leaves_one_complete_folder(tmp_path, moment):
    if moment == "after_exchange" and not exchange_available(tmp_path):
        pytest.skip("this system offers no atomic folder exchange (renameat2)")
    out = tmp_path / "out"
    out.mkdir()
    (out / "old.txt").write_text("old")
    run = subprocess.run([sys.executable, "-c", CHILD, str(out), moment], timeout=60,
                         capture_output=True, text=True, check=False)
    assert run.returncode == -9, run.stderr  # killed by SIGKILL inside the swap
    if moment == "after_exchange":
        assert [p.name for p in out.iterdir()] == ["new.txt"]  # never missing, already new
    recover(out)  # what the next command does first
    names = sorted(p.name for p in tmp_path.iterdir())
    assert names == ["out"], names  # no staging folder or backup left behind
    expected = "new.txt" if moment == "after_exchange" else "old.txt"
    assert [p.name for p in out.iterdir()] == [expected]


def exchange_available(tmp_path: Path) -> bool:
    a, b = tmp_path / "probe-a", tmp_path / "probe-b"
    a.mkdir()
    b.mkdir()
    (a / "x").write_text("")
    try:
        done = exchange(a, b)
    except OSError:
        done = False
    ok = done and (b / "x").exists() and not (a / "x").exists()
    for d in (a, b):
        for f in d.iterdir():
            f.unlink()
        d.rmdir()
    return ok


def test_exchange_swaps_two_folders(tmp_path):
    if not exchange_available(tmp_path):
        pytest.skip("this system offers no atomic folder exchange (renameat2)")
    a, b = tmp_path / "a", tmp_path / "b"
    a.mkdir()
    b.mkdir()
    (a / "1").write_text("a")
    (b / "2").write_text("b")
    assert exchange(a, b)
    assert [p.name for p in a.iterdir()] == ["2"] and [p.name for p in b.iterdir()] == ["1"]
    assert os.path.isdir(a)
