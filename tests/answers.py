"""Recorded answers of every model, case and study file in the repository.

``python tests/answers.py`` writes ``tests/data/recorded_answers.json``: for
every case file its single point, and for every case with a sweep or a profile
a spread of its study points (solved from the plain start, one by one), each
flattened into named SI numbers.  ``tests/test_answers.py`` solves the same
points again and compares.  The file was written before the component
protocol restructuring; it is the regression record that says a change of
structure changed no answer (regression values, no outside source).

Only flatten points here through the public result of a solved point, so the
record outlives changes of the internals.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
CASES = ROOT / "cases"
RECORD = Path(__file__).resolve().parent / "data" / "recorded_answers.json"
# study points recorded per case: every k-th point so that about this many are kept
STUDY_POINTS = 40


def flatten(r) -> dict[str, float]:
    """Named SI numbers of a solved point (NaN kept as None)."""
    out: dict[str, float] = {}
    for i, name in enumerate(r.node_names):
        for key, arr in (("pressure", r.node_p), ("temperature", r.node_T),
                         ("enthalpy", r.node_h), ("entropy", r.node_s), ("quality", r.node_x)):
            out[f"node/{name}/{key}"] = arr[i]
    for i, name in enumerate(r.group_names):
        for key, arr in (("flow", r.group_flow), ("efficiency", r.group_eta),
                         ("isentropic_drop", r.group_dh_s), ("power", r.group_power),
                         ("annulus_velocity", r.group_velocity),
                         ("exhaust_loss", r.group_exhaust_loss),
                         ("outlet_moisture", r.group_moisture_out)):
            out[f"group/{name}/{key}"] = arr[i]
    for i, name in enumerate(r.extraction_names):
        for key, arr in (("flow", r.extraction_flow), ("pressure", r.extraction_p),
                         ("enthalpy", r.extraction_h)):
            out[f"extraction/{name}/{key}"] = arr[i]
    for hs in r.heaters:
        for key, attr in (("bleed", "bleed"), ("shell_pressure", "shell_pressure"),
                          ("feedwater_out_temperature", "T_out"),
                          ("drain_temperature", "T_drain"), ("feedwater_flow", "m_water"),
                          ("drain_flow", "drain_flow"), ("duty", "duty")):
            out[f"heater/{hs.name}/{key}"] = getattr(hs, attr) if hs.in_service else None
    for key, value in r.totals.items():
        out[f"total/{key}"] = value
    return {k: (None if (v is None or math.isnan(float(v))) else float(v))
            for k, v in out.items()}


def study_points(case):
    """``(index, conditions)`` of the recorded points of a case's study (empty if none)."""
    from partload.study import plan_study

    if "sweep" not in case.data and "profile" not in case.data:
        return []
    plan = plan_study(case)
    n = plan.n_points
    step = max(1, n // STUDY_POINTS)
    return [(i, plan.conditions[i]) for i in range(0, n, step)]


def solve_all(stems=None):
    """``{key: flattened point or error text}`` for every point of every case file
    (only of the case files named ``stems``, when given)."""
    from partload.errors import SolveError
    from partload.plant.case import load_case
    from partload.solve.point import solve_point

    out = {}
    for path in sorted(CASES.glob("*.toml")):
        if stems is not None and path.stem not in stems:
            continue
        case = load_case(path)
        points = [("point", case.conditions)]
        points += [(f"study/{i}", c) for i, c in study_points(case)]
        for key, cond in points:
            try:
                out[f"{path.stem}/{key}"] = flatten(solve_point(case.model, cond, case.backend))
            except SolveError as exc:
                out[f"{path.stem}/{key}"] = f"{type(exc).__name__}"
    return out


if __name__ == "__main__":
    RECORD.parent.mkdir(exist_ok=True)
    RECORD.write_text(json.dumps(solve_all(), indent=0, sort_keys=True))
    print(f"wrote {RECORD}")
