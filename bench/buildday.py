"""Build-day benchmarks (issue 5): spool cut plan for 1,000 cuts on 50 spools.

Prints timings; target: the spool plan under 1 s. Instance data are synthetic (seeded): legs
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
    """Wall time to build the demo designs' packet with ``kits`` fan kits (seconds).

    The physics is solved once per design, so the cost beyond it grows with pages and labels.
    Model caches are cleared first so each run pays for the physics once.
    """
    import tempfile
    from pathlib import Path

    from buildsheet.build import build
    from buildsheet.calc import performance
    from buildsheet.cli.main import demo_spec_text
    from buildsheet.em import prediction, solve

    for cached in (solve.predict_mom, prediction.closed_form_prediction, performance.design_performance):
        cached.cache_clear()
    text = demo_spec_text().replace("count = 10", f"count = {kits}").replace(
        "count = 5", f"count = {max(5, kits // 2)}").replace("count = 12", f"count = {kits + 4}")
    with tempfile.TemporaryDirectory() as tmp:
        spec = Path(tmp) / "day.toml"
        spec.write_text(text, encoding="utf-8")
        t0 = time.perf_counter()
        build(spec, Path(tmp) / "out", built_at="2027-03-01T00:00:00Z")
        return time.perf_counter() - t0


def main() -> None:
    run("two wires, leg lengths", *instance())
    run("one material, tight", *tight_instance())
    t12, t48 = packet_timing(12), packet_timing(48)
    print(f"packet, 12 fan kits + 3 dipoles: {t12:.2f} s")
    print(f"packet, 48 fan kits + 3 dipoles: {t48:.2f} s  (target < 6 s; ratio "
          f"{t48 / t12:.2f}, target <= 3)")


if __name__ == "__main__":
    main()
