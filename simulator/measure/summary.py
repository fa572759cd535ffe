"""Reconciliations and fits as plain data (JSON) and as console text.

Values in the dictionaries are SI, each with its unit stated; the console text
uses the display units of :data:`simulator.units.DISPLAY` (bar, degC, MW).
"""

from __future__ import annotations

import math

import numpy as np

from ..units import to_display_unit
from .fit import FitResult
from .gls import INDIVIDUAL_LIMIT
from .tags import COVERAGE

__all__ = ["reading_rows", "fit_to_dict", "format_readings", "format_fit", "SI_UNIT"]

#: SI unit of each dimension a reading has
SI_UNIT = {"pressure": "Pa", "temperature": "K", "mass_flow": "kg/s", "power": "W",
           "fraction": "-", "specific_enthalpy": "J/kg", "velocity": "m/s",
           "temperature_difference": "K"}


def _num(x: float):
    return None if not math.isfinite(x) else float(x)


def reading_rows(result: FitResult, k: int) -> list[dict]:
    """Every reading of point ``k``: measured and reconciled values with their 95 %
    uncertainties [SI], the correction's test value ``z`` [-] and the verdicts."""
    rec = result.rec
    family = rec.family_limit
    rows = []
    for i in result.point_rows(k):
        tag = result.meas.tags[result.rows[i][1]]
        z = float(rec.z[i])
        rows.append({
            "tag": tag.name, "what": tag.what, "unit": SI_UNIT[tag.dimension],
            "measured": float(rec.measured[i]),
            "measured_uncertainty": float(COVERAGE * rec.sigma[i]),
            "reconciled": float(rec.reconciled[i]),
            "reconciled_uncertainty": float(COVERAGE * rec.reconciled_sigma[i]),
            "correction": float(rec.reconciled[i] - rec.measured[i]),
            "z": _num(z),
            "individual_test": "not redundant" if not math.isfinite(z) else
            ("exceeds 1.96" if abs(z) > INDIVIDUAL_LIMIT else "passed"),
            "suspect": bool(math.isfinite(z) and abs(z) > family),
        })
    return rows


def fit_to_dict(result: FitResult, deviations=None, totals=None) -> dict:
    """A reconciliation or fit as JSON-ready data."""
    rec = result.rec
    tunables = []
    for p in result.parameters:
        if p.tag is None:
            value, u = result.tunable(p.key)
            tunables.append({"key": p.key, "value": value, "uncertainty_95": u,
                             "design": result.design[p.key]})
    out = {
        "measurements": result.meas.file, "data": result.meas.data_file,
        "model": result.meas.model.name,
        "quality": {"chi2": rec.chi2, "degrees_of_freedom": rec.dof,
                    "chi2_limit_95": _num(rec.chi2_limit), "passed": rec.passed,
                    "suspect_limit": rec.family_limit},
        "suspects": [{"point": p, "tag": t, "z": z} for p, t, z in result.suspects()],
        "offsets": [{"tag": t, "Z": z, "readings": k} for t, z, k in result.offsets()],
        "set_aside": [{"point": p, "tag": t, "z": z, "reading": r, "model_value": m,
                       "unit": SI_UNIT[result.meas.tag(t).dimension]}
                      for p, t, z, r, m in result.removed],
        "tunables": tunables,
        "points": [{"label": result.meas.labels[k], "line": result.meas.lines[k],
                    "chi2": result.point_chi2(k), "readings": reading_rows(result, k)}
                   for k in range(len(result.meas.values))],
    }
    if deviations is not None:
        out["deviations"] = [{"key": d.key, "unit": d.unit, "value": d.value,
                              "uncertainty_95": d.uncertainty, "design": d.design,
                              "output_loss_W": d.output_loss,
                              "output_loss_uncertainty_95_W": d.output_loss_uncertainty,
                              "heat_rate_change_J_per_J": d.heat_rate_change,
                              "heat_rate_change_uncertainty_95_J_per_J":
                                  d.heat_rate_change_uncertainty} for d in deviations]
        out["at_design_flow"] = {"design_output_W": totals["design_output"],
                                 "tested_output_W": totals["tested_output"],
                                 "tested_output_uncertainty_95_W":
                                     totals["tested_output_uncertainty"],
                                 "tested_heat_rate_uncertainty_95_J_per_J":
                                     totals["tested_heat_rate_uncertainty"],
                                 "design_heat_rate_J_per_J": totals["design_heat_rate"],
                                 "tested_heat_rate_J_per_J": totals["tested_heat_rate"]}
    return out


def _show(x: float, unit: str) -> tuple[float, str]:
    v, u = to_display_unit(x, unit)
    return float(v), u


def _row_unit(si_unit: str, value: float):
    """``(show, unit)``: a function from SI to the display unit of a row, and that
    unit; pressures below half a bar (an exhaust) in kPa."""
    if si_unit == "Pa" and abs(value) < 5e4:
        return (lambda x: x / 1e3), "kPa"
    _, unit = _show(value, si_unit)
    return (lambda x: _show(x, si_unit)[0]), unit


def format_readings(result: FitResult, k: int) -> str:
    """The readings of point ``k`` as a console table."""
    lines = [f"{'tag':<10} {'measured':>12} {'+/-':>8} {'reconciled':>12} {'+/-':>8} "
             f"{'z':>6}  {'unit':<6} verdict"]
    for r in reading_rows(result, k):
        show, unit = _row_unit(r["unit"], r["measured"])
        z = "   -  " if r["z"] is None else f"{r['z']:+6.2f}"
        verdict = "SUSPECT" if r["suspect"] else ("> 1.96" if r["individual_test"] ==
                                                   "exceeds 1.96" else "")
        u_m = show(r["measured_uncertainty"]) - show(0.0)
        u_r = show(r["reconciled_uncertainty"]) - show(0.0)
        lines.append(f"{r['tag']:<10} {show(r['measured']):12.5g} {u_m:8.3g}"
                     f" {show(r['reconciled']):12.5g} {u_r:8.3g} {z}  {unit:<6} {verdict}")
    return "\n".join(lines)


def _quality(result: FitResult) -> str:
    rec = result.rec
    verdict = ("met" if rec.passed else "NOT MET: the readings contradict each other or the "
               "model beyond their uncertainties")
    return (f"quality criterion: chi2 = {rec.chi2:.2f} with {rec.dof} degrees of freedom, "
            f"95 % limit {rec.chi2_limit:.2f}: {verdict}")


def _suspects(result: FitResult) -> list[str]:
    out = []
    for label, tag, z, reading, model in result.removed:
        unit = SI_UNIT[result.meas.tag(tag).dimension]
        show, shown = _row_unit(unit, reading)
        r, m = show(reading), show(model)
        out.append(f"SET ASIDE as a gross error: {tag} at {label} (z = {z:+.2f}); it reads "
                   f"{r:.5g} {shown}, the other readings and the model say {m:.5g} {shown}")
    for tag, z, k in result.offsets():
        out.append(f"OFFSET: the {k} readings of {tag} deviate together (Z = {z:+.2f}): a "
                   f"meter reading {'high' if z < 0 else 'low'} or drifting? check it")
    s = [(p, t, z) for p, t, z in result.suspects()[len(result.removed):]]
    if s:
        out.append(f"suspect readings (|z| > {result.rec.family_limit:.2f}, worst first): "
                   + ", ".join(f"{t} at {p} (z = {z:+.2f})" for p, t, z in s))
    elif not out:
        out.append(f"suspect readings: none (limit |z| > {result.rec.family_limit:.2f})")
    return out


def format_fit(result: FitResult, deviations=None, totals=None, readings: bool = True) -> str:
    """A reconciliation or fit as console text."""
    out = []
    meas = result.meas
    if readings:
        for k in range(len(meas.values)):
            out += [f"point {meas.labels[k]} (line {meas.lines[k]}), chi2 "
                    f"{result.point_chi2(k):.2f}", format_readings(result, k), ""]
    out += [_quality(result)] + _suspects(result)
    tun = [p for p in result.parameters if p.tag is None]
    if tun:
        out += ["", f"{'tunable':<32} {'fitted':>12} {'+/- 95 %':>10} {'design':>12}"]
        for p in tun:
            v, u = result.tunable(p.key)
            out.append(f"{p.key:<32} {v:12.6g} {u:10.3g} {result.design[p.key]:12.6g}")
    if deviations is not None:
        out += ["", "cost at design throttle flow (each constant alone, against design; "
                "engineering estimate)",
                f"{'tunable':<32} {'output lost':>12} {'+/-':>8} {'heat rate':>12} {'+/-':>8}",
                f"{'':<32} {'[MW]':>12} {'':>8} {'[kJ/kWh]':>12}"]
        for d in deviations:
            out.append(f"{d.key:<32} {d.output_loss / 1e6:12.3f} "
                       f"{d.output_loss_uncertainty / 1e6:8.3f} "
                       f"{d.heat_rate_change * 3600:+12.1f} "
                       f"{d.heat_rate_change_uncertainty * 3600:8.1f}")
        dp = totals["design_output"] - totals["tested_output"]
        dhr = totals["tested_heat_rate"] - totals["design_heat_rate"]
        out.append(f"{'all together':<32} {dp / 1e6:12.3f} {'':8} {dhr * 3600:+12.1f}")
        out.append(f"design output {totals['design_output'] / 1e6:.2f} MW, as tested "
                   f"{totals['tested_output'] / 1e6:.2f} +/- "
                   f"{totals['tested_output_uncertainty'] / 1e6:.2f} MW; heat rate "
                   f"{totals['design_heat_rate'] * 3600:.0f} -> "
                   f"{totals['tested_heat_rate'] * 3600:.0f} +/- "
                   f"{totals['tested_heat_rate_uncertainty'] * 3600:.0f} kJ/kWh (95 %)")
    return "\n".join(out)


def trend_summary(trend) -> str:
    """One line per tunable: first and last fitted value and the change."""
    ok = np.flatnonzero(trend.status == 0)
    lines = [f"{len(trend.labels)} periods, {len(ok)} fitted, "
             f"{int((trend.passed[ok] == 0).sum())} failing the quality criterion"]
    if len(ok):
        a, b = ok[0], ok[-1]
        for c, name in enumerate(trend.names):
            s = 100.0 if trend.units[c] == "-" else 1.0
            unit = "%" if trend.units[c] == "-" else trend.units[c]
            lines.append(f"{name:<32} {trend.labels[a]}: {trend.value[a, c] * s:.4g} -> "
                         f"{trend.labels[b]}: {trend.value[b, c] * s:.4g} +/- "
                         f"{trend.uncertainty[b, c] * s:.2g} {unit} (design "
                         f"{trend.design[c] * s:.4g})")
    named: dict[str, list[int]] = {}  # tag -> periods naming it (once a reading)
    for i, text in enumerate(trend.suspects):
        for item in text.split():
            named.setdefault(item.split("@")[0], []).append(i)
    for tag, where in sorted(named.items(), key=lambda kv: -len(kv[1])):
        periods = sorted(set(where))
        lines.append(f"suspect {tag}: {len(where)} reading{'s' * (len(where) != 1)} in "
                     f"{len(periods)} period{'s' * (len(periods) != 1)} (first "
                     f"{trend.labels[periods[0]]}, last {trend.labels[periods[-1]]})")
    offset: dict[str, list[int]] = {}
    for i, text in enumerate(trend.offsets):
        for item in text.split():
            offset.setdefault(item.split(":")[0], []).append(i)
    for tag, periods in sorted(offset.items(), key=lambda kv: -len(kv[1])):
        lines.append(f"offset {tag}: its readings deviate together in {len(periods)} periods "
                     f"(first {trend.labels[periods[0]]}, last {trend.labels[periods[-1]]})")
    for i in np.flatnonzero(trend.status != 0):
        lines.append(f"period {trend.labels[i]} not fitted: {trend.messages[i]}")
    return "\n".join(lines)
