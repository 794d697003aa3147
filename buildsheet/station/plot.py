"""SVG plot of one analyzer sweep: SWR against frequency, with the band edges, the design
frequency, the 2:1 line and the resonance found. Formats only: the numbers come from
:mod:`buildsheet.calc.sweep` and the element record."""

from __future__ import annotations

from html import escape

from buildsheet.calc.sweep import BANDWIDTH_SWR, Sweep, SweepFit

WIDTH, HEIGHT = 360.0, 220.0
LEFT, RIGHT, TOP, BOTTOM = 38.0, 10.0, 14.0, 34.0
SWR_TOP = 5.0  # the plot is clipped at this SWR


def _mhz(hz: float) -> str:
    return f"{hz / 1e6:.3f}"


def sweep_svg(sweep: Sweep, fit: SweepFit, band_low_hz: float, band_high_hz: float,
              design_hz: float, title: str = "") -> str:
    """The plot as an SVG document (text). Frequencies Hz; the x axis spans the sweep and the
    band, whichever is wider."""
    f_lo = min(sweep.freqs_hz[0], band_low_hz, design_hz)
    f_hi = max(sweep.freqs_hz[-1], band_high_hz, design_hz)
    span = (f_hi - f_lo) or 1.0
    plot_w, plot_h = WIDTH - LEFT - RIGHT, HEIGHT - TOP - BOTTOM

    def x(f: float) -> float:
        return LEFT + (f - f_lo) / span * plot_w

    def y(s: float) -> float:
        return TOP + (SWR_TOP - min(max(s, 1.0), SWR_TOP)) / (SWR_TOP - 1.0) * plot_h

    parts = [
        (f'<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {WIDTH:g} {HEIGHT:g}" '
        f'role="img" aria-label="{escape(title or "SWR sweep")}" class="sweep">'),
        (f'<rect x="{x(band_low_hz):.1f}" y="{TOP:g}" width="{x(band_high_hz) - x(band_low_hz):.1f}"'
        f' height="{plot_h:g}" fill="#e8f0e8"/>'),
    ]
    for s in (1, 2, 3, 4, 5):
        parts.append(f'<line x1="{LEFT:g}" x2="{WIDTH - RIGHT:g}" y1="{y(s):.1f}" y2="{y(s):.1f}"'
                     f' stroke="{"#a33" if s == BANDWIDTH_SWR else "#ccc"}" stroke-width="1"/>')
        parts.append(f'<text x="{LEFT - 4:g}" y="{y(s) + 4:.1f}" text-anchor="end" '
                     f'font-size="10">{s}</text>')
    for f, label in ((band_low_hz, _mhz(band_low_hz)), (band_high_hz, _mhz(band_high_hz))):
        parts.append(f'<line x1="{x(f):.1f}" x2="{x(f):.1f}" y1="{TOP:g}" y2="{TOP + plot_h:g}" '
                     'stroke="#4a4" stroke-dasharray="4 3"/>')
        parts.append(f'<text x="{x(f):.1f}" y="{HEIGHT - 20:g}" text-anchor="middle" '
                     f'font-size="10">{label}</text>')
    parts.append(f'<line x1="{x(design_hz):.1f}" x2="{x(design_hz):.1f}" y1="{TOP:g}" '
                 f'y2="{TOP + plot_h:g}" stroke="#226" stroke-width="1.5"/>')
    parts.append(f'<text x="{x(design_hz):.1f}" y="{TOP - 3:g}" text-anchor="middle" '
                 f'font-size="10">design {_mhz(design_hz)}</text>')
    points = " ".join(f"{x(f):.1f},{y(s):.1f}" for f, s in zip(sweep.freqs_hz, sweep.swr))
    parts.append(f'<polyline points="{points}" fill="none" stroke="#000" stroke-width="1.6"/>')
    parts.append(f'<circle cx="{x(fit.resonance_hz):.1f}" cy="{y(fit.swr):.1f}" r="3.5" '
                 'fill="#c60"/>')
    parts.append(f'<text x="{WIDTH / 2:g}" y="{HEIGHT - 4:g}" text-anchor="middle" '
                 f'font-size="10">MHz; SWR (clipped at {SWR_TOP:g}); shaded: band; red: '
                 f'{BANDWIDTH_SWR:g}:1</text>')
    parts.append("</svg>")
    return "\n".join(parts) + "\n"
