"""Spec validation: every problem names the file, key path, bad value and what is allowed."""

import pytest

from buildsheet.errors import SpecError
from buildsheet.spec.reader import read_spec_text

GOOD = """
[event]
name = "Test day"
date = "2027-01-01"
region = 2
units = "imperial"
paper = "letter"

[designs.fan]
kind = "fan"
mount = "inverted_v"
apex_height = "25 ft"
end_height = "6 ft 3 in"
wire = "awg14-pvc"
  [[designs.fan.elements]]
  band = "80m"
  frequency = "3.9 MHz"
  [[designs.fan.elements]]
  band = "40m"
  bearing = 90

[[kits]]
design = "fan"
count = 3
"""


def _errors(text: str) -> str:
    with pytest.raises(SpecError) as info:
        read_spec_text(text, "club.toml")
    return str(info.value)


def test_good_spec():
    d = read_spec_text(GOOD, "club.toml")
    fan = d.design("fan")
    assert fan.apex_height_m == pytest.approx(25 * 0.3048)
    assert fan.elements[1].end_height_m == pytest.approx(75 * 0.0254)
    assert [e.key for e in fan.elements] == ["80m", "40m"]
    assert fan.elements[0].frequency_hz == pytest.approx(3.9e6)
    assert fan.elements[1].frequency_hz == pytest.approx(7.15e6)  # the band default
    assert [k.kit_id for k in d.kits] == ["K01", "K02", "K03"]
    # Common practice: the termination default is about 9 in (23 cm) of wire.
    assert fan.allowances.termination_m == pytest.approx(0.23)
    assert fan.allowances.trim_fraction == pytest.approx(0.03)
    assert d.warnings == ()


def test_malformed_toml_names_line():
    msg = _errors(GOOD + "\n[broken\n")
    assert "club.toml" in msg and "line" in msg


def test_unknown_key_suggests():
    msg = _errors(GOOD.replace("apex_height =", "apex_hieght ="))
    assert "designs.fan.apex_hieght" in msg and "did you mean 'apex_height'" in msg
    assert "designs.fan.apex_height: missing" in msg


def test_every_problem_reported_once():
    text = GOOD.replace('"25 ft"', '"-3 m"').replace('band = "40m"', 'band = "41m"')
    msg = _errors(text)
    assert "designs.fan.apex_height" in msg and "greater than zero" in msg
    assert "designs.fan.elements[1].band" in msg and "'41m' is not allowed" in msg
    assert "did you mean '40m'" in msg


@pytest.mark.parametrize("old, new, where, words", [
    ('"25 ft"', '"0 m"', "apex_height", "greater than zero"),
    ('"6 ft 3 in"', '"30 ft"', "end_height", "above the apex"),
    ('region = 2', 'region = 4', "event.region", "choose one of: 1, 2, 3"),
    ('"25 ft"', '"25"', "apex_height", "needs a unit"),
    ('count = 3', 'count = 0', "kits[0].count", "out of range"),
    ('wire = "awg14-pvc"', 'wire = "awg14-pcv"', "designs.fan.wire", "did you mean"),
])
def test_bad_values(old, new, where, words):
    msg = _errors(GOOD.replace(old, new))
    assert where in msg and words in msg


def test_missing_field():
    msg = _errors(GOOD.replace('wire = "awg14-pvc"\n', ""))
    assert "designs.fan.wire: missing" in msg


def test_out_of_band_frequency_is_a_warning():
    d = read_spec_text(GOOD.replace('frequency = "3.9 MHz"', 'frequency = "4.1 MHz"'), "c.toml")
    assert any("outside the 80m band" in w for w in d.warnings)


def test_custom_wire():
    text = GOOD + """
[wires.mywire]
gauge = 18
insulation = "0.5 mm"
permittivity = 2.3
""".replace("", "")
    text = text.replace('wire = "awg14-pvc"', 'wire = "mywire"')
    d = read_spec_text(text, "c.toml")
    w = d.design("fan").wire
    # ASTM B258: AWG 18 is 1.024 mm.
    assert w.conductor_diameter_m == pytest.approx(1.0237e-3, rel=1e-3)
    assert w.insulation_eps_r == 2.3


@pytest.mark.parametrize("url, words", [
    ("ftp://x.example/{element}", "must start with http"),
    ("https://x.example/{elemnt}.html", "allowed: {kit}, {element}, {leg}"),
])
def test_record_url_template_checked(url, words):
    msg = _errors(GOOD.replace('paper = "letter"', f'paper = "letter"\nrecord_url = "{url}"'))
    assert "event.record_url" in msg and words in msg


def test_site_ground_class_measured_and_model():
    # Issue 10 part 5: "average ground" (permittivity 13, 5 mS/m; common practice), a measured
    # ground from [site] permittivity and conductivity, and the ground model by name.
    d = read_spec_text(GOOD + '\n[site]\nground = "average"\n', "club.toml")
    assert d.site.ground.ground_class.eps_r == 13.0 and d.site.ground.model == "sommerfeld"
    d = read_spec_text(GOOD + '\n[site]\npermittivity = 12\nconductivity = "8 mS/m"\n',
                       "club.toml")
    g = d.site.ground.ground_class
    assert (g.eps_r, g.sigma) == (12.0, 8e-3) and "measured" in d.site.ground.title
    d = read_spec_text(GOOD + '\n[site]\nground = "wet"\nground_model = "fresnel-image"\n',
                       "club.toml")
    assert d.site.ground.model == "fresnel-image"


@pytest.mark.parametrize("site,words", [
    ('permittivity = 12', ["site.conductivity", "missing"]),
    ('permittivity = 12\nconductivity = "8 ohm"', ["site.conductivity", "mS/m"]),
    ('permittivity = 0.5\nconductivity = 0.01', ["site.permittivity", "out of range"]),
    ('ground = "wet"\npermittivity = 12\nconductivity = 0.01', ["site.ground", "not both"]),
    ('ground_model = "exact"', ["site.ground_model", "sommerfeld", "fresnel-image"]),
])
def test_bad_site_ground(site, words):
    text = _errors(GOOD + f"\n[site]\n{site}\n")
    assert "club.toml" in text and all(w in text for w in words), text


def test_ground_model_without_real_ground_warns():
    # DESIGN.md: never drop an option silently.
    d = read_spec_text(GOOD + '\n[site]\nground = "perfect"\nground_model = "normal-image"\n',
                       "club.toml")
    assert any("site.ground_model" in w and "real ground" in w for w in d.warnings)
