"""Turbine model: read the model file, build the graph, calibrate to design.

The turbine is a directed graph (networkx ``DiGraph``): nodes are points of the
steam path with a pressure (the throttle, the first-stage inlet, extraction
and crossover points, reheater ends, the exhaust); edges are the steam-path
components that join them (the throttle valve, stage groups, reheaters,
pipes, control valves).  Parallel flows, such as the two ends of a double-flow
LP or two LP casings, are parallel branches that split at one node and merge
at another.

The plant-level tables (``[about]``, ``[throttle]``, ``[nodes]``,
``[exhaust]``, ``[feedwater]``, ``[limits]``) are read here; every component
table is read by its kind from the registry
(:data:`simulator.components.KINDS`).  Calibration
(:mod:`simulator.plant.calibrate`) then fixes each component's constants.
The result, :class:`Model`, is what the solver works on.

Model file reference: see README.md, section "Model file".
"""

from __future__ import annotations

import functools
import hashlib
from dataclasses import dataclass, field
from pathlib import Path

import networkx as nx

from ..components import (
    KINDS,
    Component,
    ControlValve,
    Extraction,
    Generator,
    GoverningStage,
    Heater,
    Pipe,
    Pump,
    ReadContext,
    Reheater,
    StageGroup,
    SteamPathComponent,
)
from ..components.checks import check_superheated
from ..errors import InputError
from ..inputs.reading import Problems, TableReader, load_toml
from ..physics.exhaust import INTERPOLATIONS
from ..steam.if97 import P_MAX, P_MIN, T_MAX, T_MIN, SteamTables, get_backend
from ..units import Where, parse
from .calibrate import calibrate, rewrite_design_flows
from .feedwater_train import FeedwaterTrain, read_feedwater
from .fitted import is_as_tested, load_as_tested
from .limits import Limits, default_limits, read_limits
from .topology import build_graph

__all__ = ["Model", "ThrottleDesign", "load_model", "build_model"]

IF97 = "the validity range of IAPWS-IF97"
PLANT_TABLES = ("about", "throttle", "nodes", "exhaust", "feedwater", "limits")


@dataclass
class ThrottleDesign:
    """Design throttle conditions: node, pressure [Pa], temperature [K], flow [kg/s],
    highest allowed throttle pressure [Pa]."""

    node: str
    pressure: float
    temperature: float
    flow: float
    max_pressure: float


@dataclass
class Model:
    """A validated turbine model calibrated to its design heat balance (SI units).

    ``components`` holds every component, kind by kind in registry order and in
    file order within a kind; the views below pick them by kind.
    """

    name: str
    description: str
    file: str
    text: str
    sha256: str
    graph: nx.DiGraph
    order: list[str]
    design_pressure: dict[str, float]
    throttle: ThrottleDesign
    components: list[Component]
    exhaust_nodes: list[str]
    feedwater: FeedwaterTrain | None = None
    design_enthalpy: dict[str, float] = field(default_factory=dict)
    design_group_flow: dict[str, float] = field(default_factory=dict)  # every steam-path
    limits: Limits = field(default_factory=default_limits)
    warnings: list[str] = field(default_factory=list)
    atmosphere: float | None = None  # [Pa] stated local atmosphere, for gauge pressures
    # tunables set to fitted values after calibration, (key, value) pairs [unit of each]:
    # a model read from a fitted ("as tested") file, see plant/fitted.py
    fitted: tuple = ()
    fitted_file: str | None = None  # the fitted model file read (``file``: its design model)
    # compiled equations kept by the solver, one per structure and thread
    # (simulator.solve.equations.equations_for); not part of the model's identity
    solver_cache: dict = field(default_factory=dict, repr=False, compare=False)

    @property
    def source(self) -> str:
        """The throttle node."""
        return self.throttle.node

    def of_kind(self, kind: type[Component]) -> list:
        """The components of one kind, in file order."""
        return [c for c in self.components if type(c) is kind]

    @functools.cached_property
    def steam_path(self) -> list[SteamPathComponent]:
        """Every component on an edge of the graph."""
        return [c for c in self.components if isinstance(c, SteamPathComponent)]

    @functools.cached_property
    def admission(self) -> SteamPathComponent:
        """The component leaving the throttle node that governs the admission
        (the throttle valve, or a governing stage)."""
        return next(c for c in self.steam_path if c.admits)

    @functools.cached_property
    def governing_stage(self) -> GoverningStage | None:
        """The governing stage of a nozzle-governed unit, ``None`` otherwise."""
        return next(iter(self.of_kind(GoverningStage)), None)

    @functools.cached_property
    def groups(self) -> list[StageGroup]:
        return self.of_kind(StageGroup)

    @functools.cached_property
    def reheaters(self) -> list[Reheater]:
        return self.of_kind(Reheater)

    @functools.cached_property
    def pipes(self) -> list[Pipe]:
        return self.of_kind(Pipe)

    @functools.cached_property
    def control_valves(self) -> list[ControlValve]:
        return self.of_kind(ControlValve)

    @functools.cached_property
    def extractions(self) -> dict[str, Extraction]:
        return {c.name: c for c in self.of_kind(Extraction)}

    @functools.cached_property
    def heaters(self) -> dict[str, Heater]:
        return {c.name: c for c in self.of_kind(Heater)}

    @functools.cached_property
    def pumps(self) -> dict[str, Pump]:
        return {c.name: c for c in self.of_kind(Pump)}

    @functools.cached_property
    def generator(self) -> Generator:
        return self.of_kind(Generator)[0]

    @property
    def stated_output(self) -> float | None:
        """The heat balance's design output [W], if the model file states it."""
        return self.generator.stated_output

    def component(self, name: str) -> SteamPathComponent:
        """The steam-path component called ``name``."""
        for c in self.steam_path:
            if c.name == name:
                return c
        raise KeyError(name)


def load_model(path: str | Path, steam: SteamTables | None = None) -> Model:
    """Read, validate and calibrate the model file at ``path``: a design model, or
    a fitted ("as tested") model file, read as its design model with the fitted
    constants put in (:func:`~simulator.plant.fitted.load_as_tested`)."""
    data, text = load_toml(path)
    if is_as_tested(data):
        return load_as_tested(path, steam)
    return build_model(data, text=text, file=str(path), steam=steam)


def balanced_model_text(path: str | Path, backend: str | None = None) -> str:
    """The model file at ``path`` with every heater's extraction at the design
    bleed that closes its heater's balance: the file is read with
    ``design_flow = "closing"`` for each of them, calibrated, and its text
    rewritten with the flows found (nothing else changes)."""
    data, text = load_toml(path)
    if is_as_tested(data):
        raise InputError(f"a fitted (as tested) model file has no design bleeds of its own; "
                         f"balance its design model {data.get('design_model')!r}",
                         file=str(path), key="basis")
    heaters = data.get("heater") if isinstance(data, dict) else None
    fed = {h.get("extraction") for h in heaters or [] if isinstance(h, dict)}
    for e in data.get("extraction") or []:
        if isinstance(e, dict) and e.get("name") in fed:
            e["design_flow"] = "closing"
    model = build_model(data, text=text, file=str(path),
                        steam=get_backend(backend) if backend else None)
    flows = {e.name: e.design_flow for e in model.extractions.values() if e.closing}
    return rewrite_design_flows(text, flows, str(path))


def _curve(reader: TableReader, key_x: str, dim_x: str, key_y: str, dim_y: str):
    xs = reader.raw(key_x)
    ys = reader.raw(key_y)
    if xs is None or ys is None:
        return None, None
    ok = isinstance(xs, list) and isinstance(ys, list) and len(xs) == len(ys) and len(xs) >= 2
    if not ok:
        reader.problems.add(reader.where.child(key_y).error(
            f"'{key_x}' and '{key_y}' must be lists of the same length, two or more values"))
        return None, None
    w = reader.where
    try:
        xv = [parse(x, dim_x, w.child(key_x)) for x in xs]
        yv = [parse(y, dim_y, w.child(key_y)) for y in ys]
    except InputError as exc:
        reader.problems.add(exc)
        return None, None
    if any(b <= a for a, b in zip(xv, xv[1:])):
        reader.problems.add(w.child(key_x).error("values must increase"))
        return None, None
    if xv[0] <= 0.0:
        reader.problems.add(w.child(key_x).error(f"values must be positive, got {xs[0]!r}"))
        return None, None
    if min(yv) < 0.0:
        reader.problems.add(w.child(key_y).error(
            f"values must not be negative, got {ys[yv.index(min(yv))]!r}"))
        return None, None
    return xv, yv



def build_model(data: dict, text: str = "", file: str = "<model>",
                steam: SteamTables | None = None) -> Model:
    """Validate model-file data, build the graph and calibrate it.

    All problems found in reading are reported together as one
    :class:`~simulator.errors.InputError`.
    """
    steam = steam or get_backend("seuif97")
    if isinstance(data, dict) and "model" in data and "throttle" not in data:
        raise InputError("this is a case file (it names a model), not a model file; "
                         "solve it with 'partload point' or 'partload study'", file=file)
    problems = Problems()
    top = TableReader(data, Where(file, None, None), problems)
    about = top.sub("about", default={})
    name = about.string("name", default=Path(file).stem)
    description = about.string("description", default="")
    atmosphere = about.quantity("atmospheric_pressure", "pressure", default=None, positive=True)
    about.finish()
    top.atmosphere = atmosphere

    def reader(value, table):
        return TableReader(value, Where(file, table, None), problems, atmosphere)

    # --- throttle ---------------------------------------------------------------
    th = reader(top.raw("throttle", {}), "throttle")
    if "throttle" not in data:
        problems.add(Where(file, "throttle").error("missing required table"))
    t_node = th.string("node")
    t_p = th.quantity("pressure", "pressure", lo=P_MIN, hi=P_MAX, reason=IF97)
    t_T = th.quantity("temperature", "temperature", lo=T_MIN, hi=T_MAX, reason=IF97)
    t_m = th.quantity("flow", "mass_flow", positive=True)
    t_pmax = th.quantity("max_pressure", "pressure", default=None, lo=P_MIN, hi=P_MAX,
                         reason=IF97)
    th.finish()
    if t_p is not None and t_pmax is not None and t_pmax < t_p:
        problems.add(th.where.child("max_pressure").error(
            f"the highest allowed throttle pressure ({t_pmax / 1e5:.5g} bar) is below the "
            f"design throttle pressure ({t_p / 1e5:.5g} bar)"))

    # --- nodes -------------------------------------------------------------------
    nodes_r = reader(top.raw("nodes", {}), "nodes")
    if "nodes" not in data:
        problems.add(Where(file, "nodes").error("missing required table: design pressure "
                                                "of every node"))
    design_p: dict[str, float] = {}
    for key in list(nodes_r.data):
        v = nodes_r.quantity(key, "pressure", lo=P_MIN, hi=P_MAX,
                             reason=IF97 + ", which ends at the triple point and 1000 bar")
        if v is not None:
            design_p[key] = v
    if t_node and t_p and t_node not in design_p:
        design_p[t_node] = t_p
    elif t_node and t_p and abs(design_p[t_node] - t_p) > 1e-6 * t_p:
        problems.add(Where(file, "nodes", t_node).error(
            "differs from [throttle] pressure; give the throttle pressure once"))

    # --- exhaust -----------------------------------------------------------------
    ex = reader(top.raw("exhaust", {}), "exhaust")
    if "exhaust" not in data:
        problems.add(Where(file, "exhaust").error("missing required table naming the "
                                                  "exhaust nodes"))
    exhaust_nodes = ex.name_list("nodes", [], what="exhaust node") or []
    curves: dict[str, tuple] = {}
    curves_data = ex.raw("loss_curves", {})
    if not isinstance(curves_data, dict):
        problems.add(ex.where.child("loss_curves").error("expected tables of curves"))
        curves_data = {}
    for cname, cdata in curves_data.items():
        cr = reader(cdata, f"exhaust.loss_curves.{cname}")
        xv, yv = _curve(cr, "annulus_velocity", "velocity", "loss", "specific_enthalpy")
        how = cr.string("interpolation", default="linear", choices=list(INTERPOLATIONS))
        cr.finish()
        if xv is not None:
            curves[cname] = (xv, yv, how or "linear")
    ex.finish()

    # --- every component table, read by its kind -----------------------------------
    ctx = ReadContext(file, reader, problems, curves, steam, atmosphere,
                      throttle_node=t_node, design_pressure=design_p)
    components: list[Component] = []
    for kind in KINDS.values():
        found = kind.read_all(top, ctx)
        if not issubclass(kind, SteamPathComponent):
            seen: set[str] = set()
            for c in found:
                if c.name in seen:
                    problems.add(Where(file, c.where, "name").error(
                        f"{kind.title} {c.name!r} is defined twice"))
                seen.add(c.name)
        components += found
    by_kind = {k: [c for c in components if type(c) is k] for k in KINDS.values()}
    heaters = {c.name: c for c in by_kind[Heater]}
    pumps = {c.name: c for c in by_kind[Pump]}
    extractions = {c.name: c for c in by_kind[Extraction]}
    feedwater = read_feedwater(top, reader, problems, heaters, pumps, t_m)

    if t_p is not None and t_T is not None:
        check_superheated(problems, steam, th.where.child("temperature"), t_T, t_p,
                          "the throttle temperature")
    for c in components:
        c.check_design(ctx)
    for kind in KINDS.values():
        kind.check_kind([c for c in components if type(c) is kind], ctx, list(exhaust_nodes))

    limits = read_limits(reader(top.raw("limits", {}), "limits"))
    top.finish(also_valid=PLANT_TABLES + tuple(KINDS))
    problems.raise_if_any()

    throttle = ThrottleDesign(t_node, t_p, t_T, t_m, t_pmax or t_p)
    steam_path = [c for c in components if isinstance(c, SteamPathComponent)]
    admissions = [c for c in steam_path if c.admits]
    if len(admissions) != 1:
        tables = " or ".join(f"[{k.table}]" for k in KINDS.values()
                             if issubclass(k, SteamPathComponent) and k.admits)
        raise InputError(
            (f"give one of {tables}: the steam enters the turbine through one of them"
             if not admissions else
             f"give only one of {tables}: {admissions[0].where} and {admissions[1].where} "
             f"both leave the throttle node"), file=file, table=admissions[-1].table
            if admissions else "throttle_valve")
    graph = build_graph(file, design_p, throttle, admissions[0], steam_path,
                        extractions, exhaust_nodes, heaters, pumps, feedwater, problems)
    problems.raise_if_any()
    model = Model(name, description or "", file, text, hashlib.sha256(text.encode()).hexdigest(),
                  graph, list(nx.topological_sort(graph)), design_p, throttle, components,
                  list(exhaust_nodes), feedwater, limits=limits, atmosphere=atmosphere)
    calibrate(model, steam)
    return model


