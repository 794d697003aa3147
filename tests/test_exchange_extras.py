"""Export and import carry what the station records beside a dip: R, X and the analyzer sweep.

Round trips go through the ``buildsheet measure`` / ``export`` / ``import`` commands, as a club
would run them; the stored rows must come back byte-identical, and a file with any bad row is
refused whole.
"""

from __future__ import annotations

import json
import math
import sqlite3
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

import pytest

from buildsheet.calc.sweep import analyse, read_sweep
from buildsheet.cli.main import main as run
from buildsheet.errors import RecordError
from buildsheet.store import exchange
from buildsheet.store import ledger as rec

T0 = datetime(2026, 5, 9, 9, 30, tzinfo=UTC)

# A series RLC near 7.1 MHz standing in for a dipole's feed: Z = R + j(wL - 1/(wC)), resonant
# at f0 = 1/(2 pi sqrt(LC)) where X = 0 and Z = R (Hayt & Kemmerly, Engineering Circuit
# Analysis, "series resonance"); reflection Gamma = (Z - Z0)/(Z + Z0) (Pozar, Microwave
# Engineering, eq. 2.35). R and L from memory (an inverted V's feed: R 50-70 ohm on 40 m).
R_OHM, L_H, F0_HZ, Z0 = 58.0, 16e-6, 7_083_300.0, 50.0
C_F = 1.0 / ((2 * math.pi * F0_HZ) ** 2 * L_H)


def touchstone_rlc() -> str:
    """A one-port Touchstone sweep (RI format) of the series RLC, 6.8-7.4 MHz in 5 kHz steps."""
    lines = ["! series RLC test sweep", "# MHz S RI R 50"]
    for k in range(121):
        f = 6.8e6 + 5e3 * k
        w = 2 * math.pi * f
        z = complex(R_OHM, w * L_H - 1 / (w * C_F))
        g = (z - Z0) / (z + Z0)
        lines.append(f"{f / 1e6:.6f} {g.real:.10f} {g.imag:.10f}")
    return "\n".join(lines) + "\n"


def dipole_leg_m(f_hz: float) -> float:
    """Half of the 143/f (m, f in MHz) starting length (common practice)."""
    return 143.0 / (f_hz / 1e6) / 2.0


# 40 m band edges, ITU Region 2: 7000-7300 kHz (ITU Radio Regulations, Article 5).
LEG = dipole_leg_m(7.1e6)
E40 = rec.ElementRow("K01-40m", "K01", "fan", "40m", 7.1e6, 7.0e6, 7.3e6, LEG, LEG * 1.03,
                     -LEG / 7.1e6, ())


@pytest.fixture
def store_path(tmp_path: Path) -> Path:
    """A store with one element and three readings made by `buildsheet measure`: a dip with
    SWR, R and X; a sweep file; a plain dip."""
    path = tmp_path / "club.records.sqlite"
    with rec.open_store(path) as store:
        rec.sync_elements(store, [E40], 1, T0)
    sweep = tmp_path / "k01-40m.s1p"
    sweep.write_text(touchstone_rlc(), encoding="utf-8")
    base = ["--store", str(path)]
    assert run(["measure", "K01-40m", "--dip", "7.052MHz", "--swr", "1.35", "--r", "61.5",
                "--x", "-7.25", "--note", "by hand <b>", *base]) == 0
    assert run(["measure", "K01-40m", "--sweep", str(sweep), "--note", "analyzer", *base]) == 0
    assert run(["measure", "K01-40m", "--dip", "7.09MHz", *base]) == 0
    return path


def stored_rows(path: Path) -> list[tuple[Any, ...]]:
    """Every reading with its extras, as SQLite holds them (types and bytes)."""
    with sqlite3.connect(path) as conn:
        return conn.execute(
            "SELECT m.element_id, m.time, m.dip_hz, m.swr, m.note, e.r_ohm, typeof(e.r_ohm), "
            "e.x_ohm, typeof(e.x_ohm), e.sweep_name, CAST(e.sweep_csv AS BLOB) FROM "
            "measurements m LEFT JOIN reading_extras e ON e.measurement_id = m.id "
            "ORDER BY m.time, m.id").fetchall()


def dump(path: Path) -> dict[str, Any]:
    with rec.open_store(path, create=False) as store:
        return exchange.export_json(store)


def test_export_import_round_trip_keeps_r_x_and_sweeps(store_path: Path, tmp_path: Path) -> None:
    backup = tmp_path / "backup.json"
    assert run(["export", "--store", str(store_path), "-o", str(backup)]) == 0
    data = json.loads(backup.read_text(encoding="utf-8"))
    readings = data["measurements"]
    assert (readings[0]["r_ohm"], readings[0]["x_ohm"]) == (61.5, -7.25)  # as typed
    assert readings[1]["sweep_name"] == "k01-40m.s1p" and readings[1]["sweep_csv"]
    assert all(m[k] is None for m in readings[2:] for k in exchange.EXTRA_COLS)
    fresh = tmp_path / "fresh" / "club.records.sqlite"
    fresh.parent.mkdir()
    assert run(["import", str(backup), "--store", str(fresh)]) == 0
    assert stored_rows(fresh) == stored_rows(store_path)  # byte-identical, types kept
    assert dump(fresh) == data
    # The restored sweep still finds the circuit's resonance (within 1 kHz of f0) and R there.
    with rec.open_store(fresh, create=False) as store:
        extras = rec.reading_extras(store, "K01-40m", with_sweeps=True)
    csv = next(x.sweep_csv for x in extras.values() if x.sweep_csv)
    fit = analyse(read_sweep(csv.encode(), "stored.csv"))
    assert abs(fit.resonance_hz - F0_HZ) < 1e3
    assert fit.r_ohm == pytest.approx(R_OHM, rel=0.01)
    # Importing the same file again changes nothing.
    with rec.open_store(fresh, create=False) as store:
        again = exchange.import_json(store, data)
    assert (again.measurements, again.extras, again.conflicts) == (0, 0, ())
    assert stored_rows(fresh) == stored_rows(store_path)


def _bad(data: dict[str, Any], index: int, **changes: Any) -> dict[str, Any]:
    copy = json.loads(json.dumps(data))
    copy["measurements"][index].update(changes)
    return copy


@pytest.mark.parametrize(("index", "changes", "needle"), [
    (0, {"r_ohm": -3.0}, "r_ohm -3.0 is not a resistance of 0 ohm or more"),
    (0, {"r_ohm": "61"}, "r_ohm '61'"),
    (0, {"x_ohm": "lots"}, "x_ohm 'lots' is not a finite reactance"),
    (1, {"sweep_csv": None}, "sweep_name and sweep_csv go together"),
    (1, {"sweep_csv": "frequency, nothing\nabc\n"}, "sweep_csv.csv"),
    (1, {"sweep_csv": "x" * 1_000_001}, "at most 1,000,000"),
    (1, {"sweep_name": ""}, "sweep_name must be text"),
])
def test_a_bad_extra_refuses_the_whole_file(store_path: Path, tmp_path: Path, index: int,
                                            changes: dict[str, Any], needle: str) -> None:
    data = dump(store_path)
    fresh = tmp_path / "fresh.records.sqlite"
    with rec.open_store(fresh) as store:
        rec.sync_elements(store, [E40], 1, T0)
    before = dump(fresh)
    with (rec.open_store(fresh, create=False) as store,
          pytest.raises(RecordError, match="nothing was changed") as refused):
        exchange.import_json(store, _bad(data, index, **changes))
    assert needle in str(refused.value)
    assert f"measurements[{index}]" in str(refused.value)
    assert dump(fresh) == before  # not one row of the good ones went in


def test_a_bad_extra_through_the_import_command(store_path: Path, tmp_path: Path,
                                                capsys: pytest.CaptureFixture[str]) -> None:
    file = tmp_path / "bad.json"
    file.write_text(json.dumps(_bad(dump(store_path), 0, r_ohm=-1.0)), encoding="utf-8")
    fresh = tmp_path / "new.records.sqlite"
    assert run(["import", str(file), "--store", str(fresh)]) != 0
    err = capsys.readouterr().err
    assert f"{file}: export: 1 bad row, nothing was changed: measurements[0]: r_ohm -1.0" in err
    assert "Traceback" not in err and len(err.strip().splitlines()) <= 2  # store line, error
    assert not fresh.exists()  # a refused import leaves no new store behind


def test_rows_without_extras_still_import_and_partial_extras_are_refused(
        store_path: Path, tmp_path: Path) -> None:
    data = dump(store_path)
    old = json.loads(json.dumps(data))
    for m in old["measurements"]:  # as an export from before the station wrote them
        for key in exchange.EXTRA_COLS:
            del m[key]
    fresh = tmp_path / "fresh.records.sqlite"
    with rec.open_store(fresh) as store:
        report = exchange.import_json(store, old)
        assert report.measurements == 3
        assert rec.reading_extras(store) == {}
        # The full file later brings the extras to the readings already there.
        report = exchange.import_json(store, data)
        assert (report.measurements, report.extras) == (0, 2)
    assert stored_rows(fresh) == stored_rows(store_path)
    partial = json.loads(json.dumps(data))
    del partial["measurements"][0]["sweep_csv"]
    with (rec.open_store(fresh, create=False) as store,
          pytest.raises(RecordError, match="optionally all of r_ohm, x_ohm")):
        exchange.import_json(store, partial)


def test_differing_extras_keep_the_store_values(store_path: Path, tmp_path: Path) -> None:
    data = dump(store_path)
    changed = _bad(data, 0, r_ohm=70.0)
    with rec.open_store(store_path, create=False) as store:
        report = exchange.import_json(store, changed)
    assert report.conflicts == (f"K01-40m (reading at {data['measurements'][0]['time']})",)
    assert dump(store_path) == data

