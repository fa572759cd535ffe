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

from .components import (
    Boiler,
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
from .errors import InputError, PartloadError, TopologyError
from .physics.efficiency import CORRECTIONS, make_table_correction
from .physics.ellipse import flow_constant
from .physics.heater import design_ua
from .reading import Problems, TableReader, load_toml
from .steam import P_MAX, SteamTables, get_backend
from .units import Where, parse

__all__ = ["Model", "ThrottleDesign", "load_model", "build_model"]

EXTRACTION_CONTROLS = ("fraction", "flow", "closed", "heater")
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
    limits: dict = field(default_factory=dict)

    @property
    def source(self) -> str:
        return self.throttle.node

    def component(self, name: str):
        for c in [self.valve, *self.groups, *self.paths]:
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
    return xv, yv


def build_model(data: dict, text: str = "", file: str = "<model>",
                steam: SteamTables | None = None) -> Model:
    """Validate model-file data, build the graph and calibrate it.

    All problems found in reading are reported together as one
    :class:`~simulator.errors.InputError`.
    """
    steam = steam or get_backend("seuif97")
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
    t_p = th.quantity("pressure", "pressure", positive=True, hi=P_MAX)
    t_T = th.quantity("temperature", "temperature", lo=273.15, hi=1073.15)
    t_m = th.quantity("flow", "mass_flow", positive=True)
    t_pmax = th.quantity("max_pressure", "pressure", default=None, positive=True, hi=P_MAX)
    th.finish()

    # --- nodes -------------------------------------------------------------------
    nodes_r = reader(top.raw("nodes", {}), "nodes")
    if "nodes" not in data:
        problems.add(Where(file, "nodes").error("missing required table: design pressure "
                                                "of every node"))
    design_p: dict[str, float] = {}
    for key in list(nodes_r.data):
        v = nodes_r.quantity(key, "pressure", positive=True, hi=P_MAX)
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
        gr = reader(g, f"stage_group[{i}]")
        gname = gr.string("name")
        if gname:
            gr.where = Where(file, f"stage_group '{gname}'", None)
        g_from = gr.string("from")
        g_to = gr.string("to")
        eta = gr.number("efficiency", lo=0.0, hi=1.0, lo_open=True)
        cname = gr.string("efficiency_correction", default="velocity_ratio",
                          choices=sorted(CORRECTIONS) + ["table"])
        corr = CORRECTIONS.get(cname or "constant", CORRECTIONS["constant"])
        if cname == "table":
            tr = reader(gr.raw("correction_table"), f"{gr.where.table}.correction_table")
            qs = tr.raw("volume_flow_ratio")
            es = tr.raw("efficiency_ratio")
            tr.finish()
            try:
                corr = make_table_correction(qs, es)
            except (ValueError, TypeError) as exc:
                problems.add(tr.where.error(str(exc)))
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
            rr = reader(r, f"{kind}[{i}]")
            rname = rr.string("name")
            if rname:
                rr.where = Where(file, f"{kind} '{rname}'", None)
            r_from = rr.string("from")
            r_to = rr.string("to")
            T_out = (rr.quantity("outlet_temperature", "temperature", lo=273.15, hi=1073.15)
                     if kind == "reheater" else None)
            rr.finish()
            if None in (rname, r_from, r_to) or (kind == "reheater" and T_out is None):
                continue
            paths.append(PressureDropPath(rname, r_from, r_to, T_out))

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
        bdp = fw.quantity("boiler_pressure_drop", "pressure", default=0.0, lo=0.0)
        fw.finish()
        for j, item in enumerate(order):
            if item not in heaters and item not in pumps:
                problems.add(fw.where.child("train").error(
                    f"{item!r} (position {j + 1}) is neither a heater nor a pump"))
        if cond:
            feedwater = FeedwaterTrain(cond, list(order), Boiler(bdp or 0.0, t_m or 1.0))

    limits = top.raw("limits", {})
    top.finish(also_valid=("about", "throttle", "nodes", "exhaust", "throttle_valve",
                           "stage_group", "reheater", "pipe", "extraction", "generator",
                           "heater", "pump", "feedwater", "limits"))
    problems.raise_if_any()

    throttle = ThrottleDesign(t_node, t_p, t_T, t_m, t_pmax or t_p)
    valve = ThrottleValve("throttle valve", t_node, v_to)
    generator = Generator(rating, mech, fixed, load_loss)
    graph = _build_graph(file, design_p, throttle, valve, groups, paths, extractions,
                         exhaust_nodes, heaters, pumps, feedwater, problems)
    problems.raise_if_any()
    model = Model(name, description or "", file, text, hashlib.sha256(text.encode()).hexdigest(),
                  graph, list(nx.topological_sort(graph)), design_p, throttle, valve, groups,
                  paths, extractions, list(exhaust_nodes), generator, heaters, pumps, feedwater,
                  stated_output=stated_output, limits=limits if isinstance(limits, dict) else {})
    _calibrate(model, v_wo, steam)
    return model


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
    edges += [(c, f"{'reheater' if c.is_reheater else 'pipe'} '{c.name}'", c.inlet, c.outlet)
              for c in paths]
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
    if problems:
        return g
    if not nx.is_directed_acyclic_graph(g):
        cycle = nx.find_cycle(g)
        comps = [g.edges[e]["component"].name for e in cycle]
        raise TopologyError(f"the components {', '.join(comps)} form a loop; steam must flow "
                            f"from the throttle to the exhaust", file=file, table="stage_group")
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
                m = c.design_flow if c in given else rest / len(free)
                model.design_group_flow[c.name] = m
                h_out = _calibrate_component(c, m, p[c.inlet], h[n], p[c.outlet], steam,
                                             wide_open_fraction, model)
                m_in[c.outlet] += m
                e_in[c.outlet] += m * h_out
    except PartloadError as exc:
        if isinstance(exc, InputError):
            raise
        raise InputError(f"the design heat balance cannot be evaluated: {exc}", file=file) \
            from None
    model.design_enthalpy = h
    if model.feedwater is not None and model.heaters:
        _calibrate_heaters(model, steam)


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
        y_out = (h_vap - h_elep) / (h_vap - h_liq) if h_elep < h_vap else 0.0
        y_in = (1.0 - steam.x_ph(p_in, h_in)) if c.alpha else 0.0
        factor = 1.0 - c.alpha * 0.5 * (y_in + y_out)
        if factor <= 0.05:
            raise InputError("Baumann's factor leaves no efficiency; check moisture_factor",
                             file=model.file, table=f"stage_group '{c.name}'",
                             key="moisture_factor")
        c.eta_dry_design = c.eta_design / factor
        return c.expand(steam, p_in, h_in, p_out)[1]
    if isinstance(c, ThrottleValve):
        dp = p_in - p_out
        c.m_design, c.v_design = m, v_in
        c.dp_wide_open = dp if wide_open_fraction is None else wide_open_fraction * p_in
        if c.dp_wide_open > dp * (1 + 1e-12):
            raise InputError(
                f"the wide-open valve drop ({c.dp_wide_open / 1e5:.4g} bar) exceeds the design "
                f"drop from the node pressures ({dp / 1e5:.4g} bar)", file=model.file,
                table="throttle_valve", key="wide_open_drop")
        return h_in
    c.dp_design, c.m_design, c.v_design = p_in - p_out, m, v_in
    return c.outlet_enthalpy(steam, p_out, h_in)


def _calibrate_heaters(model: Model, steam: SteamTables) -> None:
    """Evaluate the feedwater train at design; fix closure factors, duties and UA."""
    from .cycle import design_feedwater_states

    states = design_feedwater_states(model, steam)
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
        if not 0.8 <= htr.closure <= 1.25:
            raise InputError(
                f"design heat balance of heater {name!r} does not close: feedwater gains "
                f"{duty / 1e6:.4g} MW while the bleed and drains give up {release / 1e6:.4g} MW; "
                f"check the design flow of extraction {htr.extraction!r}", file=model.file,
                table=table, key="extraction")
        if htr.kind == "closed":
            htr.cp = duty / st["m_water"] / max(st["T_out"] - st["T_in"], 1e-6)
            if htr.ttd_method == "ua":
                try:
                    htr.ua = design_ua(st["T_sat"], st["T_in"], st["T_out"], st["m_water"],
                                       htr.cp)
                except ValueError:
                    raise InputError("ttd_method = 'ua' needs a positive TTD", file=model.file,
                                     table=table, key="ttd_method") from None
