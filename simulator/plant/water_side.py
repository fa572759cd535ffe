"""The water side of the cycle: condensate and feedwater through pumps and heaters.

:class:`FeedwaterMarch` is compiled once for a model and a set of heaters out of
service.  Given the turbine state (node pressures and enthalpies), the bleed
flow of every heater and the feedwater flow, it marches the water from the
condenser to the boiler and returns every heater's state and the residual of
its energy balance.  The physics is in :mod:`simulator.physics.heater`,
:mod:`simulator.physics.feedwater` and :mod:`simulator.physics.pump`.

Flows are found first (drains cascade from high to low pressure; the
condensate flow follows from the feedwater flow less what enters at the
deaerator and at forward-pumped drains), then enthalpies in water order, then
the energy balances, which need the drain enthalpies of the heaters above.
"""

from __future__ import annotations

from dataclasses import dataclass

import networkx as nx

from ..errors import InputError
from ..physics import performance as perf
from ..physics.feedwater import mixed_enthalpy, pumped_drain_enthalpy
from ..physics.heater import (
    deaerator_outlet_enthalpy,
    drain_outlet_enthalpy,
    feedwater_duty,
    heater_balance_residual,
    steam_release,
)
from ..steam.constants import P_CRIT

__all__ = ["FeedwaterMarch", "HeaterState", "design_feedwater_states", "heat_rejected",
           "design_heat_rejected", "design_water_summary"]


@dataclass
class HeaterState:
    """State of one heater at a solved point (SI units)."""

    name: str
    in_service: bool
    heater_type: str = "closed"  # "closed" or "deaerator"
    bleed: float = 0.0  # [kg/s]
    shell_pressure: float = 0.0  # [Pa]
    T_sat: float = 0.0  # [K]
    T_in: float = 0.0  # feedwater in [K]
    T_out: float = 0.0  # feedwater out [K]
    T_drain: float = 0.0  # [K]
    h_in: float = 0.0
    h_out: float = 0.0
    h_drain: float = 0.0
    h_bleed: float = 0.0
    m_water: float = 0.0  # [kg/s]
    drain_flow: float = 0.0  # drain flow leaving the heater [kg/s]
    duty: float = 0.0  # [W]
    steam_release: float = 0.0  # [W]
    ttd: float = 0.0  # [K]
    dca: float = 0.0  # [K]
    residual: float = 0.0  # [-]


class FeedwaterMarch:
    """Compiled water-side march for one model and one set of heaters out of service.

    Heaters are addressed by their position in :attr:`active` (the in-service
    heaters in model order) and nodes by their index in ``node_names``.
    """

    def __init__(self, model, out_of_service: frozenset[str] = frozenset(), file=None,
                 node_names: list[str] | None = None):
        fw = model.feedwater
        self.model = model
        self.heaters = model.heaters
        self.pumps = model.pumps
        self.order = list(fw.order)
        self.condenser = fw.condenser
        self.boiler = fw.boiler
        self.out = frozenset(out_of_service)
        for name in self.out:
            if self.heaters[name].heater_type == "deaerator":
                raise InputError("a deaerator cannot be taken out of service here; the cycle "
                                 "has no other place to degas and store feedwater", file=file,
                                 table=f"heaters.{name}", key="in_service")
        self.active = [h for h in self.heaters if h not in self.out]
        # where each active closed heater's drains really go
        self.dest: dict[str, str] = {}
        for h in self.active:
            if self.heaters[h].heater_type != "closed":
                continue  # a deaerator's outflow is the feedwater itself
            d = self.heaters[h].drain_to
            seen = {h}
            while d in self.out:
                if d in seen:
                    raise InputError("drain routing loops through heaters out of service",
                                     file=file, table="heaters")
                seen.add(d)
                hd = self.heaters[d]
                d = hd.drain_to_when_out or hd.drain_to
            self.dest[h] = d
        cascade = nx.DiGraph()
        cascade.add_nodes_from(self.active)
        cascade.add_edges_from((h, d) for h, d in self.dest.items() if d in self.heaters)
        self.drains_into: dict[str, list[str]] = {h: [] for h in self.heaters}
        self.drains_into["condenser"] = []
        for h, d in self.dest.items():
            if d in self.drains_into:
                self.drains_into[d].append(h)
        # ---- compiled, index-based form used by evaluate() -----------------------
        names = node_names if node_names is not None else list(model.order)
        nidx = {n: i for i, n in enumerate(names)}
        pos = {h: k for k, h in enumerate(self.active)}
        self._pos = pos
        self._n = len(self.active)
        self._cascade = [(pos[h], [pos[j] for j in self.drains_into[h]])
                         for h in nx.topological_sort(cascade) if h in self.dest]
        # each heater's extraction nodes with their shares of its bleed (paired bleeds
        # at matching nodes of parallel branches; one node for most heaters)
        self._ext_nodes = [[(nidx[model.extractions[n].node], sh) for n, sh in zip(
            self.heaters[h].extractions, self.heaters[h].shares)] for h in self.active]
        self._ext_node = [nodes[0][0] for nodes in self._ext_nodes]
        self._paired = any(len(nodes) > 1 for nodes in self._ext_nodes)
        self._cond = nidx[self.condenser]
        self._into = [[pos[j] for j in self.drains_into[h]] for h in self.active]
        self._to_cond = [pos[j] for j in self.drains_into["condenser"]]
        # water order: (kind, object, position) kind 0 pump, 1 closed, 2 deaerator, 3 out
        steps = []
        for item in self.order:
            if item in self.pumps:
                steps.append((0, self.pumps[item], -1, item))
            elif item in self.out:
                steps.append((3, self.heaters[item], -1, item))
            elif self.heaters[item].heater_type == "deaerator":
                steps.append((2, self.heaters[item], pos[item], item))
            else:
                steps.append((1, self.heaters[item], pos[item], item))
        self._steps = steps
        self._forward = [self.dest.get(h) == "forward" for h in self.active]
        self._active_heaters = [self.heaters[h] for h in self.active]

    def evaluate(self, steam, p_node, h_node, bleed, m_fw: float, p_throttle: float,
                 detail: bool = False, offtakes: dict | None = None):
        """March the water side.

        Parameters
        ----------
        steam : property backend
        p_node, h_node : node pressures [Pa] and enthalpies [J/kg], indexed like
            ``node_names`` given at construction (default: the model's order)
        bleed : bleed flow of each heater in :attr:`active` [kg/s]
        m_fw : feedwater flow to the boiler [kg/s]
        p_throttle : throttle pressure [Pa], for the feed-pump discharge
        offtakes : water taken after a pump, by pump name [kg/s] (attemperator
            sprays): that pump and those before it carry it too

        Returns
        -------
        residuals : list, normalised energy-balance residual of each active heater [-]
        summary : dict with ``h_feedwater`` [J/kg], ``p_feedwater`` [Pa],
            ``m_condensate``, ``drains_to_condenser`` [kg/s],
            ``h_drains_to_condenser``, ``h_condensate`` [J/kg], ``pump_power`` [W]
            (``pump_powers``: each pump's by name)
            and, when ``detail``, ``T_feedwater`` [K] and ``heaters``: dict of
            :class:`HeaterState` in water order.
        """
        n = self._n
        if self._paired:  # the bleeds' mixed state: design shares of mass
            p_ext = [sum(sh * p_node[i] for i, sh in nodes) for nodes in self._ext_nodes]
            h_ext = [sum(sh * h_node[i] for i, sh in nodes) for nodes in self._ext_nodes]
        else:
            p_ext = [p_node[i] for i in self._ext_node]
            h_ext = [h_node[i] for i in self._ext_node]
        drain_flow = [0.0] * n
        for k, into in self._cascade:
            d = bleed[k]
            for j in into:
                d += drain_flow[j]
            drain_flow[k] = d
        # water flows, from the boiler backwards
        steps = self._steps
        through = [0.0] * len(steps)
        m = m_fw
        for s in range(len(steps) - 1, -1, -1):
            kind, _, k, _ = steps[s]
            if kind == 2:
                m -= bleed[k]
                for j in self._into[k]:
                    m -= drain_flow[j]
            elif kind == 1 and self._forward[k]:
                m -= drain_flow[k]
            elif kind == 0 and offtakes and steps[s][3] in offtakes:
                m += offtakes[steps[s][3]]
            through[s] = m
        m_condensate = m
        p_c = p_node[self._cond]
        p_w = p_c
        h_c = steam.h_liq_sat(p_c)
        h_w = h_c
        T_w = None  # water temperature [K] when known without a property call
        sat_w = True  # water is saturated liquid at p_w (hotwell, deaerator outlet)
        h_drain = [0.0] * n
        h_in = [0.0] * n
        h_out = [0.0] * n
        duty = [0.0] * n
        p_sh = [0.0] * n
        T_in = [0.0] * n
        T_out = [0.0] * n
        T_sat = [0.0] * n
        p_win = [0.0] * n  # water pressure entering each heater [Pa]
        bypass = {}
        pump_power = 0.0
        pump_powers = {}
        pump_out_h = {}  # water enthalpy after each pump [J/kg]
        for s, (kind, obj, k, name) in enumerate(steps):
            mw = through[s]
            if kind == 0:
                p_out = (p_throttle + self.boiler.drop(m_fw) if obj.discharge == "boiler"
                         else obj.discharge_pressure)
                # suction volume: saturated liquid after the condenser or deaerator, at
                # the known temperature after a heater, else from (p, h)
                if sat_w:
                    v_w = steam.v_liq_sat(p_w)
                elif T_w is not None:
                    v_w = steam.v_pT(p_w, T_w)
                else:
                    v_w = steam.v_ph(p_w, h_w)
                dh = obj.enthalpy_rise(v_w, p_w, p_out)
                pump_power += mw * dh
                pump_powers[name] = mw * dh
                pump_out_h[name] = h_w + dh
                h_w += dh
                p_w = p_out
                T_w = None
                sat_w = False
                continue
            if kind == 3:
                bypass[name] = (mw, h_w)
                continue
            ps = obj.shell_pressure(p_ext[k])
            p_sh[k] = ps
            h_in[k] = h_w
            p_win[k] = p_w
            if kind == 2:
                ho = deaerator_outlet_enthalpy(steam, ps)
                h_out[k] = h_drain[k] = ho
                duty[k] = feedwater_duty(mw, h_w, ho)
                h_w, p_w = ho, ps
                T_w = None
                sat_w = True
                continue
            ts = steam.T_sat(ps)
            ti = steam.T_ph(p_w, h_w) if T_w is None else T_w
            to = obj.outlet_temperature(ts, ti, mw)
            ho = steam.h_pT(p_w, to)
            hd = drain_outlet_enthalpy(steam, ps, ts, ti, obj.dca)
            T_sat[k], T_in[k], T_out[k] = ts, ti, to
            h_drain[k] = hd
            h_out[k] = ho
            duty[k] = feedwater_duty(mw, h_w, ho)
            h_w = ho
            T_w = to
            sat_w = False
            if self._forward[k]:
                md = drain_flow[k]
                h_dp = pumped_drain_enthalpy(hd, steam.v_liq_sat(ps), ps, p_w,
                                             obj.drain_pump_efficiency)
                pump_power += md * (h_dp - hd)
                h_w = mixed_enthalpy((mw, md), (ho, h_dp))
                T_w = None
        residuals = [0.0] * n
        release = [0.0] * n
        into = self._into
        for k, ht in enumerate(self._active_heaters):
            js = into[k]
            q = (steam_release(bleed[k], h_ext[k], h_drain[k],
                               [drain_flow[j] for j in js], [h_drain[j] for j in js]) if js
                 else steam_release(bleed[k], h_ext[k], h_drain[k]))
            release[k] = q
            residuals[k] = heater_balance_residual(q, duty[k], ht.closure, ht.duty_design)
        m_dc = 0.0
        for j in self._to_cond:
            m_dc += drain_flow[j]
        summary = {
            "h_feedwater": h_w,
            "p_feedwater": p_w,
            "m_condensate": m_condensate,
            "drains_to_condenser": m_dc,
            "h_drains_to_condenser": (mixed_enthalpy([drain_flow[j] for j in self._to_cond],
                                                     [h_drain[j] for j in self._to_cond])
                                      if m_dc else 0.0),
            "h_condensate": h_c,
            "pump_power": pump_power,
            "pump_powers": pump_powers,
            "pump_outlet_enthalpy": pump_out_h,
        }
        # what completing the detail needs (add_detail), kept with the summary
        summary["march"] = (bleed, h_ext, drain_flow, through, p_sh, p_win, h_in, h_out,
                            h_drain, duty, release, residuals, T_sat, T_in, T_out, bypass,
                            p_c)
        if detail:
            self.add_detail(steam, summary)
        return residuals, summary

    def add_detail(self, steam, summary: dict) -> dict:
        """Complete ``summary`` of a march by :meth:`evaluate` with the detail:
        ``T_feedwater`` [K], each heater's :class:`HeaterState` (``heaters``) and
        the water-side ``problems``; from the march's kept values, without marching
        again.  Returns ``summary``."""
        (bleed, h_ext, drain_flow, through, p_sh, p_win, h_in, h_out, h_drain, duty,
         release, residuals, T_sat, T_in, T_out, bypass, p_c) = summary["march"]
        steps = self._steps
        p_w, h_w = summary["p_feedwater"], summary["h_feedwater"]
        summary["T_feedwater"] = steam.T_ph(p_w, h_w)
        states = {}
        s_of = {st[2]: i for i, st in enumerate(steps) if st[2] >= 0}
        for kind, _obj, k, name in steps:
            if kind == 0:
                continue
            if kind == 3:
                mw, hw = bypass[name]
                states[name] = HeaterState(name, False, self.heaters[name].heater_type,
                                           m_water=mw, h_in=hw, h_out=hw)
                continue
            hs = HeaterState(name, True, self.heaters[name].heater_type, bleed=bleed[k],
                             shell_pressure=p_sh[k],
                             h_in=h_in[k], h_out=h_out[k], h_drain=h_drain[k],
                             h_bleed=h_ext[k],
                             m_water=through[s_of[k]],
                             drain_flow=drain_flow[k], duty=duty[k],
                             steam_release=release[k], residual=residuals[k])
            hs.T_sat = T_sat[k] if kind == 1 else steam.T_sat(p_sh[k])
            if kind == 1:
                hs.T_in, hs.T_out = T_in[k], T_out[k]
                hs.T_drain = steam.T_ph(p_sh[k], h_drain[k])
                hs.ttd = hs.T_sat - hs.T_out
                hs.dca = hs.T_drain - hs.T_in
            else:
                hs.T_in = steam.T_ph(p_sh[k], h_in[k])
                hs.T_out = hs.T_drain = hs.T_sat
            states[name] = hs
        summary["heaters"] = states
        summary["problems"] = self._problems(steam, steps, p_sh, p_win, T_in, T_out,
                                             h_in, h_out, p_c)
        return summary

    def _problems(self, steam, steps, p_sh, p_win, T_in, T_out, h_in, h_out,
                  p_c) -> list[tuple[str, str]]:
        """Water-side states no plant can have: ``(item name, message)`` pairs.

        ``p_c`` is the condenser pressure [Pa]; the other arguments are the march's
        per-heater states (SI units)."""
        out = []
        last_pump = None
        first = True  # no heater yet: the water is the condensate
        for kind, _obj, k, name in steps:
            if kind == 0:
                last_pump = name
                continue
            if kind == 3:
                first = False
                continue
            cools = (T_out[k] < T_in[k]) if kind == 1 else (h_in[k] > h_out[k])
            if cools and not (kind == 2 and p_win[k] < p_sh[k]):
                gives = (f"the {T_out[k] - 273.15:.2f} degC its shell gives at "
                         f"{p_sh[k] / 1e5:.4g} bar (saturation less the TTD)" if kind == 1
                         else f"saturation at its {p_sh[k] / 1e5:.4g} bar")
                arrives = (f"{T_in[k] - 273.15:.2f} degC" if kind == 1
                           else f"{h_in[k] / 1e3:.1f} kJ/kg, against {h_out[k] / 1e3:.1f}")
                why = ""
                p_design = self.model.design_pressure[self.condenser]
                if first and p_c > p_design * (1.0 + 1e-9):
                    why = (f"; the water is condensate saturated at the exhaust pressure "
                           f"{p_c / 1e5:.4g} bar (design {p_design / 1e5:.4g} bar): the exhaust "
                           f"pressure is too high for this heater train")
                out.append((name, f"heater {name!r} would cool the water, not heat it: it "
                                  f"arrives at {arrives}, above {gives}, so its bleed would be "
                                  f"negative{why}"))
            first = False
            if kind == 2 and p_win[k] < p_sh[k]:
                out.append((last_pump or name,
                            f"water reaches deaerator {name!r} at {p_win[k] / 1e5:.4g} bar, below "
                            f"its {p_sh[k] / 1e5:.4g} bar: the pump before it"
                            f"{f' ({last_pump!r})' if last_pump else ''} cannot feed it"))
            elif kind == 1 and p_win[k] < P_CRIT and T_out[k] >= steam.T_sat(p_win[k]):
                out.append((last_pump or name,
                            f"feedwater would boil in heater {name!r}: {T_out[k] - 273.15:.1f} "
                            f"degC at {p_win[k] / 1e5:.4g} bar; the pump before it"
                            f"{f' ({last_pump!r})' if last_pump else ''} gives too little "
                            f"pressure"))
        return out


def design_feedwater_states(model, steam) -> dict[str, dict]:
    """Water-side states at the design heat balance (all heaters in service,
    closure 1): per heater its duty, steam release and temperatures."""
    for h in model.heaters.values():
        h.closure = 1.0
        h.duty_design = 1.0
    march = FeedwaterMarch(model)
    bleed = [sum(model.extractions[n].design_flow for n in model.heaters[h].extractions)
             for h in march.active]
    p = [model.design_pressure[n] for n in model.order]
    h = [model.design_enthalpy[n] for n in model.order]
    _, summary = march.evaluate(steam, p, h, bleed, model.throttle.flow, model.throttle.pressure,
                                detail=True)
    out = {"_problems": summary["problems"]}
    for name, hs in summary["heaters"].items():
        out[name] = {"duty": hs.duty, "steam_release": hs.steam_release,
                     "m_water": hs.m_water, "T_in": hs.T_in, "T_out": hs.T_out,
                     "T_sat": hs.T_sat}
    return out


def heat_rejected(node: int, exhaust: list[int], M, h, p, steam, summary,
                  fw_node: int | None) -> float:
    """Heat [W] rejected at exhaust node index ``node``: its steam condensed to
    saturated liquid; at the feedwater train's condenser (``fw_node``, with the
    water-side ``summary`` of :meth:`FeedwaterMarch.evaluate`) also the heater
    drains and make-up that enter it and the other shells' condensate, less the
    condensate that leaves (the same balance as the point's condenser duty,
    :func:`simulator.physics.performance.condenser_duty`, shared out by shell).

    ``M``, ``h``, ``p`` are the flow into [kg/s], enthalpy [J/kg] and pressure
    [Pa] of every node by index; ``exhaust`` the exhaust node indices.
    """
    if summary is None or node != fw_node:
        return M[node] * (h[node] - steam.h_liq_sat(p[node]))
    m_ex = 0.0
    energy = 0.0
    for e in exhaust:
        m_ex += M[e]
        energy += M[e] * (h[e] if e == node else steam.h_liq_sat(p[e]))
    m_dc = summary["drains_to_condenser"]
    makeup = perf.makeup_flow(summary["m_condensate"], m_ex, m_dc)
    return perf.condenser_duty(energy, m_dc, summary["h_drains_to_condenser"], makeup,
                               summary["m_condensate"], summary["h_condensate"])


def design_water_summary(model, steam) -> dict | None:
    """The water side's summary (:meth:`FeedwaterMarch.evaluate`) at the design heat
    balance, after the heaters are calibrated; ``None`` without a feedwater train."""
    if model.feedwater is None or not model.heaters:
        return None
    march = FeedwaterMarch(model)
    bleed = [sum(model.extractions[n].design_flow for n in model.heaters[k].extractions)
             for k in march.active]
    p = [model.design_pressure[n] for n in model.order]
    h = [model.design_enthalpy[n] for n in model.order]
    return march.evaluate(steam, p, h, bleed, model.throttle.flow, model.throttle.pressure)[1]


def design_heat_rejected(model, steam) -> dict[str, float]:
    """Heat [W] rejected at each exhaust node in the design heat balance (after the
    heaters are calibrated), by :func:`heat_rejected`."""
    names = list(model.order)
    idx = {n: i for i, n in enumerate(names)}
    M = [0.0] * len(names)
    for c in model.steam_path:
        M[idx[c.outlet]] += model.design_group_flow[c.name]
    p = [model.design_pressure[n] for n in names]
    h = [model.design_enthalpy[n] for n in names]
    summary = design_water_summary(model, steam)
    fw_node = idx[model.feedwater.condenser] if summary is not None else None
    exhaust = [idx[n] for n in model.exhaust_nodes]
    return {names[e]: heat_rejected(e, exhaust, M, h, p, steam, summary, fw_node)
            for e in exhaust}
