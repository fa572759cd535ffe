"""Study planning: the ordered points of a study (:class:`StudyPlan`), cut into
chunks of consecutive points (:class:`Chunk`), built by :func:`plan_study`.
"""

from __future__ import annotations

import copy
import dataclasses
import itertools
import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from ..errors import InputError
from ..plant.case import Case, Conditions, read_conditions
from ..plant.model import Model
from ..units import Where
from .axes import CONTINUATION_ORDER, MAX_POINTS, Axis, read_sweep
from .points import PointCollector, PointConditions, apply_input
from .profile import ProfileSource, read_profile

__all__ = [
    "CHUNK_MAX",
    "CHUNK_MIN",
    "Chunk",
    "InputColumn",
    "PointConditions",
    "StudyPlan",
    "check_size",
    "check_study_tables",
    "chunk_size",
    "plan_study",
]

CHUNK_MAX = 200  # [points] largest chunk: one unit of work, continuation and storage
CHUNK_MIN = 8  # [points] smallest chunk when a study is cut for parallel work


@dataclass
class InputColumn:
    """Per-point values of one input, as stored under ``/inputs``.

    ``values`` is float64 in SI units (NaN: not set) or a list of str.
    """

    values: np.ndarray | list
    unit: str
    description: str


@dataclass
class Chunk:
    """Consecutive points ``start <= i < stop`` solved in one go (continuation)."""

    index: int
    start: int
    stop: int

    @property
    def size(self) -> int:
        return self.stop - self.start


@dataclass
class StudyPlan:
    """Everything a study will solve, in storage (and continuation) order.

    Attributes
    ----------
    case : the case file read
    kind : ``"sweep"``, ``"profile"`` or ``"profile+sweep"``
    backend : steam property backend name
    conditions : one per point (a :class:`PointConditions`, used as a list)
    labels : a short text per point
    series : series number of each point [-]
    series_labels : text of each series (the values of its fixed axes)
    axes : axis keys as given (sweep axes, then profile columns)
    continuation : the axis that varies inside a series (``"profile"`` for a
        profile's rows)
    inputs : per-point inputs for ``/inputs`` (name -> column)
    chunks : the units of work
    profile : the profile file, if any (its path, text and hash; its columns are
        in ``inputs``, so its ``axes`` are left empty)
    limit : set by :meth:`head` when only the first points are planned
    """

    case: Case
    kind: str
    backend: str
    conditions: Sequence[Conditions]
    labels: list[str]
    series: np.ndarray
    series_labels: list[str]
    axes: list[str]
    continuation: str
    inputs: dict[str, InputColumn]
    chunks: list[Chunk]
    profile: ProfileSource | None = None

    @property
    def n_points(self) -> int:
        return len(self.conditions)

    limit: int | None = None

    @property
    def chunk_of_point(self) -> np.ndarray:
        out = np.empty(self.n_points, dtype=np.int32)
        for c in self.chunks:
            out[c.start:c.stop] = c.index
        return out

    def head(self, n: int) -> StudyPlan:
        """The first ``n`` points only (a trial run), chunked afresh for ``n``."""
        if n < 1:
            raise InputError(f"a study needs at least one point, not {n}", key="--limit")
        if n >= self.n_points:
            return self
        inputs = {k: InputColumn(c.values[:n], c.unit, c.description)
                  for k, c in self.inputs.items()}
        series = self.series[:n].copy()
        return dataclasses.replace(
            self, conditions=(self.conditions.head(n) if isinstance(self.conditions,
                                                                    PointConditions)
                              else self.conditions[:n]),
            labels=self.labels[:n], series=series,
            series_labels=self.series_labels[:int(series.max()) + 1], inputs=inputs,
            chunks=_chunks(series, chunk_size(n)), limit=n)


def check_size(lengths: Sequence[int], keys: Sequence[str], file: str,
               table: str = "sweep") -> int:
    """The number of points of a study, refused above :data:`MAX_POINTS`.

    Computed from the lengths of the axes alone (their product), before any
    point, label or array is made: a typo in a range must not fill the memory
    before it is refused.

    Parameters
    ----------
    lengths : the number of values of each axis (a profile: its rows) [-]
    keys : the axes' keys, for the message [-]
    file : the case file, for the message [-]
    table : its table that sets the axes (``sweep`` or ``profile``) [-]

    Raises
    ------
    InputError
        Naming the case file, each axis with its length, and the limit.
    """
    n_total = math.prod(lengths)
    if n_total > MAX_POINTS:
        parts = " x ".join(f"{n} ({k})" for n, k in zip(lengths, keys) if k or n > 1)
        raise InputError(f"this study has {n_total:,} points ({parts}), more than the "
                         f"{MAX_POINTS:,} a study may have; use fewer values or split it "
                         f"into several studies", file=file, table=table)
    return n_total


def chunk_size(n_points: int) -> int:
    """Chunk length for a study of ``n_points`` points.

    About 16 chunks so that a few workers share the work, but no fewer than
    :data:`CHUNK_MIN` points (continuation needs a run) and no more than
    :data:`CHUNK_MAX` (progress and storage come by chunk).  It depends on the
    plan alone, so that results do not depend on the number of workers.
    """
    return int(min(CHUNK_MAX, max(CHUNK_MIN, math.ceil(n_points / 16))))


def _chunks(series: np.ndarray, size: int) -> list[Chunk]:
    """Cut the points into chunks of at most ``size`` that never cross a series."""
    chunks: list[Chunk] = []
    n = len(series)
    start = 0
    while start < n:
        end = start
        while end < n and series[end] == series[start]:
            end += 1
        for a in range(start, end, size):
            chunks.append(Chunk(len(chunks), a, min(a + size, end)))
        start = end
    return chunks


def _switch_conditions(case: Case, heaters: tuple, closed: tuple, cache: dict,
                       where: Where) -> Conditions:
    """The case's conditions with extra heaters out and extractions closed."""
    k = (heaters, closed)
    if k in cache:
        return cache[k]
    data = copy.deepcopy(case.data)
    hs = data.setdefault("heaters", {})
    for h in heaters:
        hs[h] = {"in_service": False}
    ex = data.setdefault("extractions", {})
    for e in closed:
        ex[e] = {"control": "closed"}
    try:
        cond = read_conditions(data, case.model, case.file)
    except InputError as exc:
        raise where.error(f"with {' '.join(heaters + closed)} out of service: "
                          f"{exc.message}") from None
    cache[k] = cond
    return cond


def _check_axes(case: Case, axes: list[Axis], where: Where) -> None:
    loads = [a.key for a in axes if a.kind.role == "load"]
    if len(loads) > 1:
        raise where.child(loads[1]).error(
            f"the load is set once: vary only one of {', '.join(loads)}")
    keys = [a.key for a in axes]
    dup = [k for k in keys if keys.count(k) > 1]
    if dup:
        raise where.child(dup[0]).error(
            "varied twice: in [sweep] and in the profile, or written two ways "
            "(extraction_flow.NAME and extractions.NAME.flow are one input)")


def check_study_tables(case: Case) -> int:
    """Read and check the case's ``[sweep]`` and ``[profile]`` tables as
    :func:`plan_study` does (every value, the profile file, the axes together,
    the number of points) without planning the points; returns that number.
    ``partload point`` refuses a broken study this way although it runs none.

    Raises
    ------
    InputError
        As :func:`plan_study`.
    """
    sweep = read_sweep(case) if "sweep" in case.data else []
    profile = read_profile(case) if "profile" in case.data else None
    _check_axes(case, sweep + (profile.axes if profile else []),
                Where(case.file, "sweep" if "sweep" in case.data else "profile"))
    lengths = [len(a.values) for a in sweep] + ([len(profile.labels)] if profile else [])
    keys = [a.key for a in sweep] + (["profile rows"] if profile else [])
    return check_size(lengths, keys, case.file, "sweep" if sweep else "profile")


def _effective_inputs(model: Model, conds: Sequence[Conditions]) -> dict[str, InputColumn]:
    """Resolved per-point inputs (design values where the case leaves them unset).

    One pass over ``conds``: a :class:`PointConditions` makes each point once, and
    the point is gone before the next is made."""
    n = len(conds)
    reheat = [p.outlet_temperature for p in model.reheaters]
    T_rh_design = reheat[0] if reheat and all(t == reheat[0] for t in reheat) else math.nan
    exh = [model.design_pressure[e] for e in model.exhaust_nodes]
    p_x_design = exh[0] if all(p == exh[0] for p in exh) else math.nan
    finds_pressure = any(c.frees_node for c in model.components)
    nan = math.nan

    def fmt_controls(c):
        parts = []
        for name, (ctl, v) in c.extraction_control:
            if ctl == "flow":
                parts.append(f"{name}: flow {v:.6g} kg/s")
            elif ctl == "fraction":
                parts.append(f"{name}: fraction {v:.6g}")
        return "; ".join(parts)

    # (name, number or text, value of a point, unit, description), in the file's order
    columns = [
        ("throttle_flow", True,
         lambda c: c.throttle_flow if c.throttle_flow is not None else nan, "kg/s",
         "throttle flow asked for (NaN when an output is demanded)"),
        ("output", True, lambda c: c.output if c.output is not None else nan, "W",
         "generator output demanded (NaN when the throttle flow is given)"),
        ("valve_mode", False, lambda c: c.valve_mode, "",
         "how the valves pass the steam: 'throttle' (together) or "
         "'nozzle_groups' (a governing stage's valves in sequence)"),
        ("pressure_mode", False, lambda c: c.pressure_mode, "",
         "throttle pressure 'sliding' (a result), 'fixed' (held) "
         "or 'program' (sliding between two held pressures)"),
        ("valves_open", True, lambda c: c.valves_open if c.valves_open is not None else nan,
         "-", "governing-stage valves wide open at sliding pressure (NaN: the design number, "
         "or not used)"),
        ("minimum_throttle_pressure", True,
         lambda c: c.minimum_throttle_pressure if c.minimum_throttle_pressure is not None
         else nan, "Pa", "lowest throttle pressure of a pressure program (NaN: no program)"),
        ("throttle_pressure", True,
         lambda c: c.throttle_pressure if c.throttle_pressure is not None else nan, "Pa",
         "held throttle pressure (pressure mode 'fixed'; NaN: sliding pressure, see "
         "/totals/throttle_pressure)"),
        ("throttle_temperature", True,
         lambda c: c.throttle_temperature if c.throttle_temperature is not None
         else model.throttle.temperature, "K", "throttle steam temperature"),
        ("reheat_temperature", True,
         lambda c: c.reheat_temperature if c.reheat_temperature is not None else T_rh_design,
         "K", "hot reheat temperature (NaN: no reheater, or each reheater at its design)"),
        ("exhaust_pressure", True,
         lambda c: c.exhaust_pressure if c.exhaust_pressure is not None
         else nan if finds_pressure else p_x_design, "Pa",
         "exhaust (condenser or back) pressure given (NaN: found by the condensers, see "
         "/condensers/pressure)" if finds_pressure else "exhaust (condenser or back) "
         "pressure"),
        ("heaters_out_of_service", False, lambda c: " ".join(sorted(c.heaters_out)), "",
         "heaters out of service, separated by spaces"),
        ("extractions_closed", False,
         lambda c: " ".join(name for name, (ctl, _) in c.extraction_control if ctl == "closed"),
         "", "extractions closed, separated by spaces"),
        ("extraction_setpoints", False, fmt_controls, "",
         "extractions held at a set flow or fraction of throttle flow"),
    ]
    values = [np.empty(n, dtype=np.float64) if number else [""] * n
              for _, number, _, _, _ in columns]
    gets = [get for _, _, get, _, _ in columns]
    for i, c in enumerate(conds):
        for get, column in zip(gets, values):
            column[i] = get(c)
    return {name: InputColumn(column, unit, description)
            for (name, _, _, unit, description), column in zip(columns, values)}


def plan_study(case: Case, backend: str | None = None) -> StudyPlan:
    """Turn the case's ``[sweep]`` and ``[profile]`` tables into a plan.

    Parameters
    ----------
    case : a case read by :func:`simulator.case.load_case`
    backend : steam property backend (default: the case's)

    Raises
    ------
    InputError
        For a mistake in the tables or the profile file (file, table and key
        named).
    """
    has_sweep = "sweep" in case.data
    has_profile = "profile" in case.data
    if not (has_sweep or has_profile):
        raise InputError("this case has no [sweep] or [profile] table, so there is nothing to "
                         "study; solve it with 'partload point', or add a [sweep] table such "
                         "as: throttle_flow_fraction = {from = 0.4, to = 1.0, points = 13}",
                         file=case.file)
    model = case.model
    sweep = read_sweep(case) if has_sweep else []
    profile = read_profile(case) if has_profile else None
    all_axes = sweep + (profile.axes if profile else [])
    _check_axes(case, all_axes, Where(case.file, "sweep" if has_sweep else "profile"))
    # base conditions: a load axis replaces the case's own load
    base = case.conditions
    if profile is not None:
        series_axes = sweep
        cont_key = "profile"
        run_values = None
    else:
        cont = None
        for pref in CONTINUATION_ORDER:
            cands = [a for a in sweep if a.base == pref]
            if cands:
                cont = cands[-1]
                break
        series_axes = [a for a in sweep if a is not cont]
        cont_key = cont.key if cont is not None else ""
        if cont is not None:
            order = sorted(range(len(cont.values)), key=lambda k: cont.values[k])
            run_values = [(cont.values[k], cont.texts[k]) for k in order]
        else:
            run_values = [None]
    n_run = len(profile.labels) if profile is not None else len(run_values)
    run_key = cont_key if profile is None else "profile rows"
    check_size([len(a.values) for a in series_axes] + [n_run],
               [a.key for a in series_axes] + [run_key], case.file,
               "sweep" if has_sweep else "profile")
    n_series = math.prod(len(a.values) for a in series_axes)
    n_total = n_series * n_run
    # the series one at a time: nothing of the product is built before it is planned
    combos = itertools.product(*[range(len(a.values)) for a in series_axes])
    cache: dict = {}
    # the points kept as numbers (PointConditions); their conditions are made when used
    points = PointCollector(model, n_total, 1 if profile is None else
                     sum(a.kind.role != "switch" for a in profile.axes))
    labels: list[str] = []
    series = np.empty(n_total, dtype=np.int32)
    series_labels: list[str] = []
    axis_cols: dict[str, list] = {a.key: [] for a in all_axes}
    for s, combo in enumerate(combos):
        heaters: set[str] = set()
        closed: set[str] = set()
        parts = []
        for a, k in zip(series_axes, combo):
            parts.append(f"{a.key}={a.texts[k]}")
            if a.base == "heater_out":
                heaters.update(a.values[k])
            elif a.base == "extraction_closed":
                closed.update(a.values[k])
        cond_s = base
        if heaters or closed:
            cond_s = _switch_conditions(case, tuple(sorted(heaters)), tuple(sorted(closed)),
                                        cache, Where(case.file, "sweep",
                                                     "heater_out" if heaters else
                                                     "extraction_closed"))
        for a, k in zip(series_axes, combo):
            if a.kind.role != "switch":
                cond_s = apply_input(cond_s, a.key, a.values[k], model)
        series_label = ", ".join(parts)
        series_labels.append(series_label)
        start = points.n
        if profile is None:
            for item in run_values:
                label = series_label
                items = ()
                if item is not None:
                    items = ((cont.key, item[0]),)
                    label = f"{cont.key}={item[1]}" + (f", {series_label}" if series_label else "")
                points.add(cond_s, items)
                labels.append(label)
                for a, k in zip(series_axes, combo):
                    axis_cols[a.key].append(a.values[k])
                if cont is not None:
                    axis_cols[cont.key].append(item[0])
        else:
            p_switch = [a for a in profile.axes if a.kind.role == "switch"]
            p_scalar = [a for a in profile.axes if a.kind.role != "switch"]
            for r in range(n_run):
                c = cond_s
                if p_switch:
                    h2 = set(heaters)
                    c2 = set(closed)
                    for a in p_switch:
                        (h2 if a.base == "heater_out" else c2).update(a.values[r])
                    if h2 != heaters or c2 != closed:
                        c = _switch_conditions(case, tuple(sorted(h2)), tuple(sorted(c2)),
                                               cache, Where(profile.file,
                                                            f"line {profile.lines[r]}"))
                        for a, k in zip(series_axes, combo):
                            if a.kind.role != "switch":
                                c = apply_input(c, a.key, a.values[k], model)
                label = profile.labels[r] + (f", {series_label}" if series_label else "")
                points.add(c, [(a.key, a.values[r]) for a in p_scalar])
                labels.append(label)
                for a, k in zip(series_axes, combo):
                    axis_cols[a.key].append(a.values[k])
                for a in profile.axes:
                    axis_cols[a.key].append(a.values[r])
        series[start:points.n] = s
    chunks = _chunks(series, chunk_size(n_total))
    conds = points.conditions(labels)
    inputs = _effective_inputs(model, conds)
    for a in all_axes:
        if a.key in inputs:
            continue  # the resolved column holds the same numbers
        vals = axis_cols[a.key]
        if a.kind.role == "switch":
            inputs[a.key] = InputColumn([" ".join(v) for v in vals], "",
                                        a.kind.description + " (axis)")
        else:
            inputs[a.key] = InputColumn(np.array(vals, dtype=np.float64), a.kind.unit,
                                        a.kind.description + " (axis)")
    if profile is not None:
        inputs["profile_line"] = InputColumn(
            np.tile(profile.lines, n_series).astype(np.int64), "-",
            "line of the point in the profile file")
        inputs["time"] = InputColumn(list(profile.labels) * n_series, "",
                                     "label of the profile row (its time column)")
    kind = "sweep" if profile is None else ("profile+sweep" if sweep else "profile")
    if profile is not None:  # its columns are in the inputs now: not kept twice
        profile = dataclasses.replace(profile, axes=[])
    return StudyPlan(case=case, kind=kind, backend=backend or case.backend, conditions=conds,
                     labels=labels, series=series, series_labels=series_labels,
                     axes=[a.key for a in all_axes], continuation=cont_key, inputs=inputs,
                     chunks=chunks, profile=profile)
