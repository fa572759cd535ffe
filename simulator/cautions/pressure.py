"""Pressure-rise checks: a node above its design pressure, by stage overload
(``pressure_rise``) or pushed up by the back pressure (``back_pressure_rise``).

The cause is judged by the stage group after the node (see :func:`rise_kind`):
its flow alone, through its own flow law at its design outlet pressure, and
its outlet-to-inlet pressure ratio against design.
"""

from __future__ import annotations

import math

from ..plant.model import Model
from .common import BACK, DEFERENCE, Caution
from .common import Point as _Point
from .common import others as _others
from .common import pct as _pct

__all__ = ["pressure_rise", "back_pressure_rise", "rise_kind", "groups_after"]


def rises(pt: _Point) -> list[tuple[float, str, float, str]]:
    """Nodes above ``max_pressure_rise`` with the cause of each:
    ``(rise [-], node, pressure [Pa], cause)``, cause ``"overload"``,
    ``"back_pressure"`` or ``"other"`` (see :func:`rise_kind`); worst first."""
    if "rises" in pt.memo:  # both pressure checks ask
        return pt.memo["rises"]
    r, model = pt.result, pt.model
    lim = pt.limits["max_pressure_rise"]
    skip = set(model.exhaust_nodes) | {model.source}
    over = []
    for i, n in enumerate(r.node_names):
        if n in skip:
            continue
        rise = float(r.node_p[i]) / model.design_pressure[n] - 1.0
        if rise > lim:
            over.append((rise, n, float(r.node_p[i]), rise_kind(pt, n, lim)))
    over.sort(reverse=True)
    pt.memo["rises"] = over
    return over


def pressure_rise(pt: _Point) -> Caution | None:
    name = "max_pressure_rise"
    lim = pt.limits[name]
    over = [o for o in rises(pt) if o[3] != "back_pressure"]
    if not over:
        return None
    rise, n, _p, kind = over[0]
    return Caution(
        "pressure_rise",
        f"{_above_design(pt, over, name, lim)}: {rise_cause(pt, n, kind)} {DEFERENCE}",
        rise, lim, n, "-")


def _above_design(pt: _Point, over: list, name: str, lim: float) -> str:
    """The words both rise cautions open with: the worst node of ``over`` (rises
    from :func:`rises`, worst first) against its design pressure and the limit
    ``name`` (``lim`` [-]), and the other nodes beyond it."""
    rise, n, p, _kind = over[0]
    return (f"Pressure at node {n!r} is {pt.q(p, 'Pa', '.4g')}, {_pct(rise)} above its design "
            f"{pt.q(pt.model.design_pressure[n], 'Pa', '.4g')} "
            f"({pt.limit_text(name, _pct(lim))})"
            f"{_others([(o[1], '+' + _pct(o[0])) for o in over[1:]])}")


def back_pressure_rise(pt: _Point) -> Caution | None:
    r, model = pt.result, pt.model
    name = "max_pressure_rise"
    lim = pt.limits[name]
    over = [o for o in rises(pt) if o[3] == "back_pressure"]
    if not over:
        return None
    rise, n, p, _kind = over[0]
    flow_rise, ratio_rise, g = flow_and_ratio(pt, n)
    ex = model.exhaust_nodes[0]
    p_ex = float(r.node_p[pt.node_index(ex)])
    return Caution(
        "back_pressure_rise",
        f"{_above_design(pt, over, name, lim)}: the exhaust pressure "
        f"({pt.q(p_ex, 'Pa', '.3g', BACK)} against "
        f"{pt.q(model.design_pressure[ex], 'Pa', '.3g', BACK)} at design) "
        f"pushes up the pressures of the last stages. This is not a stage overload: the "
        f"outlet-to-inlet pressure ratio of group {g!r} after the node is {_pct(ratio_rise)} "
        f"above design, so it takes a smaller drop and unloads (its flow alone would raise "
        f"the node {_pct(flow_rise)} at the design back pressure). Extraction lines and heater "
        f"shells at this node see more than their design pressure. {DEFERENCE}",
        rise, lim, n, "-")


def flow_and_ratio(pt: _Point, node: str) -> tuple[float, float, str]:
    """For the stage group after ``node`` that its flow loads most: the rise of its
    inlet pressure [-] its flow alone would make with the design outlet pressure,
    the rise of its outlet-to-inlet pressure ratio over design [-], and its name."""
    r, model = pt.result, pt.model
    best = (-math.inf, math.nan, "")
    for k in groups_after(model, node):
        c = model.groups[k]
        i, j = pt.node_index(c.inlet), pt.node_index(c.outlet)
        p_in, p_out = float(r.node_p[i]), float(r.node_p[j])
        p_in_d, p_out_d = model.design_pressure[c.inlet], model.design_pressure[c.outlet]
        m = float(r.group_flow[k])
        # the group's flow law solved for its inlet pressure at this flow, this inlet
        # p v (nearly constant along an isotherm) and the design outlet pressure
        pv = p_in * pt.steam.v_ph(p_in, float(r.node_h[i]))
        p_flow = c.inlet_pressure_for(m, p_out_d, pv)
        flow_rise = p_flow / p_in_d - 1.0
        ratio_rise = (p_out / p_in) / (p_out_d / p_in_d) - 1.0
        if flow_rise > best[0]:
            best = (flow_rise, ratio_rise, c.name)
    return best


def rise_kind(pt: _Point, node: str, lim: float) -> str:
    """Why the pressure at ``node`` is above the limit ``lim`` [-].

    Judged by the stage group after the node that its flow loads most:
    ``"back_pressure"`` when the exhaust pressure is above design and the
    group's outlet-to-inlet pressure ratio is more than ``lim`` above design
    (it takes a smaller drop: the back pressure pushes the node up and the
    group unloads); ``"overload"`` when, otherwise, its flow alone would raise
    the node beyond the limit with the group's design outlet pressure;
    ``"other"``: neither (hotter steam further on).
    """
    flow_rise, ratio_rise, g = flow_and_ratio(pt, node)
    if not g:
        return "overload"
    model = pt.model
    ex_high = any(float(pt.result.node_p[pt.node_index(n)]) > model.design_pressure[n] * 1.001
                  for n in model.exhaust_nodes)
    if ex_high and ratio_rise > lim:
        return "back_pressure"
    return "overload" if flow_rise > lim else "other"


def groups_after(model: Model, node: str) -> list[int]:
    """Indices of the stage groups fed by ``node``, through a reheater or pipe if need be."""
    g = model.graph
    seen, todo, found = set(), [node], []
    names = {c.name: k for k, c in enumerate(model.groups)}
    while todo:
        n = todo.pop()
        for succ in g.successors(n):
            c = g.edges[n, succ]["component"]
            if c.name in names:
                found.append(names[c.name])
            elif succ not in seen:
                seen.add(succ)
                todo.append(succ)
    return found


def rise_cause(pt: _Point, node: str, kind: str) -> str:
    """Why the pressure at ``node`` is high (``kind`` from :func:`rise_kind`), in words."""
    r, model = pt.result, pt.model
    ratios = [(float(r.group_flow[k]) / model.design_group_flow[model.groups[k].name],
               model.groups[k].name) for k in groups_after(model, node)]
    ratio, g = max(ratios) if ratios else (math.nan, "")
    if kind == "overload" and ratio > 1.0:
        return (f"stage overload. Group {g!r} after it carries {_pct(ratio - 1.0)} more steam "
                f"than at design (typically behind a closed extraction or a heater out of "
                f"service, or at a throttle flow above design), raising blade loading and "
                f"thrust; extraction lines and heater shells at this node see more than their "
                f"design pressure.")
    ex = model.exhaust_nodes[0]
    p_ex = float(r.node_p[pt.node_index(ex)])
    p_ex_d = model.design_pressure[ex]
    back = (f" the exhaust pressure ({pt.q(p_ex, 'Pa', '.3g', BACK)} against "
            f"{pt.q(p_ex_d, 'Pa', '.3g', BACK)} at "
            f"design) or" if p_ex > p_ex_d * 1.001 else "")
    return (f"the stage groups after it carry no more than their design flow, so this is not a "
            f"stage overload; the rise comes from{back} hotter steam further on. Extraction "
            f"lines and heater shells at this node see more than their design pressure.")


