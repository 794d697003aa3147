"""One build fills each impedance matrix once (no module-level caches, one solver context).

The fills are counted here, independently of the solver context's own counter
(tests/fill_count.py): a repeat is a matrix of the same geometry, ground and frequency filled
twice, however the mesh object came to be.
"""

from __future__ import annotations

from pathlib import Path

from fill_count import counted_fills

from buildsheet.build import build
from buildsheet.cli.main import demo_spec_text


def test_demo_build_fills_each_matrix_once(tmp_path: Path) -> None:
    spec = tmp_path / "demo.toml"
    spec.write_text(demo_spec_text(), encoding="utf-8")
    with counted_fills() as seen:
        result = build(spec, tmp_path / "out", built_at="2027-03-01T00:00:00Z")
    repeats = {k: n for k, n in seen.items() if n > 1}
    assert not repeats, f"{len(repeats)} matrices filled more than once"
    assert sum(seen.values()) == result.matrix_fills > 0

    # A second build in the same process solves everything again (nothing is kept between
    # builds) and fills the same matrices, once each.
    with counted_fills() as seen:
        again = build(spec, tmp_path / "out", built_at="2027-03-01T00:00:01Z")
    assert not [k for k, n in seen.items() if n > 1]
    assert sum(seen.values()) == again.matrix_fills == result.matrix_fills
