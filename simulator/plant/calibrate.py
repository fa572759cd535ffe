"""Calibration: march the design heat balance through the graph once and fix
every component's constants (each kind's ``calibrate``), then the heater
closure factors from the design feedwater balance."""

from __future__ import annotations

from collections import defaultdict

from ..errors import InputError, PartloadError
from ..physics.heater import design_ua
from .water_side import design_feedwater_states, design_heat_rejected

__all__ = ["calibrate", "calibrate_heaters", "check_design_annulus"]


def calibrate(model, steam) -> None:
    """March the design heat balance and fix every component constant."""
    g = model.graph
    p = model.design_pressure
    file = model.file
    bleed_at: dict[str, float] = defaultdict(float)
    for e in model.extractions.values():
        bleed_at[e.node] += e.design_flow
    m_in: dict[str, float] = defaultdict(float)
    e_in: dict[str, float] = defaultdict(float)
    h: dict[str, float] = {}
    src = model.source
    m_in[src] = model.throttle.flow
    at = ("throttle", "temperature")  # where the march is, for the error message
    try:
        h[src] = steam.h_pT(p[src], model.throttle.temperature)
        for n in model.order:
            if n != src:
                if m_in[n] <= 0.0:
                    raise InputError(f"no steam reaches node {n!r} at design", file=file,
                                     table="nodes", key=n)
                h[n] = e_in[n] / m_in[n]
            net = m_in[n] - bleed_at[n]
            if net < -1e-9 * model.throttle.flow:
                names = [e.name for e in model.extractions.values() if e.node == n]
                raise InputError(
                    f"design bleeds at node {n!r} ({bleed_at[n]:.4g} kg/s) exceed the "
                    f"{m_in[n]:.4g} kg/s arriving there", file=file,
                    table=f"extraction '{names[0]}'", key="design_flow")
            outs = [g.edges[n, s]["component"] for s in g.successors(n)]
            if not outs:
                continue
            given = [c for c in outs if c.sets_flow and getattr(c, "design_flow", None)]
            free = [c for c in outs if c not in given]
            rest = net - sum(c.design_flow for c in given)
            if not free or rest <= 0.0:
                raise InputError(
                    f"the design flows of the groups leaving node {n!r} do not add up to the "
                    f"{net:.4g} kg/s available; leave 'design_flow' off one of them",
                    file=file, table=f"stage_group '{(given or outs)[0].name}'",
                    key="design_flow")
            for c in outs:
                at = (c.where, c.calibration_key)
                m = c.design_flow if c in given else rest / len(free)
                model.design_group_flow[c.name] = m
                h_out = c.calibrate(m, p[c.inlet], h[n], p[c.outlet], steam, model)
                m_in[c.outlet] += m
                e_in[c.outlet] += m * h_out
    except PartloadError as exc:
        if isinstance(exc, InputError):
            raise
        raise InputError(f"the design heat balance cannot be evaluated here: {exc}; check the "
                         f"design pressures and temperatures of this part of the steam path",
                         file=file, table=at[0], key=at[1]) from None
    model.design_enthalpy = h
    if model.feedwater is not None and model.heaters:
        try:
            calibrate_heaters(model, steam)
        except PartloadError as exc:
            if isinstance(exc, InputError):
                raise
            raise InputError(f"the design feedwater heat balance cannot be evaluated: {exc}",
                             file=file, table="feedwater") from None
    check_design_annulus(model, steam)
    calibrate_condensers(model, steam)


def calibrate_condensers(model, steam) -> None:
    """Fix each kind at an exhaust node (a condenser) from the heat it rejects at design."""
    at_nodes = [c for c in model.components if c.frees_node]
    if not at_nodes:
        return
    heat = design_heat_rejected(model, steam)
    circuit = {c.name: heat[c.node] for c in at_nodes}
    for c in reversed(at_nodes):  # a shell's heat and that of the shells after it
        if getattr(c, "after", None) is not None:
            circuit[c.after] += circuit[c.name]
    for c in at_nodes:
        try:
            c.calibrate_design(heat[c.node], model.design_pressure[c.node], steam,
                               circuit[c.name])
        except InputError as exc:
            if exc.file is None:
                exc.file = model.file
            raise


def check_design_annulus(model, steam) -> None:
    """The design annulus velocity of every exhaust group must lie on its loss curve.

    A velocity outside the curve usually means a wrong annulus area (units) or a
    curve that does not reach the design point; the loss would be held at the
    curve's end value, silently.
    """
    p = model.design_pressure
    for c in model.groups:
        if c.exhaust is None:
            continue
        m = model.design_group_flow[c.name]
        h_in = model.design_enthalpy[c.inlet]
        h_elep = h_in - c.eta_design * c.dh_s_design
        try:
            vel = m * steam.v_ph(p[c.outlet], h_elep) / c.exhaust.area
        except PartloadError:
            continue  # reported by the calibration already
        lo, hi = c.exhaust.curve_velocity[0], c.exhaust.curve_velocity[-1]
        if not lo <= vel <= hi:
            raise InputError(
                f"gives an annulus velocity of {vel:.4g} m/s at design, outside the loss "
                f"curve {c.exhaust.curve_name!r} ({lo:.4g} to {hi:.4g} m/s); check the area "
                f"and its unit, or extend the curve to the design point",
                file=model.file, table=f"stage_group '{c.name}'", key="annulus_area")


def calibrate_heaters(model, steam) -> None:
    """Evaluate the feedwater train at design; fix closure factors, duties and UA."""
    states = design_feedwater_states(model, steam)
    for item, message in states.pop("_problems"):
        if item in model.pumps:
            raise InputError(f"at design, {message}", file=model.file, table=f"pump '{item}'",
                             key="discharge_pressure")
        raise InputError(f"at design, {message}", file=model.file, table=f"heater '{item}'")
    for name, st in states.items():
        htr = model.heaters[name]
        release = st["steam_release"]
        duty = st["duty"]
        table = f"heater '{name}'"
        if release <= 0.0 or duty <= 0.0:
            raise InputError(f"heater {name!r} has no heat to transfer at design (duty "
                             f"{duty / 1e6:.4g} MW, steam side {release / 1e6:.4g} MW); check "
                             f"its extraction flow, TTD and train position", file=model.file,
                             table=table, key="ttd")
        htr.closure = duty / release
        htr.duty_design = duty
        if not 0.9 <= htr.closure <= 1.1:
            raise InputError(
                f"design heat balance of heater {name!r} does not close: feedwater gains "
                f"{duty / 1e6:.4g} MW while the bleed and drains give up {release / 1e6:.4g} MW "
                f"(closure {htr.closure:.3f}, allowed 0.9-1.1); check the design flow of "
                f"extraction {htr.extraction!r}, the TTD and the DCA", file=model.file,
                table=table, key="extraction")
        if abs(htr.closure - 1.0) > 0.01:
            model.warnings.append(
                f"heater {name!r}: design heat balance closes to {htr.closure:.4f} (more than "
                f"1 % from 1); every off-design bleed of this heater is scaled by it. Check the "
                f"design flow of extraction {htr.extraction!r}, the TTD and the DCA.")
        if htr.heater_type == "closed":
            htr.cp = duty / st["m_water"] / max(st["T_out"] - st["T_in"], 1e-6)
            if htr.ttd_method == "ua":
                try:
                    htr.ua = design_ua(st["T_sat"], st["T_in"], st["T_out"], st["m_water"],
                                       htr.cp)
                except ValueError:
                    raise InputError("ttd_method = 'ua' needs a positive TTD", file=model.file,
                                     table=table, key="ttd_method") from None
