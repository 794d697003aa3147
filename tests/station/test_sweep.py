"""Analyzer sweeps against the analytic series RLC.

Outside reference for every check here: the series RLC circuit, Z = R + j(wL - 1/(wC)), with
its resonance f0 = 1/(2 pi sqrt(LC)) where X = 0 and Z = R (any circuit-theory text, e.g.
Hayt & Kemmerly, Engineering Circuit Analysis, "series resonance"), and the reflection
coefficient / SWR of a load on a 50 ohm line, Gamma = (Z - Z0)/(Z + Z0),
SWR = (1 + |Gamma|)/(1 - |Gamma|) (Pozar, Microwave Engineering, sec. 2.3). The sweep files are
written here from those formulas; the station must find f0 within 1 kHz and R within 1 %.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from buildsheet.calc.sweep import MAX_SWEEP_BYTES, analyse, read_sweep
from buildsheet.errors import RecordError

Z0 = 50.0
# A dipole-like series RLC near 7.1 MHz: R = 62 ohm, Q about 12 (an inverted V's feed, from
# memory: R 50-70 ohm, 2:1 band a few hundred kHz on 40 m). f0 sits between sweep points.
R_OHM = 62.0
L_H = 16e-6
F0_HZ = 7_103_700.0
C_F = 1.0 / ((2 * math.pi * F0_HZ) ** 2 * L_H)
FREQS = np.linspace(6.6e6, 7.6e6, 201)  # 5 kHz steps, as a hand-held analyzer sweeps


def impedance(f: np.ndarray) -> np.ndarray:
    w = 2 * math.pi * f
    return R_OHM + 1j * (w * L_H - 1.0 / (w * C_F))


def gamma(z: np.ndarray) -> np.ndarray:
    return (z - Z0) / (z + Z0)


def swr(z: np.ndarray) -> np.ndarray:
    g = np.abs(gamma(z))
    return (1 + g) / (1 - g)


def two_to_one_edges() -> tuple[float, float]:
    """Analytic 2:1 edges: |Gamma| = 1/3 gives X^2 = ((R+Z0)^2 - 9 (R-Z0)^2) / 8, and
    L w^2 - X w - 1/C = 0 gives w for each sign of X."""
    x = math.sqrt(((R_OHM + Z0) ** 2 - 9 * (R_OHM - Z0) ** 2) / 8)
    edges = [(s * x + math.sqrt(x * x + 4 * L_H / C_F)) / (2 * L_H) / (2 * math.pi)
             for s in (-1, 1)]
    return edges[0], edges[1]


def touchstone_text(fmt: str = "RI") -> str:
    z = impedance(FREQS)
    g = gamma(z)
    lines = ["! series RLC test sweep", f"# MHz S {fmt} R 50"]
    for f, gv in zip(FREQS, g):
        if fmt == "RI":
            lines.append(f"{f / 1e6:.6f} {gv.real:.10f} {gv.imag:.10f}")
        else:  # MA: magnitude, angle in degrees
            lines.append(f"{f / 1e6:.6f} {abs(gv):.10f} {math.degrees(np.angle(gv)):.8f}")
    return "\n".join(lines) + "\n"


@pytest.mark.parametrize("fmt", ["RI", "MA"])
def test_touchstone_series_rlc(fmt: str) -> None:
    fit = analyse(read_sweep(touchstone_text(fmt).encode(), "k01-40m.s1p"))
    assert fit.method == "reactance zero crossing"
    assert abs(fit.resonance_hz - F0_HZ) < 1e3  # f0 = 1/(2 pi sqrt(LC))
    assert fit.r_ohm == pytest.approx(R_OHM, rel=0.01)  # Z(f0) = R
    lo, hi = two_to_one_edges()
    assert fit.bandwidth_hz is not None and not fit.bandwidth_clipped
    assert fit.bandwidth_hz[0] == pytest.approx(lo, abs=2e3)
    assert fit.bandwidth_hz[1] == pytest.approx(hi, abs=2e3)


def test_csv_r_and_x_in_khz() -> None:
    z = impedance(FREQS)
    text = "Frequency (kHz);R;X\n" + "".join(
        f"{f / 1e3:.3f};{v.real:.3f};{v.imag:.3f}\n" for f, v in zip(FREQS, z))
    fit = analyse(read_sweep(text.encode(), "sweep.csv"))
    assert abs(fit.resonance_hz - F0_HZ) < 1e3
    assert fit.r_ohm == pytest.approx(R_OHM, rel=0.01)


def test_csv_swr_only_finds_the_minimum() -> None:
    # |Gamma| grows with X^2 at fixed R, so the SWR minimum of a series RLC is at X = 0 (f0).
    text = "# frequency in MHz, SWR\n" + "".join(
        f"{f / 1e6:.6f},{s:.4f}\n" for f, s in zip(FREQS, swr(impedance(FREQS))))
    fit = analyse(read_sweep(text.encode(), "sweep.csv"))
    assert fit.method == "SWR minimum" and fit.r_ohm is None
    assert abs(fit.resonance_hz - F0_HZ) < 1e3
    g = (R_OHM - Z0) / (R_OHM + Z0)  # SWR at f0 = R/Z0 for R > Z0 (Pozar sec. 2.3)
    assert fit.swr == pytest.approx((1 + g) / (1 - g), rel=0.01)
    assert any("MHz" in n for n in fit.notes)  # the unit guess is said


def test_narrow_sweep_reports_a_clipped_band() -> None:
    f = np.linspace(7.0e6, 7.2e6, 41)
    text = "freq_hz,swr\n" + "".join(f"{a:.1f},{s:.4f}\n" for a, s in zip(f, swr(impedance(f))))
    fit = analyse(read_sweep(text.encode(), "narrow.csv"))
    assert fit.bandwidth_clipped
    assert abs(fit.resonance_hz - F0_HZ) < 1e3


@pytest.mark.parametrize(("name", "data", "needle"), [
    ("sweep.exe", b"1,2\n", "not a sweep file type"),
    ("sweep.csv", b"a" * (MAX_SWEEP_BYTES + 1), "at most"),
    ("sweep.csv", b"7.0,1.5\x00\n", "NUL"),
    ("sweep.csv", b"7.0,1.5\n7.1,1.2\n", "at least 3 points"),
    ("sweep.csv", b"7.0,1.5\n7.1,0.5\n7.2,1.9\n", "SWR is 1 or more"),
    ("sweep.csv", b"7.0,1.5\n7.1,abc\n7.2,1.9\n", "'abc' is not a number"),
    ("sweep.csv", b"7.0,1.5\n7.0,1.3\n7.2,1.9\n", "appears twice"),
    ("sweep.s1p", b"# MHz S RI R 50\n7.0 0.1\n", "Touchstone"),
])
def test_bad_files_get_one_clear_line(name: str, data: bytes, needle: str) -> None:
    with pytest.raises(RecordError) as info:
        read_sweep(data, name)
    message = str(info.value)
    assert needle in message and name in message and "\n" not in message
