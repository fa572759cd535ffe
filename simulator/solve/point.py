"""Solve one operating point: the equations, Newton, and the point result.

Unknowns
    * ``ln p`` at every node whose pressure is not fixed (exhaust nodes are
      fixed by the condenser or back pressure; the throttle node is fixed under
      throttle governing);
    * the bleed flow of every in-service heater, over design throttle flow;
    * the throttle flow, over its design value, when an output is demanded.

Residuals (all dimensionless)
    * mass balance at each free node, over design throttle flow;
    * at the inlet node of a valve, reheater or pipe, which passes the whole
      net flow of its inlet node, its pressure-drop law instead, over the
      node's design pressure;
    * each heater's energy balance, over its design duty;
    * generator output minus demand, over the rating.

A march in topological order gives every flow and enthalpy from the unknowns,
so the system stays small (one equation per node and heater).  Newton's method
(:mod:`simulator.newton`) starts from the design pressures scaled by flow with
the ellipse law, or from a neighbouring solution.
"""

from __future__ import annotations

import math
import threading
from dataclasses import dataclass, field

import numpy as np

from ..components.legacy import H_DRY, ControlValve, StageGroup, ThrottleValve
from ..errors import ConvergenceError, InfeasibleError, PropertyRangeError, SolveError
from ..plant.case import Conditions, override
from ..plant.model import Model
from ..solve.newton import newton
from ..solve.water import FeedwaterMarch, HeaterState
from ..steam.if97 import P_CRIT, T_CRIT, SteamTables, get_backend

__all__ = ["PointEquations", "PointResult", "solve_point", "UNITS"]

TOL = 1e-10

# SI units of every quantity in a PointResult
UNITS = {
    "pressure": "Pa", "temperature": "K", "enthalpy": "J/kg", "entropy": "J/(kg K)",
    "moisture": "-", "flow": "kg/s", "efficiency": "-", "isentropic_drop": "J/kg",
    "power": "W", "velocity": "m/s", "exhaust_loss": "J/kg", "heat_rate": "J/J",
    "steam_rate": "kg/J",
}


class _Bad(SolveError):
    """A trial point of the iteration with no steam reaching a node."""


@dataclass
class PointResult:
    """Everything predicted for one operating point (SI units, see :data:`UNITS`)."""

    converged: bool
    iterations: int
    residual: float
    evaluations: int
    message: str
    model_name: str
    governing: str
    backend: str
    node_names: list[str]
    node_p: np.ndarray
    node_T: np.ndarray
    node_h: np.ndarray
    node_s: np.ndarray
    node_x: np.ndarray
    group_names: list[str]
    group_inlet: list[str]
    group_outlet: list[str]
    group_flow: np.ndarray
    group_eta: np.ndarray
    group_dh_s: np.ndarray
    group_power: np.ndarray
    group_velocity: np.ndarray
    group_exhaust_loss: np.ndarray
    group_moisture_out: np.ndarray
    extraction_names: list[str]
    extraction_nodes: list[str]
    extraction_control: list[str]
    extraction_flow: np.ndarray
    extraction_p: np.ndarray
    extraction_h: np.ndarray
    heaters: list[HeaterState]
    totals: dict[str, float]
    path_names: list[str] = field(default_factory=list)
    path_inlet: list[str] = field(default_factory=list)
    path_outlet: list[str] = field(default_factory=list)
    path_flow: np.ndarray = field(default=None)
    path_pressure_drop: np.ndarray = field(default=None)
    path_heat: np.ndarray = field(default=None)
    x: np.ndarray = field(repr=False, default=None)
    jacobian: np.ndarray = field(repr=False, default=None)
    flow_ratio: float = 1.0
    x_slope: np.ndarray = field(repr=False, default=None)
    x_curvature: np.ndarray = field(repr=False, default=None)
    slope_from: float = math.nan  # flow ratio of the point the slope was taken from
    wide_open_valves: frozenset = frozenset()

    def node(self, name: str) -> dict:
        i = self.node_names.index(name)
        return {"p": self.node_p[i], "T": self.node_T[i], "h": self.node_h[i],
                "s": self.node_s[i], "x": self.node_x[i]}

    def group(self, name: str) -> dict:
        i = self.group_names.index(name)
        return {"flow": self.group_flow[i], "eta": self.group_eta[i],
                "power": self.group_power[i], "dh_s": self.group_dh_s[i]}


class PointEquations:
    """The residual system of one operating point, compiled for speed.

    ``mode`` is ``"point"`` (throttle flow or output as the conditions say) or
    ``"wide_open"`` (throttle pressure held at ``conditions.throttle_pressure``
    with the valves wide open; the throttle flow is the unknown).

    The structure (unknowns, residual rows, the compiled water side) depends
    only on the governing mode, on whether an output is demanded, on the
    extraction controls and on the heaters out of service; it is built once per
    model and kept (:func:`equations_for`).  The operating values are set by
    :meth:`set_conditions`.
    """

    def __init__(self, model: Model, cond: Conditions, steam: SteamTables,
                 mode: str = "point", wide_open: frozenset = frozenset()):
        self.model = model
        self.wide_open = frozenset(wide_open)  # control valves that are wide open
        self.steam = steam
        self.mode = mode
        g = model.graph
        names = model.order
        self.names = names
        idx = {n: i for i, n in enumerate(names)}
        self.idx = idx
        N = len(names)
        self.N = N
        self.src = idx[model.source]
        self.exhaust_idx = [idx[n] for n in model.exhaust_nodes]
        self.throttle_fixed = cond.governing == "throttle" or mode == "wide_open"
        # control valves that throttle hold their inlet pressure
        self.holding = [(idx[c.inlet], c) for c in model.control_valves
                        if c.name not in self.wide_open]
        fixed = (set(self.exhaust_idx) | ({self.src} if self.throttle_fixed else set())
                 | {i for i, _ in self.holding})
        self.free = [i for i in range(N) if i not in fixed]
        self.p_design = [model.design_pressure[n] for n in names]
        self.m_design = model.throttle.flow
        # outgoing components per node: (kind, component, outlet index)
        # kind 0 stage group, 1 throttle valve, 2 reheater or pipe, 3 control valve
        # holding its inlet pressure, 4 control valve wide open
        self.outs: list[list] = [[] for _ in range(N)]
        self.has_drop = [False] * N
        for i, n in enumerate(names):
            for succ in g.successors(n):
                c = g.edges[n, succ]["component"]
                if isinstance(c, StageGroup):
                    kind = 0
                elif isinstance(c, ControlValve):
                    kind = 4 if c.name in self.wide_open else 3
                elif isinstance(c, ThrottleValve):
                    kind = 1
                else:
                    kind = 2
                self.outs[i].append((kind, c, idx[succ]))
                self.has_drop[i] = kind != 0
        # extractions
        controls = cond.controls()
        self.heaters_out = frozenset(cond.heaters_out)
        self.fw = (FeedwaterMarch(model, self.heaters_out, node_names=names)
                   if model.feedwater is not None and model.heaters else None)
        self.active_heaters = list(self.fw.active) if self.fw else []
        self.bleeds = []  # (name, node index, kind, value) kind: 0 fixed, 1 fraction, 2 heater
        self.bleed_control = []
        hpos = {h: k for k, h in enumerate(self.active_heaters)}
        for e in model.extractions.values():
            ctl, val = controls.get(e.name, (e.control, None))
            if e.heater and e.heater in self.heaters_out:
                ctl, val = "closed", 0.0
            if ctl == "closed":
                kind, v = 0, 0.0
            elif ctl == "flow":
                kind, v = 0, (val if val is not None else e.design_flow)
            elif ctl == "fraction":
                kind, v = 1, (val if val is not None else e.design_flow / self.m_design)
            else:  # heater
                kind, v = 2, hpos[e.heater]
            self.bleeds.append((e.name, idx[e.node], kind, v))
            self.bleed_control.append(ctl)
        # unknown layout
        self.n_p = len(self.free)
        self.n_h = len(self.active_heaters)
        self.demand = cond.output is not None and mode == "point"
        self.flow_unknown = self.demand or mode == "wide_open"
        self.n = self.n_p + self.n_h + (1 if self.flow_unknown else 0)
        # residual rows: free nodes (and the source when flow is the unknown at a held
        # throttle pressure in wide-open mode), heaters, demand
        self.row_of = [-1] * N
        rows = []
        for i in self.free:
            self.row_of[i] = len(rows)
            rows.append(i)
        if mode == "wide_open":
            self.row_of[self.src] = len(rows)
            rows.append(self.src)
        self.node_rows = rows
        self.n_res = len(rows) + self.n_h + (1 if self.demand else 0)
        self.residual_names = []
        for i in rows:
            kind = "pressure drop after" if self.has_drop[i] else "mass balance at"
            self.residual_names.append(f"{kind} node {names[i]!r}")
        self.residual_names += [f"energy balance of heater {h!r}" for h in self.active_heaters]
        if self.demand:
            self.residual_names.append("generator output demand")
        self.unknown_names = ([f"ln p({names[i]})" for i in self.free]
                              + [f"bleed({h})/m_design" for h in self.active_heaters]
                              + (["throttle flow/m_design"] if self.flow_unknown else []))
        self._last = None
        self.set_conditions(cond)

    def set_conditions(self, cond: Conditions) -> None:
        """Set the operating values (flow or demand, pressures, temperatures)."""
        model = self.model
        self.cond = cond
        self._last = None
        p_fix = [math.nan] * self.N
        for i in self.exhaust_idx:
            p_fix[i] = (cond.exhaust_pressure if cond.exhaust_pressure is not None
                        else self.p_design[i])
        if self.throttle_fixed:
            p_fix[self.src] = (cond.throttle_pressure if cond.throttle_pressure is not None
                               else model.throttle.pressure)
        held = dict(cond.held_pressures)
        for i, c in self.holding:
            p_fix[i] = held.get(c.name, self.p_design[i])
        self.p_fix = p_fix
        self.T_throttle = (cond.throttle_temperature if cond.throttle_temperature is not None
                           else model.throttle.temperature)
        self.T_reheat = cond.reheat_temperature

    # ------------------------------------------------------------------ guesses
    def flow_ratio(self) -> float:
        """The expected throttle flow over design [-] for these conditions."""
        cond = self.cond
        if cond.throttle_flow is not None and self.mode == "point":
            return cond.throttle_flow / self.m_design
        if cond.output is not None and self.mode == "point":
            return cond.output / self.model.generator.rating
        # wide open at a held throttle pressure: flow nearly proportional to it
        return self.p_fix[self.src] / self.model.throttle.pressure

    def guess(self) -> np.ndarray:
        """Design pressures scaled by flow with the ellipse law toward the exhaust."""
        m = self.model
        r = self.flow_ratio()
        exh = self.exhaust_idx[0]
        p_ex_d = self.p_design[exh]
        p_ex = self.p_fix[exh]
        x = np.empty(self.n)
        for k, i in enumerate(self.free):
            pd = self.p_design[i]
            x[k] = math.log(math.sqrt(max(p_ex * p_ex + (pd * pd - p_ex_d * p_ex_d) * r * r,
                                          (0.5 * pd * r) ** 2, 1.0)))
        for k, h in enumerate(self.active_heaters):
            e = m.extractions[m.heaters[h].extraction]
            x[self.n_p + k] = e.design_flow / self.m_design * r
        if self.flow_unknown:
            x[-1] = r
        if self.throttle_fixed and self.mode == "point":
            # start below the held throttle pressure, so the valves can pass the flow
            k_after = self.free.index(self.idx[m.valve.outlet])
            x[k_after] = min(x[k_after], math.log(self.p_fix[self.src] * 0.98))
        return x

    def scaled_guess(self, x_prev: np.ndarray, r_prev: float) -> np.ndarray:
        """A neighbour's solution scaled to this point's flow: pressures and bleeds
        nearly proportional to flow (ellipse law), used for continuation."""
        r = self.flow_ratio()
        x = np.array(x_prev, dtype=float)
        if r_prev > 0.0 and r > 0.0:
            f = r / r_prev
            exh = self.exhaust_idx[0]
            p_ex = self.p_fix[exh]
            for k in range(self.n_p):
                p = math.exp(x[k])
                x[k] = math.log(math.sqrt(max(p_ex * p_ex + (p * p - p_ex * p_ex) * f * f,
                                              (0.5 * p * f) ** 2)))
            x[self.n_p:self.n_p + self.n_h] *= f
            if self.flow_unknown:
                x[-1] *= f
        if self.throttle_fixed and self.mode == "point":
            k_after = self.free.index(self.idx[self.model.valve.outlet])
            x[k_after] = min(x[k_after], math.log(self.p_fix[self.src] * 0.995))
        return x

    # ---------------------------------------------------------------- residuals
    def residuals(self, x: np.ndarray) -> np.ndarray:
        try:
            return self.evaluate(x, detail=False)[0]
        except (ArithmeticError, ValueError) as exc:  # a trial state the laws cannot take
            raise _Bad(f"the equations cannot be evaluated at a trial point ({exc})") from None

    def evaluate(self, x, detail: bool = False):
        """Residuals at ``x``; with ``detail``, also the full state as a dict.

        The march of the last call is kept, so that the detailed state of the
        point Newton has just converged on costs no second march of the steam path.
        """
        steam = self.steam
        N = self.N
        xs = x.tolist() if isinstance(x, np.ndarray) else list(x)
        last = self._last
        if detail and last is not None and last[0] == xs:
            return self._detail(*last[1:])
        p = list(self.p_fix)
        exp = math.exp
        for k, i in enumerate(self.free):
            p[i] = exp(xs[k])
        md = self.m_design
        m_T = xs[-1] * md if self.flow_unknown else self.cond.throttle_flow
        if m_T is None or m_T <= 0.0:
            raise _Bad("no throttle flow")
        nh = self.n_p
        bleed_node = [0.0] * N
        bleed_flow = []
        heater_bleed = [0.0] * self.n_h
        for _name, i, kind, v in self.bleeds:
            if kind == 0:
                b = v
            elif kind == 1:
                b = v * m_T
            else:
                b = xs[nh + v] * md
                heater_bleed[v] = b
            bleed_flow.append(b)
            bleed_node[i] += b
        M = [0.0] * N
        E = [0.0] * N
        h = [0.0] * N
        hv = [math.nan] * N  # saturated vapour enthalpy at node pressure, when known
        hl = [math.nan] * N
        src = self.src
        M[src] = m_T
        h[src] = steam.h_pT(p[src], self.T_throttle)
        F = [0.0] * self.n_res
        row_of = self.row_of
        has_drop = self.has_drop
        p_design = self.p_design
        shaft = 0.0
        glist = []  # (name, expansion result) of every stage group, in march order
        dlist = []  # (kind, component, inlet, outlet, flow, outlet enthalpy) of the others
        valve_drop_needed = 0.0
        limit = 1e-9 * md
        for i in range(N):
            if i != src:
                if M[i] <= limit:
                    raise _Bad(f"no steam reaches node {self.names[i]!r}")
                h[i] = E[i] / M[i]
            outs = self.outs[i]
            if not outs:
                continue
            hi = h[i]
            pi = p[i]
            net = M[i] - bleed_node[i]
            out_flow = 0.0
            for kind, c, j in outs:
                if kind == 0:
                    if c.alpha and hi < H_DRY:
                        hvi = hv[i]
                        if hvi != hvi:  # node state not known from upstream
                            y_in = 1.0 - steam.x_ph(pi, hi)
                        elif hi >= hvi:
                            y_in = 0.0
                        else:
                            hli = hl[i]
                            if hli != hli:
                                hli = hl[i] = steam.h_liq_sat(pi)
                            y_in = (hvi - hi) / (hvi - hli)
                    else:
                        y_in = 0.0
                    r = c.expand(steam, pi, hi, p[j], y_in)
                    m = r[0]
                    h_out = r[1]
                    hv[j] = r[8]
                    if r[9] == r[9]:
                        hl[j] = r[9]
                    shaft += m * (hi - h_out)
                    glist.append((c.name, r))
                    out_flow += m
                elif kind == 3:  # holding its inlet pressure: passes the net flow
                    m = net
                    h_out = hi
                    dlist.append((kind, c, i, j, m, h_out))
                    out_flow = m
                else:
                    m = net
                    v = steam.v_ph(pi, hi)
                    if kind == 1 or kind == 4:
                        dp = c.wide_open_drop(m, v)
                        if kind == 1:
                            valve_drop_needed = dp
                        h_out = hi
                    else:
                        dp = c.drop(m, v)
                        h_out = c.outlet_enthalpy(steam, p[j], hi, self.T_reheat)
                    dlist.append((kind, c, i, j, m, h_out))
                    if row_of[i] >= 0:
                        F[row_of[i]] = (pi - p[j] - dp) / p_design[i]
                    out_flow = m
                M[j] += m
                E[j] += m * h_out
            if row_of[i] >= 0 and not has_drop[i]:
                F[row_of[i]] = (net - out_flow) / md
        p_gen = self.model.generator.output(shaft)
        k = len(self.node_rows)
        if self.fw is not None:
            res, _ = self.fw.evaluate(steam, p, h, heater_bleed, m_T, p[src])
            F[k:k + self.n_h] = res
            k += self.n_h
        if self.demand:
            F[k] = (p_gen - self.cond.output) / self.model.generator.rating
        F = np.array(F)
        self._last = (xs, F, p, h, M, m_T, bleed_flow, heater_bleed, shaft, p_gen,
                      valve_drop_needed, glist, dlist)
        if not detail:
            return F, None
        return self._detail(*self._last[1:])

    def _detail(self, F, p, h, M, m_T, bleed_flow, heater_bleed, shaft, p_gen,
                valve_drop_needed, glist, dlist):
        """The full state of a marched point, as a dict (see :func:`_build_result`)."""
        steam = self.steam
        drops = {}
        needed = {}  # wide-open drop of each holding control valve at its flow [Pa]
        for kind, c, i, j, m, h_out in dlist:
            drops[c.name] = (m, p[i] - p[j], h_out)
            if kind == 3:
                needed[c.name] = c.wide_open_drop(m, steam.v_ph(p[i], h[i]))
        summary = None
        if self.fw is not None:
            _, summary = self.fw.evaluate(steam, p, h, heater_bleed, m_T, p[self.src],
                                          detail=True)
        state = {"p": p, "h": h, "M": M, "m_T": m_T, "bleed_flow": bleed_flow,
                 "groups": dict(glist), "drops": drops, "shaft": shaft, "p_gen": p_gen,
                 "valve_drop_needed": valve_drop_needed, "feedwater": summary,
                 "control_valve_needed": needed}
        return F, state


def equations_for(model: Model, cond: Conditions, steam: SteamTables,
                  mode: str = "point", wide_open: frozenset = frozenset()) -> PointEquations:
    """The compiled equations for ``cond``, reused across points of the same structure."""
    key = (cond.governing, mode, cond.output is not None, cond.extraction_control,
           cond.heaters_out, steam.name, frozenset(wide_open))
    key = key + (threading.get_ident(),)  # one compiled copy per thread: it holds state
    cache = model.__dict__.setdefault("_equations", {})
    eq = cache.get(key)
    if eq is None:
        if len(cache) > 64:
            cache.clear()
        eq = cache[key] = PointEquations(model, cond, steam, mode, wide_open)
    else:
        eq.set_conditions(cond)
    return eq


def _wide_open(model: Model, cond: Conditions, steam: SteamTables, p_throttle: float):
    """Throttle flow and output with the valves wide open at ``p_throttle``."""
    c2 = override(cond, governing="throttle", throttle_pressure=p_throttle, output=None,
                  throttle_flow=model.throttle.flow)
    eq = equations_for(model, c2, steam, mode="wide_open")
    x0 = eq.guess()
    nr = newton(eq.residuals, x0, tol=TOL, names=eq.residual_names)
    _, st = eq.evaluate(nr.x, detail=True)
    return st["m_T"], st["p_gen"]


def solve_point(model: Model, cond: Conditions, steam: SteamTables | str | None = None,
                guess: np.ndarray | None = None, jacobian: np.ndarray | None = None,
                broyden: bool = True, check_limits: bool = True,
                neighbour: PointResult | None = None) -> PointResult:
    """Solve one operating point.

    Parameters
    ----------
    model : calibrated model
    cond : operating conditions
    steam : property backend or its name (default ``"seuif97"``)
    guess : starting unknowns (``PointResult.x`` of a point solved with the same
        unknowns); the design-scaled guess otherwise
    jacobian : starting Jacobian for the same unknowns
    broyden : Broyden updates between fresh Jacobians (``False``: plain Newton)
    check_limits : raise :class:`InfeasibleError` when the answer needs more
        than the valves wide open can pass
    neighbour : a solved neighbouring point with the same unknowns; its solution
        scaled to this flow and its Jacobian start the iteration (continuation)

    Raises
    ------
    ConvergenceError, InfeasibleError, PropertyRangeError
    """
    if steam is None or isinstance(steam, str):
        steam = get_backend(steam or "seuif97")
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
    except SolveError as exc:
        raise _with_request(exc, cond, eq) from None
    result = _build_result(model, cond, steam, eq, nr, F, st)
    r = eq.flow_ratio()
    result.flow_ratio = r
    result.wide_open_valves = wide
    if scaled is not None and abs(r - neighbour.flow_ratio) > 1e-9:
        result.x_slope = (nr.x - scaled) / (r - neighbour.flow_ratio)
        result.slope_from = neighbour.flow_ratio
        if neighbour.x_slope is not None and abs(r - neighbour.slope_from) > 1e-9:
            # second divided difference, for a quadratic predictor at the next point
            result.x_curvature = ((result.x_slope - neighbour.x_slope)
                                  / (r - neighbour.slope_from))
    return result


def _solve_structure(eq: PointEquations, steam, guess, jacobian, broyden, neighbour):
    """Newton on one set of equations; returns ``(newton result, state, F, scaled)``."""
    shape = (eq.n_res, eq.n)
    r = eq.flow_ratio()
    scaled = None
    if (neighbour is not None and neighbour.x is not None and len(neighbour.x) == eq.n
            and guess is None and neighbour.wide_open_valves == eq.wide_open):
        scaled = eq.scaled_guess(neighbour.x, neighbour.flow_ratio)
        guess = scaled
        step = r - neighbour.flow_ratio
        if neighbour.x_slope is not None and abs(step) < 0.15:
            guess = scaled + neighbour.x_slope * step  # secant predictor along the load
            if neighbour.x_curvature is not None:  # quadratic through three points
                guess = guess + neighbour.x_curvature * step * (r - neighbour.slope_from)
        jacobian = neighbour.jacobian if jacobian is None else jacobian
    usable = guess is not None and len(guess) == eq.n
    x0 = np.asarray(guess, float) if usable else eq.guess()
    jac = jacobian if (jacobian is not None and usable
                       and np.shape(jacobian) == shape) else None
    try:
        nr = newton(eq.residuals, x0, tol=TOL, names=eq.residual_names, jacobian=jac,
                    broyden=broyden)
    except ConvergenceError:
        if not usable:
            raise
        nr = newton(eq.residuals, eq.guess(), tol=TOL, names=eq.residual_names,
                    broyden=broyden)
    F, st = eq.evaluate(nr.x, detail=True)
    return nr, st, F, scaled


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
    if cond.governing == "throttle":
        what += f" at a held throttle pressure of {eq.p_fix[eq.src] / 1e5:.2f} bar"
    return what


def _with_request(exc: SolveError, cond: Conditions, eq: PointEquations) -> SolveError:
    """The error with its message led by what was asked; a trial-point failure becomes an
    :class:`InfeasibleError` (the request leaves no state the laws can take)."""
    asked = _asked(cond, eq)
    text = str(exc)
    if isinstance(exc, _Bad):
        return InfeasibleError(f"{asked} cannot be met: {text} (fixed extraction flows may "
                               f"take more steam than arrives, or the conditions leave no "
                               f"steam state)")
    if not text.startswith((asked, "an output of", "a throttle flow of")):
        exc.args = (f"{asked}: {text}",)
    return exc


def _check_physical(model, cond, steam, eq, st):
    """Refuse answers no machine can give, whatever the limit checks: water at the
    throttle, pressures rising through a stage group, negative bleeds."""
    p = st["p"]
    names = eq.names
    p_T = p[eq.src]
    T_T = eq.T_throttle
    T_sat = T_CRIT if p_T >= P_CRIT else steam.T_sat(p_T)  # critical point, IAPWS R7-97
    if T_T <= T_sat:
        raise InfeasibleError(
            f"the throttle pressure would be {p_T / 1e5:.2f} bar, where the throttle "
            f"temperature {T_T - 273.15:.1f} degC is not above the saturation temperature "
            f"{T_sat - 273.15:.1f} degC: the turbine would receive water, not steam")
    for i, outs in enumerate(eq.outs):
        for kind, c, j in outs:
            if kind == 0 and p[j] >= p[i]:
                raise InfeasibleError(
                    f"no pressure ordering exists for this request: stage group {c.name!r} "
                    f"would need its outlet pressure ({p[j] / 1e5:.4g} bar at "
                    f"{names[j]!r}) above its inlet ({p[i] / 1e5:.4g} bar); "
                    f"the exhaust pressure may be too high for this flow")
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
    after = eq.idx[model.valve.outlet]
    asked = (f"an output of {cond.output / 1e6:.2f} MW" if cond.output is not None
             else f"a throttle flow of {st['m_T']:.2f} kg/s")
    if cond.governing == "throttle":
        available = p_T - p[after]
        # valves-wide-open drop to 1e-5 of throttle pressure: the design point itself
        # sits on that limit, and its exact value moves by pascals with the back pressure
        if available < st["valve_drop_needed"] - 1e-5 * p_T:
            m_max, P_max = _wide_open(model, cond, steam, p_T)
            raise InfeasibleError(
                f"{asked} is beyond the valves-wide-open capacity at the held throttle "
                f"pressure {p_T / 1e5:.2f} bar: maximum throttle flow {m_max:.2f} kg/s, "
                f"maximum output {P_max / 1e6:.2f} MW")
    else:
        p_max = model.throttle.max_pressure
        if p_T > p_max * (1.0 + 1e-9):
            m_max, P_max = _wide_open(model, cond, steam, p_max)
            raise InfeasibleError(
                f"{asked} needs a throttle pressure of {p_T / 1e5:.2f} bar, above the highest "
                f"allowed {p_max / 1e5:.2f} bar: maximum throttle flow {m_max:.2f} kg/s, "
                f"maximum output {P_max / 1e6:.2f} MW")


def _build_result(model, cond, steam, eq, nr, F, st) -> PointResult:
    names = eq.names
    p, h = st["p"], st["h"]
    N = len(names)
    T = np.empty(N)
    s = np.empty(N)
    x = np.empty(N)
    for i in range(N):
        try:
            T[i], s[i], x[i] = steam.Tsx_ph(p[i], h[i])
        except PropertyRangeError:
            T[i] = s[i] = x[i] = math.nan
    gnames = [c.name for c in model.groups]
    G = len(gnames)
    arr = {k: np.zeros(G) for k in ("m", "eta", "dhs", "P", "V", "L", "y")}
    for k, c in enumerate(model.groups):
        r = st["groups"][c.name]
        i = eq.idx[c.inlet]
        arr["m"][k], arr["eta"][k], arr["dhs"][k] = r[0], r[3], r[4]
        arr["P"][k] = r[0] * (h[i] - r[1])
        arr["V"][k], arr["L"][k], arr["y"][k] = r[6], r[7], r[5]
    ex_names = [b[0] for b in eq.bleeds]
    ex_nodes = [names[b[1]] for b in eq.bleeds]
    ex_flow = np.array(st["bleed_flow"], float)
    ex_p = np.array([p[b[1]] for b in eq.bleeds], float)
    ex_h = np.array([h[b[1]] for b in eq.bleeds], float)
    m_T = st["m_T"]
    src = eq.src
    after = eq.idx[model.valve.outlet]
    exhaust_loss_power = 0.0
    for c in model.groups:
        if c.exhaust is not None:
            r = st["groups"][c.name]
            exhaust_loss_power += r[0] * (r[1] - r[2])
    exh_y = [arr["y"][k] for k, c in enumerate(model.groups) if c.exhaust is not None]
    P_gen = st["p_gen"]
    totals = {
        "throttle_flow": m_T,
        "throttle_pressure": p[src],
        "throttle_temperature": eq.T_throttle,
        "valve_pressure_drop": p[src] - p[after],
        "shaft_power": st["shaft"],
        "generator_output": P_gen,
        "generator_and_mechanical_losses": st["shaft"] - P_gen,
        "steam_rate": m_T / P_gen if P_gen > 0 else math.nan,
        "exhaust_loss_power": exhaust_loss_power,
        "exhaust_moisture": max(exh_y) if exh_y else 0.0,
        "exhaust_flow": sum(st["M"][eq.idx[n]] for n in model.exhaust_nodes),
    }
    reheat = 0.0
    path_names = ([model.valve.name] + [c.name for c in model.paths]
                  + [c.name for c in model.control_valves])
    path_heat = []
    for name in path_names:
        m, _dp, h_out = st["drops"][name]
        comp = model.component(name)
        q = m * (h_out - h[eq.idx[comp.inlet]]) if getattr(comp, "is_reheater", False) else 0.0
        path_heat.append(q)
        reheat += q
    totals["reheat_heat"] = reheat
    heaters: list[HeaterState] = []
    fw = st["feedwater"]
    h_T = h[src]
    if fw is not None:
        heaters = list(fw["heaters"].values())
        boiler = m_T * (h_T - fw["h_feedwater"]) + reheat
        totals["final_feedwater_temperature"] = fw["T_feedwater"]
        totals["heat_added"] = boiler
        totals["heat_rate"] = boiler / P_gen if P_gen > 0 else math.nan
        totals["pump_power"] = fw["pump_power"]
        # condenser: exhaust steam + drains + makeup in, condensate out
        exhaust_energy = sum(st["M"][eq.idx[n]] * h[eq.idx[n]] for n in model.exhaust_nodes)
        m_ex = totals["exhaust_flow"]
        makeup = fw["m_condensate"] - m_ex - fw["drains_to_condenser"]
        totals["makeup_flow"] = makeup
        h_c = fw["h_condensate"]
        totals["condenser_duty"] = (exhaust_energy + fw["drains_to_condenser"]
                                    * fw["h_drains_to_condenser"] + makeup * h_c
                                    - fw["m_condensate"] * h_c)
        heater_loss = sum(hs.steam_release - hs.duty for hs in heaters if hs.in_service)
        totals["heater_heat_loss"] = heater_loss
        process = sum(f * hh for f, hh, b in zip(ex_flow, ex_h, eq.bleeds) if b[2] != 2)
        totals["process_steam_energy"] = process - makeup * h_c
        # heat chargeable to power: the heat added less the net enthalpy that leaves
        # with process steam (returned as make-up at condensate enthalpy); equal to
        # heat_rate for a unit without process steam
        totals["heat_rate_power"] = ((boiler - totals["process_steam_energy"]) / P_gen
                                     if P_gen > 0 else math.nan)
        totals["energy_imbalance"] = (boiler + fw["pump_power"] - st["shaft"]
                                      - totals["condenser_duty"] - heater_loss
                                      - totals["process_steam_energy"])
    else:
        totals["reheat_heat"] = reheat
    return PointResult(
        converged=True, iterations=nr.iterations, residual=nr.residual,
        evaluations=nr.evaluations, message="converged", model_name=model.name,
        governing=cond.governing, backend=steam.name, node_names=list(names), node_p=np.array(p),
        node_T=T, node_h=np.array(h), node_s=s, node_x=x, group_names=gnames,
        group_inlet=[c.inlet for c in model.groups], group_outlet=[c.outlet for c in model.groups],
        group_flow=arr["m"], group_eta=arr["eta"], group_dh_s=arr["dhs"], group_power=arr["P"],
        group_velocity=arr["V"], group_exhaust_loss=arr["L"], group_moisture_out=arr["y"],
        extraction_names=ex_names, extraction_nodes=ex_nodes,
        extraction_control=list(eq.bleed_control), extraction_flow=ex_flow, extraction_p=ex_p,
        extraction_h=ex_h, heaters=heaters, totals=totals, x=nr.x, jacobian=nr.jacobian,
        path_names=path_names, path_inlet=[model.component(n).inlet for n in path_names],
        path_outlet=[model.component(n).outlet for n in path_names],
        path_flow=np.array([st["drops"][n][0] for n in path_names]),
        path_pressure_drop=np.array([st["drops"][n][1] for n in path_names]),
        path_heat=np.array(path_heat))
