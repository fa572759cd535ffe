"""Helpers for tests: model variants built from the demo files, balance checks."""

from __future__ import annotations

import copy
import tomllib
from collections import defaultdict
from pathlib import Path

from partload.plant.model import build_model

MODELS = Path(__file__).resolve().parent.parent / "models"


def demo_data(name: str = "demo_reheat_unit") -> dict:
    return tomllib.loads((MODELS / f"{name}.toml").read_text())


def variant(name: str = "demo_reheat_unit", *, heaters: bool = True,
            correction: str | None = None, **changes):
    """A demo model rebuilt with changes: without its heater train, with one
    efficiency correction for every group, or with top-level tables replaced."""
    data = copy.deepcopy(demo_data(name))
    if not heaters:
        for key in ("heater", "pump", "feedwater"):
            data.pop(key, None)
        for e in data.get("extraction", []):
            e.setdefault("control", "fraction")
    if correction:
        for g in data["stage_group"]:
            g["efficiency_correction"] = correction
            g.pop("correction_table", None)
    data.update(changes)
    return build_model(data, file=f"{name}-variant")


def node_mass_imbalance(model, r) -> dict[str, float]:
    """Inflow - outflow - bleeds at every node that is neither throttle nor exhaust [kg/s]."""
    inflow = defaultdict(float)
    outflow = defaultdict(float)
    path = r.tables["steam_path"]  # every component between two nodes, whatever its kind
    for i, _ in enumerate(path.names):
        outflow[path.inlet[i]] += path.columns["flow"][i]
        inflow[path.outlet[i]] += path.columns["flow"][i]
    for i, n in enumerate(r.extraction_nodes):
        outflow[n] += r.extraction_flow[i]
    if r.totals.get("reheater_spray_flow"):  # attemperator water joins at the reheater outlet
        inflow[model.reheaters[0].outlet] += r.totals["reheater_spray_flow"]
    skip = {model.source, *model.exhaust_nodes}
    return {n: inflow[n] - outflow[n] for n in r.node_names if n not in skip}


def turbine_energy_imbalance(model, r) -> float:
    """Steam-path energy balance [W]: in (throttle steam, heat added on the way, spray
    water) less out (the work of every steam-path component, bleeds, steam reaching the
    exhaust nodes)."""
    i_src = r.node_names.index(model.source)
    path = r.tables["steam_path"]
    e_in = (r.totals["throttle_flow"] * r.node_h[i_src] + float(path.columns["heat"].sum())
            + r.totals.get("reheater_spray_flow", 0.0) * r.totals.get("spray_water_enthalpy", 0.0))
    e_bleed = float((r.extraction_flow * r.extraction_h).sum())
    e_exh = 0.0
    for n in model.exhaust_nodes:
        j = r.node_names.index(n)
        m = sum(f for f, out in zip(path.columns["flow"], path.outlet) if out == n)
        e_exh += m * r.node_h[j]
    return e_in - float(path.columns["power"].sum()) - e_bleed - e_exh
