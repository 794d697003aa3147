"""Benchmark (issue 6): record 1,000 measurements, then re-render the site for 200 elements.

Targets: under 2 s and under 3 s. Run: ``python bench/records.py``. Uses demo data only.
"""

from __future__ import annotations

import tempfile
import time
from datetime import UTC, datetime, timedelta
from pathlib import Path

from buildsheet.render.site import write_site
from buildsheet.store import ledger as rec

BANDS = (("80m", 3.6e6, 3.5e6, 4.0e6), ("60m", 5.3585e6, 5.3305e6, 5.4065e6),
         ("40m", 7.1e6, 7.0e6, 7.3e6), ("30m", 10.125e6, 10.1e6, 10.15e6))


def demo_elements(n: int) -> list[rec.ElementRow]:
    """n elements: kits of four bands (demo data; legs from 143/f, common practice)."""
    rows = []
    for i in range(n):
        key, f, lo, hi = BANDS[i % len(BANDS)]
        kit = f"K{i // len(BANDS) + 1:02d}"
        leg = 143.0 / (f / 1e6) / 2.0
        partners = tuple(f"{kit}-{b[0]}" for b in BANDS if b[0] != key)
        rows.append(rec.ElementRow(f"{kit}-{key}", kit, "demo-fan", key, f, lo, hi, leg,
                                   leg * 1.03, -leg / f, partners))
    return rows


def main() -> None:
    t0 = datetime(2024, 5, 4, 9, 0, tzinfo=UTC)
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "bench.records.sqlite"
        rows = demo_elements(200)
        with rec.open_store(path) as store:
            rec.sync_elements(store, rows, 1, t0)
            start = time.perf_counter()
            for i in range(1000):
                row = rows[i % len(rows)]
                rec.add_measurement(store, row.id, row.design_frequency_hz * 0.98, 1.5,
                                    f"bench {i}", t0 + timedelta(seconds=i))
            t_measure = time.perf_counter() - start
            for row in rows[::2]:
                rec.add_trim(store, row.id, "both", 0.02, "", t0 + timedelta(hours=1))
            start = time.perf_counter()
            histories = rec.load_histories(store)
            pages = write_site(Path(tmp) / "site", histories, "2024-05-04T12:00:00+00:00")
            t_site = time.perf_counter() - start
            assert rec.integrity_check(store) == ["ok"]
    print(f"record 1,000 measurements (one transaction each): {t_measure:.3f} s (target < 2 s)")
    print(f"re-render site, {len(histories)} elements, {len(pages)} pages: "
          f"{t_site:.3f} s (target < 3 s)")


if __name__ == "__main__":
    main()
