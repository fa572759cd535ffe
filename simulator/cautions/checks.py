"""Operating-limit cautions: does a solved point describe operation that harms the turbine?

A point can be a correct answer to the question asked and still describe
operation that damages the machine.  :func:`check_point` compares a solved
point with the limits of its model (:mod:`simulator.limits`, the model file's
``[limits]`` table or the defaults) and returns a list of :class:`Caution`.

The checks, in the order they are reported (:data:`CHECKS`):

``valves_wide_open``
    The throttle flow is more than the valves wide open can pass: at the held
    throttle pressure (throttle governing) or at the highest allowed throttle
    pressure (sliding pressure).  :func:`simulator.solve.solve_point` refuses
    such points unless called with ``check_limits=False``, as batch studies
    may do to record what-ifs; this caution marks them.
``pressure_rise``
    A node pressure more than ``max_pressure_rise`` above its design value
    (the throttle node, bounded by the model's highest allowed throttle
    pressure, and the exhaust nodes, set by the condenser, are not checked),
    caused by the flow of the groups after it (stage overload) or by hotter
    steam.
``back_pressure_rise``
    The same rise where the flow of the groups after the node would not
    reach the limit with their design outlet pressure, their pressure ratio
    is above design and the exhaust pressure is above design: the back
    pressure pushes the pressures up and the last groups unload.
``exhaust_moisture``
    Moisture at the exit of a last stage (a stage group ending at an exhaust
    node) above ``max_exhaust_moisture``.
``last_stage_volume_flow``
    Volume flow leaving a last stage below ``min_last_stage_volume_flow`` of
    its design value.
``exhaust_temperature``
    Temperature of the steam leaving a last-stage annulus (the used-energy end
    point at the exhaust pressure) above ``max_exhaust_temperature``.
``first_stage_overload``
    First-stage pressure after a governing stage above
    ``max_first_stage_pressure`` of its design value.
``valve_low_opening``
    A control valve of a governing stage throttling below the model's
    ``minimum_opening``.
``first_valve_only``
    Nozzle-group governing with only the first valve admitting steam.
``cooling_water_rise``
    Cooling water warmer by more than ``max_cooling_water_rise`` after the
    last shell of its condenser circuit.
``condenser_duty``
    A condenser rejecting less than 25 % or more than 115 % of its design
    duty: its heat-transfer law, fixed at design, is extrapolated (common
    practice, no source).
``exhaust_loss_curve``
    A last-stage annulus velocity outside its exhaust-loss curve: the loss
    was held at the curve's end value, an extrapolation the curve does not
    support (a caution on the answer, not on the machine).

Each check gives at most one caution per point, for the worst location, and
names the other locations beyond the limit in its message; so a point has at
most one caution of each code, which keeps stored results rectangular.

Every caution is an engineering estimate from a performance model, not a
measurement; the manufacturer's limits govern, and every message says so.
"""

from __future__ import annotations

import math
from collections.abc import Callable

from ..errors import PartloadError, SolveError
from ..plant.case import Conditions
from ..plant.limits import Limits, default_limits
from ..plant.model import Model
from ..solve.point import PointResult, wide_open_capacity
from ..steam.if97 import SteamTables, get_backend
from .common import (
    BACK,
    DEFERENCE,
    Caution,
    design_last_stage_volume_flow,
    last_groups,
    last_stage_state,
)
from .common import Point as _Point
from .common import others as _others
from .common import pct as _pct
from .pressure import back_pressure_rise as _back_pressure_rise
from .pressure import pressure_rise as _pressure_rise

__all__ = ["Caution", "check_point", "CHECKS", "CAUTION_CODES", "DEFERENCE",
           "last_groups", "last_stage_state", "design_last_stage_volume_flow"]


# --------------------------------------------------------------------- checks
def _valves_wide_open(pt: _Point) -> Caution | None:
    r, model = pt.result, pt.model
    t = r.totals
    m_T = t["throttle_flow"]
    p_T = t["throttle_pressure"]
    held = r.pressure_mode == "fixed" or (r.pressure_mode == "program" and r.program_held)
    if held:
        if not r.over_capacity:
            return None
        p_at = p_T
        at = f"the held throttle pressure {pt.q(p_T, 'Pa', '.2f')}"
        why = "the flow needs more than the valves pass wide open"
    else:
        p_max = model.throttle.max_pressure
        if p_T <= p_max * (1.0 + 1e-9):
            return None
        p_at = p_max
        at = f"the highest allowed throttle pressure {pt.q(p_max, 'Pa', '.2f')}"
        why = f"this answer needs a throttle pressure of {pt.q(p_T, 'Pa', '.2f')}"
    try:
        m_max = wide_open_capacity(model, pt.cond, pt.steam, p_at)[0]
        cap = f" ({pt.q(m_max, 'kg/s', '.2f')})"
    except SolveError:
        m_max, cap = math.nan, ""
    if held and m_T <= m_max * (1.0 + 1e-6):
        # the flow is within what the valves pass wide open at this pressure: a pressure
        # drop a hair short of the wide-open one is rounding of the solve (the design
        # point sits on this limit), whichever path solved the point
        return None
    return Caution(
        "valves_wide_open",
        f"Throttle flow {pt.q(m_T, 'kg/s', '.2f')} is more than the valves wide open can "
        f"pass at {at}{cap}: {why}. The machine cannot take this flow; the point was solved "
        f"with the limit checks off and shows a what-if. {DEFERENCE}",
        m_T, m_max, model.admission.name, "kg/s")


def _exhaust_moisture(pt: _Point) -> Caution | None:
    r, model = pt.result, pt.model
    name = "max_exhaust_moisture"
    lim = pt.limits[name]
    over = sorted(((float(r.group_moisture_out[k]), model.groups[k].name)
                   for k in pt.last_groups()
                   if float(r.group_moisture_out[k]) > lim), reverse=True)
    if not over:
        return None
    y, g = over[0]
    return Caution(
        "exhaust_moisture",
        f"Moisture leaving the last stage of group {g!r} is {_pct(y)} "
        f"({pt.limit_text(name, _pct(lim))}){_others([(o[1], _pct(o[0])) for o in over[1:]])}"
        f": water droplets erode the leading edges of the last moving blades, and the wet "
        f"expansion costs efficiency. {DEFERENCE}",
        y, lim, g, "-")


def _last_stage_volume_flow(pt: _Point) -> Caution | None:
    model = pt.model
    name = "min_last_stage_volume_flow"
    lim = pt.limits[name]
    low = []
    for k in pt.last_groups():
        _m, q, _h = pt.last_stage(k)
        q_d = design_last_stage_volume_flow(model, k, pt.steam)
        ratio = q / q_d
        if ratio < lim:
            low.append((ratio, model.groups[k].name, q, q_d))
    if not low:
        return None
    low.sort()
    ratio, g, q, q_d = low[0]
    return Caution(
        "last_stage_volume_flow",
        f"Volume flow leaving the last stage of group {g!r} is {pt.q(q, 'm^3/s', '.4g')}, "
        f"{_pct(ratio)} of its design {pt.q(q_d, 'm^3/s', '.4g')} "
        f"({pt.limit_text(name, _pct(lim))})"
        f"{_others([(o[1], _pct(o[0])) for o in low[1:]])}: at such low volume flow the last "
        f"stages stop expanding the steam and churn it instead (ventilation), heating the "
        f"blades and the exhaust, and the unsteady flow can make long last-stage blades "
        f"vibrate. {DEFERENCE}",
        ratio, lim, g, "-")


def _exhaust_temperature(pt: _Point) -> Caution | None:
    r, model = pt.result, pt.model
    name = "max_exhaust_temperature"
    lim = pt.limits[name]
    hot = []
    for k in pt.last_groups():
        c = model.groups[k]
        if c.exhaust is None:  # a back-pressure exhaust is hot by design
            continue
        _m, _q, h_used = pt.last_stage(k)
        try:
            T = pt.steam.T_ph(float(r.node_p[pt.node_index(c.outlet)]), h_used)
        except PartloadError:
            continue
        if T > lim:
            hot.append((T, c.name))
    if not hot:
        return None
    hot.sort(reverse=True)
    T, g = hot[0]
    return Caution(
        "exhaust_temperature",
        f"Steam leaves the last stage of group {g!r} at {pt.temperature(T)} "
        f"({pt.limit_text(name, pt.temperature(lim))})"
        f"{_others([(o[1], pt.temperature(o[0])) for o in hot[1:]])}"
        f": the last stages heat the steam they churn at low volume flow or high back "
        f"pressure; the exhaust hood and last-stage blades expand, which threatens "
        f"clearances and alignment. Exhaust-hood sprays are normally needed here. "
        f"{DEFERENCE}",
        T, lim, g, "K")


def _steam_temperature(pt: _Point) -> Caution | None:
    model, cond = pt.model, pt.cond
    name = "max_steam_temperature_rise"
    lim = pt.limits[name]
    hot = []
    T_T = cond.throttle_temperature
    if T_T is not None and T_T - model.throttle.temperature > lim:
        hot.append((T_T - model.throttle.temperature, "throttle", T_T))
    if cond.reheat_temperature is not None:
        for c in model.reheaters:
            if cond.reheat_temperature - c.outlet_temperature > lim:
                hot.append((cond.reheat_temperature - c.outlet_temperature, c.name,
                            cond.reheat_temperature))
    if not hot:
        return None
    hot.sort(reverse=True)
    dT, where, T = hot[0]
    return Caution(
        "steam_temperature",
        f"Steam at the {where} is {pt.temperature(T)}, {pt.dt(dT, '.1f')} above its design "
        f"temperature ({pt.limit_text(name, pt.dt(lim, '.1f'))})"
        f"{_others([(o[1], '+' + pt.dt(o[0], '.1f')) for o in hot[1:]])}: hotter steam spends the "
        f"creep life of steam chests, valves, inlet blading and boiler outlet headers faster "
        f"than designed; only short excursions are normally allowed. {DEFERENCE}",
        dT, lim, where, "K")


def _generator_output(pt: _Point) -> Caution | None:
    name = "max_generator_output"
    lim = pt.limits[name]
    rating = pt.model.generator.rating
    ratio = pt.result.totals["generator_output"] / rating
    if not ratio > lim:
        return None
    return Caution(
        "generator_output",
        f"Generator output is {pt.result.totals['generator_output'] / 1e6:.1f} MW, "
        f"{_pct(ratio)} of its {rating / 1e6:.1f} MW rating "
        f"({pt.limit_text(name, _pct(lim))}): the windings run hotter than designed. "
        f"{DEFERENCE}",
        ratio, lim, "generator", "-")


def _back_pressure(pt: _Point) -> Caution | None:
    model, r = pt.model, pt.result
    name = "max_back_pressure"
    lim = pt.limits[name]
    high = []
    for n in model.exhaust_nodes:
        ratio = float(r.node_p[pt.node_index(n)]) / model.design_pressure[n]
        if ratio > lim:
            high.append((ratio, n))
    if not high:
        return None
    high.sort(reverse=True)
    ratio, n = high[0]
    p = float(r.node_p[pt.node_index(n)])
    return Caution(
        "back_pressure",
        f"Exhaust pressure at {n!r} is {pt.q(p, 'Pa', '.3g', BACK)}, {_pct(ratio)} of its "
        f"design {pt.q(model.design_pressure[n], 'Pa', '.3g', BACK)} "
        f"({pt.limit_text(name, _pct(lim))})"
        f"{_others([(o[1], _pct(o[0])) for o in high[1:]])}: a high back pressure loads the "
        f"last-stage blades harder, heats the exhaust and, at low flow, can excite blade "
        f"flutter. {DEFERENCE}",
        ratio, lim, n, "-")


def _first_stage_overload(pt: _Point) -> Caution | None:
    gov = pt.model.governing_stage
    if gov is None:
        return None
    name = "max_first_stage_pressure"
    lim = pt.limits[name]
    p1 = float(pt.result.node_p[pt.node_index(gov.outlet)])
    p1_d = pt.model.design_pressure[gov.outlet]
    ratio = p1 / p1_d
    if ratio <= lim * (1.0 + 1e-6):
        return None
    return Caution(
        "first_stage_overload",
        f"First-stage pressure is {pt.q(p1, 'Pa', '.4g')}, {_pct(ratio)} of its design "
        f"{pt.q(p1_d, 'Pa', '.4g')} ({pt.limit_text(name, _pct(lim))}): the governing and "
        f"HP stages carry more than their rated loading and thrust (overload). {DEFERENCE}",
        ratio, lim, gov.outlet, "-")


def _governing_valves(pt: _Point):
    """``(governing stage, openings, flows)`` under nozzle-group governing, else ``None``."""
    gov = pt.model.governing_stage
    table = pt.result.tables.get("governing_valves")
    if gov is None or table is None or pt.result.valve_mode != "nozzle_groups":
        return None
    return gov, table.columns["opening"], table.columns["flow"]


def _valve_low_opening(pt: _Point) -> Caution | None:
    found = _governing_valves(pt)
    if found is None or found[0].minimum_opening <= 0.0:
        return None
    gov, opening, _ = found
    # an opening within 1e-6 of zero is a closed valve left by the solve's rounding
    low = [(float(o), v) for o, v in zip(opening, gov.valves)
           if 1e-6 < o < gov.minimum_opening]
    if not low:
        return None
    o, v = min(low)
    return Caution(
        "valve_low_opening",
        f"Control valve {v!r} throttles at {_pct(o)} of its group's flow, below the model's "
        f"minimum opening {_pct(gov.minimum_opening)}: a valve held near its seat wears plug "
        f"and seat by erosion and may vibrate; a load here should not be held for long "
        f"(common practice, no source). {DEFERENCE}",
        o, gov.minimum_opening, v, "-")


def _first_valve_only(pt: _Point) -> Caution | None:
    found = _governing_valves(pt)
    if found is None:
        return None
    gov, opening, flow = found
    if not (flow[0] > 0.0 and all(f <= 0.0 for f in flow[1:])) or len(flow) < 2:
        return None
    return Caution(
        "first_valve_only",
        f"Only the first control valve ({gov.valves[0]!r}, {_pct(float(opening[0]))} open) "
        f"admits steam, to {_pct(gov.arcs[0])} of the nozzle arc: the governing-stage blades "
        f"take the largest stage drop of any load and pass in and out of the one admitted "
        f"arc, their highest loading and excitation (common practice, no source). "
        f"{DEFERENCE}",
        float(opening[0]), math.nan, gov.valves[0], "-")


def _condenser_rows(pt: _Point):
    """``(condenser, result row)`` of each condenser of the model."""
    table = pt.result.tables.get("condensers")
    if table is None:
        return []
    rows = table.rows()
    return [(c, rows[c.name]) for c in pt.model.components if c.frees_node
            and c.name in rows]


def _cooling_water_rise(pt: _Point) -> Caution | None:
    name = "max_cooling_water_rise"
    lim = pt.limits[name]
    rows = _condenser_rows(pt)
    start = {c.name: row["inlet_temperature"] for c, row in rows if c.after is None}
    head = {}
    for c, _row in rows:  # the first shell of each one's circuit
        head[c.name] = c.name if c.after is None else head[c.after]
    over = []
    for c, row in rows:
        last = not any(o.after == c.name for o, _ in rows)
        rise = row["outlet_temperature"] - start[head[c.name]]
        if last and rise > lim:
            over.append((rise, c.name, row["outlet_temperature"]))
    if not over:
        return None
    rise, where, T_out = max(over)
    return Caution(
        "cooling_water_rise",
        f"Cooling water leaves condenser {where!r} at {pt.temperature(T_out)}, "
        f"{pt.dt(rise, '.2f')} warmer than it came "
        f"({pt.limit_text(name, pt.dt(lim, '.3g'))}): above what discharge permits "
        f"commonly allow; the site's permit governs. {DEFERENCE}",
        rise, lim, where, "K")


def _condenser_duty(pt: _Point) -> Caution | None:
    out = []
    for c, row in _condenser_rows(pt):
        ratio = row["duty"] / c.duty_design
        if not 0.25 <= ratio <= 1.15:
            out.append((abs(ratio - 1.0), ratio, c.name))
    if not out:
        return None
    _, ratio, where = max(out)
    return Caution(
        "condenser_duty",
        f"Condenser {where!r} rejects {_pct(ratio)} of its design duty, outside 25-115 %: its "
        f"heat-transfer law, fixed at design, is extrapolated here, so the back pressure is "
        f"less certain (common practice, no source). {DEFERENCE}",
        ratio, math.nan, where, "-")
def _exhaust_loss_curve(pt: _Point) -> Caution | None:
    r, model = pt.result, pt.model
    off = []
    for k in pt.last_groups():
        ex = model.groups[k].exhaust
        if ex is None:
            continue
        vel = float(r.group_velocity[k])
        lo, hi = ex.curve_velocity[0], ex.curve_velocity[-1]
        if vel < lo:
            off.append((lo - vel, model.groups[k].name, ex.curve_name, vel, lo, "below the "
                        "first", ex.curve_loss[0]))
        elif vel > hi:
            off.append((vel - hi, model.groups[k].name, ex.curve_name, vel, hi, "above the "
                        "last", ex.curve_loss[-1]))
    if not off:
        return None
    off.sort(reverse=True)
    _d, g, curve, vel, end, side, loss = off[0]
    return Caution(
        "exhaust_loss_curve",
        f"Annulus velocity of group {g!r} is {pt.q(vel, 'm/s', '.4g')}, {side} point of its "
        f"exhaust-loss curve {curve!r} ({pt.q(end, 'm/s', '.4g')})"
        f"{_others([(o[1], pt.q(o[3], 'm/s', '.4g')) for o in off[1:]])}"
        f": the loss was held at the curve's end value {pt.q(loss, 'J/kg', '.4g')}, which "
        f"the curve does not support; output and heat rate here are less certain. Extend the "
        f"curve to this velocity. {DEFERENCE}",
        vel, end, g, "m/s")


CHECKS: dict[str, Callable[[_Point], Caution | None]] = {
    "valves_wide_open": _valves_wide_open,
    "pressure_rise": _pressure_rise,
    "back_pressure_rise": _back_pressure_rise,
    "exhaust_moisture": _exhaust_moisture,
    "last_stage_volume_flow": _last_stage_volume_flow,
    "exhaust_temperature": _exhaust_temperature,
    "steam_temperature": _steam_temperature,
    "generator_output": _generator_output,
    "back_pressure": _back_pressure,
    "first_stage_overload": _first_stage_overload,
    "valve_low_opening": _valve_low_opening,
    "first_valve_only": _first_valve_only,
    "cooling_water_rise": _cooling_water_rise,
    "condenser_duty": _condenser_duty,
    "exhaust_loss_curve": _exhaust_loss_curve,
}
"""The checks by caution code, in the order their cautions are reported."""

CAUTION_CODES: tuple[str, ...] = tuple(CHECKS)


def check_point(model: Model, cond: Conditions, result: PointResult,
                steam: SteamTables | None = None, units: str = "metric") -> list[Caution]:
    """Check a solved point against the operating limits of its model.

    Parameters
    ----------
    model
        The calibrated model the point was solved with; its ``limits`` hold
        the model file's ``[limits]`` or the defaults.
    cond
        The conditions the point was solved for.
    result
        The solved point.
    steam
        Property backend; default the one the point was solved with.
    units
        Display units of the messages, ``"metric"`` (bar, degC, kg/s, kPa for a
        back pressure) or ``"us"`` (psia, degF, klb/h, inHg); the values and
        limits stay SI either way.

    Returns
    -------
    list of Caution
        At most one per code of :data:`CHECKS`, in that order; empty when the
        point is within every limit.
    """
    steam = steam or get_backend(result.backend)
    limits = model.limits if isinstance(model.limits, Limits) else default_limits()
    pt = _Point(model, cond, result, steam, limits, units)
    found = []
    for check in CHECKS.values():
        caution = check(pt)
        if caution is not None:
            found.append(caution)
    return found
