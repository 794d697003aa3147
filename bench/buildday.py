"""Build-day benchmarks: spool cut plan for 1,000 cuts on 50 spools, and whole packets of
12, 48 and 192 kits.

Prints timings; targets: the spool plan under 1 s; 192 kits under 10 s (the as-built ledger
issue), each packet built by the `buildsheet packet` command in a fresh process. Instance data are synthetic (seeded): legs
of 80/60/40 m-band lengths for a large day, two wire types, 25 spools of each.
Run: python bench/buildday.py
"""

from __future__ import annotations

import random
import statistics
import time

from buildsheet.calc.stock import Cut, StockItem, plan_spools


def instance(seed: int = 5) -> tuple[list[Cut], list[StockItem]]:
    """1,000 leg cuts (500 kits' worth of legs split over two wires) and 50 spools."""
    rng = random.Random(seed)
    bands = (("80m", 19.3, 21.0), ("60m", 12.8, 13.6), ("40m", 9.7, 10.4))
    cuts = []
    k = 0
    while len(cuts) < 1000:
        k += 1
        band, lo, hi = bands[k % 3]
        length = round(rng.uniform(lo, hi), 3)
        wire = "awg14-pvc" if k % 2 else "awg18-pvc"
        for leg in "AB":
            cuts.append(Cut(f"K{k:03d}-{band}-{leg}", wire, length, f"{band} leg {leg}"))
    stock = [StockItem("awg14-pvc", 305.0, 25, "14 AWG PVC, 1000 ft spool"),
             StockItem("awg18-pvc", 305.0, 25, "18 AWG PVC, 1000 ft spool")]
    return cuts[:1000], stock


def tight_instance(seed: int = 7) -> tuple[list[Cut], list[StockItem]]:
    """One material, 1,000 cuts of 0.5-30 m, 50 spools sized so the stock is about 99 % used
    (the hard end: every spool must be packed nearly full)."""
    rng = random.Random(seed)
    cuts = [Cut(f"C{i:04d}", "w", round(rng.uniform(0.5, 30.0), 3), "") for i in range(1000)]
    need = sum(c.length_m + 0.01 for c in cuts)
    return cuts, [StockItem("w", round(need / 49.5, 2), 50, "spool")]


def run(name: str, cuts: list[Cut], stock: list[StockItem]) -> None:
    times = []
    plan = None
    for _ in range(5):
        t0 = time.perf_counter()
        plan = plan_spools(cuts, stock)
        times.append(time.perf_counter() - t0)
    assert plan is not None
    print(f"spool plan ({name}): {len(cuts)} cuts, {sum(s.count for s in stock)} spools on hand")
    print(f"  time: median {statistics.median(times):.3f} s, max {max(times):.3f} s "
          f"(target < 1 s)")
    for m in plan.materials:
        print(f"  {m.material}: {m.spools_used} spools used, lower bound {m.lower_bound}, "
              f"waste {m.waste_m:.2f} m, unassigned {len(m.unassigned)}, method {m.method}")


def packet_timing(kits: int) -> float:
    """Wall time of `buildsheet packet` in a fresh process (as users run it) for the demo's
    designs with ``kits`` fan kits (the 60 m dipole kits stay 3; spools and cord scale with the
    kits so the day stays buyable), seconds."""
    import os
    import shutil
    import subprocess
    import sys
    import tempfile
    from pathlib import Path

    from buildsheet.cli.main import demo_spec_text

    text = demo_spec_text().replace("count = 10", f"count = {kits}").replace(
        "count = 5", f"count = {max(5, kits // 2)}").replace("count = 12", f"count = {kits + 4}")
    exe = shutil.which("buildsheet") or str(Path(sys.executable).with_name("buildsheet"))
    with tempfile.TemporaryDirectory() as tmp:
        spec = Path(tmp) / "day.toml"
        spec.write_text(text, encoding="utf-8")
        t0 = time.perf_counter()
        subprocess.run([exe, "packet", str(spec), "-o", str(Path(tmp) / "out")], check=True,
                       stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, env=dict(os.environ))
        return time.perf_counter() - t0


def main() -> None:
    run("two wires, leg lengths", *instance())
    run("one material, tight", *tight_instance())
    times = {k: packet_timing(k) for k in (12, 48, 192)}
    for k, t in times.items():
        print(f"packet, {k} fan kits + 3 dipoles (`buildsheet packet`, fresh "
              f"process): {t:.2f} s" + ("  (target < 10 s)" if k == 192 else ""))
    print(f"  ratio 192/12 kits: {times[192] / times[12]:.1f}")


if __name__ == "__main__":
    main()
