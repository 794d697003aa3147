"""Plain-text tables for the terminal (``buildsheet check``)."""

from __future__ import annotations

from buildsheet.packet import Packet
from buildsheet.spec.units import format_both, format_frequency


def _table(header: list[str], rows: list[list[str]]) -> str:
    widths = [max(len(r[i]) for r in [header, *rows]) for i in range(len(header))]
    line = "  ".join("-" * w for w in widths)
    fmt = "  ".join(f"{{:<{w}}}" for w in widths)
    return "\n".join([fmt.format(*header), line, *(fmt.format(*r) for r in rows)])


def cut_table(packet: Packet) -> str:
    """Per design: band, frequency, the three model lengths, allowances and the cut per leg."""
    units = packet.design.event.units
    out = []
    for c in packet.cuts:
        kits = packet.kits_of(c.design.key)
        out.append(f"{c.design.key}: {c.design.title} - {len(kits)} kit(s); "
                   f"model: {c.prediction.model_note}")
        rows = []
        for e in c.elements:
            p = e.prediction
            rows.append([
                e.element.band_label, format_frequency(e.element.frequency_hz),
                format_both(e.rule468_leg_m, units), format_both(e.closed_form_leg_m, units),
                format_both(e.predicted_leg_m, units), f"{e.trim_fraction:.1%}",
                format_both(e.cut_leg_m, units),
                f"{p.z_feed.real:.0f}{'+' if p.z_feed.imag >= 0 else '-'}j{abs(p.z_feed.imag):.0f}",
                f"{p.swr_at_design:.2f}",
                format_both(e.tuning_m_per_100khz, units),
            ])
        out.append(_table(["band", "freq", "468/f leg", "closed-form leg", "model leg", "trim",
                           "CUT each leg", "Z feed", "SWR", "per leg per 100 kHz"], rows))
        out.append("")
        out.append(performance_table(packet, c.design.key))
        out.append("")
    return "\n".join(out)


def performance_table(packet: Packet, design_key: str) -> str:
    """NVIS figures, height advice and exposure distances of one design."""
    units = packet.design.event.units
    perf = packet.performance_for(design_key)
    rows = []
    for b in perf.bands:
        n, h = b.nvis, b.height
        rows.append([
            b.band_label, f"{n.zenith_gain_dbi:.1f} dBi", f"{n.share_above_60:.0%}",
            f"{n.share_above_45:.0%}", f"{n.main_lobe_elevation_deg:.0f} deg",
            f"{n.ground_loss_share:.0%}", format_both(h.best_height_m, units),
            "; ".join(f"{d.limit.name} {format_both(d.distance_m, units)}"
                      for d in b.exposure.distances),
        ])
    text = _table(["band", "zenith", ">60 deg", ">45 deg", "main lobe", "ground loss",
                   "best height", "exposure: limit met beyond"], rows)
    if perf.compromise is not None:
        text += f"\ncompromise apex for all bands: {format_both(perf.compromise.height_m, units)}"
    text += "\nexposure: screening estimate only (far field x 2.56); local rules govern."
    return text
