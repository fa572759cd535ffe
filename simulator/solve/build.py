"""The point result of a converged march: one table per result group, filled
from the kinds' declared columns (:mod:`simulator.solve.result`), and the
point's totals (balances, heat rates, condenser duty)."""

from __future__ import annotations

import math

import numpy as np

from ..components import KINDS, SteamPathComponent
from ..errors import PropertyRangeError
from ..physics import performance as perf
from .result import NODE_COLUMNS, STEAM_PATH_COLUMNS, PointResult, ResultTable

__all__ = ["build_result", "PointView"]


def build_result(model, cond, steam, eq, nr, st) -> PointResult:
    """The point result of a converged march ``st`` (see ``PointEquations._detail``):
    one table per result group, filled from the kinds' declared columns."""
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
    tables = {"nodes": ResultTable(list(names), dict(zip(
        [c.name for c in NODE_COLUMNS], (np.array(p), T, np.array(h), s, x))), NODE_COLUMNS)}
    steps = st["steps"]
    path = model.steam_path
    flow, power, heat = [], [], []
    h_spray = _spray_enthalpy(model, st)
    for c in path:
        _c, i, _j, m, h_out, P, _rec = steps[c.name]
        flow.append(m)
        power.append(P)
        q = m * (h_out - h[i]) + P  # heat in = enthalpy rise + work out
        if c.name in eq.added:  # spray water heated to the outlet state
            q += eq.added[c.name] * (h_out - h_spray)
        heat.append(q)
    tables["steam_path"] = ResultTable(
        [c.name for c in path], {"flow": np.array(flow), "power": np.array(power),
                                 "heat": np.array(heat)}, STEAM_PATH_COLUMNS,
        inlet=[c.inlet for c in path], outlet=[c.outlet for c in path])
    fw = st["feedwater"]
    heater_states = fw["heaters"] if fw is not None else {}
    view = PointView(eq.idx, p, h, {b[0]: (f, ctl) for b, f, ctl in zip(
        eq.bleeds, st["bleed_flow"], eq.bleed_control)}, heater_states, steam,
        st.get("node_records", {}))
    late = []
    for kind, comps in _result_kinds(model):
        if kind.reads_totals:
            late.append((kind, comps))
            continue
        inlet = outlet = node = None
        if issubclass(kind, SteamPathComponent):
            rows = []
            for c in comps:
                _c, i, j, m, h_out, _P, rec = steps[c.name]
                rows.append(c.result_row(rec, m, p[i], h[i], p[j], h_out))
            inlet, outlet = [c.inlet for c in comps], [c.outlet for c in comps]
        else:
            rows = [c.point_row(view) for c in comps]
            node = [c.node for c in comps] if hasattr(comps[0], "node") else None
        tables[kind.results] = ResultTable(
            [c.name for c in comps], _columns(kind.columns, rows), kind.columns,
            inlet=inlet, outlet=outlet, node=node)
        if kind.part_results:
            parts = [row for c in comps for row in c.part_rows(steps[c.name][6])]
            tables[kind.part_results] = ResultTable(
                [n for c in comps for n in c.part_names()], _columns(kind.part_columns, parts),
                kind.part_columns)
    totals = _totals(model, eq, st, tables)
    view.totals, view.tables, view.rating = totals, tables, model.generator.rating
    view.settings = {(name, key): value for _t, name, key, value in cond.settings}
    for kind, comps in late:  # results that follow from the totals
        rows = [c.point_row(view) for c in comps]
        tables[kind.results] = ResultTable([c.name for c in comps],
                                           _columns(kind.columns, rows), kind.columns)
    return PointResult(
        converged=True, iterations=nr.iterations, residual=nr.residual,
        evaluations=nr.evaluations, message="converged", model_name=model.name,
        valve_mode=cond.valve_mode, pressure_mode=cond.pressure_mode, backend=steam.name,
        tables=tables, totals=totals,
        heaters=list(heater_states.values()), unknowns=nr.x, jacobian=nr.jacobian)


def _result_kinds(model) -> list:
    """``(kind, its components)`` of every registered kind with results that the
    model has, in registry order; found once per model (kept in its solver cache)."""
    key = ("result kinds",)
    found = model.solver_cache.get(key)
    if found is None:
        found = [(kind, comps) for kind in KINDS.values()
                 if kind.results and (comps := model.of_kind(kind))]
        model.solver_cache[key] = found
    return found


class PointView:
    """What a component that is not on the steam path reads of a solved point:
    node pressures [Pa] and enthalpies [J/kg] by node name, each extraction's
    ``(flow [kg/s], control)``, each heater's water-side state and the records
    of kinds at a node (condensers) by name."""

    def __init__(self, idx, p, h, bleeds, heaters, steam=None, records=None):
        self._idx, self._p, self._h = idx, p, h
        self.bleeds = bleeds
        self.heaters = heaters
        self._steam = steam
        self.records = records or {}
        self.totals: dict = {}
        self.tables: dict = {}
        self.rating = math.nan
        self.settings: dict = {}

    def setting(self, component, key: str, default):
        """A component's case setting ``key`` (SI), or ``default``."""
        return self.settings.get((component.name, key), default)

    def saturation_temperature(self, node: str) -> float:
        """Saturation temperature [K] at the node's pressure."""
        return self._steam.T_sat(self._p[self._idx[node]])

    def pressure(self, node: str) -> float:
        return self._p[self._idx[node]]

    def enthalpy(self, node: str) -> float:
        return self._h[self._idx[node]]


def _columns(declared, rows) -> dict:
    """Column arrays from row tuples, by the declared dtype."""
    if rows and all(col.dtype == "f8" for col in declared):
        # one conversion for the whole table; the columns are rows of one new array
        table = np.array(rows, dtype=float).T.copy()
        return {col.name: table[k] for k, col in enumerate(declared)}
    by_column = list(zip(*rows)) if rows else [()] * len(declared)
    out = {}
    for k, col in enumerate(declared):
        values = list(by_column[k])
        if col.dtype == "text":
            out[col.name] = values
        elif col.dtype == "f8":
            out[col.name] = np.array(values, dtype=float)
        else:
            out[col.name] = np.array(values, dtype=col.dtype)
    return out


def _spray_enthalpy(model, st) -> float:
    """Enthalpy [J/kg] of attemperator spray water: after the spray pump."""
    fw = st.get("feedwater")
    if fw is None or model.feedwater is None or model.feedwater.spray_pump is None:
        return math.nan
    return fw["pump_outlet_enthalpy"].get(model.feedwater.spray_pump, math.nan)


def _totals(model, eq, st, tables) -> dict[str, float]:
    """Every total of the point (names and units in :data:`~.result.TOTALS`)."""
    p, h = st["p"], st["h"]
    m_T = st["m_T"]
    src = eq.src
    admission = model.admission
    after = eq.idx[admission.outlet]
    groups = tables["stage_groups"].columns
    exhaust = [k for k, c in enumerate(model.groups) if c.exhaust is not None]
    exhaust_loss_power = 0.0
    for k in exhaust:
        c = model.groups[k]
        r = st["steps"][c.name][6]
        exhaust_loss_power += r[0] * (r[1] - r[2])
    exh_y = [groups["outlet_moisture"][k] for k in exhaust]
    P_gen = st["P_gen"]
    totals = {
        "throttle_flow": m_T,
        "throttle_pressure": p[src],
        "throttle_temperature": eq.T_throttle,
        "valve_pressure_drop": admission.valve_drop(st["admission"], p[src], p[after]),
        "shaft_power": st["shaft"],
        "generator_output": P_gen,
        "generator_and_mechanical_losses": st["shaft"] - P_gen,
        "steam_rate": perf.steam_rate(m_T, P_gen),
        "exhaust_loss_power": exhaust_loss_power,
        "exhaust_moisture": max(exh_y) if exh_y else 0.0,
        "exhaust_flow": sum(st["M"][eq.idx[n]] for n in model.exhaust_nodes),
    }
    reheat = 0.0
    for q in tables["steam_path"].columns["heat"].tolist():
        reheat += q
    totals["reheat_heat"] = reheat
    fw = st["feedwater"]
    if fw is None:
        return totals
    heaters = list(fw["heaters"].values())
    h_T = h[src]
    ex = (tables["extractions"].columns if "extractions" in tables
          else {"flow": np.zeros(0), "enthalpy": np.zeros(0)})
    boiler = perf.heat_added(m_T, h_T, fw["h_feedwater"], reheat)
    if eq.sh_from_pump:  # superheater spray water from the pump, not the final feedwater
        boiler += eq.sh_from_pump * (fw["h_feedwater"] - _spray_enthalpy(model, st))
    if eq.added or eq.cond.superheater_spray:
        totals["reheater_spray_flow"] = sum(eq.added.values())
        totals["superheater_spray_flow"] = eq.cond.superheater_spray or 0.0
        totals["spray_water_enthalpy"] = _spray_enthalpy(model, st)
    totals["final_feedwater_temperature"] = fw["T_feedwater"]
    totals["heat_added"] = boiler
    totals["heat_rate"] = perf.heat_rate(boiler, P_gen)
    totals["pump_power"] = fw["pump_power"]
    # condenser: exhaust steam + drains + makeup in, condensate out
    exhaust_energy = sum(st["M"][eq.idx[n]] * h[eq.idx[n]] for n in model.exhaust_nodes)
    m_ex = totals["exhaust_flow"]
    makeup = perf.makeup_flow(fw["m_condensate"], m_ex, fw["drains_to_condenser"])
    totals["makeup_flow"] = makeup
    h_c = fw["h_condensate"]
    totals["condenser_duty"] = perf.condenser_duty(
        exhaust_energy, fw["drains_to_condenser"], fw["h_drains_to_condenser"], makeup,
        fw["m_condensate"], h_c)
    heater_loss = sum(hs.steam_release - hs.duty for hs in heaters if hs.in_service)
    totals["heater_heat_loss"] = heater_loss
    process = sum(f * hh for f, hh, b in zip(ex["flow"].tolist(), ex["enthalpy"].tolist(),
                                             eq.bleeds) if b[2] != 2)
    totals["process_steam_energy"] = perf.net_process_steam_energy(process, makeup, h_c)
    # equal to heat_rate for a unit without process steam
    totals["heat_rate_power"] = perf.heat_rate(
        perf.heat_chargeable_to_power(boiler, totals["process_steam_energy"]), P_gen)
    # turbines that drive pumps: their work leaves the steam but turns no generator
    drives = [c for c in model.steam_path if not c.drives_generator]
    drive = sum(st["steps"][c.name][5] for c in drives)
    if drives:
        totals["pump_drive_turbine_power"] = drive
        totals["turbine_driven_pump_power"] = sum(
            fw["pump_powers"].get(getattr(c, "pump", ""), 0.0) for c in drives)
    totals["energy_imbalance"] = perf.energy_imbalance(
        boiler, fw["pump_power"], st["shaft"] + drive, totals["condenser_duty"], heater_loss,
        totals["process_steam_energy"])
    return totals
