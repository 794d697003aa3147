"""Parse and format lengths and frequencies: the one place where units meet text.

Inside buildsheet everything is SI (metres, hertz). Text lengths accept "7.5 m", "230 mm",
"25 ft", "6 ft 3 in", "9 in", "6'3\"", "2.5 cm"; frequencies "7.15 MHz", "7150 kHz", "7150000 Hz".
Imperial output is feet and inches to the nearest 1/8 inch.
"""

from __future__ import annotations

import math
import re
from fractions import Fraction
from typing import Literal

from buildsheet.constants import FOOT, INCH

UnitSystem = Literal["metric", "imperial"]
UNIT_SYSTEMS: tuple[str, ...] = ("metric", "imperial")

_LENGTH_UNITS: dict[str, float] = {
    "m": 1.0, "metre": 1.0, "metres": 1.0, "meter": 1.0, "meters": 1.0,
    "cm": 0.01, "mm": 0.001, "km": 1000.0,
    "ft": FOOT, "feet": FOOT, "foot": FOOT, "'": FOOT,
    "in": INCH, "inch": INCH, "inches": INCH, '"': INCH,
}
_FREQ_UNITS: dict[str, float] = {"hz": 1.0, "khz": 1e3, "mhz": 1e6, "ghz": 1e9}

_NUMBER = r"(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?(?:\s+\d+/\d+|/\d+)?"
_TERM = re.compile(rf"\s*({_NUMBER})\s*([a-zA-Z]+|'|\")")

LENGTH_HELP = 'a number with a unit: m, cm, mm, ft, in (e.g. "7.5 m", "230 mm", "6 ft 3 in")'
FREQUENCY_HELP = 'a number with a unit: MHz, kHz or Hz (e.g. "7.15 MHz", "7150 kHz")'


def _number(text: str) -> float:
    """Parse "6", "6.5", "1e3", "3/8" or "6 3/8" to a float; ValueError for "1/0"."""
    parts = text.split()
    total = 0.0
    for part in parts:
        top, slash, bottom = part.partition("/")
        if slash and int(bottom) == 0:
            raise ValueError(f"the fraction {part} divides by zero")
        total += float(top) / int(bottom) if slash else float(part)
    return total


def parse_length(text: str | float) -> float:
    """Parse a length with units to metres. Raises ValueError naming what is allowed.

    Several terms add up ("6 ft 3 in" = 1.9050 m). A bare number is refused: units are required.
    """
    if isinstance(text, bool) or not isinstance(text, (str, int, float)):
        raise ValueError(f"expected {LENGTH_HELP}, in quotes")
    if not isinstance(text, str):
        raise ValueError(f"a length needs a unit: write e.g. \"{text} m\" ({LENGTH_HELP})")
    s = text.strip()
    if re.fullmatch(_NUMBER, s.lstrip("-")):
        raise ValueError(f"a length needs a unit: write e.g. \"{s} m\" ({LENGTH_HELP})")
    negative = s.startswith("-")
    s = s[1:] if negative else s
    pos, total, terms = 0, 0.0, 0
    while pos < len(s):
        m = _TERM.match(s, pos)
        if not m:
            break
        unit = m.group(2).lower() if m.group(2) not in ("'", '"') else m.group(2)
        if unit not in _LENGTH_UNITS:
            raise ValueError(f"unknown length unit {m.group(2)!r} in {text!r}; expected {LENGTH_HELP}")
        total += _number(m.group(1)) * _LENGTH_UNITS[unit]
        if not math.isfinite(total):
            break
        terms += 1
        pos = m.end()
    if math.isfinite(total) and (terms == 0 or s[pos:].strip()):
        raise ValueError(f"cannot read {text!r} as a length; expected {LENGTH_HELP}")
    if not math.isfinite(total):
        raise ValueError(f"length {text!r} is too large to be a number of metres")
    return -total if negative else total


def parse_frequency(text: str | float) -> float:
    """Parse a frequency with units ("7.15 MHz", "7150 kHz") to hertz. Raises ValueError."""
    if isinstance(text, bool) or not isinstance(text, (str, int, float)):
        raise ValueError(f"expected {FREQUENCY_HELP}, in quotes")
    if not isinstance(text, str):
        raise ValueError(f"a frequency needs a unit: write e.g. \"{text} MHz\" ({FREQUENCY_HELP})")
    m = re.fullmatch(r"\s*(\d+(?:\.\d*)?|\.\d+)\s*([a-zA-Z]+)\s*", text)
    if not m:
        raise ValueError(f"cannot read {text!r} as a frequency; expected {FREQUENCY_HELP}")
    unit = m.group(2).lower()
    if unit not in _FREQ_UNITS:
        raise ValueError(f"unknown frequency unit {m.group(2)!r} in {text!r}; expected {FREQUENCY_HELP}")
    return float(m.group(1)) * _FREQ_UNITS[unit]


def feet_inches_eighths(metres: float) -> tuple[int, int, int, int]:
    """Split a length into (sign, feet, whole inches, eighths), rounded to the nearest 1/8 in."""
    sign = -1 if metres < 0 else 1
    eighths = round(abs(metres) / INCH * 8)
    feet, rem = divmod(eighths, 96)
    inches, eighth = divmod(rem, 8)
    return sign, feet, inches, eighth


def format_imperial(metres: float) -> str:
    """Feet and inches to the nearest 1/8 inch: 20.36 m -> "66 ft 9 5/8 in"; 0.23 m -> "9 in"."""
    sign, feet, inches, eighth = feet_inches_eighths(metres)
    frac = ""
    if eighth:
        f = Fraction(eighth, 8)
        frac = f"{f.numerator}/{f.denominator}"
    inch_text = f"{inches} {frac}".strip() if inches else frac
    parts = []
    if feet:
        parts.append(f"{feet} ft")
    if inch_text or not feet:
        parts.append(f"{inch_text or 0} in")
    return ("-" if sign < 0 and (feet or inches or eighth) else "") + " ".join(parts)


def format_metric(metres: float) -> str:
    """Metres to 2 decimals from 1 m up ("20.36 m"), millimetres below ("235 mm")."""
    if abs(metres) >= 1.0:
        return f"{metres:.2f} m"
    return f"{metres * 1000:.0f} mm"


def format_length(metres: float, system: UnitSystem = "metric") -> str:
    """Format a length in one unit system."""
    return format_imperial(metres) if system == "imperial" else format_metric(metres)


def format_both(metres: float, primary: UnitSystem = "metric") -> str:
    """Both unit systems, primary first: "20.36 m (66 ft 9 5/8 in)"."""
    other: UnitSystem = "imperial" if primary == "metric" else "metric"
    return f"{format_length(metres, primary)} ({format_length(metres, other)})"


def format_tape(metres: float, primary: UnitSystem = "metric") -> str:
    """A length as read off a tape, both systems, primary first, metric to the millimetre:
    "10.432 m (34 ft 2 3/4 in)"."""
    metric, imperial = f"{metres:.3f} m", format_length(metres, "imperial")
    return f"{imperial} ({metric})" if primary == "imperial" else f"{metric} ({imperial})"


def format_frequency(hz: float) -> str:
    """Frequency in MHz with the precision of the kHz digit: 7150000 -> "7.150 MHz"."""
    mhz = hz / 1e6
    text = f"{mhz:.4f}".rstrip("0")
    if len(text.split(".")[1]) < 3:
        text = f"{mhz:.3f}"
    return f"{text} MHz"


def format_distance(metres: float, system: UnitSystem = "metric", *, round_up: bool = True) -> str:
    """A distance to 0.1 m (metric) or to the whole inch (imperial), rounded up by default (safety
    distances never shrink in print): 0.073 m -> "0.1 m"; 1.306 m -> "1.4 m" / "4 ft 4 in"."""
    step = 0.1 if system == "metric" else INCH
    n = abs(metres) / step
    n = math.ceil(n - 1e-9) if round_up else math.floor(n + 0.5)
    sign = "-" if metres < 0 and n else ""
    if system == "metric":
        return f"{sign}{n / 10:.1f} m"
    feet, inches = divmod(n, 12)
    if not feet:
        return f"{sign}{inches} in"
    return f"{sign}{feet} ft" + (f" {inches} in" if inches else "")
