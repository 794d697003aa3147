"""The ``calibrate`` subcommand: fit the site from measured kits and store the calibration.

``register(subparsers)`` adds it to the main parser (``set_defaults(handler=...)``); the handler
reads the spec and the record store, calls :mod:`buildsheet.calc.calibrate` and prints the result.
User mistakes raise RecordError / BuildError (cli.main prints them as one line).
"""

from __future__ import annotations

import argparse
import sys
from collections.abc import Sequence
from datetime import UTC, datetime
from pathlib import Path
from typing import Any, TextIO

from buildsheet.errors import BuildError, RecordError
from buildsheet.store.ledger import default_store


def _mm(metres: float) -> str:
    return f"{metres * 1000:+.0f} mm"


def read_observations(store: Any, design: Any, ids: Sequence[str]) -> tuple[list[Any], dict[str, dict[str, float]]]:
    """Observations (latest dip of each ID) and the electrical legs of every element of the
    source kits, ``{kit: {element_key: leg}}``, from the store. RecordError for bad IDs."""
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
    histories = {h.element.id: h for h in rec.load_histories(store)}
    obs = []
    for row in rows:
        h = histories[row.id]
        if not h.measurements:
            raise RecordError(f"--from {row.id}: no dip recorded for it yet; record one with "
                              f"`buildsheet measure {row.id} --dip FREQ`")
        leg = electrical_leg_m(design, h.current_leg_m("A"), h.current_leg_m("B"))
        obs.append(Observation(row.id, row.key, leg, h.measurements[-1].dip_hz, row.kit))
    kits = {row.kit for row in rows}
    kit_legs: dict[str, dict[str, float]] = {}
    for h in histories.values():
        e = h.element
        if e.kit in kits and e.design == design.key and e.status == "active" and e.key in keys:
            kit_legs.setdefault(e.kit, {})[e.key] = electrical_leg_m(
                design, h.current_leg_m("A"), h.current_leg_m("B"))
    return obs, kit_legs


def handle_calibrate(args: argparse.Namespace, out: TextIO | None = None) -> int:
    """Fit the site ground from the latest dips of the given elements, store it, print it."""
    from buildsheet.calc import calibrate as cal
    from buildsheet.em.solve import predict_mom
    from buildsheet.spec.reader import load_spec
    from buildsheet.store import ledger as rec

    out = out or sys.stdout
    spec = load_spec(args.spec)
    designs = {d.key: d for d in spec.designs}
    if args.design not in designs:
        raise BuildError(f"{args.spec}: no design {args.design!r} (designs: "
                         f"{', '.join(designs)})")
    design = designs[args.design]
    path = Path(args.store) if args.store else default_store(args.spec)
    with rec.open_store(path, create=False, verify=True) as store:
        obs, kit_legs = read_observations(store, design, args.sources)
        calibration = cal.fit_site(design, spec.site.ground, obs, kit_legs)
        rec.save_calibration(store, design.key, calibration.fingerprint,
                             cal.calibration_to_json(calibration), calibration.source_ids,
                             datetime.now(UTC))
        cut = [h for h in rec.load_histories(store)
               if h.element.design == design.key and h.element.status == "active"]
    before = predict_mom(design, spec.site.ground)
    after = cal.calibrated_prediction(design, calibration)
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
    print("  Leg (feed to end insulator, electrical) and cut length per leg, uncalibrated -> "
          "calibrated:", file=out)
    for b, c in zip(before.elements, after.elements, strict=True):
        cut_b, cut_c = (_cut_leg(design, p.leg_length_m, _spread(pred, p.key))
                        for pred, p in ((before, b), (after, c)))
        print(f"    {c.key}: leg {b.leg_length_m:.3f} -> {c.leg_length_m:.3f} m "
              f"({_mm(c.leg_length_m - b.leg_length_m)}); cut {cut_b:.3f} -> {cut_c:.3f} m",
              file=out)
    trims = cal.batch_trims(design, after, [
        cal.CutElement(h.element.id, h.element.key, h.current_leg_m("A"), h.current_leg_m("B"))
        for h in cut])
    if trims:
        print("  Before raising, per leg (remove > 0, add back < 0):", file=out)
        for t in trims:
            print(f"    {t.element_id}: A {_mm(t.remove_a_m)}, B {_mm(t.remove_b_m)} "
                  f"({t.action}; target {t.target_leg_m:.3f} m)", file=out)
    return 0


def _cut_leg(design: Any, leg_m: float, spread: float | None) -> float:
    """Cut length of a leg as the build sheet sizes it (buildsheet.calc.cuts.element_cut), m."""
    from buildsheet.calc.cuts import trim_fraction_for

    a = design.allowances
    trim = (a.trim_m if (a.trim_explicit and a.trim_m is not None)
            else trim_fraction_for(design, spread) * leg_m)
    return leg_m + trim + a.termination_m + a.feed_m


def _spread(prediction: Any, key: str) -> float | None:
    keys = [e.key for e in prediction.elements]
    return prediction.spread[keys.index(key)] if prediction.spread else None


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
