"""Command-line commands for batch studies: ``study``, ``export``, ``plot``, ``demo``.

Added to ``partload`` by :func:`add_commands`.  Exit codes are those of
:mod:`simulator.cli`: 0 the study ran to its end (points that could not be
solved are recorded in the file and counted in the summary, not errors of the
command); 2 a mistake in the case, sweep, profile or command line (a malformed
``--scheduler`` address among them); 3 a result file that is damaged, read-only on
resume, another program's, or in the way, too little disk space for a new one, or
a Dask scheduler that cannot be reached or was lost during the study; 130
interrupted (Ctrl-C or SIGTERM; the file holds every finished point, continue
with ``--resume``).
"""

from __future__ import annotations

import argparse
import contextlib
import sys
from pathlib import Path

from ..api import default_workers, run_study_file
from ..errors import InputError

__all__ = ["add_commands", "cap_workers", "run_study_command", "default_workers", "DEMO_CASE"]

DEMO_CASE = "reheat_load_sweep.toml"


def _workers(text: str) -> int:
    """A whole number of at least 1 (workers, points)."""
    try:
        n = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a whole number, got {text!r}") from None
    if n < 1:
        raise argparse.ArgumentTypeError("at least 1")
    return n


def cap_workers(workers: int | None, scheduler: str | None = None) -> int | None:
    """``workers`` [-], at most the CPUs this process may use; a note on stderr when cut.

    More processes than CPUs only share them (and each holds a model and its
    arrays); a scheduler's cluster has its own workers, so nothing is cut then.
    """
    cpus = default_workers()
    if workers is None or scheduler or workers <= cpus:
        return workers
    print(f"partload: note: --workers {workers} is more than the {cpus} CPUs available; "
          f"using {cpus}", file=sys.stderr)
    return cpus


def _loads(text: str) -> list[float]:
    try:
        vals = [float(x) / 100.0 for x in text.replace(";", ",").split(",") if x.strip()]
    except ValueError:
        raise argparse.ArgumentTypeError(
            f"expected percentages of design throttle flow such as 40,70,100; got {text!r}"
        ) from None
    if not vals or any(v <= 0 for v in vals):
        raise argparse.ArgumentTypeError("give positive percentages such as 40,70,100")
    return vals


def _numbers(text: str) -> list[int]:
    """Whole numbers of at least 1, separated by commas."""
    try:
        vals = [int(x) for x in text.replace(";", ",").split(",") if x.strip()]
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected numbers such as 1,3; got {text!r}") from None
    if not vals or any(v < 1 for v in vals):
        raise argparse.ArgumentTypeError("give series numbers from 1, such as 1,3")
    return vals


def run_study_command(case_path: str | Path, *, output: str | Path | None = None,
                      workers: int | None = None, scheduler: str | None = None,
                      resume: bool = False, force: bool = False, backend: str | None = None,
                      plots: bool = False, quiet: bool = False, out=None,
                      auto_resume: bool = False, limit: int | None = None,
                      beyond_limits: bool = False, units: str = "metric") -> int:
    """Plan, run and store a study; print its summary.  Returns the exit code.

    The work is :func:`simulator.api.run_study_file`, shared with the Python API;
    this adds the printing.  ``auto_resume`` (the demo): continue an existing
    result of the same study, which does nothing when it is complete, instead of
    refusing it.  ``limit`` plans only the first points (a trial run).
    ``beyond_limits`` solves points beyond valves wide open as what-ifs instead
    of recording them as failed.  ``units`` (``"metric"`` or ``"us"``) are those of
    the charts drawn with ``plots``.
    """
    out = out or sys.stdout
    workers = cap_workers(workers, scheduler)

    def heading(run) -> None:
        plan, case, path = run.plan, run.case, run.path
        for note in case.notes:
            print(f"partload: note: {note}", file=sys.stderr)
        axes = " x ".join(plan.axes)
        trial = f" (the first {plan.limit}: --limit)" if plan.limit is not None else ""
        print(f"partload study: case {case.name!r}, {plan.n_points} points{trial} "
              f"({axes}); model {case.model.name!r}; properties {plan.backend}"
              + ("; beyond-limit points solved as what-ifs" if beyond_limits else ""),
              file=out)
        if run.action == "resume":
            print(f"  resuming {path}: {run.n_done_before} of {plan.n_points} points were done",
                  file=out)
        elif resume:
            print(f"  nothing to resume: {path} does not exist yet; starting", file=out)
        elif run.action == "replace":
            print(f"  replacing the earlier result {path} (--force)", file=out)

    # a scheduler is checked and connected before the result file is created, so that a
    # wrong address or a cluster that does not answer leaves no file behind
    session = contextlib.nullcontext(None)
    if scheduler is not None:
        from ..study.executors import dask_session

        session = dask_session(scheduler)
    with session as client:
        run = run_study_file(case_path, output=output, workers=workers, scheduler=client,
                             resume=resume, force=force, backend=backend, limit=limit,
                             beyond_limits=beyond_limits, auto_resume=auto_resume,
                             progress=not quiet, on_start=heading)
    summary, plan, path, done_now = run.summary, run.plan, run.path, run.n_done
    if not run.written:
        print("partload: interrupted before the first points were finished; nothing was "
              "written" + (f" ({path} is as it was)" if path.exists() else ""),
              file=sys.stderr)
        return 130
    _print_summary(summary, plan, path, done_now, out)
    if summary.interrupted:
        print(f"partload: interrupted; {path} holds the {done_now} finished points of "
              f"{plan.n_points}. Continue with: partload study {run.case.file} --resume"
              + (f" --output {path}" if output else "")
              + (f" --limit {plan.limit}" if plan.limit is not None else "")
              + (" --beyond-limits" if beyond_limits else ""), file=sys.stderr)
        return 130
    if plots:
        from ..present.charts import plot_study

        files = plot_study([path], units=units)
        print("  plots: " + ", ".join(str(f) for f in files), file=out)
    return 0


def _print_summary(s, plan, path, done_now, out) -> None:
    rate = s.n_solved / s.seconds if s.seconds > 0 else 0.0
    where = s.where if s.where != "this process" else "this process (1 worker)"
    if s.n_solved:
        print(f"  solved {s.n_solved} points in {s.seconds:.1f} s on {where} "
              f"({rate:.0f} points/s): {s.n_converged} converged, {s.n_failed} failed"
              + (f", {s.n_internal} internal errors (please report)" if s.n_internal else "")
              + (f"; {s.n_cautions} with operating-limit cautions" if s.n_cautions else ""),
              file=out)
    elif not s.interrupted:
        print("  nothing to do: every point was already done", file=out)
    for i, label, msg in sorted(s.failures)[:5]:
        print(f"  failed: point {i} ({label}): {msg}", file=out)
    more = s.n_failed + s.n_internal - min(len(s.failures), 5)
    if more > 0:
        print(f"  ... and {more} more failed points; see /solver/message in the file", file=out)
    print(f"  results: {path} ({done_now} of {plan.n_points} points done)", file=out)


def _cmd_study(args) -> int:
    return run_study_command(args.case, output=args.output, workers=args.workers,
                             scheduler=args.scheduler, resume=args.resume, force=args.force,
                             backend=args.backend, plots=args.plots, quiet=args.quiet,
                             limit=args.limit, beyond_limits=args.beyond_limits,
                             units=args.units)


def _cmd_export(args) -> int:
    from ..store import export_csv

    files = export_csv(args.result, args.output, si=args.si, units=args.units)
    for f in files:
        print(f)
    return 0


def _cmd_plot(args) -> int:
    from ..present.charts import plot_study

    paths = [args.result] + ([args.other] if args.other else [])
    files = plot_study(paths, args.output, loads=args.loads,
                       series=[k - 1 for k in args.series] if args.series else None,
                       units=args.units)
    for f in files:
        print(f)
    return 0


def _demo_case() -> Path:
    here = Path("cases") / DEMO_CASE
    if here.exists():
        return here
    packaged = Path(__file__).resolve().parents[1] / "cases" / DEMO_CASE
    if packaged.exists():
        return packaged
    raise InputError(f"the demo case {DEMO_CASE} was not found in ./cases or next to the "
                     f"package; run the demo from the project folder")


def _cmd_demo(args) -> int:
    case = _demo_case()
    output = Path(args.output) / f"{case.stem}.h5"
    return run_study_command(case, output=output, workers=args.workers, force=args.force,
                             plots=True, quiet=args.quiet, auto_resume=not args.force,
                             units=args.units)


def add_commands(sub) -> None:
    """Add ``study``, ``export``, ``plot`` and ``demo`` to the ``partload`` parser."""
    from .main import add_units_option

    c = sub.add_parser(
        "study", help="run a sweep or profile study into an HDF5 result file",
        description="Solve every point of the case's [sweep] and/or [profile] and store the "
                    "results in an HDF5 file (default results/<case>.h5). Points that cannot "
                    "be solved are recorded with their reason; the study goes on. An existing "
                    "result is never overwritten without --force.",
        epilog="Exit status: 0 the study ran to its end (failed points are recorded, not "
               "errors); 2 a mistake in the case, sweep or profile (more than 1,000,000 points "
               "included), or a malformed --scheduler; 3 a result file in the way, damaged, "
               "read-only or another program's, a changed model on --resume, too little disk "
               "space for the file (sizes named), or a Dask scheduler that cannot be reached or "
               "was lost; 130 interrupted "
               "(Ctrl-C or SIGTERM: every finished point is kept; continue with --resume).")
    c.add_argument("case", help="case file (TOML) with a [sweep] or [profile] table")
    c.add_argument("--workers", type=_workers, default=None,
                   help=f"local worker processes (default and most: the CPUs available, "
                        f"here {default_workers()}); 1 solves in this process")
    c.add_argument("--scheduler", default=None, metavar="ADDR",
                   help="address of a running Dask scheduler, e.g. tcp://127.0.0.1:8786 "
                        "(needs pip install 'partload[cluster]'); replaces --workers")
    g = c.add_mutually_exclusive_group()
    g.add_argument("--resume", action="store_true",
                   help="continue an interrupted study in the existing file (checks that "
                        "model, case and profile are unchanged)")
    g.add_argument("--force", action="store_true",
                   help="replace an existing result file of partload")
    c.add_argument("--output", "-o", default=None, metavar="PATH",
                   help="result file (default results/<case file name>.h5)")
    c.add_argument("--backend", default=None, help="steam property backend: seuif97 or iapws "
                                                   "(default: the case's, else seuif97)")
    c.add_argument("--limit", type=_workers, default=None, metavar="N",
                   help="solve only the first N points of the plan (a trial run)")
    c.add_argument("--beyond-limits", action="store_true",
                   help="solve points beyond valves wide open as what-ifs (marked with the "
                        "valves_wide_open caution) instead of recording them as failed")
    c.add_argument("--plots", action="store_true", help="draw the charts next to the file")
    add_units_option(c)
    c.add_argument("--quiet", "-q", action="store_true", help="no progress display")
    c.set_defaults(func=_cmd_study)

    c = sub.add_parser("export", help="write a study result as CSV files for spreadsheets",
                       description="Write <stem>_points.csv (inputs, solver record, totals), "
                                   "<stem>_nodes.csv, _stage_groups.csv, _extractions.csv and "
                                   "_heaters.csv; one row per point, units in the headers.")
    c.add_argument("result", help="study result file (HDF5)")
    c.add_argument("--output", "-o", default=None, metavar="DIR",
                   help="folder for the CSV files (default: that of the result file)")
    c.add_argument("--si", action="store_true",
                   help="SI units as in the HDF5 file (default: bar, degC, MW, kJ/kWh, ...)")
    c.add_argument("--units", choices=("metric", "us"), default="metric",
                   help="display units: metric (bar, back pressure in kPa, degC, kJ/kg, "
                        "kJ/kWh; default) or us (psia, back pressure in inHg, degF, Btu/lb, "
                        "klb/h, Btu/kWh)")
    c.set_defaults(func=_cmd_export)

    c = sub.add_parser("plot", help="draw the charts of a study result (PNG)",
                       description="Willans line, heat rate, node pressures, bleed flows and "
                                   "expansion lines on the h-s chart; with a second file, "
                                   "both overlaid.")
    c.add_argument("result", help="study result file (HDF5)")
    c.add_argument("other", nargs="?", default=None, help="a second result file to overlay")
    c.add_argument("--output", "-o", default=None, metavar="DIR",
                   help="folder for the PNG files (default: that of the first file)")
    c.add_argument("--loads", type=_loads, default=None, metavar="PCT,...",
                   help="throttle flows for the expansion lines, in %% of design "
                        "(default: lowest, middle and highest)")
    c.add_argument("--series", type=_numbers, default=None, metavar="N,...",
                   help="series drawn on the h-s chart, counted from 1 in the order of the "
                        "file (default: every series)")
    add_units_option(c)
    c.set_defaults(func=_cmd_plot)

    c = sub.add_parser("demo", help="run the demo study: load sweep of the demo reheat unit "
                                    "with and without heater HP8, its HDF5 file and plots",
                       description=f"Runs cases/{DEMO_CASE} into results/ and draws its "
                                   f"charts. Run again, it finishes an interrupted demo or "
                                   f"just redraws the charts of a complete one.")
    c.add_argument("--output", "-o", default="results", metavar="DIR",
                   help="folder for the result file and charts (default results)")
    c.add_argument("--workers", type=_workers, default=None,
                   help="local worker processes (default: the CPUs available)")
    c.add_argument("--force", action="store_true", help="start the demo afresh")
    add_units_option(c)
    c.add_argument("--quiet", "-q", action="store_true", help="no progress display")
    c.set_defaults(func=_cmd_demo)
