"""Counting impedance-matrix fills from outside the solver context (tests and bench/packet.py).

Every call of the method-of-moments fill is intercepted and keyed by a digest of the mesh's
segment end points, radii and ground and by the frequency, so a repeat is a matrix of the same
geometry, ground and frequency filled twice, however the mesh object came to be.
"""

from __future__ import annotations

import hashlib
from collections import Counter
from collections.abc import Iterator
from contextlib import contextmanager

import numpy as np

from buildsheet.em import mom


def digest(mesh: mom.Mesh, frequency_hz: float) -> tuple[str, float]:
    """Key of one fill: sha256 of the mesh's geometry, radii, ground and wires; frequency."""
    h = hashlib.sha256()
    for a in (mesh.p0, mesh.p1, mesh.radius):
        h.update(np.ascontiguousarray(a, dtype=float).tobytes())
    g = mesh.structure.ground
    gc = g.ground_class
    h.update(repr((g.kind, g.model, None if gc is None else (gc.eps_r, gc.sigma))).encode())
    h.update(repr([w.wire for w in mesh.structure.wires]).encode())
    return h.hexdigest(), float(frequency_hz)


@contextmanager
def counted_fills() -> Iterator[Counter[tuple[str, float]]]:
    """Within the block, count every fill by :func:`digest` (the counter is yielded)."""
    seen: Counter[tuple[str, float]] = Counter()
    fill = mom.impedance_matrix

    def counting(mesh, frequency_hz, **kw):
        seen[digest(mesh, frequency_hz)] += 1
        return fill(mesh, frequency_hz, **kw)

    mom.impedance_matrix = counting
    try:
        yield seen
    finally:
        mom.impedance_matrix = fill
