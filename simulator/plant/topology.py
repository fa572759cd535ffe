"""The turbine graph: nodes with design pressures, steam-path components on the
edges, and the checks of its shape (every node reached, branches merging,
exhausts, heater drains without loops).  Problems name the file, table and key."""

from __future__ import annotations

import networkx as nx

from ..errors import InputError, TopologyError
from ..inputs.reading import Problems
from ..units import Where

__all__ = ["build_graph"]


def build_graph(file, design_p, throttle, valve, steam_path, extractions, exhaust_nodes,
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

    edges = [(c, c.where, c.inlet, c.outlet) for c in steam_path]
    names = set()
    for comp, table, a, b in edges:
        if comp.name in names:
            problems.add(InputError(f"name {comp.name!r} is used twice", file=file,
                                    table=table, key="name"))
        names.add(comp.name)
        ok = need_node(a, table, comp.inlet_key) & need_node(b, table, comp.outlet_key)
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
        if design_p[b] > design_p[a] or (design_p[b] == design_p[a] and not comp.keeps_pressure):
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
        drops = [c for c in outs if not c.sets_flow]
        if drops and len(outs) > 1:
            problems.add(TopologyError(
                f"node {n!r} feeds {drops[0].name!r} and other components; a valve, reheater "
                f"or pipe must take the whole flow of its inlet node", file=file,
                table="nodes", key=n))
    if g.out_degree(throttle.node) != 1 or valve.outlet not in g.successors(throttle.node):
        problems.add(TopologyError(f"the {valve.title} must be the only component leaving "
                                   "the throttle node", file=file, table=valve.table,
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
        for name in h.extractions:
            if name not in extractions:
                problems.add(TopologyError(
                    f"extraction {name!r} does not exist (extractions: "
                    f"{', '.join(sorted(extractions)) or 'none'})", file=file, table=table,
                    key="extraction"))
                continue
            e = extractions[name]
            if e.heater:
                problems.add(InputError(f"extraction {e.name!r} already feeds heater "
                                        f"{e.heater!r}", file=file, table=table,
                                        key="extraction"))
            e.heater = h.name
            if not e.control:
                e.control = "heater"
        if h.paired and all(n in extractions for n in h.extractions):
            ps = [design_p.get(extractions[n].node) for n in h.extractions]
            if None not in ps and max(ps) > 1.02 * min(ps):
                problems.add(InputError(
                    f"paired bleeds are taken at matching nodes of parallel branches, at one "
                    f"pressure; these nodes' design pressures differ by more than 2 % "
                    f"({', '.join(f'{p / 1e5:.4g}' for p in ps)} bar)", file=file,
                    table=table, key="extraction"))
            else:
                total = sum(extractions[n].design_flow for n in h.extractions)
                h.shares = tuple(extractions[n].design_flow / total for n in h.extractions)
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
            elif heaters[target].heater_type == "closed" and h.heater_type == "closed":
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
            if h.drain_to == "forward" and h.heater_type != "closed":
                problems.add(InputError("only a closed heater can pump its drains forward",
                                        file=file, table=f"heater '{h.name}'", key="drain_to"))
    for e in extractions.values():
        if not e.control:
            e.control = "fraction"
        if e.control == "heater" and not e.heater:
            problems.add(InputError("control = 'heater' but no heater takes this extraction",
                                    file=file, table=f"extraction '{e.name}'", key="control"))
    return g
