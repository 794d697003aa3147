"""Fault injection: packet builds killed with SIGKILL at random moments.

After every kill the previous packet must be complete: every file the manifest lists exists
with the SHA-256 it records, the PDFs open with pypdf, the manifest parses, and the record
store passes SQLite's own ``PRAGMA integrity_check``. Delays come from a seeded generator.
"""

from __future__ import annotations

import hashlib
import os
import random
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest
from pypdf import PdfReader
from test_build_records import small_spec  # same small spec (tests/ is on sys.path)

from buildsheet.build import default_store
from buildsheet.store import ledger as rec
from buildsheet.store.files import recover
from buildsheet.store.manifest import read_manifest

RUNS = 20
SEED = 20270313


def _command(spec: Path, out: Path) -> list[str]:
    return [sys.executable, "-m", "buildsheet", "packet", str(spec), "-o", str(out),
            "--model", "closed_form"]


def _env(run: int) -> dict[str, str]:
    return dict(os.environ, SOURCE_DATE_EPOCH=str(1_800_000_000 + 60 * run))


def assert_complete_packet(out: Path, store: Path) -> int:
    """Check the packet folder and the store; return the packet's revision."""
    manifest = read_manifest(out / "manifest.json", missing_ok=False)
    assert manifest is not None and manifest.files
    for name, digest in manifest.files.items():
        data = (out / name).read_bytes()
        assert hashlib.sha256(data).hexdigest() == digest, name
        if name.endswith(".pdf"):
            assert len(PdfReader(out / name).pages) > 0  # pypdf parses it
    assert {"sheets.pdf", "labels.pdf", "site/index.html"} <= set(manifest.files)
    with rec.open_store(store, create=False) as st:
        assert rec.integrity_check(st) == ["ok"]  # SQLite's own check plus foreign keys
    return manifest.revision


def test_killed_builds_leave_the_previous_packet_intact(tmp_path: Path) -> None:
    rng = random.Random(SEED)
    folder = tmp_path / "club"
    spec = small_spec(folder)
    heights = ('apex_height = "7 m"', 'apex_height = "7.5 m"')
    out = folder / "out"
    store = default_store(spec)
    durations = []
    for run in (0, 100):  # two whole builds: the first also compiles and warms the imports
        start = time.monotonic()
        done = subprocess.run(_command(spec, out), env=_env(run), capture_output=True,
                              text=True, timeout=120, check=False)
        assert done.returncode == 0, done.stderr
        durations.append(time.monotonic() - start)
    full = min(durations)
    assert_complete_packet(out, store)
    killed_midway = attempts = 0
    text = spec.read_text(encoding="utf-8")
    # Kill at a random instant inside a build; a machine whose speed changes under load may let
    # a build finish first, so keep going (up to twice the runs) until RUNS builds were killed.
    while killed_midway < RUNS and attempts < 2 * RUNS:
        attempts += 1
        # Alternate the mast height so each build changes every element (store writes too).
        spec.write_text(text.replace(heights[0], heights[attempts % 2]), encoding="utf-8")
        proc = subprocess.Popen(_command(spec, out), env=_env(attempts),
                                stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        try:
            time.sleep(rng.uniform(0.05, full * 0.95))
            if proc.poll() is None:
                killed_midway += 1
                proc.send_signal(signal.SIGKILL)
        finally:
            proc.wait(timeout=120)
        recover(out)  # what the next build does first
        assert_complete_packet(out, store)
        leftovers = [p.name for p in folder.iterdir() if p.name.startswith(".out.")]
        assert leftovers == [], leftovers  # recover() removed the dead build's staging folder
    assert killed_midway >= RUNS // 2, f"only {killed_midway} of {attempts} kills hit a running build"
    # The next ordinary build still works and bumps the revision past the surviving packet.
    spec.write_text(text.replace(heights[0], 'apex_height = "8 m"'), encoding="utf-8")
    before = assert_complete_packet(out, store)
    done = subprocess.run(_command(spec, out), env=_env(99), capture_output=True, text=True,
                          timeout=120, check=False)
    assert done.returncode == 0, done.stderr
    assert assert_complete_packet(out, store) == before + 1


@pytest.mark.parametrize("moment", ["after_backup", "after_swap"])
def test_recover_after_a_kill_inside_the_swap(tmp_path: Path, moment: str) -> None:
    """The two instants inside swap_in, recreated on disk: old folder moved aside but new not
    yet in place (restore the old one), and new in place with the backup left (drop it)."""
    from buildsheet.store.files import _backup_name

    out = tmp_path / "out"
    backup = _backup_name(out)
    backup.mkdir()
    (backup / "old.txt").write_text("old")
    if moment == "after_swap":
        out.mkdir()
        (out / "new.txt").write_text("new")
    recover(out)
    assert not backup.exists()
    expected = "old.txt" if moment == "after_backup" else "new.txt"
    assert [p.name for p in out.iterdir()] == [expected]
