"""Element record store, trim advice and the record commands (measure, trim, export, import)."""

from __future__ import annotations

import json
import sqlite3
import subprocess
import sys
from dataclasses import replace
from datetime import UTC, datetime, timedelta
from pathlib import Path

import pytest

from buildsheet.calc import asbuilt
from buildsheet.cli.main import main as run
from buildsheet.cli.records import find_store
from buildsheet.errors import RecordError
from buildsheet.store import exchange
from buildsheet.store import ledger as rec

T0 = datetime(2024, 5, 4, 9, 30, tzinfo=UTC)


def dipole_leg_m(f_hz: float) -> float:
    """Half of the 143/f (m, f in MHz) starting length (REFERENCES 11, common practice)."""
    return 143.0 / (f_hz / 1e6) / 2.0


def element(eid: str, f_hz: float, low: float, high: float, partners: tuple[str, ...] = (),
            slope: float | None = None) -> rec.ElementRow:
    """An element cut 3 % long over the 143/f start (3-5 % long: REFERENCES 11, common
    practice), with the proportional tuning slope dL/df = -L/f (REFERENCES 11)."""
    leg = dipole_leg_m(f_hz)
    kit, _, key = eid.partition("-")
    return rec.ElementRow(eid, kit, "nvis-fan", key, f_hz, low, high, leg, leg * 1.03,
                          -leg / f_hz if slope is None else slope, partners)


# Band edges, ITU Region 2 (REFERENCES 11: 80 m 3500-4000 kHz, 40 m 7000-7300 kHz).
E40 = element("K03-40m", 7.1e6, 7.0e6, 7.3e6, ("K03-80m",))
E80 = element("K03-80m", 3.6e6, 3.5e6, 4.0e6, ("K03-40m",))


@pytest.fixture
def store_path(tmp_path: Path) -> Path:
    path = tmp_path / "club.records.sqlite"
    with rec.open_store(path) as store:
        rec.sync_elements(store, [E40, E80], 1, T0)
    return path


def dump(path: Path) -> dict:
    with rec.open_store(path, create=False) as store:
        return exchange.export_json(store)


# ----------------------------------------------------------------------------- as built

# Whole-dipole change for a 100 kHz move (REFERENCES 11, common practice): 114 cm at 3.55 MHz,
# 94 cm at 3.9 MHz, 50 cm at 5.36 MHz, 28 cm at 7.1 MHz; half of it per leg.
@pytest.mark.parametrize("f_mhz, whole_cm", [(3.55, 114), (3.9, 94), (5.36, 50), (7.1, 28)])
def test_reading_target_matches_published_rule(f_mhz: float, whole_cm: float) -> None:
    f = f_mhz * 1e6
    leg = dipole_leg_m(f)
    target = asbuilt.reading_target_m(leg, f - 100e3, f, -leg / f)  # dip 100 kHz low: long
    action = asbuilt.leg_action(leg, target, is_cut=True, termination_m=0.1)
    assert action.kind == "shorten"
    # The published figures are rounded to the centimetre: allow 1 cm on the whole dipole.
    assert abs(2 * action.amount_m - whole_cm / 100) <= 0.01
    assert action.words("metric").startswith("shorten each leg by ")


def test_high_dip_lengthens_or_recuts() -> None:
    f = 7.1e6
    leg = dipole_leg_m(f)
    target = asbuilt.reading_target_m(leg, 7.2e6, f, -leg / f)  # dip above design: short
    # Same published rule (REFERENCES 11): 14 cm per leg per 100 kHz at 7.1 MHz.
    assert target - leg == pytest.approx(0.14, abs=0.005)
    assert asbuilt.leg_action(leg, target, is_cut=True, termination_m=0.20).kind == "lengthen"
    assert asbuilt.leg_action(leg, target, is_cut=True, termination_m=0.05).kind == "re-cut"
    assert asbuilt.leg_action(leg, leg + 0.001, is_cut=True, termination_m=0.1).kind == "none"
    assert asbuilt.leg_action(leg, target, is_cut=False, termination_m=0.1).kind == "cut"


def test_expected_dip_of_the_read_wire_is_the_reading() -> None:
    """Round trip: the wire a reading was taken on is expected to dip where it was read."""
    leg, f0, slope = 10.4, 7.15e6, -1.4e-6
    for dip in (6.95e6, 7.15e6, 7.3e6):
        target = asbuilt.reading_target_m(leg, dip, f0, slope)
        assert asbuilt.expected_dip_hz(leg, target, f0, slope) == pytest.approx(dip, rel=1e-12)


def test_first_trim_confirms_the_cut_and_current_is_cut_minus_trims(store_path: Path) -> None:
    with rec.open_store(store_path) as store:
        rec.add_trim(store, "K03-40m", "both", 0.035, "", T0)
        rec.add_trim(store, "K03-40m", "A", 0.010, "", T0)
        rec.add_trim(store, "K03-40m", "B", -0.005, "spliced", T0)
        h = rec.element_history(store, "K03-40m")
    assert [(c.leg, c.how, c.length_m) for c in h.cuts] == [
        ("A", "first trim", E40.cut_leg_m), ("B", "first trim", E40.cut_leg_m)]
    assert h.current_leg_m("A") == pytest.approx(E40.cut_leg_m - 0.045)
    assert h.current_leg_m("B") == pytest.approx(E40.cut_leg_m - 0.030)


def test_adding_back_more_than_was_trimmed_is_refused(store_path: Path) -> None:
    with rec.open_store(store_path) as store:
        rec.add_trim(store, "K03-40m", "both", 0.02, "", T0)
        with pytest.raises(RecordError, match="only 20 mm were trimmed"):
            rec.add_trim(store, "K03-40m", "A", -0.03, "", T0)


def test_void_withdraws_a_reading_and_keeps_it(store_path: Path) -> None:
    with rec.open_store(store_path) as store:
        m = rec.add_measurement(store, "K03-40m", 7.05e6, None, "typo", T0)
        rec.void_record(store, "measurement", m.id, "wrong element", T0)
        h = rec.element_history(store, "K03-40m")
        assert h.measurements == () and [v.id for v in h.voided] == [m.id]
        with pytest.raises(RecordError, match="already void"):
            rec.void_record(store, "measurement", m.id, "", T0)


# ----------------------------------------------------------------------------- store


def test_schema_version_wal_and_integrity(store_path: Path) -> None:
    with rec.open_store(store_path) as store:
        conn = store.conn
        assert conn.execute("PRAGMA user_version").fetchone()[0] == rec.SCHEMA_VERSION
        assert conn.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
        assert conn.execute("PRAGMA foreign_keys").fetchone()[0] == 1
        rec.add_measurement(store, "K03-40m", 7.05e6, 1.3, "", T0)
        assert rec.integrity_check(store) == ["ok"]  # sqlite's own integrity_check


def test_nothing_is_ever_deleted(store_path: Path) -> None:
    with rec.open_store(store_path) as store:
        rec.add_measurement(store, "K03-40m", 7.05e6, None, "", T0)
        rec.add_trim(store, "K03-40m", "A", 0.01, "", T0)
        rec.record_print(store, 1, "K03-40m", "label", "0" * 64, "labels.pdf", T0)
        rec.void_record(store, "trim", 1, "", T0)
        for table in ("elements", "measurements", "trims", "prints", "cuts", "voids"):
            with pytest.raises(sqlite3.IntegrityError, match="never deleted"):
                store.conn.execute(f"DELETE FROM {table}")


def test_archive_on_drop_and_restore(store_path: Path) -> None:
    with rec.open_store(store_path) as store:
        rec.add_measurement(store, "K03-80m", 3.55e6, 1.2, "", T0)
        report = rec.sync_elements(store, [E40], 2, T0 + timedelta(days=1))
        assert report.archived == ("K03-80m",)
        assert report.unchanged == ("K03-40m",)
        kept = rec.element_history(store, "K03-80m")
        assert kept.element.status == "archived" and len(kept.measurements) == 1
        with pytest.raises(RecordError, match="archived"):
            rec.add_measurement(store, "K03-80m", 3.55e6, None, "", T0)
        back = rec.sync_elements(store, [E40, E80], 3, T0 + timedelta(days=2))
        assert back.restored == ("K03-80m",)
        assert rec.get_element(store, "K03-80m").status == "active"


def test_sync_rewrites_the_design_never_the_wire(store_path: Path) -> None:
    """A new revision updates the prescribed cut; the length a leg was cut to stays."""
    with rec.open_store(store_path) as store:
        rec.confirm_cut(store, "K03-40m", ("A", "B"), T0)
        rec.add_trim(store, "K03-40m", "both", 0.02, "", T0)
        new40 = replace(E40, predicted_leg_m=E40.predicted_leg_m * 0.995,
                        cut_leg_m=E40.cut_leg_m * 0.995)
        new80 = replace(E80, predicted_leg_m=E80.predicted_leg_m * 0.99,
                        cut_leg_m=E80.cut_leg_m * 0.99)
        report = rec.sync_elements(store, [new40, new80], 2, T0)
        assert report.changed == ("K03-40m", "K03-80m")
        e40 = rec.get_element(store, "K03-40m")
        h = rec.element_history(store, "K03-40m")
    assert e40.cut_leg_m == new40.cut_leg_m and e40.spec_revision == 2
    assert h.leg_cut("A").length_m == E40.cut_leg_m  # as built: unchanged
    assert h.current_leg_m("A") == pytest.approx(E40.cut_leg_m - 0.02)


def test_unknown_id_suggests_nearest(store_path: Path) -> None:
    with rec.open_store(store_path) as store:
        with pytest.raises(RecordError, match="nearest: K03-40m"):
            rec.get_element(store, "K03-40")
        row, leg = rec.resolve_id(store, "K03-80m-B")
        assert (row.id, leg) == ("K03-80m", "B")
        # IDs as the labels' QR codes hold them, in capitals, or typed in any case
        for typed, want in (("K03-80M-B", ("K03-80m", "B")), ("k03-40m", ("K03-40m", None)),
                            ("K03-40M-a", ("K03-40m", "A"))):
            row, leg = rec.resolve_id(store, typed)
            assert (row.id, leg) == want, typed


def test_refuses_foreign_and_newer_files(tmp_path: Path) -> None:
    foreign = tmp_path / "other.sqlite"
    conn = sqlite3.connect(foreign)
    conn.execute("CREATE TABLE notes (x)")
    conn.commit()
    conn.close()
    with pytest.raises(RecordError, match="not a buildsheet record store"):
        rec.open_store(foreign)
    newer = tmp_path / "newer.sqlite"
    conn = sqlite3.connect(newer)
    conn.execute(f"PRAGMA user_version = {rec.SCHEMA_VERSION + 1}")
    conn.close()
    with pytest.raises(RecordError, match="newer buildsheet"):
        rec.open_store(newer)


def test_export_import_round_trip(store_path: Path, tmp_path: Path) -> None:
    with rec.open_store(store_path) as store:
        rec.add_measurement(store, "K03-40m", 6.98e6, 1.6, "first <dip> & note", T0)
        rec.add_trim(store, "K03-40m", "both", 0.12, "", T0 + timedelta(minutes=5))
        rec.add_measurement(store, "K03-40m", 7.09e6, 1.1, "", T0 + timedelta(minutes=9))
        rec.record_print(store, 1, "K03-40m", "sheet", "ab" * 32, "sheets/K03-40m.pdf", T0)
        data = exchange.export_json(store)
    text = json.dumps(data)  # a plain JSON backup
    copy = tmp_path / "restored.records.sqlite"
    with rec.open_store(copy) as store:
        report = exchange.import_json(store, json.loads(text))
        assert (report.elements, report.measurements, report.trims, report.prints,
                report.cuts) == (2, 2, 1, 1, 2)
        again = exchange.import_json(store, json.loads(text))  # idempotent
        assert again.skipped == 8 and again.measurements == 0
        assert rec.integrity_check(store) == ["ok"]
    assert dump(copy) == data


def test_import_rejects_bad_data_and_changes_nothing(store_path: Path) -> None:
    before = dump(store_path)
    bad = json.loads(json.dumps(before))
    bad["measurements"] = [{"element_id": "K99-20m", "time": "t", "dip_hz": 1.4e7,
                            "swr": None, "note": ""}]  # unknown element: foreign key
    with rec.open_store(store_path) as store:
        with pytest.raises(RecordError, match="nothing was changed"):
            exchange.import_json(store, bad)
        with pytest.raises(RecordError, match="not a buildsheet records export"):
            exchange.import_json(store, {"format": "something else"})
    assert dump(store_path) == before


# ----------------------------------------------------------------------------- commands


def test_measure_and_trim_commands(store_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    store = str(store_path)
    assert run(["measure", "K03-40m", "--dip", "7.00MHz", "--swr", "1.5", "--store", store]) == 0
    out = capsys.readouterr().out
    assert "recorded" in out and "give --spec SPEC" in out  # a store with no packet: no advice
    assert run(["trim", "K03-40m-A", "--removed", "35mm", "--store", store]) == 0
    assert run(["trim", "K03-40m", "--added", "5 mm", "--leg", "A", "--store", store]) == 0
    assert run(["trim", "K03-40m", "--added", "5 mm", "--leg", "B", "--store", store]) == 1
    assert "only 0 mm were trimmed" in capsys.readouterr().err  # nothing to add back on B
    data = dump(store_path)
    assert [(t["leg"], round(t["delta_m"], 6)) for t in data["trims"]] == [("A", 0.035),
                                                                           ("A", -0.005)]
    assert data["measurements"][0]["dip_hz"] == 7.0e6


@pytest.mark.parametrize("argv, message", [
    (["measure", "K03-40m", "--dip", "7.08"], "frequency"),            # no unit
    (["measure", "K03-40m", "--dip", "70.8MHz"], "far outside"),       # unit slip
    (["measure", "K03-40m", "--dip", "3.6MHz"], "far outside"),        # wrong element
    (["measure", "K03-40", "--dip", "7.08MHz"], "nearest: K03-40m"),   # unknown ID
    (["trim", "K03-40m", "--removed=-35mm"], "positive"),              # negative trim
    (["trim", "K03-40m", "--removed", "12 m"], "only"),                # longer than the leg
    (["trim", "K03-40m"], "exactly one"),
])
def test_bad_input_fails_cleanly_and_changes_nothing(
        store_path: Path, argv: list[str], message: str,
        capsys: pytest.CaptureFixture[str]) -> None:
    before = dump(store_path)
    usage = message == "exactly one"  # a missing option is a usage error: exit 2 (README)
    assert run([*argv, "--store", str(store_path)]) == (2 if usage else 1)
    err = capsys.readouterr().err
    assert message in err and "Traceback" not in err
    assert dump(store_path) == before


def test_corrupt_database_gives_clear_error(tmp_path: Path,
                                            capsys: pytest.CaptureFixture[str]) -> None:
    bad = tmp_path / "club.records.sqlite"
    garbage = b"this is not an sqlite file\n" * 200
    bad.write_bytes(garbage)
    assert run(["measure", "K03-40m", "--dip", "7.08MHz", "--store", str(bad)]) == 1
    assert "not a readable record store" in capsys.readouterr().err
    assert bad.read_bytes() == garbage


def test_damaged_pages_are_detected(store_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    with rec.open_store(store_path) as store:
        store.conn.execute("PRAGMA wal_checkpoint(TRUNCATE)")
    raw = bytearray(store_path.read_bytes())
    page = 4096
    assert len(raw) >= 3 * page
    raw[page + 8: 2 * page] = b"\xa5" * (page - 8)  # scribble over the second page
    store_path.write_bytes(bytes(raw))
    assert run(["trim", "K03-40m", "--removed", "1cm", "--store", str(store_path)]) == 1
    assert "not a readable record store" in capsys.readouterr().err
    assert store_path.read_bytes() == bytes(raw)


def test_default_store_lookup(tmp_path: Path) -> None:
    with pytest.raises(RecordError, match="no record store"):
        find_store(tmp_path)
    (tmp_path / "a.records.sqlite").touch()
    assert find_store(tmp_path).name == "a.records.sqlite"
    (tmp_path / "b.records.sqlite").touch()
    with pytest.raises(RecordError, match=r"a\.records\.sqlite, b\.records\.sqlite"):
        find_store(tmp_path)


def test_export_and_import_commands(store_path: Path, tmp_path: Path,
                                    capsys: pytest.CaptureFixture[str]) -> None:
    assert run(["measure", "K03-80m", "--dip", "3.57MHz", "--store", str(store_path)]) == 0
    backup = tmp_path / "backup.json"
    assert run(["export", "--store", str(store_path), "-o", str(backup)]) == 0
    fresh = tmp_path / "fresh" / "club.records.sqlite"
    fresh.parent.mkdir()
    assert run(["import", str(backup), "--store", str(fresh)]) == 0
    assert dump(fresh) == json.loads(backup.read_text())
    assert [p.name for p in tmp_path.iterdir() if p.name.endswith(".tmp")] == []


def test_fifty_concurrent_measure_processes(store_path: Path) -> None:
    """Separate processes writing at once lose nothing; sqlite's integrity_check passes."""
    procs = [subprocess.Popen(
        [sys.executable, "-m", "buildsheet", "measure", "K03-40m",
         "--dip", f"{7.0 + i * 0.004:.3f}MHz", "--note", f"p{i}", "--store", str(store_path)],
        stdout=subprocess.PIPE, stderr=subprocess.PIPE) for i in range(50)]
    results = [p.communicate(timeout=120) + (p.returncode,) for p in procs]
    failed = [err.decode() for _out, err, code in results if code != 0]
    assert failed == []
    with rec.open_store(store_path) as store:
        notes = sorted(m.note for m in rec.element_history(store, "K03-40m").measurements)
        assert notes == sorted(f"p{i}" for i in range(50))
        assert rec.integrity_check(store) == ["ok"]


def test_migration_adds_a_table_and_keeps_the_data(store_path: Path,
                                                   monkeypatch: pytest.MonkeyPatch) -> None:
    """A later schema version migrates an existing store and keeps its data."""
    nxt = rec.SCHEMA_VERSION + 1
    later = (*rec.MIGRATIONS, (nxt, (("CREATE TABLE later_notes (design TEXT PRIMARY KEY, "
                                      "ratio REAL NOT NULL)"),)))
    monkeypatch.setattr(rec, "MIGRATIONS", later)
    monkeypatch.setattr(rec, "SCHEMA_VERSION", nxt)
    with rec.open_store(store_path) as store:
        assert store.conn.execute("PRAGMA user_version").fetchone()[0] == nxt
        store.conn.execute("INSERT INTO later_notes VALUES ('nvis-fan', 0.99)")
        assert [e.id for e in rec.list_elements(store)] == ["K03-40m", "K03-80m"]
        assert rec.integrity_check(store) == ["ok"]
