"""The ``partload`` command.

Exit codes: 0 success; 1 a point that cannot be solved (convergence, a limit of
the machine, a property range); 2 a mistake in the input (file, table and key
named) or in the command line, a study too large included; 3 a result file that
is damaged, read-only on resume or in the way, a disk without the space a study
needs, or a file or folder the command cannot read or write (the README's table
lists each failure).
``--debug`` shows the traceback of any error.
"""

from __future__ import annotations

import argparse
import json
import os
import sys
import traceback

from ..errors import InputError, PartloadError, ResultFileError, SolveError
from ..version import __version__

__all__ = ["main"]


def _cmd_check(args) -> int:
    from ..api import load_model  # a design model file, or a fitted one ("as tested")
    from ..plant.case import design_conditions
    from ..present.tables import format_model, format_point, point_to_dict
    from ..solve.point import solve_point

    model = load_model(args.model)
    result = solve_point(model, design_conditions(model), args.backend)
    if args.json:
        print(json.dumps({"model": model.name, "file": model.file,
                          "warnings": list(model.warnings),
                          "design": point_to_dict(result, "design")}, indent=2))
        return 0
    print(format_model(model))
    if model.warnings:
        print("\nWARNINGS")
        for w in model.warnings:
            print(f"  ! {w}")
    print()
    print("Design heat balance as calibrated")
    print("=================================")
    print(format_point(result, "design"))
    if model.stated_output is not None:
        diff = result.totals["generator_output"] - model.stated_output
        print(f"\nstated design output {model.stated_output / 1e6:.3f} MW; calibrated model gives "
              f"{result.totals['generator_output'] / 1e6:.3f} MW ({diff / 1e6:+.3f} MW)")
    return 0


def _cmd_point(args) -> int:
    from ..plant.case import load_case
    from ..present.tables import format_point, point_to_dict
    from ..solve.point import solve_point

    case = load_case(args.case)
    for note in case.notes:
        print(f"partload: note: {note}", file=sys.stderr)
    if "sweep" in case.data or "profile" in case.data:
        print(f"partload: note: {args.case} also defines a study ([sweep] or [profile]); "
              f"'point' solves its base point only, 'partload study' runs the study",
              file=sys.stderr)
    backend = args.backend or case.backend
    result = solve_point(case.model, case.conditions, backend)
    cautions = _cautions(case.model, case.conditions, result)
    if args.json:
        print(json.dumps(point_to_dict(result, case.name, cautions), indent=2))
    else:
        print(format_point(result, case.name, cautions))
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


def _cautions(model, cond, result):
    from ..cautions.checks import check_point

    return check_point(model, cond, result)


def _say(text: str) -> None:
    """Print an error line to stderr; bytes a damaged file put into the text that
    cannot be written are shown escaped rather than raising."""
    print(text.encode("utf-8", "backslashreplace").decode("utf-8"), file=sys.stderr)


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
    c.set_defaults(func=_cmd_check)

    c = sub.add_parser("point", help="solve one operating case and print its tables")
    c.add_argument("case", help="case file (TOML)")
    c.add_argument("--backend", default=None, help="steam property backend: seuif97 or iapws "
                                                   "(default: the case's, else seuif97)")
    c.add_argument("--json", action="store_true", help="print JSON instead of tables")
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

    from . import study_commands as study_cli

    study_cli.add_commands(sub)
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
