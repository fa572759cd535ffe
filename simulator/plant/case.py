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

from ..components import KINDS
from ..errors import InputError
from ..inputs.reading import Problems, TableReader, closest, load_toml
from ..plant.limits import check_set_pressures
from ..plant.model import Model, load_model
from ..steam.if97 import BACKENDS, P_CRIT, P_MAX, P_MIN, T_CRIT, T_MAX, T_MIN, get_backend
from ..units import Where

__all__ = ["Conditions", "Case", "load_case", "read_conditions", "override", "apply_setting",
           "design_conditions", "without_unused",
           "SettingsTarget",
           "VALVE_MODES", "PRESSURE_MODES", "OPERATION_KEYS"]

# how the valves pass the steam: "throttle" (all of it through valves that open
# together) or "nozzle_groups" (the control valves of a governing stage open in
# sequence, each feeding its own nozzle group); the default is the model's own
VALVE_MODES = ("throttle", "nozzle_groups")
# how the throttle pressure behaves: "sliding" (a result; the valves wide open),
# "fixed" (held at the case's throttle_pressure; the valves take the difference) or
# "program" (sliding between minimum_throttle_pressure and throttle_pressure, held
# at whichever it would pass)
PRESSURE_MODES = ("sliding", "fixed", "program")
# the former single key, still read: governing = "sliding" | "throttle"
_GOVERNING = {"sliding": "sliding", "throttle": "fixed"}
OPERATION_KEYS = ("throttle_flow", "throttle_flow_fraction", "output", "output_fraction",
                  "valve_mode", "pressure_mode", "governing", "throttle_pressure",
                  "minimum_throttle_pressure", "valves_open", "superheater_spray",
                  "reheater_spray",
                  "throttle_temperature", "reheat_temperature", "exhaust_pressure")


@dataclass(frozen=True)
class Conditions:
    """One operating point, SI units.

    Exactly one of ``throttle_flow`` [kg/s] and ``output`` [W] is set.
    ``valve_mode`` says how the valves pass the steam (``"throttle"``: all of
    it through valves that open together; ``"nozzle_groups"``: the control
    valves of a governing stage in sequence); ``pressure_mode`` how the throttle
    pressure behaves: ``"sliding"`` (it follows the load, the valves wide open;
    ``valves_open`` of a governing stage's valves, its design number when
    ``None``), ``"fixed"`` (held at ``throttle_pressure`` [Pa], the design
    pressure when ``None``; the valves throttle) or ``"program"`` (sliding,
    but held at ``throttle_pressure`` where sliding would need more and at
    ``minimum_throttle_pressure`` [Pa] where it would need less).
    ``extraction_control`` maps an extraction name to ``(control, value)``:
    ``("closed", 0)``, ``("flow", kg/s)`` or ``("fraction", of throttle flow)``.
    """

    throttle_flow: float | None = None
    output: float | None = None
    valve_mode: str = "throttle"
    pressure_mode: str = "sliding"
    throttle_pressure: float | None = None
    throttle_temperature: float | None = None
    reheat_temperature: float | None = None
    exhaust_pressure: float | None = None
    extraction_control: tuple = ()
    heaters_out: frozenset = frozenset()
    label: str = ""
    held_pressures: tuple = ()  # (control valve name, held inlet pressure [Pa])
    valves_open: int | None = None  # governing-stage valves wide open, sliding pressure
    minimum_throttle_pressure: float | None = None  # [Pa] lowest of a pressure program
    superheater_spray: float | None = None  # [kg/s] attemperator water into the superheater
    reheater_spray: float | None = None  # [kg/s] attemperator water into the reheater
    # every other component setting of the case: (settings table, component name,
    # setting, SI value), read by the component's kind when it evaluates
    settings: tuple = ()

    @property
    def governing(self) -> str:
        """The mode in the trade's words: ``"sliding"`` pressure, ``"throttle"``
        governing (a fixed throttle pressure with valves that open together),
        ``"nozzle"`` governing (a fixed pressure with valves in sequence) or a
        pressure ``"program"``."""
        if self.pressure_mode == "fixed":
            return "nozzle" if self.valve_mode == "nozzle_groups" else "throttle"
        return self.pressure_mode

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
    notes: list[str] = field(default_factory=list)  # advice on keys written the former way


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
    top.finish(also_valid=("operation", "sweep", "profile")
               + tuple(k.settings_table for k in KINDS.values() if k.settings_table))
    problems.raise_if_any()
    if model is None:
        try:
            model_path = (path.parent / model_ref).resolve()
            found = model_path.exists()
        except OSError as exc:  # a path the system refuses (too long, ...)
            raise InputError(f"the model path cannot be used: {exc.strerror or exc} "
                             f"({len(model_ref)} characters)", file=str(path),
                             key="model") from None
        if not found:
            raise InputError(f"model file {model_ref!r} not found (looked at {model_path})",
                             file=str(path), key="model")
        model = load_model(model_path)
    notes: list[str] = []
    cond = read_conditions(data, model, str(path), notes)
    return Case(name, description, str(path), text, hashlib.sha256(text.encode()).hexdigest(),
                model, cond, backend, data, notes)


def read_conditions(data: dict, model: Model, file: str = "<case>",
                    notes: list[str] | None = None) -> Conditions:
    """Resolve the ``[operation]`` table and the components' settings tables.

    ``notes`` collects advice on keys written the former way.
    """
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
    gov = model.governing_stage
    valve_mode = op.string("valve_mode", default="nozzle_groups" if gov else "throttle",
                           choices=VALVE_MODES)
    if valve_mode == "nozzle_groups" and gov is None:
        problems.add(op.where.child("valve_mode").error(
            "the model has no [governing_stage]: nozzle-group governing needs one; "
            "this model's valves open together (valve_mode = 'throttle')"))
    pressure_mode = op.string("pressure_mode", default="sliding", choices=PRESSURE_MODES)
    if "governing" in op.data:
        old = op.string("governing", choices=tuple(_GOVERNING))
        if "pressure_mode" in op.data:
            problems.add(op.where.child("governing").error(
                "give pressure_mode only; governing is its former name"))
        elif old is not None:
            pressure_mode = _GOVERNING[old]
            if notes is not None:
                notes.append(f"{file}: [operation] governing = {old!r} is written "
                             f"pressure_mode = {pressure_mode!r} now (with valve_mode = "
                             f"{valve_mode!r}, the model's own)")
    fixed = pressure_mode in ("fixed", "program")  # a throttle pressure may be held
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
    p_min = op.quantity("minimum_throttle_pressure", "pressure", default=None, lo=P_MIN,
                        hi=model.throttle.max_pressure,
                        reason="the model's highest allowed throttle pressure, [throttle] "
                               "max_pressure")
    n_open = op.number("valves_open", default=None, lo=1,
                       hi=len(gov.valves) if gov is not None else None)
    sh_spray = op.quantity("superheater_spray", "mass_flow", default=None, lo=0.0)
    rh_spray = op.quantity("reheater_spray", "mass_flow", default=None, lo=0.0)
    _check_sprays(op, problems, model, sh_spray, rh_spray)
    op.finish(also_valid=OPERATION_KEYS)
    _check_program(op, problems, model, pressure_mode, valve_mode, p_T, p_min, n_open)
    if n_open is not None:
        n_open = int(n_open)
    if fixed and T_T is not None and (p_T is not None or "throttle_pressure"
                                                          not in op.data):
        p_held = p_T if p_T is not None else model.throttle.pressure
        T_sat = T_CRIT if p_held >= P_CRIT else get_backend().T_sat(p_held)
        if T_T <= T_sat:
            problems.add(op.where.child("throttle_temperature").error(
                f"{T_T - 273.15:.1f} degC is not above the saturation temperature "
                f"{T_sat - 273.15:.1f} degC at the held throttle pressure {p_held / 1e5:.5g} bar: "
                f"the turbine would receive water, not steam"))
    if p_T is not None and pressure_mode == "sliding":
        problems.add(op.where.child("throttle_pressure").error(
            "a held throttle pressure needs pressure_mode = 'fixed'; with sliding pressure "
            "the throttle pressure is a result"))
    if T_rh is not None and not model.reheaters:
        problems.add(op.where.child("reheat_temperature").error("the model has no reheater"))

    target = SettingsTarget(problems)
    for kind in KINDS.values():
        if not kind.settings_table:
            continue
        known = {c.name: c for c in model.of_kind(kind)}
        for cname, w, table in _named_tables(data, kind.settings_table, known, kind.title,
                                             file, problems):
            reader = TableReader(table, w, problems, atmosphere=model.atmosphere)
            if isinstance(table, dict) and not table:
                problems.add(w.error("an empty table sets nothing; give one of: "
                                     + ", ".join(st.name for st in kind.settings)))
            values = {st.name: st.read(reader) for st in kind.settings if st.name in reader.data}
            reader.finish(also_valid=[st.name for st in kind.settings])
            known[cname].apply_settings(values, w, target)
    for hname in target.heaters_out:  # out of service, or its extraction closed
        for name in model.heaters[hname].extractions:
            target.extraction_control.append((name, ("closed", 0.0)))
        if model.heaters[hname].heater_type == "deaerator":
            problems.add(Where(file, f"heaters.{hname}", "in_service").error(
                "the deaerator cannot be taken out of service"))
    check_set_pressures(model, data, file, problems, exhaust_pressure=p_x,
                        pressure_mode=pressure_mode, throttle_pressure=p_T,
                        held_pressures=target.held_pressures)
    problems.raise_if_any()
    return Conditions(m_T, out, valve_mode=valve_mode, pressure_mode=pressure_mode,
                      throttle_pressure=p_T, throttle_temperature=T_T, reheat_temperature=T_rh,
                      exhaust_pressure=p_x, valves_open=n_open,
                      superheater_spray=sh_spray or None, reheater_spray=rh_spray or None,
                      minimum_throttle_pressure=p_min, **target.fields())


def _check_sprays(op, problems, model, sh, rh) -> None:
    """Attemperator sprays need the model to say where their water comes from."""
    fw = model.feedwater
    if rh and not model.reheaters:
        problems.add(op.where.child("reheater_spray").error("the model has no reheater"))
    needs_pump = bool(rh) or (bool(sh) and fw is not None
                              and fw.superheater_spray_from == "pump")
    if (sh or rh) and fw is None:
        problems.add(op.where.child("reheater_spray" if rh else "superheater_spray").error(
            "sprays take feedwater, and the model has no feedwater train"))
    elif needs_pump and fw.spray_pump is None:
        problems.add(op.where.child("reheater_spray" if rh else "superheater_spray").error(
            "the model does not say which pump's discharge feeds the sprays: give "
            "[feedwater] spray_pump"))


def _check_program(op, problems, model, pressure_mode, valve_mode, p_T, p_min, n_open):
    """The keys of a pressure program and of valves wide open fit the modes."""
    if pressure_mode == "program" and p_min is None and "minimum_throttle_pressure" \
            not in op.data:
        problems.add(op.where.child("minimum_throttle_pressure").error(
            "a pressure program needs the lowest throttle pressure it slides to "
            "(minimum_throttle_pressure); throttle_pressure, the held one above it, is the "
            "design pressure when not given"))
    if p_min is not None:
        upper = p_T if p_T is not None else model.throttle.pressure
        if pressure_mode != "program":
            problems.add(op.where.child("minimum_throttle_pressure").error(
                "a minimum throttle pressure belongs to pressure_mode = 'program'"))
        elif p_min >= upper:
            problems.add(op.where.child("minimum_throttle_pressure").error(
                f"must be below the held throttle pressure of the program "
                f"({upper / 1e5:.5g} bar)"))
    if "valves_open" in op.data and n_open is not None:
        if n_open != int(n_open):
            problems.add(op.where.child("valves_open").error(
                f"expected a whole number of valves, got {n_open!r}"))
        elif valve_mode != "nozzle_groups":
            problems.add(op.where.child("valves_open").error(
                "valves wide open are counted under nozzle-group governing "
                "(valve_mode = 'nozzle_groups'); with valves that open together all are "
                "wide open at sliding pressure"))
        elif pressure_mode == "fixed":
            problems.add(op.where.child("valves_open").error(
                "at a held throttle pressure the valves open as the flow needs; valves_open "
                "belongs to pressure_mode = 'sliding' or 'program'"))


def without_unused(cond: Conditions) -> Conditions:
    """``cond`` without the values its modes have no use for: a held throttle
    pressure and a program's minimum at sliding pressure, a minimum and valves
    wide open at a held pressure, valves wide open when the valves open
    together.  A study applies it to each point once all its axes are set, so
    the order of the axes does not matter."""
    changes = {}
    if cond.pressure_mode == "sliding":
        changes.update(throttle_pressure=None, minimum_throttle_pressure=None)
    elif cond.pressure_mode == "fixed":
        changes.update(minimum_throttle_pressure=None, valves_open=None)
    if cond.valve_mode == "throttle":
        changes["valves_open"] = None
    changes = {k: v for k, v in changes.items() if getattr(cond, k) is not None}
    return dataclasses.replace(cond, **changes) if changes else cond


def design_conditions(model: Model) -> Conditions:
    """The design point of ``model``: design throttle flow, sliding pressure and the
    model's own valves (a governing stage's in sequence, its design valves wide open)."""
    return Conditions(throttle_flow=model.throttle.flow,
                      valve_mode="nozzle_groups" if model.governing_stage else "throttle")


def apply_setting(cond: Conditions, model: Model, key: str, value) -> Conditions:
    """``cond`` with one component setting changed: ``key`` is ``TABLE.NAME.SETTING``
    as a case file writes it in ``[TABLE.NAME]``, ``value`` in SI units.  The
    component's kind applies it (:meth:`simulator.components.Component.apply_settings`),
    so any declared setting can be varied in a study."""
    parts = key.split(".")
    table, name, setting = parts[0], ".".join(parts[1:-1]), parts[-1]
    kind = next(k for k in KINDS.values() if k.settings_table == table)
    comp = next(c for c in model.of_kind(kind) if c.name == name)
    target = SettingsTarget(Problems(), list(cond.extraction_control), set(cond.heaters_out),
                            list(cond.held_pressures), list(cond.settings))
    comp.apply_settings({setting: value}, Where(None, f"{table}.{name}"), target)
    target.problems.raise_if_any()
    return dataclasses.replace(cond, **target.fields())


@dataclass
class SettingsTarget:
    """What the components' case settings change (see
    :meth:`simulator.components.Component.apply_settings`): extraction controls
    ``(name, (control, value))``, heaters out of service, pressures held by
    control valves ``(name, pressure [Pa])``; problems found on the way."""

    problems: Problems
    extraction_control: list = field(default_factory=list)
    heaters_out: set = field(default_factory=set)
    held_pressures: list = field(default_factory=list)
    settings: list = field(default_factory=list)

    def fields(self) -> dict:
        """The :class:`Conditions` fields these settings give, the last given of
        each extraction, valve and (table, name, setting) kept."""
        last = {(t, n, s): v for t, n, s, v in self.settings}
        return {
            "extraction_control": tuple(sorted(dict(self.extraction_control).items())),
            "heaters_out": frozenset(self.heaters_out),
            "held_pressures": tuple(sorted(dict(self.held_pressures).items())),
            "settings": tuple(sorted((t, n, s, v) for (t, n, s), v in last.items())),
        }


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
