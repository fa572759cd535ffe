"""``partload reconcile``, ``partload fit`` and ``partload trend``: measured plant data."""

from __future__ import annotations

import json
import sys
from pathlib import Path

from ..api import (
    fit_measurements,
    read_measurements,
    reconcile_measurements,
    trend_measurements,
)

__all__ = ["add_commands"]


def _tunables(text: str | None) -> list[str] | None:
    return None if text is None else [t.strip() for t in text.split(",") if t.strip()]


def _cmd_reconcile(args) -> int:
    from ..measure.summary import fit_to_dict, format_fit

    meas = read_measurements(args.measurements)
    results = reconcile_measurements(meas, tunables=_tunables(args.tunables),
                                     backend=args.backend)
    if args.json:
        print(json.dumps({"measurements": meas.file, "model": meas.model.name,
                          "points": [fit_to_dict(r) for r in results]}, indent=2))
        return 0
    print(f"Reconciliation of {meas.file} with {meas.model.name} (VDI 2048; uncertainties "
          f"at 95 %)\n")
    for r in results:
        print(format_fit(r))
        print()
    bad = [s for r in results for s in r.suspects()]
    aside = sum(len(r.removed) for r in results)
    failed = sum(not r.rec.passed for r in results)
    print(f"{len(results)} points: {failed} fail the quality criterion"
          + (f" ({aside} readings set aside)" if aside else "") + "; "
          + (("suspect: " + ", ".join(f"{t} at {p}" for p, t, _ in bad)) if bad
             else "no suspect reading"))
    return 0


def _cmd_fit(args) -> int:
    from ..measure.summary import fit_to_dict, format_fit

    meas = read_measurements(args.measurements)
    output = args.output
    if output is None:
        output = Path("results") / f"{Path(meas.file).stem}_as_tested.toml"
    out = fit_measurements(meas, None if args.no_model else output,
                           tunables=_tunables(args.tunables), backend=args.backend,
                           force=args.force)
    if args.json:
        data = fit_to_dict(out.fit, out.deviations, out.totals)
        data["fitted_model_file"] = str(out.path) if out.path else None
        print(json.dumps(data, indent=2))
        return 0
    keys = meas.tunables if args.tunables is None else _tunables(args.tunables)
    print(f"Fit of {', '.join(keys)} to {len(meas.values)} points of {meas.file} "
          f"(uncertainties at 95 %)\n")
    print(format_fit(out.fit, out.deviations, out.totals, readings=args.readings))
    if out.path:
        print(f"\nfitted model (as tested) written to {out.path}")
    print("Engineering estimate from measured data; the manufacturer's limits govern.")
    return 0


def _cmd_trend(args) -> int:
    from ..measure.summary import trend_summary

    meas = read_measurements(args.measurements)
    stem = Path(meas.file).stem
    output = Path(args.output) if args.output else Path("results") / f"{stem}_trend.h5"
    chart = None if args.no_chart else output.with_suffix(".png")

    def progress(i, n):
        if not args.quiet:
            print(f"\rperiod {i} of {n}", end="", file=sys.stderr, flush=True)

    trend = trend_measurements(meas, output, chart=chart, backend=args.backend,
                               progress=progress, force=args.force)
    if not args.quiet:
        print(file=sys.stderr)
    print(trend_summary(trend))
    print(f"trend written to {output}" + (f", chart {chart}" if chart else ""))
    return 0


def add_commands(sub) -> None:
    """Add ``reconcile``, ``fit`` and ``trend`` to the ``partload`` parser."""
    c = sub.add_parser(
        "reconcile", help="reconcile measured points with the model: reconciled values, "
                          "quality criterion, suspect readings",
        description="Each point of the measurement map's CSV file on its own: the most "
                    "likely values of all readings that the model satisfies exactly, "
                    "weighted by their uncertainties (VDI 2048), with the chi-square quality "
                    "criterion and each reading's individual test.")
    c.add_argument("measurements", help="measurement map (TOML) naming the model and the CSV")
    c.add_argument("--tunables", default=None, metavar="KEY,...",
                   help="constants free at each point (default: the map's [fit] tunables)")
    c.add_argument("--backend", default="seuif97", help="steam property backend")
    c.add_argument("--json", action="store_true", help="print JSON instead of tables")
    c.set_defaults(func=_cmd_reconcile)

    c = sub.add_parser(
        "fit", help="fit the model's tunables to measured points; write the model as tested "
                    "and price each deviation",
        description="All points together, the tunables shared: fitted constants with 95 % "
                    "confidence intervals, each against design and its cost in output and "
                    "heat rate at design throttle flow, and the fitted model file.")
    c.add_argument("measurements", help="measurement map (TOML)")
    c.add_argument("--output", "-o", default=None, metavar="PATH",
                   help="fitted model file (default results/<map>_as_tested.toml)")
    c.add_argument("--no-model", action="store_true", help="do not write the fitted model")
    c.add_argument("--force", action="store_true", help="replace an existing fitted model file")
    c.add_argument("--tunables", default=None, metavar="KEY,...",
                   help="constants to fit (default: the map's [fit] tunables)")
    c.add_argument("--readings", action="store_true",
                   help="also list every reading, measured and reconciled")
    c.add_argument("--backend", default="seuif97", help="steam property backend")
    c.add_argument("--json", action="store_true", help="print JSON instead of tables")
    c.set_defaults(func=_cmd_fit)

    c = sub.add_parser(
        "trend", help="fit the tunables period by period over online data into HDF5, "
                      "with a chart against time",
        description="Cuts the readings into periods ([trend] points_per_period in the map), "
                    "fits each, and stores the fitted constants with their 95 % bands.")
    c.add_argument("measurements", help="measurement map (TOML)")
    c.add_argument("--output", "-o", default=None, metavar="PATH",
                   help="HDF5 file (default results/<map>_trend.h5); the chart is beside it")
    c.add_argument("--no-chart", action="store_true", help="do not draw the chart")
    c.add_argument("--force", action="store_true", help="replace an existing trend file")
    c.add_argument("--backend", default="seuif97", help="steam property backend")
    c.add_argument("--quiet", "-q", action="store_true", help="no progress display")
    c.set_defaults(func=_cmd_trend)
