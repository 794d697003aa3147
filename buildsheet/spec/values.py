"""Typed spec values: how a TOML value is shown in messages, free text, dates, numbers, powers
and percentage allowances. Each parser returns the SI value or raises ValueError whose text says
what was found and what is allowed (the reader adds file and key path).
"""

from __future__ import annotations

import datetime as dt
import json
import math
import re
import unicodedata
from collections.abc import Callable, Mapping
from typing import Any

from buildsheet.spec.units import parse_length

#: Longest name (event, club, builder), characters (project rule: a name fits on one line).
NAME_MAX: int = 200
#: Longest title (design, wire), characters.
TITLE_MAX: int = 200
#: Longest short note (wire stranding), characters.
NOTE_MAX: int = 100
#: Longest record URL template, characters (keeps the QR symbol small enough for a label).
URL_MAX: int = 200
#: Highest transmitter power accepted, W; above it the spec is refused (no amateur station).
POWER_MAX_W: float = 10_000.0
#: Power above which the spec is accepted with a warning, W (the US amateur limit, 1.5 kW PEP,
#: 47 CFR 97.313; other administrations allow less).
POWER_WARN_W: float = 1_500.0


def shown(value: Any) -> str:
    """A TOML value as a user would write it: "text", 3, true, 2027-03-13, 07:32:00, [..], {..}."""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, str):
        text = value if len(value) <= 60 else value[:57] + "..."
        if "'" not in text and text.isprintable():
            return f"'{text}'"  # a TOML literal string
        return json.dumps(text, ensure_ascii=False)
    if isinstance(value, (dt.date, dt.time)):  # datetime is a date
        return value.isoformat()
    if isinstance(value, float) and not math.isfinite(value):
        return "nan" if math.isnan(value) else ("inf" if value > 0 else "-inf")
    if isinstance(value, Mapping):
        inner = ", ".join(f"{k} = {shown(v)}" for k, v in list(value.items())[:4])
        return "{" + inner + (", ..." if len(value) > 4 else "") + "}"
    if isinstance(value, list):
        inner = ", ".join(shown(v) for v in value[:4])
        return "[" + inner + (", ..." if len(value) > 4 else "") + "]"
    return str(value)


def kind_of(value: Any) -> str:
    """The TOML kind of ``value`` in words: "a boolean", "a table", "a date", ..."""
    if isinstance(value, bool):
        return "a boolean"
    if isinstance(value, int):
        return "an integer"
    if isinstance(value, float):
        return "a number"
    if isinstance(value, str):
        return "text"
    if isinstance(value, dt.datetime):
        return "a date-time"
    if isinstance(value, dt.date):
        return "a date"
    if isinstance(value, dt.time):
        return "a time"
    if isinstance(value, Mapping):
        return "a table"
    if isinstance(value, list):
        return "a list"
    return type(value).__name__


def text(limit: int = NAME_MAX, *, multiline: bool = False) -> Callable[[Any], str]:
    """A parser for free text: a TOML string of at most ``limit`` characters, one line (no
    control characters) unless ``multiline``; surrounding white space is dropped."""
    def parse(value: Any) -> str:
        if not isinstance(value, str):
            raise ValueError(f"expected text in quotes, got {kind_of(value)} {shown(value)}")
        s = value.strip()
        if len(s) > limit:
            raise ValueError(f"text of {len(s)} characters is too long; allowed at most {limit} "
                             f"(starts {shown(s[:30])})")
        allowed = "\n" if multiline else ""
        bad = [c for c in s if unicodedata.category(c) in ("Cc", "Cs") and c not in allowed]
        if bad:
            raise ValueError(f"control character U+{ord(bad[0]):04X} in {shown(s)}; allowed: "
                             "plain text" + ("" if multiline else " on one line"))
        return s
    return parse


def date(value: Any) -> str:
    """A date, TOML (2027-03-13) or text ("2027-03-13"), as ISO 8601 text."""
    if isinstance(value, (dt.datetime, dt.time)):
        raise ValueError(f"expected a date like 2027-03-13 (no time of day), got {shown(value)}")
    if isinstance(value, dt.date):
        return value.isoformat()
    if isinstance(value, str) and len(value) <= 10:
        try:
            return dt.date.fromisoformat(value.strip()).isoformat()
        except ValueError:
            pass
    raise ValueError(f"expected a date like 2027-03-13, got {kind_of(value)} {shown(value)}")


def number(kind: type, low: float, high: float, unit: str = "") -> Callable[[Any], Any]:
    """A parser for an integer (``kind`` int) or a number from ``low`` to ``high``."""
    what = "an integer" if kind is int else "a number"
    span = f"from {low:g} to {high:g}{' ' + unit if unit else ''}"

    def parse(value: Any) -> Any:
        if isinstance(value, bool) or not isinstance(value, (int, float)) or (
                kind is int and not isinstance(value, int)):
            raise ValueError(f"expected {what} {span}, got {kind_of(value)} {shown(value)}")
        if not math.isfinite(value) or not (low <= value <= high):
            raise ValueError(f"{shown(value)} is out of range; allowed {span}")
        return value
    return parse


def power(value: Any) -> float:
    """Transmitter power ("100 W", "1.5 kW") in W, above zero and at most POWER_MAX_W."""
    m = (re.fullmatch(r"\s*(\d+(?:\.\d*)?|\.\d+)\s*(W|kW)\s*", value)
         if isinstance(value, str) else None)
    if not m:
        raise ValueError(f'expected a power like "100 W" or "1.5 kW", got {shown(value)}')
    watts = float(m.group(1)) * (1000.0 if m.group(2) == "kW" else 1.0)
    if not watts > 0:
        raise ValueError(f"{shown(value)} is not allowed: the power must be greater than zero")
    if watts > POWER_MAX_W:
        raise ValueError(f"{shown(value)} is above {POWER_MAX_W / 1000:g} kW, beyond any "
                         "amateur station; allowed above 0 W up to 10 kW")
    return watts


def percent_or_length(value: Any) -> tuple[float | None, float | None]:
    """An allowance: "3 %" -> (0.03, None); "30 cm" -> (None, 0.30). Percentages 0 to < 50 %."""
    if isinstance(value, str) and value.strip().endswith("%"):
        digits = value.strip()[:-1].strip()
        if not re.fullmatch(r"\d+(?:\.\d*)?|\.\d+", digits):
            raise ValueError(f'expected a percentage like "3 %" or a length like "30 cm", got '
                             f"{shown(value)}")
        fraction = float(digits) / 100.0
        if not fraction < 0.5:
            raise ValueError(f"{shown(value)}: a percentage allowance must be from 0 % to "
                             "below 50 %")
        return fraction, None
    if not isinstance(value, str):
        raise ValueError(f'expected a percentage like "3 %" or a length like "30 cm", got '
                         f"{kind_of(value)} {shown(value)}")
    return None, parse_length(value)
