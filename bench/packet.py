"""Benchmark: build the demo packet; print wall time and peak memory.

Target (issue 2) on the 2-core machine: under 2 s and 250 MB for the demo.
Run: python bench/packet.py
"""

from __future__ import annotations

import resource
import sys
import tempfile
import time
from pathlib import Path


def main() -> None:
    t0 = time.perf_counter()
    from buildsheet.build import build
    from buildsheet.cli.main import demo_spec_text

    t_import = time.perf_counter() - t0
    with tempfile.TemporaryDirectory() as tmp:
        spec = Path(tmp) / "demo.toml"
        spec.write_text(demo_spec_text(), encoding="utf-8")
        t1 = time.perf_counter()
        result = build(spec, Path(tmp) / "out", built_at="2027-03-01T00:00:00Z")
        t_build = time.perf_counter() - t1
        sizes = {f: (result.out_dir / f).stat().st_size for f in result.files}
    peak_mb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(f"imports          {t_import:6.2f} s")
    print(f"demo packet      {t_build:6.2f} s  (target < 2 s)")
    print(f"total wall       {t_import + t_build:6.2f} s")
    print(f"peak memory      {peak_mb:6.0f} MB (target < 250 MB)")
    for name, size in sizes.items():
        print(f"  {name:14s} {size / 1024:8.1f} KiB")
    sys.stdout.flush()


if __name__ == "__main__":
    main()
