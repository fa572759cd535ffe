"""The ``report`` command: a one-page HTML report of a point or a study.

Added to ``partload`` by :func:`add_command`.  Exit codes are those of
:mod:`simulator.cli`: 0 written; 1 the point of a case cannot be solved; 2 a
mistake in the case file or the command line; 3 a result file that is damaged
or not partload's, or a report that cannot be written.
"""

from __future__ import annotations

import sys
from pathlib import Path

__all__ = ["add_command"]


def _cmd_report(args) -> int:
    from ..present.report import write_report

    out = write_report(args.source, args.output, backend=args.backend, point=args.point,
                       units=args.units)
    print(out)
    if args.svg:
        from ..plant.case import design_conditions, load_case
        from ..present.diagram import diagram_svg
        from ..present.report import study_point
        from ..solve.point import solve_point
        from ..store import write_whole

        stem = Path(args.source).stem
        if Path(args.source).suffix.lower() == ".toml":
            case = load_case(args.source)
            cond, name, backend = case.conditions, case.name, args.backend or case.backend
            check = True
        elif args.point is not None:
            case, cond, label, _rows, backend, check = study_point(args.source, args.point,
                                                                   args.backend)
            name, stem = f"{case.name}, {label}", f"{stem}_point{args.point}"
        else:
            print("partload: note: --svg draws the diagram of a point: give a case file, "
                  "or --point N with a result file", file=sys.stderr)
            return 0
        r = solve_point(case.model, cond, backend, check_limits=check)
        d = solve_point(case.model, design_conditions(case.model), backend)
        for tag, design in (("diagram", None), ("diagram_vs_design", d)):
            svg = diagram_svg(case.model, r, case_name=name, design=design, units=args.units)
            path = out.with_name(f"{stem}_{tag}.svg")
            write_whole(path, lambda tmp, svg=svg: tmp.write_text(svg, encoding="utf-8"))
            print(path)
    return 0


def add_command(sub) -> None:
    """Add ``report`` to the ``partload`` parser."""
    from .main import add_units_option

    c = sub.add_parser(
        "report", help="write a one-page HTML report of a case's point, a study result or "
                       "one point of it",
        description="A case file (.toml) gives the report of its point: heat-balance diagram "
                    "and its differences from design, cautions, tables and provenance. A "
                    "study result (.h5) gives its charts and summary table; a profile adds "
                    "the time series, the load-duration curve and monthly and annual totals. "
                    "The page is one self-contained file (no network needed to view it).")
    c.add_argument("source", help="case file (TOML) or study result file (HDF5)")
    c.add_argument("--output", "-o", default=None, metavar="PATH",
                   help="the HTML file (default results/<case>_report.html for a case, "
                        "<result>_report.html next to a result file)")
    c.add_argument("--backend", default=None, help="steam property backend for a case: "
                                                   "seuif97 or iapws (default: the case's)")
    c.add_argument("--point", type=int, default=None, metavar="N",
                   help="with a result file: the report of its point N (from 0, as in the "
                        "file), re-solved from the study's case, instead of the study's")
    c.add_argument("--svg", action="store_true",
                   help="also write the point's heat-balance diagram, and its differences "
                        "from design, as SVG next to the report")
    add_units_option(c)
    c.set_defaults(func=_cmd_report)
