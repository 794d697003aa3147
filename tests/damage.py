"""Synthetic field damage for winder labels: round blots on a label (our own model).

A winder label gets scuffed, smeared and splashed. The model: discs of 1 to 2 mm radius, each
dark (ink, mud) or light (worn print) at random, centred at random anywhere in a region until
the given share of the region's area is covered. The label tests and the bench use the whole
label as the region ("5 % of its area" is 5 % of the label: blots land on the text, the quiet
zones and the symbols alike). With spared finders no disc touches any symbol's three finder
patterns with their separators (8 x 8 modules each; ISO/IEC 18004 clause 6.3.3). Everything
is seeded, so a run is repeatable.

Shared by the label tests and ``bench/labels.py``; pixels are numpy grey arrays (0 black).
"""

from __future__ import annotations

import random

import numpy as np

#: Blot radius range, mm.
BLOT_RADIUS_MM: tuple[float, float] = (1.0, 2.0)


def finder_zones(symbol: tuple[int, int, int], modules: int, turns: int = 0
                 ) -> list[tuple[int, int, int, int]]:
    """The three finder patterns with separators as (x0, y0, x1, y1) px, for a symbol box
    (left, top, side in px, quiet zone excluded) of ``modules`` across, turned ``turns``
    quarter turns clockwise (upright, the finders sit top-left, top-right and bottom-left)."""
    left, top, side = symbol
    f = round(8 * side / modules)
    corners = [(0, 0), (1, 0), (0, 1)]  # (right?, bottom?) of each finder, upright
    for _ in range(turns % 4):  # a clockwise quarter turn takes (x, y) to (1 - y, x)
        corners = [(1 - y, x) for x, y in corners]
    return [(left + (side - f) * x, top + (side - f) * y, left + (side - f) * x + f,
             top + (side - f) * y + f) for x, y in corners]


def label_finder_zones(layout, px_per_mm: float) -> list[tuple[int, int, int, int]]:
    """Finder zones (x0, y0, x1, y1 px) of every copy of the symbol in a label ``layout``
    (buildsheet.calc.labels.LabelLayout), pixels measured from the label's top-left."""
    zones = []
    for copy, box in enumerate(layout.symbols):
        left = round((box.x + layout.quiet_zone) * px_per_mm)
        top = round((box.y + layout.quiet_zone) * px_per_mm)
        zones += finder_zones((left, top, round(layout.modules * layout.module * px_per_mm)),
                              layout.modules, layout.turn(copy))
    return zones


def blot(label: np.ndarray, share: float, seed: int, *, px_per_mm: float,
         region: tuple[int, int, int, int], spare: list[tuple[int, int, int, int]] = ()
         ) -> np.ndarray:
    """A copy of the ``label`` pixels with at least ``share`` of ``region`` (x0, y0, x1, y1 px)
    covered by blots centred inside it, none touching a rectangle of ``spare``."""
    rng = random.Random(seed)
    out = label.copy()
    h, w = out.shape
    yy, xx = np.mgrid[0:h, 0:w]
    keep = np.zeros((h, w), dtype=bool)
    for x0, y0, x1, y1 in spare:
        keep[max(y0, 0):y1, max(x0, 0):x1] = True
    rx0, ry0, rx1, ry1 = region
    inside = np.zeros((h, w), dtype=bool)
    inside[ry0:ry1, rx0:rx1] = True
    covered = np.zeros((h, w), dtype=bool)
    target = share * inside.sum()
    for _ in range(100_000):
        if (covered & inside).sum() >= target:
            break
        r = rng.uniform(*BLOT_RADIUS_MM) * px_per_mm
        cx, cy = rng.uniform(rx0, rx1), rng.uniform(ry0, ry1)
        dark = rng.random() < 0.5
        x0, x1 = max(int(cx - r), 0), min(int(cx + r) + 2, w)
        y0, y1 = max(int(cy - r), 0), min(int(cy + r) + 2, h)
        disc = np.zeros((h, w), dtype=bool)
        disc[y0:y1, x0:x1] = (xx[y0:y1, x0:x1] - cx) ** 2 + (yy[y0:y1, x0:x1] - cy) ** 2 <= r * r
        if (disc & keep).any():
            continue
        covered |= disc
        out[disc] = 0 if dark else 255
    return out
