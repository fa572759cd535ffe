"""Turbine model: read the model file, build the graph, calibrate to design.

The turbine is a directed graph (networkx ``DiGraph``): nodes are points of the
steam path with a pressure (the throttle, the first-stage inlet, extraction
and crossover points, reheater ends, the exhaust); edges are the components
that join them (the throttle valve, stage groups, reheaters and pipes).
Parallel flows, such as the two ends of a double-flow LP or two LP casings,
are parallel branches that split at one node and merge at another.

Calibration marches the design heat balance through the graph in topological
order and fixes each component's constants (ellipse-law flow constant, dry
design efficiency, design isentropic drop and volume flow, design pressure
drops, heater closure factors).  The result, :class:`Model`, is what the
solver works on.

Model file reference: see README.md, section "Model file".
"""

from __future__ import annotations

import hashlib
from collections import defaultdict
from dataclasses import dataclass, field
from pathlib import Path

import networkx as nx

from ..components.legacy import (
    Boiler,
    ControlValve,
    ExhaustEnd,
    Extraction,
    FeedwaterTrain,
    Generator,
    Heater,
    PressureDropPath,
    Pump,
    StageGroup,
    ThrottleValve,
)
from ..errors import InputError, PartloadError, TopologyError
from ..inputs.reading import Problems, TableReader, load_toml
from ..physics.efficiency import CORRECTIONS, baumann_factor, make_table_correction
from ..physics.ellipse import flow_constant
from ..physics.expansion import moisture_from_enthalpy
from ..physics.heater import design_ua
from ..plant.limits import Limits, default_limits, read_limits
from ..steam.if97 import P_CRIT, P_MAX, P_MIN, T_CRIT, T_MAX, T_MIN, SteamTables, get_backend
from ..units import Where, parse

__all__ = ["Model", "ThrottleDesign", "load_model", "build_model"]

EXTRACTION_CONTROLS = ("fraction", "flow", "closed", "heater")
IF97 = "the validity range of IAPWS-IF97"
HEATER_KINDS = ("closed", "deaerator")
TTD_METHODS = ("constant", "ua")


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
    """A validated turbine model calibrated to its design heat balance (SI units)."""

    name: str
    description: str
    file: str
    text: str
    sha256: str
    graph: nx.DiGraph
    order: list[str]
    design_pressure: dict[str, float]
    throttle: ThrottleDesign
    valve: ThrottleValve
    groups: list[StageGroup]
    paths: list[PressureDropPath]
    extractions: dict[str, Extraction]
    exhaust_nodes: list[str]
    generator: Generator
    heaters: dict[str, Heater] = field(default_factory=dict)
    pumps: dict[str, Pump] = field(default_factory=dict)
    feedwater: FeedwaterTrain | None = None
    design_enthalpy: dict[str, float] = field(default_factory=dict)
    design_group_flow: dict[str, float] = field(default_factory=dict)
    stated_output: float | None = None
    limits: Limits = field(default_factory=default_limits)
    warnings: list[str] = field(default_factory=list)
    control_valves: list[ControlValve] = field(default_factory=list)
    atmosphere: float | None = None  # [Pa] stated local atmosphere, for gauge pressures

    @property
    def source(self) -> str:
        return self.throttle.node

    def component(self, name: str):
        for c in [self.valve, *self.groups, *self.paths, *self.control_valves]:
            if c.name == name:
                return c
        raise KeyError(name)


def load_model(path: str | Path, steam: SteamTables | None = None) -> Model:
    """Read, validate and calibrate the model file at ``path``."""
    data, text = load_toml(path)
    return build_model(data, text=text, file=str(path), steam=steam)


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


def _ratio_list(reader: TableReader, key: str) -> list[float] | None:
    """A list of two or more positive plain numbers (ratios) [-]."""
    values = reader.raw(key)
    if values is None:
        return None
    w = reader.where.child(key)
    if (not isinstance(values, list) or len(values) < 2
            or not all(isinstance(v, (int, float)) and not isinstance(v, bool) for v in values)):
        reader.problems.add(w.error(f"expected a list of two or more numbers, got {values!r}"))
        return None
    bad = [v for v in values if not (v > 0.0 and v < float("inf"))]
    if bad:
        reader.problems.add(w.error(f"ratios must be positive and finite, got {bad[0]!r}"))
        return None
    return [float(v) for v in values]


def _correction_table(tr: TableReader, eta: float | None):
    """Read a stage group's ``correction_table``; ``None`` when it is wrong."""
    qs = _ratio_list(tr, "volume_flow_ratio")
    es = _ratio_list(tr, "efficiency_ratio")
    tr.finish()
    if qs is None or es is None:
        return None
    if len(qs) != len(es):
        tr.problems.add(tr.where.child("efficiency_ratio").error(
            f"{len(es)} efficiency ratios for {len(qs)} volume-flow ratios; give one each"))
        return None
    if any(b <= a for a, b in zip(qs, qs[1:])):
        tr.problems.add(tr.where.child("volume_flow_ratio").error("values must increase"))
        return None
    if eta is not None and eta * max(es) > 1.0:
        tr.problems.add(tr.where.child("efficiency_ratio").error(
            f"the largest ratio {max(es):g} times the design efficiency {eta:g} exceeds 1"))
        return None
    try:
        return make_table_correction(qs, es)
    except (ValueError, TypeError) as exc:
        tr.problems.add(tr.where.error(str(exc)))
        return None


def _edge_table(rr: TableReader, kind: str):
    """Read the name and end nodes of a component table; once its name is known,
    its messages name it (``[stage_group 'HP1']``) instead of its position."""
    name = rr.string("name")
    if name:
        rr.where = Where(rr.where.file, f"{kind} '{name}'", None)
    return rr, name, rr.string("from"), rr.string("to")


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
    exhaust_nodes = ex.raw("nodes", [])
    if isinstance(exhaust_nodes, str):
        exhaust_nodes = [exhaust_nodes]
    if not isinstance(exhaust_nodes, list) or not all(isinstance(n, str) for n in exhaust_nodes):
        problems.add(ex.where.child("nodes").error("expected a list of node names"))
        exhaust_nodes = []
    curves: dict[str, tuple] = {}
    curves_data = ex.raw("loss_curves", {})
    if not isinstance(curves_data, dict):
        problems.add(ex.where.child("loss_curves").error("expected tables of curves"))
        curves_data = {}
    for cname, cdata in curves_data.items():
        cr = reader(cdata, f"exhaust.loss_curves.{cname}")
        xv, yv = _curve(cr, "annulus_velocity", "velocity", "loss", "specific_enthalpy")
        cr.finish()
        if xv is not None:
            curves[cname] = (xv, yv)
    ex.finish()

    # --- throttle valve ----------------------------------------------------------
    va = reader(top.raw("throttle_valve", {}), "throttle_valve")
    if "throttle_valve" not in data:
        problems.add(Where(file, "throttle_valve").error("missing required table"))
    v_to = va.string("to")
    v_wo = va.quantity("wide_open_drop", "fraction", default=None, lo=0.0, hi=0.5)
    va.finish()

    # --- stage groups ------------------------------------------------------------
    groups: list[StageGroup] = []
    for i, g in enumerate(top.table_list("stage_group")):
        gr, gname, g_from, g_to = _edge_table(reader(g, f"stage_group[{i}]"), "stage_group")
        eta = gr.number("efficiency", lo=0.0, hi=1.0, lo_open=True)
        # The exhaust-loss curve already carries the last stage's losses at low
        # volume flow, so an exhaust group defaults to a constant efficiency.
        is_exhaust = gr.has("annulus_area") or gr.has("loss_curve")
        cname = gr.string("efficiency_correction",
                          default="constant" if is_exhaust else "velocity_ratio",
                          choices=sorted(CORRECTIONS) + ["table"])
        corr = CORRECTIONS.get(cname or "constant", CORRECTIONS["constant"])
        if cname == "table":
            tr = reader(gr.raw("correction_table"), f"{gr.where.table}.correction_table")
            corr = _correction_table(tr, eta) or corr
        alpha = gr.number("moisture_factor", default=1.0, lo=0.0, hi=3.0)
        dflow = gr.quantity("design_flow", "mass_flow", default=None, positive=True)
        exhaust = None
        if gr.has("annulus_area") or gr.has("loss_curve"):
            area = gr.quantity("annulus_area", "area", positive=True)
            curve = gr.string("loss_curve", choices=list(curves) or None)
            if area and curve in curves:
                exhaust = ExhaustEnd(area, curves[curve][0], curves[curve][1], curve)
        gr.finish(also_valid=("annulus_area", "loss_curve", "correction_table"))
        if None in (gname, g_from, g_to, eta):
            continue
        groups.append(StageGroup(gname, g_from, g_to, eta, cname or "constant", corr,
                                 alpha if alpha is not None else 1.0, design_flow=dflow,
                                 exhaust=exhaust))

    # --- reheaters and pipes -----------------------------------------------------
    paths: list[PressureDropPath] = []
    for kind in ("reheater", "pipe"):
        for i, r in enumerate(top.table_list(kind)):
            rr, rname, r_from, r_to = _edge_table(reader(r, f"{kind}[{i}]"), kind)
            T_out = (rr.quantity("outlet_temperature", "temperature", lo=T_MIN, hi=T_MAX,
                                 reason=IF97)
                     if kind == "reheater" else None)
            rr.finish()
            if None in (rname, r_from, r_to) or (kind == "reheater" and T_out is None):
                continue
            paths.append(PressureDropPath(rname, r_from, r_to, T_out))

    control_valves: list[ControlValve] = []
    for i, r in enumerate(top.table_list("control_valve")):
        rr, rname, r_from, r_to = _edge_table(reader(r, f"control_valve[{i}]"),
                                              "control_valve")
        frac = rr.quantity("wide_open_drop", "fraction", default=None, lo=0.0, hi=0.5)
        rr.finish()
        if None in (rname, r_from, r_to):
            continue
        control_valves.append(ControlValve(rname, r_from, r_to, wide_open_fraction=frac))

    # --- extractions -------------------------------------------------------------
    extractions: dict[str, Extraction] = {}
    for i, e in enumerate(top.table_list("extraction")):
        er = reader(e, f"extraction[{i}]")
        ename = er.string("name")
        if ename:
            er.where = Where(file, f"extraction '{ename}'", None)
        node = er.string("node")
        flow = er.quantity("design_flow", "mass_flow", lo=0.0)
        control = er.string("control", default=None, choices=EXTRACTION_CONTROLS)
        er.finish()
        if None in (ename, node, flow):
            continue
        if ename in extractions:
            problems.add(er.where.child("name").error(f"extraction {ename!r} is defined twice"))
        extractions[ename] = Extraction(ename, node, flow, control or "")

    # --- generator ---------------------------------------------------------------
    gen = reader(top.raw("generator", {}), "generator")
    if "generator" not in data:
        problems.add(Where(file, "generator").error("missing required table"))
    rating = gen.quantity("rating", "power", positive=True)
    mech = gen.quantity("mechanical_loss", "power", default=0.0, lo=0.0)
    fixed = gen.quantity("fixed_loss", "power", default=0.0, lo=0.0)
    load_loss = gen.quantity("load_loss", "power", default=0.0, lo=0.0)
    stated_output = gen.quantity("design_output", "power", default=None, positive=True)
    gen.finish()
    if rating and None not in (mech, fixed, load_loss) and mech + fixed + load_loss >= rating:
        problems.add(gen.where.child("mechanical_loss").error(
            f"the losses (mechanical {mech / 1e6:.4g} MW, fixed {fixed / 1e6:.4g} MW, load "
            f"{load_loss / 1e6:.4g} MW) add up to the rating {rating / 1e6:.4g} MW or more"))

    # --- heaters, pumps and feedwater -------------------------------------------
    heaters: dict[str, Heater] = {}
    for i, hdat in enumerate(top.table_list("heater")):
        hr = reader(hdat, f"heater[{i}]")
        hname = hr.string("name")
        if hname:
            hr.where = Where(file, f"heater '{hname}'", None)
        kind = hr.string("type", default="closed", choices=HEATER_KINDS)
        extraction = hr.string("extraction")
        line_drop = hr.number("line_pressure_drop", default=0.03, lo=0.0, hi=0.5)
        ttd = dca = None
        drain_to = "condenser"
        when_out = None
        method = "constant"
        if kind == "closed":
            ttd = hr.quantity("ttd", "temperature_difference", lo=-30.0, hi=60.0)
            dca = hr.quantity("dca", "temperature_difference", default=None, lo=0.0, hi=60.0)
            drain_to = hr.string("drain_to", default="condenser")
            when_out = hr.string("drain_to_when_out_of_service", default=None)
            method = hr.string("ttd_method", default="constant", choices=TTD_METHODS)
        dp_eff = hr.number("drain_pump_efficiency", default=0.75, lo=0.0, hi=1.0, lo_open=True)
        hr.finish()
        if None in (hname, kind, extraction) or (kind == "closed" and ttd is None):
            continue
        if hname in heaters:
            problems.add(hr.where.child("name").error(f"heater {hname!r} is defined twice"))
        heaters[hname] = Heater(hname, kind, extraction, line_drop if line_drop is not None
                                else 0.03, ttd or 0.0, dca, drain_to or "condenser", when_out,
                                method or "constant", drain_pump_efficiency=dp_eff or 0.75)
    pumps: dict[str, Pump] = {}
    for i, pdat in enumerate(top.table_list("pump")):
        pr = reader(pdat, f"pump[{i}]")
        pname = pr.string("name")
        if pname:
            pr.where = Where(file, f"pump '{pname}'", None)
        eff = pr.number("efficiency", lo=0.0, hi=1.0, lo_open=True)
        dis = pr.string("discharge", default="fixed", choices=("fixed", "boiler"))
        dp = (pr.quantity("discharge_pressure", "pressure", positive=True, hi=P_MAX)
              if dis == "fixed" else 0.0)
        pr.finish()
        if None in (pname, eff, dis, dp):
            continue
        pumps[pname] = Pump(pname, eff, dis, dp)
    feedwater = None
    if "feedwater" in data or heaters or pumps:
        fw = reader(top.raw("feedwater", {}), "feedwater")
        if "feedwater" not in data:
            problems.add(Where(file, "feedwater").error(
                "missing required table: heaters and pumps need the feedwater train order"))
        cond = fw.string("condenser")
        order = fw.raw("train", [])
        if not isinstance(order, list) or not all(isinstance(o, str) for o in order):
            problems.add(fw.where.child("train").error("expected a list of heater and pump "
                                                       "names in water-flow order"))
            order = []
        bdp = fw.quantity("boiler_pressure_drop", "pressure_difference", default=0.0)
        fw.finish()
        for j, item in enumerate(order):
            if item not in heaters and item not in pumps:
                problems.add(fw.where.child("train").error(
                    f"{item!r} (position {j + 1}) is neither a heater nor a pump"))
        if cond:
            feedwater = FeedwaterTrain(cond, list(order), Boiler(bdp or 0.0, t_m or 1.0))

    if t_p is not None and t_T is not None:
        _check_superheated(problems, steam, th.where.child("temperature"), t_T, t_p,
                           "the throttle temperature")
    for path in paths:
        if path.is_reheater and path.outlet in design_p:
            _check_superheated(problems, steam,
                               Where(file, f"reheater '{path.name}'", "outlet_temperature"),
                               path.outlet_temperature, design_p[path.outlet],
                               "the reheater outlet temperature")

    limits = read_limits(reader(top.raw("limits", {}), "limits"))
    top.finish(also_valid=("about", "throttle", "nodes", "exhaust", "throttle_valve",
                           "stage_group", "reheater", "pipe", "extraction", "generator",
                           "heater", "pump", "feedwater", "limits", "control_valve"))
    problems.raise_if_any()

    throttle = ThrottleDesign(t_node, t_p, t_T, t_m, t_pmax or t_p)
    valve = ThrottleValve("throttle valve", t_node, v_to)
    generator = Generator(rating, mech, fixed, load_loss)
    graph = _build_graph(file, design_p, throttle, valve, groups, paths + control_valves,
                         extractions,
                         exhaust_nodes, heaters, pumps, feedwater, problems)
    problems.raise_if_any()
    model = Model(name, description or "", file, text, hashlib.sha256(text.encode()).hexdigest(),
                  graph, list(nx.topological_sort(graph)), design_p, throttle, valve, groups,
                  paths, extractions, list(exhaust_nodes), generator, heaters, pumps, feedwater,
                  stated_output=stated_output, limits=limits, control_valves=control_valves,
                  atmosphere=atmosphere)
    _calibrate(model, v_wo, steam)
    return model


def _check_superheated(problems: Problems, steam: SteamTables, where: Where, T: float,
                       p: float, what: str) -> None:
    """Record a problem unless ``(p, T)`` is superheated (or supercritical) steam.

    A state given by pressure [Pa] and temperature [K] is steam only above the
    saturation temperature (above the critical temperature at supercritical
    pressure); below it, it is water, which no stage group can expand.
    """
    T_sat = T_CRIT if p >= P_CRIT else steam.T_sat(p)
    if T <= T_sat:
        problems.add(where.error(
            f"{what} {T - 273.15:.1f} degC is not above the "
            f"{'critical' if p >= P_CRIT else 'saturation'} temperature "
            f"{T_sat - 273.15:.1f} degC at the design pressure {p / 1e5:.5g} bar there: the "
            f"steam would be water; the turbine needs superheated steam at this point"))


def _build_graph(file, design_p, throttle, valve, groups, paths, extractions, exhaust_nodes,
                 heaters, pumps, feedwater, problems: Problems) -> nx.DiGraph:
    """Assemble and check the graph; problems are added to ``problems``."""
    g = nx.DiGraph()
    for n, p in design_p.items():
        g.add_node(n, design_pressure=p)

    def need_node(name, table, key):
        if name not in design_p:
            problems.add(TopologyError(
                f"node {name!r} has no design pressure in [nodes] (known nodes: "
                f"{', '.join(sorted(design_p))})", file=file, table=table, key=key))
            return False
        return True

    edges = [(valve, "throttle_valve", valve.inlet, valve.outlet)]
    edges += [(c, f"stage_group '{c.name}'", c.inlet, c.outlet) for c in groups]
    edges += [(c, _table_of(c)[0], c.inlet, c.outlet) for c in paths]
    names = set()
    for comp, table, a, b in edges:
        if comp.name in names:
            problems.add(InputError(f"name {comp.name!r} is used twice", file=file,
                                    table=table, key="name"))
        names.add(comp.name)
        ok = need_node(a, table, "from" if comp is not valve else "node") & need_node(
            b, table, "to")
        if not ok:
            continue
        if a == b:
            problems.add(TopologyError("inlet and outlet are the same node", file=file,
                                       table=table, key="to"))
            continue
        if g.has_edge(a, b):
            problems.add(TopologyError(
                f"a second component between {a!r} and {b!r}; parallel paths need their "
                f"own nodes", file=file, table=table, key="to"))
            continue
        if design_p[b] >= design_p[a]:
            problems.add(InputError(
                f"design pressure must fall from {a!r} ({design_p[a] / 1e5:.5g} bar) to "
                f"{b!r} ({design_p[b] / 1e5:.5g} bar)", file=file, table=table, key="to"))
        g.add_edge(a, b, component=comp)
    if not nx.is_directed_acyclic_graph(g):
        cycle = nx.find_cycle(g)
        comps = [g.edges[e]["component"] for e in cycle]
        first = next((t for c, t, _a, _b in edges if c is comps[0]), "stage_group")
        problems.add(TopologyError(
            f"the components {', '.join(repr(c.name) for c in comps)} form a loop "
            f"({' -> '.join([cycle[0][0]] + [e[1] for e in cycle])}); steam must flow from "
            f"the throttle to the exhaust", file=file, table=first, key="to"))
    if problems:
        return g
    if g.in_degree(throttle.node):
        problems.add(TopologyError("the throttle node must not have components flowing into it",
                                   file=file, table="throttle", key="node"))
    reach = nx.descendants(g, throttle.node) | {throttle.node}
    for n in g.nodes:
        if n not in reach:
            problems.add(TopologyError(f"node {n!r} cannot be reached from the throttle",
                                       file=file, table="nodes", key=n))
    for n in exhaust_nodes:
        if n not in design_p:
            problems.add(TopologyError(f"exhaust node {n!r} is not in [nodes]", file=file,
                                       table="exhaust", key="nodes"))
        elif g.out_degree(n):
            problems.add(TopologyError(f"exhaust node {n!r} has components leaving it",
                                       file=file, table="exhaust", key="nodes"))
    if not exhaust_nodes:
        problems.add(TopologyError("no exhaust node given", file=file, table="exhaust",
                                   key="nodes"))
    for n in g.nodes:
        if g.out_degree(n) == 0 and n not in exhaust_nodes and n in reach:
            problems.add(TopologyError(
                f"the steam path ends at node {n!r}, which is not an exhaust; does a branch "
                f"not merge again, or is {n!r} missing from [exhaust] nodes?", file=file,
                table="nodes", key=n))
    for n in g.nodes:
        outs = [g.edges[n, m]["component"] for m in g.successors(n)]
        drops = [c for c in outs if not isinstance(c, StageGroup)]
        if drops and len(outs) > 1:
            problems.add(TopologyError(
                f"node {n!r} feeds {drops[0].name!r} and other components; a valve, reheater "
                f"or pipe must take the whole flow of its inlet node", file=file,
                table="nodes", key=n))
    if g.out_degree(throttle.node) != 1 or valve.outlet not in g.successors(throttle.node):
        problems.add(TopologyError("the throttle valve must be the only component leaving "
                                   "the throttle node", file=file, table="throttle_valve",
                                   key="to"))
    for e in extractions.values():
        where = Where(file, f"extraction '{e.name}'", "node")
        if e.node not in design_p:
            problems.add(TopologyError(f"node {e.node!r} does not exist", file=where.file,
                                       table=where.table, key=where.key))
        elif e.node == throttle.node or e.node in exhaust_nodes:
            problems.add(where.error("an extraction must be taken between the throttle valve "
                                     "and the exhaust"))
    for h in heaters.values():
        table = f"heater '{h.name}'"
        if h.extraction not in extractions:
            problems.add(TopologyError(
                f"extraction {h.extraction!r} does not exist (extractions: "
                f"{', '.join(sorted(extractions)) or 'none'})", file=file, table=table,
                key="extraction"))
        else:
            e = extractions[h.extraction]
            if e.heater:
                problems.add(InputError(f"extraction {e.name!r} already feeds heater "
                                        f"{e.heater!r}", file=file, table=table,
                                        key="extraction"))
            e.heater = h.name
            if not e.control:
                e.control = "heater"
        for key, target in (("drain_to", h.drain_to),
                            ("drain_to_when_out_of_service", h.drain_to_when_out)):
            if target is None or target in ("condenser", "forward"):
                continue
            if target not in heaters:
                problems.add(TopologyError(
                    f"{target!r} is not a heater (use a heater name, 'condenser' or "
                    f"'forward')", file=file, table=table, key=key))
            elif target == h.name:
                problems.add(TopologyError("a heater cannot drain to itself", file=file,
                                           table=table, key=key))
            elif heaters[target].kind == "closed" and h.kind == "closed":
                pass
    if feedwater is not None:
        if feedwater.condenser not in exhaust_nodes:
            problems.add(TopologyError(f"{feedwater.condenser!r} is not an exhaust node",
                                       file=file, table="feedwater", key="condenser"))
        for h in heaters:
            if h not in feedwater.order:
                problems.add(TopologyError(f"heater {h!r} is not in the feedwater train",
                                           file=file, table="feedwater", key="train"))
        if not any(p.discharge == "boiler" for p in pumps.values()) and heaters:
            problems.add(InputError("no pump has discharge = 'boiler' (the feed pump)",
                                    file=file, table="pump"))
        cascade = nx.DiGraph()
        cascade.add_nodes_from(heaters)
        cascade.add_edges_from((h.name, h.drain_to) for h in heaters.values()
                               if h.drain_to in heaters)
        if not nx.is_directed_acyclic_graph(cascade):
            problems.add(TopologyError("heater drains form a loop", file=file, table="heater",
                                       key="drain_to"))
        for h in heaters.values():
            if h.drain_to == "forward" and h.kind != "closed":
                problems.add(InputError("only a closed heater can pump its drains forward",
                                        file=file, table=f"heater '{h.name}'", key="drain_to"))
    for e in extractions.values():
        if not e.control:
            e.control = "fraction"
        if e.control == "heater" and not e.heater:
            problems.add(InputError("control = 'heater' but no heater takes this extraction",
                                    file=file, table=f"extraction '{e.name}'", key="control"))
    return g


def _calibrate(model: Model, wide_open_fraction: float | None, steam: SteamTables) -> None:
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
            given = [c for c in outs if isinstance(c, StageGroup) and c.design_flow]
            free = [c for c in outs if c not in given]
            rest = net - sum(c.design_flow for c in given)
            if not free or rest <= 0.0:
                raise InputError(
                    f"the design flows of the groups leaving node {n!r} do not add up to the "
                    f"{net:.4g} kg/s available; leave 'design_flow' off one of them",
                    file=file, table=f"stage_group '{(given or outs)[0].name}'",
                    key="design_flow")
            for c in outs:
                at = _table_of(c)
                m = c.design_flow if c in given else rest / len(free)
                model.design_group_flow[c.name] = m
                h_out = _calibrate_component(c, m, p[c.inlet], h[n], p[c.outlet], steam,
                                             wide_open_fraction, model)
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
            _calibrate_heaters(model, steam)
        except PartloadError as exc:
            if isinstance(exc, InputError):
                raise
            raise InputError(f"the design feedwater heat balance cannot be evaluated: {exc}",
                             file=file, table="feedwater") from None
    _check_design_annulus(model, steam)


def _table_of(c) -> tuple[str, str]:
    """Table and key of a component in the model file, for error messages."""
    if isinstance(c, StageGroup):
        return f"stage_group '{c.name}'", "efficiency"
    if isinstance(c, ControlValve):
        return f"control_valve '{c.name}'", "to"
    if isinstance(c, ThrottleValve):
        return "throttle_valve", "to"
    return f"{'reheater' if c.is_reheater else 'pipe'} '{c.name}'", "to"


def _check_design_annulus(model: Model, steam: SteamTables) -> None:
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


def _calibrate_component(c, m, p_in, h_in, p_out, steam, wide_open_fraction, model) -> float:
    """Fix the constants of one component at design; return its outlet enthalpy."""
    v_in = steam.v_ph(p_in, h_in)
    if isinstance(c, StageGroup):
        s_in = steam.s_ph(p_in, h_in)
        c.K = flow_constant(m, p_in, p_out, v_in)
        c.dh_s_design = h_in - steam.h_ps(p_out, s_in)
        c.q_design = m * v_in
        h_elep = h_in - c.eta_design * c.dh_s_design
        h_vap = steam.h_vap_sat(p_out)
        h_liq = steam.h_liq_sat(p_out)
        y_out = moisture_from_enthalpy(h_elep, h_liq, h_vap)
        y_in = (1.0 - steam.x_ph(p_in, h_in)) if c.alpha else 0.0
        factor = baumann_factor(y_in, y_out, c.alpha)
        if factor <= 0.05:
            raise InputError("Baumann's factor leaves no efficiency; check moisture_factor",
                             file=model.file, table=f"stage_group '{c.name}'",
                             key="moisture_factor")
        c.eta_dry_design = c.eta_design / factor
        return c.expand(steam, p_in, h_in, p_out)[1]
    if isinstance(c, ThrottleValve):
        dp = p_in - p_out
        if isinstance(c, ControlValve):
            wide_open_fraction = c.wide_open_fraction
        c.m_design, c.v_design = m, v_in
        c.dp_wide_open = dp if wide_open_fraction is None else wide_open_fraction * p_in
        if c.dp_wide_open > dp * (1 + 1e-12):
            raise InputError(
                f"the wide-open valve drop ({c.dp_wide_open / 1e5:.4g} bar) exceeds the design "
                f"drop from the node pressures ({dp / 1e5:.4g} bar)", file=model.file,
                table=_table_of(c)[0], key="wide_open_drop")
        return h_in
    c.dp_design, c.m_design, c.v_design = p_in - p_out, m, v_in
    return c.outlet_enthalpy(steam, p_out, h_in)


def _calibrate_heaters(model: Model, steam: SteamTables) -> None:
    """Evaluate the feedwater train at design; fix closure factors, duties and UA."""
    from ..solve.water import design_feedwater_states

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
        if htr.kind == "closed":
            htr.cp = duty / st["m_water"] / max(st["T_out"] - st["T_in"], 1e-6)
            if htr.ttd_method == "ua":
                try:
                    htr.ua = design_ua(st["T_sat"], st["T_in"], st["T_out"], st["m_water"],
                                       htr.cp)
                except ValueError:
                    raise InputError("ttd_method = 'ua' needs a positive TTD", file=model.file,
                                     table=table, key="ttd_method") from None
