"""Readable tables and JSON of point results and calibrated models.

Conversion from SI to the engineer's display units happens here and in the
store's export only, through the one table :data:`simulator.units.DISPLAY`:
pressures in bar, temperatures in degC (differences in K), enthalpy in kJ/kg,
entropy in kJ/(kg K), power in MW, heat rate in kJ/kWh (and Btu/kWh),
fractions in per cent.  The tables and JSON of a point are generated from the
columns its result declares (:mod:`simulator.solve.result`), so a new kind's
results appear here without further code.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np

from ..plant.fitted import fitted_text
from ..solve.result import TOTALS, PointResult
from ..units import to_display_unit

__all__ = ["point_to_dict", "format_point", "format_model", "model_files", "shown",
           "format_corrections", "corrections_to_dict"]

BTU_PER_KJ = 1.0 / 1.05505585262  # International Table Btu
_TOTALS = {c.name: c for c in TOTALS}
# result groups kept out of console tables: the generic steam-path view repeats
# the flows of the kinds' own tables
_NOT_SHOWN = ("steam_path",)


def shown(values, column, units: str = "metric") -> tuple[np.ndarray, str]:
    """Values of a declared column in its display unit of the system ``units``
    (``"metric"`` or ``"us"``), and that unit."""
    return to_display_unit(values, column.unit, column.display, units, column.name)


def _f(v) -> float | None:
    v = float(v)
    return None if math.isnan(v) else v


def _value(v, column, units: str = "metric"):
    """One JSON value of a declared column."""
    if column.dtype == "text":
        return v
    if column.dtype == "u1":
        return bool(v)
    if column.dtype.startswith("i"):
        return int(v)
    return _f(shown(v, column, units)[0])


def point_to_dict(r: PointResult, case_name: str = "", cautions=(),
                  units: str = "metric") -> dict:
    """A JSON-ready dict of a point in display units (``units``: ``"metric"``
    or ``"us"``, see :data:`partload.units.SYSTEMS`), with the units stated."""
    out = {
        "converged": bool(r.converged),
        "model": r.model_name,
        "case": case_name,
        "valve_mode": r.valve_mode,
        "pressure_mode": r.pressure_mode,
        "property_backend": r.backend,
        "solver": {"iterations": r.iterations, "largest_residual": r.residual,
                   "residual_evaluations": r.evaluations, "message": r.message},
        "units": {},
    }
    for group, table in r.tables.items():
        rows = []
        for i, name in enumerate(table.names):
            row = {"name": name}
            if table.inlet is not None:
                row["from"], row["to"] = table.inlet[i], table.outlet[i]
            if table.node is not None:
                row["node"] = table.node[i]
            for col in table.declared:
                row[col.name] = _value(table.columns[col.name][i], col, units)
            rows.append(row)
        out[group] = rows
        out["units"][group] = {c.name: shown(0.0, c, units)[1] for c in table.declared
                               if c.dtype not in ("text", "u1")}
    totals = {}
    total_units = {}
    for k, v in r.totals.items():
        col = _TOTALS[k]
        if k in ("makeup_flow", "process_steam_energy") and abs(v) < 1e-6 * abs(
                r.totals["throttle_flow"]):
            v = 0.0  # a balance that closes to round-off is shown as zero
        value, total_units[k] = shown(v, col, units)
        totals[k] = _f(value)
        if k == "heat_rate" and units == "metric":
            totals["heat_rate_btu"] = _f(v * 3600.0 * BTU_PER_KJ)
            total_units["heat_rate_btu"] = "Btu/kWh"
    out["totals"] = totals
    out["units"]["totals"] = total_units
    out["units_system"] = units
    out["cautions"] = [c.to_dict() if hasattr(c, "to_dict") else c for c in cautions]
    return out


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


def valve_point_rows(model, results) -> list[dict]:
    """One dict a valve point (SI): valves wide open, throttle flow and its share
    of design, output, heat rate, first-stage pressure, throttle pressure; or
    why the unit cannot run there (``"not_reached"``).  ``results`` as
    :func:`simulator.solve.point.valve_points` returns them."""
    gov = model.governing_stage
    rows = []
    for k, r in results:
        if not hasattr(r, "totals"):
            rows.append({"valves_wide_open": k, "valves": list(gov.valves[:k]),
                         "not_reached": str(r)})
            continue
        t = r.totals
        rows.append({"valves_wide_open": k, "valves": list(gov.valves[:k]),
                     "throttle_flow": t["throttle_flow"],
                     "throttle_flow_fraction": t["throttle_flow"] / model.throttle.flow,
                     "generator_output": t["generator_output"],
                     "heat_rate": t.get("heat_rate", math.nan),
                     "first_stage_pressure": r.node(gov.outlet)["p"],
                     "throttle_pressure": t["throttle_pressure"]})
    return rows


def format_valve_points(model, results, case_name: str = "") -> str:
    """The valve points of a nozzle-governed unit as a table."""
    rows = valve_point_rows(model, results)
    missing = [r for r in rows if "not_reached" in r]
    rows = [r for r in rows if "not_reached" not in r]
    p_T = rows[0]["throttle_pressure"] if rows else math.nan
    head = (f"partload: {model.name}" + (f" / case {case_name}" if case_name else "")
            + f"\nvalve points at a held throttle pressure of {p_T / 1e5:.2f} bar: the first "
            f"valves wide open, the others closed (heat rate: heat added over generator "
            f"output, turbine cycle)\n")
    return head + "\n" + _table(
        "Valve points",
        ["wide open", "last valve", "throttle flow", "of design", "output", "heat rate",
         "first-stage p"],
        [[r["valves_wide_open"], r["valves"][-1], r["throttle_flow"],
          100 * r["throttle_flow_fraction"], r["generator_output"] / 1e6, r["heat_rate"] * 3600,
          r["first_stage_pressure"] / 1e5] for r in rows],
        ["", "", "kg/s", "%", "MW", "kJ/kWh", "bar"]) + "".join(
        f"\n{r['valves_wide_open']} wide open ({r['valves'][-1]}): not reached: "
        f"{r['not_reached']}" for r in missing)


def table_cells(d: dict, group: str, table) -> tuple[list, list, list, int]:
    """``(headers, units, rows, text columns)`` of one result group of a point's
    dict (:func:`point_to_dict`) as a table shows it: the name, the nodes, then the
    declared columns shown on the console (flags in words); ``text columns`` is how
    many columns lead with text."""
    cols = [c for c in table.declared if c.console]
    headers = [_singular(group)]
    units = [""]
    if table.inlet is not None:
        headers += ["from", "to"]
        units += ["", ""]
    if table.node is not None:
        headers.append("node")
        units.append("")
    lead = len(headers)
    headers += [c.label or c.name.replace("_", " ") for c in cols]
    units += [d["units"][group].get(c.name, "") for c in cols]
    rows = []
    for row in d[group]:
        cells = [row["name"]]
        if table.inlet is not None:
            cells += [row["from"], row["to"]]
        if table.node is not None:
            cells.append(row["node"])
        for c in cols:
            v = row[c.name]
            cells.append(c.words[int(v)] if c.dtype == "u1" else v)
        rows.append(cells)
    return headers, units, rows, lead


def _singular(group: str) -> str:
    """A result group's name for one of its rows: ``stage_groups`` -> ``stage group``."""
    word = group.replace("_", " ")
    if word.endswith("ies"):
        return word[:-3] + "y"
    return word[:-1] if word.endswith("s") and not word.endswith("ss") else word


def format_point(r: PointResult, case_name: str = "", cautions=(),
                 units: str = "metric") -> str:
    """Readable tables of a solved point (``units``: ``"metric"`` or ``"us"``)."""
    d = point_to_dict(r, case_name, cautions, units)
    out = [f"partload: {d['model']}" + (f" / case {case_name}" if case_name else ""),
           f"converged in {r.iterations} Newton iterations ({r.evaluations} residual "
           f"evaluations), largest residual {r.residual:.2e}; properties: {r.backend}; "
           f"valves: {r.valve_mode}; throttle pressure: {r.pressure_mode}", ""]
    for group, table in r.tables.items():
        if group in _NOT_SHOWN or not table.names:
            continue
        headers, units, rows, _ = table_cells(d, group, table)
        out.append(_table(group.replace("_", " ").capitalize(), headers, rows, units))
        out.append("")
    t = d["totals"]
    tu = d["units"]["totals"]
    labels = {c.name: c.label for c in TOTALS if c.label}
    rows = [[labels.get(k, k.replace("_", " ")), v, tu.get(k, "")] for k, v in t.items()]
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


def _d(value, si_unit: str, units: str, display: str | None = None,
       quantity: str | None = None) -> tuple[float, str]:
    """One SI value in the display unit of ``units``, and that unit."""
    v, u = to_display_unit(value, si_unit, display, units, quantity)
    return float(v), u


def model_files(model) -> list[tuple[str, str]]:
    """``(label, text)`` of the files a model was read from: the model file, and for
    a fitted (as tested) model its fitted file, design model and fitted values."""
    if not model.fitted:
        return [("model file", Path(model.file).name)]
    return [("model file", Path(model.fitted_file or model.file).name),
            ("design model file", Path(model.file).name),
            ("fitted values", fitted_text(model.fitted, ", "))]


def format_model(model, units: str = "metric") -> str:
    """The calibrated model: design heat balance and component constants, in the
    display units of ``units`` (``"metric"`` or ``"us"``; the lines each kind adds
    with ``describe()`` are its own, in metric units)."""
    lines = [f"partload: model {model.name!r} ({model.file})", "calibrated to its design "
             "heat balance", ""]
    if model.fitted:  # a fitted model file: its design model, then the fitted constants
        lines[0] = (f"partload: model {model.name!r} ({model.fitted_file}; design model "
                    f"{model.file})")
        lines[1] += ", then fitted: " + fitted_text(model.fitted, ", ")
    if model.description:
        lines.insert(1, model.description)
    th = model.throttle
    p, pu = _d(th.pressure, "Pa", units)
    t, tu = _d(th.temperature, "K", units)
    m, mu = _d(th.flow, "kg/s", units)
    pmax, _ = _d(th.max_pressure, "Pa", units)
    lines.append(f"throttle: {p:.2f} {pu}, {t:.1f} {tu}, {m:.3f} {mu} (highest allowed "
                 f"pressure {pmax:.2f} {pu})")
    for c in model.components:
        lines += c.describe()
    lines.append("")
    flow_u = _d(0.0, "kg/s", units)[1]
    dh_u = _d(0.0, "J/kg", units)[1]
    rows = []
    for c in model.groups:
        rows.append([c.name, c.inlet, c.outlet, _d(model.design_group_flow[c.name], "kg/s",
                                                   units)[0],
                     c.eta_design * 100, c.eta_dry_design * 100, c.K * 1e4,
                     _d(c.dh_s_design, "J/kg", units)[0], c.q_design, c.correction_name,
                     f"{c.exhaust.area:.3g} m^2" if c.exhaust else ""])
    lines.append(_table("Stage groups (constants from calibration)",
                        ["group", "from", "to", "design flow", "eta", "eta dry", "K",
                         "dh_s design", "Q_in design", "correction", "annulus"], rows,
                        ["", "", "", flow_u, "%", "%", "cm^2", dh_u, "m^3/s", "", ""]))
    lines.append("")
    if model.reheaters or model.pipes:
        drop_u = _d(0.0, "Pa", units, quantity="pressure_drop")[1]
        temp_u = _d(300.0, "K", units)[1]
        lines.append(_table("Reheaters and pipes", ["name", "from", "to", "design drop",
                                                    "outlet T"],
                            [[c.name, c.inlet, c.outlet,
                              _d(c.dp_design, "Pa", units, quantity="pressure_drop")[0],
                              _d(c.outlet_temperature, "K", units)[0]
                              if c in model.reheaters else None]
                             for c in model.reheaters + model.pipes],
                            ["", "", "", drop_u, temp_u]))
        lines.append("")
    if model.extractions:
        lines.append(_table("Extractions", ["extraction", "node", "design flow", "control",
                                            "heater"],
                            [[e.name, e.node, _d(e.design_flow, "kg/s", units)[0], e.control,
                              e.heater or ""]
                             for e in model.extractions.values()], ["", "", flow_u, "", ""]))
        lines.append("")
    if model.heaters:
        diff_u = _d(0.0, "K", units, display="K")[1]
        lines.append(_table("Heaters", ["heater", "type", "extraction", "TTD", "DCA", "drains to",
                                        "design duty"],
                            [[h.name, h.heater_type, ", ".join(h.extractions),
                              _d(h.ttd, "K", units, display="K")[0]
                              if h.heater_type == "closed" else None,
                              _d(h.dca, "K", units, display="K")[0] if h.dca is not None
                              else None,
                              h.drain_to if h.heater_type == "closed" else "",
                              h.duty_design / 1e6]
                             for h in model.heaters.values()],
                            ["", "", "", diff_u, diff_u, "", "MW"]))
        lines.append("")
    g = model.generator
    lines.append(f"generator: rating {g.rating / 1e6:.2f} MW; losses: mechanical "
                 f"{g.mechanical_loss / 1e6:.3f} MW, fixed {g.fixed_loss / 1e6:.3f} MW, "
                 f"load {g.load_loss_rated / 1e6:.3f} MW at rating")
    return "\n".join(lines)


def _display_values(curve, units):
    """A correction curve's values in display units (the store's rule; imported
    here only, so tables of a point load no HDF5 library)."""
    from ..store.corrections import display_values

    return display_values(curve, units)


def format_corrections(cc, units: str = "metric") -> str:
    """Correction curves as console tables: per condition, each value's change of
    output and of heat rate from the reference value, in per cent, at each load
    (``(factor - 1) x 100``; a test value divided by its factor is corrected to
    reference)."""
    p_ref = to_display_unit(cc.reference_throttle_pressure, "Pa", None, units)
    out = [f"partload: correction curves of {cc.model_name}"
           + (f" / case {cc.case_name}" if cc.case_name else ""),
           f"basis: {cc.basis}",
           f"throttle pressure held at {float(p_ref[0]):.2f} {p_ref[1]}; loads in % of "
           f"design throttle flow; dP, dHR: change of output and heat rate from the "
           f"reference value [%] (ASME PTC 6 describes how such curves are used)", ""]
    for c in cc.curves:
        values, unit = _display_values(c, units)
        ref = values[c.reference_index]
        headers = [c.name.replace("_", " ")]
        units_row = [unit]
        for load in cc.loads:
            headers += [f"dP {100 * load:g}%", f"dHR {100 * load:g}%"]
            units_row += ["%", "%"]
        rows = []
        for j, v in enumerate(values):
            row = [v]
            for i in range(len(cc.loads)):
                row += [100.0 * (c.output_factor[i, j] - 1.0),
                        100.0 * (c.heat_rate_factor[i, j] - 1.0)]
            rows.append(row)
        title = f"{c.description} (reference {ref:.4g} {unit})" if not isinstance(
            ref, str) else f"{c.description} (reference: all in service)"
        out.append(_table(title[0].upper() + title[1:], headers, rows, units_row))
        for (i, j), why in sorted(c.failed.items()):
            v = values[j] if isinstance(values[j], str) else f"{values[j]:.5g} {unit}"
            out.append(f"  not solved at {100 * cc.loads[i]:g} %, {v}: {why}")
        out.append("")
    return "\n".join(out).rstrip()


def corrections_to_dict(cc, units: str = "metric") -> dict:
    """Correction curves as a JSON-ready dict in display units."""
    p_unit = to_display_unit(0.0, "W", None, units)[1]
    hr_unit = to_display_unit(0.0, "J/J", None, units)[1]
    curves = {}
    for c in cc.curves:
        values, unit = _display_values(c, units)
        out = to_display_unit(c.output, "W", None, units)[0]
        hr = to_display_unit(c.heat_rate, "J/J", None, units)[0]

        def listed(a):
            return [[_f(x) for x in row] for row in np.asarray(a)]

        curves[c.name] = {"description": c.description, "unit": unit, "values": values,
                          "reference": values[c.reference_index],
                          "output": listed(out), "heat_rate": listed(hr),
                          "output_factor": listed(c.output_factor),
                          "heat_rate_factor": listed(c.heat_rate_factor),
                          "not_solved": [{"load": cc.loads[i], "value": values[j],
                                          "why": why} for (i, j), why in c.failed.items()]}
    return {"model": cc.model_name, "case": cc.case_name, "basis": cc.basis,
            "loads": cc.loads, "units": {"output": p_unit, "heat_rate": hr_unit},
            "curves": curves}
