"""Readable tables and JSON of point results and calibrated models.

Conversion from SI to the engineer's display units happens here and only
here: pressures in bar, temperatures in degC, enthalpy in kJ/kg, entropy in
kJ/(kg K), flows in kg/s, power in MW, heat rate in kJ/kWh and Btu/kWh.
"""

from __future__ import annotations

import math

from ..solve.point import PointResult

__all__ = ["point_to_dict", "format_point", "format_model", "DISPLAY_UNITS"]

BTU_PER_KJ = 1.0 / 1.05505585262  # International Table Btu

DISPLAY_UNITS = {
    "nodes": {"pressure": "bar", "temperature": "degC", "enthalpy": "kJ/kg",
              "entropy": "kJ/(kg K)", "moisture": "%"},
    "stage_groups": {"flow": "kg/s", "efficiency": "%", "isentropic_drop": "kJ/kg",
                     "power": "MW", "annulus_velocity": "m/s", "exhaust_loss": "kJ/kg",
                     "outlet_moisture": "%"},
    "extractions": {"flow": "kg/s", "pressure": "bar", "enthalpy": "kJ/kg"},
    "heaters": {"bleed": "kg/s", "shell_pressure": "bar", "feedwater_in": "degC",
                "feedwater_out": "degC", "drain_out": "degC", "ttd": "K", "dca": "K",
                "duty": "MW", "feedwater_flow": "kg/s", "drain_flow": "kg/s"},
    "totals": {
        "throttle_flow": "kg/s", "throttle_pressure": "bar", "throttle_temperature": "degC",
        "valve_pressure_drop": "bar", "shaft_power": "MW", "generator_output": "MW",
        "generator_and_mechanical_losses": "MW", "steam_rate": "kg/kWh",
        "exhaust_loss_power": "MW", "exhaust_moisture": "%", "exhaust_flow": "kg/s",
        "reheat_heat": "MW", "heat_added": "MW", "heat_rate": "kJ/kWh",
        "heat_rate_btu": "Btu/kWh", "heat_rate_power": "kJ/kWh",
        "final_feedwater_temperature": "degC",
        "pump_power": "MW", "makeup_flow": "kg/s", "condenser_duty": "MW",
        "heater_heat_loss": "MW", "process_steam_energy": "MW", "energy_imbalance": "W",
    },
}

_TOTAL_CONVERT = {
    "bar": lambda v: v / 1e5, "degC": lambda v: v - 273.15, "MW": lambda v: v / 1e6,
    "kg/s": lambda v: v, "%": lambda v: v * 100.0, "kg/kWh": lambda v: v * 3.6e6,
    "kJ/kWh": lambda v: v * 3600.0, "Btu/kWh": lambda v: v * 3600.0 * BTU_PER_KJ,
    "W": lambda v: v,
}


def _f(v) -> float | None:
    v = float(v)
    return None if math.isnan(v) else v


def point_to_dict(r: PointResult, case_name: str = "", cautions=()) -> dict:
    """A JSON-ready dict of a point in display units, with the units stated."""
    nodes = [{"name": n, "pressure": _f(r.node_p[i] / 1e5),
              "temperature": _f(r.node_T[i] - 273.15), "enthalpy": _f(r.node_h[i] / 1e3),
              "entropy": _f(r.node_s[i] / 1e3), "moisture": _f((1 - r.node_x[i]) * 100)}
             for i, n in enumerate(r.node_names)]
    groups = [{"name": n, "from": r.group_inlet[i], "to": r.group_outlet[i],
               "flow": _f(r.group_flow[i]), "efficiency": _f(r.group_eta[i] * 100),
               "isentropic_drop": _f(r.group_dh_s[i] / 1e3), "power": _f(r.group_power[i] / 1e6),
               "annulus_velocity": _f(r.group_velocity[i]),
               "exhaust_loss": _f(r.group_exhaust_loss[i] / 1e3),
               "outlet_moisture": _f(r.group_moisture_out[i] * 100)}
              for i, n in enumerate(r.group_names)]
    bleeds = [{"name": n, "node": r.extraction_nodes[i], "control": r.extraction_control[i],
               "flow": _f(r.extraction_flow[i]), "pressure": _f(r.extraction_p[i] / 1e5),
               "enthalpy": _f(r.extraction_h[i] / 1e3)}
              for i, n in enumerate(r.extraction_names)]
    heaters = []
    for hs in r.heaters:
        closed = hs.in_service and hs.kind == "closed"
        heaters.append({"name": hs.name, "type": hs.kind, "in_service": hs.in_service,
                        "bleed": _f(hs.bleed),
                        "shell_pressure": _f(hs.shell_pressure / 1e5) if hs.in_service else None,
                        "feedwater_in": _f(hs.T_in - 273.15) if hs.in_service else None,
                        "feedwater_out": _f(hs.T_out - 273.15) if hs.in_service else None,
                        "drain_out": _f(hs.T_drain - 273.15) if hs.in_service else None,
                        "ttd": _f(hs.ttd) if closed else None,
                        "dca": _f(hs.dca) if closed else None, "duty": _f(hs.duty / 1e6),
                        "feedwater_flow": _f(hs.m_water), "drain_flow": _f(hs.drain_out)})
    totals = {}
    for k, v in r.totals.items():
        unit = DISPLAY_UNITS["totals"].get(k)
        if unit is None:
            continue
        if k in ("makeup_flow", "process_steam_energy") and abs(v) < 1e-6 * abs(
                r.totals["throttle_flow"]):
            v = 0.0  # a balance that closes to round-off is shown as zero
        totals[k] = _f(_TOTAL_CONVERT[unit](v))
        if k == "heat_rate":
            totals["heat_rate_btu"] = _f(_TOTAL_CONVERT["Btu/kWh"](v))
    return {
        "converged": bool(r.converged),
        "model": r.model_name,
        "case": case_name,
        "governing": r.governing,
        "property_backend": r.backend,
        "solver": {"iterations": r.iterations, "largest_residual": r.residual,
                   "residual_evaluations": r.evaluations, "message": r.message},
        "units": DISPLAY_UNITS,
        "nodes": nodes,
        "stage_groups": groups,
        "extractions": bleeds,
        "heaters": heaters,
        "totals": totals,
        "cautions": [c.to_dict() if hasattr(c, "to_dict") else c for c in cautions],
    }


def _num(v) -> str:
    """About six significant figures, fixed-point (reads well in columns)."""
    if v is None:
        return ""
    if not isinstance(v, float):
        return str(v)
    if math.isnan(v):
        return "-"
    a = abs(v)
    decimals = 1 if a >= 1000 else 2 if a >= 100 else 3 if a >= 10 else 4 if a >= 1 else 5
    return f"{v:.{decimals}f}"


def _table(title: str, headers: list[str], rows: list[list], units: list[str]) -> str:
    cells = [[str(h) for h in headers], [f"[{u}]" if u else "" for u in units]]
    for row in rows:
        cells.append([_num(v) for v in row])
    widths = [max(len(c[j]) for c in cells) for j in range(len(headers))]
    lines = [title, "-" * len(title)]
    for k, c in enumerate(cells):
        lines.append("  ".join(s.ljust(w) if j == 0 else s.rjust(w)
                               for j, (s, w) in enumerate(zip(c, widths))).rstrip())
        if k == 1:
            lines.append("  ".join("-" * w for w in widths))
    return "\n".join(lines)


def format_point(r: PointResult, case_name: str = "", cautions=()) -> str:
    """Readable tables of a solved point."""
    d = point_to_dict(r, case_name, cautions)
    out = [f"partload: {d['model']}" + (f" / case {case_name}" if case_name else ""),
           f"converged in {r.iterations} Newton iterations ({r.evaluations} residual "
           f"evaluations), largest residual {r.residual:.2e}; properties: {r.backend}; "
           f"governing: {r.governing}", ""]
    u = DISPLAY_UNITS["nodes"]
    out.append(_table("Nodes", ["node", "p", "T", "h", "s", "moisture"],
                      [[n["name"], n["pressure"], n["temperature"], n["enthalpy"], n["entropy"],
                        n["moisture"]] for n in d["nodes"]],
                      ["", u["pressure"], u["temperature"], u["enthalpy"], u["entropy"],
                       u["moisture"]]))
    out.append("")
    u = DISPLAY_UNITS["stage_groups"]
    out.append(_table("Stage groups", ["group", "from", "to", "flow", "efficiency", "dh_s",
                                       "power", "V_annulus", "exh. loss"],
                      [[g["name"], g["from"], g["to"], g["flow"], g["efficiency"],
                        g["isentropic_drop"], g["power"],
                        g["annulus_velocity"] or None, g["exhaust_loss"] or None]
                       for g in d["stage_groups"]],
                      ["", "", "", u["flow"], u["efficiency"], u["isentropic_drop"], u["power"],
                       u["annulus_velocity"], u["exhaust_loss"]]))
    out.append("")
    if d["extractions"]:
        u = DISPLAY_UNITS["extractions"]
        out.append(_table("Extractions (bleeds)", ["extraction", "node", "control", "flow", "p",
                                                   "h"],
                          [[b["name"], b["node"], b["control"], b["flow"], b["pressure"],
                            b["enthalpy"]] for b in d["extractions"]],
                          ["", "", "", u["flow"], u["pressure"], u["enthalpy"]]))
        out.append("")
    if d["heaters"]:
        u = DISPLAY_UNITS["heaters"]
        out.append(_table("Feedwater heaters", ["heater", "in service", "bleed", "p shell",
                                                "T fw in", "T fw out", "T drain", "TTD", "DCA",
                                                "duty"],
                          [[h["name"], "yes" if h["in_service"] else "OUT", h["bleed"],
                            h["shell_pressure"], h["feedwater_in"], h["feedwater_out"],
                            h["drain_out"], h["ttd"] if h["in_service"] else None,
                            h["dca"] if h["in_service"] else None, h["duty"]]
                           for h in d["heaters"]],
                          ["", "", u["bleed"], u["shell_pressure"], u["feedwater_in"],
                           u["feedwater_out"], u["drain_out"], u["ttd"], u["dca"], u["duty"]]))
        out.append("")
    t = d["totals"]
    tu = DISPLAY_UNITS["totals"]
    rows = [[k.replace("_", " "), v, tu.get(k, "")] for k, v in t.items()]
    width = max(len(r[0]) for r in rows)
    out.append("Totals")
    out.append("------")
    for name, v, unit in rows:
        out.append(f"{name.ljust(width)}  {v:>14.6g}  {unit}" if v is not None
                   else f"{name.ljust(width)}  {'-':>14}  {unit}")
    if d["cautions"]:
        out.append("")
        out.append("CAUTIONS (operation that can damage the machine; check against the "
                   "manufacturer's limits)")
        for c in d["cautions"]:
            out.append(f"  ! {c['message'] if isinstance(c, dict) else c}")
    return "\n".join(out)


def format_model(model) -> str:
    """The calibrated model: design heat balance and component constants."""
    lines = [f"partload: model {model.name!r} ({model.file})", "calibrated to its design "
             "heat balance", ""]
    if model.description:
        lines.insert(1, model.description)
    th = model.throttle
    lines.append(f"throttle: {th.pressure / 1e5:.2f} bar, {th.temperature - 273.15:.1f} degC, "
                 f"{th.flow:.3f} kg/s (highest allowed pressure {th.max_pressure / 1e5:.2f} bar)")
    lines.append(f"throttle valve: wide-open drop {model.valve.dp_wide_open / 1e5:.3f} bar at "
                 f"design flow")
    lines.append("")
    rows = []
    for c in model.groups:
        rows.append([c.name, c.inlet, c.outlet, model.design_group_flow[c.name],
                     c.eta_design * 100, c.eta_dry_design * 100, c.K * 1e4,
                     c.dh_s_design / 1e3, c.q_design, c.correction_name,
                     f"{c.exhaust.area:.3g} m^2" if c.exhaust else ""])
    lines.append(_table("Stage groups (constants from calibration)",
                        ["group", "from", "to", "design flow", "eta", "eta dry", "K",
                         "dh_s design", "Q_in design", "correction", "annulus"], rows,
                        ["", "", "", "kg/s", "%", "%", "cm^2", "kJ/kg", "m^3/s", "", ""]))
    lines.append("")
    if model.reheaters or model.pipes:
        lines.append(_table("Reheaters and pipes", ["name", "from", "to", "design drop",
                                                    "outlet T"],
                            [[c.name, c.inlet, c.outlet, c.dp_design / 1e5,
                              getattr(c, "outlet_temperature", None)]
                             for c in model.reheaters + model.pipes],
                            ["", "", "", "bar", "degC"]))
        lines.append("")
    if model.extractions:
        lines.append(_table("Extractions", ["extraction", "node", "design flow", "control",
                                            "heater"],
                            [[e.name, e.node, e.design_flow, e.control, e.heater or ""]
                             for e in model.extractions.values()], ["", "", "kg/s", "", ""]))
        lines.append("")
    if model.heaters:
        lines.append(_table("Heaters", ["heater", "type", "extraction", "TTD", "DCA", "drains to",
                                        "design duty", "closure"],
                            [[h.name, h.kind, h.extraction,
                              h.ttd if h.kind == "closed" else None, h.dca, h.drain_to
                              if h.kind == "closed" else "", h.duty_design / 1e6, h.closure]
                             for h in model.heaters.values()],
                            ["", "", "", "K", "K", "", "MW", "-"]))
        lines.append("  closure = feedwater duty / heat given up by bleed and drains at design;"
                     " 1 for a consistent heat balance")
        lines.append("")
    g = model.generator
    lines.append(f"generator: rating {g.rating / 1e6:.2f} MW; losses: mechanical "
                 f"{g.mechanical_loss / 1e6:.3f} MW, fixed {g.fixed_loss / 1e6:.3f} MW, "
                 f"load {g.load_loss_rated / 1e6:.3f} MW at rating")
    return "\n".join(lines)
