"""The ``partload`` command.

Exit codes: 0 success; 1 a point that cannot be solved (convergence, a limit of
the machine, a property range); 2 a mistake in the input (file, table and key
named) or in the command line, a study too large included; 3 a result file that
is damaged, read-only on resume or in the way, a disk without the space a study
needs, a file or folder the command cannot read or write, or a Dask scheduler
that cannot be reached or was lost (the README's table lists each failure).
``--debug`` shows the traceback of any error.
"""

from __future__ import annotations

import argparse
import json
import os
import sys
import traceback

from ..errors import ClusterError, InputError, PartloadError, ResultFileError, SolveError
from ..version import __version__

__all__ = ["main"]


def _cmd_check(args) -> int:
    from ..api import load_model  # a design model file, or a fitted one ("as tested")
    from ..plant.calibrate import closure_report
    from ..plant.case import design_conditions
    from ..present.tables import format_model, format_point, point_to_dict
    from ..solve.point import solve_point
    from ..steam.if97 import get_backend

    if args.write_balanced:
        _write_balanced(args.model, args.write_balanced, args.backend)
        model = load_model(args.write_balanced)
    else:
        model = load_model(args.model)
    result = solve_point(model, design_conditions(model), args.backend)
    report = closure_report(model, get_backend(args.backend))
    if args.json:
        fitted = ({"fitted_file": model.fitted_file, "fitted": dict(model.fitted)}
                  if model.fitted else {})
        print(json.dumps({"model": model.name, "file": model.file, **fitted,
                          "warnings": list(model.warnings),
                          "calibration": calibration_to_dict(model, report, args.backend),
                          "design": point_to_dict(result, "design", units=args.units)},
                         indent=2))
        return 0
    if args.write_balanced:
        print(f"partload: wrote {args.write_balanced}: {args.model} with the design bleeds "
              f"that close every heater\n")
    print(format_model(model, args.units))
    if report:
        print()
        print(format_closure(report))
    if model.warnings:
        print("\nWARNINGS")
        for w in model.warnings:
            print(f"  ! {w}")
    print()
    print("Design heat balance as calibrated")
    print("=================================")
    print(format_point(result, "design", units=args.units))
    if model.stated_output is not None:
        diff = result.totals["generator_output"] - model.stated_output
        print(f"\nstated design output {model.stated_output / 1e6:.3f} MW; calibrated model gives "
              f"{result.totals['generator_output'] / 1e6:.3f} MW ({diff / 1e6:+.3f} MW)")
    return 0


def _nan_none(v: float) -> float | None:
    return None if v != v else float(v)


def calibration_to_dict(model, report: list[dict], backend: str = "seuif97") -> dict:
    """What the calibration fixed, JSON-ready (SI): each stage group's flow constant,
    design and dry efficiency (and whether it was derived from an outlet state),
    isentropic drop, inlet volume flow and (groups that exhaust) the volume flow
    leaving the last stage; each heater's closure with its given
    and closing design bleed."""
    from ..cautions.common import design_last_stage_volume_flow, last_groups
    from ..steam.if97 import get_backend

    steam = get_backend(backend)
    ends = set(last_groups(model))
    groups = []
    for k, c in enumerate(model.groups):
        groups.append({
            "name": c.name, "from": c.inlet, "to": c.outlet,
            "design_flow": model.design_group_flow[c.name],
            "flow_constant": c.K, "flow_law": getattr(c, "flow_law_name", "ellipse"),
            "efficiency": c.eta_design, "dry_efficiency": c.eta_dry_design,
            "efficiency_from": c.outlet_given[0] if c.outlet_given else "efficiency",
            "isentropic_drop": c.dh_s_design, "design_volume_flow": c.q_design,
            "design_exhaust_volume_flow": (design_last_stage_volume_flow(model, k, steam)
                                           if k in ends else None)})
    heaters = [{**r, "closing_flow": _nan_none(r["closing_flow"])} for r in report]
    return {"units": {"design_flow": "kg/s", "flow_constant": "m^2", "efficiency": "-",
                      "isentropic_drop": "J/kg", "design_volume_flow": "m^3/s",
                      "design_exhaust_volume_flow": "m^3/s",
                      "closure": "-", "duty": "W", "given_flow": "kg/s",
                      "closing_flow": "kg/s"},
            "stage_groups": groups, "heaters": heaters}


def format_closure(report: list[dict]) -> str:
    """Every heater's closure and its given against its closing design bleed."""
    lines = ["Heater balances at design (closure: feedwater duty over the heat the bleed and "
             "drains give up)",
             f"  {'heater':<12} {'extraction':<14} {'closure':>9} {'given':>11} "
             f"{'closing':>11}  [kg/s]"]
    for r in report:
        closing = r["closing_flow"]
        shown = "none" if closing != closing else f"{closing:.5f}"
        note = "  (closing flow asked for)" if r["closing"] else ""
        lines.append(f"  {r['heater']:<12} {r['extraction']:<14} {r['closure']:9.5f} "
                     f"{r['given_flow']:11.5f} {shown:>11}{note}")
    return "\n".join(lines)


def _write_balanced(source: str, target: str, backend: str) -> None:
    """Write ``source`` to ``target`` with every heater's extraction at the design
    bleed that closes its heater (the rest of the file unchanged)."""
    from ..plant.model import balanced_model_text

    if os.path.abspath(source) == os.path.abspath(target):
        raise InputError("--write-balanced needs a new file name; the model file itself is "
                         "not overwritten", file=target)
    text = balanced_model_text(source, backend)
    tmp = f"{target}.partial"
    with open(tmp, "w", encoding="utf-8") as f:
        f.write(text)
    os.replace(tmp, target)


def _cmd_point(args) -> int:
    from ..plant.case import load_case
    from ..present.tables import format_point, point_to_dict
    from ..solve.point import solve_point

    case = load_case(args.case)
    for note in case.notes:
        print(f"partload: note: {note}", file=sys.stderr)
    if "sweep" in case.data or "profile" in case.data:
        from ..study.plan import check_study_tables

        check_study_tables(case)  # a broken study is refused, though not run here
        print(f"partload: note: {args.case} also defines a study ([sweep] or [profile]); "
              f"'point' solves its base point only, 'partload study' runs the study",
              file=sys.stderr)
    backend = args.backend or case.backend
    result = solve_point(case.model, case.conditions, backend)
    cautions = _cautions(case.model, case.conditions, result, args.units)
    if args.json:
        print(json.dumps(point_to_dict(result, case.name, cautions, args.units), indent=2))
    else:
        print(format_point(result, case.name, cautions, args.units))
    return 0


def _cmd_valve_points(args) -> int:
    from ..plant.case import load_case
    from ..present.tables import format_valve_points, valve_point_rows
    from ..solve.point import valve_points

    case = load_case(args.case)
    results = valve_points(case.model, case.conditions, args.backend or case.backend)
    if args.json:
        print(json.dumps({"model": case.model.name, "case": case.name,
                          "valve_points": valve_point_rows(case.model, results)}, indent=2))
    else:
        print(format_valve_points(case.model, results, case.name))
    return 0


def _cmd_corrections(args) -> int:
    from ..api import correction_curves
    from ..present.tables import corrections_to_dict, format_corrections

    cc = correction_curves(args.file, loads=args.loads, conditions=args.conditions,
                           backend=args.backend, check_limits=not args.beyond_limits)
    if args.json:
        print(json.dumps(corrections_to_dict(cc, args.units), indent=2))
    else:
        print(format_corrections(cc, args.units))
    if args.csv or args.hdf5:
        from pathlib import Path

        from ..store.corrections import write_corrections_csv, write_corrections_hdf5

        for target, write in ((args.csv, lambda p: write_corrections_csv(cc, p, args.units)),
                              (args.hdf5, lambda p: write_corrections_hdf5(cc, p))):
            if target:
                Path(target).parent.mkdir(parents=True, exist_ok=True)
                print(f"partload: wrote {write(Path(target))}", file=sys.stderr)
    return 0


def _percentages(text: str) -> list[float]:
    try:
        vals = [float(x) / 100.0 for x in text.replace(";", ",").split(",") if x.strip()]
    except ValueError:
        raise argparse.ArgumentTypeError(
            f"expected percentages of design throttle flow such as 50,75,100; got {text!r}"
        ) from None
    if not vals or any(not v > 0 for v in vals):
        raise argparse.ArgumentTypeError("give positive percentages such as 50,70,90")
    return vals


def _names(text: str) -> list[str]:
    from ..study.corrections import CONDITIONS

    names = [x.strip() for x in text.split(",") if x.strip()]
    bad = [n for n in names if n not in CONDITIONS]
    if bad or not names:
        raise argparse.ArgumentTypeError(f"unknown condition {bad[0] if bad else text!r}; "
                                         f"known: {', '.join(CONDITIONS)}")
    return names


def _cautions(model, cond, result, units: str = "metric"):
    from ..cautions.checks import check_point

    return check_point(model, cond, result, units=units)


def _say(text: str) -> None:
    """Print an error line to stderr; bytes a damaged file put into the text that
    cannot be written are shown escaped rather than raising."""
    print(text.encode("utf-8", "backslashreplace").decode("utf-8"), file=sys.stderr)


def add_units_option(c) -> None:
    """The ``--units`` choice of a command that shows results."""
    c.add_argument("--units", choices=("metric", "us"), default="metric",
                   help="display units: metric (bar, degC, kJ/kg, kg/s, kJ/kWh; "
                        "default) or us (psia, degF, Btu/lb, klb/h, Btu/kWh, inHg for back "
                        "pressure)")


def build_parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(
        prog="partload",
        description="Off-design steam-turbine performance: calibrate a turbine model to its "
                    "design heat balance and predict pressures, bleed flows, output and heat "
                    "rate at other operating points.")
    p.add_argument("--version", action="version", version=f"partload {__version__}")
    p.add_argument("--debug", action="store_true", help="show tracebacks of errors")
    sub = p.add_subparsers(dest="command", required=True)

    c = sub.add_parser("check", help="validate and calibrate a model file; print its design "
                                     "heat balance and constants")
    c.add_argument("model", help="model file (TOML)")
    c.add_argument("--backend", default="seuif97", help="steam property backend: seuif97 "
                                                        "(default) or iapws")
    c.add_argument("--json", action="store_true", help="print JSON instead of tables")
    add_units_option(c)
    c.add_argument("--write-balanced", metavar="PATH", default=None,
                   help="write the model file to PATH with every heater's extraction at the "
                        "design bleed that closes its heater's balance, then check that file")
    c.set_defaults(func=_cmd_check)

    c = sub.add_parser("point", help="solve one operating case and print its tables")
    c.add_argument("case", help="case file (TOML)")
    c.add_argument("--backend", default=None, help="steam property backend: seuif97 or iapws "
                                                   "(default: the case's, else seuif97)")
    c.add_argument("--json", action="store_true", help="print JSON instead of tables")
    add_units_option(c)
    c.set_defaults(func=_cmd_point)

    c = sub.add_parser("valve-points", help="list the valve points of a nozzle-governed "
                                            "unit: flow, output and heat rate with each "
                                            "control valve wide open")
    c.add_argument("case", help="case file (TOML); its held throttle pressure, else the "
                                "design pressure, and its other conditions are used")
    c.add_argument("--backend", default=None, help="steam property backend: seuif97 or iapws "
                                                   "(default: the case's, else seuif97)")
    c.add_argument("--json", action="store_true", help="print JSON instead of a table")
    c.set_defaults(func=_cmd_valve_points)

    c = sub.add_parser(
        "corrections", help="correction curves of output and heat rate for throttle "
                            "pressure and temperature, reheat temperature, reheater pressure "
                            "drop, back pressure and heaters out of service, at several loads",
        description="Solve the model with one condition varied at a time around the "
                    "reference (the case's conditions, else the design point) at each load "
                    "(a held throttle flow; throttle pressure held), and print the change of "
                    "output and heat rate from the reference in per cent. ASME PTC 6 "
                    "describes how such curves correct an acceptance test to reference "
                    "conditions.")
    c.add_argument("file", help="case file or model file (TOML)")
    c.add_argument("--loads", type=_percentages, default=[0.5, 0.7, 0.9], metavar="PCT,...",
                   help="throttle flows in %% of design (default 50,70,90)")
    c.add_argument("--conditions", type=_names, default=None, metavar="NAME,...",
                   help="the curves to draw (default all the model has): throttle_pressure, "
                        "throttle_temperature, reheat_temperature, reheater_pressure_drop, "
                        "exhaust_pressure, heaters_out")
    c.add_argument("--csv", default=None, metavar="FILE", help="also write the curves as CSV")
    c.add_argument("--hdf5", default=None, metavar="FILE", help="also write them as HDF5 "
                                                               "(SI units)")
    c.add_argument("--backend", default=None, help="steam property backend: seuif97 or iapws "
                                                   "(default: the case's, else seuif97)")
    c.add_argument("--beyond-limits", action="store_true",
                   help="solve points beyond valves wide open as what-ifs instead of "
                        "leaving them out")
    c.add_argument("--json", action="store_true", help="print JSON instead of tables")
    add_units_option(c)
    c.set_defaults(func=_cmd_corrections)

    from . import study_commands as study_cli

    study_cli.add_commands(sub)
    from .report_command import add_command as add_report

    add_report(sub)
    from . import measure_commands as measure_cli

    measure_cli.add_commands(sub)
    return p


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        return int(args.func(args) or 0)
    except InputError as exc:
        if args.debug:
            traceback.print_exc()
        _say(f"partload: error in input: {exc}")
        return 2
    except SolveError as exc:
        if args.debug:
            traceback.print_exc()
        _say(f"partload: cannot solve: {exc}")
        return 1
    except ResultFileError as exc:
        if args.debug:
            traceback.print_exc()
        _say(f"partload: result file: {exc}")
        return 3
    except ClusterError as exc:
        if args.debug:
            traceback.print_exc()
        print(f"partload: cluster: {exc}", file=sys.stderr)
        return 3
    except PartloadError as exc:  # pragma: no cover - every error has a class above
        if args.debug:
            traceback.print_exc()
        _say(f"partload: {exc}")
        return 2
    except KeyboardInterrupt:
        print("partload: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:  # output piped into a reader that stopped early (| head)
        try:
            sys.stdout = open(os.devnull, "w")  # noqa: SIM115 - silence the final flush
        except OSError:
            pass
        return 0
    except OSError as exc:  # a folder or file the command cannot write or read
        if args.debug:
            traceback.print_exc()
        where = f"{exc.filename}: " if getattr(exc, "filename", None) else ""
        _say(f"partload: file system: {where}{exc.strerror or exc}")
        return 3


if __name__ == "__main__":
    sys.exit(main())
