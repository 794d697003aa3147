"""Read a TOML spec into a validated Design. Every problem names file, key path, value and
what is allowed; all problems are reported together (SpecError), then nothing is built.

Types are never coerced: a boolean is not a region, a table is not a name, zero means zero.
Free text is capped in length (spec.values); lengths and powers have upper bounds.
"""

from __future__ import annotations

import difflib
import hashlib
import math
import re
import tomllib
from collections.abc import Callable, Mapping
from pathlib import Path
from typing import TYPE_CHECKING, Any

from buildsheet.calc.exposure import DUTY_FACTORS
from buildsheet.calc.feedline import COAX_TYPES
from buildsheet.constants import C0
from buildsheet.em.ground import (
    DEFAULT_GROUND_MODEL,
    FREE_SPACE,
    GROUND_CLASSES,
    GROUND_MODELS,
    PERFECT_GROUND,
    Ground,
    measured_class,
    real_ground,
)
from buildsheet.errors import Problem, SpecError
from buildsheet.spec import bands, values
from buildsheet.spec.design import (
    Allowances,
    AntennaDesign,
    Design,
    ElementSpec,
    Event,
    ExposureSettings,
    Kit,
    LabelSettings,
    Site,
    SpoolSpec,
)
from buildsheet.spec.units import format_frequency, parse_frequency, parse_length
from buildsheet.spec.values import kind_of, shown
from buildsheet.spec.wires import BUILTIN_WIRES, MATERIALS, WireType, awg_diameter

if TYPE_CHECKING:  # calc.labels imports the spec package: no import at run time
    from buildsheet.calc.labels import LabelStock

_TOP_KEYS = ("event", "site", "wires", "designs", "kits", "labels", "exposure", "stock")
_EVENT_KEYS = ("name", "club", "date", "region", "units", "paper", "record_url", "layout",
               "station_url")
_SITE_KEYS = ("ground", "width", "depth", "permittivity", "conductivity", "ground_model")
_WIRE_KEYS = ("title", "gauge", "diameter", "material", "stranding", "insulation",
              "permittivity", "cladding_fraction")
_DESIGN_KEYS = ("title", "kind", "mount", "apex_height", "end_height", "wire", "elements",
                "trim_allowance", "min_trim", "termination", "feed_allowance", "cord_knot",
                "cord_hitch", "coax", "coax_length", "tie_off_angle")
_ELEMENT_KEYS = ("band", "frequency", "bearing", "end_height")
_KIT_KEYS = ("design", "count", "builders", "first")
_LABEL_KEYS = ("stock", "start_cell", "code")
_EXPOSURE_KEYS = ("power", "mode", "transmit_fraction", "regime", "transmit_fraction_6min",
                  "transmit_fraction_30min")
_STOCK_KEYS = ("material", "length", "count")
_GROUNDS = ("free_space", "perfect", *GROUND_CLASSES)
_MODES = tuple(DUTY_FACTORS)
_COAX = tuple(COAX_TYPES)

#: Largest value allowed per length key, m: far beyond any portable wire antenna build, small
#: enough that a typo (or "1e39 m") is caught with its key rather than deep in the model.
MAX_LENGTH_M: dict[str, float] = {
    "apex_height": 60.0, "end_height": 60.0, "trim_allowance": 5.0, "termination": 2.0,
    "feed_allowance": 2.0, "cord_knot": 5.0, "cord_hitch": 5.0, "coax_length": 300.0,
    "width": 10_000.0, "depth": 10_000.0, "length": 10_000.0, "insulation": 5e-3,
    "diameter": 12e-3,
}
#: Thinnest conductor allowed, m (AWG 40 is 0.080 mm, ASTM B258).
MIN_DIAMETER_M: float = 0.05e-3
#: A named band's frequency may lie this far outside the band edges (a fraction of the edge)
#: with a warning; beyond it the spec is refused (a typo, or the wrong band).
BAND_SLACK: float = 0.10

DEFAULTS = {
    "trim_allowance": "3 %",  # common practice: cut 3-5 % long
    "min_trim": "1 %",
    "termination": "23 cm",  # common practice: about 9 in of wire round the end insulator
    "feed_allowance": "10 cm",
    "cord_knot": "30 cm",
    "cord_hitch": "50 cm",
}


class _Reader:
    """Collects problems while reading one spec file."""

    def __init__(self, source: str):
        self.source = source
        self.problems: list[Problem] = []
        self.warnings: list[str] = []

    def bad(self, path: str, message: str) -> None:
        self.problems.append(Problem(f"{self.source}: {path}", message))

    def keys(self, table: Any, path: str, allowed: tuple[str, ...]) -> Mapping[str, Any]:
        if not isinstance(table, Mapping):
            self.bad(path, f"expected a table ([{path}] with keys {', '.join(allowed[:4])}, ...), "
                     f"got {kind_of(table)} {shown(table)}")
            return {}
        for key in table:
            if key not in allowed:
                hint = difflib.get_close_matches(key, allowed, n=1)
                tip = f"; did you mean '{hint[0]}'?" if hint else ""
                self.bad(f"{path}.{key}" if path else key,
                         f"unknown key '{key[:40]}'{tip}; allowed: {', '.join(allowed)}")
        return table

    def required(self, table: Mapping[str, Any], key: str, path: str) -> Any:
        if key not in table:
            self.bad(f"{path}.{key}", "missing; this field is required")
            return None
        return table[key]

    def convert(self, value: Any, path: str, parse: Callable[[Any], Any], *,
                positive: bool = False, allow_zero: bool = False) -> Any:
        if value is None:
            return None
        try:
            result = parse(value)
        except (ValueError, TypeError, ArithmeticError) as exc:
            self.bad(path, str(exc))
            return None
        if positive and not (result > 0 or (allow_zero and result == 0)):
            need = "zero or more" if allow_zero else "greater than zero"
            self.bad(path, f"{shown(value)} is not allowed: the value must be {need}")
            return None
        return result

    def length(self, value: Any, path: str, *, allow_zero: bool = False,
               least: float = 0.0) -> float | None:
        """A length in m, above zero (or zero), at most MAX_LENGTH_M of the path's last key."""
        if value is not None and not isinstance(value, str):
            self.bad(path, f'expected a length in quotes like "7.5 m" or "230 mm", got '
                     f"{kind_of(value)} {shown(value)}" + (
                         f'; write "{value} m"' if kind_of(value) in ("an integer", "a number")
                         else ""))
            return None
        metres = self.convert(value, path, parse_length, positive=True, allow_zero=allow_zero)
        most = MAX_LENGTH_M.get(path.rpartition(".")[2])
        if metres is not None and most is not None and metres > most:
            self.bad(path, f"{shown(value)} is too large; allowed at most {_metres(most)}")
            return None
        if metres is not None and metres < least and not (allow_zero and metres == 0):
            self.bad(path, f"{shown(value)} is too small; allowed at least {_metres(least)}")
            return None
        return metres

    def text(self, table: Mapping[str, Any], key: str, path: str, default: str,
             limit: int = values.NAME_MAX) -> str:
        """Free text at ``table[key]`` (default if absent); problems recorded, default returned."""
        if key not in table:
            return default
        result = self.convert(table[key], f"{path}.{key}" if path else key, values.text(limit))
        return default if result is None else result

    def choice(self, value: Any, path: str, allowed: tuple[Any, ...]) -> Any:
        """``value`` if it is one of ``allowed`` and of the same type (true is not 1)."""
        if not any(type(value) is type(a) and value == a for a in allowed):
            hint = difflib.get_close_matches(str(value), [str(a) for a in allowed], n=1) \
                if isinstance(value, str) else []
            tip = f" (did you mean '{hint[0]}'?)" if hint else ""
            self.bad(path, f"{shown(value)} is not allowed{tip}; choose one of: "
                     f"{', '.join(shown(a) for a in allowed)}")
            return None
        return value


def _metres(value: float) -> str:
    """A bound in words: "5 m", "2 mm"."""
    return f"{value:g} m" if value >= 1 else f"{value * 1000:g} mm"


def _either(value: Any, default: Any) -> Any:
    """``value`` unless it is None (a zero or empty value stays as given)."""
    return default if value is None else value


def _conductivity(value: Any) -> float:
    """Ground conductivity: a number in S/m, or a string "5 mS/m" / "0.005 S/m", S/m.

    TypeError for a value of another type, ValueError for a bad number or unit (both reported
    by ``_Reader.convert``)."""
    if isinstance(value, bool):
        raise TypeError(f"expected a conductivity such as \"5 mS/m\", got {value!r}")
    if isinstance(value, (int, float)):
        number, scale = float(value), 1.0
    elif isinstance(value, str):
        text = value.strip().replace(" ", "")
        for unit, factor in (("mS/m", 1e-3), ("uS/m", 1e-6), ("S/m", 1.0)):
            if text.endswith(unit):
                number, scale = float(text[: -len(unit)]), factor
                break
        else:
            raise ValueError(f"{value!r}: give a conductivity in S/m or mS/m, e.g. \"5 mS/m\"")
    else:
        raise TypeError(f"expected a conductivity such as \"5 mS/m\", got {value!r}")
    sigma = number * scale
    if not (0.0 <= sigma <= 10.0) or not math.isfinite(sigma):
        raise ValueError(f"{value!r} is out of range; allowed 0 to 10 S/m")
    return sigma


def _read_ground(r: _Reader, st: Mapping[str, Any]) -> Ground:
    """The site ground: a named class (site.ground), or a measured ground (site.permittivity
    with site.conductivity), entered by site.ground_model (default: the Sommerfeld half-space)."""
    model = r.choice(st.get("ground_model", DEFAULT_GROUND_MODEL), "site.ground_model",
                     GROUND_MODELS) or DEFAULT_GROUND_MODEL
    measured = [k for k in ("permittivity", "conductivity") if k in st]
    if measured:
        if "ground" in st:
            r.bad("site.ground", "give either site.ground or site.permittivity with "
                  "site.conductivity (a measured ground), not both")
        if len(measured) == 1:
            other = "conductivity" if measured[0] == "permittivity" else "permittivity"
            r.bad(f"site.{other}", f"missing; a measured ground needs site.{other} too")
            return FREE_SPACE
        eps = r.convert(st["permittivity"], "site.permittivity", values.number(float, 1.0, 100.0))
        sigma = r.convert(st["conductivity"], "site.conductivity", _conductivity)
        if eps is None or sigma is None:
            return FREE_SPACE
        return Ground("real", measured_class(float(eps), float(sigma)), model)
    ground_key = r.choice(st.get("ground", "medium_dry"), "site.ground", _GROUNDS)
    if ground_key in GROUND_CLASSES:
        return real_ground(ground_key, model)
    if "ground_model" in st and ground_key:
        r.warnings.append(f"{r.source}: site.ground_model: {st['ground_model']!r} applies to a "
                          f"real ground only; site.ground {ground_key!r} does not use it")
    return {"free_space": FREE_SPACE, "perfect": PERFECT_GROUND}.get(ground_key or "", FREE_SPACE)


def _power(text: Any) -> float:
    m = re.fullmatch(r"\s*(\d+(?:\.\d*)?)\s*(W|kW)\s*", str(text)) if isinstance(text, str) else None
    if not m:
        raise ValueError(f"expected a power like \"100 W\", got {text!r}")
    return float(m.group(1)) * (1000.0 if m.group(2) == "kW" else 1.0)


def _read_wire(r: _Reader, key: str, table: Any) -> WireType | None:
    path = f"wires.{key}"
    t = r.keys(table, path, _WIRE_KEYS)
    if "gauge" in t and "diameter" in t:
        r.bad(path, "give either 'gauge' (AWG) or 'diameter', not both")
    if "gauge" in t:
        gauge = r.convert(t["gauge"], f"{path}.gauge", values.number(int, -3, 40))
        diameter = awg_diameter(gauge) if gauge is not None else None
    elif "diameter" in t:
        diameter = r.length(t["diameter"], f"{path}.diameter", least=MIN_DIAMETER_M)
    else:
        r.bad(path, "missing conductor size: give 'gauge' (AWG number) or 'diameter'")
        diameter = None
    material = r.choice(t.get("material", "copper"), f"{path}.material", MATERIALS)
    insulation = r.length(t.get("insulation", "0 mm"), f"{path}.insulation", allow_zero=True)
    eps = r.convert(t.get("permittivity", 1.0 if not insulation else 3.5),
                    f"{path}.permittivity", values.number(float, 1.0, 20.0))
    cladding = r.convert(t.get("cladding_fraction", 0.1 if material == "copper_clad_steel" else 0.0),
                         f"{path}.cladding_fraction", values.number(float, 0.0, 1.0))
    if diameter is None or insulation is None or None in (material, eps, cladding):
        return None
    title = r.text(t, "title", path, key, values.TITLE_MAX)
    stranding = r.text(t, "stranding", path, "", values.NOTE_MAX)
    return WireType(key, title, diameter, material, stranding, insulation, float(eps),
                    float(cladding))


def _read_element(r: _Reader, path: str, table: Any, region: int,
                  default_end: float | None) -> ElementSpec | None:
    t = r.keys(table, path, _ELEMENT_KEYS)
    band = None
    if "band" in t:
        names = bands.band_names(region)
        elsewhere = [g for g in bands.REGIONS if g != region and t["band"] in bands.band_names(g)]
        if isinstance(t["band"], str) and t["band"] not in names and elsewhere:
            r.bad(f"{path}.band", f"{shown(t['band'])} is not a band of ITU region {region} "
                  f"(event.region); it is allowed in region {' and '.join(map(str, elsewhere))}. "
                  f"Choose one of: {', '.join(names)}")
            return None
        name = r.choice(t["band"], f"{path}.band", names)
        band = bands.get_band(name, region) if name else None
        if name is None:
            return None
    frequency = r.convert(t.get("frequency"), f"{path}.frequency", parse_frequency, positive=True)
    if "band" not in t and frequency is None:
        if "frequency" not in t:
            r.bad(path, "an element needs 'band' (e.g. \"40m\") or 'frequency' (e.g. \"7.15 MHz\")")
        return None
    if frequency is not None and not (1.0e6 <= frequency <= 30.0e6):
        r.bad(f"{path}.frequency", f"{t['frequency']!r} is outside HF; allowed 1-30 MHz")
        return None
    if band is not None and frequency is not None and not (
            band.low_hz * (1 - BAND_SLACK) <= frequency <= band.high_hz * (1 + BAND_SLACK)):
        r.bad(f"{path}.frequency", f"{shown(t['frequency'])} is far outside the {band.name} band "
              f"({format_frequency(band.low_hz)} to {format_frequency(band.high_hz)}, ITU region "
              f"{region}); allowed within {BAND_SLACK:.0%} of its edges, or remove 'band' to "
              "design for this frequency alone")
        return None
    if band is None and frequency is not None:
        band = bands.band_containing(frequency, region)
    if frequency is None:
        frequency = band.design_hz if band is not None else None
    if frequency is None:
        return None
    if band is None:
        r.warnings.append(f"{r.source}: {path}.frequency: {t['frequency']} is outside every "
                          f"amateur band of ITU region {region}; check before transmitting")
    elif not band.contains(frequency):
        r.warnings.append(f"{r.source}: {path}.frequency: {t['frequency']} is outside the "
                          f"{band.name} band ({band.low_hz / 1e3:g}-{band.high_hz / 1e3:g} kHz, "
                          f"ITU region {region})")
    key = band.name if band and "band" in t else f"{round(frequency / 1e3):d}k"
    bearing = r.convert(t.get("bearing", 0), f"{path}.bearing", values.number(float, 0.0, 360.0))
    end = r.length(t["end_height"], f"{path}.end_height") if "end_height" in t else default_end
    if bearing is None or end is None:
        return None
    return ElementSpec(key, band, frequency, float(bearing) % 360.0, end)


def _read_design(r: _Reader, key: str, table: Any, wires: dict[str, WireType],
                 region: int) -> AntennaDesign | None:
    path = f"designs.{key}"
    t = r.keys(table, path, _DESIGN_KEYS)
    kind = r.choice(t.get("kind", "dipole"), f"{path}.kind", ("dipole", "fan"))
    mount = r.choice(t.get("mount", "inverted_v"), f"{path}.mount", ("inverted_v", "flat"))
    title = r.text(t, "title", path, key, values.TITLE_MAX)
    apex = r.length(r.required(t, "apex_height", path), f"{path}.apex_height")
    end = apex if mount == "flat" else r.length(r.required(t, "end_height", path),
                                                f"{path}.end_height")
    if mount == "flat" and "end_height" in t:
        r.bad(f"{path}.end_height", "a flat dipole has its ends at the apex height; "
              "remove 'end_height' or use mount = \"inverted_v\"")
    wire_key = r.required(t, "wire", path)
    wire = None
    if wire_key is not None:
        wire = wires.get(wire_key) if r.choice(wire_key, f"{path}.wire", tuple(wires)) else None
    elements_raw = r.required(t, "elements", path)
    elements: list[ElementSpec] = []
    if elements_raw is not None and not isinstance(elements_raw, list):
        r.bad(f"{path}.elements", "expected a list of element tables ([[designs.NAME.elements]])")
    elif elements_raw is not None:
        if not elements_raw:
            r.bad(f"{path}.elements", "a design needs at least one element")
        for i, raw in enumerate(elements_raw):
            e = _read_element(r, f"{path}.elements[{i}]", raw, region, end)
            if e is not None:
                elements.append(e)
    if kind == "dipole" and len(elements) > 1:
        r.bad(f"{path}.kind", f"'dipole' has one element but {len(elements)} are listed; "
              "use kind = \"fan\" for several dipoles on one feed point")
    keys = [e.key for e in elements]
    for dup in sorted({k for k in keys if keys.count(k) > 1}):
        r.bad(f"{path}.elements", f"two elements share the key '{dup}'; each band once per design")
    if apex is not None:
        for i, e in enumerate(elements):
            if e.end_height_m > apex:
                r.bad(f"{path}.elements[{i}].end_height" if e.end_height_m != end else
                      f"{path}.end_height",
                      f"end height {e.end_height_m:g} m is above the apex height {apex:g} m; "
                      "the ends of an inverted V must be at or below the apex")
    trim_text = t.get("trim_allowance", DEFAULTS["trim_allowance"])
    trim = r.convert(trim_text, f"{path}.trim_allowance", values.percent_or_length)
    if trim is not None and trim[1] is not None:
        trim = _trim_length(r, f"{path}.trim_allowance", trim_text, trim[1], elements)
    min_trim = r.convert(t.get("min_trim", DEFAULTS["min_trim"]), f"{path}.min_trim",
                         values.percent_or_length)
    if min_trim is not None and min_trim[0] is None:
        r.bad(f"{path}.min_trim", f"{shown(t.get('min_trim'))} is not allowed: give the minimum "
              "trim as a percentage of the leg, e.g. \"1 %\"")
        min_trim = None
    termination, feed_allowance, cord_knot, cord_hitch = (
        r.length(t.get(name, DEFAULTS[name]), f"{path}.{name}", allow_zero=True)
        for name in ("termination", "feed_allowance", "cord_knot", "cord_hitch"))
    coax = r.choice(t.get("coax", "rg58"), f"{path}.coax", _COAX)
    coax_length = r.length(t.get("coax_length", "15 m"), f"{path}.coax_length")
    angle = r.convert(t.get("tie_off_angle", 45.0), f"{path}.tie_off_angle",
                      values.number(float, 10.0, 80.0))
    if (apex is None or end is None or wire is None or coax_length is None
            or termination is None or feed_allowance is None or cord_knot is None
            or cord_hitch is None
            or any(v is None for v in (kind, mount, trim, min_trim, coax, angle))
            or not isinstance(elements_raw, list) or len(elements) != len(elements_raw)):
        return None
    allowances = Allowances(trim[0], trim[1], min_trim[0], termination, feed_allowance,
                            cord_knot, cord_hitch, "trim_allowance" in t)
    return AntennaDesign(key, title, kind, mount, apex, wire, tuple(elements),
                         allowances, coax, coax_length, float(angle))


def kit_id_for(number: int) -> str:
    """The kit ID of kit ``number``: "K01" ... "K99", "K100" ... (never re-padded, so an ID once
    printed on a label stays the same however many kits the spec grows to)."""
    return f"K{number:02d}"


def _trim_length(r: _Reader, path: str, text: Any, metres: float,
                 elements: list[ElementSpec]) -> tuple[None, float] | None:
    """A trim allowance given as a length: zero or more, at most MAX_LENGTH_M, and less than
    half of every element's leg (a quarter wave, C0 / 4f, is the leg's rough length)."""
    if metres < 0:
        r.bad(path, f"{shown(text)} is not allowed: the value must be zero or more")
        return None
    most = MAX_LENGTH_M["trim_allowance"]
    for e in elements:
        most = min(most, 0.5 * C0 / (4.0 * e.frequency_hz))
    if metres > most:
        r.bad(path, f"{shown(text)} is longer than half a leg (a leg of this design is about "
              f"{2 * most:.2f} m); allowed at most {_metres(round(most, 3))}")
        return None
    return None, metres


def _read_kits(r: _Reader, raw: Any, designs: Mapping[str, AntennaDesign | None]) -> list[Kit]:
    if not isinstance(raw, list) or not raw:
        r.bad("kits", "expected one or more [[kits]] tables, each with 'design' and 'count'")
        return []
    entries = []
    for i, table in enumerate(raw):
        path = f"kits[{i}]"
        t = r.keys(table, path, _KIT_KEYS)
        design = r.choice(r.required(t, "design", path), f"{path}.design", tuple(designs))
        count = r.convert(t.get("count", 1), f"{path}.count", values.number(int, 1, 2000))
        builders = t.get("builders", [])
        if not isinstance(builders, list):
            r.bad(f"{path}.builders", f'expected a list of names like ["Ada", "Ben"], got '
                  f"{kind_of(builders)} {shown(builders)}")
            builders = []
        names = [r.convert(b, f"{path}.builders[{j}]", values.text(values.NAME_MAX))
                 for j, b in enumerate(builders)]
        builders = [n or "" for n in names]
        if count is not None and len(builders) > count:
            r.bad(f"{path}.builders", f"{len(builders)} names for {count} kits; "
                  "list at most one builder per kit")
        first = r.convert(t.get("first"), f"{path}.first", values.number(int, 1, 9999))
        entries.append((design, count, builders, first, path))
    kits, used, number = [], set(), 1
    for design, count, builders, first, path in entries:
        if design is None or count is None:
            continue
        number = first if first is not None else number
        for j in range(count):
            kit_id = kit_id_for(number)
            if kit_id in used:
                r.bad(f"{path}.first", f"kit number {number} is used twice; choose another 'first'")
            used.add(kit_id)
            kits.append(Kit(kit_id, design, builders[j] if j < len(builders) else ""))
            number += 1
    return kits


def read_spec_text(text: str, source: str = "spec.toml") -> Design:
    """Validate spec ``text`` (TOML) and return the Design. Raises SpecError listing problems."""
    r = _Reader(source)
    try:
        raw = tomllib.loads(text.removeprefix("\ufeff"))
    except tomllib.TOMLDecodeError as exc:
        raise SpecError([Problem(source, f"not valid TOML: {exc}")]) from None
    r.keys(raw, "", _TOP_KEYS)
    ev = r.keys(raw.get("event", {}), "event", _EVENT_KEYS)
    if "event" not in raw:
        r.bad("event", "missing; the [event] table (name, date, region, units, paper) is required")
    region = r.choice(ev.get("region", 2), "event.region", bands.REGIONS) or 2
    units = r.choice(ev.get("units", "metric"), "event.units", ("metric", "imperial"))
    paper = r.choice(ev.get("paper", "a4"), "event.paper", ("a4", "letter"))
    layout = r.choice(ev.get("layout", "per_kit"), "event.layout", ("per_kit", "per_design"))
    url = _record_url(r, ev.get("record_url"))
    station = _station_url(r, ev.get("station_url"))
    day = r.convert(ev.get("date"), "event.date", values.date) if "date" in ev else ""
    event = Event(r.text(ev, "name", "event", "Build day"), r.text(ev, "club", "event", ""),
                  day or "", region, units or "metric", paper or "a4", url, layout or "per_kit",
                  station)

    st = r.keys(raw.get("site", {}), "site", _SITE_KEYS)
    ground = _read_ground(r, st)
    site = Site(ground, r.length(st["width"], "site.width") if "width" in st else None,
                r.length(st["depth"], "site.depth") if "depth" in st else None)

    wires = dict(BUILTIN_WIRES)
    wire_tables = raw.get("wires", {})
    if isinstance(wire_tables, Mapping):
        for key, table in wire_tables.items():
            if not re.fullmatch(r"[A-Za-z0-9_.-]{1,40}", key):
                r.bad(f"wires.{key[:40]}", "wire names use letters, digits, '.', '-' or '_' "
                      "(at most 40)")
                continue
            w = _read_wire(r, key, table)
            if w is not None:
                wires[key] = w
    else:
        r.bad("wires", "expected tables [wires.NAME]")

    design_tables = raw.get("designs")
    designs: dict[str, AntennaDesign | None] = {}
    if not isinstance(design_tables, Mapping) or not design_tables:
        r.bad("designs", "missing; define at least one [designs.NAME] table")
    else:
        for key, table in design_tables.items():
            if not re.fullmatch(r"[A-Za-z0-9_-]{1,24}", key):
                r.bad(f"designs.{key[:40]}", "design names use letters, digits, '-' or '_' "
                      "(at most 24)")
                continue
            designs[key] = _read_design(r, key, table, wires, region)
    kits = _read_kits(r, raw.get("kits"), designs)

    lb = r.keys(raw.get("labels", {}), "labels", _LABEL_KEYS)
    stock = _label_stock(r, lb.get("stock", "sheet-letter" if paper == "letter" else "sheet-a4"))
    start = (None if "start_cell" not in lb else
             r.convert(lb["start_cell"], "labels.start_cell", values.number(int, 0, 999)))
    if stock is not None and start is not None:
        from buildsheet.calc.labels import check_start_cell

        try:
            check_start_cell(stock, start, where=f"{source}: labels.start_cell")
        except SpecError as exc:
            r.problems.extend(exc.problems)

    code = _label_code(r, lb, "record_url" in ev or "station_url" in ev)

    ex = r.keys(raw.get("exposure", {}), "exposure", _EXPOSURE_KEYS)
    power = r.convert(ex.get("power", "100 W"), "exposure.power", values.power)
    if power is not None and power > values.POWER_WARN_W:
        r.warnings.append(f"{source}: exposure.power: {shown(ex['power'])} is above 1.5 kW PEP, "
                          "the US amateur limit (47 CFR 97.313); check your licence, and the "
                          "exposure distances grow with the power")
    exposure = ExposureSettings(
        _either(power, 100.0),
        r.choice(ex.get("mode", "ssb"), "exposure.mode", _MODES) or "ssb",
        _either(r.convert(ex.get("transmit_fraction", 0.5), "exposure.transmit_fraction",
                          values.number(float, 0.0, 1.0)), 0.5),
        r.choice(ex.get("regime", "fcc"), "exposure.regime", ("fcc", "icnirp2020", "both")) or "fcc",
        *(r.convert(ex[k], f"exposure.{k}", values.number(float, 0.0, 1.0)) if k in ex else None
          for k in ("transmit_fraction_6min", "transmit_fraction_30min")),
    )
    spools = []
    stock_raw = raw.get("stock", [])
    if not isinstance(stock_raw, list):
        r.bad("stock", "expected [[stock]] tables with material, length, count")
        stock_raw = []
    for i, table in enumerate(stock_raw):
        path = f"stock[{i}]"
        t = r.keys(table, path, _STOCK_KEYS)
        material = r.required(t, "material", path)
        if material is not None:
            material = r.choice(material, f"{path}.material", (*wires, "cord"))
        length = r.length(r.required(t, "length", path), f"{path}.length")
        count = r.convert(t.get("count", 1), f"{path}.count", values.number(int, 1, 999))
        if material is not None and length is not None and count is not None:
            spools.append(SpoolSpec(material, length, count))

    if r.problems:
        raise SpecError(list(dict.fromkeys(r.problems)))  # each problem once, in order
    return Design(source, hashlib.sha256(text.encode()).hexdigest(), event, site, wires,
                  tuple(d for d in designs.values() if d is not None), tuple(kits),
                  LabelSettings(stock, start, code), exposure, tuple(spools), tuple(r.warnings))


def _label_code(r: _Reader, lb: Mapping[str, Any], link: bool) -> str:
    """What the labels' QR codes hold: ``labels.code`` ("id" or "link"); by default "link"
    when the event gives a record or station address (``link``), else "id"."""
    from buildsheet.calc.labels import CODE_KINDS

    if "code" not in lb:
        return "link" if link else "id"
    code = r.choice(lb["code"], "labels.code", CODE_KINDS)
    if code == "link" and not link:
        r.bad("labels.code", '"link" needs an address to link to: set event.record_url (the '
              'record site) or event.station_url (the build-day station), or use "id" (the '
              "leg ID)")
    return code or "id"


def _label_stock(r: _Reader, value: Any) -> LabelStock | None:
    from buildsheet.calc import labels

    if isinstance(value, str):
        stock = r.choice(value, "labels.stock", tuple(labels.STOCKS))
        return labels.STOCKS.get(stock) if stock else None
    if not isinstance(value, Mapping):
        r.bad("labels.stock", f"expected a stock name ({', '.join(map(shown, labels.STOCKS))}) or "
              f"a table of custom geometry in mm, got {kind_of(value)} {shown(value)}")
        return None
    try:
        return labels.stock_from_mapping(value, f"{r.source}: labels.stock")
    except SpecError as exc:
        r.problems.extend(exc.problems)
        return None


def _station_url(r: _Reader, url: Any) -> str | None:
    """The build-day station's address (labels then lead to <station_url>/e/<element ID>)."""
    if url is None:
        return None
    from buildsheet.calc.labels import check_station_url

    url = r.convert(url, "event.station_url", values.text(values.URL_MAX))
    if url is None:
        return None
    try:
        return check_station_url(url, f"{r.source}: event.station_url")
    except SpecError as exc:
        r.problems.extend(exc.problems)
        return None


def _record_url(r: _Reader, url: Any) -> str | None:
    """The record URL template: http(s), at most URL_MAX characters, known placeholders."""
    if url is None:
        return None
    from buildsheet.calc.labels import record_url

    url = r.convert(url, "event.record_url", values.text(values.URL_MAX))
    if url is None:
        return None
    if not url.startswith(("http://", "https://")) or any(c.isspace() for c in url):
        r.bad("event.record_url", f"{shown(url)} is not allowed: a record URL must start "
              "with http:// or https:// and hold no spaces")
        return None
    try:
        record_url(url, "K01", "K01-40m", "K01-40m-A", where=f"{r.source}: event.record_url")
    except SpecError as exc:
        r.problems.extend(exc.problems)
        return None
    return url


def load_spec(path: str | Path) -> Design:
    """Read and validate the spec file at ``path``. Raises SpecError."""
    p = Path(path)
    try:
        data = p.read_bytes()
    except OSError as exc:
        raise SpecError([Problem(str(p), f"cannot read the spec: {exc.strerror}")]) from None
    try:
        text = data.decode("utf-8-sig")  # a byte-order mark some editors write is dropped
    except UnicodeDecodeError as exc:
        raise SpecError([Problem(str(p), f"the spec must be UTF-8 text (byte {exc.start} is "
                                 "not)")]) from None
    return read_spec_text(text, p.name)
