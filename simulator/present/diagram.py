"""Heat-balance diagram of a solved point, as plain SVG text.

The layout is taken from the model's graph, nothing about the shape of a unit
is built in:

* **Steam path** (top).  Every node gets a column, its longest distance in
  components from the throttle (a topological order), so a component always
  runs left to right.  The first branch leaving a node stays on its row; the
  other branches (a second LP casing, a double flow) get rows of their own
  below, side by side with the first, and rejoin at the node where they merge.
  Components sit on the line between their nodes: stage groups as trapezoids
  widening with the expansion, valves (throttle valve, control valves) as
  bow-ties, reheaters and pipes as rectangles, a governing stage as a shaded
  trapezoid with the table of its control valves under it.
* **Node labels**: pressure, temperature and enthalpy (and the moisture when
  wet) above each node, its name under it; the flow (and the power of a stage
  group) under each component.
* **Bleed lines** run down from their node, each on a lane of its own, to
  their heater; an extraction without a heater (process steam) ends in an
  arrow.  A bleed line carries the steam state of its node; the line is
  labelled with its name and flow, the heater with its shell pressure.
* **Heater train** (bottom) in water-flow order from the condenser (right) to
  the boiler (left), pumps included; every feedwater stream between two items
  is labelled with flow, pressure, temperature and enthalpy.  The feedwater
  pressure is the water side's (pumps set it, a deaerator resets it to its
  shell pressure, heaters pass it).  Drains are dashed lines under the train,
  each on a run of its own, labelled with flow and temperature where the label
  crosses no other drain line (:func:`text_width` estimates a label's width).
* **Box** (top left): generator output, shaft power, heat added, the heat rate
  with its kind stated, the governing (valve and pressure mode) and the back
  pressure.

Out-of-service heaters and closed extractions are drawn grey and dashed.
The difference view (``design=`` a design point) adds to every number its
difference from design, in brackets, green when it fell and red when it rose
(a colour, not a judgement).  Units are the display units of
:func:`simulator.units.to_display_unit` in the system asked (``units=``):
metric (bar, degC, kJ/kg, kg/s, MW, kJ/kWh, the condenser and back pressure in
kPa; the default) or US customary (psia, degF, Btu/lb, klb/h, MW, Btu/kWh, the
condenser and back pressure in inHg).
"""

from __future__ import annotations

import hashlib
import math
import textwrap
from dataclasses import dataclass
from xml.sax.saxutils import escape

import networkx as nx

from ..units import to_display_unit

__all__ = ["diagram_svg", "layout"]

COLUMN = 130.0  # [px] between node columns
ROW = 120.0  # [px] between steam-path rows
LANE = 16.0  # [px] between bleed-line lanes
LEFT = 190.0  # [px] left of the throttle node: the boiler and the box
TOP = 200.0  # [px] to the first steam-path row
ITEM = 132.0  # [px] between items of the heater train
LANE_DRAIN = 12.0  # [px] between the horizontal runs of two drains
DRAIN_FONT = 7.0  # [px] font size of a drain's label
FONT = "font-family:Helvetica,Arial,sans-serif"
_UP, _DOWN = "#b2182b", "#1a7837"  # rose, fell (difference view)


@dataclass
class Layout:
    """Positions of the steam path: ``column`` and ``row`` of each node [-]."""

    column: dict
    row: dict
    n_columns: int
    n_rows: int
    width: float = COLUMN  # [px] between columns

    def xy(self, node) -> tuple[float, float]:
        """Position of a node [px]."""
        return LEFT + self.column[node] * self.width, TOP + self.row[node] * ROW


def layout(graph: nx.DiGraph, throttle: str, width: float = COLUMN) -> Layout:
    """Columns and rows of the nodes of a steam-path graph.

    Parameters
    ----------
    graph : the model's graph, nodes joined by steam-path components [-]
    throttle : the throttle node [-]
    width : distance between columns [px]

    Returns
    -------
    Layout
        Column: longest path from the throttle, in components.  Row: the first
        successor of a node (in the model's reading order) keeps its row,
        further successors open new rows; a node where branches meet takes the
        lowest row of those arriving.
    """
    order = list(nx.topological_sort(graph))
    column = {n: 0 for n in order}
    for n in order:
        for m in graph.successors(n):
            column[m] = max(column[m], column[n] + 1)
    proposed: dict = {throttle: [0]}
    row: dict = {}
    next_row = 1
    for n in order:  # every predecessor of n has proposed a row before n is placed
        row[n] = min(proposed.get(n, [0]))
        for k, m in enumerate(graph.successors(n)):
            if k == 0:
                proposed.setdefault(m, []).append(row[n])
            else:
                proposed.setdefault(m, []).append(next_row)
                next_row += 1
    used = sorted(set(row.values()))
    squeeze = {r: k for k, r in enumerate(used)}
    row = {n: squeeze[r] for n, r in row.items()}
    return Layout(column, row, max(column.values()) + 1, len(used), width)


_SYMBOL = {"degC": "\u00b0C", "degF": "\u00b0F"}  # temperatures drawn with the degree sign


class _Fmt:
    """Numbers of a label, with the difference from design in the difference view,
    in the display units of the system ``units`` (``"metric"`` or ``"us"``)."""

    def __init__(self, design_on: bool, units: str = "metric"):
        self.design_on = design_on
        self.units = units

    def disp(self, value: float | None, si_unit: str, quantity: str | None = None
             ) -> float | None:
        """``value`` [si_unit] in its display unit (``None`` stays ``None``)."""
        if value is None:
            return None
        return float(to_display_unit(value, si_unit, None, self.units, quantity)[0])

    def unit(self, si_unit: str, quantity: str | None = None) -> str:
        """The display unit of ``si_unit``, written with a leading space."""
        u = to_display_unit(0.0, si_unit, None, self.units, quantity)[1]
        return " " + _SYMBOL.get(u, u)

    def __call__(self, value: float, digits: int, design: float | None = None) -> list:
        """``[(text, colour)]`` pieces of one number [display units]."""
        if value is None or not math.isfinite(value):
            return [("-", None)]
        out = [(f"{value:.{digits}f}", None)]
        if self.design_on and design is not None and math.isfinite(design):
            d = value - design
            if round(abs(d), digits) == 0.0:
                out.append((" (0)", "#666666"))
            else:
                out.append((f" ({d:+.{digits}f})", _UP if d > 0 else _DOWN))
        return out


class _Svg:
    def __init__(self, ident: str = "arrow"):
        self.parts: list[str] = []
        self.ident = ident  # id of the arrow marker, unique on a page of several diagrams

    def add(self, text: str) -> None:
        self.parts.append(text)

    def text(self, x, y, pieces, size=10, anchor="start", colour="#000000", weight=None,
             italic=False, cls=None) -> None:
        if isinstance(pieces, str):
            pieces = [(pieces, None)]
        spans = "".join(escape(t) if c is None else
                        f'<tspan fill="{c}">{escape(t)}</tspan>' for t, c in pieces)
        style = f"{FONT};font-size:{size}px"
        if weight:
            style += f";font-weight:{weight}"
        if italic:
            style += ";font-style:italic"
        c = f' class="{cls}"' if cls else ""
        self.add(f'<text x="{x:.1f}" y="{y:.1f}" text-anchor="{anchor}" fill="{colour}" '
                 f'style="{style}"{c}>{spans}</text>')

    def line(self, points, colour="#000000", width=1.5, dash=None, arrow=False,
             cls=None) -> None:
        pts = " ".join(f"{x:.1f},{y:.1f}" for x, y in points)
        d = f' stroke-dasharray="{dash}"' if dash else ""
        a = f' marker-end="url(#{self.ident})"' if arrow else ""
        c = f' class="{cls}"' if cls else ""
        self.add(f'<polyline points="{pts}" fill="none" stroke="{colour}" '
                 f'stroke-width="{width}"{d}{a}{c}/>')

    def poly(self, points, fill, colour="#000000", dash=None, title=None) -> None:
        pts = " ".join(f"{x:.1f},{y:.1f}" for x, y in points)
        d = f' stroke-dasharray="{dash}"' if dash else ""
        t = f"<title>{escape(title)}</title>" if title else ""
        self.add(f'<polygon points="{pts}" fill="{fill}" stroke="{colour}" '
                 f'stroke-width="1.2"{d}>{t}</polygon>')

    def rect(self, x, y, w, h, fill="#ffffff", colour="#000000", dash=None, rx=0,
             title=None) -> None:
        d = f' stroke-dasharray="{dash}"' if dash else ""
        t = f"<title>{escape(title)}</title>" if title else ""
        self.add(f'<rect x="{x:.1f}" y="{y:.1f}" width="{w:.1f}" height="{h:.1f}" rx="{rx}" '
                 f'fill="{fill}" stroke="{colour}" stroke-width="1.2"{d}>{t}</rect>')


def _kind(comp) -> str:
    return type(comp).__name__


def _component_shape(svg: _Svg, comp, x: float, y: float, grey: bool) -> None:
    kind = _kind(comp)
    colour = "#999999" if grey else "#000000"
    title = f"{comp.name} ({kind})"
    if kind == "StageGroup":
        svg.poly([(x - 20, y - 9), (x + 20, y - 17), (x + 20, y + 17), (x - 20, y + 9)],
                 "#dce9f5", colour, title=title)
    elif kind == "GoverningStage":
        svg.poly([(x - 20, y - 11), (x + 20, y - 17), (x + 20, y + 17), (x - 20, y + 11)],
                 "#9ecae1", colour, title=title)
    elif kind in ("ThrottleValve", "ControlValve"):
        svg.poly([(x - 12, y - 9), (x + 12, y + 9), (x + 12, y - 9), (x - 12, y + 9)],
                 "#ffffff", colour, title=title)
    elif kind == "Reheater":
        svg.rect(x - 20, y - 11, 40, 22, "#fdd0a2", colour, title=title)
    else:
        svg.rect(x - 16, y - 7, 32, 14, "#eeeeee", colour, title=title)


def _lookup(table, design_table, fmt):
    """``(value, rows, design rows)``: ``value(name, column, unit, des=False)`` is the
    named row's value of a result table (of its design point's with ``des``) in
    display units, ``None`` where there is none; ``rows`` and ``design rows`` map
    row names to indices."""
    rows = {n: i for i, n in enumerate(table.names)}
    drows = {n: i for i, n in enumerate(design_table.names)} if design_table is not None else {}

    def value(name, col, unit, des=False):
        t, idx = (design_table, drows) if des else (table, rows)
        if t is None or name not in idx:
            return None
        return fmt.disp(t.columns[col][idx[name]], unit)

    return value, rows, drows


def diagram_svg(model, result, *, case_name: str = "", design=None, cautions=(),
                title: str | None = None, units: str = "metric") -> str:
    """The heat-balance diagram of a solved point as SVG text.

    Parameters
    ----------
    model : the calibrated model the point was solved with [-]
    result : the solved point (:class:`simulator.solve.result.PointResult`) [-]
    case_name : shown in the title [-]
    design : a solved design point of the same model; when given, every number
        also shows its difference from design (the difference view) [-]
    cautions : operating-limit cautions of the point; nodes they name are
        ringed in red and their codes listed in the box [-]
    title : replaces the generated title [-]
    units : display units, ``"metric"`` (default) or ``"us"`` [-]

    Returns
    -------
    str
        A standalone SVG document (``<svg xmlns=...>``) whose size follows the
        model; every component of the model is named in it.
    """
    fmt = _Fmt(design is not None, units)
    lay = layout(model.graph, model.throttle.node, COLUMN if design is None else 1.3 * COLUMN)
    svg = _Svg("arrow-" + hashlib.sha256(repr((model.name, case_name, design is not None,
                                                result.totals.get("generator_output")))
                                          .encode()).hexdigest()[:10])
    nodes = result.tables["nodes"]
    dnodes = design.tables["nodes"] if design is not None else None
    node_val, ni, dni = _lookup(nodes, dnodes, fmt)
    path_val, _pi, _dpi = _lookup(result.tables["steam_path"], design.tables["steam_path"]
                                  if design is not None else None, fmt)

    caution_where = {getattr(c, "where", None) or (c.get("where") if isinstance(c, dict)
                                                    else None) for c in cautions}

    # --- steam path -----------------------------------------------------------------
    for comp in model.steam_path:
        a, b = comp.inlet, comp.outlet
        (xa, ya), (xb, yb) = lay.xy(a), lay.xy(b)
        if ya == yb:
            pts = [(xa, ya), (xb, yb)]
            cx, cy = (xa + xb) / 2, ya
        elif yb > ya:  # a branch leaving: down first, then across
            pts = [(xa, ya), (xa + 22, ya), (xa + 22, yb), (xb, yb)]
            cx, cy = (xa + 22 + xb) / 2, yb
        else:  # a branch meeting: across, then up
            pts = [(xa, ya), (xb - 22, ya), (xb - 22, yb), (xb, yb)]
            cx, cy = (xa + xb - 22) / 2, ya
        flow = path_val(comp.name, "flow", "kg/s")
        grey = flow is not None and abs(flow) < 1e-9
        svg.line(pts, "#999999" if grey else "#1f4e79", 2.2)
        _component_shape(svg, comp, cx, cy, grey)
        svg.text(cx, cy + 30, comp.name, 10, "middle", weight="bold", cls="component")
        svg.text(cx, cy + 42, fmt(flow, 2, path_val(comp.name, "flow", "kg/s", True))
                 + [(fmt.unit("kg/s"), None)], 9, "middle")
        power = path_val(comp.name, "power", "W")
        heat = path_val(comp.name, "heat", "W")
        if power is not None and abs(power) > 1e-9:
            svg.text(cx, cy + 53, fmt(power, 2, path_val(comp.name, "power", "W", True))
                     + [(fmt.unit("W"), None)], 9, "middle", colour="#444444")
        elif heat is not None and abs(heat) > 1e-9:
            svg.text(cx, cy + 53, [("+", None)] + fmt(heat, 2, path_val(comp.name, "heat", "W",
                                                                       True))
                     + [(fmt.unit("W") + " heat", None)], 9, "middle", colour="#8c510a")
        if _kind(comp) == "GoverningStage":
            _valve_table(svg, result, design, fmt, cx, cy + 66)

    for n in model.graph.nodes:
        x, y = lay.xy(n)
        ring = n in caution_where
        svg.add(f'<circle cx="{x:.1f}" cy="{y:.1f}" r="3.5" fill="#1f4e79"/>')
        if ring:
            svg.add(f'<circle cx="{x:.1f}" cy="{y:.1f}" r="9" fill="none" stroke="#d62728" '
                    f'stroke-width="1.5"><title>caution at {escape(n)}</title></circle>')
        lines = [
            fmt(node_val(n, "pressure", "Pa"), 3 if node_val(n, "pressure", "Pa") < 1 else 2,
                node_val(n, "pressure", "Pa", True)) + [(fmt.unit("Pa"), None)],
            fmt(node_val(n, "temperature", "K"), 1, node_val(n, "temperature", "K", True))
            + [(fmt.unit("K"), None)],
            fmt(node_val(n, "enthalpy", "J/kg"), 1, node_val(n, "enthalpy", "J/kg", True))
            + [(fmt.unit("J/kg"), None)],
        ]
        q = nodes.columns["quality"][ni[n]] if n in ni else 1.0
        if math.isfinite(q) and q < 1.0 - 1e-9:
            dq = dnodes.columns["quality"][dni[n]] if dnodes is not None and n in dni else None
            lines.append(fmt(100 * (1 - q), 2, None if dq is None else 100 * (1 - dq))
                         + [(" % moist", None)])
        y0 = y - 12 - 11 * (len(lines) - 1)
        for k, pieces in enumerate(lines):
            svg.text(x, y0 + 11 * k, pieces, 9, "middle")
        svg.text(x, y + 15, n, 8, "middle", colour="#555555", italic=True, cls="node")

    # --- heater train ------------------------------------------------------------------
    bottom_steam = TOP + (lay.n_rows - 1) * ROW + 70
    ext = list(model.extractions.values())
    lanes_top = bottom_steam + 10
    train = list(model.feedwater.order) if model.feedwater is not None else []
    y_train = lanes_top + LANE * (len(ext) + 1) + 40
    exhaust = model.feedwater.condenser if model.feedwater is not None else \
        model.exhaust_nodes[0]
    x_exhaust = lay.xy(exhaust)[0]
    right = max(x_exhaust, LEFT + (len(train) + 1) * ITEM)
    item_x = {name: right - (k + 1) * ITEM for k, name in enumerate(train)}
    x_boiler = LEFT - 120
    item_x_min = min(item_x.values()) if item_x else LEFT
    if item_x_min < x_boiler + 90:
        shift = x_boiler + 90 - item_x_min
        item_x = {k: v + shift for k, v in item_x.items()}
        right += shift
    x_cond = right
    states = {h.name: h for h in result.heaters}
    dstates = {h.name: h for h in design.heaters} if design is not None else {}
    ext_rows = result.tables.get("extractions")
    ei = {n: i for i, n in enumerate(ext_rows.names)} if ext_rows is not None else {}
    dext = design.tables.get("extractions") if design is not None else None
    dei = {n: i for i, n in enumerate(dext.names)} if dext is not None else {}

    # bleed lines
    per_node: dict = {}
    for k, e in enumerate(ext):
        nx0, ny0 = lay.xy(e.node)
        off = per_node.get(e.node, 0)
        per_node[e.node] = off + 1
        x = nx0 + 8 + 12 * off
        flow = fmt.disp(ext_rows.columns["flow"][ei[e.name]], "kg/s") if e.name in ei else None
        dflow = fmt.disp(dext.columns["flow"][dei[e.name]], "kg/s") if e.name in dei else None
        grey = flow is not None and abs(flow) < 1e-9
        colour = "#999999" if grey else "#6a3d9a"
        dash = "5,3" if grey else None
        label = [(e.name + " ", None)] + fmt(flow, 2, dflow) + [(fmt.unit("kg/s"), None)]
        if e.heater and e.heater in item_x:
            lane = lanes_top + LANE * (k + 1)
            xh = item_x[e.heater]
            svg.line([(x, ny0), (x, lane), (xh, lane), (xh, y_train - 20)], colour, 1.2, dash,
                     arrow=True)
            svg.text(x + 3, lane - 3, label, 8, "start", colour=colour, cls="bleed")
        else:
            yy = ny0 + 78
            svg.line([(x, ny0), (x, yy)], colour, 1.2, dash, arrow=True)
            svg.text(x + 3, yy + 10, label + [(" to process", None)], 8, "start",
                     colour=colour, cls="bleed")

    n_drains = 0
    if train:
        svg.line([(x_exhaust, TOP + 8), (x_exhaust, y_train - 40), (x_cond, y_train - 40),
                  (x_cond, y_train - 18)], "#1f4e79", 1.0, "2,3", arrow=True)
        n_drains = _train(svg, model, result, design, fmt, train, item_x, states, dstates,
                          x_cond, y_train, x_boiler)
    # boiler
    xt, yt = lay.xy(model.throttle.node)
    svg.rect(x_boiler - 40, yt - 30, 80, y_train - yt + 60, "#fff5eb", "#8c510a", rx=4,
             title="boiler")
    svg.text(x_boiler, yt + 40, "boiler", 11, "middle", weight="bold")
    svg.line([(x_boiler + 40, yt), (xt, yt)], "#1f4e79", 2.2, arrow=True)
    if train:
        svg.line([(min(item_x.values()) - 30, y_train), (x_boiler + 40, y_train)], "#2171b5",
                 2.0, arrow=True)

    # --- the box -------------------------------------------------------------------------
    _box(svg, model, result, design, fmt, cautions, case_name)

    width = max(right, LEFT + (lay.n_columns - 1) * lay.width) + 150
    # the drains' runs and, under the last, its label
    height = y_train + 100 + LANE_DRAIN * (n_drains + 1 if n_drains else 0)
    head = title or (f"Heat balance: {model.name}" + (f", case {case_name}" if case_name
                                                     else "")
                     + (" (difference from design in brackets)" if design is not None
                        else ""))
    top = [
        f'<svg xmlns="http://www.w3.org/2000/svg" width="{width:.0f}" height="{height:.0f}" '
        f'viewBox="0 0 {width:.0f} {height:.0f}" class="heat-balance">',
        f"<title>{escape(head)}</title>",
        f'<defs><marker id="{svg.ident}" viewBox="0 0 10 10" refX="9" refY="5" '
        'markerWidth="6" '
        'markerHeight="6" orient="auto-start-reverse"><path d="M0,0 L10,5 L0,10 z" '
        'fill="#555555"/></marker></defs>',
        f'<rect x="0" y="0" width="{width:.0f}" height="{height:.0f}" fill="#ffffff"/>',
    ]
    legend = ("Nodes: pressure, temperature, enthalpy (moisture when wet); components: flow, "
              "power; bleed lines carry their node's steam; feedwater: flow, pressure, "
              "temperature, enthalpy; dashed: drains, grey: out of service or closed. "
              "Engineering estimate; the manufacturer's limits govern.")
    for k, text in enumerate(textwrap.wrap(legend, int(width / 5.2))):
        svg.text(10, height - 26 + 11 * k, text, 9, colour="#555555")
    svg.text(10, 20, head, 14, weight="bold")
    return "\n".join(top + svg.parts + ["</svg>"]) + "\n"


def _valve_table(svg: _Svg, result, design, fmt, x: float, y: float) -> None:
    """The control valves of a governing stage: opening and flow."""
    t = result.tables.get("governing_valves")
    if t is None:
        return
    d = design.tables.get("governing_valves") if design is not None else None
    svg.text(x, y, "valve  opening  flow", 8, "middle", colour="#444444")
    for k, name in enumerate(t.names):
        o = 100 * float(t.columns["opening"][k])
        m = fmt.disp(float(t.columns["flow"][k]), "kg/s")
        do = 100 * float(d.columns["opening"][k]) if d is not None else None
        dm = fmt.disp(float(d.columns["flow"][k]), "kg/s") if d is not None else None
        svg.text(x, y + 11 * (k + 1), [(f"{name}  ", None)] + fmt(o, 0, do) + [(" %  ", None)]
                 + fmt(m, 1, dm) + [(fmt.unit("kg/s"), None)], 8, "middle", cls="valve")


def _water_pressures(model, result, train, states) -> dict:
    """Feedwater pressure leaving each item of the train [Pa], as the water side
    takes it: a pump sets it, a deaerator resets it to its shell pressure, a
    closed heater passes it."""
    nodes = result.tables["nodes"]
    p = float(nodes.columns["pressure"][nodes.names.index(model.feedwater.condenser)])
    m_fw = result.totals.get("throttle_flow", 0.0)
    out = {}
    for name in train:
        if name in model.pumps:
            pump = model.pumps[name]
            p = (result.totals["throttle_pressure"] + model.feedwater.boiler.drop(m_fw)
                 if pump.discharge == "boiler" else pump.discharge_pressure)
        else:
            h = states.get(name)
            if h is not None and h.heater_type == "deaerator" and h.in_service:
                p = h.shell_pressure
        out[name] = p
    return out


def _train(svg, model, result, design, fmt, train, item_x, states, dstates, x_cond, y,
           x_boiler) -> int:
    """Condenser, heaters and pumps in water-flow order, streams labelled; returns the
    number of drains drawn [-]."""
    p_out = _water_pressures(model, result, train, states)
    dp_out = (_water_pressures(model, design, train, dstates) if design is not None else {})
    # condenser
    svg.rect(x_cond - 30, y - 18, 60, 36, "#e5f5f9", "#2171b5", rx=4, title="condenser")
    svg.text(x_cond, y + 4, "condenser", 9, "middle", weight="bold")
    nodes = result.tables["nodes"]
    i_c = nodes.names.index(model.feedwater.condenser)
    svg.text(x_cond + 34, y + 30, "condenser pressure", 8, colour="#555555")
    pc = fmt.disp(nodes.columns["pressure"][i_c], "Pa", "back_pressure")  # kPa or inHg
    dpc = None
    if design is not None:
        dn = design.tables["nodes"]
        dpc = fmt.disp(dn.columns["pressure"][dn.names.index(model.feedwater.condenser)],
                       "Pa", "back_pressure")
    svg.text(x_cond + 34, y + 41, fmt(pc, 2, dpc) + [(fmt.unit("Pa", "back_pressure"), None)],
             8)
    prev_x = x_cond - 30
    drain_lane = y + 72
    drains: list = []
    forward: list = []  # (drain number, train position, heater x, run y) of pumped drains
    spans: dict = {}  # x extent of the label of the stream leaving each train position
    for k, name in enumerate(train):
        x = item_x[name]
        h = states.get(name)
        dh = dstates.get(name)
        right_edge = x + (16 if name in model.pumps else 30)
        svg.line([(prev_x, y), (right_edge, y)], "#2171b5", 2.0, arrow=True)
        # the stream entering this item: flow, p, T, h from the previous item
        if k > 0:
            spans[k - 1] = _stream_label(svg, fmt, result, design, train, k - 1, p_out,
                                         dp_out, (prev_x + right_edge) / 2, y)
        grey = h is not None and not h.in_service
        colour = "#999999" if grey else "#000000"
        if name in model.pumps:
            svg.add(f'<circle cx="{x:.1f}" cy="{y:.1f}" r="14" fill="#ffffff" stroke="#000000" '
                    f'stroke-width="1.2"><title>{escape(name)} (pump)</title></circle>')
            svg.poly([(x - 7, y + 7), (x - 7, y - 7), (x + 8, y)], "#bbbbbb")
            svg.text(x, y - 20, name, 9, "middle", weight="bold", cls="component")
            prev_x = x - 16
            continue
        heater = model.heaters[name]
        deaer = heater.heater_type == "deaerator"
        svg.rect(x - 30, y - 18, 60, 36, "#f0f0f0" if grey else
                 ("#fee6ce" if deaer else "#ffffff"), colour, "4,3" if grey else None,
                 rx=14 if deaer else 2, title=f"{name} ({heater.heater_type} heater)")
        svg.text(x, y + 4, name, 9, "middle", weight="bold", colour=colour, cls="component")
        if grey:
            svg.text(x, y - 24, "out of service", 8, "middle", colour="#999999")
        elif h is not None:
            svg.text(x + 4, y - 24, [("shell ", None)]
                     + fmt(fmt.disp(h.shell_pressure, "Pa"), 3 if fmt.units == "metric" else 2,
                           fmt.disp(dh.shell_pressure, "Pa") if dh and dh.in_service else None)
                     + [(fmt.unit("Pa"), None)], 8, "start", colour="#444444")
            if not deaer and h.drain_flow > 0:
                target = heater.drain_to
                if target in model.heaters and target in states and \
                        not states[target].in_service:
                    t2 = model.heaters[target]
                    target = t2.drain_to_when_out or t2.drain_to
                if target == "condenser":
                    xa = x_cond + 10
                elif target == "forward":  # into the stream leaving the heater: placed
                    xa = None              # clear of its label once that is drawn
                    forward.append((len(drains), k, x, drain_lane))
                else:
                    xa = item_x.get(target, x_cond) + 10
                if xa is not None:
                    svg.line([(x - 10, y + 18), (x - 10, drain_lane), (xa, drain_lane),
                              (xa, y + 18)], "#2171b5", 1.0, "4,3", arrow=True, cls="drain")
                drains.append((x - 10, xa, drain_lane, [("drain ", None)]
                               + fmt(fmt.disp(h.drain_flow, "kg/s"), 2,
                                     fmt.disp(dh.drain_flow, "kg/s") if dh else None)
                               + [(fmt.unit("kg/s") + ", ", None)]
                               + fmt(fmt.disp(h.T_drain, "K"), 1,
                                     fmt.disp(dh.T_drain, "K") if dh and dh.in_service
                                     else None)
                               + [(fmt.unit("K"), None)]))
                drain_lane += LANE_DRAIN
        prev_x = x - 30
    # final feedwater to the boiler
    spans[len(train) - 1] = _stream_label(svg, fmt, result, design, train, len(train) - 1,
                                          p_out, dp_out, (prev_x + x_boiler + 40) / 2, y)
    for d, k, x, lane in forward:  # a pumped drain rises between its heater and the label
        left, right = spans.get(k, (x - 40, x - 40))
        xa = x - 36 if x - 36 >= right + 3 else left - 4
        svg.line([(x - 10, y + 18), (x - 10, lane), (xa, lane), (xa, y + 1.5)], "#2171b5",
                 1.0, "4,3", arrow=True, cls="drain")
        drains[d] = (drains[d][0], xa) + drains[d][2:]
    for (x0, y0), pieces in zip(_place_drain_labels(drains, 10.0, x_cond + 140.0), drains):
        svg.text(x0, y0, pieces[3], DRAIN_FONT, "start", colour="#2171b5", cls="drain")
    return len(drains)


def text_width(pieces, size: float) -> float:
    """Estimated width of a line of text [px]: 0.6 em a character, more than the
    advance of Helvetica's and Arial's digits (0.556 em, from memory) and than the
    drain labels of the demo models drawn by Chromium in DejaVu Sans (at most
    0.51 em a character, measured), so an upper bound for labels of digits, units
    and spaces.

    Parameters
    ----------
    pieces : the text, or its ``[(text, colour)]`` pieces [-]
    size : font size [px]
    """
    text = pieces if isinstance(pieces, str) else "".join(t for t, _c in pieces)
    return 0.6 * size * len(text)


def _place_drain_labels(drains, x_min: float, x_max: float) -> list[tuple[float, float]]:
    """Where each drain's label starts: ``[(x, baseline y)]`` [px].

    A label sits under the horizontal run of its own drain line, at the height of
    no other label's (the runs are ``LANE_DRAIN`` apart and a label is shorter),
    so no two labels overlap.  Along that band the only lines are the vertical
    legs of the drains with lower runs; the label is put where it crosses none of
    them (and no other label), as near as it can to the right of its own drain's
    first leg, else to the left of it.

    Parameters
    ----------
    drains : ``(x of the leg leaving the heater, x of the leg arriving, y of the
        run, label pieces)`` of every drain [px, px, px, -]
    x_min, x_max : the room the labels have, left and right [px]
    """
    placed: list[tuple[float, float, float, float]] = []
    out = []
    for x_from, _x_to, lane, pieces in drains:
        w = text_width(pieces, DRAIN_FONT)
        base = lane + DRAIN_FONT + 2.0
        top, bottom = base - DRAIN_FONT, base + 0.3 * DRAIN_FONT
        legs = sorted(x for a, b, run, _p in drains if run > lane for x in (a, b))
        gap = 3.0  # [px] kept clear round a leg
        taken = [(x - gap, x + gap) for x in legs] + [
            (x0, x1) for x0, y0, x1, y1 in placed if y0 < bottom and top < y1]
        want = x_from + 4.0

        def free(x0, w=w, taken=taken):
            return x_min <= x0 and x0 + w <= x_max and all(
                x0 + w <= a or b <= x0 for a, b in taken)

        # candidate starts: the wanted one, and just after or just before each
        # obstacle; the free one nearest the wanted start, the right side first
        starts = [want] + [b for _a, b in taken] + [a - w for a, _b in taken]
        ok = [x0 for x0 in starts if free(x0)]
        x0 = min(ok, key=lambda v: (abs(v - want), v < want)) if ok else want
        placed.append((x0, top, x0 + w, bottom))
        out.append((x0, base))
    return out


def _stream_label(svg, fmt, result, design, train, k, p_out, dp_out, x, y):
    """Flow, pressure, temperature, enthalpy of the feedwater leaving item ``k`` of the
    train: a heater's outlet, or after a pump the inlet of the next heater (the final
    feedwater when none follows), centred at ``x``; returns its extent ``(left,
    right)`` [px] (:func:`text_width`)."""
    from ..steam.if97 import get_backend

    steam = get_backend(result.backend)

    def state(res, p):
        if res is None:
            return None
        hs = {h.name: h for h in res.heaters}
        if train[k] in hs:
            h = hs[train[k]]
            return h.m_water, h.h_out
        nxt = next((hs[n] for n in train[k + 1:] if n in hs), None)
        if nxt is not None:
            return nxt.m_water, nxt.h_in
        return (res.totals["throttle_flow"],
                steam.h_pT(p, res.totals["final_feedwater_temperature"]))

    p = p_out[train[k]]
    dp = dp_out.get(train[k])
    m, hh = state(result, p)
    dm, dhh = state(design, dp) or (None, None)
    T = steam.T_ph(p, hh)
    dT = steam.T_ph(dp, dhh) if dp is not None and dhh is not None else None
    rows = [fmt(fmt.disp(m, "kg/s"), 2, fmt.disp(dm, "kg/s")) + [(fmt.unit("kg/s"), None)],
            fmt(fmt.disp(p, "Pa"), 2, fmt.disp(dp, "Pa")) + [(fmt.unit("Pa"), None)],
            fmt(fmt.disp(T, "K"), 1, fmt.disp(dT, "K")) + [(fmt.unit("K"), None)],
            fmt(fmt.disp(hh, "J/kg"), 1, fmt.disp(dhh, "J/kg")) + [(fmt.unit("J/kg"), None)]]
    for j, r in enumerate(rows):
        svg.text(x, y + 28 + 9 * j, r, 7, "middle", colour="#08519c", cls="stream")
    half = max(text_width(r, 7) for r in rows) / 2
    return x - half, x + half


def _plant_lines(model, result, units: str = "metric") -> list:
    """A line for each component of the plant around the turbine (condensers,
    auxiliaries, boiler): its declared results in display units."""
    lines = []
    for c in model.components:
        if not (c.frees_node or c.reads_totals) or c.results not in result.tables:
            continue
        table = result.tables[c.results]
        k = table.names.index(c.name)
        parts = []
        for col in table.declared:
            if not col.console or col.dtype != "f8":
                continue
            value, unit = to_display_unit([table.columns[col.name][k]], col.unit, col.display,
                                          units, col.name)
            if math.isfinite(float(value[0])):
                parts.append(f"{col.label or col.name.replace('_', ' ')} {float(value[0]):.5g}"
                             + (f" {unit}" if unit and unit != "-" else ""))
        text = f"{c.title} {c.name!r}: " if c.many else f"{c.name}: "
        for chunk in textwrap.wrap(text + ", ".join(parts), 95):
            lines.append([(chunk, None)])
    return lines


def _box(svg, model, result, design, fmt, cautions, case_name) -> None:
    """Power, heat rate (kind stated), governing and back pressure."""
    t = result.totals
    d = design.totals if design is not None else {}

    def v(key, unit, digits, scale=1.0):
        val = t.get(key)
        dv = d.get(key)
        return fmt(None if val is None else fmt.disp(val, unit) * scale, digits,
                   None if dv is None else fmt.disp(dv, unit) * scale)

    x, y = 10, 40
    lines = [
        [("generator output ", None)] + v("generator_output", "W", 2) + [(fmt.unit("W"), None)],
        [("shaft power ", None)] + v("shaft_power", "W", 2) + [(fmt.unit("W"), None)],
        [("heat added (boiler + reheater) ", None)] + v("heat_added", "W", 1)
        + [(fmt.unit("W"), None)],
        [("turbine-cycle heat rate ", None)] + v("heat_rate", "J/J", 1)
        + [(fmt.unit("J/J"), None)],
        [("  = heat added / generator output (boiler efficiency not included)", None)],
    ]
    if abs(t.get("process_steam_energy", 0.0)) > 1e-6 * max(abs(t.get("heat_added", 1.0)), 1):
        lines.append([("heat rate of power ", None)] + v("heat_rate_power", "J/J", 1)
                     + [(fmt.unit("J/J"), None)])
        lines.append([("  = heat chargeable to power (heat added less process steam energy)"
                       " / output", None)])
    nodes = result.tables["nodes"]
    p_ex = [fmt.disp(nodes.columns["pressure"][nodes.names.index(n)], "Pa", "back_pressure")
            for n in model.exhaust_nodes]
    lines.append([("throttle ", None)] + v("throttle_flow", "kg/s", 2)
                 + [(f"{fmt.unit('kg/s')}; governing: valves {result.valve_mode}, pressure "
                     f"{result.pressure_mode}", None)])
    lines.append([("back pressure " + ", ".join(f"{p:.2f}" for p in p_ex)
                   + f"{fmt.unit('Pa', 'back_pressure')}; "
                   + f"generator: {model.generator.name}; " + f"properties {result.backend}",
                   None)])
    lines += _plant_lines(model, result, fmt.units)
    if cautions:
        codes = sorted({getattr(c, "code", None) or c.get("code", "") for c in cautions})
        lines.append([("cautions (red rings): " + ", ".join(codes), "#d62728")])
    w, h = 560, 14 + 12 * len(lines)
    svg.rect(x, y - 12, w, h, "#fafafa", "#777777", rx=3)
    for k, pieces in enumerate(lines):
        svg.text(x + 8, y + 2 + 12 * k, pieces, 10)
