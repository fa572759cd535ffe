"""The water side of the cycle: condensate and feedwater through pumps and heaters.

:class:`FeedwaterMarch` is compiled once for a model and a set of heaters out of
service.  Given the turbine state (node pressures and enthalpies), the bleed
flow of every heater and the feedwater flow, it marches the water from the
condenser to the boiler and returns every heater's state and the residual of
its energy balance.  The physics is in :mod:`simulator.physics.heater`.

Flows are found first (drains cascade from high to low pressure; the
condensate flow follows from the feedwater flow less what enters at the
deaerator and at forward-pumped drains), then enthalpies in water order, then
the energy balances, which need the drain enthalpies of the heaters above.
"""

from __future__ import annotations

from dataclasses import dataclass

import networkx as nx

from .errors import InputError

__all__ = ["FeedwaterMarch", "HeaterState", "design_feedwater_states"]


@dataclass
class HeaterState:
    """State of one heater at a solved point (SI units)."""

    name: str
    in_service: bool
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
    drain_out: float = 0.0  # [kg/s]
    duty: float = 0.0  # [W]
    steam_release: float = 0.0  # [W]
    ttd: float = 0.0  # [K]
    dca: float = 0.0  # [K]
    residual: float = 0.0  # [-]


class FeedwaterMarch:
    """Compiled water-side march for one model and one set of heaters out of service."""

    def __init__(self, model, out_of_service: frozenset[str] = frozenset(), file=None):
        fw = model.feedwater
        self.model = model
        self.heaters = model.heaters
        self.pumps = model.pumps
        self.order = list(fw.order)
        self.condenser = fw.condenser
        self.boiler = fw.boiler
        self.out = frozenset(out_of_service)
        for name in self.out:
            if self.heaters[name].kind == "deaerator":
                raise InputError("a deaerator cannot be taken out of service here; the cycle "
                                 "has no other place to degas and store feedwater", file=file,
                                 table=f"heaters.{name}", key="in_service")
        self.active = [h for h in self.heaters if h not in self.out]
        # where each active heater's drains really go
        self.dest: dict[str, str] = {}
        for h in self.active:
            if self.heaters[h].kind != "closed":
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
        self.cascade_order = list(nx.topological_sort(cascade))
        self.drains_into: dict[str, list[str]] = {h: [] for h in self.heaters}
        self.drains_into["condenser"] = []
        for h, d in self.dest.items():
            if d in self.drains_into:
                self.drains_into[d].append(h)

    def evaluate(self, steam, p_node, h_node, bleed: dict[str, float], m_fw: float,
                 p_throttle: float, detail: bool = False):
        """March the water side.

        Parameters
        ----------
        steam : property backend
        p_node, h_node : mappings node name -> pressure [Pa], enthalpy [J/kg]
        bleed : heater name -> bleed flow [kg/s] (active heaters)
        m_fw : feedwater flow to the boiler [kg/s]
        p_throttle : throttle pressure [Pa], for the feed-pump discharge

        Returns
        -------
        residuals : dict heater -> normalised energy-balance residual [-]
        summary : dict with ``h_feedwater``, ``T_feedwater``, ``p_feedwater``,
            ``m_condensate``, ``drains_to_condenser`` [kg/s],
            ``h_drains_to_condenser`` [J/kg], ``pump_power`` [W] and, when
            ``detail``, ``heaters``: dict of :class:`HeaterState`.
        """
        H = self.heaters
        drain_out: dict[str, float] = {}
        for h in self.cascade_order:
            if h not in self.dest:
                continue
            drain_out[h] = bleed[h] + sum(drain_out[j] for j in self.drains_into[h])
        # water flows, from the boiler backwards
        through: dict[str, float] = {}
        m = m_fw
        for item in reversed(self.order):
            if item in H and item not in self.out:
                ht = H[item]
                if ht.kind == "deaerator":
                    m -= bleed[item] + sum(drain_out[j] for j in self.drains_into[item])
                elif self.dest[item] == "forward":
                    m -= drain_out[item]
            through[item] = m
        m_condensate = m
        p_c = p_node[self.condenser]
        p_w = p_c
        h_w = steam.h_liq_sat(p_c)
        h_drain: dict[str, float] = {}
        st: dict[str, dict] = {}
        pump_power = 0.0
        for item in self.order:
            mw = through[item]
            if item in self.pumps:
                pump = self.pumps[item]
                p_out = (p_throttle + self.boiler.drop(m_fw) if pump.discharge == "boiler"
                         else pump.discharge_pressure)
                # Pump suction is usually saturated liquid, exactly on the boundary of
                # IF97 regions 1 and 4; the volume is taken 10 J/kg (about 2 mK) inside
                # the liquid region so that it is a smooth function of the state.
                h_v = min(h_w, steam.h_liq_sat(p_w) - 10.0) if p_w < 22e6 else h_w
                dh = pump.enthalpy_rise(steam.v_ph(p_w, h_v), p_w, p_out)
                pump_power += mw * dh
                h_w += dh
                p_w = p_out
                continue
            ht = H[item]
            if item in self.out:
                st[item] = {"m_water": mw, "h_in": h_w, "h_out": h_w}
                continue
            p_sh = ht.shell_pressure(p_node[self.extraction_node(item)])
            if ht.kind == "deaerator":
                h_out = steam.h_liq_sat(p_sh)
                st[item] = {"m_water": mw, "h_in": h_w, "h_out": h_out, "p_sh": p_sh,
                            "duty": mw * (h_out - h_w)}
                h_drain[item] = h_out
                h_w, p_w = h_out, p_sh
                continue
            T_sat = steam.T_sat(p_sh)
            T_in = steam.T_ph(p_w, h_w)
            T_out = ht.outlet_temperature(T_sat, T_in, mw)
            h_out = steam.h_pT(p_w, T_out)
            if ht.dca is not None and T_in + ht.dca < T_sat:
                h_d = steam.h_pT(p_sh, T_in + ht.dca)
            else:
                h_d = steam.h_liq_sat(p_sh)
            h_drain[item] = h_d
            st[item] = {"m_water": mw, "h_in": h_w, "h_out": h_out, "p_sh": p_sh,
                        "T_sat": T_sat, "T_in": T_in, "T_out": T_out,
                        "duty": mw * (h_out - h_w)}
            h_w = h_out
            if self.dest[item] == "forward":
                md = drain_out[item]
                v_d = steam.v_liq_sat(p_sh)
                h_dp = h_d + v_d * (p_w - p_sh) / ht.drain_pump_efficiency
                pump_power += md * (h_dp - h_d)
                h_w = (mw * h_out + md * h_dp) / (mw + md)
        residuals: dict[str, float] = {}
        for item in self.active:
            ht = H[item]
            s = st[item]
            h_b = h_node[self.extraction_node(item)]
            h_ref = h_drain[item]
            release = bleed[item] * (h_b - h_ref) + sum(
                drain_out[j] * (h_drain[j] - h_ref) for j in self.drains_into[item])
            s["release"] = release
            residuals[item] = (ht.closure * release - s["duty"]) / ht.duty_design
        to_cond = self.drains_into["condenser"]
        m_dc = sum(drain_out[j] for j in to_cond)
        h_dc = (sum(drain_out[j] * h_drain[j] for j in to_cond) / m_dc) if m_dc else 0.0
        summary = {
            "h_feedwater": h_w,
            "p_feedwater": p_w,
            "m_condensate": m_condensate,
            "drains_to_condenser": m_dc,
            "h_drains_to_condenser": h_dc,
            "h_condensate": steam.h_liq_sat(p_c),
            "pump_power": pump_power,
        }
        if detail:
            summary["T_feedwater"] = steam.T_ph(p_w, h_w)
            summary["heaters"] = self._states(steam, st, bleed, drain_out, h_drain, h_node,
                                              residuals)
        return residuals, summary

    def extraction_node(self, heater: str) -> str:
        return self.model.extractions[self.heaters[heater].extraction].node

    def _states(self, steam, st, bleed, drain_out, h_drain, h_node, residuals):
        out = {}
        for name in self.order:
            if name not in self.heaters:
                continue
            ht = self.heaters[name]
            s = st[name]
            if name in self.out:
                out[name] = HeaterState(name, False, m_water=s["m_water"], h_in=s["h_in"],
                                        h_out=s["h_out"])
                continue
            hs = HeaterState(name, True, bleed=bleed[name], shell_pressure=s["p_sh"],
                             h_in=s["h_in"], h_out=s["h_out"], h_drain=h_drain[name],
                             h_bleed=h_node[self.extraction_node(name)], m_water=s["m_water"],
                             drain_out=drain_out.get(name, 0.0), duty=s["duty"],
                             steam_release=s["release"], residual=residuals[name])
            hs.T_sat = steam.T_sat(s["p_sh"])
            if ht.kind == "closed":
                hs.T_in, hs.T_out = s["T_in"], s["T_out"]
                hs.T_drain = steam.T_ph(s["p_sh"], h_drain[name])
                hs.ttd = hs.T_sat - hs.T_out
                hs.dca = hs.T_drain - hs.T_in
            else:
                hs.T_in = steam.T_ph(s["p_sh"], s["h_in"]) if s["h_in"] > 0 else 0.0
                hs.T_out = hs.T_drain = hs.T_sat
            out[name] = hs
        return out


def design_feedwater_states(model, steam) -> dict[str, dict]:
    """Water-side states at the design heat balance (all heaters in service,
    closure 1): per heater its duty, steam release and temperatures."""
    for h in model.heaters.values():
        h.closure = 1.0
        h.duty_design = 1.0
    march = FeedwaterMarch(model)
    bleed = {h: model.extractions[model.heaters[h].extraction].design_flow
             for h in model.heaters}
    _, summary = march.evaluate(steam, model.design_pressure, model.design_enthalpy, bleed,
                                model.throttle.flow, model.throttle.pressure, detail=True)
    out = {}
    for name, hs in summary["heaters"].items():
        out[name] = {"duty": hs.duty, "steam_release": hs.steam_release,
                     "m_water": hs.m_water, "T_in": hs.T_in, "T_out": hs.T_out,
                     "T_sat": hs.T_sat}
    return out
