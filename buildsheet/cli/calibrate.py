"""The ``calibrate`` subcommand: fit the site from measured kits and store the calibration.

``register(subparsers)`` adds it to the main parser (``set_defaults(handler=...)``); the handler
reads the spec and the record store, calls :mod:`buildsheet.calc.calibrate` and prints the result.
User mistakes raise RecordError / BuildError (cli.main prints them as one line).
"""

from __future__ import annotations

import argparse
import sys
from collections.abc import Mapping, Sequence
from datetime import UTC, datetime
from pathlib import Path
from typing import Any, TextIO

from buildsheet.errors import BuildError, RecordError
from buildsheet.store.ledger import default_store


def read_observations(store: Any, design: Any, ids: Sequence[str],
                      histories: Mapping[str, Any]) -> tuple[list[Any], dict[str, dict[str, float]]]:
    """Observations (latest valid dip of each ID, at the wire it had then) and the electrical
    legs of every element of the source kits, ``{kit: {element_key: leg}}``. RecordError for
    bad IDs or elements without a reading."""
    from buildsheet.calc.calibrate import Observation, electrical_leg_m
    from buildsheet.store import ledger as rec

    keys = [e.key for e in design.elements]
    rows = []
    for text in dict.fromkeys(ids):
        row, leg = rec.resolve_id(store, text)
        if leg is not None:
            raise RecordError(f"--from {text}: give an element ID ({row.id}), not a leg ID")
        if row.design != design.key or row.key not in keys:
            raise RecordError(f"--from {row.id}: that element belongs to design {row.design!r}, "
                              f"not {design.key!r}")
        rows.append(row)

    def legs(h: Any, until: str | None = None) -> float | None:
        a, b = h.current_leg_m("A", until), h.current_leg_m("B", until)
        return None if a is None or b is None else electrical_leg_m(design, a, b)

    obs = []
    for row in rows:
        h = histories[row.id]
        if not h.measurements:
            raise RecordError(f"--from {row.id}: no dip recorded for it yet; record one with "
                              f"`buildsheet measure {row.id} --dip FREQ`")
        m = h.measurements[-1]
        leg_m = legs(h, m.time)
        assert leg_m is not None  # a reading confirms both legs
        obs.append(Observation(row.id, row.key, leg_m, m.dip_hz, row.kit, swr=m.swr))
    kits = {row.kit for row in rows}
    kit_legs: dict[str, dict[str, float]] = {}
    for h in histories.values():
        e = h.element
        if e.kit in kits and e.design == design.key and e.status == "active" and e.key in keys:
            kit_leg_m = legs(h)
            if kit_leg_m is not None:
                kit_legs.setdefault(e.kit, {})[e.key] = kit_leg_m
    return obs, kit_legs


def handle_calibrate(args: argparse.Namespace, out: TextIO | None = None) -> int:
    """Fit the site ground from the latest dips of the given elements, store it, print the
    calibrated cuts and the batch trims exactly as the next packet prints them."""
    from buildsheet.build import entries_from_store
    from buildsheet.calc import calibrate as cal
    from buildsheet.em.context import Solver
    from buildsheet.packet import solve_design
    from buildsheet.spec.reader import load_spec
    from buildsheet.spec.units import format_both
    from buildsheet.store import ledger as rec

    out = out or sys.stdout
    spec = load_spec(args.spec)
    designs = {d.key: d for d in spec.designs}
    if args.design not in designs:
        raise BuildError(f"{args.spec}: no design {args.design!r} (designs: "
                         f"{', '.join(designs)})")
    design = designs[args.design]
    path = Path(args.store) if args.store else default_store(args.spec)
    print(f"record store: {path}", file=sys.stderr)
    solver = Solver()  # the fit, the entries and the before/after cuts share one context
    with rec.open_store(path, create=False, verify=True) as store:
        histories = {h.element.id: h for h in rec.load_histories(store)}
        obs, kit_legs = read_observations(store, design, args.sources, histories)
        calibration = cal.fit_site(design, spec.site.ground, obs, kit_legs, solver)
        rec.save_calibration(store, design.key, calibration.fingerprint,
                             cal.calibration_to_json(calibration), calibration.source_ids,
                             datetime.now(UTC))
        entries, _ = entries_from_store(spec, store, solver=solver)
    units = spec.event.units
    before = solve_design(design, spec, "mom", solver=solver)
    after = solve_design(design, spec, "mom", calibration, solver)
    g = calibration.ground
    print(f"Design {design.key}: site behaves like {calibration.site_like_title} (fitted eps_r "
          f"{g.eps_r:.1f}, sigma {g.sigma:.2g} S/m; the spec assumed "
          f"{calibration.assumed_ground}).", file=out)
    print(f"  Residual uncertainty {calibration.uncertainty:.2%}; stored in {path}.", file=out)
    for r in calibration.residuals:
        print(f"  {r.element_id}: dip {r.dip_hz / 1e6:.4f} MHz, model {r.model_hz / 1e6:.4f} MHz"
              f" ({r.fraction:+.2%})", file=out)
    for o in calibration.outliers:
        print(f"  EXCLUDED {o.element_id} (dip {o.dip_hz / 1e6:.4f} MHz): {o.reason}", file=out)
    for note in calibration.notes:
        print(f"  Note: {note}", file=out)
    print("  Resonant leg and prescribed cut per leg (for legs not cut yet), uncalibrated -> "
          "calibrated:", file=out)
    for b, c in zip(before.elements, after.elements, strict=True):
        print(f"    {c.element.key}: leg {b.predicted_leg_m:.3f} -> {c.predicted_leg_m:.3f} m; "
              f"cut {b.cut_leg_m:.3f} -> {c.cut_leg_m:.3f} m", file=out)
    batch = [e for e in entries if e.kit.design_key == design.key and e.state.is_cut]
    if batch:
        print("  Kits already cut, per leg (as the packet's batch-trim page lists them):",
              file=out)
        for e in batch:
            for leg in e.state.legs:
                print(f"    {leg.leg_id}: now {format_both(leg.current_m, units)}, target "
                      f"{leg.target_m:.3f} m: {leg.action.words(units, both=False)}", file=out)
    return 0


def register(subparsers: Any) -> None:
    """Add ``calibrate`` to an ``add_subparsers()`` object (sets ``handler``)."""
    p = subparsers.add_parser(
        "calibrate", help="fit the site's ground from measured kits and store it",
        description="Fit the ground constants so the model reproduces the measured dips of the "
        "given elements (latest dip of each), report which ground the site behaves like, store "
        "the calibration with the design and print corrected leg lengths and trims.")
    p.add_argument("spec", help="the TOML spec")
    p.add_argument("design", help="design key in the spec, e.g. phonefan")
    p.add_argument("--from", dest="sources", action="append", required=True, metavar="ID",
                   help='element with a recorded dip, e.g. "K01-75m" (repeat for more)')
    p.add_argument("--store", metavar="PATH",
                   help="record store (default: <spec stem>.records.sqlite beside the spec)")
    p.set_defaults(handler=handle_calibrate)
