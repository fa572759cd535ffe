"""Batch studies: sweeps and profiles of operating points, solved with continuation.

A study is a case file with a ``[sweep]`` table, a ``[profile]`` table, or
both.  :func:`plan_study` turns it into a :class:`StudyPlan`: an ordered list
of :class:`~simulator.case.Conditions` cut into chunks of consecutive points.
:func:`run_study` solves the chunks in this process, on a pool of local
processes, or on an existing Dask cluster, and hands each finished chunk (a
:class:`ChunkResult` of plain numpy arrays) to a callback, usually
:meth:`simulator.store.StudyFile.write`.

Sweep (case file)::

    [sweep]
    throttle_flow_fraction = {from = 0.30, to = 1.00, points = 15}
    exhaust_pressure = ["5 kPa", "8 kPa", "11 kPa"]
    heater_out = ["none", "HP8", ["HP7", "HP8"]]

Every key of :data:`AXES` may be an axis: a list of values, a range
``{from = A, to = B, points = N}`` or ``{from = A, to = B, step = S}`` (the
end is included when the steps land on it), or a single value.  Quantities
carry units as in ``[operation]``; fractions are numbers or ``"60 %"``.
``extraction_flow`` is a table of extraction names::

    [sweep.extraction_flow]
    process_steam = ["0 kg/s", "10 kg/s", "25 kg/s"]

``heater_out`` and ``extraction_closed`` name what is out of service at a
point *in addition* to what the case itself takes out; ``"none"`` adds
nothing.  Several axes form their Cartesian product.

Profile (case file)::

    [profile]
    file = "reheat_hourly_profile.csv"     # relative to the case file

The CSV file has one header row naming the columns by the same keys as the
sweep axes, each with its unit in square brackets, e.g.
``time,output [MW],exhaust_pressure [kPa]``.  Fractions need no unit (or
``[%]``); ``heater_out`` and ``extraction_closed`` columns hold names separated
by spaces (empty or ``none``: nothing).  A column ``time`` (or the one named by
``label_column``) is kept as the point label.  Lines starting with ``#`` are
comments.  Every row is one point.  A profile may be combined with a sweep of
other keys (for example ``heater_out = ["none", "HP8"]``): the whole profile is
then run once for every combination of the sweep axes.

Order and continuation
    The points of a study are grouped in *series*: one series per combination
    of all axes but one, the continuation axis (the load axis if there is one,
    else the exhaust pressure, the held throttle pressure, the temperatures,
    the extraction flows, in that order of preference).  Inside a series the
    continuation axis runs in increasing order; a profile runs in file order.
    This is also the order in which points are stored.  Each series is cut
    into *chunks* of at most :data:`CHUNK_MAX` consecutive points; a chunk is
    the unit of work and of storage.  Inside a chunk the points are solved by
    increasing load (:func:`solve_order`; a sweep's chunk already is, a
    profile's is reordered): the first starts from the design-scaled guess and
    every other from the solution of the one solved before it (``guess`` and
    ``jacobian`` of :func:`~simulator.solve.solve_point`).
    The chunking depends only on the plan, never on the number of workers, so a
    study gives bit-for-bit the same numbers with one worker, several workers,
    a Dask cluster, or after an interrupted run is resumed.

A point that cannot be solved (:class:`~simulator.errors.SolveError`) is
recorded with its reason and the study goes on; so is an unexpected exception
in one point (recorded as an internal error, to be reported as a bug).
"""

from __future__ import annotations

import copy
import csv
import dataclasses
import hashlib
import io
import itertools
import math
import multiprocessing
import os
import re
import signal
import sys
import threading
import time
import tomllib
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..errors import ConvergenceError, InputError, SolveError
from ..inputs.reading import closest
from ..plant.case import Case, Conditions, read_conditions
from ..plant.model import Model, build_model
from ..solve.point import PointResult, solve_point
from ..steam.if97 import P_MAX, P_MIN, T_MAX, T_MIN, get_backend
from ..units import Where, parse

__all__ = [
    "AXES",
    "AxisKind",
    "Axis",
    "Chunk",
    "ChunkResult",
    "Field",
    "InputColumn",
    "Progress",
    "ResultLayout",
    "StudyPlan",
    "StudySummary",
    "CHUNK_MAX",
    "MAX_POINTS",
    "STATUS",
    "plan_study",
    "result_layout",
    "run_study",
    "solve_chunk",
    "solve_order",
]

CHUNK_MAX = 200  # [points] largest chunk: one unit of work, continuation and storage
CHUNK_MIN = 8  # [points] smallest chunk when a study is cut for parallel work
MAX_POINTS = 1_000_000  # a typo in a range should not plan a billion points
MESSAGE_BYTES = 256  # fixed length of a stored solver message (UTF-8, truncated)
CODES_BYTES = 128  # fixed length of the stored caution codes of a point
CAUTION_BYTES = 1024  # fixed length of the stored caution messages of a point
CONTROL_BYTES = 8  # fixed length of a stored extraction control word

# solver status of a point, as stored in /solver/status
STATUS = {"not solved": -1, "converged": 0, "failed": 1, "internal error": 2}


# --------------------------------------------------------------------------- axes
@dataclass(frozen=True)
class AxisKind:
    """What a sweep axis or profile column sets.

    Attributes
    ----------
    dimension : dimension for :func:`simulator.units.parse` (``None``: names)
    unit : SI unit of the stored values (``"-"`` dimensionless, ``""`` names)
    role : ``"load"``, ``"state"`` (another scalar input) or ``"switch"``
        (heaters or extractions out of service)
    lo, hi : allowed range in SI units (``None``: open)
    lo_open : ``lo`` itself is not allowed
    description : one line for the result file
    """

    dimension: str | None
    unit: str
    role: str
    lo: float | None
    hi: float | None
    lo_open: bool
    description: str


AXES: dict[str, AxisKind] = {
    "throttle_flow": AxisKind("mass_flow", "kg/s", "load", 0.0, None, True,
                              "throttle steam flow"),
    "throttle_flow_fraction": AxisKind("fraction", "-", "load", 0.0, 2.0, True,
                                       "throttle flow over its design value"),
    "output": AxisKind("power", "W", "load", 0.0, None, True,
                       "generator output demanded"),
    "output_fraction": AxisKind("fraction", "-", "load", 0.0, 2.0, True,
                                "generator output demanded over the generator rating"),
    "exhaust_pressure": AxisKind("pressure", "Pa", "state", P_MIN, P_MAX, False,
                                 "exhaust (condenser or back) pressure"),
    "throttle_pressure": AxisKind("pressure", "Pa", "state", P_MIN, P_MAX, False,
                                  "throttle pressure held by throttle governing"),
    "throttle_temperature": AxisKind("temperature", "K", "state", T_MIN, T_MAX, False,
                                     "throttle steam temperature"),
    "reheat_temperature": AxisKind("temperature", "K", "state", T_MIN, T_MAX, False,
                                   "hot reheat temperature"),
    "extraction_flow": AxisKind("mass_flow", "kg/s", "state", 0.0, None, False,
                                "flow of an extraction held at a set flow"),
    "heater_out": AxisKind(None, "", "switch", None, None, False,
                           "heaters taken out of service in addition to the case's"),
    "extraction_closed": AxisKind(None, "", "switch", None, None, False,
                                  "extractions closed in addition to the case's"),
}

# preferred continuation axis, first found wins
_CONTINUATION = ("throttle_flow", "throttle_flow_fraction", "output", "output_fraction",
                 "exhaust_pressure", "throttle_pressure", "throttle_temperature",
                 "reheat_temperature", "extraction_flow")
_LOAD_KEYS = ("throttle_flow", "throttle_flow_fraction", "output", "output_fraction")
_RANGE_KEYS = ("from", "to", "points", "step")


@dataclass
class Axis:
    """One sweep axis or profile column.

    Attributes
    ----------
    key : axis name, ``"extraction_flow.NAME"`` for an extraction flow
    kind : what it sets
    values : SI floats, or sorted tuples of names for switches
    texts : the values as the user wrote them (for point labels)
    """

    key: str
    kind: AxisKind
    values: list
    texts: list[str]

    @property
    def base(self) -> str:
        return self.key.split(".", 1)[0]


def _axis_kind(key: str, where: Where) -> AxisKind:
    base = key.split(".", 1)[0]
    if base not in AXES or (base == "extraction_flow") != ("." in key):
        valid = [k for k in AXES if k != "extraction_flow"] + ["extraction_flow.NAME"]
        mean = closest(key, valid)
        raise where.child(key).error(
            f"not an input that can be varied{mean} (valid: {', '.join(valid)})")
    return AXES[base]


def _check_range(kind: AxisKind, si: float, text, w: Where, hi: float | None = None) -> None:
    """Range check of a profile value (sweep values go through the case reader)."""
    hi = kind.hi if hi is None else hi
    if (kind.lo is not None and (si < kind.lo or (kind.lo_open and si == kind.lo))) or (
            hi is not None and si > hi):
        lo_t = "" if kind.lo is None else (f"{'above' if kind.lo_open else 'at least'} "
                                           f"{kind.lo:.6g} {kind.unit}")
        hi_t = "" if hi is None else f"at most {hi:.6g} {kind.unit}"
        raise w.error(f"{text!r} is out of range: it must be "
                      f"{' and '.join(t for t in (lo_t, hi_t) if t)} (SI units)")


def _scalar(kind: AxisKind, value, w: Where) -> float:
    return parse(value, kind.dimension, w)


def _validate(case: Case, key: str, value, w: Where) -> None:
    """Check one written value the way the case reader checks ``[operation]``.

    The value is put into a copy of the case's tables (a load replaces the
    case's load; an extraction flow sets that extraction to ``control =
    'flow'``) and read with :func:`simulator.case.read_conditions`, so a sweep
    accepts exactly what a case file would.
    """
    data = copy.deepcopy(case.data)
    if key.startswith("extraction_flow."):
        data.setdefault("extractions", {})[key.split(".", 1)[1]] = {"control": "flow",
                                                                   "flow": value}
    else:
        op = data.setdefault("operation", {})
        if key in _LOAD_KEYS:
            for k in _LOAD_KEYS:
                op.pop(k, None)
        op[key] = value
    try:
        read_conditions(data, case.model, case.file)
    except InputError as exc:
        raise w.error(getattr(exc, "message", str(exc))) from None


def _names(kind_key: str, value, w: Where, model: Model) -> tuple[str, ...]:
    """A switch value: ``"none"``, a name, or a list of names."""
    if isinstance(value, str):
        items = [] if value.strip().lower() in ("none", "") else value.split()
    elif isinstance(value, list) and all(isinstance(v, str) for v in value):
        items = [v for v in value if v.lower() != "none"]
    else:
        raise w.error(f"expected 'none', a name or a list of names, got {value!r}")
    known = model.heaters if kind_key == "heater_out" else model.extractions
    what = "heater" if kind_key == "heater_out" else "extraction"
    for name in items:
        if name not in known:
            raise w.error(f"the model has no {what} {name!r}"
                          + (closest(name, known) or f"; valid: {', '.join(known)}"))
    return tuple(sorted(set(items)))


_NUM_UNIT = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(.*?)\s*$")


def _split_text(value) -> tuple[float, str] | None:
    if isinstance(value, bool):
        return None
    if isinstance(value, (int, float)):
        return float(value), ""
    if isinstance(value, str):
        m = _NUM_UNIT.match(value)
        if m:
            return float(m.group(1)), m.group(2)
    return None


def _range(kind: AxisKind, spec: dict, w: Where, check) -> tuple[list[float], list[str]]:
    """Values of ``{from, to, points}`` or ``{from, to, step}``."""
    unknown = [k for k in spec if k not in _RANGE_KEYS]
    if unknown:
        raise w.error(f"unknown key {unknown[0]!r} in a range; a range is "
                      f"{{from = A, to = B, points = N}} or {{from = A, to = B, step = S}}")
    if "from" not in spec or "to" not in spec or ("points" in spec) == ("step" in spec):
        raise w.error("a range needs 'from', 'to' and one of 'points' or 'step'")
    a = _scalar(kind, spec["from"], w)
    b = _scalar(kind, spec["to"], w)
    check(spec["from"])
    check(spec["to"])
    if "points" in spec:
        n = spec["points"]
        if isinstance(n, bool) or not isinstance(n, int) or n < 2:
            raise w.error(f"'points' must be a whole number of at least 2, got {n!r}")
        if n > MAX_POINTS:
            raise w.error(f"{n} points is more than the {MAX_POINTS} a study may have")
        k_all = np.arange(n)
        values = [float(v) for v in np.linspace(a, b, n)]
        frac = k_all / (n - 1)
    else:
        dim = "temperature_difference" if kind.dimension == "temperature" else kind.dimension
        step = parse(spec["step"], dim, w)
        if not step > 0.0:
            raise w.error(f"'step' must be positive, got {spec['step']!r}")
        span = abs(b - a)
        n_f = span / step
        if n_f + 1 > MAX_POINTS:
            raise w.error(f"this range has {int(n_f) + 1} points, more than the {MAX_POINTS} "
                          f"a study may have")
        n = int(math.floor(n_f + 1e-9)) + 1
        sign = 1.0 if b >= a else -1.0
        values = [a + sign * k * step for k in range(n)]
        if abs(values[-1] - b) <= 1e-9 * max(abs(a), abs(b), step):
            values[-1] = b  # land exactly on the end
        frac = np.array([(v - a) / (b - a) if b != a else 0.0 for v in values])
    # labels in the user's unit when 'from' and 'to' share it
    fa, fb = _split_text(spec["from"]), _split_text(spec["to"])
    if fa and fb and fa[1] == fb[1]:
        texts = [f"{fa[0] + f * (fb[0] - fa[0]):.6g}" + (f" {fa[1]}" if fa[1] else "")
                 for f in frac]
    else:
        texts = [f"{v:.6g} {kind.unit}" for v in values]
    return values, texts


def _read_axis(key: str, value, wk: Where, case: Case) -> Axis:
    """One axis of ``[sweep]``; ``wk`` locates its value in the case file."""
    kind = _axis_kind(key, Where(wk.file, wk.table))

    def check(v):
        _validate(case, key, v, wk)

    if kind.role == "switch":
        # a list holds alternatives: "none", a name, or a list of names out together
        if isinstance(value, list) and not value:
            raise wk.error("an empty list: give at least one value (or 'none')")
        items = value if isinstance(value, list) else [value]
        values = [_names(key, v, wk, case.model) for v in items]
        texts = [" ".join(v) if v else "none" for v in values]
    elif isinstance(value, dict):
        values, texts = _range(kind, value, wk, check)
    else:
        items = value if isinstance(value, list) else [value]
        if not items:
            raise wk.error("an empty list: give at least one value")
        values = []
        for v in items:
            values.append(_scalar(kind, v, wk))
            check(v)
        texts = [str(v) for v in items]
    if len(set(values)) != len(values):
        raise wk.error("the same value appears twice")
    return Axis(key, kind, values, texts)


def read_sweep(case: Case) -> list[Axis]:
    """The axes of the case's ``[sweep]`` table, in the order written."""
    data = case.data.get("sweep")
    w = Where(case.file, "sweep")
    if not isinstance(data, dict):
        raise w.error("expected a table [sweep] of inputs to vary")
    axes = []
    for key, value in data.items():
        if key == "extraction_flow":
            if not isinstance(value, dict) or any(k in _RANGE_KEYS for k in value):
                raise w.child(key).error(
                    "expected a table of extraction names, e.g. "
                    "[sweep.extraction_flow] process_steam = ['0 kg/s', '20 kg/s']")
            wt = Where(case.file, "sweep.extraction_flow")
            for name, v in value.items():
                _check_extraction_flow(case.model, name, wt)
                axes.append(_read_axis(f"extraction_flow.{name}", v, wt.child(name), case))
            continue
        axes.append(_read_axis(key, value, w.child(key), case))
    if not axes:
        raise w.error("the [sweep] table is empty: name at least one input to vary")
    return axes


def _check_extraction_flow(model: Model, name: str, w: Where) -> None:
    if name not in model.extractions:
        raise w.child(name).error(f"the model has no extraction {name!r}"
                                  + closest(name, model.extractions))
    if model.extractions[name].heater:
        raise w.child(name).error(
            f"extraction {name!r} feeds heater {model.extractions[name].heater!r}, which sets "
            f"its flow; vary 'heater_out' or 'extraction_closed' instead")


# ------------------------------------------------------------------------ profile
@dataclass
class ProfileSource:
    """The CSV file of a profile: its path, text, hash and columns."""

    file: str
    text: str
    sha256: str
    axes: list[Axis]
    labels: list[str]
    lines: np.ndarray  # [-] line number of each row in the file


_HEADER = re.compile(r"^\s*([A-Za-z_][\w.]*)\s*(?:\[\s*(.*?)\s*\])?\s*$")


def _linear_unit(kind: AxisKind, unit: str, w: Where) -> tuple[float, float]:
    """``(a, b)`` so that ``si = a * value + b`` for values written in ``unit``."""
    if kind.dimension == "fraction":
        if unit in ("", "-"):
            return 1.0, 0.0
        if unit in ("%", "percent"):
            return 0.01, 0.0
        raise w.error(f"a fraction column takes no unit or [%], got [{unit}]")
    if not unit:
        raise w.error(f"this column needs its unit in the header, for example "
                      f"'{w.key} [{_EXAMPLE_UNIT.get(kind.dimension, 'unit')}]'")
    try:
        y1 = parse(f"1 {unit}", kind.dimension, w)
        y2 = parse(f"2 {unit}", kind.dimension, w)
    except InputError:
        ex = _EXAMPLE_UNIT.get(kind.dimension, "unit")
        raise w.error(f"the column header '{w.key} [{unit}]' gives the unit [{unit}], which is "
                      f"not an absolute {kind.dimension.replace('_', ' ')} unit; write for "
                      f"example '{w.key} [{ex}]'") from None
    return y2 - y1, 2.0 * y1 - y2


_EXAMPLE_UNIT = {"mass_flow": "kg/s", "power": "MW", "pressure": "kPa", "temperature": "degC"}


def read_profile(case: Case) -> ProfileSource:
    """Read the CSV file named in the case's ``[profile]`` table."""
    w = Where(case.file, "profile")
    spec = case.data.get("profile")
    if not isinstance(spec, dict):
        raise w.error("expected a table [profile] with key 'file'")
    for k in spec:
        if k not in ("file", "label_column"):
            raise w.child(k).error("unknown key; valid keys: file, label_column")
    name = spec.get("file")
    if not isinstance(name, str) or not name:
        raise w.child("file").error("expected the name of a CSV file, relative to the case file")
    label_col = spec.get("label_column", None)
    path = (Path(case.file).parent / name)
    try:
        raw = path.read_bytes()
    except FileNotFoundError:
        raise w.child("file").error(f"profile file {name!r} not found (looked at {path})") from None
    except OSError as exc:
        raise w.child("file").error(f"cannot read profile file {name!r}: {exc}") from None
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise InputError(f"not UTF-8 text ({exc})", file=str(path)) from None
    sha = hashlib.sha256(raw).hexdigest()
    fname = str(path)
    rows = []
    header = None
    for lineno, row in enumerate(csv.reader(io.StringIO(text)), start=1):
        if not row or (len(row) == 1 and not row[0].strip()) or row[0].lstrip().startswith("#"):
            continue
        if header is None:
            header = (lineno, [c.strip() for c in row])
            continue
        rows.append((lineno, row))
    if header is None:
        raise InputError("the file has no header row", file=fname)
    if not rows:
        raise InputError("the file has a header but no rows", file=fname)
    hline, names = header
    if label_col is None:
        label_col = "time" if "time" in names else None
    elif label_col not in names:
        raise w.child("label_column").error(f"no column {label_col!r} in {fname}")
    columns = []  # (index, Axis key, kind, a, b)
    seen = set()
    for j, h in enumerate(names):
        if h == label_col:
            continue
        m = _HEADER.match(h)
        wh = Where(fname, f"line {hline}", h)
        if not m:
            raise wh.error("cannot read this column header; write it as 'key [unit]', "
                           "e.g. 'output [MW]'")
        key, unit = m.group(1), m.group(2) or ""
        kind = _axis_kind(key, Where(fname, f"line {hline}"))
        if key in seen:
            raise wh.error("this column appears twice")
        seen.add(key)
        if key.startswith("extraction_flow."):
            _check_extraction_flow(case.model, key.split(".", 1)[1], Where(fname, f"line {hline}"))
        a, b = (0.0, 0.0) if kind.role == "switch" else _linear_unit(kind, unit,
                                                                    wh.child(key))
        columns.append((j, key, kind, a, b))
    if not columns:
        raise InputError("the profile has no column of inputs", file=fname)
    n = len(rows)
    lines = np.array([r[0] for r in rows], dtype=np.int64)
    labels = []
    raw_cols = {key: [] for _, key, _, _, _ in columns}
    for lineno, row in rows:
        if len(row) != len(names):
            raise InputError(f"{len(row)} cells where the header has {len(names)}",
                             file=fname, table=f"line {lineno}")
        labels.append(row[names.index(label_col)].strip() if label_col else f"line {lineno}")
        for j, key, _, _, _ in columns:
            raw_cols[key].append(row[j].strip())
    axes = []
    for j, key, kind, a, b in columns:
        cells = raw_cols[key]
        if kind.role == "switch":
            cache: dict[str, tuple] = {}
            values = []
            for (lineno, _), c in zip(rows, cells):
                if c not in cache:
                    cache[c] = _names(key, c, Where(fname, f"line {lineno}", names[j]),
                                      case.model)
                values.append(cache[c])
            texts = [" ".join(v) if v else "none" for v in values]
        else:
            try:
                x = np.array(cells, dtype=float)
            except ValueError:
                for (lineno, _), c in zip(rows, cells):
                    try:
                        float(c)
                    except ValueError:
                        raise InputError(f"cannot read {c!r} as a number", file=fname,
                                         table=f"line {lineno}", key=names[j]) from None
                raise  # pragma: no cover - one cell above must have failed
            si = a * x + b
            hi = case.model.throttle.max_pressure if key == "throttle_pressure" else kind.hi
            bad = ~np.isfinite(si)
            if kind.lo is not None:
                bad |= (si <= kind.lo) if kind.lo_open else (si < kind.lo)
            if hi is not None:
                bad |= si > hi
            if bad.any():
                i = int(np.argmax(bad))
                wl = Where(fname, f"line {rows[i][0]}", names[j])
                _check_range(kind, float(si[i]), cells[i], wl, hi)
                raise wl.error(f"{cells[i]!r} is not a usable value")
            # the extremes also pass the case reader's checks
            for i in (int(np.argmin(si)), int(np.argmax(si))):
                probe = f"{float(si[i])!r} {kind.unit}" if kind.unit != "-" else float(si[i])
                _validate(case, key, probe, Where(fname, f"line {rows[i][0]}", names[j]))
            values = [float(v) for v in si]
            texts = cells
        axes.append(Axis(key, kind, values, texts))
    assert all(len(ax.values) == n for ax in axes)
    return ProfileSource(fname, text, sha, axes, labels, lines)


# --------------------------------------------------------------------------- plan
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
    conditions : one per point
    labels : a short text per point
    series : series number of each point [-]
    series_labels : text of each series (the values of its fixed axes)
    axes : axis keys as given (sweep axes, then profile columns)
    continuation : the axis that varies inside a series (``"profile"`` for a
        profile's rows)
    inputs : per-point inputs for ``/inputs`` (name -> column)
    chunks : the units of work
    profile : the profile file, if any
    limit : set by :meth:`head` when only the first points are planned
    """

    case: Case
    kind: str
    backend: str
    conditions: list[Conditions]
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
            self, conditions=self.conditions[:n], labels=self.labels[:n], series=series,
            series_labels=self.series_labels[:int(series.max()) + 1], inputs=inputs,
            chunks=_chunks(series, chunk_size(n)), limit=n)


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


def _apply(cond: Conditions, key: str, value: float, model: Model) -> Conditions:
    """Set one scalar input (SI) on a copy of ``cond``."""
    if key == "throttle_flow":
        return dataclasses.replace(cond, throttle_flow=value, output=None)
    if key == "throttle_flow_fraction":
        return dataclasses.replace(cond, throttle_flow=value * model.throttle.flow, output=None)
    if key == "output":
        return dataclasses.replace(cond, output=value, throttle_flow=None)
    if key == "output_fraction":
        return dataclasses.replace(cond, output=value * model.generator.rating,
                                   throttle_flow=None)
    if key.startswith("extraction_flow."):
        name = key.split(".", 1)[1]
        controls = dict(cond.extraction_control)
        controls[name] = ("flow", float(value))
        return dataclasses.replace(cond, extraction_control=tuple(sorted(controls.items())))
    return dataclasses.replace(cond, **{key: value})


def _check_axes(case: Case, axes: list[Axis], where: Where) -> None:
    loads = [a.key for a in axes if a.kind.role == "load"]
    if len(loads) > 1:
        raise where.child(loads[1]).error(
            f"the load is set once: vary only one of {', '.join(loads)}")
    keys = [a.key for a in axes]
    dup = [k for k in keys if keys.count(k) > 1]
    if dup:
        raise where.child(dup[0]).error("varied both in [sweep] and in the profile")


def _effective_inputs(model: Model, conds: Sequence[Conditions]) -> dict[str, InputColumn]:
    """Resolved per-point inputs (design values where the case leaves them unset)."""
    n = len(conds)
    reheat = [p.outlet_temperature for p in model.paths if p.is_reheater]
    T_rh_design = reheat[0] if reheat and all(t == reheat[0] for t in reheat) else math.nan
    exh = [model.design_pressure[e] for e in model.exhaust_nodes]
    p_x_design = exh[0] if all(p == exh[0] for p in exh) else math.nan
    nan = math.nan

    def col(get):
        return np.fromiter((get(c) for c in conds), dtype=np.float64, count=n)

    def fmt_controls(c):
        parts = []
        for name, (ctl, v) in c.extraction_control:
            if ctl == "flow":
                parts.append(f"{name}: flow {v:.6g} kg/s")
            elif ctl == "fraction":
                parts.append(f"{name}: fraction {v:.6g}")
        return "; ".join(parts)

    return {
        "throttle_flow": InputColumn(
            col(lambda c: c.throttle_flow if c.throttle_flow is not None else nan), "kg/s",
            "throttle flow asked for (NaN when an output is demanded)"),
        "output": InputColumn(
            col(lambda c: c.output if c.output is not None else nan), "W",
            "generator output demanded (NaN when the throttle flow is given)"),
        "governing": InputColumn([c.governing for c in conds], "",
                                 "'sliding' or 'throttle' pressure governing"),
        "throttle_pressure": InputColumn(
            col(lambda c: c.throttle_pressure if c.throttle_pressure is not None else nan), "Pa",
            "held throttle pressure (throttle governing; NaN: sliding pressure, see "
            "/totals/throttle_pressure)"),
        "throttle_temperature": InputColumn(
            col(lambda c: c.throttle_temperature if c.throttle_temperature is not None
                else model.throttle.temperature), "K", "throttle steam temperature"),
        "reheat_temperature": InputColumn(
            col(lambda c: c.reheat_temperature if c.reheat_temperature is not None
                else T_rh_design), "K",
            "hot reheat temperature (NaN: no reheater, or each reheater at its design)"),
        "exhaust_pressure": InputColumn(
            col(lambda c: c.exhaust_pressure if c.exhaust_pressure is not None
                else p_x_design), "Pa", "exhaust (condenser or back) pressure"),
        "heaters_out_of_service": InputColumn(
            [" ".join(sorted(c.heaters_out)) for c in conds], "",
            "heaters out of service, separated by spaces"),
        "extractions_closed": InputColumn(
            [" ".join(name for name, (ctl, _) in c.extraction_control if ctl == "closed")
             for c in conds], "", "extractions closed, separated by spaces"),
        "extraction_setpoints": InputColumn(
            [fmt_controls(c) for c in conds], "",
            "extractions held at a set flow or fraction of throttle flow"),
    }


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
        for pref in _CONTINUATION:
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
    combos = list(itertools.product(*[range(len(a.values)) for a in series_axes]))
    n_run = len(profile.labels) if profile is not None else len(run_values)
    n_total = len(combos) * n_run
    if n_total > MAX_POINTS:
        raise InputError(f"this study has {n_total} points, more than the {MAX_POINTS} allowed",
                         file=case.file)
    cache: dict = {}
    conds: list[Conditions] = []
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
                cond_s = _apply(cond_s, a.key, a.values[k], model)
        series_label = ", ".join(parts)
        series_labels.append(series_label)
        start = len(conds)
        if profile is None:
            for item in run_values:
                c = cond_s
                label = series_label
                if item is not None:
                    c = _apply(cond_s, cont.key, item[0], model)
                    label = f"{cont.key}={item[1]}" + (f", {series_label}" if series_label else "")
                conds.append(dataclasses.replace(c, label=label))
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
                                c = _apply(c, a.key, a.values[k], model)
                for a in p_scalar:
                    c = _apply(c, a.key, a.values[r], model)
                label = profile.labels[r] + (f", {series_label}" if series_label else "")
                conds.append(dataclasses.replace(c, label=label))
                labels.append(label)
                for a, k in zip(series_axes, combo):
                    axis_cols[a.key].append(a.values[k])
                for a in profile.axes:
                    axis_cols[a.key].append(a.values[r])
        series[start:len(conds)] = s
    chunks = _chunks(series, chunk_size(n_total))
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
            np.tile(profile.lines, len(combos)).astype(np.int64), "-",
            "line of the point in the profile file")
        inputs["time"] = InputColumn(list(profile.labels) * len(combos), "",
                                     "label of the profile row (its time column)")
    kind = "sweep" if profile is None else ("profile+sweep" if sweep else "profile")
    return StudyPlan(case=case, kind=kind, backend=backend or case.backend, conditions=conds,
                     labels=labels, series=series, series_labels=series_labels,
                     axes=[a.key for a in all_axes], continuation=cont_key, inputs=inputs,
                     chunks=chunks, profile=profile)


# ----------------------------------------------------------------- result layout
@dataclass(frozen=True)
class Field:
    """One per-point result dataset.

    ``path`` below the file root; ``dtype`` a numpy dtype string (``"S400"``
    for fixed-length UTF-8 text); ``width`` the number of columns (``0``: a
    one-dimensional dataset); ``unit`` SI; ``fill`` the value before the point
    is solved.
    """

    path: str
    dtype: str
    width: int
    unit: str
    description: str
    fill: float | int | bytes = math.nan


# SI unit of each total, from its display unit in :mod:`simulator.report`
_SI_OF_DISPLAY = {"bar": "Pa", "degC": "K", "MW": "W", "kg/s": "kg/s", "%": "-",
                  "kg/kWh": "kg/J", "kJ/kWh": "J/J", "W": "W", "Btu/kWh": "J/J"}

_HEATER_FIELDS = (
    # (dataset name, HeaterState attribute, unit, meaningful when out of service, description)
    ("bleed", "bleed", "kg/s", True, "bleed steam flow"),
    ("shell_pressure", "shell_pressure", "Pa", False, "shell pressure"),
    ("saturation_temperature", "T_sat", "K", False, "saturation temperature in the shell"),
    ("feedwater_in_temperature", "T_in", "K", False, "feedwater inlet temperature"),
    ("feedwater_out_temperature", "T_out", "K", False, "feedwater outlet temperature"),
    ("drain_temperature", "T_drain", "K", False, "drain outlet temperature"),
    ("feedwater_in_enthalpy", "h_in", "J/kg", True, "feedwater inlet enthalpy"),
    ("feedwater_out_enthalpy", "h_out", "J/kg", True, "feedwater outlet enthalpy"),
    ("drain_enthalpy", "h_drain", "J/kg", False, "drain outlet enthalpy"),
    ("bleed_enthalpy", "h_bleed", "J/kg", False, "bleed steam enthalpy"),
    ("feedwater_flow", "m_water", "kg/s", True, "feedwater (or condensate) flow"),
    ("drain_flow", "drain_out", "kg/s", True, "drain flow leaving the heater"),
    ("duty", "duty", "W", True, "heat given to the feedwater"),
    ("steam_release", "steam_release", "W", True, "heat given up by bleed and drains"),
    ("ttd", "ttd", "K", False, "terminal temperature difference (NaN for a deaerator)"),
    ("dca", "dca", "K", False, "drain cooler approach (NaN for a deaerator)"),
)
_CLOSED_ONLY = ("ttd", "dca")


@dataclass
class ResultLayout:
    """Names and units of the per-point results of a model (fixed for a study).

    Built by :func:`result_layout`; picklable, so workers fill the same
    arrays the store writes.  ``valve`` is the throttle valve's (inlet,
    outlet) nodes; ``paths`` the reheaters and pipes as ``(name, inlet,
    outlet, kind)``; ``design_throttle_flow`` [kg/s] and ``generator_rating``
    [W] come from the model.
    """

    nodes: list[str]
    groups: list[str]
    group_inlet: list[str]
    group_outlet: list[str]
    extractions: list[str]
    extraction_nodes: list[str]
    heaters: list[str]
    heater_closed: list[bool]
    totals: list[str]
    totals_units: list[str]
    valve: tuple[str, str] = ("", "")
    paths: list[tuple[str, str, str, str]] = field(default_factory=list)
    design_throttle_flow: float = math.nan
    generator_rating: float = math.nan
    cautions: bool = False
    caution_codes: list[str] = field(default_factory=list)

    def fields(self) -> list[Field]:
        """Every per-point result dataset, in the order of the file."""
        n, g, e, h = len(self.nodes), len(self.groups), len(self.extractions), len(self.heaters)
        f = [
            Field("solver/status", "i1", 0, "",
                  "-1 not solved yet, 0 converged, 1 failed (cannot be solved), "
                  "2 internal error", -1),
            Field("solver/converged", "u1", 0, "", "1 when the point converged", 0),
            Field("solver/iterations", "i4", 0, "-", "Newton iterations (-1: not known)", -1),
            Field("solver/evaluations", "i4", 0, "-", "residual evaluations (-1: not known)",
                  -1),
            Field("solver/residual", "f8", 0, "-",
                  "largest normalised residual at the end (NaN: not known)"),
            Field("solver/error", "S32", 0, "",
                  "class of the error of a failed point (ConvergenceError, InfeasibleError, "
                  "PropertyRangeError, ...)", b""),
            Field("solver/message", f"S{MESSAGE_BYTES}", 0, "",
                  "solver message, or why the point failed (UTF-8, cut to "
                  f"{MESSAGE_BYTES} bytes)", b""),
            Field("nodes/pressure", "f8", n, "Pa", "pressure at each node"),
            Field("nodes/temperature", "f8", n, "K", "temperature at each node"),
            Field("nodes/enthalpy", "f8", n, "J/kg", "specific enthalpy at each node"),
            Field("nodes/entropy", "f8", n, "J/(kg K)", "specific entropy at each node"),
            Field("nodes/quality", "f8", n, "-",
                  "steam quality at each node (1 dry or superheated; moisture = 1 - quality)"),
            Field("stage_groups/flow", "f8", g, "kg/s", "steam flow through the group"),
            Field("stage_groups/efficiency", "f8", g, "-", "effective isentropic efficiency"),
            Field("stage_groups/isentropic_drop", "f8", g, "J/kg", "isentropic enthalpy drop"),
            Field("stage_groups/power", "f8", g, "W", "power of the group"),
            Field("stage_groups/annulus_velocity", "f8", g, "m/s",
                  "last-stage annulus velocity (0: group without exhaust)"),
            Field("stage_groups/exhaust_loss", "f8", g, "J/kg",
                  "exhaust loss (0: group without exhaust)"),
            Field("stage_groups/outlet_moisture", "f8", g, "-", "moisture at the outlet"),
            Field("extractions/flow", "f8", e, "kg/s", "bleed flow"),
            Field("extractions/pressure", "f8", e, "Pa", "pressure at the bleed point"),
            Field("extractions/enthalpy", "f8", e, "J/kg", "enthalpy of the bleed steam"),
            Field("extractions/control", f"S{CONTROL_BYTES}", e, "",
                  "how the bleed flow is set: heater, closed, flow or fraction", b""),
            Field("heaters/in_service", "u1", h, "", "1 in service, 0 out of service", 0),
        ]
        for name, _attr, unit, _oos, desc in _HEATER_FIELDS:
            f.append(Field(f"heaters/{name}", "f8", h, unit,
                           desc + ("" if _oos else " (NaN when out of service)")))
        for name, unit in zip(self.totals, self.totals_units):
            f.append(Field(f"totals/{name}", "f8", 0, unit, _TOTAL_TEXT.get(name, name)))
        if self.cautions:
            f += [
                Field("cautions/count", "i2", 0, "-",
                      "number of operating-limit cautions (-1: not checked)", -1),
                Field("cautions/codes", f"S{CODES_BYTES}", 0, "",
                      "caution codes, separated by spaces", b""),
                Field("cautions/flags", "u1", len(self.caution_codes), "",
                      "1 where the caution of /cautions/names fired", 0),
                Field("cautions/messages", f"S{CAUTION_BYTES}", 0, "",
                      "caution messages, one a line (UTF-8, cut to "
                      f"{CAUTION_BYTES} bytes)", b""),
            ]
        return f

    def empty(self, k: int) -> dict[str, np.ndarray]:
        """Arrays for ``k`` points filled with the 'not solved' values."""
        out = {}
        for f in self.fields():
            shape = (k, f.width) if f.width else (k,)
            out[f.path] = np.full(shape, f.fill, dtype=f.dtype)
        return out

    def fill(self, arrays: dict[str, np.ndarray], i: int, r: PointResult) -> None:
        """Copy point result ``r`` into row ``i`` of ``arrays``."""
        arrays["solver/status"][i] = STATUS["converged"]
        arrays["solver/converged"][i] = 1 if r.converged else 0
        arrays["solver/iterations"][i] = r.iterations
        arrays["solver/evaluations"][i] = r.evaluations
        arrays["solver/residual"][i] = r.residual
        arrays["solver/message"][i] = _cut(r.message, MESSAGE_BYTES)
        if r.node_names == self.nodes:
            arrays["nodes/pressure"][i] = r.node_p
            arrays["nodes/temperature"][i] = r.node_T
            arrays["nodes/enthalpy"][i] = r.node_h
            arrays["nodes/entropy"][i] = r.node_s
            arrays["nodes/quality"][i] = r.node_x
        else:
            idx = [self.nodes.index(n) for n in r.node_names]
            arrays["nodes/pressure"][i, idx] = r.node_p
            arrays["nodes/temperature"][i, idx] = r.node_T
            arrays["nodes/enthalpy"][i, idx] = r.node_h
            arrays["nodes/entropy"][i, idx] = r.node_s
            arrays["nodes/quality"][i, idx] = r.node_x
        gi = (slice(None) if r.group_names == self.groups
              else [self.groups.index(n) for n in r.group_names])
        arrays["stage_groups/flow"][i, gi] = r.group_flow
        arrays["stage_groups/efficiency"][i, gi] = r.group_eta
        arrays["stage_groups/isentropic_drop"][i, gi] = r.group_dh_s
        arrays["stage_groups/power"][i, gi] = r.group_power
        arrays["stage_groups/annulus_velocity"][i, gi] = r.group_velocity
        arrays["stage_groups/exhaust_loss"][i, gi] = r.group_exhaust_loss
        arrays["stage_groups/outlet_moisture"][i, gi] = r.group_moisture_out
        ei = (slice(None) if r.extraction_names == self.extractions
              else [self.extractions.index(n) for n in r.extraction_names])
        arrays["extractions/flow"][i, ei] = r.extraction_flow
        arrays["extractions/pressure"][i, ei] = r.extraction_p
        arrays["extractions/enthalpy"][i, ei] = r.extraction_h
        arrays["extractions/control"][i, ei] = [c.encode()[:CONTROL_BYTES]
                                                for c in r.extraction_control]
        for hs in r.heaters:
            j = self.heaters.index(hs.name)
            arrays["heaters/in_service"][i, j] = 1 if hs.in_service else 0
            closed = self.heater_closed[j]
            for name, attr, _unit, oos, _d in _HEATER_FIELDS:
                if (hs.in_service or oos) and (closed or name not in _CLOSED_ONLY):
                    arrays[f"heaters/{name}"][i, j] = getattr(hs, attr)
        for name in self.totals:
            v = r.totals.get(name)
            if v is not None:
                arrays[f"totals/{name}"][i] = v

    def fail(self, arrays: dict[str, np.ndarray], i: int, exc: BaseException,
             internal: bool = False) -> None:
        """Record in row ``i`` that the point could not be solved."""
        arrays["solver/status"][i] = STATUS["internal error" if internal else "failed"]
        arrays["solver/converged"][i] = 0
        if isinstance(exc, ConvergenceError):
            arrays["solver/iterations"][i] = exc.iterations
            arrays["solver/residual"][i] = exc.residual
        arrays["solver/error"][i] = type(exc).__name__.encode()[:32]
        text = str(exc) if not internal else (
            f"internal error ({type(exc).__name__}: {exc}); please report it as a bug")
        arrays["solver/message"][i] = _cut(text, MESSAGE_BYTES)
        if self.cautions:
            arrays["cautions/count"][i] = 0


_TOTAL_TEXT = {
    "throttle_flow": "throttle steam flow",
    "throttle_pressure": "throttle pressure",
    "throttle_temperature": "throttle temperature",
    "valve_pressure_drop": "pressure drop across the throttle valves",
    "shaft_power": "shaft power of all stage groups",
    "generator_output": "generator output",
    "generator_and_mechanical_losses": "generator and mechanical losses",
    "steam_rate": "throttle flow over generator output",
    "exhaust_loss_power": "exhaust loss",
    "exhaust_moisture": "largest exhaust moisture",
    "exhaust_flow": "steam flow to the exhaust",
    "reheat_heat": "heat added in the reheater",
    "final_feedwater_temperature": "final feedwater temperature",
    "heat_added": "heat added in the boiler and reheater",
    "heat_rate": "heat added over generator output (J/J; x 3600 = kJ/kWh)",
    "pump_power": "power of all pumps",
    "makeup_flow": "makeup water flow",
    "condenser_duty": "heat rejected in the condenser",
    "heater_heat_loss": "heat lost by the heaters",
    "process_steam_energy": "energy leaving with process steam, less makeup",
    "energy_imbalance": "cycle energy balance error (a check; near 0)",
}


def _cut(text: str, n: int) -> bytes:
    """``text`` as UTF-8, cut to at most ``n`` bytes on a character boundary."""
    b = text.encode("utf-8")
    if len(b) <= n:
        return b
    return b[:n - 3].decode("utf-8", "ignore").encode("utf-8") + b"..."


def _cautions_available() -> tuple[bool, list[str]]:
    """Whether the operating-limit checks are installed, and their codes."""
    try:
        from ..cautions.checks import check_point  # noqa: F401
    except ImportError:
        return False, []
    try:
        from ..cautions.checks import CAUTION_CODES
    except ImportError:
        return True, []
    return True, [str(c) for c in CAUTION_CODES]


def result_layout(model: Model, backend: str = "seuif97") -> ResultLayout:
    """The result layout of ``model``: node, group, bleed, heater and total names.

    The list of totals is taken from a solve of the design point (cheap: it
    converges at once), so that every total the solver reports is stored.
    """
    try:
        r = solve_point(model, Conditions(throttle_flow=model.throttle.flow), backend)
        totals = list(r.totals)
    except SolveError:  # pragma: no cover - a calibrated model solves its design point
        from ..present.tables import DISPLAY_UNITS

        totals = [k for k in DISPLAY_UNITS["totals"] if k != "heat_rate_btu"]
    from ..present.tables import DISPLAY_UNITS

    units = [_SI_OF_DISPLAY.get(DISPLAY_UNITS["totals"].get(k, ""), "") for k in totals]
    ex = list(model.extractions.values())
    cautions, codes = _cautions_available()
    return ResultLayout(
        nodes=list(model.order), groups=[g.name for g in model.groups],
        group_inlet=[g.inlet for g in model.groups], group_outlet=[g.outlet for g in model.groups],
        extractions=[e.name for e in ex], extraction_nodes=[e.node for e in ex],
        heaters=list(model.heaters),
        heater_closed=[h.kind == "closed" for h in model.heaters.values()],
        totals=totals, totals_units=units,
        valve=(model.valve.inlet, model.valve.outlet),
        paths=[(p.name, p.inlet, p.outlet, "reheater" if p.is_reheater else "pipe")
               for p in model.paths],
        design_throttle_flow=model.throttle.flow, generator_rating=model.generator.rating,
        cautions=cautions, caution_codes=codes)


# --------------------------------------------------------------------- solving
@dataclass
class SolveSpec:
    """What a worker needs to solve chunks: the model (as text), the layout, and
    whether points beyond the machine's limits are refused (``check_limits``,
    see :func:`~simulator.solve.solve_point`)."""

    model_text: str
    model_file: str
    model_sha256: str
    backend: str
    layout: ResultLayout
    check_limits: bool = True


@dataclass
class ChunkResult:
    """The stored arrays of one solved chunk (rows ``start:stop``)."""

    index: int
    start: int
    stop: int
    arrays: dict[str, np.ndarray]
    seconds: float = 0.0  # [s] time the worker spent

    @property
    def status(self) -> np.ndarray:
        return self.arrays["solver/status"]


_MODELS: dict[tuple[str, str], Model] = {}


def _worker_model(spec: SolveSpec) -> Model:
    """The model of ``spec``, built once per process (or inherited at fork)."""
    key = (spec.model_sha256, spec.model_file)
    m = _MODELS.get(key)
    if m is None:
        m = build_model(tomllib.loads(spec.model_text), text=spec.model_text,
                        file=spec.model_file)
        _MODELS[key] = m
    return m


def solve_order(conditions: Sequence[Conditions]) -> list[int]:
    """Order in which to solve the points of a chunk: by increasing load.

    The load is the demanded output, else the throttle flow.  A sweep's chunk
    is already in this order (the stable sort keeps it, and keeps the order of
    points of equal load); a profile's chunk, in time order, is reordered so
    that each point starts from the nearest load: on the invented hourly
    profile of the demo unit this cuts the residual evaluations per point by
    about a third against time order (measured, 200-point chunks).
    """
    def load(k: int) -> float:
        c = conditions[k]
        v = c.output if c.output is not None else c.throttle_flow
        return math.inf if v is None else v

    return sorted(range(len(conditions)), key=load)


def solve_chunk(spec: SolveSpec, chunk: Chunk, conditions: Sequence[Conditions]) -> ChunkResult:
    """Solve the points of a chunk, each starting from the one solved before.

    The points are solved in :func:`solve_order` and stored in plan order.  A
    point that fails is recorded (status 1, or 2 for an unexpected exception)
    and the next starts from the last point that converged.
    """
    t0 = time.perf_counter()
    model = _worker_model(spec)
    steam = get_backend(spec.backend)
    layout = spec.layout
    arrays = layout.empty(len(conditions))
    check = None
    if layout.cautions:
        try:
            from ..cautions.checks import check_point as check
        except ImportError:  # the worker lacks the module: leave count at -1
            check = None
    prev: PointResult | None = None
    for i in solve_order(conditions):
        cond = conditions[i]
        try:
            r = solve_point(model, cond, steam,
                            guess=prev.x if prev is not None else None,
                            jacobian=prev.jacobian if prev is not None else None,
                            check_limits=spec.check_limits)
        except SolveError as exc:
            layout.fail(arrays, i, exc)
            continue
        except Exception as exc:  # noqa: BLE001 - recorded per point; the study goes on
            layout.fail(arrays, i, exc, internal=True)
            continue
        layout.fill(arrays, i, r)
        if check is not None:
            _record_cautions(arrays, i, check, model, cond, r, layout.caution_codes)
        prev = r
    return ChunkResult(chunk.index, chunk.start, chunk.stop, arrays,
                       time.perf_counter() - t0)


def _record_cautions(arrays, i, check, model, cond, r, codes_known=()) -> None:
    try:
        items = list(check(model, cond, r))
    except Exception as exc:  # noqa: BLE001 - a failing check must not lose the point
        arrays["cautions/count"][i] = -1
        arrays["cautions/messages"][i] = _cut(f"caution check failed: {type(exc).__name__}: "
                                              f"{exc}", CAUTION_BYTES)
        return
    arrays["cautions/count"][i] = len(items)
    codes = [str(getattr(c, "code", "")) for c in items]
    arrays["cautions/codes"][i] = _cut(" ".join(codes), CODES_BYTES)
    for j, name in enumerate(codes_known):
        if name in codes:
            arrays["cautions/flags"][i, j] = 1
    arrays["cautions/messages"][i] = _cut(
        "\n".join(str(getattr(c, "message", c)) for c in items), CAUTION_BYTES)


def _init_worker(spec: SolveSpec) -> None:
    """Process-pool initializer.

    The parent handles Ctrl-C and SIGTERM; a worker ends at once when its
    parent dies (a study killed with SIGKILL), rather than waiting forever on
    a queue its siblings keep open; the model is loaded once.
    """
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    signal.signal(signal.SIGTERM, signal.SIG_DFL)
    threading.Thread(target=_exit_with_parent, args=(os.getppid(),), daemon=True,
                     name="partload-parent-watch").start()
    _worker_model(spec)


def _exit_with_parent(ppid: int, interval: float = 0.5) -> None:
    """End this worker process when its parent ``ppid`` is gone (checked every
    ``interval`` seconds [s]): an orphan is adopted by another process."""
    while True:
        time.sleep(interval)
        if os.getppid() != ppid:
            os._exit(1)


def _solve_chunk_task(spec: SolveSpec, chunk: Chunk, conditions) -> ChunkResult:
    return solve_chunk(spec, chunk, conditions)


# -------------------------------------------------------------------- progress
class Progress:
    """Progress of a study: a tqdm bar on a terminal, plain lines otherwise.

    Parameters
    ----------
    total : points in the study [-]
    initial : points already done (a resumed study) [-]
    stream : where to write (default ``sys.stderr``)
    interval : seconds between plain lines [s]
    enabled : ``False`` for silence
    """

    def __init__(self, total: int, initial: int = 0, stream=None, interval: float = 10.0,
                 enabled: bool = True, desc: str = "study"):
        self.total = total
        self.done = initial
        self.initial = initial
        self.failed = 0
        self.stream = stream if stream is not None else sys.stderr
        self.interval = interval
        self.enabled = enabled
        self.desc = desc
        self.t0 = time.monotonic()
        self.t_last = self.t0
        self.bar = None
        self.tty = enabled and getattr(self.stream, "isatty", lambda: False)()

    def _start_bar(self) -> None:
        # made at the first update, after worker processes are forked: tqdm starts a
        # monitor thread, and forking a process with threads is best avoided
        from tqdm import tqdm

        self.bar = tqdm(total=self.total, initial=self.done, unit="pt", desc=self.desc,
                        file=self.stream, dynamic_ncols=True, smoothing=0.1)

    def update(self, points: int, failed: int = 0) -> None:
        if not self.enabled:
            self.done += points
            self.failed += failed
            return
        if self.tty and self.bar is None:
            self._start_bar()
        self.done += points
        self.failed += failed
        if self.bar is not None:
            self.bar.update(points)
            if self.failed:
                self.bar.set_postfix(failed=self.failed, refresh=False)
            return
        now = time.monotonic()
        if now - self.t_last >= self.interval and self.done < self.total:
            self.t_last = now
            self._line(now)

    def _line(self, now: float) -> None:
        new = self.done - self.initial
        rate = new / max(now - self.t0, 1e-9)
        left = (self.total - self.done) / rate if rate > 0 else math.inf
        eta = "" if not math.isfinite(left) else f", about {_duration(left)} left"
        failed = f", {self.failed} failed" if self.failed else ""
        print(f"{self.desc}: {self.done}/{self.total} points "
              f"({100.0 * self.done / max(self.total, 1):.0f} %){failed}, "
              f"{rate:.0f} points/s{eta}", file=self.stream, flush=True)

    def close(self) -> None:
        if self.bar is not None:
            self.bar.close()
            self.bar = None


def _duration(s: float) -> str:
    s = int(round(s))
    if s < 60:
        return f"{s} s"
    if s < 3600:
        return f"{s // 60} min {s % 60:02d} s"
    return f"{s // 3600} h {(s % 3600) // 60:02d} min"


# --------------------------------------------------------------------- running
@dataclass
class StudySummary:
    """What a run of :func:`run_study` did.

    Counts are points [-]; ``failures`` lists ``(index, label, message)`` of
    the first points that failed in this run.
    """

    n_points: int
    n_skipped: int = 0
    n_solved: int = 0
    n_converged: int = 0
    n_failed: int = 0
    n_internal: int = 0
    n_cautions: int = 0
    seconds: float = 0.0
    workers: int = 1
    where: str = "this process"
    interrupted: bool = False
    failures: list = field(default_factory=list)

    def add(self, res: ChunkResult, labels: Sequence[str]) -> None:
        st = res.status
        self.n_solved += len(st)
        self.n_converged += int(np.sum(st == STATUS["converged"]))
        self.n_failed += int(np.sum(st == STATUS["failed"]))
        self.n_internal += int(np.sum(st == STATUS["internal error"]))
        if "cautions/count" in res.arrays:
            self.n_cautions += int(np.sum(res.arrays["cautions/count"] > 0))
        for k in np.flatnonzero(st > 0):
            if len(self.failures) < 20:
                msg = res.arrays["solver/message"][k].decode("utf-8", "replace")
                self.failures.append((res.start + int(k), labels[res.start + int(k)], msg))


def _default_context():
    """Fork on Linux (workers inherit the loaded model: no start-up cost), spawn
    elsewhere (workers build the model from its text once)."""
    if sys.platform.startswith("linux"):
        return multiprocessing.get_context("fork")
    return multiprocessing.get_context("spawn")


def run_study(plan: StudyPlan, on_result: Callable[[ChunkResult], None], *,
              workers: int = 1, scheduler: str | None = None,
              skip: frozenset[int] | set[int] = frozenset(),
              layout: ResultLayout | None = None,
              progress: Progress | None = None,
              check_limits: bool = True) -> StudySummary:
    """Solve every chunk of ``plan`` not in ``skip``; hand each to ``on_result``.

    Parameters
    ----------
    plan : the study
    on_result : called in this process with each finished chunk, in the order
        chunks finish (writes to the result file)
    workers : local worker processes; 1 solves in this process [-]
    scheduler : address of a Dask scheduler (``"tcp://host:8786"``); when
        given, ``workers`` is ignored and the cluster's workers are used
    skip : chunk indices already done (a resumed study)
    layout : result layout (default: :func:`result_layout` of the model)
    progress : progress display (default: none)
    check_limits : ``False`` solves what-ifs beyond valves wide open too (the
        operating-limit checks then mark them ``valves_wide_open``) instead of
        recording them as failed

    Returns
    -------
    StudySummary
        With ``interrupted`` set when Ctrl-C or SIGTERM stopped the run;
        every chunk finished before the stop has been handed to ``on_result``.
    """
    model = plan.case.model
    layout = layout or result_layout(model, plan.backend)
    spec = SolveSpec(model.text, model.file, model.sha256, plan.backend, layout, check_limits)
    _MODELS[(model.sha256, model.file)] = model  # inherited by forked workers
    todo = [c for c in plan.chunks if c.index not in skip]
    summary = StudySummary(plan.n_points, n_skipped=sum(c.size for c in plan.chunks
                                                          if c.index in skip))
    t0 = time.perf_counter()

    def handle(res: ChunkResult) -> None:
        on_result(res)
        summary.add(res, plan.labels)
        if progress is not None:
            progress.update(res.stop - res.start, int(np.sum(res.status > 0)))

    try:
        if scheduler:
            summary.where = f"Dask scheduler {scheduler}"
            summary.workers = _run_dask(plan, spec, todo, scheduler, handle)
        elif workers <= 1 or len(todo) <= 1:
            summary.workers = 1
            for c in todo:
                handle(solve_chunk(spec, c, plan.conditions[c.start:c.stop]))
        else:
            n = min(workers, len(todo))
            summary.workers = n
            summary.where = f"{n} local processes"
            _run_pool(plan, spec, todo, n, handle)
    except KeyboardInterrupt:
        summary.interrupted = True
    summary.seconds = time.perf_counter() - t0
    return summary


def _chunk_of(fut) -> ChunkResult:
    """The result of a chunk's future; a worker that died becomes a clear error."""
    try:
        return fut.result()
    except (KeyboardInterrupt, SolveError):
        raise
    except Exception as exc:  # noqa: BLE001 - a crashed or lost worker process
        raise SolveError(f"a worker stopped without finishing its chunk ({type(exc).__name__}: "
                         f"{exc}); the points finished so far are stored, continue with "
                         f"--resume") from exc


def _run_pool(plan: StudyPlan, spec: SolveSpec, todo: list[Chunk], n: int, handle) -> None:
    from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait

    ex = ProcessPoolExecutor(max_workers=n, mp_context=_default_context(),
                             initializer=_init_worker, initargs=(spec,))
    pending = set()
    handled = set()
    try:
        for c in todo:
            pending.add(ex.submit(_solve_chunk_task, spec, c, plan.conditions[c.start:c.stop]))
        while pending:
            done, pending = wait(pending, return_when=FIRST_COMPLETED)
            for fut in done:
                handled.add(fut)
                handle(_chunk_of(fut))
    except KeyboardInterrupt:
        # keep what is finished: let running chunks end, drop the queued ones
        ex.shutdown(wait=True, cancel_futures=True)
        for fut in pending:
            if fut not in handled and fut.done() and not fut.cancelled() \
                    and fut.exception() is None:
                handle(fut.result())
        raise
    finally:
        ex.shutdown(wait=True, cancel_futures=True)


def _software_version() -> str:
    from .. import __version__

    return __version__


def _run_dask(plan: StudyPlan, spec: SolveSpec, todo: list[Chunk], address: str,
              handle) -> int:
    try:
        from distributed import Client, as_completed
    except ImportError:
        raise InputError("a Dask scheduler needs the 'distributed' package; install it with "
                         "pip install 'partload[cluster]'", key="--scheduler") from None
    try:
        client = Client(address, timeout=20, set_as_default=False)
    except (OSError, TimeoutError) as exc:
        raise InputError(f"cannot reach the Dask scheduler at {address!r}: {exc}",
                         key="--scheduler") from None
    futures = []
    try:
        from .. import __version__

        versions = client.run(_software_version)
        other = {w: v for w, v in versions.items() if v != __version__}
        if other:
            w, v = next(iter(other.items()))
            raise InputError(f"Dask worker {w} runs partload {v}, this is {__version__}; "
                             f"install the same version on every worker", key="--scheduler")
        n_workers = len(versions) or 1
        spec_f = client.scatter(spec, broadcast=True, hash=False)
        for c in todo:
            futures.append(client.submit(_solve_chunk_task, spec_f, c,
                                         plan.conditions[c.start:c.stop], pure=False,
                                         key=f"partload-chunk-{c.index}-{os.getpid()}-"
                                             f"{time.time_ns()}"))
        for fut in as_completed(futures, loop=client.loop):
            handle(_chunk_of(fut))
        return n_workers
    except KeyboardInterrupt:
        client.cancel(futures)
        raise
    finally:
        client.close()
