"""The equations of one operating point, compiled for a structure.

Unknowns
    * ``ln p`` at every node whose pressure is not fixed (exhaust nodes are
      fixed by the back pressure, unless a kind that frees its node, a
      condenser, sets it and the case does not give it; the throttle node
      under a held throttle pressure; the inlet of a control valve holding it);
    * the bleed flow of every in-service heater, over design throttle flow;
    * the throttle flow, over its design value, when an output is demanded or
      in the ``wide_open`` mode.

Residuals (all dimensionless)
    * mass balance at each free node, over design throttle flow;
    * at the inlet node of a component that passes the whole net flow of its
      node (valve, reheater, pipe), its pressure-drop law instead, over the
      node's design pressure;
    * at a freed exhaust node, its kind's law (``residual``);
    * each heater's energy balance, over its design duty;
    * generator output minus demand, over the rating.

A march in topological order gives every flow and enthalpy from the unknowns:
each steam-path component evaluates its own law
(:meth:`simulator.components.SteamPathComponent.evaluate`), so the system stays
small (one equation per node and heater) and knows no kind by name.
"""

from __future__ import annotations

import math
import threading

import numpy as np

from ..errors import SolveError
from ..plant.case import Conditions
from ..plant.model import Model
from ..plant.water_side import FeedwaterMarch, heat_rejected
from ..steam.if97 import SteamTables, remembering

__all__ = ["PointEquations", "equations_for", "TrialPointError"]


class TrialPointError(SolveError):
    """A trial point of the iteration with no steam reaching a node, or a state the
    laws cannot take."""


class PointEquations:
    """The residual system of one operating point, compiled for speed.

    ``mode`` is ``"point"`` (throttle flow or output as the conditions say) or
    ``"wide_open"`` (throttle pressure held at ``conditions.throttle_pressure``
    with the valves wide open; the throttle flow is the unknown).

    The structure (unknowns, residual rows, the compiled water side) depends
    only on the valve and pressure modes, on whether an output is demanded, on the
    extraction controls and on the heaters out of service; it is built once per
    model and kept (:func:`equations_for`).  The operating values are set by
    :meth:`set_conditions`.
    """

    def __init__(self, model: Model, cond: Conditions, steam: SteamTables,
                 mode: str = "point", wide_open: frozenset = frozenset()):
        self.model = model
        self.wide_open = frozenset(wide_open)  # control valves that are wide open
        self.steam = steam
        self.raw_steam = steam
        self.memo_steam = remembering(steam)  # while a Jacobian is formed
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
        # kinds at a node that set its pressure by their own law (condensers), in model
        # order; their nodes are unknowns unless the case gives the exhaust pressure
        self.at_nodes = [(c, idx[c.node]) for c in model.components if c.frees_node]
        given = _given_node_pressures(cond)
        self.freed = ([i for c, i in self.at_nodes if c.name not in given]
                      if cond.exhaust_pressure is None else [])
        self.throttle_fixed = cond.pressure_mode == "fixed" or mode == "wide_open"
        # the admission (throttle valve or governing stage) takes what the flow leaves
        self.admission_throttles = self.throttle_fixed and mode == "point"
        # control valves that throttle hold their inlet pressure
        self.holding = [(idx[c.inlet], c) for c in model.control_valves
                        if c.name not in self.wide_open]
        fixed = ((set(self.exhaust_idx) - set(self.freed))
                 | ({self.src} if self.throttle_fixed else set())
                 | {i for i, _ in self.holding})
        self.free = [i for i in range(N) if i not in fixed]
        self.p_design = [model.design_pressure[n] for n in names]
        self.m_design = model.throttle.flow
        # outgoing steam-path components per node: (component, outlet index); a node
        # whose component passes its net flow keeps that component's law as its residual
        self.outs: list[list] = [[] for _ in range(N)]
        self.passes_net = [False] * N
        for i, n in enumerate(names):
            for succ in g.successors(n):
                c = g.edges[n, succ]["component"]
                self.outs[i].append((c, idx[succ]))
                self.passes_net[i] = not c.sets_flow
        # extractions
        controls = cond.controls()
        self.heaters_out = frozenset(cond.heaters_out)
        self.fw = (FeedwaterMarch(model, self.heaters_out, node_names=names)
                   if model.feedwater is not None and model.heaters else None)
        self.active_heaters = list(self.fw.active) if self.fw else []
        self.bleeds = []  # (name, node index, kind, value) kind: 0 fixed, 1 fraction, 2 heater
        self.bleed_control = []
        self.bleed_share = []  # an extraction's share of its heater's bleed (paired bleeds)
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
            htr = model.heaters.get(e.heater) if e.heater else None
            self.bleed_share.append(htr.shares[htr.extractions.index(e.name)]
                                    if kind == 2 else 1.0)
        # unknown layout
        self.n_p = len(self.free)
        self.n_h = len(self.active_heaters)
        # steam-path kinds whose flow is an unknown (feed-pump turbines), after the bleeds
        self.flow_comps = [c for c in model.steam_path if c.flow_unknown]
        self.n_c = len(self.flow_comps)
        if self.flow_comps and self.fw is None:
            raise SolveError(f"{self.flow_comps[0].title} {self.flow_comps[0].name!r} drives a "
                             f"pump of the feedwater train, and the model has none")
        self.drive_steps = any(not c.drives_generator for c in model.steam_path)
        self.component_flow: dict[str, float] = {}
        self.demand = cond.output is not None and mode == "point"
        self.flow_unknown = self.demand or mode == "wide_open"
        self.n = self.n_p + self.n_h + self.n_c + (1 if self.flow_unknown else 0)
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
        self.n_res = len(rows) + self.n_h + self.n_c + (1 if self.demand else 0)
        self.residual_names = []
        law_at = {i: c for c, i in self.at_nodes if i in self.freed}
        for i in rows:
            kind = ("pressure drop after" if self.passes_net[i] else
                    f"{law_at[i].title} law at" if i in law_at else "mass balance at")
            self.residual_names.append(f"{kind} node {names[i]!r}")
        self.residual_names += [f"energy balance of heater {h!r}" for h in self.active_heaters]
        self.residual_names += [f"power balance of {c.title} {c.name!r}"
                                for c in self.flow_comps]
        if self.demand:
            self.residual_names.append("generator output demand")
        self.unknown_names = ([f"ln p({names[i]})" for i in self.free]
                              + [f"bleed({h})/m_design" for h in self.active_heaters]
                              + [f"flow({c.name})/m_design" for c in self.flow_comps]
                              + (["throttle flow/m_design"] if self.flow_unknown else []))
        self._last = None
        self.set_conditions(cond)

    def set_conditions(self, cond: Conditions) -> None:
        """Set the operating values (flow or demand, pressures, temperatures)."""
        model = self.model
        self.cond = cond
        self._last = None
        # attemperator sprays: water added at the reheater's outlet, and taken from the
        # water side after the spray pump (the superheater's only when it takes it there)
        rh = cond.reheater_spray or 0.0
        sh = cond.superheater_spray or 0.0
        fw = model.feedwater
        self.added = {model.reheaters[0].name: rh} if rh else {}
        self.sh_from_pump = sh if sh and fw.superheater_spray_from == "pump" else 0.0
        taken = rh + self.sh_from_pump
        self.offtakes = {fw.spray_pump: taken} if taken else None
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
        if cond.exhaust_pressure is None:  # a condenser whose pressure the case gives
            given = _given_node_pressures(cond)
            for c, i in self.at_nodes:
                if c.name in given:
                    p_fix[i] = given[c.name]
        self.p_fix = p_fix
        self.T_throttle = (cond.throttle_temperature if cond.throttle_temperature is not None
                           else model.throttle.temperature)
        self.settings = {(name, key): value for _t, name, key, value in cond.settings}
        self.T_reheat = cond.reheat_temperature

    def setting(self, component, key: str, default):
        """A component's case setting ``key`` (SI), or ``default`` when the case
        leaves it unset (what a kind reads while it evaluates)."""
        return self.settings.get((component.name, key), default)

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
            design = sum(m.extractions[n].design_flow for n in m.heaters[h].extractions)
            x[self.n_p + k] = design / self.m_design * r
        for q, c in enumerate(self.flow_comps):
            x[self.n_p + self.n_h + q] = c.design_flow / self.m_design * r
        if self.flow_unknown:
            x[-1] = r
        if self.throttle_fixed and self.mode == "point":
            # start below the held throttle pressure, so the valves can pass the flow
            k_after = self.free.index(self.idx[m.admission.outlet])
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
            x[self.n_p:self.n_p + self.n_h + self.n_c] *= f
            if self.flow_unknown:
                x[-1] *= f
        if self.throttle_fixed and self.mode == "point":
            k_after = self.free.index(self.idx[self.model.admission.outlet])
            x[k_after] = min(x[k_after], math.log(self.p_fix[self.src] * 0.995))
        return x

    def jacobian(self, fun, x: np.ndarray, F: np.ndarray | None):
        """Residuals and Jacobian at ``x`` [-]: ``(F, J)``, the derivatives carried
        along the march (:func:`~simulator.solve.tangent.tangent_jacobian`: a few
        evaluations of each component instead of a march a column).  ``fun`` is
        the residual function Newton counts evaluations with (the base
        point is marched through it once); ``F = fun(x)`` when known, ``None``
        otherwise."""
        from .tangent import tangent_jacobian

        return tangent_jacobian(self, fun, x, F)

    # ---------------------------------------------------------------- residuals
    def residuals(self, x: np.ndarray) -> np.ndarray:
        try:
            return self.evaluate(x, detail=False)[0]
        except (ArithmeticError, ValueError) as exc:  # a trial state the laws cannot take
            raise TrialPointError(
                f"the equations cannot be evaluated at a trial point ({exc})") from None

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
            raise TrialPointError("no throttle flow")
        nh = self.n_p
        bleed_node = [0.0] * N
        bleed_flow = []
        heater_bleed = [0.0] * self.n_h
        for (_name, i, kind, v), share in zip(self.bleeds, self.bleed_share):
            if kind == 0:
                b = v
            elif kind == 1:
                b = v * m_T
            else:
                b = xs[nh + v] * md * share
                heater_bleed[v] += b
            bleed_flow.append(b)
            bleed_node[i] += b
        nc = self.n_p + self.n_h
        for q, c in enumerate(self.flow_comps):
            self.component_flow[c.name] = xs[nc + q] * md
        src = self.src
        M = [0.0] * N
        E = [0.0] * N
        h = [0.0] * N
        hv = [math.nan] * N  # saturated vapour enthalpy at node pressure, when known
        hl = [math.nan] * N
        M[src] = m_T
        h[src] = steam.h_pT(p[src], self.T_throttle)
        F = [0.0] * self.n_res
        shaft = 0.0
        steps = []  # (component, inlet, outlet, flow, outlet enthalpy, power, record)
        row_of = self.row_of
        passes_net = self.passes_net
        p_design = self.p_design
        self.p, self.h, self.hv, self.hl = p, h, hv, hl  # what the components read
        trace = 1e-9 * md  # a flow this small means no steam reaches the node
        for i in range(N):
            if i != src:
                if M[i] <= trace:
                    raise TrialPointError(f"no steam reaches node {self.names[i]!r}")
                h[i] = E[i] / M[i]
            outs = self.outs[i]
            if not outs:
                continue
            net = M[i] - bleed_node[i]
            out_flow = 0.0
            for c, j in outs:
                if c.sets_flow:  # its own flow law; the node keeps a mass balance
                    m, h_out, power, rec = c.evaluate(self, i, j, net)
                    shaft += power
                    out_flow += m
                else:  # passes the net flow; its pressure-drop law is the node's residual
                    m = net
                    h_out, dp, power, rec = c.evaluate(self, i, j, m)
                    shaft += power
                    if dp is not None and row_of[i] >= 0:
                        F[row_of[i]] = (p[i] - p[j] - dp) / p_design[i]
                    out_flow = m
                steps.append((c, i, j, m, h_out, power, rec))
                if self.added and c.name in self.added:
                    m = m + self.added[c.name]  # spray water leaves at the outlet state
                M[j] += m
                E[j] += m * h_out
            if row_of[i] >= 0 and not passes_net[i]:
                F[row_of[i]] = (net - out_flow) / md
        drive = 0.0
        if self.drive_steps:  # power that turns pumps, not the generator
            for s in steps:
                if not s[0].drives_generator:
                    drive += s[5]
            shaft -= drive
        comp_power = [sum(s[5] for s in steps if s[0] is c) for c in self.flow_comps]
        P_gen, summary = self.close(F, p, h, M, heater_bleed, m_T, shaft, comp_power)
        F = np.array(F)
        self._last = (xs, F, p, h, M, m_T, bleed_flow, heater_bleed, shaft, P_gen, steps,
                      summary)
        if not detail:
            return F, None
        return self._detail(*self._last[1:])

    def close(self, F: list, p, h, M, heater_bleed, m_T: float, shaft: float,
              comp_power) -> tuple:
        """The residuals that follow the steam-path march, written into ``F``:
        the water side's heater balances, the power balances of kinds whose flow
        is an unknown, the laws of freed nodes and the output demand.

        They read the march only through the node pressures ``p`` [Pa],
        enthalpies ``h`` [J/kg] and flows ``M`` [kg/s], the heaters' bleeds
        ``heater_bleed`` [kg/s], the throttle flow ``m_T`` [kg/s], the shaft
        power that turns the generator ``shaft`` [W] and the power of each kind
        whose flow is an unknown ``comp_power`` [W] (which the Jacobian's
        directional differences rely on).  Returns ``(generator output [W],
        water-side summary or None)``.
        """
        steam = self.steam
        P_gen = self.model.generator.output(shaft)
        k = len(self.node_rows)
        summary = None
        if self.fw is not None:
            res, summary = self.fw.evaluate(steam, p, h, heater_bleed, m_T - self.sh_from_pump,
                                            p[self.src], offtakes=self.offtakes)
            F[k:k + self.n_h] = res
            k += self.n_h
            for c, power in zip(self.flow_comps, comp_power):
                F[k] = c.residual(power, summary["pump_powers"][c.pump])
                k += 1
        if self.freed:
            records = self.node_states(p, h, M, summary)
            row_of = self.row_of
            for c, i in self.at_nodes:
                if row_of[i] >= 0:
                    F[row_of[i]] = c.residual(p[i], records[c.name], steam)
        if self.demand:
            F[k] = (P_gen - self.cond.output) / self.model.generator.rating
        return P_gen, summary

    def node_states(self, p, h, M, summary) -> dict:
        """The state of each kind at a node (a condenser: the heat it rejects, its
        cooling water), in model order, from the marched ``p``, ``h``, ``M`` and the
        water side's ``summary``."""
        fw_node = self.idx[self.model.feedwater.condenser] if self.fw is not None else None
        duty = {c.name: heat_rejected(i, self.exhaust_idx, M, h, p, self.steam, summary,
                                      fw_node) for c, i in self.at_nodes}
        circuit = dict(duty)  # heat of each shell and of the shells after it in series
        for c, _i in reversed(self.at_nodes):
            if getattr(c, "after", None) is not None:
                circuit[c.after] += circuit[c.name]
        out = {}
        for c, _i in self.at_nodes:
            out[c.name] = c.node_state(duty[c.name], self, out, circuit[c.name])
        return out

    def _detail(self, F, p, h, M, m_T, bleed_flow, heater_bleed, shaft, P_gen, steps,
                summary):
        """The full state of a marched point, as a dict (see :func:`build_result`);
        the water side's detail is completed from its march (``summary``)."""
        steam = self.steam
        by_name = {s[0].name: s for s in steps}
        needed = {}  # wide-open drop of each holding control valve at its flow [Pa]
        for c in self.model.control_valves:
            if c.name not in self.wide_open:
                _c, i, _j, m, _h, _P, _r = by_name[c.name]
                needed[c.name] = c.wide_open_drop(m, steam.v_ph(p[i], h[i]))
        if summary is not None:
            summary = self.fw.add_detail(steam, summary)
        records = self.node_states(p, h, M, summary) if self.at_nodes else {}
        state = {"p": p, "h": h, "M": M, "m_T": m_T, "bleed_flow": bleed_flow,
                 "steps": by_name, "shaft": shaft, "P_gen": P_gen,
                 "admission": by_name[self.model.admission.name][6],
                 "feedwater": summary, "control_valve_needed": needed,
                 "node_records": records}
        return F, state


def _given_node_pressures(cond: Conditions) -> dict[str, float]:
    """Pressures [Pa] a case gives for kinds at a node (a condenser's ``pressure``
    setting), by component name."""
    return {name: value for _t, name, key, value in cond.settings if key == "pressure"}


def equations_for(model: Model, cond: Conditions, steam: SteamTables,
                  mode: str = "point", wide_open: frozenset = frozenset()) -> PointEquations:
    """The compiled equations for ``cond``, reused across points of the same structure."""
    key = (cond.valve_mode, cond.pressure_mode, mode, cond.output is not None,
           cond.exhaust_pressure is None, frozenset(_given_node_pressures(cond)),
           cond.extraction_control, cond.heaters_out, steam.name, frozenset(wide_open))
    key = key + (threading.get_ident(),)  # one compiled copy per thread: it holds state
    cache = model.solver_cache
    eq = cache.get(key)
    if eq is None:
        if len(cache) > 64:
            cache.clear()
        eq = cache[key] = PointEquations(model, cond, steam, mode, wide_open)
    else:
        eq.set_conditions(cond)
    return eq
