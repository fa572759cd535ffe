"""Solve one operating point: Newton on the point's equations
(:mod:`simulator.solve.equations`), the checks of the answer, and the point
result built from the declared columns (:mod:`simulator.solve.result`).

Newton's method (:mod:`simulator.solve.newton`) starts from the design
pressures scaled by flow with the ellipse law, or from a solved neighbour
(its solution scaled the same way, a guarded predictor along the load, its
Jacobian).  Control valves that hold their inlet pressure or stand wide open
are switched until the solution agrees with their state.  An answer no machine
can give, or one beyond the throttle valves, raises :class:`InfeasibleError`.
"""

from __future__ import annotations

import contextlib
import functools
import math
import threading

import numpy as np

from ..errors import ConvergenceError, InfeasibleError, SolveError
from ..plant.case import Conditions, override
from ..plant.model import Model
from ..steam.constants import P_CRIT, T_CRIT
from ..steam.if97 import SteamTables, get_backend
from .build import build_result
from .equations import PointEquations, TrialPointError, equations_for
from .newton import newton
from .result import PointResult

__all__ = ["solve_point", "wide_open_capacity", "valve_points", "PointResult", "PointEquations"]

TOL = 1e-10


def wide_open_capacity(model: Model, cond: Conditions, steam: SteamTables,
                       p_throttle: float) -> tuple[float, float]:
    """Throttle flow [kg/s] and output [W] with the valves wide open at ``p_throttle`` [Pa]."""
    c2 = override(cond, pressure_mode="fixed", throttle_pressure=p_throttle, output=None,
                  throttle_flow=model.throttle.flow)
    eq = equations_for(model, c2, steam, mode="wide_open")
    x0 = eq.guess()
    nr = newton(eq.residuals, x0, tol=TOL, names=eq.residual_names)
    _, st = eq.evaluate(nr.x, detail=True)
    return st["m_T"], st["P_gen"]


def valve_points(model: Model, cond: Conditions, steam: SteamTables | str | None = None,
                 ) -> list[tuple[int, PointResult | SolveError]]:
    """The valve points of a nozzle-governed unit at a held throttle pressure.

    A valve point is the load at which the first ``k`` control valves are wide
    open and the others closed: no valve throttles, so the heat rate has a
    local minimum there.  ``cond`` gives the throttle pressure held (its
    ``throttle_pressure``, else the design pressure) and the other conditions;
    its load is replaced.  Returns ``(k, point)`` for each ``k`` = 1 ... N,
    in order of load: the solved point with the first ``k`` valves wide open
    at the held pressure and the rest closed (with an ``overlap`` the sequence
    passes near, not through, these states), or the :class:`SolveError` that
    says why the unit cannot run there (such as process steam held at more
    than the first valves pass).

    Raises
    ------
    InputError
        The model has no governing stage.
    """
    from ..errors import InputError

    if steam is None or isinstance(steam, str):
        steam = get_backend(steam or "seuif97")
    gov = model.governing_stage
    if gov is None:
        raise InputError("the model has no [governing_stage]: its valves open together, so "
                         "it has no valve points", file=model.file)
    p_T = cond.throttle_pressure if cond.throttle_pressure is not None else \
        model.throttle.pressure
    out: list[tuple[int, PointResult | SolveError]] = []
    for k in range(1, len(gov.valves) + 1):
        c = override(cond, valve_mode="nozzle_groups", pressure_mode="fixed",
                     throttle_pressure=p_T, output=None, throttle_flow=model.throttle.flow,
                     valves_open=k, minimum_throttle_pressure=None)
        eq = equations_for(model, c, steam, mode="wide_open")
        try:
            nr = newton(eq.residuals, eq.guess(), tol=TOL, names=eq.residual_names)
            _, st = eq.evaluate(nr.x, detail=True)
            _check_physical(model, c, steam, eq, st)
        except SolveError as exc:
            what = f"with {k} of the control valves wide open at {p_T / 1e5:.2f} bar"
            out.append((k, _with_request(exc, c, eq) if not isinstance(exc, TrialPointError)
                        else InfeasibleError(f"{what} the unit cannot run: {exc}")))
            continue
        r = build_result(model, override(c, throttle_flow=st["m_T"]), steam, eq, nr, st)
        r.flow_ratio = st["m_T"] / model.throttle.flow
        out.append((k, r))
    return out


_BLAS: list = []  # the process's BLAS thread controller, made on first use
_ON_ONE = threading.local()  # .inside: this thread runs in one_blas_thread already


@contextlib.contextmanager
def one_blas_thread():
    """A context in which the BLAS libraries numpy uses run on one thread.

    The systems here are small (tens to a few hundred unknowns): threads of a
    multi-threaded BLAS then cost more than they save, and on a busy machine a
    solve waits for them (threadpoolctl; a no-op without it).  The previous
    thread counts come back on leaving.  Inside it already (a study's chunk
    around its points), entering again costs nothing.
    """
    if getattr(_ON_ONE, "inside", False):
        yield
        return
    if not _BLAS:
        try:
            from threadpoolctl import ThreadpoolController
            _BLAS.append(ThreadpoolController().select(user_api="blas"))
        except Exception:  # noqa: BLE001 - threadpoolctl missing or failing: leave BLAS as is
            _BLAS.append(None)
    blas = _BLAS[0]
    limit = (contextlib.nullcontext() if blas is None or not blas.lib_controllers
             else blas.limit(limits=1))
    _ON_ONE.inside = True
    try:
        with limit:
            yield
    finally:
        _ON_ONE.inside = False


def _on_one_blas_thread(f):
    """``f`` run inside :func:`one_blas_thread`."""
    @functools.wraps(f)
    def run(*args, **kwargs):
        with one_blas_thread():
            return f(*args, **kwargs)
    return run


@_on_one_blas_thread
def solve_point(model: Model, cond: Conditions, steam: SteamTables | str | None = None,
                guess: np.ndarray | None = None, jacobian: np.ndarray | None = None,
                broyden: bool = True, check_limits: bool = True,
                neighbour: PointResult | None = None,
                renew_jacobian: int | None = None) -> PointResult:
    """Solve one operating point.

    Parameters
    ----------
    model : calibrated model
    cond : operating conditions
    steam : property backend or its name (default ``"seuif97"``)
    guess : starting unknowns (``PointResult.unknowns`` of a point solved with the same
        unknowns); the design-scaled guess otherwise
    jacobian : starting Jacobian for the same unknowns
    broyden : Broyden updates between fresh Jacobians (``False``: plain Newton)
    check_limits : raise :class:`InfeasibleError` when the answer needs more
        than the valves wide open can pass
    neighbour : a solved neighbouring point with the same unknowns; its solution
        scaled to this flow and its Jacobian start the iteration (continuation)
    renew_jacobian : when the solve took at least this many residual evaluations,
        the result carries a fresh Jacobian at the answer
        (its evaluations counted in the point's) instead of the Broyden-updated one,
        so that the next point of a chain starts from an exact Jacobian (under a
        pressure program only a held point's: a sliding attempt may be dropped) [-]

    Raises
    ------
    ConvergenceError, InfeasibleError, PropertyRangeError
    """
    if steam is None or isinstance(steam, str):
        steam = get_backend(steam or "seuif97")
    if cond.pressure_mode == "program":
        return _solve_program(model, cond, steam, broyden, check_limits, neighbour,
                              renew_jacobian)
    # Control valves hold their inlet pressure unless they would need less than their
    # wide-open drop; then they are wide open and that pressure floats above its
    # setting.  Start from the neighbour's valve states and switch until consistent.
    wide = neighbour.wide_open_valves if neighbour is not None else frozenset()
    tried = set()
    eq = equations_for(model, cond, steam, wide_open=wide)
    try:
        while True:
            tried.add(wide)
            eq = equations_for(model, cond, steam, wide_open=wide)
            nr, st, F, scaled = _solve_structure(eq, steam, guess, jacobian, broyden,
                                                 neighbour)
            switch = _valves_to_switch(model, cond, eq, st)
            if not switch or (wide ^ switch) in tried:
                break
            wide = wide ^ switch
        _check_physical(model, cond, steam, eq, st)
        if check_limits:
            _check_feasible(model, cond, steam, eq, st)
        _check_water_side(eq, st)  # after the valves: beyond them, that is the cause
    except SolveError as exc:
        raise _with_request(exc, cond, eq) from None
    result = build_result(model, cond, steam, eq, nr, st)
    if renew_jacobian is not None and nr.evaluations >= renew_jacobian:
        _renew_jacobian(eq, nr, result)
    if eq.admission_throttles:
        adm = model.admission
        result.over_capacity = adm.over_capacity(st["admission"], st["p"][eq.src],
                                                 st["p"][eq.idx[adm.outlet]])
    r = eq.flow_ratio()
    result.flow_ratio = r
    result.wide_open_valves = wide
    if scaled is not None and abs(r - neighbour.flow_ratio) > 1e-9:
        result.unknowns_slope = (nr.x - scaled) / (r - neighbour.flow_ratio)
        result.slope_from = neighbour.flow_ratio
        if neighbour.unknowns_slope is not None and abs(r - neighbour.slope_from) > 1e-9:
            # second divided difference, for a quadratic predictor at the next point
            result.unknowns_curvature = ((result.unknowns_slope - neighbour.unknowns_slope)
                                         / (r - neighbour.slope_from))
    return result


def _renew_jacobian(eq: PointEquations, nr, result: PointResult) -> None:
    """Give ``result`` the Jacobian at its answer (:meth:`PointEquations.jacobian`),
    counted in the point's evaluations as Newton counts one: its base march and
    one a column.  A Jacobian the laws cannot take (a trial state beyond a
    limit) keeps the converged point with its Newton Jacobian: the point is
    solved, only the start of the next is at stake."""
    done = 0

    def counted(z):
        nonlocal done
        done += 1
        return eq.residuals(z)

    try:
        _, J = eq.jacobian(counted, nr.x, nr.F)
    except SolveError:
        pass
    else:
        result.jacobian = J
        done += eq.n
    result.evaluations += done


def _solve_program(model, cond, steam, broyden, check_limits, neighbour,
                   renew_jacobian=None) -> PointResult:
    """A point under a throttle-pressure program: sliding pressure (with the case's
    valves wide open) where that lies between the program's lowest and held
    pressures; held at the nearer of the two where it does not.  Where sliding
    has no answer at all (at a load so low that the held bleeds take all the
    steam, say), the lowest pressure is tried first, then the highest."""
    upper = cond.throttle_pressure if cond.throttle_pressure is not None else \
        model.throttle.pressure
    lower = cond.minimum_throttle_pressure
    sliding = override(cond, pressure_mode="sliding", throttle_pressure=None,
                       minimum_throttle_pressure=None)
    near = neighbour if neighbour is not None and neighbour.pressure_mode == "program" else None
    tries: list[float] = []
    spent = 0  # evaluations of a sliding answer outside the program's range
    try:
        result = solve_point(model, sliding, steam, broyden=broyden, check_limits=False,
                             neighbour=near if near is not None and not near.program_held
                             else None)
        p_T = result.totals["throttle_pressure"]
        if p_T > upper:
            tries = [upper]
        elif lower is not None and p_T < lower:
            tries = [lower]
        if tries:
            spent = result.evaluations
    except SolveError:  # no sliding answer: one of the held pressures may have one
        tries = [lower, upper] if lower is not None else [upper]
    for k, held in enumerate(tries):
        fixed = override(cond, pressure_mode="fixed", throttle_pressure=held, valves_open=None,
                         minimum_throttle_pressure=None)
        try:
            result = solve_point(model, fixed, steam, broyden=broyden,
                                 check_limits=check_limits, renew_jacobian=renew_jacobian,
                                 neighbour=near if near is not None and near.program_held
                                 and near.totals["throttle_pressure"] == held else None)
            break
        except SolveError:
            if k == len(tries) - 1:
                raise
    result.pressure_mode = "program"
    result.program_held = bool(tries)
    result.evaluations += spent  # (those of an attempt that failed are not known)
    return result


def _solve_structure(eq: PointEquations, steam, guess, jacobian, broyden, neighbour):
    """Newton on one set of equations; returns ``(newton result, state, F, scaled)``."""
    shape = (eq.n_res, eq.n)
    r = eq.flow_ratio()
    scaled = None
    if (neighbour is not None and neighbour.unknowns is not None and len(neighbour.unknowns) == eq.n
            and guess is None and neighbour.wide_open_valves == eq.wide_open):
        scaled, guess = _continuation_start(eq, neighbour, r)
        jacobian = neighbour.jacobian if jacobian is None else jacobian
    usable = guess is not None and len(guess) == eq.n
    x0 = np.asarray(guess, float) if usable else eq.guess()
    jac = jacobian if (jacobian is not None and usable
                       and np.shape(jacobian) == shape) else None
    if (jac is not None and neighbour is not None and neighbour.unknowns is not None
            and len(neighbour.unknowns) == eq.n):
        jac = moved_jacobian(jac, x0, neighbour.unknowns, eq.n_p)
    try:
        nr = newton(eq.residuals, x0, tol=TOL, names=eq.residual_names, jacobian=jac,
                    broyden=broyden, jacobian_fn=eq.jacobian)
    except ConvergenceError:
        if not usable:
            raise
        nr = newton(eq.residuals, eq.guess(), tol=TOL, names=eq.residual_names,
                    broyden=broyden, jacobian_fn=eq.jacobian)
    F, st = eq.evaluate(nr.x, detail=True)
    return nr, st, F, scaled


def moved_jacobian(J: np.ndarray, x: np.ndarray, x_from: np.ndarray, n_p: int) -> np.ndarray:
    """The Jacobian ``J`` formed at ``x_from`` carried to a start ``x`` nearby: the
    column of each pressure unknown (``ln p``, the first ``n_p``) scaled by the
    ratio of the start's pressure to the one at ``x_from``.

    By the ellipse law (Stodola; :mod:`simulator.physics.ellipse`) a stage
    group's flow at a given pressure ratio and inlet temperature is
    proportional to its inlet pressure, so the
    derivatives of the flow-normalised balances with respect to ``p`` hold
    nearly still from point to point, and those with respect to ``ln p`` (the
    columns) scale with ``p``.  The other unknowns (bleeds and flows over
    design flow) enter the balances nearly linearly; their columns are kept.
    Measured on the demo hourly profile (1,200 points): 4.82 residual
    evaluations a point with the columns as they were, 4.25 scaled.  Returns
    a new array [-].
    """
    J = np.array(J, dtype=float)
    J[:, :n_p] *= np.exp(np.asarray(x[:n_p], float) - np.asarray(x_from[:n_p], float))
    return J


START_MARGIN = 1.5  # [-] a start above this times the highest throttle pressure is refused


def _continuation_start(eq: PointEquations, neighbour: PointResult, r: float):
    """Start of a point from a solved neighbour: ``(scaled, start)``.

    ``scaled`` is the neighbour's solution scaled to this flow ratio ``r`` [-]
    by the ellipse law (with the neighbour's own exhaust pressure taken out
    when the model has one exhaust and its pressure changed); ``start`` adds
    the secant (and quadratic) predictor along the load when the step is
    sensible: shorter than 0.15 and at most four times the step the slope was
    taken over.  A start that is not physical (:func:`_plausible_start`) is
    dropped: the predicted one for ``scaled``, ``scaled`` for ``None`` (the
    caller then starts from the design-scaled guess).
    """
    x_n = neighbour.unknowns
    if (len(eq.exhaust_idx) == 1 and neighbour.node_p is not None
            and eq.exhaust_idx[0] not in eq.freed):
        exh = eq.exhaust_idx[0]
        p_ex, p_ex_n = eq.p_fix[exh], neighbour.node_p[exh]
        if p_ex != p_ex_n and math.isfinite(p_ex_n):
            # same flow, other exhaust pressure: p^2 - p_ex^2 kept (ellipse law)
            x_n = np.array(x_n, dtype=float)
            p = np.exp(x_n[:eq.n_p])
            x_n[:eq.n_p] = 0.5 * np.log(np.maximum(p * p - p_ex_n * p_ex_n + p_ex * p_ex,
                                                   0.25 * p * p))
    scaled = eq.scaled_guess(x_n, neighbour.flow_ratio)
    start = scaled
    step = r - neighbour.flow_ratio
    base = neighbour.flow_ratio - neighbour.slope_from  # NaN without a slope
    if neighbour.unknowns_slope is not None and abs(step) < 0.15 and abs(step) <= 4.0 * abs(base):
        start = scaled + neighbour.unknowns_slope * step  # secant predictor along the load
        if neighbour.unknowns_curvature is not None:  # quadratic through three points
            start = start + neighbour.unknowns_curvature * step * (r - neighbour.slope_from)
        if not _plausible_start(eq, start):
            start = scaled
    if not _plausible_start(eq, start):
        start = None
    return scaled, start


def _plausible_start(eq: PointEquations, x: np.ndarray) -> bool:
    """Whether unknowns ``x`` can start Newton: finite, pressures falling along
    every component of the steam path, no pressure above :data:`START_MARGIN`
    times the highest throttle pressure (or the flow ratio times it), no
    negative bleed, a positive throttle flow."""
    if not np.all(np.isfinite(x)):
        return False
    p = np.array(eq.p_fix, dtype=float)
    p[eq.free] = np.exp(x[:eq.n_p])
    th = eq.model.throttle
    if np.max(p) > START_MARGIN * max(1.0, x[-1] if eq.flow_unknown else 0.0,
                                      eq.flow_ratio()) * max(th.max_pressure, th.pressure):
        return False
    for i, outs in enumerate(eq.outs):
        for c, j in outs:
            if p[j] > p[i] or (c.sets_flow and p[j] == p[i]):
                return False
    if np.any(x[eq.n_p:eq.n_p + eq.n_h + eq.n_c] < 0.0):
        return False
    return not (eq.flow_unknown and x[-1] <= 0.0)


def _valves_to_switch(model, cond, eq, st) -> frozenset:
    """Control valves whose state (holding or wide open) contradicts the solution."""
    p = st["p"]
    held = dict(cond.held_pressures)
    switch = set()
    for c in model.control_valves:
        i, j = eq.idx[c.inlet], eq.idx[c.outlet]
        if c.name in eq.wide_open:
            setting = held.get(c.name, model.design_pressure[c.inlet])
            if p[i] < setting * (1.0 - 1e-9):  # it can throttle again
                switch.add(c.name)
        elif p[i] - p[j] < st["control_valve_needed"][c.name] - 1e-6 * p[i]:
            switch.add(c.name)  # holding would need less than the wide-open drop
    return frozenset(switch)


def _asked(cond: Conditions, eq: PointEquations) -> str:
    """The request in plain words, for error messages."""
    if cond.output is not None:
        what = f"an output of {cond.output / 1e6:.2f} MW"
    elif cond.throttle_flow is not None:
        what = f"a throttle flow of {cond.throttle_flow:.2f} kg/s"
    else:
        what = "this point"
    if cond.pressure_mode == "fixed" and eq is not None:
        what += f" at a held throttle pressure of {eq.p_fix[eq.src] / 1e5:.2f} bar"
    return what


def _with_request(exc: SolveError, cond: Conditions, eq: PointEquations) -> SolveError:
    """The error with its message led by what was asked; a trial-point failure becomes an
    :class:`InfeasibleError` (the request leaves no state the laws can take)."""
    asked = _asked(cond, eq)
    text = str(exc)
    if isinstance(exc, TrialPointError):
        held = "".join(f"; control valve {name!r} holds {eq.model.component(name).inlet!r} at "
                       f"{p / 1e5:.4g} bar, set by the case (design "
                       f"{eq.model.design_pressure[eq.model.component(name).inlet] / 1e5:.4g} "
                       f"bar)" for name, p in cond.held_pressures)
        return InfeasibleError(f"{asked} cannot be met: {text} (fixed extraction flows may "
                               f"take more steam than arrives, or the conditions leave no "
                               f"steam state){held}")
    if not text.startswith((asked, "an output of", "a throttle flow of")):
        exc.args = (f"{asked}: {text}",)
    return exc


def _check_physical(model, cond, steam, eq, st):
    """Refuse answers no machine can give, whatever the limit checks: water at the
    throttle, a held throttle pressure an admission with no valves cannot take
    (``held_refusal``), pressures rising through a stage group (the water side and
    negative bleeds: :func:`_check_water_side`)."""
    p = st["p"]
    names = eq.names
    p_T = p[eq.src]
    T_T = eq.T_throttle
    T_sat = T_CRIT if p_T >= P_CRIT else steam.T_sat(p_T)
    if T_T <= T_sat:
        raise InfeasibleError(
            f"the throttle pressure would be {p_T / 1e5:.2f} bar, where the throttle "
            f"temperature {T_T - 273.15:.1f} degC is not above the saturation temperature "
            f"{T_sat - 273.15:.1f} degC: the turbine would receive water, not steam")
    if eq.admission_throttles:  # a held throttle pressure: can the admission take the rest?
        adm = model.admission
        why = adm.held_refusal(st["admission"], p_T, p[eq.idx[adm.outlet]])
        if why is not None:
            try:
                m_max, P_max = wide_open_capacity(model, cond, steam, p_T)
                at = (f"the turbine swallows {m_max:.2f} kg/s ({P_max / 1e6:.2f} MW) at "
                      f"this pressure and no other flow: ")
            except SolveError:
                at = ""
            raise InfeasibleError(f"{at}{why}")
    for i, outs in enumerate(eq.outs):
        for c, j in outs:
            if c.expands and p[j] >= p[i]:
                raise InfeasibleError(
                    f"no pressure ordering exists for this request: "
                    f"{c.title + ' ' + repr(c.name) if c.many else c.title} "
                    f"would need its outlet pressure ({p[j] / 1e5:.4g} bar at "
                    f"{names[j]!r}) above its inlet ({p[i] / 1e5:.4g} bar); "
                    f"the exhaust pressure may be too high for this flow")


def _check_water_side(eq, st):
    """Refuse water-side states no plant can have and negative bleeds."""
    fw = st.get("feedwater")
    if fw is not None and fw.get("problems"):
        raise InfeasibleError(fw["problems"][0][1])
    for name, m in zip((b[0] for b in eq.bleeds), st["bleed_flow"]):
        if m < -1e-9 * eq.m_design:
            raise InfeasibleError(f"extraction {name!r} would need a negative bleed flow "
                                  f"({m:.4g} kg/s); its heater cannot balance at this point")


def _check_feasible(model, cond, steam, eq, st):
    """Refuse answers beyond the throttle valves or the throttle pressure limit."""
    p = st["p"]
    src = eq.src
    p_T = p[src]
    admission = model.admission
    after = eq.idx[admission.outlet]
    asked = (f"an output of {cond.output / 1e6:.2f} MW" if cond.output is not None
             else f"a throttle flow of {st['m_T']:.2f} kg/s")
    if cond.pressure_mode == "fixed":
        if admission.over_capacity(st["admission"], p_T, p[after]):
            m_max, P_max = wide_open_capacity(model, cond, steam, p_T)
            raise InfeasibleError(
                f"{asked} is beyond the valves-wide-open capacity at the held throttle "
                f"pressure {p_T / 1e5:.2f} bar: maximum throttle flow {m_max:.2f} kg/s, "
                f"maximum output {P_max / 1e6:.2f} MW")
    else:
        p_max = model.throttle.max_pressure
        if p_T > p_max * (1.0 + 1e-9):
            m_max, P_max = wide_open_capacity(model, cond, steam, p_max)
            raise InfeasibleError(
                f"{asked} needs a throttle pressure of {p_T / 1e5:.2f} bar, above the highest "
                f"allowed {p_max / 1e5:.2f} bar: maximum throttle flow {m_max:.2f} kg/s, "
                f"maximum output {P_max / 1e6:.2f} MW")
