"""Analyzer sweeps: read a Touchstone .s1p or a CSV, find the resonance, R there, 2:1 bandwidth.

Pure functions on bytes and numbers (no file or clock access): the station and the CLI hand in
the uploaded or read bytes. Frequencies are hertz, impedances ohm. A sweep holds either the
feed impedance R + jX at each point (Touchstone, or CSV with R and X) or only the SWR (CSV with
SWR). The resonance is where the reactance crosses zero going up (series resonance of a dipole
near a half wave), or, without reactance, the SWR minimum.

Limits: at most :data:`MAX_SWEEP_BYTES` bytes and :data:`MAX_POINTS` points; text only (a file
holding NUL bytes is refused). Nothing in a file is ever executed: Touchstone is parsed by
scikit-rf's text reader, CSV by the standard library's csv module.
"""

from __future__ import annotations

import csv
import io
import re
from dataclasses import dataclass
from typing import Literal

import numpy as np

from buildsheet.em.closed_form import swr as swr_of_load
from buildsheet.em.prediction import bandwidth_2to1
from buildsheet.errors import Problem, RecordError

#: Largest sweep file accepted, bytes (a 10,000-point CSV of f, R, X is about 400 kB).
MAX_SWEEP_BYTES = 1_000_000
#: Most points in one sweep; fewest that can show a resonance.
MAX_POINTS = 10_000
MIN_POINTS = 3
#: File types read, by suffix.
SWEEP_SUFFIXES: tuple[str, ...] = (".s1p", ".csv")
#: Reference impedance of the analyzer for SWR from R and X when the file names none, ohm.
DEFAULT_Z0_OHM = 50.0
#: SWR that bounds the usable bandwidth (the 2:1 bandwidth; common practice).
BANDWIDTH_SWR = 2.0

SweepKind = Literal["impedance", "swr"]
Method = Literal["reactance zero crossing", "SWR minimum"]


@dataclass(frozen=True)
class Sweep:
    """One analyzer sweep: frequencies (Hz, increasing), SWR, and R, X (ohm) when known."""

    name: str  # file name, for messages
    freqs_hz: tuple[float, ...]
    swr: tuple[float, ...]
    r_ohm: tuple[float, ...] | None = None
    x_ohm: tuple[float, ...] | None = None
    z0_ohm: float = DEFAULT_Z0_OHM
    notes: tuple[str, ...] = ()

    @property
    def kind(self) -> SweepKind:
        return "impedance" if self.x_ohm is not None else "swr"


@dataclass(frozen=True)
class SweepFit:
    """What a sweep says: resonance (Hz), R there (ohm, None for an SWR-only sweep), the SWR
    there, and the 2:1 SWR band around it (Hz; None when the SWR never gets below 2).

    ``bandwidth_clipped`` is True when an edge of that band lies beyond the sweep (the band is
    then at least as wide as shown).
    """

    resonance_hz: float
    method: Method
    r_ohm: float | None
    swr: float
    bandwidth_hz: tuple[float, float] | None
    bandwidth_clipped: bool
    notes: tuple[str, ...] = ()

    @property
    def bandwidth_width_hz(self) -> float | None:
        return None if self.bandwidth_hz is None else self.bandwidth_hz[1] - self.bandwidth_hz[0]


def _error(name: str, message: str) -> RecordError:
    return RecordError([Problem(name, message)])


# --------------------------------------------------------------------------- reading


def read_sweep(data: bytes, name: str) -> Sweep:
    """Read a sweep file's bytes; the suffix of ``name`` picks the format (.s1p or .csv).

    RecordError (one line naming the file) for a wrong type, a file too large, not text, or
    rows that do not make a sweep.
    """
    suffix = "." + name.rsplit(".", 1)[-1].lower() if "." in name else ""
    if suffix not in SWEEP_SUFFIXES:
        raise _error(name, f"not a sweep file type ({suffix or 'no suffix'}); allowed: "
                     + ", ".join(SWEEP_SUFFIXES) + " (Touchstone one-port, or CSV of frequency "
                     "and SWR, or frequency, R and X)")
    if len(data) > MAX_SWEEP_BYTES:
        raise _error(name, f"sweep file is {len(data):,} bytes; at most {MAX_SWEEP_BYTES:,} "
                     "are accepted (sweep fewer points)")
    if b"\x00" in data:
        raise _error(name, "not a text file (it holds NUL bytes); expected a Touchstone .s1p "
                     "or a CSV")
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError:
        text = data.decode("latin-1")
    return read_touchstone(text, name) if suffix == ".s1p" else read_csv(text, name)


def _checked(name: str, freqs: np.ndarray, swr: np.ndarray, r: np.ndarray | None,
             x: np.ndarray | None, z0: float, notes: tuple[str, ...]) -> Sweep:
    """Sort by frequency and check the values; RecordError naming the first bad point."""
    n = len(freqs)
    if n < MIN_POINTS:
        raise _error(name, f"a sweep needs at least {MIN_POINTS} points, found {n}")
    if n > MAX_POINTS:
        raise _error(name, f"{n:,} points; at most {MAX_POINTS:,} are accepted")
    columns = {"frequency": freqs, "SWR": swr, "R": r, "X": x}
    for label, values in columns.items():
        if values is not None and not np.all(np.isfinite(values)):
            i = int(np.argmin(np.isfinite(values)))
            raise _error(name, f"point {i + 1}: {label} is not a finite number")
    if np.any(freqs <= 0):
        raise _error(name, f"point {int(np.argmax(freqs <= 0)) + 1}: frequency must be positive")
    if r is not None and np.any(r < 0):
        raise _error(name, f"point {int(np.argmax(r < 0)) + 1}: R must not be negative "
                     f"(got {r[int(np.argmax(r < 0))]:g} ohm)")
    if np.any(swr < 1.0 - 1e-9):
        raise _error(name, f"point {int(np.argmax(swr < 1.0 - 1e-9)) + 1}: an SWR is 1 or "
                     f"more, got {swr[int(np.argmax(swr < 1.0 - 1e-9))]:g}")
    order = np.argsort(freqs, kind="stable")
    f = freqs[order]
    if np.any(np.diff(f) <= 0):
        dup = float(f[int(np.argmax(np.diff(f) <= 0))])
        raise _error(name, f"frequency {dup:g} Hz appears twice; each point needs its own "
                     "frequency")

    def tup(a: np.ndarray | None) -> tuple[float, ...] | None:
        return None if a is None else tuple(float(v) for v in a[order])

    return Sweep(name, tuple(float(v) for v in f), tup(np.maximum(swr, 1.0)) or (), tup(r),
                 tup(x), z0, notes)


def read_touchstone(text: str, name: str = "sweep.s1p") -> Sweep:
    """A one-port Touchstone file (reflection coefficient S11, or Z/Y data) via scikit-rf."""
    import skrf

    buf = io.StringIO(text)
    buf.name = name if name.lower().endswith(".s1p") else name + ".s1p"
    try:
        network = skrf.Network(buf)
    except Exception as exc:  # noqa: BLE001 - scikit-rf raises many types for malformed text
        raise _error(name, f"not a readable Touchstone one-port file ({exc})") from None
    if network.nports != 1:
        raise _error(name, f"a sweep is a one-port (.s1p) file; this one has {network.nports} "
                     "ports")
    z0 = float(np.real(network.z0[0, 0]))
    z = network.z[:, 0, 0]
    freqs = np.asarray(network.f, dtype=float)
    return _checked(name, freqs, np.asarray(swr_of_load(z, z0), dtype=float),
                    np.real(z).astype(float), np.imag(z).astype(float), z0, ())


_UNITS = {"hz": 1.0, "khz": 1e3, "mhz": 1e6, "ghz": 1e9}


def _header_unit(cell: str) -> float | None:
    """Frequency scale named in a header cell ("Freq (MHz)", "frequency_khz"), or None."""
    for word in re.findall(r"[a-z]+", cell.lower()):
        for unit in ("ghz", "mhz", "khz", "hz"):
            if word == unit or word.endswith(unit) and word[:-len(unit)] in ("freq", "f",
                                                                              "frequency"):
                return _UNITS[unit]
    return None


def _column(header: list[str], names: tuple[str, ...]) -> int | None:
    for i, cell in enumerate(header):
        word = re.split(r"[^a-z0-9]+", cell.strip().lower())
        if word and word[0] in names:
            return i
    return None


def _guess_scale(values: np.ndarray) -> tuple[float, str]:
    """Frequency scale for a column without a unit, from its size (HF analyzers: 1-60 MHz)."""
    top = float(np.max(values))
    if top < 1e3:
        return 1e6, "MHz"
    if top < 1e6:
        return 1e3, "kHz"
    return 1.0, "Hz"


def read_csv(text: str, name: str = "sweep.csv") -> Sweep:
    """A CSV sweep: frequency and SWR, or frequency, R and X (comma, semicolon or tab).

    An optional header row names the columns ("freq_MHz, swr" or "Frequency (kHz), R, X");
    without one, two columns are frequency and SWR, three or more are frequency, R and X. A
    frequency without a unit is read as MHz, kHz or Hz by its size (and said so in the notes).
    Lines starting with ``#`` or ``!`` are comments.
    """
    lines = [ln for ln in text.splitlines() if ln.strip() and ln.lstrip()[0] not in "#!"]
    if not lines:
        raise _error(name, "no data rows; expected frequency and SWR, or frequency, R and X")
    sample = "\n".join(lines[:5])
    delimiter = next((d for d in ("\t", ";", ",") if d in sample), None)
    rows = [[c.strip() for c in row] for row in
            (csv.reader(lines, delimiter=delimiter) if delimiter else (ln.split() for ln in lines))]

    def numeric(cell: str) -> bool:
        try:
            float(cell)
        except ValueError:
            return False
        return True

    header: list[str] | None = None
    if not all(numeric(c) for c in rows[0] if c):
        header, rows = rows[0], rows[1:]
    width = len(header) if header else len(rows[0]) if rows else 0
    if width < 2:
        raise _error(name, "expected at least two columns: frequency and SWR (or frequency, R "
                     "and X)")
    f_col, swr_col, r_col, x_col = 0, None, None, None
    scale: float | None = None
    if header is not None:
        f_col = _column(header, ("f", "freq", "frequency", "fhz", "fkhz", "fmhz")) or 0
        scale = _header_unit(header[f_col])
        swr_col = _column(header, ("swr", "vswr"))
        r_col = _column(header, ("r", "rs", "resistance"))
        x_col = _column(header, ("x", "xs", "reactance"))
        if swr_col is None and (r_col is None or x_col is None):
            raise _error(name, f"header {', '.join(header)!r} names neither an SWR column nor "
                         "both R and X; name them e.g. \"freq_MHz, swr\" or \"freq_MHz, R, X\"")
    elif width == 2:
        swr_col = 1
    else:
        r_col, x_col = 1, 2
    used = [c for c in (f_col, swr_col, r_col, x_col) if c is not None]
    values: list[list[float]] = []
    for number, row in enumerate(rows, start=2 if header else 1):
        if len(row) <= max(used):
            raise _error(name, f"data row {number}: {len(row)} columns, expected at least "
                         f"{max(used) + 1}")
        try:
            values.append([float(row[c]) for c in used])
        except ValueError:
            bad = next(row[c] for c in used if not numeric(row[c]))
            raise _error(name, f"data row {number}: {bad!r} is not a number") from None
    if not values:
        raise _error(name, "no data rows under the header")
    table = np.array(values, dtype=float)
    col = {c: table[:, i] for i, c in enumerate(used)}
    notes: tuple[str, ...] = ()
    if scale is None:
        scale, unit = _guess_scale(col[f_col])
        notes = (f"frequency column has no unit: read as {unit}",)
    freqs = col[f_col] * scale
    r = col[r_col] if r_col is not None and x_col is not None else None
    x = col[x_col] if r_col is not None and x_col is not None else None
    if swr_col is not None:
        swr = col[swr_col]
    else:
        assert r is not None and x is not None
        swr = np.asarray(swr_of_load(r + 1j * x, DEFAULT_Z0_OHM), dtype=float)
        notes += (f"SWR computed from R and X on {DEFAULT_Z0_OHM:g} ohm",)
    return _checked(name, freqs, swr, r, x, DEFAULT_Z0_OHM, notes)


# --------------------------------------------------------------------------- analysis


def reactance_zero(freqs: np.ndarray, x: np.ndarray, swr: np.ndarray) -> int | None:
    """Index i of the upward zero crossing of X between points i and i+1 (series resonance)
    with the lowest SWR beside it, or None when X never goes from negative to positive."""
    up = np.flatnonzero((x[:-1] < 0) & (x[1:] >= 0))
    if up.size == 0:
        return None
    return int(up[np.argmin(np.minimum(swr[up], swr[up + 1]))])


def _parabola_vertex(f: np.ndarray, y: np.ndarray, i: int) -> float:
    """Frequency of the vertex of the parabola through points i-1, i, i+1 (Hz)."""
    (f0, f1, f2), (y0, y1, y2) = f[i - 1:i + 2], y[i - 1:i + 2]
    den = (f0 - f1) * (f0 - f2) * (f1 - f2)
    a = (f2 * (y1 - y0) + f1 * (y0 - y2) + f0 * (y2 - y1)) / den
    b = (f2 * f2 * (y0 - y1) + f1 * f1 * (y2 - y0) + f0 * f0 * (y1 - y2)) / den
    if not a > 0:
        return float(f1)
    return float(min(max(-b / (2 * a), f0), f2))


def analyse(sweep: Sweep) -> SweepFit:
    """Resonance, R there, SWR there and the 2:1 band of a sweep.

    With reactance: the upward zero crossing of X, by linear interpolation between the two
    points around it; R by linear interpolation at that frequency. Without it (or when X never
    crosses zero in the sweep): the SWR minimum, refined by the parabola through the lowest
    point and its neighbours. The 2:1 band: where the SWR crosses 2 either side of the
    resonance, by linear interpolation.
    """
    f = np.asarray(sweep.freqs_hz)
    s = np.asarray(sweep.swr)
    notes: list[str] = list(sweep.notes)
    r_at: float | None = None
    i = reactance_zero(f, np.asarray(sweep.x_ohm), s) if sweep.x_ohm is not None else None
    if i is not None:
        assert sweep.x_ohm is not None and sweep.r_ohm is not None
        x, r = np.asarray(sweep.x_ohm), np.asarray(sweep.r_ohm)
        t = float(-x[i] / (x[i + 1] - x[i])) if x[i + 1] != x[i] else 0.0
        res = float(f[i] + t * (f[i + 1] - f[i]))
        r_at = float(r[i] + t * (r[i + 1] - r[i]))
        swr_at = float(swr_of_load(complex(r_at, 0.0), sweep.z0_ohm))
        method: Method = "reactance zero crossing"
    else:
        if sweep.x_ohm is not None:
            notes.append("the reactance does not cross zero in this sweep: resonance taken at "
                         "the SWR minimum")
        k = int(np.argmin(s))
        if 0 < k < len(f) - 1:
            res = _parabola_vertex(f, s, k)
        else:
            res = float(f[k])
            notes.append("the SWR minimum is at the end of the sweep: sweep wider to see the "
                         "resonance")
        swr_at = float(np.interp(res, f, s))
        method = "SWR minimum"
    band = bandwidth_2to1(f, s, res) if float(np.interp(res, f, s)) <= BANDWIDTH_SWR else None
    clipped = bool(band is not None and (band[0] <= f[0] or band[1] >= f[-1]))
    if clipped:
        notes.append("the 2:1 band runs past the end of the sweep: it is at least this wide")
    return SweepFit(res, method, r_at, swr_at, band, clipped, tuple(notes))


def sweep_to_csv(sweep: Sweep) -> str:
    """The sweep as CSV text (header ``freq_Hz, swr[, R, X]``), to store beside a reading."""
    out = io.StringIO()
    w = csv.writer(out, lineterminator="\n")
    has_z = sweep.r_ohm is not None and sweep.x_ohm is not None
    w.writerow(["freq_Hz", "swr", "R", "X"] if has_z else ["freq_Hz", "swr"])
    for k, f in enumerate(sweep.freqs_hz):
        row = [repr(f), repr(sweep.swr[k])]
        if has_z:
            assert sweep.r_ohm is not None and sweep.x_ohm is not None
            row += [repr(sweep.r_ohm[k]), repr(sweep.x_ohm[k])]
        w.writerow(row)
    return out.getvalue()

