"""Solving chunks: what a worker needs (:class:`SolveSpec`), the solved arrays
of a chunk (:class:`ChunkResult`), :func:`solve_chunk` with continuation from
point to point, and the set-up of worker processes.
"""

from __future__ import annotations

import dataclasses
import math
import numbers
import os
import signal
import threading
import time
import tomllib
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from ..errors import ConvergenceError, SolveError
from ..plant.case import Conditions
from ..plant.fitted import apply_fitted
from ..plant.model import Model, build_model
from ..solve.point import PointResult, one_blas_thread, solve_point
from ..steam.if97 import get_backend
from ..store.layout import CAUTION_BYTES, CODES_BYTES, ResultLayout, cut_text
from .plan import Chunk
from .points import PointConditions

__all__ = [
    "ChunkResult",
    "Continuation",
    "SolutionFit",
    "SolveSpec",
    "init_worker",
    "keep_model",
    "solve_chunk",
    "solve_chunk_task",
    "solve_order",
    "worker_model",
]


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
    fitted: tuple = ()  # tunables set after calibration (a fitted model, Model.fitted)


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


def worker_model(spec: SolveSpec) -> Model:
    """The model of ``spec``, built once per process (or inherited at fork)."""
    key = (spec.model_sha256, spec.model_file)
    m = _MODELS.get(key)
    if m is None:
        m = build_model(tomllib.loads(spec.model_text), text=spec.model_text,
                        file=spec.model_file)
        if spec.fitted:  # a fitted model: its design model's text, then the fitted values
            m = apply_fitted(m, spec.fitted, spec.model_file)
        _MODELS[key] = m
    return m


def keep_model(model: Model) -> None:
    """Keep ``model`` as the model of its text in this process, so that workers
    forked from it find it built (see :func:`worker_model`)."""
    _MODELS[(model.sha256, model.file)] = model


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


def _boundary(cond: Conditions) -> tuple:
    """Everything of ``cond`` but the load: points that share it lie on one load line."""
    return (cond.valve_mode, cond.pressure_mode, cond.output is None, cond.throttle_pressure,
            cond.throttle_temperature, cond.reheat_temperature, cond.exhaust_pressure,
            cond.extraction_control, cond.heaters_out, cond.held_pressures, cond.valves_open,
            cond.minimum_throttle_pressure, cond.settings)


def _family(cond: Conditions) -> tuple:
    """Everything of ``cond`` but its numbers (load, pressures, temperatures, the
    values of numeric settings): points that share it have the same unknowns, so
    that their solutions can be fitted as a function of those numbers
    (:class:`Continuation`)."""
    return (cond.valve_mode, cond.pressure_mode, cond.output is None,
            cond.throttle_flow is None, cond.extraction_control, cond.heaters_out,
            cond.held_pressures,
            tuple(s[:3] if _is_number(s[3]) else s for s in cond.settings))


def _is_number(value) -> bool:
    """A setting's value that a family varies (a quantity), not a choice or flag."""
    return isinstance(value, numbers.Real) and not isinstance(value, bool | np.bool_)


def _numbers(model: Model, cond: Conditions) -> np.ndarray:
    """The numbers of ``cond`` that a family varies: load, pressures and
    temperatures each over its design value [-] (a number the case leaves unset
    is its design value, 1), then the components' numeric settings (a wet-bulb
    temperature, say) as given [SI]."""
    th = model.throttle
    load = (cond.output / model.generator.rating if cond.output is not None
            else (cond.throttle_flow or 0.0) / th.flow)
    exhaust = model.design_pressure[model.exhaust_nodes[0]]
    return np.array([
        load,
        1.0 if cond.exhaust_pressure is None else cond.exhaust_pressure / exhaust,
        1.0 if cond.throttle_pressure is None else cond.throttle_pressure / th.pressure,
        1.0 if cond.throttle_temperature is None else cond.throttle_temperature / th.temperature,
        1.0 if cond.reheat_temperature is None else cond.reheat_temperature / th.temperature,
        *(float(s[3]) for s in cond.settings if _is_number(s[3])),
    ])


class SolutionFit:
    """The solutions of a family of points as a function of their numbers.

    Keeps the last :attr:`KEEP` solved points of one family (:func:`_family`)
    and predicts the unknowns of a new point by a least-squares fit through
    the points nearest it: a plane through the :attr:`NEAR` nearest, or a
    quadratic through :attr:`NEAR_QUADRATIC` of them when that many are kept.
    In an hourly profile, where load and condenser pressure change together,
    this starts Newton about a hundred times closer than the last solution
    scaled by the ellipse law (measured on the demo profile).
    """

    KEEP = 64
    NEAR = 3
    NEAR_QUADRATIC = 8

    def __init__(self):
        self.family = None
        self.valves = None
        # the kept points, oldest first, as the first `_n` rows of two arrays that
        # are allocated once per family (no arrays built anew at every point)
        self._T = np.empty((0, 0))
        self._X = np.empty((0, 0))
        self._n = 0
        self._varying = np.zeros(0, dtype=bool)
        self._cols = np.zeros(0, dtype=np.intp)  # [-] indices of the varying numbers
        self._scale = np.zeros(0)  # 1 / spread of each varying number over the kept points

    @property
    def numbers(self) -> np.ndarray:
        """The numbers of the kept points, oldest first [-]."""
        return self._T[:self._n]

    @property
    def solutions(self) -> np.ndarray:
        """The unknowns of the kept points, oldest first."""
        return self._X[:self._n]

    def add(self, family: tuple, numbers: np.ndarray, r: PointResult) -> None:
        """Keep the solved point ``r`` of ``family`` with its ``numbers`` [-]."""
        if r.unknowns is None:
            return
        x = np.asarray(r.unknowns, dtype=float)
        if (family != self.family or r.wide_open_valves != self.valves
                or (self._n and x.shape[0] != self._X.shape[1])):
            self.family, self.valves = family, r.wide_open_valves
            self._T = np.empty((self.KEEP, len(numbers)))
            self._X = np.empty((self.KEEP, x.shape[0]))
            self._n = 0
        if self._n == self.KEEP:  # forget the oldest
            self._T[:-1] = self._T[1:]
            self._X[:-1] = self._X[1:]
            self._n -= 1
        self._T[self._n] = numbers
        self._X[self._n] = x
        self._n += 1
        # numbers that differ between the kept points (an exact test, as np.ptp > 0)
        T = self._T[:self._n]
        self._varying = np.any(T != T[0], axis=0)
        self._cols = np.flatnonzero(self._varying)
        V = T[:, self._cols]
        self._scale = 1.0 / (V.max(axis=0) - V.min(axis=0))

    def predict(self, family: tuple, numbers: np.ndarray) -> np.ndarray | None:
        """Predicted unknowns of a point of ``family`` at ``numbers`` [-], or ``None``
        when fewer than :attr:`NEAR` + 1 points of the family are kept."""
        n = self._n
        if family != self.family or n <= self.NEAR:
            return None
        X = self._X[:n]
        cols = self._cols
        d = self._T[:n, cols] - numbers[cols]
        # nearest in units of each number's spread over the kept points: a load
        # fraction and a wet-bulb temperature in kelvin weigh alike
        dd = d * self._scale
        dist = np.einsum("ij,ij->i", dd, dd)
        order = np.argsort(dist, kind="stable")
        if n >= self.NEAR_QUADRATIC and d.shape[1] <= 2:
            x = _least_squares(d, X, order[:self.NEAR_QUADRATIC], quadratic=True)
            if x is not None:
                return x
            # the nearest points do not fix a quadratic (two values of a number
            # among them, say): a plane through fewer
        return _least_squares(d, X, order[:self.NEAR + 1], quadratic=False)


def _least_squares(d: np.ndarray, X: np.ndarray, near: np.ndarray, quadratic: bool):
    """The value at the origin of a plane (or a quadratic) fitted by least squares
    through the points ``near`` at offsets ``d`` with unknowns ``X``; ``None``
    when they do not fix it (rank) or it is not finite."""
    t = d[near]
    k = t.shape[1]
    # the columns of A written in place: 1, the differences, and for the quadratic
    # their products (a <= b), as column_stack of the same numbers gave them
    A = np.empty((len(near), 1 + k + (k * (k + 1) // 2 if quadratic else 0)))
    A[:, 0] = 1.0
    A[:, 1:1 + k] = t
    if quadratic:
        j = 1 + k
        for a in range(k):
            for b in range(a, k):
                np.multiply(t[:, a], t[:, b], out=A[:, j])
                j += 1
    C, _res, rank, _sv = np.linalg.lstsq(A, X[near], rcond=None)
    if rank < A.shape[1]:
        return None
    x = C[0]
    return x if np.all(np.isfinite(x)) else None


# [-] a point started from the fit that took this many residual evaluations hands
# the next a fresh Jacobian: on the demo hourly profile the Broyden-updated one
# handed along drifts from the exact one, and renewing it after such points cut
# the instructions a point by 4 % (callgrind); along a sweep's load line,
# where the steps are larger, renewing cost more than it saved
RENEW_JACOBIAN = 6


class Continuation:
    """Solves points one after another, each starting from the last one solved.

    Starts are tried in turn, and the first that gives an answer wins.  When
    this point differs from the last one in more than the load (a profile:
    load and condenser pressure change together), the first start is the fit
    of the family's solutions (:class:`SolutionFit`) with the last point's
    Jacobian; a start that is not physical or fails moves on to the three
    starts below:

    1. the last solution scaled to this load by the ellipse law, plus the
       secant (and quadratic) predictor along the load
       (``solve_point(..., neighbour=last)``).  The predictor is offered only
       when this point and the last two share everything but the load
       (:func:`_boundary`): in a profile the condenser pressure changes from
       hour to hour, and a slope taken over a tiny load step with another
       condenser pressure extrapolates to pressures no machine has.
       :func:`~simulator.solve.point.solve_point` itself drops a predicted
       start that is not physical;
    2. the last solution as it is, with its Jacobian;
    3. the design-scaled start (skipped when 2 failed to converge: it has
       then been tried already).

    Any :class:`~simulator.errors.SolveError` moves on to the next start, so a
    point fails only when the last start fails too (its error from start 2 is
    raised); every answer is a converged solution to the solver's tolerance.

    Parameters
    ----------
    model : calibrated model
    steam : property backend
    check_limits : refuse answers beyond valves wide open (see
        :func:`~simulator.solve.point.solve_point`) [-]
    """

    def __init__(self, model: Model, steam, check_limits: bool = True):
        self.model = model
        self.steam = steam
        self.check_limits = check_limits
        self.last: PointResult | None = None
        self.last_boundary: tuple | None = None
        self.slope_ok = False  # the last solution's slope is along the load alone
        self.fit = SolutionFit()
        self.fitted = True  # False: never start from the fit
        self.renew_jacobian = RENEW_JACOBIAN

    def solve(self, cond: Conditions) -> PointResult:
        """Solve ``cond`` from the last solution; remember the answer."""
        last = self.last
        boundary = _boundary(cond)
        self._family, self._numbers = _family(cond), _numbers(self.model, cond)
        kw = {"check_limits": self.check_limits}
        if last is None:
            r = solve_point(self.model, cond, self.steam, **kw)
            self._keep(r, boundary, False)
            return r
        same = boundary == self.last_boundary
        if self.fitted and not (same and self.slope_ok):
            start = self.fit.predict(self._family, self._numbers)
            if start is not None and last.wide_open_valves == self.fit.valves:
                try:
                    r = solve_point(self.model, cond, self.steam, guess=start,
                                    jacobian=last.jacobian, neighbour=last,
                                    renew_jacobian=self.renew_jacobian, **kw)
                except SolveError:
                    pass
                else:
                    self._keep(r, boundary, same)
                    return r
        neighbour = last if (same and self.slope_ok) else dataclasses.replace(
            last, unknowns_slope=None, unknowns_curvature=None)
        try:
            r = solve_point(self.model, cond, self.steam, neighbour=neighbour, **kw)
        except SolveError:
            pass
        else:
            self._keep(r, boundary, same)
            return r
        try:
            r = solve_point(self.model, cond, self.steam, guess=last.unknowns,
                            jacobian=last.jacobian, **kw)
        except ConvergenceError:
            raise
        except SolveError as exc:
            try:
                r = solve_point(self.model, cond, self.steam, **kw)
            except SolveError:
                raise exc from None
        self._keep(r, boundary, False)
        return r

    def _keep(self, r: PointResult, boundary: tuple, slope_ok: bool) -> None:
        self.last, self.last_boundary, self.slope_ok = r, boundary, slope_ok
        self.fit.add(self._family, self._numbers, r)


# A test hook: seconds each chunk waits after solving, so that tests of signals and
# kills land mid-study however fast the machine solves (never set in use).
CHUNK_PAUSE = float(os.environ.get("PARTLOAD_TEST_CHUNK_PAUSE", "0") or 0)


def solve_chunk(spec: SolveSpec, chunk: Chunk, conditions: Sequence[Conditions]) -> ChunkResult:
    """Solve the points of a chunk, each starting from the one solved before.

    The points are solved in :func:`solve_order` and stored in plan order, with
    a :class:`Continuation`.  A point that fails is recorded (status 1, or 2
    for an unexpected exception) and the next starts from the last point that
    converged.
    """
    t0 = time.perf_counter()
    model = worker_model(spec)
    if isinstance(conditions, PointConditions):  # a plan's points as numbers
        conditions = list(conditions.with_model(model))
    steam = get_backend(spec.backend)
    layout = spec.layout
    arrays = layout.empty(len(conditions))
    check = None
    if layout.cautions:
        try:
            from ..cautions.checks import check_point as check
        except ImportError:  # the worker lacks the module: leave count at -1
            check = None
    chain = Continuation(model, steam, spec.check_limits)
    with one_blas_thread():  # once for the chunk, not at every point
        for i in solve_order(conditions):
            cond = conditions[i]
            try:
                r = chain.solve(cond)
            except SolveError as exc:
                layout.fail(arrays, i, exc)
                continue
            except Exception as exc:  # noqa: BLE001 - recorded per point; the study goes on
                layout.fail(arrays, i, exc, internal=True)
                continue
            layout.fill(arrays, i, r)
            if check is not None:
                _record_cautions(arrays, i, check, model, cond, r, layout.caution_codes)
    if CHUNK_PAUSE > 0.0:
        time.sleep(CHUNK_PAUSE)
    return ChunkResult(chunk.index, chunk.start, chunk.stop, _narrow_texts(arrays),
                       time.perf_counter() - t0)


def _narrow_texts(arrays: dict[str, np.ndarray]) -> dict[str, np.ndarray]:
    """``arrays`` with each fixed-length text array cut to its longest value [-].

    The values are the same (numpy drops trailing zero bytes, and the result
    file pads them back to its own length); a chunk's result, pickled to the
    study process, is a third smaller: most points leave the 1,024 bytes of
    their caution messages and the 256 of their solver message mostly empty.
    """
    for name, arr in arrays.items():
        if arr.dtype.kind == "S" and arr.size:
            width = max(1, int(np.strings.str_len(arr).max()))
            if width < arr.dtype.itemsize:
                arrays[name] = arr.astype(f"S{width}")
    return arrays


def _record_cautions(arrays, i, check, model, cond, r, codes_known=()) -> None:
    try:
        items = list(check(model, cond, r))
    except Exception as exc:  # noqa: BLE001 - a failing check must not lose the point
        arrays["cautions/count"][i] = -1
        arrays["cautions/messages"][i] = cut_text(f"caution check failed: {type(exc).__name__}: "
                                              f"{exc}", CAUTION_BYTES)
        return
    arrays["cautions/count"][i] = len(items)
    codes = [str(getattr(c, "code", "")) for c in items]
    arrays["cautions/codes"][i] = cut_text(" ".join(codes), CODES_BYTES)
    for j, name in enumerate(codes_known):
        if name in codes:
            arrays["cautions/flags"][i, j] = 1
    arrays["cautions/messages"][i] = cut_text(
        "\n".join(str(getattr(c, "message", c)) for c in items), CAUTION_BYTES)


def init_worker(spec: SolveSpec) -> None:
    """Process-pool initializer.

    The parent handles Ctrl-C and SIGTERM; a worker ends at once when its
    parent dies (a study killed with SIGKILL), rather than waiting forever on
    a queue its siblings keep open; the model is loaded once.
    """
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    signal.signal(signal.SIGTERM, signal.SIG_DFL)
    threading.Thread(target=_exit_with_parent, args=(os.getppid(),), daemon=True,
                     name="partload-parent-watch").start()
    worker_model(spec)


def _exit_with_parent(ppid: int, interval: float = 0.5) -> None:
    """End this worker process when its parent ``ppid`` is gone (checked every
    ``interval`` seconds [s]): an orphan is adopted by another process."""
    while True:
        time.sleep(interval)
        if os.getppid() != ppid:
            os._exit(1)


def solve_chunk_task(spec: SolveSpec, chunk: Chunk, conditions) -> ChunkResult:
    return solve_chunk(spec, chunk, conditions)
