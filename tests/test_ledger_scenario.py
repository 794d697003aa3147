"""The build day end to end through the command line, as the as-built ledger must keep it:
r1 packet; confirm the cuts of three kits; measure and trim one; calibrate from it; r2; follow
the batch trims on a second kit; add a band; r3 with --changed-only.

After every step the labels (QR decoded by zxing-cpp, text by pypdf), the sheets (pypdf), the
record pages, ``export`` and the ``calibrate`` output must agree on every leg's length as cut,
current length and target; the spool plan of r3 must hold no leg already cut; ``reprinted``
must list exactly what changed; no ID may change. The reference here is agreement between
independently produced documents and the arithmetic of the trims recorded (current = as cut
minus trims), not numbers from the code under test.
"""

from __future__ import annotations

import json
import re
from pathlib import Path

import pytest

from buildsheet.cli.main import main
from buildsheet.spec.units import format_length
from tests.test_build_records import pdf_text, qr_texts, small_spec

FAN = ("75m", "40m")


def export(folder: Path, capsys: pytest.CaptureFixture[str]) -> dict[str, dict]:
    """Per leg ID the export's as-built numbers (and the element's under key 'element')."""
    capsys.readouterr()
    assert main(["export", "--spec", str(folder / "club.toml")]) == 0
    data = json.loads(capsys.readouterr().out)
    out = {}
    for e in data["as_built"]:
        for leg in e["legs"]:
            out[leg["leg_id"]] = {**leg, "element": e}
    return out


def labels_by_leg(pdf: Path) -> dict[str, str]:
    return {text: text for text in qr_texts(pdf)}


def check_agreement(folder: Path, out: Path, legs: dict[str, dict], labels_pdf: Path,
                    printed: set[str] | None = None) -> None:
    """Labels, record pages and export agree on every leg (``printed``: legs on this PDF)."""
    qr = labels_by_leg(labels_pdf)
    label_text = pdf_text(labels_pdf)
    for leg_id, leg in legs.items():
        element = leg_id.rsplit("-", 1)[0]
        page = (out / "site" / f"{element}.html").read_text(encoding="utf-8")
        now = re.search(rf'id="{leg_id}-now">([0-9.]+) m<', page)
        target = re.search(rf'id="{leg_id}-target">([0-9.]+) m<', page)
        assert now and target, leg_id
        assert float(now.group(1)) == pytest.approx(leg["current_m"], abs=5e-4)
        assert float(target.group(1)) == pytest.approx(leg["target_m"], abs=5e-4)
        if leg["cut_m"] is not None:
            cut = re.search(rf'id="{leg_id}-cut">([0-9.]+) m<', page)
            assert cut and float(cut.group(1)) == pytest.approx(leg["cut_m"], abs=5e-4)
        else:
            assert leg["current_m"] == leg["prescribed_cut_m"]
        if printed is not None and leg_id not in printed:
            assert leg_id.upper() not in qr
            continue
        assert qr[leg_id.upper()] == leg_id.upper()  # the leg ID in capitals; lengths in text
        as_cut = leg["cut_m"] if leg["cut_m"] is not None else leg["prescribed_cut_m"]
        if leg["trims_m"]:
            assert f"cut {format_length(as_cut)}" in label_text
            assert f"NOW {format_length(leg['current_m'])}" in label_text
        else:
            assert f"CUT {format_length(as_cut)}" in label_text


def reprinted(out: Path) -> dict[str, list[str]]:
    return json.loads((out / "manifest.json").read_text())["reprinted"]


def test_build_day_scenario(tmp_path: Path, capsys: pytest.CaptureFixture[str],
                            monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1800000000")
    folder = tmp_path / "club"
    spec = small_spec(folder)
    out = folder / "out"
    monkeypatch.chdir(folder)

    # r1: everything printed.
    assert main(["packet", str(spec), "-o", str(out)]) == 0
    legs = export(folder, capsys)
    ids_r1 = sorted(legs)
    assert ids_r1 == sorted(f"K0{k}-{b}-{s}" for k in (1, 2) for b in FAN for s in "AB") + [
        "K03-60m-us-A", "K03-60m-us-B"]
    check_agreement(folder, out, legs, out / "labels.pdf")
    assert sorted(reprinted(out)["labels"]) == ids_r1

    # Confirm the cuts of all three kits: nothing of the design changes, the ledger does.
    assert main(["cut", "K01-75m", "K01-40m", "K02-75m", "K02-40m", "K03-60m-us"]) == 0
    legs = export(folder, capsys)
    assert all(leg["cut_m"] == leg["prescribed_cut_m"] for leg in legs.values())

    # Measure K01-75m a little low, take the advice, trim it: current lands on the target.
    k01 = legs["K01-75m-A"]
    dip = k01["element"]["expected_dip_hz"] * 0.997
    assert main(["measure", "K01-75m", "--dip", f"{dip / 1e3:.1f}kHz"]) == 0
    said = capsys.readouterr().out
    legs = export(folder, capsys)
    amount = legs["K01-75m-A"]["action_m"]
    assert legs["K01-75m-A"]["action"] == "shorten" and f"{format_length(amount)}" in said
    assert main(["trim", "K01-75m", "--removed", f"{amount * 1000:.1f}mm"]) == 0
    legs = export(folder, capsys)
    for side in "AB":  # the trim round trip: advised amount trimmed -> on target (0.1 mm)
        leg = legs[f"K01-75m-{side}"]
        assert leg["current_m"] == pytest.approx(leg["target_m"], abs=1e-4)
        assert leg["current_m"] == pytest.approx(leg["cut_m"] - amount, abs=1e-4)
        assert leg["action"] == "none"

    # Calibrate from the measured element; the printed trims are the ones the export holds.
    capsys.readouterr()
    assert main(["calibrate", str(spec), "phonefan", "--from", "K01-75m"]) == 0
    said = capsys.readouterr().out
    legs = export(folder, capsys)
    printed = dict(re.findall(r"^\s+(K0\d-\w+-[AB]): now .*?, target ([0-9.]+) m", said,
                              re.MULTILINE))
    fan_legs = {k: v for k, v in legs.items() if not k.startswith("K03")}
    assert set(printed) == set(fan_legs)
    for leg_id, target in printed.items():
        assert float(target) == pytest.approx(legs[leg_id]["target_m"], abs=5e-4)

    # r2: the batch-trim page lists the same legs and targets; cut wire keeps its length.
    assert main(["packet", str(spec), "-o", str(out)]) == 0
    legs = export(folder, capsys)
    check_agreement(folder, out, legs, out / "labels.pdf")
    sheets = pdf_text(out / "sheets.pdf")
    # The page itself (the first mention is its contents entry), up to the next section.
    batch = sheets.split("Batch trims for kits already cut")[-1].split("Coverage and exposure")[0]
    for leg_id, leg in fan_legs.items():
        assert leg_id in batch
        assert legs[leg_id]["cut_m"] == leg["cut_m"]  # as built: never rewritten
    # Follow the batch trims on K02 (both legs equal): it lands on its targets.
    k02 = legs["K02-40m-A"]
    assert k02["action"] == "shorten"
    assert main(["trim", "K02-40m", "--removed", f"{k02['action_m'] * 1000:.1f}mm"]) == 0
    legs = export(folder, capsys)
    for side in "AB":
        leg = legs[f"K02-40m-{side}"]
        assert leg["current_m"] == pytest.approx(leg["target_m"], abs=1e-3)

    # Add a 60 m element to the fan; r3 prints only what changed.
    small_spec(folder, sixty_in_fan=True)
    assert main(["packet", str(spec), "-o", str(out), "--changed-only"]) == 0
    legs = export(folder, capsys)
    r3 = reprinted(out)
    new = {f"K0{k}-60m-us-{s}" for k in (1, 2) for s in "AB"}
    assert set(ids_r1) <= set(legs)  # no ID changed
    assert set(legs) - set(ids_r1) == new
    # The two fan kits gained an element (their sheets), K02-40m was trimmed (its labels); the
    # 60 m kit K03 is untouched.
    assert r3["kit_sheets"] == ["K01", "K02"]
    assert set(r3["labels"]) == new | {"K02-40m-A", "K02-40m-B"}
    changed_labels = out / f"labels-r{json.loads((out / 'manifest.json').read_text())['revision']}-changed.pdf"
    check_agreement(folder, out, legs, changed_labels, printed=set(r3["labels"]))
    # The spool plan and cutting stations of r3 cut the new legs only.
    changed_sheets = changed_labels.with_name(changed_labels.name.replace("labels", "sheets"))
    text = pdf_text(changed_sheets)
    assert "spool-plan" in r3["day_pages"] and "stations" in r3["day_pages"]
    # From the contents entry of the first kit sheet to its heading: the day pages (bill,
    # spool plan, cutting stations, coverage).
    day = text.split("Kit K01: ")[1]
    assert "Spool cut plan" in day and "legs already cut" in day
    for leg_id in new:
        assert leg_id in day
    for leg_id in ids_r1:  # already cut: never cut again
        assert leg_id not in day


def test_ids_never_change_as_the_spec_grows(tmp_path: Path) -> None:
    """3 -> 100 -> 1,000 kits: every ID printed before is still there, none archived
    (K01 ... K99, K100 ...: never re-padded)."""
    from datetime import UTC, datetime

    from buildsheet.packet import element_id
    from buildsheet.records import ElementRow
    from buildsheet.spec.reader import load_spec
    from buildsheet.store import ledger as rec

    seen: set[str] = set()
    with rec.open_store(tmp_path / "club.records.sqlite") as store:
        for revision, count in enumerate((3, 100, 1000), start=1):
            spec = small_spec(tmp_path / f"r{revision}")
            text = spec.read_text(encoding="utf-8").replace("count = 2\n", f"count = {count}\n", 1)
            # The 60 m group numbered from its own `first`, so the fan group can grow freely.
            text = text.replace('count = 1\nbuilders = ["Kim"]', 'count = 1\nfirst = 5000\nbuilders = ["Kim"]')
            spec.write_text(text, encoding="utf-8")
            design = load_spec(spec)
            rows = [ElementRow(element_id(k, e.key), k.kit_id, k.design_key, e.key, e.frequency_hz,
                               e.low_hz, e.high_hz, 10.0, 10.5, -1e-6)
                    for k in design.kits for e in design.design(k.design_key).elements]
            ids = {r.id for r in rows}
            assert seen <= ids
            report = rec.sync_elements(store, rows, revision, datetime(2027, 1, revision, tzinfo=UTC))
            assert report.archived == ()
            seen = ids
    assert {"K01-75m", "K99-75m", "K100-75m", "K1000-75m", "K5000-60m-us"} <= seen
    text = small_spec(tmp_path / "first").read_text(encoding="utf-8").replace(
        "count = 2\n", "count = 2\nfirst = 98\n", 1)
    (tmp_path / "first" / "club.toml").write_text(text, encoding="utf-8")
    kits = [k.kit_id for k in load_spec(tmp_path / "first" / "club.toml").kits]
    assert kits[:2] == ["K98", "K99"] and "K100" in kits


def test_labels_continue_on_the_current_sheet(tmp_path: Path) -> None:
    """With labels.start_cell unset, a later packet's labels start where the last ones ended
    (cells counted from the decoded QR positions, pypdfium2 and zxing-cpp)."""
    from datetime import UTC, datetime

    from buildsheet.build import build, default_store
    from buildsheet.store import ledger as rec
    from tests.test_build_records import _first_label_cell

    spec = small_spec(tmp_path)
    out = tmp_path / "out"
    first = build(spec, out, built_at="2027-03-01T09:00:00Z")
    used = len(first.packet.labels)  # 14 labels on a 21-cell Letter sheet
    with rec.open_store(default_store(spec)) as store:
        rec.add_trim(store, "K01-40m", "both", 0.01, "", datetime(2027, 3, 1, 10, tzinfo=UTC))
    build(spec, out, built_at="2027-03-01T11:00:00Z", changed_only=True)
    assert _first_label_cell(out / "labels-r2-changed.pdf") == used % 21
