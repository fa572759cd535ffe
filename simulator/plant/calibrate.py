"""Calibration: march the design heat balance through the graph once and fix
every component's constants (each kind's ``calibrate``), then the heater
closure factors from the design feedwater balance.

An extraction whose design flow is ``"closing"`` gets the bleed that closes
its heater's balance (closure factor 1): :func:`closing_flows` solves those
bleeds together by Newton's method on the heaters' balances (the steam side
gives up what the feedwater gains), re-marching the design heat balance at
each step.  :func:`closure_report` does the same for every heater of a
calibrated model, to compare the given and the closing flows.
"""

from __future__ import annotations

import copy
import re
from collections import defaultdict

import numpy as np

from ..errors import InputError, PartloadError
from ..physics.heater import design_ua
from .water_side import design_feedwater_states, design_heat_rejected, design_water_summary

__all__ = ["calibrate", "calibrate_heaters", "check_design_annulus", "march_design",
           "closing_flows", "closure_report", "rewrite_design_flows"]


def calibrate(model, steam) -> None:
    """March the design heat balance and fix every component constant."""
    closing = [e for e in model.extractions.values() if e.closing]
    for e in closing:
        if e.heater is None:
            raise InputError("'closing' needs a heater fed by this extraction, whose balance "
                             "it closes; give the design flow", file=model.file,
                             table=f"extraction '{e.name}'", key="design_flow")
        if model.heaters[e.heater].paired:
            raise InputError("'closing' is for a heater fed by one extraction; give the design "
                             "flows of paired bleeds", file=model.file,
                             table=f"extraction '{e.name}'", key="design_flow")
        e.design_flow = _first_guess(model, e)
    march_design(model, steam)
    if model.feedwater is not None and model.heaters:
        try:
            if closing:
                closing_flows(model, steam, [e.name for e in closing])
            calibrate_heaters(model, steam)
        except PartloadError as exc:
            if isinstance(exc, InputError):
                raise
            raise InputError(f"the design feedwater heat balance cannot be evaluated: {exc}",
                             file=model.file, table="feedwater") from None
    check_design_annulus(model, steam)
    calibrate_drives(model, steam)
    calibrate_condensers(model, steam)


def calibrate_drives(model, steam) -> None:
    """Fix each turbine that drives a pump (a feed-pump turbine) from its pump's
    power in the design heat balance."""
    drives = [c for c in model.steam_path if c.flow_unknown]
    if not drives:
        return
    summary = design_water_summary(model, steam)
    for c in drives:
        if summary is None or c.pump not in summary["pump_powers"]:
            raise InputError(f"pump {c.pump!r} is not in the feedwater train",
                             file=model.file, table=c.where, key="pump")
        h = model.design_enthalpy
        h_out = c.calibrate(c.design_flow, model.design_pressure[c.inlet], h[c.inlet],
                            model.design_pressure[c.outlet], steam, model)
        c.calibrate_drive(summary["pump_powers"][c.pump], h[c.inlet], h_out, model.file)

def _first_guess(model, e) -> float:
    """A starting bleed [kg/s] for a closing extraction: 3 % of throttle flow."""
    return 0.03 * model.throttle.flow


def march_design(model, steam) -> None:
    """March the design heat balance through the steam path once: every steam-path
    component's constants, the design enthalpy of every node and the design flow
    of every component."""
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
                if hasattr(c, "equal_share_of"):
                    c.equal_share_of = n if c in free and len(free) > 1 else None
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


def _balances(model, steam, heaters) -> np.ndarray:
    """Steam release minus duty of ``heaters`` over their duties [-], at the
    extractions' current design flows (the design heat balance marched anew)."""
    march_design(model, steam)
    states = design_feedwater_states(model, steam)
    states.pop("_problems")
    return np.array([(states[h.name]["steam_release"] - states[h.name]["duty"])
                     / max(abs(states[h.name]["duty"]), 1.0) for h in heaters])


def closing_flows(model, steam, names) -> dict[str, float]:
    """Set the design flows of extractions ``names`` to close their heaters' balances.

    Newton's method with a finite-difference Jacobian on the heaters' balances
    (steam release equals feedwater duty); the other extractions keep their
    flows.  The model is left marched at the closing flows.

    Parameters
    ----------
    model : the model being calibrated
    steam : property backend
    names : extraction names, each feeding a heater

    Returns
    -------
    dict
        Closing design flow [kg/s] by extraction name.
    """
    exts = [model.extractions[n] for n in names]
    heaters = [model.heaters[e.heater] for e in exts]
    x = np.array([e.design_flow for e in exts])
    step = 1e-6 * model.throttle.flow

    def at(flows):
        for e, v in zip(exts, flows):
            e.design_flow = float(v)
        return _balances(model, steam, heaters)

    F = at(x)
    for _ in range(20):
        if np.max(np.abs(F)) < 1e-12:
            break
        J = np.empty((len(x), len(x)))
        for k in range(len(x)):
            xk = x.copy()
            xk[k] += step
            J[:, k] = (at(xk) - F) / step
        try:
            dx = np.linalg.solve(J, -F)
        except np.linalg.LinAlgError:
            break
        x = x + dx
        F = at(x)
    if np.max(np.abs(F)) > 1e-9 or np.any(x < 0.0):
        bad = [e.name for e, v in zip(exts, x) if v < 0.0] or list(names)
        raise InputError(f"no positive bleed flow closes the balance of the heater fed by "
                         f"extraction {bad[0]!r} (found {x[names.index(bad[0])]:.4g} kg/s); "
                         f"check its TTD, DCA and the node pressures", file=model.file,
                         table=f"extraction '{bad[0]}'", key="design_flow")
    return {e.name: e.design_flow for e in exts}


def closure_report(model, steam) -> list[dict]:
    """Every heater's closure factor with its given and its closing design bleed.

    Works on a copy: ``model`` is left as it is.

    Parameters
    ----------
    model : a calibrated model
    steam : property backend

    Returns
    -------
    list of dict
        One per heater: ``heater``, ``extraction``, ``closure`` [-],
        ``duty`` [W], ``given_flow`` and ``closing_flow`` [kg/s] (NaN when no
        positive flow closes it), ``closing`` (the file asks for the closing flow).
    """
    if not model.heaters:
        return []
    work = copy.deepcopy(model)
    names = [h.extraction for h in work.heaters.values()]
    try:
        found = closing_flows(work, steam, names)
    except PartloadError:
        found = {}
    return [{"heater": h.name, "extraction": h.extraction, "closure": h.closure,
             "duty": h.duty_design,
             "given_flow": model.extractions[h.extraction].design_flow,
             "closing_flow": found.get(h.extraction, float("nan")),
             "closing": model.extractions[h.extraction].closing}
            for h in model.heaters.values()]


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
    ends = set(model.exhaust_nodes)
    bare = [c for c in model.groups
            if c.outlet in ends and c.exhaust is None and not c.no_exhaust_loss]
    if bare:
        raise InputError(
            f"stage group(s) {', '.join(repr(c.name) for c in bare)} exhaust to "
            f"{bare[0].outlet!r} without annulus_area and loss_curve: the exhaust loss would "
            f"be left out (an optimistic output); give the last-stage annulus and its loss "
            f"curve, or write exhaust_loss = \"none\" for an exhaust that has none (a "
            f"back-pressure exhaust into a header)", file=model.file,
            table=f"stage_group '{bare[0].name}'", key="annulus_area")
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
    """Evaluate the feedwater train at design; fix closure factors, duties and UA.

    Every heater is looked at before anything is refused: one error lists each
    heater whose balance is off, with the design bleeds that would close them.
    """
    states = design_feedwater_states(model, steam)
    for item, message in states.pop("_problems"):
        if item in model.pumps:
            raise InputError(f"at design, {message}", file=model.file, table=f"pump '{item}'",
                             key="discharge_pressure")
        raise InputError(f"at design, {message}", file=model.file, table=f"heater '{item}'")
    bad = []
    for name, st in states.items():
        htr = model.heaters[name]
        release = st["steam_release"]
        duty = st["duty"]
        htr.closure = duty / release if release > 0.0 else float("nan")
        htr.duty_design = duty
        if release <= 0.0 or duty <= 0.0:
            bad.append((name, f"heater {name!r} has no heat to transfer at design (duty "
                              f"{duty / 1e6:.4g} MW, steam side {release / 1e6:.4g} MW)"))
        elif not 0.9 <= htr.closure <= 1.1:
            bad.append((name, f"heater {name!r}: feedwater gains {duty / 1e6:.4g} MW while the "
                              f"bleed and drains give up {release / 1e6:.4g} MW (closure "
                              f"{htr.closure:.4f})"))
    if bad:
        raise InputError(_closure_refusal(model, steam, bad), file=model.file,
                         table=f"heater '{bad[0][0]}'", key="extraction")
    off = [h for h in model.heaters.values() if abs(h.closure - 1.0) > 0.01]
    if off:
        closing = _closing_or_none(model, steam)
        for htr in off:
            tip = (f" The design bleed that closes it is {closing[htr.extraction]:.5g} kg/s "
                   f"(given {model.extractions[htr.extraction].design_flow:.5g} kg/s)."
                   if htr.extraction in closing else "")
            model.warnings.append(
                f"heater {htr.name!r}: design heat balance closes to {htr.closure:.4f} (more "
                f"than 1 % from 1); every off-design bleed of this heater is scaled by it. "
                f"Check the design flow of extraction {htr.extraction!r}, the TTD and the "
                f"DCA.{tip}")
    for name, st in states.items():
        htr = model.heaters[name]
        table = f"heater '{name}'"
        duty = st["duty"]
        if htr.heater_type == "closed":
            htr.cp = duty / st["m_water"] / max(st["T_out"] - st["T_in"], 1e-6)
            if htr.ttd_method == "ua":
                try:
                    htr.ua = design_ua(st["T_sat"], st["T_in"], st["T_out"], st["m_water"],
                                       htr.cp)
                except ValueError:
                    raise InputError(
                        "ttd_method = 'ua' needs a positive TTD: the condensing zone's UA is "
                        "fixed from the saturation temperature above the feedwater outlet "
                        "(a heater with a desuperheating zone, TTD <= 0, keeps 'constant')",
                        file=model.file, table=table, key="ttd_method") from None


def _closing_or_none(model, steam) -> dict[str, float]:
    """Closing design bleeds [kg/s] of every heater's extraction, on a copy of the
    model; empty when they cannot be found."""
    work = copy.deepcopy(model)
    try:
        return closing_flows(work, steam, [h.extraction for h in work.heaters.values()])
    except PartloadError:
        return {}


def _closure_refusal(model, steam, bad) -> str:
    """The message refusing a design heat balance whose heaters do not close:
    every heater off, and the closing bleeds of all heaters."""
    closing = _closing_or_none(model, steam)
    lines = [f"the design heat balance of {len(bad)} heater(s) does not close (allowed closure "
             f"0.9-1.1, feedwater duty over the heat the bleed and drains give up):"]
    lines += [f"  {text}" for _name, text in bad]
    if closing:
        lines.append("design bleeds that close every heater (given -> closing):")
        for h in model.heaters.values():
            e = model.extractions[h.extraction]
            lines.append(f"  extraction {e.name!r} ({h.name}): {e.design_flow:.5g} -> "
                         f"{closing[e.name]:.5g} kg/s")
        lines.append("write design_flow = \"closing\" for an extraction to take its closing "
                     "flow, or run 'partload check MODEL --write-balanced NEW.toml'")
    else:
        lines.append("no positive design bleeds close them all: check the TTD and DCA of "
                     "these heaters and their train positions")
    return "\n".join(lines)


_HEADER = re.compile(r"^\s*\[")
_EXTRACTION = re.compile(r"^\s*\[\[\s*extraction\s*\]\]")
_NAME = re.compile(r"^\s*name\s*=\s*(\"[^\"]*\"|'[^']*')")
_FLOW = re.compile(r"^(\s*design_flow\s*=\s*)(\"[^\"]*\"|'[^']*')(.*)$")


def rewrite_design_flows(text: str, flows: dict[str, float], file: str = "<model>") -> str:
    """``text`` of a model file with the ``design_flow`` of each ``[[extraction]]``
    named in ``flows`` replaced by its value [kg/s], written ``"12.34567 kg/s"``
    (to 1e-5 kg/s); every other line is kept as it is."""
    lines = text.splitlines(keepends=True)
    done: set[str] = set()
    block: list[int] = []

    def flush():
        name = flow_line = None
        for i in block:
            m = _NAME.match(lines[i])
            if m:
                name = m.group(1)[1:-1]
            if _FLOW.match(lines[i]):
                flow_line = i
        if name in flows and flow_line is not None:
            m = _FLOW.match(lines[flow_line].rstrip("\r\n"))
            end = lines[flow_line][len(lines[flow_line].rstrip("\r\n")):]
            lines[flow_line] = f'{m.group(1)}"{flows[name]:.5f} kg/s"{m.group(3)}{end}'
            done.add(name)

    inside = False
    for i, line in enumerate(lines):
        if _HEADER.match(line):
            if inside:
                flush()
            inside = bool(_EXTRACTION.match(line))
            block = []
        elif inside:
            block.append(i)
    if inside:
        flush()
    missing = sorted(set(flows) - done)
    if missing:
        raise InputError(f"cannot rewrite the design flow of extraction {missing[0]!r}: write "
                         f"it as an [[extraction]] table with name and design_flow on lines "
                         f"of their own", file=file, table=f"extraction '{missing[0]}'",
                         key="design_flow")
    return "".join(lines)
