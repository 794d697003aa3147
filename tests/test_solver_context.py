"""One build fills each impedance matrix once (no module-level caches, one solver context).

The fills are counted here, independently of the solver context's own counter: every call of
the method-of-moments fill is intercepted and keyed by a digest of the mesh's segment end
points, radii and ground and by the frequency, so a repeat is a matrix of the same geometry,
ground and frequency filled twice, however the mesh object came to be.
"""

from __future__ import annotations

import hashlib
from collections import Counter
from pathlib import Path

import numpy as np

from buildsheet.build import build
from buildsheet.cli.main import demo_spec_text
from buildsheet.em import mom


def _digest(mesh: mom.Mesh, frequency_hz: float) -> tuple[str, float]:
    h = hashlib.sha256()
    for a in (mesh.p0, mesh.p1, mesh.radius):
        h.update(np.ascontiguousarray(a, dtype=float).tobytes())
    g = mesh.structure.ground
    gc = g.ground_class
    h.update(repr((g.kind, g.model, None if gc is None else (gc.eps_r, gc.sigma))).encode())
    h.update(repr([w.wire for w in mesh.structure.wires]).encode())
    return h.hexdigest(), float(frequency_hz)


def test_demo_build_fills_each_matrix_once(tmp_path: Path, monkeypatch) -> None:
    seen: Counter[tuple[str, float]] = Counter()
    fill = mom.impedance_matrix

    def counting(mesh, frequency_hz, **kw):
        seen[_digest(mesh, frequency_hz)] += 1
        return fill(mesh, frequency_hz, **kw)

    monkeypatch.setattr(mom, "impedance_matrix", counting)
    spec = tmp_path / "demo.toml"
    spec.write_text(demo_spec_text(), encoding="utf-8")
    result = build(spec, tmp_path / "out", built_at="2027-03-01T00:00:00Z")
    repeats = {k: n for k, n in seen.items() if n > 1}
    assert not repeats, f"{len(repeats)} matrices filled more than once"
    assert sum(seen.values()) == result.matrix_fills > 0
    assert result.repeated_fills == 0

    # A second build in the same process solves everything again (nothing is kept between
    # builds) and fills the same matrices, once each.
    seen.clear()
    again = build(spec, tmp_path / "out", built_at="2027-03-01T00:00:01Z")
    assert not [k for k, n in seen.items() if n > 1]
    assert sum(seen.values()) == again.matrix_fills == result.matrix_fills
