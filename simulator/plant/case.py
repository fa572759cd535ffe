"""Operating cases: what differs from the design point.

A case file names a model file (path relative to the case file) and sets the
operating conditions in its ``[operation]`` table, extraction changes in
``[extractions.NAME]`` and heaters out of service in ``[heaters.NAME]``.
:func:`read_conditions` turns such a table into :class:`Conditions`, SI
throughout; batch studies build many conditions from one case by
:func:`override`.

Case file reference: see README.md, section "Case file".
"""

from __future__ import annotations

import dataclasses
import hashlib
from dataclasses import dataclass, field
from pathlib import Path

from ..errors import InputError
from ..inputs.reading import Problems, TableReader, closest, load_toml
from ..plant.model import Model, load_model
from ..steam.if97 import BACKENDS, P_CRIT, P_MAX, P_MIN, T_CRIT, T_MAX, T_MIN, get_backend
from ..units import Where

__all__ = ["Conditions", "Case", "load_case", "read_conditions", "override",
           "GOVERNING", "OPERATION_KEYS"]

GOVERNING = ("sliding", "throttle")
OPERATION_KEYS = ("throttle_flow", "throttle_flow_fraction", "output", "output_fraction",
                  "governing", "throttle_pressure", "throttle_temperature",
                  "reheat_temperature", "exhaust_pressure")


@dataclass(frozen=True)
class Conditions:
    """One operating point, SI units.

    Exactly one of ``throttle_flow`` [kg/s] and ``output`` [W] is set.
    ``governing`` is ``"sliding"`` (throttle pressure follows the load, valves
    wide open) or ``"throttle"`` (throttle pressure held at
    ``throttle_pressure`` [Pa], the valves throttle).
    ``extraction_control`` maps an extraction name to ``(control, value)``:
    ``("closed", 0)``, ``("flow", kg/s)`` or ``("fraction", of throttle flow)``.
    """

    throttle_flow: float | None = None
    output: float | None = None
    governing: str = "sliding"
    throttle_pressure: float | None = None
    throttle_temperature: float | None = None
    reheat_temperature: float | None = None
    exhaust_pressure: float | None = None
    extraction_control: tuple = ()
    heaters_out: frozenset = frozenset()
    label: str = ""
    held_pressures: tuple = ()  # (control valve name, held inlet pressure [Pa])

    def controls(self) -> dict:
        return dict(self.extraction_control)


@dataclass
class Case:
    """A case file read and resolved: its model, its conditions and its text."""

    name: str
    description: str
    file: str
    text: str
    sha256: str
    model: Model
    conditions: Conditions
    backend: str = "seuif97"
    data: dict = field(default_factory=dict)


def load_case(path: str | Path, model: Model | None = None) -> Case:
    """Read a case file and the model it names."""
    path = Path(path)
    data, text = load_toml(path)
    if "model" not in data and ("throttle" in data or "stage_group" in data):
        raise InputError("this is a model file, not a case file; check it with "
                         "'partload check', and solve it through a case file that names it "
                         "with model = \"...\"", file=str(path))
    problems = Problems()
    top = TableReader(data, Where(str(path)), problems)
    model_ref = top.string("model")
    name = top.string("name", default=path.stem)
    description = top.string("description", default="")
    backend = top.string("backend", default="seuif97", choices=sorted(BACKENDS))
    top.finish(also_valid=("operation", "extractions", "heaters", "control_valves", "sweep",
                           "profile"))
    problems.raise_if_any()
    if model is None:
        model_path = (path.parent / model_ref).resolve()
        if not model_path.exists():
            raise InputError(f"model file {model_ref!r} not found (looked at {model_path})",
                             file=str(path), key="model")
        model = load_model(model_path)
    cond = read_conditions(data, model, str(path))
    return Case(name, description, str(path), text, hashlib.sha256(text.encode()).hexdigest(),
                model, cond, backend, data)


def read_conditions(data: dict, model: Model, file: str = "<case>") -> Conditions:
    """Resolve the ``[operation]``, ``[extractions]`` and ``[heaters]`` tables."""
    problems = Problems()
    op = TableReader(data.get("operation", {}), Where(file, "operation"), problems,
                     atmosphere=model.atmosphere)
    flows = [k for k in ("throttle_flow", "throttle_flow_fraction", "output", "output_fraction")
             if k in op.data]
    if len(flows) > 1:
        problems.add(op.where.child(flows[1]).error(
            f"give only one of {', '.join(flows)}: the load is set once"))
    m_T = out = None
    m_d = model.throttle.flow
    if "throttle_flow" in op.data:
        m_T = op.quantity("throttle_flow", "mass_flow", positive=True)
    elif "throttle_flow_fraction" in op.data:
        f = op.number("throttle_flow_fraction", lo=0.0, hi=2.0, lo_open=True)
        m_T = f * m_d if f is not None else None
    elif "output" in op.data:
        out = op.quantity("output", "power", positive=True)
    elif "output_fraction" in op.data:
        f = op.number("output_fraction", lo=0.0, hi=2.0, lo_open=True)
        out = f * model.generator.rating if f is not None else None
    else:
        m_T = m_d
    for k in flows[1:]:
        op.raw(k)
    governing = op.string("governing", default="sliding", choices=GOVERNING)
    if1997 = "the validity range of IAPWS-IF97"
    p_T = op.quantity("throttle_pressure", "pressure", default=None, lo=P_MIN,
                      hi=model.throttle.max_pressure,
                      reason="the model's highest allowed throttle pressure, [throttle] "
                             "max_pressure")
    T_T = op.quantity("throttle_temperature", "temperature", default=None, lo=T_MIN, hi=T_MAX,
                      reason=if1997)
    T_rh = op.quantity("reheat_temperature", "temperature", default=None, lo=T_MIN, hi=T_MAX,
                       reason=if1997)
    p_x = op.quantity("exhaust_pressure", "pressure", default=None, lo=P_MIN, hi=P_MAX,
                      reason=if1997 + ", which ends at the triple point")
    op.finish(also_valid=OPERATION_KEYS)
    if governing == "throttle" and T_T is not None and (p_T is not None or "throttle_pressure"
                                                          not in op.data):
        p_held = p_T if p_T is not None else model.throttle.pressure
        T_sat = T_CRIT if p_held >= P_CRIT else get_backend().T_sat(p_held)
        if T_T <= T_sat:
            problems.add(op.where.child("throttle_temperature").error(
                f"{T_T - 273.15:.1f} degC is not above the saturation temperature "
                f"{T_sat - 273.15:.1f} degC at the held throttle pressure {p_held / 1e5:.5g} bar: "
                f"the turbine would receive water, not steam"))
    if p_T is not None and governing == "sliding":
        problems.add(op.where.child("throttle_pressure").error(
            "a held throttle pressure needs governing = 'throttle'; with sliding pressure the "
            "throttle pressure is a result"))
    if T_rh is not None and not any(p.is_reheater for p in model.paths):
        problems.add(op.where.child("reheat_temperature").error("the model has no reheater"))

    controls = []
    out_set = set()
    for ename, w, edat in _named_tables(data, "extractions", model.extractions, "extraction",
                                        file, problems):
        er = TableReader(edat, w, problems)
        control = er.string("control", choices=("closed", "flow", "fraction", "heater"))
        value = 0.0
        if control == "flow":
            value = er.quantity("flow", "mass_flow", lo=0.0)
        elif control == "fraction":
            value = er.number("fraction", lo=0.0, hi=1.0)
        er.finish()
        e = model.extractions[ename]
        if control == "heater" and not e.heater:
            problems.add(w.child("control").error("this extraction feeds no heater"))
        elif control in ("flow", "fraction") and e.heater:
            problems.add(w.child("control").error(
                f"this extraction feeds heater {e.heater!r}, which sets its flow; close it "
                f"or take the heater out of service instead"))
        elif control == "closed" and e.heater:
            out_set.add(e.heater)
        elif control is not None and value is not None:
            controls.append((ename, (control, float(value))))
    for hname, w, hdat in _named_tables(data, "heaters", model.heaters, "heater", file,
                                        problems):
        hr = TableReader(hdat, w, problems)
        ins = hr.boolean("in_service", default=True)
        hr.finish()
        if ins is False:
            out_set.add(hname)
    for hname in out_set:
        e = model.extractions[model.heaters[hname].extraction]
        controls.append((e.name, ("closed", 0.0)))
        if model.heaters[hname].kind == "deaerator":
            problems.add(Where(file, f"heaters.{hname}", "in_service").error(
                "the deaerator cannot be taken out of service"))
    held = []
    valves = {c.name: c for c in model.control_valves}
    for vname, w, vdat in _named_tables(data, "control_valves", valves, "control valve", file,
                                        problems):
        vr = TableReader(vdat, w, problems, atmosphere=model.atmosphere)
        p_held = vr.quantity("pressure", "pressure", lo=P_MIN, hi=P_MAX)
        vr.finish()
        if p_held is not None:
            held.append((vname, p_held))
    problems.raise_if_any()
    return Conditions(m_T, out, governing, p_T, T_T, T_rh, p_x, tuple(sorted(controls)),
                      frozenset(out_set), held_pressures=tuple(sorted(held)))


def _named_tables(data: dict, key: str, known, what: str, file: str, problems: Problems):
    """``(name, where, table)`` of each ``[KEY.NAME]`` table whose NAME the model knows;
    unknown names are reported with the closest known one."""
    tables = data.get(key, {})
    if not isinstance(tables, dict):
        problems.add(Where(file, key).error(f"expected tables [{key}.NAME]"))
        return
    for name, table in tables.items():
        w = Where(file, f"{key}.{name}")
        if name not in known:
            problems.add(w.error(f"the model has no {what} {name!r}" + closest(name, known)))
            continue
        yield name, w, table


def override(cond: Conditions, **changes) -> Conditions:
    """A copy of ``cond`` with fields changed (SI values)."""
    return dataclasses.replace(cond, **changes)
