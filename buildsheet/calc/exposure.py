"""RF-exposure screening: far-field power density and the distances to the exposure limits.

Method: FCC OET Bulletin 65, Edition 97-01 (1997), section 2 and Supplement B (amateur radio):
S = 2.56 EIRP / (4 pi R^2) with the EPA ground-reflection factor 2.56 (field x 1.6), and
R = sqrt(2.56 EIRP / (4 pi S_limit)). Average power = PEP x mode duty factor x transmit
fraction of the averaging window (6 min for the controlled/occupational and local limits,
30 min for the uncontrolled/general-public whole-body limits), less feedline loss. The ICNIRP
2010 nerve-stimulation levels (100 kHz-10 MHz) are not time-averaged: they are evaluated at
peak envelope power. A screening estimate only: the formula is for the far field, and HF
distances of interest lie in the reactive near field.
Units SI: W, m, Hz, W/m^2 (1 mW/cm^2 = 10 W/m^2).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass
from typing import Literal

from buildsheet.calc.safety import exposure_cautions
from buildsheet.constants import C0, ETA0
from buildsheet.errors import BuildError

Regime = Literal["fcc", "icnirp2020", "both"]
REGIMES: tuple[str, ...] = ("fcc", "icnirp2020", "both")

#: EPA ground-reflection factor for power density (field x 1.6), FCC OET Bulletin 65.
GROUND_REFLECTION_FACTOR: float = 2.56

#: Mode duty factors (common practice, FCC OET Bulletin 65 Supplement B Table 1, from memory).
DUTY_FACTORS: dict[str, float] = {
    "ssb": 0.20,  # conversational SSB voice, no speech processing
    "ssb-processed": 0.40,  # conversational SSB with heavy speech processing
    "cw": 0.40,  # conversational CW
    "fm": 1.00,
    "data": 1.00,  # most digital modes
    "rtty": 1.00,
    "carrier": 1.00,  # key-down, tune-up
}

_MW_CM2 = 10.0  # W/m^2 per mW/cm^2


@dataclass(frozen=True)
class ExposureLimit:
    """One reference level at one frequency.

    e_v_m / h_a_m: field-strength limits (V/m, A/m; None if not set); s_w_m2: the power-density
    limit used for the distance, W/m^2 (FCC: the table's plane-wave-equivalent S; ICNIRP below
    30 MHz: the equivalent plane-wave S = E^2/eta0 from the E limit, our conversion);
    averaging_s: averaging time, s (0 for a limit on instantaneous fields, met at PEP);
    public: True for general-public/uncontrolled limits (the keep-out for bystanders).
    """

    regime: str
    name: str
    e_v_m: float | None
    h_a_m: float | None
    s_w_m2: float
    averaging_s: float
    public: bool = True

    @property
    def at_peak(self) -> bool:
        """True when the limit applies to peak envelope power (no time averaging)."""
        return self.averaging_s == 0.0


# 47 CFR 1.1310 Table 1 (limits for maximum permissible exposure), f in MHz; S in mW/cm^2.
# Rows: (f_low, f_high, E(f), H(f), S(f)); E and H None where the table gives none.
_Fn = Callable[[float], float]
_FCC_ROWS: dict[str, tuple[tuple[float, float, _Fn | None, _Fn | None, _Fn], ...]] = {
    "controlled": (
        (0.3, 3.0, lambda f: 614.0, lambda f: 1.63, lambda f: 100.0),
        (3.0, 30.0, lambda f: 1842.0 / f, lambda f: 4.89 / f, lambda f: 900.0 / f**2),
        (30.0, 300.0, lambda f: 61.4, lambda f: 0.163, lambda f: 1.0),
        (300.0, 1500.0, None, None, lambda f: f / 300.0),
        (1500.0, 100000.0, None, None, lambda f: 5.0),
    ),
    "uncontrolled": (
        (0.3, 1.34, lambda f: 614.0, lambda f: 1.63, lambda f: 100.0),
        (1.34, 30.0, lambda f: 824.0 / f, lambda f: 2.19 / f, lambda f: 180.0 / f**2),
        (30.0, 300.0, lambda f: 27.5, lambda f: 0.073, lambda f: 0.2),
        (300.0, 1500.0, None, None, lambda f: f / 1500.0),
        (1500.0, 100000.0, None, None, lambda f: 1.0),
    ),
}
_FCC_AVERAGING_S = {"controlled": 360.0, "uncontrolled": 1800.0}


def fcc_limits(frequency_hz: float) -> tuple[ExposureLimit, ExposureLimit]:
    """47 CFR 1.1310 Table 1 MPE limits (controlled, uncontrolled) at ``frequency_hz``."""
    f = frequency_hz / 1e6
    out = []
    for cls in ("controlled", "uncontrolled"):
        row = next((r for r in _FCC_ROWS[cls] if r[0] <= f <= r[1]), None)
        if row is None:
            raise BuildError(f"no 47 CFR 1.1310 limit for {f:g} MHz (table covers 0.3-100000 MHz)")
        _, _, e, h, s = row
        out.append(
            ExposureLimit(
                "fcc",
                f"FCC {cls}",
                None if e is None else e(f),
                None if h is None else h(f),
                s(f) * _MW_CM2,
                _FCC_AVERAGING_S[cls],
                cls == "uncontrolled",
            )
        )
    return out[0], out[1]


# ICNIRP (2020) "Guidelines for limiting exposure to electromagnetic fields (100 kHz to
# 300 GHz)", Health Phys. 118(5):483-524. 0.1-30 MHz rows, f in MHz: (E coefficient for
# E = a / f^0.7 V/m, H coefficient for H = b / f A/m, averaging s).
_ICNIRP_ROWS: tuple[tuple[str, float, float, float], ...] = (
    ("ICNIRP 2020 occupational whole body (Table 5)", 660.0, 4.9, 1800.0),
    ("ICNIRP 2020 general public whole body (Table 5)", 300.0, 2.2, 1800.0),
    ("ICNIRP 2020 occupational local (Table 6)", 1504.0, 10.8, 360.0),
    ("ICNIRP 2020 general public local (Table 6)", 671.0, 4.9, 360.0),
)


def icnirp2020_limits(frequency_hz: float) -> tuple[ExposureLimit, ...]:
    """ICNIRP 2020 reference levels (Tables 5 and 6) at 0.1-30 MHz, as E/H field limits.

    ICNIRP sets no power density below 30 MHz; s_w_m2 is our equivalent plane-wave density
    E^2/eta0, used only for the far-field distance estimate.
    """
    f = frequency_hz / 1e6
    if not 0.1 <= f <= 30.0:
        raise BuildError(f"ICNIRP 2020 levels are implemented for 0.1-30 MHz, not {f:g} MHz")
    out = []
    for name, a, b, avg in _ICNIRP_ROWS:
        e = a / f**0.7
        out.append(ExposureLimit("icnirp2020", name, e, b / f, e * e / ETA0, avg,
                                 "general public" in name))
    return tuple(out)


# ICNIRP (2010) "Guidelines for limiting exposure to time-varying electric and magnetic fields
# (1 Hz to 100 kHz)", Health Phys. 99(6):818-836, reference levels 3 kHz-10 MHz (nerve
# stimulation; unperturbed rms, not time-averaged): (name, E V/m, H A/m).
_ICNIRP2010_ROWS: tuple[tuple[str, float, float], ...] = (
    ("ICNIRP 2010 occupational nerve stimulation (at PEP)", 170.0, 80.0),
    ("ICNIRP 2010 general public nerve stimulation (at PEP)", 83.0, 21.0),
)
#: Upper frequency of the ICNIRP 2010 nerve-stimulation levels, Hz (ICNIRP 2020 defers to
#: them from 100 kHz to 10 MHz).
NERVE_STIMULATION_MAX_HZ: float = 10.0e6


def icnirp2010_limits(frequency_hz: float) -> tuple[ExposureLimit, ...]:
    """ICNIRP 2010 nerve-stimulation reference levels at 0.1-10 MHz (empty above 10 MHz).

    Instantaneous-effect limits: averaging_s = 0, evaluated at peak envelope power. s_w_m2 is
    the equivalent plane-wave density E^2/eta0 (our conversion, for the distance estimate).
    """
    if not 0.1e6 <= frequency_hz <= NERVE_STIMULATION_MAX_HZ:
        return ()
    return tuple(ExposureLimit("icnirp2010", name, e, h, e * e / ETA0, 0.0,
                               "general public" in name) for name, e, h in _ICNIRP2010_ROWS)


def average_power_w(
    pep_w: float, mode: str, transmit_fraction: float, feedline_loss_db: float = 0.0
) -> float:
    """Average power at the antenna, W: PEP x duty(mode) x transmit fraction x 10^(-loss/10)."""
    if mode not in DUTY_FACTORS:
        raise BuildError(f"unknown mode {mode!r}; allowed: {', '.join(DUTY_FACTORS)}")
    if not 0.0 <= transmit_fraction <= 1.0:
        raise BuildError(f"transmit fraction {transmit_fraction} must lie in 0..1")
    return pep_w * DUTY_FACTORS[mode] * transmit_fraction * 10.0 ** (-feedline_loss_db / 10.0)


def power_density_w_m2(eirp_w: float, distance_m: float, ground_reflection: bool = True) -> float:
    """Far-field power density, W/m^2: (2.56) EIRP / (4 pi R^2) (OET Bulletin 65 section 2)."""
    factor = GROUND_REFLECTION_FACTOR if ground_reflection else 1.0
    return factor * eirp_w / (4.0 * math.pi * distance_m**2)


def distance_for_density(eirp_w: float, s_w_m2: float, ground_reflection: bool = True) -> float:
    """Distance, m, beyond which the far-field estimate is below ``s_w_m2`` W/m^2."""
    factor = GROUND_REFLECTION_FACTOR if ground_reflection else 1.0
    return math.sqrt(factor * eirp_w / (4.0 * math.pi * s_w_m2))


@dataclass(frozen=True)
class LimitDistance:
    """A limit and the distance, m, beyond which the screening estimate meets it.

    ``power_w`` is the power at the antenna the limit is evaluated with (W: averaged over the
    limit's window, or the peak envelope power for an instantaneous limit)."""

    limit: ExposureLimit
    distance_m: float
    power_w: float = 0.0


@dataclass(frozen=True)
class ExposureScreen:
    """Result of one RF-exposure screen (numbers plus the caution lines to print)."""

    frequency_hz: float
    regime: str
    pep_w: float
    mode: str
    duty_factor: float
    transmit_fraction: float  # over the 30-minute window
    feedline_loss_db: float
    average_power_w: float  # over the 30-minute window, at the antenna
    gain_dbi: float
    eirp_w: float  # from average_power_w
    distances: tuple[LimitDistance, ...]
    near_field_m: float
    cautions: tuple[str, ...]
    transmit_fraction_6min: float = 0.0  # over the 6-minute window (never below the 30-min one)
    peak_power_w: float = 0.0  # PEP at the antenna after feedline loss, W
    governing: LimitDistance | None = None  # largest distance among the public limits
    keep_out_m: float = 0.0  # concrete keep-out radius around low ends and the feed, m

    @property
    def average_power_6min_w(self) -> float:
        """Average power at the antenna over the 6-minute window, W."""
        return self.peak_power_w * self.duty_factor * self.transmit_fraction_6min


#: Smallest keep-out radius printed around low element ends, m (common practice: a rope at
#: least about an arm's length plus a step beyond the end).
KEEP_OUT_MIN_M: float = 1.0
#: Keep-out radii are rounded up to this step, m.
KEEP_OUT_STEP_M: float = 0.5


def keep_out_radius_m(distance_m: float) -> float:
    """Keep-out radius, m: the governing distance rounded up to 0.5 m, at least 1 m."""
    return max(KEEP_OUT_MIN_M, math.ceil(distance_m / KEEP_OUT_STEP_M - 1e-9) * KEEP_OUT_STEP_M)


def window_fractions(transmit_fraction: float, fraction_6min: float | None = None,
                     fraction_30min: float | None = None) -> tuple[float, float]:
    """Transmit fractions (6-minute window, 30-minute window).

    A window without its own fraction takes ``transmit_fraction``. The busiest 6 minutes are
    never quieter than a 30-minute average, so the 6-minute fraction is at least the 30-minute
    one (the conservative choice).
    """
    f30 = transmit_fraction if fraction_30min is None else fraction_30min
    f6 = transmit_fraction if fraction_6min is None else fraction_6min
    for v in (f6, f30):
        if not 0.0 <= v <= 1.0:
            raise BuildError(f"transmit fraction {v} must lie in 0..1")
    return max(f6, f30), f30


def screen(
    frequency_hz: float,
    pep_w: float,
    mode: str,
    transmit_fraction: float,
    gain_dbi: float,
    feedline_loss_db: float = 0.0,
    regime: Regime = "both",
    *,
    fraction_6min: float | None = None,
    fraction_30min: float | None = None,
) -> ExposureScreen:
    """Screen one band: the distance to each limit of ``regime`` and the governing one.

    Averaged limits use PEP x duty x the transmit fraction of their window (6 min: FCC
    controlled, ICNIRP local; 30 min: FCC uncontrolled, ICNIRP whole body). The ICNIRP 2010
    nerve-stimulation levels (0.1-10 MHz) use the peak envelope power; they are part of every
    regime here (ICNIRP 2020 requires them; FCC rules do not set them, so for "fcc" they are
    shown as prudent practice and count towards the keep-out).
    """
    if regime not in REGIMES:
        raise BuildError(f"unknown exposure regime {regime!r}; allowed: {', '.join(REGIMES)}")
    f6, f30 = window_fractions(transmit_fraction, fraction_6min, fraction_30min)
    p_avg = average_power_w(pep_w, mode, f30, feedline_loss_db)
    p_avg6 = average_power_w(pep_w, mode, f6, feedline_loss_db)
    p_peak = pep_w * 10.0 ** (-feedline_loss_db / 10.0)
    gain = 10.0 ** (gain_dbi / 10.0)
    limits: list[ExposureLimit] = []
    if regime in ("fcc", "both"):
        limits.extend(fcc_limits(frequency_hz))
    if regime in ("icnirp2020", "both"):
        limits.extend(icnirp2020_limits(frequency_hz))
    limits.extend(icnirp2010_limits(frequency_hz))

    def power(lim: ExposureLimit) -> float:
        if lim.at_peak:
            return p_peak
        return p_avg6 if lim.averaging_s <= 360.0 else p_avg

    dists = tuple(LimitDistance(lim, distance_for_density(power(lim) * gain, lim.s_w_m2),
                                power(lim)) for lim in limits)
    public = [d for d in dists if d.limit.public]
    governing = max(public, key=lambda d: d.distance_m) if public else None
    near = C0 / frequency_hz / (2.0 * math.pi)
    keep_out = keep_out_radius_m(governing.distance_m if governing else 0.0)
    return ExposureScreen(
        frequency_hz=frequency_hz,
        regime=regime,
        pep_w=pep_w,
        mode=mode,
        duty_factor=DUTY_FACTORS[mode],
        transmit_fraction=f30,
        feedline_loss_db=feedline_loss_db,
        average_power_w=p_avg,
        gain_dbi=gain_dbi,
        eirp_w=p_avg * gain,
        distances=dists,
        near_field_m=near,
        cautions=exposure_cautions(near),
        transmit_fraction_6min=f6,
        peak_power_w=p_peak,
        governing=governing,
        keep_out_m=keep_out,
    )
