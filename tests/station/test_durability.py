"""The station's commits reach the database file itself within its sync window.

With WAL and ``synchronous = NORMAL`` a commit first lives in the write-ahead log; only a
checkpoint writes it (after a disk flush of the log) into the database file (SQLite
documentation, "Write-Ahead Logging", "Checkpointing"). A copy of the database file alone, as
a power cut would leave it if the log were lost, must hold the reading once the window is over.
"""

from __future__ import annotations

import shutil
import sqlite3
import time
from pathlib import Path

import pytest

from buildsheet.cli.main import main
from buildsheet.station import ledger_api as api
from tests.station.conftest import small_station_spec


def readings_in_file_alone(store: Path, copy: Path, note: str) -> int | None:
    """Readings with ``note`` in a copy of the database file without its log (None: the copy
    caught a checkpoint half-way; try again)."""
    for suffix in ("", "-wal", "-shm"):
        Path(f"{copy}{suffix}").unlink(missing_ok=True)
    shutil.copyfile(store, copy)
    try:
        with sqlite3.connect(copy) as conn:
            return int(conn.execute("SELECT count(*) FROM measurements WHERE note = ?",
                                    (note,)).fetchone()[0])
    except sqlite3.DatabaseError:
        return None


def test_a_reading_reaches_the_database_file_within_the_window(
        tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(api, "DURABLE_WITHIN_S", 0.5)
    spec = small_station_spec(tmp_path, "http://127.0.0.1:9")
    assert main(["packet", str(spec), "-o", str(tmp_path / "out"), "--model",
                 "closed_form"]) == 0
    station = api.load_station(spec, model="closed_form")
    with sqlite3.connect(station.store_path) as conn:
        element_id, f0 = conn.execute(
            "SELECT id, design_frequency_hz FROM elements ORDER BY id").fetchone()
    copy = tmp_path / "file-alone.sqlite"
    try:
        api.record_dip(station, element_id, f"{f0 * 0.99 / 1e3:.1f} kHz", note="durable")
        assert readings_in_file_alone(station.store_path, copy, "durable") == 0  # log only
        deadline = time.monotonic() + 10 * api.DURABLE_WITHIN_S
        found = None
        while time.monotonic() < deadline and found != 1:
            time.sleep(0.05)
            found = readings_in_file_alone(station.store_path, copy, "durable")
        assert found == 1
    finally:
        station.stores.close_all()
