"""Issue 13 regressions, one named test each: every bad input ends in one line naming the file,
the key path, the value and what is allowed, exit 1 (2 for usage), no traceback; no silent
coercion; spec text prints literally in the PDFs and fetches, embeds or links nothing."""

from __future__ import annotations

import json
import re
import subprocess
import sys

import pytest
from pypdf import PdfReader
from spec_strategies import BASE, to_toml
from test_build_records import small_spec  # same small spec (tests/ is on sys.path)

from buildsheet.cli.main import main
from buildsheet.errors import SpecError
from buildsheet.spec.reader import load_spec, read_spec_text

BASE_TEXT = to_toml(BASE)


def spec_text(**edits: str) -> str:
    """BASE_TEXT with ``key = value`` lines replaced (first match) or added to their table."""
    text = BASE_TEXT
    for key, value in edits.items():
        table, _, name = key.rpartition(".")
        line = re.compile(rf"^{re.escape(name)} = .*$", re.MULTILINE)
        header = None
        if table:
            header = f"[[{table}]]" if f"[[{table}]]" in text else f"[{table}]"
        start = text.index(header) + len(header) if header else 0
        m = line.search(text, start)
        nxt = text.find("\n[", start + 1)
        if m and (nxt < 0 or m.start() < nxt):
            text = text[:m.start()] + f"{name} = {value}" + text[m.end():]
        else:
            text = text[:start] + f"\n{name} = {value}" + text[start:]
    return text


def errors(text: str) -> list[str]:
    with pytest.raises(SpecError) as info:
        read_spec_text(text, "club.toml")
    return [str(p) for p in info.value.problems]


def one_error(text: str, where: str, *words: str) -> str:
    """The single problem of ``text``: at ``where`` (file and key path), with ``words``."""
    (line,) = errors(text)
    assert line.startswith(f"club.toml: {where}: "), line
    for w in words:
        assert w in line, line
    return line


def run_cli(argv: list[str], capsys) -> tuple[int, str, str]:
    code = main(argv)
    out, err = capsys.readouterr()
    return code, out, err


# --------------------------------------------------------------------------- the bad-input list


def test_fraction_dividing_by_zero_in_a_length():
    one_error(spec_text(**{"designs.d.coax_length": '"1/0 m"'}), "designs.d.coax_length",
              "1/0", "divides by zero")


@pytest.mark.parametrize("value, kind", [("7", "an integer 7"), ("true", "a boolean true")])
def test_label_stock_number_or_boolean(value, kind):
    one_error(spec_text(**{"labels.stock": value}), "labels.stock", kind, "'sheet-a4'",
              "table of custom geometry")


def test_time_where_a_table_is_expected():
    text = "labels = 07:32:00\n" + BASE_TEXT.replace("[labels]\nstock = \"sheet-a4\"\n"
                                                   "start_cell = 0\n", "")
    one_error(text, "labels", "expected a table", "a time 07:32:00")


def test_min_trim_given_as_a_length():
    """Was an assertion error."""
    one_error(spec_text(**{"designs.d.min_trim": '"30 cm"'}), "designs.d.min_trim",
              "'30 cm'", "percentage")


def test_frequency_far_outside_its_band():
    """Was a math domain error in the model."""
    one_error(spec_text(**{"designs.d.elements.frequency": '"29.9 MHz"'}),
              "designs.d.elements[0].frequency", "'29.9 MHz'", "40m band", "7.000 MHz")


@pytest.mark.parametrize("diameter, words", [('"1 km"', "at most 12 mm"),
                                             ('"0.000001 mm"', "at least 0.05 mm")])
def test_wire_diameter_out_of_range(diameter, words):
    """Was a root-finder error."""
    text = spec_text(**{"designs.d.wire": '"mine"'}) + f"\n[wires.mine]\ndiameter = {diameter}\n"
    found = [line for line in errors(text) if line.startswith("club.toml: wires.mine.diameter: ")]
    assert len(found) == 1 and words in found[0], found


def test_byte_order_mark_is_read(tmp_path):
    path = tmp_path / "club.toml"
    path.write_bytes(b"\xef\xbb\xbf" + BASE_TEXT.encode())
    assert load_spec(path).event.name == "Tiny day"


@pytest.mark.parametrize("value, words", [('"1e308 m"', "too large; allowed at most 300 m"),
                                          ('"1e400 m"', "too large to be a number")])
def test_huge_lengths(value, words):
    one_error(spec_text(**{"designs.d.coax_length": value}), "designs.d.coax_length", words)


def test_percent_sign_alone():
    one_error(spec_text(**{"designs.d.trim_allowance": '"%"'}), "designs.d.trim_allowance",
              "'%'", 'percentage like "3 %"')


def test_apex_of_300_m_names_its_key():
    one_error(spec_text(**{"designs.d.apex_height": '"300 m"'}), "designs.d.apex_height",
              "'300 m'", "at most 60 m")


def test_30_mhz_on_a_7_m_apex_names_the_element(tmp_path, capsys):
    text = spec_text(**{"designs.d.apex_height": '"7 m"'}).replace('band = "40m"',
                                                                   'frequency = "29.5 MHz"')
    (tmp_path / "club.toml").write_text(text, encoding="utf-8")
    code, _, err = run_cli(["check", str(tmp_path / "club.toml"), "--model", "closed_form"],
                           capsys)
    assert code == 1 and err.count("\n") == 1 and "Traceback" not in err
    assert "club.toml" in err and "designs.d.elements[0]" in err and "cannot fall" in err
    assert "allowed:" in err and "apex" in err


def test_start_cell_errors_name_file_and_key():
    one_error(spec_text(**{"labels.start_cell": "24"}), "labels.start_cell",
              "start cell 24", "0 to 23")
    one_error(spec_text(**{"labels.stock": '"roll"', "labels.start_cell": "1"}),
              "labels.start_cell", "'roll'", "0 to 0")


def test_label_code_choices():
    one_error(spec_text(**{"labels.code": '"qr"'}), "labels.code", "'qr' is not allowed",
              "'id', 'link'")
    one_error(spec_text(**{"labels.code": "true"}), "labels.code", "not allowed")
    one_error(spec_text(**{"labels.code": '"link"'}), "labels.code", "event.record_url",
              "event.station_url")
    for edit, code in (({}, "id"), ({"labels.code": '"id"'}, "id"),
                       ({"event.station_url": '"http://10.0.0.2:8080"'}, "link"),
                       ({"event.station_url": '"http://10.0.0.2:8080"', "labels.code": '"id"'},
                        "id")):
        assert read_spec_text(spec_text(**edit), "club.toml").labels.code == code


def test_grammar_expected_an_integer():
    one_error(spec_text(**{"kits.count": '"three"'}), "kits[0].count",
              "expected an integer from 1 to 2000, got text 'three'")


def test_dates_shown_as_dates():
    line = one_error(spec_text(**{"event.name": "2027-03-13"}), "event.name",
                     "got a date 2027-03-13")
    assert "datetime" not in line
    one_error(spec_text(**{"event.date": "2027-03-13T10:00:00"}), "event.date",
              "no time of day", "2027-03-13T10:00:00")
    assert read_spec_text(spec_text(**{"event.date": "2027-03-13"})).event.date == "2027-03-13"


def test_band_of_another_region_says_which():
    one_error(spec_text(**{"event.region": "1"}).replace('band = "40m"', 'band = "75m"'),
              "designs.d.elements[0].band", "not a band of ITU region 1", "allowed in region 2")


def test_no_error_printed_twice(tmp_path, capsys):
    text = spec_text(**{"event.region": "true", "designs.d.apex_height": '"-1 m"'})
    (tmp_path / "club.toml").write_text(text, encoding="utf-8")
    code, _, err = run_cli(["check", str(tmp_path / "club.toml")], capsys)
    lines = err.splitlines()
    assert code == 1 and len(lines) == len(set(lines)) == 2, lines


def test_missing_required_option_exits_2(tmp_path, capsys):
    spec = small_spec(tmp_path)
    with pytest.raises(SystemExit) as info:
        main(["packet", str(spec)])  # no -o
    assert info.value.code == 2
    code, _, err = run_cli(["trim", "K01-40m", "--store", str(tmp_path / "x.sqlite")], capsys)
    assert code == 2 and "exactly one of --removed" in err and "Traceback" not in err


def test_closed_pipe_ends_quietly(tmp_path):
    spec = tmp_path / "club.toml"
    spec.write_text(BASE_TEXT, encoding="utf-8")
    proc = subprocess.Popen([sys.executable, "-m", "buildsheet", "check", str(spec), "--model",
                             "closed_form"], stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    proc.stdout.close()  # like `| head` exiting before the table is written
    with proc.stderr:
        err = proc.stderr.read().decode()
    proc.wait(timeout=120)
    assert "Traceback" not in err and "BrokenPipe" not in err, err
    assert proc.returncode == 141


# --------------------------------------------------------------------------- no silent coercion


def test_transmit_fraction_zero_means_zero():
    design = read_spec_text(spec_text(**{"exposure.transmit_fraction": "0"}))
    assert design.exposure.transmit_fraction == 0.0


def test_region_true_is_an_error():
    one_error(spec_text(**{"event.region": "true"}), "event.region", "true is not allowed",
              "1, 2, 3")


@pytest.mark.parametrize("value, kind", [("true", "a boolean true"),
                                         ("{a = 1}", "a table {a = 1}"),
                                         ("[1, 2]", "a list [1, 2]")])
def test_booleans_and_tables_are_not_names(value, kind):
    one_error(spec_text(**{"event.name": value}), "event.name", "expected text", kind)


def test_power_limits():
    one_error(spec_text(**{"exposure.power": '"20 kW"'}), "exposure.power", "above 10 kW")
    one_error(spec_text(**{"exposure.power": '"0 W"'}), "exposure.power", "greater than zero")
    design = read_spec_text(spec_text(**{"exposure.power": '"2 kW"'}), "club.toml")
    assert design.exposure.power_w == 2000.0
    assert any("exposure.power" in w and "1.5 kW" in w for w in design.warnings)


def test_feed_allowance_of_1e39_m():
    one_error(spec_text(**{"designs.d.feed_allowance": '"1e39 m"'}), "designs.d.feed_allowance",
              "at most 2 m")


def test_trim_allowance_longer_than_half_the_leg():
    # A 40 m leg is about a quarter wave, 299.79 / 7.15 / 4 = 10.5 m (C0 / 4f).
    one_error(spec_text(**{"designs.d.trim_allowance": '"5.5 m"'}), "designs.d.trim_allowance",
              "longer than half a leg")
    assert read_spec_text(spec_text(**{"designs.d.trim_allowance": '"0 m"'})).designs[0] \
        .allowances.trim_m == 0.0


@pytest.mark.parametrize("key", ["event.name", "event.club", "designs.d.title"])
def test_free_text_is_capped(key):
    one_error(spec_text(**{key: '"' + "x" * 5000 + '"'}), key.replace("kits.", "kits[0]."),
              "5000 characters", "at most 200")


def test_a_megabyte_date_is_refused_at_once():
    """Was a build slowing down quadratically (1 MB over 60 s)."""
    one_error(spec_text(**{"event.date": '"' + "2" * 1_000_000 + '"'}), "event.date",
              "expected a date like 2027-03-13")


# --------------------------------------------------------------------------- markup payloads

PAYLOADS = {
    "event.name": '<img src="/etc/hosts"/> & <b>bold</b>',
    "event.club": '<a href="javascript:alert(1)">club</a>',
    "designs.d.title": '<font size="80">HUGE</font> a<b',
    "kits.builders": '<img src="http://127.0.0.1:9/x.png"/>',
}


def test_markup_in_spec_text_prints_literally(tmp_path, capsys):
    """pypdf reads the text back as written; the PDFs hold no image and no link."""
    edits = {k: json.dumps([v] if k == "kits.builders" else v) for k, v in PAYLOADS.items()}
    text = spec_text(**edits).replace('builders = ["Ada"]\n', "")
    (tmp_path / "club.toml").write_text(text, encoding="utf-8")
    assert read_spec_text(text).kits[0].builder == PAYLOADS["kits.builders"]
    code, _, err = run_cli(["packet", str(tmp_path / "club.toml"), "-o", str(tmp_path / "out"),
                            "--model", "closed_form"], capsys)
    assert code == 0, err
    reader = PdfReader(tmp_path / "out" / "sheets.pdf")
    found = " ".join(" ".join(page.extract_text().split()) for page in reader.pages)
    for payload in PAYLOADS.values():
        assert " ".join(payload.split()) in found, payload
    for pdf in ("sheets.pdf", "labels.pdf"):
        for page in PdfReader(tmp_path / "out" / pdf).pages:
            assert "/Annots" not in page  # no link annotations
            resources = page.get("/Resources", {})
            xobjects = resources.get("/XObject", {}) if resources else {}
            for name in xobjects or {}:
                assert xobjects[name].get_object().get("/Subtype") != "/Image", name


def test_long_words_wrap_on_the_sheets(tmp_path, capsys):
    word = "W" * 200
    text = spec_text(**{"designs.d.title": f'"{word}"', "event.name": f'"{word}"'})
    (tmp_path / "club.toml").write_text(text, encoding="utf-8")
    code, _, err = run_cli(["packet", str(tmp_path / "club.toml"), "-o", str(tmp_path / "out"),
                            "--model", "closed_form"], capsys)
    assert code == 0, err
    found = "".join("".join(p.extract_text().split()) for p in
                    PdfReader(tmp_path / "out" / "sheets.pdf").pages)
    assert word in found  # split across lines, every character printed


# --------------------------------------------------------------------------- check is a pre-flight


@pytest.mark.parametrize("edit, words", [
    ({"labels.stock": "{rows = 1, columns = 1, label_width_mm = 30, label_height_mm = 20, "
                      "page = \"A4\"}"}, "too small"),
    ({"event.record_url": '"https://club.example.org/' + "r" * 150 + '/{leg}.html"'},
     "QR version"),
])
def test_check_refuses_what_packet_refuses(tmp_path, capsys, edit, words):
    (tmp_path / "club.toml").write_text(spec_text(**edit), encoding="utf-8")
    code, _, check_err = run_cli(["check", str(tmp_path / "club.toml"), "--model",
                                  "closed_form"], capsys)
    assert code == 1 and words in check_err and "club.toml: labels.stock" in check_err
    code, _, packet_err = run_cli(["packet", str(tmp_path / "club.toml"), "-o",
                                   str(tmp_path / "out"), "--model", "closed_form"], capsys)
    assert code == 1 and words in packet_err and not (tmp_path / "out").exists()
