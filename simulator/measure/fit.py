"""Reconciling measured points with the turbine model and fitting its tunables.

The model is the balance: a point's reconciled values are the model's values at
the operating inputs and constants that make the weighted sum of squared
corrections least (VDI 2048 Part 1, 2000, with the model's free inputs and
constants as the parameters of a generalised least-squares problem, solved by
:func:`scipy.optimize.least_squares`).  Every reconciled value is therefore a
solved point of the model: it satisfies the mass and energy balances to the
solver's tolerance.

* :func:`reconcile` takes every point on its own, the map's tunables free at each
  point (the efficiencies a balance leaves unknown), its readings that set the
  case free around their readings.
* :func:`fit` takes all points together with the tunables shared: the machine as
  it is over the test, with confidence intervals from the covariance.

Parameters are scaled for the solver (``(value - start) / scale``; a point of
efficiency, 1 K, 1 % of a flow, power or pressure), the Jacobian is taken by
forward differences point by point (a point's inputs move only its own
readings).
"""

from __future__ import annotations

import copy
import math
from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError, SolveError
from ..plant.case import override
from ..solve.point import solve_point
from ..steam.if97 import get_backend
from ..units import Where
from .gls import Reconciled, statistics
from .tags import COVERAGE, Measurements, resolve_tunable

__all__ = ["Parameter", "FitResult", "reconcile", "fit", "ModelProblem"]

_STEP = 1e-3  # forward-difference step in scaled parameter units


@dataclass
class Parameter:
    """A parameter of the least-squares problem: an operating input of one point
    (``point`` its index) or a tunable (``point`` ``None`` when shared).

    ``start`` and ``scale`` in SI; ``tag`` the reading that sets an input.
    """

    key: str
    start: float
    scale: float
    point: int | None = None
    tag: str | None = None
    lo: float = -math.inf
    hi: float = math.inf


@dataclass
class FitResult:
    """A reconciliation or fit (SI units).

    ``values``/``sigma``: the parameters and their standard uncertainties;
    ``rows``: ``(point, tag index)`` of each entry of ``rec``; ``model`` the
    model with the fitted tunables; ``results`` the solved point of each
    measured point at the solution.
    """

    meas: Measurements
    parameters: list[Parameter]
    values: np.ndarray
    sigma: np.ndarray
    covariance: np.ndarray
    rec: Reconciled
    rows: list[tuple[int, int]]
    model: object
    results: list
    evaluations: int
    design: dict[str, float] = field(default_factory=dict)
    # readings set aside as gross errors, in the order found: (point label, tag, z when
    # set aside [-], reading [SI], the model's value without it [SI])
    removed: list[tuple[str, str, float, float, float]] = field(default_factory=list)

    def tunable(self, key: str) -> tuple[float, float]:
        """``(value, 95 % uncertainty)`` of a fitted tunable [its unit]."""
        i = next(k for k, p in enumerate(self.parameters) if p.key == key and p.tag is None)
        return float(self.values[i]), float(COVERAGE * self.sigma[i])

    def point_rows(self, k: int) -> list[int]:
        """Entries of ``rec`` that belong to point ``k``."""
        return [i for i, (p, _) in enumerate(self.rows) if p == k]

    def point_chi2(self, k: int) -> float:
        i = self.point_rows(k)
        r = (self.rec.reconciled[i] - self.rec.measured[i]) / self.rec.sigma[i]
        return float(r @ r)

    def suspects(self) -> list[tuple[str, str, float]]:
        """``(point label, tag, z)`` of the readings set aside as gross errors, then of
        any reading still beyond the suspect limit, worst first."""
        return [(label, tag, z) for label, tag, z, _, _ in self.removed] + [
            (self.meas.labels[self.rows[i][0]], self.meas.tags[self.rows[i][1]].name,
             float(self.rec.z[i])) for i in self.rec.suspect]

    def offsets(self) -> list[tuple[str, float, int]]:
        """``(tag, Z, readings)`` of the tags whose readings over several points
        deviate together (a meter with an offset or a drift, each reading too small
        to be suspect alone), worst first.

        ``Z = sum(z_i) / sqrt(k)`` over the tag's ``k`` tested readings is about
        standard normal when the readings are right (approximate: the shared
        tunables correlate the ``z_i`` a little); a tag is named beyond the
        two-sided 95 % limit corrected for the number of tags tested (Sidak), as
        for single readings.  Asked only when the quality criterion fails (the
        global test first, then the search for its cause): the approximation is
        not strong enough to overrule a passing criterion."""
        from scipy.stats import norm

        if self.rec.passed:
            return []

        by_tag: dict[int, list[float]] = {}
        for i, (_, j) in enumerate(self.rows):
            if math.isfinite(self.rec.z[i]):
                by_tag.setdefault(j, []).append(float(self.rec.z[i]))
        tested = {j: z for j, z in by_tag.items() if len(z) >= 2}
        if not tested:
            return []
        limit = norm.ppf(1.0 - (1.0 - 0.95 ** (1.0 / len(tested))) / 2.0)
        out = [(self.meas.tags[j].name, sum(z) / math.sqrt(len(z)), len(z))
               for j, z in tested.items()]
        return sorted([o for o in out if abs(o[1]) > limit], key=lambda o: -abs(o[1]))


def _condition_scale(meas: Measurements, sets: str, reading: float) -> float:
    m = meas.model
    if sets == "throttle_flow":
        return 0.01 * m.throttle.flow
    if sets == "output":
        return 0.01 * m.generator.rating
    if sets.endswith("temperature"):
        return 1.0
    return 0.01 * abs(reading)


def _tunable_scale(unit: str, design: float) -> float:
    if unit == "-":
        return 0.01  # a point of efficiency
    if unit == "K":
        return 1.0
    return 0.01 * abs(design) if design else 1.0


class ModelProblem:
    """The least-squares problem of measured points and the model.

    ``tunables`` are shared by all points of ``meas``; each point has its own
    inputs set by readings.
    """

    def __init__(self, meas: Measurements, tunables: list[str], backend: str = "seuif97"):
        self.meas = meas
        self.steam = get_backend(backend)
        self.model = copy.deepcopy(meas.model)
        self.model.solver_cache.clear()
        w = Where(meas.file, "fit", "tunables")
        self.refs = [resolve_tunable(self.model, key, w) for key in tunables]
        self.params: list[Parameter] = []
        for ref in self.refs:
            t = ref.tunable
            self.params.append(Parameter(ref.key, ref.design, _tunable_scale(t.unit, ref.design),
                                         None, None, t.lo, t.hi))
        self.set_params: list[list[tuple[int, int]]] = []  # per point: (param, tag index)
        self.meas_rows: list[tuple[int, int]] = []  # (point, tag index) of each residual
        base = meas.conditions
        for k in range(len(meas.values)):
            own = []
            for j, tag in enumerate(meas.tags):
                x = meas.values[k, j]
                if math.isnan(x):
                    continue
                if tag.sets:
                    if tag.sets == "throttle_pressure" and base.pressure_mode != "fixed":
                        raise Where(meas.file, f"tags.{tag.name}", "sets").error(
                            "the throttle pressure is a result at sliding pressure; measure it "
                            "as quantity = 'totals.throttle_pressure', or name a case with "
                            "pressure_mode = 'fixed'")
                    own.append((len(self.params), j))
                    self.params.append(Parameter(tag.sets, x, _condition_scale(meas, tag.sets, x),
                                                 k, tag.name, 0.0))
                self.meas_rows.append((k, j))
            self.set_params.append(own)
        self.x = np.array([meas.values[k, j] for k, j in self.meas_rows])
        self.sigma = np.array([meas.tags[j].sigma(meas.values[k, j]) for k, j in self.meas_rows])
        self.rows_of_point = [[i for i, (p, _) in enumerate(self.meas_rows) if p == k]
                              for k in range(len(meas.values))]
        n_meas = len(self.meas_rows)
        if n_meas <= len(self.params):
            raise InputError(f"{n_meas} readings cannot determine {len(self.params)} "
                             f"parameters (inputs set by readings and tunables); measure more "
                             f"or fit fewer tunables", file=meas.file, table="fit",
                             key="tunables")
        self.warm: list = [None] * len(meas.values)
        self.evaluations = 0
        self._cache: tuple[bytes, np.ndarray, list] | None = None

    # ------------------------------------------------------------ evaluation
    def values(self, theta: np.ndarray) -> np.ndarray:
        """Parameters in SI from the scaled vector ``theta``."""
        return np.array([p.start + p.scale * t for p, t in zip(self.params, theta)])

    def _set_tunables(self, v: np.ndarray) -> None:
        for ref, value in zip(self.refs, v[:len(self.refs)]):
            setattr(ref.component, ref.tunable.attribute, float(value))

    def _solve(self, k: int, v: np.ndarray):
        changes = {}
        for i, _ in self.set_params[k]:
            key, value = self.params[i].key, float(v[i])
            if key == "throttle_flow":
                changes.update(throttle_flow=value, output=None)
            elif key == "output":
                changes.update(output=value, throttle_flow=None)
            else:
                changes[key] = value
        cond = override(self.meas.conditions, **changes)
        self.evaluations += 1
        warm = self.warm[k]
        if warm is not None:
            try:
                return solve_point(self.model, cond, self.steam, guess=warm.unknowns,
                                   jacobian=warm.jacobian, check_limits=False)
            except SolveError:
                pass
        try:
            r = solve_point(self.model, cond, self.steam, check_limits=False)
        except SolveError as exc:
            raise type(exc)(f"measured point {self.meas.labels[k]!r} "
                            f"(line {self.meas.lines[k]} of {self.meas.data_file}): {exc}"
                            ) from None
        self.warm[k] = r
        return r

    def _predict(self, k: int, v: np.ndarray, result) -> np.ndarray:
        """The model's value of each reading of point ``k`` [SI]."""
        own = {j: i for i, j in self.set_params[k]}
        out = []
        for i in self.rows_of_point[k]:
            j = self.meas_rows[i][1]
            tag = self.meas.tags[j]
            if tag.sets:
                out.append(v[own[j]])
                continue
            out.append(model_value(result, tag))
        return np.array(out, dtype=float)

    def _point_residual(self, k: int, v: np.ndarray):
        result = self._solve(k, v)
        rows = self.rows_of_point[k]
        return (self._predict(k, v, result) - self.x[rows]) / self.sigma[rows], result

    def residuals(self, theta: np.ndarray) -> np.ndarray:
        key = np.asarray(theta, dtype=float).tobytes()
        if self._cache is not None and self._cache[0] == key:
            return self._cache[1]
        v = self.values(theta)
        self._set_tunables(v)
        r = np.empty(len(self.meas_rows))
        results = []
        for k in range(len(self.meas.values)):
            rk, res = self._point_residual(k, v)
            r[self.rows_of_point[k]] = rk
            results.append(res)
        self._cache = (key, r, results)
        return r

    def jacobian(self, theta: np.ndarray) -> np.ndarray:
        """Forward differences: each point's inputs move its own readings only; a
        shared tunable moves every point."""
        theta = np.asarray(theta, dtype=float)
        r0 = self.residuals(theta).copy()
        J = np.zeros((len(r0), len(theta)))
        n_t = len(self.refs)
        v0 = self.values(theta)
        for c in range(n_t):
            v = v0.copy()
            v[c] += self.params[c].scale * _STEP
            self._set_tunables(v)
            for k in range(len(self.meas.values)):
                rows = self.rows_of_point[k]
                J[rows, c] = (self._point_residual(k, v)[0] - r0[rows]) / _STEP
        self._set_tunables(v0)
        for k in range(len(self.meas.values)):
            rows = self.rows_of_point[k]
            for c, _ in self.set_params[k]:
                v = v0.copy()
                v[c] += self.params[c].scale * _STEP
                J[rows, c] = (self._point_residual(k, v)[0] - r0[rows]) / _STEP
        return J

    def _check_determined(self, J: np.ndarray) -> None:
        s = np.linalg.svd(J, compute_uv=False)
        if s[-1] > 1e-7 * s[0]:
            return
        _, _, vt = np.linalg.svd(J)
        worst = int(np.argmax(np.abs(vt[-1])))
        p = self.params[worst]
        what = (f"the input {p.key} set by tag {p.tag!r}" if p.tag else f"the tunable {p.key}")
        raise InputError(f"the readings do not determine {what} (the least-squares problem is "
                         f"singular); add a reading that depends on it or fit fewer "
                         f"tunables", file=self.meas.file, table="fit", key="tunables")

    def solve(self, start: FitResult | None = None) -> FitResult:
        """Least squares (:func:`scipy.optimize.least_squares`, trust region
        reflective, bounds from the tunables' declarations) and the statistics.

        ``start``: a solution of the same parameters (the same problem with a
        reading fewer) to start from, with its solved points as the solver's
        starting guesses."""
        from scipy.optimize import least_squares

        lo = np.array([(p.lo - p.start) / p.scale for p in self.params])
        hi = np.array([(p.hi - p.start) / p.scale for p in self.params])
        theta0 = np.zeros(len(self.params))
        if start is not None:
            theta0 = np.array([(v - p.start) / p.scale
                               for v, p in zip(start.values, self.params)])
            self.warm = list(start.results)
        theta0 = np.clip(theta0, lo + 1e-9, hi - 1e-9)
        if start is None:
            self._check_determined(self.jacobian(theta0))
        sol = least_squares(self.residuals, theta0, jac=self.jacobian, bounds=(lo, hi),
                            method="trf", x_scale=1.0, xtol=1e-10, ftol=1e-12, gtol=1e-10,
                            max_nfev=60)
        theta = sol.x
        J = self.jacobian(theta)
        self._check_determined(J)
        r = self.residuals(theta)
        results = list(self._cache[2])
        predicted = self.x + r * self.sigma
        rec, C = statistics(self.x, self.sigma, predicted, J)
        scale = np.array([p.scale for p in self.params])
        cov = C * np.outer(scale, scale)
        v = self.values(theta)
        self._set_tunables(v)
        design = {ref.key: float(getattr(c, ref.tunable.attribute))
                  for ref, c in ((ref, ref.component) for ref in
                                 [resolve_tunable(self.meas.model, r.key, Where())
                                  for r in self.refs])}
        return FitResult(self.meas, self.params, v, np.sqrt(np.diag(cov)), cov, rec,
                         list(self.meas_rows), self.model, results, self.evaluations, design)


def model_value(result, tag) -> float:
    """The value of the quantity a measured ``tag`` reads at a solved point [SI]."""
    group, item, column = tag.quantity
    if group == "totals":
        return float(result.totals[column])
    t = result.tables[group]
    return float(t.columns[column][t.names.index(item)])


def _solve_setting_aside(meas: Measurements, keys: list[str], backend: str,
                         set_aside: bool) -> FitResult:
    """Solve; while the quality criterion fails, set the worst suspect reading aside
    and solve again (serial elimination, Narasimhan and Jordache, "Data
    Reconciliation and Gross Error Detection", Gulf, 2000, ch. 8, from memory;
    VDI 2048 Part 1, 2000, likewise repeats the reconciliation without a reading
    found faulty).  When no single reading is suspect but one tag's readings
    deviate together (:meth:`FitResult.offsets`), all of that tag's readings are
    set aside.  A reading that sets an input is never set aside."""
    meas = meas.subset(range(len(meas.values)))  # a copy of the readings
    removed = []
    result = ModelProblem(meas, keys, backend).solve()
    while set_aside and not result.rec.passed:
        worst = next((i for i in result.rec.suspect
                      if not meas.tags[result.rows[i][1]].sets), None)
        if worst is not None:
            entries = [worst]
        else:
            tag = next((t for t, _, _ in result.offsets() if not meas.tag(t).sets), None)
            if tag is None:
                break
            j = next(j for j, t in enumerate(meas.tags) if t.name == tag)
            entries = [i for i, (_, jj) in enumerate(result.rows) if jj == j]
        trial = meas.subset(range(len(meas.values)))
        for i in entries:
            k, j = result.rows[i]
            trial.values[k, j] = math.nan
        try:
            again = ModelProblem(trial, keys, backend).solve(start=result)
        except InputError:  # no redundancy left without them
            break
        for i in entries:
            k, j = result.rows[i]
            removed.append((meas.labels[k], meas.tags[j].name, float(result.rec.z[i]),
                            float(meas.values[k, j]),
                            model_value(again.results[k], meas.tags[j])))
        meas, result = trial, again
    result.removed = removed
    return result


def reconcile(meas: Measurements, tunables: list[str] | None = None,
              backend: str = "seuif97", set_aside: bool = True) -> list[FitResult]:
    """Reconcile each measured point on its own.

    Parameters
    ----------
    meas : the measurements [-]
    tunables : constants free at each point (default: the map's ``[fit] tunables``) [-]
    backend : steam property backend [-]
    set_aside : while a point fails the quality criterion, set its worst suspect
        reading aside and reconcile again (its z, reading and the model's value
        without it in ``removed``) [-]

    Returns
    -------
    list[FitResult]
        One per point: reconciled values with their uncertainties, the quality
        criterion and the individual tests.
    """
    keys = meas.tunables if tunables is None else tunables
    return [_solve_setting_aside(meas.subset([k]), keys, backend, set_aside)
            for k in range(len(meas.values))]


def fit(meas: Measurements, tunables: list[str] | None = None,
        backend: str = "seuif97", set_aside: bool = True) -> FitResult:
    """Fit the tunables to all points together.

    Parameters
    ----------
    meas : the measurements [-]
    tunables : the constants to fit (default: the map's ``[fit] tunables``) [-]
    backend : steam property backend [-]
    set_aside : while the fit fails the quality criterion, set the worst suspect
        reading aside and fit again [-]

    Returns
    -------
    FitResult
        Fitted tunables with their covariance, each point's reconciled values,
        and the model with the fitted constants.
    """
    keys = meas.tunables if tunables is None else tunables
    if not keys:
        raise InputError("no tunables to fit: list them in [fit] tunables", file=meas.file,
                         table="fit", key="tunables")
    if meas.model.fitted:
        raise InputError(f"the map's model is a fitted (as tested) model, of "
                         f"{', '.join(k for k, _v in meas.model.fitted)}; fit from its design "
                         f"model, with every tunable to fit listed in [fit] tunables",
                         file=meas.file, key="model")
    return _solve_setting_aside(meas, keys, backend, set_aside)
