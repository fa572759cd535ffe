"""The public Python API: load, solve, study and read back from scripts and notebooks.

Everything here is reached from the package itself (``import partload``)::

    import partload
    model = partload.load_model("models/demo_reheat_unit.toml")
    r = partload.point(model, throttle_flow=168.0, exhaust_pressure=8e3)   # kg/s, Pa
    print(r.totals["generator_output"] / 1e6, "MW")

    path, summary = partload.run_study("cases/reheat_load_sweep.toml", workers=2)
    data = partload.open_result(path)

Values are SI, as everywhere inside the library (Pa, K, J/kg, kg/s, W).

:func:`run_study_file` is the one place where a study is planned, its result
file created or resumed, solved and closed; the ``partload study`` and
``partload demo`` commands call it too and only add their printing.

Heavy modules (h5py, matplotlib, Dask's ``distributed``) are imported inside
the functions that need them, so ``import partload`` stays fast.
"""

from __future__ import annotations

import contextlib
import os
import signal
import threading
from collections.abc import Callable, Iterable
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any, NamedTuple

from .errors import InputError

if TYPE_CHECKING:  # names for annotations only; imported lazily at run time
    from .plant.case import Case, Conditions
    from .plant.model import Model
    from .solve.point import PointResult
    from .store import StudyData
    from .study import StudyPlan, StudySummary

__all__ = ["load_model", "load_case", "point", "run_study", "open_result", "StudyOutcome",
           "StudyRun", "run_study_file", "default_workers", "CONDITION_KEYS", "open_dataset",
           "to_dataframe", "correction_curves",
           "read_measurements", "reconcile_measurements", "fit_measurements",
           "trend_measurements", "FitOutcome", "point_as_tested", "band_as_tested"]



# The study and store machinery (plan_study, result_layout, run_study, Progress,
# check_target, StudyFile, read_study) is reached only through these two functions
# and the TYPE_CHECKING block above.  ``partload.study`` and ``partload.store`` do
# not export those names at package level yet, so they come from the modules that
# hold them today; once they do, import the packages here instead.
def _study():
    from . import study

    return study


def _store():
    from . import store

    return store


# ------------------------------------------------------------------ loading
def load_model(path: str | Path) -> Model:
    """Read, validate and calibrate a model file.

    Parameters
    ----------
    path : the model file (TOML) [-]

    Returns
    -------
    Model
        Calibrated to the file's design heat balance (SI inside); for a fitted
        model file written by :func:`fit_measurements`, the design model with the
        fitted constants, named "... (as tested)".

    Raises
    ------
    InputError
        A mistake in the file, naming file, table and key.
    """
    from .plant.model import load_model as _load_model

    return _load_model(path)  # a design model file, or a fitted one (plant/fitted.py)


def load_case(path: str | Path) -> Case:
    """Read a case file and the model it names (path relative to the case file).

    Parameters
    ----------
    path : the case file (TOML) [-]

    Returns
    -------
    Case
        With ``.model`` (calibrated) and ``.conditions`` (SI).

    Raises
    ------
    InputError
        A mistake in the case or model file, naming file, table and key.
    """
    from .plant.case import load_case as _load_case

    return _load_case(path)


# ------------------------------------------------------------------ one point
_LOADS = ("throttle_flow", "throttle_flow_fraction", "output", "output_fraction")
_SETTINGS = ("valve_mode", "pressure_mode", "throttle_pressure", "throttle_temperature",
             "reheat_temperature", "exhaust_pressure", "minimum_throttle_pressure",
             "valves_open", "reheater_spray", "superheater_spray")
_MODES = ("valve_mode", "pressure_mode")
#: keyword arguments of :func:`point`, with their units
CONDITION_KEYS = {
    "throttle_flow": "kg/s", "throttle_flow_fraction": "- (of design throttle flow)",
    "output": "W", "output_fraction": "- (of the generator rating)",
    "valve_mode": "'throttle' or 'nozzle_groups'",
    "pressure_mode": "'sliding', 'fixed' or 'program'",
    "throttle_pressure": "Pa (held, pressure_mode 'fixed'; the top of a 'program')",
    "minimum_throttle_pressure": "Pa (the bottom of a pressure 'program')",
    "valves_open": "governing-stage valves wide open at sliding pressure",
    "reheater_spray": "kg/s (attemperator water into the reheater)",
    "superheater_spray": "kg/s (attemperator water into the superheater)",
    "throttle_temperature": "K", "reheat_temperature": "K", "exhaust_pressure": "Pa",
    "heaters_out": "heater names", "check_limits": "bool", "backend": "'seuif97' or 'iapws'",
}


def _model_and_base(model_or_case) -> tuple[Model, Conditions, str]:
    """The model, the base conditions and the default backend of what was given."""
    from .plant.case import Case, design_conditions, load_case
    from .plant.model import Model

    if isinstance(model_or_case, (str, Path)):
        from .inputs.reading import load_toml

        data, _ = load_toml(model_or_case)
        model_or_case = load_case(model_or_case) if "model" in data else load_model(
            model_or_case)
    if isinstance(model_or_case, Case):
        return model_or_case.model, model_or_case.conditions, model_or_case.backend
    if isinstance(model_or_case, Model):
        return model_or_case, design_conditions(model_or_case), "seuif97"
    raise InputError(f"expected a model, a case, or the path of a model or case file; got "
                     f"{type(model_or_case).__name__}", key="model_or_case")


def _with_changes(model: Model, base: Conditions, changes: dict[str, Any]) -> Conditions:
    """``base`` with the keyword changes of :func:`point` applied (SI values)."""
    from .plant.case import PRESSURE_MODES, VALVE_MODES, override, without_unused

    unknown = sorted(set(changes) - set(_LOADS) - set(_SETTINGS) - {"heaters_out"})
    if unknown:
        raise InputError(f"unknown condition {unknown[0]!r}; known: "
                         + ", ".join(k for k in CONDITION_KEYS if k not in
                                     ("check_limits", "backend")), key=unknown[0])
    loads = [k for k in _LOADS if changes.get(k) is not None]
    if len(loads) > 1:
        raise InputError(f"give only one of {', '.join(loads)}: the load is set once",
                         key=loads[1])
    new: dict[str, Any] = {}
    if loads:
        key = loads[0]
        value = float(changes[key])
        if not value > 0.0:
            raise InputError(f"the load must be positive, got {value!r}", key=key)
        scale = {"throttle_flow_fraction": model.throttle.flow,
                 "output_fraction": model.generator.rating}.get(key, 1.0)
        if key.startswith("throttle_flow"):
            new.update(throttle_flow=value * scale, output=None)
        else:
            new.update(output=value * scale, throttle_flow=None)
    for key in _SETTINGS:
        if key in changes:
            value = changes[key]
            new[key] = (value if key in _MODES or value is None
                        else int(value) if key == "valves_open" else float(value))
    for key, allowed in (("valve_mode", VALVE_MODES), ("pressure_mode", PRESSURE_MODES)):
        if new.get(key, getattr(base, key)) not in allowed:
            raise InputError(f"{key} must be one of {', '.join(allowed)}, not {new[key]!r}",
                             key=key)
    mode = new.get("pressure_mode", base.pressure_mode)
    if mode == "sliding" and new.get("throttle_pressure") is not None:
        raise InputError("a held throttle pressure needs pressure_mode='fixed'; with sliding "
                         "pressure the throttle pressure is a result", key="throttle_pressure")
    if "heaters_out" in changes:
        new.update(_heaters_out(model, base, changes["heaters_out"]))
    return without_unused(override(base, **new))


# SI unit of each keyword of point() that a case file writes with a unit
_SI_UNITS = {"throttle_flow": "kg/s", "output": "W", "throttle_pressure": "Pa",
             "minimum_throttle_pressure": "Pa", "reheater_spray": "kg/s",
             "superheater_spray": "kg/s",
             "throttle_temperature": "K", "reheat_temperature": "K", "exhaust_pressure": "Pa"}


def _check_as_a_case_would(model: Model, base: Conditions, data: dict | None,
                           changes: dict[str, Any]) -> None:
    """Check the keyword values of :func:`point` with the case reader's own rules
    (ranges, combinations), by writing them into a case table: a script gets the
    same refusals, naming the keyword, as a case file would."""
    import copy

    from .plant.case import read_conditions
    from .study.axes import unused_with

    data = copy.deepcopy(data) if data else {}
    op = data.setdefault("operation", {})
    op.setdefault("valve_mode", base.valve_mode)
    if "governing" not in op:
        op.setdefault("pressure_mode", base.pressure_mode)
    if any(changes.get(k) is not None for k in _LOADS):
        for k in _LOADS:
            op.pop(k, None)
    for key, value in changes.items():
        if key not in _LOADS and key not in _SETTINGS:
            continue
        if value is None:
            op.pop(key, None)
        elif key in _MODES:
            op[key] = value
            if key == "pressure_mode":
                op.pop("governing", None)
            for k in unused_with(key, value):
                if k not in changes:
                    op.pop(k, None)
        elif key in _SI_UNITS:
            op[key] = f"{float(value)!r} {_SI_UNITS[key]}"
        elif key == "valves_open":
            op[key] = value
        else:
            op[key] = float(value)
    read_conditions(data, model, file="partload.point keywords")


def _heaters_out(model: Model, base: Conditions, names: Iterable[str] | str | None) -> dict:
    """Conditions fields for exactly ``names`` out of service: as a case file's
    ``[heaters.NAME] in_service = false``, each one's extraction is closed."""
    if names is None:
        names = ()
    elif isinstance(names, str):
        names = (names,)
    out = frozenset(names)
    for name in sorted(out):
        if name not in model.heaters:
            raise InputError(f"the model has no heater {name!r} (it has "
                             f"{', '.join(model.heaters) or 'none'})", key="heaters_out")
        if model.heaters[name].heater_type == "deaerator":
            raise InputError(f"the deaerator {name!r} cannot be taken out of service",
                             key="heaters_out")
    bleeds_of = {n for h in base.heaters_out | out for n in model.heaters[h].extractions}
    controls = [(e, c) for e, c in base.extraction_control if e not in bleeds_of]
    controls += [(n, ("closed", 0.0)) for h in out for n in model.heaters[h].extractions]
    return {"heaters_out": out, "extraction_control": tuple(sorted(controls))}


def point(model_or_case, conditions: Conditions | None = None, *, backend: str | None = None,
          check_limits: bool = True, **changes) -> PointResult:
    """Solve one operating point (the ``partload point`` command for scripts).

    Named ``point`` after that command: ``partload.solve`` is the solver's
    subpackage and cannot also be a function.

    Parameters
    ----------
    model_or_case : a :class:`Model`, a :class:`Case`, or the path of a model
        or case file [-]; a model starts from its design point, a case from its
        own conditions
    conditions : operating conditions replacing those of the model or case
        (a :class:`Conditions`, SI) [-]
    backend : steam property backend, ``"seuif97"`` or ``"iapws"`` (default:
        the case's, else ``"seuif97"``) [-]
    check_limits : refuse a point beyond valves wide open or the highest
        throttle pressure (``InfeasibleError``), as the command does [-]
    **changes : conditions changed from the above, SI values:
        ``throttle_flow`` [kg/s] or ``throttle_flow_fraction`` [-] or
        ``output`` [W] or ``output_fraction`` [-] (one load replaces the other);
        ``valve_mode`` (``"throttle"`` or ``"nozzle_groups"``) and
        ``pressure_mode`` (``"sliding"``, ``"fixed"`` or ``"program"``) [-];
        ``throttle_pressure`` (held, pressure mode fixed; the top of a program)
        [Pa]; ``minimum_throttle_pressure`` (the bottom of a program) [Pa];
        ``valves_open`` (governing-stage valves wide open at sliding pressure) [-];
        ``throttle_temperature`` [K]; ``reheat_temperature`` [K];
        ``exhaust_pressure`` [Pa]; ``heaters_out`` (the heater names out of
        service, replacing the case's; their extractions close) [-]

    Returns
    -------
    PointResult
        Node, stage-group, extraction and heater states and ``totals``, SI.

    Raises
    ------
    InputError
        An unknown or contradictory keyword, naming it.
    ConvergenceError, InfeasibleError, PropertyRangeError
        A point that cannot be solved, saying what was asked and why.
    """
    from .solve.point import solve_point

    model, base, default_backend = _model_and_base(model_or_case)
    data = getattr(model_or_case, "data", None) if conditions is None else None
    if conditions is not None:
        base = conditions
    if changes:
        _check_as_a_case_would(model, base, data, changes)
    cond = _with_changes(model, base, changes) if changes else base
    return solve_point(model, cond, backend or default_backend, check_limits=check_limits)


# ------------------------------------------------------------------ studies
def default_workers() -> int:
    """Worker processes by default: the CPUs this process may use [-]."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # pragma: no cover - not on Linux
        return max(1, os.cpu_count() or 1)


@dataclass
class StudyRun:
    """What :func:`run_study_file` planned and did.

    Attributes
    ----------
    case : the case read [-]
    plan : the plan (cut to ``limit``) [-]
    path : the result file [-]
    action : ``"create"``, ``"resume"`` or ``"replace"`` [-]
    n_done_before : points already done in a resumed file [-]
    n_done : points done in the file at the end [-]
    summary : what this run solved (``None`` until it has run) [-]
    written : whether this run wrote the file; ``False`` when it was stopped
        before its first chunk came back (a file it was to replace is then
        unchanged) [-]
    """

    case: Case
    plan: StudyPlan
    path: Path
    action: str
    n_done_before: int = 0
    n_done: int = 0
    summary: StudySummary | None = None
    written: bool = True


def _on_sigterm(signum, frame):  # pragma: no cover - exercised by a subprocess test
    """SIGTERM stops a study like Ctrl-C: finished chunks are kept."""
    raise KeyboardInterrupt


def run_study_file(case_path: str | Path, *, output: str | Path | None = None,
                   workers: int | None = None, scheduler: str | None = None,
                   resume: bool = False, force: bool = False, backend: str | None = None,
                   limit: int | None = None, beyond_limits: bool = False,
                   auto_resume: bool = False, progress: bool = False,
                   on_start: Callable[[StudyRun], None] | None = None) -> StudyRun:
    """Plan a study from a case file, run it into its HDF5 result file, close it.

    Parameters
    ----------
    case_path : case file with a ``[sweep]`` or ``[profile]`` table [-]
    output : result file, or a folder for ``<case file name>.h5`` (default
        ``results/<case file name>.h5``) [-]
    workers : local worker processes; 1 solves in this process (default: the
        CPUs available) [-]
    scheduler : address of a running Dask scheduler; replaces ``workers`` [-]
    resume : continue the existing result file (model, case and profile are
        checked unchanged) [-]
    force : replace an existing partload result [-]
    backend : steam property backend (default: the case's) [-]
    limit : plan only the first ``limit`` points (a trial run) [-]
    beyond_limits : solve points beyond valves wide open as marked what-ifs
        instead of recording them as failed [-]
    auto_resume : continue an existing result of the same study, which does
        nothing when it is complete, instead of refusing it [-]
    progress : show a progress bar (tqdm on a terminal, lines otherwise) [-]
    on_start : called with the :class:`StudyRun` before solving, once the target
        is checked (a new file is made only when the first chunk comes back; a
        resumed one is open) (the command prints its heading there) [-]

    Returns
    -------
    StudyRun
        Its ``summary.interrupted`` is set when Ctrl-C or SIGTERM stopped the
        run; the file then holds every finished point (continue with
        ``resume``).

    Raises
    ------
    InputError
        A mistake in the case, sweep or profile.
    ResultFileError
        A result file in the way, damaged, another program's, or from a
        changed model or case on ``resume``.
    """
    from .plant.case import load_case as _load_case

    study, store = _study(), _store()
    case = _load_case(case_path)
    plan = study.plan_study(case, backend)
    if limit is not None:
        plan = plan.head(limit)
    stem = Path(case.file).stem
    path = Path(output) if output else Path("results") / f"{stem}.h5"
    if path.is_dir():
        path = path / f"{stem}.h5"
    action = store.check_target(path, resume=resume or auto_resume, force=force)
    layout = study.result_layout(case.model)
    run = StudyRun(case, plan, path, action)
    main_thread = threading.current_thread() is threading.main_thread()
    old_handler = signal.signal(signal.SIGTERM, _on_sigterm) if main_thread else None
    check = not beyond_limits
    files: list = []  # the result file, once open

    def result_file():
        if not files:
            files.append(store.StudyFile.create(path, plan, layout, check_limits=check,
                                                replace=action == "replace"))
        return files[0]

    def write(res) -> None:
        result_file().write(res)

    try:
        if action == "resume":
            files.append(store.StudyFile.resume(path, plan, layout, check_limits=check))
        else:  # the file is made later: a study it would not fit is refused before solving
            store.writer.check_room(path, plan, layout)
        # a new file is made when the first chunk comes back: the workers start
        # solving while it is made (about 0.1 s on the demo year)
        try:
            skip = files[0].done_chunks(plan) if action == "resume" else set()
            run.n_done_before = sum(c.size for c in plan.chunks if c.index in skip)
            if on_start is not None:
                on_start(run)
            n_workers = workers if workers is not None else default_workers()
            bar = study.Progress(plan.n_points, initial=run.n_done_before, enabled=progress)
            try:
                run.summary = study.run_study(plan, write, workers=n_workers,
                                              scheduler=scheduler, skip=skip, layout=layout,
                                              progress=bar, check_limits=check)
            except Exception:
                # stopped before a chunk came back (a worker lost, say): the file is made
                # all the same, as the error's '--resume' expects (unless making it is
                # what failed)
                if not files:
                    with contextlib.suppress(Exception):
                        result_file()
                raise
            finally:
                bar.close()
            if run.summary.interrupted and not files:
                run.written = False  # stopped before any chunk: nothing to keep, and a
                # result it was to replace stays as it was
            else:
                run.n_done = int(result_file().done.sum())
        finally:
            if files:
                files[0].close()
    finally:
        if main_thread:
            signal.signal(signal.SIGTERM, old_handler)
    return run


class StudyOutcome(NamedTuple):
    """What :func:`run_study` returns: unpack as ``path, summary = ...``."""

    path: Path
    summary: StudySummary


def run_study(case_path: str | Path, output: str | Path | None = None, *,
              workers: int | None = None, resume: bool = False, force: bool = False,
              limit: int | None = None, backend: str | None = None,
              beyond_limits: bool = False, scheduler: str | None = None,
              progress: bool = False) -> StudyOutcome:
    """Run the study of a case file into an HDF5 result file (``partload study``).

    Parameters
    ----------
    case_path : case file with a ``[sweep]`` or ``[profile]`` table [-]
    output : result file, or a folder for ``<case file name>.h5`` (default
        ``results/<case file name>.h5``, relative to the working folder) [-]
    workers : local worker processes; 1 solves in this process (default: the
        CPUs available) [-]
    resume : continue an interrupted study in the existing file [-]
    force : replace an existing partload result file [-]
    limit : solve only the first ``limit`` points of the plan (a trial run) [-]
    backend : steam property backend (default: the case's) [-]
    beyond_limits : solve points beyond valves wide open as marked what-ifs [-]
    scheduler : address of a running Dask scheduler; replaces ``workers`` [-]
    progress : show a progress bar [-]

    Returns
    -------
    StudyOutcome
        ``(path, summary)``: the result file and a :class:`StudySummary`
        (``n_points``, ``n_converged``, ``n_failed``, ``n_cautions``,
        ``seconds``, ``failures``, ``interrupted``, ...).  An existing result
        is never overwritten without ``force``, nor by a study interrupted
        before its first chunk came back (which writes no file).

    Raises
    ------
    InputError, ResultFileError, ClusterError
        As the command: a mistake in the case (or a malformed scheduler address),
        a result file in the way, a scheduler that does not answer (no file is
        created) or is lost during the study.
    """
    # a scheduler is checked and connected before the result file is created
    session = (_study().executors.dask_session(scheduler) if scheduler is not None
               else contextlib.nullcontext())
    with session as client:
        run = run_study_file(case_path, output=output, workers=workers, scheduler=client,
                             resume=resume, force=force, backend=backend, limit=limit,
                             beyond_limits=beyond_limits, progress=progress)
    return StudyOutcome(run.path, run.summary)


def open_result(path: str | Path) -> StudyData:
    """Read a study result file into memory, after checking it is one.

    Parameters
    ----------
    path : the HDF5 result file [-]

    Returns
    -------
    StudyData
        ``labels``, ``status``, ``ok``, ``names``, ``data`` (every per-point
        dataset by path, SI), ``units``, ``inputs``, ``total(name)``,
        ``column(group, quantity, item)``.

    Raises
    ------
    ResultFileError
        The file is missing, not HDF5, damaged, or another program's.
    """
    return _store().read_study(path)


def open_dataset(path: str | Path, group: str = "totals", units: str = "si"):
    """One group of a study result as an ``xarray.Dataset`` (needs
    ``pip install 'partload[notebook]'``).

    Parameters
    ----------
    path : the HDF5 result file [-]
    group : ``"totals"`` (default), ``"inputs"``, ``"solver"``, ``"nodes"``, a
        kind's result group (``"stage_groups"``, ``"heaters"``, ...) or
        ``"cautions"`` [-]
    units : ``"si"`` (as stored, default), ``"metric"`` or ``"us"`` [-]

    Returns
    -------
    xarray.Dataset
        Dimensions ``point`` and the group's items; coordinates ``point``, the
        items, ``label`` and ``series``; ``units`` (CF spelling) and
        ``long_name`` on every variable.

    Raises
    ------
    ResultFileError
        The file is missing, not HDF5, damaged, or another program's.
    InputError
        An unknown group or units system, or xarray not installed.
    """
    from .store.notebook import open_dataset as _open_dataset

    return _open_dataset(path, group, units)


def to_dataframe(path: str | Path, group: str = "totals", units: str = "si",
                 solved_only: bool = False):
    """One group of a study result as a ``pandas.DataFrame``, a row a point
    (needs ``pip install 'partload[notebook]'``).

    Parameters
    ----------
    path : the HDF5 result file [-]
    group : as for :func:`open_dataset` [-]
    units : ``"si"`` (default), ``"metric"`` or ``"us"`` [-]
    solved_only : keep only the points that converged [-]

    Returns
    -------
    pandas.DataFrame
        Index ``point``; columns ``label``, ``series`` and the group's
        quantities (``"<quantity> <item>"`` for one column an item);
        ``df.attrs["units"]`` maps a column to its unit.
    """
    from .store.notebook import to_dataframe as _to_dataframe

    return _to_dataframe(path, group, units, solved_only)


def correction_curves(model_or_case, *, loads=(0.5, 0.7, 0.9), conditions=None,
                      backend: str | None = None, check_limits: bool = True):
    """Correction curves of output and heat rate (the ``partload corrections``
    command for scripts); see :mod:`partload.study.corrections` for the basis.

    Parameters
    ----------
    model_or_case : a model, a case, or the path of a model or case file; a
        case's conditions are the reference, a model's design point otherwise [-]
    loads : throttle flows as fractions of design [-]
    conditions : names of the curves (default all the model has):
        ``throttle_pressure``, ``throttle_temperature``, ``reheat_temperature``,
        ``reheater_pressure_drop``, ``exhaust_pressure``, ``heaters_out`` [-]
    backend : steam property backend (default: the case's, else seuif97) [-]
    check_limits : leave out points beyond valves wide open [-]

    Returns
    -------
    CorrectionCurves
        ``loads``, ``curves`` (each with ``values``, ``reference``, ``output``
        [W], ``heat_rate`` [J/J], ``output_factor``, ``heat_rate_factor`` [-],
        ``output_change`` [W], ``failed``), ``curve(name)``, ``basis``.
    """
    from .plant.case import Case
    from .study.corrections import correction_curves as _curves

    if isinstance(model_or_case, (str, Path)):
        from .inputs.reading import load_toml

        data, _ = load_toml(model_or_case)
        model_or_case = (load_case(model_or_case) if "model" in data
                         else load_model(model_or_case))
    case_name = model_or_case.name if isinstance(model_or_case, Case) else ""
    model, base, default_backend = _model_and_base(model_or_case)
    return _curves(model, base, case_name=case_name, loads=loads, conditions=conditions,
                   backend=backend or default_backend, check_limits=check_limits)
# ------------------------------------------------------------------ measured data
def read_measurements(path: str | Path):
    """Read a measurement map (TOML) and its CSV readings (``partload.measure``).

    Parameters
    ----------
    path : the map file [-]

    Returns
    -------
    partload.measure.Measurements
        Tags, readings in SI units, the calibrated model and the base conditions.
    """
    from .measure.tags import read_measurements as _read

    return _read(path)


def reconcile_measurements(path_or_measurements, *, tunables: list[str] | None = None,
                           backend: str = "seuif97") -> list:
    """Reconcile each measured point with the model (``partload reconcile``).

    Parameters
    ----------
    path_or_measurements : a map file or :func:`read_measurements`' result [-]
    tunables : constants free at each point (default: the map's ``[fit] tunables``) [-]
    backend : steam property backend [-]

    Returns
    -------
    list[partload.measure.FitResult]
        One per point: ``rec`` (reconciled values, uncertainties, chi-square,
        individual tests), ``suspects()``.
    """
    from .measure.fit import reconcile

    return reconcile(_measurements(path_or_measurements), tunables, backend)


class FitOutcome(NamedTuple):
    """What :func:`fit_measurements` returns: the fit, the deviation report (one
    :class:`partload.measure.tested.Deviation` per tunable), the totals at design
    flow (design and as tested) and the fitted model file written (or ``None``)."""

    fit: Any
    deviations: list
    totals: dict
    path: Path | None


def _free_target(path: str | Path | None, force: bool) -> None:
    """Refuse to replace an existing file without ``force`` (exit 3 on the command
    line), before any work is done."""
    from .errors import ResultFileError

    if path is not None and Path(path).exists() and not force:
        raise ResultFileError(f"{path} exists; give force=True (--force) to replace it")


def fit_measurements(path_or_measurements, output: str | Path | None = None, *,
                     tunables: list[str] | None = None, backend: str = "seuif97",
                     force: bool = False) -> FitOutcome:
    """Fit the tunables to all measured points together (``partload fit``).

    Parameters
    ----------
    path_or_measurements : a map file or :func:`read_measurements`' result [-]
    output : write the fitted model file ("as tested") here; ``None``: do not write [-]
    tunables : the constants to fit (default: the map's ``[fit] tunables``) [-]
    backend : steam property backend [-]
    force : replace an existing ``output`` [-]

    Returns
    -------
    FitOutcome
    """
    from .measure.fit import fit
    from .measure.tested import deviation_report, write_as_tested

    _free_target(output, force)
    result = fit(_measurements(path_or_measurements), tunables, backend)
    deviations, totals = deviation_report(result, backend)
    path = write_as_tested(result, output) if output is not None else None
    return FitOutcome(result, deviations, totals, path)


def trend_measurements(path_or_measurements, output: str | Path | None = None, *,
                       chart: str | Path | None = None, backend: str = "seuif97",
                       progress: Callable[[int, int], None] | None = None,
                       force: bool = False):
    """Fit the tunables period by period over online data (``partload trend``).

    Parameters
    ----------
    path_or_measurements : a map file or :func:`read_measurements`' result [-]
    output : the HDF5 file to write; ``None``: do not write [-]
    chart : the PNG chart to draw; ``None``: no chart [-]
    backend : steam property backend [-]
    progress : called with ``(period, periods)`` after each period [-]
    force : replace an existing ``output`` [-]

    Returns
    -------
    partload.measure.trend.Trend
    """
    from .measure.trend import draw_trend, fit_trend, write_trend

    _free_target(output, force)
    meas = _measurements(path_or_measurements)
    trend = fit_trend(meas, backend, progress)
    if output is not None:
        write_trend(trend, meas, output)
    if chart is not None:
        draw_trend(trend, chart)
    return trend


def point_as_tested(fit, conditions: Conditions | None = None, *, backend: str = "seuif97",
                    **changes):
    """One point of the fitted model with the 95 % uncertainty of every total, from
    the fit's covariance (linearised).

    Parameters
    ----------
    fit : a :class:`FitOutcome` or its ``fit`` [-]
    conditions : operating conditions (SI); default: the design point [-]
    backend : steam property backend [-]
    **changes : conditions changed as in :func:`point` (``throttle_flow`` [kg/s],
        ``output`` [W], ``exhaust_pressure`` [Pa], ...) [-]

    Returns
    -------
    (PointResult, dict)
        The point as tested, and each total's 95 % uncertainty [unit of the total].
    """
    from .measure.tested import predict
    from .plant.case import design_conditions

    result = fit.fit if isinstance(fit, FitOutcome) else fit
    base = conditions if conditions is not None else design_conditions(result.model)
    if changes:
        _check_as_a_case_would(result.model, base, None, changes)
    cond = _with_changes(result.model, base, changes) if changes else base
    return predict(result, cond, backend)


def band_as_tested(fit, throttle_flows, *, draws: int = 200, seed: int = 0,
                   backend: str = "seuif97", **changes) -> dict:
    """Output and heat rate of the fitted model over a load sweep with Monte Carlo
    95 % bands from the fit's covariance.

    Parameters
    ----------
    fit : a :class:`FitOutcome` or its ``fit`` [-]
    throttle_flows : the throttle flows of the sweep [kg/s]
    draws : Monte Carlo draws [-]
    seed : seed of the draws [-]
    backend : steam property backend [-]
    **changes : other conditions, as in :func:`point` (``exhaust_pressure`` [Pa], ...) [-]

    Returns
    -------
    dict
        ``generator_output`` [W] and ``heat_rate`` [J/J]: (points, 3) arrays of the
        fitted model's value and the 2.5 % and 97.5 % quantiles; ``draws`` [-].
    """
    from .measure.tested import monte_carlo_band
    from .plant.case import design_conditions

    result = fit.fit if isinstance(fit, FitOutcome) else fit
    base = design_conditions(result.model)
    if changes:
        _check_as_a_case_would(result.model, base, None, changes)
        base = _with_changes(result.model, base, changes)
    conds = [_with_changes(result.model, base, {"throttle_flow": float(m)})
             for m in throttle_flows]
    return monte_carlo_band(result, conds, draws, seed, backend)


def _measurements(path_or_measurements):
    if isinstance(path_or_measurements, (str, Path)):
        return read_measurements(path_or_measurements)
    return path_or_measurements
