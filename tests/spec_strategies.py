"""Hypothesis strategies for specs: a small valid spec, and near-valid ones with one to three
values replaced, keys dropped or added (wrong types, huge numbers, odd units, markup, dates).

Specs are built as Python data and written with a small TOML writer of our own (the standard
library reads TOML but does not write it).
"""

from __future__ import annotations

import copy
import datetime as dt
import json
import math
from typing import Any

from hypothesis import strategies as st

BASE: dict[str, Any] = {
    "event": {"name": "Tiny day", "club": "Test club", "date": "2027-01-01", "region": 2,
              "units": "metric", "paper": "a4"},
    "site": {"ground": "medium_dry", "width": "40 m", "depth": "30 m"},
    "designs": {"d": {"title": "40 m dipole", "kind": "dipole", "mount": "inverted_v",
                      "apex_height": "8 m", "end_height": "2 m", "wire": "awg16-pvc",
                      "coax": "rg58", "coax_length": "15 m",
                      "elements": [{"band": "40m", "bearing": 0}]}},
    "kits": [{"design": "d", "count": 1, "builders": ["Ada"]}],
    "labels": {"stock": "sheet-a4", "start_cell": 0},
    "exposure": {"power": "100 W", "mode": "ssb", "transmit_fraction": 0.5, "regime": "fcc"},
}

#: Where a value may be replaced: a path of keys and list indices into BASE.
PATHS: tuple[tuple[Any, ...], ...] = (
    ("event", "name"), ("event", "club"), ("event", "date"), ("event", "region"),
    ("event", "units"), ("event", "paper"), ("event", "record_url"), ("event", "layout"),
    ("site", "ground"), ("site", "width"), ("site", "depth"),
    ("designs", "d", "title"), ("designs", "d", "kind"), ("designs", "d", "mount"),
    ("designs", "d", "apex_height"), ("designs", "d", "end_height"), ("designs", "d", "wire"),
    ("designs", "d", "trim_allowance"), ("designs", "d", "min_trim"),
    ("designs", "d", "termination"), ("designs", "d", "feed_allowance"),
    ("designs", "d", "cord_knot"), ("designs", "d", "cord_hitch"), ("designs", "d", "coax"),
    ("designs", "d", "coax_length"), ("designs", "d", "tie_off_angle"),
    ("designs", "d", "elements"), ("designs", "d", "elements", 0, "band"),
    ("designs", "d", "elements", 0, "frequency"), ("designs", "d", "elements", 0, "bearing"),
    ("designs", "d", "elements", 0, "end_height"), ("kits", 0, "count"),
    ("kits", 0, "builders"), ("kits", 0, "first"), ("kits", 0, "design"),
    ("labels", "stock"), ("labels", "start_cell"), ("labels", "code"), ("exposure", "power"),
    ("exposure", "mode"), ("exposure", "transmit_fraction"), ("exposure", "regime"),
    ("labels",), ("site",), ("kits",), ("wires",), ("stock",),
)

MARKUP = ('<img src="/etc/hosts"/>', '<a href="javascript:alert(1)">x</a>', "a<b", "<b>bold",
          '<font size="80">HUGE</font>', "&amp; &", '<img src="http://127.0.0.1:9/x.png"/>')
UNITS = ("m", "mm", "cm", "km", "ft", "in", "MHz", "kHz", "Hz", "%", "W", "kW", "", "e", "/0 m")


def lengthish() -> st.SearchStrategy[str]:
    """Text that looks like a length, frequency, power or percentage, or nearly so."""
    number = st.one_of(st.integers(-5, 10**6).map(str),
                       st.floats(allow_nan=False, allow_infinity=False).map(repr),
                       st.sampled_from(["1/0", "1e308", "1e400", "0", "-0", ".5", "3/8", "6 3/8",
                                        "nan", "inf", "7.150.2"]))
    return st.builds(lambda n, s, u: f"{n}{s}{u}", number, st.sampled_from(["", " "]),
                     st.sampled_from(UNITS))


def values() -> st.SearchStrategy[Any]:
    """Any TOML value, biased to the troublesome ones."""
    scalars = st.one_of(
        st.booleans(), st.integers(-(2**63), 2**63 - 1), st.floats(),
        st.text(max_size=30), st.sampled_from(MARKUP), lengthish(),
        st.text(alphabet="x", min_size=190, max_size=260),
        st.dates(), st.times(), st.datetimes(min_value=dt.datetime(1, 1, 2)),
        st.sampled_from(["40m", "75m", "60m-us", "sheet-letter", "roll", "fcc", "both",
                         "https://x.example/{leg}", "ftp://x", "per_design", "flat", "fan"]),
    )
    return st.recursive(scalars, lambda inner: st.one_of(
        st.lists(inner, max_size=3), st.dictionaries(st.sampled_from(["a", "name", "rows"]),
                                                     inner, max_size=2)), max_leaves=4)


def _set(spec: dict[str, Any], path: tuple[Any, ...], value: Any, drop: bool) -> None:
    node: Any = spec
    for key in path[:-1]:
        try:
            node = node[key]
        except (KeyError, IndexError, TypeError):
            return
    if not isinstance(node, (dict, list)):
        return
    last = path[-1]
    if isinstance(node, list):
        if isinstance(last, int) and last < len(node):
            node[last] = value
        return
    if drop:
        node.pop(last, None)
    else:
        node[last] = value


def plausible_values() -> st.SearchStrategy[Any]:
    """Values a user might really write: mostly valid, near the limits (so specs often build)."""
    metres = st.floats(0.0, 80.0).map(lambda v: f"{v:.2f} m")
    return st.one_of(
        metres, st.sampled_from(["3 %", "0 %", "49 %", "30 cm", "1 %", "7.1 MHz", "29 MHz",
                                 "5.3585 MHz", "14.2 MHz", "1.5 kW", "20 W", "0 W"]),
        st.sampled_from(["40m", "20m", "80m", "60m", "sheet-letter", "roll", "sheet-a4",
                         "per_design", "flat", "fan", "imperial", "letter", "icnirp2020",
                         "https://club.example.org/a/{element}/{leg}.html",
                         "https://club.example.org/" + "x" * 150 + "/{leg}"]),
        st.integers(0, 30), st.floats(0.0, 1.0), st.sampled_from(MARKUP),
        st.text(alphabet="abc XYZ<>&\"'/", max_size=200), st.dates().map(str),
    )


#: Built once: a strategy object is validated on first use, so reusing it keeps draws fast.
VALUES = values()
PLAUSIBLE = plausible_values()
_PATH_CHOICE = st.sampled_from(PATHS)


@st.composite
def near_valid_specs(draw: st.DrawFn, pool: st.SearchStrategy[Any] = VALUES) -> dict[str, Any]:
    """BASE with one to three values (drawn from ``pool``) replaced or dropped, sometimes an
    unknown key added."""
    spec = copy.deepcopy(BASE)
    for _ in range(draw(st.integers(1, 3))):
        path = draw(_PATH_CHOICE)
        _set(spec, path, draw(pool), draw(st.booleans()) and draw(st.booleans()))
    if draw(st.integers(0, 9)) == 9:
        spec["event"]["colour"] = "red"
    return spec


def _key(key: str) -> str:
    return key if key and all(c.isalnum() or c in "-_" for c in key) else json.dumps(key)


def _value(v: Any) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        return "nan" if math.isnan(v) else ("inf" if v > 0 else "-inf") if math.isinf(v) else repr(v)
    if isinstance(v, str):
        return json.dumps(v, ensure_ascii=False)
    if isinstance(v, (dt.date, dt.time)):
        return v.isoformat()
    if isinstance(v, list):
        return "[" + ", ".join(_value(x) for x in v) + "]"
    if isinstance(v, dict):
        return "{" + ", ".join(f"{_key(k)} = {_value(x)}" for k, x in v.items()) + "}"
    raise TypeError(type(v))


def to_toml(spec: dict[str, Any]) -> str:
    """TOML text for ``spec``: tables and arrays of tables as headers, the rest inline."""
    lines: list[str] = []

    def table(node: dict[str, Any], prefix: str) -> None:
        nested = []
        for k, v in node.items():
            if isinstance(v, dict):
                nested.append((k, v, "table"))
            elif isinstance(v, list) and v and all(isinstance(x, dict) for x in v):
                nested.append((k, v, "array"))
            else:
                lines.append(f"{_key(k)} = {_value(v)}")
        for k, v, kind in nested:
            name = f"{prefix}.{_key(k)}" if prefix else _key(k)
            if kind == "table":
                lines.append(f"\n[{name}]")
                table(v, name)
            else:
                for item in v:
                    lines.append(f"\n[[{name}]]")
                    table(item, name)

    table(spec, "")
    return "\n".join(lines) + "\n"


def _metres(low: float, high: float) -> st.SearchStrategy[str]:
    return st.floats(low, high).map(lambda v: f"{v:.2f} m")


_NAMES = st.one_of(st.text(alphabet="abcXYZ <>&\"'/.-", max_size=200), st.sampled_from(MARKUP))
#: Per path, values of the right type near the edges of what is allowed.
TYPED: dict[tuple[Any, ...], st.SearchStrategy[Any]] = {
    ("event", "name"): _NAMES, ("event", "club"): _NAMES,
    ("event", "date"): st.dates().map(str),
    ("event", "units"): st.sampled_from(["metric", "imperial"]),
    ("event", "paper"): st.sampled_from(["a4", "letter"]),
    ("event", "layout"): st.sampled_from(["per_kit", "per_design"]),
    ("event", "record_url"): st.sampled_from(
        ["https://club.example.org/a/{element}/{leg}.html", "https://x.example/{kit}",
         "https://club.example.org/" + "x" * 150 + "/{leg}"]),
    ("site", "width"): _metres(1, 200), ("site", "depth"): _metres(1, 200),
    ("designs", "d", "title"): _NAMES,
    ("designs", "d", "apex_height"): _metres(2, 70),
    ("designs", "d", "end_height"): _metres(0, 12),
    ("designs", "d", "trim_allowance"): st.one_of(st.integers(0, 55).map(lambda p: f"{p} %"),
                                                  _metres(0, 6)),
    ("designs", "d", "mount"): st.sampled_from(["inverted_v", "flat"]),
    ("designs", "d", "elements", 0, "band"): st.sampled_from(["160m", "80m", "60m", "40m",
                                                              "30m", "20m", "60m-us", "75m"]),
    ("designs", "d", "elements", 0, "frequency"): st.floats(0.5, 35).map(lambda f: f"{f:.3f} MHz"),
    ("designs", "d", "elements", 0, "bearing"): st.floats(0, 360),
    ("kits", 0, "count"): st.integers(1, 4),  # few kits: each example builds a packet
    ("kits", 0, "builders"): st.lists(_NAMES, max_size=3),
    ("labels", "stock"): st.sampled_from(["sheet-a4", "sheet-letter", "roll"]),
    ("labels", "start_cell"): st.integers(0, 30),
    ("labels", "code"): st.sampled_from(["id", "link", "ID", ""]),
    ("exposure", "power"): st.integers(1, 12000).map(lambda w: f"{w} W"),
    ("exposure", "transmit_fraction"): st.floats(0, 1),
}
_TYPED_PATHS = st.sampled_from(sorted(TYPED, key=str))


@st.composite
def plausible_specs(draw: st.DrawFn) -> dict[str, Any]:
    """BASE with one to four values replaced by values of the right type (often valid)."""
    spec = copy.deepcopy(BASE)
    for _ in range(draw(st.integers(1, 4))):
        path = draw(_TYPED_PATHS)
        if path[-1] == "frequency":
            spec["designs"]["d"]["elements"][0].pop("band", None) if draw(st.booleans()) else None
        _set(spec, path, draw(TYPED[path]), False)
    return spec
